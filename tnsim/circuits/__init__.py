"""Stage 1 of the pipeline: circuits.

Gates (:mod:`.gates`), the :class:`Circuit` model (:mod:`.circuit`), named
gate angles (:mod:`.parameters`) and the gates' parameter-shift rules
(:mod:`.shifts`), bitstrings (:mod:`.bits`) and their files and orders
(:mod:`.bitfiles`), seeded circuit families (:mod:`.families`), graphs for QAOA
(:mod:`.graphs`) and the QAOA ansatz with named angles (:mod:`.qaoa`), OpenQASM
readers and writers (:mod:`.qasm`), and noise: quantum channels
(:mod:`.channels`), noise models (:mod:`.noise`) and their file format
(:mod:`.noisefile`).  Nothing here knows about tensors.
"""

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.qasm import read_qasm, write_qasm

__all__ = ["Circuit", "Operation", "read_qasm", "write_qasm"]
