"""The ``optimize`` subcommand: optimize QAOA MaxCut angles on a graph, or any circuit's angles.

``tnsim optimize GRAPH.edges --p 2`` maximizes the expected cut of the QAOA
state on the graph (an edge list as :func:`networkx.read_edgelist` reads it),
depth by depth; ``tnsim optimize --circuit FILE --observable TEXT`` minimizes
(or with ``--maximize`` maximizes) a Pauli sum over the named angles of a
circuit: the ``input float[64]`` parameters of an OpenQASM 3 file that
``--input NAME=VALUE`` does not fix (read with ``unbound="keep"``, see
:func:`tnsim.circuits.qasm3.read_qasm3`).  OpenQASM 2.0 has no input
declarations, so a 2.0 file has nothing to optimize.  ``--json`` prints one
strict JSON document (no NaN or Infinity); ``--plot FILE`` draws every
evaluation (the ``plot`` extra).
"""

from __future__ import annotations

import argparse
import json
import math
import os

from tnsim.cli.common import add_run_arguments, load_circuit, write_output
from tnsim.errors import InputError
from tnsim.fileio import write_atomic

__all__ = ["maxcut_document", "observable_document", "plot_history", "register"]

CONVENTION = (
    "h on every qubit, then per layer k: rzz(2*gamma_k*w) = exp(-i gamma_k w Z_u Z_v) on every "
    "edge (weight w), rx(2*beta_k) = exp(-i beta_k X) on every qubit; papers writing "
    "exp(-i gamma' C) with C the cut use gamma' = -2*gamma"
)


def _finite(value):
    """Plain JSON values: NaN and infinities become None (strict JSON)."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    return value


def _starts(result) -> list[dict]:
    names = list(result.names)
    return [
        {
            "kind": s.kind,
            "initial": dict(zip(names, s.initial)),
            "values": dict(zip(names, s.values)),
            "energy": s.energy,
            "evaluations": s.evaluations,
            "converged": s.converged,
            "message": s.message,
        }
        for s in result.starts
    ]


def _history(result, depth: int | None = None) -> list[dict]:
    rows = []
    for e in result.evaluations:
        row = {"start": e.start, "energy": e.energy, "values": list(e.values)}
        row.update(gradient_norm=e.gradient_norm, seconds=e.seconds)
        if depth is not None:
            row = {"p": depth, **row}
        rows.append(row)
    return rows


def maxcut_document(best, graph_path: str, seed: int, method: str) -> dict:
    """The JSON document of a :class:`~tnsim.queries.maxcut.MaxCutOptimum`."""
    depths = []
    for d, result in enumerate(best.depths, 1):
        depths.append(
            {
                "p": d,
                "names": list(result.names),
                "cut": result.energy,
                "cut_fraction": result.energy / best.total_weight,
                "evaluations": len(result.evaluations),
                "seconds": result.seconds + result.setup_seconds,
                "setup_seconds": result.setup_seconds,
                "light_cone_classes": result.num_classes,
                "starts": _starts(result),
            }
        )
    doc = {
        "problem": "maxcut",
        "graph": graph_path,
        "nodes": best.nodes,
        "edges": best.edges,
        "total_weight": best.total_weight,
        "p": best.p,
        "angle_convention": CONVENTION,
        "gammas": best.gammas,
        "betas": best.betas,
        "energy": best.cut,
        "cut": best.cut,
        "cut_fraction": best.cut_fraction,
        "evaluations": best.evaluations,
        "seconds": best.seconds,
        "method": method,
        "seed": seed,
        "depths": depths,
        "history": [row for d, r in enumerate(best.depths, 1) for row in _history(r, d)],
    }
    return _finite(doc)


def observable_document(result, circuit_path: str, observable: str, seed: int) -> dict:
    """The JSON document of an :class:`~tnsim.queries.optimize.AngleOptimum`."""
    doc = {
        "problem": "observable",
        "circuit": circuit_path,
        "observable": observable,
        "maximize": result.maximize,
        "names": list(result.names),
        "values": result.values,
        "energy": result.energy,
        "evaluations": len(result.evaluations),
        "seconds": result.seconds,
        "setup_seconds": result.setup_seconds,
        "light_cone_classes": result.num_classes,
        "method": result.method,
        "seed": seed,
        "starts": _starts(result),
        "history": _history(result),
    }
    return _finite(doc)


def plot_history(doc: dict, path: str) -> None:
    """Draw every evaluation's energy (cut fraction for MaxCut), one colour per start.

    The best value so far is the black line; depths are separated by dotted
    lines.  The image is written atomically (format from the file's extension).
    """
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise InputError("--plot needs matplotlib: pip install 'tnsim[plot]'") from None
    maxcut = doc["problem"] == "maxcut"
    scale = 1.0 / doc["total_weight"] if maxcut else 1.0
    higher = maxcut or doc.get("maximize", False)
    fig, ax = plt.subplots(figsize=(7.5, 4.5))
    rows = doc["history"]
    best, running = [], None
    for k, row in enumerate(rows):
        value = row["energy"] * scale
        running = value if running is None else (max if higher else min)(running, value)
        best.append(running)
        colour = f"C{row['start'] % 10}"
        ax.plot(k + 1, value, ".", color=colour, ms=4)
    ax.plot(range(1, len(rows) + 1), best, "k-", lw=1, label="best so far")
    if maxcut:
        for k in range(1, len(rows)):
            if rows[k]["p"] != rows[k - 1]["p"]:
                ax.axvline(k + 0.5, color="grey", ls=":", lw=1)
    starts = sorted({row["start"] for row in rows})
    for s in starts:
        ax.plot([], [], ".", color=f"C{s % 10}", label=f"start {s}")
    label = "expected cut fraction" if maxcut else "energy"
    title = (
        f"QAOA MaxCut, {doc['nodes']} nodes, p = {doc['p']}: {doc['cut_fraction']:.6f}"
        if maxcut
        else f"{doc['observable'][:60]}: {doc['energy']:.8g}"
    )
    ax.set(xlabel="evaluation", ylabel=label, title=title)
    ax.legend(fontsize=7)
    fig.tight_layout()
    fmt = os.path.splitext(path)[1].lstrip(".").lower() or "png"
    try:
        write_atomic(path, lambda fh: fig.savefig(fh, format=fmt))
    finally:
        plt.close(fig)


def _check_plot(path: str | None) -> None:
    """Refuse a plot that cannot be written before any work is done."""
    if not path:
        return
    try:
        import matplotlib

        matplotlib.use("Agg")
        from matplotlib.backend_bases import FigureCanvasBase
    except ImportError:
        raise InputError("--plot needs matplotlib: pip install 'tnsim[plot]'") from None
    fmt = os.path.splitext(path)[1].lstrip(".").lower()
    known = FigureCanvasBase.get_supported_filetypes()
    if fmt not in known:
        raise InputError(
            f"--plot {path}: unknown image format {fmt!r}; end the name with one of "
            f"{', '.join('.' + k for k in sorted(known))}"
        )
    folder = os.path.dirname(os.path.abspath(path))
    if not (os.path.isdir(folder) and os.access(folder, os.W_OK)):
        raise InputError(f"--plot {path}: folder {folder} does not exist or is not writable")


def _parse_initial(items: list[str] | None) -> dict[str, float] | None:
    """``--initial NAME=VALUE`` items as a mapping (``None`` when there are none)."""
    if not items:
        return None
    out = {}
    for item in items:
        name, _, value = item.partition("=")
        try:
            number = float(value)
        except ValueError:
            number = math.nan
        if not name.strip() or not math.isfinite(number):
            raise InputError(
                f"--initial {item!r}: write it as NAME=NUMBER, e.g. --initial theta=0.3"
            )
        out[name.strip()] = number
    return out


def _read_observable(args: argparse.Namespace) -> str:
    if (args.observable is None) == (args.observable_file is None):
        raise InputError("with --circuit, give exactly one of --observable and --observable-file")
    if args.observable is not None:
        return args.observable
    try:
        with open(args.observable_file, encoding="utf-8") as fh:
            lines = [line.split("#", 1)[0].strip() for line in fh]
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read observable file {args.observable_file!r}: {exc}") from None
    terms = [line for line in lines if line]
    if not terms:
        raise InputError(f"{args.observable_file}: no terms found; write one term per line")
    return " ".join(t if t[0] in "+-" else "+ " + t for t in terms)


def _summary_maxcut(doc: dict) -> str:
    lines = [
        f"QAOA MaxCut on {doc['graph']}: {doc['nodes']} nodes, {doc['edges']} edges, "
        f"p = {doc['p']}",
    ]
    for d in doc["depths"]:
        lines.append(
            f"  p={d['p']}: cut fraction {d['cut_fraction']:.6f}  ({d['evaluations']} "
            f"evaluations, {d['light_cone_classes']} light-cone classes, {d['seconds']:.1f} s)"
        )
    lines.append("gammas " + " ".join(f"{g:+.6f}" for g in doc["gammas"]))
    lines.append("betas  " + " ".join(f"{b:+.6f}" for b in doc["betas"]))
    lines.append(
        f"expected cut {doc['cut']:.6f}, cut fraction {doc['cut_fraction']:.6f}, "
        f"{doc['evaluations']} evaluations, {doc['seconds']:.1f} s"
    )
    return "\n".join(lines) + "\n"


def _summary_observable(doc: dict) -> str:
    lines = [f"{'maximum' if doc['maximize'] else 'minimum'} found: {doc['energy']:+.12f}"]
    lines += [f"  {name} = {value:+.12f}" for name, value in doc["values"].items()]
    lines.append(f"{doc['evaluations']} evaluations, {doc['seconds']:.1f} s")
    return "\n".join(lines) + "\n"


def _cmd_optimize(args: argparse.Namespace) -> int:
    if (args.graph is None) == (args.circuit is None):
        raise InputError("give a graph file (QAOA MaxCut) or --circuit FILE, not both")
    if args.p < 1:
        raise InputError(f"--p must be at least 1, got {args.p}")
    if args.starts < 1:
        raise InputError(f"--starts must be at least 1, got {args.starts}")
    if args.max_evaluations < 1:
        raise InputError(f"--max-evaluations must be at least 1, got {args.max_evaluations}")
    from tnsim.queries.optimize import check_method

    _check_plot(args.plot)
    check_method(args.method)
    progress = False if (args.quiet or args.json) else None
    if args.graph is not None:
        from tnsim.circuits.graphs import read_graph
        from tnsim.queries.maxcut import optimize_maxcut

        if args.maximize or args.initial or args.input:
            raise InputError(
                "--maximize, --initial and --input go with --circuit (MaxCut is maximized)"
            )
        graph = read_graph(args.graph)
        best = optimize_maxcut(
            graph,
            args.p,
            starts=args.starts,
            seed=args.seed,
            method=args.method,
            max_evaluations=args.max_evaluations,
            progress=progress,
        )
        doc = maxcut_document(best, args.graph, args.seed, args.method)
        text = _summary_maxcut(doc)
    else:
        from tnsim.queries.optimize import optimize_angles

        observable = _read_observable(args)
        circuit = load_circuit(args.circuit, args.input, unbound="keep")
        if not circuit.parameters():
            raise InputError(
                f"{args.circuit}: the circuit has no named angles to optimize: declare them in "
                "an OpenQASM 3 file ('input float[64] theta;', used in gate angles) and give "
                "them no --input value (OpenQASM 2.0 has no input declarations)"
            )
        initial = _parse_initial(args.initial)
        result = optimize_angles(
            circuit,
            observable,
            starts=args.starts,
            seed=args.seed,
            initial=[initial] if initial else None,
            method=args.method,
            maximize=args.maximize,
            max_evaluations=args.max_evaluations,
            progress=progress,
        )
        doc = observable_document(result, args.circuit, observable, args.seed)
        text = _summary_observable(doc)
    if args.plot:
        plot_history(doc, args.plot)
    if args.json:
        text = json.dumps(doc, allow_nan=False) + "\n"
    write_output(text, args.output)
    return 0


def register(sub) -> None:
    """Add ``optimize`` to a subparsers object."""
    p = sub.add_parser(
        "optimize",
        help="optimize QAOA MaxCut angles on a graph, or the named angles of a circuit",
        description="Optimize variational angles with scipy (L-BFGS-B with the exact "
        "parameter-shift gradient by default) from several seeded starts. With GRAPH (an "
        "edge list, 'u v' or 'u v {\"weight\": w}' per line, as networkx reads it): maximize "
        "the expected cut of the depth-p QAOA state, depth by depth (linear-ramp start at p=1, "
        "the previous depth's angles interpolated after). With --circuit: minimize a Pauli sum "
        "over the circuit's named angles, the 'input float[64] NAME;' parameters of an "
        "OpenQASM 3 file that --input does not fix (OpenQASM 2.0 has no input declarations, "
        "so a 2.0 file has nothing to optimize). Each distinct light cone is contracted once "
        "per evaluation.",
    )
    p.add_argument("graph", nargs="?", help="edge-list file of the MaxCut graph")
    p.add_argument("--p", type=int, default=1, metavar="P", help="QAOA depth (default 1)")
    p.add_argument(
        "--circuit",
        metavar="FILE",
        help="an OpenQASM 3 circuit whose 'input float[64]' parameters are optimized instead",
    )
    p.add_argument("--observable", metavar="TEXT", help="with --circuit: e.g. '0.5 Z0 Z1 - X3'")
    p.add_argument("--observable-file", metavar="FILE", help="with --circuit: one term per line")
    p.add_argument("--maximize", action="store_true", help="with --circuit: maximize instead")
    p.add_argument(
        "--initial",
        action="append",
        metavar="NAME=VALUE",
        help="with --circuit: a starting value (repeat for every name)",
    )
    p.add_argument(
        "--input",
        action="append",
        metavar="NAME=VALUE",
        help="with --circuit: fix an OpenQASM 3 input at a value instead of optimizing it "
        "(repeatable)",
    )
    p.add_argument("--starts", type=int, default=4, metavar="N", help="starts (default 4)")
    p.add_argument("--seed", type=int, default=0, help="seed of the random starts (default 0)")
    p.add_argument(
        "--method",
        default="L-BFGS-B",
        help="L-BFGS-B (default), BFGS or CG with the exact gradient; Nelder-Mead, Powell or "
        "COBYLA without",
    )
    p.add_argument(
        "--max-evaluations",
        type=int,
        default=500,
        metavar="N",
        help="energy evaluations per start (default 500)",
    )
    p.add_argument("--json", action="store_true", help="print one JSON document")
    p.add_argument("--plot", metavar="FILE.png", help="draw every evaluation (matplotlib)")
    p.add_argument("-o", "--output", metavar="FILE", help="output file (default: stdout)")
    add_run_arguments(p)
    p.set_defaults(func=_cmd_optimize)
