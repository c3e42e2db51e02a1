"""Exact contraction orders of small networks: dynamic programming over subsets, in numpy.

For a network of ``n <= MAX_LEAVES`` tensors, every subset ``S`` of them has one
result: its labels are those held inside ``S`` and also outside it (or open).
The cheapest tree for ``S`` joins the cheapest trees of some split ``A | S - A``
(Robertson and Seymour's branch decompositions aside, this is the classical
subset dynamic programme for optimal contraction orders; Pfeifer, Haegeman and
Verstraete, "Faster identification of optimal contraction sequences for tensor
networks", Phys. Rev. E 90, 033315, 2014).  Here the ``3**n`` splits of all
subsets are enumerated once per ``n`` and evaluated level by level (subsets
of equal size together) with numpy on 64-bit label masks, and the cost is
tnsim's own (:mod:`tnsim.plan.tree`: 8 real FLOPs per element of the union of
the two operands' labels; a leaf's private labels are summed at its first
join whatever the tree, a constant left out).  Outer products are allowed.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence

import numpy as np

__all__ = ["MAX_LEAVES", "exact_path", "exact_plan"]

MAX_LEAVES = 12
"""Largest network :func:`exact_path` plans (``3**12`` splits, a few milliseconds)."""

_SPLITS: dict[int, list[tuple[np.ndarray, np.ndarray, np.ndarray]]] = {}


def _splits(n: int) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """Per subset size ``k = 2..n``: subsets ``S``, one part ``A`` of each split, group starts.

    ``A`` holds the lowest member of ``S`` (each unordered split once); the splits of
    one subset are contiguous.
    """
    if n in _SPLITS:
        return _SPLITS[n]
    levels: list[tuple[list[int], list[int], list[int]]] = [([], [], []) for _ in range(n + 1)]
    for s in range(1, 1 << n):
        k = s.bit_count()
        if k < 2:
            continue
        low = s & -s
        rest = s ^ low
        subs, parts, starts = levels[k]
        starts.append(len(parts))
        # Every A = low | (a submask of rest) except A = S itself.
        a = rest
        while True:
            if a != rest:
                subs.append(s)
                parts.append(low | a)
            if a == 0:
                break
            a = (a - 1) & rest
    out = []
    for k in range(2, n + 1):
        subs, parts, starts = levels[k]
        out.append(
            (np.array(subs, np.int64), np.array(parts, np.int64), np.array(starts, np.int64))
        )
    _SPLITS[n] = out
    return out


def _weigher(weights: Sequence[float]):
    """A function giving the weight sum of the set bits of uint64 masks (byte tables)."""
    nbytes = max(1, math.ceil(len(weights) / 8))
    w = np.zeros(8 * nbytes)
    w[: len(weights)] = weights
    bits = (np.arange(256)[:, None] >> np.arange(8)) & 1
    table = w.reshape(nbytes, 8) @ bits.T

    def weigh(masks: np.ndarray) -> np.ndarray:
        total = np.zeros(masks.shape)
        for j in range(nbytes):
            total += table[j][((masks >> np.uint64(8 * j)) & np.uint64(255)).astype(np.int64)]
        return total

    return weigh


def exact_path(
    labels: Sequence[Iterable[int]],
    keep: Iterable[int],
    size: Mapping[int, int],
    *,
    max_numel: float | None = None,
) -> tuple[tuple[int, int], ...] | None:
    """The cheapest SSA path of a small network (tnsim's FLOP count), or ``None``.

    Parameters
    ----------
    labels : sequence of iterable of int
        Labels of each tensor (at most :data:`MAX_LEAVES` tensors).
    keep : iterable of int
        Open labels of the result.
    size : mapping
        Dimension of every label.
    max_numel : float, optional
        No intermediate but the result may have more elements.

    Returns
    -------
    tuple of (int, int) or None
        ``None`` when the network is too large (tensors, or more than 64
        labels) or no tree meets ``max_numel``.

    Examples
    --------
    >>> exact_path([(0, 1), (1, 2), (2, 3)], (0, 3), {0: 8, 1: 2, 2: 8, 3: 2})
    ((1, 2), (0, 3))
    """
    found = exact_plan(labels, keep, size, max_numel=max_numel)
    return None if found is None else found[0]


def exact_plan(
    labels: Sequence[Iterable[int]],
    keep: Iterable[int],
    size: Mapping[int, int],
    *,
    max_numel: float | None = None,
) -> tuple[tuple[tuple[int, int], ...], float] | None:
    """:func:`exact_path` with the path's cost: its FLOPs less the leaves' own sums.

    The cost is what :func:`tnsim.plan.tree.tree_cost` counts for the path, less
    ``2 (|leaf| - |leaf'|)`` for each leaf holding labels no other tensor holds (a
    constant), as a float.

    Examples
    --------
    >>> exact_plan([(0, 1), (1, 2), (2, 3)], (0, 3), {0: 8, 1: 2, 2: 8, 3: 2})
    (((1, 2), (0, 3)), 512.0)
    """
    sets = [frozenset(ix) for ix in labels]
    n = len(sets)
    if n < 2:
        return (), 0.0
    local = sorted(set().union(*sets))
    if n > MAX_LEAVES or len(local) > 64:
        return None
    bit = {i: k for k, i in enumerate(local)}
    leaf = np.array([sum(1 << bit[i] for i in ix) for ix in sets], dtype=np.uint64)
    keep_mask = np.uint64(sum(1 << bit[i] for i in set(keep) if i in bit))
    weigh = _weigher([math.log2(size[i]) for i in local])
    full = (1 << n) - 1
    subsets = np.arange(1 << n)
    inside = np.zeros(1 << n, dtype=np.uint64)
    for b in range(n):
        inside[(subsets >> b) & 1 == 1] |= leaf[b]
    kept = inside & (inside[full ^ subsets] | keep_mask)
    log_kept = weigh(kept)
    cost = np.full(1 << n, np.inf)
    cost[1 << np.arange(n)] = 0.0
    choice = np.zeros(1 << n, dtype=np.int64)
    cap = math.inf if max_numel is None else math.log2(max(max_numel, 1.0)) + 1e-9
    for subs, parts, starts in _splits(n):
        other = subs ^ parts
        union = weigh(kept[parts] | kept[other])
        vals = cost[parts] + cost[other] + 8.0 * np.exp2(union)
        best = np.minimum.reduceat(vals, starts)
        group = np.repeat(np.arange(len(starts)), np.diff(np.append(starts, len(vals))))
        first = np.flatnonzero(vals <= best[group])
        # The first split reaching each group's minimum.
        _, at = np.unique(group[first], return_index=True)
        owners = subs[starts]
        ok = (log_kept[owners] <= cap) | (owners == full)
        cost[owners] = np.where(ok, best, np.inf)
        choice[owners] = parts[first[at]]
    if not np.isfinite(cost[full]):
        return None
    path: list[tuple[int, int]] = []

    def build(s: int) -> int:
        if s & (s - 1) == 0:
            return s.bit_length() - 1
        a = int(choice[s])
        x = build(a)
        y = build(s ^ a)
        path.append((x, y))
        return n + len(path) - 1

    build(full)
    return tuple(path), float(cost[full])
