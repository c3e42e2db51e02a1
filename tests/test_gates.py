"""Tests of tnsim.circuits.gates: every matrix checked against an independent definition."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg

from tnsim.circuits.gates import GATES, controlled, gate_matrix, is_unitary
from tnsim.errors import InputError

RNG_SEED = 20240611
I2 = np.eye(2)
X = np.array([[0, 1], [1, 0]], dtype=complex)
Y = np.array([[0, -1j], [1j, 0]], dtype=complex)
Z = np.diag([1.0 + 0j, -1.0])
H = np.array([[1, 1], [1, -1]], dtype=complex) / np.sqrt(2)


def random_params(name: str, rng: np.random.Generator) -> tuple[float, ...]:
    return tuple(rng.uniform(-2 * np.pi, 2 * np.pi, GATES[name].num_params))


@pytest.mark.parametrize("name", sorted(GATES))
def test_every_gate_is_unitary_with_the_declared_shape(name):
    rng = np.random.default_rng(RNG_SEED)
    spec = GATES[name]
    for _ in range(5):
        m = gate_matrix(name, random_params(name, rng))
        assert m.shape == (2**spec.num_qubits,) * 2
        assert m.dtype == complex
        assert is_unitary(m, atol=1e-12)


@pytest.mark.parametrize("name", sorted(GATES))
def test_diagonal_flag_iff_matrix_diagonal_for_random_params(name):
    rng = np.random.default_rng(RNG_SEED + 1)
    off_diagonal = []
    for _ in range(5):
        m = gate_matrix(name, random_params(name, rng))
        off_diagonal.append(np.abs(m - np.diag(np.diag(m))).max())
    assert GATES[name].diagonal == (max(off_diagonal) < 1e-14)


# Source for the rotations: the definition R_P(θ) = exp(-i θ P / 2), common practice for
# Pauli rotations, evaluated with scipy.linalg.expm (SciPy, Virtanen et al., "SciPy 1.0",
# Nature Methods 17, 261, 2020) rather than the closed form used in tnsim.circuits.gates.
ROTATIONS = {
    "rx": X,
    "ry": Y,
    "rz": Z,
    "rxx": np.kron(X, X),
    "ryy": np.kron(Y, Y),
    "rzz": np.kron(Z, Z),
}


@pytest.mark.parametrize("name", sorted(ROTATIONS))
@pytest.mark.parametrize("theta", [0.0, 0.3, -1.7, np.pi, 5.9])
def test_rotations_equal_matrix_exponential(name, theta):
    expected = scipy.linalg.expm(-1j * theta / 2 * ROTATIONS[name])
    np.testing.assert_allclose(gate_matrix(name, [theta]), expected, atol=1e-12)


def paper_u(theta: float, phi: float, lam: float) -> np.ndarray:
    """U(θ, φ, λ) after Cross, Bishop, Smolin, Gambetta, "Open Quantum Assembly Language",
    arXiv:1707.03429 (2017): the paper defines U(θ, φ, λ) = Rz(φ) Ry(θ) Rz(λ) and, for the
    gate tables, the phase-fixed matrix
    [[cos(θ/2), -e^{iλ} sin(θ/2)], [e^{iφ} sin(θ/2), e^{i(φ+λ)} cos(θ/2)]] (from memory).
    """
    c, s = np.cos(theta / 2), np.sin(theta / 2)
    return np.array(
        [
            [c, -np.exp(1j * lam) * s],
            [np.exp(1j * phi) * s, np.exp(1j * (phi + lam)) * c],
        ]
    )


def test_u_family_against_the_openqasm_paper():
    rng = np.random.default_rng(RNG_SEED + 2)
    for _ in range(10):
        theta, phi, lam = rng.uniform(-np.pi, np.pi, 3)
        np.testing.assert_allclose(gate_matrix("u3", [theta, phi, lam]), paper_u(theta, phi, lam))
        np.testing.assert_allclose(gate_matrix("u", [theta, phi, lam]), paper_u(theta, phi, lam))
        # The same paper: u2(φ, λ) = U(π/2, φ, λ) and u1(λ) = U(0, 0, λ).
        np.testing.assert_allclose(gate_matrix("u2", [phi, lam]), paper_u(np.pi / 2, phi, lam))
        np.testing.assert_allclose(gate_matrix("u1", [lam]), paper_u(0, 0, lam), atol=1e-15)
        np.testing.assert_allclose(gate_matrix("p", [lam]), paper_u(0, 0, lam), atol=1e-15)


def test_paper_u_is_rz_ry_rz_up_to_global_phase():
    """Cross check of the written-out U against its Euler-angle definition in the paper."""
    theta, phi, lam = 0.7, -1.1, 2.3

    def r(pauli, angle):
        return scipy.linalg.expm(-1j * angle / 2 * pauli)

    product = r(Z, phi) @ r(Y, theta) @ r(Z, lam)
    ratio = paper_u(theta, phi, lam) / product
    np.testing.assert_allclose(ratio, ratio[0, 0] * np.ones((2, 2)), atol=1e-12)


SINGLE = {
    "id": I2,
    "x": X,
    "y": Y,
    "z": Z,
    "h": H,
    "s": np.diag([1, 1j]),
    "sdg": np.diag([1, -1j]),
    "t": np.diag([1, np.exp(1j * np.pi / 4)]),
    "tdg": np.diag([1, np.exp(-1j * np.pi / 4)]),
}


@pytest.mark.parametrize("name", sorted(SINGLE))
def test_fixed_single_qubit_gates(name):
    np.testing.assert_allclose(gate_matrix(name), SINGLE[name], atol=1e-15)


def test_sx_is_a_square_root_of_x():
    sx = gate_matrix("sx")
    np.testing.assert_allclose(sx @ sx, X, atol=1e-15)
    np.testing.assert_allclose(gate_matrix("sxdg"), sx.conj().T)


def block_diag_control(u: np.ndarray) -> np.ndarray:
    return scipy.linalg.block_diag(np.eye(u.shape[0]), u)


CONTROLLED = {
    "cx": (0, lambda: X),
    "cy": (0, lambda: Y),
    "cz": (0, lambda: Z),
    "ch": (0, lambda: H),
    "cp": (1, lambda lam: paper_u(0, 0, lam)),
    "cu1": (1, lambda lam: paper_u(0, 0, lam)),
    "crx": (1, lambda t: scipy.linalg.expm(-0.5j * t * X)),
    "cry": (1, lambda t: scipy.linalg.expm(-0.5j * t * Y)),
    "crz": (1, lambda t: scipy.linalg.expm(-0.5j * t * Z)),
    "cu3": (3, paper_u),
}


@pytest.mark.parametrize("name", sorted(CONTROLLED))
def test_controlled_gates_are_block_diagonal(name):
    rng = np.random.default_rng(RNG_SEED + 3)
    n_params, target = CONTROLLED[name]
    params = tuple(rng.uniform(-np.pi, np.pi, n_params))
    expected = block_diag_control(target(*params))
    np.testing.assert_allclose(gate_matrix(name, params), expected, atol=1e-12)


def test_controlled_helper_with_two_controls():
    np.testing.assert_array_equal(controlled(X, 2), scipy.linalg.block_diag(np.eye(6), X))


def fsim_foxen(theta: float, phi: float) -> np.ndarray:
    """fSim(θ, φ) from Foxen et al., "Demonstrating a continuous set of two-qubit gates for
    near-term quantum algorithms", Phys. Rev. Lett. 125, 120504 (2020), eq. (1) (from memory)."""
    return np.array(
        [
            [1, 0, 0, 0],
            [0, np.cos(theta), -1j * np.sin(theta), 0],
            [0, -1j * np.sin(theta), np.cos(theta), 0],
            [0, 0, 0, np.exp(-1j * phi)],
        ]
    )


@pytest.mark.parametrize(("theta", "phi"), [(0.0, 0.0), (np.pi / 2, np.pi / 6), (-0.4, 2.2)])
def test_fsim_matches_foxen_et_al(theta, phi):
    np.testing.assert_allclose(gate_matrix("fsim", [theta, phi]), fsim_foxen(theta, phi))


def permutation_matrix(n_qubits: int, mapping) -> np.ndarray:
    """Matrix sending basis state |b> to |mapping(b)>, bits as a tuple, qubit 0 first."""
    dim = 2**n_qubits
    m = np.zeros((dim, dim), dtype=complex)
    for col in range(dim):
        bits = tuple(int(c) for c in format(col, f"0{n_qubits}b"))
        out = mapping(bits)
        m[int("".join(map(str, out)), 2), col] = 1
    return m


def test_swap_exchanges_the_two_qubits():
    expected = permutation_matrix(2, lambda b: (b[1], b[0]))
    np.testing.assert_array_equal(gate_matrix("swap"), expected)


def test_iswap_exchanges_with_phase_i_on_single_excitations():
    # |01> -> i|10>, |10> -> i|01>, |00> and |11> unchanged.
    phases = np.diag([1, 1j, 1j, 1])
    expected = permutation_matrix(2, lambda b: (b[1], b[0])) @ phases
    np.testing.assert_allclose(gate_matrix("iswap"), expected)


def test_ccx_flips_the_target_when_both_controls_are_one():
    expected = permutation_matrix(3, lambda b: (b[0], b[1], b[2] ^ (b[0] & b[1])))
    np.testing.assert_array_equal(gate_matrix("ccx"), expected)


def test_cswap_swaps_the_targets_when_the_control_is_one():
    expected = permutation_matrix(3, lambda b: (b[0], b[2], b[1]) if b[0] else b)
    np.testing.assert_array_equal(gate_matrix("cswap"), expected)


def test_wrong_parameter_count_and_unknown_name_raise_input_error():
    with pytest.raises(InputError, match="takes 1 parameter"):
        gate_matrix("rx", [])
    with pytest.raises(InputError, match="unknown gate"):
        gate_matrix("nope")
