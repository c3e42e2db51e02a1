"""Backward light cones: what is kept, what cancels, and canonical keys."""

import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits.families import brickwork, qaoa_maxcut
from tnsim.network.builders import doubled_network
from tnsim.network.lightcone import canonical_cone, cone_circuit, index_circuit, light_cone
from tnsim.network.simplify import absorb_small
from tnsim.queries.expectation import expectation
from tnsim.queries.marginals import marginal
from tnsim.testing import dense_state, random_circuit


def _cone_qubits(index, gates):
    return {q for g, _ in gates for q in index.qubits[g]}


def test_chain_cone_is_causal_past():
    # A CNOT ladder: the cone of the last qubit is every gate (common practice).
    c = Circuit(4).h(0).cx(0, 1).cx(1, 2).cx(2, 3)
    idx = index_circuit(c)
    assert [g for g, _ in light_cone(idx, {3: True})] == [3, 2, 1, 0]
    # Qubit 0 is only a control of later gates (diagonal there): its Z cone is h alone.
    assert [g for g, _ in light_cone(idx, {0: True})] == [0]
    # With X on qubit 0 the first cx no longer commutes with the operator.
    assert [g for g, _ in light_cone(idx, {0: False})] == [1, 0]


def test_x_observable_keeps_controls():
    c = Circuit(2).h(0).cx(0, 1)
    idx = index_circuit(c)
    assert [g for g, _ in light_cone(idx, {0: False})] == [1, 0]
    assert [g for g, _ in light_cone(idx, {0: True})] == [0]


@pytest.mark.parametrize("seed", range(4))
def test_gates_outside_the_cone_do_not_change_marginals(seed):
    # Appending gates on other qubits after the circuit cannot change a marginal
    # (no-signalling; common practice), and the cone must not contain them.
    c = random_circuit(8, 30, seed=seed, gates=["h", "cx", "rz", "ry", "cz", "fsim"])
    extra = c.copy()
    rng = np.random.default_rng(seed)
    for _ in range(20):
        a, b = rng.choice([3, 4, 5, 6, 7], 2, replace=False)
        extra.append("fsim", [int(a), int(b)], [0.3, 0.8]).h(int(a))
    np.testing.assert_allclose(marginal(extra, [0, 2, 1]), marginal(c, [0, 2, 1]), atol=1e-12)
    idx = index_circuit(extra)
    kept = {g for g, _ in light_cone(idx, {0: True, 1: True, 2: True})}
    assert all(g < len(c) for g in kept)


def test_marginal_of_distant_qubit_has_a_small_network():
    # A 400-qubit brickwork of depth 4: the light cone of one qubit spans at most
    # 2*depth + 2 qubits, so its doubled network is tiny whatever the width.
    c = brickwork(400, 4, seed=1)
    idx = index_circuit(c)
    _, gates, qubits = canonical_cone(idx, [(200, "P")])
    assert len(qubits) <= 10
    local = cone_circuit(idx, gates, len(qubits))
    net = doubled_network(local, open_qubits=[0])
    assert len(net) < 80
    assert len(absorb_small(net)) < 20
    p = marginal(c, [200])
    assert p.sum() == pytest.approx(1.0, abs=1e-12)


def test_commuting_diagonal_gates_cancel_in_qaoa():
    # p = 1 QAOA: the cone of Z_u Z_v holds u, v and their neighbours only
    # (Farhi, Goldstone, Gutmann, arXiv:1411.4028, 2014, section on locality).
    c, g = qaoa_maxcut(num_nodes=40, degree=3, seed=2)
    idx = index_circuit(c)
    for u, v in list(g.edges())[:10]:
        gates = light_cone(idx, {u: True, v: True})
        expect = {u, v} | set(g[u]) | set(g[v])
        assert _cone_qubits(idx, gates) == expect
        # rx on u, v; rzz on the 5 edges at u or v; h on every cone qubit.
        edges = {frozenset(e) for e in g.edges(u)} | {frozenset(e) for e in g.edges(v)}
        assert len(gates) == 2 + len(edges) + len(expect)


@pytest.mark.parametrize("seed", range(5))
def test_cone_circuit_reproduces_expectations(seed):
    # Reference: the dense state vector (tnsim.testing.dense_state) with numpy Pauli products.
    c = random_circuit(7, 40, seed=seed, gates=["h", "cx", "rz", "rx", "cz", "rzz", "swap"])
    psi = dense_state(c).reshape((2,) * 7)
    pauli = {
        "X": np.array([[0, 1], [1, 0]]),
        "Y": np.array([[0, -1j], [1j, 0]]),
        "Z": np.diag([1, -1]),
    }
    rng = np.random.default_rng(seed)
    qs = rng.choice(7, 2, replace=False)
    letters = rng.choice(list("XYZ"), 2)
    phi = psi
    for q, p in zip(qs, letters):
        phi = np.moveaxis(np.tensordot(pauli[p], phi, axes=(1, int(q))), 0, int(q))
    ref = np.vdot(psi, phi).real
    got = expectation(c, {int(q): str(p) for q, p in zip(qs, letters)})
    assert got == pytest.approx(ref, abs=1e-10)


def test_canonical_keys_identify_relabelled_cones():
    # Keys compare cones of one circuit: the same local pattern placed on other qubits
    # gets the same key; other angles or another Pauli letter give another key.
    c = Circuit(9).h(1).cx(1, 4).rx(0.2, 4).h(5).cx(5, 0).rx(0.2, 0)
    c.h(7).cx(7, 8).rx(0.3, 8)
    idx = index_circuit(c)
    k4, k0, k8 = (canonical_cone(idx, [(q, "Z")])[0] for q in (4, 0, 8))
    assert k4 == k0
    assert k8 != k0
    assert canonical_cone(idx, [(0, "X")])[0] != k0


def test_canonical_form_is_insensitive_to_commuting_gate_order():
    # rzz gates commute; listing them in another order gives the same key.
    edges = [(0, 1), (1, 2), (0, 3)]
    a, b = Circuit(4), Circuit(4)
    for q in range(4):
        a.h(q)
        b.h(3 - q)
    for u, v in edges:
        a.rzz(0.5, u, v)
    for u, v in reversed(edges):
        b.rzz(0.5, v, u)
    for c in (a, b):
        for q in range(4):
            c.rx(0.7, q)
    ka = canonical_cone(index_circuit(a), [(0, "Z"), (1, "Z")])[0]
    kb = canonical_cone(index_circuit(b), [(0, "Z"), (1, "Z")])[0]
    assert ka == kb
