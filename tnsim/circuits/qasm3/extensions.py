"""Definitions the OpenQASM 3 writer emits for tnsim gates that ``stdgates.inc`` lacks.

Each is an exact decomposition into standard gates and the modifiers, so the
file stays valid OpenQASM 3 for any reader.  When tnsim reads a definition
whose tokens equal one of these texts it keeps the gate as the single native
tnsim operation; any other definition of those names is an ordinary user gate.

``rzz(θ) = CX · (I ⊗ Rz(θ)) · CX`` (``Rz`` on the target picks up ``e^{∓iθ/2}`` by the
parity of the two bits); ``rxx`` is ``rzz`` conjugated by ``H ⊗ H``; ``ryy``,
``iswap`` and ``fsim`` are the OpenQASM 2.0 writer's decompositions
(:data:`tnsim.circuits.qasm.EXTENSION_DEFINITIONS`), which use only gates defined
here or in ``stdgates.inc``.
"""

from __future__ import annotations

from tnsim.circuits.qasm.header import EXTENSION_DEFINITIONS as V2_DEFINITIONS
from tnsim.circuits.qasm3.lexer import canonical

__all__ = ["EXTENSION_DEFINITIONS3", "EXTENSION_NEEDS", "EXTENSION_TOKENS3"]

EXTENSION_DEFINITIONS3: dict[str, str] = {
    "sxdg": "gate sxdg a {\n  inv @ sx a;\n}",
    "cu1": "gate cu1(lam) a, b {\n  ctrl @ p(lam) a, b;\n}",
    "cu3": "gate cu3(theta, phi, lam) a, b {\n  ctrl @ U(theta, phi, lam) a, b;\n}",
    "rzz": "gate rzz(theta) a, b {\n  cx a, b;\n  rz(theta) b;\n  cx a, b;\n}",
    "rxx": "gate rxx(theta) a, b {\n  h a;\n  h b;\n  rzz(theta) a, b;\n  h a;\n  h b;\n}",
    "ryy": V2_DEFINITIONS["ryy"],
    "iswap": V2_DEFINITIONS["iswap"],
    "fsim": V2_DEFINITIONS["fsim"],
}
"""tnsim gate -> the OpenQASM 3 definition the writer emits (in dependency order)."""

EXTENSION_NEEDS: dict[str, tuple[str, ...]] = {
    "rxx": ("rzz",),
    "ryy": ("rzz",),
    "iswap": ("rzz", "rxx"),
    "fsim": ("rzz", "rxx"),
}
"""Definitions each definition calls."""

EXTENSION_TOKENS3 = {name: canonical(text) for name, text in EXTENSION_DEFINITIONS3.items()}
"""The tokens of each definition, to recognise it when read back."""
