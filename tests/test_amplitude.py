"""Amplitudes against a dense state vector and against closed forms."""

import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits.bits import format_bits
from tnsim.errors import InputError
from tnsim.queries.amplitudes import amplitude, amplitudes
from tnsim.testing import dense_state, random_circuit


def _all_bitstrings(n):
    return [format_bits([(k >> (n - 1 - q)) & 1 for q in range(n)]) for k in range(2**n)]


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("n", [1, 3, 7, 12])
def test_random_circuits_match_dense_state_vector(n, seed):
    # Reference: a dense state vector built by numpy.tensordot (tnsim.testing.dense_state),
    # the textbook definition of applying gates to a state.
    c = random_circuit(n, 4 * n, seed=seed)
    psi = dense_state(c)
    rng = np.random.default_rng(seed)
    idx = rng.choice(2**n, size=min(2**n, 6), replace=False)
    bits = [format_bits([(k >> (n - 1 - q)) & 1 for q in range(n)]) for k in idx]
    np.testing.assert_allclose(amplitudes(c, bits), psi[idx], atol=1e-10)
    got64 = amplitudes(c, bits, dtype=np.complex64)
    np.testing.assert_allclose(got64, psi[idx], atol=1e-5)


@pytest.mark.parametrize("seed", range(3))
def test_probabilities_sum_to_one(seed):
    # Born rule normalisation: sum_x |<x|C|0>|^2 = 1 for a unitary C (common practice).
    c = random_circuit(5, 25, seed=seed)
    probs = np.abs(amplitudes(c, _all_bitstrings(5))) ** 2
    assert probs.sum() == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("n", [2, 5, 300])
def test_ghz_closed_form(n):
    # GHZ state (|0..0> + |1..1>)/sqrt(2): Nielsen & Chuang, Quantum Computation and
    # Quantum Information, Cambridge University Press, 2000 (Bell/GHZ states, sec. 1.3.6).
    c = Circuit(n).h(0)
    for q in range(n - 1):
        c.cx(q, q + 1)
    assert amplitude(c, "0" * n) == pytest.approx(2**-0.5, abs=1e-14)
    assert amplitude(c, "1" * n) == pytest.approx(2**-0.5, abs=1e-14)
    assert amplitude(c, "1" + "0" * (n - 1)) == 0


def _qft(n):
    """QFT with the first qubit as most significant (Nielsen & Chuang, fig. 5.1)."""
    c = Circuit(n)
    for j in range(n):
        c.h(j)
        for k in range(j + 1, n):
            c.cp(np.pi / 2 ** (k - j), k, j)
    for j in range(n // 2):
        c.swap(j, n - 1 - j)
    return c


@pytest.mark.parametrize("n", [3, 6])
def test_qft_closed_form(n):
    # Nielsen & Chuang (2000) eq. 5.2: QFT|j> = 2^{-n/2} sum_k exp(2 pi i j k / 2^n) |k>.
    j = 5 % 2**n
    prep = Circuit(n)
    for q in range(n):
        if (j >> (n - 1 - q)) & 1:
            prep.x(q)
    c = prep.copy()
    c.ops += _qft(n).ops
    for k, bits in enumerate(_all_bitstrings(n)):
        expected = np.exp(2j * np.pi * j * k / 2**n) / 2 ** (n / 2)
        assert amplitude(c, bits) == pytest.approx(expected, abs=1e-12)


def test_wide_ghz_is_exact():
    n = 10_000
    c = Circuit(n).h(0)
    for q in range(n - 1):
        c.cx(q, q + 1)
    assert amplitude(c, "1" * n) == pytest.approx(2**-0.5, abs=1e-14)


def test_wide_brickwork_keeps_log_magnitude_in_complex64():
    # |a| ~ 2^-500 underflows complex64 (and complex128); the scaled result must not.
    n, rng = 1000, np.random.default_rng(7)
    c = Circuit(n)
    for layer in range(6):
        for q in range(n):
            c.u3(*rng.uniform(0, 2 * np.pi, 3), q)
        for q in range(layer % 2, n - 1, 2):
            c.cz(q, q + 1)
    bits = "01" * (n // 2)
    a64 = amplitude(c, bits, dtype=np.complex64, scaled=True)
    a128 = amplitude(c, bits, dtype=np.complex128, scaled=True)
    assert np.isfinite(a64.log10_abs()) and a64.log10_abs() < -100
    assert a64.log10_abs() == pytest.approx(a128.log10_abs(), abs=1e-3)
    assert np.angle(np.exp(1j * (a64.phase() - a128.phase()))) == pytest.approx(0, abs=1e-3)


def test_scaled_agrees_with_plain_value_on_small_circuit():
    c = random_circuit(6, 30, seed=3)
    a = amplitude(c, "010110", scaled=True)
    assert complex(a) == pytest.approx(amplitude(c, "010110"), abs=1e-14)
    assert a.log10_abs() == pytest.approx(np.log10(abs(complex(a))), abs=1e-12)


@pytest.mark.parametrize(
    ("bits", "match"),
    [("01", "has 2 bit"), ("01a", "'a' at position 2"), ([0, 2, 1], "0s and 1s")],
)
def test_bad_bitstrings_are_refused(bits, match):
    with pytest.raises(InputError, match=match):
        amplitude(Circuit(3).h(0), bits)


def test_bad_dtype_is_refused():
    with pytest.raises(InputError, match="complex64 or complex128"):
        amplitude(Circuit(1), "0", dtype=np.float64)


def test_custom_unitary_matches_dense():
    from scipy.stats import unitary_group

    u = unitary_group.rvs(8, random_state=4)
    c = Circuit(4).h(1).unitary(u, [2, 0, 3]).cx(1, 2)
    psi = dense_state(c)
    np.testing.assert_allclose(amplitudes(c, _all_bitstrings(4)), psi, atol=1e-12)


def test_non_unitary_matrix_is_refused():
    with pytest.raises(InputError, match="not unitary"):
        Circuit(2).unitary(np.ones((4, 4)), [0, 1])
