"""Noisy light cones: gate nodes, population preparations and the time-order schedule.

Every value is checked against tnsim.testing.dense_density_matrix, which evolves the whole
circuit's 4**n density-matrix entries with each channel's Kraus operators; the cone
machinery under test (tnsim.network.noisy, tnsim.queries.timeorder) never builds it.
"""

import networkx as nx
import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits import channels as ch
from tnsim.circuits.families import qaoa_maxcut
from tnsim.circuits.noise import NoiseModel, NoisyCircuit
from tnsim.network.noisy import UnitFacts, canonical_noisy_cone, index_noisy, noisy_cone
from tnsim.queries import noisy as qn
from tnsim.queries.noisy import NoisyTermCache
from tnsim.queries.timeorder import (
    evolve_pairs,
    pair_flops,
    pair_table,
    pair_value,
    pauli_value,
    probabilities,
)
from tnsim.testing import (
    dense_density_matrix,
    dense_reported_pauli,
    random_circuit,
    random_noise_model,
)

GATES = ["h", "cx", "rz", "ry", "cz", "fsim", "x", "s", "rzz", "swap", "u3", "cy", "iswap"]


def _damp2(gamma: float) -> ch.Channel:
    """Independent amplitude damping on both qubits: not unital, sends no signal."""
    ad = ch.amplitude_damping(gamma).kraus
    return ch.kraus_channel([np.kron(a, b) for a in ad for b in ad], "damp2")


def _edge_values(noisy: NoisyCircuit, edges, letters=("Z", "Z")):
    cache = NoisyTermCache(noisy)
    got = [cache.value(((u, letters[0]), (v, letters[1]))) for u, v in edges]
    rho = dense_density_matrix(noisy)
    want = [
        dense_reported_pauli(noisy, {u: letters[0], v: letters[1]}, readout=False, rho=rho)
        for u, v in edges
    ]
    return cache, np.array(got), np.array(want)


@pytest.mark.parametrize(
    ("graph", "seed"),
    [
        (nx.cycle_graph(8), 1),
        (nx.cycle_graph(8), 2),
        pytest.param(nx.random_regular_graph(3, 10, seed=1), 1, marks=pytest.mark.slow),
    ],
    ids=["ring-1", "ring-2", "3-regular"],
)
def test_two_qubit_depolarizing_qaoa_cones_share_keys(graph, seed):
    # p = 1 QAOA, depolarizing after every h, rx (one qubit) and rzz (two qubits), edges in
    # a shuffled order: how many of a neighbour's other edges come before its edge into the
    # cone varies from edge to edge, but a neighbour's populations stay (1/2, 1/2) (a
    # unital channel keeps them), so the cones share keys through the population
    # preparation (tnsim.network.noisy notes).  Every value against the whole circuit's
    # density matrix.
    rng = np.random.default_rng(seed)
    edges = [tuple(e) for e in rng.permutation(list(graph.edges()))]
    order = nx.Graph()
    order.add_nodes_from(graph.nodes())
    order.add_edges_from(edges)
    c, g = qaoa_maxcut(order, [0.45], [0.3])
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(0.03), gates=["h", "rx"])
        .after_gates(ch.depolarizing(0.08, 2), gates=["rzz"])
    )
    cache, got, want = _edge_values(model.apply(c), list(g.edges()))
    np.testing.assert_allclose(got, want, atol=1e-12)
    assert cache.hits > 0


def test_non_unital_prefix_and_held_channels_are_populations():
    # Qubit 2 reaches the cone of Z0 only through cz(0, 2), last on it; before that its
    # prefix (h, amplitude damping) and a damp2 channel from cz(2, 3) reduced to it (qubit
    # 3 is outside the cone; damp2 sends no signal) leave populations that are not 1/2:
    # one bit-flip preparation stands for all of them.
    c = Circuit(4).h(0).h(2).h(3).cz(2, 3).cz(0, 2).ry(0.7, 0).rx(0.4, 3)
    model = (
        NoiseModel()
        .after_gates(ch.amplitude_damping(0.3), gates=["h"])
        .after_gates(_damp2(0.25), gates=["cz"])
    )
    noisy = model.apply(c)
    index = index_noisy(noisy)
    _, items, qubits = canonical_noisy_cone(index, [(0, "Z")])
    local = noisy_cone(index, items, qubits)
    assert sorted(qubits) == [0, 2]
    on_2 = [item for item in local.items if qubits.index(2) in item.qubits]
    assert [getattr(item, "name", None) for item in on_2][:2] == [None, "cz"]
    assert on_2[0].channel.name == "bit_flip"
    # The preparation's populations: h, damping 0.3, then damp2 reduced to qubit 2.
    rho = ch.amplitude_damping(0.25).apply(ch.amplitude_damping(0.3).apply(np.full((2, 2), 0.5)))
    prep = on_2[0].channel.apply(np.diag([1.0, 0.0]))
    np.testing.assert_allclose(np.diagonal(prep).real, np.diagonal(rho).real, atol=1e-14)
    want = dense_reported_pauli(noisy, {0: "Z"}, readout=False)
    assert qn.NoisyTermCache(noisy).value(((0, "Z"),)) == pytest.approx(want, abs=1e-13)


@pytest.mark.parametrize("cx_noise", [False, True])
def test_held_channel_is_kept_when_a_gate_follows_it(cx_noise):
    # Walking back from qubit 0: cz(0, 1) brings qubit 1 in with a diagonal operator; the
    # damp2 channel of cz(1, 2) is reduced to qubit 1 (qubit 2 outside the cone) and held
    # back; its gate drops out.  Then cx(1, 0), diagonal on qubit 1 but flipping qubit 0,
    # is kept (alone, or as a node with its depolarizing channel): the held channel must be
    # kept after all, before cx in the cone, not folded into qubit 1's populations.
    c = Circuit(3).h(0).h(1).h(2).cx(1, 0).cz(1, 2).cz(0, 1).h(0)
    model = NoiseModel().after_gates(_damp2(0.3), gates=["cz"], qubits=[(1, 2)])
    if cx_noise:
        model = model.after_gates(ch.depolarizing(0.1, 2), gates=["cx"])
    noisy = model.apply(c)
    index = index_noisy(noisy)
    _, items, qubits = canonical_noisy_cone(index, [(0, "X")])
    local = noisy_cone(index, items, qubits)
    names = [getattr(item, "name", None) or item.channel.name for item in local.items]
    assert "damp2" in names and names.index("damp2") > names.index("cx")
    for letter in "XYZ":
        want = dense_reported_pauli(noisy, {0: letter}, readout=False)
        assert NoisyTermCache(noisy).value(((0, letter),)) == pytest.approx(want, abs=1e-13)


def test_gate_nodes_keep_their_channels_as_one_item():
    # rzz followed by a two-qubit depolarizing channel and a one-qubit damping on its first
    # qubit: one node; kept whole it is one cone item with both channels as parts.
    c = Circuit(2).h(0).h(1).rzz(0.3, 0, 1).rx(0.2, 0).rx(0.5, 1)
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(0.05, 2), gates=["rzz"])
        .after_gates(ch.amplitude_damping(0.1), gates=["rzz"], qubits=[0])
    )
    noisy = model.apply(c)
    index = index_noisy(noisy)
    assert index.parts[2] == (3, 4)
    _, items, _ = canonical_noisy_cone(index, [(0, "Y"), (1, "Z")])
    units = [f for _, _, f in items if isinstance(f, UnitFacts)]
    assert len(units) == 1 and [len(pos) for pos, _ in units[0].parts] == [2, 1]
    want = dense_reported_pauli(noisy, {0: "Y", 1: "Z"}, readout=False)
    assert NoisyTermCache(noisy).value(((0, "Y"), (1, "Z"))) == pytest.approx(want, abs=1e-13)


def test_mirrored_nodes_share_a_key_only_when_their_noise_is_symmetric():
    # rzz(0, 1) and rzz(3, 2) (qubits listed the other way) with equal symmetric noise: the
    # cones of Z0 X1 and Z2 X3 are the same circuit up to renaming.  With noise on the
    # gate's first listed qubit only, they are not, and must not share a key.
    def circuit():
        return Circuit(4).h(0).h(1).h(2).h(3).rzz(0.4, 0, 1).rzz(0.4, 3, 2).ry(0.3, 1).ry(0.3, 3)

    sym = NoiseModel().after_gates(ch.depolarizing(0.07, 2), gates=["rzz"])
    lopsided = NoiseModel().after_gates(ch.pauli_channel({"XZ": 0.1}), gates=["rzz"])
    for model, shared in ((sym, True), (lopsided, False)):
        noisy = model.apply(circuit())
        index = index_noisy(noisy)
        k1 = canonical_noisy_cone(index, [(0, "Z"), (1, "X")])[0]
        k2 = canonical_noisy_cone(index, [(2, "Z"), (3, "X")])[0]
        assert (k1 == k2) is shared
        rho = dense_density_matrix(noisy)
        cache = NoisyTermCache(noisy)
        for a, b in ((0, 1), (2, 3)):
            want = dense_reported_pauli(noisy, {a: "Z", b: "X"}, readout=False, rho=rho)
            assert cache.value(((a, "Z"), (b, "X"))) == pytest.approx(want, abs=1e-13)


@pytest.mark.parametrize("seed", range(6))
def test_random_cones_match_the_density_matrix(seed):
    # Random circuits with every kind of channel and rule (tnsim.testing.random_noise_model),
    # many Pauli strings: each cone (nodes, reductions, preparations) against the whole
    # circuit's density matrix.
    n = 7
    rng = np.random.default_rng(100 + seed)
    c = random_circuit(n, 40, seed=seed, gates=GATES)
    noisy = random_noise_model(n, seed=seed).apply(c)
    rho = dense_density_matrix(noisy)
    cache = NoisyTermCache(noisy)
    for _ in range(12):
        k = int(rng.integers(1, 4))
        qs = sorted(rng.choice(n, k, replace=False).tolist())
        term = {q: "XYZ"[rng.integers(3)] for q in qs}
        want = dense_reported_pauli(noisy, term, readout=False, rho=rho)
        assert cache.value(tuple(term.items())) == pytest.approx(want, abs=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_time_order_schedule_equals_the_whole_state(seed):
    # pair_value / pair_table (qubits join and leave the state) against pauli_value /
    # probabilities of the whole 4**m state (evolve_pairs), and the FLOP estimate bounds
    # the whole-state evolution's.
    n = 6
    c = random_circuit(n, 30, seed=seed, gates=GATES)
    local = random_noise_model(n, seed=seed).apply(c)
    state = evolve_pairs(local)
    rng = np.random.default_rng(seed)
    for _ in range(5):
        qs = rng.choice(n, int(rng.integers(1, 4)), replace=False).tolist()
        letters = {q: "XYZ"[rng.integers(3)] for q in qs}
        assert pair_value(local, letters) == pytest.approx(pauli_value(state, letters), abs=1e-13)
    for count in (0, 1, 3):
        np.testing.assert_allclose(
            pair_table(local, count), probabilities(state, count), atol=1e-13
        )
    multi = sum(4 ** len(item.qubits) for item in local.items if len(item.qubits) > 1)
    assert pair_flops(local) <= 8 * 4**n * (multi + 4 * n) + 64 * len(local.items)
