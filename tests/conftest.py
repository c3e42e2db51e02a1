"""Shared fixtures of the test suite."""

import numpy as np
import pytest

from tnsim.execution.steps import compile_tree
from tnsim.network.builders import amplitude_network
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import greedy_tree
from tnsim.testing import dense_state, random_circuit

_GATES = ["h", "cx", "rz", "rx", "cz", "ry"]


def _sliced_case(num_qubits=30, num_gates=300, seed=3, num_sliced=5, open_qubits=()):
    """A random-circuit amplitude network, its greedy tree, and labels to slice.

    The sliced labels are chosen by hand: summed labels of the largest intermediate.
    Returns (circuit, bits, network, tree, sliced).
    """
    circuit = random_circuit(num_qubits, num_gates, seed=seed, gates=_GATES)
    if num_qubits <= 20:  # the most likely bitstring: a clearly nonzero amplitude
        top = int(np.argmax(np.abs(dense_state(circuit))))
        bits = format(top, f"0{num_qubits}b")  # qubit 0 is the most significant bit
    else:
        bits = "01" * (num_qubits // 2) + "0" * (num_qubits % 2)
    network = amplitude_network(circuit, bits, open_qubits=open_qubits)
    small = absorb_small(network)
    network = small if len(small) >= 8 else network  # tiny circuits shrink to one tensor
    tree = greedy_tree(network.indices, network.output, network.size)
    steps = compile_tree(tree)
    big = max(steps, key=lambda s: len(s.out_labels))
    sliced = [i for i in big.out_labels if i not in network.output][:num_sliced]
    return circuit, bits, network, tree, sliced


@pytest.fixture
def sliced_case():
    """Factory of sliced contraction problems (see ``_sliced_case``)."""
    return _sliced_case
