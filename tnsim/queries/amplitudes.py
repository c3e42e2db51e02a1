"""Amplitudes ``<x|C|0...0>``: one, or batches of thousands sharing one plan.

circuit → network (:mod:`tnsim.network.builders`) → simplify
(:mod:`tnsim.network.simplify`) → plan (:mod:`tnsim.plan`) → execute
(:mod:`tnsim.execution.slices`).  Batches whose bitstrings differ on few qubits
are one contraction with those legs open; wider batches are contracted
together (:mod:`tnsim.execution.batch`), the part that does not depend on the
differing bits once.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence

import numpy as np

from tnsim.circuits.bits import parse_many
from tnsim.circuits.circuit import Circuit
from tnsim.execution.batch import fitted_engine
from tnsim.execution.budget import fit_plan
from tnsim.execution.memory import default_memory_limit
from tnsim.execution.rate import matmul_rate
from tnsim.execution.slices import execute
from tnsim.execution.timemodel import elements_written, forecast_seconds
from tnsim.network.builders import amplitude_network
from tnsim.network.graph import TensorGraph
from tnsim.network.scaled import Scaled
from tnsim.network.simplify import absorb_small
from tnsim.queries.checks import check_circuit, check_dtype

__all__ = ["amplitude", "amplitudes", "contract_network", "iter_amplitudes"]


OPEN_LIMIT = 16


"""Batches whose bitstrings differ on at most this many qubits are one contraction with those
legs open; wider batches carry the bitstrings as a batch axis."""


WIDE_OPEN_LIMIT = 22


"""Up to this many differing qubits, a batch of at least ``2**k / 4096`` bitstrings is also
one contraction with those legs open (``2**22`` complex128 outputs are 64 MiB)."""


CHUNK = 512


"""Bitstrings per batched contraction (fewer where intermediates would be large)."""


ROW_SECONDS = 5e-5


"""Python time per tensor of rebuilding, simplifying and contracting one bitstring's
network on its own (about 50 microseconds on this project's machine; measured on 7x7 grid
circuits, order of magnitude)."""


def contract_network(network: TensorGraph, *, memory_limit: int | None = None) -> Scaled:
    """Simplify, plan and contract a network; return its value with its scale.

    Parameters
    ----------
    network : TensorGraph
        Any network (closed or with open labels).
    memory_limit : int, optional
        Bytes the planner may let live intermediates use (passed to ``make_plan``).

    Returns
    -------
    Scaled
        ``mantissa * 2**exponent``, axes in the order of ``network.output``.
    """
    return contract_simplified(absorb_small(network), memory_limit)


def contract_simplified(small: TensorGraph, memory_limit: int | None) -> Scaled:
    """Plan and contract a network that :func:`absorb_small` has already simplified."""
    plan = fit_plan(small, memory_limit)
    return execute(small, plan.tree, plan.sliced, memory_limit=memory_limit)


def amplitude(
    circuit: Circuit,
    bits: str | Sequence[int],
    *,
    dtype: type | np.dtype = np.complex128,
    scaled: bool = False,
    memory_limit: int | None = None,
) -> complex | Scaled:
    """Return the amplitude ``<x|C|0...0>`` of one bitstring.

    Parameters
    ----------
    circuit : Circuit
        The circuit ``C``; every qubit starts in ``|0>``.
    bits : str or sequence of int
        The bitstring ``x``; character ``i`` is qubit ``i`` (leftmost is qubit 0).
    dtype : numpy dtype
        ``complex128`` (default) or ``complex64``.
    scaled : bool
        If true, return a :class:`~tnsim.network.scaled.Scaled` value whose
        ``log10_abs()`` and ``phase()`` stay exact where the amplitude itself
        underflows (very wide circuits).
    memory_limit : int, optional
        Bytes for live intermediates (passed to the planner).

    Returns
    -------
    complex or Scaled

    Examples
    --------
    >>> from tnsim import Circuit
    >>> bell = Circuit(2).h(0).cx(0, 1)
    >>> round(abs(amplitude(bell, "11")) ** 2, 12)
    0.5
    >>> amplitude(bell, "01")
    0j
    """
    check_circuit(circuit)
    dt = check_dtype(dtype)
    network = amplitude_network(circuit, bits, dtype=dt)
    result = contract_network(network, memory_limit=memory_limit)
    return result if scaled else complex(result)


def _varying(rows: np.ndarray) -> list[int]:
    return np.flatnonzero((rows != rows[:1]).any(axis=0)).tolist()


def _open_block(circuit, rows, vary, dt, memory_limit) -> tuple[np.ndarray, np.ndarray]:
    """All rows differ only on ``vary``: one contraction with those legs open."""
    network = amplitude_network(circuit, rows[0], open_qubits=vary, dtype=dt)
    result = contract_network(network, memory_limit=memory_limit)
    weights = 1 << np.arange(len(vary) - 1, -1, -1)
    flat = rows[:, vary].astype(np.int64) @ weights if vary else np.zeros(len(rows), np.int64)
    mantissa = np.asarray(result.mantissa, dtype=np.complex128).reshape(-1)[flat]
    return mantissa, np.full(len(rows), result.exponent, dtype=np.int64)


def iter_amplitudes(
    circuit: Circuit,
    rows: np.ndarray,
    *,
    dtype: type | np.dtype = np.complex128,
    memory_limit: int | None = None,
    chunk: int = CHUNK,
) -> Iterator[tuple[int, np.ndarray, np.ndarray]]:
    """Yield amplitudes of parsed bitstrings chunk by chunk, as they are computed.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    rows : numpy.ndarray
        ``(count, num_qubits)`` array of 0/1 (see :func:`tnsim.circuits.bits.parse_many`).
    dtype : numpy dtype
        Contraction dtype.
    memory_limit : int, optional
        Bytes for live intermediates (passed to the planner).
    chunk : int
        Bitstrings per batched contraction.

    Yields
    ------
    start : int
        Index of the chunk's first row.
    mantissa : numpy.ndarray
        complex128 mantissas of the chunk's amplitudes.
    exponent : numpy.ndarray
        int64 powers of two: amplitude = mantissa * 2**exponent.

    Notes
    -----
    If the rows differ on at most :data:`OPEN_LIMIT` qubits, one contraction
    leaves those output legs open and every amplitude is read from it.
    Otherwise the network is planned once with the differing output bits as a
    batch axis, everything that does not depend on them is contracted once and
    kept, and only the rest is redone per chunk.
    """
    dt = check_dtype(dtype)
    rows = np.asarray(rows, dtype=np.uint8)
    if len(rows) == 0:
        return
    vary = _varying(rows)
    k = len(vary)
    if k <= OPEN_LIMIT or (k <= WIDE_OPEN_LIMIT and len(rows) << 12 >= 1 << k):
        yield (0, *_open_block(circuit, rows, vary, dt, memory_limit))
        return
    first = absorb_small(amplitude_network(circuit, rows[0], dtype=dt))
    plan = fit_plan(first, memory_limit)
    base = amplitude_network(circuit, rows[0], open_qubits=vary, dtype=dt)
    limit = memory_limit or default_memory_limit()
    engine = fitted_engine(base, base.output, (), min(chunk, len(rows)), limit, runs=len(rows))
    chunk = engine.chunk
    runs = -(-len(rows) // chunk)
    rate = matmul_rate(dt)
    fixed, per_run = engine.flops()
    batched = forecast_seconds(fixed + per_run * runs, engine.written_per_run() * runs, rate)
    # Row by row also rebuilds and simplifies the network each time (ROW_SECONDS per tensor).
    per_row = forecast_seconds(plan.flops, elements_written(plan), rate) + ROW_SECONDS * len(base)
    if batched > per_row * len(rows):
        yield from _row_by_row(circuit, rows, dt, first, plan, memory_limit)
        return
    for start in range(0, len(rows), chunk):
        part = rows[start : start + chunk][:, vary]
        result = engine.run(part)
        mantissa = np.asarray(result.mantissa, dtype=np.complex128).reshape(-1)
        yield start, mantissa, np.full(len(part), result.exponent, dtype=np.int64)


def _row_by_row(
    circuit, rows, dt, first, plan, memory_limit
) -> Iterator[tuple[int, np.ndarray, np.ndarray]]:
    """One contraction per bitstring, all on the plan of the first (same network shape)."""
    for k, row in enumerate(rows):
        small = first if k == 0 else absorb_small(amplitude_network(circuit, row, dtype=dt))
        if tuple(small.indices) != tuple(plan.tree.inputs):
            plan = fit_plan(small, memory_limit)
        result = execute(small, plan.tree, plan.sliced)
        mantissa = np.asarray(result.mantissa, dtype=np.complex128).reshape(1)
        yield k, mantissa, np.array([result.exponent], dtype=np.int64)


def amplitudes(
    circuit: Circuit,
    bitstrings: Iterable[str | Sequence[int]],
    *,
    dtype: type | np.dtype = np.complex128,
    scaled: bool = False,
    memory_limit: int | None = None,
) -> np.ndarray | Scaled:
    """Return the amplitudes ``<x|C|0...0>`` of several bitstrings.

    The batch is contracted together: if the bitstrings differ on few
    qubits, one contraction leaves those legs open; otherwise the part of the
    network that does not depend on the differing bits is contracted once.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    bitstrings : iterable of str or sequence of int
        Character ``i`` of each bitstring is qubit ``i``.
    dtype : numpy dtype
        ``complex128`` (default) or ``complex64``.
    scaled : bool
        If true, return one :class:`~tnsim.network.scaled.Scaled` whose mantissa is
        the array of amplitudes (for circuits so wide they underflow).
    memory_limit : int, optional
        Bytes for live intermediates (passed to the planner).

    Returns
    -------
    numpy.ndarray or Scaled
        complex128 array, one entry per bitstring.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> np.round(amplitudes(Circuit(1).h(0), ["0", "1"]), 6)
    array([0.707107+0.j, 0.707107+0.j])
    """
    check_circuit(circuit)
    dt = check_dtype(dtype)
    rows = parse_many(bitstrings, circuit.num_qubits)
    mantissa = np.zeros(len(rows), dtype=np.complex128)
    exponent = np.zeros(len(rows), dtype=np.int64)
    for start, m, e in iter_amplitudes(circuit, rows, dtype=dt, memory_limit=memory_limit):
        mantissa[start : start + len(m)] = m
        exponent[start : start + len(m)] = e
    if scaled:
        top = int(exponent.max()) if len(exponent) else 0
        return Scaled(np.ldexp(1.0, exponent - top) * mantissa, top)
    return np.ldexp(mantissa.real, exponent) + 1j * np.ldexp(mantissa.imag, exponent)
