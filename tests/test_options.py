"""Run options: every public query takes the same memory limit and dtype, or a block's.

The options are worked out in one function, tnsim.execution.options.resolve_options:
the argument, else the enclosing run_options block, else the default.  References:
tnsim.testing.dense_state (a numpy state vector, qubit 0 the most significant bit)
and numpy.einsum.
"""

import contextlib

import networkx as nx
import numpy as np
import pytest

import tnsim
from tnsim.errors import InputError, ResourceLimitError
from tnsim.testing import dense_state, random_circuit

N = 6
CIRCUIT = random_circuit(N, 30, seed=11)
PSI = dense_state(CIRCUIT)
ROWS = np.random.default_rng(3).integers(0, 2, size=(5, N), dtype=np.uint8)
GRAPH = nx.random_regular_graph(3, 8, seed=1)
RING = [np.random.default_rng(k).standard_normal((4, 2, 4)) for k in range(4)]


def _flat(rows: np.ndarray) -> np.ndarray:
    return rows.astype(np.int64) @ (1 << np.arange(rows.shape[1] - 1, -1, -1))


def _probs(qubits):
    p = np.abs(PSI.reshape((2,) * N)) ** 2
    others = tuple(k for k in range(N) if k not in qubits)
    return np.moveaxis(p.sum(axis=others), np.argsort(np.argsort(qubits)), range(len(qubits)))


def _zz01_x2() -> float:
    """<psi| Z0 Z1 + 0.5 X2 |psi>: Z0 Z1 is a sign per basis state, X2 flips qubit 2."""
    psi = PSI.reshape((2,) * N)
    sign = np.array([1.0, -1.0])
    zz = np.sum(
        np.abs(psi) ** 2 * sign[:, None, None, None, None, None] * sign[:, None, None, None, None]
    )
    x2 = np.vdot(psi, np.flip(psi, axis=2)).real
    return float(zz + 0.5 * x2)


def _iter(c, rows, **kw):
    parts = sorted(tnsim.iter_amplitudes(c, rows, **kw), key=lambda p: p[0])
    return np.concatenate([m * np.exp2(e.astype(float)) for _, m, e in parts])


# name -> (call with keyword options, reference value or None to compare with no options)
QUERIES = {
    "amplitude": (lambda **kw: tnsim.amplitude(CIRCUIT, "010110", **kw), PSI[0b010110]),
    "amplitudes": (lambda **kw: tnsim.amplitudes(CIRCUIT, ROWS, **kw), PSI[_flat(ROWS)]),
    "iter_amplitudes": (lambda **kw: _iter(CIRCUIT, ROWS, **kw), PSI[_flat(ROWS)]),
    "marginal": (lambda **kw: tnsim.marginal(CIRCUIT, [4, 1], **kw), _probs([4, 1]).ravel()),
    "expectation": (
        lambda **kw: tnsim.expectation(CIRCUIT, "Z0 Z1 + 0.5 X2", **kw),
        _zz01_x2(),
    ),
    "sample": (lambda **kw: tnsim.sample(CIRCUIT, 30, seed=4, **kw), None),
    "sample-gates": (lambda **kw: tnsim.sample(CIRCUIT, 30, seed=4, method="gates", **kw), None),
    "sample-marginals": (
        lambda **kw: tnsim.sample(CIRCUIT, 30, seed=4, method="marginals", block=2, **kw),
        None,
    ),
    # linear XEB of the rows: 2^n * mean |<x|C|0>|^2 - 1 (Arute et al., Nature 574, 505, 2019)
    "xeb": (
        lambda **kw: tnsim.xeb(CIRCUIT, ROWS, **kw).fidelity,
        2**N * np.mean(np.abs(PSI[_flat(ROWS)]) ** 2) - 1,
    ),
    "maxcut_energy": (lambda **kw: tnsim.maxcut_energy(GRAPH, [0.4, 0.2], [0.3, 0.1], **kw), None),
    "contract": (
        lambda **kw: tnsim.contract("aib,bjc,ckd,dla->ijkl", *RING, **kw),
        np.einsum("aib,bjc,ckd,dla->ijkl", *RING),
    ),
}


def _check(name, got, *, rtol=1e-10):
    call, ref = QUERIES[name]
    if ref is None:
        ref = call()
    if name.startswith("sample"):
        np.testing.assert_array_equal(got, ref)
    else:
        np.testing.assert_allclose(got, ref, rtol=rtol, atol=rtol)


@pytest.mark.parametrize("name", list(QUERIES))
def test_every_query_takes_a_text_memory_limit(name):
    log: list = []
    with tnsim.run_options(log=log):
        got = QUERIES[name][0](memory_limit="1GiB")
    _check(name, got)
    assert all(record.memory_limit == 2**30 for record in log)


@pytest.mark.parametrize("name", list(QUERIES))
def test_every_query_runs_under_the_blocks_memory_limit(name):
    log: list = []
    with tnsim.run_options(memory_limit="1GiB", log=log):
        got = QUERIES[name][0]()
    _check(name, got)
    assert all(record.memory_limit == 2**30 for record in log)


@pytest.mark.parametrize("name", list(QUERIES))
@pytest.mark.parametrize("where", ["argument", "block"])
def test_a_limit_below_one_element_is_refused_by_every_route(name, where):
    # 8 bytes hold no complex element: the batch, sampling and gate-by-gate code must
    # refuse it too, whether the limit is the query's argument or the block's.
    call = QUERIES[name][0]
    block = tnsim.run_options(memory_limit="8 B") if where == "block" else contextlib.nullcontext()
    kwargs = {"memory_limit": "8 B"} if where == "argument" else {}
    with block, pytest.raises(ResourceLimitError):
        call(**kwargs)


@pytest.mark.parametrize("name", list(QUERIES))
def test_every_query_takes_a_dtype_or_the_blocks(name):
    log: list = []
    with tnsim.run_options(log=log):
        got = QUERIES[name][0](dtype=np.complex64)
    _check(name, got, rtol=2e-5)
    assert all(record.itemsize == 8 for record in log)
    log.clear()
    with tnsim.run_options(dtype="complex64", log=log):
        got = QUERIES[name][0]()
    _check(name, got, rtol=2e-5)
    assert all(record.itemsize == 8 for record in log)
    with pytest.raises(InputError, match="dtype"):
        QUERIES[name][0](dtype="float16")


def test_forecast_plans_for_the_limit_the_query_would_run_under():
    with tnsim.run_options(memory_limit="8GiB", workers=4):
        report = tnsim.forecast(CIRCUIT)
    assert report.memory_limit == 2 * 2**30  # 8 GiB over 4 local workers: per slice
    assert tnsim.forecast(CIRCUIT, memory_limit="1GiB").memory_limit == 2**30
    assert tnsim.forecast(CIRCUIT, dtype="complex64").itemsize == 8


def test_amplitudes_with_a_text_limit_on_rows_differing_on_17_qubits():
    # Bug found: rows differing on more than 16 qubits go to the batch engine, which
    # compared the text limit with a byte count (TypeError: '<=' between 'int' and 'str').
    c = random_circuit(18, 60, seed=5)
    psi = dense_state(c)
    rng = np.random.default_rng(8)
    rows = np.tile(rng.integers(0, 2, 18, dtype=np.uint8), (6, 1))
    rows[1:, :17] = rng.integers(0, 2, (5, 17))
    rows[1, :17] = 1 - rows[0, :17]
    assert ((rows != rows[:1]).any(axis=0)).sum() == 17
    got = tnsim.amplitudes(c, rows, memory_limit="1GiB")
    np.testing.assert_allclose(got, psi[_flat(rows)], atol=1e-12)
    with tnsim.run_options(memory_limit="1GiB"):
        np.testing.assert_allclose(tnsim.amplitudes(c, rows), psi[_flat(rows)], atol=1e-12)


def test_the_batch_engine_sizes_its_chunks_by_the_blocks_limit(monkeypatch):
    # The batch code used `memory_limit or default`, ignoring an enclosing block.
    import tnsim.queries.amplitudes as q

    c = random_circuit(18, 60, seed=5)
    rows = np.random.default_rng(9).integers(0, 2, size=(40, 18), dtype=np.uint8)
    monkeypatch.setattr(q, "OPEN_LIMIT", 0)
    monkeypatch.setattr(q, "WIDE_OPEN_LIMIT", 0)
    seen = []
    real = q.fitted_engine

    def spy(*args, **kwargs):
        engine = real(*args, **kwargs)
        seen.append((args[4].memory_limit, engine.chunk))
        return engine

    monkeypatch.setattr(q, "fitted_engine", spy)
    q.amplitudes(c, rows)
    with tnsim.run_options(memory_limit="64KiB"):
        small = q.amplitudes(c, rows)
    np.testing.assert_allclose(small, dense_state(c)[_flat(rows)], atol=1e-12)
    (_, free), (limit, tight) = seen
    assert limit == 64 * 1024 and tight < free


def test_checkpoint_folder_of_a_block_numbers_each_contraction(tmp_path):
    with tnsim.run_options(checkpoint=tmp_path / "ck") as block:
        first = tnsim.execution.options.resolve_options()
        assert first.checkpoint_file() == str(tmp_path / "ck" / "part-00000.ckpt")
        assert first.checkpoint_file() == str(tmp_path / "ck" / "part-00001.ckpt")
        assert block.counter == [2]
        given = tnsim.execution.options.resolve_options(checkpoint=tmp_path / "one.ckpt")
        assert given.checkpoint_file() == str(tmp_path / "one.ckpt")
