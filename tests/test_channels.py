"""Quantum channels: completeness checks, textbook closed forms, superoperators, dilations.

Closed forms from Nielsen and Chuang, "Quantum Computation and Quantum Information"
(Cambridge University Press, 2000), §8.3 (cited from memory): the depolarizing channel
shrinks the Bloch vector by 1 - p per use; amplitude damping moves |1> to |0> with
probability γ (populations of |1> shrink by 1 - γ, coherences by sqrt(1 - γ)); phase
damping shrinks coherences by sqrt(1 - λ).  Each is checked through tnsim's noisy queries
(doubled networks, both contraction routes), not only on Channel.apply.
"""

import math

import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits import channels as ch
from tnsim.circuits.noise import NoiseModel
from tnsim.errors import InputError
from tnsim.queries import noisy as qn
from tnsim.queries.noisy import noisy_expectation, noisy_marginal
from tnsim.queries.noisy_sampling import dilation


@pytest.fixture(params=["time order", "network"])
def route(request, monkeypatch):
    """Run each check through both contraction routes of tnsim.queries.noisy."""
    if request.param == "network":
        monkeypatch.setattr(qn, "DENSE_QUBITS", 0)
    return request.param


def _repeated(prep: Circuit, channel: ch.Channel, k: int) -> tuple:
    """``prep`` then ``k`` identity gates, each followed by ``channel``."""
    c = prep.copy()
    for _ in range(k):
        c.id(0)
    return c, NoiseModel().after_gates(channel, gates=["id"])


@pytest.mark.parametrize("k", [1, 3, 7])
def test_depolarizing_shrinks_the_bloch_vector(route, k):
    # Nielsen and Chuang §8.3.4: ρ -> (1 - p) ρ + p I/2 scales (x, y, z) by 1 - p per use.
    p = 0.13
    prep = Circuit(1).ry(0.7, 0).rz(0.4, 0)
    bloch = [math.sin(0.7) * math.cos(0.4), math.sin(0.7) * math.sin(0.4), math.cos(0.7)]
    c, model = _repeated(prep, ch.depolarizing(p), k)
    for letter, ideal in zip("XYZ", bloch):
        got = noisy_expectation(c, f"{letter}0", noise=model)
        assert got == pytest.approx((1 - p) ** k * ideal, abs=1e-12)


@pytest.mark.parametrize("k", [1, 2, 5])
def test_amplitude_damping_closed_forms(route, k):
    # Nielsen and Chuang §8.3.5: from |1>, P(1) = (1 - γ)^k, so <Z> = 1 - 2 (1 - γ)^k;
    # from |+>, <X> = (1 - γ)^(k/2) (coherences shrink by sqrt(1 - γ) per use).
    g = 0.21
    c, model = _repeated(Circuit(1).x(0), ch.amplitude_damping(g), k)
    assert noisy_expectation(c, "Z0", noise=model) == pytest.approx(1 - 2 * (1 - g) ** k)
    np.testing.assert_allclose(
        noisy_marginal(c, [0], noise=model), [1 - (1 - g) ** k, (1 - g) ** k], atol=1e-12
    )
    c, model = _repeated(Circuit(1).h(0), ch.amplitude_damping(g), k)
    assert noisy_expectation(c, "X0", noise=model) == pytest.approx((1 - g) ** (k / 2))
    assert noisy_expectation(c, "Z0", noise=model) == pytest.approx(1 - (1 - g) ** k)


def test_phase_damping_keeps_populations_and_shrinks_coherences(route):
    # Nielsen and Chuang §8.3.6: coherences shrink by sqrt(1 - λ) per use, populations stay.
    lam = 0.3
    c, model = _repeated(Circuit(1).ry(1.1, 0), ch.phase_damping(lam), 4)
    assert noisy_expectation(c, "X0", noise=model) == pytest.approx(
        math.sin(1.1) * (1 - lam) ** 2, abs=1e-12
    )
    assert noisy_expectation(c, "Z0", noise=model) == pytest.approx(math.cos(1.1), abs=1e-12)


def test_phase_damping_equals_the_books_kraus_operators():
    # The book's Kraus form diag(1, sqrt(1-λ)), diag(0, sqrt(λ)) gives the same channel.
    lam = 0.37
    book = ch.kraus_channel(
        [np.diag([1, math.sqrt(1 - lam)]), np.diag([0, math.sqrt(lam)])], "book"
    )
    np.testing.assert_allclose(
        ch.phase_damping(lam).superoperator(), book.superoperator(), atol=1e-14
    )


def test_thermal_relaxation_decays_with_t1_and_t2(route):
    # Populations relax as exp(-t/T1) towards |0>, coherences decay as exp(-t/T2)
    # (the definitions of T1 and T2; common practice).
    t1, t2, t = 40.0, 25.0, 7.0
    c, model = _repeated(Circuit(1).x(0), ch.thermal_relaxation(t1, t2, t), 3)
    assert noisy_marginal(c, [0], noise=model)[1] == pytest.approx(math.exp(-3 * t / t1))
    c, model = _repeated(Circuit(1).h(0), ch.thermal_relaxation(t1, t2, t), 3)
    assert noisy_expectation(c, "X0", noise=model) == pytest.approx(math.exp(-3 * t / t2))


def test_two_qubit_depolarizing_and_pauli_channels():
    # (1 - p) ρ + p I/4 on a Bell pair: <ZZ> = <XX> = 1 - p, one-qubit marginals uniform.
    p = 0.2
    model = NoiseModel().after_gates(ch.depolarizing(p, 2), gates=["cx"])
    bell = Circuit(2).h(0).cx(0, 1)
    assert noisy_expectation(bell, "Z0 Z1 + X0 X1", noise=model) == pytest.approx(2 * (1 - p))
    # A Pauli channel with X on qubit 0 only flips the parity with probability px.
    px = 0.15
    model = NoiseModel().after_gates(ch.pauli_channel({"XI": px}), gates=["cx"])
    assert noisy_expectation(bell, "Z0 Z1", noise=model) == pytest.approx(1 - 2 * px)
    assert noisy_expectation(bell, "X0 X1", noise=model) == pytest.approx(1.0)


@pytest.mark.parametrize(
    "make",
    [
        lambda: ch.depolarizing(0.3),
        lambda: ch.depolarizing(0.3, 2),
        lambda: ch.amplitude_damping(0.4),
        lambda: ch.phase_damping(0.4),
        lambda: ch.bit_flip(0.1),
        lambda: ch.phase_flip(0.1),
        lambda: ch.pauli_channel({"X": 0.1, "Y": 0.05, "Z": 0.2}),
        lambda: ch.thermal_relaxation(30.0, 20.0, 5.0),
    ],
)
def test_built_ins_are_complete_and_consistent(make):
    channel = make()
    d = 1 << channel.num_qubits
    total = sum(k.conj().T @ k for k in channel.kraus)
    np.testing.assert_allclose(total, np.eye(d), atol=1e-12)
    rng = np.random.default_rng(1)
    a = rng.normal(size=(d, d)) + 1j * rng.normal(size=(d, d))
    rho = a @ a.conj().T
    rho /= np.trace(rho)
    # Row-major vec: vec(K ρ K†) = (K ⊗ K*) vec(ρ) (standard identity; common practice).
    np.testing.assert_allclose(
        (channel.superoperator() @ rho.reshape(-1)).reshape(d, d), channel.apply(rho), atol=1e-12
    )
    again = ch.channel_from_superoperator(channel.superoperator())
    np.testing.assert_allclose(again.superoperator(), channel.superoperator(), atol=1e-12)
    v, a_count = dilation(channel)
    np.testing.assert_allclose(v.conj().T @ v, np.eye(len(v)), atol=1e-10)
    # Tracing the ancillas of V (ρ ⊗ |0><0|) V† gives the channel back (Stinespring).
    r = 1 << a_count
    big = np.kron(rho, np.diag([1.0] + [0.0] * (r - 1)))
    out = (v @ big @ v.conj().T).reshape(d, r, d, r)
    np.testing.assert_allclose(np.einsum("ajbj->ab", out), channel.apply(rho), atol=1e-10)


def test_not_trace_preserving_is_refused():
    with pytest.raises(InputError, match="not trace-preserving"):
        ch.kraus_channel([np.diag([1.0, 0.5])], "leaky")
    with pytest.raises(InputError, match="not trace-preserving"):
        ch.kraus_channel([np.eye(2), 0.1 * np.eye(2)])
    # Just outside the 1e-10 tolerance is refused, inside it accepted.
    with pytest.raises(InputError, match="allowed 1e-10"):
        ch.kraus_channel([np.sqrt(1 + 1e-9) * np.eye(2)])
    ch.kraus_channel([np.sqrt(1 + 1e-11) * np.eye(2)])


@pytest.mark.parametrize(
    ("call", "match"),
    [
        (lambda: ch.kraus_channel([np.eye(3)]), "2\\*\\*k"),
        (lambda: ch.kraus_channel([]), "at least one"),
        (lambda: ch.kraus_channel([np.eye(2), np.eye(4)]), "shape"),
        (lambda: ch.depolarizing(1.5), "between 0 and 1"),
        (lambda: ch.depolarizing(0.1, 4), "num_qubits"),
        (lambda: ch.amplitude_damping(-0.1), "between 0 and 1"),
        (lambda: ch.pauli_channel({"X": 0.7, "Z": 0.6}), "more than 1"),
        (lambda: ch.pauli_channel({"X": 0.1, "ZZ": 0.1}), "one length"),
        (lambda: ch.pauli_channel({"Q": 0.1}), "I, X, Y, Z"),
        (lambda: ch.thermal_relaxation(10.0, 30.0, 1.0), "exceeds 2 \\* t1"),
        (lambda: ch.thermal_relaxation(0.0, 0.0, 1.0), "positive"),
        (lambda: ch.kraus_channel([[[1, 0], [0, float("nan")]]]), "non-finite"),
    ],
)
def test_bad_channels_are_refused_with_a_clear_message(call, match):
    with pytest.raises(InputError, match=match):
        call()


def test_pauli_error_and_unitary_mixture():
    # The Pauli error of a Pauli channel is its total non-identity rate; of the d-dimensional
    # depolarizing channel (d² - 1) p / d² (common practice).
    assert ch.pauli_channel({"X": 0.1, "Z": 0.05}).pauli_error() == pytest.approx(0.15)
    assert ch.depolarizing(0.08, 2).pauli_error() == pytest.approx(15 / 16 * 0.08)
    assert ch.amplitude_damping(0.3).unitary_mixture() is None
    probs, unitaries = ch.depolarizing(0.4).unitary_mixture()
    np.testing.assert_allclose(probs, [0.7, 0.1, 0.1, 0.1])
    assert all(np.allclose(u.conj().T @ u, np.eye(2)) for u in unitaries)
