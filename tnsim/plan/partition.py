"""Contraction trees by recursive bisection of the tensor graph.

The tensors are split in two parts with few (log-weighted) labels between them,
each part is split again, down to groups of a few tensors that are ordered
greedily; the tree joins the parts back in the reverse order of the splits.
A split is a *sweep cut* of a spectral ordering (the Fiedler vector of the
weighted graph Laplacian; Fiedler, Czech. Math. J. 23, 298, 1973): among the
prefixes whose size lies in the allowed balance window, the one cutting the
fewest label weight (a hyperedge counts once) is taken, optionally refined by
Kernighan-Lin (Kernighan and Lin, Bell Syst. Tech. J. 49, 291, 1970).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import networkx as nx
import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .builder import PathBuilder
from .tree import tree_cost

__all__ = ["bisection_path", "sweep_path"]


def _spectral(n: int, rows, cols, vals, rng: np.random.Generator, k: int) -> np.ndarray:
    """The ``k`` smallest non-trivial Laplacian eigenvectors of a weighted graph (columns)."""
    w = sp.coo_matrix((vals, (rows, cols)), shape=(n, n)).tocsr()
    w = w + w.T
    deg = np.asarray(w.sum(axis=1)).ravel()
    lap = sp.diags(deg) - w
    if n <= 600:
        _, vecs = np.linalg.eigh(lap.toarray())
        return vecs[:, 1 : k + 1]
    v0 = rng.standard_normal(n)
    vals_, vecs = spla.eigsh(lap.tocsc(), k=k + 1, sigma=-1e-3, which="LM", v0=v0)
    return vecs[:, np.argsort(vals_)[1 : k + 1]]


def _sweep(order, labels, weight, lo: int, hi: int) -> tuple[float, int]:
    """Best split position in ``[lo, hi]`` of ``order`` by cut weight; hyperedges count once."""
    prof = _cut_profile(order, labels, weight)
    return min((prof[k - 1], k) for k in range(lo, hi + 1))


def _split(group, labels, weight, rng, imbalance, noise, refine, num_vectors=3, mixes=4):
    """Split ``group`` (list of tensor ids) in two."""
    index = {t: k for k, t in enumerate(group)}
    holders: dict[int, list[int]] = {}
    for t in group:
        for i in labels[t]:
            holders.setdefault(i, []).append(index[t])
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
    lo = max(1, int(math.floor(n * (0.5 - imbalance))))
    hi = min(n - 1, int(math.ceil(n * (0.5 + imbalance))))
    best = (math.inf, None, 0)
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


def sweep_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    num_vectors: int = 4,
    mixes: int = 8,
    noise: float = 0.0,
    seed: int | np.random.Generator | None = 0,
) -> tuple[tuple[int, int], ...]:
    """Plan a sweep: tensors absorbed one by one into a growing front, in spectral order.

    The order is the one, among projections of the network's spectral embedding
    (a few low Laplacian eigenvectors and random mixtures), whose largest cut
    along the sweep is smallest (a cutwidth heuristic).  Each connected
    component is swept on its own.

    Examples
    --------
    >>> chain = [(k, k + 1) for k in range(6)]
    >>> len(sweep_path(chain, (0, 6), {k: 2 for k in range(7)}))
    5
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    b = PathBuilder(inputs, output, size)
    weight = {i: math.log2(size[i]) + 1e-3 for ix in inputs for i in ix}
    labels = b.labels
    n = b.n
    holders: dict[int, list[int]] = {}
    for t in range(n):
        for i in labels[t]:
            holders.setdefault(i, []).append(t)
    rows, cols, vals = [], [], []
    for i, hs in holders.items():
        w = weight[i] / max(1, len(hs) - 1)
        if noise:
            w *= math.exp(noise * rng.standard_normal())
        for a in range(len(hs)):
            for c in range(a + 1, len(hs)):
                rows.append(hs[a])
                cols.append(hs[c])
                vals.append(w)
    graph = sp.coo_matrix((np.ones(len(rows)), (rows, cols)), shape=(n, n))
    ncomp, comp = sp.csgraph.connected_components(graph, directed=False)
    roots = []
    for c in range(ncomp):
        members = [t for t in range(n) if comp[t] == c]
        if len(members) <= 2:
            roots.append(b.join_greedy(members) if len(members) > 1 else members[0])
            continue
        index = {t: k for k, t in enumerate(members)}
        sel = [k for k, (r, _) in enumerate(zip(rows, cols)) if comp[r] == c]
        vecs = _spectral(
            len(members),
            [index[rows[k]] for k in sel],
            [index[cols[k]] for k in sel],
            [vals[k] for k in sel],
            rng,
            min(len(members) - 2, num_vectors),
        )
        eye = np.eye(vecs.shape[1])
        directions = (
            list(eye) + list(-eye) + [rng.standard_normal(vecs.shape[1]) for _ in range(mixes)]
        )
        best = None
        for d in directions:
            order = [members[k] for k in np.argsort(vecs @ d, kind="stable")]
            sub = [labels[t] for t in order]
            ext = b.external(order)
            chain = [(0, 1)] + [(len(order) + k - 2, k) for k in range(2, len(order))]
            key = tree_cost(sub, ext, size, chain).flops
            if best is None or key < best[0]:
                best = (key, order)
        order = best[1]
        cur = order[0]
        for t in order[1:]:
            cur = b.join(cur, t)
        roots.append(cur)
    if len(roots) > 1:
        b.join_greedy(roots)
    return b.finish_greedy()
