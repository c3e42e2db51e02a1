"""Exact samples by growing the circuit one gate at a time, from amplitudes only.

Gate-by-gate sampling (Bravyi, Gosset and Liu, "How to simulate quantum
measurement without computing marginals", Phys. Rev. Lett. 128, 220503, 2022;
cited from memory).  Group the circuit's gates into steps ``U_1 .. U_T``, step
``t`` acting on the qubits ``S_t``.  If ``x`` is an exact sample of
``|<x|U_{t-1} .. U_1|0>|²``, redrawing its bits on ``S_t`` from
``p(y) ∝ |<x with y on S_t| U_t .. U_1|0>|²`` gives an exact sample of the
circuit one step longer: ``U_t`` leaves the distribution of the other bits
unchanged.  After the last step ``x`` is an exact sample of the circuit.  Each
step needs ``2**|S_t|`` amplitudes per distinct current bitstring -- single
(not doubled) networks, no marginals.

Steps: each multi-qubit gate, with the single-qubit gates on its qubits since
their previous step (and, after a qubit's last multi-qubit gate, the rest of
that qubit's gates); a qubit without multi-qubit gates is one step.  Steps are
taken layer by layer (the as-soon-as-possible layer of their multi-qubit
gate).  The steps of one layer act on different qubits, so they commute and
share one network: all earlier layers, one tensor per step of the layer (the
identity until the step is taken) and one bit vector ``<x_q|`` per qubit
(:class:`LayerNetwork`).  Each layer is planned once; a batch of shots then
takes the layer's steps through a :class:`tnsim.execution.livetree.LiveTree`: a step
puts its tensor in, opens its qubits' bit vectors (one contraction gives all
``2**|S_t|`` amplitudes of every shot), draws, and closes them on the drawn
bits.  Values and environments not touched by a step are kept, so a layer
costs each shot a few contractions of its tree, not one per step.  The steps
of a layer are taken in circuit order, not in the order of the tree's leaves
(which was ~1.4x faster on a 7x7 grid): the tree comes from a time-limited
search, and the samples of a seed must not depend on it.  Qubits that no step
has reached yet are in ``|0>`` and are left out; a step of diagonal gates only
(no single-qubit gates attached) changes no outcome probability and is put in
without a redraw.  The uniform numbers of every draw are drawn per layer up
front, so the samples do not depend on how shots are batched either.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.errors import ResourceLimitError
from tnsim.execution.livetree import LiveTree
from tnsim.execution.options import ContractionRecord, QueryOptions, resolve_options
from tnsim.execution.timemodel import plan_for_runs
from tnsim.fitted import BATCH_ELEMENTS, LIVE_PASSES
from tnsim.network.builders import amplitude_network, gate_tensor
from tnsim.network.graph import TensorGraph
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import PairTree, Plan
from tnsim.plan.vectors import plan_vectors_first
from tnsim.units import format_bytes

__all__ = ["GateStep", "LayerNetwork", "gate_steps", "sample_by_gates", "step_tensor"]


@dataclass(frozen=True)
class GateStep:
    """Gates taken together: their qubits, the gates in order, and their layer."""

    qubits: tuple[int, ...]
    ops: tuple[Operation, ...]
    layer: int


def gate_steps(circuit: Circuit) -> list[GateStep]:
    """Group ``circuit``'s gates into steps, in the order they are taken.

    Examples
    --------
    >>> c = Circuit(3).h(0).cx(0, 1).x(2).cx(1, 2).h(1)
    >>> [(s.qubits, [op.name for op in s.ops], s.layer) for s in gate_steps(c)]
    [((0, 1), ['h', 'cx'], 0), ((1, 2), ['x', 'cx', 'h'], 1)]
    """
    n = circuit.num_qubits
    pending: list[list[Operation]] = [[] for _ in range(n)]
    depth = [0] * n
    last: list[int | None] = [None] * n
    groups: list[tuple[tuple[int, ...], list[Operation], int]] = []
    for op in circuit.ops:
        if len(op.qubits) == 1:
            pending[op.qubits[0]].append(op)
            continue
        before = [o for q in op.qubits for o in pending[q]]
        layer = max(depth[q] for q in op.qubits)
        for q in op.qubits:
            pending[q], depth[q], last[q] = [], layer + 1, len(groups)
        groups.append((tuple(op.qubits), [*before, op], layer))
    for q in range(n):
        previous = last[q]
        if pending[q] and previous is None:
            groups.append(((q,), pending[q], 0))
        elif pending[q] and previous is not None:
            groups[previous][1].extend(pending[q])
    order = sorted(range(len(groups)), key=lambda k: (groups[k][2], k))
    return [GateStep(groups[k][0], tuple(groups[k][1]), groups[k][2]) for k in order]


@dataclass(frozen=True)
class LayerNetwork:
    """One layer's network: earlier layers, the layer's steps, one bit vector per qubit.

    Attributes
    ----------
    network : TensorGraph
        Closed network of one shot: the gates of all earlier layers
        (simplified), one tensor per step of this layer (axes: the step's
        outgoing wires, then its incoming ones), then one bit vector
        ``<x_q|`` per qubit closing its final wire.
    qubits : list of int
        The circuit qubits it holds, in the order of the bit vectors.
    step_leaf : dict of int to int
        Leaf of each of the layer's steps (by index into the steps).
    bit_leaf : dict of int to int
        Leaf of each qubit's bit vector, by circuit qubit (in the order of ``qubits``).
    taken : dict of int to numpy.ndarray
        The tensor each step's leaf gets when the step is taken (:func:`step_tensor`).
    quiet : frozenset of int
        Steps of diagonal gates only: they change no outcome probability and
        are taken without a redraw.
    """

    network: TensorGraph
    qubits: list[int]
    step_leaf: dict[int, int]
    bit_leaf: dict[int, int]
    taken: dict[int, np.ndarray]
    quiet: frozenset[int]


def step_tensor(step: GateStep) -> np.ndarray:
    """The product of a step's gates as a tensor: outgoing axes, then incoming ones.

    Examples
    --------
    >>> c = Circuit(2).h(0).cx(0, 1)
    >>> t = step_tensor(gate_steps(c)[0])
    >>> np.round(t.reshape(4, 4)[:, 0] * np.sqrt(2), 6)  # H on qubit 0, then CNOT: a Bell pair
    array([1.+0.j, 0.+0.j, 0.+0.j, 1.+0.j])
    """
    k = len(step.qubits)
    pos = {q: j for j, q in enumerate(step.qubits)}
    t = np.eye(1 << k, dtype=np.complex128).reshape((2,) * (2 * k))
    for op in step.ops:
        a = len(op.qubits)
        axes = [pos[q] for q in op.qubits]
        g = op.matrix().reshape((2,) * (2 * a))
        t = np.moveaxis(np.tensordot(g, t, axes=(list(range(a, 2 * a)), axes)), range(a), axes)
    return t


def _layer_network(steps: Sequence[GateStep], t: int, end: int, dtype) -> LayerNetwork:
    """The network of ``steps[:t]`` with ``steps[t:end]`` (one layer) as identities."""
    qubits = sorted({q for s in steps[:end] for q in s.qubits})
    local = {q: k for k, q in enumerate(qubits)}
    m = len(qubits)
    grown = Circuit(m)
    grown.ops = [
        Operation(op.name, tuple(local[q] for q in op.qubits), op.params, op.custom)
        for s in steps[:t]
        for op in s.ops
    ]
    base = absorb_small(amplitude_network(grown, None, open_qubits=range(m), dtype=dtype))
    arrays, indices, size = list(base.arrays), list(base.indices), dict(base.size)
    wire = list(base.output)
    nxt = max(size, default=-1) + 1
    step_leaf = {}
    for j in range(t, end):
        k = len(steps[j].qubits)
        outs = tuple(range(nxt, nxt + k))
        nxt += k
        step_leaf[j] = len(arrays)
        arrays.append(np.eye(1 << k, dtype=base.dtype).reshape((2,) * (2 * k)))
        indices.append(outs + tuple(wire[local[q]] for q in steps[j].qubits))
        for q, label in zip(steps[j].qubits, outs):
            wire[local[q]] = label
            size[label] = 2
    bit_leaf = {q: len(arrays) + k for k, q in enumerate(qubits)}
    arrays += [np.array([1, 0], dtype=base.dtype)] * m
    indices += [(w,) for w in wire]
    network = TensorGraph(arrays, indices, size, (), base.exponent, base.dtype)
    taken = {j: step_tensor(steps[j]).astype(base.dtype) for j in range(t, end)}
    quiet = frozenset(
        j for j in range(t, end) if all(all(gate_tensor(op)[1]) for op in steps[j].ops)
    )
    return LayerNetwork(network, qubits, step_leaf, bit_leaf, taken, quiet)


def _batch_tree(layer: LayerNetwork, plan: Plan, members: int) -> tuple[PairTree, int]:
    """The layer's tree with a batch label on every bit vector; returns it and the label."""
    net = layer.network
    batch = max(net.size) + 1
    inputs = list(net.indices)
    for leaf in layer.bit_leaf.values():
        inputs[leaf] = (batch, *inputs[leaf])
    size = net.size | {batch: members}
    return PairTree(tuple(inputs), (batch,), size, plan.tree.path), batch


def _draw(amplitudes: np.ndarray, uniform: np.ndarray) -> np.ndarray:
    """One outcome per row of ``amplitudes``, drawn with probability ``|a|²`` (normalised)."""
    probs = amplitudes.real**2 + amplitudes.imag**2
    totals = probs.sum(axis=1, keepdims=True)
    if np.any(totals <= 0):
        raise ArithmeticError("a sampled bitstring has zero probability (numerical underflow)")
    cum = np.cumsum(probs / totals, axis=1)
    cum[:, -1] = 1.0
    return (uniform[:, None] >= cum).sum(axis=1)


def sample_by_gates(
    circuit: Circuit,
    shots: int,
    rng: np.random.Generator,
    options: QueryOptions | None = None,
    *,
    chunk: int = 256,
) -> np.ndarray:
    """Draw ``shots`` exact samples of ``circuit`` gate step by gate step.

    The arguments are those of :func:`tnsim.queries.sampling.sample` (which calls this
    with ``method="gates"``), with ``rng`` the generator and ``options`` the
    resolved dtype and memory limit (default: the enclosing ``run_options``
    block's); ``chunk`` is the number of shots taken through a layer together,
    shrunk to fit ``options.memory_limit``.  The samples do not depend on
    ``chunk`` or the limit.  Returns ``(shots, num_qubits)`` ``uint8``.

    Examples
    --------
    >>> c = Circuit(3).h(0).cx(0, 1).cx(1, 2)
    >>> s = sample_by_gates(c, 100, np.random.default_rng(2))
    >>> sorted({"".join(map(str, row)) for row in s})
    ['000', '111']
    """
    opts = resolve_options() if options is None else options
    out = np.zeros((shots, circuit.num_qubits), dtype=np.uint8)
    steps = gate_steps(circuit)
    limit = opts.memory_limit
    t = 0
    while t < len(steps):
        end = t
        while end < len(steps) and steps[end].layer == steps[t].layer:
            end += 1
        uniform = rng.random((end - t, shots))
        layer = _layer_network(steps, t, end, opts.dtype)
        bits = list(layer.bit_leaf.values())
        plan = plan_vectors_first(
            layer.network, bits, lambda net: plan_for_runs(net, LIVE_PASSES * shots)
        )
        members, per_shot = _members(layer, plan, min(chunk, shots), limit)
        live, eye = None, _EYE.astype(layer.network.dtype)
        began, flops = time.perf_counter(), 0
        for start in range(0, shots, members):
            rows = slice(start, min(start + members, shots))
            arrays = list(layer.network.arrays)
            for q, leaf in layer.bit_leaf.items():
                arrays[leaf] = eye[out[rows, q]]
            if live is None:  # the first batch is the largest
                tree, batch = _batch_tree(layer, plan, rows.stop - rows.start)
                live = first = LiveTree(tree, arrays, batch)
                varying = set(layer.bit_leaf.values()) | set(layer.step_leaf.values())
                flags = _varying(tree, varying)
                fixed = [u for u in range(tree.num_leaves, len(flags)) if not flags[u]]
            elif rows.stop - rows.start == members:
                live = first.restart(arrays, live.values_of(fixed))
            else:
                tree, batch = _batch_tree(layer, plan, rows.stop - rows.start)
                live = LiveTree(tree, arrays, batch, live.values_of(fixed))
            _run_layer(steps, layer, live, out, rows, uniform[:, rows], t)
            flops += live.flops
        if opts.log is not None:  # run statistics (tnsim sample --stats)
            opts.log.append(
                ContractionRecord(
                    flops=flops,
                    num_slices=1,
                    slices_run=1,
                    peak_bytes=members * per_shot,
                    memory_limit=limit,
                    workers=1,
                    seconds=time.perf_counter() - began,
                    itemsize=layer.network.dtype.itemsize,
                )
            )
        t = end
    return out


def _run_layer(steps, layer, live, out, rows, uniform, t) -> None:
    """Take one layer's steps on ``live`` for the shots ``out[rows]`` (updated in place).

    ``live`` holds the layer's network with the shots' current bits;
    ``uniform[j - t]`` holds the shots' uniform draws for step ``j``.
    """
    count = rows.stop - rows.start
    eye = _EYE.astype(layer.network.dtype)
    for j in range(t, t + len(layer.step_leaf)):
        live.replace(layer.step_leaf[j], layer.taken[j])
        if j in layer.quiet:
            continue  # diagonal gates do not change the distribution: nothing to redraw
        qubits = steps[j].qubits
        leaves = [layer.bit_leaf[q] for q in qubits]
        amps = np.asarray(live.probe(leaves).mantissa, dtype=np.complex128).reshape(count, -1)
        y = _draw(amps, uniform[j - t])
        for i, (q, leaf) in enumerate(zip(qubits, leaves)):
            bits = ((y >> (len(qubits) - 1 - i)) & 1).astype(np.uint8)
            out[rows, q] = bits
            live.replace(leaf, eye[bits])


_EYE = np.eye(2, dtype=np.complex128)


def _varying(tree: PairTree, leaves: set[int]) -> list[bool]:
    """For every node of ``tree`` (leaves first), whether one of ``leaves`` is below it."""
    flags = [k in leaves for k in range(tree.num_leaves)]
    for x, y in tree.path:
        flags.append(flags[x] or flags[y])
    return flags


def _members(layer: LayerNetwork, plan: Plan, chunk: int, limit: int) -> tuple[int, int]:
    """Shots per batch (at most ``chunk``) whose values and environments fit ``limit`` bytes.

    Also returns the bytes one shot needs.

    A shot keeps the value and the environment of every node above a bit
    vector; three copies of the largest such node are left for a step's work.
    The largest node of a batch is kept within :data:`~tnsim.fitted.BATCH_ELEMENTS`.
    """
    tree, _ = _batch_tree(layer, plan, 1)
    sizes = [1] * tree.num_leaves + tree.intermediate_sizes()
    per_shot = [s for s, v in zip(sizes, _varying(tree, set(layer.bit_leaf.values()))) if v]
    need = (2 * sum(per_shot) + 3 * max(per_shot)) * layer.network.dtype.itemsize
    if need > limit:
        raise ResourceLimitError(
            f"gate-by-gate sampling needs {format_bytes(need)} per shot for a layer of "
            f"{len(layer.qubits)} qubits, over the memory limit of {format_bytes(limit)}; "
            "raise the memory limit"
        )
    return max(1, min(chunk, limit // need, BATCH_ELEMENTS // max(per_shot))), need
