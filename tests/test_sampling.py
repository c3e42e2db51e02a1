"""Exact sampling against the dense output distribution (chi-square goodness of fit)."""

import numpy as np
import pytest
from scipy.stats import chisquare

import tnsim.sampling as sampling
from tnsim import Circuit
from tnsim.errors import InputError, ResourceLimitError
from tnsim.sampling import sample
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
        obs = np.append(obs, counts[~big].sum())
        exp = np.append(exp, expected[~big].sum())
    return chisquare(obs, exp).pvalue


def _only(kind, original):
    def pick(*args):
        cands = original(*args)
        return [c for c in cands if c[0] == kind] or [c for c in cands if c[0] == "dbl"]

    return pick


@pytest.mark.parametrize(
    "block, kind, width, direct",
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
    s = sample(c, 8000, seed=2, block=block)
    assert s.shape == (8000, 10) and s.dtype == np.uint8
    assert _chi_square_pvalue(s, probs) > 1e-3


def test_memory_limit_is_respected():
    c = random_circuit(10, 60, seed=5)
    with pytest.raises(ResourceLimitError, match="memory limit"):
        sample(c, 10, seed=0, block=4, memory_limit=64)


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


def test_deterministic_outputs_and_wide_circuit():
    c = Circuit(300).x(5).x(299).h(100).cx(100, 101)
    s = sample(c, 64, seed=1, block=8)
    assert np.all(s[:, 5] == 1) and np.all(s[:, 299] == 1)
    np.testing.assert_array_equal(s[:, 100], s[:, 101])
    assert 0 < s[:, 100].sum() < 64
    assert s.sum() == 2 * 64 + 2 * s[:, 100].sum()


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


# Gate-by-gate sampling (tnsim.gatewise): Bravyi, Gosset and Liu, "How to simulate quantum
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
    from tnsim.families import grid_circuit

    c = grid_circuit(3, 3, 6, seed=3)
    s = sample(c, 6000, seed=1, method="gates")
    assert _chi_square_pvalue(s, np.abs(dense_state(c)) ** 2) > 1e-3
    other = np.abs(dense_state(grid_circuit(3, 3, 6, seed=4))) ** 2
    assert _chi_square_pvalue(s, other) < 1e-6


def test_gate_steps_keep_the_circuit():
    from tnsim.gatewise import gate_steps

    # Taking the steps layer by layer reorders gates only across different qubits.
    c = random_circuit(8, 70, seed=9)
    steps = gate_steps(c)
    assert sum(len(st.ops) for st in steps) == len(c.ops)
    assert [st.layer for st in steps] == sorted(st.layer for st in steps)
    reordered = Circuit(8)
    reordered.ops = [op for st in steps for op in st.ops]
    np.testing.assert_allclose(dense_state(reordered), dense_state(c), atol=1e-12)


def test_steps_not_taken_are_identities_in_the_layer_network():
    from tnsim.circuit import Operation
    from tnsim.gatewise import _layer_network, gate_steps

    c = random_circuit(7, 50, seed=4)
    steps = gate_steps(c)
    end = max(k for k, st in enumerate(steps) if st.layer == steps[len(steps) // 2].layer) + 1
    for taken in range(end - 2, end + 1):
        net, qubits = _layer_network(steps, taken, end, np.complex128)
        local = {q: k for k, q in enumerate(qubits)}
        part = Circuit(len(qubits))
        part.ops = [
            Operation(op.name, tuple(local[q] for q in op.qubits), op.params, op.custom)
            for st in steps[:taken]
            for op in st.ops
        ]
        np.testing.assert_allclose(net.dense().reshape(-1), dense_state(part), atol=1e-12)


def test_gate_by_gate_fits_a_small_memory_limit_or_says_why():
    c = random_circuit(9, 60, seed=1)
    probs = np.abs(dense_state(c)) ** 2
    # 16 KiB holds one group of 4 variants but not a 256-amplitude chunk: the chunk shrinks.
    s = sample(c, 3000, seed=3, method="gates", memory_limit=16 * 1024)
    assert _chi_square_pvalue(s, probs) > 1e-3
    with pytest.raises(ResourceLimitError, match="memory limit"):
        sample(c, 10, seed=0, method="gates", memory_limit=64)


def test_diagonal_steps_are_taken_without_a_redraw(monkeypatch):
    import tnsim.gatewise as gatewise

    calls = []
    original = gatewise._step_probabilities

    def counting(engine, members, s):
        calls.append(s)
        return original(engine, members, s)

    monkeypatch.setattr(gatewise, "_step_probabilities", counting)
    # Steps: cz(0,1) and cz(2,3) carry the Hadamards; cz(1,2), cz(0,1) and the controlled
    # phase are diagonal; rx(3) joins the last step on qubit 3, cz(2,3), which is not.
    c = Circuit(4).h(0).h(1).h(2).h(3).cz(0, 1).cz(2, 3).cz(1, 2).cz(0, 1).cp(0.7, 1, 2)
    c.rx(0.4, 3)
    s = sample(c, 4000, seed=5, method="gates")
    assert len(calls) == 2
    assert _chi_square_pvalue(s, np.abs(dense_state(c)) ** 2) > 1e-3


def test_gate_by_gate_is_reproducible_and_seed_dependent():
    c = random_circuit(6, 30, seed=3)
    a, b = sample(c, 50, seed=7, method="gates"), sample(c, 50, seed=7, method="gates")
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, sample(c, 50, seed=8, method="gates"))


def test_layer_plan_search_counts_elements_written(monkeypatch):
    # Bug found in review: the decision to search for a better layer plan used FLOPs only;
    # batched runs of write-heavy trees are far slower than their FLOPs at the matmul rate,
    # so plans ~10x too costly were kept and 7x7x8 sampling time varied 6x between runs.
    import tnsim.gatewise as gatewise
    from tnsim.batch import BatchContraction
    from tnsim.plan.search import WRITE_FLOPS

    c = random_circuit(8, 60, seed=2)
    steps = gatewise.gate_steps(c)
    net, _ = gatewise._layer_network(steps, len(steps), len(steps), np.complex128)
    probe = BatchContraction(net, net.output, (), 16)
    flops, written = sum(probe.flops()), probe.written_per_run()
    assert WRITE_FLOPS * written > 4 * flops  # a write-heavy plan, as on grid circuits
    # A rate at which the FLOPs alone forecast a search of 0.2 s (below the 0.5 s floor).
    rate = gatewise.PLAN_SHARE * flops / 0.2
    monkeypatch.setattr(gatewise, "matmul_rate", lambda dtype: rate)
    budgets = []
    original = gatewise.fitted_engine

    def spy(*args, **kwargs):
        budgets.append(kwargs["time_budget"])
        return original(*args, **kwargs)

    monkeypatch.setattr(gatewise, "fitted_engine", spy)
    gatewise._first_engine(net, 16, 4, 2**30, 16)
    assert budgets[0] is not None and budgets[0] > gatewise.MIN_PLAN_SECONDS
