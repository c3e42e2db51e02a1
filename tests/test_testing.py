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
