"""Plans under a memory limit: sliced search, slicing by whole-tree width, budgets, item size."""

import math

import numpy as np
import opt_einsum
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tnsim.circuits.families import grid_circuit
from tnsim.errors import ResourceLimitError
from tnsim.execution.slices import execute
from tnsim.network.builders import amplitude_network
from tnsim.network.graph import TensorGraph
from tnsim.network.simplify import absorb_small
from tnsim.plan import clock
from tnsim.plan.builder import absorb
from tnsim.plan.driver import make_plan
from tnsim.plan.optimizer import Planner
from tnsim.plan.random_networks import random_arrays, random_network
from tnsim.plan.slicecost import TreeProfile
from tnsim.plan.slicing import choose_slices, slice_profile, slice_with_replanning
from tnsim.plan.tree import memory_order, tree_cost


def _net(inputs, output, size, seed=0, dtype=np.complex128):
    arrays = [a.astype(dtype) for a in random_arrays(inputs, size, seed=seed)]
    ix = [tuple(ix) for ix in inputs]
    return TensorGraph(arrays, ix, dict(size), tuple(output), dtype=np.dtype(dtype))


def _einsum(net):
    # Reference: numpy.einsum (numpy documentation), the definition of the network's value.
    sym = {}
    for ix in [*net.indices, net.output]:
        for i in ix:
            sym.setdefault(i, opt_einsum.get_symbol(len(sym)))
    eq = ",".join("".join(sym[i] for i in ix) for ix in net.indices)
    eq += "->" + "".join(sym[i] for i in net.output)
    return np.einsum(eq, *net.arrays, optimize="greedy")


def _grid_net(rows, cols, cycles, sequence="abcdcdab", seed=0, dtype=np.complex128):
    circuit = grid_circuit(rows, cols, cycles, seed=seed, sequence=sequence)
    return absorb_small(amplitude_network(circuit, "0" * (rows * cols), dtype=dtype))


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    n=st.integers(6, 16),
    seed=st.integers(0, 10_000),
    hyper=st.sampled_from([0.0, 0.3, 0.6]),
    num_open=st.integers(0, 2),
    shrink=st.sampled_from([2, 4, 16]),
)
def test_sliced_plans_fit_their_limit_and_equal_the_unsliced_value(
    n, seed, hyper, num_open, shrink
):
    inputs, output, size = random_network(n, max_size=3, num_open=num_open, hyper=hyper, seed=seed)
    net = _net(inputs, output, size, seed)
    full = make_plan(net, max_trials=4, seed=seed)
    limit = max(full.peak_bytes // shrink, 1)
    try:
        plan = make_plan(net, memory_limit=limit, max_trials=4, seed=seed)
    except ResourceLimitError:  # a limit below what every slicing reaches: said, not run
        return
    assert plan.peak_bytes <= limit
    assert plan.tree.cost(sliced=plan.sliced).peak_bytes == plan.peak_bytes
    assert plan.num_slices == math.prod(size[i] for i in plan.sliced)
    got = execute(net, plan.tree, plan.sliced).value()
    np.testing.assert_allclose(got, _einsum(net), rtol=1e-9, atol=1e-12)


def test_profile_costs_equal_the_exact_model_for_every_extension():
    for seed in range(12):
        inputs, output, size = random_network(
            12, max_size=3, num_open=seed % 3, hyper=0.4, seed=seed
        )
        net = _net(inputs, output, size)
        path = make_plan(net, max_trials=2, seed=seed).tree.path
        prof = TreeProfile(inputs, output, size, path, itemsize=8)
        labels = [i for i in size if i not in output]
        prof.add(labels[0])
        rest = labels[1:]
        flops, peak, written, largest = prof.cost_with(rest)
        for k, i in enumerate(rest):
            exact = tree_cost(inputs, output, size, path, sliced=[labels[0], i], itemsize=8)
            got = (flops[k], peak[k], written[k], largest[k])
            want = (exact.flops, exact.peak_bytes, exact.written, exact.largest)
            np.testing.assert_allclose(got, want, rtol=1e-12)


def test_slices_are_labels_alive_across_the_largest_intermediates():
    # A chain of matrices with one wide label (64) shared along the whole chain: slicing it
    # removes width from every intermediate, the narrow labels (2) from one or two.
    size = {0: 64, **dict.fromkeys(range(1, 9), 2)}
    inputs = [(0, k, k + 1) for k in range(1, 8)]
    path = ((0, 1), (7, 2), (8, 3), (9, 4), (10, 5), (11, 6))
    prof = TreeProfile(inputs, (), size, path)
    fig = slice_profile(prof, prof.cost()[1] // 8)
    assert prof.sliced == [0] and fig.num_slices == 64


def test_sliced_scoring_is_never_costlier_than_slicing_the_unlimited_winner():
    for seq, seed in (("abcdcdab", 0),):
        net = _grid_net(4, 4, 6, seq)
        best = make_plan(net, max_trials=6, seed=seed, objective="operations")
        tree = best.tree
        args = (tree.inputs, tree.output, tree.size)
        ordered = memory_order(*args, tree.path)
        for shrink in (4, 16):
            limit = best.peak_bytes // shrink
            _, one, k = choose_slices(*args, ordered, limit)
            _, _, two, k2 = slice_with_replanning(*args, ordered, limit)
            after = min(one.flops * k + 2 * (k - 1), two.flops * k2 + 2 * (k2 - 1))
            plan = make_plan(
                net, memory_limit=limit, max_trials=6, seed=seed, objective="operations"
            )
            assert plan.peak_bytes <= limit
            assert plan.flops <= after


class _FastClock:
    """A clock that moves ``step`` seconds every time planning reads it."""

    def __init__(self, step: float):
        self.t, self.step = 1000.0, step

    def __call__(self) -> float:
        self.t += self.step
        return self.t


@pytest.mark.parametrize("limited", [True, False])
def test_the_time_budget_holds_with_a_fast_forwarded_clock(monkeypatch, limited):
    # A network and limit where planning took 2.2 s against a 1 s budget before every
    # stage read one deadline: the final slicing re-planned without one.
    net = _grid_net(5, 5, 8)
    limit = make_plan(net, max_trials=2).peak_bytes // 64 if limited else None
    fake = _FastClock(0.005)
    monkeypatch.setattr(clock, "now", fake)
    budget = 1.0
    began = fake.t
    plan = make_plan(net, memory_limit=limit, time_budget=budget, seed=5)
    spent = fake.t - began
    assert spent <= 1.1 * budget
    assert plan.seconds <= 1.1 * budget
    stages = dict(plan.timings)
    assert "search" in stages and sum(stages.values()) <= 1.1 * budget
    if limited:
        assert "slicing" in stages and plan.peak_bytes <= limit


def test_a_limit_holds_twice_the_elements_in_complex64():
    wide = _grid_net(4, 4, 6, dtype=np.complex128)
    narrow = _grid_net(4, 4, 6, dtype=np.complex64)
    full = make_plan(wide, max_trials=3)
    limit = full.peak_bytes // 16
    p128 = make_plan(wide, memory_limit=limit, max_trials=3, objective="operations")
    p64 = make_plan(narrow, memory_limit=limit // 2, max_trials=3, objective="operations")
    assert p64.itemsize == 8 and p128.itemsize == 16
    assert p64.peak_bytes * 2 == p128.peak_bytes and p64.flops == p128.flops
    assert p64.sliced == p128.sliced


def _outside_grid_network(rows, cols, cycles, rng):
    """A grid circuit's amplitude network written as another tool would: one tensor per gate.

    Single-qubit gates are 2x2 matrices, CZ a rank-2 diagonal tensor on the two wires'
    current labels (a hyperedge each), |0> and <0| vectors; tensor order and label names
    are random.
    """
    n = rows * cols
    inputs, arrays = [], []
    wire = list(range(n))
    nxt = n
    for q in range(n):
        inputs.append((q,))
        arrays.append(np.array([1.0, 0.0], dtype=complex))
    layers = [
        [(r * cols + c, r * cols + c + 1) for r in range(rows) for c in range(p, cols - 1, 2)]
        for p in (0, 1)
    ]
    layers += [
        [(r * cols + c, (r + 1) * cols + c) for r in range(p, rows - 1, 2) for c in range(cols)]
        for p in (0, 1)
    ]
    for k in range(cycles):
        for q in range(n):
            u = np.linalg.qr(rng.standard_normal((2, 2)) + 1j * rng.standard_normal((2, 2)))[0]
            inputs.append((wire[q], nxt))
            arrays.append(u.T)
            wire[q] = nxt
            nxt += 1
        for a, b in layers[k % 4]:
            inputs.append((wire[a], wire[b]))
            arrays.append(np.array([[1, 1], [1, -1]], dtype=complex))
    for q in range(n):
        inputs.append((wire[q],))
        arrays.append(np.array([1.0, 0.0], dtype=complex))
    order = rng.permutation(len(inputs))
    names = rng.permutation(nxt)
    ins = [tuple(int(names[i]) for i in inputs[t]) for t in order]
    return ins, [arrays[t] for t in order], {int(names[i]): 2 for i in range(nxt)}


def test_absorbing_gives_the_same_network_whatever_the_presentation():
    shapes = []
    for seed in range(3):
        ins, _, size = _outside_grid_network(3, 3, 6, np.random.default_rng(seed))
        reduced, _, _ = absorb(ins, (), size).network()
        shapes.append(sorted(len(ix) for ix in reduced))
    assert shapes[0] == shapes[1] == shapes[2]
    assert len(shapes[0]) < 9 * 6  # every vector and most matrices joined a neighbour


def test_planner_door_on_a_network_built_elsewhere_matches_numpy():
    rng = np.random.default_rng(7)
    ins, arrays, size = _outside_grid_network(3, 3, 5, rng)
    sym = {i: opt_einsum.get_symbol(k) for k, i in enumerate(sorted(size))}
    eq = ",".join("".join(sym[i] for i in ix) for ix in ins) + "->"
    path, info = opt_einsum.contract_path(eq, *arrays, optimize=Planner(max_trials=6, seed=1))
    got = opt_einsum.contract(eq, *arrays, optimize=path)
    # Reference: the same sum by opt_einsum's own greedy order (numpy products underneath).
    want = opt_einsum.contract(eq, *arrays, optimize="greedy")
    np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-14)
    greedy = opt_einsum.contract_path(eq, *arrays, optimize="greedy")[1]
    assert float(info.opt_cost) <= float(greedy.opt_cost)


def test_cut_sets_cut_the_network_in_two():
    from tnsim.plan.hypergraph import Hypergraph
    from tnsim.plan.search import _State
    from tnsim.plan.tree import without_labels

    net = _grid_net(4, 4, 6, "rotation")
    ins, out, size = [tuple(ix) for ix in net.indices], tuple(net.output), dict(net.size)
    state = _State(ins, out, size, "operations", 10**6, 16)
    cuts = state.cut_sets(np.random.default_rng(0))
    assert cuts
    for cut in cuts:
        rest, _ = without_labels(ins, out, cut)
        hg = Hypergraph.of_tensors(rest, size)
        # Connected components of what is left: more than one.
        seen, comps = set(), 0
        for s in range(len(rest)):
            if s in seen:
                continue
            comps += 1
            stack = [s]
            seen.add(s)
            while stack:
                v = stack.pop()
                for e in hg.incident[v]:
                    for u in hg.pins[e]:
                        if u not in seen:
                            seen.add(u)
                            stack.append(u)
        assert comps >= 2


def test_reslicing_the_best_tree_never_makes_the_search_worse():
    from tnsim.plan.search import _State, _trial

    net = _grid_net(5, 5, 8, "abcdcdab")
    ins, out, size = [tuple(ix) for ix in net.indices], tuple(net.output), dict(net.size)
    peak = make_plan(net, max_trials=3).peak_bytes
    state = _State(ins, out, size, "operations", peak // 64, 16)
    rng = np.random.default_rng(1)
    for method in ("sweep", "cuts", "random-greedy"):
        state.consider(_trial(method, ins, out, size, rng), method)
    state.plan_around(rng, ["sweep", "cuts"])
    before = state.sliced_best()[0]
    state.reslice(None)
    key, path, _, sliced = state.sliced_best()
    assert key <= before
    assert tree_cost(ins, out, size, path, sliced=sliced).peak_bytes <= peak // 64


def test_reslicing_backs_off_while_it_finds_nothing(monkeypatch):
    # Re-slicing that never improves the best sliced tree is tried ever more rarely
    # (every 2nd, 4th, ... due turn, up to RESLICE_BACKOFF); one that improves it resets.
    import tnsim.plan.search as search

    net = _grid_net(4, 4, 6, "abcdcdab")
    ins, out, size = [tuple(ix) for ix in net.indices], tuple(net.output), dict(net.size)
    limit = make_plan(net, max_trials=2).peak_bytes // 16
    calls: list[int] = []

    def idle(self, seconds, planned=None):
        calls.append(1)

    monkeypatch.setattr(search._State, "reslice", idle)
    kwargs = {"time_budget": None, "max_trials": 64, "memory_limit": limit, "reoptimize": False}
    search.search_path(ins, out, size, **kwargs)
    backed_off = len(calls)
    calls.clear()
    monkeypatch.setattr(search, "RESLICE_BACKOFF", 1)  # every due turn
    search.search_path(ins, out, size, **kwargs)
    assert len(calls) == 32  # every second trial plans around labels and is due
    assert backed_off == 5  # due turns 1, 3, 7, 15 and 31 of the 32
    # A re-slicing that always finds a better tree keeps its turn every time.
    monkeypatch.setattr(search, "RESLICE_BACKOFF", 16)
    calls.clear()
    monkeypatch.setattr(search._State, "best_flops", lambda self: 1e30 / (1 + len(calls)))
    search.search_path(ins, out, size, **kwargs)
    assert len(calls) == 32
