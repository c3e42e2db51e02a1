"""Exact sampling against the dense output distribution (chi-square goodness of fit)."""

import dataclasses

import numpy as np
import pytest
from scipy.stats import chisquare

import tnsim.queries.sampling as sampling
from tnsim import Circuit
from tnsim.errors import InputError, ResourceLimitError
from tnsim.network.graph import TensorGraph
from tnsim.queries.sampling import sample
from tnsim.testing import dense_state, random_circuit


def _chi_square_pvalue(samples, probs):
    # Pearson's chi-square test (scipy.stats.chisquare); outcomes expected fewer than 5 times
    # are pooled into one bin (the usual rule of thumb for the test's validity).
    n = samples.shape[1]
    idx = samples.astype(np.int64) @ (1 << np.arange(n - 1, -1, -1))
    counts = np.bincount(idx, minlength=1 << n)
    expected = probs * len(samples)
    big = expected >= 5
    obs, exp = counts[big], expected[big]
    if not big.all():
        if expected[~big].sum() == 0:  # outcomes of probability 0
            if counts[~big].sum():
                return 0.0  # ... were drawn: certainly the wrong distribution
        else:
            obs = np.append(obs, counts[~big].sum())
            exp = np.append(exp, expected[~big].sum())
    return chisquare(obs, exp).pvalue


def _only(kind, original):
    def pick(*args):
        cands = original(*args)
        return [c for c in cands if c[0] == kind] or [c for c in cands if c[0] == "dbl"]

    return pick


@pytest.mark.parametrize(
    ("block", "kind", "width", "direct"),
    [(3, "all", 20, 0), (4, "dbl", 20, 0), (3, "amp", 7, 0), (12, None, 20, 0), (3, None, 20, 20)],
)
def test_samples_follow_the_born_rule(block, kind, width, direct, monkeypatch):
    # Force each way of computing the conditionals, or (None) let the cost estimate choose;
    # direct=20: the circuit is narrow enough to draw from all amplitudes at once.
    monkeypatch.setattr(sampling, "AMPLITUDE_WIDTH", width)
    monkeypatch.setattr(sampling, "DIRECT_WIDTH", direct)
    if kind is not None:
        monkeypatch.setattr(sampling, "_candidates", _only(kind, sampling._candidates))
    c = random_circuit(10, 60, seed=5)
    probs = np.abs(dense_state(c)) ** 2
    s = sample(c, 8000, seed=2, block=block, method="marginals")
    assert s.shape == (8000, 10) and s.dtype == np.uint8
    assert _chi_square_pvalue(s, probs) > 1e-3


def test_memory_limit_is_respected():
    c = random_circuit(10, 60, seed=5)
    with pytest.raises(ResourceLimitError, match="memory limit"):
        sample(c, 10, seed=0, block=4, memory_limit=64, method="marginals")


def test_wrong_distribution_is_rejected():
    # The same test must reject samples of another circuit (the check can fail).
    c = random_circuit(8, 40, seed=1)
    other = random_circuit(8, 40, seed=2)
    s = sample(other, 4000, seed=0)
    assert _chi_square_pvalue(s, np.abs(dense_state(c)) ** 2) < 1e-6


def test_reproducible_and_seed_dependent():
    c = random_circuit(6, 30, seed=3)
    a, b = sample(c, 50, seed=7), sample(c, 50, seed=7)
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, sample(c, 50, seed=8))


@pytest.mark.parametrize("method", ["auto", "marginals"])
def test_deterministic_outputs_and_wide_circuit(method):
    c = Circuit(300).x(5).x(299).h(100).cx(100, 101)
    s = sample(c, 64, seed=1, block=8, method=method)
    assert np.all(s[:, 5] == 1) and np.all(s[:, 299] == 1)
    np.testing.assert_array_equal(s[:, 100], s[:, 101])
    assert 0 < s[:, 100].sum() < 64
    assert s.sum() == 2 * 64 + 2 * s[:, 100].sum()


def test_auto_method_draws_narrow_circuits_from_all_amplitudes_and_wide_ones_gate_by_gate(
    monkeypatch,
):
    routes = []
    monkeypatch.setattr(sampling, "_sample_from_all", lambda *a: routes.append("all"))
    monkeypatch.setattr(sampling, "sample_by_gates", lambda *a, **k: routes.append("gates"))
    sample(random_circuit(sampling.DIRECT_WIDTH, 30, seed=1), 5)
    sample(random_circuit(sampling.DIRECT_WIDTH + 1, 30, seed=1), 5)
    assert routes == ["all", "gates"]


def test_bad_input():
    c = Circuit(2).h(0)
    assert sample(c, 0).shape == (0, 2)
    for kwargs, words in (
        ({"shots": -1}, "shots"),
        ({"shots": 2.5}, "shots"),
        ({"shots": 3, "block": 0}, "block"),
        ({"shots": 3, "method": "chain"}, "method"),
    ):
        with pytest.raises(InputError, match=words):
            sample(c, **kwargs)


# Gate-by-gate sampling (tnsim.queries.gatewise): Bravyi, Gosset and Liu, "How to simulate quantum
# measurement without computing marginals", Phys. Rev. Lett. 128, 220503 (2022), cited from
# memory; the samples are checked against the dense output distribution all the same.


@pytest.mark.parametrize("seed", [5, 6])
def test_gate_by_gate_samples_follow_the_born_rule(seed):
    c = random_circuit(10, 60, seed=seed)
    probs = np.abs(dense_state(c)) ** 2
    s = sample(c, 8000, seed=2, method="gates")
    assert s.shape == (8000, 10) and s.dtype == np.uint8
    assert _chi_square_pvalue(s, probs) > 1e-3


def test_gate_by_gate_on_a_grid_circuit_and_against_another_distribution():
    from tnsim.circuits.families import grid_circuit

    c = grid_circuit(3, 3, 6, seed=3)
    s = sample(c, 6000, seed=1, method="gates")
    assert _chi_square_pvalue(s, np.abs(dense_state(c)) ** 2) > 1e-3
    other = np.abs(dense_state(grid_circuit(3, 3, 6, seed=4))) ** 2
    assert _chi_square_pvalue(s, other) < 1e-6


def test_default_route_beyond_the_direct_width_matches_light_cone_marginals():
    # 24 qubits: no dense state here; the marginals of six qubits come from tnsim.marginal,
    # which contracts light-cone doubled networks (a route sharing no code with the sampler's).
    from tnsim import marginal

    c = random_circuit(24, 120, seed=8)
    s = sample(c, 6000, seed=3)
    qubits = [0, 5, 11, 12, 17, 23]
    p = np.clip(marginal(c, qubits), 0.0, None)
    assert _chi_square_pvalue(s[:, qubits], p / p.sum()) > 1e-3
    other = np.clip(marginal(random_circuit(24, 120, seed=9), qubits), 0.0, None)
    assert _chi_square_pvalue(s[:, qubits], other / other.sum()) < 1e-6


def test_gate_steps_keep_the_circuit():
    from tnsim.queries.gatewise import gate_steps

    # Taking the steps layer by layer reorders gates only across different qubits.
    c = random_circuit(8, 70, seed=9)
    steps = gate_steps(c)
    assert sum(len(st.ops) for st in steps) == len(c.ops)
    assert [st.layer for st in steps] == sorted(st.layer for st in steps)
    reordered = Circuit(8)
    reordered.ops = [op for st in steps for op in st.ops]
    np.testing.assert_allclose(dense_state(reordered), dense_state(c), atol=1e-12)


def test_layer_network_with_steps_taken_is_the_partial_circuit():
    from tnsim.circuits.circuit import Operation
    from tnsim.queries.gatewise import _layer_network, gate_steps, step_tensor

    c = random_circuit(7, 50, seed=4)
    steps = gate_steps(c)
    layer = steps[len(steps) // 2].layer
    t = min(k for k, st in enumerate(steps) if st.layer == layer)
    end = max(k for k, st in enumerate(steps) if st.layer == layer) + 1
    lay = _layer_network(steps, t, end, np.complex128)
    net = lay.network
    local = {q: k for k, q in enumerate(lay.qubits)}
    for taken in range(t, end + 1):
        # Steps before ``taken`` put in, the bit vectors taken out: the state of the gates so far.
        arrays = list(net.arrays)
        for j in range(t, taken):
            arrays[lay.step_leaf[j]] = step_tensor(steps[j])
        keep = [k for k in range(len(arrays)) if k not in lay.bit_leaf.values()]
        wires = tuple(net.indices[lay.bit_leaf[q]][0] for q in lay.qubits)
        state = TensorGraph(
            [arrays[k] for k in keep],
            [net.indices[k] for k in keep],
            net.size,
            wires,
            net.exponent,
            net.dtype,
        )
        part = Circuit(len(lay.qubits))
        part.ops = [
            Operation(op.name, tuple(local[q] for q in op.qubits), op.params, op.custom)
            for st in steps[:taken]
            for op in st.ops
        ]
        np.testing.assert_allclose(state.dense().reshape(-1), dense_state(part), atol=1e-12)


def test_step_tensor_is_the_product_of_the_step_gates():
    from tnsim.queries.gatewise import gate_steps, step_tensor

    # Against the step's gates multiplied as 4x4 Kronecker products with numpy (qubit 0 is the
    # more significant bit; a gate on qubits (1, 0) is conjugated by the swap).
    c = Circuit(2).rx(0.3, 0).h(1).cx(1, 0).rz(0.2, 0).ry(0.7, 1)
    (step,) = gate_steps(c)
    assert step.qubits == (1, 0)  # the step tensor's axes follow the step's qubits
    swap = np.eye(4)[[0, 2, 1, 3]]
    unitary = np.eye(4)
    for op in c.ops:
        m = op.matrix()
        if op.qubits == (0,):
            m = np.kron(m, np.eye(2))
        elif op.qubits == (1,):
            m = np.kron(np.eye(2), m)
        elif op.qubits == (1, 0):
            m = swap @ m @ swap
        unitary = m @ unitary
    np.testing.assert_allclose(step_tensor(step).reshape(4, 4), swap @ unitary @ swap, atol=1e-12)


def test_gate_by_gate_fits_a_small_memory_limit_or_says_why():
    c = random_circuit(9, 60, seed=1)
    probs = np.abs(dense_state(c)) ** 2
    # 64 KiB holds a few shots' cached values, not a 256-shot batch: the batch shrinks, and the
    # samples stay those of the default batch (the draws are made per shot up front).
    s = sample(c, 3000, seed=3, method="gates", memory_limit=64 * 1024)
    np.testing.assert_array_equal(s, sample(c, 3000, seed=3, method="gates"))
    assert _chi_square_pvalue(s, probs) > 1e-3
    with pytest.raises(ResourceLimitError, match="memory limit"):
        sample(c, 10, seed=0, method="gates", memory_limit=64)


def test_diagonal_steps_are_taken_without_a_redraw(monkeypatch):
    import tnsim.queries.gatewise as gatewise

    calls = []
    original = gatewise._draw

    def counting(amplitudes, uniform):
        calls.append(len(amplitudes))
        return original(amplitudes, uniform)

    monkeypatch.setattr(gatewise, "_draw", counting)
    # Steps: cz(0,1) and cz(2,3) carry the Hadamards; cz(1,2), cz(0,1) and the controlled
    # phase are diagonal; rx(3) joins the last step on qubit 3, cz(2,3), which is not.
    c = Circuit(4).h(0).h(1).h(2).h(3).cz(0, 1).cz(2, 3).cz(1, 2).cz(0, 1).cp(0.7, 1, 2)
    c.rx(0.4, 3)
    s = sample(c, 4000, seed=5, method="gates")
    assert sum(calls) == 2 * 4000  # two redraws per shot
    assert _chi_square_pvalue(s, np.abs(dense_state(c)) ** 2) > 1e-3


def test_gate_by_gate_samples_do_not_depend_on_the_plan(monkeypatch):
    # Found in development: taking a layer's steps in the order of the tree's leaves made the
    # samples of a seed depend on the plan, which comes from a time-limited search.
    import tnsim.queries.gatewise as gatewise
    from tnsim.plan.driver import greedy_tree, make_plan

    c = random_circuit(10, 80, seed=11)
    first = sample(c, 300, seed=4, method="gates")

    def greedy(network, runs):  # another (deterministic) tree for every layer
        tree = greedy_tree(network.indices, network.output, network.size)
        return dataclasses.replace(make_plan(network), tree=tree)

    monkeypatch.setattr(gatewise, "plan_for_runs", greedy)
    np.testing.assert_array_equal(sample(c, 300, seed=4, method="gates"), first)


def test_gate_by_gate_is_reproducible_and_seed_dependent():
    c = random_circuit(6, 30, seed=3)
    a, b = sample(c, 50, seed=7, method="gates"), sample(c, 50, seed=7, method="gates")
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, sample(c, 50, seed=8, method="gates"))


def test_layer_plan_search_counts_elements_written(monkeypatch):
    # Bug found in review: the decision to search for a better layer plan used FLOPs only;
    # batched runs of write-heavy trees are far slower than their FLOPs at the matmul rate,
    # so plans ~10x too costly were kept and 7x7x8 sampling time varied 6x between runs.
    # The decision now lives in plan_for_runs (used for every layer).
    import tnsim.execution.timemodel as timemodel
    import tnsim.queries.gatewise as gatewise
    from tnsim.fitted import WRITE_FLOPS
    from tnsim.plan.driver import make_plan

    c = random_circuit(8, 60, seed=2)
    steps = gatewise.gate_steps(c)
    t = min(k for k, st in enumerate(steps) if st.layer == steps[-1].layer)
    layer = gatewise._layer_network(steps, t, len(steps), np.complex128)
    default = make_plan(layer.network)
    flops, written = default.flops, sum(default.tree.intermediate_sizes())
    assert WRITE_FLOPS * written > 4 * flops  # a write-heavy plan, as on grid circuits
    # A rate at which the FLOPs alone forecast a search of half the floor.
    runs = 16
    rate = timemodel.PLAN_SHARE * runs * flops / (timemodel.MIN_PLAN_SECONDS / 2)
    monkeypatch.setattr(timemodel, "matmul_rate", lambda dtype: rate)
    budgets = []

    def spy(network, **kwargs):
        budgets.append(kwargs.get("time_budget"))
        return make_plan(network, **kwargs)

    monkeypatch.setattr(timemodel, "make_plan", spy)
    timemodel.plan_for_runs(layer.network, runs)
    assert budgets[-1] is not None and budgets[-1] > timemodel.MIN_PLAN_SECONDS
