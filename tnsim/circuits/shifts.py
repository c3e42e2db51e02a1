"""Parameter-shift rules of the gates tnsim knows: exact derivatives from shifted angles.

If a gate's dependence on one angle ``θ`` is ``G(θ + s) = G(θ) exp(-i s A)`` (or
``exp(-i s A) G(θ)``), up to a global phase, then every expectation value
``f(θ) = <ψ|G(θ)† O G(θ)|ψ>`` is a trigonometric polynomial in ``θ`` whose
frequencies are the differences of ``A``'s eigenvalues, and ``f'(θ)`` is an
exact finite combination ``Σ_r c_r f(θ + s_r)`` of shifted values.

* Two distinct eigenvalues one apart (``A = P/2`` for a Pauli product ``P``;
  ``A = ±|11><11|``): ``f' = [f(θ + π/2) - f(θ - π/2)] / 2`` (Mitarai, Negoro,
  Kitagawa, Fujii, "Quantum circuit learning", Phys. Rev. A 98, 032309, 2018;
  Schuld, Bergholm, Gogolin, Izaac, Killoran, "Evaluating analytic gradients on
  quantum hardware", Phys. Rev. A 99, 032331, 2019).
* Eigenvalues ``{-1/2, 0, 1/2}`` (a controlled Pauli rotation, ``A = |1><1| ⊗ P/2``):
  frequencies ``1/2`` and ``1``, so ``f = a0 + a1 cos(θ/2) + b1 sin(θ/2) + a2 cos θ
  + b2 sin θ``.  With ``D(s) = f(θ+s) - f(θ-s) = 2 sin(s/2) c1 + 2 sin(s) c2`` and
  ``f' = c1/2 + c2``, the shifts ``π/2`` and ``3π/2`` give
  ``f' = d₊ D(π/2) - d₋ D(3π/2)`` with ``d± = (√2 ± 1) / (4√2)`` (derived here;
  the same four-term rule as Anselmetti, Wierichs, Gogolin, Parrish, New J. Phys.
  23, 113010, 2021, from memory).  The two-term rule is wrong for these gates.

The gates, angle by angle (``u3(θ, φ, λ) = P(φ) Ry(θ) P(λ)`` exactly, with
``P(λ) = diag(1, e^{iλ})``; a global phase never changes an expectation value):

============================  ======================================  ==========
gate (angle)                  generator ``A``                          rule
============================  ======================================  ==========
rx, ry, rz, rxx, ryy, rzz     ``P/2``                                  two-term
p, u1 (λ)                     ``-|1><1|``                              two-term
u2 (φ, λ), u3 / u (θ, φ, λ)   conjugated ``Y/2``; ``∓|1><1|``          two-term
cp, cu1 (λ)                   ``-|11><11|``                            two-term
crx, cry, crz (θ)             ``|1><1| ⊗ P/2``                         four-term
cu3 (θ)                       ``|1><1| ⊗ (conjugated Y/2)``            four-term
cu3 (φ, λ)                    ``-|11><11|``                            two-term
fsim (θ)                      ``(XX + YY)/2``, eigenvalues -1, 0, 1    four-term*
fsim (φ)                      ``|11><11|``                             two-term
============================  ======================================  ==========

(*) shifts halved and weights doubled: ``f(θ) = g(2θ)`` with ``g`` under the four-term rule.

Each row is checked numerically in ``tests/test_shifts.py`` (shifted values
against finite differences on random states and observables).
"""

from __future__ import annotations

import math

from tnsim.circuits.gates import GATES
from tnsim.errors import InputError

__all__ = ["FOUR_TERM", "SHIFT_RULES", "TWO_TERM", "shift_rule"]

Rule = tuple[tuple[float, float], ...]
"""``((coefficient, shift), ...)``: ``f'(θ) = Σ coefficient · f(θ + shift)``."""

TWO_TERM: Rule = ((0.5, math.pi / 2), (-0.5, -math.pi / 2))
"""Two distinct eigenvalues one apart."""

_DP = (math.sqrt(2) + 1) / (4 * math.sqrt(2))
_DM = (math.sqrt(2) - 1) / (4 * math.sqrt(2))

FOUR_TERM: Rule = (
    (_DP, math.pi / 2),
    (-_DP, -math.pi / 2),
    (-_DM, 3 * math.pi / 2),
    (_DM, -3 * math.pi / 2),
)
"""Eigenvalues ``{-1/2, 0, 1/2}`` (controlled Pauli rotations)."""

_FSIM_THETA: Rule = tuple((2 * c, s / 2) for c, s in FOUR_TERM)
"""Eigenvalues ``{-1, 0, 1}``: ``f(θ) = g(2θ)`` with ``g`` under :data:`FOUR_TERM`."""

SHIFT_RULES: dict[str, tuple[Rule, ...]] = {
    "rx": (TWO_TERM,),
    "ry": (TWO_TERM,),
    "rz": (TWO_TERM,),
    "p": (TWO_TERM,),
    "u1": (TWO_TERM,),
    "u2": (TWO_TERM, TWO_TERM),
    "u3": (TWO_TERM, TWO_TERM, TWO_TERM),
    "u": (TWO_TERM, TWO_TERM, TWO_TERM),
    "cp": (TWO_TERM,),
    "cu1": (TWO_TERM,),
    "crx": (FOUR_TERM,),
    "cry": (FOUR_TERM,),
    "crz": (FOUR_TERM,),
    "cu3": (FOUR_TERM, TWO_TERM, TWO_TERM),
    "rxx": (TWO_TERM,),
    "ryy": (TWO_TERM,),
    "rzz": (TWO_TERM,),
    "fsim": (_FSIM_THETA, TWO_TERM),
}
"""Gate name -> one rule per angle, in the gate's parameter order."""


def shift_rule(name: str, slot: int) -> Rule:
    """Return the shift rule of angle ``slot`` of gate ``name``.

    Raises
    ------
    InputError
        If tnsim has no exact shift rule for that gate's angle.

    Examples
    --------
    >>> shift_rule("rzz", 0) == TWO_TERM, len(shift_rule("crz", 0))
    (True, 4)
    """
    rules = SHIFT_RULES.get(name)
    if rules is None or not 0 <= slot < len(rules):
        with_rules = ", ".join(sorted(SHIFT_RULES))
        arity = GATES[name].num_params if name in GATES else "?"
        raise InputError(
            f"no parameter-shift rule for angle {slot} of gate '{name}' ({arity} angle(s)): "
            f"its derivative cannot be computed exactly from shifted angles; use one of "
            f"{with_rules} for named angles, or a gradient-free method"
        )
    return rules[slot]
