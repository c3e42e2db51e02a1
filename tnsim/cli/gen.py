"""The ``gen`` subcommand: built-in circuit families as OpenQASM 2.0, graphs as edge lists."""

from __future__ import annotations

import argparse

from tnsim.circuits.families import FAMILIES, Family, make_family
from tnsim.circuits.graphs import GRAPH_FAMILIES, GraphFamily, edge_list_text, make_graph
from tnsim.circuits.qasm import write_qasm
from tnsim.cli.common import write_output
from tnsim.errors import InputError

__all__ = ["describe_families", "parse_params", "register"]


def _cmd_gen(args: argparse.Namespace) -> int:
    if args.list:
        print(describe_families())
        return 0
    if not args.family:
        raise InputError("give a family name (list them with 'tnsim gen --list')")
    if args.family in GRAPH_FAMILIES:
        write_output(
            edge_list_text(make_graph(args.family, **parse_params(args.param))), args.output
        )
        return 0
    write_output(write_qasm(make_family(args.family, **parse_params(args.param))), args.output)
    return 0


def parse_params(items: list[str] | None) -> dict[str, str]:
    """Parse ``key=value`` items (``--param`` on the command line) into a dict.

    Examples
    --------
    >>> parse_params(["rows=3", "two_qubit=fsim"])
    {'rows': '3', 'two_qubit': 'fsim'}
    """
    out: dict[str, str] = {}
    for item in items or []:
        key, sep, value = item.partition("=")
        if not sep or not key.strip() or not value.strip():
            raise InputError(f"--param {item!r}: write it as key=value, e.g. --param rows=4")
        out[key.strip()] = value.strip()
    return out


def describe_families() -> str:
    """Return one paragraph per family: name, summary, parameters with defaults."""
    lines = []
    records: list[Family | GraphFamily] = [*FAMILIES.values(), *GRAPH_FAMILIES.values()]
    for f in records:
        lines.append(f"{f.name}: {f.summary}")
        for p in f.params:
            lines.append(f"    {p.name}={p.default!s:<8} {p.help}")
    return "\n".join(lines)


def register(sub) -> None:
    """Add ``gen`` to a subparsers object."""
    gen = sub.add_parser(
        "gen",
        help="write a circuit of a built-in family as OpenQASM 2.0, or a graph as an edge list",
        description="Write a circuit of a built-in family as OpenQASM 2.0 "
        "(e.g. tnsim gen grid --param rows=5 --param cols=5 -o grid.qasm), or a graph of a "
        "*-graph family as an edge list for 'tnsim optimize' (e.g. tnsim gen regular-graph "
        "--param nodes=10000 --param degree=3 --param seed=1 -o g.edges).",
    )
    gen.add_argument("family", nargs="?", help="family name (see --list)")
    gen.add_argument("--param", action="append", metavar="KEY=VALUE", help="family parameter")
    gen.add_argument("-o", "--output", metavar="FILE", help="output file (default: stdout)")
    gen.add_argument("--list", action="store_true", help="list families and their parameters")
    gen.set_defaults(func=_cmd_gen)
