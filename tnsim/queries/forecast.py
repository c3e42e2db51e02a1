"""Forecasts: what contracting a circuit's amplitude network will cost, before running it.

:func:`forecast` plans the network (nothing big is allocated) and reports its
FLOPs, memory, slices and a time forecast from this machine's measured matmul
rate and the fitted cost per element written (:mod:`tnsim.execution.timemodel`).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import opt_einsum

from tnsim.circuits.bits import Bitstring, parse_bits
from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError
from tnsim.execution.budget import check_slices, kept_plan
from tnsim.execution.options import DTypeLike, MemoryLimit, resolve_options
from tnsim.execution.timemodel import forecast_run
from tnsim.network.builders import amplitude_network
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import Plan, make_plan
from tnsim.plan.search import OBJECTIVES
from tnsim.queries.checks import check_circuit
from tnsim.validate import integer, quote
from tnsim.validate import time_budget as check_time_budget

__all__ = ["ForecastReport", "forecast", "opt_einsum_cost"]


@dataclass(frozen=True)
class ForecastReport:
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
    memory_limit : int
        The limit planned for: bytes one slice's intermediates may use (the
        run's memory limit divided among local worker processes,
        :func:`tnsim.execution.options.resolve_options`).
    fits_unsliced : bool
        Whether the unsliced tree fits ``memory_limit``.
    itemsize : int
        Bytes per element (16: complex128).
    written : int
        Elements of intermediates written, all slices together, as the run
        writes them (slice-invariant subtrees once).
    flop_rate : float
        Measured real FLOP/s of a dense complex matrix product here.
    seconds : float
        Forecast run time, ``compute_seconds + fixed_seconds``
        (:func:`tnsim.execution.timemodel.forecast_run`).
    planning_seconds : float
        Time spent planning.
    method : str
        Planner that produced the tree.
    profile : tuple of float
        log2 (elements) of each intermediate of one slice, in contraction order.
    flops_run : int
        Real FLOPs the run performs: the slice-invariant subtrees once, the
        rest once per slice (at most ``flops``).
    compute_seconds : float
        The FLOPs run at the matmul rate plus a fitted cost per element
        written (:data:`tnsim.fitted.WRITE_FLOPS`).
    fixed_seconds : float
        The steps run (``steps_per_slice`` per slice) times ``step_seconds``.
    steps_per_slice : int
        Pairwise steps each slice runs (after slice-invariant reuse).
    step_seconds : float
        Fixed cost of one step measured on this machine (Python, numpy calls,
        tiny products; :func:`tnsim.execution.stepcost.step_seconds`).
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
    memory_limit: int
    fits_unsliced: bool
    itemsize: int
    written: int
    flop_rate: float
    seconds: float
    planning_seconds: float
    method: str
    profile: tuple[float, ...]
    flops_run: int = 0
    compute_seconds: float = 0.0
    fixed_seconds: float = 0.0
    steps_per_slice: int = 0
    step_seconds: float = 0.0

    def to_dict(self) -> dict:
        """Plain-data form (for JSON)."""
        return asdict(self)


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


def forecast(
    circuit: Circuit,
    bitstring: Bitstring | None = None,
    *,
    memory_limit: MemoryLimit | None = None,
    time_budget: float | None = None,
    seed: int = 0,
    dtype: DTypeLike | None = None,
    objective: str = "runtime",
) -> ForecastReport:
    """Plan the amplitude ``<x|C|0...0>`` of ``circuit`` and forecast its cost (no big arrays).

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    bitstring : str or sequence of int, optional
        The bitstring ``x`` (character i is qubit i); default all zeros.
    memory_limit : int or str, optional
        Bytes, or text such as ``"4GiB"``, as a query takes it: default the
        enclosing ``run_options`` block's, else half of the available memory;
        divided among local workers, it is what one slice may use, and the plan
        is sliced to fit -- the plan the query itself would run.
    time_budget : float, optional
        Seconds of planner search (default: automatic).
    seed : int
        Seed of the planner.
    dtype : numpy dtype, optional
        complex128 or complex64, for the byte figures and the rate; default the
        block's, else complex128.
    objective : {"runtime", "operations"}
        What the planner minimises (see :func:`tnsim.plan.driver.make_plan`).

    Returns
    -------
    ForecastReport

    Raises
    ------
    ResourceLimitError
        If no slicing fits ``memory_limit`` (the message gives the smallest limit that would).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> r = forecast(Circuit(3).h(0).cx(0, 1).cx(1, 2))
    >>> r.num_slices, r.flops >= 0
    (1, True)
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    dt = opts.dtype
    limit = opts.slice_limit
    time_budget = check_time_budget(time_budget)
    seed = integer(seed, "seed")
    if objective not in OBJECTIVES:
        raise InputError(f"objective must be one of {OBJECTIVES}, got {quote(objective)}")
    if bitstring is None:
        bitstring = "0" * circuit.num_qubits
    parse_bits(bitstring, circuit.num_qubits)  # checked here, before anything is built
    network = amplitude_network(circuit, bitstring, dtype=dt)
    small = absorb_small(network)
    budget = time_budget if time_budget is not None else opts.block.time_budget
    p = kept_plan(
        small,
        lambda: make_plan(
            small, memory_limit=limit, time_budget=budget, seed=seed, objective=objective
        ),
    )
    check_slices(p, limit)
    unsliced_width = math.log2(max(p.tree.cost(itemsize=p.itemsize).largest, 1))
    sizes = p.tree.intermediate_sizes(p.sliced)
    run = forecast_run(p.tree, p.sliced, dt, memory_limit=limit)
    return ForecastReport(
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
        fits_unsliced=p.unsliced_peak_bytes <= limit,
        itemsize=p.itemsize,
        written=run.written,
        flop_rate=run.flop_rate,
        seconds=run.seconds,
        planning_seconds=p.seconds,
        method=p.method,
        profile=tuple(math.log2(s) for s in sizes),
        flops_run=run.flops,
        compute_seconds=run.compute_seconds,
        fixed_seconds=run.fixed_seconds,
        steps_per_slice=run.steps_per_slice,
        step_seconds=run.step_seconds,
    )
