"""Amplitudes ``<x|C|0...0>``: one, or batches of thousands sharing one plan.

circuit → network (:mod:`tnsim.network.builders`) → simplify
(:mod:`tnsim.network.simplify`) → plan (:mod:`tnsim.plan`) → execute
(:mod:`tnsim.execution.slices`).  Batches whose bitstrings differ on few qubits
are one contraction with those legs open; wider batches are contracted
together (:mod:`tnsim.execution.batch`), the part that does not depend on the
differing bits once.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from typing import Literal, overload

import numpy as np

from tnsim.circuits.bits import Bitstring, Bitstrings, parse_bits, parse_many
from tnsim.circuits.circuit import Circuit
from tnsim.execution.batch import BatchContraction, fitted_engine
from tnsim.execution.budget import fit_plan
from tnsim.execution.options import DTypeLike, MemoryLimit, QueryOptions, resolve_options
from tnsim.execution.rate import matmul_rate
from tnsim.execution.slices import execute
from tnsim.execution.timemodel import elements_written, forecast_seconds
from tnsim.fitted import ROW_SECONDS
from tnsim.network.builders import amplitude_network
from tnsim.network.graph import TensorGraph
from tnsim.network.scaled import Scaled
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import Plan
from tnsim.queries.checks import check_circuit, check_positive

__all__ = [
    "AmplitudeRoute",
    "amplitude",
    "amplitude_route",
    "amplitudes",
    "contract_network",
    "iter_amplitudes",
]


OPEN_LIMIT = 16


"""Batches whose bitstrings differ on at most this many qubits are one contraction with those
legs open; wider batches carry the bitstrings as a batch axis."""


WIDE_OPEN_LIMIT = 22


"""Up to this many differing qubits, a batch of at least ``2**k / 4096`` bitstrings is also
one contraction with those legs open (``2**22`` complex128 outputs are 64 MiB)."""


CHUNK = 512


"""Bitstrings per batched contraction (fewer where intermediates would be large)."""


def contract_network(network: TensorGraph, options: QueryOptions | None = None) -> Scaled:
    """Simplify, plan and contract a network; return its value with its scale.

    Parameters
    ----------
    network : TensorGraph
        Any network (closed or with open labels).
    options : QueryOptions, optional
        Resolved run options (default: :func:`~tnsim.execution.options.resolve_options`
        ``()``, the enclosing ``run_options`` block's or the defaults).

    Returns
    -------
    Scaled
        ``mantissa * 2**exponent``, axes in the order of ``network.output``.
    """
    opts = resolve_options() if options is None else options
    return contract_simplified(absorb_small(network), opts)


def contract_simplified(small: TensorGraph, options: QueryOptions) -> Scaled:
    """Plan and contract a network that :func:`absorb_small` has already simplified."""
    plan = fit_plan(small, options)
    return execute(small, plan.tree, plan.sliced, memory_limit=options.memory_limit)


@overload
def amplitude(
    circuit: Circuit,
    bitstring: Bitstring,
    *,
    dtype: DTypeLike | None = ...,
    scaled: Literal[False] = ...,
    memory_limit: MemoryLimit | None = ...,
) -> complex: ...


@overload
def amplitude(
    circuit: Circuit,
    bitstring: Bitstring,
    *,
    dtype: DTypeLike | None = ...,
    scaled: Literal[True],
    memory_limit: MemoryLimit | None = ...,
) -> Scaled: ...


@overload
def amplitude(
    circuit: Circuit,
    bitstring: Bitstring,
    *,
    dtype: DTypeLike | None = ...,
    scaled: bool,
    memory_limit: MemoryLimit | None = ...,
) -> complex | Scaled: ...


def amplitude(
    circuit: Circuit,
    bitstring: Bitstring,
    *,
    dtype: DTypeLike | None = None,
    scaled: bool = False,
    memory_limit: MemoryLimit | None = None,
) -> complex | Scaled:
    """Return the amplitude ``<x|C|0...0>`` of one bitstring.

    Parameters
    ----------
    circuit : Circuit
        The circuit ``C``; every qubit starts in ``|0>``.
    bitstring : str or sequence of int
        The bitstring ``x``; character ``i`` is qubit ``i`` (leftmost is qubit 0).
    dtype : numpy dtype, optional
        ``complex128`` or ``complex64``; default the enclosing ``run_options``
        block's, else ``complex128``.
    scaled : bool
        If true, return a :class:`~tnsim.network.scaled.Scaled` value whose
        ``log10_abs()`` and ``phase()`` stay exact where the amplitude itself
        underflows (very wide circuits).
    memory_limit : int or str, optional
        Bytes, or text such as ``"4GiB"``, for live intermediates; default the
        enclosing ``run_options`` block's, else half of the available memory.
        Plans are sliced to fit (:func:`~tnsim.execution.options.resolve_options`).

    Returns
    -------
    complex or Scaled
        ``complex`` by default, :class:`~tnsim.network.scaled.Scaled` with ``scaled=True``.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> bell = Circuit(2).h(0).cx(0, 1)
    >>> round(abs(amplitude(bell, "11")) ** 2, 12)
    0.5
    >>> amplitude(bell, "01")
    0j
    >>> round(amplitude(bell, "11", scaled=True).log10_abs(), 6)  # log10(2 ** -0.5)
    -0.150515
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    parse_bits(bitstring, circuit.num_qubits)  # checked here, before anything is built
    network = amplitude_network(circuit, bitstring, dtype=opts.dtype)
    result = contract_network(network, opts)
    return result if scaled else complex(result)


def _varying(rows: np.ndarray) -> list[int]:
    return np.flatnonzero((rows != rows[:1]).any(axis=0)).tolist()


def _open_block(
    route: AmplitudeRoute, rows: np.ndarray, opts: QueryOptions
) -> tuple[np.ndarray, np.ndarray]:
    """All rows differ only on ``route.vary``: one contraction with those legs open."""
    vary, plan, network = route.vary, route.plan, route.network
    assert plan is not None and network is not None  # an "open" route has both
    result = execute(network, plan.tree, plan.sliced, memory_limit=opts.memory_limit)
    weights = 1 << np.arange(len(vary) - 1, -1, -1)
    flat = rows[:, vary].astype(np.int64) @ weights if vary else np.zeros(len(rows), np.int64)
    mantissa = np.asarray(result.mantissa, dtype=np.complex128).reshape(-1)[flat]
    return mantissa, np.full(len(rows), result.exponent, dtype=np.int64)


def iter_amplitudes(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
    chunk: int = CHUNK,
) -> Iterator[tuple[int, np.ndarray, np.ndarray]]:
    """Yield amplitudes of several bitstrings chunk by chunk, as they are computed.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    bitstrings : iterable of str or sequence of int, or numpy.ndarray
        The bitstrings (character ``i`` is qubit ``i``), or a ``(count,
        num_qubits)`` array of 0/1 (see :func:`tnsim.circuits.bits.parse_many`).
    dtype : numpy dtype, optional
        Contraction dtype (as in :func:`amplitude`).
    memory_limit : int or str, optional
        Bytes or text such as ``"4GiB"`` (as in :func:`amplitude`).
    chunk : int
        Bitstrings per batched contraction.

    Yields
    ------
    start : int
        Index of the chunk's first bitstring.
    mantissa : numpy.ndarray
        complex128 mantissas of the chunk's amplitudes.
    exponent : numpy.ndarray
        int64 powers of two: amplitude = mantissa * 2**exponent.

    Notes
    -----
    If the bitstrings differ on at most :data:`OPEN_LIMIT` qubits, one contraction
    leaves those output legs open and every amplitude is read from it.
    Otherwise the network is planned once with the differing output bits as a
    batch axis, everything that does not depend on them is contracted once and
    kept, and only the rest is redone per chunk.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> [(start, m.round(6).tolist()) for start, m, _ in iter_amplitudes(Circuit(1).h(0), ["1"])]
    [(0, [(0.707107+0j)])]
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    rows = parse_many(bitstrings, circuit.num_qubits)
    chunk = check_positive(chunk, "chunk")
    return _iter_rows(circuit, rows, opts, chunk)


def _iter_rows(
    circuit: Circuit, rows: np.ndarray, opts: QueryOptions, chunk: int
) -> Iterator[tuple[int, np.ndarray, np.ndarray]]:
    """The amplitudes of parsed ``rows`` under resolved options (see :func:`iter_amplitudes`)."""
    if len(rows) == 0:
        return
    route = _route(circuit, rows, opts, chunk)
    if route.kind == "open":
        yield (0, *_open_block(route, rows, opts))
        return
    assert route.first is not None and route.plan is not None
    if route.kind == "rows":
        yield from _row_by_row(circuit, rows, route.first, route.plan, opts)
        return
    engine, vary = route.engine, route.vary
    assert engine is not None
    for start in range(0, len(rows), engine.chunk):
        part = rows[start : start + engine.chunk][:, vary]
        result = engine.run(part)
        mantissa = np.asarray(result.mantissa, dtype=np.complex128).reshape(-1)
        yield start, mantissa, np.full(len(part), result.exponent, dtype=np.int64)


@dataclass(frozen=True)
class AmplitudeRoute:
    """How a batch of amplitudes is contracted (:func:`amplitude_route`).

    Attributes
    ----------
    kind : {"open", "batched", "rows"}
        One contraction with the differing legs open; a batched engine that
        contracts the shared part once; or one contraction per bitstring.
    vary : list of int
        Qubits on which the bitstrings differ.
    network : TensorGraph or None
        ``"open"``: the simplified network with those legs open.
    plan : Plan or None
        ``"open"``: its plan; ``"rows"`` and ``"batched"``: the plan of one
        bitstring's network ``first``.
    first : TensorGraph or None
        The simplified network of the first bitstring.
    engine : BatchContraction or None
        ``"batched"``: the engine (planned, nothing contracted yet).
    seconds : float
        ``"batched"`` and ``"rows"``: the time model's forecast of the route's
        contractions, which chose it (0 for ``"open"``).
    """

    kind: str
    vary: list[int]
    network: TensorGraph | None = None
    plan: Plan | None = None
    first: TensorGraph | None = None
    engine: BatchContraction | None = None
    seconds: float = 0.0


def amplitude_route(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
    chunk: int = CHUNK,
) -> AmplitudeRoute:
    """Plan how :func:`iter_amplitudes` contracts the amplitudes of ``bitstrings`` (nothing runs).

    The choice :func:`iter_amplitudes` makes, shared with the forecasts of
    ``tnsim cost`` (:mod:`tnsim.queries.workload`) so a forecast is of the run.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> amplitude_route(Circuit(2).h(0), ["00", "10"]).kind
    'open'
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    rows = parse_many(bitstrings, circuit.num_qubits)
    return _route(circuit, rows, opts, chunk)


def _route(circuit: Circuit, rows: np.ndarray, opts: QueryOptions, chunk: int) -> AmplitudeRoute:
    vary = _varying(rows)
    k = len(vary)
    dt = opts.dtype
    if k <= OPEN_LIMIT or (k <= WIDE_OPEN_LIMIT and len(rows) << 12 >= 1 << k):
        network = absorb_small(amplitude_network(circuit, rows[0], open_qubits=vary, dtype=dt))
        return AmplitudeRoute("open", vary, network, fit_plan(network, opts))
    first = absorb_small(amplitude_network(circuit, rows[0], dtype=dt))
    plan = fit_plan(first, opts)
    base = amplitude_network(circuit, rows[0], open_qubits=vary, dtype=dt)
    engine = fitted_engine(base, base.output, (), min(chunk, len(rows)), opts, runs=len(rows))
    runs = -(-len(rows) // engine.chunk)
    rate = matmul_rate(dt)
    fixed, per_run = engine.flops()
    batched = forecast_seconds(fixed + per_run * runs, engine.written_per_run() * runs, rate)
    # Row by row also rebuilds and simplifies the network each time (ROW_SECONDS per tensor).
    per_row = forecast_seconds(plan.flops, elements_written(plan), rate) + ROW_SECONDS * len(base)
    if batched > per_row * len(rows):
        return AmplitudeRoute("rows", vary, None, plan, first, seconds=per_row * len(rows))
    return AmplitudeRoute("batched", vary, None, plan, first, engine, seconds=batched)


def _row_by_row(
    circuit: Circuit, rows: np.ndarray, first: TensorGraph, plan: Plan, opts: QueryOptions
) -> Iterator[tuple[int, np.ndarray, np.ndarray]]:
    """One contraction per bitstring, all on the plan of the first (same network shape)."""
    for k, row in enumerate(rows):
        small = first if k == 0 else absorb_small(amplitude_network(circuit, row, dtype=opts.dtype))
        if tuple(small.indices) != tuple(plan.tree.inputs):
            plan = fit_plan(small, opts)
        result = execute(small, plan.tree, plan.sliced, memory_limit=opts.memory_limit)
        mantissa = np.asarray(result.mantissa, dtype=np.complex128).reshape(1)
        yield k, mantissa, np.array([result.exponent], dtype=np.int64)


@overload
def amplitudes(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = ...,
    scaled: Literal[False] = ...,
    memory_limit: MemoryLimit | None = ...,
) -> np.ndarray: ...


@overload
def amplitudes(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = ...,
    scaled: Literal[True],
    memory_limit: MemoryLimit | None = ...,
) -> Scaled: ...


@overload
def amplitudes(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = ...,
    scaled: bool,
    memory_limit: MemoryLimit | None = ...,
) -> np.ndarray | Scaled: ...


def amplitudes(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = None,
    scaled: bool = False,
    memory_limit: MemoryLimit | None = None,
) -> np.ndarray | Scaled:
    """Return the amplitudes ``<x|C|0...0>`` of several bitstrings.

    The batch is contracted together: if the bitstrings differ on few
    qubits, one contraction leaves those legs open; otherwise the part of the
    network that does not depend on the differing bits is contracted once.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    bitstrings : iterable of str or sequence of int, or numpy.ndarray
        Character ``i`` of each bitstring is qubit ``i``; or a ``(count,
        num_qubits)`` array of 0/1.
    dtype : numpy dtype, optional
        ``complex128`` or ``complex64`` (as in :func:`amplitude`).
    scaled : bool
        If true, return one :class:`~tnsim.network.scaled.Scaled` whose mantissa is
        the array of amplitudes (for circuits so wide they underflow).
    memory_limit : int or str, optional
        Bytes or text such as ``"4GiB"`` (as in :func:`amplitude`).

    Returns
    -------
    numpy.ndarray or Scaled
        complex128 array, one entry per bitstring (a ``Scaled`` with ``scaled=True``).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> np.round(amplitudes(Circuit(1).h(0), ["0", "1"]), 6)
    array([0.707107+0.j, 0.707107+0.j])
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    rows = parse_many(bitstrings, circuit.num_qubits)
    mantissa = np.zeros(len(rows), dtype=np.complex128)
    exponent = np.zeros(len(rows), dtype=np.int64)
    for start, m, e in _iter_rows(circuit, rows, opts, CHUNK):
        mantissa[start : start + len(m)] = m
        exponent[start : start + len(m)] = e
    if scaled:
        top = int(exponent.max()) if len(exponent) else 0
        return Scaled(np.ldexp(1.0, exponent - top) * mantissa, top)
    return np.ldexp(mantissa.real, exponent) + 1j * np.ldexp(mantissa.imag, exponent)
