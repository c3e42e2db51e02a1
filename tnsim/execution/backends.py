"""Array backends: where the pairwise contractions of a run are computed.

``"numpy"`` (the default) runs the compiled batched-matmul steps of
:mod:`tnsim.execution.slices` directly.  Any other name is an array library reached
through opt_einsum's backend dispatch (:func:`opt_einsum.contract` with
``backend=``): the sliced input arrays are converted once per slice, each
pairwise contraction is an einsum in that library, the running power-of-two
scale is kept with the library's own ``abs``/``max``, and the result comes back
as a numpy array.  CuPy (``"cupy"``) and PyTorch (``"torch"``) run on a GPU when
one is present; ``"dask"`` (``dask.array``) is a CPU stand-in useful for tests.
"""

from __future__ import annotations

import importlib
import importlib.util
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import opt_einsum
from opt_einsum.backends import get_func

from tnsim.errors import InputError

__all__ = ["ArrayBackend", "get_backend"]

_MODULES = {"torch": "torch", "cupy": "cupy", "jax": "jax", "dask": "dask.array"}


@dataclass(frozen=True)
class ArrayBackend:
    """One array library, as used by the slice runner.

    Attributes
    ----------
    name : str
        The name opt_einsum's dispatch knows it by (``"numpy"``, ``"cupy"``, ``"torch"``...).
    """

    name: str

    @property
    def is_numpy(self) -> bool:
        """Whether this is the numpy fast path."""
        return self.name == "numpy"

    def to_backend(self, array: np.ndarray) -> Any:
        """Convert a numpy array to this library's array type."""
        if self.name == "torch":
            from opt_einsum.backends import to_torch

            return to_torch(np.ascontiguousarray(array))
        if self.name == "cupy":
            from opt_einsum.backends import to_cupy

            return to_cupy(array)
        if self.name == "dask":
            import dask.array as da

            return da.from_array(np.asarray(array), chunks=-1)
        return get_func("asarray", self.name)(array)

    def to_numpy(self, array: Any) -> np.ndarray:
        """Convert this library's array back to numpy."""
        if self.name == "torch":
            return array.detach().cpu().numpy()
        if self.name == "cupy":
            return array.get()
        if self.name == "dask":
            return np.asarray(array.compute())
        return np.asarray(array)

    def contract_pair(
        self, a: Any, ia: Sequence[int], b: Any, ib: Sequence[int], out: Sequence[int]
    ) -> Any:
        """Contract two arrays labelled ``ia`` and ``ib`` into labels ``out``."""
        table: dict[int, str] = {}
        sym = opt_einsum.get_symbol

        def word(labels):
            return "".join(table.setdefault(i, sym(len(table))) for i in labels)

        eq = f"{word(ia)},{word(ib)}->{word(out)}"
        return opt_einsum.contract(eq, a, b, backend=self.name, optimize=False)

    def normalize(self, array: Any) -> tuple[Any, int]:
        """Scale by a power of two so the largest component lies in [0.5, 1)."""
        peak = float(get_func("max", self.name)(get_func("abs", self.name)(array)))
        if peak == 0.0 or not math.isfinite(peak):
            return array, 0
        e = math.frexp(peak)[1]
        return (array * math.ldexp(1.0, -e), e) if e else (array, 0)


def get_backend(name: str | ArrayBackend | None) -> ArrayBackend:
    """Return the backend called ``name`` after checking its library is installed.

    Raises
    ------
    InputError
        If the library cannot be imported.

    Examples
    --------
    >>> get_backend("numpy").is_numpy
    True
    >>> get_backend("no_such_library")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    tnsim.errors.InputError: array backend 'no_such_library' is not installed ...
    """
    if isinstance(name, ArrayBackend):
        return name
    name = "numpy" if name is None else str(name).lower()
    if name == "numpy":
        return ArrayBackend("numpy")
    module = _MODULES.get(name, name)
    try:
        found = importlib.util.find_spec(module.split(".")[0]) is not None
        if found:
            importlib.import_module(module)
    except (ImportError, ValueError):
        found = False
    if not found:
        raise InputError(
            f"array backend {name!r} is not installed (no module {module!r}); install it, "
            "or use the default --array-backend numpy"
        )
    return ArrayBackend(name)
