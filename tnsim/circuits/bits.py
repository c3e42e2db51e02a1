"""Bitstrings: parsing, validation and reading them from files.

Convention: character ``i`` of a bitstring is qubit ``i`` (the leftmost
character is qubit 0).
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Sequence

import numpy as np

from tnsim.errors import InputError
from tnsim.validate import quote

__all__ = [
    "Bitstring",
    "Bitstrings",
    "format_bits",
    "parse_bits",
    "parse_many",
    "parse_rows",
    "read_bits_file",
]

Bitstring = str | Sequence[int]
"""One bitstring: text such as ``"0110"`` (character i is qubit i) or a sequence of 0/1."""

Bitstrings = Iterable[str | Sequence[int]] | np.ndarray
"""Several bitstrings: an iterable of :data:`Bitstring`, or a ``(count, n)`` array of 0/1."""


def parse_bits(bits: Bitstring, num_qubits: int, *, where: str = "") -> np.ndarray:
    """Turn a bitstring into an array of 0/1 of length ``num_qubits``.

    Parameters
    ----------
    bits : str or sequence of int
        ``"0110"`` (character i is qubit i) or a sequence of 0/1 integers.
    num_qubits : int
        The length the bitstring must have.
    where : str
        Prefix for error messages (for example ``"file.txt:3:1: "``).

    Returns
    -------
    numpy.ndarray
        ``uint8`` array of 0s and 1s.

    Raises
    ------
    InputError
        Wrong length or a character other than 0 and 1.

    Examples
    --------
    >>> parse_bits("0110", 4)
    array([0, 1, 1, 0], dtype=uint8)
    """
    if bits is None or isinstance(bits, (bytes, dict)):
        raise InputError(f"{where}give a bitstring such as '0110', got {quote(bits)}")
    if isinstance(bits, str):
        text = bits.strip()
        bad = next((i for i, ch in enumerate(text) if ch not in "01"), None)
        if bad is not None:
            raise InputError(
                f"{where}bitstring {quote(text, 40)} has {text[bad]!r} at position {bad}; "
                "use only 0 and 1 (character i is qubit i)"
            )
        arr = np.frombuffer(text.encode(), dtype=np.uint8) - ord("0")
    else:
        arr = _bit_array(bits, 1, where)
    if arr.size != num_qubits:
        raise InputError(
            f"{where}bitstring has {arr.size} bit(s) but the circuit has {num_qubits} qubit(s); "
            "give one bit per qubit (character i is qubit i)"
        )
    return arr


def _bit_array(bits, ndim: int, where: str = "") -> np.ndarray:
    """``bits`` as a ``uint8`` array of 0s and 1s with ``ndim`` axes, checked before the cast.

    Only integer and boolean values are bits: a float array (probabilities?)
    is refused rather than rounded, and so is any value other than 0 and 1
    (a cast to ``uint8`` would turn 256 into 0).
    """
    try:
        arr = np.asarray(bits)
    except (TypeError, ValueError, OverflowError):
        arr = None
    if arr is None or arr.dtype.kind not in "biu" or arr.ndim != ndim:
        shape = "a 1-D sequence" if ndim == 1 else "a (count, qubits) array"
        raise InputError(
            f"{where}bitstrings must be {shape} of integers 0 and 1, got {quote(bits)}"
        )
    bad = np.flatnonzero((arr.reshape(-1) != 0) & (arr.reshape(-1) != 1))
    if bad.size:
        value = arr.reshape(-1)[bad[0]]
        raise InputError(
            f"{where}bitstring holds {quote(value.item())} at position "
            f"{tuple(int(i) for i in np.unravel_index(bad[0], arr.shape))}; use only 0s and 1s"
        )
    return arr.astype(np.uint8)


def parse_rows(rows, num_qubits: int) -> np.ndarray:
    """Check a ``(count, num_qubits)`` array of bits; return it as ``uint8``.

    Examples
    --------
    >>> parse_rows(np.array([[0, 1], [1, 1]]), 2).dtype
    dtype('uint8')
    """
    arr = _bit_array(rows, 2)
    if arr.shape[1] != num_qubits:
        raise InputError(
            f"bitstring array of shape {arr.shape} has {arr.shape[1]} column(s) but the circuit "
            f"has {num_qubits} qubit(s); give one column per qubit (column i is qubit i)"
        )
    return arr


def parse_many(bitstrings: Bitstrings, num_qubits: int) -> np.ndarray:
    """Parse several bitstrings into a ``(count, num_qubits)`` ``uint8`` array.

    A 2-D array is checked as a whole (:func:`parse_rows`).

    Examples
    --------
    >>> parse_many(["01", "10"], 2).tolist()
    [[0, 1], [1, 0]]
    >>> parse_many(np.array([[1, 1]]), 2).tolist()
    [[1, 1]]
    """
    if isinstance(bitstrings, np.ndarray) and bitstrings.ndim == 2:
        return parse_rows(bitstrings, num_qubits)
    if isinstance(bitstrings, (str, bytes)) or not hasattr(bitstrings, "__iter__"):
        raise InputError(
            f"give a list of bitstrings (character i is qubit i), got {quote(bitstrings)}"
        )
    rows = [parse_bits(b, num_qubits, where=f"bitstring {k}: ") for k, b in enumerate(bitstrings)]
    if not rows:
        return np.zeros((0, num_qubits), dtype=np.uint8)
    return np.stack(rows)


def read_bits_file(path: str | os.PathLike, num_qubits: int) -> np.ndarray:
    r"""Read one bitstring per line (blank lines and ``#`` comments skipped).

    Lines end at ``\n``, ``\r\n`` or ``\r`` (so line numbers are those an editor
    shows), never at other characters Python counts as line breaks (form
    feeds, ``\x1c``...), which are refused as bits.

    Raises
    ------
    InputError
        The file cannot be read or a line is not a valid bitstring; the
        message names ``file:line:column``.
    """
    try:
        with open(path, encoding="utf-8") as fh:  # universal newlines: \r and \r\n become \n
            lines = fh.read().split("\n")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read bitstring file {os.fspath(path)!r}: {exc}") from None
    rows = []
    for lineno, line in enumerate(lines, 1):
        text = line.split("#", 1)[0]
        if not text.strip():
            continue
        col = len(text) - len(text.lstrip()) + 1
        rows.append(parse_bits(text, num_qubits, where=f"{os.fspath(path)}:{lineno}:{col}: "))
    if not rows:
        raise InputError(f"{os.fspath(path)}: no bitstrings found; write one per line")
    return np.stack(rows)


def format_bits(row: Sequence[int] | np.ndarray) -> str:
    """Return the bitstring text of a 0/1 row (character i is qubit i).

    Examples
    --------
    >>> format_bits([1, 0, 1])
    '101'
    """
    return (np.asarray(row, dtype=np.uint8) + ord("0")).tobytes().decode()
