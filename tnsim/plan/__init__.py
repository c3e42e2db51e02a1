"""Contraction planning: trees, their cost, and the planners that choose them."""

from .greedy import greedy_tree
from .tree import ContractionTree

__all__ = ["ContractionTree", "greedy_tree"]
