"""Writing files so that a failure loses nothing and clobbers nothing: the one write helper.

:func:`write_atomic` is how tnsim writes every file (command output,
checkpoints, saved plans, cached measurements, plots, CSV and JSON):

* a regular file (new or existing) gets its new contents in a temporary file
  in the same folder, which is then renamed over it, so a reader sees the old
  file or the new one, never a partial one; a failed write (full disk, I/O
  error, no permission) leaves the old file as it was and no temporary file;
* a symbolic link is followed: the file it points to is replaced, the link
  stays a link (as the shell's ``>`` would do);
* a device (``/dev/null``, ``/dev/stdout``), a FIFO or a socket is written
  directly, never replaced by a regular file;
* a read-only file is refused, not replaced;
* a new file gets the permissions the umask gives (``0o666 & ~umask``); a
  replaced file keeps its own.

A failed write raises :class:`~tnsim.errors.OutputError` (or
:class:`~tnsim.errors.InputError` where the path itself is the mistake: a
folder, a read-only file, a missing folder), one line naming the path.
"""

from __future__ import annotations

import contextlib
import os
import stat
import sys
import tempfile
from collections.abc import Callable
from typing import IO

from tnsim.errors import InputError, OutputError

__all__ = ["current_umask", "write_atomic"]


def current_umask() -> int:
    """Return the process's umask without changing it for longer than a moment.

    Read from ``/proc/self/status`` where Linux offers it (no change at all).

    Examples
    --------
    >>> 0 <= current_umask() <= 0o777
    True
    """
    with contextlib.suppress(OSError, ValueError), open("/proc/self/status", "rb") as fh:
        for line in fh:
            if line.startswith(b"Umask:"):
                return int(line.split()[1], 8)
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _describe(exc: OSError) -> str:
    return exc.strerror or type(exc).__name__


def _target(path: str) -> tuple[str, os.stat_result | None]:
    """The file ``path`` names once symbolic links are followed, and its status (or None)."""
    real = os.path.realpath(path)
    try:
        return real, os.stat(real)
    except FileNotFoundError:
        return real, None
    except OSError as exc:
        raise InputError(f"cannot write {path!r}: {_describe(exc)}") from None


def _writable(st: os.stat_result, real: str) -> bool:
    """Whether a file's mode and this user's access allow writing (root included)."""
    return bool(st.st_mode & 0o222) and os.access(real, os.W_OK)


def _check_target(path: str, real: str, st: os.stat_result | None) -> None:
    if st is None:
        folder = os.path.dirname(real) or "."
        if not os.path.isdir(folder):
            raise InputError(
                f"cannot write {path!r}: folder {folder!r} does not exist; create it first"
            )
        return
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"cannot write {path!r}: it is a folder; give a file name")
    if stat.S_ISREG(st.st_mode) and not _writable(st, real):
        raise InputError(
            f"cannot write {path!r}: the file is read-only; it was left as it is "
            "(make it writable or give another name)"
        )


def _write_data(fh: IO, data: str | bytes | Callable[[IO], None]) -> None:
    if callable(data):
        data(fh)
    else:
        fh.write(data.encode("utf-8") if isinstance(data, str) else data)


def write_atomic(
    path: str | os.PathLike,
    data: str | bytes | Callable[[IO], None],
    *,
    prefix: str = ".tnsim-",
    durable: bool = False,
) -> None:
    """Write ``data`` to ``path``: through a temporary file and a rename for regular files.

    Parameters
    ----------
    path : path
        The file to create or replace; ``"-"`` is standard output.  Symbolic
        links are written through; devices and FIFOs are written directly.
    data : str, bytes or callable
        Text (UTF-8), bytes, or a function that writes to the open binary file.
    prefix : str
        Name prefix of the temporary file.
    durable : bool
        Flush the new file to the disk (``fsync``) before the rename, so a
        crash of the machine cannot leave an empty file in its place.

    Raises
    ------
    InputError
        If ``path`` is a folder, a read-only file, or in a folder that does not exist.
    OutputError
        If writing fails (full disk, I/O error, no permission); a regular
        file is then left as it was and no temporary file remains.

    Examples
    --------
    >>> import os, tempfile
    >>> folder = tempfile.mkdtemp()
    >>> write_atomic(os.path.join(folder, "a.txt"), "hello")
    >>> open(os.path.join(folder, "a.txt")).read()
    'hello'
    """
    path = os.fspath(path)
    if path == "-":
        _write_stream(path, data)
        return
    real, st = _target(path)
    _check_target(path, real, st)
    if st is not None and not stat.S_ISREG(st.st_mode):
        _write_direct(path, real, data)
        return
    mode = stat.S_IMODE(st.st_mode) if st is not None else 0o666 & ~current_umask()
    try:
        fd, tmp = tempfile.mkstemp(prefix=prefix, dir=os.path.dirname(real) or ".")
    except OSError as exc:
        raise OutputError(f"cannot write {path!r}: {_describe(exc)}") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            _write_data(fh, data)
            fh.flush()
            if durable:
                os.fsync(fh.fileno())
            os.fchmod(fh.fileno(), mode)
        os.replace(tmp, real)
    except OSError as exc:
        _remove_quietly(tmp)
        raise OutputError(
            f"cannot write {path!r}: {_describe(exc)}; nothing was changed there"
        ) from None
    except BaseException:
        _remove_quietly(tmp)
        raise


def _remove_quietly(path: str) -> None:
    with contextlib.suppress(OSError):
        os.unlink(path)


def _write_direct(path: str, real: str, data) -> None:
    """Write to a device, FIFO or socket as it is (no temporary file, no rename)."""
    try:
        with open(real, "wb") as fh:
            _write_data(fh, data)
    except OSError as exc:
        raise OutputError(f"cannot write {path!r}: {_describe(exc)}") from None


def _write_stream(path: str, data) -> None:
    """Write to standard output (``-``): text through ``sys.stdout``, bytes to its buffer."""
    sys.stdout.flush()
    out = getattr(sys.stdout, "buffer", None)
    if out is None:  # a text-only stream (tests capturing output)
        text = data if isinstance(data, str) else None
        if text is None:
            raise OutputError("cannot write binary data to this standard output")
        sys.stdout.write(text)
        return
    _write_data(out, data)
    out.flush()
