"""Benchmarking contraction cost: sweep a circuit family, plan, optionally contract, record.

Behind ``tnsim bench``.  For each instance of a family (one per size) the
amplitude network of one seeded random bitstring is built and simplified
(:func:`tnsim.network.simplify.absorb_small`), then planned by each chosen planner:

* ``tnsim`` — :func:`tnsim.plan.driver.make_plan` (tnsim's own planner, with slicing);
* ``greedy`` — opt_einsum's greedy path;
* ``random-greedy`` — opt_einsum's ``RandomGreedy`` (best of up to 64 randomized
  greedy runs within the time budget).

Every plan is scored by tnsim's one cost model (:func:`tnsim.plan.tree.tree_cost`,
the figures of :class:`tnsim.plan.driver.Plan`), so the planners are compared like for
like.  Units: FLOPs are real floating-point operations, a complex multiply-add
counting 8, all slices included; width is log2 of the largest intermediate's
element count; peak bytes are the intermediates alive at once in one slice
(inputs not counted), for the dtype contracted.
"""

from __future__ import annotations

import math
import os
import platform
import time
import tracemalloc
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.families import FAMILIES, Family, make_family
from tnsim.errors import InputError
from tnsim.network.builders import amplitude_network
from tnsim.network.graph import TensorGraph
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import Plan, make_plan
from tnsim.plan.tree import PairTree, linear_to_ssa

__all__ = [
    "PLANNERS",
    "BenchRecord",
    "crossing_size",
    "machine_memory",
    "parse_sizes",
    "plan_with",
    "run_bench",
]


PLANNERS = ("tnsim", "greedy", "random-greedy")


"""Planner names ``tnsim bench`` accepts."""


def parse_sizes(text: str, family: Family) -> list[dict[str, int]]:
    """Parse ``--sizes`` (``"4x4,5x5"`` or ``"20,30"``) into parameter dicts.

    Examples
    --------
    >>> parse_sizes("3x4, 5x5", FAMILIES["grid"])
    [{'rows': 3, 'cols': 4}, {'rows': 5, 'cols': 5}]
    """
    items = [s.strip() for s in str(text).split(",") if s.strip()]
    if not items:
        raise InputError("--sizes is empty; give e.g. 4x4,5x5 or 20,30")
    out = []
    want = " x ".join(family.size)
    for item in items:
        parts = item.lower().split("x")
        ok = all(p.strip().isascii() and p.strip().isdigit() and len(p.strip()) <= 9 for p in parts)
        if len(parts) != len(family.size) or not ok:
            raise InputError(
                f"--sizes item {item[:40]!r}: family '{family.name}' takes sizes as {want} "
                f"(positive integers of digits 0-9{' joined by x' if len(family.size) > 1 else ''})"
            )
        values = [int(p) for p in parts]
        if min(values) < 1:
            raise InputError(f"--sizes item {item!r}: sizes must be at least 1")
        out.append(dict(zip(family.size, values)))
    return out


def _opt_einsum_plan(network: TensorGraph, optimizer, name: str, start: float) -> Plan:
    ins = tuple(tuple(ix) for ix in network.indices)
    out, size = tuple(network.output), dict(network.size)
    path: tuple = ()
    if len(ins) > 1:
        linear = optimizer([frozenset(ix) for ix in ins], frozenset(out), size)
        path = linear_to_ssa(linear, len(ins))
    tree = PairTree(ins, out, size, path)
    itemsize = int(network.dtype.itemsize)
    cost = tree.cost(itemsize=itemsize)
    return Plan(
        tree, (), flops=cost.flops, peak_bytes=cost.peak_bytes, width=cost.width,
        unsliced_flops=cost.flops, unsliced_peak_bytes=cost.peak_bytes, itemsize=itemsize,
        method=name, seconds=time.perf_counter() - start,
    )  # fmt: skip


def plan_with(
    planner: str, network: TensorGraph, *, time_budget: float = 2.0, seed: int = 0
) -> Plan:
    """Plan ``network`` with the named planner; return a plan with its cost.

    The result is a :class:`~tnsim.plan.driver.Plan` scored by tnsim's cost model.

    Examples
    --------
    >>> from tnsim.circuits.families import ghz
    >>> plan = plan_with("greedy", amplitude_network(ghz(3), "000"))
    >>> len(plan.tree.path), plan.sliced, plan.num_slices
    (8, (), 1)
    """
    start = time.perf_counter()
    if planner == "tnsim":
        return make_plan(network, time_budget=time_budget, seed=seed)
    if planner == "greedy":
        import opt_einsum.paths as oe_paths

        return _opt_einsum_plan(network, oe_paths.greedy, planner, start)
    if planner == "random-greedy":
        import opt_einsum

        opt = opt_einsum.RandomGreedy(max_repeats=64, max_time=time_budget, minimize="flops")
        return _opt_einsum_plan(network, opt, planner, start)
    raise InputError(f"unknown planner {planner!r}; choose from {', '.join(PLANNERS)}")


def machine_memory() -> int:
    """Physical memory of this machine in bytes (0 if unknown)."""
    try:
        return int(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES"))
    except (ValueError, OSError, AttributeError):
        return 0


@dataclass(frozen=True)
class BenchRecord:
    """One (instance, planner) row of a benchmark.

    Attributes
    ----------
    family, size : str
        Family name and size item (e.g. ``"5x5"``).
    num_qubits, num_gates, depth : int
        The instance (``depth``: the family's depth parameter, 0 if none).
    num_tensors : int
        Tensors in the simplified amplitude network.
    planner : str
        Planner name.
    flops, width, peak_bytes, num_slices
        The plan's cost (:class:`tnsim.plan.driver.Plan`): real FLOPs of all slices;
        log2 elements of the largest intermediate; peak bytes of live
        intermediates in one slice; number of slices.
    plan_seconds : float
        Wall time of planning.
    executed : bool
        Whether the plan was contracted (it is not above the FLOP cap).
    contract_seconds, flop_rate : float
        Wall time of the contraction and ``flops / contract_seconds`` (NaN if not run).
    traced_peak_bytes : float
        ``tracemalloc`` peak of a second, traced contraction: memory Python and
        numpy allocated on top of the network (NaN if not run).
    amplitude_real, amplitude_imag : float
        The contracted amplitude (NaN if not run).
    bits : str
        The bitstring (character i is qubit i).
    """

    family: str
    size: str
    num_qubits: int
    num_gates: int
    depth: int
    num_tensors: int
    planner: str
    flops: float
    width: float
    peak_bytes: float
    num_slices: int
    plan_seconds: float
    executed: bool
    contract_seconds: float
    flop_rate: float
    traced_peak_bytes: float
    amplitude_real: float
    amplitude_imag: float
    bits: str = ""


def _contract(network: TensorGraph, tree, sliced, trace: bool) -> tuple[complex, float, float]:
    from tnsim.execution.slices import execute

    t0 = time.perf_counter()
    value = complex(execute(network, tree, sliced))
    seconds = time.perf_counter() - t0
    peak = math.nan
    if trace:
        tracemalloc.start()
        try:
            execute(network, tree, sliced)
            peak = float(tracemalloc.get_traced_memory()[1])
        finally:
            tracemalloc.stop()
    return value, seconds, peak


def _instance(family: Family, params: dict, seed: int, dtype) -> tuple:
    circuit = make_family(family.name, **params)
    rng = np.random.default_rng(seed)
    bits = "".join(str(b) for b in rng.integers(0, 2, circuit.num_qubits))
    network = absorb_small(amplitude_network(circuit, bits, dtype=dtype))
    return circuit, network, bits


def run_bench(
    family: str,
    sizes: Sequence[dict],
    *,
    params: dict | None = None,
    planners: Sequence[str] = PLANNERS,
    execute: bool = False,
    flop_cap: float = 1e10,
    time_budget: float = 2.0,
    seed: int = 0,
    dtype=np.complex64,
    progress: Callable | None = None,
) -> list[BenchRecord]:
    """Plan (and optionally contract) one amplitude of each instance with each planner.

    Parameters
    ----------
    family : str
        A key of :data:`tnsim.circuits.families.FAMILIES`.
    sizes : sequence of dict
        Size parameters per instance (from :func:`parse_sizes`).
    params : dict, optional
        Further family parameters (the same for every instance).
    planners : sequence of str
        Names from :data:`PLANNERS`.
    execute : bool
        Contract each plan whose FLOPs do not exceed ``flop_cap``.
    flop_cap : float
        Largest FLOP count (real FLOPs) contracted.
    time_budget : float
        Seconds each searching planner may use per instance.
    seed : int
        Seed of the bitstring and of the planners.
    dtype : numpy dtype
        ``complex64`` or ``complex128``.
    progress : callable, optional
        Called with no argument after each (instance, planner) pair.

    Returns
    -------
    list of BenchRecord

    Examples
    --------
    >>> rows = run_bench("ghz", [{"n": 4}], planners=["greedy"], execute=True)
    >>> rows[0].executed, round(rows[0].amplitude_real ** 2 + rows[0].amplitude_imag ** 2, 6)
    (True, 0.0)
    """
    fam = FAMILIES.get(family)
    if fam is None:
        raise InputError(f"unknown family {family!r}; known families: {', '.join(FAMILIES)}")
    for p in planners:
        if p not in PLANNERS:
            raise InputError(f"unknown planner {p!r}; choose from {', '.join(PLANNERS)}")
    records = []
    for size in sizes:
        all_params = {**(params or {}), **size}
        circuit, network, bits = _instance(fam, all_params, seed, dtype)
        label = "x".join(str(size[k]) for k in fam.size)
        depth = int(_depth_of(fam, all_params))
        for planner in planners:
            t0 = time.perf_counter()
            plan = plan_with(planner, network, time_budget=time_budget, seed=seed)
            plan_seconds = time.perf_counter() - t0
            run = execute and plan.flops <= flop_cap
            value, seconds, traced = complex(math.nan, math.nan), math.nan, math.nan
            if run:
                value, seconds, traced = _contract(network, plan.tree, plan.sliced, trace=True)
            records.append(
                BenchRecord(
                    fam.name,
                    label,
                    circuit.num_qubits,
                    len(circuit),
                    depth,
                    len(network),
                    planner,
                    float(plan.flops),
                    float(plan.width),
                    float(plan.peak_bytes),
                    int(plan.num_slices),
                    plan_seconds,
                    run,
                    seconds,
                    plan.flops / seconds if run and seconds > 0 else math.nan,
                    traced,
                    value.real,
                    value.imag,
                    bits,
                )
            )
            if progress is not None:
                progress()
    return records


def _depth_of(family: Family, params: dict) -> int:
    """The value of the family's depth parameter in ``params`` (default if unset; 0 if none)."""
    if not family.depth:
        return 0
    default = next(p.default for p in family.params if p.name == family.depth)
    return int(params.get(family.depth, default))


def _cpu_model() -> str:
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine()


def machine_info() -> dict:
    return {
        "platform": platform.platform(),
        "processor": _cpu_model(),
        "cpu_count": os.cpu_count(),
        "memory_bytes": machine_memory(),
        "numpy": np.__version__,
    }


def crossing_size(records: Sequence[BenchRecord], planner: str, level: float) -> float | None:
    """Qubit count where a planner's FLOPs first reach ``level`` (log-linear interpolation).

    Returns ``None`` if its FLOPs stay below ``level``; the first size if they start above.

    Examples
    --------
    >>> r = [BenchRecord("g", str(n), n, 0, 0, 0, "p", f, 0, 0, 1, 0, False, *[math.nan] * 5)
    ...      for n, f in [(10, 1e8), (20, 1e12), (30, 1e16)]]
    >>> crossing_size(r, "p", 1e10)
    15.0
    """
    pts = sorted((r.num_qubits, r.flops) for r in records if r.planner == planner)
    for k, (n, f) in enumerate(pts):
        if f >= level:
            if k == 0:
                return float(n)
            n0, f0 = pts[k - 1]
            frac = (math.log10(level) - math.log10(f0)) / (math.log10(f) - math.log10(f0))
            return float(n0 + frac * (n - n0))
    return None
