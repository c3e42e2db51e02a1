"""Exact values of noisy circuits: marginals, expectation values and bitstring probabilities.

Every query builds the doubled (ket–bra) network of the noisy circuit, each
channel a superoperator tensor joining the two layers
(:func:`tnsim.network.noisy.noisy_doubled_network`), reduced to the backward
light cone of the qubits asked about (:mod:`tnsim.network.noisy`): gates and
channels outside it drop out.  Cones with equal gates and equal noise up to
renaming qubits are contracted once (:class:`NoisyTermCache`).  A cone whose
density matrix is small is contracted in time order instead (gate by gate
on its ``4**m`` entries, :mod:`tnsim.queries.timeorder`), without planning:
that is cheaper for the few-qubit cones of local observables.

Readout errors (``readout=True``, the default) are applied to what a chip
reports: marginals and bitstring probabilities become ``C @ p`` per qubit,
and a Pauli factor ``P`` measured on a qubit with confusion matrix ``C``
reports ``a I + b P`` with ``c_x = C[0, x] - C[1, x]`` the mean reported sign
for the true outcome ``x``, ``a = (c_0 + c_1) / 2`` and ``b = (c_0 - c_1) / 2``
(the qubit is measured in the eigenbasis of ``P``; common practice).
"""

from __future__ import annotations

import itertools
from collections.abc import Iterable, Mapping, Sequence

import numpy as np

from tnsim.circuits.bits import parse_many
from tnsim.circuits.circuit import Circuit
from tnsim.circuits.noise import NoiseModel, NoisyCircuit
from tnsim.errors import InputError
from tnsim.execution.batch import fitted_engine
from tnsim.execution.options import DTypeLike, MemoryLimit, QueryOptions, resolve_options
from tnsim.network.noisy import (
    NoisyIndex,
    canonical_noisy_cone,
    index_noisy,
    noisy_cone,
    noisy_doubled_network,
)
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import greedy_tree
from tnsim.queries.amplitudes import contract_simplified
from tnsim.queries.checks import check_circuit, check_qubits
from tnsim.queries.observables import Observable, parse_observable
from tnsim.queries.timeorder import pair_flops, pair_table, pair_value

__all__ = [
    "DENSE_FLOPS",
    "DENSE_QUBITS",
    "NoisyTermCache",
    "apply_confusion",
    "as_noisy",
    "noisy_distribution",
    "noisy_expectation",
    "noisy_marginal",
    "noisy_probabilities",
]

DENSE_FLOPS = 1 << 26
"""Cones whose time-order contraction needs at most this many real FLOPs skip the planner."""

DENSE_QUBITS = 10
"""Cones of at most this many qubits may be contracted in time order (``4**10`` entries)."""

OPEN_LIMIT = 16
"""Bitstrings differing on at most this many qubits are read from one contraction."""


def as_noisy(circuit: Circuit | NoisyCircuit, noise: NoiseModel | None = None) -> NoisyCircuit:
    """The noisy circuit of a query: ``noise`` applied to ``circuit``, or ``circuit`` as given.

    Examples
    --------
    >>> as_noisy(Circuit(2).h(0))
    NoisyCircuit(num_qubits=2, gates=1, channels=0, readout=0)
    """
    if isinstance(circuit, NoisyCircuit):
        if noise is not None:
            raise InputError("give either a NoisyCircuit or a Circuit with a noise model, not both")
        return circuit
    check_circuit(circuit)
    if noise is None:
        return NoisyCircuit.ideal(circuit)
    if not isinstance(noise, NoiseModel):
        raise InputError(f"noise must be a tnsim NoiseModel, got {type(noise).__name__}")
    return noise.apply(circuit)


def _dense_first(local: NoisyCircuit, small=None, open_qubits: int = 0) -> bool:
    """Whether the time-order contraction is the cheaper way (see :data:`DENSE_FLOPS`)."""
    if local.num_qubits > DENSE_QUBITS:
        return False
    flops = pair_flops(local, open_qubits)
    if flops <= DENSE_FLOPS or small is None:
        return flops <= DENSE_FLOPS
    return flops < greedy_tree(small.indices, small.output, small.size).cost().flops


def _confusions(local: NoisyCircuit, count: int, readout: bool) -> list[np.ndarray | None]:
    return [local.readout.get(q) if readout else None for q in range(count)]


def apply_confusion(table: np.ndarray, matrices: Sequence[np.ndarray | None]) -> np.ndarray:
    """Apply per-qubit confusion matrices to a ``2**t`` probability table (first qubit MSB).

    Examples
    --------
    >>> apply_confusion(np.array([1.0, 0.0]), [np.array([[0.9, 0.2], [0.1, 0.8]])]).tolist()
    [0.9, 0.1]
    """
    t = len(matrices)
    out = np.asarray(table, dtype=float).reshape((2,) * t) if t else np.asarray(table)
    for j, c in enumerate(matrices):
        if c is not None:
            out = np.moveaxis(np.tensordot(c, out, axes=(1, j)), 0, j)
    return out.reshape(-1)


def _dense_table(local: NoisyCircuit, t: int, confusion) -> np.ndarray:
    return apply_confusion(pair_table(local, t), confusion)


def _cone_table(local: NoisyCircuit, t: int, readout: bool, opts: QueryOptions) -> np.ndarray:
    """Probabilities of the outcomes of local qubits ``0..t-1`` (read, when ``readout``)."""
    confusion = _confusions(local, t, readout)
    if _dense_first(local, open_qubits=t):
        return _dense_table(local, t, confusion)
    network = noisy_doubled_network(
        local,
        open_qubits=range(t),
        confusion={q: c for q, c in enumerate(confusion) if c is not None},
        dtype=opts.dtype,
    )
    small = absorb_small(network)
    if _dense_first(local, small, open_qubits=t):
        return _dense_table(local, t, confusion)
    value = contract_simplified(small, opts).value()
    return np.clip(np.asarray(value).real.reshape(-1), 0.0, None)


def _cone_pauli(local: NoisyCircuit, letters: dict[int, str], opts: QueryOptions) -> float:
    """``Tr(P ρ)`` of a cone (readout not applied)."""
    if _dense_first(local):
        return pair_value(local, letters)
    small = absorb_small(noisy_doubled_network(local, paulis=letters, dtype=opts.dtype))
    if _dense_first(local, small):
        return pair_value(local, letters)
    return float(complex(contract_simplified(small, opts)).real)


class NoisyTermCache:
    """Expectation values of Pauli strings in a noisy circuit, one contraction per cone shape.

    Parameters
    ----------
    noisy : NoisyCircuit
        The circuit with its channels (see :func:`as_noisy`).
    dtype : numpy dtype, optional
        Contraction dtype (default: the enclosing ``run_options`` block's, else complex128).
    memory_limit : int or str, optional
        Bytes for live intermediates (default: the block's, else half the available memory).

    Attributes
    ----------
    hits, misses : int
        Pauli strings answered from the cache, and cones contracted.

    Examples
    --------
    >>> from tnsim.circuits.channels import depolarizing
    >>> noisy = NoiseModel().after_gates(depolarizing(0.1)).apply(Circuit(2).h(0).h(1))
    >>> cache = NoisyTermCache(noisy)
    >>> round(cache.value(((0, "X"),)), 12), round(cache.value(((1, "X"),)), 12), cache.misses
    (0.9, 0.9, 1)
    """

    def __init__(
        self,
        noisy: NoisyCircuit,
        dtype: DTypeLike | None = None,
        memory_limit: MemoryLimit | None = None,
    ):
        self.noisy = noisy
        self.index: NoisyIndex = index_noisy(noisy)
        self.options = resolve_options(memory_limit, dtype=dtype)
        self.values: dict[tuple, float] = {}
        self.hits = 0
        self.misses = 0

    def value(self, paulis: Sequence[tuple[int, str]]) -> float:
        """``Tr(P ρ)`` for ``paulis`` = ``((qubit, letter), ...)``, readout not applied."""
        if not paulis:
            return 1.0
        key, items, qubits = canonical_noisy_cone(self.index, paulis)
        v = self.values.get(key)
        if v is not None:
            self.hits += 1
            return v
        self.misses += 1
        local = noisy_cone(self.index, items, qubits)
        letters = {k: letter for k, (_, letter) in enumerate(paulis)}
        v = _cone_pauli(local, letters, self.options)
        self.values[key] = v
        return v

    def reported(self, paulis: Sequence[tuple[int, str]]) -> float:
        """The value a chip reports for ``paulis``: readout errors applied (module notes)."""
        plain, noisy_factors = [], []
        for q, letter in paulis:
            c = self.noisy.readout.get(q)
            if c is None:
                plain.append((q, letter))
            else:
                c0, c1 = c[0, 0] - c[1, 0], c[0, 1] - c[1, 1]
                noisy_factors.append(((q, letter), (c0 + c1) / 2, (c0 - c1) / 2))
        total = 0.0
        for choice in itertools.product((False, True), repeat=len(noisy_factors)):
            weight, chosen = 1.0, list(plain)
            for take, (factor, a, b) in zip(choice, noisy_factors):
                weight *= b if take else a
                if take:
                    chosen.append(factor)
            if weight:
                total += weight * self.value(tuple(sorted(chosen)))
        return float(total)


def noisy_expectation(
    circuit: Circuit | NoisyCircuit,
    observable: str | Mapping[int, str] | Observable,
    *,
    noise: NoiseModel | None = None,
    readout: bool = True,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> float:
    """Return ``Tr(H ρ)`` for a real-weighted Pauli sum ``H`` and the noisy circuit's state ``ρ``.

    Parameters
    ----------
    circuit : Circuit or NoisyCircuit
        The circuit (with ``noise``) or a noisy circuit.
    observable : str or mapping or Observable
        As for :func:`tnsim.queries.expectation.expectation`.
    noise : NoiseModel, optional
        Applied to ``circuit``.
    readout : bool
        Include readout errors (the value a chip reports; module notes).
    dtype, memory_limit : optional
        Contraction dtype and memory limit, as for
        :func:`tnsim.queries.expectation.expectation` (default: the enclosing
        ``run_options`` block's).

    Returns
    -------
    float

    Examples
    --------
    >>> from tnsim.circuits.channels import depolarizing
    >>> model = NoiseModel().after_gates(depolarizing(0.2), gates=["h"])
    >>> round(noisy_expectation(Circuit(1).h(0), "X0", noise=model), 12)  # Bloch vector x 0.8
    0.8
    """
    noisy = as_noisy(circuit, noise)
    obs = parse_observable(observable, noisy.num_qubits)
    cache = NoisyTermCache(noisy, dtype, memory_limit)
    get = cache.reported if readout else cache.value
    return float(sum(t.coefficient * get(t.paulis) for t in obs.terms))


def noisy_marginal(
    circuit: Circuit | NoisyCircuit,
    qubits: Sequence[int],
    *,
    noise: NoiseModel | None = None,
    readout: bool = True,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> np.ndarray:
    """Outcome probabilities of a few qubits of a noisy circuit, summed over the others.

    From the noisy doubled network reduced to the light cone of ``qubits``.

    Parameters
    ----------
    circuit : Circuit or NoisyCircuit
        The circuit (with ``noise``) or a noisy circuit.
    qubits : sequence of int
        Measured qubits; the first is the most significant bit of the result's index.
    noise : NoiseModel, optional
        Applied to ``circuit``.
    readout : bool
        Apply the qubits' readout errors (the probabilities of what is read).
    dtype, memory_limit
        As for :func:`tnsim.queries.marginals.marginal`.

    Returns
    -------
    numpy.ndarray
        ``2**len(qubits)`` float64 probabilities.

    Examples
    --------
    >>> from tnsim.circuits.channels import amplitude_damping
    >>> model = NoiseModel().after_gates(amplitude_damping(0.25)).readout([[0.9, 0.0], [0.1, 1.0]])
    >>> noisy_marginal(Circuit(1).x(0), [0], noise=model).round(6).tolist()
    [0.225, 0.775]
    >>> noisy_marginal(Circuit(1).x(0), [0], noise=model, readout=False).round(6).tolist()
    [0.25, 0.75]
    """
    noisy = as_noisy(circuit, noise)
    opts = resolve_options(memory_limit, dtype=dtype)
    qs = check_qubits(qubits, noisy.num_qubits, "marginal")
    index = index_noisy(noisy)
    _, items, local_qubits = canonical_noisy_cone(index, [(q, "P") for q in qs])
    local = noisy_cone(index, items, local_qubits)
    return _cone_table(local, len(qs), readout, opts)


def noisy_distribution(
    circuit: Circuit | NoisyCircuit,
    *,
    noise: NoiseModel | None = None,
    readout: bool = True,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
    max_qubits: int = 20,
) -> np.ndarray:
    """All ``2**n`` outcome probabilities of a narrow noisy circuit (index: qubit 0 is the MSB).

    Raises
    ------
    InputError
        If the circuit has more than ``max_qubits`` qubits.

    Examples
    --------
    >>> from tnsim.circuits.channels import bit_flip
    >>> model = NoiseModel().after_gates(bit_flip(0.1), gates=["x"])
    >>> noisy_distribution(Circuit(2).x(1), noise=model).round(6).tolist()
    [0.1, 0.9, 0.0, 0.0]
    """
    noisy = as_noisy(circuit, noise)
    if noisy.num_qubits > max_qubits:
        raise InputError(
            f"all outcome probabilities of {noisy.num_qubits} qubits are {2**noisy.num_qubits} "
            f"numbers (limit {max_qubits} qubits); ask for marginals or chosen bitstrings"
        )
    return noisy_marginal(
        noisy,
        list(range(noisy.num_qubits)),
        readout=readout,
        dtype=dtype,
        memory_limit=memory_limit,
    )


def _varying(rows: np.ndarray) -> list[int]:
    return np.flatnonzero((rows != rows[:1]).any(axis=0)).tolist()


def noisy_probabilities(
    circuit: Circuit | NoisyCircuit,
    bitstrings: Iterable[str | Sequence[int]] | np.ndarray,
    *,
    noise: NoiseModel | None = None,
    readout: bool = True,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> np.ndarray:
    """Probabilities ``<x|ρ|x>`` of chosen bitstrings (of reading them, with ``readout``).

    Through the whole doubled network (every qubit is measured; only gates
    and channels that cannot change any outcome drop out).  Bitstrings that
    differ on at most 16 qubits are read from one contraction with those legs
    open; otherwise the network is planned once and the bitstrings are a
    batch axis.

    Parameters
    ----------
    circuit : Circuit or NoisyCircuit
        The circuit (with ``noise``) or a noisy circuit.
    bitstrings : iterable of str or sequence of int, or (m, n) array
        Character ``i`` is qubit ``i``.
    noise, readout, dtype, memory_limit
        As for :func:`noisy_marginal`.

    Returns
    -------
    numpy.ndarray
        float64, one per bitstring (they underflow to 0 for very wide circuits).

    Examples
    --------
    >>> from tnsim.circuits.channels import depolarizing
    >>> model = NoiseModel().after_gates(depolarizing(0.2, 2), gates=["cx"])
    >>> noisy_probabilities(Circuit(2).h(0).cx(0, 1), ["00", "01"], noise=model).round(6)
    array([0.45, 0.05])
    """
    noisy = as_noisy(circuit, noise)
    opts = resolve_options(memory_limit, dtype=dtype)
    n = noisy.num_qubits
    if isinstance(bitstrings, np.ndarray) and bitstrings.ndim == 2:
        rows = np.asarray(bitstrings, dtype=np.uint8)
        if rows.shape[1] != n or not np.isin(rows, (0, 1)).all():
            raise InputError(f"bitstring array must be (m, {n}) of 0s and 1s, got {rows.shape}")
    else:
        rows = parse_many(bitstrings, n)
    if len(rows) == 0:
        return np.zeros(0)
    index = index_noisy(noisy)
    _, items, _ = canonical_noisy_cone(index, [(q, "P") for q in range(n)])
    local = noisy_cone(index, items, list(range(n)))
    vary = _varying(rows)
    if n <= DENSE_QUBITS and _dense_first(local, open_qubits=n):
        table = _cone_table(local, n, readout, opts)
        return table[rows.astype(np.int64) @ (1 << np.arange(n - 1, -1, -1))]
    confusion = dict(local.readout) if readout else {}
    if len(vary) <= OPEN_LIMIT:
        return _open_rows(local, rows, vary, confusion, opts)
    network = noisy_doubled_network(
        local, open_qubits=range(n), confusion=confusion, dtype=opts.dtype
    )
    engine = fitted_engine(network, network.output, (), min(64, len(rows)), opts, runs=len(rows))
    out = np.zeros(len(rows))
    for start in range(0, len(rows), engine.chunk):
        part = engine.run(rows[start : start + engine.chunk])
        out[start : start + len(part.mantissa)] = np.ldexp(
            np.asarray(part.mantissa).real.reshape(-1), part.exponent
        )
    return np.clip(out, 0.0, None)


def _open_rows(local, rows, vary, confusion, opts: QueryOptions) -> np.ndarray:
    """Rows differing only on ``vary``: one contraction with those legs open."""
    n = local.num_qubits
    first = rows[0]
    closing = {}
    for q in range(n):
        if q not in vary:
            c = confusion.get(q)
            closing[q] = c[first[q]] if c is not None else np.eye(2)[first[q]]
    network = noisy_doubled_network(
        local,
        open_qubits=vary,
        closing=closing,
        confusion={q: confusion[q] for q in vary if q in confusion},
        dtype=opts.dtype,
    )
    result = contract_simplified(absorb_small(network), opts)
    table = np.ldexp(np.asarray(result.mantissa).real.reshape(-1), result.exponent)
    weights = 1 << np.arange(len(vary) - 1, -1, -1)
    flat = rows[:, vary].astype(np.int64) @ weights if vary else np.zeros(len(rows), np.int64)
    return np.clip(table[flat], 0.0, None)
