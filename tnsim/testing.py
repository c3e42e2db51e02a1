"""Seeded random circuits and dense reference simulators, shared by tests and benchmarks.

The dense state-vector simulator holds all ``2**n`` amplitudes and the dense
density-matrix simulator all ``4**n`` entries of a noisy circuit's state; they
are meant only for checking tnsim on small circuits (and as the baseline the
benchmarks compare against) and are not part of the contraction pipeline.
"""

from __future__ import annotations

import numpy as np

from tnsim.circuits import channels as ch
from tnsim.circuits.circuit import Circuit
from tnsim.circuits.gates import GATES
from tnsim.circuits.noise import ChannelOp, NoiseModel, NoisyCircuit
from tnsim.execution.blas import blas_threads, set_blas_threads

__all__ = [
    "dense_density_matrix",
    "dense_read_probabilities",
    "dense_reported_pauli",
    "dense_state",
    "random_circuit",
    "random_noise_model",
]


def random_circuit(
    num_qubits: int,
    num_gates: int,
    seed: int | np.random.Generator | None = 0,
    gates: list[str] | None = None,
) -> Circuit:
    """Return a circuit of ``num_gates`` gates drawn uniformly from ``gates``.

    Parameters
    ----------
    num_qubits : int
        Width; gates wider than the circuit are skipped.
    num_gates : int
        Number of gates.
    seed : int or numpy.random.Generator
        Source of randomness (same seed, same circuit).
    gates : list of str, optional
        Gate names to draw from (default: every gate tnsim knows).

    Examples
    --------
    >>> len(random_circuit(4, 10, seed=1))
    10
    """
    rng = np.random.default_rng(seed)
    names = [g for g in (gates or sorted(GATES)) if GATES[g].num_qubits <= num_qubits]
    c = Circuit(num_qubits)
    for _ in range(num_gates):
        spec = GATES[names[rng.integers(len(names))]]
        qubits = rng.choice(num_qubits, spec.num_qubits, replace=False).tolist()
        c.append(spec.name, qubits, rng.uniform(-np.pi, np.pi, spec.num_params).tolist())
    return c


def dense_state(circuit: Circuit) -> np.ndarray:
    """Return the full state vector ``C|0...0>`` (qubit 0 is the most significant bit).

    Examples
    --------
    >>> np.round(dense_state(Circuit(2).h(0).cx(0, 1)), 4)
    array([0.7071+0.j, 0.    +0.j, 0.    +0.j, 0.7071+0.j])
    """
    n = circuit.num_qubits
    psi = np.zeros((2,) * n, dtype=np.complex128)
    psi[(0,) * n] = 1
    for op in circuit.ops:
        k = len(op.qubits)
        u = op.matrix().reshape((2,) * (2 * k))
        psi = np.tensordot(u, psi, axes=(list(range(k, 2 * k)), list(op.qubits)))
        psi = np.moveaxis(psi, list(range(k)), list(op.qubits))
    return psi.reshape(-1)


def random_noise_model(num_qubits: int, seed: int | np.random.Generator | None = 0) -> NoiseModel:
    """A noise model using every kind of channel, rule and readout error, with random rates.

    Rates are drawn large (up to about 0.3) so that tests see the noise.

    Examples
    --------
    >>> model = random_noise_model(4, seed=1)
    >>> len(model.gate_rules) > 5, len(model.layer_rules), len(model.readout_qubits)
    (True, 1, 1)
    """
    rng = np.random.default_rng(seed)
    u = lambda: float(rng.uniform(0.02, 0.3))  # noqa: E731
    q = lambda: int(rng.integers(num_qubits))  # noqa: E731
    # Random channels from random isometries: Kraus operators stacked in an isometry.
    iso, _ = np.linalg.qr(rng.normal(size=(4, 2)) + 1j * rng.normal(size=(4, 2)))
    iso2, _ = np.linalg.qr(rng.normal(size=(8, 4)) + 1j * rng.normal(size=(8, 4)))
    # Two-qubit channels that are not Pauli channels: independent amplitude damping on both
    # qubits (sends no signal between them), and a random one (signals both ways).
    ad1, ad2 = ch.amplitude_damping(u()).kraus, ch.amplitude_damping(u()).kraus
    both = ch.kraus_channel([np.kron(a, b) for a in ad1 for b in ad2], "damp2")
    model = (
        NoiseModel()
        .after_gates(ch.depolarizing(u()), gates=["h", "rx", "sx", "u3"])
        .after_gates(ch.depolarizing(u(), 2), gates=["cx", "cz", "rzz", "fsim", "iswap"])
        .after_gates(ch.amplitude_damping(u()), qubits=[q()])
        .after_gates(ch.phase_damping(u()), gates=["rz", "t", "s"])
        .after_gates(ch.bit_flip(u()), qubits=[(0, 1)])
        .after_gates(ch.phase_flip(u()))
        .after_gates(ch.pauli_channel({"X": u() / 3, "Y": u() / 3, "Z": u() / 3}), gates=["ry"])
        .after_gates(ch.pauli_channel({"XZ": u() / 2, "YY": u() / 2}), gates=["cy", "swap"])
        .after_gates(ch.thermal_relaxation(50.0, 40.0, float(rng.uniform(1, 10))), qubits=[q()])
        .after_gates(ch.kraus_channel([iso[:2], iso[2:]], "random"), gates=["x", "y"])
        .after_gates(both, gates=["cz", "rzz"])
        .after_gates(ch.kraus_channel([iso2[:4], iso2[4:]], "random2"), gates=["iswap", "cx"])
        .after_layers(ch.amplitude_damping(u() / 4), qubits=[q()])
        .readout(_confusion(u() / 2, u() / 2))
        .readout(_confusion(u(), u() / 3), qubits=[q()])
    )
    return model


def _confusion(e0: float, e1: float) -> list[list[float]]:
    """Misread 0 as 1 with probability ``e0`` and 1 as 0 with ``e1``."""
    return [[1 - e0, e1], [e0, 1 - e1]]


def _apply_tensor(t: np.ndarray, matrix: np.ndarray, axes: list[int]) -> np.ndarray:
    k = len(axes)
    out = np.tensordot(matrix.reshape((2,) * (2 * k)), t, axes=(list(range(k, 2 * k)), axes))
    return np.moveaxis(out, list(range(k)), axes)


def dense_density_matrix(noisy: NoisyCircuit) -> np.ndarray:
    """The final density matrix of a noisy circuit, ``2**n`` square (for tests, ``n <= 10``).

    Each gate is ``ρ -> U ρ U†``, each channel ``ρ -> Σ_j K_j ρ K_j†`` applied
    with its Kraus operators (not its superoperator); qubit 0 is the most
    significant bit.

    Examples
    --------
    >>> from tnsim.circuits.channels import bit_flip
    >>> noisy = NoiseModel().after_gates(bit_flip(0.25)).apply(Circuit(1).x(0))
    >>> np.round(dense_density_matrix(noisy).real, 6)
    array([[0.25, 0.  ],
           [0.  , 0.75]])
    """
    full = blas_threads()  # small products: one BLAS thread (see tnsim.execution.blas)
    set_blas_threads(1)
    try:
        return _dense_density_matrix(noisy)
    finally:
        set_blas_threads(full)


def _dense_density_matrix(noisy: NoisyCircuit) -> np.ndarray:
    n = noisy.num_qubits
    rho = np.zeros((2,) * (2 * n), dtype=np.complex128)
    rho[(0,) * (2 * n)] = 1.0
    for item in noisy.items:
        ket = list(item.qubits)
        bra = [n + q for q in ket]
        if isinstance(item, ChannelOp):
            out = np.zeros_like(rho)
            for k in item.channel.kraus:
                out += _apply_tensor(_apply_tensor(rho, k, ket), k.conj(), bra)
            rho = out
        else:
            u = item.matrix()
            rho = _apply_tensor(_apply_tensor(rho, u, ket), u.conj(), bra)
    return rho.reshape(2**n, 2**n)


def dense_read_probabilities(
    noisy: NoisyCircuit, readout: bool = True, rho: np.ndarray | None = None
) -> np.ndarray:
    """Probabilities of reading each bitstring (for tests).

    ``A diag(ρ)``, ``A`` the Kronecker product of the qubits' confusion matrices;
    ``rho`` is :func:`dense_density_matrix` of ``noisy`` if already computed.
    """
    rho = dense_density_matrix(noisy) if rho is None else rho
    p = np.diagonal(rho).real.copy()
    if not readout:
        return p
    a = np.ones((1, 1))
    for q in range(noisy.num_qubits):
        a = np.kron(a, noisy.confusion(q))
    return a @ p


def dense_reported_pauli(
    noisy: NoisyCircuit,
    paulis: dict[int, str],
    readout: bool = True,
    rho: np.ndarray | None = None,
) -> float:
    """The mean reported parity of measuring ``paulis`` (for tests).

    Each qubit is turned to its Pauli's eigenbasis, all qubits are read (with
    their confusion matrices), and the product of the measured qubits' ``±1``
    is averaged.  ``rho`` is :func:`dense_density_matrix` of ``noisy`` if already computed.
    """
    n = noisy.num_qubits
    turn = {"X": GATES["h"].make(), "Y": GATES["h"].make() @ GATES["sdg"].make(), "Z": np.eye(2)}
    rho = dense_density_matrix(noisy) if rho is None else rho
    rho = rho.reshape((2,) * (2 * n))
    for q, letter in paulis.items():
        u = turn[letter]
        rho = _apply_tensor(_apply_tensor(rho, u, [q]), u.conj(), [n + q])
    rotated = NoisyCircuit(n, [], noisy.readout)
    a = np.ones((1, 1))
    for q in range(n):
        a = np.kron(a, rotated.confusion(q) if readout else np.eye(2))
    p = a @ np.diagonal(rho.reshape(2**n, 2**n)).real
    signs = np.ones(2**n)
    for q in paulis:
        signs *= 1 - 2 * ((np.arange(2**n) >> (n - 1 - q)) & 1)
    return float(signs @ p)
