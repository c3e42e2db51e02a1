"""Slice-invariant subtrees contracted once: same bits, fewer steps, memory counted."""

import numpy as np
import pytest

import tnsim.execution.steps as steps_module
import tnsim.execution.treerun as treerun
from tnsim.execution.invariant import (
    choose_frontier,
    frontier,
    node_labels,
    reduce_tree,
    reuse_peak,
    variant_nodes,
)
from tnsim.execution.slices import execute
from tnsim.execution.steps import compile_tree, peak_memory
from tnsim.execution.timemodel import forecast_run
from tnsim.network.scaled import Scaled


def _same_bits(a: Scaled, b: Scaled) -> bool:
    assert np.any(np.abs(a.mantissa) > 0)  # comparing zeros would prove nothing
    return a.exponent == b.exponent and a.mantissa.tobytes() == b.mantissa.tobytes()


CASES = [
    {"num_qubits": 14, "num_gates": 90, "seed": 2, "num_sliced": 4},
    {"num_qubits": 16, "num_gates": 120, "seed": 5, "num_sliced": 3},
    {"num_qubits": 12, "num_gates": 80, "seed": 10, "num_sliced": 4, "open_qubits": (0, 3)},
    {"num_qubits": 30, "num_gates": 300, "seed": 3, "num_sliced": 6},
]


@pytest.mark.parametrize("case", CASES)
def test_reuse_on_and_off_give_the_same_bits(sliced_case, case):
    _, _, network, tree, sliced = sliced_case(**case)
    steps = compile_tree(tree, sliced)
    assert frontier(tree, variant_nodes(tree, sliced))  # there is shared work to reuse
    off = execute(network, tree, sliced, reuse=False, chunk_size=3)
    on = execute(network, tree, sliced, reuse=True, chunk_size=3)
    assert _same_bits(on, off)
    reduced = reduce_tree(
        tree, frontier(tree, variant_nodes(tree, sliced)), node_labels(tree, steps)
    )
    assert compile_tree(reduced.tree, sliced) == [steps[s] for s in reduced.steps]


def test_reuse_matches_the_dense_contraction(sliced_case):
    # Reference: numpy's einsum over the whole network (tnsim.network.graph.TensorGraph.dense).
    _, _, network, tree, sliced = sliced_case(12, 80, seed=10, num_sliced=4, open_qubits=(0, 3))
    got = execute(network, tree, sliced, reuse=True).value()
    np.testing.assert_allclose(got, network.dense(), rtol=1e-10, atol=1e-14)


def test_reuse_in_a_worker_pool_gives_the_same_bits(sliced_case):
    _, _, network, tree, sliced = sliced_case(14, 90, seed=2, num_sliced=4)
    serial = execute(network, tree, sliced, reuse=False, chunk_size=2, workers=1)
    pooled = execute(network, tree, sliced, reuse=True, chunk_size=2, workers=2)
    assert _same_bits(pooled, serial)


def _count_steps(monkeypatch) -> list:
    calls = []
    real = steps_module.apply_owned

    def counted(step, pair):
        calls.append(1)
        return real(step, pair)

    monkeypatch.setattr(treerun, "apply_owned", counted)
    return calls


def test_shared_steps_run_once_and_the_forecast_counts_them(sliced_case, monkeypatch):
    _, _, network, tree, sliced = sliced_case(30, 300, seed=3, num_sliced=6)
    slices = 2 ** len(sliced)
    forecast = forecast_run(tree, sliced, network.dtype)  # measures the step cost first
    calls = _count_steps(monkeypatch)
    execute(network, tree, sliced, reuse=False)
    plain = len(calls)
    assert plain == slices * len(tree.path)
    calls.clear()
    execute(network, tree, sliced, reuse=True)
    once = len(tree.path) - forecast.steps_per_slice
    assert once > 0 and len(calls) == once + slices * forecast.steps_per_slice
    assert len(calls) < plain
    assert forecast.fixed_seconds > 0 and forecast.compute_seconds > 0


def test_kept_subtrees_count_against_the_memory_limit(sliced_case):
    _, _, network, tree, sliced = sliced_case(30, 300, seed=3, num_sliced=6)
    steps = compile_tree(tree, sliced)
    itemsize = 16
    need = peak_memory(tree, steps, itemsize)
    everything = frontier(tree, variant_nodes(tree, sliced))
    full = reuse_peak(tree, steps, everything, itemsize)
    assert full >= need or full > 0
    assert choose_frontier(tree, steps, sliced, itemsize, full) == sorted(everything)
    tight = choose_frontier(tree, steps, sliced, itemsize, need)
    assert reuse_peak(tree, steps, tight, itemsize) <= need
    assert len(tight) < len(everything) or full <= need
    # the run under the tight limit still gives the same bits
    assert _same_bits(
        execute(network, tree, sliced, memory_limit=need, reuse=True),
        execute(network, tree, sliced, memory_limit=need, reuse=False),
    )
