"""Forecasts: what contracting a circuit's amplitude network will cost, before running it.

The time forecast divides the plan's FLOPs, plus a fitted cost per element of
intermediates written (:data:`tnsim.plan.search.WRITE_FLOPS`), by this
machine's measured rate of a dense complex matrix product (the physical limit
for dense contraction); the rate is measured once (a fraction of a second), kept in memory and in a
small JSON file in the user's cache directory (``$XDG_CACHE_HOME/tnsim`` or
``~/.cache/tnsim``; an unwritable directory is tolerated).
"""

from __future__ import annotations

import json
import math
import os
import time
from collections.abc import Sequence
from dataclasses import asdict, dataclass

import numpy as np
import opt_einsum

from ..circuit import Circuit
from ..errors import InputError
from ..memory import format_bytes
from ..network import TensorNetwork, amplitude_network
from ..simplify import absorb_small
from . import Plan, _limit, make_plan
from .search import WRITE_FLOPS

__all__ = [
    "PlanReport",
    "plan",
    "plan_for_runs",
    "matmul_rate",
    "elements_written",
    "forecast_seconds",
    "format_report",
    "sparkline",
    "opt_einsum_cost",
]

_RATES: dict[str, float] = {}


def _cache_file() -> str:
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "tnsim", "matmul_rate.json")


def matmul_rate(dtype=np.complex128, *, refresh: bool = False, n: int = 384) -> float:
    """Real FLOP/s of a dense ``n``×``n`` complex matrix product on this machine (best of 3).

    A complex product of two ``n``×``n`` matrices is ``8 n³`` real FLOPs.
    Cached in memory and in ``matmul_rate.json`` under the user cache directory.

    Examples
    --------
    >>> matmul_rate() > 1e6
    True
    """
    dt = np.dtype(dtype)
    key = f"{dt.name}-{n}-{os.cpu_count()}-{np.__version__}"
    if not refresh and key in _RATES:
        return _RATES[key]
    path = _cache_file()
    stored: dict = {}
    try:
        with open(path, encoding="utf-8") as fh:
            stored = json.load(fh)
        if not refresh and isinstance(stored.get(key), (int, float)) and stored[key] > 0:
            _RATES[key] = float(stored[key])
            return _RATES[key]
    except (OSError, ValueError):
        stored = {}
    rng = np.random.default_rng(0)
    a = (rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))).astype(dt)
    b = a.T.copy()
    best = math.inf
    for _ in range(3):
        t0 = time.perf_counter()
        a @ b
        best = min(best, time.perf_counter() - t0)
    rate = 8.0 * n**3 / max(best, 1e-9)
    _RATES[key] = rate
    stored = stored if isinstance(stored, dict) else {}
    stored[key] = rate
    try:
        os.makedirs(os.path.dirname(path), exist_ok=True)
        tmp = f"{path}.{os.getpid()}.tmp"
        with open(tmp, "w", encoding="utf-8") as fh:
            json.dump(stored, fh)
        os.replace(tmp, path)
    except OSError:
        pass
    return rate


@dataclass(frozen=True)
class PlanReport:
    """What contracting one amplitude network will cost.

    Attributes
    ----------
    num_qubits, num_tensors, num_tensors_simplified : int
        Circuit width; tensors before and after simplification.
    flops : int
        Real FLOPs of the plan, all slices (complex multiply-add = 8).
    unsliced_flops : int
        Real FLOPs of the same tree without slicing.
    opt_einsum_cost : float
        opt_einsum's own cost count of the exported (unsliced) path
        (``contract_path(...).opt_cost``; a different unit from ``flops``).
    peak_bytes, unsliced_peak_bytes : int
        Bytes of live intermediates of one slice / without slicing (inputs excluded).
    width, unsliced_width : float
        log2 of the largest intermediate, in elements.
    num_slices : int
        Slices (1 if none); ``sliced_labels`` labels are sliced.
    sliced_labels : int
        Number of sliced labels.
    overhead : float
        ``flops / unsliced_flops``.
    memory_limit : int or None
        The limit planned for, in bytes.
    fits_unsliced : bool
        Whether the unsliced tree fits ``memory_limit`` (True without a limit).
    itemsize : int
        Bytes per element (16: complex128).
    written : int
        Elements of intermediates written, all slices together.
    flop_rate : float
        Measured real FLOP/s of a dense complex matrix product here.
    seconds : float
        Forecast run time ``(flops + WRITE_FLOPS * written) / flop_rate``: the
        FLOPs at the matmul rate plus a fitted cost per element written
        (:data:`tnsim.plan.search.WRITE_FLOPS`).
    planning_seconds : float
        Time spent planning.
    method : str
        Planner that produced the tree.
    profile : tuple of float
        log2 (elements) of each intermediate of one slice, in contraction order.
    """

    num_qubits: int
    num_tensors: int
    num_tensors_simplified: int
    flops: int
    unsliced_flops: int
    opt_einsum_cost: float
    peak_bytes: int
    unsliced_peak_bytes: int
    width: float
    unsliced_width: float
    num_slices: int
    sliced_labels: int
    overhead: float
    memory_limit: int | None
    fits_unsliced: bool
    itemsize: int
    written: int
    flop_rate: float
    seconds: float
    planning_seconds: float
    method: str
    profile: tuple[float, ...]

    def to_dict(self) -> dict:
        """Plain-data form (for JSON)."""
        return asdict(self)


def elements_written(p: Plan) -> int:
    """Elements of intermediates a plan writes, all slices together."""
    return sum(p.tree.intermediate_sizes(p.sliced)) * p.num_slices


def forecast_seconds(flops: int, written: int, rate: float) -> float:
    """Forecast run time: ``flops`` plus :data:`~tnsim.plan.search.WRITE_FLOPS` per element
    ``written``, at ``rate`` FLOP/s (the measured matmul rate, :func:`matmul_rate`).

    Examples
    --------
    >>> forecast_seconds(10**9, 10**6, 1e9) == 1 + WRITE_FLOPS / 1000
    True
    """
    return (flops + WRITE_FLOPS * written) / rate


def plan_for_runs(network: TensorNetwork, runs: float, *, memory_limit: int | None = None) -> Plan:
    """Plan a network that will be contracted about ``runs`` times.

    The planner's default plan is forecast (:func:`forecast_seconds` of its
    FLOPs and elements written) for ``runs`` contractions; when
    :data:`PLAN_SHARE` of that forecast exceeds :data:`MIN_PLAN_SECONDS`, the
    planner searches again for that long (at most :data:`MAX_PLAN_SECONDS`)
    and the plan with the shorter forecast is returned.

    Examples
    --------
    >>> net = amplitude_network(Circuit(2).h(0).cx(0, 1), "11")
    >>> plan_for_runs(net, 1).flops > 0
    True
    """
    rate = matmul_rate(network.dtype)

    def forecast(p: Plan) -> float:
        return runs * forecast_seconds(p.flops, elements_written(p), rate)

    first = make_plan(network, memory_limit=memory_limit)
    seconds = PLAN_SHARE * forecast(first)
    if seconds <= MIN_PLAN_SECONDS:
        return first
    budget = min(seconds, MAX_PLAN_SECONDS)
    second = make_plan(network, memory_limit=memory_limit, time_budget=budget)
    return min(first, second, key=forecast)


PLAN_SHARE = 0.1
"""Share of the forecast run time of many contractions spent searching for a better plan."""

MIN_PLAN_SECONDS = 0.2
"""Below this search time the planner's default plan is kept."""

MAX_PLAN_SECONDS = 10.0
"""Longest search of :func:`plan_for_runs`."""


def opt_einsum_cost(p: Plan) -> float:
    """opt_einsum's cost count (``opt_cost``) of a plan's tree exported as a linear path."""
    tree = p.tree
    if tree.num_leaves < 2:
        return 0.0
    sym: dict[int, str] = {}
    for ix in tree.inputs:
        for i in ix:
            sym.setdefault(i, opt_einsum.get_symbol(len(sym)))
    eq = ",".join("".join(sym[i] for i in ix) for ix in tree.inputs)
    eq += "->" + "".join(sym[i] for i in tree.output)
    shapes = [tuple(tree.size[i] for i in ix) for ix in tree.inputs]
    _, info = opt_einsum.contract_path(eq, *shapes, shapes=True, optimize=tree.linear_path())
    return float(info.opt_cost)


def plan(
    circuit: Circuit,
    bits: str | Sequence[int] | None = None,
    *,
    memory_limit: int | str | None = None,
    time_budget: float | None = None,
    seed: int = 0,
    dtype=np.complex128,
    objective: str = "time",
) -> PlanReport:
    """Plan the amplitude ``<x|C|0...0>`` of ``circuit`` and forecast its cost (no big arrays).

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    bits : str or sequence of int, optional
        The bitstring ``x`` (character i is qubit i); default all zeros.
    memory_limit : int or str, optional
        Bytes (or ``"4GiB"``) one slice's intermediates may use; the plan is sliced to fit.
    time_budget : float, optional
        Seconds of planner search (default: automatic).
    seed : int
        Seed of the planner.
    dtype : numpy dtype
        complex128 (default) or complex64, for the byte figures and the rate.
    objective : {"time", "flops"}
        What the planner minimises (see :func:`tnsim.plan.make_plan`).

    Returns
    -------
    PlanReport

    Raises
    ------
    ResourceLimitError
        If no slicing fits ``memory_limit`` (the message gives the smallest limit that would).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> r = plan(Circuit(3).h(0).cx(0, 1).cx(1, 2))
    >>> r.num_slices, r.flops >= 0
    (1, True)
    """
    if not isinstance(circuit, Circuit):
        raise InputError(f"expected a tnsim.Circuit, got {type(circuit).__name__}")
    dt = np.dtype(dtype)
    if bits is None:
        bits = "0" * circuit.num_qubits
    network = amplitude_network(circuit, bits, dtype=dt)
    small = absorb_small(network)
    p = make_plan(
        small, memory_limit=memory_limit, time_budget=time_budget, seed=seed, objective=objective
    )
    rate = matmul_rate(dt)
    unsliced_width = math.log2(max(p.tree.cost(itemsize=p.itemsize).largest, 1))
    sizes = p.tree.intermediate_sizes(p.sliced)
    written = sum(sizes) * p.num_slices
    limit = _limit(memory_limit)
    return PlanReport(
        num_qubits=circuit.num_qubits,
        num_tensors=len(network),
        num_tensors_simplified=len(small),
        flops=p.flops,
        unsliced_flops=p.unsliced_flops,
        opt_einsum_cost=opt_einsum_cost(p),
        peak_bytes=p.peak_bytes,
        unsliced_peak_bytes=p.unsliced_peak_bytes,
        width=p.width,
        unsliced_width=unsliced_width,
        num_slices=p.num_slices,
        sliced_labels=len(p.sliced),
        overhead=p.overhead,
        memory_limit=limit,
        fits_unsliced=limit is None or p.unsliced_peak_bytes <= limit,
        itemsize=p.itemsize,
        written=written,
        flop_rate=rate,
        seconds=forecast_seconds(p.flops, written, rate),
        planning_seconds=p.seconds,
        method=p.method,
        profile=tuple(math.log2(s) for s in sizes),
    )


_BARS = " ▁▂▃▄▅▆▇█"


def sparkline(values: Sequence[float], width: int = 60) -> str:
    """A one-line text chart of ``values`` (bucketed to ``width`` columns by maximum).

    Examples
    --------
    >>> sparkline([0, 1, 2, 3, 4, 5, 6, 7, 8])
    ' ▁▂▃▄▅▆▇█'
    """
    if not values:
        return ""
    vals = list(values)
    if len(vals) > width:
        edges = np.linspace(0, len(vals), width + 1).astype(int)
        vals = [max(vals[a:b]) for a, b in zip(edges[:-1], edges[1:]) if b > a]
    lo, hi = min(vals), max(vals)
    span = hi - lo or 1.0
    return "".join(_BARS[int(round((v - lo) / span * (len(_BARS) - 1)))] for v in vals)


def _fmt_seconds(s: float) -> str:
    if s < 120:
        return f"{s:.3g} s"
    if s < 7200:
        return f"{s / 60:.3g} min"
    if s < 2 * 86400:
        return f"{s / 3600:.3g} h"
    if s < 2 * 365 * 86400:
        return f"{s / 86400:.3g} days"
    return f"{s / (365.25 * 86400):.3g} years"


def format_report(r: PlanReport) -> str:
    """The report as a readable table, with a profile of intermediate sizes."""
    lg = lambda x: math.log10(x) if x > 0 else float("-inf")  # noqa: E731
    rows = [
        ("qubits", f"{r.num_qubits}"),
        ("tensors (simplified)", f"{r.num_tensors} ({r.num_tensors_simplified})"),
        ("planner", f"{r.method} ({r.planning_seconds:.2f} s)"),
        ("FLOPs (real, all slices)", f"{r.flops:.4g}  (log10 {lg(r.flops):.2f})"),
        (
            "opt_einsum cost (unsliced)",
            f"{r.opt_einsum_cost:.4g}  (log10 {lg(r.opt_einsum_cost):.2f})",
        ),
        (
            "width (log2 elements)",
            f"{r.width:.1f}" + (f"  (unsliced {r.unsliced_width:.1f})" if r.num_slices > 1 else ""),
        ),
        (
            "peak intermediates",
            f"{format_bytes(r.peak_bytes, 1)} per slice ({r.itemsize} B/element)",
        ),
        ("slices", f"{r.num_slices} ({r.sliced_labels} labels), overhead x{r.overhead:.3f}"),
        ("elements written", f"{r.written:.4g}  (log10 {lg(r.written):.2f})"),
        (
            "forecast",
            f"{_fmt_seconds(r.seconds)} at {r.flop_rate / 1e9:.3g} GFLOP/s (matmul rate), "
            f"{WRITE_FLOPS} FLOPs' time per element written",
        ),
    ]
    if r.memory_limit is not None:
        verdict = (
            "fits"
            if r.fits_unsliced
            else (
                f"unsliced tree needs {format_bytes(r.unsliced_peak_bytes, 1)}: does NOT fit; "
                f"sliced into {r.num_slices} slices it does"
            )
        )
        rows.insert(7, ("memory limit", f"{format_bytes(r.memory_limit, 1)}: {verdict}"))
    key_w = max(len(k) for k, _ in rows)
    lines = [f"{k:<{key_w}}  {v}" for k, v in rows]
    if r.profile:
        lines.append("")
        lines.append(
            f"intermediate sizes along the contraction (log2 elements, "
            f"{min(r.profile):.0f} to {max(r.profile):.0f}):"
        )
        lines.append("  " + sparkline(r.profile))
        counts: dict[int, int] = {}
        for v in r.profile:
            counts[int(v)] = counts.get(int(v), 0) + 1
        top = max(counts.values())
        lines.append("histogram (log2 elements: count):")
        for k in sorted(counts):
            bar = "#" * max(1, round(40 * counts[k] / top))
            lines.append(f"  {k:>3}  {counts[k]:>6}  {bar}")
    return "\n".join(lines)
