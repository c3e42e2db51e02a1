"""Checks every query makes at the door: the circuit and qubit lists.

The run options (memory limit, dtype ...) are checked where they are resolved,
:func:`tnsim.execution.options.resolve_options`.

Input is validated here, once, with the project's own errors; the stages
below trust what they are given.
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable, Sequence

from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError


def check_circuit(circuit: object, *, bound: bool = True) -> None:
    """Refuse anything that is not a :class:`~tnsim.circuits.circuit.Circuit`.

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
