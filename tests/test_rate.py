"""The cached matmul rate: measured again when stale, foreign or implausible."""

from __future__ import annotations

import json
import time

import numpy as np
import pytest

import tnsim.execution.rate as rate_module


@pytest.fixture
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    monkeypatch.setattr(rate_module, "_RATES", {})
    measured = []

    def fake_measure(dt, n):
        measured.append(dt.name)
        return {"complex64": 2e10, "complex128": 1e10}[dt.name]

    monkeypatch.setattr(rate_module, "_measure", fake_measure)
    return tmp_path / "tnsim" / "matmul_rate.json", measured


def _write(path, entries):
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(entries))


def _key(dtype, n=64):
    return rate_module._key(np.dtype(dtype), n)


def test_a_fresh_plausible_entry_is_used(cache):
    path, measured = cache
    now = time.time()
    _write(path, {_key(np.complex128): {"rate": 3e9, "measured": now}})
    assert rate_module.matmul_rate(np.complex128, n=64) == 3e9
    assert measured == []


def test_a_stale_entry_is_measured_again(cache):
    path, measured = cache
    old = time.time() - (rate_module.MAX_AGE_DAYS + 1) * 86400
    _write(path, {_key(np.complex128): {"rate": 3e9, "measured": old}})
    assert rate_module.matmul_rate(np.complex128, n=64) == 1e10
    assert measured == ["complex128"]
    stored = json.loads(path.read_text())
    assert stored[_key(np.complex128)]["rate"] == 1e10


def test_old_layout_and_other_machines_are_not_used(cache):
    path, measured = cache
    _write(path, {"complex128-64-2-2.0.0": 5e9, "complex128-64|other cpu": {"rate": 1.0}})
    assert rate_module.matmul_rate(np.complex128, n=64) == 1e10
    assert measured == ["complex128"]


def test_single_slower_than_double_is_implausible_and_both_are_measured(cache):
    # The figure that prompted this: complex64 cached at 22.7 GFLOP/s below complex128's 88.
    path, measured = cache
    now = time.time()
    _write(
        path,
        {
            _key(np.complex64): {"rate": 22.7e9, "measured": now - 10},
            _key(np.complex128): {"rate": 88e9, "measured": now},
        },
    )
    assert rate_module.matmul_rate(np.complex64, n=64) == 2e10
    assert sorted(measured) == ["complex128", "complex64"]
    # Measured side by side now: trusted from here on, nothing measured again.
    rate_module._RATES.clear()
    measured.clear()
    assert rate_module.matmul_rate(np.complex128, n=64) == 1e10
    assert measured == []


def test_calibrate_measures_every_dtype(cache):
    path, measured = cache
    assert rate_module.calibrate(n=64) == {"complex64": 2e10, "complex128": 1e10}
    assert sorted(measured) == ["complex128", "complex64"]
    assert len(json.loads(path.read_text())) == 2
