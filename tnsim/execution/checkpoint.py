"""Checkpoints of sliced contractions: finished chunks and their partial sums.

Chunk results are combined in chunk order (:class:`OrderedSum`), so a run
that is stopped and resumed gives bit-for-bit the result of one that was not.
A checkpoint file holds the sum of the first finished chunks in order, plus
any later chunks that finished early.

File format, version 2 (a zip of ``.npy`` members as ``numpy.savez`` writes
them, read back by a strict reader of this module: stored members only, no
pickle, sizes checked before anything is allocated):

``header``
    uint8 array holding UTF-8 JSON: ``format`` (``"tnsim-checkpoint"``),
    ``version`` (2), ``fingerprint`` (SHA-256 hex of the run, see
    :func:`run_fingerprint`), ``network`` (the network's fingerprint, see
    :func:`tnsim.plan.store.network_fingerprint`), ``chunk_size`` (slices per
    chunk), ``num_chunks``, ``prefix_count`` (chunks ``0 .. prefix_count-1``
    are summed in ``prefix``), ``prefix_exponent``, ``pending`` (indices of
    other finished chunks), ``pending_exponents``, ``dtype``, ``shape`` and
    ``digest``: SHA-256 hex of every other header field (canonical JSON) and of
    the two arrays' dtype, shape and bytes -- everything a resume reads.
``prefix``
    The mantissa of the prefix sum (shape ``shape``; empty before any chunk).
``pending``
    The mantissas of the pending chunks, stacked in the order of ``pending``.

Each update writes a temporary file (``.tnsim-ckpt-<name>-*``) in the same
folder, flushes it to the disk and renames it over the old one, so the file on
disk is always complete.  A checkpoint is locked while a run uses it
(:mod:`tnsim.execution.lock`): a second run on it is refused at once.  Opening
it removes temporary files that a killed run left behind.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import os
import zipfile
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from tnsim.errors import CheckpointError
from tnsim.execution.lock import hold_lock
from tnsim.fileio import write_atomic

__all__ = [
    "Checkpoint",
    "OrderedSum",
    "read_header",
    "remove_stale_temporaries",
    "run_fingerprint",
]

_FORMAT, _VERSION = "tnsim-checkpoint", 2
_MEMBERS = ("header", "prefix", "pending")
_DTYPES = {np.dtype(np.uint8), np.dtype(np.complex64), np.dtype(np.complex128)}
#: Characters of a JSON header read at most.
_MAX_HEADER = 1 << 20


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


def _digest(header: dict, *arrays: np.ndarray) -> str:
    """SHA-256 of a header (without its digest, canonical JSON) and arrays (dtype, shape, bytes)."""
    body = {k: v for k, v in header.items() if k != "digest"}
    h = hashlib.sha256(json.dumps(body, sort_keys=True, separators=(",", ":")).encode())
    for arr in arrays:
        arr = np.ascontiguousarray(arr)
        h.update(json.dumps([arr.dtype.str, list(arr.shape)]).encode())
        h.update(arr.reshape(-1).view(np.uint8).data)
    return h.hexdigest()


def _parse_npy(blob: bytes, name: str) -> np.ndarray:
    """An array from the bytes of one ``.npy`` member, refusing anything unexpected."""
    fh = io.BytesIO(blob)
    major, _ = np.lib.format.read_magic(fh)
    if major != 1:
        raise ValueError(f"member {name} has npy version {major}")
    shape, fortran, dtype = np.lib.format.read_array_header_1_0(fh)
    if fortran or dtype not in _DTYPES or not all(isinstance(d, int) and d >= 0 for d in shape):
        raise ValueError(f"member {name} has an unexpected layout")
    count = 1
    for d in shape:
        count *= d
    offset = fh.tell()
    if count * dtype.itemsize != len(blob) - offset:
        raise ValueError(f"member {name} holds {len(blob) - offset} bytes, not {shape} {dtype}")
    return np.frombuffer(blob, dtype=dtype, count=count, offset=offset).reshape(shape).copy()


def _read_members(path: str, names: Sequence[str]) -> dict[str, np.ndarray]:
    """The named ``.npy`` members of a checkpoint zip, each checked before it is read."""
    limit = os.path.getsize(path)
    out = {}
    with zipfile.ZipFile(path) as zf:
        infos = {info.filename: info for info in zf.infolist()}
        if sorted(infos) != sorted(f"{m}.npy" for m in _MEMBERS):
            raise ValueError("the archive's members are not those of a checkpoint")
        for name in names:
            info = infos[f"{name}.npy"]
            if info.compress_type != zipfile.ZIP_STORED or info.flag_bits & 0x1:
                raise ValueError(f"member {name} is compressed or encrypted")
            if info.file_size > limit or info.file_size != info.compress_size:
                raise ValueError(f"member {name} claims {info.file_size} bytes")
            out[name] = _parse_npy(zf.read(info), name)
    return out


#: What reading a damaged zip or npy member can raise (the zip and npy readers' own
#: errors included: unsupported compression, encryption, bad headers).
_READ_ERRORS = (
    OSError,
    ValueError,
    KeyError,
    EOFError,
    IndexError,
    TypeError,
    SyntaxError,
    OverflowError,
    MemoryError,
    UnicodeError,
    RecursionError,
    NotImplementedError,
    RuntimeError,
    zipfile.BadZipFile,
)


def _decode_header(raw: np.ndarray) -> dict:
    if raw.dtype != np.uint8 or raw.ndim != 1 or raw.size > _MAX_HEADER:
        raise ValueError("the header is not a JSON text")
    header = json.loads(raw.tobytes().decode("utf-8"), parse_constant=_no_constant)
    if not isinstance(header, dict):
        raise ValueError("the header is not a JSON object")
    return header


def _no_constant(name: str):
    raise ValueError(f"{name} in the header")


def read_header(path: str | os.PathLike) -> dict:
    """The JSON header of a checkpoint file (its format checked, not its digest).

    Raises
    ------
    CheckpointError
        If the file cannot be read or is not a tnsim checkpoint.
    """
    path = os.fspath(path)
    try:
        return _decode_header(_read_members(path, ["header"])["header"])
    except _READ_ERRORS as exc:
        raise _refusal(path, f"cannot be read ({type(exc).__name__}: {str(exc)[:80]})") from None


def _refusal(path: str, what: str, fresh: str | None = None) -> CheckpointError:
    fresh = fresh or f"delete it (rm {path!r}) or give another checkpoint to start afresh"
    return CheckpointError(f"checkpoint {path!r} {what}; {fresh}")


class Checkpoint:
    """A checkpoint file bound to one run, locked while the run uses it.

    Use :meth:`open` in a ``with`` block, then :meth:`bind` once the run's
    fingerprint is known::

        with Checkpoint.open(path) as store:
            chunk_size = store.chunk_size      # None for a new checkpoint
            store.bind(fingerprint, network, chunk_size, num_chunks, Scaled)

    Parameters
    ----------
    path : str
        The file.  If it exists it is read at once (format, version and
        digest checked); :meth:`bind` checks it belongs to the run.
    fresh : str, optional
        What to tell a user to do to start afresh (default: delete the file).

    Raises
    ------
    CheckpointError
        If the file is unreadable, corrupt, truncated, edited, from an older
        version or in use by another process.
    """

    def __init__(self, path: str | os.PathLike, fresh: str | None = None):
        self.path = os.fspath(path)
        self.fresh = fresh
        self.header: dict | None = None
        self.arrays: dict[str, np.ndarray] = {}
        self.sums = OrderedSum(0)
        self.fingerprint = ""
        self.network = ""
        self.chunk_size = 0
        self.make_value: Callable[[np.ndarray, int], Any] = _unbound
        if os.path.lexists(self.path):
            self._read()

    @classmethod
    def open(cls, path: str | os.PathLike, fresh: str | None = None):
        """A context manager: lock the file, remove stale temporary files, read it."""
        return _Opened(os.fspath(path), fresh)

    def _fail(self, what: str) -> CheckpointError:
        return _refusal(self.path, what, self.fresh)

    def _read(self) -> None:
        try:
            if not os.path.isfile(self.path):
                raise OSError("not a regular file")
            arrays = _read_members(self.path, _MEMBERS)
            header = _decode_header(arrays.pop("header"))
        except _READ_ERRORS as exc:
            raise self._fail(f"cannot be read ({type(exc).__name__}: {str(exc)[:80]})") from None
        if header.get("format") != _FORMAT:
            raise self._fail("is not a tnsim checkpoint")
        if header.get("version") != _VERSION:
            raise self._fail(
                f"was written in checkpoint format {str(header.get('version'))[:20]}, "
                f"which this version of tnsim (format {_VERSION}) cannot resume"
            )
        if header.get("digest") != _digest(header, arrays["prefix"], arrays["pending"]):
            raise self._fail("is corrupt (its header and arrays do not match their digest)")
        self.header, self.arrays = header, arrays
        size = header.get("chunk_size")
        if not (isinstance(size, int) and not isinstance(size, bool) and size > 0):
            raise self._fail("is corrupt (no valid chunk size)")
        self.chunk_size = size
        self.network = str(header.get("network", ""))

    @property
    def stored_chunk_size(self) -> int | None:
        """Slices per chunk of the stored run (None for a new checkpoint)."""
        return self.chunk_size if self.header is not None else None

    def bind(
        self, fingerprint: str, network: str, chunk_size: int, num_chunks: int, make_value
    ) -> None:
        """Bind to the run; restore its finished chunks if the file belongs to it.

        Parameters
        ----------
        fingerprint : str
            From :func:`run_fingerprint`.
        network : str
            The network's fingerprint (kept in the header, to find its plan).
        chunk_size : int
            Slices per chunk of the run.
        num_chunks : int
            Chunks of the run.
        make_value : callable
            ``make_value(mantissa, exponent)`` rebuilds a chunk value;
            ``value.mantissa`` and ``value.exponent`` are what is stored.

        Raises
        ------
        CheckpointError
            If the file belongs to another run.
        """
        self.fingerprint, self.network, self.chunk_size = fingerprint, network, chunk_size
        self.make_value = make_value
        self.sums = OrderedSum(num_chunks)
        header = self.header
        if header is None:
            return
        if header.get("fingerprint") != fingerprint:
            raise self._fail(
                "belongs to a different circuit, query or plan (its fingerprint "
                f"{str(header.get('fingerprint'))[:12]} differs from this run's {fingerprint[:12]})"
            )
        try:
            self._restore(header, self.arrays["prefix"], self.arrays["pending"])
        except (KeyError, TypeError, ValueError, OverflowError) as exc:
            raise self._fail(f"is corrupt ({str(exc)[:80]})") from None

    def _restore(self, header: dict, prefix: np.ndarray, pending: np.ndarray) -> None:
        n, count = _int(header["num_chunks"]), _int(header["prefix_count"])
        idx, exps = list(header["pending"]), list(header["pending_exponents"])
        if n != self.sums.num_chunks or not 0 <= count <= n or len(idx) != len(exps):
            raise ValueError("chunk counts are inconsistent")
        if len(pending) != len(idx) or any(not count < _int(i) < n for i in idx):
            raise ValueError("pending chunks are inconsistent")
        if len(set(idx)) != len(idx):
            raise ValueError("a pending chunk is listed twice")
        shape, dtype = tuple(header["shape"]), np.dtype(str(header["dtype"]))
        if count and (prefix.shape != shape or prefix.dtype != dtype):
            raise ValueError("the prefix sum has the wrong shape or dtype")
        if len(idx) and (pending.shape[1:] != shape or pending.dtype != dtype):
            raise ValueError("the pending chunks have the wrong shape or dtype")
        if count:
            self.sums.prefix = self.make_value(prefix, _int(header["prefix_exponent"]))
        self.sums.prefix_count = count
        for i, m, e in zip(idx, pending, exps):
            self.sums.pending[_int(i)] = self.make_value(m, _int(e))

    def add(self, index: int, value) -> None:
        """Record a finished chunk and rewrite the file atomically."""
        self.sums.add(index, value)
        self.save()

    def save(self) -> None:
        """Write the current state to the file (temporary file, fsync, then rename)."""
        sums = self.sums
        order = sorted(sums.pending)
        some = sums.prefix if sums.prefix is not None else next(iter(sums.pending.values()), None)
        if some is None:
            return
        proto = np.asarray(some.mantissa)
        empty = np.zeros((0,), proto.dtype)
        prefix = np.asarray(sums.prefix.mantissa, order="C") if sums.prefix is not None else empty
        pending = np.zeros((0, *proto.shape), proto.dtype)
        if order:
            pending = np.stack([np.asarray(sums.pending[i].mantissa) for i in order])
        header = {
            "format": _FORMAT,
            "version": _VERSION,
            "fingerprint": self.fingerprint,
            "network": self.network,
            "chunk_size": int(self.chunk_size),
            "num_chunks": sums.num_chunks,
            "prefix_count": sums.prefix_count,
            "prefix_exponent": int(sums.prefix.exponent) if sums.prefix is not None else 0,
            "pending": order,
            "pending_exponents": [int(sums.pending[i].exponent) for i in order],
            "dtype": proto.dtype.str,
            "shape": list(proto.shape),
        }
        header["digest"] = _digest(header, prefix, pending)
        blob = np.frombuffer(json.dumps(header).encode("utf-8"), dtype=np.uint8)
        write_atomic(
            self.path,
            lambda fh: np.savez(fh, header=blob, prefix=prefix, pending=pending),
            prefix=_temp_prefix(self.path),
            durable=True,
        )


def _unbound(mantissa: np.ndarray, exponent: int) -> Any:
    raise RuntimeError("bind() the checkpoint to its run before restoring chunks")


def _int(value) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise TypeError(f"{str(value)[:20]!r} is not an integer")
    return value


def _temp_prefix(path: str) -> str:
    return f".tnsim-ckpt-{os.path.basename(path)}-"


def remove_stale_temporaries(path: str) -> int:
    """Remove the temporary files a killed run left next to checkpoint ``path``; return how many.

    Call only while holding the checkpoint's lock (no live run writes them then).
    """
    folder = os.path.dirname(os.path.abspath(path))
    prefix = _temp_prefix(path)
    removed = 0
    for name in os.listdir(folder):
        if name.startswith(prefix):
            try:
                os.unlink(os.path.join(folder, name))
                removed += 1
            except OSError:
                pass
    return removed


class _Opened:
    """``Checkpoint.open``: the lock, the cleaning, then the file."""

    def __init__(self, path: str, fresh: str | None):
        self.path, self.fresh = path, fresh
        self._lock: contextlib.AbstractContextManager[None] = contextlib.nullcontext()

    def __enter__(self) -> Checkpoint:
        folder = os.path.dirname(os.path.abspath(self.path))
        if not os.path.isdir(folder):
            raise CheckpointError(
                f"checkpoint {self.path!r}: folder {folder!r} does not exist or is not a folder"
            )
        lock = os.path.join(folder, "." + os.path.basename(self.path) + ".lock")
        self._lock = hold_lock(lock, f"checkpoint {self.path!r}")
        self._lock.__enter__()
        try:
            remove_stale_temporaries(self.path)
            return Checkpoint(self.path, self.fresh)
        except BaseException:
            self._lock.__exit__(None, None, None)
            raise

    def __exit__(self, *exc) -> None:
        self._lock.__exit__(*exc)
