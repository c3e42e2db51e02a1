"""Multilevel hypergraph bisection, sweep orders by recursive cuts, trees from both."""

import itertools
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tnsim.plan.divide import divide_path
from tnsim.plan.hypergraph import Hypergraph, bisect, cut_weight, refine
from tnsim.plan.ordering import cut_order, cut_path, front_sizes, order_path
from tnsim.plan.random_networks import random_network
from tnsim.plan.tree import tree_cost


def _random_hypergraph(n, m, seed, max_pins=4):
    rng = np.random.default_rng(seed)
    pins, weights = [], []
    for _ in range(m):
        k = int(rng.integers(2, max_pins + 1))
        pins.append(sorted(rng.choice(n, size=min(k, n), replace=False).tolist()))
        weights.append(float(rng.integers(1, 4)))
    return Hypergraph(n, pins, weights)


def _brute_min_cut(hg, lo, hi):
    best = math.inf
    for bits in itertools.product((0, 1), repeat=hg.num_vertices):
        w0 = sum(w for w, b in zip(hg.vertex_weights, bits) if b == 0)
        if lo <= w0 <= hi:
            best = min(best, cut_weight(hg, bits))
    return best


def test_cut_weight_counts_each_hyperedge_with_pins_on_both_sides_once():
    h = Hypergraph(4, [(0, 1, 2), (2, 3), (0, 3)], [2.0, 1.0, 5.0])
    assert cut_weight(h, [0, 0, 0, 0]) == 0
    assert cut_weight(h, [0, 0, 1, 1]) == 2.0 + 5.0
    assert cut_weight(h, [0, 1, 1, 0]) == 2.0 + 1.0


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(n=st.integers(4, 40), seed=st.integers(0, 10_000), imbalance=st.sampled_from([0.0, 0.3]))
def test_refine_keeps_the_balance_and_reports_the_cut_it_leaves(n, seed, imbalance):
    hg = _random_hypergraph(n, 2 * n, seed)
    rng = np.random.default_rng(seed)
    part = [int(b) for b in rng.integers(0, 2, n)]
    lo, hi = math.floor(0.5 * (1 - imbalance) * n), math.ceil(0.5 * (1 + imbalance) * n)
    cut = refine(hg, part, lo, hi, rng)
    assert cut == pytest.approx(cut_weight(hg, part))
    w0 = part.count(0)
    # The start may be outside the window; the rebalancing moves it inside.
    assert lo - 1e-9 <= w0 <= hi + 1e-9


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(n=st.integers(2, 60), seed=st.integers(0, 10_000), imbalance=st.sampled_from([0.0, 0.5]))
def test_bisect_splits_within_the_balance_window(n, seed, imbalance):
    hg = _random_hypergraph(n, 2 * n, seed)
    part = bisect(hg, imbalance, seed)
    w0 = part.count(0)
    lo = max(1.0, 0.5 * (1 - imbalance) * n - 0.5)
    assert lo - 1e-9 <= w0 <= n - lo + 1e-9


@pytest.mark.parametrize("seed", range(8))
def test_bisect_finds_the_minimum_cut_of_small_hypergraphs(seed):
    # Reference: exhaustive enumeration of every balanced split (at most 2^12 of them).
    hg = _random_hypergraph(12, 16, seed, max_pins=3)
    lo, hi = 4.0, 8.0  # imbalance 1/3
    found = min(cut_weight(hg, bisect(hg, 1 / 3, s, coarse_size=4)) for s in range(4))
    assert found == _brute_min_cut(hg, lo, hi)


def test_bisect_cuts_two_dense_halves_at_their_single_bridge():
    # Two 30-vertex cliques of pairs (weight 1) joined by one pair of weight 0.5: the
    # balanced minimum cut is the bridge; multilevel coarsening must keep the halves apart.
    pins, weights = [], []
    for half in (0, 30):
        for a, b in itertools.combinations(range(half, half + 30), 2):
            pins.append((a, b))
            weights.append(1.0)
    pins.append((0, 30))
    weights.append(0.5)
    part = bisect(Hypergraph(60, pins, weights), 0.1, seed=3)
    assert cut_weight(Hypergraph(60, pins, weights), part) == 0.5
    assert len(set(part[:30])) == 1 and len(set(part[30:])) == 1


def test_fixed_vertices_stay_on_their_side():
    hg = _random_hypergraph(30, 60, seed=2)
    fixed = [-1] * 30
    fixed[0], fixed[1], fixed[2] = 1, 0, 1
    for seed in range(5):
        part = bisect(hg, 0.4, seed, fixed=fixed)
        assert (part[0], part[1], part[2]) == (1, 0, 1)


def test_hypergraph_of_tensors_keeps_labels_shared_within_the_group():
    size = {0: 4, 1: 2, 2: 8, 3: 2}
    h = Hypergraph.of_tensors([(0, 1), (1, 2), (2, 0, 3), (3,)], size, [0, 1, 2])
    assert sorted(zip(h.pins, h.weights)) == [((0, 1), 1.0), ((0, 2), 2.0), ((1, 2), 3.0)]


def _grid(rows, cols):
    """A rows x cols grid of tensors, one label per grid edge (dimension 2)."""
    labels = {}
    tensors = [[] for _ in range(rows * cols)]
    for r in range(rows):
        for c in range(cols):
            t = r * cols + c
            for u in ([t + 1] if c + 1 < cols else []) + ([t + cols] if r + 1 < rows else []):
                labels[(t, u)] = len(labels)
                tensors[t].append(labels[(t, u)])
                tensors[u].append(labels[(t, u)])
    return [tuple(ix) for ix in tensors], dict.fromkeys(labels.values(), 2)


def test_front_sizes_equal_a_direct_count():
    inputs, output, size = random_network(14, hyper=0.4, num_open=2, seed=8)
    order = list(np.random.default_rng(1).permutation(14))
    got = front_sizes(inputs, output, size, order)
    for k in range(14):
        done = set(order[: k + 1])
        # A label is in the front when tensors on both sides hold it (or it is open and held).
        want = sum(
            math.log2(size[i])
            for i in size
            if any(i in inputs[t] for t in done)
            and (i in output or any(i in inputs[t] for t in range(14) if t not in done))
        )
        assert got[k] == pytest.approx(want)


def test_cut_orders_sweep_a_grid_with_fronts_near_its_width():
    # An 8x8 grid of tensors (one label per edge) is swept row by row with fronts of 8 or 9
    # labels; an order by recursive cuts with terminals must stay close to that, whatever
    # the order the tensors are given in (a split into quadrants would reach 12).
    inputs, size = _grid(8, 8)
    perm = np.random.default_rng(0).permutation(64)
    shuffled = [inputs[t] for t in perm]
    for seed in range(3):
        order = cut_order(shuffled, (), size, imbalance=0.5, leaf_size=4, seed=seed)
        assert sorted(order) == list(range(64))
        assert max(front_sizes(shuffled, (), size, order)) <= 11


def test_order_path_never_joins_tensors_with_nothing_in_common_while_a_joint_one_waits():
    # Chain 0-1-2-3 given in the order 0, 2, 1, 3: tensor 2 does not touch 0, so it waits
    # as its own node until 1 joins them; no step of the tree is an outer product.
    inputs = [(0,), (0, 1), (1, 2), (2,)]
    path = order_path(inputs, (), dict.fromkeys(range(3), 2), [0, 2, 1, 3])
    labels = [set(ix) for ix in inputs]
    for x, y in path:
        assert labels[x] & labels[y]
        labels.append(labels[x] ^ labels[y])


@pytest.mark.parametrize("planner", ["cuts", "divide"])
def test_new_planners_give_full_trees_costed_as_the_model_says(planner):
    inputs, output, size = random_network(40, hyper=0.3, num_open=2, seed=11)
    for seed in range(3):
        if planner == "cuts":
            path = cut_path(inputs, output, size, imbalance=0.3, seed=seed)
        else:
            path = divide_path(inputs, output, size, imbalance=0.5, seed=seed)
        assert len(path) == 39
        nodes = [x for step in path for x in step]
        assert sorted(nodes) == sorted(set(nodes))  # every node used once
        assert sorted(set(nodes)) == list(range(40 + 38))
        assert tree_cost(inputs, output, size, path).flops > 0


@pytest.mark.parametrize("seed", range(12))
def test_exact_path_matches_opt_einsum_exhaustive_search(seed):
    # Reference: opt_einsum's exhaustive searches (opt_einsum docs, "The Optimal Path" and
    # "Dynamic Programming" with search_outer=True), scored by tnsim's cost model.
    import opt_einsum.paths as oe_paths

    from tnsim.plan.exact import exact_path
    from tnsim.plan.tree import linear_to_ssa

    n = 3 + seed % 8
    inputs, output, size = random_network(n, hyper=0.3, num_open=seed % 3, seed=300 + seed)
    ins = [frozenset(ix) for ix in inputs]
    if n <= 7:
        linear = oe_paths.optimal(ins, frozenset(output), size)
    else:
        linear = oe_paths.dynamic_programming(ins, frozenset(output), size, search_outer=True)
    theirs = tree_cost(inputs, output, size, linear_to_ssa(linear, n)).flops
    path = exact_path(inputs, output, size)
    assert len(path) == n - 1
    assert tree_cost(inputs, output, size, path).flops <= theirs


def test_exact_path_keeps_intermediates_under_a_cap_or_says_none():
    from tnsim.plan.exact import exact_path

    inputs, output, size = random_network(9, hyper=0.3, seed=21)
    free = tree_cost(inputs, output, size, exact_path(inputs, output, size))
    cap = free.largest // 2
    capped = exact_path(inputs, output, size, max_numel=cap)
    if capped is None:  # no tree fits: every tree has an intermediate over the cap
        return
    cost = tree_cost(inputs, output, size, capped)
    labels = [set(ix) for ix in inputs]
    assert cost.flops >= free.flops
    # Every intermediate but the result within the cap.
    from tnsim.plan.tree import step_labels

    sizes = [math.prod(size[i] for i in ls) for ls in step_labels(inputs, output, capped)]
    assert max(sizes[len(labels) : -1], default=0) <= cap
