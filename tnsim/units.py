"""Byte counts: memory limits read from text, and byte counts written as text.

A limit is a number of bytes.  Text such as ``"4GiB"``, ``"512 MB"`` or
``"1e9"`` is accepted wherever a limit is; binary prefixes (KiB, MiB, GiB,
TiB) are powers of 1024 and decimal ones (kB, MB, GB, TB) powers of 1000
(IEC 80000-13:2008).  :func:`parse_memory` is the one reader of such text.
"""

from __future__ import annotations

import math
import numbers
import re
import sys

from tnsim.errors import InputError

__all__ = ["format_bytes", "parse_memory"]

_UNITS = {
    "": 1,
    "b": 1,
    "k": 1000,
    "kb": 1000,
    "m": 1000**2,
    "mb": 1000**2,
    "g": 1000**3,
    "gb": 1000**3,
    "t": 1000**4,
    "tb": 1000**4,
    "kib": 1024,
    "mib": 1024**2,
    "gib": 1024**3,
    "tib": 1024**4,
}


_PATTERN = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*([a-zA-Z]*)\s*$")


def _quote(value: object) -> str:
    """:func:`tnsim.validate.quote`, imported only on an error path (it loads numpy)."""
    from tnsim.validate import quote as shown

    return shown(value)


def _is_bool(value: object) -> bool:
    """Whether ``value`` is a Python or numpy boolean (numpy is not imported for this)."""
    if isinstance(value, bool):
        return True
    np = sys.modules.get("numpy")  # a numpy boolean exists only once numpy is loaded
    return np is not None and isinstance(value, np.bool_)


def parse_memory(value: int | float | str) -> int:
    """Return a memory limit in bytes.

    Parameters
    ----------
    value : int, float or str
        Bytes, or text with an optional unit (``"4GiB"``, ``"500MB"``, ``"1e9"``).

    Returns
    -------
    int
        Bytes (positive).

    Raises
    ------
    InputError
        If the text cannot be read or the value is not positive.

    Examples
    --------
    >>> parse_memory("4GiB")
    4294967296
    >>> parse_memory("1.5 kB")
    1500
    >>> parse_memory(2048)
    2048
    """
    if _is_bool(value):
        raise InputError(f"memory limit must be bytes or text such as '4GiB', got {value!r}")
    if isinstance(value, numbers.Integral):
        if value < 1:
            raise InputError(f"memory limit must be at least 1 byte, got {_quote(value)}")
        return int(value)
    if isinstance(value, numbers.Real):
        number, unit = float(value), ""
    elif isinstance(value, str):
        match = _PATTERN.match(value) if len(value) <= 100 else None
        if match is None or match.group(2).lower() not in _UNITS:
            raise InputError(
                f"cannot read memory limit {_quote(value)}; give bytes or a number with a unit "
                "such as '4GiB', '512MiB' or '8GB'"
            )
        number, unit = float(match.group(1)), match.group(2).lower()
    else:
        raise InputError(f"memory limit must be bytes or text such as '4GiB', got {_quote(value)}")
    total = number * _UNITS[unit]
    if not math.isfinite(total) or total < 1:
        raise InputError(f"memory limit must be at least 1 byte, got {_quote(value)}")
    return int(total)


def format_bytes(num: float, digits: int = 2) -> str:
    """Return a byte count as short text with a binary prefix (``digits`` decimals).

    Examples
    --------
    >>> format_bytes(3 * 1024**3)
    '3.00 GiB'
    >>> format_bytes(512), format_bytes(25000, 1)
    ('512 B', '24.4 KiB')
    """
    if num < 1024:
        return f"{int(num)} B"
    for unit in ("KiB", "MiB", "GiB", "TiB", "PiB"):
        num /= 1024
        if num < 1024 or unit == "PiB":
            return f"{num:.{digits}f} {unit}"
    raise AssertionError("unreachable")
