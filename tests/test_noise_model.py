"""Noise models: which channels go where, readout errors, and the JSON/TOML file format."""

import json
import sys

import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits import channels as ch
from tnsim.circuits.noise import ChannelOp, NoiseModel
from tnsim.circuits.noisefile import noise_model_from_dict, read_noise_model
from tnsim.errors import InputError


def _placed(noisy):
    """(gate name or channel name, qubits) of every item, in order."""
    return [
        (item.channel.name if isinstance(item, ChannelOp) else item.name, item.qubits)
        for item in noisy.items
    ]


def test_rules_by_gate_name_qubit_and_pair():
    c = Circuit(3).h(0).cx(0, 1).cx(1, 2).x(2)
    model = (
        NoiseModel()
        .after_gates(ch.bit_flip(0.1), gates=["h", "x"])
        .after_gates(ch.depolarizing(0.1, 2), qubits=[[2, 1]])
        .after_gates(ch.phase_flip(0.1), qubits=[1])
    )
    assert _placed(model.apply(c)) == [
        ("h", (0,)),
        ("bit_flip", (0,)),
        ("cx", (0, 1)),
        ("phase_flip", (1,)),  # one-qubit channel on the selected qubit of a two-qubit gate
        ("cx", (1, 2)),
        ("depolarizing2", (1, 2)),  # the pair matches in either order; the gate's order kept
        ("phase_flip", (1,)),
        ("x", (2,)),
        ("bit_flip", (2,)),
    ]


def test_one_qubit_channel_after_every_gate_and_widths():
    c = Circuit(2).h(0).cz(0, 1)
    model = NoiseModel().after_gates(ch.phase_flip(0.1)).after_gates(ch.depolarizing(0.1, 2))
    assert _placed(model.apply(c)) == [
        ("h", (0,)),
        ("phase_flip", (0,)),
        ("cz", (0, 1)),
        ("phase_flip", (0,)),
        ("phase_flip", (1,)),
        ("depolarizing2", (0, 1)),  # a two-qubit channel never follows a one-qubit gate
    ]


def test_layer_noise_follows_every_layer_on_every_qubit():
    # Layers are as soon as possible: h(0), h(1) | cx(0,1) | x(0); qubit 2 is idle throughout.
    c = Circuit(3).h(0).cx(0, 1).h(1).x(0)
    noisy = NoiseModel().after_layers(ch.amplitude_damping(0.01)).apply(c)
    ops = _placed(noisy)
    assert len(noisy.channel_ops()) == 3 * c.depth() == 9
    # The gates keep their order on each qubit, and each layer's channels follow it.
    assert [o for o in ops if o[0] != "amplitude_damping"] == [
        ("h", (0,)),
        ("cx", (0, 1)),
        ("h", (1,)),
        ("x", (0,)),
    ]
    assert ops[1:4] == [("amplitude_damping", (q,)) for q in range(3)]
    # Pairs after layers need groups of the channel's width.
    with pytest.raises(InputError, match="groups of 2"):
        NoiseModel().after_layers(ch.depolarizing(0.1, 2))
    pairs = NoiseModel().after_layers(ch.depolarizing(0.1, 2), qubits=[[0, 2]]).apply(c)
    assert {item.qubits for item in pairs.channel_ops()} == {(0, 2)}


def test_readout_matrices_per_qubit_and_default():
    m_all = [[0.95, 0.1], [0.05, 0.9]]
    m_one = [[0.8, 0.0], [0.2, 1.0]]
    noisy = NoiseModel().readout(m_all).readout(m_one, qubits=[2]).apply(Circuit(3))
    np.testing.assert_allclose(noisy.confusion(0), m_all)
    np.testing.assert_allclose(noisy.confusion(2), m_one)
    assert sorted(noisy.readout) == [0, 1, 2]
    assert NoiseModel().apply(Circuit(2)).confusion(1).tolist() == [[1, 0], [0, 1]]


@pytest.mark.parametrize(
    ("build", "match"),
    [
        (lambda m: m.after_gates(ch.depolarizing(0.1, 2), gates=["h"]), "cannot follow"),
        (lambda m: m.after_gates("depolarizing"), "expected a tnsim Channel"),
        (lambda m: m.after_gates(ch.bit_flip(0.1), qubits=[[0, 0]]), "repeats a qubit"),
        (lambda m: m.after_gates(ch.bit_flip(0.1), qubits=[-1]), "non-negative"),
        (lambda m: m.after_gates(ch.bit_flip(0.1), gates=[]), "empty"),
        (lambda m: m.readout([[0.9, 0.2], [0.2, 0.8]]), "sums to 1.1"),
        (lambda m: m.readout([[1.2, 0.0], [-0.2, 1.0]]), "in \\[0, 1\\]"),
        (lambda m: m.readout([[1, 0, 0]]), "2x2"),
    ],
)
def test_bad_rules_are_refused(build, match):
    with pytest.raises(InputError, match=match):
        build(NoiseModel())


def test_rule_qubits_outside_the_circuit_are_refused_on_apply():
    model = NoiseModel().after_gates(ch.bit_flip(0.1), qubits=[5])
    with pytest.raises(InputError, match="qubit 5 is outside the 3-qubit circuit"):
        model.apply(Circuit(3).h(0))


_FILE = {
    "format": "tnsim-noise/1",
    "channels": {"g1": {"kind": "depolarizing", "p": 0.01}},
    "after_gates": [
        {"gates": ["h"], "channel": "g1"},
        {"gates": ["cx"], "channel": {"kind": "depolarizing", "num_qubits": 2, "p": 0.02}},
        {"qubits": [1], "channel": {"kind": "amplitude_damping", "gamma": 0.05}},
        {"gates": ["x"], "channel": {"kind": "pauli", "rates": {"X": 0.01, "Z": 0.02}}},
        {
            "gates": ["rz"],
            "channel": {"kind": "kraus", "operators": [[[1, 0], [0, [0, 1]]]]},
        },
    ],
    "after_layers": [
        {"channel": {"kind": "thermal_relaxation", "t1": 50e-6, "t2": 60e-6, "time": 25e-9}},
        {"qubits": [0], "channel": {"kind": "phase_damping", "lambda": 0.01}},
    ],
    "readout": [
        {"confusion": [[0.98, 0.04], [0.02, 0.96]]},
        {"qubits": [1], "confusion": [[0.9, 0.1], [0.1, 0.9]]},
    ],
}

_TOML = """
format = "tnsim-noise/1"

[channels]
g1 = { kind = "depolarizing", p = 0.01 }

[[after_gates]]
gates = ["h"]
channel = "g1"

[[after_gates]]
gates = ["cx"]
channel = { kind = "depolarizing", num_qubits = 2, p = 0.02 }

[[after_gates]]
qubits = [1]
channel = { kind = "amplitude_damping", gamma = 0.05 }

[[after_gates]]
gates = ["x"]
channel = { kind = "pauli", rates = { X = 0.01, Z = 0.02 } }

[[after_gates]]
gates = ["rz"]
channel = { kind = "kraus", operators = [[[1, 0], [0, [0, 1]]]] }

[[after_layers]]
channel = { kind = "thermal_relaxation", t1 = 50e-6, t2 = 60e-6, time = 25e-9 }

[[after_layers]]
qubits = [0]
channel = { kind = "phase_damping", lambda = 0.01 }

[[readout]]
confusion = [[0.98, 0.04], [0.02, 0.96]]

[[readout]]
qubits = [1]
confusion = [[0.9, 0.1], [0.1, 0.9]]
"""


def _same_model(a: NoiseModel, b: NoiseModel) -> None:
    c = Circuit(2).h(0).cx(0, 1).x(1).rz(0.3, 0)
    na, nb = a.apply(c), b.apply(c)
    assert _placed(na) == _placed(nb)
    for x, y in zip(na.channel_ops(), nb.channel_ops()):
        np.testing.assert_allclose(x.channel.superoperator(), y.channel.superoperator())
    assert sorted(na.readout) == sorted(nb.readout)


def test_file_format_json_equals_python(tmp_path):
    path = tmp_path / "noise.json"
    path.write_text(json.dumps(_FILE, indent=2))
    from_file = read_noise_model(path)
    g1 = ch.depolarizing(0.01)
    python = (
        NoiseModel()
        .after_gates(g1, gates=["h"])
        .after_gates(ch.depolarizing(0.02, 2), gates=["cx"])
        .after_gates(ch.amplitude_damping(0.05), qubits=[1])
        .after_gates(ch.pauli_channel({"X": 0.01, "Z": 0.02}), gates=["x"])
        .after_gates(ch.kraus_channel([np.diag([1, 1j])]), gates=["rz"])
        .after_layers(ch.thermal_relaxation(50e-6, 60e-6, 25e-9))
        .after_layers(ch.phase_damping(0.01), qubits=[0])
        .readout([[0.98, 0.04], [0.02, 0.96]])
        .readout([[0.9, 0.1], [0.1, 0.9]], qubits=[1])
    )
    _same_model(from_file, python)


@pytest.mark.skipif(sys.version_info < (3, 11), reason="tomllib is in Python 3.11+")
def test_file_format_toml_equals_json(tmp_path):
    toml_path, json_path = tmp_path / "noise.toml", tmp_path / "noise.json"
    toml_path.write_text(_TOML)
    json_path.write_text(json.dumps(_FILE))
    _same_model(read_noise_model(toml_path), read_noise_model(json_path))


def test_toml_without_tomllib_says_to_use_json(tmp_path, monkeypatch):
    path = tmp_path / "noise.toml"
    path.write_text(_TOML)
    monkeypatch.setitem(sys.modules, "tomllib", None)
    with pytest.raises(InputError, match=r"Python 3\.11 or later.*as JSON"):
        read_noise_model(path)


def test_file_errors_name_the_place(tmp_path):
    path = tmp_path / "noise.json"
    path.write_text(
        '{\n  "after_gates": [\n    {"gates": ["h"],\n'
        '     "channel": {"kind": "depolarizing", "p": 2}}\n  ]\n}\n'
    )
    with pytest.raises(InputError) as err:
        read_noise_model(path)
    message = str(err.value)
    # Line 4, column 17: where the channel object starts.
    assert f"{path}:4:17: after_gates[0].channel: depolarizing: p must be" in message
    path.write_text('{"after_gates": [}')
    with pytest.raises(InputError, match=r"noise.json:1:18: not valid JSON"):
        read_noise_model(path)
    path.write_text('{"after_gate": []}')
    with pytest.raises(InputError, match="unknown key 'after_gate'; allowed here"):
        read_noise_model(path)
    with pytest.raises(InputError, match="cannot read the noise model"):
        read_noise_model(tmp_path / "missing.json")


@pytest.mark.parametrize(
    ("data", "match"),
    [
        ({"format": "other/2"}, "unknown format"),
        ({"after_gates": [{"channel": "nope"}]}, "no channel named 'nope'"),
        ({"after_gates": [{"channel": {"kind": "melt"}}]}, "unknown kind 'melt'"),
        ({"after_gates": [{"channel": {"kind": "bit_flip"}}]}, "missing key 'p'"),
        ({"after_gates": [{"channel": {"kind": "bit_flip", "p": 0.1, "q": 1}}]}, "unknown key"),
        (
            {"after_gates": [{"channel": {"kind": "kraus", "operators": [[[1, 0], [0, 0.5]]]}}]},
            "not trace-preserving",
        ),
        (
            {"after_gates": [{"channel": {"kind": "kraus", "operators": [[[1, 0], [0, "a"]]]}}]},
            r"operators\[0\]\[1\]\[1\]: matrix entry 'a'",
        ),
        ({"readout": [{"qubits": [0]}]}, "missing key 'confusion'"),
        ({"after_gates": {"channel": "x"}}, "expected a list of rules"),
    ],
)
def test_bad_model_data_is_refused(data, match):
    with pytest.raises(InputError, match=match):
        noise_model_from_dict(data)
