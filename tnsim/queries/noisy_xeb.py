"""What linear XEB a noisy chip should score: exactly, and by the digital error model.

The linear XEB fidelity of samples ``x`` drawn from a chip is
``F = 2**n mean p(x) - 1`` with ``p`` the ideal circuit's distribution (Arute
et al., "Quantum supremacy using a programmable superconducting processor",
Nature 574, 505, 2019).  For samples of the noisy distribution ``q`` (readout
errors included) its expected value is ``2**n Σ_x q(x) p(x) - 1``:
:func:`predict_xeb` computes it exactly for narrow circuits.  Beside it, the
digital error model of the same paper estimates ``F`` as the product of
``1 - e`` over every channel of the noisy circuit (``e`` its Pauli error,
:meth:`~tnsim.circuits.channels.Channel.pauli_error`) and over every qubit's
readout (``e`` the mean of its two misread probabilities) — cheap at any width.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.circuits.noise import NoiseModel, NoisyCircuit
from tnsim.execution.options import DTypeLike, MemoryLimit, resolve_options
from tnsim.queries.marginals import all_probabilities
from tnsim.queries.noisy import as_noisy, noisy_distribution

__all__ = ["EXACT_WIDTH", "XebPrediction", "digital_error_fidelity", "predict_xeb"]

EXACT_WIDTH = 16
"""Circuits of at most this many qubits get the exact expected XEB by default."""


@dataclass(frozen=True)
class XebPrediction:
    """Predicted linear XEB fidelity of a noisy circuit.

    Attributes
    ----------
    exact : float or None
        Expected linear XEB of samples of the noisy distribution (``None``
        when the circuit is wider than asked to compute).
    ideal : float or None
        Expected linear XEB of samples of the ideal distribution,
        ``2**n Σ p(x)² - 1`` (about 1 for random circuits); ``exact / ideal``
        is the fidelity the digital error model estimates.
    digital : float
        Digital error model estimate: product of ``1 - e`` over channels and
        readouts (an estimate of the XEB of random circuits, whose ideal XEB is
        about 1).
    channels : int
        Channels in the noisy circuit.
    readout_qubits : int
        Qubits with a readout error.
    """

    exact: float | None
    ideal: float | None
    digital: float
    channels: int
    readout_qubits: int


def digital_error_fidelity(noisy: NoisyCircuit) -> float:
    """The digital error model's fidelity: ``Π (1 - e)`` over channels and readout errors.

    Examples
    --------
    >>> from tnsim.circuits.channels import depolarizing
    >>> model = NoiseModel().after_gates(depolarizing(0.04)).readout([[0.9, 0.1], [0.1, 0.9]])
    >>> round(digital_error_fidelity(model.apply(Circuit(2).h(0).h(1))), 6)  # 0.97**2 * 0.9**2
    0.762129
    """
    errors: dict[int, float] = {}
    found = []
    for item in noisy.channel_ops():
        e = errors.get(id(item.channel))
        if e is None:
            e = errors[id(item.channel)] = item.channel.pauli_error()
        found.append(e)
    found += [(c[1, 0] + c[0, 1]) / 2 for c in noisy.readout.values()]
    if any(e >= 1 for e in found):
        return 0.0
    return math.exp(math.fsum(math.log1p(-e) for e in found))


def predict_xeb(
    circuit: Circuit | NoisyCircuit,
    *,
    noise: NoiseModel | None = None,
    exact_width: int = EXACT_WIDTH,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> XebPrediction:
    """Predict the linear XEB a chip running the noisy circuit should score.

    Parameters
    ----------
    circuit : Circuit or NoisyCircuit
        The circuit (with ``noise``) or a noisy circuit.
    noise : NoiseModel, optional
        Applied to ``circuit``.
    exact_width : int
        Compute the exact expectation for circuits of at most this many qubits
        (it needs all ``2**n`` ideal and noisy probabilities).
    dtype, memory_limit : optional
        Contraction dtype and memory limit (default: the enclosing ``run_options``
        block's).

    Returns
    -------
    XebPrediction

    Examples
    --------
    >>> from tnsim.circuits.channels import depolarizing
    >>> model = NoiseModel().after_gates(depolarizing(0.1, 2), gates=["cx"])
    >>> r = predict_xeb(Circuit(2).h(0).cx(0, 1), noise=model)
    >>> round(r.exact, 6), round(r.digital, 6)  # ideal 1.0; depolarized by 0.1
    (0.9, 0.90625)
    """
    noisy = as_noisy(circuit, noise)
    opts = resolve_options(memory_limit, dtype=dtype)
    n = noisy.num_qubits
    exact = ideal = None
    if n <= exact_width:
        p = all_probabilities(noisy.ideal_circuit(), opts)
        q = noisy_distribution(
            noisy, dtype=opts.dtype, memory_limit=opts.memory_limit, max_qubits=exact_width
        )
        exact = float(2.0**n * float(np.dot(q, p)) - 1.0)
        ideal = float(2.0**n * float(np.dot(p, p)) - 1.0)
    channels = len(noisy.channel_ops())
    digital = digital_error_fidelity(noisy)
    return XebPrediction(exact, ideal, digital, channels, len(noisy.readout))
