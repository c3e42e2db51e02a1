"""Tensor networks, and the builders that turn a circuit and a query into one.

A :class:`TensorNetwork` is plain data: a list of arrays, the integer index
labels of each array's axes, the size of every label, the open (output) labels,
and a power-of-two scale ``2**exponent`` multiplying the whole network.  A
label shared by more than two arrays is a hyperedge: the network's value sums
over it once.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import opt_einsum

from .bits import parse_bits
from .circuit import Circuit, Operation
from .gates import gate_matrix

__all__ = [
    "TensorNetwork",
    "gate_tensor",
    "circuit_network",
    "amplitude_network",
    "doubled_network",
]


@dataclass
class TensorNetwork:
    """Arrays joined by shared integer index labels.

    Attributes
    ----------
    arrays : list of numpy.ndarray
        The tensors.
    indices : list of tuple of int
        ``indices[k][a]`` labels axis ``a`` of ``arrays[k]``; a label appears at
        most once per tensor.
    size : dict of int to int
        Dimension of every label.
    output : tuple of int
        Open labels, in the order of the result's axes.
    exponent : int
        The network's value is multiplied by ``2**exponent``.
    """

    arrays: list[np.ndarray]
    indices: list[tuple[int, ...]]
    size: dict[int, int]
    output: tuple[int, ...] = ()
    exponent: int = 0
    dtype: np.dtype = field(default_factory=lambda: np.dtype(np.complex128))

    def __len__(self) -> int:
        return len(self.arrays)

    def equation(self) -> str:
        """Return the network as an einsum equation using opt_einsum symbols.

        Examples
        --------
        >>> import numpy as np
        >>> tn = TensorNetwork([np.ones((2, 3)), np.ones(3)], [(0, 1), (1,)], {0: 2, 1: 3}, (0,))
        >>> tn.equation()
        'ab,b->a'
        """
        sym = opt_einsum.get_symbol
        ins = ",".join("".join(sym(i) for i in ix) for ix in self.indices)
        return f"{ins}->{''.join(sym(i) for i in self.output)}"

    def dense(self) -> np.ndarray:
        """Contract the whole network with ``numpy.einsum`` (small networks only; for tests)."""
        from .plan.tree import relabel_compact

        inputs, output = relabel_compact(self.indices, self.output)
        eq_in = ",".join("".join(opt_einsum.get_symbol(i) for i in ix) for ix in inputs)
        eq = f"{eq_in}->{''.join(opt_einsum.get_symbol(i) for i in output)}"
        value = opt_einsum.contract(eq, *self.arrays, optimize="greedy")
        return np.ldexp(value.real, self.exponent) + 1j * np.ldexp(value.imag, self.exponent)


_TENSOR_CACHE: dict[tuple, tuple[np.ndarray, tuple[bool, ...]]] = {}


def _diagonal_qubits(tensor: np.ndarray, k: int) -> tuple[bool, ...]:
    """For each of ``k`` qubits, whether the gate tensor never changes that qubit's bit."""
    flags = []
    for j in range(k):
        t = np.moveaxis(tensor, (j, k + j), (0, 1))
        flags.append(not (np.any(t[0, 1]) or np.any(t[1, 0])))
    return tuple(flags)


def gate_tensor(op: Operation) -> tuple[np.ndarray, tuple[bool, ...]]:
    """Return the reduced tensor of a gate and which of its qubits are diagonal.

    The full tensor of a k-qubit gate has axes ``(out_0..out_k-1, in_0..in_k-1)``.
    For a qubit whose bit the gate never flips (a control, or any qubit of a
    diagonal gate) the ``out`` and ``in`` axes are merged into one, so that
    qubit's wire keeps its label through the gate (a hyperedge; Boixo, Isakov,
    Smelyanskiy, Neven, arXiv:1712.05384, 2017).  The returned tensor's axes are
    the ``out`` axes of the non-diagonal qubits followed by one axis per qubit
    (its incoming wire).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> t, diag = gate_tensor(Circuit(2).cx(0, 1).ops[0])
    >>> t.shape, diag
    ((2, 2, 2), (True, False))
    """
    key = None if op.custom is not None else (op.name, op.params)
    if key is not None and key in _TENSOR_CACHE:
        return _TENSOR_CACHE[key]
    k = len(op.qubits)
    full = op.matrix().reshape((2,) * (2 * k))
    diag = _diagonal_qubits(full, k)
    sym = opt_einsum.get_symbol
    outs = [sym(j) if diag[j] else sym(k + j) for j in range(k)]
    ins = [sym(j) for j in range(k)]
    keep = [outs[j] for j in range(k) if not diag[j]] + ins
    reduced = np.einsum(f"{''.join(outs + ins)}->{''.join(keep)}", full)
    reduced.setflags(write=False)
    if key is not None:
        _TENSOR_CACHE[key] = (reduced, diag)
    return reduced, diag


def circuit_network(
    circuit: Circuit, ops: Sequence[Operation] | None = None, first_label: int = 0
) -> tuple[list[np.ndarray], list[tuple[int, ...]], list[int], list[int], int]:
    """Lay a circuit's gates out as tensors, without closing the wires.

    Parameters
    ----------
    circuit : Circuit
        Gives the number of qubits (and the gates, unless ``ops`` is given).
    ops : sequence of Operation, optional
        The gates to lay out, in order.
    first_label : int
        Labels are allocated from here upwards.

    Returns
    -------
    arrays, indices : list
        The gate tensors and their labels.
    inputs : list of int
        The label of each qubit's wire before the first gate.
    outputs : list of int
        The label of each qubit's wire after the last gate.
    next_label : int
        The first unused label.
    """
    n = circuit.num_qubits
    wire = list(range(first_label, first_label + n))
    start = list(wire)
    nxt = first_label + n
    arrays: list[np.ndarray] = []
    indices: list[tuple[int, ...]] = []
    for op in circuit.ops if ops is None else ops:
        tensor, diag = gate_tensor(op)
        outs = list(range(nxt, nxt + diag.count(False)))
        nxt += len(outs)
        ins = [wire[q] for q in op.qubits]
        new = iter(outs)
        for q, d in zip(op.qubits, diag):
            if not d:
                wire[q] = next(new)
        arrays.append(tensor)
        indices.append(tuple(outs) + tuple(ins))
    return arrays, indices, start, wire, nxt


_BASIS = np.eye(2, dtype=np.complex128)


def amplitude_network(
    circuit: Circuit,
    bits: str | Sequence[int] | None,
    *,
    open_qubits: Sequence[int] = (),
    dtype: np.dtype | type = np.complex128,
) -> TensorNetwork:
    """Build the network whose value is ``<x|C|0...0>``.

    Parameters
    ----------
    circuit : Circuit
        The circuit ``C``.
    bits : str or sequence of int or None
        The bitstring ``x`` (character i is qubit i).  Bits of ``open_qubits``
        are ignored; ``None`` is allowed when every qubit is open.
    open_qubits : sequence of int
        Qubits left open; the network's output has one axis per open qubit,
        in this order, so it holds ``2**len(open_qubits)`` amplitudes.
    dtype : numpy dtype
        ``complex64`` or ``complex128``.

    Returns
    -------
    TensorNetwork

    Examples
    --------
    >>> from tnsim import Circuit
    >>> tn = amplitude_network(Circuit(2).h(0).cx(0, 1), "11")
    >>> round(abs(complex(tn.dense())) ** 2, 12)
    0.5
    """
    n = circuit.num_qubits
    open_set = set(open_qubits)
    x = np.zeros(n, dtype=np.uint8) if bits is None else parse_bits(bits, n)
    if bits is None and len(open_set) != n:
        raise ValueError("bits may only be None when every qubit is open")
    arrays, indices, start, end, nxt = circuit_network(circuit)
    arrays = [_BASIS[0]] * n + arrays
    indices = [(label,) for label in start] + indices
    for q in range(n):
        if q not in open_set:
            arrays.append(_BASIS[x[q]])
            indices.append((end[q],))
    dt = np.dtype(dtype)
    arrays = [np.asarray(a, dtype=dt) for a in arrays]
    size = dict.fromkeys(range(nxt), 2)
    return TensorNetwork(arrays, indices, size, tuple(end[q] for q in open_qubits), 0, dt)


def doubled_network(
    circuit: Circuit,
    *,
    paulis: dict[int, str] | None = None,
    open_qubits: Sequence[int] = (),
    dtype: np.dtype | type = np.complex128,
) -> TensorNetwork:
    """Build the network of ``<0|C† M C|0>``: the circuit, its mirror image, joined.

    ``M`` is a tensor product over qubits: the Pauli matrix ``paulis[q]`` on
    those qubits, an open pair of legs merged into one output label on
    ``open_qubits`` (so the value holds the diagonal ``<0|C†|x><x|C|0>``, the
    probabilities of those qubits' outcomes), and the identity elsewhere (the
    circuit's and the mirror's wires are joined).

    Parameters
    ----------
    circuit : Circuit
        The circuit ``C`` (usually already reduced to a light cone).
    paulis : dict of int to str, optional
        ``{qubit: "X" | "Y" | "Z"}``.
    open_qubits : sequence of int
        Qubits whose outcome is kept: one output axis each, in this order.
    dtype : numpy dtype
        ``complex64`` or ``complex128``.

    Returns
    -------
    TensorNetwork

    Examples
    --------
    >>> from tnsim import Circuit
    >>> bell = Circuit(2).h(0).cx(0, 1)
    >>> np.round(doubled_network(bell, open_qubits=[0, 1]).dense().real, 6)
    array([[0.5, 0. ],
           [0. , 0.5]])
    >>> round(float(doubled_network(bell, paulis={0: "Z", 1: "Z"}).dense().real), 6)
    1.0
    """
    paulis = paulis or {}
    n = circuit.num_qubits
    arrays, indices, start, end, nxt = circuit_network(circuit)
    m_arrays, m_indices, m_start, m_end, nxt2 = circuit_network(circuit, first_label=nxt)
    join = {m_end[q]: end[q] for q in range(n) if q not in paulis}
    arrays = list(arrays) + [np.conj(a) for a in m_arrays]
    indices = list(indices) + [tuple(join.get(i, i) for i in ix) for ix in m_indices]
    for q in range(n):
        arrays += [_BASIS[0], _BASIS[0]]
        indices += [(start[q],), (m_start[q],)]
    for q, letter in paulis.items():
        arrays.append(gate_matrix(letter.lower()))
        indices.append((m_end[q], end[q]))
    dt = np.dtype(dtype)
    arrays = [np.asarray(a, dtype=dt) for a in arrays]
    used = {i for ix in indices for i in ix}
    size = dict.fromkeys(used, 2)
    return TensorNetwork(arrays, indices, size, tuple(end[q] for q in open_qubits), 0, dt)
