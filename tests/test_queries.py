"""Batches of amplitudes, marginals and expectation values against a dense state vector.

Reference throughout: tnsim.testing.dense_state, a state vector built by numpy.tensordot
(the textbook definition of applying gates), qubit 0 the most significant bit.
"""

import numpy as np
import pytest

from tnsim import Circuit
from tnsim.circuits.families import brickwork
from tnsim.errors import InputError
from tnsim.execution.batch import BatchContraction
from tnsim.network.builders import amplitude_network
from tnsim.queries.amplitudes import amplitude, amplitudes, iter_amplitudes
from tnsim.queries.expectation import expectation
from tnsim.queries.marginals import marginal
from tnsim.testing import dense_state, random_circuit

_PAULI = {
    "X": np.array([[0, 1], [1, 0]], dtype=complex),
    "Y": np.array([[0, -1j], [1j, 0]]),
    "Z": np.diag([1.0, -1.0]).astype(complex),
}


def _flat(rows):
    n = rows.shape[1]
    return rows.astype(np.int64) @ (1 << np.arange(n - 1, -1, -1))


def test_batch_with_few_varying_qubits_is_one_open_contraction():
    c = random_circuit(9, 45, seed=4)
    psi = dense_state(c)
    rng = np.random.default_rng(0)
    rows = np.tile(rng.integers(0, 2, 9), (40, 1))
    rows[:, [2, 7, 5]] = rng.integers(0, 2, (40, 3))
    got = amplitudes(c, rows)
    np.testing.assert_allclose(got, psi[_flat(rows)], atol=1e-12)
    assert len(list(iter_amplitudes(c, rows))) == 1


def test_wide_batch_matches_dense():
    # 20 qubits, bitstrings differing everywhere (more than OPEN_LIMIT differing qubits):
    # batched or row by row, whichever costs fewer FLOPs.
    c = brickwork(20, 3, seed=2)
    psi = dense_state(c)
    rows = np.random.default_rng(1).integers(0, 2, (40, 20)).astype(np.uint8)
    starts = [p[0] for p in iter_amplitudes(c, rows, chunk=16)]
    assert starts == sorted(starts) and starts[0] == 0
    np.testing.assert_allclose(amplitudes(c, rows), psi[_flat(rows)], atol=1e-12)


def test_batch_engine_contracts_the_fixed_part_once():
    # The batched engine directly: one plan, the fixed part contracted once, chunks reuse it.
    c = brickwork(20, 3, seed=2)
    psi = dense_state(c)
    rows = np.random.default_rng(3).integers(0, 2, (40, 20)).astype(np.uint8)
    base = amplitude_network(c, None, open_qubits=range(20))
    engine = BatchContraction(base, base.output, (), chunk=16)
    _, per_run = engine.flops()
    assert per_run > 0
    got = np.concatenate(
        [engine.run(rows[k : k + 16]).value().reshape(-1) for k in range(0, 40, 16)]
    )
    np.testing.assert_allclose(got, psi[_flat(rows)], atol=1e-12)


def test_scaled_batch_keeps_wide_amplitudes():
    # 2,400 qubits: |a| = 2^-1200 underflows float64; the scaled form keeps log10|a|
    # (closed form: -1200 log10 2) and the phase, equal to one-at-a-time amplitudes.
    c = Circuit(2400)
    for q in range(2400):
        c.h(q)
    for q in range(0, 2400, 2):
        c.cz(q, q + 1).rz(0.3, q)
    rows = np.random.default_rng(2).integers(0, 2, (6, 2400)).astype(np.uint8)
    s = amplitudes(c, rows, scaled=True)
    logs = s.log10_abs()
    np.testing.assert_allclose(logs, -1200 * np.log10(2), atol=1e-9)
    assert np.all(amplitudes(c, rows) == 0)
    for k in (0, 5):
        one = amplitude(c, rows[k], scaled=True)
        assert logs[k] == pytest.approx(one.log10_abs(), abs=1e-9)
        assert s.phase()[k] == pytest.approx(one.phase(), abs=1e-9)


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("qubits", [[0], [3, 1], [5, 0, 2], [1, 2, 3, 4, 6, 7]])
def test_marginal_matches_dense(qubits, seed):
    n = 8
    c = random_circuit(n, 40, seed=seed)
    p = np.abs(dense_state(c).reshape((2,) * n)) ** 2
    others = tuple(q for q in range(n) if q not in qubits)
    ref = p.sum(axis=others)
    kept = [q for q in range(n) if q in qubits]
    ref = np.transpose(ref, [kept.index(q) for q in qubits]).reshape(-1)
    np.testing.assert_allclose(marginal(c, qubits), ref, atol=1e-12)


def test_marginal_input_errors():
    c = Circuit(3).h(0)
    for bad, words in (
        ([], "at least one"),
        ([0, 0], "repeats"),
        ([3], "not an index"),
        ("01", "list of qubit"),
        ([True], "not an index"),
    ):
        with pytest.raises(InputError, match=words):
            marginal(c, bad)


def _dense_expectation(psi, n, terms):
    total = 0.0
    psi = psi.reshape((2,) * n)
    for coef, paulis in terms:
        phi = psi
        for q, p in paulis:
            phi = np.moveaxis(np.tensordot(_PAULI[p], phi, axes=(1, q)), 0, q)
        total += coef * np.vdot(psi, phi).real
    return total


@pytest.mark.parametrize("seed", range(5))
def test_expectation_of_random_pauli_sums_matches_dense(seed):
    n = 10
    c = random_circuit(n, 50, seed=seed)
    rng = np.random.default_rng(seed)
    terms, text = [], []
    for _ in range(5):
        qs = rng.choice(n, rng.integers(1, 4), replace=False)
        letters = rng.choice(list("XYZ"), len(qs))
        coef = round(float(rng.normal()), 3)
        terms.append((coef, list(zip(qs.tolist(), letters.tolist()))))
        text.append(f"{coef:+} " + " ".join(f"{p}{q}" for q, p in zip(qs, letters)))
    text.append("+ 0.25")
    terms.append((0.25, []))
    ref = _dense_expectation(dense_state(c), n, terms)
    assert expectation(c, " ".join(text)) == pytest.approx(ref, abs=1e-10)


def test_expectation_errors():
    c = Circuit(2).h(0)
    with pytest.raises(InputError, match="column"):
        expectation(c, "Z0 ** Z1")
    with pytest.raises(InputError, match="circuit has 2"):
        expectation(c, "Z5")


def test_large_batch_of_wide_random_bitstrings_uses_one_open_contraction(monkeypatch):
    # 600 random bitstrings differing on all 18 qubits: one contraction with every leg open
    # (2**18 <= 600 * 4096); checked against the dense state vector (tnsim.testing).
    import tnsim.queries.amplitudes as q
    from tnsim.testing import dense_state, random_circuit

    c = random_circuit(18, 60, seed=9, gates=["h", "cz", "rx", "cx", "t"])
    rows = np.random.default_rng(3).integers(0, 2, size=(600, 18), dtype=np.uint8)
    calls = []
    real = q._open_block
    monkeypatch.setattr(q, "_open_block", lambda *a: calls.append(1) or real(*a))
    got = q.amplitudes(c, rows)
    psi = dense_state(c)
    np.testing.assert_allclose(
        got, psi[rows.astype(np.int64) @ (1 << np.arange(17, -1, -1))], atol=1e-10
    )
    assert calls == [1]


def test_marginal_of_a_deep_narrow_circuit_uses_all_amplitudes(monkeypatch):
    # Deep 12-qubit circuit: the light cone is every qubit, so one contraction of all
    # amplitudes is cheaper than the doubled network; checked against the dense state
    # vector (tnsim.testing.dense_state), summed over the other qubits with numpy.
    import tnsim.queries.marginals as q
    from tnsim.testing import dense_state, random_circuit

    c = random_circuit(12, 300, seed=21)
    calls = []
    real = q.all_probabilities
    monkeypatch.setattr(q, "all_probabilities", lambda *a, **k: calls.append(1) or real(*a, **k))
    got = q.marginal(c, [7, 2, 10])
    p = np.abs(dense_state(c).reshape((2,) * 12)) ** 2
    ref = p.sum(axis=tuple(k for k in range(12) if k not in (2, 7, 10))).transpose(1, 0, 2)
    np.testing.assert_allclose(got, ref.reshape(-1), atol=1e-12)
    assert calls == [1]


def test_expectation_of_a_deep_narrow_circuit_uses_one_state():
    # Deep 12-qubit circuit: every term's cone is the whole circuit; the terms are read
    # from one contraction of all amplitudes. Reference: <psi|P|psi> with numpy on the
    # dense state vector (tnsim.testing.dense_state).
    from tnsim.queries.expectation import TermCache
    from tnsim.testing import dense_state, random_circuit

    c = random_circuit(12, 300, seed=22)
    psi = dense_state(c).reshape((2,) * 12)
    paulis = {"X": [[0, 1], [1, 0]], "Y": [[0, -1j], [1j, 0]], "Z": [[1, 0], [0, -1]]}
    cache = TermCache(c)
    for term in [((0, "Z"), (1, "Z")), ((3, "X"),), ((7, "Y"), (11, "Z"), (2, "X"))]:
        out = psi
        for q, letter in term:
            out = np.moveaxis(np.tensordot(np.array(paulis[letter]), out, axes=(1, q)), 0, q)
        assert cache.value(term) == pytest.approx(np.vdot(psi, out).real, abs=1e-12)
    assert cache._psi is not None


def test_amplitudes_under_a_tight_limit_fit_the_executors_count(monkeypatch):
    # Regression: the row-by-row path planned with the planner's memory count, which leaves
    # out reordering copies, so the executor refused the plan under the same limit.
    import tnsim
    import tnsim.queries.amplitudes as q
    from tnsim.network.builders import amplitude_network
    from tnsim.network.simplify import absorb_small
    from tnsim.plan.driver import make_plan
    from tnsim.testing import dense_state, random_circuit

    c = random_circuit(14, 120, seed=3, gates=["h", "cx", "rz", "cz", "ry"])
    limit = make_plan(absorb_small(amplitude_network(c, "0" * 14))).peak_bytes
    monkeypatch.setattr(q, "OPEN_LIMIT", 0)
    monkeypatch.setattr(q, "WIDE_OPEN_LIMIT", 0)

    real = q.fitted_engine

    def costly(*args, **kwargs):  # make the batch engine look dear: row by row runs
        engine = real(*args, **kwargs)
        engine.flops = lambda: (10**30, 10**30)
        return engine

    monkeypatch.setattr(q, "fitted_engine", costly)
    rows = np.random.default_rng(5).integers(0, 2, size=(3, 14), dtype=np.uint8)
    with tnsim.run_options(memory_limit=limit):
        got = q.amplitudes(c, rows)
    psi = dense_state(c)
    np.testing.assert_allclose(
        got, psi[rows.astype(np.int64) @ (1 << np.arange(13, -1, -1))], atol=1e-10
    )
