"""Forecasts of whole queries: batches of amplitudes, marginals, expectation values, samples.

Each forecast plans what the query would contract, the way the query itself
does (the same route choices, networks, memory limit and planner settings), and
adds up FLOPs, elements written, memory and time without contracting
anything big: time is the time model (:func:`~tnsim.execution.timemodel.forecast_seconds`:
FLOPs plus a cost per element written, at this machine's matmul rate) plus the
fixed time of every pairwise step, measured on this machine
(:func:`~tnsim.execution.stepcost.step_seconds`).

Gate-by-gate sampling of wide circuits plans one network per layer as it goes
and its work depends on the bitstrings drawn, so its forecast is measured
instead: two short pilot runs (a few shots each) give a fixed part and a part
per shot, extrapolated linearly to the requested shots (``method`` says so).
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import asdict, dataclass

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.execution.budget import fit_plan
from tnsim.execution.options import (
    DTypeLike,
    MemoryLimit,
    QueryOptions,
    resolve_options,
    run_options,
)
from tnsim.execution.rate import matmul_rate
from tnsim.execution.stepcost import step_seconds
from tnsim.execution.steps import largest_intermediate
from tnsim.execution.timemodel import elements_written, fixed_seconds, forecast_seconds
from tnsim.fitted import DIRECT_WIDTH, NARROW, ROW_SECONDS
from tnsim.network.builders import amplitude_network
from tnsim.network.graph import TensorGraph
from tnsim.network.lightcone import canonical_cone
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import Plan
from tnsim.queries.amplitudes import amplitude_route
from tnsim.queries.checks import check_circuit, check_qubits
from tnsim.queries.expectation import TermCache
from tnsim.queries.marginals import deep_and_narrow, marginal_network
from tnsim.queries.observables import parse_observable

__all__ = [
    "QueryForecast",
    "forecast_amplitudes",
    "forecast_expectation",
    "forecast_marginal",
    "forecast_samples",
]


@dataclass(frozen=True)
class QueryForecast:
    """What a whole query will cost.

    Attributes
    ----------
    query : str
        ``"amplitudes"``, ``"marginal"``, ``"expectation"`` or ``"samples"``.
    route : str
        How it runs (e.g. ``"open legs"``, ``"batched: 16 runs of 64"``).
    contractions : int
        Contractions run.
    flops : int
        Real FLOPs of all of them (complex multiply-add = 8).
    written : int
        Elements of intermediates written.
    peak_bytes : int
        Largest bytes of intermediates of one slice of any contraction.
    num_slices : int
        Most slices of one contraction.
    memory_limit : int
        The limit planned for, in bytes (per worker process).
    flop_rate : float
        Measured real FLOP/s of a dense complex matrix product here.
    seconds : float
        Forecast run time: ``compute_seconds + fixed_seconds``.
    compute_seconds : float
        The time model's part (FLOPs and elements written at the matmul rate).
    fixed_seconds : float
        Python time of the steps (:func:`~tnsim.execution.stepcost.step_seconds`
        each) and of rebuilding networks; what a tiny plan's run is made of.
    planning_seconds : float
        Time this forecast spent planning (about what the run spends again).
    method : str
        ``"time model"``, or how a measured forecast was made.
    """

    query: str
    route: str
    contractions: int
    flops: int
    written: int
    peak_bytes: int
    num_slices: int
    memory_limit: int
    flop_rate: float
    seconds: float
    compute_seconds: float
    fixed_seconds: float
    planning_seconds: float
    method: str = "time model"

    def to_dict(self) -> dict:
        """Plain-data form (for JSON)."""
        return asdict(self)


class _Tally:
    """Adds up the plans of a query."""

    def __init__(self, options: QueryOptions):
        self.options = options
        self.dtype = options.dtype
        self.limit = options.slice_limit
        self.rate = matmul_rate(options.dtype)
        self.began = time.perf_counter()
        self.contractions = self.flops = self.written = self.peak = 0
        self.slices = 1
        self.compute = self.fixed = 0.0

    def plan(self, network: TensorGraph, times: int = 1) -> Plan:
        p = fit_plan(network, self.options)
        self.add_plan(p, times)
        return p

    def add_plan(self, p: Plan, times: int = 1) -> None:
        written = elements_written(p)
        self.add(p.flops * times, written * times, p.peak_bytes, p.num_slices, times)
        self.compute += forecast_seconds(p.flops, written, self.rate) * times
        self.fixed += fixed_seconds(p) * times

    def add(self, flops: int, written: int, peak: int, slices: int, contractions: int) -> None:
        self.flops += flops
        self.written += written
        self.peak = max(self.peak, peak)
        self.slices = max(self.slices, slices)
        self.contractions += contractions

    def report(self, query: str, route: str, method: str = "time model") -> QueryForecast:
        return QueryForecast(
            query=query,
            route=route,
            contractions=self.contractions,
            flops=self.flops,
            written=self.written,
            peak_bytes=self.peak,
            num_slices=self.slices,
            memory_limit=self.limit,
            flop_rate=self.rate,
            seconds=self.compute + self.fixed,
            compute_seconds=self.compute,
            fixed_seconds=self.fixed,
            planning_seconds=time.perf_counter() - self.began,
            method=method,
        )


def forecast_amplitudes(
    circuit: Circuit,
    rows: np.ndarray,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> QueryForecast:
    """Forecast the amplitudes of a ``(m, n)`` 0/1 batch, routed as :func:`amplitudes` runs it.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> f = forecast_amplitudes(Circuit(3).h(0).cx(0, 1), np.array([[0, 0, 0], [1, 1, 0]]))
    >>> f.route, f.contractions
    ('open legs (2 qubits differ)', 1)
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    dt = opts.dtype
    rows = np.asarray(rows, dtype=np.uint8)
    tally = _Tally(opts)
    route = amplitude_route(circuit, rows, dtype=dt, memory_limit=opts.memory_limit)
    k = len(route.vary)
    differ = "1 qubit differs" if k == 1 else f"{k} qubits differ"
    assert route.plan is not None  # every route has a plan
    if route.kind == "open":
        tally.add_plan(route.plan)
        return tally.report("amplitudes", f"open legs ({differ})")
    assert route.first is not None
    if route.kind == "rows":
        tally.add_plan(route.plan, len(rows))
        tally.fixed += ROW_SECONDS * len(route.first) * len(rows)
        return tally.report("amplitudes", f"one contraction per bitstring ({differ})")
    engine = route.engine
    assert engine is not None  # a "batched" route has its engine
    runs = -(-len(rows) // engine.chunk)
    fixed, per_run = engine.flops()
    written = engine.written_per_run() * runs
    peak = largest_intermediate(engine.steps) * dt.itemsize * 3
    tally.add(fixed + per_run * runs, written, peak, 1 << len(engine.sliced), runs)
    tally.compute += route.seconds
    n = engine.tree.num_leaves
    varying = sum(engine.varying[n:])
    tally.fixed += step_seconds(dt) * ((len(engine.steps) - varying) + varying * runs)
    return tally.report("amplitudes", f"batched: {runs} run(s) of {engine.chunk} ({differ})")


def _all_amplitudes_network(circuit: Circuit, dt: np.dtype) -> TensorGraph:
    n = circuit.num_qubits
    return absorb_small(amplitude_network(circuit, None, open_qubits=range(n), dtype=dt))


def forecast_marginal(
    circuit: Circuit,
    qubits: Sequence[int],
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> QueryForecast:
    """Forecast :func:`~tnsim.queries.marginals.marginal` of ``qubits``.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> forecast_marginal(Circuit(3).h(0).cx(0, 1), [1]).contractions
    1
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    dt = opts.dtype
    qs = check_qubits(qubits, circuit.num_qubits, "marginal")
    tally = _Tally(opts)
    local, small = marginal_network(circuit, qs, dt)
    if deep_and_narrow(local, small):
        tally.plan(_all_amplitudes_network(local, dt))
        return tally.report("marginal", f"all amplitudes of the {local.num_qubits}-qubit cone")
    tally.plan(small)
    return tally.report("marginal", f"doubled light-cone network ({local.num_qubits} qubits)")


def forecast_expectation(
    circuit: Circuit,
    observable,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> QueryForecast:
    """Forecast :func:`~tnsim.queries.expectation.expectation` (one contraction per cone shape).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> forecast_expectation(Circuit(4).h(0).h(2), "Z0 + Z2 + X1").contractions
    2
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    dt = opts.dtype
    obs = parse_observable(observable, circuit.num_qubits)
    tally = _Tally(opts)
    cache = TermCache(circuit, dtype=dt, memory_limit=opts.memory_limit)
    seen: set = set()
    whole = False
    for term in obs.terms:
        if not term.paulis:
            continue
        key, gates, qubits = canonical_cone(cache.index, term.paulis)
        if key in seen:
            continue
        seen.add(key)
        local, _, small = cache.network(term.paulis, gates, qubits)
        if not deep_and_narrow(local, small):
            tally.plan(small)
        elif circuit.num_qubits <= NARROW:
            if not whole:
                tally.plan(_all_amplitudes_network(circuit, dt))
                whole = True
        else:
            tally.plan(_all_amplitudes_network(local, dt))
    route = f"{len(obs.terms)} term(s), {len(seen)} distinct light cone(s)"
    return tally.report("expectation", route)


PILOT_SHOTS = (2, 6)
"""Shots of the two pilot runs that a forecast of gate-by-gate sampling is measured from."""

BATCH_SHOTS = 256
"""Shots gate-by-gate sampling takes through a layer together (its default ``chunk``; fewer
when memory is short, so the forecast is then optimistic)."""


def forecast_samples(
    circuit: Circuit,
    shots: int,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
    method: str = "auto",
    seed: int = 0,
) -> QueryForecast:
    """Forecast :func:`~tnsim.queries.sampling.sample` of ``shots`` samples.

    Circuits the sampler answers from all ``2**n`` amplitudes are planned;
    otherwise two pilot runs of :data:`PILOT_SHOTS` shots are timed (their
    contractions counted) and extrapolated linearly: seconds and FLOPs =
    fixed + per shot × ``shots``.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> forecast_samples(Circuit(3).h(0).cx(0, 1), 100).route
    'all 8 amplitudes at once'
    """
    from tnsim.queries.sampling import sample

    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    dt = opts.dtype
    n = circuit.num_qubits
    tally = _Tally(opts)
    if n <= DIRECT_WIDTH and method in ("auto", "marginals"):
        tally.plan(_all_amplitudes_network(circuit, dt))
        return tally.report("samples", f"all {1 << n} amplitudes at once")
    measured = []
    for pilot in PILOT_SHOTS:
        log: list = []
        began = time.perf_counter()
        with run_options(log=log, progress=False):
            sample(
                circuit, pilot, seed=seed, dtype=dt, memory_limit=opts.memory_limit, method=method
            )
        wall = time.perf_counter() - began
        work = sum(r.seconds for r in log)
        flops = sum(r.flops for r in log)
        measured.append((pilot, wall, work, flops, max((r.peak_bytes for r in log), default=0)))
    (a, wall_a, work_a, fa, pa), (b, wall_b, work_b, fb, pb) = measured
    # FLOPs grow with the shots (a fixed part + a slope; counted, so free of timing noise).
    # Shots go through each layer in batches of up to BATCH_SHOTS: a pilot's contraction
    # time is one batch's Python steps plus its FLOPs at the matmul rate; planning and
    # building the layers' networks (wall - contraction time) are paid once.
    slope_f = max(fb - fa, 0) / (b - a)
    flops = max(fb - b * slope_f, 0) + slope_f * shots
    per_batch = max(work_b - fb / tally.rate, 0.0)
    batches = -(-shots // BATCH_SHOTS)
    seconds = (wall_b - work_b) + batches * per_batch + flops / tally.rate
    name = "gate by gate" if method != "marginals" else "chain rule of marginals"
    return QueryForecast(
        query="samples",
        route=name,
        contractions=0,
        flops=int(flops),
        written=0,
        peak_bytes=max(pa, pb),
        num_slices=1,
        memory_limit=tally.limit,
        flop_rate=tally.rate,
        seconds=seconds,
        compute_seconds=seconds,
        fixed_seconds=0.0,
        planning_seconds=time.perf_counter() - tally.began,
        method=f"measured: pilot runs of {a} and {b} shots took {wall_a:.3g} s and {wall_b:.3g} s "
        f"({work_a:.3g} s and {work_b:.3g} s of contraction, {fa:.3g} and {fb:.3g} FLOPs); "
        f"FLOPs extrapolated linearly in shots; time: one pilot batch's steps per "
        f"{BATCH_SHOTS} shots plus the FLOPs at the matmul rate, planning once (rough)",
    )
