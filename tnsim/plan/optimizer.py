"""tnsim's planner behind opt_einsum's path-optimizer protocol.

``opt_einsum.contract_path(eq, *arrays, optimize=Planner(...))`` and
``opt_einsum.contract(...)`` then use tnsim's search.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping

import opt_einsum.paths as oe_paths

from tnsim.plan.tree import ssa_to_linear

__all__ = ["Planner"]


class Planner(oe_paths.PathOptimizer):
    """A path optimizer for opt_einsum that runs tnsim's planner.

    Parameters
    ----------
    time_budget : float, optional
        Seconds of search per call; default: exact on at most 14 tensors,
        otherwise a budget growing with the greedy cost (see
        :func:`tnsim.plan.driver.plan_path`).
    seed : int
        Seed of every random choice.
    memory_limit : int, optional
        Bytes; trees whose live intermediates exceed it are penalised by
        their slicing overhead (a path cannot carry slices; use
        :func:`tnsim.queries.contract` to slice).  opt_einsum's own per-call
        ``memory_limit`` (elements of the largest intermediate) is converted
        with ``itemsize`` and the smaller limit is used.
    max_trials : int, optional
        Limit on the search's trials.
    itemsize : int
        Bytes per element for memory figures (16: complex128).
    progress : bool
        Show a progress bar while searching.
    objective : {"operations", "runtime", "footprint"}
        What the search minimises (default ``"operations"``, i.e. FLOPs, opt_einsum's own
        measure; ``"runtime"`` adds a cost per element written, see
        :func:`tnsim.plan.search.score`).

    Attributes
    ----------
    last_method : str
        The planner that produced the last path.

    Examples
    --------
    >>> import opt_einsum
    >>> path, info = opt_einsum.contract_path(
    ...     "ab,bc,cd->ad", (2, 3), (3, 4), (4, 5), shapes=True, optimize=Planner(seed=1))
    >>> path
    [(0, 1), (0, 1)]
    """

    def __init__(
        self,
        time_budget: float | None = None,
        seed: int = 0,
        memory_limit: int | None = None,
        max_trials: int | None = None,
        itemsize: int = 16,
        progress: bool = False,
        objective: str = "operations",
    ):
        self.time_budget = time_budget
        self.seed = seed
        self.memory_limit = memory_limit
        self.max_trials = max_trials
        self.itemsize = itemsize
        self.progress = progress
        self.objective = objective
        self.last_method = ""

    def __call__(
        self,
        inputs: list[frozenset[str]],
        output: frozenset[str],
        size_dict: Mapping[str, int],
        memory_limit: int | None = None,
    ) -> list[tuple[int, ...]]:
        """Return a linear path (pairs of positions in the current operand list)."""
        from tnsim.plan.driver import plan_path

        if len(inputs) == 1:
            return [(0,)]
        table: dict[str, int] = {}
        ins = [tuple(table.setdefault(c, len(table)) for c in sorted(ix)) for ix in inputs]
        out = tuple(table.setdefault(c, len(table)) for c in sorted(output))
        size = {table[c]: int(d) for c, d in size_dict.items() if c in table}
        limit = _combine(self.memory_limit, memory_limit, self.itemsize)
        path, self.last_method = plan_path(
            ins,
            out,
            size,
            time_budget=self.time_budget,
            seed=self.seed,
            memory_limit=limit,
            itemsize=self.itemsize,
            max_trials=self.max_trials,
            progress=self.progress,
            objective=self.objective,
        )
        return list(ssa_to_linear(path, len(ins)))


def _combine(own: int | None, elements: int | Collection | None, itemsize: int) -> int | None:
    """Smaller of a byte limit and opt_einsum's element limit (``-1``/``None``: none)."""
    limits = [own] if own is not None else []
    if isinstance(elements, (int, float)) and elements > 0:
        limits.append(int(elements) * itemsize)
    return min(limits) if limits else None
