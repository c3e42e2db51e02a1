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
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import opt_einsum.paths as oe_paths

from tnsim.fitted import WRITE_FLOPS
from tnsim.plan.builder import plan_coarse
from tnsim.plan.elimination import elimination_path
from tnsim.plan.partition import bisection_path, sweep_path
from tnsim.plan.reoptimize import reoptimize_path
from tnsim.plan.tree import TreeCost, join_pairwise, tree_cost

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
        tree of a different shape may slice better than the winner).
    """

    path: tuple[tuple[int, int], ...]
    cost: TreeCost
    method: str
    trials: int
    seconds: float
    alternatives: tuple[tuple[tuple[tuple[int, int], ...], str], ...] = ()


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
        choices = []
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
    if cost_fn == "memory-removed-jitter":

        def cost(size12, size1, size2, k12, k1, k2):
            return (size12 - size1 - size2) * (1 + 0.01 * rng.standard_normal())

    else:
        cost = cost_fn
    ssa = oe_paths.ssa_greedy_optimize(
        ins, frozenset(output), dict(size), choose_fn=choose, cost_fn=cost
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


def _trial(method: str, inputs, output, size, rng: np.random.Generator):
    if method != "greedy" and len(inputs) > 30 and rng.random() < 0.25:
        max_size = int(2 ** rng.integers(6, 13))
        return plan_coarse(
            inputs, output, size, max_size, lambda i, o, s: _trial(method, i, o, s, rng)
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


METHODS = ("greedy", "random-greedy", "elimination", "bisection", "sweep")


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
) -> SearchResult:
    """Search for a good contraction tree with seeded random trials.

    Parameters
    ----------
    inputs, output, size
        The network.
    time_budget : float or None
        Seconds for the whole search (trials take about 70%, sub-tree
        re-planning the rest); at least one trial always runs.  ``None``: no
        time limit (then ``max_trials`` defaults to 16), fully reproducible.
    max_trials : int, optional
        Stop after this many trials.
    seed : int
        Seeds the single numpy generator behind every random choice.
    objective : {"operations", "runtime", "footprint"}
        See :func:`score`.
    memory_limit : int, optional
        Bytes; trees whose peak exceeds it are charged their slicing overhead.
    itemsize : int
        Bytes per element.
    methods : sequence of str
        Planners to draw from (subset of ``METHODS``).
    reoptimize : bool
        Re-plan sub-trees of the best tree exactly afterwards.
    progress : bool
        Show a tqdm progress bar of the trials.
    stop_rate : float, optional
        FLOP/s.  Once every planner has had a trial, stop searching when the
        time spent exceeds what the best tree so far would take to contract at
        this rate (searching longer than the contraction itself cannot pay off);
        the sub-tree re-planning then gets about as long again.

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
    start = time.perf_counter()
    rng = np.random.default_rng(seed)
    if time_budget is None and max_trials is None:
        max_trials = 16
    trial_time = math.inf if time_budget is None else (0.7 if reoptimize else 1.0) * time_budget
    best: tuple[float, tuple, TreeCost, str] | None = None
    per_method: dict[str, tuple[float, tuple, TreeCost, str]] = {}
    trials = 0
    bar = None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=max_trials, desc="planning", unit="trial", leave=False)
    methods = list(methods)
    try:
        while True:
            if trials >= len(methods):
                # Half the trials go to the planner of the best tree so far, half to any.
                pool = [m for m in methods if m != "greedy"] or methods
                if best[3] in pool and rng.random() < 0.5:
                    method = best[3]
                else:
                    method = str(rng.choice(pool))
            else:
                method = methods[trials]
            path = _trial(method, inputs, output, size, rng)
            cost = tree_cost(inputs, output, size, path, itemsize=itemsize)
            key = score(cost, objective, memory_limit)
            if best is None or key < best[0]:
                best = (key, path, cost, method)
            if method not in per_method or key < per_method[method][0]:
                per_method[method] = (key, path, cost, method)
            trials += 1
            if bar is not None:
                bar.update(1)
                bar.set_postfix(log10_flops=f"{math.log10(max(best[2].flops, 1)):.2f}")
            if max_trials is not None and trials >= max_trials:
                break
            elapsed = time.perf_counter() - start
            if elapsed > trial_time:
                break
            if stop_rate and trials >= len(methods) and elapsed > best[2].flops / stop_rate:
                break
    finally:
        if bar is not None:
            bar.close()
    _, path, cost, method = best
    if stop_rate and time_budget is not None:
        spent = time.perf_counter() - start
        time_budget = min(time_budget, 2 * max(spent, cost.flops / stop_rate))
    if reoptimize and len(path) > 2:
        # Re-plan the best tree of each of the (up to) three best planners: sub-tree
        # re-planning helps some planners' trees (sweeps) far more than others.
        finalists = sorted(per_method.values(), key=lambda r: r[0])[:3]
        for k, (_, cand, _, name) in enumerate(finalists):
            left = None
            if time_budget is not None:
                spent = time.perf_counter() - start
                left = max(0.05 * time_budget, (time_budget - spent) / (len(finalists) - k))
            new = reoptimize_path(inputs, output, size, cand, time_budget=left)
            new_cost = tree_cost(inputs, output, size, new, itemsize=itemsize)
            new_key = score(new_cost, objective, memory_limit)
            if new_key < per_method[name][0]:
                per_method[name] = (new_key, new, new_cost, name)
            if new_key < score(cost, objective, memory_limit):
                path, cost, method = new, new_cost, name
        # Time left over: re-plan larger sub-trees of the winner (10 leaves, then 12).
        for leaves in (10, 12):
            left = None if time_budget is None else time_budget - (time.perf_counter() - start)
            if left is None or left <= 0.1 * time_budget or len(path) <= leaves:
                break
            new = reoptimize_path(
                inputs, output, size, path, max_leaves=leaves, passes=4, time_budget=left
            )
            new_cost = tree_cost(inputs, output, size, new, itemsize=itemsize)
            if score(new_cost, objective, memory_limit) < score(cost, objective, memory_limit):
                path, cost = new, new_cost
    others = tuple(
        (tuple(p), name)
        for _, p, _, name in sorted(per_method.values(), key=lambda r: r[0])
        if name != method
    )
    return SearchResult(tuple(path), cost, method, trials, time.perf_counter() - start, others)
