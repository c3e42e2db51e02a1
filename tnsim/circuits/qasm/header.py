"""Gate tables every program starts from: qelib1.inc, the built-ins, tnsim's extension.

``include "qelib1.inc";`` is served from :data:`QELIB1_GATES`; no file is
read.  Each of its gates is read as the tnsim gate of the same name, whose
matrix is documented in :mod:`tnsim.circuits.gates` (``u0`` is the identity).  The
built-ins ``U`` and ``CX`` are always available and become ``u`` and ``cx``.
"""

from __future__ import annotations

__all__ = [
    "ADDED_DEFINITIONS",
    "BUILTIN_GATES",
    "EXTENSION_DEFINITIONS",
    "KEYWORDS",
    "ORIGINAL_QELIB1",
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

ORIGINAL_QELIB1 = frozenset(
    [
        "u3", "u2", "u1", "cx", "id", "x", "y", "z", "h", "s", "sdg", "t", "tdg",
        "rx", "ry", "rz", "cz", "cy", "ch", "ccx", "crz", "cu1", "cu3",
    ]
)  # fmt: skip
"""The gates of the original qelib1.inc (Cross, Bishop, Smolin, Gambetta, "Open Quantum
Assembly Language", arXiv:1707.03429, 2017): what a strict OpenQASM 2.0 reader knows."""

ADDED_DEFINITIONS: dict[str, str] = {
    "u": "gate u(theta, phi, lambda) a {\n  u3(theta, phi, lambda) a;\n}",
    "p": "gate p(lambda) a {\n  u1(lambda) a;\n}",
    "sx": (
        "gate sx a {\n  sdg a;\n  h a;\n  sdg a;\n  u1(pi/4) a;\n  x a;\n  u1(pi/4) a;\n  x a;\n}"
    ),
    "sxdg": (
        "gate sxdg a {\n  s a;\n  h a;\n  s a;\n  u1(-pi/4) a;\n  x a;\n  u1(-pi/4) a;\n  x a;\n}"
    ),
    "swap": "gate swap a, b {\n  cx a, b;\n  cx b, a;\n  cx a, b;\n}",
    "cswap": "gate cswap a, b, c {\n  cx c, b;\n  ccx a, b, c;\n  cx c, b;\n}",
    "cry": (
        "gate cry(theta) a, b {\n  ry(theta/2) b;\n  cx a, b;\n  ry(-theta/2) b;\n  cx a, b;\n}"
    ),
    "crx": "gate crx(theta) a, b {\n  s b;\n  cry(theta) a, b;\n  sdg b;\n}",
    "cp": "gate cp(lambda) a, b {\n  cu1(lambda) a, b;\n}",
    "rxx": (
        "gate rxx(theta) a, b {\n  h a;\n  h b;\n  cx a, b;\n  rz(theta) b;\n  cx a, b;\n"
        "  h a;\n  h b;\n}"
    ),
    "rzz": "gate rzz(theta) a, b {\n  cx a, b;\n  rz(theta) b;\n  cx a, b;\n}",
}
"""Definitions, in terms of :data:`ORIGINAL_QELIB1` gates (and earlier entries), of the
qelib1.inc gates tnsim reads that the original library lacks.

:func:`~tnsim.circuits.qasm.write_qasm` with ``library="original"`` writes the ones a
circuit needs, so strict readers accept the file.  Each equals tnsim's matrix of the
gate exactly, global phase included, when ``rz`` is ``exp(-i θ Z / 2)`` as in
:mod:`tnsim.circuits.gates` (``sx`` = ``e^{iπ/4} rx(π/2)``: ``u1(φ); x; u1(φ); x`` is
the global phase ``e^{iφ}``).  When the reader meets one of these exact texts after
``include "qelib1.inc"``, it keeps the gate it already has instead of refusing the
redefinition.
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
