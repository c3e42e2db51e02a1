"""Plans that fit a memory limit: the sliced search against slicing afterwards and opt_einsum.

For 2D grid circuits of 12 cycles (8x8 and 10x10, two-qubit layers in the
four-layer rotation and in the ABCDCDAB sequence), one amplitude network each
(``absorb_small``), complex128: the best unlimited plan is made once
(``make_plan`` without a limit, ``--budget`` seconds), then for each memory limit
(unlimited, and 1/4 ... 1/4096 of that plan's peak, and 2 GiB, 1 GiB, 512 MiB):

* ``tnsim``: ``make_plan(memory_limit=...)`` with the same budget: the search
  slices every tree and scores it by its sliced cost;
* ``after``: the unlimited plan's tree sliced afterwards (labels chosen on the
  fixed tree, then again with sub-trees re-planned after each label; the cheaper):
  the way tnsim planned under a limit before;
* ``oe-rg``: opt_einsum's ``RandomGreedy`` (``--rg-trials`` trials) with its own
  ``memory_limit`` (the limit in elements); it does not slice, so its peak is
  reported as planned, and its FLOPs are counted with tnsim's model.

One line per limit: real FLOPs of all slices (log10, complex multiply-add = 8),
overhead over the unlimited plan, slices, planning seconds.  A plot of overhead
against limit goes to ``--plot``.  ``--quick`` is a smoke run (6x6, 8 cycles,
four limits, short budgets).

Run::

    python benchmarks/memory_fit.py                       # full (about an hour on 2 cores)
    python benchmarks/memory_fit.py --only 10x10x12-abcdcdab --budget 120
    python benchmarks/memory_fit.py --limits 1/1,1/1024,2GiB     # selected limits
    python benchmarks/memory_fit.py --grids 5x5x24,6x6x20 --limits 1/1,1/1024   # other grids
    python benchmarks/memory_fit.py --quick --out /tmp/smoke
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import sys
import time

from opt_einsum.path_random import RandomGreedy

from tnsim.circuits.families import grid_circuit
from tnsim.errors import ResourceLimitError
from tnsim.fileio import write_atomic
from tnsim.network.builders import amplitude_network
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import make_plan
from tnsim.plan.slicing import choose_slices, slice_with_replanning
from tnsim.plan.tree import PairTree, memory_order

GiB = 2**30
FRACTIONS = (1, 4, 16, 64, 256, 1024, 4096)


def instances(quick: bool, only: str | None, shapes=None):
    """``(name, network, budget scale)`` of each grid instance (``shapes``: rows, cols, cycles)."""
    if shapes is None:
        shapes = [(6, 6, 8)] if quick else [(8, 8, 12), (10, 10, 12)]
    for rows, cols, cycles in shapes:
        for seq in ("rotation", "abcdcdab"):
            name = f"{rows}x{cols}x{cycles}-{seq}"
            if only and only != name:
                continue
            circuit = grid_circuit(rows, cols, cycles, seed=0, sequence=seq)
            net = absorb_small(amplitude_network(circuit, "0" * (rows * cols)))
            yield name, net, 0.25 if rows < 10 else 1.0


def after(net, tree: PairTree, limit: int):
    """The unlimited tree sliced afterwards: the cheaper of a fixed tree and re-planning."""
    args = (tree.inputs, tree.output, tree.size)
    ordered = memory_order(*args, tree.path)
    _, cost, num = choose_slices(*args, ordered, limit)
    best = cost.flops * num
    _, _, cost2, num2 = slice_with_replanning(*args, ordered, limit, time_budget=1.0)
    return min(best, cost2.flops * num2), min(num, num2) if cost2.flops * num2 < best else num


def random_greedy(net, limit: int | None, trials: int, seed: int = 0):
    """opt_einsum's RandomGreedy with its own memory limit, scored by tnsim's model."""
    letters = {}
    for ix in net.indices:
        for i in ix:
            letters.setdefault(i, chr(0x100 + len(letters)))
    ins = [frozenset(letters[i] for i in ix) for ix in net.indices]
    out = frozenset(letters[i] for i in net.output)
    size = {letters[i]: d for i, d in net.size.items() if i in letters}
    opt = RandomGreedy(max_repeats=trials, parallel=False)
    elements = None if limit is None else limit // 16
    linear = opt(ins, out, size, memory_limit=elements)
    tree = PairTree.from_linear(
        [tuple(ix) for ix in net.indices], tuple(net.output), dict(net.size), linear
    )
    return tree.cost()


def run(args) -> list[dict]:
    rows = []
    for name, net, scale in instances(args.quick, args.only, args.grids):
        budget = args.budget * scale
        t = time.perf_counter()
        base = make_plan(net, time_budget=budget, objective=args.objective, seed=args.seed)
        base_s = time.perf_counter() - t
        peak = base.peak_bytes
        print(
            f"\n{name}: {len(net)} tensors; unlimited plan 10^{math.log10(base.flops):.2f} "
            f"FLOPs, peak {peak / GiB:.3g} GiB, width {base.width:.0f}, {base_s:.1f} s "
            f"(budget {budget:g} s; load {os.getloadavg()[0]:.1f})",
            flush=True,
        )
        limits = [(f"1/{k}", peak // k) for k in (FRACTIONS[:4] if args.quick else FRACTIONS)]
        if not args.quick:
            limits += [("2GiB", 2 * GiB), ("1GiB", GiB), ("512MiB", GiB // 2)]
        if args.limits:
            wanted = args.limits.split(",")
            limits = [(label, lim) for label, lim in limits if label in wanted]
        print(
            f"{'limit':>8} {'bytes':>10} | {'tnsim':>6} {'ovh':>7} {'slices':>8} {'s':>6} | "
            f"{'after':>6} {'ovh':>7} {'slices':>8} | {'oe-rg':>6} {'oe peak':>9}"
        )
        for label, limit in limits:
            if limit >= peak and label != "1/1":
                continue
            lim = None if label == "1/1" else limit
            row = {"instance": name, "limit": label, "limit_bytes": lim, "budget_s": budget}
            t = time.perf_counter()
            try:
                p = make_plan(
                    net,
                    memory_limit=lim,
                    time_budget=budget,
                    objective=args.objective,
                    seed=args.seed,
                )
                row.update(
                    flops=p.flops,
                    slices=p.num_slices,
                    peak_bytes=p.peak_bytes,
                    seconds=time.perf_counter() - t,
                    timings=dict(p.timings),
                )
            except ResourceLimitError:
                row.update(flops=None, slices=None, seconds=time.perf_counter() - t)
            if lim is None:
                row.update(after_flops=base.flops, after_slices=1)
            else:
                try:
                    f, k = after(net, base.tree, lim)
                    row.update(after_flops=f, after_slices=k)
                except ResourceLimitError:
                    row.update(after_flops=None, after_slices=None)
            rg = random_greedy(net, lim, args.rg_trials, args.seed)
            row.update(rg_flops=rg.flops, rg_peak_bytes=rg.peak_bytes)
            row["unlimited_flops"] = base.flops
            rows.append(row)
            print(_line(row, base.flops), flush=True)
    return rows


def _lg(x) -> str:
    return f"{math.log10(x):6.2f}" if x else "     -"


def _line(row: dict, unlimited: float) -> str:
    ovh = f"{row['flops'] / unlimited:6.2f}x" if row.get("flops") else "      -"
    aovh = f"{row['after_flops'] / unlimited:6.2f}x" if row.get("after_flops") else "      -"
    return (
        f"{row['limit']:>8} {row['limit_bytes'] or 0:10.3g} | {_lg(row.get('flops'))} {ovh} "
        f"{row.get('slices') or 0:8} {row['seconds']:6.1f} | {_lg(row.get('after_flops'))} "
        f"{aovh} {row.get('after_slices') or 0:8} | {_lg(row['rg_flops'])} "
        f"{row['rg_peak_bytes'] / GiB:8.3g}G"
    )


def plot(rows: list[dict], path: str) -> None:
    """Overhead against the limit (fraction of the unlimited peak), per instance and way."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(7, 4.5))
    names = sorted({r["instance"] for r in rows})
    for k, name in enumerate(names):
        mine = [r for r in rows if r["instance"] == name and r["limit"].startswith("1/")]
        x = [1 / int(r["limit"][2:]) for r in mine]
        color = f"C{k}"
        for key, style, who in (("flops", "-o", "tnsim"), ("after_flops", ":x", "after")):
            pts = [(xi, r[key] / r["unlimited_flops"]) for xi, r in zip(x, mine) if r.get(key)]
            if pts:
                ax.plot(*zip(*pts), style, color=color, label=f"{name} {who}")
    ax.set_xscale("log", base=2)
    ax.set_yscale("log")
    ax.invert_xaxis()
    ax.axhline(4, color="grey", lw=0.8, ls="--")
    ax.set_xlabel("memory limit / peak of the unlimited plan")
    ax.set_ylabel("FLOPs of all slices / unlimited FLOPs")
    ax.set_title("Slicing overhead: sliced search (tnsim) vs slicing afterwards")
    ax.legend(fontsize=7)
    fig.tight_layout()
    write_atomic(path, lambda fh: fig.savefig(fh, dpi=110, format="png"))
    plt.close(fig)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="smoke run: 6x6x8, short budgets")
    parser.add_argument("--only", help="one instance, e.g. 10x10x12-abcdcdab")
    parser.add_argument(
        "--budget", type=float, help="planning seconds per plan (10x10; 8x8 a quarter)"
    )
    parser.add_argument("--objective", default="operations", choices=("operations", "runtime"))
    parser.add_argument("--rg-trials", type=int, help="opt_einsum RandomGreedy trials")
    parser.add_argument(
        "--limits", help="only these limits, e.g. 1/1,1/1024,2GiB (labels as printed)"
    )
    parser.add_argument(
        "--grids",
        help="other grid shapes, ROWSxCOLSxCYCLES separated by commas (e.g. 5x5x24,6x6x20)",
    )
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--out", default=os.path.join(os.path.dirname(__file__), "results"))
    parser.add_argument("--plot", help="PNG of overhead against limit (default OUT/memory_fit.png)")
    args = parser.parse_args(argv)
    if args.grids:
        try:
            args.grids = [tuple(int(v) for v in g.split("x")) for g in args.grids.split(",")]
        except ValueError:
            parser.error(f"--grids {args.grids!r}: give ROWSxCOLSxCYCLES, e.g. 5x5x24,6x6x20")
        if any(len(g) != 3 or min(g) < 1 for g in args.grids):
            parser.error(f"--grids: each shape is three positive numbers, got {args.grids}")
    if args.budget is None:
        args.budget = 4.0 if args.quick else 120.0
    if args.rg_trials is None:
        args.rg_trials = 8 if args.quick else 64
    print(
        f"memory_fit: {platform.machine()}, {os.cpu_count()} cores, load "
        f"{os.getloadavg()[0]:.1f}; objective {args.objective}; FLOPs real (complex "
        "multiply-add = 8), complex128"
    )
    rows = run(args)
    os.makedirs(args.out, exist_ok=True)
    suffix = "_quick" if args.quick else ""
    write_atomic(os.path.join(args.out, f"memory_fit{suffix}.json"), json.dumps(rows, indent=1))
    plot(rows, args.plot or os.path.join(args.out, f"memory_fit{suffix}.png"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
