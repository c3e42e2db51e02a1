"""Contraction trees by recursive bisection of the tensor graph.

The tensors are split in two parts with few (log-weighted) labels between them,
each part is split again, down to groups of a few tensors that are ordered
greedily; the tree joins the parts back in the reverse order of the splits.
A split is a *sweep cut* of a spectral ordering (the Fiedler vector of the
weighted graph Laplacian; Fiedler, Czech. Math. J. 23, 298, 1973): among the
prefixes whose size lies in the allowed balance window, the one cutting the
fewest label weight (a hyperedge counts once) is taken, optionally refined by
Kernighan-Lin (Kernighan and Lin, Bell Syst. Tech. J. 49, 291, 1970).

The same spectral embedding also steers *sweeps* (:func:`sweep_path`): one
front absorbs the tensors one at a time, always the neighbour that keeps the
front thinnest, pulled along one spectral direction so that it crosses the
network.  On grid circuits this finds the row- or column-wise sweeps whose
front is a single cut of the grid.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Iterable, Mapping, Sequence

import networkx as nx
import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from tnsim.plan.builder import PathBuilder

__all__ = ["bisection_path", "sweep_order", "sweep_path"]


def _spectral(n: int, rows, cols, vals, rng: np.random.Generator, k: int) -> np.ndarray:
    """The ``k`` smallest non-trivial Laplacian eigenvectors of a weighted graph (columns)."""
    w = sp.coo_matrix((vals, (rows, cols)), shape=(n, n)).tocsr()
    w = w + w.T
    deg = np.asarray(w.sum(axis=1)).ravel()
    lap = sp.diags(deg) - w
    if n <= 40:
        # Dense only for small graphs: a multi-threaded LAPACK on a busy machine took
        # seconds on a few hundred nodes, where ARPACK's shift-invert takes milliseconds.
        _, vecs = np.linalg.eigh(lap.toarray())
        return vecs[:, 1 : k + 1]
    v0 = rng.standard_normal(n)
    vals_, vecs = spla.eigsh(lap.tocsc(), k=k + 1, sigma=-1e-3, which="LM", v0=v0)
    return vecs[:, np.argsort(vals_)[1 : k + 1]]


def _sweep(order, labels, weight, lo: int, hi: int) -> tuple[float, int]:
    """Best split position in ``[lo, hi]`` of ``order`` by cut weight; hyperedges count once."""
    prof = _cut_profile(order, labels, weight)
    return min((prof[k - 1], k) for k in range(lo, hi + 1))


def _edges(group, labels, weight, rng=None, noise=0.0):
    """Weighted edge list of the tensor graph of ``group`` (positions in ``group``).

    A label held by ``h`` tensors of the group joins each pair of them with
    weight ``weight[label] / (h - 1)``, times log-normal noise of scale ``noise``.
    """
    holders: dict[int, list[int]] = {}
    for k, t in enumerate(group):
        for i in labels[t]:
            holders.setdefault(i, []).append(k)
    rows, cols, vals = [], [], []
    for i, hs in holders.items():
        if len(hs) < 2:
            continue
        w = weight[i] / (len(hs) - 1)
        if noise:
            w *= math.exp(noise * rng.standard_normal())
        for a in range(len(hs)):
            for b in range(a + 1, len(hs)):
                rows.append(hs[a])
                cols.append(hs[b])
                vals.append(w)
    return rows, cols, vals


def _split(group, labels, weight, rng, imbalance, noise, refine, num_vectors=3, mixes=4):
    """Split ``group`` (list of tensor ids) in two."""
    index = {t: k for k, t in enumerate(group)}
    rows, cols, vals = _edges(group, labels, weight, rng, noise)
    n = len(group)
    graph = sp.coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(n, n))
    ncomp, comp = sp.csgraph.connected_components(graph, directed=False)
    if ncomp > 1:
        sizes = np.bincount(comp)
        part_a: set[int] = set()
        acc = 0
        for c in np.argsort(-sizes):
            if acc < n / 2:
                part_a.add(int(c))
                acc += sizes[c]
        a = [t for k, t in enumerate(group) if comp[k] in part_a]
        b = [t for k, t in enumerate(group) if comp[k] not in part_a]
        if a and b:
            return a, b
    vecs = _spectral(n, rows, cols, vals, rng, min(n - 2, num_vectors))
    lo = max(1, math.floor(n * (0.5 - imbalance)))
    hi = min(n - 1, math.ceil(n * (0.5 + imbalance)))
    best: tuple[float, list[int], int] = (math.inf, list(group), n // 2)
    directions = list(np.eye(vecs.shape[1]))
    for _ in range(mixes):
        directions.append(rng.standard_normal(vecs.shape[1]))
    for d in directions:
        order = [group[k] for k in np.argsort(vecs @ d, kind="stable")]
        cut, k = _sweep(order, labels, weight, lo, hi)
        if cut < best[0]:
            best = (cut, order, k)
    _, order, k = best
    a, b = order[:k], order[k:]
    if refine and n <= 400:
        g = nx.Graph()
        g.add_nodes_from(range(n))
        for r, c, v in zip(rows, cols, vals):
            if g.has_edge(r, c):
                g[r][c]["weight"] += v
            else:
                g.add_edge(r, c, weight=v)
        pa = {index[t] for t in a}
        pb = {index[t] for t in b}
        pa, pb = nx.community.kernighan_lin_bisection(
            g, partition=(pa, pb), max_iter=refine, seed=int(rng.integers(2**31))
        )
        a = [group[k] for k in sorted(pa)]
        b = [group[k] for k in sorted(pb)]
    return a, b


def bisection_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    leaf_size: int = 8,
    imbalance: float = 0.2,
    noise: float = 0.0,
    refine: int = 0,
    seed: int | np.random.Generator | None = 0,
) -> tuple[tuple[int, int], ...]:
    """Plan by recursive spectral bisection of the tensor graph.

    Parameters
    ----------
    inputs, output, size
        The network: labels of each tensor, open labels, label dimensions.
    leaf_size : int
        Groups of at most this many tensors are ordered greedily.
    imbalance : float
        A part may hold between ``1/2 - imbalance`` and ``1/2 + imbalance`` of
        the tensors being split.
    noise : float
        Log-normal noise on the edge weights (randomises the splits).
    refine : int
        Kernighan-Lin passes after each split (0: none; used on parts of at
        most 400 tensors).
    seed : int or numpy.random.Generator
        Source of the noise.

    Returns
    -------
    tuple of (int, int)
        SSA path.

    Examples
    --------
    >>> ring = [(k, (k + 1) % 6) for k in range(6)]
    >>> len(bisection_path(ring, (), {k: 2 for k in range(6)}, leaf_size=2))
    5
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    b = PathBuilder(inputs, output, size)
    weight = {i: math.log2(size[i]) + 1e-3 for ix in inputs for i in ix}
    labels = b.labels

    def rec(group: list[int]) -> int:
        if len(group) <= leaf_size:
            return b.join_greedy(group)
        part_a, part_b = _split(group, labels, weight, rng, imbalance, noise, refine)
        x = rec(part_a)
        y = rec(part_b)
        return b.join(x, y)

    if b.n > 1:
        rec(list(range(b.n)))
    return b.finish_greedy()


def _cut_profile(order, labels, weight) -> list[float]:
    """Cut weight after each prefix of ``order`` (hyperedges count once)."""
    total: dict[int, int] = {}
    for t in order:
        for i in labels[t]:
            total[i] = total.get(i, 0) + 1
    count_a: dict[int, int] = {}
    cut = 0.0
    prof = []
    for t in order:
        for i in labels[t]:
            c = count_a.get(i, 0)
            was = 0 < c < total[i]
            count_a[i] = c + 1
            now = c + 1 < total[i]
            if now and not was:
                cut += weight[i]
            elif was and not now:
                cut -= weight[i]
        prof.append(cut)
    return prof


_EMBEDDINGS: dict[tuple, list[tuple[list[int], np.ndarray, np.ndarray, np.ndarray]]] = {}


DIRECTIONS = 48


"""Directions of the spectral embedding scored per network for sweeps (besides the axes)."""


def _embedding(labels: Sequence[frozenset[int]], size, num_vectors: int):
    """Connected components of the tensor graph, their spectral embeddings and sweep directions.

    The embedding is the ``num_vectors`` lowest non-trivial eigenvectors of the
    component's Laplacian (edge weights: log2 of the label size, shared out over
    a hyperedge's holders), computed with a fixed seed so that it can be reused
    by every sweep trial on the same network.  Each component also gets
    candidate directions in that space, best first, with their scores: the
    log2 of the sum of ``2 ** front`` over the cuts of the order by projection
    (:func:`_cut_profile`).  On a grid circuit the two lowest eigenvectors span
    its two grid directions but in an arbitrary rotation (their eigenvalues are
    nearly equal), and a sweep along a diagonal has fronts twice as wide as one
    along a grid direction: the scores find the grid directions.  Returns
    ``(members, vectors, directions, scores)`` per component.
    """
    key = (tuple(tuple(sorted(ix)) for ix in labels), num_vectors)
    if key in _EMBEDDINGS:
        return _EMBEDDINGS[key]
    n = len(labels)
    weight = {i: math.log2(size[i]) + 1e-3 for ix in labels for i in ix}
    rows, cols, _ = _edges(range(n), labels, weight)
    graph = sp.coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(n, n))
    _, comp = sp.csgraph.connected_components(graph, directed=False)
    parts = []
    rng = np.random.default_rng(0)
    groups: dict[int, list[int]] = {}
    for t, c in enumerate(comp.tolist()):
        groups.setdefault(c, []).append(t)
    for members in groups.values():
        if len(members) <= 2:
            one = np.ones((1, 1))
            parts.append((members, np.zeros((len(members), 1)), one, np.zeros(1)))
            continue
        r, c, v = _edges(members, labels, weight)
        vecs = _spectral(len(members), r, c, v, rng, min(len(members) - 2, num_vectors))
        dirs, scores = _score_directions([labels[t] for t in members], weight, vecs, rng)
        parts.append((members, vecs, dirs, scores))
    if len(_EMBEDDINGS) >= 8:
        _EMBEDDINGS.pop(next(iter(_EMBEDDINGS)))
    _EMBEDDINGS[key] = parts
    return parts


def _score_directions(labels, weight, vecs: np.ndarray, rng: np.random.Generator):
    """Candidate sweep directions (rows, best first) and their scores (see :func:`_embedding`)."""
    k = vecs.shape[1]
    cands: list[np.ndarray] = [np.eye(k)[a] for a in range(k)]
    if k >= 2:
        # The plane of the two lowest eigenvectors, finely: grid directions lie in it.
        for ang in np.linspace(0.0, math.pi, 25)[1:-1]:
            d = np.zeros(k)
            d[0], d[1] = math.cos(ang), math.sin(ang)
            cands.append(d)
    for _ in range(DIRECTIONS - len(cands)):
        r = rng.standard_normal(k)
        cands.append(r / np.linalg.norm(r))
    scores: list[float] = []
    for d in cands:
        order = np.argsort(vecs @ d, kind="stable").tolist()
        prof = np.array(_cut_profile(order, labels, weight))
        top = float(prof.max()) if len(prof) else 0.0
        scores.append(top + math.log2(float(np.exp2(prof - top).sum())) if len(prof) else 0.0)
    rank = np.argsort(scores, kind="stable")
    return np.array(cands)[rank], np.array(scores)[rank]


def sweep_order(
    labels: Sequence[frozenset[int]],
    output: Iterable[int],
    size: Mapping[int, int],
    position: Sequence[float] | np.ndarray,
    *,
    pull: float = 3.0,
    noise: float = 0.0,
    rng: np.random.Generator | None = None,
) -> list[int]:
    """Order tensors for a sweep: a front grows from the lowest ``position``, one tensor at a time.

    The next tensor is the front's neighbour with the smallest key: the label
    bits its absorption adds to the front (labels it closes count negative),
    plus ``pull`` times its ``position`` (in [0, 1]), plus Gumbel noise of
    scale ``noise``.  The pull keeps the front advancing across the network;
    the first term keeps it thin.  A front with no neighbour left restarts at
    the lowest remaining position.

    Examples
    --------
    >>> chain = [frozenset({k, k + 1}) for k in range(4)]
    >>> sweep_order(chain, (), {k: 2 for k in range(5)}, [0.9, 0.1, 0.5, 0.7])
    [1, 2, 3, 0]
    """
    n = len(labels)
    holders: dict[int, list[int]] = {}
    for t, ix in enumerate(labels):
        for i in ix:
            holders.setdefault(i, []).append(t)
    weight = {i: math.log2(size[i]) for i in holders}
    out = set(output)
    left = {i: len(h) for i, h in holders.items()}
    front: set[int] = set()
    inside = [False] * n
    version = [0] * n
    heap: list[tuple[float, int, int]] = []

    def push(t: int) -> None:
        version[t] += 1
        grow = 0.0
        for i in labels[t]:
            if i in front:
                if left[i] == 1 and i not in out:
                    grow -= weight[i]
            elif left[i] > 1 or i in out:
                grow += weight[i]
        key = grow + pull * position[t]
        if noise and rng is not None:
            key += noise * float(rng.gumbel())
        heapq.heappush(heap, (key, t, version[t]))

    by_position = sorted(range(n), key=lambda t: position[t])
    next_start = 0
    order: list[int] = []
    while len(order) < n:
        if not heap:
            while inside[by_position[next_start]]:
                next_start += 1
            push(by_position[next_start])
        _, t, v = heapq.heappop(heap)
        if inside[t] or v != version[t]:
            continue
        inside[t] = True
        order.append(t)
        touched: set[int] = set()
        for i in labels[t]:
            left[i] -= 1
            if left[i] > 0 or i in out:
                front.add(i)
            else:
                front.discard(i)
            touched.update(u for u in holders[i] if not inside[u])
        for u in touched:
            push(u)
    return order


def sweep_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    pull: float = 3.0,
    noise: float = 0.0,
    mix: float = 0.3,
    num_vectors: int = 4,
    seed: int | np.random.Generator | None = 0,
) -> tuple[tuple[int, int], ...]:
    """Plan a sweep: tensors absorbed one by one into a growing front (:func:`sweep_order`).

    The direction of the sweep is drawn from directions in the space of the
    network's ``num_vectors`` lowest Laplacian eigenvectors, those whose
    projected order has the thinnest fronts more often (see :func:`_embedding`),
    plus ``mix`` times a random mixture of the eigenvectors, with a random sign.
    Each connected component is swept on its own; the components are then
    joined greedily.

    Examples
    --------
    >>> chain = [(k, k + 1) for k in range(6)]
    >>> len(sweep_path(chain, (0, 6), {k: 2 for k in range(7)}))
    5
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    b = PathBuilder(inputs, output, size)
    roots = []
    for members, vecs, dirs, scores in _embedding(b.labels, size, num_vectors):
        if len(members) <= 2:
            roots.append(b.join_greedy(members))
            continue
        k = vecs.shape[1]
        # Directions whose projected order has thin fronts, the best more often: weight
        # 2 ** -(score - best) (a direction one bit worse is drawn half as often).
        p = np.exp2(-(scores - scores[0]))
        direction = dirs[int(rng.choice(len(dirs), p=p / p.sum()))] * rng.choice([-1.0, 1.0])
        direction = direction + mix * rng.standard_normal(k)
        z = vecs @ direction
        position = np.empty(len(members))
        position[np.argsort(z, kind="stable")] = np.arange(len(members)) / len(members)
        sub = [b.labels[t] for t in members]
        ext = b.external(members)
        order = sweep_order(sub, ext, size, position, pull=pull, noise=noise, rng=rng)
        cur = members[order[0]]
        for t in order[1:]:
            cur = b.join(cur, members[t])
        roots.append(cur)
    if len(roots) > 1:
        b.join_greedy(roots)
    return b.finish_greedy()
