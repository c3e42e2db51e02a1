"""Checks every query makes at the door: the circuit, qubit lists, positive sizes.

The run options (memory limit, dtype ...) are checked where they are resolved,
:func:`tnsim.execution.options.resolve_options`; other arguments with the
helpers of :mod:`tnsim.validate`.

Input is validated here, once, with the project's own errors; the stages
below trust what they are given.
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable, Sequence

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError, ResourceLimitError
from tnsim.execution.memory import available_memory
from tnsim.validate import integer, quote

#: Bytes a network needs at least per qubit and per gate (a small array and its labels).
TENSOR_BYTES = 200


def check_circuit(circuit: object, *, bound: bool = True) -> None:
    """Refuse anything that is not a :class:`~tnsim.circuits.circuit.Circuit`, or too big.

    With ``bound`` (the default), also refuse a circuit that still has named
    angles: the message names them and says how to bind them.  A circuit
    whose network could not even be built in the memory available
    (:data:`TENSOR_BYTES` per qubit and per gate) is refused before anything
    is allocated.

    With ``bound`` (the default), also refuse a circuit that still has named
    angles: the message names them and says how to bind them.

    Examples
    --------
    >>> check_circuit("h q[0];")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    tnsim.errors.InputError: expected a tnsim.Circuit, got str; build one with ...
    """
    if not isinstance(circuit, Circuit):
        raise InputError(
            f"expected a tnsim.Circuit, got {type(circuit).__name__}; build one with "
            "tnsim.Circuit(n) or read a file with tnsim.read_qasm(path)"
        )
    if bound and any(op.symbolic for op in circuit.ops):
        names = circuit.parameters()
        shown = ", ".join(names[:8]) + (f", ... ({len(names)} in all)" if len(names) > 8 else "")
        raise InputError(
            f"the circuit has unbound parameters ({shown}); give numbers with "
            "circuit.bind({name: value, ...}), or use tnsim.energy_and_gradient / "
            "tnsim.optimize_angles, which take the values"
        )
    need = (circuit.num_qubits + len(circuit.ops)) * TENSOR_BYTES
    have = available_memory()
    if need > have:
        raise ResourceLimitError(
            f"a circuit of {circuit.num_qubits} qubits and {len(circuit.ops)} gates needs at "
            f"least {need:.3g} bytes for its tensors alone, more than the {have:.3g} bytes "
            "available; nothing was allocated"
        )


def check_positive(value: object, what: str) -> int:
    """A positive integer argument (chunk sizes, batch sizes)."""
    return integer(value, what, 1)


def check_qubits(qubits: Sequence[int], n: int, what: str) -> list[int]:
    """Distinct qubit indices of an ``n``-qubit circuit as ints; ``what`` names the caller."""
    if isinstance(qubits, (str, bytes)) or not isinstance(qubits, Iterable):
        raise InputError(f"{what}: give a list of qubit indices, got {quote(qubits)}")
    qs = list(qubits)
    if not qs:
        raise InputError(f"{what}: give at least one qubit")
    for q in qs:
        if isinstance(q, (bool, np.bool_)) or not isinstance(q, numbers.Integral) or not 0 <= q < n:
            raise InputError(
                f"{what}: qubit {quote(q)} is not an index of this {n}-qubit circuit (0..{n - 1})"
            )
    if len(set(qs)) != len(qs):
        raise InputError(f"{what}: qubit list {quote(qs)} repeats a qubit")
    return [int(q) for q in qs]
