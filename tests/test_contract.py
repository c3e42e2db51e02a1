"""tnsim.queries.contract: any einsum expression, against numpy.einsum."""

import numpy as np
import pytest

from tnsim.errors import InputError
from tnsim.queries.contract import contract


def _rand(*shape, seed=0):
    rng = np.random.default_rng(seed)
    return rng.standard_normal(shape) + 1j * rng.standard_normal(shape)


@pytest.mark.parametrize(
    ("eq", "shapes"),
    [
        ("ij,jk->ik", [(3, 4), (4, 5)]),
        ("ii->i", [(4, 4)]),
        ("ii", [(4, 4)]),
        ("iij,jk->ik", [(3, 3, 2), (2, 5)]),
        ("ab,ab,ab->a", [(3, 2), (3, 2), (3, 2)]),
        ("ab,bc,ca->", [(2, 3), (3, 4), (4, 2)]),
        ("ab,cd->abcd", [(2, 2), (3, 3)]),
        ("...a,ab->...b", [(2, 3, 4), (4, 5)]),
        ("a,a,a,a->", [(5,), (5,), (5,), (5,)]),
        ("ij,jk", [(2, 3), (3, 2)]),
    ],
)
def test_matches_numpy_einsum(eq, shapes):
    # Reference: numpy.einsum (numpy documentation), the definition of einsum notation.
    arrays = [_rand(*s, seed=k) for k, s in enumerate(shapes)]
    np.testing.assert_allclose(contract(eq, *arrays), np.einsum(eq, *arrays), atol=1e-10)


def test_real_in_real_out_and_sliced():
    rng = np.random.default_rng(1)
    a, b, c = rng.standard_normal((8, 8)), rng.standard_normal((8, 8)), rng.standard_normal((8, 8))
    got = contract("ab,bc,cd->ad", a, b, c, memory_limit=16 * 64)
    assert got.dtype == np.float64
    np.testing.assert_allclose(got, a @ b @ c, atol=1e-10)


@pytest.mark.parametrize(
    ("eq", "shapes", "match"),
    [
        ("ab,bc->ac", [(2, 3)], "operand"),
        ("ab->ab", [(2, 3, 4)], "axes"),
        ("ab,bc->ac", [(2, 3), (4, 5)], "dimension"),
        ("ab->c", [(2, 3)], "einsum"),
        ("ab->aa", [(2, 3)], "einsum"),
        ("ab->a->b", [(2, 3)], "einsum"),
    ],
)
def test_bad_equations_raise_input_error(eq, shapes, match):
    with pytest.raises(InputError, match=match):
        contract(eq, *[np.ones(s) for s in shapes])


def test_non_string_equation():
    with pytest.raises(InputError, match="string"):
        contract(3, np.ones(2))


def test_memory_limit_bounds_what_the_executor_allocates():
    # Bug found: the planner counted live intermediates but not the executor's reordered
    # operand copies, so contract(..., memory_limit=L) could allocate up to ~1.7x L.
    from tnsim.execution.steps import compile_tree, peak_memory
    from tnsim.network.graph import TensorGraph
    from tnsim.plan.driver import make_plan

    rng = np.random.default_rng(3)
    shapes = {0: 8, 1: 8, 2: 8, 3: 8, 4: 8}
    indices = [(0, 1, 2), (2, 3), (3, 4, 0), (1, 4)]
    arrays = [rng.standard_normal(tuple(shapes[i] for i in ix)) + 0j for ix in indices]
    network = TensorGraph(arrays, indices, shapes, ())
    limit = 16 * 256
    plan = make_plan(network, memory_limit=limit)
    assert peak_memory(plan.tree, compile_tree(plan.tree, plan.sliced), 16) <= limit
    eq = "abc,cd,dea,be->"
    np.testing.assert_allclose(
        contract(eq, *arrays, memory_limit=limit), np.einsum(eq, *arrays), rtol=1e-10
    )
