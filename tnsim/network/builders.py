"""Builders that turn a circuit and a query into a :class:`~tnsim.network.graph.TensorGraph`.

:func:`amplitude_network` closes every output wire with a bit (``<x|C|0>``);
:func:`doubled_network` joins the circuit with its mirror image
(``<0|C† M C|0>``) for marginals and expectation values.  Gate tensors merge the
wires of qubits a gate never flips (:func:`gate_tensor`).
"""

from __future__ import annotations

import functools
from collections.abc import Sequence

import numpy as np
import opt_einsum

from tnsim.circuits.bits import parse_bits
from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.gates import gate_matrix
from tnsim.network.graph import TensorGraph

__all__ = [
    "TENSOR_CACHE_SIZE",
    "amplitude_network",
    "circuit_network",
    "doubled_network",
    "gate_tensor",
]

TENSOR_CACHE_SIZE = 4096
"""Most named-gate tensors kept for reuse, least recently used dropped first (at most
about 4 MiB: a three-qubit gate's tensor is 1 KiB), so a loop that binds new angles
on every pass and runs ordinary queries keeps its memory bounded."""


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
    if op.custom is not None:
        return _reduce(op.custom, len(op.qubits))
    if op.symbolic:
        op.matrix()  # raises the error that names the unbound angles
    return _named_tensor(op.name, op.params, len(op.qubits))


@functools.lru_cache(maxsize=TENSOR_CACHE_SIZE)
def _named_tensor(name: str, params: tuple, k: int) -> tuple[np.ndarray, tuple[bool, ...]]:
    """The reduced tensor of a named gate, remembered by its name and angles."""
    return _reduce(gate_matrix(name, params), k)


def _reduce(matrix: np.ndarray, k: int) -> tuple[np.ndarray, tuple[bool, ...]]:
    """The reduced tensor of a ``k``-qubit matrix and its diagonal qubits (read-only)."""
    full = matrix.reshape((2,) * (2 * k))
    diag = _diagonal_qubits(full, k)
    sym = opt_einsum.get_symbol
    outs = [sym(j) if diag[j] else sym(k + j) for j in range(k)]
    ins = [sym(j) for j in range(k)]
    keep = [outs[j] for j in range(k) if not diag[j]] + ins
    reduced = np.einsum(f"{''.join(outs + ins)}->{''.join(keep)}", full)
    reduced.setflags(write=False)
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
) -> TensorGraph:
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
    TensorGraph

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
    return TensorGraph(arrays, indices, size, tuple(end[q] for q in open_qubits), 0, dt)


def doubled_network(
    circuit: Circuit,
    *,
    paulis: dict[int, str] | None = None,
    open_qubits: Sequence[int] = (),
    dtype: np.dtype | type = np.complex128,
) -> TensorGraph:
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
    TensorGraph

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
    m_arrays, m_indices, m_start, m_end, _ = circuit_network(circuit, first_label=nxt)
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
    return TensorGraph(arrays, indices, size, tuple(end[q] for q in open_qubits), 0, dt)
