"""Quantum channels: completely positive, trace-preserving maps given by Kraus operators.

A channel on ``k`` qubits maps a density matrix ``ρ`` to ``Σ_j K_j ρ K_j†``; it
conserves probability when ``Σ_j K_j† K_j = I`` (completeness), which every
:class:`Channel` is checked for (to 1e-10) when it is made.  Matrices use the
first listed qubit as the most significant bit, as gates do.

The built-ins follow Nielsen and Chuang, *Quantum Computation and Quantum
Information* (Cambridge University Press, 2000), §8.3 (equation numbers
cited from memory):

* :func:`depolarizing` ``(1 - p) ρ + p I/d`` (eq. 8.102 for one qubit);
* :func:`bit_flip`, :func:`phase_flip`, and :func:`pauli_channel` with any
  rates of the Pauli products;
* :func:`amplitude_damping` (eq. 8.108), :func:`phase_damping` (§8.3.6,
  written as the equal phase-flip channel), and :func:`thermal_relaxation`
  from ``T1``, ``T2`` and a duration (amplitude damping then dephasing).

:meth:`Channel.superoperator` is the channel as a matrix on ``vec(ρ)`` (row
major: ``vec(K ρ K†) = (K ⊗ K*) vec(ρ)``), the form the doubled networks use.
"""

from __future__ import annotations

import itertools
import math
import numbers
from collections.abc import Mapping, Sequence

import numpy as np

from tnsim.errors import InputError

__all__ = [
    "COMPLETENESS_TOLERANCE",
    "Channel",
    "amplitude_damping",
    "bit_flip",
    "channel_from_superoperator",
    "depolarizing",
    "kraus_channel",
    "pauli_channel",
    "phase_damping",
    "phase_flip",
    "thermal_relaxation",
]

COMPLETENESS_TOLERANCE = 1e-10
"""Largest ``|Σ K†K - I|`` entry a channel may have (trace preservation)."""

_PAULI = {
    "I": np.eye(2, dtype=complex),
    "X": np.array([[0, 1], [1, 0]], dtype=complex),
    "Y": np.array([[0, -1j], [1j, 0]], dtype=complex),
    "Z": np.array([[1, 0], [0, -1]], dtype=complex),
}


def _pauli_product(label: str) -> np.ndarray:
    out = np.ones((1, 1), dtype=complex)
    for letter in label:
        out = np.kron(out, _PAULI[letter])
    return out


class Channel:
    """A trace-preserving quantum channel on ``num_qubits`` qubits.

    Parameters
    ----------
    kraus : sequence of array_like
        Kraus operators, each ``2**k`` square (``k`` qubits, the first the most
        significant bit).
    name : str
        A label for messages and reports.
    paulis : sequence of str, optional
        When the operator ``j`` is ``sqrt(p_j)`` times the Pauli product
        ``paulis[j]`` (one letter per qubit, e.g. ``"XZ"``): lets samplers insert
        Pauli gates instead of a matrix.

    Raises
    ------
    InputError
        If the operators are not square matrices of one size ``2**k``, or not
        complete: ``max |Σ K†K - I| > 1e-10`` (the channel would not conserve
        probability).

    Examples
    --------
    >>> ch = Channel([np.sqrt(0.9) * np.eye(2), np.sqrt(0.1) * np.diag([1, -1])], "dephase")
    >>> ch.num_qubits, len(ch.kraus)
    (1, 2)
    >>> Channel([np.eye(2), np.eye(2)], "twice")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    tnsim.errors.InputError: channel 'twice' is not trace-preserving: ...
    """

    def __init__(
        self, kraus: Sequence, name: str = "kraus", *, paulis: Sequence[str] | None = None
    ):
        self.name = str(name)
        ops = _as_matrices(kraus, self.name)
        self.num_qubits = ops[0].shape[0].bit_length() - 1
        _check_complete(ops, self.name)
        for m in ops:
            m.setflags(write=False)
        self.kraus: tuple[np.ndarray, ...] = tuple(ops)
        if paulis is not None and (
            len(paulis) != len(ops) or any(len(p) != self.num_qubits for p in paulis)
        ):
            raise InputError(f"channel {self.name!r}: one Pauli label per Kraus operator needed")
        self.paulis: tuple[str, ...] | None = tuple(paulis) if paulis is not None else None
        self._superoperator: np.ndarray | None = None

    def __repr__(self) -> str:
        return f"Channel({self.name!r}, num_qubits={self.num_qubits}, kraus={len(self.kraus)})"

    def superoperator(self) -> np.ndarray:
        """The ``4**k`` square matrix ``Σ_j K_j ⊗ K_j*`` acting on row-major ``vec(ρ)``.

        Examples
        --------
        >>> np.round(bit_flip(0.25).superoperator().real, 3)[0]
        array([0.75, 0.  , 0.  , 0.25])
        """
        if self._superoperator is None:
            d = 1 << self.num_qubits
            s = np.zeros((d * d, d * d), dtype=complex)
            for k in self.kraus:
                s += np.kron(k, k.conj())
            s.setflags(write=False)
            self._superoperator = s
        return self._superoperator

    def apply(self, rho: np.ndarray) -> np.ndarray:
        """``Σ_j K_j ρ K_j†`` of a ``2**k`` square density matrix (a reference, for small ``k``)."""
        return sum(k @ rho @ k.conj().T for k in self.kraus)

    def pauli_error(self) -> float:
        """Probability of an error in the digital error model: ``1 - Σ_j |Tr K_j|² / d²``.

        This is one minus the process (entanglement) fidelity with the identity;
        for a Pauli channel it is the total rate of the non-identity Paulis.

        Examples
        --------
        >>> round(depolarizing(0.01).pauli_error(), 12)  # 3/4 of p for one qubit
        0.0075
        """
        d = 1 << self.num_qubits
        return float(max(0.0, 1.0 - sum(abs(np.trace(k)) ** 2 for k in self.kraus) / d**2))

    def unitary_mixture(self) -> tuple[np.ndarray, tuple[np.ndarray, ...]] | None:
        """``(probabilities, unitaries)`` when every ``K_j`` is ``sqrt(p_j) U_j``, else ``None``.

        Such a channel applies ``U_j`` with probability ``p_j`` whatever the state.

        Examples
        --------
        >>> phase_flip(0.2).unitary_mixture()[0].round(12).tolist()
        [0.8, 0.2]
        >>> amplitude_damping(0.1).unitary_mixture() is None
        True
        """
        d = 1 << self.num_qubits
        probs, unitaries = [], []
        for k in self.kraus:
            gram = k.conj().T @ k
            weight = float(np.trace(gram).real) / d
            if not np.allclose(gram, weight * np.eye(d), atol=1e-12):
                return None
            if weight > 0:
                probs.append(weight)
                unitaries.append(k / math.sqrt(weight))
        return np.array(probs), tuple(unitaries)


def _as_matrices(kraus: Sequence, name: str) -> list[np.ndarray]:
    if isinstance(kraus, np.ndarray) and kraus.ndim == 2:
        kraus = [kraus]
    try:
        ops = [np.array(k, dtype=complex) for k in kraus]
    except (TypeError, ValueError) as exc:
        raise InputError(
            f"channel {name!r}: Kraus operators must be complex matrices ({exc})"
        ) from None
    if not ops:
        raise InputError(f"channel {name!r}: give at least one Kraus operator")
    d = ops[0].shape[0] if ops[0].ndim == 2 else 0
    for j, m in enumerate(ops):
        if m.ndim != 2 or m.shape != (d, d) or d < 2 or d & (d - 1):
            raise InputError(
                f"channel {name!r}: Kraus operator {j} has shape {m.shape}; every operator must "
                "be one 2**k x 2**k matrix (k qubits)"
            )
        if not np.isfinite(m).all():
            raise InputError(f"channel {name!r}: Kraus operator {j} has a non-finite entry")
    return ops


def _check_complete(ops: list[np.ndarray], name: str) -> None:
    d = ops[0].shape[0]
    total = sum(k.conj().T @ k for k in ops)
    err = float(np.abs(total - np.eye(d)).max())
    if err > COMPLETENESS_TOLERANCE:
        raise InputError(
            f"channel {name!r} is not trace-preserving: max |Σ K†K - I| = {err:.3g} "
            f"(allowed {COMPLETENESS_TOLERANCE:g}); the Kraus operators must satisfy "
            "Σ K†K = I — check them, or add the missing operator"
        )


def _probability(value, what: str, upper: float = 1.0) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not math.isfinite(value):
        raise InputError(f"{what} must be a real number, got {value!r}")
    if not 0.0 <= float(value) <= upper:
        raise InputError(f"{what} must be between 0 and {upper:g}, got {value!r}")
    return float(value)


def kraus_channel(matrices: Sequence, name: str = "kraus") -> Channel:
    """A channel from any Kraus operators (checked for completeness to 1e-10).

    Examples
    --------
    >>> kraus_channel([[[1, 0], [0, 0]], [[0, 0], [0, 1]]], "measure").num_qubits
    1
    """
    return Channel(matrices, name)


def pauli_channel(rates: Mapping[str, float], name: str = "pauli") -> Channel:
    """Apply the Pauli product ``P`` with probability ``rates[P]``, the identity otherwise.

    Parameters
    ----------
    rates : mapping of str to float
        Keys are Pauli products, one letter of ``I``, ``X``, ``Y``, ``Z`` per qubit
        (``"X"``, ``"ZZ"``, ``"IX"``; all of one length); the rates are probabilities
        summing to at most 1.

    Examples
    --------
    >>> ch = pauli_channel({"X": 0.1, "Z": 0.2})
    >>> ch.paulis, round(ch.pauli_error(), 12)
    (('I', 'X', 'Z'), 0.3)
    """
    if not isinstance(rates, Mapping) or not rates:
        raise InputError(f"{name}: give the rates as a mapping such as {{'X': 0.01, 'Z': 0.02}}")
    labels = [str(k).upper() for k in rates]
    k = len(labels[0])
    for label in labels:
        if len(label) != k or not label or set(label) - set("IXYZ"):
            raise InputError(
                f"{name}: Pauli label {label!r} is not {k} letter(s) of I, X, Y, Z; "
                "use labels of one length such as 'X', 'ZZ', 'IX'"
            )
    probs = {
        lab: _probability(v, f"{name}: rate of {lab}") for lab, v in zip(labels, rates.values())
    }
    identity = "I" * k
    rest = 1.0 - sum(p for lab, p in probs.items() if lab != identity)
    if rest < -1e-12:
        raise InputError(f"{name}: the rates sum to {1 - rest:.6g}, more than 1")
    probs[identity] = max(rest, 0.0)
    order = [identity, *sorted(lab for lab in probs if lab != identity)]
    kept = [lab for lab in order if probs[lab] > 0]
    return Channel([math.sqrt(probs[lab]) * _pauli_product(lab) for lab in kept], name, paulis=kept)


def depolarizing(p: float, num_qubits: int = 1) -> Channel:
    """``ρ -> (1 - p) ρ + p I / d`` on ``num_qubits`` qubits (``d = 2**num_qubits``).

    Nielsen and Chuang, §8.3.4, eq. 8.102 for one qubit: the Bloch vector
    shrinks by ``1 - p``.  Written as a Pauli channel: each of the ``d² - 1``
    non-identity Pauli products with probability ``p / d²``.

    Examples
    --------
    >>> rho = depolarizing(0.3).apply(np.diag([1.0, 0.0]))
    >>> np.round(rho.real, 3)
    array([[0.85, 0.  ],
           [0.  , 0.15]])
    """
    if num_qubits not in (1, 2, 3):
        raise InputError(f"depolarizing: num_qubits must be 1, 2 or 3, got {num_qubits!r}")
    p = _probability(p, "depolarizing: p")
    d2 = 4**num_qubits
    rates = {
        "".join(lab): p / d2
        for lab in itertools.product("IXYZ", repeat=num_qubits)
        if set(lab) != {"I"}
    }
    return pauli_channel(rates, "depolarizing" if num_qubits == 1 else f"depolarizing{num_qubits}")


def bit_flip(p: float) -> Channel:
    """``X`` with probability ``p`` (Nielsen and Chuang, §8.3.3)."""
    return pauli_channel({"X": _probability(p, "bit_flip: p")}, "bit_flip")


def phase_flip(p: float) -> Channel:
    """``Z`` with probability ``p`` (Nielsen and Chuang, §8.3.3)."""
    return pauli_channel({"Z": _probability(p, "phase_flip: p")}, "phase_flip")


def amplitude_damping(gamma: float) -> Channel:
    """Decay ``|1> -> |0>`` with probability ``gamma`` (Nielsen and Chuang, §8.3.5, eq. 8.108).

    Kraus operators ``[[1, 0], [0, sqrt(1 - γ)]]`` and ``[[0, sqrt(γ)], [0, 0]]``.

    Examples
    --------
    >>> np.round(amplitude_damping(0.25).apply(np.diag([0.0, 1.0])).real, 3)
    array([[0.25, 0.  ],
           [0.  , 0.75]])
    """
    g = _probability(gamma, "amplitude_damping: gamma")
    k0 = np.array([[1, 0], [0, math.sqrt(1 - g)]], dtype=complex)
    k1 = np.array([[0, math.sqrt(g)], [0, 0]], dtype=complex)
    return Channel([k0, k1], "amplitude_damping")


def phase_damping(lam: float) -> Channel:
    """Off-diagonal entries shrink by ``sqrt(1 - λ)`` (Nielsen and Chuang, §8.3.6).

    The book's Kraus operators ``diag(1, sqrt(1 - λ))`` and ``diag(0, sqrt(λ))``
    give the same channel as a phase flip with probability
    ``(1 - sqrt(1 - λ)) / 2`` (same section); the phase-flip form is used so
    that samplers can draw ``I`` or ``Z`` whatever the state.

    Examples
    --------
    >>> np.round(phase_damping(0.75).apply(np.full((2, 2), 0.5)).real, 3)
    array([[0.5 , 0.25],
           [0.25, 0.5 ]])
    """
    lam = _probability(lam, "phase_damping: lambda")
    flip = (1 - math.sqrt(1 - lam)) / 2
    return pauli_channel({"Z": flip}, "phase_damping")


def thermal_relaxation(t1: float, t2: float, time: float) -> Channel:
    """Energy relaxation (``T1``) and dephasing (``T2``) of a qubit for a duration ``time``.

    Amplitude damping with ``γ = 1 - exp(-t/T1)``, then phase damping with
    ``λ = 1 - exp(-2t/T2 + t/T1)``, so populations relax as ``exp(-t/T1)`` and
    coherences decay as ``exp(-t/T2)`` (zero temperature; common practice).
    Needs ``0 < T2 <= 2 T1``.  Any time unit, the same for all three.

    Examples
    --------
    >>> ch = thermal_relaxation(50.0, 30.0, 10.0)
    >>> rho = ch.apply(np.full((2, 2), 0.5))
    >>> round(float(abs(rho[0, 1])) / 0.5, 6), round(float(np.exp(-10 / 30)), 6)
    (0.716531, 0.716531)
    """
    for value, what in ((t1, "t1"), (t2, "t2"), (time, "time")):
        if isinstance(value, bool) or not isinstance(value, numbers.Real) or not value >= 0:
            raise InputError(f"thermal_relaxation: {what} must be a non-negative number")
    if t1 <= 0 or t2 <= 0:
        raise InputError("thermal_relaxation: t1 and t2 must be positive")
    if t2 > 2 * t1 * (1 + 1e-12):
        raise InputError(
            f"thermal_relaxation: t2 = {t2:g} exceeds 2 * t1 = {2 * t1:g}, which no physical "
            "qubit allows; check the values"
        )
    gamma = 1 - math.exp(-time / t1)
    lam = max(0.0, 1 - math.exp(-2 * time / t2 + time / t1))
    damp = amplitude_damping(gamma).kraus
    dephase = phase_damping(lam).kraus
    ops = [b @ a for a in damp for b in dephase]
    return Channel([k for k in ops if np.any(k)], "thermal_relaxation")


def channel_from_superoperator(s: np.ndarray, name: str = "channel") -> Channel:
    """The channel of a superoperator (see :meth:`Channel.superoperator`), via its Choi matrix.

    Kraus operators are the eigenvectors of the Choi matrix scaled by the square
    roots of their eigenvalues; eigenvalues below ``1e-14`` times the largest are
    dropped.

    Examples
    --------
    >>> ch = channel_from_superoperator(amplitude_damping(0.3).superoperator())
    >>> np.allclose(ch.superoperator(), amplitude_damping(0.3).superoperator())
    True
    """
    s = np.asarray(s, dtype=complex)
    d = math.isqrt(s.shape[0])
    # S[(a,b),(c,d)] -> Choi J[(a,c),(b,d)] = E(|c><d|)[a,b] arranged as (out, in) x (out, in).
    choi = s.reshape(d, d, d, d).transpose(0, 2, 1, 3).reshape(d * d, d * d)
    values, vectors = np.linalg.eigh((choi + choi.conj().T) / 2)
    top = max(values.max(), 0.0)
    ops = [
        math.sqrt(v) * vectors[:, j].reshape(d, d) for j, v in enumerate(values) if v > 1e-14 * top
    ]
    return Channel(ops, name)
