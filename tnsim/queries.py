"""The public queries, each composing the pipeline stages.

circuit → network (:mod:`tnsim.network`) → simplify (:mod:`tnsim.simplify`) →
plan (:mod:`tnsim.plan`) → execute (:mod:`tnsim.execute`).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np

from .bits import parse_many
from .circuit import Circuit
from .errors import InputError
from .execute import Scaled, execute
from .network import TensorNetwork, amplitude_network
from .plan import make_plan
from .simplify import absorb_small

__all__ = ["amplitude", "amplitudes", "contract_network"]

_DTYPES = {np.dtype(np.complex64), np.dtype(np.complex128)}


def _check_dtype(dtype) -> np.dtype:
    try:
        dt = np.dtype(dtype)
    except TypeError:
        dt = None
    if dt not in _DTYPES:
        raise InputError(f"dtype must be complex64 or complex128, got {dtype!r}")
    return dt


def _check_circuit(circuit: Circuit) -> None:
    if not isinstance(circuit, Circuit):
        raise InputError(f"expected a tnsim.Circuit, got {type(circuit).__name__}")


def contract_network(network: TensorNetwork) -> Scaled:
    """Simplify, plan and contract a network; return its value with its scale.

    Parameters
    ----------
    network : TensorNetwork
        Any network (closed or with open labels).

    Returns
    -------
    Scaled
        ``mantissa * 2**exponent``, axes in the order of ``network.output``.
    """
    small = absorb_small(network)
    plan = make_plan(small)
    return execute(small, plan.tree, plan.sliced)


def amplitude(
    circuit: Circuit,
    bits: str | Sequence[int],
    *,
    dtype: type | np.dtype = np.complex128,
    scaled: bool = False,
) -> complex | Scaled:
    """Return the amplitude ``<x|C|0...0>`` of one bitstring.

    Parameters
    ----------
    circuit : Circuit
        The circuit ``C``; every qubit starts in ``|0>``.
    bits : str or sequence of int
        The bitstring ``x``; character ``i`` is qubit ``i`` (leftmost is qubit 0).
    dtype : numpy dtype
        ``complex128`` (default) or ``complex64``.
    scaled : bool
        If true, return a :class:`~tnsim.execute.Scaled` value whose
        ``log10_abs()`` and ``phase()`` stay exact where the amplitude itself
        underflows (very wide circuits).

    Returns
    -------
    complex or Scaled

    Examples
    --------
    >>> from tnsim import Circuit
    >>> bell = Circuit(2).h(0).cx(0, 1)
    >>> round(abs(amplitude(bell, "11")) ** 2, 12)
    0.5
    >>> amplitude(bell, "01")
    0j
    """
    _check_circuit(circuit)
    dt = _check_dtype(dtype)
    result = contract_network(amplitude_network(circuit, bits, dtype=dt))
    return result if scaled else complex(result)


def amplitudes(
    circuit: Circuit,
    bitstrings: Iterable[str | Sequence[int]],
    *,
    dtype: type | np.dtype = np.complex128,
) -> np.ndarray:
    """Return the amplitudes ``<x|C|0...0>`` of several bitstrings.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    bitstrings : iterable of str or sequence of int
        Character ``i`` of each bitstring is qubit ``i``.
    dtype : numpy dtype
        ``complex128`` (default) or ``complex64``.

    Returns
    -------
    numpy.ndarray
        complex128 array, one entry per bitstring.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> np.round(amplitudes(Circuit(1).h(0), ["0", "1"]), 6)
    array([0.707107+0.j, 0.707107+0.j])
    """
    _check_circuit(circuit)
    dt = _check_dtype(dtype)
    rows = parse_many(bitstrings, circuit.num_qubits)
    return np.array(
        [complex(contract_network(amplitude_network(circuit, r, dtype=dt))) for r in rows],
        dtype=np.complex128,
    )
