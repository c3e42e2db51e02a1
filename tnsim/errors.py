"""The exception types of tnsim.

Every error tnsim raises on purpose derives from :class:`TnsimError`.  Messages
say what was wrong, where (``file:line:column`` for files) and what to do, so
the command line can print them as a single line.
"""

from __future__ import annotations

__all__ = [
    "CheckpointError",
    "InputError",
    "OutputError",
    "PlanningError",
    "QasmError",
    "ResourceLimitError",
    "TnsimError",
]


class TnsimError(Exception):
    """Base class of every error tnsim raises on purpose."""


class InputError(TnsimError, ValueError):
    """Input that tnsim cannot accept: a circuit, bitstring, observable or option."""


class QasmError(InputError):
    """An OpenQASM 2.0 text that cannot be read.

    Parameters
    ----------
    message : str
        What was wrong and what to do.
    source : str
        File name, or ``"<text>"`` for a string.
    line, column : int
        1-based position of the problem.
    """

    def __init__(self, message: str, source: str = "<text>", line: int = 0, column: int = 0):
        self.source, self.line, self.column = source, line, column
        super().__init__(f"{source}:{line}:{column}: {message}")


class PlanningError(TnsimError):
    """No contraction plan could be found under the given constraints."""


class ResourceLimitError(TnsimError):
    """A plan or run would exceed a memory, FLOP or size limit."""


class CheckpointError(TnsimError):
    """A checkpoint file is missing, corrupt, or belongs to another run."""


class OutputError(TnsimError):
    """An output could not be written (full disk, I/O error, no permission, closed stream).

    Nothing partial is left: a file being replaced keeps its old contents.
    """
