"""Stage 3 of the pipeline: contraction plans.

:class:`PairTree` and the cost model (:mod:`.tree`); planners, all
``(inputs, output, size) -> SSA path``: :mod:`.greedy`, :mod:`.elimination`,
:mod:`.partition`, :mod:`.builder`, :mod:`.reoptimize`; the seeded search
(:mod:`.search`); slicing (:mod:`.slicing`); the driver (:mod:`.driver`,
:func:`make_plan`); the opt_einsum door (:mod:`.optimizer`, :class:`Planner`).
"""

from tnsim.plan.driver import Plan, make_plan, plan_candidates, plan_path
from tnsim.plan.greedy import greedy_tree
from tnsim.plan.optimizer import Planner
from tnsim.plan.tree import PairTree

__all__ = [
    "PairTree",
    "Plan",
    "Planner",
    "greedy_tree",
    "make_plan",
    "plan_candidates",
    "plan_path",
]
