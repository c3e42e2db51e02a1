"""The ``bench`` subcommand: sweep a circuit family, plan and contract, write CSV, JSON, plots.

The sweep itself is :func:`tnsim.queries.costsweep.run_bench`; this module reads
the command line, and writes the records (CSV and JSON with units and the
machine) and the cost plot (matplotlib, the ``plot`` extra).
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import math
import os
from collections.abc import Sequence
from typing import TYPE_CHECKING

from tnsim.cli.common import (
    OptionError,
    add_output_arguments,
    add_precision_argument,
    dtype_of,
    seconds_type,
    seed_type,
    warn,
    write_output,
)
from tnsim.cli.gen import parse_params
from tnsim.errors import InputError

if TYPE_CHECKING:
    from tnsim.circuits.families import Family
    from tnsim.queries.costsweep import BenchRecord

__all__ = ["plot_records", "records_csv", "records_json"]


_UNITS = {
    "flops": "real floating-point operations (complex multiply-add = 8), all slices",
    "width": "log2 of the largest tensor's element count",
    "peak_bytes": "planned peak of live intermediates in one slice (inputs not counted), bytes",
    "plan_seconds": "wall seconds of planning",
    "contract_seconds": "wall seconds of one untraced contraction",
    "flop_rate": "flops / contract_seconds (real FLOP/s)",
    "traced_peak_bytes": "tracemalloc peak of a second contraction (numpy + Python allocations)",
}


def records_csv(records: Sequence[BenchRecord]) -> str:
    """Return the records as CSV text (header row first)."""
    from dataclasses import fields

    from tnsim.queries.costsweep import BenchRecord

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow([f.name for f in fields(BenchRecord)])
    for r in records:
        writer.writerow([getattr(r, f.name) for f in fields(BenchRecord)])
    return buf.getvalue()


def _clean(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def records_json(records: Sequence[BenchRecord], settings: dict, matmul_rate: float) -> str:
    """Return records, settings, units, the matmul rate and the machine as JSON text."""
    from dataclasses import asdict

    from tnsim.queries.costsweep import machine_info

    doc = {
        "settings": settings,
        "units": _UNITS,
        "machine": machine_info(),
        "matmul_flop_rate": matmul_rate,
        "records": [{k: _clean(v) for k, v in asdict(r).items()} for r in records],
    }
    return json.dumps(doc, indent=1, allow_nan=False) + "\n"


def plot_records(
    records: Sequence[BenchRecord],
    path: str,
    *,
    matmul_rate: float,
    memory_bytes: int,
    title: str = "",
    level: float = 1e12,
) -> None:
    """Draw FLOPs and planned peak memory against qubit count, one line per planner.

    The left panel marks what the measured matmul rate gets through in one
    minute and in one hour, and ``level``; the right panel marks this
    machine's memory.  The image is written atomically (temporary file, rename).
    """
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise InputError(
            "--plot needs matplotlib; install it with: pip install 'tnsim[plot]'"
        ) from None
    from tnsim.queries.costsweep import crossing_size

    fig, (ax, bx) = plt.subplots(1, 2, figsize=(11, 4.5))
    styles = [("o", "-"), ("s", "--"), ("^", ":"), ("D", "-.")]
    for k, planner in enumerate(dict.fromkeys(r.planner for r in records)):
        marker, line = styles[k % len(styles)]
        rows = sorted(
            (r.num_qubits, r.flops, r.peak_bytes) for r in records if r.planner == planner
        )
        n = [row[0] for row in rows]
        cross = crossing_size(records, planner, level)
        note = f" (reaches {level:.0e} at ≈{cross:.0f} qubits)" if cross is not None else ""
        ax.plot(n, [row[1] for row in rows], marker=marker, ls=line, label=planner + note)
        bx.plot(n, [row[2] for row in rows], marker=marker, ls=line, label=planner)
    for seconds, name, style in ((60, "1 min", ":"), (3600, "1 h", "--")):
        ax.axhline(
            matmul_rate * seconds,
            color="k",
            ls=style,
            lw=1,
            label=f"matmul rate {matmul_rate / 1e9:.1f} GFLOP/s × {name}",
        )
    ax.axhline(level, color="tab:red", lw=0.8, alpha=0.6, label=f"{level:.0e} FLOPs")
    ax.set(
        yscale="log",
        xlabel="qubits",
        ylabel="real FLOPs per amplitude (all slices)",
        title=title or "contraction cost",
    )
    ax.legend(fontsize=7)
    if memory_bytes:
        bx.axhline(
            memory_bytes,
            color="k",
            ls="--",
            lw=1,
            label=f"this machine's memory ({memory_bytes / 2**30:.0f} GiB)",
        )
    bx.set(
        yscale="log",
        xlabel="qubits",
        ylabel="planned peak bytes of intermediates (one slice)",
        title="memory a plan needs",
    )
    bx.legend(fontsize=7)
    fig.tight_layout()
    from tnsim.fileio import write_atomic

    try:
        write_atomic(path, lambda fh: fig.savefig(fh, dpi=110, format="png"))
    except OSError as exc:
        raise InputError(f"cannot write {path!r}: {exc.strerror}") from None
    finally:
        plt.close(fig)


def _legacy(args: argparse.Namespace) -> None:
    """Accept the former spellings for one release, with a warning."""
    if args.cycles is not None:
        warn("--cycles is deprecated and will be removed; use --depth")
        if args.depth is not None:
            raise OptionError("give --depth or its old name --cycles, not both")
        args.depth = args.cycles
    if args.double:
        warn("--double is deprecated and will be removed; use --precision double (the default)")
        args.precision = "double"
    if isinstance(args.json, str):
        warn("--json FILE is deprecated and will be removed; use --json -o FILE")
        if args.output:
            raise OptionError("give --json -o FILE, not --json FILE and -o")
        args.output, args.json = args.json, True


def _check_args(args) -> tuple[Family, list[str], list[dict], dict]:
    from tnsim.circuits.families import FAMILIES, family_values
    from tnsim.queries.costsweep import PLANNERS, parse_sizes

    fam = FAMILIES.get(args.family)
    if fam is None:
        raise InputError(f"unknown family {args.family!r}; known families: {', '.join(FAMILIES)}")
    planners = [p.strip() for p in args.planners.split(",") if p.strip()]
    bad = [p for p in planners if p not in PLANNERS]
    if bad or not planners:
        raise InputError(f"--planners {args.planners[:60]!r}: choose from {', '.join(PLANNERS)}")
    if not 0 < args.flop_cap < math.inf:
        raise InputError("--flop-cap must be a finite positive number")
    params = parse_params(args.param)
    if args.depth is not None:
        if not fam.depth:
            raise InputError(f"family '{fam.name}' has no depth parameter; drop --depth")
        params[fam.depth] = str(args.depth)
    clash = sorted(set(params) & set(fam.size))
    if clash:
        raise InputError(f"--param {clash[0]} is set by --sizes; drop it")
    sizes = parse_sizes(args.sizes, fam)
    for size in sizes:  # unknown, mistyped or oversized parameters fail here, before any work
        family_values(fam.name, **params, **size)
    for option, path in (("--csv", args.csv), ("-o", args.output), ("--plot", args.plot)):
        folder = os.path.dirname(os.path.abspath(path)) if path else ""
        if path and os.path.isdir(path):
            raise OptionError(f"{option} {path}: is a folder; give a file name")
        if path and not (os.path.isdir(folder) and os.access(folder, os.W_OK)):
            raise InputError(f"{option} {path}: folder {folder} does not exist or is not writable")
    if args.plot:
        try:
            import matplotlib  # noqa: F401 - only checks that the plot extra is installed
        except ImportError:
            raise InputError("--plot needs matplotlib: pip install 'tnsim[plot]'") from None
    return fam, planners, sizes, params


def _summary(records: Sequence[BenchRecord]) -> str:
    head = f"{'size':>7} {'qubits':>6} {'planner':>13} {'FLOPs':>9} {'width':>5} {'slices':>6} "
    head += f"{'plan s':>7} {'run s':>7} {'GFLOP/s':>7}"
    lines = [head]
    for r in records:
        run = (
            f"{r.contract_seconds:7.3f} {r.flop_rate / 1e9:7.2f}"
            if r.executed
            else f"{'-':>7} {'-':>7}"
        )
        lines.append(
            f"{r.size:>7} {r.num_qubits:>6} {r.planner:>13} {r.flops:9.2e} {r.width:5.1f} "
            f"{r.num_slices:>6} {r.plan_seconds:7.2f} {run}"
        )
    return "\n".join(lines)


def bench_command(args) -> int:
    """Run ``tnsim bench`` from parsed arguments; return the exit status."""
    import sys

    from tqdm import tqdm

    from tnsim.execution.rate import matmul_rate
    from tnsim.queries.costsweep import machine_memory, run_bench

    _legacy(args)
    fam, planners, sizes, params = _check_args(args)
    dtype = dtype_of(args)
    rate = matmul_rate(dtype, n=768, refresh=True)
    with tqdm(
        total=len(sizes) * len(planners),
        disable=args.quiet or args.json,
        file=sys.stderr,
        desc=f"bench {fam.name}",
        unit="plan",
    ) as bar:
        records = run_bench(
            fam.name,
            sizes,
            params=params,
            planners=planners,
            execute=args.execute,
            flop_cap=args.flop_cap,
            time_budget=args.time_budget,
            seed=args.seed,
            dtype=dtype,
            progress=bar.update,
        )
    settings = {
        "family": fam.name,
        "sizes": args.sizes,
        "params": params,
        "planners": planners,
        "execute": args.execute,
        "flop_cap": args.flop_cap,
        "time_budget": args.time_budget,
        "seed": args.seed,
        "precision": args.precision,
        "dtype": dtype.name,
    }
    if args.json:
        write_output(records_json(records, settings, rate), args.output)
    else:
        text = (
            _summary(records)
            + "\n"
            + (
                f"FLOPs: real floating-point operations (complex multiply-add = 8); "
                f"matmul rate here: {rate / 1e9:.1f} GFLOP/s ({dtype.name})\n"
            )
        )
        write_output(text, args.output)
    if args.csv:
        from tnsim.fileio import write_atomic

        write_atomic(args.csv, records_csv(records))
    if args.plot:
        title = f"{fam.name} " + " ".join(f"{k}={v}" for k, v in params.items())
        plot_records(
            records, args.plot, matmul_rate=rate, memory_bytes=machine_memory(), title=title.strip()
        )
    return 0


def register(sub) -> None:
    """Add ``bench`` to a subparsers object."""
    from tnsim.cli.common import count_type

    bench = sub.add_parser(
        "bench",
        help="sweep a circuit family: plan (and contract) one amplitude per size and planner",
        description="Sweep a circuit family over sizes; plan one amplitude of each instance "
        "with each planner, optionally contract it; record real FLOPs (complex "
        "multiply-add = 8), width, slices, seconds and memory. The table (or --json) goes to "
        "standard output or -o FILE; --csv and --plot write extra files.",
    )
    bench.add_argument("--family", default="grid", help="family name (default grid)")
    bench.add_argument(
        "--sizes", required=True, help="comma-separated sizes: RxC for grid/ising, N for the others"
    )
    bench.add_argument(
        "--depth",
        type=count_type("--depth", 0, 10**6),
        help="the family's depth parameter (every family with one calls it depth)",
    )
    bench.add_argument("--cycles", type=count_type("--cycles", 0, 10**6), help=argparse.SUPPRESS)
    bench.add_argument(
        "--param", action="append", metavar="KEY=VALUE", help="other family parameter (repeatable)"
    )
    bench.add_argument(
        "--planners",
        default="tnsim,greedy,random-greedy",
        help="comma-separated: tnsim, greedy, random-greedy",
    )
    bench.add_argument("--execute", action="store_true", help="contract plans under --flop-cap")
    bench.add_argument(
        "--flop-cap",
        type=float,
        default=1e10,
        help="largest real-FLOP count contracted (default 1e10)",
    )
    bench.add_argument(
        "--time-budget",
        type=seconds_type,
        default=2.0,
        help="seconds per instance for searching planners (default 2)",
    )
    add_precision_argument(bench)
    bench.add_argument("--double", action="store_true", help=argparse.SUPPRESS)
    add_output_arguments(bench, legacy_json_file=True)
    bench.add_argument("--csv", metavar="FILE", help="also write the records as CSV")
    bench.add_argument("--plot", metavar="FILE.png", help="plot cost against size (matplotlib)")
    bench.add_argument(
        "--seed",
        type=seed_type,
        default=0,
        help="seed of bitstring, planners (family: --param seed=N)",
    )
    bench.add_argument("--quiet", action="store_true", help="no progress bar")
    bench.set_defaults(func=bench_command)
