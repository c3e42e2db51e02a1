"""Doubled networks of one light cone for a batch of gate-angle variants.

A variational workload asks for the same cone at many angles: at each
binding, and with one gate's angle shifted at a time (parameter-shift
gradients).  The cone's *structure* -- which qubits each gate touches and which
of them it never flips -- does not depend on the angles, so the labels of its
doubled network ``<0|C† P C|0>`` are laid out once (:class:`DoubledLayout`) and
each evaluation only supplies gate tensors.  A gate whose tensor differs across
the batch carries a leading batch axis whose label is an output of the network
(shared by the gate's circuit and mirror copies), so one contraction returns
every variant's value.

The labels follow :func:`tnsim.network.builders.doubled_network`: a qubit a
gate never flips keeps its wire label through the gate (a hyperedge), and the
gate's reduced tensor has the ``out`` axes of its flipping qubits followed by
one ``in`` axis per qubit (:func:`reduce_gate`).  The flags come from the
structure, not from the angles of one evaluation, so a variant whose angle
happens to make a gate diagonal (``rx(0)``) still fits the layout.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.gates import gate_matrix
from tnsim.network.graph import TensorGraph

__all__ = ["DoubledLayout", "doubled_layout", "reduce_gate"]

_BASIS0 = np.array([1.0, 0.0], dtype=np.complex128)


def reduce_gate(matrices: np.ndarray, diagonal: Sequence[bool]) -> np.ndarray:
    """Reduce gate matrices to the tensor layout of :func:`~tnsim.network.builders.gate_tensor`.

    Parameters
    ----------
    matrices : numpy.ndarray
        Shape ``(2**k, 2**k)``, or ``(B, 2**k, 2**k)`` for a batch.
    diagonal : sequence of bool
        For each of the ``k`` qubits, whether the gate never flips it (its
        ``out`` and ``in`` axes are merged, keeping the diagonal).

    Returns
    -------
    numpy.ndarray
        Axes: (batch,) then ``out`` of each flipping qubit, then one ``in`` axis per qubit.

    Examples
    --------
    >>> from tnsim.circuits.gates import gate_matrix
    >>> reduce_gate(gate_matrix("cx"), (True, False)).shape
    (2, 2, 2)
    >>> reduce_gate(np.stack([gate_matrix("rzz", [t]) for t in (0.1, 0.2)]), (True, True)).shape
    (2, 2, 2)
    """
    k = len(diagonal)
    batch = matrices.ndim == 3
    lead = [2 * k] if batch else []
    full = matrices.reshape(matrices.shape[: int(batch)] + (2,) * (2 * k))
    outs = [j if diagonal[j] else k + j for j in range(k)]
    ins = list(range(k))
    keep = [outs[j] for j in range(k) if not diagonal[j]] + ins
    return np.einsum(full, lead + outs + ins, lead + keep)


@dataclass(frozen=True)
class DoubledLayout:
    """Labels of a cone's doubled network, laid out once; arrays supplied per evaluation.

    Attributes
    ----------
    num_qubits : int
        Qubits of the cone.
    diagonal : tuple of tuple of bool
        Per gate, per qubit: the gate never flips that qubit.
    ket, bra : tuple of tuple of int
        Labels of each gate's tensor in the circuit and in its mirror image.
    fixed_arrays : tuple of numpy.ndarray
        The ``|0>`` vectors and Pauli matrices closing the network.
    fixed_indices : tuple of tuple of int
        Their labels.
    batch : int
        The label of the batch axis.
    """

    num_qubits: int
    diagonal: tuple[tuple[bool, ...], ...]
    ket: tuple[tuple[int, ...], ...]
    bra: tuple[tuple[int, ...], ...]
    fixed_arrays: tuple[np.ndarray, ...]
    fixed_indices: tuple[tuple[int, ...], ...]
    batch: int

    def network(
        self, tensors: Sequence[np.ndarray], batched: Sequence[bool], dtype=np.complex128
    ) -> TensorGraph:
        """The network for one evaluation.

        Parameters
        ----------
        tensors : sequence of numpy.ndarray
            Per gate, its reduced tensor (:func:`reduce_gate`), with a leading
            batch axis where ``batched`` says so.
        batched : sequence of bool
            Which tensors carry the batch axis (all of equal length ``B``).
        dtype : numpy dtype
            Contraction dtype.

        Returns
        -------
        TensorGraph
            Output: the batch axis when any tensor is batched, else a scalar.
        """
        dt = np.dtype(dtype)
        arrays, indices = [], []
        any_batch = False
        for t, b, ket, bra in zip(tensors, batched, self.ket, self.bra):
            lead = (self.batch,) if b else ()
            any_batch |= bool(b)
            t = np.asarray(t, dtype=dt)
            arrays += [t, t.conj()]
            indices += [lead + ket, lead + bra]
        arrays += [np.asarray(a, dtype=dt) for a in self.fixed_arrays]
        indices += list(self.fixed_indices)
        size = {i: 2 for ix in indices for i in ix}
        output: tuple[int, ...] = ()
        if any_batch:
            size[self.batch] = next(len(t) for t, b in zip(tensors, batched) if b)
            output = (self.batch,)
        return TensorGraph(arrays, indices, size, output, 0, dt)


def doubled_layout(
    num_qubits: int,
    qubits: Sequence[Sequence[int]],
    diagonal: Sequence[Sequence[bool]],
    paulis: Mapping[int, str],
) -> DoubledLayout:
    """Lay out the doubled network ``<0|C† P C|0>`` of a cone from its structure.

    Parameters
    ----------
    num_qubits : int
        Qubits of the cone circuit ``C``.
    qubits : sequence of sequence of int
        Each gate's qubits, in circuit order.
    diagonal : sequence of sequence of bool
        Each gate's never-flipped flags (as :func:`reduce_gate` takes them).
    paulis : mapping of int to str
        ``{qubit: "X" | "Y" | "Z"}``: the Pauli string ``P``; other qubits are traced.

    Examples
    --------
    >>> from tnsim.circuits.gates import gate_matrix
    >>> layout = doubled_layout(2, [(0,), (0, 1)], [(False,), (True, False)], {0: "Z", 1: "Z"})
    >>> h = reduce_gate(gate_matrix("h"), (False,))
    >>> cx = reduce_gate(gate_matrix("cx"), (True, False))
    >>> round(float(layout.network([h, cx], [False, False]).dense().real), 12)  # Bell: <ZZ> = 1
    1.0
    """
    ket_wire = list(range(num_qubits))
    nxt = num_qubits
    ket: list[tuple[int, ...]] = []
    bra: list[tuple[int, ...]] = []
    m_wire = list(range(nxt, nxt + num_qubits))
    nxt += num_qubits
    for qs, diag in zip(qubits, diagonal):
        for wire, out in ((ket_wire, ket), (m_wire, bra)):
            new = []
            ins = tuple(wire[q] for q in qs)
            for q, d in zip(qs, diag):
                if not d:
                    wire[q] = nxt
                    new.append(nxt)
                    nxt += 1
            out.append(tuple(new) + ins)
    join = {m_wire[q]: ket_wire[q] for q in range(num_qubits) if q not in paulis}
    bra = [tuple(join.get(i, i) for i in ix) for ix in bra]
    fixed_arrays: list[np.ndarray] = []
    fixed_indices: list[tuple[int, ...]] = []
    for q in range(num_qubits):
        fixed_arrays += [_BASIS0, _BASIS0]
        fixed_indices += [(q,), (num_qubits + q,)]
    for q, letter in paulis.items():
        fixed_arrays.append(gate_matrix(letter.lower()))
        fixed_indices.append((m_wire[q], ket_wire[q]))
    return DoubledLayout(
        num_qubits,
        tuple(tuple(bool(d) for d in diag) for diag in diagonal),
        tuple(ket),
        tuple(bra),
        tuple(fixed_arrays),
        tuple(fixed_indices),
        nxt,
    )
