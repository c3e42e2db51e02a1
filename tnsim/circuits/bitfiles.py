r"""Bitstrings as files and devices write them: orders, counts, JSON.

Two orders of the characters of a bitstring:

* ``"qubit"`` (tnsim's own): character ``i`` is qubit ``i``;
* ``"classical"``: character ``j`` is classical bit ``j``, as the circuit's
  ``measure`` statements fill them (:attr:`Circuit.measurements`; bits
  numbered across the ``creg`` declarations in their order).  Devices report
  results in classical bits.

:func:`parse_bit_records` reads every layout tnsim writes or a device run
commonly produces, and returns rows with their counts:

* one bitstring per line (``#`` comments and blank lines skipped; lines end at
  ``\n``, a ``\r`` before it is dropped);
* ``bits,count`` lines (count files; a first line such as ``bitstring,count``
  is taken as a header), mixed freely with plain lines (count 1);
* JSON: ``tnsim sample --json`` output (``{"samples": [...]}``, with its
  ``bit_order`` checked), ``{"counts": {bits: count}}``, a plain object of
  counts ``{bits: count}``, or a list of bitstrings.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError

__all__ = [
    "BIT_ORDERS",
    "BitRecords",
    "from_qubit_order",
    "order_width",
    "parse_bit_records",
    "parse_rows",
    "read_bit_records",
    "to_qubit_order",
]

BIT_ORDERS = ("qubit", "classical")
"""The orders a bitstring's characters can be in."""

MAX_COUNT = 10**15
"""Largest count one line or entry of a count file may give."""


def _check_order(order: str) -> None:
    if order not in BIT_ORDERS:
        raise InputError(f"bit order must be one of {', '.join(BIT_ORDERS)}, got {order!r}")


def order_width(circuit: Circuit, order: str) -> int:
    """Characters of a bitstring of ``circuit`` in ``order``.

    ``"qubit"``: the number of qubits; ``"classical"``: one past the highest
    classical bit a ``measure`` statement fills.

    Examples
    --------
    >>> order_width(Circuit(3).measure(0, 4), "classical")
    5
    """
    _check_order(order)
    if order == "qubit":
        return circuit.num_qubits
    if not circuit.measurements:
        raise InputError(
            "the circuit has no measure statements, so it has no classical-bit order; "
            "use --bit-order qubit (character i is qubit i)"
        )
    return max(circuit.measurements) + 1


def _sources(circuit: Circuit) -> np.ndarray:
    """For each qubit, the first classical bit that reads it (every qubit must be read)."""
    first = np.full(circuit.num_qubits, -1, dtype=np.int64)
    for clbit in sorted(circuit.measurements, reverse=True):
        first[circuit.measurements[clbit]] = clbit
    missing = np.flatnonzero(first < 0)
    if len(missing):
        raise InputError(
            f"qubit {int(missing[0])} is read by no measure statement, so a bitstring in "
            "classical-bit order does not give it; measure every qubit or use --bit-order qubit"
        )
    return first


def to_qubit_order(rows: np.ndarray, circuit: Circuit, order: str) -> np.ndarray:
    """Reorder ``(m, width)`` 0/1 rows written in ``order`` into qubit order.

    Classical bits that read the same qubit must agree; bits no ``measure``
    fills are ignored.

    Examples
    --------
    >>> c = Circuit(2).measure(1, 0).measure(0, 1)
    >>> to_qubit_order(np.array([[1, 0]], dtype=np.uint8), c, "classical").tolist()
    [[0, 1]]
    """
    _check_order(order)
    rows = np.asarray(rows, dtype=np.uint8)
    if order == "qubit":
        return rows
    first = _sources(circuit)
    out = rows[:, first]
    for clbit, qubit in circuit.measurements.items():
        if clbit != first[qubit]:
            bad = np.flatnonzero(rows[:, clbit] != out[:, qubit])
            if len(bad):
                raise InputError(
                    f"bitstring {int(bad[0])}: classical bits {int(first[qubit])} and {clbit} "
                    f"both read qubit {qubit} but differ"
                )
    return out


def from_qubit_order(rows: np.ndarray, circuit: Circuit, order: str) -> np.ndarray:
    """Reorder ``(m, num_qubits)`` rows in qubit order into ``order`` (unfilled bits 0).

    Examples
    --------
    >>> c = Circuit(2).measure(1, 0).measure(0, 2)
    >>> from_qubit_order(np.array([[0, 1]], dtype=np.uint8), c, "classical").tolist()
    [[1, 0, 0]]
    """
    _check_order(order)
    rows = np.asarray(rows, dtype=np.uint8)
    if order == "qubit":
        return rows
    width = order_width(circuit, order)
    out = np.zeros((len(rows), width), dtype=np.uint8)
    clbits = np.fromiter(circuit.measurements, dtype=np.int64)
    qubits = np.fromiter(circuit.measurements.values(), dtype=np.int64)
    out[:, clbits] = rows[:, qubits]
    return out


@dataclass(frozen=True)
class BitRecords:
    """Bitstrings read from a file, with how often each was seen.

    Attributes
    ----------
    rows : numpy.ndarray
        ``(m, width)`` ``uint8`` 0/1, in the order of the file.
    counts : numpy.ndarray
        ``(m,)`` ``int64`` counts (1 for each plain line).
    bit_order : str or None
        The order a tnsim JSON file states (``None`` when the file does not say).
    """

    rows: np.ndarray
    counts: np.ndarray
    bit_order: str | None = None

    @property
    def total(self) -> int:
        """Sum of the counts (the number of shots)."""
        return int(self.counts.sum())


def parse_rows(texts: list[str], width: int, where: list[str]) -> np.ndarray:
    """Parse bitstrings of one width into a ``(m, width)`` array; errors start with ``where[k]``.

    Examples
    --------
    >>> parse_rows(["01", "11"], 2, ["", ""]).tolist()
    [[0, 1], [1, 1]]
    """
    for k, t in enumerate(texts):
        if len(t) != width:
            raise InputError(
                f"{where[k]}bitstring {t[:40]!r}{'...' if len(t) > 40 else ''} has {len(t)} "
                f"character(s) but {width} are expected (one per bit of the chosen order)"
            )
    if not texts:
        return np.zeros((0, width), dtype=np.uint8)
    raw = "".join(texts).encode("utf-8", "replace")
    arr = np.frombuffer(raw, dtype=np.uint8)
    if len(arr) != width * len(texts) or ((arr != 48) & (arr != 49)).any():
        for k, t in enumerate(texts):
            bad = next((i for i, ch in enumerate(t) if ch not in "01"), None)
            if bad is not None:
                raise InputError(
                    f"{where[k]}bitstring has {t[bad]!r} at position {bad}; use only 0 and 1"
                )
    return (arr - 48).reshape(len(texts), width)


def _count(text: str, where: str) -> int:
    t = text.strip()
    if not (t.isascii() and t.isdigit()) or len(t) > 16 or int(t) > MAX_COUNT:
        raise InputError(
            f"{where}count {t[:20]!r} is not a whole number from 0 to {MAX_COUNT:.0e}; "
            "write lines as bits,count"
        )
    return int(t)


def _parse_lines(text: str, width: int, name: str) -> BitRecords:
    bits: list[str] = []
    counts: list[int] = []
    where: list[str] = []
    seen_data = False
    for lineno, line in enumerate(text.split("\n"), 1):
        body = line.rstrip("\r").split("#", 1)[0]
        if not body.strip():
            continue
        col = len(body) - len(body.lstrip()) + 1
        here = f"{name}:{lineno}:{col}: "
        field, sep, rest = body.strip().partition(",")
        field = field.strip()
        if not seen_data and sep and field and not set(field) <= {"0", "1"}:
            seen_data = True  # a header line such as "bitstring,count"
            continue
        seen_data = True
        bits.append(field)
        where.append(here)
        counts.append(_count(rest, here) if sep else 1)
    if not bits:
        raise InputError(f"{name}: no bitstrings found; write one per line (or bits,count)")
    rows = parse_rows(bits, width, where)
    return BitRecords(rows, np.asarray(counts, dtype=np.int64))


def _parse_json(text: str, width: int, name: str, order: str | None) -> BitRecords:
    try:
        doc = json.loads(text)
    except ValueError as exc:
        raise InputError(f"{name}: not valid JSON ({exc})") from None
    stated = None
    if isinstance(doc, dict) and "samples" in doc:
        stated, items = doc.get("bit_order"), doc["samples"]
        pairs = [(b, 1) for b in items] if isinstance(items, list) else None
    elif isinstance(doc, dict):
        table = doc.get("counts", doc)
        stated = doc.get("bit_order") if "counts" in doc else None
        pairs = list(table.items()) if isinstance(table, dict) else None
    elif isinstance(doc, list):
        pairs = [(b, 1) for b in doc]
    else:
        pairs = None
    if pairs is None or not all(isinstance(b, str) for b, _ in pairs):
        raise InputError(
            f"{name}: JSON must be tnsim sample output, an object of counts "
            '{"0110": 3, ...} or a list of bitstrings'
        )
    if stated is not None and order is not None and stated != order:
        raise InputError(
            f"{name}: the file's bitstrings are in {stated} order but {order} order was "
            f"asked for; give --bit-order {stated}"
        )
    counts = []
    for k, (b, c) in enumerate(pairs):
        if isinstance(c, bool) or not isinstance(c, int) or not 0 <= c <= MAX_COUNT:
            raise InputError(f"{name}: entry {k} ({b[:40]!r}) has count {c!r}; counts are whole")
        counts.append(c)
    if not pairs:
        raise InputError(f"{name}: no bitstrings found")
    where = [f"{name}: entry {k}: " for k in range(len(pairs))]
    rows = parse_rows([b.strip() for b, _ in pairs], width, where)
    return BitRecords(rows, np.asarray(counts, dtype=np.int64), stated)


def parse_bit_records(
    text: str, width: int, *, name: str = "<text>", order: str | None = None
) -> BitRecords:
    r"""Read bitstrings (and counts) from the text of a file in any layout tnsim reads.

    Parameters
    ----------
    text : str
        The file's text.
    width : int
        Characters per bitstring.
    name : str
        File name for messages (``file:line:column``).
    order : str, optional
        The order the caller reads in; a tnsim JSON file stating another is refused.

    Returns
    -------
    BitRecords

    Raises
    ------
    InputError
        A malformed line or entry (the message names it), or no bitstrings.

    Examples
    --------
    >>> r = parse_bit_records("bitstring,count\n01,3\n10\n", 2)
    >>> r.rows.tolist(), r.counts.tolist()
    ([[0, 1], [1, 0]], [3, 1])
    >>> parse_bit_records('{"11": 2, "00": 5}', 2).total
    7
    """
    if text.lstrip().startswith(("{", "[")):
        return _parse_json(text, width, name, order)
    return _parse_lines(text, width, name)


def read_bit_records(
    path: str | os.PathLike, width: int, *, order: str | None = None
) -> BitRecords:
    """Read a file of bitstrings (see :func:`parse_bit_records`)."""
    name = os.fspath(path)
    if os.path.isdir(name):
        raise InputError(f"{name}: is a folder; give a file of bitstrings")
    try:
        with open(name, encoding="utf-8", newline="") as fh:
            text = fh.read()
    except FileNotFoundError:
        raise InputError(f"{name}: no such file; give a file of bitstrings") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read bitstring file {name!r}: {exc}") from None
    return parse_bit_records(text, width, name=name, order=order)
