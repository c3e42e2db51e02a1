"""Parameter-shift rules, gate by gate, against finite differences and against the spectrum.

A rule ``Σ c_r f(θ + s_r)`` is exact for ``f(θ) = Tr(O G(θ) ρ G(θ)†)`` when the
angle enters as ``G(θ + s) = G(θ) exp(-i s A)`` or ``exp(-i s A) G(θ)`` and the
eigenvalue differences of ``A`` are the rule's frequencies (Mitarai et al.,
PRA 98, 032309, 2018; Schuld et al., PRA 99, 032331, 2019).  Checked here with
random full-rank states and random Hermitian observables, against central
finite differences (numpy), and against the generator's spectrum from
scipy.linalg.logm.
"""

import math

import numpy as np
import pytest
from scipy.linalg import logm

from tnsim.circuits.gates import GATES, GateSpec
from tnsim.circuits.shifts import FOUR_TERM, SHIFT_RULES, TWO_TERM, shift_rule
from tnsim.errors import InputError

_WITH_ANGLES = sorted(name for name, spec in GATES.items() if spec.num_params)


def _random_problem(dim: int, seed: int):
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(dim, dim)) + 1j * rng.normal(size=(dim, dim))
    rho = a @ a.conj().T
    rho /= np.trace(rho)
    o = rng.normal(size=(dim, dim)) + 1j * rng.normal(size=(dim, dim))
    return rho, o + o.conj().T, rng


def _f(spec, params, slot, theta, rho, obs):
    p = list(params)
    p[slot] = theta
    g = spec.make(*p)
    return float(np.trace(obs @ g @ rho @ g.conj().T).real)


def test_every_gate_with_angles_has_a_rule_per_angle():
    assert sorted(SHIFT_RULES) == _WITH_ANGLES
    for name in _WITH_ANGLES:
        assert len(SHIFT_RULES[name]) == GATES[name].num_params


@pytest.mark.parametrize("name", _WITH_ANGLES)
def test_rule_equals_finite_difference(name):
    spec = GATES[name]
    rho, obs, rng = _random_problem(2**spec.num_qubits, seed=len(name))
    for slot in range(spec.num_params):
        for _ in range(3):
            params = rng.uniform(-math.pi, math.pi, spec.num_params)
            theta = params[slot]
            rule = sum(
                c * _f(spec, params, slot, theta + s, rho, obs) for c, s in shift_rule(name, slot)
            )
            h = 1e-5
            fd = (
                _f(spec, params, slot, theta + h, rho, obs)
                - _f(spec, params, slot, theta - h, rho, obs)
            ) / (2 * h)
            assert rule == pytest.approx(fd, abs=1e-8), (name, slot)


@pytest.mark.parametrize("name", _WITH_ANGLES)
def test_generator_spectrum_matches_the_rule(name):
    # G(θ)^-1 G(θ + s) = exp(-i s A) for every θ (up to a global phase): A's eigenvalue
    # differences are {1} for the two-term rule and {1/2, 1} for the four-term rule
    # (fsim's θ: {1, 2}).
    spec = GATES[name]
    rng = np.random.default_rng(7)
    for slot in range(spec.num_params):
        params = rng.uniform(-math.pi, math.pi, spec.num_params)
        s = 0.3
        shifted = params.copy()
        shifted[slot] += s
        g0, g1 = spec.make(*params), spec.make(*shifted)
        left, right = g1 @ np.linalg.inv(g0), np.linalg.inv(g0) @ g1
        gaps = None
        for step in (left, right):
            a = 1j * logm(step) / s
            if np.allclose(a, a.conj().T, atol=1e-9):
                ev = np.linalg.eigvalsh((a + a.conj().T) / 2)
                diffs = {round(abs(x - y), 6) for x in ev for y in ev} - {0.0}
                # Same generator for another θ: a one-parameter group, as the rules need.
                other = params.copy()
                other[slot] += 1.1
                other_shift = other.copy()
                other_shift[slot] += s
                h0, h1 = spec.make(*other), spec.make(*other_shift)
                step2 = h1 @ np.linalg.inv(h0) if step is left else np.linalg.inv(h0) @ h1
                if np.allclose(step2, step, atol=1e-9):
                    gaps = diffs
                    break
        assert gaps is not None, (name, slot)
        rule = shift_rule(name, slot)
        if rule == TWO_TERM:
            assert gaps == {1.0}, (name, slot, gaps)
        elif rule == FOUR_TERM:
            assert gaps == {0.5, 1.0}, (name, slot, gaps)
        else:
            assert (name, slot, gaps) == ("fsim", 0, {1.0, 2.0})


def test_two_term_rule_is_wrong_for_controlled_rotations():
    # Why crz needs the four-term rule: its generator has three eigenvalues.
    spec = GATES["crz"]
    rho, obs, _ = _random_problem(4, seed=3)
    theta = 0.7
    two = sum(c * _f(spec, [theta], 0, theta + s, rho, obs) for c, s in TWO_TERM)
    four = sum(c * _f(spec, [theta], 0, theta + s, rho, obs) for c, s in FOUR_TERM)
    h = 1e-5
    fd = (_f(spec, [theta], 0, theta + h, rho, obs) - _f(spec, [theta], 0, theta - h, rho, obs)) / (
        2 * h
    )
    assert four == pytest.approx(fd, abs=1e-8)
    assert abs(two - fd) > 1e-3


def test_gate_without_a_rule_is_refused(monkeypatch):
    monkeypatch.setitem(
        GATES, "squeeze_test", GateSpec("squeeze_test", 1, 1, lambda t: np.eye(2, dtype=complex))
    )
    with pytest.raises(InputError, match="no parameter-shift rule for angle 0 of gate"):
        shift_rule("squeeze_test", 0)
    with pytest.raises(InputError, match="no parameter-shift rule"):
        shift_rule("rx", 1)
