"""Contraction planning: trees, their cost, and the planners that choose them.

:func:`make_plan` is the single entry point the queries use: network in, :class:`Plan` out.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..network import TensorNetwork
from .greedy import greedy_tree
from .tree import ContractionTree

__all__ = ["ContractionTree", "Plan", "greedy_tree", "make_plan"]


@dataclass(frozen=True)
class Plan:
    """A contraction tree plus the labels to slice over.

    Attributes
    ----------
    tree : ContractionTree
        Order of pairwise contractions over the network's tensors.
    sliced : tuple of int
        Labels fixed to each of their values in turn; the slices are summed.
    """

    tree: ContractionTree
    sliced: tuple[int, ...] = ()


def make_plan(
    network: TensorNetwork,
    *,
    memory_limit: int | None = None,
    time_budget: float | None = None,
    seed: int = 0,
) -> Plan:
    """Choose a contraction plan for ``network``.

    Parameters
    ----------
    network : TensorNetwork
        The (simplified) network to plan.
    memory_limit : int, optional
        Bytes the live intermediates may use; the plan is sliced to fit.
    time_budget : float, optional
        Seconds the planner may search.
    seed : int
        Seed of every random choice (same seed, same plan).

    Returns
    -------
    Plan
    """
    return Plan(greedy_tree(network.indices, network.output, network.size))
