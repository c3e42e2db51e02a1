"""Gate modifiers on expanded operations: ``inv @``, ``pow(k) @``, ``ctrl @``, ``negctrl @``.

An expanded gate is a list of operations ``(name, qubits, params, matrix)``
(``matrix`` is ``None`` for a named tnsim gate) plus a global phase.  The
modifiers act on that list exactly:

* ``inv``: the operations in reverse order, each inverted (:func:`inverse`),
  and the phase negated;
* ``pow(k)``, integer ``k``: the list ``k`` times (``k < 0``: the inverse
  ``|k|`` times; ``k = 0``: nothing);
* ``ctrl``: every operation controlled on the new qubit (:func:`controlled`),
  and the phase ``γ`` becomes ``p(γ)`` on that qubit, since
  ``C(e^{iγ} U) = P(γ) ⊗ ... · C(U)``;
* ``negctrl``: ``ctrl`` between two ``x`` on the control.

Named gates stay named where tnsim has the inverse or controlled gate with
exactly the same matrix (``inv @ s`` is ``sdg``, ``ctrl @ rz(θ)`` is
``crz(θ)``, ``ctrl @ ctrl @ x`` is ``ccx``); any other result is a custom
unitary built from the matrices (:func:`tnsim.circuits.gates.controlled`),
on at most :data:`MAX_CUSTOM_QUBITS` qubits.

Named angles (inputs read without a value) go through every modifier that
keeps gates named: ``inv`` (every parametric tnsim gate has a named inverse
with negated or permuted angles), ``pow(k)`` (repetition) and ``ctrl`` where
the controlled gate is named (``ctrl @ rx(θ)`` is ``crx(θ)``).  A modifier that
would need the matrix of a gate with a named angle (``ctrl @ rzz(θ)``) raises
:class:`ModifierError`.
"""

from __future__ import annotations

import math

import numpy as np

from tnsim.circuits.gates import GATES, gate_matrix
from tnsim.circuits.gates import controlled as controlled_matrix
from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm3.expr import give_values

__all__ = ["MAX_CUSTOM_QUBITS", "Op", "Phase", "apply_control", "inverse", "power", "reverse"]

Op = tuple  # (name, qubits, params, matrix or None)
Phase = float | AngleExpr  # a global phase; a named angle only until the call is checked

MAX_CUSTOM_QUBITS = 10
"""Most qubits of one custom unitary a modifier may build (a 1024 x 1024 matrix, 16 MiB)."""

_SELF_INVERSE = {"id", "x", "y", "z", "h", "cx", "cy", "cz", "ch", "swap", "ccx", "cswap"}
_SWAPPED = {"s": "sdg", "sdg": "s", "t": "tdg", "tdg": "t", "sx": "sxdg", "sxdg": "sx"}
_NEGATED = {"rx", "ry", "rz", "p", "u1", "cp", "cu1", "crx", "cry", "crz", "rxx", "ryy", "rzz"}
_NEGATED |= {"fsim"}
_EULER = {"u", "u3", "cu3"}
_CONTROLLED = {
    "x": "cx",
    "y": "cy",
    "z": "cz",
    "h": "ch",
    "swap": "cswap",
    "cx": "ccx",
    "p": "cp",
    "u1": "cu1",
    "rx": "crx",
    "ry": "cry",
    "rz": "crz",
    "u": "cu3",
    "u3": "cu3",
}
"""Gate -> the tnsim gate whose matrix is exactly ``controlled(matrix)`` (control first)."""


class ModifierError(Exception):
    """A modifier whose result tnsim cannot hold (too many qubits for one custom unitary)."""


def matrix_of(op: Op, modifier: str = "this modifier") -> np.ndarray:
    """The matrix of an operation (named or custom).

    Raises :class:`ModifierError` for a named gate with a named angle, whose
    matrix is not a fixed array (``modifier`` says what needed it).
    """
    name, _, params, matrix = op
    if matrix is not None:
        return matrix
    free = sorted({n for p in params if isinstance(p, AngleExpr) for n in p.names})
    if free:
        shown = ", ".join(str(p) for p in params)
        raise ModifierError(
            f"{modifier} on {name}({shown}) needs the gate's matrix (tnsim has no named gate "
            f"for the result), which is built only from numbers, but its angles depend on the "
            f"unbound input(s) {', '.join(free)}; {give_values(free)}, or write the call with "
            "gates tnsim controls by name (ctrl @ of x, y, z, h, swap, cx, p, rx, ry, rz, U)"
        )
    return gate_matrix(name, params)


def inverse(op: Op) -> Op:
    """The inverse of one operation, named where tnsim has the named inverse.

    ``fsim(θ, φ)⁻¹ = fsim(-θ, -φ)`` and ``U(θ, φ, λ)⁻¹ = U(-θ, -λ, -φ)`` hold exactly
    (the sines change sign, the cosines do not).

    Examples
    --------
    >>> inverse(("s", (0,), (), None))[:3], inverse(("u", (1,), (0.1, 0.2, 0.3), None))[:3]
    (('sdg', (0,), ()), ('u', (1,), (-0.1, -0.3, -0.2)))
    """
    name, qubits, params, matrix = op
    if matrix is None:
        if name in _SELF_INVERSE:
            return op
        if name in _SWAPPED:
            return (_SWAPPED[name], qubits, params, None)
        if name in _NEGATED:
            return (name, qubits, tuple(-p for p in params), None)
        if name in _EULER:
            theta, phi, lam = params
            return (name, qubits, (-theta, -lam, -phi), None)
        if name == "u2":
            phi, lam = params
            return ("u", qubits, (-math.pi / 2, -lam, -phi), None)
    inv = np.ascontiguousarray(matrix_of(op, "inv @").conj().T)
    inv.setflags(write=False)
    label = name[4:] if name.startswith("inv@") else f"inv@{name}"
    return (label, qubits, (), inv)


def reverse(ops: list[Op]) -> list[Op]:
    """The inverse of a sequence of operations: reversed, each inverted."""
    return [inverse(op) for op in reversed(ops)]


def power(ops: list[Op], phase: Phase, k: int) -> tuple[list[Op], Phase]:
    """The operations and phase of the sequence raised to the integer power ``k``."""
    if k < 0:
        ops, phase, k = reverse(ops), -phase, -k
    return ops * k, phase * k


def _control_one(op: Op, control: int) -> Op:
    name, qubits, params, matrix = op
    if matrix is None:
        if name == "id":
            return op
        if name in _CONTROLLED:
            return (_CONTROLLED[name], (control, *qubits), params, None)
        if name == "u2":
            return ("cu3", (control, *qubits), (math.pi / 2, *params), None)
    if len(qubits) + 1 > MAX_CUSTOM_QUBITS:
        raise ModifierError(
            f"a controlled '{name}' would act on {len(qubits) + 1} qubits; tnsim builds "
            f"controlled gates on at most {MAX_CUSTOM_QUBITS} qubits (a "
            f"{2**MAX_CUSTOM_QUBITS} x {2**MAX_CUSTOM_QUBITS} matrix)"
        )
    big = controlled_matrix(matrix_of(op, "ctrl @"), 1)
    big.setflags(write=False)
    return (f"ctrl@{name}", (control, *qubits), (), big)


def apply_control(
    ops: list[Op], phase: Phase, control: int, negative: bool = False
) -> tuple[list[Op], Phase]:
    """Control every operation (and the phase) on qubit ``control``.

    ``negative`` (``negctrl``) controls on ``|0>``: an ``x`` on the control before
    and after.  The phase becomes a ``p`` gate on the control, so the returned
    phase is 0.

    Examples
    --------
    >>> ops, phase = apply_control([("x", (1,), (), None)], math.pi, 0)
    >>> [op[:3] for op in ops], phase
    ([('cx', (0, 1), ()), ('p', (0,), (3.141592653589793,))], 0.0)
    """
    out = [_control_one(op, control) for op in ops]
    if phase:
        out.append(("p", (control,), (phase,), None))
    if negative:
        flip = ("x", (control,), (), None)
        out = [flip, *out, flip]
    return out, 0.0


def is_native(name: str) -> bool:
    """Whether ``name`` is a named tnsim gate."""
    return name in GATES
