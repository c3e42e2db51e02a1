"""The dense matrix-multiply rate of the machine: the physical limit of dense contraction.

Measured once (a fraction of a second), kept in memory and in a small JSON
file in the user's cache directory (``$XDG_CACHE_HOME/tnsim`` or
``~/.cache/tnsim``; an unwritable directory is tolerated).
"""

from __future__ import annotations

import json
import math
import os
import time

import numpy as np

from tnsim.errors import InputError
from tnsim.fileio import write_atomic

__all__ = ["matmul_rate"]


_RATES: dict[str, float] = {}


def _cache_file() -> str:
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return os.path.join(base, "tnsim", "matmul_rate.json")


def matmul_rate(dtype=np.complex128, *, refresh: bool = False, n: int = 384) -> float:
    """Real FLOP/s of a dense ``n``×``n`` complex matrix product on this machine (best of 3).

    A complex product of two ``n``×``n`` matrices is ``8 n³`` real FLOPs.
    Cached in memory and in ``matmul_rate.json`` under the user cache directory.

    Examples
    --------
    >>> matmul_rate() > 1e6
    True
    """
    dt = np.dtype(dtype)
    key = f"{dt.name}-{n}-{os.cpu_count()}-{np.__version__}"
    if not refresh and key in _RATES:
        return _RATES[key]
    path = _cache_file()
    stored: dict = {}
    try:
        with open(path, encoding="utf-8") as fh:
            stored = json.load(fh)
        if not refresh and isinstance(stored.get(key), (int, float)) and stored[key] > 0:
            _RATES[key] = float(stored[key])
            return _RATES[key]
    except (OSError, ValueError):
        stored = {}
    rng = np.random.default_rng(0)
    a = (rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))).astype(dt)
    b = a.T.copy()
    best = math.inf
    for _ in range(3):
        t0 = time.perf_counter()
        a @ b
        best = min(best, time.perf_counter() - t0)
    rate = 8.0 * n**3 / max(best, 1e-9)
    _RATES[key] = rate
    stored = stored if isinstance(stored, dict) else {}
    stored[key] = rate
    try:
        os.makedirs(os.path.dirname(path), exist_ok=True)
        write_atomic(path, json.dumps(stored))
    except (OSError, InputError):
        pass
    return rate
