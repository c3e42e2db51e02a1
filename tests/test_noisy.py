"""Exact noisy queries against the dense density-matrix reference and closed forms.

Reference: tnsim.testing.dense_density_matrix evolves all 4**n entries of ρ with each
channel's Kraus operators (not its superoperator), then reads marginals, bitstring
probabilities and Pauli parities with the qubits' confusion matrices applied as a
Kronecker product (dense_read_probabilities, dense_reported_pauli).
"""

import math

import networkx as nx
import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits import channels as ch
from tnsim.circuits.families import qaoa_maxcut
from tnsim.circuits.noise import ChannelOp, NoiseModel, NoisyCircuit
from tnsim.network.lightcone import canonical_cone, index_circuit
from tnsim.network.noisy import canonical_noisy_cone, index_noisy, noisy_cone
from tnsim.queries import noisy as qn
from tnsim.queries.noisy import (
    NoisyTermCache,
    noisy_distribution,
    noisy_expectation,
    noisy_marginal,
    noisy_probabilities,
)
from tnsim.testing import (
    dense_density_matrix,
    dense_read_probabilities,
    dense_reported_pauli,
    random_circuit,
    random_noise_model,
)

GATES = ["h", "cx", "rz", "ry", "cz", "fsim", "x", "s", "rzz", "swap", "u3", "cy", "iswap"]


@pytest.fixture(params=["time order", "network"])
def route(request, monkeypatch):
    """Every check through both contraction routes of tnsim.queries.noisy."""
    if request.param == "network":
        monkeypatch.setattr(qn, "DENSE_QUBITS", 0)
    return request.param


def _noisy(n: int, gates: int, seed: int) -> NoisyCircuit:
    c = random_circuit(n, gates, seed=seed, gates=GATES)
    return random_noise_model(n, seed=seed).apply(c)


def _marginal_of(full: np.ndarray, n: int, qubits: list[int]) -> np.ndarray:
    p = full.reshape((2,) * n)
    rest = tuple(q for q in range(n) if q not in qubits)
    kept = sorted(qubits)
    m = p.sum(axis=rest) if rest else p
    return np.transpose(m, [kept.index(q) for q in qubits]).reshape(-1)


@pytest.mark.parametrize("seed", range(4))
def test_marginals_match_the_density_matrix(route, seed):
    n = 7
    noisy = _noisy(n, 36, seed)
    rho = dense_density_matrix(noisy)
    full = dense_read_probabilities(noisy, rho=rho)
    bare = dense_read_probabilities(noisy, readout=False, rho=rho)
    rng = np.random.default_rng(seed)
    for k in (1, 2, 3):
        qs = rng.choice(n, k, replace=False).tolist()
        np.testing.assert_allclose(noisy_marginal(noisy, qs), _marginal_of(full, n, qs), atol=1e-12)
        np.testing.assert_allclose(
            noisy_marginal(noisy, qs, readout=False), _marginal_of(bare, n, qs), atol=1e-12
        )
    np.testing.assert_allclose(noisy_distribution(noisy), full, atol=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_pauli_sums_match_the_density_matrix(route, seed):
    n = 6
    noisy = _noisy(n, 30, seed)
    rng = np.random.default_rng(10 + seed)
    terms = []
    for _ in range(5):
        k = int(rng.integers(1, 4))
        qs = sorted(rng.choice(n, k, replace=False).tolist())
        terms.append((float(rng.normal()), {q: "XYZ"[rng.integers(3)] for q in qs}))
    text = " + ".join(f"{c} " + " ".join(f"{p}{q}" for q, p in t.items()) for c, t in terms)
    rho = dense_density_matrix(noisy)
    for readout in (True, False):
        ref = sum(c * dense_reported_pauli(noisy, t, readout, rho) for c, t in terms)
        got = noisy_expectation(noisy, text.replace("+ -", "- "), readout=readout)
        assert got == pytest.approx(ref, abs=1e-11)


@pytest.mark.parametrize("seed", range(3))
def test_bitstring_probabilities_match_the_density_matrix(route, seed, monkeypatch):
    n = 7
    noisy = _noisy(n, 30, seed)
    rho = dense_density_matrix(noisy)
    full = dense_read_probabilities(noisy, rho=rho)
    rows = np.random.default_rng(seed).integers(0, 2, (25, n)).astype(np.uint8)
    flat = rows.astype(int) @ (1 << np.arange(n - 1, -1, -1))
    np.testing.assert_allclose(noisy_probabilities(noisy, rows), full[flat], atol=1e-13)
    # Differing on more qubits than one open contraction takes: a batch axis instead.
    monkeypatch.setattr(qn, "OPEN_LIMIT", 2)
    np.testing.assert_allclose(noisy_probabilities(noisy, rows), full[flat], atol=1e-13)
    bare = dense_read_probabilities(noisy, readout=False, rho=rho)
    got = noisy_probabilities(noisy, ["0" * n, "1" * n], readout=False)
    np.testing.assert_allclose(got, [bare[0], bare[-1]], atol=1e-13)


def test_channels_outside_the_light_cone_drop_out():
    # Heavy noise on qubits 2..5 after the last gate touching qubit 0's past cannot change
    # qubit 0's marginal (trace preservation: E†(I) = I); the cone does not hold it.
    c = Circuit(6).h(0).cx(0, 1).h(2).cx(2, 3).cx(4, 5)
    model = NoiseModel().after_gates(ch.amplitude_damping(0.4), qubits=[2, 3, 4, 5])
    noisy = model.apply(c)
    _, items, qubits = canonical_noisy_cone(index_noisy(noisy), [(0, "P")])
    assert qubits == [0]
    assert not any(f is not None and f.channel.name == "amplitude_damping" for _, _, f in items)
    np.testing.assert_allclose(noisy_marginal(noisy, [0]), [0.5, 0.5], atol=1e-14)


def test_pauli_noise_keeps_the_ideal_cones_and_shares_contractions():
    # Pauli channels send no signal from qubits outside the cone and keep diagonal operators
    # diagonal, so each QAOA edge's cone has the ideal cone's qubits; cones with equal noise
    # are contracted once.
    c, g = qaoa_maxcut(num_nodes=40, seed=2)
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(0.01), gates=["h", "rx"])
        .after_gates(ch.depolarizing(0.02, 2), gates=["rzz"])
    )
    noisy = model.apply(c)
    index, ideal = index_noisy(noisy), index_circuit(c)
    for u, v in g.edges():
        targets = [(u, "Z"), (v, "Z")]
        assert sorted(canonical_noisy_cone(index, targets)[2]) == sorted(
            canonical_cone(ideal, targets)[2]
        )
    model = NoiseModel().after_gates(ch.depolarizing(0.01), gates=["h", "rx"])
    cache = NoisyTermCache(model.apply(c))
    for u, v in g.edges():
        cache.value(((u, "Z"), (v, "Z")))
    assert cache.misses <= 4 and cache.hits >= g.number_of_edges() - 4


def test_signalling_channel_widens_the_cone():
    # A two-qubit channel that copies qubit 1's bit into qubit 0 (a CNOT 1 -> 0 then full
    # dephasing) signals from 1 to 0: qubit 1 must join qubit 0's cone.
    cnot_10 = np.eye(4)[[0, 3, 2, 1]]
    proj = [np.diag(v) for v in np.eye(4)]
    kraus = [p @ cnot_10 for p in proj]
    copy = ch.kraus_channel(kraus, "copy")
    noisy = NoisyCircuit(2, [*Circuit(2).h(1).ops, ChannelOp(copy, (0, 1))])
    _, _, qubits = canonical_noisy_cone(index_noisy(noisy), [(0, "P")])
    assert sorted(qubits) == [0, 1]
    np.testing.assert_allclose(noisy_marginal(noisy, [0]), [0.5, 0.5], atol=1e-14)
    np.testing.assert_allclose(
        noisy_marginal(noisy, [0]),
        _marginal_of(dense_read_probabilities(noisy), 2, [0]),
        atol=1e-14,
    )


def test_cone_circuit_equals_the_whole_circuit(route):
    # The reduced cone (with reduced channels) is itself a noisy circuit: its dense density
    # matrix gives the same value as the whole circuit's.
    noisy = _noisy(7, 40, seed=11)
    index = index_noisy(noisy)
    whole = dense_density_matrix(noisy)
    for targets in ([(0, "Z"), (3, "X")], [(5, "Y")], [(1, "Z"), (2, "Z"), (6, "X")]):
        _, items, qubits = canonical_noisy_cone(index, targets)
        local = noisy_cone(index, items, qubits)
        rho = dense_density_matrix(local)
        letters = {k: letter for k, (_, letter) in enumerate(targets)}
        ref = dense_reported_pauli(noisy, dict(targets), readout=False, rho=whole)
        assert _dense_pauli(rho, letters) == pytest.approx(ref, abs=1e-12)


def _dense_pauli(rho: np.ndarray, letters: dict[int, str]) -> float:
    m = rho.shape[0].bit_length() - 1
    pauli = {"X": [[0, 1], [1, 0]], "Y": [[0, -1j], [1j, 0]], "Z": [[1, 0], [0, -1]]}
    op = np.ones((1, 1))
    for q in range(m):
        op = np.kron(op, pauli[letters[q]] if q in letters else np.eye(2))
    return float(np.trace(op @ rho).real)


def _qaoa_noisy_edge(gamma, beta, d_u, d_v, lam, p_h, p_x):
    """<Z_u Z_v> of p = 1 QAOA with one-qubit depolarizing noise after every h and every rx.

    Derivation.  Noiseless (Wang, Hadfield, Jiang, Rieffel, Phys. Rev. A 97, 022304, 2018,
    Theorem 1, with γ' = -2γ in tnsim's convention; see tests/test_qaoa.py):
    <Z_u Z_v> = 1 - 2<C_uv> = A + B with
        A = -1/2 sin(4β) sin γ' (cos^{d_u} γ' + cos^{d_v} γ'),
        B = +1/2 sin²(2β) cos^{d_u + d_v - 2λ} γ' (1 - cos^λ 2γ').
    Depolarizing ρ -> (1 - p) ρ + p I/2 shrinks the Bloch vector by 1 - p (Nielsen and
    Chuang §8.3.4).  (i) After each rx: in the Heisenberg picture Z -> (1 - p_x) Z on u and v
    (channels on other qubits act on I and drop out): a factor (1 - p_x)².  (ii) After each
    h: every qubit starts in (I + r X)/2 with r = 1 - p_h instead of |+><+|.  Write the
    Heisenberg operator O = U† Z_u Z_v U (U: the rzz layer then the rx layer) in the Pauli
    basis; on the product state, a Pauli string has expectation r^(number of X factors) if
    it holds only I and X, else 0.  Through rx, Z_u Z_v = (c Z_u + s Y_u)(c Z_v + s Y_v)
    (c = cos 2β, s = ±sin 2β).  The rzz layer commutes with Z_u, Z_v and maps Y_u to sums of
    X_u or Y_u times Z's of u's neighbours.  So: Z_u Z_v gives no I/X-only string; the cross
    terms c s (Y_u Z_v + Z_u Y_v) give strings X_u or X_v alone (Z_v cancelled by rzz(u, v)):
    weight r, and they are the sin 4β = 2 sin 2β cos 2β part, A; the term s² Y_u Y_v gives
    X_u X_v strings: weight r², the sin² 2β part, B.  Hence
        <Z_u Z_v> = (1 - p_x)² (r A + r² B),  r = 1 - p_h.
    """
    g = -2 * gamma
    a = -0.5 * math.sin(4 * beta) * math.sin(g) * (math.cos(g) ** d_u + math.cos(g) ** d_v)
    b = (
        0.5
        * math.sin(2 * beta) ** 2
        * math.cos(g) ** (d_u + d_v - 2 * lam)
        * (1 - math.cos(2 * g) ** lam)
    )
    r = 1 - p_h
    return (1 - p_x) ** 2 * (r * a + r**2 * b)


# Triangles (0-1-2, and 2-3-6 sharing a node), leaves (4, 5, 7) and a degree-4 node.
_MIXED = nx.Graph([(0, 1), (1, 2), (2, 0), (2, 3), (3, 4), (1, 5), (2, 6), (3, 6), (6, 7)])


@pytest.mark.parametrize(("gamma", "beta"), [(0.37, 0.61), (-0.9, 0.2)])
def test_qaoa_edge_under_depolarizing_noise_closed_form(route, gamma, beta):
    p_h, p_x = 0.07, 0.12
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(p_h), gates=["h"])
        .after_gates(ch.depolarizing(p_x), gates=["rx"])
    )
    c, g = qaoa_maxcut(_MIXED, [gamma], [beta])
    cache = NoisyTermCache(model.apply(c))
    for u, v in g.edges():
        lam = len(set(g[u]) & set(g[v]))
        want = _qaoa_noisy_edge(gamma, beta, g.degree(u) - 1, g.degree(v) - 1, lam, p_h, p_x)
        assert cache.value(((u, "Z"), (v, "Z"))) == pytest.approx(want, abs=1e-12)
    # The closed form itself against the dense density matrix of the 8-qubit circuit.
    noisy = model.apply(c)
    rho = dense_density_matrix(noisy)
    for u, v in list(g.edges())[:3]:
        lam = len(set(g[u]) & set(g[v]))
        want = _qaoa_noisy_edge(gamma, beta, g.degree(u) - 1, g.degree(v) - 1, lam, p_h, p_x)
        ref = dense_reported_pauli(noisy, {u: "Z", v: "Z"}, readout=False, rho=rho)
        assert ref == pytest.approx(want, abs=1e-12)


def test_wide_qaoa_energy_matches_the_closed_form():
    # 2,000 nodes: every edge's cone through the noisy light cone, against the closed form
    # with readout errors: a qubit read with confusion C reports a + b Z (a, b from C), and
    # <Z_u> = 0 by the circuit's global bit-flip symmetry, so <Z_u Z_v> reads a² + b² <Z_u Z_v>.
    gamma, beta, p_h, p_x = -0.3, 0.35, 0.004, 0.002
    conf = np.array([[0.97, 0.05], [0.03, 0.95]])
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(p_h), gates=["h"])
        .after_gates(ch.depolarizing(p_x), gates=["rx"])
        .readout(conf)
    )
    graph = nx.random_regular_graph(3, 2000, seed=5)
    c, g = qaoa_maxcut(graph, [gamma], [beta])
    obs = " + ".join(f"0.5 - 0.5 Z{u} Z{v}" for u, v in g.edges())
    got = noisy_expectation(c, obs, noise=model)
    c0, c1 = conf[0, 0] - conf[1, 0], conf[0, 1] - conf[1, 1]
    a, b = (c0 + c1) / 2, (c0 - c1) / 2
    want = 0.0
    for u, v in g.edges():
        lam = len(set(g[u]) & set(g[v]))
        zz = _qaoa_noisy_edge(gamma, beta, 2, 2, lam, p_h, p_x)
        want += 0.5 - 0.5 * (a * a + b * b * zz)
    assert got == pytest.approx(want, abs=1e-9)


def test_small_qaoa_with_two_qubit_noise_matches_the_density_matrix(route):
    c, g = qaoa_maxcut(num_nodes=8, seed=4, gammas=[0.5], betas=[0.3])
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(0.03), gates=["h", "rx"])
        .after_gates(ch.depolarizing(0.05, 2), gates=["rzz"])
        .after_layers(ch.thermal_relaxation(40.0, 30.0, 2.0))
        .readout([[0.96, 0.06], [0.04, 0.94]])
    )
    noisy = model.apply(c)
    obs = " + ".join(f"0.5 - 0.5 Z{u} Z{v}" for u, v in g.edges())
    rho = dense_density_matrix(noisy)
    want = sum(
        0.5 - 0.5 * dense_reported_pauli(noisy, {u: "Z", v: "Z"}, rho=rho) for u, v in g.edges()
    )
    assert noisy_expectation(noisy, obs) == pytest.approx(want, abs=1e-11)


def test_no_noise_equals_the_ideal_queries():
    from tnsim.queries.expectation import expectation
    from tnsim.queries.marginals import marginal

    c = random_circuit(6, 30, seed=3, gates=GATES)
    np.testing.assert_allclose(noisy_marginal(c, [4, 1]), marginal(c, [4, 1]), atol=1e-12)
    assert noisy_expectation(c, "Z0 X3 - Y2") == pytest.approx(expectation(c, "Z0 X3 - Y2"))


def test_input_errors():
    c = Circuit(2).h(0)
    with pytest.raises(qn.InputError, match="not both"):
        noisy_marginal(NoisyCircuit.ideal(c), [0], noise=NoiseModel())
    with pytest.raises(qn.InputError, match="NoiseModel"):
        noisy_marginal(c, [0], noise="model.json")
    with pytest.raises(qn.InputError, match="qubit 5"):
        noisy_marginal(c, [5])
    with pytest.raises(qn.InputError, match="limit 20 qubits"):
        noisy_distribution(Circuit(21))
    with pytest.raises(qn.InputError, match="bitstring"):
        noisy_probabilities(c, ["012"])
