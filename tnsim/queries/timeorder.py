"""Small noisy cones contracted in time order, without planning.

The doubled network of a noisy circuit on ``m`` qubits, contracted gate by
gate from the ``|0><0|`` end, holds the density matrix: ``4**m`` numbers.
Each qubit's ket and bra wires are taken together as one wire of size 4
(entry ``2 a + b`` for ket ``a``, bra ``b``); every gate is then the
superoperator ``U ⊗ U*`` and every channel its superoperator, both on these
wires.  One-qubit items are multiplied into the next multi-qubit item on
their qubit (or into the qubit's starting vector before its first one), so
only multi-qubit items touch the ``4**m`` state.  For the few-qubit light
cones of local observables this is much cheaper than planning a contraction.
Every product here is small, so it runs on one BLAS thread (see
:mod:`tnsim.execution.blas`: a multi-threaded BLAS made these products up to
~100x slower on a busy 2-core machine, measured with ``numpy.tensordot``).
"""

from __future__ import annotations

import contextlib
import functools
import weakref
from collections.abc import Mapping, Sequence

import numpy as np

from tnsim.circuits.circuit import Operation
from tnsim.circuits.gates import gate_matrix
from tnsim.circuits.noise import ChannelOp, NoisyCircuit
from tnsim.execution.blas import blas_threads, set_blas_threads

__all__ = [
    "evolve_pairs",
    "pair_flops",
    "pair_superoperator",
    "pair_table",
    "pair_value",
    "pauli_value",
    "probabilities",
]

_GATE_PAIRS: dict = {}
_CHANNEL_PAIRS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _to_pairs(s: np.ndarray, k: int) -> np.ndarray:
    """(ket.., bra..) x (ket.., bra..) superoperator -> wires of size 4, ``(4,)*(2k)``."""
    t = s.reshape((2,) * (4 * k))
    order = [a for j in range(k) for a in (j, k + j)]
    order += [2 * k + a for a in order]
    return np.ascontiguousarray(t.transpose(order)).reshape((4,) * (2 * k))


def pair_superoperator(item: Operation | ChannelOp) -> np.ndarray:
    """The superoperator of a gate or channel on size-4 wires: axes (out wires, in wires).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> s = pair_superoperator(Circuit(1).x(0).ops[0])
    >>> (s @ np.array([1, 0, 0, 0])).real.tolist()  # |0><0| -> |1><1| (entry 2*1 + 1)
    [0.0, 0.0, 0.0, 1.0]
    """
    if isinstance(item, ChannelOp):
        channel = item.channel
        found = _CHANNEL_PAIRS.get(channel)
        if found is None:
            found = _CHANNEL_PAIRS[channel] = _to_pairs(channel.superoperator(), channel.num_qubits)
        return found
    key = None if item.custom is not None else (item.name, item.params)
    found = _GATE_PAIRS.get(key) if key else None
    if found is None:
        u = item.matrix()
        found = _to_pairs(np.kron(u, u.conj()), len(item.qubits))
        if key is not None:
            _GATE_PAIRS[key] = found
    return found


_E00 = np.array([1.0, 0.0, 0.0, 0.0], dtype=np.complex128)


def _fold(items: Sequence[Operation | ChannelOp], m: int):
    """Starting vectors per qubit, and the multi-qubit steps with one-qubit items folded in.

    Steps are ``(matrix, qubits)``: a ``4**k`` square superoperator on size-4 wires.
    """
    start = [_E00] * m
    pending: list[np.ndarray | None] = [None] * m
    touched = [False] * m
    steps = []
    for item in items:
        qs = item.qubits
        k = len(qs)
        s = pair_superoperator(item).reshape(4**k, 4**k)
        if k == 1:
            q = qs[0]
            pending[q] = s if pending[q] is None else s @ pending[q]
            continue
        for j, q in enumerate(qs):
            p = pending[q]
            if p is not None:
                if touched[q]:
                    s = _after(s, p, j, k)
                else:
                    start[q] = p @ start[q]
                pending[q] = None
            touched[q] = True
        steps.append((s, qs))
    for q in range(m):
        p = pending[q]
        if p is not None:
            if touched[q]:
                steps.append((p, (q,)))
            else:
                start[q] = p @ start[q]
    return start, steps


def _after(s: np.ndarray, p: np.ndarray, j: int, k: int) -> np.ndarray:
    """``s`` preceded by the one-wire superoperator ``p`` on its input wire ``j`` of ``k``."""
    t = s.reshape(4**k, 4**j, 4, 4 ** (k - 1 - j))
    return np.einsum("oayb,yx->oaxb", t, p).reshape(s.shape)


def pair_flops(local: NoisyCircuit, open_qubits: int = 0) -> int:
    """Real FLOPs of :func:`pair_value` / :func:`pair_table` (a complex multiply-add is 8).

    Counted on their schedule: a qubit joins the state at its first
    multi-qubit item and leaves after its last one, except qubits
    ``0..open_qubits-1``, which stay to the end.  An upper estimate.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> chain = NoisyCircuit.ideal(Circuit(4).h(0).cx(0, 1).cx(1, 2).cx(2, 3))
    >>> pair_flops(chain) < 8 * 4**4 * 16 * 3  # never more than 3 qubits at once
    True
    """
    sizes: list[int] = []
    joins: list[int] = []
    leaves = [0] * (len(local.items) + 1)
    seen: set[int] = set()
    last: dict[int, int] = {}
    for item in local.items:
        if len(item.qubits) > 1:
            new = [q for q in item.qubits if q not in seen]
            seen.update(new)
            joins.append(len(new))
            for q in item.qubits:
                last[q] = len(sizes)
            sizes.append(len(item.qubits))
    for q, i in last.items():
        if q >= open_qubits:
            leaves[i] += 1
    live, flops = 0, 0
    for i, k in enumerate(sizes):
        live += joins[i]
        flops += 8 * 4**live * 4**k
        live -= leaves[i]
    live += sum(1 for q in range(open_qubits) if q not in seen)
    return flops + 8 * 4 * 4**live * open_qubits + 64 * len(local.items)


def evolve_pairs(local: NoisyCircuit) -> np.ndarray:
    """The final state of a small noisy circuit as a ``(4,)*m`` tensor (size-4 wires).

    Axis ``q`` holds qubit ``q``'s ket and bra index as ``2 a + b``; readout
    errors are not applied.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> rho = evolve_pairs(NoisyCircuit.ideal(Circuit(1).h(0)))
    >>> np.round(rho.real, 3).tolist()
    [0.5, 0.5, 0.5, 0.5]
    """
    with _one_blas_thread():
        return _evolve(local)


@contextlib.contextmanager
def _one_blas_thread():
    full = blas_threads()
    if full != 1:
        set_blas_threads(1)
    try:
        yield
    finally:
        if full != 1:
            set_blas_threads(full)


def _evolve(local: NoisyCircuit) -> np.ndarray:
    m = local.num_qubits
    start, steps = _fold(local.items, m)
    rho = functools.reduce(np.multiply.outer, start)
    order = list(range(m))  # axis i of rho holds qubit order[i]
    for s, qs in steps:
        where = [order.index(q) for q in qs]
        perm = where + [i for i in range(m) if i not in where]
        rho = (s @ rho.transpose(perm).reshape(s.shape[1], -1)).reshape((4,) * m)
        order = [order[i] for i in perm]
    return rho.transpose(np.argsort(order))


def _contract(local: NoisyCircuit, weights: Sequence[np.ndarray | None]) -> np.ndarray:
    """The final state contracted with ``weights[q]`` on each qubit (``None``: left open).

    A qubit joins the state at its first multi-qubit step and, unless open,
    is contracted right after its last one: the state holds only the qubits
    between those points (open ones stay), not all ``4**m`` entries.
    Returns the open qubits' axes in increasing qubit order.
    """
    m = local.num_qubits
    start, steps = _fold(local.items, m)
    weights = list(weights)
    multi = [i for i, (_, qs) in enumerate(steps) if len(qs) > 1]
    cut = multi[-1] + 1 if multi else 0
    kept = steps[:cut]
    for p, qs in steps[cut:]:  # one-qubit items after a qubit's last multi-qubit one
        w = weights[qs[0]]
        if w is None:
            kept.append((p, qs))
        else:
            weights[qs[0]] = w @ p  # w·(p x) = (w p)·x
    steps = kept
    last: dict[int, int] = {}
    for i, (_, qs) in enumerate(steps):
        for q in qs:
            last[q] = i
    scalar = complex(1.0)
    for q in range(m):
        w = weights[q]
        if q not in last and w is not None:
            scalar *= complex(w @ start[q])
    rho = np.ones((), dtype=np.complex128)
    order: list[int] = []  # axis i of rho holds qubit order[i]
    for i, (s, qs) in enumerate(steps):
        for q in qs:
            if q not in order:
                rho = np.multiply.outer(rho, start[q])
                order.append(q)
        where = [order.index(q) for q in qs]
        perm = where + [j for j in range(len(order)) if j not in where]
        shape = (4,) * len(order)
        rho = (s @ rho.transpose(perm).reshape(s.shape[1], -1)).reshape(shape)
        order = [order[j] for j in perm]
        for q in qs:
            w = weights[q]
            if last[q] == i and w is not None:
                at = order.index(q)
                rho = np.tensordot(w, rho, axes=([0], [at]))
                del order[at]
    for q in range(m):
        if q not in last and weights[q] is None:
            rho = np.multiply.outer(rho, start[q])
            order.append(q)
    return scalar * rho.transpose(np.argsort(order)) if order else scalar * rho


def pair_value(local: NoisyCircuit, letters: Mapping[int, str]) -> float:
    """``Tr(P ρ)`` of a small noisy circuit's final state and a Pauli string ``{qubit: letter}``.

    The same value as :func:`pauli_value` of :func:`evolve_pairs`, without
    holding all ``4**m`` entries (see :func:`pair_flops`); readout errors are
    not applied.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> bell = NoisyCircuit.ideal(Circuit(3).h(0).cx(0, 1).cx(1, 2))
    >>> round(pair_value(bell, {0: "X", 1: "X", 2: "X"}), 12), round(pair_value(bell, {2: "Z"}), 12)
    (1.0, 0.0)
    """
    weights = [
        _TRACE if letters.get(q) is None else _PAULI_PAIRS[letters[q].upper()]
        for q in range(local.num_qubits)
    ]
    with _one_blas_thread():
        return float(complex(_contract(local, weights)).real)


def pair_table(local: NoisyCircuit, count: int) -> np.ndarray:
    """Outcome probabilities of qubits ``0..count-1`` (first the MSB), the others traced out.

    As :func:`probabilities` of :func:`evolve_pairs`, without holding all
    ``4**m`` entries.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> pair_table(NoisyCircuit.ideal(Circuit(3).h(0).cx(0, 1).cx(1, 2)), 2).round(6).tolist()
    [0.5, 0.0, 0.0, 0.5]
    """
    weights = [None if q < count else _TRACE for q in range(local.num_qubits)]
    with _one_blas_thread():
        t = _contract(local, weights)
    t = t[(slice(0, 4, 3),) * count] if count else t
    return np.clip(np.asarray(t).real.reshape(-1), 0.0, None)


_TRACE = np.array([1.0, 0.0, 0.0, 1.0], dtype=np.complex128)
# Tr(P σ) = Σ_ab P[b, a] σ[a, b]: the weights of the entries 2a + b are P transposed.
_PAULI_PAIRS = {letter: gate_matrix(letter.lower()).T.reshape(4) for letter in "XYZ"}


def pauli_value(rho: np.ndarray, letters: Mapping[int, str]) -> float:
    """``Tr(P ρ)`` of a state from :func:`evolve_pairs` and a Pauli string ``{qubit: letter}``.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> rho = evolve_pairs(NoisyCircuit.ideal(Circuit(2).h(0).cx(0, 1)))
    >>> round(pauli_value(rho, {0: "X", 1: "X"}), 12), round(pauli_value(rho, {0: "Z"}), 12)
    (1.0, 0.0)
    """
    t = rho.reshape(-1)
    with _one_blas_thread():
        for q in range(rho.ndim - 1, -1, -1):
            letter = letters.get(q)
            w = _TRACE if letter is None else _PAULI_PAIRS[letter.upper()]
            t = t.reshape(-1, 4) @ w
    return float(t[0].real)


def probabilities(rho: np.ndarray, count: int) -> np.ndarray:
    """Outcome probabilities of qubits ``0..count-1`` of a state from :func:`evolve_pairs`.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> rho = evolve_pairs(NoisyCircuit.ideal(Circuit(2).h(0).cx(0, 1)))
    >>> probabilities(rho, 2).round(6).tolist()
    [0.5, 0.0, 0.0, 0.5]
    """
    t = rho.reshape(-1)
    with _one_blas_thread():
        for _ in range(rho.ndim - count):
            t = t.reshape(-1, 4) @ _TRACE
    t = t.reshape((4,) * count)[(slice(0, 4, 3),) * count] if count else t
    return np.clip(np.asarray(t).real.reshape(-1), 0.0, None)
