"""The public queries, each composing the pipeline stages.

circuit → network (:mod:`tnsim.network`) → simplify (:mod:`tnsim.simplify`) →
plan (:mod:`tnsim.plan`) → execute (:mod:`tnsim.execute`).  Marginals and
expectation values first cut the circuit down to a backward light cone
(:mod:`tnsim.lightcone`); batches of amplitudes are contracted together
(:mod:`tnsim.batch`).
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable, Iterator, Mapping, Sequence

import numpy as np

from .batch import fitted_engine
from .bits import parse_many
from .budget import fit_plan
from .circuit import Circuit
from .errors import InputError
from .execute import Scaled, execute
from .gates import gate_matrix
from .lightcone import CircuitIndex, canonical_cone, cone_circuit, index_circuit
from .memory import default_memory_limit
from .network import TensorNetwork, amplitude_network, doubled_network
from .observables import Observable, parse_observable
from .plan import greedy_tree
from .plan.forecast import elements_written, forecast_seconds, matmul_rate
from .simplify import absorb_small

__all__ = [
    "amplitude",
    "amplitudes",
    "iter_amplitudes",
    "contract_network",
    "marginal",
    "expectation",
    "maxcut_energy",
    "TermCache",
]

_DTYPES = {np.dtype(np.complex64), np.dtype(np.complex128)}
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


def _check_dtype(dtype) -> np.dtype:
    try:
        dt = np.dtype(dtype)
    except TypeError:
        dt = None
    if dt not in _DTYPES:
        raise InputError(f"dtype must be complex64 or complex128, got {dtype!r}")
    return dt


def _check_circuit(circuit: Circuit) -> None:
    if not isinstance(circuit, Circuit):
        raise InputError(f"expected a tnsim.Circuit, got {type(circuit).__name__}")


def contract_network(network: TensorNetwork, *, memory_limit: int | None = None) -> Scaled:
    """Simplify, plan and contract a network; return its value with its scale.

    Parameters
    ----------
    network : TensorNetwork
        Any network (closed or with open labels).
    memory_limit : int, optional
        Bytes the planner may let live intermediates use (passed to ``make_plan``).

    Returns
    -------
    Scaled
        ``mantissa * 2**exponent``, axes in the order of ``network.output``.
    """
    return _contract_simplified(absorb_small(network), memory_limit)


def _contract_simplified(small: TensorNetwork, memory_limit: int | None) -> Scaled:
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
        If true, return a :class:`~tnsim.execute.Scaled` value whose
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
    _check_circuit(circuit)
    dt = _check_dtype(dtype)
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
        ``(count, num_qubits)`` array of 0/1 (see :func:`tnsim.bits.parse_many`).
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
    dt = _check_dtype(dtype)
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
        If true, return one :class:`~tnsim.execute.Scaled` whose mantissa is
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
    _check_circuit(circuit)
    dt = _check_dtype(dtype)
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


def _check_qubit_list(qubits: Sequence[int], n: int, what: str) -> list[int]:
    if isinstance(qubits, (str, bytes)) or not isinstance(qubits, Iterable):
        raise InputError(f"{what}: give a list of qubit indices, got {qubits!r}")
    qs = list(qubits)
    if not qs:
        raise InputError(f"{what}: give at least one qubit")
    for q in qs:
        if isinstance(q, bool) or not isinstance(q, numbers.Integral) or not 0 <= q < n:
            raise InputError(
                f"{what}: qubit {q!r} is not an index of this {n}-qubit circuit (0..{n - 1})"
            )
    if len(set(qs)) != len(qs):
        raise InputError(f"{what}: qubit list {qs} repeats a qubit")
    return [int(q) for q in qs]


def marginal(
    circuit: Circuit,
    qubits: Sequence[int],
    *,
    dtype: type | np.dtype = np.complex128,
    memory_limit: int | None = None,
) -> np.ndarray:
    """Return the outcome probabilities of a few qubits, summed over all others.

    Built from the doubled network ``<0|C† (|y><y| ⊗ I) C|0>`` with the circuit
    first reduced to the backward light cone of ``qubits``: the gates outside
    it cancel against their mirror images and are never built.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    qubits : sequence of int
        The measured qubits; the first is the most significant bit of the
        result's index.
    dtype : numpy dtype
        Contraction dtype.
    memory_limit : int, optional
        Bytes for live intermediates (passed to the planner).

    Returns
    -------
    numpy.ndarray
        ``2**len(qubits)`` float64 probabilities.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> c = Circuit(3).h(0).cx(0, 1).x(2)
    >>> marginal(c, [2, 0]).round(6).tolist()
    [0.0, 0.0, 0.5, 0.5]
    """
    _check_circuit(circuit)
    dt = _check_dtype(dtype)
    qs = _check_qubit_list(qubits, circuit.num_qubits, "marginal")
    index = index_circuit(circuit)
    _, gates, local_qubits = canonical_cone(index, [(q, "P") for q in qs])
    local = cone_circuit(index, gates, len(local_qubits))
    small = absorb_small(doubled_network(local, open_qubits=range(len(qs)), dtype=dt))
    if _deep_and_narrow(local, small):
        every = all_probabilities(local, dtype=dt, memory_limit=memory_limit)
        return every.reshape(1 << len(qs), -1).sum(axis=1)
    result = _contract_simplified(small, memory_limit)
    probs = result.value().real.reshape(-1)
    return np.clip(probs, 0.0, None)


NARROW = 20
"""Light cones of at most this many qubits may be answered from all ``2**m`` amplitudes."""


def _greedy_flops(small: TensorNetwork) -> int:
    """FLOPs of opt_einsum's greedy tree for a simplified network (a quick upper estimate)."""
    return greedy_tree(small.indices, small.output, small.size).cost().flops


def all_amplitudes(
    circuit: Circuit, *, dtype: type | np.dtype = np.complex128, memory_limit: int | None = None
) -> np.ndarray:
    """Return ``<x|C|0...0>`` for all ``2**n`` bitstrings (narrow circuits only).

    One contraction with every output leg open; index ``k`` is the bitstring
    whose qubit 0 is the most significant bit of ``k``.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> (abs(all_amplitudes(Circuit(2).h(0).cx(0, 1))) ** 2).round(6).tolist()
    [0.5, 0.0, 0.0, 0.5]
    """
    n = circuit.num_qubits
    network = amplitude_network(circuit, None, open_qubits=range(n), dtype=_check_dtype(dtype))
    return contract_network(network, memory_limit=memory_limit).value().reshape(-1)


def all_probabilities(
    circuit: Circuit, *, dtype: type | np.dtype = np.complex128, memory_limit: int | None = None
) -> np.ndarray:
    """Return ``|<x|C|0...0>|²`` for all ``2**n`` bitstrings (see :func:`all_amplitudes`)."""
    return np.abs(all_amplitudes(circuit, dtype=dtype, memory_limit=memory_limit)) ** 2


def _deep_and_narrow(local: Circuit, small: TensorNetwork) -> bool:
    """Whether all ``2**m`` amplitudes of the cone cost less than greedy's plan of ``small``.

    ``small`` is the cone's doubled network, simplified (:func:`absorb_small`).

    Amplitudes in circuit order cost at most about 64 FLOPs per gate and amplitude.
    """
    m = local.num_qubits
    return m <= NARROW and _greedy_flops(small) > len(local.ops) * (64 << m)


def _pauli_expectation(psi: np.ndarray, letters: Mapping[int, str]) -> float:
    """``<psi|P|psi>`` of a state vector (qubit 0 most significant) and a Pauli string."""
    m = int(psi.size).bit_length() - 1
    state = psi.reshape((2,) * m)
    out = state
    for q, letter in letters.items():
        out = np.moveaxis(np.tensordot(gate_matrix(letter.lower()), out, axes=(1, q)), 0, q)
    return float(np.vdot(state, out).real)


class TermCache:
    """Expectation values of Pauli strings on one circuit, one contraction per cone shape.

    Each Pauli string's light cone is put in canonical form
    (:func:`tnsim.lightcone.canonical_cone`); strings whose cones are the same
    circuit up to renaming qubits share one contraction.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    dtype : numpy dtype
        Contraction dtype.
    memory_limit : int, optional
        Bytes for live intermediates (passed to the planner).

    Attributes
    ----------
    hits, misses : int
        Terms answered from the cache, and contractions run.
    """

    def __init__(self, circuit: Circuit, dtype=np.complex128, memory_limit: int | None = None):
        self.index: CircuitIndex = index_circuit(circuit)
        self.circuit = circuit
        self._psi: np.ndarray | None = None
        self.dtype = _check_dtype(dtype)
        self.memory_limit = memory_limit
        self.values: dict[tuple, float] = {}
        self.hits = 0
        self.misses = 0

    def _from_amplitudes(self, local: Circuit, letters: dict, paulis) -> float:
        """A deep, narrow cone's value from all amplitudes of the whole circuit (computed
        once, when it is itself narrow) or of the cone."""
        if self.circuit.num_qubits <= NARROW:
            if self._psi is None:
                self._psi = all_amplitudes(
                    self.circuit, dtype=self.dtype, memory_limit=self.memory_limit
                )
            return _pauli_expectation(self._psi, dict(paulis))
        psi = all_amplitudes(local, dtype=self.dtype, memory_limit=self.memory_limit)
        return _pauli_expectation(psi, letters)

    def value(self, paulis: Sequence[tuple[int, str]]) -> float:
        """Return ``<0|C† P C|0>`` for ``paulis`` = ``((qubit, letter), ...)``."""
        if not paulis:
            return 1.0
        key, gates, qubits = canonical_cone(self.index, paulis)
        v = self.values.get(key)
        if v is not None:
            self.hits += 1
            return v
        self.misses += 1
        local = cone_circuit(self.index, gates, len(qubits))
        letters = {k: letter for k, (_, letter) in enumerate(paulis)}
        small = absorb_small(doubled_network(local, paulis=letters, dtype=self.dtype))
        if _deep_and_narrow(local, small):
            v = self._from_amplitudes(local, letters, paulis)
        else:
            v = float(complex(_contract_simplified(small, self.memory_limit)).real)
        self.values[key] = v
        return v


def expectation(
    circuit: Circuit,
    observable: str | Mapping[int, str] | Observable,
    *,
    dtype: type | np.dtype = np.complex128,
    memory_limit: int | None = None,
) -> float:
    """Return ``<0|C† H C|0>`` for a real-weighted sum ``H`` of Pauli strings.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    observable : str or mapping or Observable
        Text such as ``"0.5 Z0 Z1 - 1.2 X3 + 0.7"`` (see
        :mod:`tnsim.observables`), or one Pauli string as ``{qubit: "X"|"Y"|"Z"}``.
    dtype : numpy dtype
        Contraction dtype.
    memory_limit : int, optional
        Bytes for live intermediates (passed to the planner).

    Returns
    -------
    float

    Examples
    --------
    >>> from tnsim import Circuit
    >>> bell = Circuit(2).h(0).cx(0, 1)
    >>> round(expectation(bell, "Z0 Z1 + 0.5 X0 X1 - 2 Z0"), 12)
    1.5
    >>> round(expectation(bell, {0: "Y", 1: "Y"}), 12)
    -1.0
    """
    _check_circuit(circuit)
    obs = parse_observable(observable, circuit.num_qubits)
    cache = TermCache(circuit, dtype, memory_limit)
    return float(sum(t.coefficient * cache.value(t.paulis) for t in obs.terms))


def maxcut_energy(
    graph,
    gammas: Sequence[float],
    betas: Sequence[float],
    *,
    dtype: type | np.dtype = np.complex128,
) -> float:
    """Expected cut size of the QAOA state for MaxCut on ``graph``.

    Builds :func:`tnsim.families.qaoa_maxcut` and returns
    ``sum over edges (u, v) of (1 - <Z_u Z_v>) / 2``, one light-cone network
    per distinct edge neighbourhood.

    Parameters
    ----------
    graph : networkx.Graph
        The graph (nodes are relabelled ``0..n-1`` in sorted order).
    gammas, betas : sequence of float
        The QAOA angles, one of each per layer.
    dtype : numpy dtype
        Contraction dtype.

    Returns
    -------
    float

    Examples
    --------
    >>> import networkx as nx
    >>> round(maxcut_energy(nx.cycle_graph(8), [0.0], [0.0]), 12)  # |+...+>: half of 8 edges
    4.0
    """
    from .families import qaoa_maxcut

    circuit, g = qaoa_maxcut(graph, list(gammas), list(betas))
    cache = TermCache(circuit, dtype)
    total = 0.0
    for u, v in g.edges():
        total += 0.5 * (1.0 - cache.value(((u, "Z"), (v, "Z")) if u < v else ((v, "Z"), (u, "Z"))))
    return float(total)
