"""The einsum door: contract any einsum network with tnsim's planner, slicing and executor."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike
from opt_einsum.parser import parse_einsum_input

from tnsim.errors import InputError
from tnsim.execution.budget import kept_plan
from tnsim.execution.options import (
    DTypeLike,
    MemoryLimit,
    check_dtype,
    resolve_options,
)
from tnsim.execution.slices import execute
from tnsim.network.graph import TensorGraph
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import make_plan
from tnsim.validate import integer, quote
from tnsim.validate import time_budget as check_time_budget

__all__ = ["contract", "einsum_network", "operand_dtype"]


def _parse(equation: str, arrays) -> tuple[list[str], str]:
    if not isinstance(equation, str):
        raise InputError(f"the equation must be a string such as 'ab,bc->ac', got {equation!r}")
    try:
        ins, out, _ = parse_einsum_input((equation, *arrays))
    except (ValueError, TypeError, KeyError, IndexError) as exc:
        raise InputError(f"cannot read einsum equation {equation!r}: {exc}") from None
    terms = ins.split(",") if arrays else []
    if len(terms) != len(arrays):
        raise InputError(
            f"einsum equation {equation!r} has {len(terms)} operand(s) but "
            f"{len(arrays)} array(s) were given"
        )
    return terms, out


def _numeric(value, k: int) -> np.ndarray:
    """Operand ``k`` as a numeric numpy array (booleans, integers, reals, complex numbers)."""
    try:
        arr = np.asarray(value)
    except (TypeError, ValueError, OverflowError):
        arr = None
    if arr is None or arr.dtype.kind not in "biufc":
        raise InputError(f"operand {k} is not an array of numbers: {quote(value)}")
    return arr


def operand_dtype(arrays: Sequence[np.ndarray]) -> np.dtype:
    """complex64 when every operand fits it (float32, complex64, small integers), else complex128.

    Examples
    --------
    >>> operand_dtype([np.ones(2, np.float32)]), operand_dtype([np.ones(2)])
    (dtype('complex64'), dtype('complex128'))
    """
    dt = np.result_type(np.complex64, *arrays)
    return dt if dt == np.complex64 else np.dtype(np.complex128)


def einsum_network(
    equation: str, *arrays: ArrayLike, dtype: DTypeLike | None = None
) -> TensorGraph:
    """Build a :class:`TensorGraph` from an einsum equation and its arrays.

    A letter repeated within one operand (``"ii->i"``) takes that operand's
    diagonal first; a label may appear in any number of operands (hyperedge).
    The network's dtype is ``dtype``, else complex64 when every operand fits
    it (float32, complex64, integers of at most 16 bits), else complex128.

    Raises
    ------
    InputError
        If the equation is malformed, an operand's rank or a letter's dimension
        does not match, or an output letter is repeated or found in no operand.

    Examples
    --------
    >>> tn = einsum_network("ij,jk->ik", np.ones((2, 3)), np.ones((3, 4)))
    >>> tn.indices, tn.output, tn.size
    ([(0, 1), (1, 2)], (0, 2), {0: 2, 1: 3, 2: 4})
    """
    operands = [_numeric(a, k) for k, a in enumerate(arrays)]
    terms, out = _parse(equation, operands)
    table: dict[str, int] = {}
    size: dict[int, int] = {}
    dt = operand_dtype(operands) if dtype is None else check_dtype(dtype)
    net_arrays, indices = [], []
    for k, (term, arr) in enumerate(zip(terms, operands)):
        if len(term) != arr.ndim:
            raise InputError(
                f"operand {k} of {equation!r} is labelled {term!r} ({len(term)} axes) "
                f"but has shape {arr.shape}"
            )
        for c, d in zip(term, arr.shape):
            label = table.setdefault(c, len(table))
            if size.setdefault(label, d) != d:
                raise InputError(
                    f"letter {c!r} of {equation!r} has dimension {size[label]} in one operand "
                    f"and {d} in operand {k}"
                )
        unique = "".join(dict.fromkeys(term))
        if unique != term:
            arr = np.einsum(f"{term}->{unique}", arr)
        net_arrays.append(np.asarray(arr, dtype=dt))
        indices.append(tuple(table[c] for c in unique))
    if len(set(out)) != len(out):
        raise InputError(f"output {out!r} of {equation!r} repeats a letter")
    missing = [c for c in out if c not in table]
    if missing:
        raise InputError(f"output letter(s) {''.join(missing)!r} of {equation!r} are in no operand")
    output = tuple(table[c] for c in out)
    return TensorGraph(net_arrays, indices, size, output, 0, dt)


def contract(
    equation: str,
    *arrays: ArrayLike,
    memory_limit: MemoryLimit | None = None,
    dtype: DTypeLike | None = None,
    time_budget: float | None = None,
    seed: int = 0,
) -> np.ndarray:
    """Contract an einsum expression with tnsim's planner, slicing and executor.

    Parameters
    ----------
    equation : str
        numpy einsum notation (``"ab,bc->ac"``; implicit output and ``...``
        accepted).
    *arrays : array_like
        The operands.
    memory_limit : int or str, optional
        Bytes, or text such as ``"4GiB"``, for live intermediates (inputs not
        counted); default the enclosing ``run_options`` block's, else half of
        the available memory.  The contraction is sliced to fit.
    dtype : numpy dtype, optional
        complex64 or complex128 for the contraction; default the block's, else
        complex64 when every operand fits it, else complex128.  Real operands
        give a real result.
    time_budget : float, optional
        Seconds for the planner's search (default: automatic).
    seed : int
        Seed of the planner's random choices.

    Returns
    -------
    numpy.ndarray
        The result (0-d for a full contraction), complex if any operand is
        complex, else real.

    Raises
    ------
    InputError
        For a malformed equation or operands that do not match it.
    ResourceLimitError
        If no slicing fits ``memory_limit``.

    Examples
    --------
    >>> a = np.arange(6.0).reshape(2, 3)
    >>> contract("ij,ij->", a, a)
    array(55.)
    >>> contract("ii->i", np.eye(2) * 3)
    array([3., 3.])
    """
    time_budget = check_time_budget(time_budget)
    seed = integer(seed, "seed")
    operands = [_numeric(a, k) for k, a in enumerate(arrays)]
    opts = resolve_options(memory_limit, dtype=dtype, default_dtype=operand_dtype(operands))
    net = einsum_network(equation, *operands, dtype=opts.dtype)
    real = not any(np.iscomplexobj(a) for a in operands)
    small = absorb_small(net)
    budget = time_budget if time_budget is not None else opts.block.time_budget
    plan = kept_plan(
        small,
        lambda: make_plan(small, memory_limit=opts.slice_limit, time_budget=budget, seed=seed),
    )
    result = execute(small, plan.tree, plan.sliced, memory_limit=opts.memory_limit).value()
    result = np.asarray(result)
    if net.dtype == np.complex64:
        result = result.astype(np.complex64)
    return np.array(result.real) if real else result
