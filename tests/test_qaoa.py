"""QAOA MaxCut energies against published closed forms.

Convention: tnsim.circuits.families.qaoa_maxcut applies exp(-i γ Z_u Z_v) per edge and
exp(-i β X) per qubit.  The papers below use exp(-i γ' C) with C = Σ (1 - Z_u Z_v) / 2, which equals
exp(+i γ'/2 Z_u Z_v) per edge up to a global phase, so γ' = -2 γ; β is the same.
Checked numerically against the dense state vector in test_closed_form_matches_dense.
"""

import math

import networkx as nx
import numpy as np
import pytest
from scipy.optimize import minimize

from tnsim.circuits.families import qaoa_maxcut
from tnsim.queries.expectation import TermCache, expectation, maxcut_energy
from tnsim.testing import dense_state


def wang_edge(gamma_std, beta, d_u, d_v, lam):
    """<C_uv> at p = 1: Wang, Hadfield, Jiang, Rieffel, "Quantum approximate optimization
    algorithm for MaxCut: A fermionic view", Phys. Rev. A 97, 022304 (2018), Theorem 1:
    1/2 + 1/4 sin(4β) sin γ (cos^{d_u} γ + cos^{d_v} γ)
        - 1/4 sin²(2β) cos^{d_u + d_v - 2λ} γ (1 - cos^λ 2γ),
    d_u = deg(u) - 1, d_v = deg(v) - 1, λ = triangles containing the edge."""
    g, b = gamma_std, beta
    return (
        0.5
        + 0.25 * math.sin(4 * b) * math.sin(g) * (math.cos(g) ** d_u + math.cos(g) ** d_v)
        - 0.25
        * math.sin(2 * b) ** 2
        * math.cos(g) ** (d_u + d_v - 2 * lam)
        * (1 - math.cos(2 * g) ** lam)
    )


def _edge_terms(graph):
    for u, v in graph.edges():
        lam = len(set(graph[u]) & set(graph[v]))
        yield u, v, graph.degree(u) - 1, graph.degree(v) - 1, lam


# Triangles (0-1-2, and 2-3-6 sharing a node), leaves (4, 5, 7) and a degree-4 node.
_MIXED = nx.Graph([(0, 1), (1, 2), (2, 0), (2, 3), (3, 4), (1, 5), (2, 6), (3, 6), (6, 7)])


@pytest.mark.parametrize(("gamma", "beta"), [(0.37, 0.61), (-0.9, 0.2), (1.3, -0.45)])
def test_closed_form_matches_dense(gamma, beta):
    c, g = qaoa_maxcut(_MIXED, [gamma], [beta])
    psi = dense_state(c).reshape((2,) * c.num_qubits)
    for u, v, du, dv, lam in _edge_terms(g):
        # <Z_u Z_v> from the dense state: |psi|^2 weighted by the parity (-1)^(x_u + x_v).
        idx = np.indices(psi.shape)
        zz = float((np.abs(psi) ** 2 * (-1.0) ** (idx[u] + idx[v])).sum())
        assert (1 - zz) / 2 == pytest.approx(wang_edge(-2 * gamma, beta, du, dv, lam), abs=1e-12)


@pytest.mark.parametrize(("gamma", "beta"), [(0.37, 0.61), (-0.9, 0.2)])
def test_tnsim_matches_closed_form_with_triangles_and_leaves(gamma, beta):
    c, g = qaoa_maxcut(_MIXED, [gamma], [beta])
    for u, v, du, dv, lam in _edge_terms(g):
        zz = expectation(c, {u: "Z", v: "Z"})
        assert (1 - zz) / 2 == pytest.approx(wang_edge(-2 * gamma, beta, du, dv, lam), abs=1e-12)


def test_large_random_regular_graph_edge_by_edge():
    # 2,000-node random 3-regular graph, every edge against the closed form.
    gamma, beta = 0.31, 0.27
    graph = nx.random_regular_graph(3, 2000, seed=11)
    c, g = qaoa_maxcut(graph, [gamma], [beta])
    cache = TermCache(c)
    for u, v, du, dv, lam in _edge_terms(g):
        zz = cache.value(((min(u, v), "Z"), (max(u, v), "Z")))
        assert (1 - zz) / 2 == pytest.approx(wang_edge(-2 * gamma, beta, du, dv, lam), abs=1e-11)
    # Few distinct neighbourhoods: nearly every edge is a cache hit.
    assert cache.misses < 20 and cache.hits > 2900


def test_optimal_p1_cut_fraction_on_triangle_free_cubic_graph():
    # Farhi, Goldstone, Gutmann, arXiv:1411.4028 (2014): on 3-regular graphs without
    # triangles the best p = 1 cut fraction per edge is 1/2 + 1/(3√3) ≈ 0.6925.
    def neg(x):
        return -wang_edge(x[0], x[1], 2, 2, 0)

    best = min(
        (minimize(neg, x0) for x0 in ([0.6, 0.4], [-0.6, -0.4], [0.5, -0.3])), key=lambda r: r.fun
    )
    assert -best.fun == pytest.approx(0.5 + 1 / (3 * math.sqrt(3)), abs=1e-7)
    petersen = nx.petersen_graph()  # 3-regular, girth 5
    gamma = -best.x[0] / 2
    energy = maxcut_energy(petersen, [gamma], [best.x[1]])
    assert energy / petersen.number_of_edges() == pytest.approx(
        0.5 + 1 / (3 * math.sqrt(3)), abs=1e-7
    )


def test_p2_energy_matches_dense():
    # No closed form at p = 2; the dense state vector is the reference.
    graph = nx.random_regular_graph(3, 12, seed=5)
    gammas, betas = [0.3, 0.55], [0.4, 0.2]
    c, g = qaoa_maxcut(graph, gammas, betas)
    prob = np.abs(dense_state(c).reshape((2,) * 12)) ** 2
    idx = np.indices(prob.shape)
    ref = sum(float((prob * (idx[u] != idx[v])).sum()) for u, v in g.edges())
    assert maxcut_energy(graph, gammas, betas) == pytest.approx(ref, abs=1e-10)


@pytest.mark.slow
def test_p1_energy_on_100k_nodes_matches_closed_form():
    gamma, beta = 0.3, 0.35
    graph = nx.random_regular_graph(3, 100_000, seed=1)
    ref = sum(
        wang_edge(-2 * gamma, beta, du, dv, lam)
        for _, _, du, dv, lam in _edge_terms(
            nx.convert_node_labels_to_integers(graph, ordering="sorted")
        )
    )
    assert maxcut_energy(graph, [gamma], [beta]) == pytest.approx(ref, rel=1e-12)
