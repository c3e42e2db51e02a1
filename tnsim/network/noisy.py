"""Noisy circuits as doubled networks, and their backward light cones.

A noisy circuit's state is a density matrix ``ρ``; a question about a few
qubits is ``Tr(M ρ)``.  As a network, every gate ``U`` appears on the ket
layer and as ``U*`` on the bra layer, and every channel is one superoperator
tensor joining the two layers (:func:`noisy_doubled_network`).

**Light cones.**  Walking backwards from ``M`` (the Heisenberg picture,
``M -> E†(M)``), a gate drops out exactly as in
:mod:`tnsim.network.lightcone`.  A channel drops out when it touches no qubit
of the cone (it is trace-preserving: ``E†(I) = I``), or when none of its Kraus
operators flips a cone qubit it shares and everything kept after it is
diagonal there (then ``E†(D) = D Σ K†K = D``).  A kept channel that reaches
qubits outside the cone adds them to the cone, unless it sends no signal from
them (``E†(A ⊗ I) = B ⊗ I`` for every ``A``, e.g. any Pauli channel): then
only its *reduced* channel on the cone's qubits is kept
(``F(σ) = Tr_W E(σ ⊗ τ)``, the same for every state ``τ`` of the others).
A kept channel that maps operators diagonal on a qubit to operators diagonal
there (Pauli channels, amplitude damping) lets earlier diagonal gates on
that qubit drop out as gates after it would; it is ordered strictly against
everything on its qubits.  So a circuit with Pauli noise has the light cones
of its ideal circuit, plus the (reduced) channels on their qubits, and equal
cones with equal noise get equal canonical keys (:func:`canonical_noisy_cone`).

**Gate nodes.**  The walk visits a gate together with the channels right
after it on its qubits (noise attached to gates) as one *node*
(:class:`NoisyIndex`).  Its channels are decided last first, then the gate,
exactly as items of their own would be; the outcome depends only on which of
the node's qubits are in the cone and which hold a diagonal operator, so it
is computed once per node type and such a *pattern* (:class:`_NodePlan`).
When the gate is kept, it and the channels kept with it are one cone item
(:class:`UnitFacts`) at one layer, above everything on the qubits it must
follow.  Layers need only this: two items that do not commute get different
layers, the later-visited one higher.  Treating the node as one item at the
gate's layer, with its channels' qubits ordered against everything (a channel
barrier at that layer), only adds order; the items of one layer still commute
(they share only qubits where both are diagonal gates), so the cone listed by
decreasing layer is still a circuit equal to it.

**Population preparations.**  Suppose the walk, going back along qubit ``q``,
reaches ``q``'s *prefix* (the one-qubit items before its first multi-qubit
item in the circuit) while the operator is diagonal on ``q``:
``O = Σ_b |b><b|_q ⊗ O_b``.  Before that point only one-qubit items touched
``q``, so the state there is ``ρ_q ⊗ ρ_rest`` and
``Tr(O ρ) = Σ_b <b|ρ_q|b> Tr(O_b ρ_rest)``: only the populations of ``ρ_q``
count.  One-qubit channels kept on ``q`` after the prefix while ``O`` stays
diagonal there, and that keep operators diagonal (``E†(D)`` diagonal for
diagonal ``D``, so by ``Tr(D E(C)) = Tr(E†(D) C) = 0`` for off-diagonal ``C``
no coherence feeds a population), act on the populations alone, by the
stochastic matrix ``T[b', b] = <b'|E(|b><b|)|b'>``.  The walk holds such
channels back and, at the prefix, replaces prefix and held channels by one
channel taking ``|0>`` to the resulting populations ``(p0, p1)``: a bit flip
with probability ``p1``.  A held channel that a kept item later follows on
``q`` is kept after all, at the layer it would have had.  The value is
unchanged, and cones that differ only there share a key when the populations
agree: for p = 1 QAOA with two-qubit depolarizing noise after every ``rzz``,
a neighbour's state is ``(1/2, 1/2)`` however many of its other edges'
(reduced) channels come before its edge into the cone, a unital channel
keeping it so.
"""

from __future__ import annotations

import heapq
import operator
import weakref
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import cast

import numpy as np
import opt_einsum

from tnsim.circuits.channels import Channel, bit_flip, channel_from_superoperator
from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.gates import gate_matrix
from tnsim.circuits.noise import ChannelOp, NoisyCircuit
from tnsim.network.builders import gate_tensor
from tnsim.network.graph import TensorGraph
from tnsim.network.lightcone import index_circuit

__all__ = [
    "ChannelFacts",
    "Facts",
    "NoisyIndex",
    "UnitFacts",
    "canonical_noisy_cone",
    "channel_facts",
    "channel_tensor",
    "index_noisy",
    "noisy_cone",
    "noisy_doubled_network",
    "noisy_light_cone",
]

_BIG = 1 << 60


@dataclass(frozen=True)
class ChannelFacts:
    """What a light-cone walk needs of a channel restricted to some of its qubits.

    Attributes
    ----------
    channel : Channel
        The channel on the kept qubits (the reduced channel when some are left out).
    signature : int
        Equal for equal channels on equal kept positions (per index).
    keeps_diagonal : tuple of bool
        Per kept qubit: operators diagonal there stay diagonal under ``E†``.
    symmetric : bool
        Two kept qubits and the channel unchanged by swapping them.
    """

    channel: Channel
    signature: int
    keeps_diagonal: tuple[bool, ...]
    symmetric: bool


def _wires(s: np.ndarray, k: int) -> np.ndarray:
    """A superoperator matrix as a tensor: (ket out, bra out, ket in, bra in), 2 per axis."""
    return s.reshape((2,) * (4 * k))


def _heisenberg_mixes_diagonal(s: np.ndarray, k: int, j: int) -> bool:
    """Whether ``E†`` can map an operator diagonal on qubit ``j`` to one that is not.

    ``E†(O)[d, c] = Σ O[b, a] S[(a, b), (c, d)]``: ``O`` diagonal on ``j`` has
    ``a_j = b_j``; the image is diagonal when ``S`` vanishes for ``c_j != d_j``.
    """
    t = _wires(s, k)
    t = np.moveaxis(t, (j, k + j, 2 * k + j, 3 * k + j), (0, 1, 2, 3))
    return bool(np.any(np.abs(t[[0, 1], [0, 1]][:, [0, 1], [1, 0]]) > 1e-12))


def _reduce(s: np.ndarray, k: int, keep: tuple[bool, ...]) -> np.ndarray | None:
    """The superoperator on the kept qubits, or ``None`` if the others signal into them.

    ``E`` sends no signal from the dropped qubits ``W`` when ``Tr_W E(σ ⊗ τ)``
    does not depend on ``τ``: the kept output, traced over ``W``, must vanish
    for off-diagonal ``τ`` entries and be equal for every diagonal one.
    """
    t = _wires(s, k)
    kept = [j for j in range(k) if keep[j]]
    gone = [j for j in range(k) if not keep[j]]
    # Trace the outputs of the dropped qubits (ket out = bra out).
    sym = opt_einsum.get_symbol
    labels = [sym(i) for i in range(4 * k)]
    for j in gone:
        labels[k + j] = labels[j]
    out = (
        [labels[j] for j in kept]
        + [labels[k + j] for j in kept]
        + [labels[2 * k + j] for j in range(k)]
        + [labels[3 * k + j] for j in range(k)]
    )
    r = np.einsum(f"{''.join(labels)}->{''.join(out)}", t)
    m = len(kept)
    # r axes: ket out (m), bra out (m), ket in (k), bra in (k).
    ref = None
    for w in np.ndindex(*(2,) * (2 * len(gone))):
        ket_w, bra_w = w[: len(gone)], w[len(gone) :]
        index = [slice(None)] * (2 * m + 2 * k)
        for x, j in enumerate(gone):
            index[2 * m + j] = ket_w[x]
            index[2 * m + k + j] = bra_w[x]
        block = r[tuple(index)]
        if ket_w != bra_w:
            if np.any(np.abs(block) > 1e-12):
                return None
        elif ref is None:
            ref = block
        elif not np.allclose(block, ref, atol=1e-12):
            return None
    return np.ascontiguousarray(ref).reshape(1 << (2 * m), 1 << (2 * m))


_SWAP2 = (1, 0, 3, 2, 5, 4, 7, 6)


def _facts(channel: Channel, s: np.ndarray, table: dict) -> ChannelFacts:
    k = (s.shape[0].bit_length() - 1) >> 1
    sig = table.setdefault(s.round(14).tobytes(), len(table))
    keeps = tuple(not _heisenberg_mixes_diagonal(s, k, j) for j in range(k))
    symmetric = k == 2 and bool(
        np.allclose(_wires(s, 2).transpose(_SWAP2), _wires(s, 2), atol=1e-12)
    )
    return ChannelFacts(channel, sig, keeps, symmetric)


def channel_facts(channel: Channel, keep: tuple[bool, ...], table: dict) -> ChannelFacts | None:
    """Facts of ``channel`` kept on the qubits flagged in ``keep``.

    Returns ``None`` when the left-out qubits signal into the kept ones (the
    channel cannot be reduced).  ``table`` numbers signatures (shared with
    channels of one index; gates are numbered apart).

    Examples
    --------
    >>> from tnsim.circuits.channels import amplitude_damping, depolarizing
    >>> f = channel_facts(depolarizing(0.1, 2), (True, False), {})
    >>> f.channel.num_qubits, f.keeps_diagonal
    (1, (True,))
    >>> channel_facts(amplitude_damping(0.2), (True,), {}).keeps_diagonal
    (True,)
    """
    s = channel.superoperator()
    if all(keep):
        return _facts(channel, s, table)
    reduced = _reduce(s, channel.num_qubits, keep)
    if reduced is None:
        return None
    return _facts(channel_from_superoperator(reduced, channel.name), reduced, table)


@dataclass(eq=False)
class UnitFacts:
    """A kept gate with the kept channels that follow it on its qubits, as one cone item.

    Attributes
    ----------
    parts : tuple of (tuple of int, ChannelFacts)
        Each kept channel, in circuit order: its kept qubits as positions in
        the gate's qubits, and its facts (reduced when it keeps fewer qubits).
    signature : int
        Equal for equal gates with equal parts (numbered with the channels' signatures).
    symmetric : bool
        A symmetric two-qubit gate whose parts, mirrored, are those of :attr:`swapped`.
    swapped : UnitFacts or None
        The same item with the gate's two qubits listed the other way round.
    """

    parts: tuple[tuple[tuple[int, ...], ChannelFacts], ...]
    signature: int
    symmetric: bool = False
    swapped: UnitFacts | None = None


Facts = ChannelFacts | UnitFacts
"""What a cone item carries besides its gate: channel facts or unit facts."""


@dataclass(frozen=True)
class NoisyIndex:
    """Per-circuit tables that noisy light-cone walks read (built once per noisy circuit).

    The walk visits *nodes*: a gate together with the channels right after it
    on its qubits (its *parts*: each channel acts on some of the gate's qubits
    and follows the gate, or an earlier part, on every qubit it acts on), or a
    channel that follows no gate so.  A node is numbered by its first item.

    Attributes
    ----------
    noisy : NoisyCircuit
        The circuit.
    qubits : list of tuple of int
        ``qubits[g]``: the qubits of item ``g`` (a gate or a channel).
    channel : list of bool
        Whether item ``g`` is a channel.
    signature : list of int
        Gates: equal for equal gates (channels: -1; see :attr:`ChannelFacts.signature`).
    symmetric : list of bool
        Two-qubit gates unchanged by swapping their qubits.
    flags : list of tuple of bool
        ``flags[g][j]``: item ``g`` never flips the bit of its ``j``-th qubit (a
        gate diagonal there; a channel none of whose Kraus operators flips it).
    parts : list of tuple of int
        ``parts[g]``: the channels of the node of gate ``g`` (empty for other items).
    links : list of tuple of (int, bool, int)
        For a node ``g``: ``links[g][j]`` is its ``j``-th qubit, whether no item
        of the node flips that qubit's bit, and the previous node on that qubit
        (-1 if none); empty for parts.
    last : list of int
        ``last[q]``: the last node on qubit ``q`` (-1 if none).
    table : dict
        Signature numbering of channels and units.
    memo : dict
        Channel facts by channel and kept qubits; unit facts by gate and parts.
    whole : list of ChannelFacts or None
        Facts of channel items kept on all their qubits, once looked up.
    prefix_last : list of int
        ``prefix_last[q]``: the last node of qubit ``q``'s *prefix*, the
        one-qubit nodes before its first multi-qubit node (-1 if none).
    prefix_key : list of int
        ``prefix_key[q]``: equal for qubits whose prefixes are equal.
    prefix_populations : list of numpy.ndarray
        By prefix key: the populations ``(p0, p1)`` of the prefix's state of ``|0>``.
    preparations : dict
        Facts of population preparations, by prefix key and the channels folded in.
    node_type : list of int
        Equal for gate nodes with equal gates and equal parts at equal positions.
    plans : list of dict or None
        ``plans[g]``: what a walk does with gate node ``g`` (with parts), by the
        state of its qubits; one dict per node type.
    """

    noisy: NoisyCircuit
    qubits: list[tuple[int, ...]]
    channel: list[bool]
    signature: list[int]
    symmetric: list[bool]
    flags: list[tuple[bool, ...]]
    parts: list[tuple[int, ...]]
    links: list[tuple[tuple[int, bool, int], ...]]
    last: list[int]
    table: dict
    memo: dict
    whole: list
    prefix_last: list[int]
    prefix_key: list[int]
    prefix_populations: list[np.ndarray]
    preparations: dict
    node_type: list[int]
    plans: list[dict | None]

    def whole_facts(self, g: int) -> ChannelFacts:
        """Facts of channel item ``g`` kept on all its qubits (memoised in :attr:`whole`)."""
        facts = self.facts(g, (True,) * len(self.qubits[g]))
        if facts is None:  # a channel kept on all its qubits always has facts
            raise AssertionError(f"no facts for channel item {g}")
        self.whole[g] = facts
        return facts

    def facts(self, g: int, keep: tuple[bool, ...]) -> ChannelFacts | None:
        """Memoised :func:`channel_facts` of channel item ``g`` kept on ``keep``."""
        channel = cast(ChannelOp, self.noisy.items[g]).channel
        key = (id(channel), keep)
        found = self.memo.get(key)
        if found is None:
            found = self.memo[key] = (channel, channel_facts(channel, keep, self.table))
        return found[1]

    def unit(self, g: int, parts: tuple[tuple[tuple[int, ...], ChannelFacts], ...]) -> UnitFacts:
        """Memoised facts of gate item ``g`` kept with ``parts`` (see :class:`UnitFacts`)."""
        key = (self.signature[g], tuple([(pos, f.signature) for pos, f in parts]))
        found = self.memo.get(key)
        if found is None:
            found = self.memo[key] = _unit(self, key, parts, self.symmetric[g])
        return found


def _unit(index: NoisyIndex, key: tuple, parts, symmetric: bool) -> UnitFacts:
    table = index.table
    unit = UnitFacts(parts, table.setdefault(("unit", *key), len(table)))
    if symmetric and all(len(pos) == 1 or f.symmetric for pos, f in parts):
        # Mirrored: position j becomes 1 - j; a symmetric two-qubit part is the same
        # channel either way round (listed in increasing positions).
        mirror = tuple((tuple(sorted(1 - j for j in pos)), f) for pos, f in parts)
        mkey = (key[0], tuple([(pos, f.signature) for pos, f in mirror]))
        other = index.memo.get(mkey)
        if other is None:
            other = UnitFacts(mirror, table.setdefault(("unit", *mkey), len(table)))
            index.memo[mkey] = other
        unit.symmetric = other.symmetric = True
        unit.swapped, other.swapped = other, unit
    return unit


def _never_flips(channel: Channel) -> tuple[bool, ...]:
    k = channel.num_qubits
    flags = []
    for j in range(k):
        ok = True
        for op in channel.kraus:
            t = np.moveaxis(op.reshape((2,) * (2 * k)), (j, k + j), (0, 1))
            if np.any(t[0, 1]) or np.any(t[1, 0]):
                ok = False
        flags.append(ok)
    return tuple(flags)


def index_noisy(noisy: NoisyCircuit) -> NoisyIndex:
    """Build the light-cone tables of a noisy circuit (linear in its number of items).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> from tnsim.circuits.channels import phase_flip
    >>> from tnsim.circuits.noise import NoiseModel
    >>> noisy = NoiseModel().after_gates(phase_flip(0.1)).apply(Circuit(2).h(0).cz(0, 1))
    >>> idx = index_noisy(noisy)
    >>> idx.channel, idx.parts[0], idx.parts[2], idx.links[2]
    ([False, True, False, True, True], (1,), (3, 4), ((0, True, 0), (1, True, -1)))
    """
    table: dict = {}
    flips: dict[int, tuple] = {}
    items = noisy.items
    n, m = noisy.num_qubits, len(items)
    last = [-1] * n
    prefix: list[list] = [[] for _ in range(n)]
    closed = [False] * n
    prefix_last = [-1] * n
    qubits: list[tuple[int, ...]] = [item.qubits for item in items]
    channel = [isinstance(item, ChannelOp) for item in items]
    signature = [-1] * m
    symmetric = [False] * m
    flags: list[tuple[bool, ...]] = [()] * m
    grown: dict[int, list[int]] = {}
    links: list[tuple[tuple[int, bool, int], ...]] = [()] * m
    for g, item in enumerate(items):
        qs = qubits[g]
        if channel[g]:
            what: Channel | int = cast(ChannelOp, item).channel
            found = flips.get(id(what))
            if found is None:
                found = flips[id(what)] = (what, _never_flips(cast(Channel, what)))
            flags[g] = flag = found[1]
            head = last[qs[0]]
            # Right after a gate on all its qubits (last[q] == head: head acts on q).
            if (
                head >= 0
                and not channel[head]
                and (len(qs) == 1 or all(last[q] == head for q in qs[1:]))
            ):
                mine = grown.get(head)
                if mine is None:
                    mine = grown[head] = []
                mine.append(g)
                if not all(flag):
                    link = list(links[head])
                    for j, (q, _, prev) in enumerate(link):
                        if q in qs and not flag[qs.index(q)]:
                            link[j] = (q, False, prev)
                    links[head] = tuple(link)
            else:
                head = -1
        else:
            op = cast(Operation, item)
            key = (op.name, op.params) if op.custom is None else (op.name, op.custom.tobytes())
            facts = table.get(key)
            if facts is None:
                facts = table[key] = _gate_facts(op, len(table))
            signature[g], flag, symmetric[g] = facts
            flags[g] = flag
            what, head = signature[g], -1
        if head < 0:  # a new node
            head = g
            if len(qs) == 1:
                links[g] = ((qs[0], flag[0], last[qs[0]]),)
                last[qs[0]] = g
            else:
                links[g] = tuple([(q, f, last[q]) for q, f in zip(qs, flag)])
                for q in qs:
                    last[q] = g
        if len(qs) == 1:
            if not closed[qs[0]]:
                prefix[qs[0]].append((what, item))
                prefix_last[qs[0]] = head
        else:
            for q in qs:
                closed[q] = True
    parts: list[tuple[int, ...]] = [()] * m
    for g, mine in grown.items():
        parts[g] = tuple(mine)
    prefix_key, populations = _prefix_populations(prefix)
    types: dict[tuple, int] = {}
    node_type = [-1] * m
    same = [(0,), (0, 1), (0, 1, 2)]
    for g, mine in grown.items():
        on = qubits[g]
        shape = tuple(
            [
                (
                    id(cast(ChannelOp, items[c]).channel),
                    same[len(on) - 1] if qubits[c] == on else tuple(map(on.index, qubits[c])),
                )
                for c in mine
            ]
        )
        node_type[g] = types.setdefault((signature[g], shape), len(types))
    by_type: list[dict] = [{} for _ in types]
    plans = [by_type[t] if t >= 0 else None for t in node_type]
    return NoisyIndex(
        noisy,
        qubits,
        channel,
        signature,
        symmetric,
        flags,
        parts,
        links,
        last,
        {},
        {},
        [None] * len(qubits),
        prefix_last,
        prefix_key,
        populations,
        {},
        node_type,
        plans,
    )


def _gate_facts(op: Operation, number: int) -> tuple[int, tuple[bool, ...], bool]:
    """Signature ``number``, diagonal flags and symmetry of a gate (those of the ideal index)."""
    alone = Circuit(len(op.qubits))
    alone.ops = [Operation(op.name, tuple(range(len(op.qubits))), op.params, op.custom)]
    facts = index_circuit(alone)
    return number, facts.diagonal[0], facts.symmetric[0]


def _prefix_populations(prefixes: list[list]) -> tuple[list[int], list[np.ndarray]]:
    """Number the distinct qubit prefixes; the populations of each one's state of ``|0>``.

    A prefix is a list of ``(gate signature or channel, item)``; equal lists are
    computed once.
    """
    keys: dict[tuple, int] = {}
    populations: list[np.ndarray] = []
    out = []
    for steps in prefixes:
        ident = tuple((True, id(w)) if isinstance(w, Channel) else (False, w) for w, _ in steps)
        key = keys.get(ident)
        if key is None:
            rho = np.array([[1.0, 0.0], [0.0, 0.0]], dtype=complex)
            for w, item in steps:
                if isinstance(w, Channel):
                    rho = w.apply(rho)
                else:
                    u = item.matrix()
                    rho = u @ rho @ u.conj().T
            key = keys[ident] = len(populations)
            populations.append(np.clip(np.diagonal(rho).real, 0.0, 1.0))
        out.append(key)
    return out, populations


def noisy_light_cone(
    index: NoisyIndex, targets: Mapping[int, bool]
) -> list[tuple[int, int, tuple[int, ...], Facts | None]]:
    """Items of the backward light cone of ``targets``, with layers (see the module notes).

    Parameters
    ----------
    index : NoisyIndex
        From :func:`index_noisy`.
    targets : mapping of int to bool
        The measured qubits; the value says whether the operator there is
        diagonal (``Z``, a projector) or not (``X``, ``Y``).

    Returns
    -------
    list of (int, int, tuple of int, facts)
        ``(item, layer, qubits kept, facts)``; layer 1 is the last.  ``facts``
        is ``None`` for a gate kept alone, :class:`UnitFacts` for a gate kept
        with some of its node's channels (item: the gate), and
        :class:`ChannelFacts` for a channel kept without its gate (the kept
        qubits may be fewer than the channel's).  A population preparation
        (module notes) of qubit ``q`` has item number ``-2 - q``.
    """
    walk = _Walk(index)
    heap = walk.heap
    for q, diag in targets.items():
        walk.any_layer[q] = 0
        walk.flip_layer[q] = -1 if diag else 0
        walk.follow(q, index.last[q])
    heapq.heapify(heap)
    links, is_channel, qubits, parts = index.links, index.channel, index.qubits, index.parts
    any_layer, flip_layer, barrier = walk.any_layer, walk.flip_layer, walk.barrier
    pending, cone, stop, prepare = walk.pending, walk.cone, index.prefix_last, walk.prepare
    flags, plans, flip_get = index.flags, index.plans, flip_layer.get
    seen: set[int] = set()
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
        if dep >= 0:
            if is_channel[g]:
                walk.channel(g)
            elif parts[g]:
                pattern = 0
                for q, _, _ in link:
                    f = flip_get(q)
                    pattern = pattern * 3 + (0 if f is None else 1 if f < 0 else 2)
                plan = cast(dict, plans[g]).get(pattern) or walk.plan(g, pattern)
                if not plan.gate:
                    walk.alone(g, plan)
                else:
                    # The gate is kept, with its kept channels as one item (see _NodePlan).
                    qs = qubits[g]
                    if pending:
                        for q in qs:
                            if q in pending:
                                walk.flush(q)
                    dep = 0
                    for q, strict, d in zip(qs, plan.strict, flags[g]):
                        if q in any_layer:
                            level = any_layer[q] if strict else flip_layer[q]
                            if d and q in barrier and barrier[q] > level:
                                level = barrier[q]
                            if level > dep:
                                dep = level
                    layer = dep + 1
                    for q, flips, inner in zip(qs, plan.flips, plan.inner):
                        if q in any_layer:
                            if layer > any_layer[q]:
                                any_layer[q] = layer
                            if flips and layer > flip_layer[q]:
                                flip_layer[q] = layer
                        else:
                            any_layer[q] = layer
                            flip_layer[q] = layer if flips else -1
                        if inner:
                            barrier[q] = layer
                    cone.append((g, layer, qs, plan.unit))
            else:
                if pending and walk.flush_any(link):
                    dep = walk.depth(link)  # the flushed channels raised the layers
                for q, d, _ in link:
                    if d and q in barrier and barrier[q] > dep:
                        dep = barrier[q]
                layer = dep + 1
                cone.append((g, layer, qubits[g], None))
                for q, d, _ in link:
                    if q in any_layer:
                        if layer > any_layer[q]:
                            any_layer[q] = layer
                        if not d and layer > flip_layer[q]:
                            flip_layer[q] = layer
                    else:
                        any_layer[q] = layer
                        flip_layer[q] = -1 if d else layer
        for q, _, prev in link:
            if q in any_layer:
                if prev > stop[q]:
                    push(heap, -prev)
                elif flip_layer[q] < 0:
                    prepare(q)
                elif prev >= 0:
                    push(heap, -prev)
    return cone


class _Walk:
    """State of one noisy light-cone walk (see :func:`noisy_light_cone`).

    ``any_layer[q]`` / ``flip_layer[q]``: the largest layer of the kept items on
    cone qubit ``q`` (that flip it, or -1: the operator is diagonal there);
    ``barrier[q]``: the layer of the last kept channel on ``q``; ``pending[q]``:
    one-qubit channels on ``q`` held back while the operator is diagonal there
    (module notes, population preparations).
    """

    __slots__ = ("any_layer", "barrier", "cone", "flip_layer", "heap", "index", "pending")

    def __init__(self, index: NoisyIndex):
        self.index = index
        self.any_layer: dict[int, int] = {}
        self.flip_layer: dict[int, int] = {}
        self.barrier: dict[int, int] = {}
        self.pending: dict[int, list[tuple[int, ChannelFacts]]] = {}
        self.heap: list[int] = []
        self.cone: list = []

    def depth(self, link) -> int:
        """The largest layer a gate with ``link`` does not commute with (-1: none)."""
        any_layer, flip_layer = self.any_layer, self.flip_layer
        dep = -1
        for q, d, *_ in link:
            if q in any_layer:
                level = flip_layer[q] if d else any_layer[q]
                if level > dep:
                    dep = level
        return dep

    def follow(self, q: int, prev: int) -> None:
        """Go on to node ``prev`` of cone qubit ``q``; at ``q``'s prefix, maybe prepare it."""
        if prev > self.index.prefix_last[q]:
            heapq.heappush(self.heap, -prev)
        elif self.flip_layer[q] < 0:
            self.prepare(q)
        elif prev >= 0:
            heapq.heappush(self.heap, -prev)

    def prepare(self, q: int) -> None:
        """Replace ``q``'s prefix and its held-back channels by the populations they leave."""
        index = self.index
        held = self.pending.pop(q, ()) if self.pending else ()
        key = (index.prefix_key[q], tuple([f.signature for _, f in held]) if held else ())
        found = index.preparations.get(key, False)
        if found is False:
            p = index.prefix_populations[key[0]]
            for _, facts in reversed(held):  # in time order
                s = facts.channel.superoperator().reshape(2, 2, 2, 2)
                p = np.einsum("aabb->ab", s).real @ p
            found = index.preparations[key] = _preparation(float(p[1]), index.table)
        if found is not None:
            self.cone.append((-2 - q, self.any_layer[q] + 1, (q,), found))

    def flush_any(self, link) -> bool:
        """Flush the held-back channels of the qubits of ``link``; whether there were any."""
        found = False
        for q, *_ in link:
            if q in self.pending:
                self.flush(q)
                found = True
        return found

    def flush(self, q: int) -> None:
        """Keep ``q``'s held-back channels after all: a kept item follows them on ``q``."""
        any_layer, barrier, cone = self.any_layer, self.barrier, self.cone
        for g, facts in self.pending.pop(q):
            layer = any_layer[q] + 1
            cone.append((g, layer, (q,), facts))
            any_layer[q] = barrier[q] = layer

    def channel(self, g: int) -> None:
        """Visit channel item ``g``: drop it, hold it back, or keep it (reduced if it can be)."""
        decided = _decide_channel(self.index, g, self.any_layer, self.flip_layer)
        if decided is not None:
            self.keep(g, *decided)

    def keep(self, g: int, kept: tuple[int, ...], facts: ChannelFacts, held: bool) -> None:
        """Keep channel item ``g`` on ``kept`` alone, or hold it back (``held``)."""
        any_layer, flip_layer, pending = self.any_layer, self.flip_layer, self.pending
        if held:
            pending.setdefault(kept[0], []).append((g, facts))
            return
        layer = 0
        for q in kept:
            if q in pending:
                self.flush(q)
            if q in any_layer and any_layer[q] > layer:
                layer = any_layer[q]
        layer += 1
        for q, stays in zip(kept, facts.keeps_diagonal):
            if stays:
                if q not in any_layer:
                    flip_layer[q] = -1
            else:
                flip_layer[q] = layer
            any_layer[q] = self.barrier[q] = layer
        self.cone.append((g, layer, kept, facts))

    def plan(self, g: int, pattern: int) -> _NodePlan:
        """Make (and keep) the plan of gate node ``g`` for ``pattern`` (see :class:`_NodePlan`)."""
        index = self.index
        states, rest = [], pattern
        for _ in index.qubits[g]:
            rest, state = divmod(rest, 3)
            states.append(state)
        plan = cast(dict, index.plans[g])[pattern] = _plan_node(index, g, tuple(reversed(states)))
        return plan

    def alone(self, g: int, plan: _NodePlan) -> None:
        """The channels of gate node ``g`` kept without its gate (``plan.gate`` is false)."""
        mine, qubits = self.index.parts[g], self.index.qubits
        for j, kept, facts, held in plan.alone:
            qs = qubits[mine[j]]
            self.keep(mine[j], tuple([qs[i] for i in kept]), facts, held)


def _decide_channel(
    index: NoisyIndex, g: int, any_layer: Mapping[int, int], flip_layer: Mapping[int, int]
) -> tuple[tuple[int, ...], ChannelFacts, bool] | None:
    """Whether channel item ``g`` is dropped (``None``), else its kept qubits, facts, held back.

    Dropped: it touches no cone qubit, or never flips the cone qubits whose
    operator is diagonal and touches no other (module notes).  Reduced to the
    cone's qubits when the others send no signal, else kept whole.  Held back:
    kept on one qubit whose operator is diagonal, and keeping it diagonal.
    """
    qs = index.qubits[g]
    dep = -1
    for q, d in zip(qs, index.flags[g]):
        if q in any_layer:
            level = flip_layer[q] if d else any_layer[q]
            if level > dep:
                dep = level
    if dep < 0:
        return None
    if len(qs) == 1:
        facts = index.whole[g] or index.whole_facts(g)
        kept: tuple[int, ...] = qs
    else:
        keep = tuple([q in any_layer for q in qs])
        found = index.facts(g, keep)
        if found is None:
            keep = (True,) * len(qs)
            found = index.facts(g, keep)
        facts = cast(ChannelFacts, found)
        kept = tuple([q for q, k in zip(qs, keep) if k])
    held = len(kept) == 1 and flip_layer.get(kept[0], 0) < 0 and facts.keeps_diagonal[0]
    return kept, facts, held


@dataclass(slots=True)
class _NodePlan:
    """What a walk does with a gate node whose qubits are in a given state (a *pattern*).

    The pattern gives per qubit: 0 outside the cone, 1 in it with a diagonal
    operator, 2 in it otherwise.  The node's channels are decided last first,
    then the gate, exactly as items of their own would be, on a walk state
    with that pattern (which parts are kept, how reduced, whether the gate is
    kept depend on nothing else).

    Attributes
    ----------
    gate : bool
        The gate is kept.  Then the channels kept with it (held back ones too:
        the gate would flush them) are the parts of one item, :attr:`unit`
        (``None`` if none is kept), at one layer: 1 + the largest layer on its
        qubits it must follow (:attr:`strict` qubits, where a part acts: every
        kept item there; the others: as the gate alone).  Its part qubits'
        barrier rises to that layer: more order than the items alone would
        have, never less.
    unit : UnitFacts or None
    strict, flips, inner : tuple of bool
        Per gate qubit: a part acts there or the gate flips it; the item
        may leave the operator non-diagonal there; a part acts there.
    alone : list of (int, tuple of int, ChannelFacts, bool)
        When the gate is dropped: the kept channels, last first (part number,
        kept positions, facts, held back).
    """

    gate: bool
    unit: UnitFacts | None
    strict: tuple[bool, ...]
    flips: tuple[bool, ...]
    inner: tuple[bool, ...]
    alone: list[tuple[int, tuple[int, ...], ChannelFacts, bool]]


def _plan_node(index: NoisyIndex, g: int, pattern: tuple[int, ...]) -> _NodePlan:
    """The plan of gate node ``g`` for ``pattern`` (see :class:`_NodePlan`)."""
    qs = index.qubits[g]
    any_layer = {q: 0 for q, s in zip(qs, pattern) if s}
    flip_layer = {q: (-1 if s == 1 else 0) for q, s in zip(qs, pattern) if s}
    mine = index.parts[g]
    alone = []
    for j in range(len(mine) - 1, -1, -1):
        decided = _decide_channel(index, mine[j], any_layer, flip_layer)
        if decided is None:
            continue
        kept, facts, held = decided
        for q, stays in zip(kept, facts.keeps_diagonal):
            any_layer[q] = 1
            if not stays:
                flip_layer[q] = 1
            elif q not in flip_layer:
                flip_layer[q] = -1
        own = index.qubits[mine[j]]
        alone.append((j, tuple([own.index(q) for q in kept]), facts, held))
    gate = False
    for q, d in zip(qs, index.flags[g]):
        if q in any_layer and (flip_layer[q] if d else any_layer[q]) >= 0:
            gate = True
    flips = [not d for d in index.flags[g]]
    inner = [False] * len(qs)
    parts = []
    for j, positions, facts, _ in sorted(alone):
        own = index.qubits[mine[j]]
        at = tuple([qs.index(own[i]) for i in positions])
        parts.append((at, facts))
        for i, stays in zip(at, facts.keeps_diagonal):
            inner[i] = True
            if not stays:
                flips[i] = True
    unit = index.unit(g, tuple(parts)) if gate and parts else None
    strict = tuple([not d or b for d, b in zip(index.flags[g], inner)])
    return _NodePlan(gate, unit, strict, tuple(flips), tuple(inner), alone)


def _preparation(p1: float, table: dict) -> ChannelFacts | None:
    """Facts of the channel that takes ``|0>`` to populations ``(1 - p1, p1)`` (a bit flip)."""
    p1 = min(max(p1, 0.0), 1.0)
    if p1 < 1e-15:
        return None
    channel = bit_flip(p1)
    return _facts(channel, channel.superoperator(), table)


def canonical_noisy_cone(
    index: NoisyIndex, targets: Sequence[tuple[int, str]]
) -> tuple[tuple, list[tuple[int, tuple[int, ...], Facts | None]], list[int]]:
    """Light cone of a Pauli string or projector in a noisy circuit, in canonical form.

    As :func:`tnsim.network.lightcone.canonical_cone`: equal keys mean equal
    cones (gates *and* channels) up to renaming qubits.

    Returns
    -------
    key : tuple
    items : list of (int, tuple of int, facts)
        The cone's items in an order equal to the circuit's, each with its kept
        qubits renamed ``0, 1, ...`` and its facts (see :func:`noisy_light_cone`).
    qubits : list of int
        ``qubits[local]`` is the circuit qubit renamed ``local``; targets first.

    Examples
    --------
    >>> from tnsim.circuits.channels import depolarizing
    >>> from tnsim.circuits.families import qaoa_maxcut
    >>> from tnsim.circuits.noise import NoiseModel
    >>> c, g = qaoa_maxcut(num_nodes=12, seed=3)
    >>> model = NoiseModel().after_gates(depolarizing(0.01)).after_gates(
    ...     depolarizing(0.02, 2), gates=["rzz"])
    >>> idx = index_noisy(model.apply(c))
    >>> from tnsim.network.lightcone import canonical_cone, index_circuit
    >>> u, v = next(iter(g.edges()))
    >>> _, items, qubits = canonical_noisy_cone(idx, [(u, "Z"), (v, "Z")])
    >>> ideal = canonical_cone(index_circuit(c), [(u, "Z"), (v, "Z")])[2]
    >>> sorted(qubits) == sorted(ideal)  # Pauli noise keeps the ideal cone: nodes, neighbours
    True
    """
    cone = noisy_light_cone(index, {q: letter in "ZP" for q, letter in targets})
    cone.sort(key=_LAYER)
    label = {q: k for k, (q, _) in enumerate(targets)}
    signature, symmetric = index.signature, index.symmetric
    emitted: list = []
    key_parts: list = [letter for _, letter in targets]
    get = label.get
    start, total = 0, len(cone)
    while start < total:
        layer = cone[start][1]
        stop = start + 1
        while stop < total and cone[stop][1] == layer:
            stop += 1
        ranked = []
        for g, _, qs, facts in cone[start:stop]:
            ranks = tuple([get(q, _BIG) for q in qs])
            if facts is None:
                sym = symmetric[g]
                if sym and ranks[1] < ranks[0]:
                    qs, ranks = (qs[1], qs[0]), (ranks[1], ranks[0])
                sig = signature[g]
            else:
                if facts.symmetric and ranks[1] < ranks[0]:
                    qs, ranks = (qs[1], qs[0]), (ranks[1], ranks[0])
                    if isinstance(facts, UnitFacts):
                        facts = facts.swapped
                sig = -1 - cast("UnitFacts | ChannelFacts", facts).signature
            ranked.append((ranks, sig, g, qs, facts))
        if len(ranked) > 1:
            ranked.sort()  # item numbers are unique: qubits and facts are never compared
        for ranks, sig, g, qs, facts in ranked:
            if _BIG in ranks:
                local = []
                for q in qs:
                    lab = get(q)
                    if lab is None:
                        lab = label[q] = len(label)
                    local.append(lab)
                ranks = tuple(local)
            emitted.append((g, ranks, facts))
            key_parts.append(sig)
            key_parts.extend(ranks)
        start = stop
    emitted.reverse()
    return tuple(key_parts), emitted, sorted(label, key=label.__getitem__)


_LAYER = operator.itemgetter(1)


def noisy_cone(
    index: NoisyIndex,
    items: Sequence[tuple[int, tuple[int, ...], Facts | None]],
    qubits: Sequence[int],
) -> NoisyCircuit:
    """The cone as a noisy circuit on ``len(qubits)`` renamed qubits, with their readout.

    ``items`` and ``qubits`` are those of :func:`canonical_noisy_cone`.
    """
    source = index.noisy.items
    out: list[Operation | ChannelOp] = []
    for g, qs, facts in items:
        if facts is None or isinstance(facts, UnitFacts):
            op = cast(Operation, source[g])
            out.append(Operation(op.name, qs, op.params, op.custom))
            for pos, part in facts.parts if facts is not None else ():
                out.append(ChannelOp(part.channel, tuple([qs[j] for j in pos])))
        else:
            out.append(ChannelOp(facts.channel, qs))
    readout = {k: index.noisy.readout[q] for k, q in enumerate(qubits) if q in index.noisy.readout}
    return NoisyCircuit(len(qubits), out, readout)


_CHANNEL_TENSORS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def channel_tensor(channel: Channel) -> tuple[np.ndarray, tuple[bool, ...]]:
    """A channel's superoperator as a reduced tensor on wires (ket qubits, then bra qubits).

    Like :func:`tnsim.network.builders.gate_tensor` for a ``2k``-wire gate: a
    wire the superoperator never changes is merged into one axis (a dephasing
    channel keeps every wire's label).  Axes: the out axes of the changed
    wires, then one in axis per wire.

    Examples
    --------
    >>> from tnsim.circuits.channels import depolarizing, phase_flip
    >>> channel_tensor(phase_flip(0.1))[0].shape, channel_tensor(depolarizing(0.1))[0].shape
    ((2, 2), (2, 2, 2, 2))
    """
    found = _CHANNEL_TENSORS.get(channel)
    if found is None:
        wires = tuple(range(2 * channel.num_qubits))
        found = gate_tensor(Operation("superoperator", wires, (), channel.superoperator()))
        _CHANNEL_TENSORS[channel] = found
    return found


_ZERO = np.array([1.0, 0.0], dtype=np.complex128)


def noisy_doubled_network(
    noisy: NoisyCircuit,
    *,
    paulis: Mapping[int, str] | None = None,
    open_qubits: Sequence[int] = (),
    closing: Mapping[int, np.ndarray] | None = None,
    confusion: Mapping[int, np.ndarray] | None = None,
    dtype: np.dtype | type = np.complex128,
) -> TensorGraph:
    """Build the network of ``Tr(M ρ)``, ``ρ`` the noisy circuit's final state from ``|0...0>``.

    ``M`` is a tensor product over qubits: the Pauli matrix ``paulis[q]``; on
    ``open_qubits`` the ket and bra legs merge into one output axis (the
    network holds the diagonal of the reduced density matrix: outcome
    probabilities); ``closing[q]``, a length-2 vector ``v``, is ``diag(v)``
    (``v = e_x``: the projector on outcome ``x``; a row of a confusion matrix:
    the probability of reading that outcome); the identity elsewhere.  An open
    qubit with a ``confusion`` matrix ``C`` gets ``C`` on its output axis, so the
    network holds the probabilities of the outcomes *read*.

    Parameters
    ----------
    noisy : NoisyCircuit
        Gates and channels (usually a light cone, :func:`noisy_cone`).
    paulis : dict of int to str, optional
        ``{qubit: "X" | "Y" | "Z"}``.
    open_qubits : sequence of int
        One output axis each, in this order.
    closing : dict of int to array, optional
        Diagonal operators as vectors.
    confusion : dict of int to array, optional
        Readout confusion matrices of open qubits.
    dtype : numpy dtype
        ``complex64`` or ``complex128``.

    Returns
    -------
    TensorGraph

    Examples
    --------
    >>> from tnsim import Circuit
    >>> from tnsim.circuits.channels import bit_flip
    >>> from tnsim.circuits.noise import NoiseModel
    >>> noisy = NoiseModel().after_gates(bit_flip(0.1)).apply(Circuit(1).x(0))
    >>> np.round(noisy_doubled_network(noisy, open_qubits=[0]).dense().real, 6)
    array([0.1, 0.9])
    """
    paulis, closing, confusion = dict(paulis or {}), dict(closing or {}), dict(confusion or {})
    n = noisy.num_qubits
    ket = list(range(n))
    bra = list(range(n, 2 * n))
    nxt = 2 * n
    arrays: list[np.ndarray] = []
    indices: list[tuple[int, ...]] = []
    for q in range(n):
        arrays += [_ZERO, _ZERO]
        indices += [(ket[q],), (bra[q],)]
    for item in noisy.items:
        if isinstance(item, ChannelOp):
            tensor, diag = channel_tensor(item.channel)
            wires = [(ket, q) for q in item.qubits] + [(bra, q) for q in item.qubits]
            nxt = _lay(arrays, indices, tensor, diag, wires, nxt)
        else:
            tensor, diag = gate_tensor(item)
            nxt = _lay(arrays, indices, tensor, diag, [(ket, q) for q in item.qubits], nxt)
            conj = tensor.conj()
            nxt = _lay(arrays, indices, conj, diag, [(bra, q) for q in item.qubits], nxt)
    for q, letter in paulis.items():
        arrays.append(gate_matrix(letter.lower()))
        indices.append((bra[q], ket[q]))
    join = {bra[q]: ket[q] for q in range(n) if q not in paulis}
    indices = [tuple(join.get(i, i) for i in ix) for ix in indices]
    for q, vector in closing.items():
        arrays.append(np.asarray(vector))
        indices.append((ket[q],))
    output = []
    for q in open_qubits:
        if q in confusion:
            arrays.append(np.asarray(confusion[q]))
            indices.append((nxt, ket[q]))
            output.append(nxt)
            nxt += 1
        else:
            output.append(ket[q])
    arrays, indices = _diagonals(arrays, indices)
    dt = np.dtype(dtype)
    arrays = [np.asarray(a, dtype=dt) for a in arrays]
    size = dict.fromkeys({i for ix in indices for i in ix}, 2)
    return TensorGraph(arrays, indices, size, tuple(output), 0, dt)


def _lay(arrays, indices, tensor, diag, wires, nxt: int) -> int:
    """Append a reduced tensor on ``wires`` (``(labels list, qubit)`` pairs); return next label."""
    ins = [lab[q] for lab, q in wires]
    outs = []
    for (lab, q), d in zip(wires, diag):
        if not d:
            lab[q] = nxt
            outs.append(nxt)
            nxt += 1
    arrays.append(tensor)
    indices.append((*outs, *ins))
    return nxt


def _diagonals(arrays, indices):
    """Take the diagonal of tensors in which joining ket and bra repeated a label."""
    for k, ix in enumerate(indices):
        unique = tuple(dict.fromkeys(ix))
        if unique != ix:
            sym = opt_einsum.get_symbol
            pos = {lab: sym(j) for j, lab in enumerate(unique)}
            eq = "".join(pos[i] for i in ix) + "->" + "".join(pos[i] for i in unique)
            arrays[k] = np.einsum(eq, arrays[k])
            indices[k] = unique
    return arrays, indices
