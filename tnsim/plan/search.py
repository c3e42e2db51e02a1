"""The search driver: many seeded planner trials under a time and trial budget.

Each trial draws a planner (greedy with Boltzmann-randomised choices, an
elimination order, recursive bisection, a spectral sweep; after one trial of
each, half the draws go to the planner of the best tree so far) and random
parameters from one ``numpy`` generator seeded once, scores the tree by the
objective, and keeps the best.  The best tree is then improved by exact
re-planning of its sub-trees (:mod:`.reoptimize`).  With the same seed and a
binding ``max_trials`` the result is reproducible; a binding ``time_budget``
depends on the machine's speed.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import opt_einsum.paths as oe_paths

from tnsim.errors import ResourceLimitError
from tnsim.fitted import WRITE_FLOPS
from tnsim.plan import clock
from tnsim.plan.builder import plan_coarse
from tnsim.plan.clock import Deadline, TimeLog
from tnsim.plan.divide import divide_path
from tnsim.plan.elimination import elimination_path
from tnsim.plan.hypergraph import Hypergraph, bisect
from tnsim.plan.ordering import cut_path
from tnsim.plan.partition import bisection_path, sweep_path
from tnsim.plan.reoptimize import reoptimize_path
from tnsim.plan.slicecost import TreeProfile
from tnsim.plan.slicing import slice_profile, slice_with_replanning
from tnsim.plan.tree import TreeCost, join_pairwise, memory_order, tree_cost, without_labels

__all__ = [
    "OBJECTIVES",
    "SearchResult",
    "random_greedy_path",
    "score",
    "search_path",
]

OBJECTIVES = ("operations", "runtime", "footprint")


@dataclass(frozen=True)
class SearchResult:
    """Outcome of :func:`search_path`.

    Attributes
    ----------
    path : tuple of (int, int)
        Best SSA path found.
    cost : TreeCost
        Its cost.
    method : str
        Planner of the winning trial.
    trials : int
        Trials run.
    seconds : float
        Wall time spent.
    alternatives : tuple of (path, str)
        The best tree of each other planner that had a trial, best first (a
        tree of a different shape may slice better than the winner); under a
        memory limit, the best tree before slicing first.
    sliced : tuple of int
        Labels to slice (under a memory limit); ``cost`` is then one slice's.
    alternative_sliced : tuple of tuple of int
        The labels the search sliced in each alternative (empty: none), where it did.
    """

    path: tuple[tuple[int, int], ...]
    cost: TreeCost
    method: str
    trials: int
    seconds: float
    alternatives: tuple[tuple[tuple[tuple[int, int], ...], str], ...] = ()
    sliced: tuple[int, ...] = ()
    alternative_sliced: tuple[tuple[int, ...], ...] = ()


def score(cost: TreeCost, objective: str = "operations", memory_limit: int | None = None) -> float:
    """Objective value of a tree's cost (lower is better).

    ``"operations"``: the FLOPs; ``"runtime"``: FLOPs plus :data:`~tnsim.fitted.WRITE_FLOPS`
    per element written (a model of run time in FLOPs at the matmul rate);
    ``"footprint"``: the largest intermediate, then FLOPs.  With
    ``memory_limit`` (bytes) a tree whose peak exceeds it is charged the
    slicing it would need: its value times ``peak / limit`` (slicing by a
    factor ``k`` costs at least ``k`` slices of FLOPs each no smaller than
    ``1/k``; the factor estimates the overhead from above for balanced trees).

    Examples
    --------
    >>> c = TreeCost(800, 32, 1.0, 2, 2, 64, 16)
    >>> score(c), score(c, memory_limit=16), score(c, "runtime")
    (800.0, 1600.0, 1600.0)
    """
    if objective not in OBJECTIVES:
        raise ValueError(f"unknown objective {objective!r}; use one of {OBJECTIVES}")
    flops = float(cost.flops)
    if objective == "runtime":
        flops += WRITE_FLOPS * cost.written
    if memory_limit is not None and cost.peak_bytes > memory_limit:
        flops *= cost.peak_bytes / memory_limit
    if objective == "footprint":
        return cost.largest * 1e30 + flops
    return flops


def random_greedy_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    temperature: float = 0.3,
    nbranch: int = 8,
    cost_fn: str = "memory-removed-jitter",
    seed: int | np.random.Generator | None = 0,
) -> tuple[tuple[int, int], ...]:
    """Greedy pairwise joins, each drawn from the ``nbranch`` cheapest with Boltzmann weights.

    Uses opt_einsum's greedy engine (``ssa_greedy_optimize``) with a chooser
    drawing from a numpy generator (``temperature`` is relative to the cheapest
    candidate's cost; 0 gives plain greedy).

    Examples
    --------
    >>> random_greedy_path([(0, 1), (1, 2), (2,)], (0,), {0: 2, 1: 2, 2: 2}, seed=1)
    ((1, 2), (0, 3))
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)

    def choose(queue, remaining):
        choices: list = []
        while queue and len(choices) < nbranch:
            cand = heapq.heappop(queue)
            if cand[1] in remaining and cand[2] in remaining:
                choices.append(cand)
        if not choices:
            return None
        if len(choices) == 1 or temperature <= 0:
            pick = 0
        else:
            costs = np.array([c[0][0] for c in choices], dtype=float)
            t = temperature * max(1.0, abs(costs[0]))
            w = np.exp(-(costs - costs[0]) / t)
            pick = int(rng.choice(len(choices), p=w / w.sum()))
        chosen = choices.pop(pick)
        for other in choices:
            heapq.heappush(queue, other)
        return chosen

    ins = [frozenset(ix) for ix in inputs]

    def jitter(size12, size1, size2, k12, k1, k2):
        return (size12 - size1 - size2) * (1 + 0.01 * rng.standard_normal())

    ssa = oe_paths.ssa_greedy_optimize(
        ins,
        frozenset(output),
        dict(size),
        choose_fn=choose,
        cost_fn=jitter if cost_fn == "memory-removed-jitter" else cost_fn,
    )
    return _pairs(ssa, len(ins))


def _pairs(ssa, n: int) -> tuple[tuple[int, int], ...]:
    """Make every step of an SSA path pairwise (opt_einsum may emit singletons)."""
    out: list[tuple[int, int]] = []
    remap: dict[int, int] = {}
    nxt = n
    for k, step in enumerate(ssa):
        remap[n + k], nxt = join_pairwise([remap.get(t, t) for t in step], out, nxt)
    return tuple(out)


def _planner(method: str, inputs, output, size, rng: np.random.Generator):
    if method != "greedy" and len(inputs) > 30 and rng.random() < 0.25:
        max_size = int(2 ** rng.integers(6, 13))
        return plan_coarse(
            inputs, output, size, max_size, lambda i, o, s: _planner(method, i, o, s, rng)
        )
    if method == "greedy":
        return random_greedy_path(inputs, output, size, temperature=0.0, seed=rng)
    if method == "random-greedy":
        t = float(rng.choice([0.01, 0.03, 0.1, 0.3, 1.0]))
        return random_greedy_path(inputs, output, size, temperature=t, seed=rng)
    if method == "elimination":
        return elimination_path(
            inputs,
            output,
            size,
            heuristic=str(rng.choice(["min-fill", "min-degree"])),
            noise=float(rng.choice([0.0, 0.3, 1.0])),
            fill_weight=float(rng.choice([0.3, 1.0, 3.0])),
            seed=rng,
        )
    if method == "bisection":
        return bisection_path(
            inputs,
            output,
            size,
            leaf_size=int(rng.choice([4, 8, 16])),
            imbalance=float(rng.choice([0.05, 0.1, 0.2, 0.3])),
            noise=float(rng.choice([0.0, 0.2, 0.5])),
            seed=rng,
        )
    if method == "cuts":
        return cut_path(
            inputs,
            output,
            size,
            imbalance=float(rng.choice([0.1, 0.3, 0.5, 0.7])),
            leaf_size=int(rng.choice([4, 6, 8])),
            seed=rng,
        )
    if method == "divide":
        return divide_path(
            inputs,
            output,
            size,
            imbalance=float(rng.choice([0.05, 0.2, 0.4, 0.6, 0.8])),
            leaf_size=int(rng.choice([4, 6, 8, 12])),
            seed=rng,
        )
    if method == "sweep":
        return sweep_path(
            inputs,
            output,
            size,
            pull=float(rng.choice([1.0, 2.0, 3.0, 5.0, 8.0])),
            noise=float(rng.choice([0.0, 0.0, 0.05, 0.1])),
            mix=float(rng.choice([0.03, 0.1, 0.1, 0.3])),
            seed=rng,
        )
    raise ValueError(f"unknown planner {method!r}")


RESLICE_EVERY = 8


"""Under a memory limit, the best sliced tree not yet re-sliced is sliced again from scratch,
re-planning its sub-trees after each label, after every this many trials (and every tree
planned around labels is, at once)."""


RESLICE_SHARE = 0.1


"""Share of the trials' time one such re-slicing may take (never past their end)."""


RESLICE_BACKOFF = 16


"""After each re-slicing that finds no better sliced tree, the next one waits twice as many
turns, up to this many (one that finds one resets the wait)."""


METHODS = ("greedy", "random-greedy", "elimination", "bisection", "sweep", "cuts", "divide")


def _trial(method: str, inputs, output, size, rng: np.random.Generator):
    """One planner run on a randomly re-presented network (tensor order and label names).

    Planners break ties by position and label number; drawing a new order and new
    names for every trial keeps the search from depending on how the network was
    written.  (Sweeps keep the given presentation: their spectral embedding is
    computed once per network and reused, and their keys seldom tie.)
    """
    n = len(inputs)
    if method == "sweep" or n < 3:
        return _planner(method, inputs, output, size, rng)
    order = rng.permutation(n)
    labels = sorted({i for ix in inputs for i in ix} | set(output))
    names = dict(zip(labels, rng.permutation(len(labels)).tolist()))
    ins = [tuple(names[i] for i in inputs[t]) for t in order.tolist()]
    sub = _planner(
        method, ins, tuple(names[i] for i in output), {names[i]: size[i] for i in labels}, rng
    )
    back = order.tolist() + list(range(n, 2 * n))
    return tuple((back[x], back[y]) for x, y in sub)


def search_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    time_budget: float | None = 1.0,
    max_trials: int | None = None,
    seed: int = 0,
    objective: str = "operations",
    memory_limit: int | None = None,
    itemsize: int = 16,
    methods: Sequence[str] = METHODS,
    reoptimize: bool = True,
    progress: bool = False,
    stop_rate: float | None = None,
    deadline: Deadline | None = None,
    log: TimeLog | None = None,
) -> SearchResult:
    """Search for a good contraction tree with seeded random trials.

    Parameters
    ----------
    inputs, output, size
        The network.
    time_budget : float or None
        Seconds for the whole search (trials take about 70%, 85% under a
        memory limit, sub-tree re-planning the rest); at least one trial always runs.  ``None``: no
        time limit (then ``max_trials`` defaults to 16), fully reproducible.
    max_trials : int, optional
        Stop after this many trials.
    seed : int
        Seeds the numpy generators behind every random choice.
    objective : {"operations", "runtime", "footprint"}
        See :func:`score`.
    memory_limit : int, optional
        Bytes one slice's intermediates may use.  Every tree over it is sliced
        to fit (:func:`~tnsim.plan.slicing.slice_profile`) and scored by its
        sliced cost, all slices together; between trials, trees are also
        planned on the network with some labels removed (a prefix of the best
        slicing's, or a share of a small balanced cut's) and sliced with them
        first, the best sliced tree is sliced again from scratch with its
        sub-trees re-planned after each label (every ``RESLICE_EVERY`` trials;
        each re-slicing that finds nothing better doubles the wait for the next,
        up to ``RESLICE_BACKOFF`` turns, so the trials get the time),
        and the finalists are re-planned locally with their labels sliced.  The best
        tree *before* slicing is kept too (as the first alternative), re-planned
        as without a limit: so with the same seed and trial budget the result is
        never costlier than that tree sliced afterwards.
    itemsize : int
        Bytes per element.
    methods : sequence of str
        Planners to draw from (subset of ``METHODS``).
    reoptimize : bool
        Re-plan sub-trees of the best trees exactly afterwards.
    progress : bool
        Show a tqdm progress bar of the trials.
    stop_rate : float, optional
        FLOP/s.  Once every planner has had a trial, stop searching when the
        time spent exceeds what the best tree so far would take to contract at
        this rate (searching longer than the contraction itself cannot pay off);
        the sub-tree re-planning then gets about as long again.
    deadline : Deadline, optional
        A deadline of the caller's that the search never passes (besides ``time_budget``).
    log : TimeLog, optional
        Gets the seconds spent on trials (``"search"``), on re-slicing the best trees
        under a memory limit (``"re-slicing"``) and on re-planning (``"re-planning"``).

    Returns
    -------
    SearchResult

    Examples
    --------
    >>> r = search_path([(0, 1), (1, 2), (2, 3)], (), {i: 2 for i in range(4)}, max_trials=3)
    >>> r.cost.flops, r.trials
    (56, 3)
    """
    if objective not in OBJECTIVES:
        raise ValueError(f"unknown objective {objective!r}; use one of {OBJECTIVES}")
    start = clock.now()
    log = TimeLog() if log is None else log
    outer = Deadline(None) if deadline is None else deadline
    total = Deadline(time_budget, start=start)
    if outer.end < total.end:
        total = outer
    rng = np.random.default_rng(seed)
    if not total.timed and max_trials is None:
        max_trials = 16
    state = _State(inputs, output, size, objective, memory_limit, itemsize)
    trial_end = Deadline(None)
    if total.timed:
        # Under a limit the trials include the re-slicing of the best trees: they get more.
        share = (0.7 if memory_limit is None else 0.85) if reoptimize else 1.0
        trial_end.end = start + share * (total.end - start)
    trials = 0
    bar = None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=max_trials, desc="planning", unit="trial", leave=False)
    methods = list(methods)
    # Trials on the network with the best slicing's labels removed draw from their own
    # generator: the main sequence of trials stays the one a search without a limit runs.
    around = np.random.default_rng([seed, 1])
    longest = 0.0
    gap, waited = 1, 0  # re-slice at every gap-th due turn
    log.add("search", 0.0)  # listed first
    try:
        with log.stage("search"):
            while True:
                if trials >= len(methods):
                    # Half the trials go to the planner of the best tree so far, half to any.
                    pool = [m for m in methods if m != "greedy"] or methods
                    lead = state.lead_method()
                    draw = lead in pool and rng.random() < 0.5
                    method = lead if draw else str(rng.choice(pool))
                else:
                    method = methods[trials]
                began = clock.now()
                state.consider(_trial(method, inputs, output, size, rng), method)
                trials += 1
                planned = None
                if state.limit is not None and trials % 2 == 0:
                    pool = [m for m in methods if m != "greedy"] or methods
                    planned = state.plan_around(around, pool)
                longest = max(longest, clock.now() - began)
                due = state.limit is not None and (planned or trials % RESLICE_EVERY == 0)
                if due:
                    waited += 1
                if due and waited >= gap:
                    waited = 0
                    seconds = None
                    if trial_end.timed:
                        seconds = min(
                            RESLICE_SHARE * (trial_end.end - start), trial_end.end - clock.now()
                        )
                    if seconds is None or seconds > 0:
                        began = clock.now()
                        before = state.best_flops()
                        state.reslice(seconds, planned)
                        # Back off while re-slicing finds nothing better: trials get the time.
                        gap = 1 if state.best_flops() < before else min(2 * gap, RESLICE_BACKOFF)
                        # Counted as its own stage (the "search" stage around it gives it back).
                        spent = clock.now() - began
                        log.add("re-slicing", spent)
                        log.add("search", -spent)
                if bar is not None:
                    bar.update(1)
                    bar.set_postfix(log10_flops=f"{math.log10(max(state.best_flops(), 1)):.2f}")
                if max_trials is not None and trials >= max_trials:
                    break
                elapsed = clock.now() - start
                # Stop before a trial as long as the longest so far would end past the deadline.
                if trial_end.timed and clock.now() + longest > trial_end.end:
                    break
                if (
                    stop_rate
                    and trials >= len(methods)
                    and elapsed > state.best_flops() / stop_rate
                ):
                    break
    finally:
        if bar is not None:
            bar.close()
    if stop_rate and total.timed:
        spent = clock.now() - start
        cap = start + 2 * max(spent, state.best_flops() / stop_rate)
        total.end = min(total.end, cap)
    if reoptimize:
        with log.stage("re-planning"):
            state.reoptimize(total, total.end - start)
    return state.result(trials, clock.now() - start)


class _State:
    """The search's best trees: per planner, overall, before and after slicing."""

    def __init__(self, inputs, output, size, objective, limit, itemsize):
        self.inputs, self.output, self.size = inputs, output, size
        self.objective, self.limit, self.itemsize = objective, limit, itemsize
        self.write = WRITE_FLOPS if objective == "runtime" else 0.0
        # Rows: (key, path, method, sliced labels); per planner by unsliced key, and by sliced key.
        self.plain: dict[str, tuple] = {}
        self.cut: dict[str, tuple] = {}
        self.cuts: list[list[int]] | None = None
        self.resliced: set[tuple[tuple[int, int], ...]] = set()
        self.holders: dict[int, list[int]] | None = None

    # -- scoring ---------------------------------------------------------------------------------

    def _key(self, flops: float, written: float, largest: float) -> float:
        if self.objective == "footprint":
            return largest * 1e30 + flops
        return flops + self.write * written

    def _sliced(self, path, preset=()):
        """Slice a (memory-ordered) tree to the limit; ``(key, path, sliced)`` or ``None``."""
        prof = TreeProfile(self.inputs, self.output, self.size, path, itemsize=self.itemsize)
        for i in preset:
            prof.add(i)
        try:
            fig = slice_profile(prof, self.limit, write_flops=self.write)
        except ResourceLimitError:
            return None
        largest = prof.cost()[3]
        return self._key(fig.flops, fig.written, largest), path, tuple(prof.sliced)

    def consider(self, path, method: str, preset=()) -> None:
        """Score a trial's tree; keep it where it is a planner's best."""
        path = tuple(tuple(p) for p in path)
        if not preset:
            cost = tree_cost(self.inputs, self.output, self.size, path, itemsize=self.itemsize)
            key = self._key(cost.flops, cost.written, cost.largest)
            row = (key, path, method, ())
            if method not in self.plain or key < self.plain[method][0]:
                self.plain[method] = row
            if self.limit is None:
                return
            best = self.sliced_best()
            if cost.peak_bytes <= self.limit:
                self._keep(row)
                return
            if best is not None and key >= best[0]:
                return  # slicing never makes a tree cheaper: it cannot win
        ordered = memory_order(self.inputs, self.output, self.size, path)
        got = self._sliced(ordered, preset)
        if got is not None:
            self._keep((got[0], got[1], method, got[2]))

    def _keep(self, row) -> None:
        method = row[2]
        if method not in self.cut or row[0] < self.cut[method][0]:
            self.cut[method] = row

    def sliced_best(self):
        """The best row after slicing (``None`` before the first, or without a limit)."""
        return min(self.cut.values(), key=lambda r: r[0]) if self.cut else None

    def lead_method(self) -> str:
        """Planner of the best tree before slicing (it steers which planner runs next)."""
        return min(self.plain.values(), key=lambda r: r[0])[2]

    def best_flops(self) -> float:
        """The objective value of the best tree so far (after slicing under a limit)."""
        rows = self.cut if self.limit is not None and self.cut else self.plain
        return min(r[0] for r in rows.values())

    # -- trees planned around the slices --------------------------------------------------------

    def plan_around(self, rng: np.random.Generator, pool) -> tuple | None:
        """Plan a tree on the network with some labels removed; slice it with them first.

        The labels are a prefix of the best slicing so far, or (half the time, and
        always before there is one) a random share of the labels of a small
        balanced cut (:meth:`cut_sets`).  A grid-like network can only be sliced
        cheaply where the sliced labels lie on most of its wide intermediates;
        fixing part of a narrow cut splits it into two weakly joined halves, which
        sweeps ordered around the cut then contract with narrow fronts.
        """
        best = self.sliced_best()
        labels = best[3] if best is not None else ()
        cuts = self.cut_sets(rng)
        if cuts and (not labels or rng.random() < 0.5):
            cut = cuts[int(rng.integers(len(cuts)))]
            # Half to four fifths of the cut: fewer leave the halves joined too widely (on
            # 10x10 grid circuits under 2 GiB the best plans slice 16 to 20 of a cut's 30).
            k = int(rng.integers(max(1, len(cut) // 2), max(1, (4 * len(cut)) // 5) + 1))
            if rng.random() < 0.5:
                keep = self.segment(cut, k, rng)
            else:
                keep = [int(i) for i in rng.permutation(cut)[:k]]
        elif labels:
            keep = list(labels[: int(rng.integers(max(1, len(labels) // 2), len(labels) + 1))])
        else:
            return None
        ins, out = without_labels(self.inputs, self.output, keep)
        method = "cuts" if "cuts" in pool and rng.random() < 0.8 else str(rng.choice(pool))
        path = _trial(method, ins, out, self.size, rng)
        self.consider(path, method, preset=keep)
        return path, method

    def reslice(self, seconds: float | None, planned: tuple | None = None) -> None:
        """Slice a tree again from scratch, re-planning its sub-trees after each label.

        The tree is ``planned`` (``(path, planner)``), or else the best sliced tree
        not yet re-sliced.  :func:`~tnsim.plan.slicing.slice_with_replanning` runs
        within ``seconds`` (``None``: no limit); the adapted tree and its labels are
        considered like a trial's, so they also steer :meth:`plan_around`.  A tree
        planned around part of a cut often slices far cheaper this way than with
        the labels it was planned around.
        """
        assert self.limit is not None
        if planned is None:
            rows = sorted(self.cut.values(), key=lambda r: r[0])
            rows = [r for r in rows if r[1] not in self.resliced]
            if not rows:
                return
            planned = (rows[0][1], rows[0][2])
        path, method = planned
        path = memory_order(self.inputs, self.output, self.size, path)
        if path in self.resliced:
            return
        self.resliced.add(path)
        sliced, adapted, _, _ = slice_with_replanning(
            self.inputs,
            self.output,
            self.size,
            path,
            self.limit,
            itemsize=self.itemsize,
            time_budget=None if seconds is None else max(0.02, seconds / 8),
            total_budget=seconds,
            write_flops=self.write,
        )
        self.resliced.add(adapted)
        self.consider(adapted, method, preset=sliced)

    def segment(self, cut: Sequence[int], k: int, rng: np.random.Generator) -> list[int]:
        """``k`` labels of a cut that lie together: breadth first from a random one of them.

        Two labels of the cut are neighbours when a tensor holding one shares a label
        with a tensor holding the other.  Fixing such a run of a cut's labels opens a
        slit in a grid-like network, around whose end each slice can be swept with
        narrow fronts (where labels spread along the whole cut leave it joined).
        """
        if self.holders is None:
            self.holders = {}
            for t, ix in enumerate(self.inputs):
                for i in ix:
                    self.holders.setdefault(i, []).append(t)
        holders = self.holders
        near = {i: {u for t in holders[i] for j in self.inputs[t] for u in holders[j]} for i in cut}
        members = set(cut)
        start = int(cut[int(rng.integers(len(cut)))])
        seen = [start]
        done = {start}
        k_at = 0
        while len(seen) < k and k_at < len(seen):
            i = seen[k_at]
            k_at += 1
            for j in sorted(members - done):
                if near[i] & set(holders[j]):
                    done.add(j)
                    seen.append(j)
        return seen[:k]

    def cut_sets(self, rng: np.random.Generator) -> list[list[int]]:
        """The sliceable labels of a few small balanced cuts of the network (made once).

        Cuts by :func:`~tnsim.plan.hypergraph.bisect` with the balance at 0.1, 0.3, 0.5.
        """
        if self.cuts is None:
            self.cuts = []
            hg = Hypergraph.of_tensors(self.inputs, self.size)
            if hg.num_vertices >= 4 and hg.pins:
                holders: dict[int, list[int]] = {}
                for t, ix in enumerate(self.inputs):
                    for i in ix:
                        holders.setdefault(i, []).append(t)
                out = set(self.output)
                for imbalance in (0.1, 0.3, 0.5):
                    part = bisect(hg, imbalance, rng)
                    cut = sorted(
                        i
                        for i, hs in holders.items()
                        if i not in out and len({part[t] for t in hs}) > 1
                    )
                    if cut:
                        self.cuts.append(cut)
        return self.cuts

    # -- local re-planning ----------------------------------------------------------------------

    def reoptimize(self, total: Deadline, span: float) -> None:
        """Re-plan sub-trees of the finalists exactly, within ``total`` (``span`` s in all)."""
        finalists = sorted(self.plain.values(), key=lambda r: r[0])[:3]
        cut = sorted(self.cut.values(), key=lambda r: r[0])[:3] if self.limit is not None else []
        jobs = [("plain", r) for r in finalists] + [("cut", r) for r in cut]
        for k, (kind, row) in enumerate(jobs):
            if len(row[1]) <= 2:
                continue
            left = None
            if total.timed:
                left = max(0.05 * (total.end - clock.now()), total.left() / (len(jobs) - k))
                if total.passed():
                    break
            if kind == "plain":
                new = reoptimize_path(self.inputs, self.output, self.size, row[1], time_budget=left)
                self.consider(new, row[2])
            else:
                ins, out = without_labels(self.inputs, self.output, row[3])
                cap = max(self.limit // self.itemsize // 3, 1)
                new = reoptimize_path(
                    ins, out, self.size, row[1], passes=3, time_budget=left, max_numel=cap
                )
                self.consider(memory_order(ins, out, self.size, new), row[2], preset=row[3])
        if self.limit is not None or not total.timed:
            return
        # Time left over: re-plan larger sub-trees of the winner (10 leaves, then 12).
        for leaves in (10, 12):
            _, path, method, _ = min(self.plain.values(), key=lambda r: r[0])
            if total.left() <= 0.1 * span or len(path) <= leaves:
                break
            new = reoptimize_path(
                self.inputs,
                self.output,
                self.size,
                path,
                frontier=leaves,
                passes=4,
                time_budget=total.left(),
            )
            self.consider(new, method)

    # -- result ------------------------------------------------------------------------------------

    def result(self, trials: int, seconds: float) -> SearchResult:
        """The search's outcome."""
        plain = sorted(self.plain.values(), key=lambda r: r[0])
        if self.limit is None or not self.cut:
            _, path, method, _ = plain[0]
            others = tuple((p, name) for _, p, name, _ in plain[1:])
            sliced: tuple[int, ...] = ()
            cuts: tuple[tuple[int, ...], ...] = ()
        else:
            _, path, method, sliced = self.sliced_best()
            cut = sorted(self.cut.values(), key=lambda r: r[0])
            # The best tree before slicing first, the other planners' sliced bests, then
            # their best trees before slicing.
            others = tuple(
                [(plain[0][1], plain[0][2])]
                + [(p, n) for _, p, n, _ in cut[1:]]
                + [(p, n) for _, p, n, _ in plain[1:]]
            )
            cuts = tuple([()] + [c for *_, c in cut[1:]] + [()] * (len(plain) - 1))
        cost = tree_cost(
            self.inputs, self.output, self.size, path, sliced=sliced, itemsize=self.itemsize
        )
        return SearchResult(path, cost, method, trials, seconds, others, sliced, cuts)
