"""Command-line run options: --memory, --workers, --checkpoint, --quiet, --array-backend."""

import json
import os

import numpy as np
import pytest

from tnsim.circuits.qasm import write_qasm
from tnsim.cli import main
from tnsim.testing import dense_state, random_circuit

BITS = ["0110100101", "1111000011"]


@pytest.fixture
def circuit_and_file(tmp_path):
    circuit = random_circuit(10, 60, seed=11, gates=["h", "cx", "rz", "rx", "cz"])
    path = tmp_path / "c.qasm"
    path.write_text(write_qasm(circuit))
    return circuit, str(path)


def _amp_json(capsys, *argv):
    assert main(["amp", *argv, "--json"]) == 0
    out = capsys.readouterr()
    assert out.err == ""  # no progress bar or messages around --json
    rows = json.loads(out.out)["amplitudes"]
    return np.array([r["real"] + 1j * r["imag"] for r in rows])


def _bit_args(path):
    return [path, *[a for b in BITS for a in ("--bits", b)]]


def test_run_options_give_the_same_amplitudes(circuit_and_file, capsys, tmp_path):
    # Reference: dense state vector (qubit 0 is the most significant bit).
    circuit, path = circuit_and_file
    want = dense_state(circuit)[[int(b, 2) for b in BITS]]
    plain = _amp_json(capsys, *_bit_args(path))
    np.testing.assert_allclose(plain, want, atol=1e-12)
    folder = tmp_path / "ckpt"
    opts = ["--memory", "1GiB", "--workers", "1", "--quiet", "--checkpoint", str(folder)]
    first = _amp_json(capsys, *_bit_args(path), *opts)
    assert first.tobytes() == plain.tobytes()
    assert sorted(os.listdir(folder))[0] == "part-00000.ckpt"
    again = _amp_json(capsys, *_bit_args(path), *opts)  # resumes from the finished files
    assert again.tobytes() == plain.tobytes()


def test_checkpoint_of_another_circuit_is_refused(circuit_and_file, capsys, tmp_path):
    _, path = circuit_and_file
    folder = str(tmp_path / "ckpt")
    _amp_json(capsys, *_bit_args(path), "--checkpoint", folder)
    other = tmp_path / "other.qasm"
    other.write_text(write_qasm(random_circuit(10, 60, seed=12, gates=["h", "cx", "rz"])))
    assert main(["amp", *_bit_args(str(other)), "--checkpoint", folder]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "different circuit" in err[0]


@pytest.mark.parametrize(
    ("args", "match"),
    [
        (["--memory", "16"], "at least"),  # bytes: less than any 2x2 gate
        (["--memory", "lots"], "cannot read memory limit"),
        (["--workers", "0"], "--workers must be from 1"),
        (["--array-backend", "no_such_array_lib"], "not installed"),
    ],
)
def test_bad_run_options_exit_2_with_one_line(circuit_and_file, capsys, args, match):
    _, path = circuit_and_file
    assert main(["amp", *_bit_args(path), *args]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and match in err[0]


@pytest.mark.parametrize(
    "command",
    [
        ["marginal", "--qubits", "0,3"],
        ["expect", "--observable", "0.5 Z0 Z1 - 1.2 X3"],
    ],
)
def test_query_subcommands_take_run_options(circuit_and_file, capsys, tmp_path, command):
    _, path = circuit_and_file
    argv = [command[0], path, *command[1:], "--json"]
    assert main(argv) == 0
    plain = capsys.readouterr().out
    opts = ["--memory", "1GiB", "--workers", "1", "--checkpoint", str(tmp_path / "q")]
    assert main([*argv, *opts]) == 0
    assert capsys.readouterr().out == plain
    assert os.listdir(tmp_path / "q")
    assert main([*argv, "--memory", "16"]) == 2  # bytes
    assert "at least" in capsys.readouterr().err  # names a limit that works
