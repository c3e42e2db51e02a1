"""The --noise option of the query commands, against the dense density-matrix reference."""

import json

import networkx as nx
import numpy as np
import pytest

from tnsim.circuits.families import qaoa_maxcut
from tnsim.circuits.noisefile import read_noise_model
from tnsim.circuits.qasm import write_qasm
from tnsim.cli import main
from tnsim.network.noisy import canonical_noisy_cone, index_noisy, noisy_cone
from tnsim.testing import (
    dense_density_matrix,
    dense_read_probabilities,
    dense_reported_pauli,
    random_circuit,
)

_MODEL = {
    "after_gates": [
        {"gates": ["h", "rx", "ry", "u3", "rz"], "channel": {"kind": "depolarizing", "p": 0.02}},
        {
            "gates": ["cx", "cz", "rzz"],
            "channel": {"kind": "depolarizing", "num_qubits": 2, "p": 0.04},
        },
        {"qubits": [1], "channel": {"kind": "amplitude_damping", "gamma": 0.05}},
    ],
    "readout": [{"confusion": [[0.97, 0.05], [0.03, 0.95]]}],
}


@pytest.fixture
def files(tmp_path):
    c = random_circuit(6, 30, seed=9, gates=["h", "cx", "rz", "u3", "cz", "ry"])
    circuit = tmp_path / "c.qasm"
    circuit.write_text(write_qasm(c))
    noise = tmp_path / "noise.json"
    noise.write_text(json.dumps(_MODEL))
    noisy = read_noise_model(noise).apply(c)
    return noisy, str(circuit), str(noise)


def test_marginal_with_noise(files, capsys):
    noisy, circuit, noise = files
    full = dense_read_probabilities(noisy).reshape((2,) * 6)
    ref = full.sum(axis=(0, 2, 4, 5)).T.reshape(-1)  # qubits 3, 1 in that order
    assert main(["marginal", circuit, "--qubits", "3,1", "--noise", noise, "--json"]) == 0
    np.testing.assert_allclose(
        json.loads(capsys.readouterr().out)["probabilities"], ref, atol=1e-12
    )


def test_expect_with_noise(files, capsys):
    noisy, circuit, noise = files
    rho = dense_density_matrix(noisy)
    want = 0.5 * dense_reported_pauli(noisy, {0: "Z", 2: "Z"}, rho=rho) - dense_reported_pauli(
        noisy, {4: "X"}, rho=rho
    )
    args = ["expect", circuit, "--observable", "0.5 Z0 Z2 - X4", "--noise", noise, "--json"]
    assert main(args) == 0
    assert json.loads(capsys.readouterr().out)["value"] == pytest.approx(want, abs=1e-12)


def test_amp_with_noise_prints_probabilities(files, capsys):
    noisy, circuit, noise = files
    full = dense_read_probabilities(noisy)
    assert (
        main(["amp", circuit, "--bits", "010011", "--bits", "111111", "--noise", noise, "--json"])
        == 0
    )
    out = json.loads(capsys.readouterr().out)
    got = [r["probability"] for r in out["probabilities"]]
    np.testing.assert_allclose(got, [full[0b010011], full[0b111111]], atol=1e-13)
    assert main(["amp", circuit, "--bits", "010011", "--noise", noise]) == 0
    assert "probabilities <x|rho|x> of reading x (noisy" in capsys.readouterr().out


def test_sample_and_xeb_with_noise(files, tmp_path, capsys):
    _, circuit, noise = files
    out = tmp_path / "s.txt"
    assert main(["sample", circuit, "--shots", "200", "--noise", noise, "-o", str(out)]) == 0
    lines = out.read_text().split()
    assert len(lines) == 200 and all(len(x) == 6 for x in lines)
    assert main(["sample", circuit, "--shots", "20", "--noise", noise, "--json"]) == 0
    record = json.loads(capsys.readouterr().out)
    assert record["noisy_method"] == "distribution" and record["trajectories"] == 0
    assert main(["xeb", circuit, str(out), "--noise", noise, "--json"]) == 0
    r = json.loads(capsys.readouterr().out)
    assert {"fidelity", "predicted_exact", "predicted_digital"} <= set(r)
    assert main(["xeb", circuit, "--noise", noise]) == 0
    text = capsys.readouterr().out
    assert "predicted F, exact" in text and "predicted F, digital" in text


def test_sample_by_trajectories_states_their_number(files, capsys):
    _, circuit, noise = files
    args = ["sample", circuit, "--shots", "30", "--noise", noise, "--method", "gates", "--json"]
    assert main(args) == 0
    record = json.loads(capsys.readouterr().out)
    assert record["noisy_method"] == "trajectories" and 1 <= record["trajectories"] <= 30


def test_bad_noise_files_are_one_line_errors(files, tmp_path, capsys):
    _, circuit, _ = files
    bad = tmp_path / "bad.json"
    bad.write_text(
        '{"after_gates": [{"channel": {"kind": "kraus", "operators": [[[1, 0], [0, 0.9]]]}}]}'
    )
    assert main(["marginal", circuit, "--qubits", "0", "--noise", str(bad)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "not trace-preserving" in err and "bad.json:1:" in err
    assert (
        main(["expect", circuit, "--observable", "Z0", "--noise", str(tmp_path / "no.json")]) == 2
    )
    assert "cannot read the noise model" in capsys.readouterr().err
    assert main(["xeb", circuit]) == 2
    assert "SAMPLES" in capsys.readouterr().err


@pytest.mark.parametrize(
    "nodes", [200, pytest.param(1000, marks=pytest.mark.slow)], ids=["200", "1000"]
)
def test_qaoa_energy_matches_the_density_matrix_on_every_cone(tmp_path, capsys, nodes):
    # `tnsim expect CIRCUIT --noise noise.json --observable-file ...` on a 1,000-qubit
    # QAOA circuit (200 in the default run) with one- and two-qubit depolarizing noise and
    # readout errors.  Every distinct light cone (at most 6 qubits here) is simulated as a
    # dense density matrix (Kraus operators, tnsim.testing) and each term's value compared
    # within 1e-10.
    graph = nx.random_regular_graph(3, nodes, seed=7)
    c, g = qaoa_maxcut(graph, [0.4], [0.3])
    path = tmp_path / "qaoa.qasm"
    path.write_text(write_qasm(c))
    model = {
        "after_gates": [
            {"gates": ["h", "rx"], "channel": {"kind": "depolarizing", "p": 0.002}},
            {"gates": ["rzz"], "channel": {"kind": "depolarizing", "num_qubits": 2, "p": 0.01}},
        ],
        "readout": [{"confusion": [[0.98, 0.03], [0.02, 0.97]]}],
    }
    noise = tmp_path / "noise.json"
    noise.write_text(json.dumps(model))
    obs = tmp_path / "h.txt"
    obs.write_text("".join(f"-0.5 Z{u} Z{v}\n+0.5\n" for u, v in g.edges()))
    args = ["expect", str(path), "--noise", str(noise), "--observable-file", str(obs), "--json"]
    assert main(args) == 0
    out = json.loads(capsys.readouterr().out)
    noisy = read_noise_model(noise).apply(c)
    index = index_noisy(noisy)
    checked, total = {}, 0.0
    for (u, v), term in zip(g.edges(), out["terms"][::2]):
        assert term["pauli"] == f"Z{u} Z{v}"
        key, items, qubits = canonical_noisy_cone(index, [(u, "Z"), (v, "Z")])
        if key not in checked:
            local = noisy_cone(index, items, qubits)
            assert local.num_qubits <= 10
            checked[key] = dense_reported_pauli(local, {0: "Z", 1: "Z"})
        assert term["expectation"] == pytest.approx(checked[key], abs=1e-10)
        total += 0.5 - 0.5 * checked[key]
    assert out["value"] == pytest.approx(total, abs=1e-9)
    # Contractions: the distinct Z_u Z_v cones, and the Z_u cones that readout errors add.
    assert len(checked) < out["contractions"] < 2 * len(checked)
