"""Predicted XEB of a noisy chip: exact expectation and the digital error model.

Linear XEB F = 2^n mean p(x) - 1 (Arute et al., "Quantum supremacy using a programmable
superconducting processor", Nature 574, 505, 2019); for samples of q its expectation is
2^n Σ q(x) p(x) - 1.  The digital error model of the same paper multiplies (1 - e) over
gates and readouts (cited from memory).
"""

import math

import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits import channels as ch
from tnsim.circuits.families import grid_circuit
from tnsim.circuits.noise import NoiseModel
from tnsim.queries.noisy_xeb import digital_error_fidelity, predict_xeb
from tnsim.testing import dense_read_probabilities, dense_state, random_circuit


def test_exact_prediction_matches_the_dense_reference():
    c = grid_circuit(2, 3, 4, seed=2)
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(0.02), gates=["sx", "ry", "u3"])
        .after_gates(ch.depolarizing(0.05, 2), gates=["cz"])
        .after_layers(ch.amplitude_damping(0.01))
        .readout([[0.97, 0.04], [0.03, 0.96]])
    )
    noisy = model.apply(c)
    p = np.abs(dense_state(c)) ** 2
    q = dense_read_probabilities(noisy)
    r = predict_xeb(noisy)
    assert r.exact == pytest.approx(2**6 * float(q @ p) - 1, abs=1e-12)
    assert r.channels == len(noisy.channel_ops()) and r.readout_qubits == 6


def test_global_depolarizing_scales_the_ideal_xeb():
    # Two-qubit depolarizing ρ -> (1 - p) ρ + p I/4 after each of k cx gates; unitaries keep
    # I/4, so ρ = (1 - p)^k ρ_ideal + (1 - (1 - p)^k) I/4 and
    # F = 4 Σ q p_ideal - 1 = (1 - p)^k (4 Σ p_ideal² - 1).
    c = random_circuit(2, 8, seed=4, gates=["h", "cx", "ry", "rz"]).cx(0, 1)
    p = 0.3
    noisy = NoiseModel().after_gates(ch.depolarizing(p, 2), gates=["cx"]).apply(c)
    k = sum(op.name == "cx" for op in c.ops)
    ideal = np.abs(dense_state(c)) ** 2
    f_ideal = 4 * float(ideal @ ideal) - 1
    assert predict_xeb(noisy).exact == pytest.approx((1 - p) ** k * f_ideal, abs=1e-12)


def test_digital_error_model_is_the_product_of_fidelities():
    c = grid_circuit(3, 3, 2, seed=1)
    e1, e2, er = 0.0016, 0.0062, 0.038  # Arute et al.'s quoted Pauli and readout errors
    model = (
        NoiseModel()
        .after_gates(
            ch.pauli_channel({"X": e1 / 3, "Y": e1 / 3, "Z": e1 / 3}), gates=["sx", "ry", "u3"]
        )
        .after_gates(ch.pauli_channel({"ZZ": e2}), gates=["cz"])
        .readout([[1 - er, er], [er, 1 - er]])
    )
    noisy = model.apply(c)
    n1 = sum(len(op.qubits) == 1 for op in c.ops)
    n2 = sum(len(op.qubits) == 2 for op in c.ops)
    want = (1 - e1) ** n1 * (1 - e2) ** n2 * (1 - er) ** 9
    assert digital_error_fidelity(noisy) == pytest.approx(want, rel=1e-12)
    r = predict_xeb(noisy, exact_width=4)
    assert r.exact is None and r.digital == pytest.approx(want, rel=1e-12)
    assert math.isclose(predict_xeb(Circuit(3).h(0)).digital, 1.0)


def test_prediction_and_digital_estimate_agree_for_small_errors():
    # For a random circuit of moderate depth with small Pauli errors the two predictions
    # agree to first order (the premise of the digital error model).
    c = grid_circuit(3, 3, 8, seed=3)
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(0.002), gates=["sx", "ry", "u3"])
        .after_gates(ch.depolarizing(0.008, 2), gates=["cz"])
    )
    r = predict_xeb(c, noise=model)
    assert r.ideal == pytest.approx(predict_xeb(c).exact, abs=1e-12)
    assert r.exact / r.ideal == pytest.approx(r.digital, rel=0.05)
