"""The contraction tree: which pairs of tensors are contracted, in what order."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

__all__ = ["ContractionTree", "relabel_compact"]


@dataclass(frozen=True)
class ContractionTree:
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
    """

    inputs: tuple[tuple[int, ...], ...]
    output: tuple[int, ...]
    size: Mapping[int, int]
    path: tuple[tuple[int, int], ...]

    @property
    def num_leaves(self) -> int:
        """Number of input tensors."""
        return len(self.inputs)


def relabel_compact(
    indices: Sequence[Sequence[int]], output: Sequence[int]
) -> tuple[list[tuple[int, ...]], tuple[int, ...]]:
    """Renumber labels to ``0, 1, 2, ...`` in order of first appearance.

    Examples
    --------
    >>> relabel_compact([(7, 3), (3, 9)], (9,))
    ([(0, 1), (1, 2)], (2,))
    """
    table: dict[int, int] = {}
    new = [tuple(table.setdefault(i, len(table)) for i in ix) for ix in indices]
    return new, tuple(table.setdefault(i, len(table)) for i in output)
