"""Command line: marginal, expect, sample, xeb and streamed amp, against dense references."""

import json

import numpy as np
import pytest

from tnsim.circuits.qasm import write_qasm
from tnsim.cli import main
from tnsim.testing import dense_state, random_circuit


@pytest.fixture
def circuit_file(tmp_path):
    c = random_circuit(6, 30, seed=9, gates=["h", "cx", "rz", "u3", "cz", "ry"])
    path = tmp_path / "c.qasm"
    path.write_text(write_qasm(c))
    return c, path


def test_marginal_json_and_table(circuit_file, capsys):
    # Reference: dense state vector (tnsim.testing.dense_state), summed with numpy.
    c, path = circuit_file
    p = np.abs(dense_state(c).reshape((2,) * 6)) ** 2
    ref = p.sum(axis=(0, 2, 4, 5)).T.reshape(-1)  # qubits 3, 1 in that order
    assert main(["marginal", str(path), "--qubits", "3,1", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["outcomes"] == ["00", "01", "10", "11"]
    np.testing.assert_allclose(out["probabilities"], ref, atol=1e-12)
    assert main(["marginal", str(path), "--qubits", "3,1"]) == 0
    table = capsys.readouterr().out.splitlines()
    assert table[2].split()[0] == "00" and float(table[3].split()[1]) == pytest.approx(ref[1])


def test_expect_text_and_file(circuit_file, tmp_path, capsys):
    c, path = circuit_file
    psi = dense_state(c).reshape((2,) * 6)
    zz = np.einsum("abcdef,abcdef,a,c->", psi.conj(), psi, [1, -1], [1, -1]).real
    assert main(["expect", str(path), "--observable", "0.5 Z0 Z2 - 1", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["value"] == pytest.approx(0.5 * zz - 1, abs=1e-12)
    obs = tmp_path / "h.txt"
    obs.write_text("# energy\n0.5 Z0 Z2\n-1\n")
    assert main(["expect", str(path), "--observable-file", str(obs)]) == 0
    assert f"{0.5 * zz - 1:+.12f}" in capsys.readouterr().out


def test_sample_to_file_then_xeb(circuit_file, tmp_path, capsys):
    c, path = circuit_file
    out = tmp_path / "s.txt"
    assert main(["sample", str(path), "--shots", "300", "--seed", "4", "-o", str(out)]) == 0
    lines = out.read_text().split()
    assert len(lines) == 300 and all(len(x) == 6 and set(x) <= {"0", "1"} for x in lines)
    assert main(["sample", str(path), "--shots", "300", "--seed", "4"]) == 0
    assert capsys.readouterr().out.split() == lines
    assert main(["xeb", str(path), str(out), "--json"]) == 0
    r = json.loads(capsys.readouterr().out)
    # Ideal-sample expectation of the estimator: 2^n sum p^2 - 1 (Arute et al., Nature 574,
    # 505, 2019).
    p = np.abs(dense_state(c)) ** 2
    assert r["num_samples"] == 300
    assert abs(r["fidelity"] - (64 * (p**2).sum() - 1)) < 5 * r["standard_error"]
    gates = tmp_path / "g.txt"
    args = ["sample", str(path), "--shots", "300", "--method", "gates", "-o", str(gates)]
    assert main(args) == 0
    assert main(["xeb", str(path), str(gates), "--json"]) == 0
    r = json.loads(capsys.readouterr().out)
    assert abs(r["fidelity"] - (64 * (p**2).sum() - 1)) < 5 * r["standard_error"]


def test_amp_streams_a_bits_file(circuit_file, tmp_path, capsys):
    c, path = circuit_file
    psi = dense_state(c)
    rows = ["".join(map(str, r)) for r in np.random.default_rng(1).integers(0, 2, (100, 6))]
    f = tmp_path / "b.txt"
    f.write_text("\n".join(rows) + "\n")
    assert main(["amp", str(path), "--bits-file", str(f)]) == 0
    lines = capsys.readouterr().out.splitlines()[2:]  # after the two heading lines
    assert [ln.split()[1] for ln in lines] == rows
    probs = [float(ln.split()[3]) for ln in lines]
    np.testing.assert_allclose(
        probs, [abs(psi[int(r, 2)]) ** 2 for r in rows], rtol=1e-6, atol=1e-15
    )


@pytest.mark.parametrize(
    ("argv", "words"),
    [
        (["marginal", "{c}", "--qubits", "0,x"], "--qubits: item 2"),
        (["marginal", "{c}", "--qubits", "0,9"], "not an index"),
        (["expect", "{c}", "--observable", "Z0 Q1"], "column 4"),
        (["expect", "{c}"], "give --observable TEXT"),
        (["sample", "{c}", "--shots", "-3", "-o", "{o}"], "--shots"),
        (["sample", "{missing}", "--shots", "3", "-o", "{o}"], "no such file"),
        (["xeb", "{c}", "{missing}"], "no such file"),
        (["xeb", "{c}", "{bad}"], "bad.txt:2:1"),
    ],
)
def test_bad_input_exits_2_with_one_line(argv, words, circuit_file, tmp_path, capsys):
    _, path = circuit_file
    bad = tmp_path / "bad.txt"
    bad.write_text("000000\n0101\n")
    names = {
        "c": str(path),
        "o": str(tmp_path / "out.txt"),
        "missing": str(tmp_path / "nope"),
        "bad": str(bad),
    }
    assert main([a.format(**names) for a in argv]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and words in err
    assert not (tmp_path / "out.txt").exists()
