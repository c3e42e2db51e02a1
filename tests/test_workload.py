"""Forecasts of whole queries agree with what the queries then run (their FLOPs logged)."""

from __future__ import annotations

import re

import numpy as np
import pytest

from tnsim.circuits.families import brickwork, grid_circuit
from tnsim.errors import ResourceLimitError
from tnsim.execution import budget
from tnsim.execution.options import resolve_options, run_options
from tnsim.network.builders import amplitude_network
from tnsim.network.simplify import absorb_small
from tnsim.queries.amplitudes import amplitude, amplitude_route, amplitudes
from tnsim.queries.expectation import expectation
from tnsim.queries.forecast import forecast
from tnsim.queries.marginals import marginal
from tnsim.queries.sampling import sample
from tnsim.queries.workload import (
    forecast_amplitudes,
    forecast_expectation,
    forecast_marginal,
    forecast_samples,
)

GRID = grid_circuit(3, 4, 6, seed=2)


def _logged(run) -> tuple[int, int]:
    log: list = []
    with run_options(log=log):
        run()
    return sum(r.flops for r in log), len(log)


def _rows(n: int, count: int, vary: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    rows = np.zeros((count, n), dtype=np.uint8)
    rows[:, :vary] = rng.integers(0, 2, (count, vary))
    return rows


def test_one_amplitude_forecast_is_of_the_run(monkeypatch):
    # cost plans under the limit amp runs under (no --memory: half the available memory,
    # held fixed here: the operating system's figure moves between two calls).
    import tnsim.execution.memory as memory

    monkeypatch.setattr(memory, "available_memory", lambda: 8 * 2**30)
    bits = "0" * GRID.num_qubits
    report = forecast(GRID, bits)
    assert report.memory_limit == resolve_options().slice_limit
    flops, count = _logged(lambda: amplitude(GRID, bits))
    assert count == 1 and flops == report.flops


@pytest.mark.parametrize(("count", "vary", "kind"), [(30, 5, "open"), (40, 12, "open")])
def test_batch_forecast_of_open_legs_matches_the_run(count, vary, kind):
    rows = _rows(GRID.num_qubits, count, vary, seed=vary)
    f = forecast_amplitudes(GRID, rows)
    assert amplitude_route(GRID, rows).kind == kind
    flops, runs = _logged(lambda: amplitudes(GRID, rows))
    assert (f.flops, f.contractions) == (flops, runs)


def test_batch_forecast_of_the_batched_engine_matches_the_run():
    c = brickwork(40, 3, seed=4)
    rows = np.random.default_rng(3).integers(0, 2, (200, 40)).astype(np.uint8)
    route = amplitude_route(c, rows)
    f = forecast_amplitudes(c, rows)
    flops, runs = _logged(lambda: amplitudes(c, rows))
    assert route.kind in ("batched", "rows")
    assert f.contractions == runs
    assert f.flops == pytest.approx(flops, rel=0.01)


def test_marginal_and_expectation_forecasts_match_the_runs():
    f = forecast_marginal(GRID, [0, 5, 7])
    flops, runs = _logged(lambda: marginal(GRID, [0, 5, 7]))
    assert (f.flops, f.contractions) == (flops, runs)
    text = "0.5 Z0 Z1 - 1.2 X5 + Z2 Z3 + 0.7"
    f = forecast_expectation(GRID, text)
    flops, runs = _logged(lambda: expectation(GRID, text))
    assert (f.flops, f.contractions) == (flops, runs)


def test_sample_forecasts():
    f = forecast_samples(GRID, 50)  # 12 qubits: all amplitudes at once, planned
    flops, runs = _logged(lambda: sample(GRID, 50, seed=1))
    assert (f.flops, f.contractions) == (flops, runs) and f.method == "time model"
    wide = brickwork(30, 3, seed=1)
    f = forecast_samples(wide, 40)  # gate by gate: measured by pilot runs
    flops, _ = _logged(lambda: sample(wide, 40, seed=0))
    assert f.method.startswith("measured") and f.seconds > 0
    assert flops / 2 <= f.flops <= flops * 2


def test_tiny_plans_forecast_their_fixed_time():
    report = forecast(GRID, "0" * GRID.num_qubits)
    assert report.fixed_seconds > 0
    assert report.seconds > report.fixed_seconds


def test_an_impossible_limit_names_one_that_works(monkeypatch):
    monkeypatch.setattr(budget, "MAX_SLICES", 2**3)
    network = absorb_small(amplitude_network(grid_circuit(3, 3, 6, seed=1), "0" * 9))
    with pytest.raises(ResourceLimitError, match="smallest limit that keeps") as info:
        budget.fit_plan(network, resolve_options(128))
    need = int(re.search(r"\((\d+) bytes\)", str(info.value)).group(1))
    assert need > 128
    plan = budget.fit_plan(network, resolve_options(need))
    assert plan.num_slices <= 2**3
