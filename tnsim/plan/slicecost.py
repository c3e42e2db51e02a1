"""The cost of one tree under many slicings at once, with numpy.

Slicing a label removes it from every node of the tree and divides the size of
each node holding it by the label's dimension; the tree's shape does not
change.  So a tree's cost under a set of sliced labels follows from which
nodes hold each label: :class:`TreeProfile` records that once (per node, the
log2 size of its labels, and for every label the nodes holding it) and then
costs a slicing, or every one-label extension of a slicing, with a few numpy
operations over the nodes, instead of walking the tree once per slicing.

The figures are those of :func:`tnsim.plan.tree.tree_cost` (the same FLOP and
memory model, the executor's operand copies included), as floats: exact up
to rounding, which is all a search needs; plans report the exact integers.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence

import numpy as np

from tnsim.plan.tree import step_labels

__all__ = ["TreeProfile"]

# Node sets of one step, each a row of log2 sizes: the result, the operands after their
# pre-summation, the operands before it, the labels of the product.
_RESULT, _A2, _B2, _A, _B, _UNION = range(6)


class TreeProfile:
    """Sizes of a tree's nodes as functions of the sliced labels.

    Parameters
    ----------
    inputs, output, size
        The network.
    path : sequence of (int, int)
        SSA path of the tree (its order fixes which intermediates live together).
    itemsize : int
        Bytes per element.

    Attributes
    ----------
    sliced : list of int
        Labels sliced so far (:meth:`add`).

    Examples
    --------
    >>> ins, size = [(0, 1), (1, 2), (2, 0)], {0: 4, 1: 4, 2: 4}
    >>> prof = TreeProfile(ins, (), size, [(0, 1), (2, 3)])
    >>> prof.cost()  # flops, peak bytes, elements written, largest intermediate
    (640.0, 768.0, 17.0, 16.0)
    >>> flops, peak, written, largest = prof.cost_with([0, 1])  # label 0 or label 1 sliced
    >>> flops.tolist(), peak.tolist()
    ([160.0, 256.0], [384.0, 768.0])
    """

    def __init__(
        self,
        inputs: Sequence[Iterable[int]],
        output: Iterable[int],
        size: Mapping[int, int],
        path: Sequence[tuple[int, int]],
        *,
        itemsize: int = 16,
    ):
        out = set(output)
        labels = step_labels(inputs, out, path)
        n, m = len(labels) - len(path), len(path)
        self.n, self.m = n, m
        self.itemsize = itemsize
        self.output = frozenset(out)
        self.size = size
        self.labels = labels
        # Six label sets per step (see the constants above).
        sets: list[list[frozenset]] = [[] for _ in range(6)]
        for s, (x, y) in enumerate(path):
            a, b, keep = labels[x], labels[y], labels[n + s]
            a2 = frozenset(i for i in a if i in b or i in keep)
            b2 = frozenset(i for i in b if i in a or i in keep)
            for k, ls in enumerate((keep, a2, b2, a, b, a2 | b2)):
                sets[k].append(ls)
        self._log = np.zeros((6, m))
        self._rows: dict[int, list[np.ndarray]] = {}
        weight: dict[int, float] = {}
        for k in range(6):
            flat = [i for ls in sets[k] for i in ls]
            lens = [len(ls) for ls in sets[k]]
            rows = np.repeat(np.arange(m), lens)
            cols = np.array(flat, dtype=np.int64)
            if not flat:
                continue
            for i in set(flat):
                if i not in weight:
                    weight[i] = math.log2(size[i])
            w = np.array([weight[i] for i in flat])
            self._log[k] = np.bincount(rows, weights=w, minlength=m)
            order = np.argsort(cols, kind="stable")
            cs, rs = cols[order], rows[order]
            bounds = np.flatnonzero(np.diff(cs)) + 1
            for chunk_c, chunk_r in zip(np.split(cs, bounds), np.split(rs, bounds)):
                lab = int(chunk_c[0])
                self._rows.setdefault(lab, [np.empty(0, np.int64)] * 6)[k] = chunk_r
        self._weight = weight
        # Operand ids: the step that made each operand (a leaf occupies no memory).
        ids = np.array(path, dtype=np.int64).reshape(m, 2) - n
        ids[ids < 0] = m  # the zero row appended below
        self._x, self._y = ids[:, 0], ids[:, 1]
        # A root holding labels outside the output sums them (2 FLOPs per element removed).
        root = labels[-1] if labels else frozenset()
        self._root = root
        self._root_kept = self._logsize(root & out) if root - out else None
        self._root_log = self._root_base = self._logsize(root)
        self.sliced: list[int] = []
        self._base = self._log.copy()

    # -- evaluation ------------------------------------------------------------------------------

    def _figures(self, logs: np.ndarray, root_log: np.ndarray) -> tuple[np.ndarray, ...]:
        """FLOPs, peak bytes, elements written and largest node of one slice, per column.

        ``logs`` has shape ``(6, m, C)``: log2 sizes of every step's sets for ``C``
        slicings; ``root_log`` (``C``) the log2 size of the root's labels.
        """
        if not self.m:
            zero = np.zeros(logs.shape[2])
            return zero, zero, zero, zero
        sizes = np.exp2(logs)
        keep, na, nb, a, b, union = sizes
        flops = 8 * union.sum(axis=0) + 2 * (a - na).sum(axis=0) + 2 * (b - nb).sum(axis=0)
        if self._root_kept is not None:
            flops = flops + 2 * (np.exp2(root_log) - 2.0**self._root_kept)
        pad = np.zeros((1, keep.shape[1]))
        made = np.vstack([keep, pad])  # a leaf reads the zero row: inputs take no room
        sx, sy = made[self._x], made[self._y]
        change = keep - sx - sy
        live = np.vstack([pad, np.cumsum(change, axis=0)[:-1]])
        peak = np.maximum.reduce([live + na, live - sx + na + nb, live - sx - sy + na + nb + keep])
        peak = np.maximum(peak.max(axis=0), live[-1] + change[-1] + keep[-1])
        return flops, peak * self.itemsize, keep.sum(axis=0), keep.max(axis=0)

    def cost(self) -> tuple[float, float, float, float]:
        """``(flops, peak_bytes, written, largest)`` of one slice with :attr:`sliced` fixed."""
        flops, peak, written, largest = self._figures(
            self._log[:, :, None], np.array([self._root_log])
        )
        return float(flops[0]), float(peak[0]), float(written[0]), float(largest[0])

    def cost_with(self, candidates: Sequence[int]) -> tuple[np.ndarray, ...]:
        """The figures of one slice with :attr:`sliced` plus each candidate label (one column each).

        Returns arrays ``flops, peak_bytes, written, largest`` of length ``len(candidates)``.
        """
        logs = np.repeat(self._log[:, :, None], len(candidates), axis=2)
        root_log = np.full(len(candidates), self._root_log)
        for j, i in enumerate(candidates):
            rows = self._rows.get(i)
            w = self._weight.get(i, 0.0)
            if rows is not None:
                for k in range(6):
                    logs[k, rows[k], j] -= w
            if i in self._root:
                root_log[j] -= w
        return self._figures(logs, root_log)

    def add(self, label: int) -> None:
        """Slice ``label`` too."""
        rows = self._rows.get(label)
        if rows is not None:
            w = self._weight[label]
            for k in range(6):
                self._log[k, rows[k]] -= w
        if label in self._root:
            self._root_log -= self._weight[label]
        self.sliced.append(label)

    def reset(self) -> None:
        """Forget every sliced label."""
        self._log = self._base.copy()
        self._root_log = self._root_base
        self.sliced = []

    def _logsize(self, labels: Iterable[int]) -> float:
        return sum(math.log2(self.size[i]) for i in labels)

    # -- candidates ------------------------------------------------------------------------------

    def largest_nodes(self, k: int) -> np.ndarray:
        """Steps of the ``k`` largest results under the current slicing, largest first."""
        order = np.argsort(-self._log[_RESULT], kind="stable")
        return order[:k]

    def labels_of_largest(self, count: int) -> list[int]:
        """Up to about ``count`` sliceable labels, taken from the largest results down.

        Output labels and labels already sliced are left out.
        """
        gone = set(self.sliced) | self.output
        seen: list[int] = []
        have = set()
        for s in np.argsort(-self._log[_RESULT], kind="stable").tolist():
            for i in sorted(self.labels[self.n + s]):
                if i not in gone and i not in have:
                    have.add(i)
                    seen.append(i)
            if len(seen) >= count:
                break
        return seen
