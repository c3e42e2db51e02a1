"""Gates an OpenQASM 3 program can call, and their expansion into tnsim operations.

The built-in gate ``U(θ, φ, λ)`` is tnsim's ``u``.  ``include "stdgates.inc";``
is served from :data:`STDGATES`: each gate of the standard library is read as
the tnsim gate whose matrix equals the library's definition (documented in
:mod:`tnsim.circuits.gates`), ``phase``/``cphase``/``CX`` as ``p``/``cp``/``cx``,
and ``cu(θ, φ, λ, γ)`` as ``p(γ)`` on the control then ``cu3(θ, φ, λ)``, that is
``|0⟩⟨0| ⊗ I + e^{iγ} |1⟩⟨1| ⊗ U(θ, φ, λ)``.  ``u2`` and ``u3`` are read as
tnsim's ``u2`` and ``u3`` (``U(π/2, φ, λ)`` and ``U(θ, φ, λ)``), the reading the
OpenQASM 2.0 reader gives them, so a 2.0 program and its 3.0 rewrite have the
same amplitudes; the text of the specification's library (from memory) adds a
global phase to these two legacy gates, which tnsim does not apply.

A defined gate is a body of :class:`Call` values; each records an upper
bound on the operations it expands to (``size``) and its nesting ``depth``, so
a program's size is bounded before anything is expanded.
"""

from __future__ import annotations

from dataclasses import dataclass

from tnsim.circuits.gates import GATES
from tnsim.circuits.parameters import AngleExpr
from tnsim.circuits.qasm3.expr import NAME, Code, MathError, evaluate
from tnsim.circuits.qasm3.modifiers import Op, Phase, apply_control, power, reverse

__all__ = [
    "BUILTINS",
    "MAX_GATE_DEPTH",
    "SIZE_CAP",
    "STDGATES",
    "Call",
    "Gate",
    "as_param",
    "call_size",
    "expand",
]

MAX_GATE_DEPTH = 100
"""Deepest allowed nesting of gate definitions calling one another."""

SIZE_CAP = 1 << 62
"""Sizes saturate here (a program that large is refused anyway)."""


@dataclass(frozen=True)
class Gate:
    """A gate a program can call: native (one tnsim operation) or a definition.

    ``source`` is the :class:`~tnsim.circuits.qasm.lexer.Source` of a definition's text,
    for errors located inside its body.
    """

    name: str
    num_params: int
    num_qubits: int
    origin: str
    native: str | None = None
    body: tuple[Call, ...] = ()
    size: int = 1
    depth: int = 0
    source: object = None


@dataclass(frozen=True)
class Call:
    """One call inside a definition.

    Attributes
    ----------
    gate : Gate or None
        The callee (``None`` for ``gphase``).
    modifiers : tuple
        ``("inv", 0)``, ``("pow", k)``, ``("ctrl", n)`` or ``("negctrl", n)``,
        outermost first (as written).
    params : tuple of Code
        Parameter expressions over the enclosing gate's parameters.
    args : tuple of int
        Formal qubit positions of the enclosing gate: the controls of each
        control modifier in order, then the callee's qubits.
    """

    gate: Gate | None
    modifiers: tuple[tuple[str, int], ...]
    params: tuple[Code, ...]
    args: tuple[int, ...]


def call_size(gate: Gate | None, modifiers) -> int:
    """Upper bound on the operations one call expands to (saturating at :data:`SIZE_CAP`).

    Examples
    --------
    >>> call_size(BUILTINS["U"], (("ctrl", 1), ("pow", 3)))
    4
    """
    size = 1 if gate is None else gate.size  # gphase may become one phase gate
    for kind, value in reversed(modifiers):
        if kind == "pow":
            size *= abs(value)
        elif kind == "ctrl":
            size += value
        elif kind == "negctrl":
            size += 3 * value
        size = min(size, SIZE_CAP)
    return size


def _native(name: str, tnsim_name: str, origin: str) -> Gate:
    spec = GATES[tnsim_name]
    return Gate(name, spec.num_params, spec.num_qubits, origin, tnsim_name)


BUILTINS = {"U": _native("U", "u", "the OpenQASM 3 language")}
"""Gates of the language itself."""

_STD_NATIVE = {
    "p": "p",
    "x": "x",
    "y": "y",
    "z": "z",
    "h": "h",
    "s": "s",
    "sdg": "sdg",
    "t": "t",
    "tdg": "tdg",
    "sx": "sx",
    "rx": "rx",
    "ry": "ry",
    "rz": "rz",
    "cx": "cx",
    "cy": "cy",
    "cz": "cz",
    "cp": "cp",
    "crx": "crx",
    "cry": "cry",
    "crz": "crz",
    "ch": "ch",
    "swap": "swap",
    "ccx": "ccx",
    "cswap": "cswap",
    "CX": "cx",
    "phase": "p",
    "cphase": "cp",
    "id": "id",
    "u1": "u1",
    "u2": "u2",
    "u3": "u3",
}


def _cu() -> Gate:
    origin = "stdgates.inc"
    theta, phi, lam, gamma = (((NAME, k, 0),) for k in range(4))
    body = (
        Call(STDGATES_NATIVE["p"], (), (gamma,), (0,)),
        Call(BUILTINS["U"], (("ctrl", 1),), (theta, phi, lam), (0, 1)),
    )
    return Gate("cu", 4, 2, origin, None, body, 3, 1)


STDGATES_NATIVE = {q: _native(q, t, "stdgates.inc") for q, t in _STD_NATIVE.items()}
STDGATES: dict[str, Gate] = STDGATES_NATIVE | {"cu": _cu()}
"""The gates of ``stdgates.inc``, by name."""

STDGATE_NAMES: dict[str, str] = dict(_STD_NATIVE) | {"cu": "p + cu3"}
"""stdgates.inc gate name -> the tnsim gate(s) it is read as."""


def as_param(value) -> float | AngleExpr:
    """A gate parameter as an operation holds it: a float, or a named angle as it is.

    Examples
    --------
    >>> as_param(2), as_param(0.5)
    (2.0, 0.5)
    """
    return value if type(value) is AngleExpr else float(value)


def expand(gate: Gate, params: tuple, qubits: tuple[int, ...]) -> tuple[list[Op], Phase]:
    """Operations ``(name, qubits, params, matrix)`` and global phase of ``gate`` on ``qubits``.

    Raises :class:`~tnsim.circuits.qasm3.expr.MathError` (with the definition's
    ``source`` attached) when a parameter has no finite value.

    Examples
    --------
    >>> ops, phase = expand(STDGATES["cu"], (0.1, 0.2, 0.3, 0.4), (5, 7))
    >>> [(name, qs) for name, qs, _, _ in ops], phase
    ([('p', (5,)), ('cu3', (5, 7))], 0.0)
    """
    if gate.native is not None:
        return [(gate.native, qubits, tuple(map(as_param, params)), None)], 0.0
    ops: list[Op] = []
    phase: Phase = 0.0
    for call in gate.body:
        try:
            values = tuple(evaluate(code, params) for code in call.params)
        except MathError as exc:
            if exc.source is None:
                exc.source = gate.source
            raise
        sub_ops, sub_phase = apply_call(call, values, tuple(qubits[i] for i in call.args))
        ops += sub_ops
        phase += sub_phase
    return ops, phase


def apply_call(call: Call, values: tuple, qubits: tuple[int, ...]) -> tuple[list[Op], Phase]:
    """Expand one call with its modifiers on actual ``qubits`` (controls first)."""
    return apply_modifiers(call.gate, call.modifiers, values, qubits)


def apply_modifiers(
    gate: Gate | None, modifiers, values: tuple, qubits: tuple[int, ...]
) -> tuple[list[Op], Phase]:
    """Expand ``gate`` (``None``: ``gphase(values[0])``) under ``modifiers`` on ``qubits``."""
    controls = sum(n for kind, n in modifiers if kind in ("ctrl", "negctrl"))
    target = qubits[controls:]
    ops: list[Op]
    if gate is None:
        ops, phase = [], as_param(values[0])
    else:
        ops, phase = expand(gate, values, target)
    position = controls
    for kind, value in reversed(modifiers):
        if kind == "inv":
            ops, phase = reverse(ops), -phase
        elif kind == "pow":
            ops, phase = power(ops, phase, value)
        else:
            position -= value
            for q in reversed(qubits[position : position + value]):
                ops, phase = apply_control(ops, phase, q, kind == "negctrl")
    return ops, phase
