"""The BLAS thread count: one thread for small matrix products, every thread for large ones.

A multi-threaded BLAS gains little on the many small products of a shallow
circuit's contraction, and on a busy machine its spinning threads can make
them tens of times slower.  The executor therefore runs products below
:data:`~tnsim.fitted.SMALL_PRODUCT` multiply-adds on one thread.  Only OpenBLAS (numpy's
bundled BLAS) is controlled; with any other BLAS these functions do nothing.
"""

from __future__ import annotations

import ctypes
import functools

__all__ = ["blas_threads", "set_blas_threads"]

_SETTERS = (
    "scipy_openblas_set_num_threads64_",
    "scipy_openblas_set_num_threads",
    "openblas_set_num_threads64_",
    "openblas_set_num_threads",
)


@functools.lru_cache(maxsize=1)
def _openblas() -> tuple:
    """Return ``(setter, getter)`` of the OpenBLAS numpy loaded, or ``(None, None)``."""
    try:
        with open("/proc/self/maps", encoding="ascii", errors="replace") as fh:
            paths = sorted({line.split()[-1] for line in fh if "openblas" in line.lower()})
    except OSError:
        return None, None
    for path in paths:
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for name in _SETTERS:
            setter = getattr(lib, name, None)
            getter = getattr(lib, name.replace("set_num", "get_num"), None)
            if setter is not None and getter is not None:
                setter.argtypes, getter.restype = [ctypes.c_int], ctypes.c_int
                return setter, getter
    return None, None


def blas_threads() -> int:
    """Return the current OpenBLAS thread count (1 if it cannot be read)."""
    getter = _openblas()[1]
    return int(getter()) if getter is not None else 1


def set_blas_threads(count: int) -> None:
    """Set the OpenBLAS thread count (no effect without OpenBLAS)."""
    setter = _openblas()[0]
    if setter is not None:
        setter(int(count))
