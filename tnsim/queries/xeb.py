"""Linear cross-entropy benchmarking (XEB) of bitstrings against a circuit.

``F = 2**n * mean p(x) - 1`` over the given bitstrings ``x`` (Arute et al.,
"Quantum supremacy using a programmable superconducting processor", Nature
574, 505, 2019), with standard error ``std(2**n p(x)) / sqrt(m)``.  The
products ``2**n p(x)`` are kept as base-2 logarithms (``n + 2 log2 |a|``, from
the amplitudes' power-of-two scale), and the mean and the standard deviation
are formed after factoring out the largest term, so circuits far wider than
the double-precision range of ``2**n`` are fine: a shallow circuit's samples
can score ``F + 1 = 10**200`` or more, and the result keeps ``log10 (F + 1)``
and ``log10`` of the standard error exactly where the plain numbers overflow.
Count files (device data) are weighted: a bitstring seen ``c`` times counts as
``c`` samples.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.bits import Bitstrings, parse_many
from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError
from tnsim.execution.options import DTypeLike, MemoryLimit, resolve_options
from tnsim.queries.amplitudes import iter_amplitudes
from tnsim.queries.checks import check_circuit

__all__ = ["XebResult", "log2_scaled_probabilities", "scaled_probabilities", "xeb"]


@dataclass(frozen=True)
class XebResult:
    """Linear XEB fidelity estimate.

    Attributes
    ----------
    fidelity : float
        ``2**n * mean p(x) - 1`` (``inf`` beyond the range of a float: see
        ``log10_mean``).
    standard_error : float
        ``std(2**n p(x)) / sqrt(num_samples)`` (sample standard deviation,
        ``ddof=1``; ``inf`` beyond the range of a float).
    num_samples : int
        Number of samples (the sum of the counts).
    log10_mean : float
        ``log10(2**n * mean p(x)) = log10(F + 1)``, finite wherever any sample
        has a non-zero probability (``-inf`` otherwise).
    log10_standard_error : float
        ``log10`` of the standard error (``-inf`` when it is 0).
    """

    fidelity: float
    standard_error: float
    num_samples: int
    log10_mean: float = 0.0
    log10_standard_error: float = -math.inf

    @property
    def overflows(self) -> bool:
        """Whether ``fidelity`` or ``standard_error`` lies beyond the range of a float."""
        return math.isinf(self.fidelity) or math.isinf(self.standard_error)


def log2_scaled_probabilities(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> np.ndarray:
    """Return ``log2(2**n * |<x|C|0>|²)`` for each bitstring (or row of a 0/1 array).

    ``-inf`` for a zero amplitude; never overflows.

    Examples
    --------
    >>> c = Circuit(2).h(0)
    >>> log2_scaled_probabilities(c, np.array([[0, 0], [0, 1]])).round(12).tolist()
    [1.0, -inf]
    """
    check_circuit(circuit)
    n = circuit.num_qubits
    rows = parse_many(bitstrings, n)
    out = np.zeros(len(rows), dtype=np.float64)
    parts = iter_amplitudes(circuit, rows, dtype=dtype, memory_limit=memory_limit)
    for start, mantissa, exponent in parts:
        with np.errstate(divide="ignore"):
            out[start : start + len(mantissa)] = n + 2.0 * (np.log2(np.abs(mantissa)) + exponent)
    return out


def scaled_probabilities(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> np.ndarray:
    """Return ``2**n * |<x|C|0>|²`` for each bitstring (or row of a ``(m, n)`` 0/1 array).

    ``inf`` where the value is beyond the range of a float (see
    :func:`log2_scaled_probabilities` for the exact logarithms).

    Examples
    --------
    >>> c = Circuit(2).h(0).h(1)
    >>> scaled_probabilities(c, np.array([[0, 1], [1, 1]])).round(12).tolist()
    [1.0, 1.0]
    """
    logs = log2_scaled_probabilities(circuit, bitstrings, dtype=dtype, memory_limit=memory_limit)
    with np.errstate(over="ignore"):
        return np.exp2(logs)


def _log2_to_float(log2: float) -> float:
    """``2**log2`` as a float, ``inf`` beyond the range."""
    if log2 == -math.inf:
        return 0.0
    return math.inf if log2 >= 1024 else 2.0**log2


def _summary(log2_values: np.ndarray, counts: np.ndarray) -> XebResult:
    """Weighted mean and standard error of ``2**log2_values``, kept in log form."""
    m = int(counts.sum())
    top = float(np.max(log2_values))
    if top == -math.inf:  # every sample has probability 0
        return XebResult(-1.0, 0.0, m, -math.inf, -math.inf)
    w = np.exp2(log2_values - top)  # in [0, 1]: no overflow
    mean_w = float(np.dot(counts, w)) / m
    var_w = float(np.dot(counts, (w - mean_w) ** 2)) / (m - 1)
    log2_mean = top + math.log2(mean_w)
    se_w = math.sqrt(var_w / m)
    log2_se = top + math.log2(se_w) if se_w > 0 else -math.inf
    fidelity = _log2_to_float(log2_mean) - 1.0
    standard_error = _log2_to_float(log2_se)
    log10_2 = math.log10(2.0)
    return XebResult(fidelity, standard_error, m, log2_mean * log10_2, log2_se * log10_2)


def _check_counts(counts: Sequence[int] | np.ndarray, m: int) -> np.ndarray:
    arr = np.asarray(counts)
    if arr.shape != (m,) or (arr.size and arr.dtype.kind not in "iu"):
        raise InputError(f"counts must be {m} whole numbers, one per bitstring, got {arr.shape}")
    if arr.size and arr.min() < 0:
        raise InputError("counts must be non-negative")
    return arr.astype(np.int64)


def xeb(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
    counts: Sequence[int] | np.ndarray | None = None,
) -> XebResult:
    """Estimate the linear XEB fidelity of ``bitstrings`` for ``circuit``.

    Parameters
    ----------
    circuit : Circuit
        The ideal circuit.
    bitstrings : iterable of str or sequence of int, or (m, n) array
        Samples; character ``i`` is qubit ``i``.
    dtype : numpy dtype, optional
        Contraction dtype: complex128 or complex64; default the enclosing
        ``run_options`` block's, else complex128.
    memory_limit : int or str, optional
        Bytes, or text such as ``"4GiB"``, for live intermediates; default the
        enclosing ``run_options`` block's, else half of the available memory.
    counts : sequence of int, optional
        How many times each bitstring was seen (device count data); default 1 each.

    Returns
    -------
    XebResult

    Examples
    --------
    >>> c = Circuit(2).h(0).cx(0, 1)
    >>> r = xeb(c, ["00", "11", "11", "00"])
    >>> r.fidelity, r.standard_error, r.num_samples
    (1.0, 0.0, 4)
    >>> xeb(c, ["00", "11"], counts=[3, 1]).num_samples
    4
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    rows = parse_many(bitstrings, circuit.num_qubits)
    weights = np.ones(len(rows), np.int64) if counts is None else _check_counts(counts, len(rows))
    m = int(weights.sum())
    if m < 2:
        raise InputError(f"XEB needs at least 2 samples, got {m}")
    keep = weights > 0
    values = log2_scaled_probabilities(
        circuit, rows[keep], dtype=opts.dtype, memory_limit=opts.memory_limit
    )
    return _summary(values, weights[keep])
