"""Numbers kept as ``mantissa * 2**exponent``: the scale that keeps tiny amplitudes exact.

Amplitudes of very wide circuits (``|a|`` near ``2**(-n/2)``) underflow
floating point.  Networks carry a power-of-two exponent and contraction
keeps a running one: when the largest component of an intermediate leaves
``[2**-SLACK, 2**SLACK]`` it is divided by ``2**e`` -- an exact operation --
so that component lies in ``[0.5, 1)``, and ``e`` is added to the exponent.
Floating-point products are unchanged by exact power-of-two scalings, so the
rescaling does not alter a result's bits; results keep their log-magnitude
and phase even where the value itself underflows.

Finding the largest component reads the whole intermediate.  For large ones
:func:`rescale_bounded` skips that pass where it cannot lead to a rescale: an
upper bound on the peak (from the operands' peaks) proves it below
``2**SLACK``, and the first few thousand components prove it above
``2**-SLACK``.  The result is the same bits either way.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Scaled", "normalize", "normalize_owned", "peak_log2", "rescale_bounded"]


@dataclass(frozen=True)
class Scaled:
    """A value stored as ``mantissa * 2**exponent``.

    Attributes
    ----------
    mantissa : numpy.ndarray
        Array (0-d for a scalar) whose largest component is below 1 in magnitude.
    exponent : int
        Power of two.

    Examples
    --------
    >>> a = Scaled(np.array(0.5 + 0.5j), -2000)  # far below the smallest double
    >>> complex(a), round(a.log10_abs(), 3), round(a.phase(), 6)
    (0j, -602.21, 0.785398)
    """

    mantissa: np.ndarray
    exponent: int

    def value(self) -> np.ndarray:
        """Return ``mantissa * 2**exponent`` as complex128 (may under/overflow)."""
        m = np.asarray(self.mantissa, dtype=np.complex128)
        return np.ldexp(m.real, self.exponent) + 1j * np.ldexp(m.imag, self.exponent)

    def log10_abs(self) -> np.ndarray | float:
        """Return ``log10 |value|`` exactly, even where the value underflows."""
        with np.errstate(divide="ignore"):
            mag = np.abs(self.mantissa.astype(np.complex128))
            out = np.log10(mag) + self.exponent * math.log10(2)
        return float(out) if np.ndim(out) == 0 else out

    def phase(self) -> np.ndarray | float:
        """Return the complex argument of the value in radians."""
        out = np.angle(self.mantissa)
        return float(out) if np.ndim(out) == 0 else out

    def __complex__(self) -> complex:
        return complex(self.value())

    def __add__(self, other: Scaled) -> Scaled:
        if not np.any(self.mantissa):
            return other
        if not np.any(other.mantissa):
            return self
        e = max(self.exponent, other.exponent)
        total = np.ldexp(1.0, self.exponent - e) * self.mantissa
        total = total + np.ldexp(1.0, other.exponent - e) * other.mantissa
        m, de = normalize(total.astype(self.mantissa.dtype, copy=False))
        return Scaled(m, e + de)


def normalize(array: np.ndarray) -> tuple[np.ndarray, int]:
    """Scale ``array`` by a power of two so its largest component lies in [0.5, 1).

    Returns the scaled array and the exponent ``e`` with ``array = scaled * 2**e``.
    An all-zero array is returned unchanged with ``e = 0``.

    Examples
    --------
    >>> normalize(np.array([3.0, -1.0]))
    (array([ 0.75, -0.25]), 2)
    """
    if array.size == 0:
        return array, 0
    flat = array.reshape(-1)
    if np.iscomplexobj(flat):
        flat = flat.view(flat.real.dtype)
    peak = _largest(flat)
    if peak == 0.0 or not math.isfinite(peak):
        return array, 0
    e = math.frexp(peak)[1]
    if e == 0:
        return array, 0
    return np.ldexp(flat, -e).view(array.dtype).reshape(array.shape), e


def _largest(array: np.ndarray) -> float:
    """The largest real or imaginary part of ``array`` in magnitude, any layout.

    ``nan`` if any part is ``nan``; ``0.0`` for an empty array.
    """
    if array.size == 0:
        return 0.0
    parts: tuple[np.ndarray, ...] = (array,)
    if np.iscomplexobj(array):
        if array.flags.c_contiguous:
            parts = (array.reshape(-1).view(array.real.dtype),)
        else:  # a strided view (a sliced leaf): its parts one by one
            parts = (array.real, array.imag)
    peaks = [float(max(p.max(), -p.min())) for p in parts]
    return math.nan if any(math.isnan(p) for p in peaks) else max(peaks)


#: Intermediates whose largest component lies in ``[2**-SLACK, 2**SLACK]`` are not rescaled.
SLACK = 32


def normalize_owned(array: np.ndarray, slack: int = 0) -> tuple[np.ndarray, int]:
    """:func:`normalize` in place, for a freshly computed intermediate.

    With ``slack``, an array whose peak exponent ``e`` has ``|e| <= slack`` is
    left as it is (``e = 0`` is returned).
    """
    array, e, _ = rescale_bounded(array, math.inf, slack)
    return array, e


#: Components read from the start of an intermediate to show that its peak is not too small.
SAMPLE = 1 << 12


def rescale_bounded(
    array: np.ndarray, bound: float, slack: int = SLACK
) -> tuple[np.ndarray, int, float]:
    """:func:`normalize_owned`, reading the whole array only where a rescale may be due.

    ``bound`` is an upper bound on ``log2`` of the array's largest component
    (``math.inf``: none known).  Below ``slack`` it proves the peak is under
    ``2**slack``; if the first :data:`SAMPLE` components then reach
    ``2**(-slack - 1)``, the peak exponent lies within ``slack`` and the array is
    left as it is without being read further.  Otherwise the whole array is
    scanned as :func:`normalize_owned` does.  Either way the array and ``e`` are
    the same.

    Returns
    -------
    array : numpy.ndarray
        The array, rescaled in place where due.
    e : int
        Its exponent (``array_before = array * 2**e``).
    bound : float
        An upper bound on ``log2`` of the returned array's largest component
        (``-inf``: all zero; ``inf``: not finite).

    Examples
    --------
    >>> x = np.array([3.0, -1.0])
    >>> rescale_bounded(x.copy(), math.inf, 0)
    (array([ 0.75, -0.25]), 2, 0.0)
    >>> rescale_bounded(x.copy(), 2.0, 32)  # proven in range: not scanned
    (array([ 3., -1.]), 0, 2.0)
    """
    flat = array.reshape(-1)
    if np.iscomplexobj(flat):
        flat = flat.view(flat.real.dtype)
    if flat.size == 0:
        return array, 0, -math.inf
    if bound < slack and _largest(flat[:SAMPLE]) >= math.ldexp(1.0, -slack - 1):
        return array, 0, bound
    peak = _largest(flat)
    if peak == 0.0:
        return array, 0, -math.inf
    if not math.isfinite(peak):
        return array, 0, math.inf
    e = math.frexp(peak)[1]
    if abs(e) <= slack:
        return array, 0, float(e)
    if -100 <= e <= 100:  # 2**-e is a normal number even in float32: multiply (SIMD, exact)
        np.multiply(flat, flat.dtype.type(math.ldexp(1.0, -e)), out=flat)
    else:
        np.ldexp(flat, -e, out=flat)
    return array, e, 0.0


def peak_log2(array: np.ndarray) -> float:
    """``log2`` of the largest component of ``array`` in magnitude.

    ``-inf`` when it is all zero (or empty), ``inf`` when it is not finite.

    Examples
    --------
    >>> peak_log2(np.array([0.25 - 4j, 1.0]))
    2.0
    """
    peak = _largest(np.asarray(array))
    if peak == 0.0:
        return -math.inf
    return math.log2(peak) if math.isfinite(peak) else math.inf
