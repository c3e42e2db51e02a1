"""A plain numpy state-vector simulator: the baseline tnsim is compared against.

Not part of the tnsim library.  It holds all ``2**n`` amplitudes (qubit 0 is
the most significant bit, as in :func:`tnsim.testing.dense_state`) and applies
each gate in place on a ``(2,) * n`` view of one array:

* a diagonal gate multiplies the blocks of the state it scales (no copy);
* a one-qubit gate updates the two half-blocks through two preallocated
  half-size scratch buffers;
* any other gate copies the blocks it reads into a scratch buffer, then writes
  each output block as a sum of scaled copies, skipping zero matrix entries
  (so ``cx`` and ``swap`` are block copies).

Memory: the state plus one state-sized scratch buffer plus a ``2**(n-k)``
temporary (k = the widest gate) — about 2.25× the state, 1.1 GiB for 26 qubits
in complex64.  Single-threaded numpy, one pass per gate, no gate fusion: a
deliberately plain baseline, not a tuned state-vector simulator.

Usage: ``python benchmarks/dense.py --rows 4 --cols 4 --cycles 8`` times one
grid circuit.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from tnsim.circuits.bits import parse_bits
from tnsim.circuits.circuit import Circuit

__all__ = ["dense_amplitude", "simulate"]


def _block_index(n: int, qubits: tuple[int, ...], j: int) -> tuple:
    """Index of the block where ``qubits`` hold the bits of ``j`` (first qubit = MSB of j)."""
    k = len(qubits)
    index: list = [slice(None)] * n
    for pos, q in enumerate(qubits):
        index[q] = (j >> (k - 1 - pos)) & 1
    return tuple(index)


class _Workspace:
    """The state and its reusable scratch buffers."""

    def __init__(self, n: int, dtype: np.dtype):
        self.n = n
        self.state = np.zeros(2**n, dtype=dtype)
        self.state[0] = 1
        self.view = self.state.reshape((2,) * n)
        self.scratch = np.empty(2**n, dtype=dtype)
        self.temp: np.ndarray | None = None

    def diagonal(self, d: np.ndarray, qubits: tuple[int, ...]) -> None:
        for j, value in enumerate(d):
            if value != 1:
                self.view[_block_index(self.n, qubits, j)] *= value

    def one_qubit(self, u: np.ndarray, q: int) -> None:
        v = self.state.reshape(2**q, 2, -1)
        a, b = v[:, 0, :], v[:, 1, :]
        half = self.state.size // 2
        x = self.scratch[:half].reshape(a.shape)
        y = self.scratch[half:].reshape(a.shape)
        np.multiply(a, u[1, 0], out=x)
        np.multiply(b, u[0, 1], out=y)
        a *= u[0, 0]
        a += y
        b *= u[1, 1]
        b += x

    def general(self, u: np.ndarray, qubits: tuple[int, ...]) -> None:
        dim = len(u)
        views = [self.view[_block_index(self.n, qubits, j)] for j in range(dim)]
        part = self.state.size // dim
        copies = {}
        for j in range(dim):
            if np.any(u[:, j] != 0):
                copies[j] = self.scratch[j * part : (j + 1) * part].reshape(views[j].shape)
                np.copyto(copies[j], views[j])
        if self.temp is None or self.temp.size < part:
            self.temp = np.empty(part, dtype=self.state.dtype)
        temp = self.temp[:part].reshape(views[0].shape)
        for i in range(dim):
            self._write_row(views[i], u[i], copies, temp)

    @staticmethod
    def _write_row(out: np.ndarray, row: np.ndarray, copies: dict, temp: np.ndarray) -> None:
        first = True
        for j, value in enumerate(row):
            if value == 0:
                continue
            if first:
                if value == 1:
                    np.copyto(out, copies[j])
                else:
                    np.multiply(copies[j], value, out=out)
                first = False
            elif value == 1:
                out += copies[j]
            else:
                np.multiply(copies[j], value, out=temp)
                out += temp
        if first:
            out[...] = 0


def simulate(circuit: Circuit, dtype=np.complex64) -> np.ndarray:
    """Return the state ``C|0...0>`` as a flat array (qubit 0 most significant).

    Parameters
    ----------
    circuit : tnsim.Circuit
        The circuit.
    dtype : numpy dtype
        ``complex64`` or ``complex128``.
    """
    dt = np.dtype(dtype)
    ws = _Workspace(circuit.num_qubits, dt)
    for op in circuit.ops:
        u = op.matrix().astype(dt)
        if op.diagonal:
            ws.diagonal(np.diag(u), op.qubits)
        elif len(op.qubits) == 1:
            ws.one_qubit(u, op.qubits[0])
        else:
            ws.general(u, op.qubits)
    return ws.state


def dense_amplitude(circuit: Circuit, bits, dtype=np.complex64) -> complex:
    """Return ``<x|C|0...0>`` from the full state (character i of ``bits`` is qubit i)."""
    x = parse_bits(bits, circuit.num_qubits)
    index = int("".join(str(int(b)) for b in x), 2)
    return complex(simulate(circuit, dtype)[index])


def _main() -> None:
    from tnsim.circuits.families import grid_circuit

    ap = argparse.ArgumentParser(description="Time the dense baseline on one grid circuit.")
    ap.add_argument("--rows", type=int, default=4)
    ap.add_argument("--cols", type=int, default=4)
    ap.add_argument("--cycles", type=int, default=8)
    ap.add_argument("--double", action="store_true", help="complex128 (default complex64)")
    args = ap.parse_args()
    c = grid_circuit(args.rows, args.cols, args.cycles, seed=0)
    t0 = time.perf_counter()
    state = simulate(c, np.complex128 if args.double else np.complex64)
    seconds = time.perf_counter() - t0
    norm = float(np.vdot(state, state).real)
    print(f"{c.num_qubits} qubits, {len(c)} gates: {seconds:.3f} s (norm {norm:.6f})")


if __name__ == "__main__":
    _main()
