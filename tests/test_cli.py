"""The command line: amp and demo, and one-line errors with exit status 2."""

import json
import subprocess
import sys

import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits.qasm import write_qasm
from tnsim.cli import main
from tnsim.testing import dense_state, random_circuit


@pytest.fixture
def circuit_file(tmp_path):
    c = random_circuit(8, 40, seed=5, gates=["h", "cx", "rz", "u3", "cz", "swap", "ccx", "ry"])
    path = tmp_path / "c.qasm"
    path.write_text(write_qasm(c))
    return c, path


def test_amp_json_matches_dense_state(circuit_file, capsys):
    c, path = circuit_file
    psi = dense_state(c)
    assert main(["amp", str(path), "--bits", "01100101", "--bits", "11111111", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    got = [r["real"] + 1j * r["imag"] for r in out["amplitudes"]]
    np.testing.assert_allclose(got, [psi[int("01100101", 2)], psi[255]], atol=1e-12)
    assert out["amplitudes"][0]["probability"] == pytest.approx(abs(got[0]) ** 2)


def test_amp_table_and_bits_file(circuit_file, tmp_path, capsys):
    _, path = circuit_file
    bits = tmp_path / "b.txt"
    bits.write_text("# device samples\n00000000\n\n10101010\n")
    assert main(["amp", str(path), "--bits-file", str(bits)]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    rows = [line.split() for line in lines if not line.startswith("#")]
    assert len(lines) == 4 and len(rows) == 2  # two heading lines, then the rows
    assert rows[1][:2] == ["1", "10101010"]


H2 = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\n'


@pytest.mark.parametrize(
    ("text", "args", "match"),
    [
        ("OPENQASM 2.0;\nqreg q[2];\nfoo q[0];\n", ["--bits", "00"], "c.qasm:3:1"),
        (H2 + "h q[5];\n", ["--bits", "00"], "4:"),
        ("OPENQASM 2.0;\nqreg q[2]\n", ["--bits", "00"], "c.qasm:"),
        (H2 + "h q[0];\n", ["--bits", "000"], "but 2 are expected"),
        (H2 + "h q[0];\n", ["--bits", "0x"], "'x'"),
        (H2, [], "at least one bitstring"),
    ],
)
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, text, args, match):
    path = tmp_path / "c.qasm"
    path.write_text(text)
    assert main(["amp", str(path), *args]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and match in err and "Traceback" not in err


def test_missing_file_and_bad_option(tmp_path, capsys):
    assert main(["amp", str(tmp_path / "none.qasm"), "--bits", "0"]) == 2
    assert main(["amp"]) == 2
    assert main(["nonsense"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 3 and all(line.startswith("tnsim: error:") for line in err)


def test_bits_file_error_names_line_and_column(tmp_path, capsys):
    path = tmp_path / "c.qasm"
    path.write_text(write_qasm(Circuit(3).h(0)))
    bits = tmp_path / "b.txt"
    bits.write_text("000\n  01\n")
    assert main(["amp", str(path), "--bits-file", str(bits)]) == 2
    assert "b.txt:2:3:" in capsys.readouterr().err


def test_python_dash_m_entry_point_and_quick_demo():
    run = subprocess.run(
        [sys.executable, "-m", "tnsim", "demo", "--quick"], capture_output=True, text=True
    )
    assert run.returncode == 0, run.stderr
    assert "log10|a|" in run.stdout
