"""Where tensor networks beat the dense state vector: one amplitude of 2D grid circuits.

For each grid shape, one amplitude of a seeded random bitstring is computed
twice, side by side in one run:

* tnsim: ``tnsim.amplitude(circuit, bits, dtype=complex64)`` — the whole
  pipeline (network, simplification, planning, contraction), best of
  ``--repeats`` runs;
* dense: ``benchmarks/dense.py``'s state vector in complex64 (all 2^n
  amplitudes, then the one asked for), one run, while n <= ``--max-dense``.

The two values must agree (relative difference below 1e-3 in complex64).
Prints a markdown table and the crossover (smallest qubit count from which
tnsim is faster at every larger size measured) and writes CSV and JSON.

Usage: ``python benchmarks/crossover.py [--quick] [--out DIR] [--cycles 8]``
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import platform
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from dense import simulate

from tnsim import amplitude
from tnsim.circuits.families import grid_circuit

FULL_SHAPES = ["3x3", "3x4", "2x7", "3x5", "4x4", "3x6", "4x5", "2x11", "4x6", "5x5", "2x13"]
QUICK_SHAPES = ["2x3", "3x3", "3x4", "4x4"]


def _time_tnsim(circuit, bits: str, repeats: int) -> tuple[complex, float]:
    best, value = float("inf"), 0j
    for _ in range(repeats):
        t0 = time.perf_counter()
        value = amplitude(circuit, bits, dtype=np.complex64)
        best = min(best, time.perf_counter() - t0)
    return value, best


def _time_dense(circuit, bits: str) -> tuple[complex, float]:
    t0 = time.perf_counter()
    state = simulate(circuit, np.complex64)
    value = complex(state[int(bits, 2)])  # qubit 0 is the most significant bit
    seconds = time.perf_counter() - t0
    del state
    return value, seconds


def measure(shapes: list[str], cycles: int, max_dense: int, repeats: int, seed: int) -> list[dict]:
    """Return one row per shape with both timings (dense None past ``max_dense``)."""
    rows = []
    for shape in shapes:
        r, c = (int(v) for v in shape.split("x"))
        circuit = grid_circuit(r, c, cycles, seed=seed)
        n = circuit.num_qubits
        rng = np.random.default_rng(seed)
        bits = "".join(str(b) for b in rng.integers(0, 2, n))
        a_tn, t_tn = _time_tnsim(circuit, bits, repeats)
        row = {
            "shape": shape,
            "qubits": n,
            "gates": len(circuit),
            "tnsim_seconds": t_tn,
            "dense_seconds": None,
            "speedup": None,
            "rel_diff": None,
        }
        if n <= max_dense:
            a_dn, t_dn = _time_dense(circuit, bits)
            row.update(
                dense_seconds=t_dn,
                speedup=t_dn / t_tn,
                rel_diff=abs(a_tn - a_dn) / max(abs(a_dn), 1e-30),
            )
            if row["rel_diff"] > 1e-3:
                raise SystemExit(f"{shape}: tnsim {a_tn} and dense {a_dn} disagree")
        rows.append(row)
        dense_s = "-" if row["dense_seconds"] is None else f"{row['dense_seconds']:.4f}"
        print(f"  {shape:>5} {n:>3} qubits: tnsim {t_tn:.4f} s, dense {dense_s} s", file=sys.stderr)
    return rows


def crossover(rows: list[dict]) -> int | None:
    """Smallest qubit count from which tnsim is faster at every larger measured size."""
    timed = sorted((r["qubits"], r["speedup"]) for r in rows if r["speedup"] is not None)
    answer = None
    for n, s in reversed(timed):
        if s <= 1:
            break
        answer = n
    return answer


def table(rows: list[dict]) -> str:
    """Markdown table of the rows."""
    out = [
        "| grid | qubits | gates | tnsim s (1 amplitude) | dense s (state vector) "
        "| dense / tnsim |",
        "|---|---|---|---|---|---|",
    ]
    for r in rows:
        dense = "—" if r["dense_seconds"] is None else f"{r['dense_seconds']:.3f}"
        speed = "—" if r["speedup"] is None else f"{r['speedup']:.1f}×"
        out.append(
            f"| {r['shape']} | {r['qubits']} | {r['gates']} | {r['tnsim_seconds']:.4f} "
            f"| {dense} | {speed} |"
        )
    return "\n".join(out)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="small grids only (CI smoke run)")
    ap.add_argument("--out", default=os.path.join("benchmarks", "results"), help="output folder")
    ap.add_argument("--cycles", type=int, default=8)
    ap.add_argument("--max-dense", type=int, default=26, help="largest n the dense run gets")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args(argv)
    shapes = QUICK_SHAPES if args.quick else FULL_SHAPES
    rows = measure(shapes, args.cycles, args.max_dense, args.repeats, args.seed)
    cross = crossover(rows)
    text = table(rows) + (
        f"\n\nCrossover: tnsim is faster from {cross} qubits on (grid, {args.cycles} cycles, "
        "complex64, one amplitude)."
        if cross
        else "\n\nNo crossover in the measured range."
    )
    print(text)
    os.makedirs(args.out, exist_ok=True)
    name = "crossover_quick" if args.quick else "crossover"
    with open(os.path.join(args.out, name + ".csv"), "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)
    doc = {
        "cycles": args.cycles,
        "dtype": "complex64",
        "crossover_qubits": cross,
        "machine": {"platform": platform.platform(), "cpu_count": os.cpu_count()},
        "rows": rows,
    }
    with open(os.path.join(args.out, name + ".json"), "w") as fh:
        json.dump(doc, fh, indent=1)
    with open(os.path.join(args.out, name + ".md"), "w") as fh:
        fh.write(text + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
