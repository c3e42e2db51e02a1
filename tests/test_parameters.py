"""Named angles: parsing, arithmetic, circuits with names, binding, and refusals."""

import math

import networkx as nx
import numpy as np
import pytest

from tnsim import Circuit, InputError
from tnsim.circuits.families import qaoa_maxcut
from tnsim.circuits.parameters import AngleExpr, angle, as_angle, parse_angle
from tnsim.circuits.qaoa import maxcut_ansatz
from tnsim.circuits.qasm import write_qasm
from tnsim.queries.amplitudes import amplitude
from tnsim.queries.expectation import expectation, maxcut_energy
from tnsim.queries.forecast import forecast
from tnsim.queries.marginals import marginal
from tnsim.queries.sampling import sample
from tnsim.testing import dense_state


@pytest.mark.parametrize(
    ("text", "terms", "offset"),
    [
        ("theta0", {"theta0": 1.0}, 0.0),
        ("2*gamma1", {"gamma1": 2.0}, 0.0),
        ("-0.5*beta + 0.1", {"beta": -0.5}, 0.1),
        ("(a + b) / 2 - a", {"a": -0.5, "b": 0.5}, 0.0),
        ("-(x - pi)", {"x": -1.0}, math.pi),
        ("2 * (3 * t - 1) + t * 4", {"t": 10.0}, -2.0),
        ("π/2 + y", {"y": 1.0}, math.pi / 2),
        ("1e-3*u", {"u": 1e-3}, 0.0),
    ],
)
def test_parse_affine(text, terms, offset):
    expr = parse_angle(text)
    assert isinstance(expr, AngleExpr)
    assert dict(expr.terms) == pytest.approx(terms)
    assert expr.offset == pytest.approx(offset)


def test_constants_parse_to_floats_and_cancelled_names_vanish():
    assert parse_angle("pi/4") == pytest.approx(math.pi / 4)
    assert parse_angle("a - a + 2") == 2.0
    assert as_angle(3) == 3.0


@pytest.mark.parametrize(
    ("text", "where"),
    [
        ("a*b", "not affine"),
        ("1/a", "column 2"),
        ("2*(", "column"),
        ("theta +", "ends early"),
        ("x $ y", "column 3"),
        ("1/0", "division by zero"),
        ("", "empty"),
        ("sin(x)", "column"),
    ],
)
def test_bad_expressions_name_the_problem(text, where):
    with pytest.raises(InputError, match="angle") as info:
        parse_angle(text)
    assert where in str(info.value)


def test_python_arithmetic_matches_text():
    g, b = angle("gamma"), angle("beta")
    assert 2 * g - 0.5 * b + 0.1 == parse_angle("2*gamma - 0.5*beta + 0.1")
    assert (g + b) / 2 == parse_angle("gamma/2 + beta/2")
    assert 1 - g == parse_angle("1 - gamma")
    assert (2 * g + 1).value({"gamma": 0.25}) == 1.5
    assert (2 * g).coefficient("gamma") == 2.0 and (2 * g).coefficient("beta") == 0.0
    with pytest.raises(InputError, match="not affine"):
        g * b
    with pytest.raises(InputError, match="no value for parameter 'gamma'"):
        g.value({"beta": 1.0})
    for bad in ("pi", "2x", "a-b", ""):
        with pytest.raises(InputError, match="not a parameter name"):
            angle(bad)


def test_builders_take_names_and_report_parameters():
    c = Circuit(3).rx("theta0", 0).rzz("2*gamma1", 0, 1).u3("a", 0.5, "-a + 0.1", 2).h(1)
    assert c.parameters() == ("a", "gamma1", "theta0")
    assert Circuit(2).h(0).cx(0, 1).parameters() == ()
    with pytest.raises(InputError, match=r"gate 'rx'.*not affine"):
        Circuit(1).rx("a*b", 0)
    with pytest.raises(InputError, match="not a finite real number or a named angle"):
        Circuit(1).rx(float("nan"), 0)


def test_bound_circuit_equals_circuit_built_with_numbers():
    values = {"t": 0.37, "g": -0.81}
    named = Circuit(3).h(0).rx("2*t", 1).cp("g - t", 0, 2).u3("t", "g", 0.2, 1).cx(1, 2)
    numeric = (
        Circuit(3).h(0).rx(2 * 0.37, 1).cp(-0.81 - 0.37, 0, 2).u3(0.37, -0.81, 0.2, 1).cx(1, 2)
    )
    bound = named.bind(values)
    assert bound.ops == numeric.ops
    np.testing.assert_allclose(dense_state(bound), dense_state(numeric), atol=0, rtol=0)
    assert named.parameters() == ("g", "t")  # bind leaves the original alone


def test_bound_qaoa_ansatz_equals_family_circuit():
    graph = nx.random_regular_graph(3, 12, seed=2)
    named, _ = maxcut_ansatz(graph, 2)
    values = {"gamma0": 0.3, "gamma1": -0.2, "beta0": 0.4, "beta1": 0.1}
    family, _ = qaoa_maxcut(graph, [0.3, -0.2], [0.4, 0.1])
    assert named.bind(values).ops == family.ops


def test_bind_refuses_missing_unknown_and_bad_values():
    c = Circuit(1).rx("a", 0).ry("b", 0)
    with pytest.raises(InputError, match="no value for b"):
        c.bind({"a": 1.0})
    with pytest.raises(InputError, match=r"unknown name.*zzz"):
        c.bind({"a": 1.0, "b": 2.0, "zzz": 3.0})
    with pytest.raises(InputError, match="not a finite real number"):
        c.bind({"a": 1.0, "b": float("inf")})
    with pytest.raises(InputError, match="mapping"):
        c.bind([1.0, 2.0])


def test_from_ops_accepts_named_angles():
    c = Circuit.from_ops(2, [("h", [0]), {"name": "rzz", "qubits": [0, 1], "params": ["2*g"]}])
    assert c.parameters() == ("g",)


def test_queries_refuse_unbound_circuits_clearly():
    c = Circuit(2).h(0).rx("theta", 1)
    for call in (
        lambda: amplitude(c, "00"),
        lambda: marginal(c, [0]),
        lambda: expectation(c, "Z0"),
    ):
        with pytest.raises(InputError, match=r"unbound parameters \(theta\).*bind"):
            call()
    for call in (lambda: sample(c, 3), lambda: forecast(c, "00")):
        with pytest.raises(InputError, match=r"unbound.*theta.*bind"):
            call()
    with pytest.raises(InputError, match=r"OpenQASM 2\.0 has no named parameters"):
        write_qasm(c)
    with pytest.raises(InputError, match="unbound angle"):
        c.ops[1].matrix()


def test_named_and_numeric_energies_agree_on_maxcut():
    graph = nx.petersen_graph()
    named, g = maxcut_ansatz(graph, 1)
    bound = named.bind({"gamma0": 0.21, "beta0": 0.33})
    ref = maxcut_energy(graph, [0.21], [0.33])
    zz = sum(expectation(bound, {u: "Z", v: "Z"}) for u, v in g.edges())
    assert 0.5 * (g.number_of_edges() - zz) == pytest.approx(ref, abs=1e-12)


def test_gate_tensor_cache_stays_bounded_when_a_loop_binds_new_angles():
    # A variational loop binds new angles on every pass and runs ordinary queries; each
    # pass makes new named-gate tensors, which the cache must not keep without bound.
    from tnsim.network import builders

    cache = builders._named_tensor
    named = Circuit(2).ry("a", 0).rz("b", 0).h(1)
    for k in range(20):
        a, b = 0.1 + 0.01 * k, -0.3 * k
        bound = named.bind({"a": a, "b": b})
        # Bloch vector after ry(a) then rz(b) on |0>: (sin a cos b, sin a sin b, cos a)
        # (rotations about the Bloch-sphere axes; Nielsen and Chuang, "Quantum Computation
        # and Quantum Information", Cambridge 2000, section 4.2).
        assert expectation(bound, "Z0") == pytest.approx(math.cos(a), abs=1e-12)
        assert expectation(bound, "X0 X1") == pytest.approx(math.sin(a) * math.cos(b), abs=1e-12)
    assert cache.cache_info().currsize <= builders.TENSOR_CACHE_SIZE
    # Far more distinct angles than the cache holds: its size stops at the bound, and the
    # tensors it returns stay right (rz(t) = diag(e^{-it/2}, e^{it/2}), common practice).
    for k in range(builders.TENSOR_CACHE_SIZE + 500):
        t = 1e-3 * k
        tensor, diag = builders.gate_tensor(Circuit(1).rz(t, 0).ops[0])
        assert diag == (True,)
    assert cache.cache_info().currsize == builders.TENSOR_CACHE_SIZE
    np.testing.assert_allclose(tensor, [np.exp(-0.5j * t), np.exp(0.5j * t)], atol=1e-15)
    again, _ = builders.gate_tensor(Circuit(1).rz(t, 0).ops[0])
    assert again is tensor  # the most recent entry is still there
