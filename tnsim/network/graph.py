"""The network type: arrays joined by integer index labels.

A :class:`TensorGraph` is plain data: a list of arrays, the integer index
labels of each array's axes, the size of every label, the open (output) labels,
and a power-of-two scale ``2**exponent`` multiplying the whole network.  A
label shared by more than two arrays is a hyperedge: the network's value sums
over it once.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import opt_einsum

__all__ = ["TensorGraph", "relabel_compact"]


@dataclass
class TensorGraph:
    """Arrays joined by shared integer index labels.

    Attributes
    ----------
    arrays : list of numpy.ndarray
        The tensors.
    indices : list of tuple of int
        ``indices[k][a]`` labels axis ``a`` of ``arrays[k]``; a label appears at
        most once per tensor.
    size : dict of int to int
        Dimension of every label.
    output : tuple of int
        Open labels, in the order of the result's axes.
    exponent : int
        The network's value is multiplied by ``2**exponent``.
    """

    arrays: list[np.ndarray]
    indices: list[tuple[int, ...]]
    size: dict[int, int]
    output: tuple[int, ...] = ()
    exponent: int = 0
    dtype: np.dtype = field(default_factory=lambda: np.dtype(np.complex128))

    def __len__(self) -> int:
        return len(self.arrays)

    def equation(self) -> str:
        """Return the network as an einsum equation using opt_einsum symbols.

        Examples
        --------
        >>> import numpy as np
        >>> tn = TensorGraph([np.ones((2, 3)), np.ones(3)], [(0, 1), (1,)], {0: 2, 1: 3}, (0,))
        >>> tn.equation()
        'ab,b->a'
        """
        sym = opt_einsum.get_symbol
        ins = ",".join("".join(sym(i) for i in ix) for ix in self.indices)
        return f"{ins}->{''.join(sym(i) for i in self.output)}"

    def dense(self) -> np.ndarray:
        """Contract the whole network with ``numpy.einsum`` (small networks only; for tests)."""
        inputs, output = relabel_compact(self.indices, self.output)
        eq_in = ",".join("".join(opt_einsum.get_symbol(i) for i in ix) for ix in inputs)
        eq = f"{eq_in}->{''.join(opt_einsum.get_symbol(i) for i in output)}"
        value = opt_einsum.contract(eq, *self.arrays, optimize="greedy")
        return np.ldexp(value.real, self.exponent) + 1j * np.ldexp(value.imag, self.exponent)


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
