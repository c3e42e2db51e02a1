"""Checks at the door: arguments of the public API, refused with tnsim's own errors.

Every public function checks its arguments -- type, range, finiteness, size
against memory -- before it uses them, with these helpers, so a caller gets
an :class:`~tnsim.errors.InputError` (or :class:`~tnsim.errors.ResourceLimitError`)
that says what was wrong, never an exception of numpy or Python.  Messages
quote at most :data:`QUOTE` characters of what was given (:func:`quote`).
"""

from __future__ import annotations

import math
import numbers
import os
from collections.abc import Mapping

import numpy as np

from tnsim.errors import InputError

__all__ = [
    "QUOTE",
    "integer",
    "make_rng",
    "path_like",
    "quote",
    "real_number",
    "seed_value",
    "sequence",
    "time_budget",
]

#: Characters of an offending value quoted in a message at most.
QUOTE = 80


def quote(value, limit: int = QUOTE) -> str:
    """``repr(value)``, cut to about ``limit`` characters.

    Examples
    --------
    >>> quote("x" * 200)[:10], len(quote("x" * 200)) <= 110
    ("'xxxxxxxxx", True)
    """
    if isinstance(value, str) and len(value) > limit:  # do not build a huge repr first
        text = repr(value[:limit])
        return f"{text[:-1]}...{text[-1]} ({len(value)} characters)"
    if isinstance(value, np.ndarray) and value.size > 16:
        return f"array of shape {value.shape} and dtype {value.dtype}"
    if isinstance(value, int) and not isinstance(value, bool) and value.bit_length() > 200:
        return f"an integer of {value.bit_length()} bits"
    try:
        text = repr(value)
    except Exception:  # a broken __repr__ of the caller's object
        text = f"<{type(value).__name__}>"
    if "\n" in text:  # one line: arrays and other multi-line reprs
        text = " ".join(text.split())
    return text if len(text) <= limit else text[:limit] + "..."


def real_number(value, what: str) -> float:
    """``value`` as a finite float: any real number (int, float, Fraction, numpy), not bool.

    Examples
    --------
    >>> from fractions import Fraction
    >>> real_number(Fraction(1, 4), "angle")
    0.25
    """
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputError(f"{what} must be a real number, got {quote(value)}")
    try:
        number = float(value)
    except (OverflowError, ValueError, TypeError):
        raise InputError(f"{what} {quote(value)} is too large for a float") from None
    if not math.isfinite(number):
        raise InputError(f"{what} must be finite, got {quote(value)}")
    return number


def integer(value, what: str, low: int | None = None, high: int | None = None) -> int:
    """``value`` as an int within ``[low, high]``; bools and non-integers refused.

    Examples
    --------
    >>> integer(np.int64(3), "qubit", 0, 4)
    3
    """
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise InputError(f"{what} must be an integer, got {quote(value)}")
    number = int(value)
    if (low is not None and number < low) or (high is not None and number > high):
        span = f"from {low} to {high}" if low is not None and high is not None else ""
        span = span or (f"at least {low}" if low is not None else f"at most {high}")
        raise InputError(f"{what} must be {span}, got {quote(number)}")
    return number


def sequence(value, what: str) -> list:
    """``value`` as a list: any sized iterable but text, bytes and mappings.

    Examples
    --------
    >>> sequence((1, 2), "qubits")
    [1, 2]
    """
    if isinstance(value, (str, bytes, Mapping)) or not hasattr(value, "__iter__"):
        raise InputError(f"{what} must be a list, got {quote(value)}")
    if isinstance(value, np.ndarray) and value.ndim != 1:
        raise InputError(f"{what} must be a 1-D list, got an array of shape {value.shape}")
    try:
        return list(value)
    except TypeError:
        raise InputError(f"{what} must be a list, got {quote(value)}") from None


def seed_value(seed) -> int | np.random.Generator | None:
    """A seed: any integer (negative ones too), a numpy Generator, or None (fresh entropy).

    Examples
    --------
    >>> seed_value(-5)
    -5
    """
    if seed is None or isinstance(seed, np.random.Generator):
        return seed
    return integer(seed, "seed")


def make_rng(seed) -> np.random.Generator:
    """The numpy Generator of a seed (:func:`seed_value`); a negative seed is its own stream.

    Examples
    --------
    >>> int(make_rng(-1).integers(10**9)) == int(make_rng(-1).integers(10**9))
    True
    """
    seed = seed_value(seed)
    if isinstance(seed, np.random.Generator):
        return seed
    if seed is not None and seed < 0:
        return np.random.default_rng([-seed, 1])  # distinct from every non-negative seed
    return np.random.default_rng(seed)


def time_budget(value) -> float | None:
    """Seconds of planning: None (automatic) or a finite positive number.

    Examples
    --------
    >>> time_budget(2)
    2.0
    """
    if value is None:
        return None
    seconds = real_number(value, "time_budget")
    if seconds <= 0:
        raise InputError(f"time_budget must be a positive number of seconds, got {seconds}")
    return seconds


def path_like(value, what: str) -> str:
    """A file or folder name given as text or a path object.

    Examples
    --------
    >>> path_like("ck", "checkpoint")
    'ck'
    """
    if not isinstance(value, (str, os.PathLike)):
        raise InputError(f"{what} must be a file or folder name, got {quote(value)}")
    path = os.fspath(value)
    if not isinstance(path, str) or not path or "\0" in path:
        raise InputError(f"{what} must be a file or folder name, got {quote(value)}")
    return path
