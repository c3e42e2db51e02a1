"""Buffers reused by every slice: the same bits, slots never shared by live arrays, memory kept."""

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import tnsim.execution.workspace as workspace
from tnsim.execution.slices import SliceJob, contract_slices, execute, release_workspace
from tnsim.execution.steps import apply_owned, compile_tree, peak_memory
from tnsim.execution.treerun import contract_tree
from tnsim.execution.workspace import plan_workspace
from tnsim.plan.driver import make_plan
from tnsim.plan.random_networks import random_arrays, random_network
from tnsim.plan.search import search_path
from tnsim.plan.tree import PairTree


def _same_bits(a, b) -> bool:
    assert np.any(np.abs(a.mantissa) > 0)  # comparing zeros would prove nothing
    return a.exponent == b.exponent and a.mantissa.tobytes() == b.mantissa.tobytes()


def _lifetimes_disjoint(tree: PairTree, steps, work) -> None:
    """No slot holds two arrays alive at once (results until consumed, copies within a step)."""
    n = tree.num_leaves
    busy: dict[int, int] = {}  # slot -> node whose result it holds
    for s, ((x, y), slots) in enumerate(zip(tree.path, work.steps)):
        for node in (x, y):
            if node >= n:
                busy = {k: v for k, v in busy.items() if v != node}
        for slot in (slots.copy_a, slots.copy_b, slots.out):
            if slot >= 0:
                assert slot not in busy, f"step {s}: slot {slot} still holds node {busy[slot]}"
        assert len({k for k in (slots.copy_a, slots.copy_b, slots.out) if k >= 0}) == sum(
            k >= 0 for k in (slots.copy_a, slots.copy_b, slots.out)
        )
        if slots.out >= 0:
            busy[slots.out] = n + s
    for slots, step in zip(work.steps, steps):
        if slots.out >= 0:
            assert work.sizes[slots.out] >= math.prod(step.out_shape)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    n=st.integers(3, 14),
    seed=st.integers(0, 10_000),
    hyper=st.sampled_from([0.0, 0.4]),
    num_open=st.integers(0, 2),
)
def test_slots_give_the_same_bits_as_fresh_memory(n, seed, hyper, num_open):
    inputs, output, size = random_network(n, max_size=3, num_open=num_open, hyper=hyper, seed=seed)
    arrays = random_arrays(inputs, size, seed=seed)
    res = search_path(inputs, output, size, max_trials=2, time_budget=None, seed=seed)
    tree = PairTree(tuple(tuple(ix) for ix in inputs), tuple(output), dict(size), res.path)
    steps = compile_tree(tree)
    # Every array of 16 bytes or more gets a slot: the smallest networks exercise the reuse.
    work = plan_workspace(tree, steps, np.complex128, 2**40, min_bytes=16)
    plain = contract_tree(arrays, tree, steps)
    if work is None:
        assert not steps or len(steps) == 1  # only the root, which never takes a slot
        return
    _lifetimes_disjoint(tree, steps, work)
    first = contract_tree(arrays, tree, steps, workspace=work)
    again = contract_tree(arrays, tree, steps, workspace=work)  # the slots hold old values now
    if np.any(np.abs(plain.mantissa) > 0):
        assert _same_bits(plain, first) and _same_bits(plain, again)


def test_a_sliced_run_with_slots_equals_one_without(sliced_case, monkeypatch):
    _, _, network, tree, sliced = sliced_case(num_qubits=16, num_gates=120, seed=5, num_sliced=3)
    off = execute(network, tree, sliced, reuse=False, chunk_size=3)
    monkeypatch.setattr(workspace, "MIN_SLOT_BYTES", 64)
    steps = compile_tree(tree, sliced)
    job = SliceJob(tuple(network.arrays), tree, tuple(sliced), room=2**30)
    work = plan_workspace(tree, steps, network.dtype, job.room)
    assert work is not None and len(work.sizes) >= 2
    on = execute(network, tree, sliced, reuse=False, chunk_size=3)
    assert _same_bits(off, on)
    # Slice by slice through one worker's cached slots, and without them.
    nonzero = 0
    for k in range(8):
        with_slots = contract_slices(job, k, k + 1)
        without = contract_slices(SliceJob(job.arrays, tree, job.sliced), k, k + 1)
        assert with_slots.exponent == without.exponent
        assert with_slots.mantissa.tobytes() == without.mantissa.tobytes()
        nonzero += bool(np.any(np.abs(without.mantissa) > 0))
    assert nonzero  # comparing zeros alone would prove nothing
    release_workspace()


def test_slots_are_refused_when_they_do_not_fit():
    # A chain whose results are 512 x 512: one slot of 2**18 elements (4 MiB) and the root.
    size = {0: 512, 1: 2, 2: 2, 3: 512, 4: 2}
    tree = PairTree(((0, 1), (1, 2), (2, 3), (3, 4)), (0, 4), size, ((0, 1), (4, 2), (5, 3)))
    steps = compile_tree(tree)
    work = plan_workspace(tree, steps, np.complex128, 2**40)
    assert work is not None
    assert plan_workspace(tree, steps, np.complex128, work.peak_bytes) is not None
    assert plan_workspace(tree, steps, np.complex128, work.peak_bytes - 1) is None
    # Beside the slots the model counts what numpy allocates: never less than the run's own
    # count of the largest array made outside the slots (the root's 512 x 2 result here).
    assert work.peak_bytes >= 16 * 512 * 2 + 16 * sum(work.sizes)


def test_the_root_never_takes_a_slot():
    size = {0: 1024, 1: 2, 2: 1024}
    tree = PairTree(((0, 1), (1, 2)), (0, 2), size, ((0, 1),))
    assert plan_workspace(tree, compile_tree(tree), np.complex128, 2**40, min_bytes=1) is None


def test_apply_owned_writes_the_product_into_its_slot():
    size = {0: 256, 1: 4, 2: 256}
    tree = PairTree(((0, 1), (1, 2), (2,)), (0,), size, ((0, 1), (3, 2)))
    steps = compile_tree(tree)
    work = plan_workspace(tree, steps, np.complex128, 2**40, min_bytes=1024)
    assert work is not None and work.steps[0].out >= 0
    rng = np.random.default_rng(0)
    a, b = rng.standard_normal((256, 4)) + 0j, rng.standard_normal((4, 256)) + 0j
    c = apply_owned(steps[0], [a, b], work.into(0))
    assert np.shares_memory(c, work.buffers[work.steps[0].out])
    np.testing.assert_array_equal(c, a @ b)  # numpy's matmul is the reference (same bits)


@pytest.mark.parametrize("workers", [1, 2])
def test_grid_plan_under_a_limit_runs_through_slots(workers, monkeypatch):
    """A plan whose intermediates are large enough for slots, run by execute as a user would."""
    from tnsim.circuits.families import grid_circuit
    from tnsim.network.builders import amplitude_network
    from tnsim.network.simplify import absorb_small

    net = absorb_small(amplitude_network(grid_circuit(5, 5, 8, seed=3), "0" * 25))
    plan = make_plan(net, memory_limit="8MiB", max_trials=4)
    steps = compile_tree(plan.tree, plan.sliced)
    assert peak_memory(plan.tree, steps, 16) <= 8 * 2**20
    monkeypatch.setattr(workspace, "MIN_SLOT_BYTES", 4096)  # slots for this small grid's arrays
    work = plan_workspace(plan.tree, steps, net.dtype, 2**33)
    assert work is not None and len(work.sizes) >= 2
    reused = execute(net, plan.tree, plan.sliced, workers=workers, memory_limit="8GiB")
    monkeypatch.setattr(workspace, "MIN_SLOT_BYTES", 2**62)  # no array gets a slot
    fresh = execute(net, plan.tree, plan.sliced, workers=1, memory_limit="8GiB")
    assert _same_bits(fresh, reused)
