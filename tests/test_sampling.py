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
    obs = np.append(counts[big], counts[~big].sum())
    exp = np.append(expected[big], expected[~big].sum())
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
    ):
        with pytest.raises(InputError, match=words):
            sample(c, **kwargs)
