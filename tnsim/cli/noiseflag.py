"""The ``--noise FILE`` option the query commands share.

A leaf of the command-line package: the command modules import it, it
imports none of them.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # kept out of start-up (``tnsim --help`` loads no circuit code)
    from tnsim.circuits.circuit import Circuit
    from tnsim.circuits.noise import NoisyCircuit

__all__ = ["NOISE_HELP", "add_noise_argument", "noisy_circuit"]

NOISE_HELP = (
    "noise model file (JSON; TOML with Python 3.11+): channels after gates or layers and "
    "readout errors, in tnsim's format (see tnsim.circuits.noisefile)"
)


def add_noise_argument(parser, extra: str = "") -> None:
    """Add ``--noise FILE`` to an :mod:`argparse` (sub)parser; ``extra`` ends its help."""
    parser.add_argument(
        "--noise", metavar="FILE", help=NOISE_HELP + (f"; {extra}" if extra else "")
    )


def noisy_circuit(args, circuit: Circuit) -> NoisyCircuit | None:
    """The circuit with the model of ``--noise`` applied, or ``None`` without the option."""
    path = getattr(args, "noise", None)
    if not path:
        return None
    from tnsim.circuits.noisefile import read_noise_model

    return read_noise_model(path).apply(circuit)
