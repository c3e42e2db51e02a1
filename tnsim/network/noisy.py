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
from tnsim.circuits.circuit import Operation
from tnsim.circuits.gates import gate_matrix
from tnsim.circuits.noise import ChannelOp, NoisyCircuit
from tnsim.network.builders import gate_tensor
from tnsim.network.graph import TensorGraph
from tnsim.network.lightcone import index_circuit

__all__ = [
    "ChannelFacts",
    "NoisyIndex",
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


@dataclass(frozen=True)
class NoisyIndex:
    """Per-circuit tables that noisy light-cone walks read (built once per noisy circuit).

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
    links : list of tuple of (int, bool, int)
        ``links[g][j]``: the ``j``-th qubit of item ``g``, whether ``g`` never
        flips its bit (a gate diagonal there; a channel none of whose Kraus
        operators flips it), and the previous item on that qubit (-1 if none).
    last : list of int
        ``last[q]``: the last item on qubit ``q`` (-1 if none).
    table : dict
        Signature numbering of channels.
    memo : dict
        Channel facts by channel and kept qubits.
    whole : list of ChannelFacts or None
        Facts of channel items kept on all their qubits, once looked up.
    prefix_last : list of int
        ``prefix_last[q]``: the last item of qubit ``q``'s *prefix*, the
        one-qubit items before its first multi-qubit item (-1 if none).
    prefix_key : list of int
        ``prefix_key[q]``: equal for qubits whose prefixes are equal.
    prefix_populations : list of numpy.ndarray
        By prefix key: the populations ``(p0, p1)`` of the prefix's state of ``|0>``.
    preparations : dict
        Facts of population preparations, by prefix key and the channels folded in.
    """

    noisy: NoisyCircuit
    qubits: list[tuple[int, ...]]
    channel: list[bool]
    signature: list[int]
    symmetric: list[bool]
    links: list[tuple[tuple[int, bool, int], ...]]
    last: list[int]
    table: dict
    memo: dict
    whole: list
    prefix_last: list[int]
    prefix_key: list[int]
    prefix_populations: list[np.ndarray]
    preparations: dict

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
    >>> idx.channel, idx.links[1]
    ([False, True, False, True, True], ((0, True, 0),))
    """
    gates = index_circuit(noisy.ideal_circuit())
    flips: dict[int, tuple] = {}
    n = noisy.num_qubits
    last = [-1] * n
    prefix: list[list] = [[] for _ in range(n)]
    closed = [False] * n
    prefix_last = [-1] * n
    qubits, channel, signature, symmetric, links = [], [], [], [], []
    k = 0
    for g, item in enumerate(noisy.items):
        if isinstance(item, ChannelOp):
            ch = item.channel
            if id(ch) not in flips:
                flips[id(ch)] = (ch, _never_flips(ch))
            diag, sig, sym = flips[id(ch)][1], -1, False
            channel.append(True)
            what = ch
        else:
            diag, sig, sym = gates.diagonal[k], gates.signature[k], gates.symmetric[k]
            k += 1
            channel.append(False)
            what = sig
        qubits.append(item.qubits)
        signature.append(sig)
        symmetric.append(sym)
        link = []
        for q, d in zip(item.qubits, diag):
            link.append((q, d, last[q]))
            last[q] = g
        links.append(tuple(link))
        if len(item.qubits) == 1:
            q = item.qubits[0]
            if not closed[q]:
                prefix[q].append((what, item))
                prefix_last[q] = g
        else:
            for q in item.qubits:
                closed[q] = True
    prefix_key, populations = _prefix_populations(prefix)
    whole = [None] * len(qubits)
    return NoisyIndex(
        noisy,
        qubits,
        channel,
        signature,
        symmetric,
        links,
        last,
        {},
        {},
        whole,
        prefix_last,
        prefix_key,
        populations,
        {},
    )


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
) -> list[tuple[int, int, tuple[int, ...], ChannelFacts | None]]:
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
    list of (int, int, tuple of int, ChannelFacts or None)
        ``(item, layer, qubits kept, facts)`` in decreasing item order; layer 1
        is the last; ``facts`` for channels (the kept qubits may be fewer
        than the channel's).  A population preparation (module notes) of
        qubit ``q`` has item number ``-2 - q``.
    """
    walk = _Walk(index)
    heap = walk.heap
    for q, diag in targets.items():
        walk.any_layer[q] = 0
        walk.flip_layer[q] = -1 if diag else 0
        walk.follow(q, index.last[q])
    heapq.heapify(heap)
    links, is_channel, qubits, whole = index.links, index.channel, index.qubits, index.whole
    any_layer, flip_layer, barrier = walk.any_layer, walk.flip_layer, walk.barrier
    pending, cone, stop = walk.pending, walk.cone, index.prefix_last
    seen: set[int] = set()
    pop, push, add, follow = heapq.heappop, heapq.heappush, seen.add, walk.follow
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
                if q in any_layer:
                    if prev > stop[q]:
                        push(heap, -prev)
                    else:
                        follow(q, prev)
            continue
        if is_channel[g]:
            if len(link) > 1:
                walk.keep_channel(g, link)
                continue
            q, _, prev = link[0]  # a one-qubit channel on a cone qubit: kept whole
            facts = whole[g] or index.whole_facts(g)
            if flip_layer[q] < 0 and facts.keeps_diagonal[0]:
                pending.setdefault(q, []).append((g, facts))
            else:
                if q in pending:
                    walk.flush(q)
                layer = any_layer[q] + 1
                cone.append((g, layer, qubits[g], facts))
                any_layer[q] = barrier[q] = layer
                if not facts.keeps_diagonal[0]:
                    flip_layer[q] = layer
            if prev > stop[q]:
                push(heap, -prev)
            else:
                follow(q, prev)
            continue
        if pending and walk.flush_any(link):
            dep = -1  # the flushed channels raised the layers: again
            for q, d, _ in link:
                if q in any_layer:
                    level = flip_layer[q] if d else any_layer[q]
                    if level > dep:
                        dep = level
        for q, d, _ in link:
            if d and q in barrier and barrier[q] > dep:
                dep = barrier[q]
        layer = dep + 1
        cone.append((g, layer, qubits[g], None))
        for q, d, prev in link:
            if q in any_layer:
                if layer > any_layer[q]:
                    any_layer[q] = layer
                if not d and layer > flip_layer[q]:
                    flip_layer[q] = layer
            else:
                any_layer[q] = layer
                flip_layer[q] = -1 if d else layer
            if prev > stop[q]:
                push(heap, -prev)
            else:
                follow(q, prev)
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

    def follow(self, q: int, prev: int) -> None:
        """Go on to item ``prev`` of cone qubit ``q``; at ``q``'s prefix, maybe prepare it."""
        index = self.index
        if prev > index.prefix_last[q]:
            heapq.heappush(self.heap, -prev)
        elif self.flip_layer[q] < 0:
            self.prepare(q)
        elif prev >= 0:
            heapq.heappush(self.heap, -prev)

    def prepare(self, q: int) -> None:
        """Replace ``q``'s prefix and its held-back channels by the populations they leave."""
        index = self.index
        held = self.pending.pop(q, ())
        key = (index.prefix_key[q], tuple([f.signature for _, f in held]))
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
        for q, _, _ in link:
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

    def keep_channel(self, g: int, link) -> None:
        """Add channel ``g`` (reduced to the cone's qubits where it can be) to the cone."""
        index, any_layer, flip_layer = self.index, self.any_layer, self.flip_layer
        keep = tuple([q in any_layer for q, _, _ in link])
        facts = index.facts(g, keep)
        if facts is None:
            keep = (True,) * len(link)
            facts = index.facts(g, keep)
        if sum(keep) == 1:
            q = link[keep.index(True)][0]
            if flip_layer[q] < 0 and facts.keeps_diagonal[0]:
                self.pending.setdefault(q, []).append((g, facts))
                self._follow_kept(link, keep)
                return
        if self.pending:
            for (q, _, _), k in zip(link, keep):
                if k and q in self.pending:
                    self.flush(q)
        layer = 0
        for (q, _, _), k in zip(link, keep):
            if k and q in any_layer and any_layer[q] > layer:
                layer = any_layer[q]
        layer += 1
        kept = []
        stays = iter(facts.keeps_diagonal)
        for (q, _, _), k in zip(link, keep):
            if not k:
                continue
            kept.append(q)
            if next(stays):
                if q not in any_layer:
                    flip_layer[q] = -1
            else:
                flip_layer[q] = layer
            any_layer[q] = self.barrier[q] = layer
        self._follow_kept(link, keep)
        self.cone.append((g, layer, tuple(kept), facts))

    def _follow_kept(self, link, keep) -> None:
        for (q, _, prev), k in zip(link, keep):
            if k:
                self.follow(q, prev)


def _preparation(p1: float, table: dict) -> ChannelFacts | None:
    """Facts of the channel that takes ``|0>`` to populations ``(1 - p1, p1)`` (a bit flip)."""
    p1 = min(max(p1, 0.0), 1.0)
    if p1 < 1e-15:
        return None
    channel = bit_flip(p1)
    return _facts(channel, channel.superoperator(), table)


def canonical_noisy_cone(
    index: NoisyIndex, targets: Sequence[tuple[int, str]]
) -> tuple[tuple, list[tuple[int, tuple[int, ...], ChannelFacts | None]], list[int]]:
    """Light cone of a Pauli string or projector in a noisy circuit, in canonical form.

    As :func:`tnsim.network.lightcone.canonical_cone`: equal keys mean equal
    cones (gates *and* channels) up to renaming qubits.

    Returns
    -------
    key : tuple
    items : list of (int, tuple of int, ChannelFacts or None)
        The cone's items in an order equal to the circuit's, each with its kept
        qubits renamed ``0, 1, ...`` and, for channels, their facts.
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
                sig, sym = signature[g], symmetric[g]
            else:
                sig, sym = -1 - facts.signature, facts.symmetric
            if sym and ranks[1] < ranks[0]:
                qs, ranks = (qs[1], qs[0]), (ranks[1], ranks[0])
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
    items: Sequence[tuple[int, tuple[int, ...], ChannelFacts | None]],
    qubits: Sequence[int],
) -> NoisyCircuit:
    """The cone as a noisy circuit on ``len(qubits)`` renamed qubits, with their readout.

    ``items`` and ``qubits`` are those of :func:`canonical_noisy_cone`.
    """
    source = index.noisy.items
    out: list[Operation | ChannelOp] = []
    for g, qs, facts in items:
        if facts is None:
            op = cast(Operation, source[g])
            out.append(Operation(op.name, qs, op.params, op.custom))
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
