"""Bad input on the command line, one row per class: status 2, one stderr line, no file left.

Every row runs in an empty folder holding only its input files; after the
refusal the folder must hold nothing new (no partial output, no checkpoint).
Sizes that would allocate terabytes (registers of 10^10 qubits, 10^11 shots,
families of 10^9 rows) must be refused before anything is allocated: a row
that allocated would take minutes or fail with MemoryError, not one line.
"""

from __future__ import annotations

import os

import pytest

from tnsim.circuits.families import grid_circuit
from tnsim.circuits.qasm import write_qasm
from tnsim.cli import main

HUGE = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[10000000000];\nh q[0];\n'
ZEROS = "0" * 6

ROWS = [
    # (class, argv, words in the one stderr line)
    (
        "register of 10^10 qubits: marginal",
        ["marginal", "huge.qasm", "--qubits", "0"],
        "10,000,000,000 qubits",
    ),
    ("register of 10^10 qubits: cost", ["cost", "huge.qasm"], "10,000,000,000 qubits"),
    (
        "register of 10^10 qubits: expect",
        ["expect", "huge.qasm", "--observable", "Z0"],
        "10,000,000,000 qubits",
    ),
    (
        "register of 10^10 qubits: sample",
        ["sample", "huge.qasm", "--shots", "1"],
        "10,000,000,000 qubits",
    ),
    ("family size as an expression", ["gen", "grid", "--param", "rows=10**9"], "is not an integer"),
    ("family size too large", ["gen", "grid", "--param", "rows=1000000000"], "gates, more than"),
    (
        "family size of 5,000 digits",
        ["gen", "ghz", "--param", "n=" + "9" * 5000],
        "is not an integer",
    ),
    ("family size in non-ASCII digits", ["gen", "ghz", "--param", "n=١٢"], "is not an integer"),
    ("bench sizes too large", ["bench", "--sizes", "100000x100000"], "gates, more than"),
    (
        "bench sizes of 5,000 digits",
        ["bench", "--family", "ghz", "--sizes", "9" * 5000],
        "--sizes item",
    ),
    (
        "negative seed",
        ["sample", "c.qasm", "--shots", "3", "--seed", "-1"],
        "--seed must be 0 or more",
    ),
    (
        "seed beyond 2**128",
        ["sample", "c.qasm", "--shots", "3", "--seed", "9" * 50],
        "--seed must be",
    ),
    ("qubit index of 5,000 digits", ["marginal", "c.qasm", "--qubits", "9" * 5000], "too large"),
    ("qubit index as a superscript", ["marginal", "c.qasm", "--qubits", "²"], "not a qubit index"),
    ("qubit index out of range", ["marginal", "c.qasm", "--qubits", "0,6"], "qubit"),
    (
        "observable with a non-ASCII digit",
        ["expect", "c.qasm", "--observable", "Z١"],
        "followed by a qubit index",
    ),
    (
        "observable with a trailing operator",
        ["expect", "c.qasm", "--observable", "0.5*"],
        "'*' must be followed",
    ),
    (
        "observable index of 5,000 digits",
        ["expect", "c.qasm", "--observable", "Z" + "9" * 5000],
        "too large",
    ),
    ("shots beyond memory", ["sample", "c.qasm", "--shots", "100000000000"], "memory available"),
    ("shots beyond the cap", ["sample", "c.qasm", "--shots", "9" * 20], "--shots"),
    ("negative shots", ["sample", "c.qasm", "--shots", "-3"], "--shots"),
    ("-o naming a folder", ["sample", "c.qasm", "--shots", "3", "-o", "sub"], "is a folder"),
    (
        "-o in a missing folder",
        ["sample", "c.qasm", "--shots", "3", "-o", "no/x.txt"],
        "does not exist",
    ),
    (
        "checkpoint under a file",
        ["amp", "c.qasm", "--bits", ZEROS, "--checkpoint", "c.qasm/ck"],
        "is a file, not a folder",
    ),
    ("infinite time budget", ["cost", "c.qasm", "--time-budget", "inf"], "finite positive"),
    ("NaN time budget", ["cost", "c.qasm", "--time-budget", "nan"], "finite positive"),
    ("zero workers", ["amp", "c.qasm", "--bits", ZEROS, "--workers", "0"], "--workers must be"),
    ("bad memory size", ["amp", "c.qasm", "--bits", ZEROS, "--memory", "lots"], "memory"),
    ("bitstring of the wrong length", ["amp", "c.qasm", "--bits", "01"], "but 6 are expected"),
    ("bitstring file line", ["amp", "c.qasm", "--bits-file", "bad.txt"], "bad.txt:2:1"),
    ("count file with a bad count", ["xeb", "c.qasm", "counts.txt"], "counts.txt:1:1: count"),
    ("bitstring file missing", ["xeb", "c.qasm", "nope.txt"], "no such file"),
    (
        "classical order without measure",
        ["sample", "c.qasm", "--shots", "2", "--bit-order", "classical"],
        "no measure statements",
    ),
    ("two inputs from stdin", ["xeb", "-", "-"], "only one input"),
    ("circuit missing", ["amp", "nope.qasm", "--bits", "0"], "no such file"),
    ("circuit is a folder", ["amp", "sub", "--bits", "0"], "is a folder"),
    ("two forecast queries", ["cost", "c.qasm", "--shots", "3", "--qubits", "0"], "give one query"),
    ("unknown subcommand", ["nonsense"], "invalid choice"),
    ("unknown option", ["amp", "c.qasm", "--colour"], "see 'tnsim amp --help'"),
    (
        "marginal of too many qubits",
        ["marginal", "c.qasm", "--qubits", ",".join(map(str, range(25)))],
        "at most 24",
    ),
    ("family parameter twice", ["gen", "ghz", "--param", "n=3", "--param", "n=4"], "given twice"),
]


@pytest.mark.parametrize(("name", "argv", "words"), ROWS, ids=[r[0] for r in ROWS])
def test_bad_input_is_one_line_status_2_and_leaves_nothing(
    name, argv, words, tmp_path, monkeypatch, capsys
):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "huge.qasm").write_text(HUGE)
    (tmp_path / "c.qasm").write_text(write_qasm(grid_circuit(2, 3, 2, seed=1)))
    (tmp_path / "bad.txt").write_text(ZEROS + "\n0101x0\n")
    (tmp_path / "counts.txt").write_text(ZEROS + ",many\n")
    (tmp_path / "sub").mkdir()
    before = sorted(os.listdir(tmp_path))
    assert main(argv) == 2, name
    out, err = capsys.readouterr()
    assert err.count("\n") == 1 and err.startswith("tnsim: error:"), err
    assert words in err, err
    assert "Traceback" not in err and len(err) < 400
    assert out == ""
    assert sorted(os.listdir(tmp_path)) == before
    assert os.listdir(tmp_path / "sub") == []
