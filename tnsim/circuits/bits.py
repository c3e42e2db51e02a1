"""Bitstrings: parsing, validation and reading them from files.

Convention: character ``i`` of a bitstring is qubit ``i`` (the leftmost
character is qubit 0).
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Sequence

import numpy as np

from tnsim.errors import InputError

__all__ = ["Bitstring", "Bitstrings", "format_bits", "parse_bits", "parse_many", "read_bits_file"]

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
    if isinstance(bits, str):
        text = bits.strip()
        bad = next((i for i, ch in enumerate(text) if ch not in "01"), None)
        if bad is not None:
            raise InputError(
                f"{where}bitstring {text[:40]!r} has {text[bad]!r} at position {bad}; "
                "use only 0 and 1 (character i is qubit i)"
            )
        arr = np.frombuffer(text.encode(), dtype=np.uint8) - ord("0")
    else:
        arr = np.asarray(bits)
        if arr.ndim != 1 or not np.isin(arr, (0, 1)).all():
            raise InputError(f"{where}bitstring must be a 1-D sequence of 0s and 1s, got {bits!r}")
        arr = arr.astype(np.uint8)
    if arr.size != num_qubits:
        raise InputError(
            f"{where}bitstring has {arr.size} bit(s) but the circuit has {num_qubits} qubit(s); "
            "give one bit per qubit (character i is qubit i)"
        )
    return arr


def parse_many(bitstrings: Bitstrings, num_qubits: int) -> np.ndarray:
    """Parse several bitstrings into a ``(count, num_qubits)`` ``uint8`` array.

    ``bitstrings`` is an iterable of bitstrings (text or 0/1 sequences) or a
    2-D array of 0s and 1s, one row per bitstring.

    Examples
    --------
    >>> parse_many(["01", "10"], 2).tolist()
    [[0, 1], [1, 0]]
    >>> parse_many(np.array([[1, 1]]), 2).tolist()
    [[1, 1]]
    """
    if isinstance(bitstrings, np.ndarray) and bitstrings.ndim == 2:
        if bitstrings.shape[1] != num_qubits or not np.isin(bitstrings, (0, 1)).all():
            raise InputError(
                f"bitstring array must be (count, {num_qubits}) of 0s and 1s, "
                f"got shape {bitstrings.shape}; give one row of bits per bitstring"
            )
        return np.asarray(bitstrings, dtype=np.uint8)
    rows = [parse_bits(b, num_qubits, where=f"bitstring {k}: ") for k, b in enumerate(bitstrings)]
    if not rows:
        return np.zeros((0, num_qubits), dtype=np.uint8)
    return np.stack(rows)


def read_bits_file(path: str | os.PathLike, num_qubits: int) -> np.ndarray:
    """Read one bitstring per line (blank lines and ``#`` comments skipped).

    Raises
    ------
    InputError
        The file cannot be read or a line is not a valid bitstring; the
        message names ``file:line:column``.
    """
    try:
        with open(path, encoding="utf-8") as fh:
            lines = fh.read().splitlines()
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
