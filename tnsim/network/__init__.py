"""Stage 2 of the pipeline: tensor networks.

:class:`TensorGraph` (:mod:`.graph`) is the network type; :mod:`.builders`
turns a circuit and a query into one (amplitude, doubled); :mod:`.lightcone`
cuts a circuit down to what a local question needs; :mod:`.batched` lays out a
cone's doubled network once for many gate-angle variants; :mod:`.noisy` builds
noisy circuits' doubled networks (channels as superoperator tensors) and light
cones; :mod:`.simplify` shrinks a
network before planning; :mod:`.scaled` is the power-of-two scale that keeps
tiny amplitudes exact.
"""

from tnsim.network.builders import amplitude_network, doubled_network, gate_tensor
from tnsim.network.graph import TensorGraph
from tnsim.network.scaled import Scaled
from tnsim.network.simplify import absorb_small

__all__ = [
    "Scaled",
    "TensorGraph",
    "absorb_small",
    "amplitude_network",
    "doubled_network",
    "gate_tensor",
]
