"""Reading what a command asks about: bitstrings, qubit lists, observables.

Shared by the query commands and by ``cost``, which forecasts the same queries.
Bitstrings are read in the order ``--bit-order`` names and returned both as
given and in qubit order (:mod:`tnsim.circuits.bitfiles`).
"""

from __future__ import annotations

import argparse

from tnsim.cli.common import OptionError, check_array, read_input_text
from tnsim.errors import InputError

__all__ = ["gather_bits", "observable_text", "parse_qubit_list", "read_records"]

_INDEX_DIGITS = 18


def parse_qubit_list(text: str) -> list[int]:
    """Parse ``"0,3,5"`` into ``[0, 3, 5]`` (ASCII digits only).

    Examples
    --------
    >>> parse_qubit_list(" 4, 0,2 ")
    [4, 0, 2]
    """
    out = []
    for k, part in enumerate(text.split(",")):
        item = part.strip()
        if not (item.isascii() and item.isdigit()):
            raise OptionError(
                f"--qubits: item {k + 1} is {item[:40]!r}, not a qubit index (digits 0-9); "
                "write e.g. --qubits 0,3,5"
            )
        if len(item) > _INDEX_DIGITS:
            raise OptionError(f"--qubits: item {k + 1} ({item[:20]}...) is too large an index")
        out.append(int(item))
    return out


def read_records(path: str, circuit, order: str):
    """Bitstrings (in ``order``) and their counts from a file or standard input."""
    from tnsim.circuits.bitfiles import order_width, parse_bit_records

    width = order_width(circuit, order)
    text, name = read_input_text(path, "bitstring file")
    records = parse_bit_records(text, width, name=name, order=order)
    return records.rows, records.counts


def gather_bits(args: argparse.Namespace, circuit):
    """The requested bitstrings as qubit-order rows, and their text in the chosen order."""
    import numpy as np

    from tnsim.circuits.bitfiles import order_width, parse_rows, to_qubit_order

    width = order_width(circuit, args.bit_order)
    parts = []
    if args.bits:
        where = [f"--bits {k + 1}: " for k in range(len(args.bits))]
        parts.append(parse_rows([b.strip() for b in args.bits], width, where))
    if args.bits_file:
        parts.append(read_records(args.bits_file, circuit, args.bit_order)[0])
    if not parts:
        raise OptionError("give at least one bitstring with --bits or --bits-file")
    shown = np.concatenate(parts)
    check_array(len(shown), width, "bitstrings")
    return to_qubit_order(shown, circuit, args.bit_order), shown


def observable_text(args: argparse.Namespace) -> str:
    """The terms of every ``--observable`` and of ``--observable-file``, summed as one text."""
    parts = list(args.observable or [])
    if args.observable_file is not None:
        text, name = read_input_text(args.observable_file, "observable file")
        lines = [line.split("#", 1)[0].strip() for line in text.split("\n")]
        terms = [line for line in lines if line]
        if not terms:
            raise InputError(f"{name}: no terms found; write one term per line")
        parts += terms
    if not parts:
        raise OptionError("give --observable TEXT (repeatable) or --observable-file FILE")
    rest = [p if p.lstrip()[:1] in "+-" else "+ " + p for p in parts[1:]]
    return " ".join([parts[0], *rest])
