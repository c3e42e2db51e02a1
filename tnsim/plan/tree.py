"""The contraction tree and its exact cost model.

A tree is stored as a path in single-static-assignment (SSA) form: leaves are
``0 .. n-1``; step ``s`` joins two existing nodes and creates node ``n + s``.
The steps are executed in the order given, so the path also fixes which
intermediates are alive at the same time.

Cost model (the one :mod:`tnsim.execution.slices` realises), for one pairwise step
joining operands with label sets ``A`` and ``B``, where ``keep`` holds the
labels still needed after the step (by another tensor or the output):

1. *pre-summation*: a label found in one operand only and not in ``keep`` is
   summed out of that operand first; reducing an array of ``N`` elements to
   ``M`` costs ``N - M`` complex additions, 2 real FLOPs each;
2. *product*: with ``A'`` and ``B'`` the label sets after step 1, every one of
   the ``prod(size[A' | B'])`` index combinations is one complex multiply-add,
   8 real FLOPs (6 for the multiply, 2 for the add).

So ``flops(step) = 2 (|A| - |A'|) + 2 (|B| - |B'|) + 8 |A' | B'|``, with
``|X|`` the number of elements.  The result has the labels ``keep``.  If the
root still holds labels outside the output they are summed the same way.
Index permutations (transposes) cost no FLOPs here.

Memory: ``peak_bytes`` is the largest total size of the *intermediates* alive
at once, counted as the executor allocates them: within a step, each operand's
reordered copy (``|A'|``, ``|B'|``) is made while the operand still exists and
the operand goes right after, then the result is made next to both copies; the
root's final reordered copy counts too.  Copies of inputs count; the input
tensors themselves do not (:attr:`TreeCost.input_bytes` gives them).  The
executor skips copies it does not need, so its own count
(:func:`tnsim.execution.steps.peak_memory`) is never above this one.  ``width``
is ``log2`` of the largest intermediate in elements; ``written`` is the total
number of elements of all intermediates.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

__all__ = [
    "PairTree",
    "TreeCost",
    "memory_order",
    "step_flops",
    "step_labels",
    "tree_cost",
    "without_labels",
]


@dataclass(frozen=True)
class TreeCost:
    """The cost of contracting a tree once (one slice).

    Attributes
    ----------
    flops : int
        Real floating-point operations (a complex multiply-add is 8).
    peak_bytes : int
        Largest total bytes of intermediates alive at once, operand copies
        included (inputs excluded; see the module notes).
    width : float
        ``log2`` of the number of elements of the largest intermediate.
    largest : int
        Elements of the largest intermediate.
    written : int
        Total elements of all intermediates.
    input_bytes : int
        Bytes of the input tensors.
    itemsize : int
        Bytes per element used for the byte figures.
    """

    flops: int
    peak_bytes: int
    width: float
    largest: int
    written: int
    input_bytes: int
    itemsize: int


def _numel(labels: Iterable[int], size: Mapping[int, int]) -> int:
    return math.prod(size[i] for i in labels)


def _step(a: frozenset, b: frozenset, keep: frozenset, size: Mapping[int, int]):
    """FLOPs of joining label sets ``a`` and ``b`` into ``keep``, and the operands' sizes.

    The sizes are the elements of the operands after their pre-summation
    (``|A'|``, ``|B'|``; see the module notes).
    """
    a2 = frozenset(i for i in a if i in b or i in keep)
    b2 = frozenset(i for i in b if i in a or i in keep)
    na, nb = _numel(a2, size), _numel(b2, size)
    flops = 8 * _numel(a2 | b2, size)
    if a2 != a:
        flops += 2 * (_numel(a, size) - na)
    if b2 != b:
        flops += 2 * (_numel(b, size) - nb)
    return flops, na, nb


def step_flops(a: frozenset, b: frozenset, keep: frozenset, size: Mapping[int, int]) -> int:
    """FLOPs of joining label sets ``a`` and ``b`` into ``keep`` (the model above).

    Examples
    --------
    >>> step_flops(frozenset({0, 1}), frozenset({1, 2}), frozenset({0, 2}), {0: 2, 1: 3, 2: 4})
    192
    """
    return _step(a, b, keep, size)[0]


def without_labels(
    inputs: Sequence[Iterable[int]], output: Iterable[int], removed: Iterable[int]
) -> tuple[list[tuple[int, ...]], tuple[int, ...]]:
    """The inputs' and output's labels with ``removed`` (sliced) labels dropped.

    Examples
    --------
    >>> without_labels([(0, 1), (1, 2)], (0, 2), [1, 2])
    ([(0,), ()], (0,))
    """
    gone = set(removed)
    ins = [tuple(i for i in ix if i not in gone) for ix in inputs]
    return ins, tuple(i for i in output if i not in gone)


def step_labels(
    inputs: Sequence[Iterable[int]],
    output: Iterable[int],
    path: Sequence[tuple[int, int]],
    removed: Iterable[int] = (),
) -> list[frozenset[int]]:
    """Label sets of every node (leaves, then one per step) of an SSA path.

    Labels in ``removed`` (sliced) are dropped everywhere.

    Examples
    --------
    >>> [sorted(s) for s in step_labels([(0, 1), (1, 2), (2,)], (0,), [(0, 1), (2, 3)])]
    [[0, 1], [1, 2], [2], [0, 2], [0]]
    """
    gone = set(removed)
    labels = [frozenset(i for i in ix if i not in gone) for ix in inputs]
    count = Counter(i for ix in labels for i in ix)
    out = set(output)
    for x, y in path:
        a, b = labels[x], labels[y]
        for i in a:
            count[i] -= 1
        for i in b:
            count[i] -= 1
        keep = frozenset(i for i in a | b if count[i] > 0 or i in out)
        for i in keep:
            count[i] += 1
        labels.append(keep)
    return labels


def tree_cost(
    inputs: Sequence[Iterable[int]],
    output: Iterable[int],
    size: Mapping[int, int],
    path: Sequence[tuple[int, int]],
    *,
    sliced: Iterable[int] = (),
    itemsize: int = 16,
) -> TreeCost:
    """Cost of one contraction of an SSA path (see the module notes for the model).

    Linear in the size of the tree.  With ``sliced`` labels the figures are for
    one slice (those labels fixed).

    Examples
    --------
    >>> c = tree_cost([(0, 1), (1, 2)], (0, 2), {0: 2, 1: 3, 2: 4}, [(0, 1)])
    >>> c.flops, c.largest, c.peak_bytes  # peak: copies of both inputs (6 + 12) and the result (8)
    (192, 8, 416)
    """
    gone = set(sliced)
    out = set(output) - gone
    labels = step_labels(inputs, out, path, gone)
    n = len(labels) - len(path)
    input_bytes = itemsize * sum(_numel(ix, size) for ix in labels[:n])
    sizes = [0] * n
    flops = live = peak = largest = written = 0
    for s, (x, y) in enumerate(path):
        keep = labels[n + s]
        step, na, nb = _step(labels[x], labels[y], keep, size)
        flops += step
        numel = _numel(keep, size)
        others = live - sizes[x] - sizes[y]
        # Each operand's reordered copy is made while the operand exists, then the operand
        # goes; the result is made next to both copies (as the executor does).
        peak = max(
            peak,
            others + sizes[x] + sizes[y] + na,
            others + na + sizes[y] + nb,
            others + na + nb + numel,
        )
        sizes.append(numel)
        live = others + numel
        largest = max(largest, numel)
        written += numel
    root = labels[-1] if labels else frozenset()
    extra = root - out
    if extra:
        flops += 2 * (_numel(root, size) - _numel(root & out, size))
    if path:
        peak = max(peak, live + sizes[-1])  # the result's final reordered copy
    width = math.log2(largest) if largest else 0.0
    return TreeCost(flops, peak * itemsize, width, largest, written, input_bytes, itemsize)


@dataclass(frozen=True)
class PairTree:
    """A full binary contraction tree over a network's tensors.

    Attributes
    ----------
    inputs : tuple of tuple of int
        Index labels of each input tensor (leaves ``0 .. n-1``).
    output : tuple of int
        Open labels of the result.
    size : Mapping[int, int]
        Dimension of every label.
    path : tuple of (int, int)
        Contractions in single-static-assignment form: step ``s`` joins the
        nodes with the two given ids and creates node ``n + s``.

    Examples
    --------
    >>> t = PairTree(((0, 1), (1, 2), (2,)), (0,), {0: 2, 1: 2, 2: 2}, ((1, 2), (0, 3)))
    >>> t.linear_path()
    [(1, 2), (0, 1)]
    >>> t.cost().flops
    64
    """

    inputs: tuple[tuple[int, ...], ...]
    output: tuple[int, ...]
    size: Mapping[int, int]
    path: tuple[tuple[int, int], ...]

    @property
    def num_leaves(self) -> int:
        """Number of input tensors."""
        return len(self.inputs)

    def cost(self, *, sliced: Iterable[int] = (), itemsize: int = 16) -> TreeCost:
        """Exact cost of one contraction (one slice if ``sliced``); see :func:`tree_cost`."""
        return tree_cost(
            self.inputs, self.output, self.size, self.path, sliced=sliced, itemsize=itemsize
        )

    def linear_path(self) -> list[tuple[int, int]]:
        """The path in opt_einsum's linear form (operands removed, result appended)."""
        return ssa_to_linear(self.path, self.num_leaves)

    def node_labels(self, removed: Iterable[int] = ()) -> list[frozenset[int]]:
        """Label sets of every node: leaves first, then one per step."""
        return step_labels(self.inputs, self.output, self.path, removed)

    def intermediate_sizes(self, removed: Iterable[int] = ()) -> list[int]:
        """Elements of each step's result, in step order."""
        labels = self.node_labels(removed)[self.num_leaves :]
        return [_numel(ix, self.size) for ix in labels]

    @classmethod
    def from_linear(
        cls,
        inputs: Sequence[Sequence[int]],
        output: Sequence[int],
        size: Mapping[int, int],
        linear: Sequence[Sequence[int]],
    ) -> PairTree:
        """Build a tree from an opt_einsum linear path of pairs (and singletons, dropped)."""
        ins = tuple(tuple(ix) for ix in inputs)
        return cls(ins, tuple(output), dict(size), linear_to_ssa(linear, len(ins)))


def ssa_to_linear(path: Sequence[tuple[int, int]], n: int) -> list[tuple[int, int]]:
    """Convert an SSA path to opt_einsum's linear form.

    Examples
    --------
    >>> ssa_to_linear([(1, 2), (0, 3)], 3)
    [(1, 2), (0, 1)]
    """
    ids = list(range(n))
    linear = []
    nxt = n
    for x, y in path:
        i, j = sorted((ids.index(x), ids.index(y)))
        linear.append((i, j))
        del ids[j], ids[i]
        ids.append(nxt)
        nxt += 1
    return linear


def linear_to_ssa(linear: Sequence[Sequence[int]], n: int) -> tuple[tuple[int, int], ...]:
    """Convert an opt_einsum linear path to pairwise SSA form.

    Steps with one operand (a pure reduction) are skipped; steps with more than
    two are split into pairs left to right.

    Examples
    --------
    >>> linear_to_ssa([(1, 2), (0, 1)], 3)
    ((1, 2), (0, 3))
    """
    ids = list(range(n))
    nxt = n
    out: list[tuple[int, int]] = []
    for step in linear:
        pos = sorted(step, reverse=True)
        picked = [ids[p] for p in sorted(step)]
        for p in pos:
            del ids[p]
        cur, nxt = join_pairwise(picked, out, nxt)
        ids.append(cur)
    return tuple(out)


def join_pairwise(ids: Sequence[int], out: list[tuple[int, int]], nxt: int) -> tuple[int, int]:
    """Append steps joining ``ids`` left to right to ``out``; new nodes are numbered from ``nxt``.

    Returns the id of the node holding the result (``ids[0]`` when there is one
    id) and the next unused id.

    Examples
    --------
    >>> steps = []
    >>> join_pairwise([4, 1, 2], steps, 7), steps
    ((8, 9), [(4, 1), (7, 2)])
    """
    cur = ids[0]
    for other in ids[1:]:
        out.append((cur, other))
        cur = nxt
        nxt += 1
    return cur, nxt


def memory_order(
    inputs: Sequence[Iterable[int]],
    output: Iterable[int],
    size: Mapping[int, int],
    path: Sequence[tuple[int, int]],
) -> tuple[tuple[int, int], ...]:
    """The same tree with its steps reordered to lower the peak of live intermediates.

    At every node the child sub-tree needing more memory is computed first
    (the Sethi-Ullman order; Sethi and Ullman, J. ACM 17, 715, 1970), so the
    tree, its FLOPs and its intermediates are unchanged.

    Examples
    --------
    >>> ins = [(0, 1), (1, 2), (2, 3), (3, 4)]
    >>> memory_order(ins, (0, 4), {i: 2 for i in range(5)}, [(0, 1), (2, 3), (4, 5)])
    ((0, 1), (2, 3), (4, 5))
    """
    n = len(inputs)
    if len(path) < 2:
        return tuple((int(x), int(y)) for x, y in path)
    labels = step_labels(inputs, output, path)
    numel = [0] * n + [_numel(ls, size) for ls in labels[n:]]
    children = {n + s: (int(p[0]), int(p[1])) for s, p in enumerate(path)}
    need = [0] * n + [0] * len(path)
    first: dict[int, tuple[int, int]] = {}
    for v in range(n, n + len(path)):
        x, y = children[v]
        a = max(need[x], numel[x] + need[y])
        b = max(need[y], numel[y] + need[x])
        order = (x, y) if a <= b else (y, x)
        first[v] = order
        need[v] = max(min(a, b), numel[x] + numel[y] + numel[v])
    out: list[int] = []
    stack = [(n + len(path) - 1, False)]
    while stack:
        v, done = stack.pop()
        if v < n:
            continue
        if done:
            out.append(v)
            continue
        stack.append((v, True))
        x, y = first[v]
        stack.append((y, False))
        stack.append((x, False))
    new_id = {v: n + k for k, v in enumerate(out)}
    return tuple(
        (new_id.get(children[v][0], children[v][0]), new_id.get(children[v][1], children[v][1]))
        for v in out
    )
