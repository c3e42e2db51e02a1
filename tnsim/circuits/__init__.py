"""Stage 1 of the pipeline: circuits.

Gates (:mod:`.gates`), the :class:`Circuit` model (:mod:`.circuit`),
bitstrings (:mod:`.bits`), seeded circuit families (:mod:`.families`) and
OpenQASM readers and writers (:mod:`.qasm`).  Nothing here knows about tensors.
"""

from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.qasm import read_qasm, write_qasm

__all__ = ["Circuit", "Operation", "read_qasm", "write_qasm"]
