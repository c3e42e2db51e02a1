"""Time :func:`tnsim.circuits.qasm.read_qasm` on a large generated OpenQASM 2.0 file.

Not part of the tnsim library.  The file has one 1,000-qubit register and
``--gates`` statements, alternating ``rzz(0.3) q[i],q[j];`` and ``h q[i];`` on
qubits drawn with a seeded generator (``--seed``), plus a line of ``rz(pi/4)``
every 100 statements.  Such simple statements are read by the reader's fast
path; ``--general`` writes ``rzz(0.6/2) q[i], q[j];`` and
``U(pi/2, 0, pi) q[i];`` instead, whose expressions go through the lexer and
the expression parser.  The reader remembers the values of a parameter list by
its text, so ``--distinct`` makes every list different: ``rzz(<k/7>)`` with
the number written out (simple), or ``rzz(k/7)`` and ``U(pi/2, 0, k/3)``
(general), for statement ``k``.

``--baseline REV`` also times the reader as it was at git revision ``REV``
(a single-file ``tnsim/qasm.py``), loaded from ``git show`` into a throw-away
module, in the same run and on the same text, and prints the ratio.
``--profile`` prints the top of a cProfile report for the current reader.

Usage::

    .venv/bin/python benchmarks/qasm_read.py --gates 200000 --baseline 616dbe6 [--general]
"""

from __future__ import annotations

import argparse
import cProfile
import importlib.util
import pstats
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from tnsim.circuits.qasm import read_qasm

__all__ = ["make_program", "time_reader"]

ROOT = Path(__file__).resolve().parent.parent


def make_program(
    num_gates: int,
    num_qubits: int = 1000,
    seed: int = 0,
    general: bool = False,
    distinct: bool = False,
) -> str:
    """Return an OpenQASM 2.0 program of ``num_gates`` gate statements."""
    one, two = ("U(pi/2, 0, pi)", "rzz(0.6/2)") if general else ("h", "rzz(0.3)")
    rng = np.random.default_rng(seed)
    lines = ["OPENQASM 2.0;", 'include "qelib1.inc";', f"qreg q[{num_qubits}];"]
    for k in range(num_gates):
        if distinct and general:
            one, two = f"U(pi/2, 0, {k}/3)", f"rzz({k}/7)"
        elif distinct:
            two = f"rzz({k / 7!r})"
        if k % 100 == 99:
            lines.append(f"rz(pi/4) q[{int(rng.integers(num_qubits))}];")
        elif k % 2:
            lines.append(f"{one} q[{int(rng.integers(num_qubits))}];")
        else:
            i, j = (int(x) for x in rng.choice(num_qubits, size=2, replace=False))
            lines.append(f"{two} q[{i}],q[{j}];")
    return "\n".join(lines) + "\n"


def time_reader(reader, text: str, repeats: int) -> tuple[float, int]:
    """Least CPU time (of this process) of ``repeats`` reads, and the number of operations read."""
    best, count = float("inf"), 0
    for _ in range(repeats):
        start = time.process_time()
        circuit = reader(text)
        best = min(best, time.process_time() - start)
        count = len(circuit.ops)
    return best, count


def load_baseline(rev: str):
    """Import ``tnsim/qasm.py`` as it was at git revision ``rev``; return its ``read_qasm``."""
    source = subprocess.run(
        ["git", "show", f"{rev}:tnsim/qasm.py"], cwd=ROOT, check=True, capture_output=True
    ).stdout
    path = Path(tempfile.mkdtemp()) / "qasm_baseline.py"
    path.write_bytes(source)
    spec = importlib.util.spec_from_file_location("tnsim._qasm_baseline", path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module.read_qasm


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--gates", type=int, default=200_000)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--general", action="store_true", help="statements with expressions")
    parser.add_argument("--distinct", action="store_true", help="no repeated expressions")
    parser.add_argument("--baseline", metavar="REV", help="also time the reader at git REV")
    parser.add_argument("--profile", action="store_true", help="cProfile the current reader")
    args = parser.parse_args()
    text = make_program(args.gates, seed=args.seed, general=args.general, distinct=args.distinct)
    form = ("distinct " if args.distinct else "") + ("general" if args.general else "simple")
    print(
        f"{args.gates} {form} statements, {len(text) / 1e6:.1f} MB, best CPU time of {args.repeats}"
    )
    current, ops = time_reader(read_qasm, text, args.repeats)
    print(f"current : {current:.3f} s, {ops} ops, {1e6 * current / ops:.2f} us/op")
    if args.baseline:
        old_reader = load_baseline(args.baseline)
        old, old_ops = time_reader(old_reader, text, args.repeats)
        same = old_reader(text).ops == read_qasm(text).ops
        per_op = 1e6 * old / old_ops
        print(f"baseline: {old:.3f} s, {old_ops} ops, {per_op:.2f} us/op ({args.baseline})")
        print(f"speed-up: {old / current:.2f}x; identical operations: {same}")
    if args.profile:
        profile = cProfile.Profile()
        profile.runcall(read_qasm, text)
        pstats.Stats(profile).sort_stats("tottime").print_stats(12)


if __name__ == "__main__":
    main()
