"""The ``bench`` subcommand: sweep a circuit family, plan and contract, write CSV, JSON, plots.

The sweep itself is :func:`tnsim.queries.costsweep.run_bench`; this module reads
the command line, and writes the records (CSV and JSON with units and the
machine) and the cost plot (matplotlib, the ``plot`` extra).
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Sequence
from dataclasses import asdict, fields

import numpy as np

from tnsim.circuits.families import FAMILIES, Family, make_family
from tnsim.cli.gen import parse_params
from tnsim.errors import InputError
from tnsim.execution.rate import matmul_rate as measure_rate
from tnsim.fileio import write_atomic
from tnsim.queries.costsweep import (
    PLANNERS,
    BenchRecord,
    crossing_size,
    machine_info,
    machine_memory,
    parse_sizes,
    run_bench,
)

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
    doc = {
        "settings": settings,
        "units": _UNITS,
        "machine": machine_info(),
        "matmul_flop_rate": matmul_rate,
        "records": [{k: _clean(v) for k, v in asdict(r).items()} for r in records],
    }
    return json.dumps(doc, indent=1) + "\n"


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
    try:
        write_atomic(path, lambda fh: fig.savefig(fh, dpi=110, format="png"))
    except OSError as exc:
        raise InputError(f"cannot write {path!r}: {exc.strerror}") from None
    finally:
        plt.close(fig)


def _check_args(args) -> tuple[Family, list[str], list[dict], dict]:

    fam = FAMILIES.get(args.family)
    if fam is None:
        raise InputError(f"unknown family {args.family!r}; known families: {', '.join(FAMILIES)}")
    planners = [p.strip() for p in args.planners.split(",") if p.strip()]
    bad = [p for p in planners if p not in PLANNERS]
    if bad or not planners:
        raise InputError(f"--planners {args.planners!r}: choose from {', '.join(PLANNERS)}")
    if not args.flop_cap > 0 or not args.time_budget > 0:
        raise InputError("--flop-cap and --time-budget must be positive numbers")
    params = parse_params(args.param)
    if args.cycles is not None:
        if not fam.depth:
            raise InputError(f"family '{fam.name}' has no depth parameter; drop --cycles")
        if args.cycles < 0:
            raise InputError(f"--cycles must be at least 0, got {args.cycles}")
        params[fam.depth] = str(args.cycles)
    clash = sorted(set(params) & set(fam.size))
    if clash:
        raise InputError(f"--param {clash[0]} is set by --sizes; drop it")
    sizes = parse_sizes(args.sizes, fam)
    make_family(fam.name, **params, **sizes[0])  # unknown or mistyped parameters fail here
    for option, path in (("--csv", args.csv), ("--json", args.json), ("--plot", args.plot)):
        folder = os.path.dirname(os.path.abspath(path)) if path else ""
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

    fam, planners, sizes, params = _check_args(args)
    dtype = np.complex128 if args.double else np.complex64
    rate = measure_rate(dtype, n=768, refresh=True)
    with tqdm(
        total=len(sizes) * len(planners),
        disable=args.quiet,
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
    print(_summary(records))
    print(
        f"FLOPs: real floating-point operations (complex multiply-add = 8); "
        f"matmul rate here: {rate / 1e9:.1f} GFLOP/s ({np.dtype(dtype).name})"
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
        "dtype": np.dtype(dtype).name,
    }
    if args.csv:
        write_atomic(args.csv, records_csv(records))
    if args.json:
        write_atomic(args.json, records_json(records, settings, rate))
    if args.plot:
        title = f"{fam.name} " + " ".join(f"{k}={v}" for k, v in params.items())
        plot_records(
            records, args.plot, matmul_rate=rate, memory_bytes=machine_memory(), title=title.strip()
        )
    return 0


def register(sub) -> None:
    """Add ``bench`` to a subparsers object."""
    bench = sub.add_parser(
        "bench",
        help="sweep a circuit family: plan (and contract) one amplitude per size and planner",
        description="Sweep a circuit family over sizes; plan one amplitude of each instance "
        "with each planner, optionally contract it; record real FLOPs (complex "
        "multiply-add = 8), width, slices, seconds and memory.",
    )
    bench.add_argument("--family", default="grid", help="family name (default grid)")
    bench.add_argument(
        "--sizes", required=True, help="comma-separated sizes: RxC for grid/ising, N for the others"
    )
    bench.add_argument("--cycles", type=int, help="the family's depth (cycles, layers, p, ...)")
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
        type=float,
        default=2.0,
        help="seconds per instance for searching planners (default 2)",
    )
    bench.add_argument("--double", action="store_true", help="complex128 (default complex64)")
    bench.add_argument("--csv", metavar="FILE", help="write the records as CSV")
    bench.add_argument("--json", metavar="FILE", help="write records, units and machine as JSON")
    bench.add_argument("--plot", metavar="FILE.png", help="plot cost against size (matplotlib)")
    bench.add_argument(
        "--seed", type=int, default=0, help="seed of bitstring, planners (family: --param seed=N)"
    )
    bench.add_argument("--quiet", action="store_true", help="no progress bar")
    bench.set_defaults(func=bench_command)
