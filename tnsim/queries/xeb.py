"""Linear cross-entropy benchmarking (XEB) of bitstrings against a circuit.

``F = 2**n * mean p(x) - 1`` over the given bitstrings ``x`` (Arute et al.,
"Quantum supremacy using a programmable superconducting processor", Nature
574, 505, 2019), with standard error ``std(2**n p(x)) / sqrt(m)``.  The
products ``2**n p(x)`` are formed from the amplitudes' power-of-two scale
(``2**(n + 2 log2 |a|)``), so circuits far wider than the double-precision
range of ``2**n`` are fine.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.bits import Bitstrings, parse_many
from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError
from tnsim.execution.options import DTypeLike, MemoryLimit, resolve_options
from tnsim.queries.amplitudes import iter_amplitudes
from tnsim.queries.checks import check_circuit

__all__ = ["XebResult", "scaled_probabilities", "xeb"]


@dataclass(frozen=True)
class XebResult:
    """Linear XEB fidelity estimate.

    Attributes
    ----------
    fidelity : float
        ``2**n * mean p(x) - 1``.
    standard_error : float
        ``std(2**n p(x)) / sqrt(num_samples)`` (sample standard deviation).
    num_samples : int
        Number of bitstrings.
    """

    fidelity: float
    standard_error: float
    num_samples: int


def scaled_probabilities(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> np.ndarray:
    """Return ``2**n * |<x|C|0>|²`` for each bitstring (or row of a ``(m, n)`` 0/1 array).

    Examples
    --------
    >>> c = Circuit(2).h(0).h(1)
    >>> scaled_probabilities(c, np.array([[0, 1], [1, 1]])).round(12).tolist()
    [1.0, 1.0]
    """
    check_circuit(circuit)
    n = circuit.num_qubits
    rows = parse_many(bitstrings, n)
    out = np.zeros(len(rows), dtype=np.float64)
    parts = iter_amplitudes(circuit, rows, dtype=dtype, memory_limit=memory_limit)
    for start, mantissa, exponent in parts:
        with np.errstate(divide="ignore"):
            log2 = n + 2.0 * (np.log2(np.abs(mantissa)) + exponent)
        out[start : start + len(mantissa)] = np.exp2(log2)
    return out


def xeb(
    circuit: Circuit,
    bitstrings: Bitstrings,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
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

    Returns
    -------
    XebResult

    Examples
    --------
    >>> c = Circuit(2).h(0).cx(0, 1)
    >>> r = xeb(c, ["00", "11", "11", "00"])
    >>> r.fidelity, r.standard_error, r.num_samples
    (1.0, 0.0, 4)
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    rows = parse_many(bitstrings, circuit.num_qubits)
    m = len(rows)
    if m < 2:
        raise InputError(f"XEB needs at least 2 bitstrings, got {m}")
    values = scaled_probabilities(circuit, rows, dtype=opts.dtype, memory_limit=opts.memory_limit)
    fidelity = float(values.mean() - 1.0)
    error = float(values.std(ddof=1) / math.sqrt(m))
    return XebResult(fidelity, error, m)
