"""Checkpoints of sliced contractions: finished chunks and their partial sums.

Chunk results are combined in chunk order (:class:`OrderedSum`), so a run
that is stopped and resumed gives bit-for-bit the result of one that was not.
A checkpoint file holds the sum of the first finished chunks in order, plus
any later chunks that finished early.

File format (a numpy ``.npz`` archive read with ``allow_pickle=False``):

``header``
    uint8 array holding UTF-8 JSON: ``format`` (``"tnsim-checkpoint"``),
    ``version`` (1), ``fingerprint`` (SHA-256 hex of the run, see
    :func:`run_fingerprint`), ``num_chunks``, ``prefix_count`` (chunks
    ``0 .. prefix_count-1`` are summed in ``prefix``), ``prefix_exponent``,
    ``pending`` (indices of other finished chunks), ``pending_exponents``,
    ``dtype``, ``shape`` and ``digest`` (SHA-256 hex of the two arrays' bytes).
``prefix``
    The mantissa of the prefix sum (shape ``shape``; empty before any chunk).
``pending``
    The mantissas of the pending chunks, stacked in the order of ``pending``.

Each update writes a temporary file in the same folder and renames it over
the old one (``os.replace``), so the file on disk is always complete.
"""

from __future__ import annotations

import hashlib
import json
import os
import zipfile
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from tnsim.errors import CheckpointError
from tnsim.fileio import write_atomic

__all__ = ["Checkpoint", "OrderedSum", "run_fingerprint"]

_FORMAT, _VERSION = "tnsim-checkpoint", 1


@dataclass
class OrderedSum:
    """Sum of ``num_chunks`` values ``v[0] + v[1] + ...`` taken strictly in index order.

    Values may arrive in any order; each is added once all earlier ones are in.
    Values must support ``+`` (e.g. :class:`tnsim.network.scaled.Scaled`).

    Examples
    --------
    >>> s = OrderedSum(3)
    >>> s.add(2, 30); s.add(0, 10); s.add(1, 20)
    >>> s.prefix_count, s.total()
    (3, 60)
    """

    num_chunks: int
    prefix_count: int = 0
    prefix: Any = None
    pending: dict = field(default_factory=dict)

    def add(self, index: int, value) -> None:
        """Record the value of chunk ``index``."""
        self.pending[index] = value
        while self.prefix_count in self.pending:
            part = self.pending.pop(self.prefix_count)
            self.prefix = part if self.prefix is None else self.prefix + part
            self.prefix_count += 1

    def done(self) -> set[int]:
        """Indices of the chunks recorded so far."""
        return set(range(self.prefix_count)) | set(self.pending)

    def total(self):
        """Return the full sum (every chunk must be recorded)."""
        if self.prefix_count != self.num_chunks:
            raise RuntimeError(f"{self.num_chunks - self.prefix_count} chunks are missing")
        return self.prefix


def run_fingerprint(
    arrays: Sequence[np.ndarray], description: dict, extra: Iterable[bytes] = ()
) -> str:
    """Return the SHA-256 hex digest of a run: its arrays and a JSON-able description.

    The description should hold everything that changes the result: labels,
    sizes, the contraction path, sliced labels, chunking, dtype, backend.

    Examples
    --------
    >>> a = run_fingerprint([np.ones(2)], {"path": [[0, 1]]})
    >>> a == run_fingerprint([np.ones(2)], {"path": [[1, 0]]})
    False
    """
    h = hashlib.sha256(json.dumps(description, sort_keys=True).encode())
    for arr in arrays:
        arr = np.ascontiguousarray(arr)
        h.update(json.dumps([arr.dtype.str, list(arr.shape)]).encode())
        h.update(arr.reshape(-1).view(np.uint8).data)
    for blob in extra:
        h.update(blob)
    return h.hexdigest()


def _digest(*arrays: np.ndarray) -> str:
    h = hashlib.sha256()
    for arr in arrays:
        h.update(np.ascontiguousarray(arr).reshape(-1).view(np.uint8).data)
    return h.hexdigest()


class Checkpoint:
    """A checkpoint file bound to one run.

    Parameters
    ----------
    path : str
        The file.  If it exists it must belong to this run (same fingerprint)
        and is loaded; otherwise the run starts afresh.
    fingerprint : str
        From :func:`run_fingerprint`.
    num_chunks : int
        Chunks of the run.
    make_value : callable
        ``make_value(mantissa, exponent)`` rebuilds a chunk value;
        ``value.mantissa`` and ``value.exponent`` are what is stored.

    Raises
    ------
    CheckpointError
        If the file is unreadable, corrupt, truncated or from another run.
    """

    def __init__(self, path: str, fingerprint: str, num_chunks: int, make_value):
        self.path = os.fspath(path)
        self.fingerprint = fingerprint
        self.make_value = make_value
        self.sums = OrderedSum(num_chunks)
        if os.path.exists(self.path):
            self._load()

    def _fail(self, what: str) -> CheckpointError:
        return CheckpointError(
            f"checkpoint {self.path!r} {what}; delete it (or give another --checkpoint path) "
            "to start afresh"
        )

    def _load(self) -> None:
        try:
            with np.load(self.path, allow_pickle=False) as data:
                header = json.loads(bytes(data["header"]).decode("utf-8"))
                prefix, pending = data["prefix"], data["pending"]
        except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile, UnicodeError) as exc:
            raise self._fail(f"cannot be read ({type(exc).__name__}: {exc})") from None
        if not isinstance(header, dict) or header.get("format") != _FORMAT:
            raise self._fail("is not a tnsim checkpoint")
        if header.get("version") != _VERSION:
            raise self._fail(f"has unsupported version {header.get('version')!r}")
        if header.get("fingerprint") != self.fingerprint:
            raise self._fail(
                "belongs to a different circuit, query or plan (its fingerprint "
                f"{str(header.get('fingerprint'))[:12]} differs from this run's "
                f"{self.fingerprint[:12]})"
            )
        try:
            self._restore(header, prefix, pending)
        except (KeyError, TypeError, ValueError) as exc:
            raise self._fail(f"is corrupt ({exc})") from None

    def _restore(self, header: dict, prefix: np.ndarray, pending: np.ndarray) -> None:
        if header["digest"] != _digest(prefix, pending):
            raise ValueError("stored arrays do not match their digest")
        n, count = int(header["num_chunks"]), int(header["prefix_count"])
        idx, exps = list(header["pending"]), list(header["pending_exponents"])
        if n != self.sums.num_chunks or not 0 <= count <= n or len(idx) != len(exps):
            raise ValueError("chunk counts are inconsistent")
        if len(pending) != len(idx) or any(not count < int(i) < n for i in idx):
            raise ValueError("pending chunks are inconsistent")
        if count:
            self.sums.prefix = self.make_value(prefix, int(header["prefix_exponent"]))
        self.sums.prefix_count = count
        for i, m, e in zip(idx, pending, exps):
            self.sums.pending[int(i)] = self.make_value(m, int(e))

    def add(self, index: int, value) -> None:
        """Record a finished chunk and rewrite the file atomically."""
        self.sums.add(index, value)
        self.save()

    def save(self) -> None:
        """Write the current state to the file (temporary file, then rename)."""
        sums = self.sums
        order = sorted(sums.pending)
        some = sums.prefix if sums.prefix is not None else next(iter(sums.pending.values()), None)
        if some is None:
            return
        proto = np.asarray(some.mantissa)
        empty = np.zeros((0,), proto.dtype)
        prefix = np.asarray(sums.prefix.mantissa) if sums.prefix is not None else empty
        pending = np.zeros((0, *proto.shape), proto.dtype)
        if order:
            pending = np.stack([np.asarray(sums.pending[i].mantissa) for i in order])
        header = {
            "format": _FORMAT,
            "version": _VERSION,
            "fingerprint": self.fingerprint,
            "num_chunks": sums.num_chunks,
            "prefix_count": sums.prefix_count,
            "prefix_exponent": int(sums.prefix.exponent) if sums.prefix is not None else 0,
            "pending": order,
            "pending_exponents": [int(sums.pending[i].exponent) for i in order],
            "dtype": proto.dtype.str,
            "shape": list(proto.shape),
            "digest": _digest(prefix, pending),
        }
        blob = np.frombuffer(json.dumps(header).encode("utf-8"), dtype=np.uint8)
        write_atomic(
            self.path,
            lambda fh: np.savez(fh, header=blob, prefix=prefix, pending=pending),
            prefix=".tnsim-ckpt-",
            durable=True,
        )
