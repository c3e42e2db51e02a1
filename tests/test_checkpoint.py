"""Checkpoints: resume bit-for-bit, refuse foreign or damaged files, survive Ctrl-C."""

import json
import os
import signal
import subprocess
import sys
import textwrap

import numpy as np
import pytest

import tnsim.execution.slices as ex
from tnsim.errors import CheckpointError
from tnsim.execution.checkpoint import OrderedSum
from tnsim.execution.executors import SliceError
from tnsim.execution.slices import execute
from tnsim.network.scaled import Scaled

TESTS = os.path.dirname(os.path.abspath(__file__))


def _same_bits(a: Scaled, b: Scaled) -> bool:
    assert np.all(np.abs(a.mantissa) > 0)  # comparing zeros would prove nothing
    return a.exponent == b.exponent and a.mantissa.tobytes() == b.mantissa.tobytes()


@pytest.fixture
def case(sliced_case):
    return sliced_case(14, 90, seed=2, num_sliced=4)


def _stop_after(n):
    def callback(done, total):
        if done >= n:
            raise KeyboardInterrupt

    return callback


def test_interrupted_run_resumes_bit_for_bit(case, tmp_path):
    _, _, network, tree, sliced = case
    path = tmp_path / "run.ckpt"
    whole = execute(network, tree, sliced, chunk_size=1)
    with pytest.raises(KeyboardInterrupt):
        execute(network, tree, sliced, chunk_size=1, checkpoint=path, progress=_stop_after(3))
    seen = []
    resumed = execute(
        network, tree, sliced, chunk_size=1, checkpoint=path, progress=lambda d, t: seen.append(d)
    )
    assert seen[0] == 4 and seen[-1] == 16  # chunks 0..2 came from the file
    assert _same_bits(resumed, whole)


def test_finished_checkpoint_needs_no_work(case, tmp_path, monkeypatch):
    _, _, network, tree, sliced = case
    path = tmp_path / "done.ckpt"
    first = execute(network, tree, sliced, chunk_size=4, checkpoint=path)

    def boom(*args, **kwargs):
        raise AssertionError("no slice should run")

    monkeypatch.setattr(ex, "contract_tree", boom)
    assert _same_bits(execute(network, tree, sliced, chunk_size=4, checkpoint=path), first)


def test_file_is_npz_with_json_header_and_no_pickle(case, tmp_path):
    _, _, network, tree, sliced = case
    path = tmp_path / "f.ckpt"
    with pytest.raises(KeyboardInterrupt):
        execute(network, tree, sliced, chunk_size=1, checkpoint=path, progress=_stop_after(2))
    with np.load(path, allow_pickle=False) as data:
        header = json.loads(bytes(data["header"]).decode())
        assert header["format"] == "tnsim-checkpoint"
        assert header["prefix_count"] == 2 and header["num_chunks"] == 16
        assert data["prefix"].dtype == np.complex128
    assert not [p for p in os.listdir(tmp_path) if p.startswith(".tnsim")]  # no temp files left


def test_checkpoint_of_another_run_is_refused(sliced_case, tmp_path):
    _, _, network, tree, sliced = sliced_case(14, 90, seed=2, num_sliced=4)
    path = tmp_path / "a.ckpt"
    execute(network, tree, sliced, chunk_size=2, checkpoint=path)
    with pytest.raises(CheckpointError, match="different circuit, query or plan"):
        execute(network, tree, sliced[:3], chunk_size=2, checkpoint=path)
    with pytest.raises(CheckpointError, match="different"):
        execute(network, tree, sliced, chunk_size=4, checkpoint=path)
    _, _, other, other_tree, other_sliced = sliced_case(14, 90, seed=3, num_sliced=4)
    with pytest.raises(CheckpointError, match="different"):
        execute(other, other_tree, other_sliced, chunk_size=2, checkpoint=path)


@pytest.mark.parametrize("damage", ["truncate", "flip", "garbage", "empty"])
def test_damaged_checkpoint_is_refused(case, tmp_path, damage):
    _, _, network, tree, sliced = case
    path = tmp_path / "d.ckpt"
    with pytest.raises(KeyboardInterrupt):
        execute(network, tree, sliced, chunk_size=1, checkpoint=path, progress=_stop_after(5))
    blob = path.read_bytes()
    if damage == "truncate":
        blob = blob[: len(blob) // 2]
    elif damage == "flip":
        magic = blob.index(b"\x93NUMPY", blob.index(b"prefix.npy"))  # NPY format 1.0
        pos = magic + 10 + int.from_bytes(blob[magic + 8 : magic + 10], "little") + 3
        blob = blob[:pos] + bytes([blob[pos] ^ 0xFF]) + blob[pos + 1 :]
    elif damage == "garbage":
        blob = b"not a checkpoint at all"
    else:
        blob = b""
    path.write_bytes(blob)
    with pytest.raises(CheckpointError, match=r"d\.ckpt"):
        execute(network, tree, sliced, chunk_size=1, checkpoint=path)


def test_failed_slice_keeps_finished_chunks(case, tmp_path, monkeypatch):
    _, _, network, tree, sliced = case
    path = tmp_path / "f.ckpt"
    whole = execute(network, tree, sliced, chunk_size=1)
    real, calls = ex.contract_tree, []

    def flaky(*args, **kwargs):
        calls.append(1)
        if len(calls) == 6:
            raise MemoryError("injected")
        return real(*args, **kwargs)

    monkeypatch.setattr(ex, "contract_tree", flaky)
    with pytest.raises(SliceError, match="slice 5 of 16"):
        execute(network, tree, sliced, chunk_size=1, checkpoint=path)
    monkeypatch.setattr(ex, "contract_tree", real)
    seen = []
    resumed = execute(
        network, tree, sliced, chunk_size=1, checkpoint=path, progress=lambda d, t: seen.append(d)
    )
    assert seen[0] == 6  # chunks 0..4 were kept
    assert _same_bits(resumed, whole)


def test_ordered_sum_is_independent_of_arrival_order():
    # Floating-point addition is not associative (IEEE 754-2019, sec. 4.3), so the
    # sum must be taken in one fixed order: compare against left-to-right addition.
    rng = np.random.default_rng(7)
    values = list(rng.normal(size=20) * 10.0 ** rng.integers(-8, 8, size=20))
    want = 0.0
    for v in values:
        want = want + v
    arrival_sums = set()
    for seed in range(4):
        s = OrderedSum(len(values))
        naive = 0.0
        for i in np.random.default_rng(seed).permutation(len(values)):
            s.add(int(i), values[i])
            naive = naive + values[i]
        arrival_sums.add(naive)
        assert np.float64(s.total()).tobytes() == np.float64(want).tobytes()
    assert len(arrival_sums) > 1  # arrival order would have changed the bits


_CHILD = textwrap.dedent(
    """
    import sys, time
    sys.path.insert(0, {tests!r})
    from conftest import _sliced_case
    from tnsim.execution.slices import execute

    _, _, network, tree, sliced = _sliced_case(14, 90, seed=2, num_sliced=4)

    def tick(done, total):
        print("chunk", done, flush=True)
        time.sleep(0.3)

    try:
        execute(network, tree, sliced, chunk_size=1, checkpoint={path!r}, progress=tick)
    except KeyboardInterrupt:
        sys.exit(130)
    """
)


def test_sigint_leaves_a_checkpoint_that_resumes_bit_for_bit(case, tmp_path):
    _, _, network, tree, sliced = case
    path = str(tmp_path / "sig.ckpt")
    code = _CHILD.format(tests=TESTS, path=path)
    child = subprocess.Popen(
        [sys.executable, "-c", code], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )
    try:
        for _ in range(3):
            line = child.stdout.readline()
            assert line.startswith("chunk"), child.stderr.read()
        child.send_signal(signal.SIGINT)
        assert child.wait(timeout=60) == 130
    finally:
        child.kill()
        child.wait()
    with np.load(path, allow_pickle=False) as data:
        header = json.loads(bytes(data["header"]).decode())
    assert 3 <= header["prefix_count"] < 16
    resumed = execute(network, tree, sliced, chunk_size=1, checkpoint=path)
    assert _same_bits(resumed, execute(network, tree, sliced, chunk_size=1))
