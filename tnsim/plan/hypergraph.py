"""Multilevel bisection of a weighted hypergraph (tensors as vertices, labels as hyperedges).

A contraction tree built by recursive bisection is as good as its cuts: the
labels between the two parts of a split are what the join of the parts sums
over, and on networks like grid circuits the best trees come from splits
with the fewest (log-weighted) labels cut (Gray and Kourtis, "Hyper-optimized
tensor network contraction", Quantum 5, 410, 2021).  This module finds such
splits with the multilevel scheme (Karypis, Aggarwal, Kumar and Shekhar,
"Multilevel hypergraph partitioning: applications in VLSI domain", IEEE
Trans. VLSI Systems 7, 69, 1999):

1. *coarsening*: vertices are paired along their heaviest shared hyperedges
   (rating ``sum(weight / (pins - 1)) / (weight_u * weight_v)``), level after
   level, until a few dozen vertices are left;
2. *initial split*: the coarsest hypergraph is split several times by growing
   one part breadth-first from a random vertex, each refined, the best kept;
3. *uncoarsening*: the split is projected back level by level and refined at
   each by Fiduccia-Mattheyses passes (Fiduccia and Mattheyses, "A linear-time
   heuristic for improving network partitions", DAC 1982): vertices move one
   at a time, best gain first, each once per pass, and the pass rolls back to
   its best prefix.

A hyperedge is cut when its pins lie on both sides; the cut weight is the sum
of the weights of cut hyperedges (a label of dimension ``d`` weighs
``log2(d)``, so the cut weight is the log2 size of the labels between the
parts).  Vertex weights count the tensors a coarse vertex stands for; the
balance bounds apply to them.
"""

from __future__ import annotations

import heapq
import math
from collections import deque
from collections.abc import Iterable, Mapping, Sequence

import numpy as np

__all__ = ["Hypergraph", "bisect", "cut_weight", "refine"]


class Hypergraph:
    """A hypergraph with weighted vertices and hyperedges.

    Parameters
    ----------
    num_vertices : int
        Vertices are ``0 .. num_vertices - 1``.
    pins : sequence of sequence of int
        The vertices of each hyperedge (at least two, no repeats).
    weights : sequence of float
        Weight of each hyperedge.
    vertex_weights : sequence of float, optional
        Weight of each vertex (default 1).

    Examples
    --------
    >>> h = Hypergraph(3, [(0, 1), (1, 2)], [1.0, 2.0])
    >>> h.incident[1], h.total_weight
    ([0, 1], 3.0)
    """

    __slots__ = ("incident", "num_vertices", "pins", "total_weight", "vertex_weights", "weights")

    def __init__(
        self,
        num_vertices: int,
        pins: Sequence[Sequence[int]],
        weights: Sequence[float],
        vertex_weights: Sequence[float] | None = None,
    ):
        self.num_vertices = num_vertices
        self.pins: list[tuple[int, ...]] = [tuple(p) for p in pins]
        self.weights: list[float] = [float(w) for w in weights]
        vw = [1.0] * num_vertices if vertex_weights is None else [float(x) for x in vertex_weights]
        self.vertex_weights: list[float] = vw
        self.total_weight = float(sum(vw))
        incident: list[list[int]] = [[] for _ in range(num_vertices)]
        for e, p in enumerate(self.pins):
            for v in p:
                incident[v].append(e)
        self.incident = incident

    @classmethod
    def of_tensors(
        cls,
        labels: Sequence[Iterable[int]],
        size: Mapping[int, int],
        group: Sequence[int] | None = None,
    ) -> Hypergraph:
        """The hypergraph of a group of tensors: one vertex per tensor (in ``group``'s order).

        A label held by two or more tensors of the group is a hyperedge of weight
        ``log2`` of its dimension; labels held once in the group (summed there, or
        shared with tensors outside it) are left out.

        Examples
        --------
        >>> h = Hypergraph.of_tensors([(0, 1), (1, 2), (2, 0), (0,)], {0: 4, 1: 2, 2: 2}, [0, 1, 3])
        >>> h.pins, h.weights
        ([(0, 2), (0, 1)], [2.0, 1.0])
        """
        members = range(len(labels)) if group is None else group
        holders: dict[int, list[int]] = {}
        for k, t in enumerate(members):
            for i in labels[t]:
                holders.setdefault(i, []).append(k)
        pins, weights = [], []
        for i, hs in holders.items():
            if len(hs) > 1 and size[i] > 1:
                pins.append(hs)
                weights.append(math.log2(size[i]))
        return cls(len(members), pins, weights)


def cut_weight(hg: Hypergraph, part: Sequence[int]) -> float:
    """Total weight of the hyperedges with pins on both sides of ``part`` (0/1 per vertex).

    Examples
    --------
    >>> cut_weight(Hypergraph(3, [(0, 1), (1, 2)], [1.0, 2.0]), [0, 0, 1])
    2.0
    """
    total = 0.0
    for p, w in zip(hg.pins, hg.weights):
        first = part[p[0]]
        if any(part[v] != first for v in p):
            total += w
    return total


# -- coarsening ---------------------------------------------------------------------------------


def _match(
    hg: Hypergraph, rng: np.random.Generator, max_weight: float, fixed: Sequence[int]
) -> tuple[list[int], int]:
    """Pair vertices along heavy hyperedges; ``(cluster id per vertex, number of clusters)``.

    Fixed vertices (``fixed[v] >= 0``) stay alone.
    """
    pins, weights, incident, vw = hg.pins, hg.weights, hg.incident, hg.vertex_weights
    cluster = [-1] * hg.num_vertices
    count = 0
    for v in rng.permutation(hg.num_vertices).tolist():
        if cluster[v] >= 0:
            continue
        score: dict[int, float] = {}
        if fixed[v] < 0:
            for e in incident[v]:
                p = pins[e]
                r = weights[e] / (len(p) - 1)
                for u in p:
                    if cluster[u] < 0 and u != v and fixed[u] < 0:
                        score[u] = score.get(u, 0.0) + r
        best, best_score = -1, 0.0
        wv = vw[v]
        for u, s in score.items():
            wu = vw[u]
            if wu + wv <= max_weight:
                s /= wu * wv
                if s > best_score:
                    best, best_score = u, s
        cluster[v] = count
        if best >= 0:
            cluster[best] = count
        count += 1
    return cluster, count


def _contract(hg: Hypergraph, cluster: list[int], count: int) -> Hypergraph:
    """The coarse hypergraph: clusters as vertices; parallel hyperedges merged, weights added."""
    vw = [0.0] * count
    for v, c in enumerate(cluster):
        vw[c] += hg.vertex_weights[v]
    index: dict[tuple[int, ...], int] = {}
    pins: list[tuple[int, ...]] = []
    weights: list[float] = []
    for p, w in zip(hg.pins, hg.weights):
        q = tuple(sorted({cluster[v] for v in p}))
        if len(q) < 2:
            continue
        k = index.get(q)
        if k is None:
            index[q] = len(pins)
            pins.append(q)
            weights.append(w)
        else:
            weights[k] += w
    return Hypergraph(count, pins, weights, vw)


# -- refinement ---------------------------------------------------------------------------------


def refine(
    hg: Hypergraph,
    part: list[int],
    lo: float,
    hi: float,
    rng: np.random.Generator,
    *,
    passes: int = 3,
    stall: int = 60,
    fixed: Sequence[int] | None = None,
) -> float:
    """Fiduccia-Mattheyses passes on a two-way split, in place; return the cut weight.

    ``part`` holds 0 or 1 per vertex; the weight of side 0 must stay within
    ``[lo, hi]`` (a split outside it is first moved inside where possible).
    Each pass moves free vertices one at a time, the largest cut reduction
    first among moves that keep the balance, locks each moved vertex, and
    rolls back to the best point of the pass; it gives up after ``stall``
    moves without a new best.  Passes stop when one finds nothing better.
    Vertices with ``fixed[v] >= 0`` never move.

    Examples
    --------
    >>> h = Hypergraph(4, [(0, 1), (1, 2), (2, 3)], [1.0, 5.0, 1.0])
    >>> part = [0, 0, 1, 1]
    >>> refine(h, part, 1, 3, np.random.default_rng(0)), part
    (1.0, [0, 1, 1, 1])
    """
    n = hg.num_vertices
    fixed = [-1] * n if fixed is None else fixed
    cnt = _counts(hg, part)
    w0 = sum(hg.vertex_weights[v] for v in range(n) if part[v] == 0)
    w0 = _rebalance(hg, part, cnt, w0, lo, hi, fixed)
    cut = _cut(hg, cnt)
    for _ in range(passes):
        moved, cut, w0 = _fm_pass(hg, part, cnt, cut, w0, lo, hi, rng, stall, fixed)
        if not moved:
            break
    return cut


def _counts(hg: Hypergraph, part: Sequence[int]) -> list[list[int]]:
    """Pins of each hyperedge on side 0 and on side 1."""
    m = len(hg.pins)
    cnt = [[0] * m, [0] * m]
    for e, p in enumerate(hg.pins):
        c1 = 0
        for v in p:
            c1 += part[v]
        cnt[1][e] = c1
        cnt[0][e] = len(p) - c1
    return cnt


def _cut(hg: Hypergraph, cnt) -> float:
    c0, c1 = cnt
    return sum(w for e, w in enumerate(hg.weights) if c0[e] and c1[e])


def _rebalance(hg: Hypergraph, part: list[int], cnt, w0: float, lo: float, hi: float, fixed):
    """Move vertices to the lighter side (smallest cut growth first) until side 0 is in bounds."""
    if lo <= w0 <= hi:
        return w0
    src = 0 if w0 > hi else 1
    vw = hg.vertex_weights
    order = sorted(
        (v for v in range(hg.num_vertices) if part[v] == src and fixed[v] < 0),
        key=lambda v: -_gain(hg, part, cnt, v),
    )
    for v in order:
        if lo <= w0 <= hi:
            break
        if src == 0 and w0 - vw[v] < lo - 1e-9 * abs(lo):
            continue
        if src == 1 and w0 + vw[v] > hi + 1e-9 * abs(hi):
            continue
        _move(hg, part, cnt, v)
        w0 += -vw[v] if src == 0 else vw[v]
    return w0


def _gain(hg: Hypergraph, part: list[int], cnt, v: int) -> float:
    """Cut weight removed by moving ``v`` to the other side (negative: added)."""
    a = part[v]
    ca, cb = cnt[a], cnt[1 - a]
    g = 0.0
    weights = hg.weights
    for e in hg.incident[v]:
        if ca[e] == 1:
            g += weights[e]
        elif cb[e] == 0:
            g -= weights[e]
    return g


def _move(hg: Hypergraph, part: list[int], cnt, v: int) -> None:
    a = part[v]
    for e in hg.incident[v]:
        cnt[a][e] -= 1
        cnt[1 - a][e] += 1
    part[v] = 1 - a


def _fm_pass(hg, part, cnt, cut, w0, lo, hi, rng, stall, fixed):
    """One Fiduccia-Mattheyses pass, rolled back to its best point: ``(improved, cut, w0)``."""
    n = hg.num_vertices
    pins, weights, incident, vw = hg.pins, hg.weights, hg.incident, hg.vertex_weights
    gain = [0.0] * n
    version = [0] * n
    locked = [f >= 0 for f in fixed]
    tie = rng.random(n).tolist()
    heaps: list[list[tuple[float, float, int, int]]] = [[], []]
    # Only vertices on a cut hyperedge start in the queues; others join when a move touches them.
    c0, c1 = cnt
    for e, p in enumerate(pins):
        if c0[e] and c1[e]:
            for v in p:
                version[v] = 1
    for v in range(n):
        if version[v] and not locked[v]:
            g = _gain(hg, part, cnt, v)
            gain[v] = g
            heaps[part[v]].append((-g, tie[v], 1, v))
    heapq.heapify(heaps[0])
    heapq.heapify(heaps[1])
    moves: list[int] = []
    mid = 0.5 * (lo + hi)
    best_cut, best_len, best_dev = cut, 0, abs(w0 - mid)
    since = 0
    touched: dict[int, None] = {}

    def top(side: int) -> int:
        h = heaps[side]
        while h:
            _, _, ver, v = h[0]
            if locked[v] or ver != version[v]:
                heapq.heappop(h)
                continue
            return v
        return -1

    while since < stall:
        v0, v1 = top(0), top(1)
        ok0 = v0 >= 0 and w0 - vw[v0] >= lo - 1e-9
        ok1 = v1 >= 0 and w0 + vw[v1] <= hi + 1e-9
        if ok0 and ok1:
            v = v0 if (gain[v0], tie[v0]) >= (gain[v1], tie[v1]) else v1
        elif ok0 or ok1:
            v = v0 if ok0 else v1
        else:
            break
        a = part[v]
        b = 1 - a
        heapq.heappop(heaps[a])
        locked[v] = True
        ca, cb = cnt[a], cnt[b]
        touched.clear()
        for e in incident[v]:
            p = pins[e]
            we = weights[e]
            n_b = cb[e]
            # The classic gain updates (Fiduccia and Mattheyses 1982): before and after the move.
            if n_b == 0:
                for u in p:
                    if not locked[u]:
                        gain[u] += we
                        touched[u] = None
            elif n_b == 1:
                for u in p:
                    if not locked[u] and part[u] == b:
                        gain[u] -= we
                        touched[u] = None
            ca[e] -= 1
            cb[e] = n_b + 1
            n_a = ca[e]
            if n_a == 0:
                for u in p:
                    if not locked[u]:
                        gain[u] -= we
                        touched[u] = None
            elif n_a == 1:
                for u in p:
                    if not locked[u] and part[u] == a:
                        gain[u] += we
                        touched[u] = None
        part[v] = b
        cut -= gain[v]
        w0 += vw[v] if b == 0 else -vw[v]
        moves.append(v)
        for u in touched:
            if not version[u]:
                gain[u] = _gain(hg, part, cnt, u)
            version[u] += 1
            heapq.heappush(heaps[part[u]], (-gain[u], tie[u], version[u], u))
        dev = abs(w0 - mid)
        if cut < best_cut - 1e-9 or (cut < best_cut + 1e-9 and dev < best_dev):
            best_cut, best_len, best_dev = cut, len(moves), dev
            since = 0
        else:
            since += 1
    for v in reversed(moves[best_len:]):
        w0 += vw[v] if part[v] == 1 else -vw[v]
        _move(hg, part, cnt, v)
    return best_len > 0, best_cut, w0


# -- the multilevel bisection -------------------------------------------------------------------


def _grow(hg: Hypergraph, rng: np.random.Generator, target: float, fixed) -> list[int]:
    """Side 1 grown breadth-first up to ``target`` weight (rest side 0).

    The growth starts at the vertices fixed to side 1, or at a random free vertex;
    vertices fixed to side 0 are never taken.
    """
    n = hg.num_vertices
    part = [1 if f == 1 else 0 for f in fixed]
    pins, incident, vw = hg.pins, hg.incident, hg.vertex_weights
    order = rng.permutation(n).tolist()
    weight = sum(vw[v] for v in range(n) if part[v])
    seen = [f >= 0 for f in fixed]
    queue = deque(v for v in range(n) if fixed[v] == 1)
    k = 0
    while weight < target:
        if not queue:
            while k < n and seen[order[k]]:
                k += 1
            if k == n:
                break
            seen[order[k]] = True
            queue.append(order[k])
        v = queue.popleft()
        if fixed[v] < 0:
            if weight + vw[v] > target and weight > 0:
                continue
            part[v] = 1
            weight += vw[v]
        for e in incident[v]:
            for u in pins[e]:
                if not seen[u]:
                    seen[u] = True
                    queue.append(u)
    return part


def bisect(
    hg: Hypergraph,
    imbalance: float,
    seed: int | np.random.Generator | None = 0,
    *,
    fixed: Sequence[int] | None = None,
    coarse_size: int = 48,
    tries: int = 4,
    passes: int = 3,
) -> list[int]:
    """Split a hypergraph in two with a small cut weight (multilevel; see the module notes).

    Parameters
    ----------
    hg : Hypergraph
        The hypergraph (at least two vertices).
    imbalance : float
        In ``[0, 1)``: each side's vertex weight lies within ``(1 -/+ imbalance) / 2``
        of the total, give or take half the heaviest vertex (at least one vertex each).
    seed : int or numpy.random.Generator
        Source of the random choices (matching order, initial splits, ties).
    fixed : sequence of int, optional
        Per vertex: ``0`` or ``1`` to fix it to that side, ``-1`` (default) free.
        Fixed vertices of weight 0 serve as terminals that pull hyperedges to a side.
    coarse_size : int
        Coarsening stops at about this many vertices.
    tries : int
        Initial splits tried on the coarsest hypergraph.
    passes : int
        Refinement passes per level.

    Returns
    -------
    list of int
        0 or 1 per vertex.

    Examples
    --------
    >>> ring = Hypergraph(8, [(k, (k + 1) % 8) for k in range(8)], [1.0] * 8)
    >>> part = bisect(ring, 0.0, seed=1)
    >>> sum(part), cut_weight(ring, part)
    (4, 2.0)
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    fix = [-1] * hg.num_vertices if fixed is None else [int(f) for f in fixed]
    total = hg.total_weight
    free = [w for w, f in zip(hg.vertex_weights, fix) if f < 0] or [0.0]
    # Half a vertex of slack each way, so that an exact halving of an odd total is possible.
    lo = max(min(free), 0.5 * (1 - imbalance) * total - 0.5 * max(free))
    hi = max(total - lo, lo)
    levels: list[tuple[Hypergraph, list[int], list[int]]] = []
    cur, cur_fix = hg, fix
    max_weight = max(1.0, 1.5 * total / coarse_size)
    while cur.num_vertices > coarse_size:
        cluster, count = _match(cur, rng, max_weight, cur_fix)
        if count > 0.92 * cur.num_vertices:
            break
        levels.append((cur, cluster, cur_fix))
        coarse_fix = [-1] * count
        for v, c in enumerate(cluster):
            if cur_fix[v] >= 0:
                coarse_fix[c] = cur_fix[v]
        cur, cur_fix = _contract(cur, cluster, count), coarse_fix
    best: tuple[float, list[int]] | None = None
    for _ in range(max(1, tries)):
        target = float(rng.uniform(lo, 0.5 * total)) if hi > lo else lo
        part = _grow(cur, rng, total - target, cur_fix)
        cut = refine(cur, part, lo, hi, rng, passes=passes, fixed=cur_fix)
        if best is None or cut < best[0]:
            best = (cut, part)
    assert best is not None
    part = best[1]
    for fine, cluster, fine_fix in reversed(levels):
        part = [part[c] for c in cluster]
        refine(fine, part, lo, hi, rng, passes=passes, fixed=fine_fix)
    return part
