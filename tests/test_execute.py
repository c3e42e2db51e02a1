"""The executor: slicing, chunking, executors, memory checks, array backends."""

import tracemalloc
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest

import tnsim.execution.slices as ex
import tnsim.execution.steps as steps_module
import tnsim.execution.treerun as treerun
import tnsim.network.scaled as scaled_module
from tnsim.errors import InputError, ResourceLimitError
from tnsim.execution.executors import SliceError, chunk_bounds
from tnsim.execution.slices import execute
from tnsim.execution.steps import compile_tree, count_flops, peak_memory
from tnsim.network.graph import TensorGraph
from tnsim.network.scaled import Scaled, normalize
from tnsim.plan.driver import greedy_tree
from tnsim.testing import dense_state


def _same_bits(a: Scaled, b: Scaled) -> bool:
    assert np.all(np.abs(a.mantissa) > 0)  # comparing zeros would prove nothing
    return a.exponent == b.exponent and a.mantissa.tobytes() == b.mantissa.tobytes()


def _index(bits: str) -> int:
    return int(bits, 2)  # qubit 0 is the most significant bit of dense_state


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_sliced_amplitude_equals_unsliced_and_state_vector(sliced_case, seed):
    # Reference: the dense state vector of tnsim.testing (numpy.tensordot gate by gate).
    circuit, bits, network, tree, sliced = sliced_case(14, 90, seed=seed, num_sliced=4)
    assert len(sliced) == 4
    whole = complex(execute(network, tree))
    parts = complex(execute(network, tree, sliced, chunk_size=3))
    expected = dense_state(circuit)[_index(bits)]
    assert parts == pytest.approx(expected, abs=1e-12)
    assert parts == pytest.approx(whole, abs=1e-13)


def test_sliced_open_qubits_match_state_vector(sliced_case):
    # Reference: dense state vector; qubits 0 and 3 left open give a 2x2 block of amplitudes.
    circuit, bits, network, tree, sliced = sliced_case(10, 60, seed=5, open_qubits=(0, 3))
    assert sliced and not set(sliced) & set(network.output)
    got = execute(network, tree, sliced, chunk_size=1).value()
    psi = dense_state(circuit).reshape((2,) * 10)
    fixed = [int(b) for b in bits]
    want = psi[(slice(None), *fixed[1:3], slice(None), *fixed[4:])]
    np.testing.assert_allclose(got, want, atol=1e-12)


def test_chunking_and_executor_do_not_change_bits(sliced_case):
    _, _, network, tree, sliced = sliced_case(16, 110, seed=4, num_sliced=4)
    serial = execute(network, tree, sliced, chunk_size=3)
    with ThreadPoolExecutor(3) as pool:
        threaded = execute(network, tree, sliced, chunk_size=3, executor=pool)
    assert _same_bits(serial, threaded)
    other = execute(network, tree, sliced, chunk_size=5)
    assert complex(other) == pytest.approx(complex(serial), abs=1e-13)


def test_process_pool_matches_serial_bit_for_bit(sliced_case):
    _, _, network, tree, sliced = sliced_case(16, 110, seed=4, num_sliced=4)
    serial = execute(network, tree, sliced, chunk_size=2)
    pooled = execute(network, tree, sliced, chunk_size=2, workers=2)
    assert _same_bits(serial, pooled)


def test_count_flops_matches_matrix_product_formula():
    # An (m x k)(k x n) complex matrix product is m*n*k multiply-adds of 8 real
    # FLOPs each (common practice).
    tree = greedy_tree([(0, 1), (1, 2)], (0, 2), {0: 3, 1: 7, 2: 5})
    assert count_flops(compile_tree(tree)) == 8 * 3 * 7 * 5
    # batched: a hyperedge kept as a batch axis multiplies the work by its size
    tree = greedy_tree([(9, 0, 1), (9, 1, 2)], (9, 0, 2), {0: 3, 1: 7, 2: 5, 9: 4})
    assert count_flops(compile_tree(tree)) == 8 * 4 * 3 * 7 * 5


def test_peak_memory_bounds_measured_allocation(sliced_case):
    _, _, network, tree, _ = sliced_case(16, 110, seed=4)
    steps = compile_tree(tree)
    estimate = peak_memory(tree, steps, 16)
    ex.contract_tree(network.arrays, tree, steps)  # warm caches outside the measurement
    tracemalloc.start()
    try:
        ex.contract_tree(network.arrays, tree, steps)
        _, measured = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert measured <= estimate + 64 * 1024
    assert estimate <= 8 * measured


def test_too_small_memory_limit_is_refused_with_smallest_limit(sliced_case):
    _, _, network, tree, sliced = sliced_case(16, 110, seed=4, num_sliced=4)
    need = peak_memory(tree, compile_tree(tree, sliced), 16)
    with pytest.raises(ResourceLimitError, match=f"smallest limit .* is {need} bytes"):
        execute(network, tree, sliced, memory_limit=need - 1)
    assert execute(network, tree, sliced, memory_limit=need).exponent is not None
    with pytest.raises(ResourceLimitError, match=f"is {2 * need} bytes"):
        execute(network, tree, sliced, memory_limit=need, workers=2)


def test_bad_sliced_labels_are_input_errors(sliced_case):
    _, _, network, tree, _ = sliced_case(8, 30, seed=1, open_qubits=(2,))
    with pytest.raises(InputError, match="output"):
        execute(network, tree, [network.output[0]])
    with pytest.raises(InputError, match="not a"):
        execute(network, tree, [10**9])


def test_failing_slice_is_named(sliced_case, monkeypatch):
    _, _, network, tree, sliced = sliced_case(10, 60, seed=2, num_sliced=3)
    real = ex.contract_tree
    calls = []

    def flaky(*args, **kwargs):
        calls.append(1)
        if len(calls) == 5:
            raise FloatingPointError("injected")
        return real(*args, **kwargs)

    monkeypatch.setattr(ex, "contract_tree", flaky)
    with pytest.raises(SliceError, match=r"slice 4 of 8 \(label \d+=1, label \d+=0, label \d+=0\)"):
        execute(network, tree, sliced, chunk_size=2)


@pytest.mark.parametrize("dtype", [np.complex64, np.complex128])
@pytest.mark.parametrize("scale", [-140, -70, 0, 3, 90, 120])
def test_normalize_in_place_matches_normalize(dtype, scale):
    # Scaling by a power of two is exact for normal results and correctly rounded for
    # subnormal ones, whether done by multiplication or ldexp (IEEE 754-2019, sec. 5.3.3
    # scaleB and sec. 5.4.1 multiplication).
    rng = np.random.default_rng(0)
    x = rng.normal(size=50) + 1j * rng.normal(size=50)
    x[:5] *= 2.0**-60  # components far below the peak: subnormal after scaling in complex64
    x = (x * 2.0**scale).astype(dtype)
    ref, e = normalize(x)
    got, e2 = scaled_module.normalize_owned(x.copy())
    assert e == e2 and ref.tobytes() == got.tobytes()
    assert 0.5 <= np.max(np.abs(ref.view(ref.real.dtype))) < 1


def test_chunk_bounds_cover_every_slice_once():
    for n, flops, size in [(1, 1.0, None), (1000, 10.0, None), (37, 5e9, None), (37, 1, 4)]:
        bounds = chunk_bounds(n, flops, size)
        covered = [k for a, b in bounds for k in range(a, b)]
        assert covered == list(range(n))


def test_dask_array_backend_matches_numpy(sliced_case):
    # dask.array reached through opt_einsum's backend dispatch stands in for GPU libraries.
    pytest.importorskip("dask.array")
    _, _, network, tree, sliced = sliced_case(8, 30, seed=3, num_sliced=2)
    ref = complex(execute(network, tree, sliced))
    got = complex(execute(network, tree, sliced, backend="dask"))
    assert got == pytest.approx(ref, abs=1e-13)


def test_missing_backend_is_an_input_error():
    tn = TensorGraph([np.ones(2)], [(0,)], {0: 2})
    with pytest.raises(InputError, match="not installed"):
        execute(tn, greedy_tree(tn.indices, tn.output, tn.size), backend="no_such_array_lib")


def _random_pair(rng):
    """Two random label lists over labels 0..7 (sizes 1..3), and which labels are kept."""
    labels = list(range(8))
    ia = list(rng.choice(labels, rng.integers(1, 6), replace=False))
    ib = list(rng.choice(labels, rng.integers(1, 6), replace=False))
    keep = {int(i) for i in rng.choice(labels, rng.integers(0, 6), replace=False)}
    return [int(i) for i in ia], [int(i) for i in ib], keep


def test_apply_step_matches_einsum_on_random_layouts():
    # Reference: numpy.einsum with the same labels (sum over every label not kept).
    rng = np.random.default_rng(42)
    size = {i: int(rng.integers(1, 4)) for i in range(8)}
    flags = set()
    for _ in range(400):
        ia, ib, keep = _random_pair(rng)
        step = steps_module.pair_step(ia, ib, keep, size)
        flags.add((step.trans_a, step.trans_b))
        a = rng.normal(size=[size[i] for i in ia]) + 1j * rng.normal(size=[size[i] for i in ia])
        b = rng.normal(size=[size[i] for i in ib]) + 1j * rng.normal(size=[size[i] for i in ib])
        sym = "abcdefgh"
        eq = f"{''.join(sym[i] for i in ia)},{''.join(sym[i] for i in ib)}->"
        eq += "".join(sym[i] for i in step.out_labels)
        assert set(step.out_labels) == (set(ia) | set(ib)) & keep
        np.testing.assert_allclose(
            steps_module.apply_step(step, a, b), np.einsum(eq, a, b), atol=1e-12
        )
    assert {(True, False), (False, True)} <= flags  # both transposed-view paths were taken


def test_grouped_operand_is_not_copied():
    # b's axes already lie as (summed, right): matmul gets a view of it, no copy.
    size = dict.fromkeys(range(4), 3)
    step = steps_module.pair_step([0, 1], [1, 2, 3], {0, 2, 3}, size)
    assert step.view_b == (27,) and step.perm_b == (0,)  # one run: nothing to permute
    b = np.arange(27.0).reshape(3, 3, 3)
    view = b.reshape(step.view_b).transpose(step.perm_b).reshape(step.mat_b)
    assert np.shares_memory(view, b)


def test_progress_bar_only_when_asked(sliced_case, capsys):
    _, _, network, tree, sliced = sliced_case(10, 60, seed=2, num_sliced=3)
    execute(network, tree, sliced, chunk_size=2)  # default: not a terminal, small work
    assert capsys.readouterr().err == ""
    execute(network, tree, sliced, chunk_size=2, progress=True)
    err = capsys.readouterr().err
    assert "8/8" in err and "slice" in err and "GFLOP/s" in err


@pytest.mark.parametrize("with_thread", [False, True])
def test_script_without_main_guard(tmp_path, with_thread):
    # Without other threads the pool is forked and a script needs no main guard; with a
    # thread running it is started with 'spawn', which re-imports the main script
    # (Python docs, multiprocessing, "Safe importing of main module"): a clear error.
    import subprocess
    import sys

    script = tmp_path / "noguard.py"
    script.write_text(
        "import threading, time\n"
        "import numpy as np\n"
        "from tnsim.execution.slices import execute\n"
        "from tnsim.network import TensorGraph\n"
        "from tnsim.plan import greedy_tree\n"
        + (
            "threading.Thread(target=time.sleep, args=(30,), daemon=True).start()\n"
            if with_thread
            else ""
        )
        + "tn = TensorGraph([np.ones((2, 2))] * 2, [(0, 1), (1, 2)], {0: 2, 1: 2, 2: 2})\n"
        "tree = greedy_tree(tn.indices, tn.output, tn.size)\n"
        "print(complex(execute(tn, tree, [0, 1], chunk_size=1, workers=2)))\n"
    )
    run = subprocess.run([sys.executable, str(script)], capture_output=True, text=True, timeout=120)
    if with_thread:
        assert run.returncode != 0
        assert "SliceError" in run.stderr and '__name__ == "__main__"' in run.stderr
    else:
        assert run.returncode == 0, run.stderr
        assert complex(run.stdout.strip()) == 8  # sum over all labels of two all-ones 2x2


def test_rescaling_rule_does_not_change_bits(sliced_case, monkeypatch):
    # Scaling by a power of two is exact outside the subnormal range (IEEE 754-2019,
    # sec. 5.3.3), so rescaling every intermediate or only out-of-range ones agrees.
    _, _, network, tree, _ = sliced_case(16, 110, seed=4)
    lazy = ex.contract_tree(network.arrays, tree)
    monkeypatch.setattr(treerun, "SLACK", 0)
    eager = ex.contract_tree(network.arrays, tree)
    assert _same_bits(lazy, eager)
    monkeypatch.setattr(treerun, "SLACK", 1000)  # never rescale in between
    never = ex.contract_tree(network.arrays, tree)
    assert never.mantissa.tobytes() == eager.mantissa.tobytes()


def test_absurd_slice_count_is_refused():
    n = 64  # 2**64 slices: a vector per label, all sliced
    tn = TensorGraph(
        [np.ones(2)] * n + [np.ones((2,) * 1)],
        [(i,) for i in range(n)] + [(0,)],
        dict.fromkeys(range(n), 2),
    )
    tree = greedy_tree(tn.indices, tn.output, tn.size)
    with pytest.raises(ResourceLimitError, match="slices"):
        execute(tn, tree, list(range(n)))


def test_run_options_log_records_each_contraction():
    # The log counts what ran: FLOPs from the compiled steps times the slices, and the slices.
    from tnsim.execution.options import run_options
    from tnsim.plan.driver import greedy_tree

    arrays = [np.ones((2, 2)), np.ones((2, 2)), np.ones((2, 2))]
    tn = TensorGraph(arrays, [(0, 1), (1, 2), (2, 0)], {0: 2, 1: 2, 2: 2})
    tree = greedy_tree(tn.indices, tn.output, tn.size)
    log: list = []
    with run_options(log=log):
        whole = complex(execute(tn, tree))
        cut = complex(execute(tn, tree, sliced=[1]))
    assert whole == cut == 8
    assert [r.num_slices for r in log] == [1, 2]
    assert log[0].flops == count_flops(compile_tree(tree))
    assert log[1].flops == 2 * count_flops(compile_tree(tree, [1]))
    assert all(r.seconds >= 0 and r.itemsize == 16 and r.workers == 1 for r in log)
