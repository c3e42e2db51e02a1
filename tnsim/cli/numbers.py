"""Numbers as the command line shows them: exact decimal text of scaled values, strict JSON.

Amplitudes of wide circuits are far below the smallest double (``|a|`` near
``2**(-n/2)``), so they are carried as ``mantissa * 2**exponent``
(:class:`tnsim.network.scaled.Scaled`).  :func:`scaled_text` turns one into
decimal mantissa-exponent text with Python's :mod:`decimal` arithmetic (no
underflow at any width), and :func:`log10_text` does the same from a base-10
logarithm.  JSON output holds only finite numbers: :func:`json_float` turns
``nan``/``inf`` and values that underflow into ``null``, next to their log form.
"""

from __future__ import annotations

import math

__all__ = [
    "amplitude_record",
    "bits_cell",
    "json_float",
    "log10_text",
    "scaled_log10",
    "scaled_text",
]

_LOG10_2 = math.log10(2.0)
_TINY = 2.2250738585072014e-308  # smallest normal double


def scaled_text(mantissa: float, exponent: int, digits: int = 10, sign: bool = True) -> str:
    """Decimal text of ``mantissa * 2**exponent``, correct to ``digits`` significant digits.

    Examples
    --------
    >>> scaled_text(0.75, -4000)
    '+5.6895590276e-1205'
    >>> scaled_text(-0.5, 1, digits=3, sign=False)
    '-1.000e+00'
    >>> scaled_text(0.0, -10)
    '+0.0000000000e+00'
    """
    import decimal  # only here: the command line starts without it

    m = float(mantissa)
    if m == 0.0:
        text = f"{0.0:.{digits}e}"
    else:
        ctx = decimal.Context(prec=40, Emax=decimal.MAX_EMAX, Emin=decimal.MIN_EMIN)
        value = ctx.multiply(decimal.Decimal(m), ctx.power(2, int(exponent)))
        text = f"{value:.{digits}e}"
        mant, _, exp = text.partition("e")
        text = f"{mant}e{int(exp):+03d}"
    if sign and not text.startswith("-"):
        text = "+" + text
    return text


def log10_text(log10: float, digits: int = 10) -> str:
    """Decimal mantissa-exponent text of ``10**log10`` (for values beyond a float's range).

    Examples
    --------
    >>> log10_text(223.5, digits=4)
    '3.1623e+223'
    >>> log10_text(-math.inf)
    '0'
    """
    if log10 == -math.inf:
        return "0"
    if not math.isfinite(log10):
        return "inf"
    e = math.floor(log10)
    mant = 10.0 ** (log10 - e)
    if round(mant, digits) >= 10.0:
        mant, e = mant / 10.0, e + 1
    return f"{mant:.{digits}f}e{e:+03d}"


def json_float(value: float) -> float | None:
    """``value`` for strict JSON: ``None`` for ``nan`` and infinities.

    Examples
    --------
    >>> json_float(float("inf")) is None, json_float(0.5)
    (True, 0.5)
    """
    value = float(value)
    return value if math.isfinite(value) else None


def _plain(mantissa: float, exponent: int) -> float | None:
    """``mantissa * 2**exponent`` as a float, or ``None`` where it under- or overflows."""
    if mantissa == 0.0:
        return 0.0
    try:
        value = math.ldexp(mantissa, exponent)
    except OverflowError:
        return None
    return value if _TINY <= abs(value) < math.inf else None


def scaled_log10(mantissa: complex, exponent: int) -> float:
    """``log10 |mantissa * 2**exponent|`` (``-inf`` for zero), never underflowing.

    Examples
    --------
    >>> round(scaled_log10(0.5 + 0j, -3), 6)
    -1.20412
    """
    mag = abs(complex(mantissa))
    return math.log10(mag) + exponent * _LOG10_2 if mag > 0 else -math.inf


def amplitude_record(bits: str, mantissa: complex, exponent: int) -> dict:
    """One amplitude as a JSON-ready record (finite numbers or ``None`` only).

    ``real``/``imag``/``probability`` are plain floats where a double holds
    them and ``None`` where they underflow; ``amplitude`` is exact decimal text;
    ``log10_abs`` (``None`` for a zero amplitude) and ``phase`` (radians, in
    ``(-pi, pi]``) never underflow; ``mantissa`` and ``exponent2`` give the
    value exactly: ``(mantissa[0] + 1j*mantissa[1]) * 2**exponent2``.

    Examples
    --------
    >>> r = amplitude_record("01", 0.5 + 0.5j, -2000)
    >>> r["real"] is None, r["amplitude"], round(r["log10_abs"], 4), round(r["phase"], 4)
    (True, '+4.3549049081e-603+4.3549049081e-603j', -602.2105, 0.7854)
    """
    z = complex(mantissa)
    e = int(exponent)
    log10 = scaled_log10(z, e)
    two = _plain(abs(z) ** 2, 2 * e) if z else 0.0
    return {
        "bits": bits,
        "amplitude": f"{scaled_text(z.real, e)}{scaled_text(z.imag, e)}j",
        "real": _plain(z.real, e),
        "imag": _plain(z.imag, e),
        "probability": two,
        "log10_abs": json_float(log10),
        "phase": math.atan2(z.imag, z.real),
        "mantissa": [z.real, z.imag],
        "exponent2": e,
    }


def bits_cell(bits: str, width: int = 64, keep: int = 24) -> str:
    """A bitstring for a table cell: whole up to ``width`` characters, else both ends.

    Examples
    --------
    >>> bits_cell("0" * 10)
    '0000000000'
    >>> bits_cell("1" + "0" * 98 + "1", keep=4)
    '1000...0001'
    """
    if len(bits) <= width:
        return bits
    return f"{bits[:keep]}...{bits[-keep:]}"
