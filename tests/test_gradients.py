"""Parameter-shift gradients against closed forms and finite differences."""

import cmath
import math

import networkx as nx
import numpy as np
import pytest

import tnsim.queries.landscape as landscape_module
from tnsim import Circuit, InputError
from tnsim.circuits.gates import GATES, GateSpec, gate_matrix
from tnsim.circuits.qaoa import maxcut_ansatz
from tnsim.queries.expectation import expectation
from tnsim.queries.gradients import energy_and_gradient
from tnsim.queries.landscape import EnergyLandscape
from tnsim.queries.maxcut import maxcut_observable

# Triangles (0-1-2, and 2-3-6 sharing a node), leaves (4, 5, 7) and a degree-4 node.
_MIXED = nx.Graph([(0, 1), (1, 2), (2, 0), (2, 3), (3, 4), (1, 5), (2, 6), (3, 6), (6, 7)])


def _wang_edge(g, b, du, dv, lam):
    """<C_uv> at p = 1 (Wang, Hadfield, Jiang, Rieffel, "Quantum approximate optimization
    algorithm for MaxCut: A fermionic view", Phys. Rev. A 97, 022304, 2018, Theorem 1),
    written with cmath so that it takes complex arguments (for the complex step)."""
    return (
        0.5
        + 0.25 * cmath.sin(4 * b) * cmath.sin(g) * (cmath.cos(g) ** du + cmath.cos(g) ** dv)
        - 0.25
        * cmath.sin(2 * b) ** 2
        * cmath.cos(g) ** (du + dv - 2 * lam)
        * (1 - cmath.cos(2 * g) ** lam)
    )


def _closed_form_cut(graph, gamma, beta):
    """Σ over edges of Wang et al.'s <C_uv>; their γ' is -2γ in tnsim's convention
    (see tests/test_qaoa.py)."""
    total = 0
    for u, v in graph.edges():
        lam = len(set(graph[u]) & set(graph[v]))
        total += _wang_edge(-2 * gamma, beta, graph.degree(u) - 1, graph.degree(v) - 1, lam)
    return total


def _complex_step(f, x, h=1e-30):
    """f'(x) = Im f(x + ih) / h, exact to rounding for real-analytic f (Squire and Trapp,
    "Using complex variables to estimate derivatives of real functions", SIAM Review 40,
    110, 1998)."""
    return f(x + 1j * h).imag / h


@pytest.mark.parametrize(("gamma", "beta"), [(0.37, 0.61), (-0.9, 0.2), (1.3, -0.45)])
def test_p1_gradient_equals_derivative_of_closed_form(gamma, beta):
    circuit, g = maxcut_ansatz(_MIXED, 1)
    energy, grad = energy_and_gradient(
        circuit, maxcut_observable(g), {"gamma0": gamma, "beta0": beta}
    )
    assert energy == pytest.approx(_closed_form_cut(g, gamma, beta).real, abs=1e-12)
    d_gamma = _complex_step(lambda x: _closed_form_cut(g, x, beta), gamma)
    d_beta = _complex_step(lambda x: _closed_form_cut(g, gamma, x), beta)
    assert grad["gamma0"] == pytest.approx(d_gamma, abs=1e-11)
    assert grad["beta0"] == pytest.approx(d_beta, abs=1e-11)


def _central_differences(circuit, observable, values, h=1e-5):
    """dE/dx from energies of bound circuits by tnsim's plain expectation query."""
    out = {}
    for name in values:
        up, down = dict(values), dict(values)
        up[name] += h
        down[name] -= h
        out[name] = (
            expectation(circuit.bind(up), observable) - expectation(circuit.bind(down), observable)
        ) / (2 * h)
    return out


def test_p2_gradient_equals_finite_differences_on_triangles_and_leaves():
    circuit, g = maxcut_ansatz(_MIXED, 2)
    obs = maxcut_observable(g)
    values = {"gamma0": 0.31, "gamma1": -0.52, "beta0": 0.44, "beta1": 0.17}
    energy, grad = energy_and_gradient(circuit, obs, values)
    assert energy == pytest.approx(expectation(circuit.bind(values), obs), abs=1e-12)
    fd = _central_differences(circuit, obs, values)
    for name in values:
        assert grad[name] == pytest.approx(fd[name], abs=1e-6)


def _every_gate_circuit(seed: int, n: int = 5) -> Circuit:
    """Every gate with angles, three times each, angles affine in six shared names."""
    rng = np.random.default_rng(seed)
    c = Circuit(n)
    for q in range(n):
        c.h(q)
    for _ in range(3):
        for name in sorted(g for g in GATES if GATES[g].num_params):
            spec = GATES[name]
            qubits = rng.choice(n, spec.num_qubits, replace=False).tolist()
            params = [
                f"{rng.uniform(-2, 2):.4f}*t{rng.integers(6)} + {rng.uniform(-1, 1):.4f}"
                for _ in range(spec.num_params)
            ]
            c.append(name, qubits, params)
        c.cx(0, 1).ccx(1, 2, 3).t(n - 1).swap(2, n - 1)
    return c


def test_every_gate_gradient_equals_finite_differences():
    circuit = _every_gate_circuit(seed=5)
    obs = "0.7 Z0 X1 - 1.1 Y2 Z4 + 0.3 X3 + Z0 Z1 Z2 Z3 Z4 + 2"
    rng = np.random.default_rng(1)
    values = {name: float(rng.uniform(-1, 1)) for name in circuit.parameters()}
    energy, grad = energy_and_gradient(circuit, obs, values)
    assert energy == pytest.approx(expectation(circuit.bind(values), obs), abs=1e-12)
    fd = _central_differences(circuit, obs, values)
    for name in values:
        assert grad[name] == pytest.approx(fd[name], abs=1e-6)


def test_parameter_used_twice():
    # <Z> after rx(t) then ry(2t + 0.3) on |0>: cos t cos(2t + 0.3) (Bloch-sphere rotations).
    circuit = Circuit(1).rx("t", 0).ry("2*t + 0.3", 0)
    for t in (0.2, -1.1, 2.5):
        energy, grad = energy_and_gradient(circuit, "Z0", {"t": t})
        assert energy == pytest.approx(math.cos(t) * math.cos(2 * t + 0.3), abs=1e-12)
        expected = -math.sin(t) * math.cos(2 * t + 0.3) - 2 * math.cos(t) * math.sin(2 * t + 0.3)
        assert grad["t"] == pytest.approx(expected, abs=1e-12)


def test_values_as_a_sequence_follow_parameter_order():
    circuit = Circuit(2).rx("b", 0).ry("a", 1)
    e1, g1 = energy_and_gradient(circuit, "Z0 + Z1", {"a": 0.3, "b": 0.9})
    e2, g2 = energy_and_gradient(circuit, "Z0 + Z1", [0.3, 0.9])
    assert e1 == e2 and g1 == g2
    assert list(g1) == ["a", "b"]
    with pytest.raises(InputError, match="no value for b"):
        energy_and_gradient(circuit, "Z0", {"a": 0.1})
    with pytest.raises(InputError, match="1 value"):
        energy_and_gradient(circuit, "Z0", [0.1])
    with pytest.raises(InputError, match="finite"):
        energy_and_gradient(circuit, "Z0", [0.1, math.nan])


def test_gates_outside_every_cone_are_never_shifted():
    # 'b' acts on qubit 2, outside the light cone of Z0: its derivative is 0 with no
    # shifted evaluation; 'a' costs the unshifted cone plus its two shifted copies.
    circuit = Circuit(3).h(0).ry("a", 0).h(2).rx("b", 2).cx(1, 2)
    land = EnergyLandscape(circuit, "Z0")
    energy, grad = land.energy_and_gradient({"a": 0.4, "b": 0.7})
    assert grad.tolist() == [pytest.approx(-math.cos(0.4)), 0.0]  # <Z> = -sin a after h
    assert energy == pytest.approx(-math.sin(0.4))
    assert land.cone_values == 3 and land.contractions == 1


def test_isomorphic_shifted_cones_are_contracted_once():
    # A 200-node ring at p = 1: every edge's cone is the same circuit (3 rzz, 2 rx), so
    # energy and gradient of all 200 terms take one batched contraction of 1 + 2*5 cones.
    circuit, g = maxcut_ansatz(nx.cycle_graph(200), 1)
    land = EnergyLandscape(circuit, maxcut_observable(g))
    assert land.num_terms == 200 and land.num_classes == 1
    land.energy_and_gradient([0.39, -0.39])
    assert land.contractions == 1 and land.cone_values == 11
    # Ring of disagrees (Farhi, Goldstone, Gutmann 2014): 3/4 at the p = 1 optimum.
    best, _ = land.energy_and_gradient([math.pi / 8, -math.pi / 8])
    assert best / 200 == pytest.approx(0.75, abs=1e-12)


def test_state_vector_route_equals_network_route(monkeypatch):
    circuit = _every_gate_circuit(seed=9, n=4)
    obs = "Z0 X1 + 0.5 Y3 - Z2"
    values = {name: 0.1 * k for k, name in enumerate(circuit.parameters())}
    plain = EnergyLandscape(circuit, obs).energy_and_gradient(values)
    monkeypatch.setattr(landscape_module, "deep_and_narrow", lambda local, small: True)
    land = EnergyLandscape(circuit, obs)
    vector = land.energy_and_gradient(values)
    assert all(c.vector for c in land.classes)
    assert vector[0] == pytest.approx(plain[0], abs=1e-12)
    np.testing.assert_allclose(vector[1], plain[1], atol=1e-12)


def test_small_memory_limit_gives_the_same_gradient():
    circuit, g = maxcut_ansatz(nx.random_regular_graph(3, 16, seed=4), 2)
    obs = maxcut_observable(g)
    values = [0.4, 0.2, -0.3, -0.5]
    e1, g1 = EnergyLandscape(circuit, obs).energy_and_gradient(values)
    # 64 KiB holds one cone's intermediates but not a batch of 50: batches are split.
    land = EnergyLandscape(circuit, obs, memory_limit=2**16)
    e2, g2 = land.energy_and_gradient(values)
    assert any(isinstance(p, int) for p in land._plans.values())
    assert e2 == pytest.approx(e1, abs=1e-11)
    np.testing.assert_allclose(g2, g1, atol=1e-11)


def test_gate_without_shift_rule_is_refused_but_energy_works(monkeypatch):
    def phase_rotation(t):
        return np.diag([1.0, np.exp(1j * t)]) @ gate_matrix("ry", [t])

    monkeypatch.setitem(GATES, "twist_test", GateSpec("twist_test", 1, 1, phase_rotation))
    circuit = Circuit(2).h(0).append("twist_test", [1], ["a"]).rx("b", 0)
    land = EnergyLandscape(circuit, "Z1 + X0")
    # <Z1> = cos a; rx on |+> leaves <X0> = 1.
    assert land.energy({"a": 0.3, "b": 0.1}) == pytest.approx(math.cos(0.3) + 1.0, abs=1e-12)
    with pytest.raises(InputError, match=r"operation 1 on qubits \(1,\).*twist_test"):
        energy_and_gradient(circuit, "Z1", {"a": 0.3, "b": 0.1})


def test_constant_terms_and_circuits_without_names():
    e, g = energy_and_gradient(Circuit(1).h(0), "2.5 + 0.5 X0", {})
    assert e == pytest.approx(3.0) and g == {}
