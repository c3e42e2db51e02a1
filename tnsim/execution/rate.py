"""The dense matrix-multiply rate of the machine: the physical limit of dense contraction.

Measured once (a fraction of a second), kept in memory and in a small JSON
file in the user's cache directory (``$XDG_CACHE_HOME/tnsim`` or
``~/.cache/tnsim``; an unwritable directory is tolerated).  A stored rate is
measured again when it is older than :data:`MAX_AGE_DAYS`, when it was taken
on another machine or numpy (the key names the processor, core count and
numpy version), or when it is implausible: a complex64 rate below
:data:`SINGLE_OVER_DOUBLE` times the complex128 rate (single precision does
the same work on half the bytes; such a figure was measured while other work
held the cores).  ``tnsim calibrate`` (:func:`calibrate`) measures afresh.
"""

from __future__ import annotations

import json
import math
import os
import platform
import time

import numpy as np

from tnsim.errors import TnsimError
from tnsim.fileio import write_atomic

__all__ = [
    "MAX_AGE_DAYS",
    "SINGLE_OVER_DOUBLE",
    "cache_file",
    "calibrate",
    "matmul_rate",
    "stored_measurement",
    "stored_rates",
]

MAX_AGE_DAYS = 30
"""A stored rate older than this is measured again."""

SINGLE_OVER_DOUBLE = 0.8
"""A stored complex64 rate below this share of the complex128 rate is measured again
(common practice: single precision is at least as fast as double on CPUs)."""

_RATES: dict[str, float] = {}


def cache_file() -> str:
    """The path of the JSON file that holds the measured rates."""
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "tnsim", "matmul_rate.json")


def _processor() -> str:
    try:
        with open("/proc/cpuinfo", encoding="utf-8", errors="replace") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine()


def _key(dt: np.dtype, n: int) -> str:
    machine = f"{platform.machine()}|{_processor()}|{os.cpu_count()}|numpy {np.__version__}"
    return f"{dt.name}-{n}|{machine}"


def _load() -> dict:
    try:
        with open(cache_file(), encoding="utf-8") as fh:
            stored = json.load(fh)
    except (OSError, ValueError):
        return {}
    return stored if isinstance(stored, dict) else {}


def _usable(entry, now: float) -> bool:
    return (
        isinstance(entry, dict)
        and isinstance(entry.get("rate"), (int, float))
        and entry["rate"] > 0
        and isinstance(entry.get("measured"), (int, float))
        and now - entry["measured"] < MAX_AGE_DAYS * 86400
    )


def _plausible(stored: dict, n: int) -> bool:
    single = stored.get(_key(np.dtype(np.complex64), n))
    double = stored.get(_key(np.dtype(np.complex128), n))
    if not (isinstance(single, dict) and isinstance(double, dict)):
        return True
    if single.get("measured") == double.get("measured"):
        return True  # measured side by side by calibrate(): trusted as they are
    return single.get("rate", 0) >= SINGLE_OVER_DOUBLE * double.get("rate", 0)


def _measure(dt: np.dtype, n: int) -> float:
    """Best of five ``n``×``n`` products after one warm-up, in real FLOP/s."""
    rng = np.random.default_rng(0)
    a = (rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))).astype(dt)
    b = a.T.copy()
    a @ b  # warm-up: thread start-up and first-touch page faults are not the rate
    best = math.inf
    for _ in range(5):
        t0 = time.perf_counter()
        a @ b
        best = min(best, time.perf_counter() - t0)
    return 8.0 * n**3 / max(best, 1e-9)


def _store(updates: dict) -> None:
    stored = _load()
    stored = {k: v for k, v in stored.items() if isinstance(v, dict)}  # drop the old layout
    stored.update(updates)
    try:
        os.makedirs(os.path.dirname(cache_file()), exist_ok=True)
        write_atomic(cache_file(), json.dumps(stored, indent=1))
    except (OSError, TnsimError):  # a cache that cannot be written is only not kept
        pass


def calibrate(dtypes=(np.complex64, np.complex128), *, n: int = 384) -> dict[str, float]:
    """Measure the matmul rate of each dtype afresh, store and return them (name -> FLOP/s).

    Examples
    --------
    >>> sorted(calibrate(n=64))
    ['complex128', 'complex64']
    """
    now = time.time()
    out, updates = {}, {}
    for dtype in dtypes:
        dt = np.dtype(dtype)
        rate = _measure(dt, n)
        key = _key(dt, n)
        _RATES[key] = rate
        updates[key] = {"rate": rate, "measured": now}
        out[dt.name] = rate
    _store(updates)
    return out


def stored_measurement(name: str, measure, *, refresh: bool = False) -> float:
    """A positive figure of this machine kept in the cache file beside the matmul rates.

    ``measure()`` is called when the figure is missing, stale (older than
    :data:`MAX_AGE_DAYS`), from another machine or numpy, or ``refresh`` is
    set; every process then reads the same value, so forecasts made in
    different processes agree.

    Examples
    --------
    >>> stored_measurement("doc-example", lambda: 2.5, refresh=True)
    2.5
    """
    key = f"{name}|{_key(np.dtype(np.complex128), 0).split('|', 1)[1]}"
    if not refresh and key in _RATES:
        return _RATES[key]
    entry = None if refresh else _load().get(key)
    if _usable(entry, time.time()):
        assert isinstance(entry, dict)
        value = float(entry["rate"])
    else:
        value = float(measure())
        _store({key: {"rate": value, "measured": time.time()}})
    _RATES[key] = value
    return value


def stored_rates() -> dict[str, dict]:
    """The cache file's entries (key -> ``{"rate", "measured"}``), for display."""
    return {k: v for k, v in _load().items() if isinstance(v, dict)}


def matmul_rate(dtype=np.complex128, *, refresh: bool = False, n: int = 384) -> float:
    """Real FLOP/s of a dense ``n``×``n`` complex matrix product on this machine.

    A complex product of two ``n``×``n`` matrices is ``8 n³`` real FLOPs; the
    rate is the best of five products after a warm-up.  Cached in memory and in
    ``matmul_rate.json`` under the user cache directory; measured again when
    stale, from another machine, or implausible (see the module notes).

    Examples
    --------
    >>> matmul_rate() > 1e6
    True
    """
    dt = np.dtype(dtype)
    key = _key(dt, n)
    if not refresh and key in _RATES:
        return _RATES[key]
    if not refresh:
        stored = _load()
        if _usable(stored.get(key), time.time()) and _plausible(stored, n):
            _RATES[key] = float(stored[key]["rate"])
            return _RATES[key]
        if not _plausible(stored, n):  # measure both again: either may be the wrong one
            rates = calibrate(n=n)
            if dt.name in rates:
                return rates[dt.name]
    return calibrate((dt,), n=n)[dt.name]
