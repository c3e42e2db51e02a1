"""Checks every query makes at the door: the circuit, the dtype, qubit lists.

Input is validated here, once, with the project's own errors; the stages
below trust what they are given.
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable, Sequence

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError

_DTYPES = {np.dtype(np.complex64), np.dtype(np.complex128)}


def check_dtype(dtype) -> np.dtype:
    """The dtype of a contraction: complex64 or complex128, else an :class:`InputError`."""
    try:
        dt = np.dtype(dtype)
    except TypeError:
        dt = None
    if dt not in _DTYPES:
        raise InputError(f"dtype must be complex64 or complex128, got {dtype!r}")
    return dt


def check_circuit(circuit: Circuit) -> None:
    """Refuse anything that is not a :class:`~tnsim.circuits.circuit.Circuit`."""
    if not isinstance(circuit, Circuit):
        raise InputError(f"expected a tnsim.Circuit, got {type(circuit).__name__}")


def check_qubits(qubits: Sequence[int], n: int, what: str) -> list[int]:
    """Distinct qubit indices of an ``n``-qubit circuit as ints; ``what`` names the caller."""
    if isinstance(qubits, (str, bytes)) or not isinstance(qubits, Iterable):
        raise InputError(f"{what}: give a list of qubit indices, got {qubits!r}")
    qs = list(qubits)
    if not qs:
        raise InputError(f"{what}: give at least one qubit")
    for q in qs:
        if isinstance(q, bool) or not isinstance(q, numbers.Integral) or not 0 <= q < n:
            raise InputError(
                f"{what}: qubit {q!r} is not an index of this {n}-qubit circuit (0..{n - 1})"
            )
    if len(set(qs)) != len(qs):
        raise InputError(f"{what}: qubit list {qs} repeats a qubit")
    return [int(q) for q in qs]
