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

__all__ = ["evolve_pairs", "pair_flops", "pair_superoperator", "pauli_value", "probabilities"]

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


def pair_flops(local: NoisyCircuit) -> int:
    """Real FLOPs of :func:`evolve_pairs` (a complex multiply-add is 8), an upper estimate."""
    entries = 4**local.num_qubits
    multi = sum(4 ** len(item.qubits) for item in local.items if len(item.qubits) > 1)
    return 8 * entries * (multi + 4 * local.num_qubits)


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
