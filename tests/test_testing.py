"""The dense reference simulator against an independent construction."""

from functools import reduce

import numpy as np
import pytest

from tnsim.testing import dense_state, random_circuit


def _full_unitary(op, n):
    """Embed a gate into 2^n x 2^n by permuting basis states (independent of tensordot)."""
    u = op.matrix()
    k = len(op.qubits)
    rest = [q for q in range(n) if q not in op.qubits]
    # Kronecker product U (on the gate's qubits, in order) x I (on the rest), then
    # permute axes so qubit q sits at position q (qubit 0 most significant).
    big = np.kron(u, np.eye(2 ** (n - k)))
    order = list(op.qubits) + rest
    t = big.reshape((2,) * (2 * n))
    inv = np.argsort(order)
    t = t.transpose(list(inv) + [n + i for i in inv])
    return t.reshape(2**n, 2**n)


@pytest.mark.parametrize("seed", range(4))
def test_dense_state_matches_matrix_product(seed):
    # Reference: the product of full 2^n x 2^n matrices built with numpy.kron
    # (the textbook definition of a circuit's unitary; common practice).
    n = 5
    c = random_circuit(n, 20, seed=seed)
    total = reduce(lambda acc, op: _full_unitary(op, n) @ acc, c.ops, np.eye(2**n))
    np.testing.assert_allclose(dense_state(c), total[:, 0], atol=1e-12)


def test_random_circuit_is_reproducible():
    a, b = random_circuit(6, 30, seed=11), random_circuit(6, 30, seed=11)
    assert a.ops == b.ops
    assert a.ops != random_circuit(6, 30, seed=12).ops


@pytest.mark.parametrize("seed", range(3))
def test_dense_density_matrix_matches_full_matrices(seed):
    # Reference: ρ -> Σ K ρ K† with every gate and Kraus operator embedded as a full
    # 2^n x 2^n matrix (numpy.kron and an axis permutation, as above); without noise the
    # density matrix is |ψ><ψ| of the dense state vector.
    from tnsim.circuits.noise import ChannelOp, NoisyCircuit
    from tnsim.testing import dense_density_matrix, random_noise_model

    n = 4
    c = random_circuit(n, 16, seed=seed, gates=["h", "cx", "rz", "ry", "cz", "x", "swap"])
    psi = dense_state(c)
    np.testing.assert_allclose(
        dense_density_matrix(NoisyCircuit.ideal(c)), np.outer(psi, psi.conj()), atol=1e-12
    )
    noisy = random_noise_model(n, seed=seed).apply(c)
    rho = np.zeros((2**n, 2**n), dtype=complex)
    rho[0, 0] = 1
    for item in noisy.items:
        if isinstance(item, ChannelOp):
            ks = [_full_unitary(_Matrix(k, item.qubits), n) for k in item.channel.kraus]
            rho = sum(k @ rho @ k.conj().T for k in ks)
        else:
            u = _full_unitary(item, n)
            rho = u @ rho @ u.conj().T
    np.testing.assert_allclose(dense_density_matrix(noisy), rho, atol=1e-12)
    assert np.trace(rho).real == pytest.approx(1.0)


class _Matrix:
    """Stand-in for an operation with a given matrix (for _full_unitary)."""

    def __init__(self, matrix, qubits):
        self._m, self.qubits = matrix, qubits

    def matrix(self):
        return self._m
