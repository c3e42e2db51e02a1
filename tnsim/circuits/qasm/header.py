"""Gate tables every program starts from: qelib1.inc, the built-ins, tnsim's extension.

``include "qelib1.inc";`` is served from :data:`QELIB1_GATES`; no file is
read.  Each of its gates is read as the tnsim gate of the same name, whose
matrix is documented in :mod:`tnsim.circuits.gates` (``u0`` is the identity).  The
built-ins ``U`` and ``CX`` are always available and become ``u`` and ``cx``.
"""

from __future__ import annotations

__all__ = [
    "BUILTIN_GATES",
    "EXTENSION_DEFINITIONS",
    "KEYWORDS",
    "QELIB1_GATES",
    "RESERVED",
    "UNITARY_ONLY",
]

_QELIB1_NAMES = [
    "u3",
    "u2",
    "u1",
    "cx",
    "id",
    "u",
    "p",
    "x",
    "y",
    "z",
    "h",
    "s",
    "sdg",
    "t",
    "tdg",
    "sx",
    "sxdg",
    "rx",
    "ry",
    "rz",
    "cz",
    "cy",
    "ch",
    "swap",
    "ccx",
    "cswap",
    "crx",
    "cry",
    "crz",
    "cu1",
    "cp",
    "cu3",
    "rxx",
    "rzz",
]

QELIB1_GATES: dict[str, str] = {name: name for name in _QELIB1_NAMES} | {"u0": "id"}
"""qelib1.inc gate name -> the tnsim gate it is read as (``u0(γ)`` is the identity)."""

BUILTIN_GATES: dict[str, str] = {"U": "u", "CX": "cx"}
"""The gates of the language itself -> the tnsim gate each is read as."""

EXTENSION_DEFINITIONS: dict[str, str] = {
    "ryy": (
        "gate ryy(theta) a, b {\n  rx(pi/2) a;\n  rx(pi/2) b;\n  rzz(theta) a, b;\n"
        "  rx(-pi/2) a;\n  rx(-pi/2) b;\n}"
    ),
    "iswap": (
        "gate iswap a, b {\n  rxx(-pi/2) a, b;\n  rx(pi/2) a;\n  rx(pi/2) b;\n"
        "  rzz(-pi/2) a, b;\n  rx(-pi/2) a;\n  rx(-pi/2) b;\n}"
    ),
    "fsim": (
        "gate fsim(theta, phi) a, b {\n  rxx(theta) a, b;\n  rx(pi/2) a;\n  rx(pi/2) b;\n"
        "  rzz(theta) a, b;\n  rx(-pi/2) a;\n  rx(-pi/2) b;\n  cp(-phi) a, b;\n}"
    ),
}
"""Exact qelib1 decompositions that :func:`~tnsim.circuits.qasm.write_qasm` emits for
tnsim's extra gates.

``ryy(θ) = (Rx(-π/2)⊗Rx(-π/2)) · rzz(θ) · (Rx(π/2)⊗Rx(π/2))`` because
``Rx(π/2)† Z Rx(π/2) = Y``; ``fsim(θ, φ) = rxx(θ) · ryy(θ) · cp(-φ)`` (the three
commute); ``iswap = rxx(-π/2) · ryy(-π/2)``.  No global phase is dropped.
When the reader meets a definition whose tokens equal one of these texts, it
keeps the gate as the single native tnsim operation.
"""

KEYWORDS = frozenset(
    [
        "OPENQASM",
        "include",
        "qreg",
        "creg",
        "gate",
        "opaque",
        "barrier",
        "measure",
        "reset",
        "if",
        "U",
        "CX",
        "pi",
    ]
)
"""Words of the language that cannot name a register, gate or parameter."""

RESERVED = KEYWORDS | frozenset(["sin", "cos", "tan", "exp", "ln", "sqrt"])
"""Every name a program cannot declare (keywords and the expression functions)."""

UNITARY_ONLY = ("reset", "if", "opaque")
"""Statements tnsim refuses: it simulates unitary circuits only."""
