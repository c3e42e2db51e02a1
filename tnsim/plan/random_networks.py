"""Seeded random tensor networks (hyperedges and open labels included) for tests and benchmarks."""

from __future__ import annotations

import numpy as np

__all__ = ["random_arrays", "random_network"]


def random_network(
    num_tensors: int,
    *,
    num_labels: int | None = None,
    max_rank: int = 4,
    max_size: int = 3,
    num_open: int = 1,
    hyper: float = 0.2,
    seed: int = 0,
) -> tuple[list[tuple[int, ...]], tuple[int, ...], dict[int, int]]:
    """A random connected network: label lists, output labels and label sizes.

    Each label joins two tensors, or with probability ``hyper`` three or more
    (a hyperedge); ``num_open`` labels are open (kept in the output), and some
    labels may belong to a single tensor (summed there).

    Examples
    --------
    >>> ins, out, size = random_network(4, seed=1)
    >>> len(ins), len(out)
    (4, 1)
    """
    rng = np.random.default_rng(seed)
    n = num_tensors
    m = num_labels if num_labels is not None else int(1.5 * n) + 1
    labels: list[list[int]] = [[] for _ in range(n)]
    size: dict[int, int] = {}
    nxt = 0

    def add(members) -> None:
        nonlocal nxt
        for t in members:
            labels[t].append(nxt)
        size[nxt] = int(rng.integers(2, max_size + 1))
        nxt += 1

    for t in range(1, n):  # a random spanning tree keeps it connected
        add([int(rng.integers(0, t)), t])
    while nxt < m:
        k = 2
        if rng.random() < hyper:
            k = int(rng.integers(3, min(n, 4) + 1)) if n >= 3 else 2
        if rng.random() < 0.1:
            k = 1
        members = [int(t) for t in rng.choice(n, size=min(k, n), replace=False)]
        if all(len(labels[t]) < max_rank for t in members):
            add(members)
        else:
            m -= 1
    used = sorted(size)
    opened = rng.choice(used, size=min(num_open, len(used)), replace=False)
    return [tuple(ix) for ix in labels], tuple(int(i) for i in opened), size


def random_arrays(inputs, size, *, seed: int = 0, dtype=np.complex128) -> list[np.ndarray]:
    """Random complex arrays (entries in the unit square) for a network's label lists."""
    rng = np.random.default_rng(seed)
    out = []
    for ix in inputs:
        shape = tuple(size[i] for i in ix)
        out.append((rng.uniform(-1, 1, shape) + 1j * rng.uniform(-1, 1, shape)).astype(dtype))
    return out
