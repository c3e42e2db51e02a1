"""Start-up time: ``tnsim --help`` and ``import tnsim`` against ``import numpy``.

Each command runs ``--repeats`` times (default 10) in a fresh interpreter, one
after the other in rotation so a change of machine load falls on all of them;
the table gives the median wall time of each, and its ratio to the median of
``python -c "import numpy"``, the reference line (what any numerical Python
tool pays at least).  Targets (issue 14): ``tnsim --help`` <= 0.2 s and
``import tnsim`` <= 0.25 s on the project machine.  Also lists the modules a
``tnsim --help`` run imports that a lazy start-up must not: scipy, networkx,
opt_einsum, tqdm, matplotlib, dask.

Usage: ``python benchmarks/startup.py [--repeats 10]``.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)

COMMANDS = {
    "python -c 'import numpy' (reference)": [sys.executable, "-c", "import numpy"],
    "python -c 'import tnsim'": [sys.executable, "-c", "import tnsim"],
    "tnsim --help": [sys.executable, "-m", "tnsim", "--help"],
    "python -c 'pass' (interpreter alone)": [sys.executable, "-c", "pass"],
}
TARGETS = {"python -c 'import tnsim'": 0.25, "tnsim --help": 0.2}
HEAVY = ("scipy", "networkx", "opt_einsum", "tqdm", "matplotlib", "dask", "numpy")


def _env() -> dict:
    return {**os.environ, "PYTHONPATH": ROOT + os.pathsep + os.environ.get("PYTHONPATH", "")}


def time_commands(repeats: int) -> dict[str, list[float]]:
    """Wall seconds of each command, ``repeats`` runs each, in rotation."""
    times: dict[str, list[float]] = {name: [] for name in COMMANDS}
    env = _env()
    for _ in range(repeats):
        for name, argv in COMMANDS.items():
            t0 = time.perf_counter()
            subprocess.run(argv, env=env, stdout=subprocess.DEVNULL, check=True, cwd=ROOT)
            times[name].append(time.perf_counter() - t0)
    return times


def heavy_imports() -> list[str]:
    """Heavy top-level packages that ``tnsim --help`` imports."""
    argv = [sys.executable, "-X", "importtime", "-m", "tnsim", "--help"]
    run = subprocess.run(argv, env=_env(), capture_output=True, text=True, check=True, cwd=ROOT)
    names = {line.rsplit("|", 1)[-1].strip() for line in run.stderr.splitlines() if "|" in line}
    return sorted(h for h in HEAVY if h in names)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--repeats", type=int, default=10)
    args = ap.parse_args(argv)
    with open("/proc/loadavg") if os.path.exists("/proc/loadavg") else open(os.devnull) as fh:
        load = fh.read().split()[:3]
    times = time_commands(args.repeats)
    ref = statistics.median(next(iter(times.values())))
    print(f"start-up, median of {args.repeats} (load average {' '.join(load) or 'unknown'})")
    print(f"{'command':<40} {'median s':>9} {'min s':>7} {'/ numpy':>8}  target")
    for name, values in times.items():
        med = statistics.median(values)
        target = TARGETS.get(name)
        verdict = "" if target is None else f"<= {target} s: {'met' if med <= target else 'MISSED'}"
        print(f"{name:<40} {med:9.3f} {min(values):7.3f} {med / ref:8.2f}  {verdict}")
    heavy = heavy_imports()
    print(f"heavy modules imported by tnsim --help: {', '.join(heavy) if heavy else 'none'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
