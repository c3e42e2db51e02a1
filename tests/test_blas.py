"""BLAS thread control around contractions."""

import numpy as np
import pytest

from tnsim.execution.blas import blas_threads, set_blas_threads
from tnsim.queries.amplitudes import amplitude
from tnsim.testing import dense_state, random_circuit


def test_set_and_read_back():
    before = blas_threads()
    try:
        set_blas_threads(1)
        assert blas_threads() == 1
    finally:
        set_blas_threads(before)
    assert blas_threads() == before


@pytest.mark.parametrize("threads", [1, 2])
def test_contraction_restores_the_thread_count_and_is_right(threads):
    before = blas_threads()
    set_blas_threads(threads)
    try:
        c = random_circuit(9, 60, seed=2)
        got = amplitude(c, "101010101")
        assert got == pytest.approx(dense_state(c)[int("101010101", 2)], abs=1e-12)
        assert blas_threads() == threads
    finally:
        set_blas_threads(before)
    assert np.isfinite(abs(got))
