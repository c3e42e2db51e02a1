"""Angle optimization: scipy's minimizers on exact energies, QAOA MaxCut optima from the
literature, starting points, and the record of every evaluation."""

import json
import math

import networkx as nx
import numpy as np
import pytest

from tnsim import Circuit, InputError
from tnsim.circuits.qaoa import maxcut_ansatz
from tnsim.queries.landscape import EnergyLandscape
from tnsim.queries.maxcut import (
    canonical_angles,
    interpolate_angles,
    linear_ramp,
    maxcut_observable,
    optimize_maxcut,
)
from tnsim.queries.optimize import METHODS, optimize_angles
from tnsim.testing import dense_state

# Farhi, Goldstone, Gutmann, "A quantum approximate optimization algorithm",
# arXiv:1411.4028 (2014): the best p = 1 cut fraction on 3-regular graphs without
# triangles, 1/2 + 1/(3√3) ≈ 0.6925.
P1_CUBIC = 0.5 + 1 / (3 * math.sqrt(3))
# Wurtz and Love, "MaxCut quantum approximate optimization algorithm: performance
# guarantees for p > 1", Phys. Rev. A 103, 042612 (2021): best p = 2 cut fraction on
# 3-regular graphs of girth > 5, 0.7559 (from memory; the same figure as issue 16).
P2_CUBIC = 0.7559

_TWO_QUBITS = Circuit(2).ry("a", 0).cx(0, 1).ry("b", 1)  # <Z0 + Z1> = cos a + cos a cos b


@pytest.mark.parametrize("method", METHODS)
def test_every_method_finds_the_minimum(method):
    best = optimize_angles(_TWO_QUBITS, "Z0 + Z1", starts=3, seed=2, method=method)
    assert best.energy == pytest.approx(-2.0, abs=1e-5)
    assert math.cos(best.values["a"]) == pytest.approx(-1.0, abs=1e-4)


def test_record_of_every_evaluation():
    best = optimize_angles(_TWO_QUBITS, "Z0 + Z1", starts=3, seed=4)
    assert sum(s.evaluations for s in best.starts) == len(best.evaluations)
    for s in best.starts:
        mine = [e for e in best.evaluations if e.start == s.index]
        assert len(mine) == s.evaluations
        assert s.energy == min(e.energy for e in mine)
        # Every recorded energy is the energy at the recorded values.
        e = mine[-1]
        a, b = e.values
        assert e.energy == pytest.approx(math.cos(a) + math.cos(a) * math.cos(b), abs=1e-12)
        assert e.gradient_norm is not None
    seconds = [e.seconds for e in best.evaluations]
    assert seconds == sorted(seconds)
    json.dumps(best.to_dict(), allow_nan=False)


def test_same_seed_same_run_and_given_start_first():
    one = optimize_angles(_TWO_QUBITS, "Z0 + Z1", starts=3, seed=7, initial=[{"a": 1, "b": 2}])
    two = optimize_angles(_TWO_QUBITS, "Z0 + Z1", starts=3, seed=7, initial=[[1.0, 2.0]])
    assert [e.values for e in one.evaluations] == [e.values for e in two.evaluations]
    assert one.starts[0].kind == "given" and one.starts[0].initial == (1.0, 2.0)
    assert [s.kind for s in one.starts[1:]] == ["random", "random"]
    other = optimize_angles(_TWO_QUBITS, "Z0 + Z1", starts=3, seed=8)
    assert other.starts[1].initial != one.starts[1].initial


def test_maximize_and_evaluation_budget():
    best = optimize_angles(_TWO_QUBITS, "Z0 + Z1", starts=2, seed=1, maximize=True)
    assert best.energy == pytest.approx(2.0, abs=1e-6)
    for method in ("L-BFGS-B", "Nelder-Mead", "COBYLA", "BFGS"):
        capped = optimize_angles(
            _TWO_QUBITS, "Z0 + Z1", starts=2, seed=1, method=method, max_evaluations=3
        )
        assert all(s.evaluations <= 3 for s in capped.starts)


def test_progress_callback_counts_starts():
    calls = []
    optimize_angles(_TWO_QUBITS, "Z0", starts=3, seed=1, progress=lambda k, n: calls.append((k, n)))
    assert calls == [(1, 3), (2, 3), (3, 3)]


def test_bad_requests_are_refused():
    with pytest.raises(InputError, match="unknown method 'newton'"):
        optimize_angles(_TWO_QUBITS, "Z0", method="newton")
    with pytest.raises(InputError, match="starts must be an integer >= 1"):
        optimize_angles(_TWO_QUBITS, "Z0", starts=0)
    with pytest.raises(InputError, match="no named angles"):
        optimize_angles(Circuit(1).h(0), "Z0")
    with pytest.raises(InputError, match="give the observable"):
        optimize_angles(_TWO_QUBITS)
    with pytest.raises(InputError, match="initial: no value for b"):
        optimize_angles(_TWO_QUBITS, "Z0", initial=[{"a": 0.1}])
    with pytest.raises(InputError, match="box"):
        optimize_angles(_TWO_QUBITS, "Z0", box=(1.0, -1.0))


def test_linear_ramp_and_interpolation():
    gammas, betas = linear_ramp(1, 0.75)
    assert gammas == [-0.1875] and betas == [0.375]  # γ' = β = Δt/2
    gammas, betas = linear_ramp(4, 1.0)
    assert gammas == [-0.0625, -0.1875, -0.3125, -0.4375]
    assert betas == [0.875, 0.625, 0.375, 0.125]
    # Interpolating a straight line keeps it straight (and one layer longer).
    gammas, betas = interpolate_angles([1.0, 2.0, 3.0], [3.0, 2.0, 1.0])
    assert gammas == pytest.approx([1.0, 5 / 3, 7 / 3, 3.0])
    assert betas == pytest.approx([3.0, 7 / 3, 5 / 3, 1.0])
    with pytest.raises(InputError):
        interpolate_angles([1.0], [])


@pytest.mark.parametrize(
    "graph",
    [
        nx.random_regular_graph(3, 10, seed=3),  # every degree odd: γ + π/2 flips later β
        nx.cycle_graph(7),  # every degree even: γ + π/2 is a symmetry
        nx.Graph([(0, 1), (1, 2), (2, 0), (2, 3), (3, 4)]),  # mixed: γ + π only
        nx.Graph([(0, 1, {"weight": 0.7}), (1, 2, {"weight": 1.9}), (2, 3, {"weight": 1.0})]),
    ],
)
def test_canonical_angles_keep_the_energy(graph):
    circuit, g = maxcut_ansatz(graph, 3)
    land = EnergyLandscape(circuit, maxcut_observable(g))
    rng = np.random.default_rng(5)
    for _ in range(3):
        gammas = rng.uniform(-4, 4, 3).tolist()
        betas = rng.uniform(-4, 4, 3).tolist()
        cg, cb = canonical_angles(g, gammas, betas)
        before = land.energy(
            dict(zip(["gamma0", "gamma1", "gamma2"], gammas))
            | dict(zip(["beta0", "beta1", "beta2"], betas))
        )
        after = land.energy(
            dict(zip(["gamma0", "gamma1", "gamma2"], cg))
            | dict(zip(["beta0", "beta1", "beta2"], cb))
        )
        assert after == pytest.approx(before, abs=1e-11)
        assert all(-math.pi / 4 - 1e-12 <= b <= math.pi / 4 + 1e-12 for b in cb)
        assert cg[0] <= 0


def test_weighted_maxcut_energy_matches_dense_state():
    graph = nx.Graph()
    graph.add_weighted_edges_from([(0, 1, 0.5), (1, 2, 2.0), (2, 0, 1.5), (2, 3, 1.0), (3, 4, 3)])
    circuit, g = maxcut_ansatz(graph, 2)
    values = {"gamma0": 0.3, "gamma1": -0.6, "beta0": 0.2, "beta1": 0.45}
    energy = EnergyLandscape(circuit, maxcut_observable(g)).energy(values)
    prob = np.abs(dense_state(circuit.bind(values)).reshape((2,) * 5)) ** 2
    idx = np.indices(prob.shape)
    ref = sum(
        d["weight"] * float((prob * (idx[u] != idx[v])).sum()) for u, v, d in g.edges(data=True)
    )
    assert energy == pytest.approx(ref, abs=1e-12)


def test_p1_optimum_on_triangle_free_cubic_graph():
    # The circular ladder (prism) on 60 nodes is 3-regular and triangle-free: every edge
    # sees the large-girth p = 1 neighbourhood, so the optimum is exactly P1_CUBIC.
    best = optimize_maxcut(nx.circular_ladder_graph(30), 1, starts=2, seed=1)
    assert best.cut_fraction == pytest.approx(P1_CUBIC, abs=1e-8)
    # γ' = arctan(1/√2), β = π/8 (Wang et al., PRA 97, 022304, 2018, from their formula).
    assert best.gammas[0] == pytest.approx(-0.5 * math.atan(1 / math.sqrt(2)), abs=1e-4)
    assert best.betas[0] == pytest.approx(math.pi / 8, abs=1e-4)


def test_p2_optimum_on_girth_8_cubic_graph():
    # The Tutte–Coxeter graph (30 nodes, 3-regular, girth 8 > 6): every p = 2 edge cone is
    # a tree, so the optimum is the large-girth value.
    graph = nx.LCF_graph(30, [-13, -9, 7, -7, 9, 13], 5)
    assert nx.girth(graph) == 8
    best = optimize_maxcut(graph, 2, starts=2, seed=1)
    assert best.cut_fraction == pytest.approx(P2_CUBIC, abs=1e-4)
    assert len(best.depths) == 2 and best.depths[0].energy / 45 == pytest.approx(P1_CUBIC)
    # Angles (Wurtz and Love 2021, from memory): γ' = (0.488, 0.898), β = (0.555, 0.293).
    assert [-2 * g for g in best.gammas] == pytest.approx([0.488, 0.898], abs=5e-3)
    assert best.betas == pytest.approx([0.555, 0.293], abs=5e-3)
    # The interpolated start of depth 2 comes from depth 1's best.
    first = best.depths[1].starts[0]
    assert first.kind == "given"
    assert first.initial[0] == pytest.approx(best.depths[0].values["beta0"] % (math.pi / 2))


@pytest.mark.slow
@pytest.mark.parametrize(("p", "target", "tol"), [(1, P1_CUBIC, 1e-3), (2, P2_CUBIC, 2e-3)])
def test_optimum_on_10000_node_random_cubic_graph(p, target, tol):
    graph = nx.random_regular_graph(3, 10_000, seed=1)
    best = optimize_maxcut(graph, p, starts=4, seed=1)
    assert best.cut_fraction == pytest.approx(target, abs=tol)
