"""Gate definitions: matrix, arity, parameters, and whether the gate is diagonal.

Matrices follow the OpenQASM 2.0 specification (Cross, Bishop, Smolin, Gambetta,
"Open Quantum Assembly Language", arXiv:1707.03429, 2017) for the gates it
defines, with one documented exception: the rotations ``rx``, ``ry``, ``rz`` are
``exp(-i θ P / 2)`` (P a Pauli matrix), so ``rz(θ)`` differs from ``u1(θ)`` by the
global phase ``exp(-i θ / 2)``.

Multi-qubit matrices use the first listed qubit as the most significant bit: for
``cx(c, t)`` the basis order is ``|c t> = |00>, |01>, |10>, |11>``.

Gates outside that specification:

* ``iswap`` = [[1,0,0,0],[0,0,i,0],[0,i,0,0],[0,0,0,1]];
* ``rxx(θ)``, ``ryy(θ)``, ``rzz(θ)`` = ``exp(-i θ P⊗P / 2)``;
* ``fsim(θ, φ)``, the fermionic-simulation gate (Foxen et al., "Demonstrating a
  continuous set of two-qubit gates for near-term quantum algorithms", Phys. Rev.
  Lett. 125, 120504, 2020) = [[1,0,0,0],[0,cos θ,-i sin θ,0],[0,-i sin θ,cos θ,0],
  [0,0,0,exp(-i φ)]].
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from tnsim.errors import InputError

__all__ = ["GATES", "GateSpec", "controlled", "gate_matrix", "is_unitary"]

_I2 = np.eye(2, dtype=complex)
_X = np.array([[0, 1], [1, 0]], dtype=complex)
_Y = np.array([[0, -1j], [1j, 0]], dtype=complex)
_Z = np.array([[1, 0], [0, -1]], dtype=complex)
_H = np.array([[1, 1], [1, -1]], dtype=complex) / np.sqrt(2)
_SX = np.array([[1 + 1j, 1 - 1j], [1 - 1j, 1 + 1j]], dtype=complex) / 2


def _u3(theta: float, phi: float, lam: float) -> np.ndarray:
    """OpenQASM 2.0 ``U(θ, φ, λ)`` (arXiv:1707.03429, eq. 2)."""
    c, s = np.cos(theta / 2), np.sin(theta / 2)
    return np.array(
        [[c, -np.exp(1j * lam) * s], [np.exp(1j * phi) * s, np.exp(1j * (phi + lam)) * c]],
        dtype=complex,
    )


def _pauli_rotation(pauli: np.ndarray) -> Callable[[float], np.ndarray]:
    """Return ``θ -> exp(-i θ P / 2)`` for a Pauli (or Pauli product) ``P`` with ``P² = I``."""
    eye = np.eye(pauli.shape[0], dtype=complex)

    def rotation(theta: float) -> np.ndarray:
        return np.cos(theta / 2) * eye - 1j * np.sin(theta / 2) * pauli

    return rotation


def controlled(matrix: np.ndarray, num_controls: int = 1) -> np.ndarray:
    """Return the matrix of ``matrix`` controlled on ``num_controls`` leading qubits.

    Parameters
    ----------
    matrix : numpy.ndarray
        Square matrix of the target gate.
    num_controls : int
        Number of control qubits, placed first (most significant).

    Returns
    -------
    numpy.ndarray
        The block-diagonal matrix ``diag(I, ..., I, matrix)``.

    Examples
    --------
    >>> controlled(np.array([[0, 1], [1, 0]])).real.astype(int)
    array([[1, 0, 0, 0],
           [0, 1, 0, 0],
           [0, 0, 0, 1],
           [0, 0, 1, 0]])
    """
    dim = matrix.shape[0] << num_controls
    out = np.eye(dim, dtype=complex)
    out[dim - matrix.shape[0] :, dim - matrix.shape[0] :] = matrix
    return out


def _fsim(theta: float, phi: float) -> np.ndarray:
    """Fermionic-simulation gate (Foxen et al., PRL 125, 120504, 2020)."""
    c, s = np.cos(theta), -1j * np.sin(theta)
    return np.array(
        [[1, 0, 0, 0], [0, c, s, 0], [0, s, c, 0], [0, 0, 0, np.exp(-1j * phi)]], dtype=complex
    )


def _const(matrix: ArrayLike) -> Callable[[], np.ndarray]:
    fixed = np.asarray(matrix, dtype=complex)
    return lambda: fixed


def _swap_matrix() -> np.ndarray:
    m = np.zeros((4, 4), dtype=complex)
    for a in range(2):
        for b in range(2):
            m[2 * b + a, 2 * a + b] = 1
    return m


@dataclass(frozen=True)
class GateSpec:
    """What tnsim knows about one named gate.

    Attributes
    ----------
    name : str
        Lower-case name, as in OpenQASM 2.0 where it defines the gate.
    num_qubits : int
        Arity.
    num_params : int
        Number of real parameters.
    make : callable
        ``make(*params) -> numpy.ndarray``, the ``2**num_qubits`` square matrix.
    diagonal : bool
        Whether the matrix is diagonal for every parameter value.
    """

    name: str
    num_qubits: int
    num_params: int
    make: Callable[..., np.ndarray]
    diagonal: bool = False

    def matrix(self, params: Sequence[float] = ()) -> np.ndarray:
        """Return the gate's matrix for ``params`` (checked for count)."""
        if len(params) != self.num_params:
            raise InputError(
                f"gate '{self.name}' takes {self.num_params} parameter(s), got {len(params)}"
            )
        return self.make(*params)


def _specs() -> dict[str, GateSpec]:
    rx, ry, rz = (_pauli_rotation(p) for p in (_X, _Y, _Z))

    def phase(lam: float) -> np.ndarray:
        return np.diag([1, np.exp(1j * lam)]).astype(complex)

    table = [
        GateSpec("id", 1, 0, _const(_I2), True),
        GateSpec("x", 1, 0, _const(_X)),
        GateSpec("y", 1, 0, _const(_Y)),
        GateSpec("z", 1, 0, _const(_Z), True),
        GateSpec("h", 1, 0, _const(_H)),
        GateSpec("s", 1, 0, _const(np.diag([1, 1j])), True),
        GateSpec("sdg", 1, 0, _const(np.diag([1, -1j])), True),
        GateSpec("t", 1, 0, _const(np.diag([1, np.exp(1j * np.pi / 4)])), True),
        GateSpec("tdg", 1, 0, _const(np.diag([1, np.exp(-1j * np.pi / 4)])), True),
        GateSpec("sx", 1, 0, _const(_SX)),
        GateSpec("sxdg", 1, 0, _const(_SX.conj().T)),
        GateSpec("rx", 1, 1, rx),
        GateSpec("ry", 1, 1, ry),
        GateSpec("rz", 1, 1, rz, True),
        GateSpec("p", 1, 1, phase, True),
        GateSpec("u1", 1, 1, phase, True),
        GateSpec("u2", 1, 2, lambda phi, lam: _u3(np.pi / 2, phi, lam)),
        GateSpec("u3", 1, 3, _u3),
        GateSpec("u", 1, 3, _u3),
        GateSpec("cx", 2, 0, _const(controlled(_X))),
        GateSpec("cy", 2, 0, _const(controlled(_Y))),
        GateSpec("cz", 2, 0, _const(controlled(_Z)), True),
        GateSpec("ch", 2, 0, _const(controlled(_H))),
        GateSpec("swap", 2, 0, _const(_swap_matrix())),
        GateSpec(
            "iswap",
            2,
            0,
            _const(np.array([[1, 0, 0, 0], [0, 0, 1j, 0], [0, 1j, 0, 0], [0, 0, 0, 1]])),
        ),
        GateSpec("cp", 2, 1, lambda lam: controlled(phase(lam)), True),
        GateSpec("cu1", 2, 1, lambda lam: controlled(phase(lam)), True),
        GateSpec("crx", 2, 1, lambda t: controlled(rx(t))),
        GateSpec("cry", 2, 1, lambda t: controlled(ry(t))),
        GateSpec("crz", 2, 1, lambda t: controlled(rz(t)), True),
        GateSpec("cu3", 2, 3, lambda t, p, lam: controlled(_u3(t, p, lam))),
        GateSpec("rxx", 2, 1, _pauli_rotation(np.kron(_X, _X))),
        GateSpec("ryy", 2, 1, _pauli_rotation(np.kron(_Y, _Y))),
        GateSpec("rzz", 2, 1, _pauli_rotation(np.kron(_Z, _Z)), True),
        GateSpec("fsim", 2, 2, _fsim),
        GateSpec("ccx", 3, 0, _const(controlled(_X, 2))),
        GateSpec("cswap", 3, 0, _const(controlled(_swap_matrix(), 1))),
    ]
    return {spec.name: spec for spec in table}


GATES: dict[str, GateSpec] = _specs()
"""Every named gate tnsim knows, by lower-case name."""


def gate_matrix(name: str, params: Sequence[float] = ()) -> np.ndarray:
    """Return the matrix of the named gate.

    Parameters
    ----------
    name : str
        A key of :data:`GATES`.
    params : sequence of float
        The gate's real parameters.

    Returns
    -------
    numpy.ndarray
        Complex square matrix of side ``2**arity``.

    Raises
    ------
    InputError
        Unknown name or wrong parameter count.

    Examples
    --------
    >>> gate_matrix("cz").diagonal().real
    array([ 1.,  1.,  1., -1.])
    """
    spec = GATES.get(name)
    if spec is None:
        raise InputError(f"unknown gate '{name}'; known gates: {', '.join(sorted(GATES))}")
    return spec.matrix(tuple(params))


def is_unitary(matrix: np.ndarray, atol: float = 1e-8) -> bool:
    """Whether ``matrix`` is square with ``U†U = I`` to ``atol``."""
    m = np.asarray(matrix)
    return (
        m.ndim == 2
        and m.shape[0] == m.shape[1]
        and bool(np.allclose(m.conj().T @ m, np.eye(m.shape[0]), atol=atol))
    )
