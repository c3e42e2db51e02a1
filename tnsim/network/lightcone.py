"""Backward light cones of a circuit, and a canonical form of the gates inside one.

For a question about a few qubits at the end of a circuit (a marginal, the
expectation value of a Pauli string), the value is ``<0|C† M C|0>`` with ``M``
acting on those qubits only.  Walking backwards from ``M``, a gate cancels
against its mirror image ``g† ... g`` when it commutes with everything kept
after it; only the gates that do not are built (the backward light cone).

A gate ``g`` commutes with what is kept after it when, on every qubit it shares
with the cone, both ``g`` and everything after it never flip that qubit's bit
(``g`` is diagonal there — a control, a ``cz``, an ``rzz`` — and so is
everything kept after it).  Writing such operators as sums over the shared
qubits' basis states shows they commute (common practice).  For QAOA this
leaves the familiar p = 1 cone of an edge: its two nodes and their neighbours
(Farhi, Goldstone, Gutmann, arXiv:1411.4028, 2014).

Each kept gate gets a *layer*: 1 + the largest layer of the kept gates after it
that it does not commute with.  Gates of one layer commute, so the cone's
gates listed by decreasing layer form a circuit equal to the cone; sorting the
gates of each layer by a label-independent key and numbering qubits in order
of first use gives a canonical form: two terms of an observable whose cones
are the same circuit up to renaming qubits usually get the same key, so their
values are computed once.
"""

from __future__ import annotations

import heapq
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.parameters import probe_values
from tnsim.network.builders import gate_tensor

__all__ = ["CircuitIndex", "canonical_cone", "cone_circuit", "index_circuit", "light_cone"]

_BIG = 1 << 60


def _second(pair: tuple[int, int]) -> int:
    return pair[1]


@dataclass(frozen=True)
class CircuitIndex:
    """Per-circuit tables that light-cone walks read (built once per circuit).

    Attributes
    ----------
    num_qubits : int
        Width of the circuit.
    ops : list of Operation
        The gates, in order.
    qubits : list of tuple of int
        ``qubits[g]``: the qubits of gate ``g``.
    diagonal : list of tuple of bool
        ``diagonal[g][j]``: gate ``g`` never flips the bit of its ``j``-th qubit.
    signature : list of int
        Equal for gates with equal name, parameters and matrix (for named angles:
        equal expressions, so equal for every binding).
    symmetric : list of bool
        Two-qubit gates whose matrix is unchanged by swapping the qubits.
    on_qubit : list of list of int
        ``on_qubit[q]``: the gates acting on qubit ``q``, in order.
    position : list of tuple of int
        ``position[g][j]``: where gate ``g`` sits in ``on_qubit`` of its ``j``-th qubit.
    links : list of tuple of (int, bool, int)
        ``links[g][j]``: the ``j``-th qubit of gate ``g``, whether ``g`` is diagonal
        there, and the previous gate on that qubit (-1 if none).
    """

    num_qubits: int
    ops: list[Operation]
    qubits: list[tuple[int, ...]]
    diagonal: list[tuple[bool, ...]]
    signature: list[int]
    symmetric: list[bool]
    on_qubit: list[list[int]]
    position: list[tuple[int, ...]]
    links: list[tuple[tuple[int, bool, int], ...]]


_SWAP = np.eye(4)[[0, 2, 1, 3]]


def _gate_facts(op: Operation, table: dict) -> tuple[int, tuple[bool, ...], bool]:
    """Signature id, diagonal flags and symmetry of one gate (memoised in ``table``)."""
    key = (op.name, op.params) if op.custom is None else (op.name, op.custom.tobytes())
    facts = table.get(key)
    if facts is None:
        # A gate with named angles: facts that hold at two generic angles (probe_values).
        probes = [op.bound(probe_values(k)) for k in (1, 2)] if op.symbolic else [op]
        diag = tuple(all(f) for f in zip(*(gate_tensor(p)[1] for p in probes)))
        sym = len(op.qubits) == 2 and all(
            np.allclose(_SWAP @ p.matrix() @ _SWAP, p.matrix(), atol=1e-12) for p in probes
        )
        facts = (len(table), diag, sym)
        table[key] = facts
    return facts


def index_circuit(circuit: Circuit) -> CircuitIndex:
    """Build the light-cone tables of ``circuit`` (linear in its number of gates).

    Examples
    --------
    >>> idx = index_circuit(Circuit(2).h(0).cx(0, 1))
    >>> idx.on_qubit, idx.diagonal[1]
    ([[0, 1], [1]], (True, False))
    """
    table: dict = {}
    on_qubit: list[list[int]] = [[] for _ in range(circuit.num_qubits)]
    qubits, diagonal, signature, symmetric, position, links = [], [], [], [], [], []
    for g, op in enumerate(circuit.ops):
        sig, diag, sym = _gate_facts(op, table)
        qubits.append(op.qubits)
        diagonal.append(diag)
        signature.append(sig)
        symmetric.append(sym)
        pos, link = [], []
        for q, d in zip(op.qubits, diag):
            lst = on_qubit[q]
            pos.append(len(lst))
            link.append((q, d, lst[-1] if lst else -1))
            lst.append(g)
        position.append(tuple(pos))
        links.append(tuple(link))
    return CircuitIndex(
        circuit.num_qubits,
        list(circuit.ops),
        qubits,
        diagonal,
        signature,
        symmetric,
        on_qubit,
        position,
        links,
    )


def light_cone(index: CircuitIndex, targets: Mapping[int, bool]) -> list[tuple[int, int]]:
    """Return the gates of the backward light cone of ``targets``, with their layers.

    Parameters
    ----------
    index : CircuitIndex
        From :func:`index_circuit`.
    targets : mapping of int to bool
        The measured qubits; the value says whether the operator there is
        diagonal (``Z``, a computational-basis projector) or not (``X``, ``Y``).

    Returns
    -------
    list of (int, int)
        ``(gate, layer)`` pairs, gates in decreasing order; layer 1 is the last.
        Only gates touching the cone are visited.

    Examples
    --------
    >>> c = Circuit(3).h(0).h(1).h(2).cz(0, 1).cz(1, 2).rx(0.3, 0)
    >>> light_cone(index_circuit(c), {0: True})
    [(5, 1), (3, 2), (1, 3), (0, 3)]
    """
    on_qubit, links = index.on_qubit, index.links
    any_layer: dict[int, int] = {}
    flip_layer: dict[int, int] = {}
    heap: list[int] = []
    for q, diag in targets.items():
        any_layer[q] = 0
        flip_layer[q] = -1 if diag else 0
        if on_qubit[q]:
            heap.append(-on_qubit[q][-1])
    heapq.heapify(heap)
    seen: set[int] = set()
    cone: list[tuple[int, int]] = []
    pop, push, add = heapq.heappop, heapq.heappush, seen.add
    while heap:
        g = -pop(heap)
        if g in seen:
            continue
        add(g)
        link = links[g]
        dep = -1
        for q, d, _ in link:
            if q in any_layer:
                level = flip_layer[q] if d else any_layer[q]
                if level > dep:
                    dep = level
        if dep < 0:
            for q, _, prev in link:
                if prev >= 0 and q in any_layer:
                    push(heap, -prev)
            continue
        layer = dep + 1
        cone.append((g, layer))
        for q, d, prev in link:
            if q in any_layer:
                if layer > any_layer[q]:
                    any_layer[q] = layer
                if not d and layer > flip_layer[q]:
                    flip_layer[q] = layer
            else:
                any_layer[q] = layer
                flip_layer[q] = -1 if d else layer
            if prev >= 0:
                push(heap, -prev)
    return cone


def canonical_cone(
    index: CircuitIndex, targets: Sequence[tuple[int, str]]
) -> tuple[tuple, list[tuple[int, tuple[int, ...]]], list[int]]:
    """Light cone of a Pauli string or projector, in canonical form.

    Parameters
    ----------
    index : CircuitIndex
        From :func:`index_circuit`.
    targets : sequence of (int, str)
        ``(qubit, letter)`` pairs; the letter is ``"X"``, ``"Y"`` or ``"Z"``, or
        ``"P"`` for a computational-basis projector (diagonal, like ``Z``).

    Returns
    -------
    key : tuple
        Equal keys mean equal cone circuits up to renaming qubits (with the
        targets renamed alike).  Keys compare cones of the same ``index`` only
        (gate signatures are numbered per circuit).
    gates : list of (int, tuple of int)
        The cone's gates in an order equal to the circuit's, each with its
        qubits renamed ``0, 1, ...``.
    qubits : list of int
        ``qubits[local]`` is the circuit qubit renamed ``local``; the targets
        come first, in the order given.

    Examples
    --------
    >>> from tnsim.circuits.families import qaoa_maxcut
    >>> c, g = qaoa_maxcut(num_nodes=20, seed=3)
    >>> idx = index_circuit(c)
    >>> keys = {canonical_cone(idx, [(u, "Z"), (v, "Z")])[0] for u, v in g.edges()}
    >>> len(keys) < g.number_of_edges()
    True
    """
    cone = light_cone(index, {q: letter in "ZP" for q, letter in targets})
    cone.sort(key=_second)
    label = {q: k for k, (q, _) in enumerate(targets)}
    qubits, signature, symmetric = index.qubits, index.signature, index.symmetric
    emitted: list[tuple[int, tuple[int, ...]]] = []
    key_parts: list = [letter for _, letter in targets]
    get = label.get
    start, total = 0, len(cone)
    while start < total:
        layer = cone[start][1]
        stop = start + 1
        while stop < total and cone[stop][1] == layer:
            stop += 1
        ranked = []
        for g, _ in cone[start:stop]:
            qs = qubits[g]
            ranks = tuple([get(q, _BIG) for q in qs])
            if symmetric[g] and ranks[1] < ranks[0]:
                qs, ranks = (qs[1], qs[0]), (ranks[1], ranks[0])
            ranked.append((ranks, signature[g], g, qs))
        if len(ranked) > 1:
            ranked.sort()
        for ranks, sig, g, qs in ranked:
            if _BIG in ranks:
                local = []
                for q in qs:
                    lab = get(q)
                    if lab is None:
                        lab = label[q] = len(label)
                    local.append(lab)
                ranks = tuple(local)
            emitted.append((g, ranks))
            key_parts.append(sig)
            key_parts.extend(ranks)
        start = stop
    emitted.reverse()
    order = sorted(label, key=label.__getitem__)
    return tuple(key_parts), emitted, order


def cone_circuit(
    index: CircuitIndex, gates: Sequence[tuple[int, tuple[int, ...]]], num_local: int
) -> Circuit:
    """Build the cone as a circuit on ``num_local`` renamed qubits.

    Examples
    --------
    >>> c = Circuit(3).h(2).cx(2, 0)
    >>> idx = index_circuit(c)
    >>> _, gates, qubits = canonical_cone(idx, [(0, "Z")])
    >>> cone_circuit(idx, gates, len(qubits)).ops[1].qubits, qubits
    ((1, 0), [0, 2])
    """
    local = Circuit(num_local)
    ops = index.ops
    local.ops = [Operation(ops[g].name, qs, ops[g].params, ops[g].custom) for g, qs in gates]
    return local
