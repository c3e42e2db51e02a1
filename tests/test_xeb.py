"""Linear XEB and Porter-Thomas statistics of random circuits."""

import numpy as np
import pytest
from scipy.stats import kstest

from tnsim import Circuit
from tnsim.circuits.families import brickwork, grid_circuit
from tnsim.errors import InputError
from tnsim.queries.sampling import sample
from tnsim.queries.xeb import scaled_probabilities, xeb
from tnsim.testing import dense_state

N = 12
CIRCUIT = grid_circuit(3, 4, 16, seed=7)  # 16 cycles on a 3x4 grid: anti-concentrated


def test_porter_thomas():
    # Boixo et al., "Characterizing quantum supremacy in near-term devices", Nature Physics
    # 14, 595 (2018): output probabilities of random circuits follow Porter-Thomas, i.e.
    # 2^n p is distributed as Exp(1).  Kolmogorov-Smirnov test (scipy.stats.kstest).
    rows = ((np.arange(2**N)[:, None] >> np.arange(N - 1, -1, -1)) & 1).astype(np.uint8)
    values = scaled_probabilities(CIRCUIT, rows)
    np.testing.assert_allclose(values, 2**N * np.abs(dense_state(CIRCUIT)) ** 2, rtol=1e-9)
    assert kstest(values, "expon").pvalue > 1e-3
    # A shallow circuit does not anti-concentrate: the same test rejects it.
    shallow = scaled_probabilities(brickwork(N, 2, seed=7), rows)
    assert kstest(shallow, "expon").pvalue < 1e-6


def test_xeb_of_exact_samples_and_of_uniform_bitstrings():
    # Arute et al., Nature 574, 505 (2019): F = 2^n <p(x)> - 1 is ~1 for ideal samples of a
    # Porter-Thomas distribution and 0 for uniformly random bitstrings.
    probs = np.abs(dense_state(CIRCUIT)) ** 2
    ideal = 2**N * float((probs**2).sum()) - 1  # exact expectation for ideal samples
    good = xeb(CIRCUIT, sample(CIRCUIT, 3000, seed=3))
    assert good.num_samples == 3000
    assert abs(good.fidelity - ideal) < 4 * good.standard_error
    assert abs(good.fidelity - 1) < 0.15
    uniform = np.random.default_rng(4).integers(0, 2, (3000, N)).astype(np.uint8)
    bad = xeb(CIRCUIT, uniform)
    assert abs(bad.fidelity) < 4 * bad.standard_error
    assert good.fidelity - bad.fidelity > 10 * good.standard_error


def test_xeb_beyond_double_precision():
    # 2^1100 overflows float64; the log form keeps 2^n p(x) finite.
    c = brickwork(1100, 3, seed=1)
    rows = np.random.default_rng(5).integers(0, 2, (8, 1100)).astype(np.uint8)
    r = xeb(c, rows)
    assert np.isfinite(r.fidelity) and np.isfinite(r.standard_error) and r.num_samples == 8


def test_xeb_input_errors():
    c = Circuit(2).h(0)
    with pytest.raises(InputError, match="at least 2"):
        xeb(c, ["00"])
    with pytest.raises(InputError, match="bit"):
        xeb(c, ["000", "111"])
    with pytest.raises(InputError, match="shape"):
        xeb(c, np.zeros((3, 5), dtype=np.uint8))


def test_counts_weight_samples_like_repeated_lines():
    rows = sample(CIRCUIT, 400, seed=9)  # 400 draws from 4,096 outcomes: some repeat
    uniq, counts = np.unique(rows, axis=0, return_counts=True)
    assert len(uniq) < 400
    weighted = xeb(CIRCUIT, uniq, counts=counts)
    plain = xeb(CIRCUIT, rows)
    assert weighted.num_samples == plain.num_samples == 400
    assert weighted.fidelity == pytest.approx(plain.fidelity, rel=1e-12, abs=1e-12)
    assert weighted.standard_error == pytest.approx(plain.standard_error, rel=1e-10)
    repeated = xeb(CIRCUIT, rows[:2], counts=[5, 0])
    assert repeated.num_samples == 5
    assert repeated.standard_error == 0.0


def test_log_form_matches_exact_decimal_arithmetic_where_floats_overflow():
    # A shallow 1,200-qubit circuit: its own samples have 2^n p(x) ~ 10^(hundreds) and the
    # squares in the standard deviation overflow float64.  Reference: the same mean and
    # sample standard deviation in Python's decimal arithmetic (28+ digits, no overflow).
    import decimal

    from tnsim.queries.xeb import log2_scaled_probabilities

    c = brickwork(1200, 1, seed=3)
    rows = sample(c, 6, seed=2)
    with np.errstate(all="raise"):
        r = xeb(c, rows)
        logs = log2_scaled_probabilities(c, rows)
    ctx = decimal.Context(prec=40, Emax=10**6, Emin=-(10**6))
    vals = [ctx.power(decimal.Decimal(2), decimal.Decimal(repr(float(v)))) for v in logs]
    m = len(vals)
    mean = sum(vals, decimal.Decimal(0)) / m
    var = sum(((v - mean) ** 2 for v in vals), decimal.Decimal(0)) / (m - 1)
    se = ctx.sqrt(var / m)
    assert logs.max() > 1024 / 2  # squares overflow float64
    assert r.log10_mean == pytest.approx(float(mean.log10()), abs=1e-9)
    assert r.log10_standard_error == pytest.approx(float(se.log10()), abs=1e-9)
    assert r.overflows or np.isfinite(r.fidelity)


def test_zero_probability_samples_and_bad_counts():
    c = Circuit(2).h(0).cx(0, 1)
    r = xeb(c, ["01", "10"])
    assert r.fidelity == -1.0 and r.log10_mean == -np.inf
    with pytest.raises(InputError, match="counts"):
        xeb(c, ["00", "11"], counts=[1])
    with pytest.raises(InputError, match="non-negative"):
        xeb(c, ["00", "11"], counts=[3, -1])
    with pytest.raises(InputError, match="at least 2"):
        xeb(c, ["00", "11"], counts=[1, 0])
