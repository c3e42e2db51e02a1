"""Reproduce every benchmark figure of the README in one command.

``python benchmarks/run_all.py`` runs the full set (tens of minutes on a
2-core machine) and writes CSV/JSON/markdown under ``benchmarks/results/``
and the README's plot to ``docs/bench_grid.png``.  ``--quick`` runs a small
smoke version of each step (CI) into ``--out`` and leaves ``docs/`` alone.

Steps, each in its own process:

1. ``tnsim bench`` on 2D grid circuits (8 cycles), three planners, contracting
   plans under 1e10 FLOPs; the plot.
2. ``tnsim bench`` on QAOA MaxCut (p = 1, 3-regular graphs) by node count.
3. ``benchmarks/crossover.py``: tnsim against the dense state vector.
4. The other benchmark scripts, when present and committed (a script git does
   not track yet is work in progress and is skipped): ``planners.py``,
   ``scaling.py``, ``queries.py``, ``time_model.py``, ``memory_fit.py``,
   ``variational.py``, ``noise.py``, ``serve.py`` (given ``--quick`` in quick mode),
   ``qasm_read.py`` and ``startup.py``.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
# Other engineers' scripts, run when present, with the arguments of their quick mode.
OTHERS = {
    "planners.py": ["--quick"],
    "scaling.py": ["--quick"],
    "queries.py": ["--quick"],
    "time_model.py": ["--quick"],
    "qasm_read.py": ["--gates", "5000", "--repeats", "1"],
    "memory_fit.py": ["--quick"],
    "variational.py": ["--quick"],
    "startup.py": ["--repeats", "3"],
    "noise.py": ["--quick"],
    "serve.py": ["--quick"],
}

GRID_FULL = "4x4,5x5,6x6,7x7,8x8,9x9,10x10,11x11,12x12"
QAOA_FULL = "16,32,64,96,128,160,192,256"


def _bench(out: str, name: str, extra: list[str]) -> list[str]:
    files = ["--csv", os.path.join(out, f"{name}.csv"), "--json"]
    files += ["-o", os.path.join(out, f"{name}.json")]
    return [sys.executable, "-m", "tnsim", "bench", *extra, "--quiet", *files]


def _committed(path: str) -> bool:
    """False for a file git does not track yet (work in progress); True outside a git tree."""
    try:
        result = subprocess.run(
            ["git", "ls-files", "--error-unmatch", path], cwd=ROOT, capture_output=True
        )
    except OSError:
        return True
    inside = subprocess.run(["git", "rev-parse"], cwd=ROOT, capture_output=True).returncode == 0
    return result.returncode == 0 or not inside


def steps(quick: bool, out: str) -> list[tuple[str, list[str]]]:
    """The commands to run, as ``(name, argv)`` pairs."""
    if quick:
        grid = "--family grid --sizes 2x2,3x3 --depth 4 --time-budget 0.2 --flop-cap 1e7"
        qaoa = "--family qaoa --sizes 8,12 --planners tnsim,greedy --flop-cap 1e7"
        plot = os.path.join(out, "bench_grid_quick.png")
    else:
        grid = f"--family grid --sizes {GRID_FULL} --depth 8 --time-budget 5 --flop-cap 1e10"
        qaoa = f"--family qaoa --sizes {QAOA_FULL} --depth 1 --time-budget 5 --flop-cap 1e10"
        plot = os.path.join(ROOT, "docs", "bench_grid.png")
    # complex64, as the README's grid and QAOA tables were measured (the default is double).
    grid = [*grid.split(), "--execute", "--precision", "single", "--plot", plot]
    qaoa = [*qaoa.split(), "--execute", "--precision", "single"]
    suffix = "_quick" if quick else ""
    out_steps = [
        ("bench_grid", _bench(out, "bench_grid" + suffix, grid)),
        ("bench_qaoa", _bench(out, "bench_qaoa" + suffix, qaoa)),
        (
            "crossover",
            [sys.executable, os.path.join(HERE, "crossover.py"), "--out", out]
            + (["--quick", "--repeats", "1"] if quick else []),
        ),
    ]
    for script, quick_args in OTHERS.items():
        path = os.path.join(HERE, script)
        if os.path.isfile(path) and _committed(path):
            out_steps.append((script[:-3], [sys.executable, path] + (quick_args if quick else [])))
    return out_steps


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="Reproduce the README's benchmark figures.")
    ap.add_argument("--quick", action="store_true", help="small smoke run (< 2 minutes)")
    ap.add_argument("--out", help="output folder (default benchmarks/results)")
    ap.add_argument("--only", help="comma-separated step names to run (default: all)")
    args = ap.parse_args(argv)
    out = os.path.abspath(args.out or os.path.join(HERE, "results"))
    todo = steps(args.quick, out)
    if args.only:
        wanted = [w.strip() for w in args.only.split(",") if w.strip()]
        unknown = sorted(set(wanted) - {name for name, _ in todo})
        if unknown:
            ap.error(f"--only: no step {unknown[0]!r}; steps: {', '.join(n for n, _ in todo)}")
        todo = [(name, cmd) for name, cmd in todo if name in wanted]
    os.makedirs(out, exist_ok=True)
    if not args.quick:
        os.makedirs(os.path.join(ROOT, "docs"), exist_ok=True)
    env = {**os.environ, "PYTHONPATH": ROOT + os.pathsep + os.environ.get("PYTHONPATH", "")}
    failed = []
    for name, cmd in todo:
        t0 = time.perf_counter()
        shown = " ".join(os.path.relpath(c, ROOT) if c.startswith(ROOT) else c for c in cmd[1:])
        print(f"== {name}: {shown}", flush=True)
        result = subprocess.run(cmd, cwd=ROOT, env=env, capture_output=True, text=True)
        log = os.path.join(out, f"{name}{'_quick' if args.quick else ''}.log")
        with open(log, "w") as fh:
            fh.write(result.stdout + result.stderr)
        print(result.stdout, end="", flush=True)
        print(
            f"== {name}: exit {result.returncode} in {time.perf_counter() - t0:.1f} s "
            f"(log: {os.path.relpath(log, ROOT)})",
            flush=True,
        )
        if result.returncode:
            print(result.stderr[-2000:], file=sys.stderr)
            failed.append(name)
    if failed:
        print(f"failed: {', '.join(failed)}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
