"""Keeping two runs out of one checkpoint: an exclusive lock on a lock file.

:func:`hold_lock` takes an advisory ``flock`` on a small file (``fcntl``, so
POSIX systems only; elsewhere runs are not kept apart) and writes who holds it
-- process id, host, command, start time -- so a second run is refused at
once with a message naming the first.  The operating system drops the lock
when its holder ends in any way (``kill -9`` included): there are no stale
locks to clean.  The lock is re-entrant within a process (a checkpoint folder
held by a ``run_options`` block, then by each contraction in it).
"""

from __future__ import annotations

import contextlib
import json
import os
import socket
import sys
import time
from collections.abc import Iterator

from tnsim.errors import CheckpointError
from tnsim.fileio import current_umask

try:
    import fcntl
except ImportError:  # pragma: no cover - not POSIX
    fcntl = None  # type: ignore[assignment]

__all__ = ["hold_lock"]

_HELD: dict[str, list] = {}  # real path -> [file descriptor, count], this process's locks


def _holder() -> str:
    info = {
        "pid": os.getpid(),
        "host": socket.gethostname(),
        "command": " ".join([os.path.basename(sys.argv[0] or "python"), *sys.argv[1:]])[:200],
        "since": time.strftime("%Y-%m-%d %H:%M:%S"),
    }
    return json.dumps(info)


def _describe_holder(path: str) -> str:
    try:
        with open(path, encoding="utf-8") as fh:
            info = json.loads(fh.read(4096))
        who = f"process {int(info['pid'])} on {str(info['host'])[:60]}"
        return f"{who} ({str(info['command'])[:80]}, since {str(info['since'])[:20]})"
    except (OSError, ValueError, KeyError, TypeError):
        return "another process"


def _acquire(path: str, what: str) -> int:
    mode = 0o666 & ~current_umask()
    while True:
        try:
            fd = os.open(path, os.O_RDWR | os.O_CREAT, mode)
        except OSError as exc:
            raise CheckpointError(f"cannot lock {what}: {exc.strerror} ({path!r})") from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise CheckpointError(
                f"{what} is in use by {_describe_holder(path)}; wait for that run to end "
                "or give another checkpoint"
            ) from None
        except OSError as exc:  # a file system without locks: run unguarded
            os.close(fd)
            if exc.errno in (37, 38, 95):  # ENOLCK, ENOSYS, EOPNOTSUPP
                return -1
            raise CheckpointError(f"cannot lock {what}: {exc.strerror}") from None
        try:  # the holder before us may have removed the file just before we locked it
            same = os.fstat(fd).st_ino == os.stat(path).st_ino
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)
    os.ftruncate(fd, 0)
    os.write(fd, _holder().encode())
    return fd


@contextlib.contextmanager
def hold_lock(path: str | os.PathLike, what: str) -> Iterator[None]:
    """Hold an exclusive lock on the file ``path`` for the ``with`` block.

    Parameters
    ----------
    path : path
        The lock file (created if missing, removed when the lock is let go).
    what : str
        What is locked, for the message (e.g. ``"checkpoint folder 'ck'"``).

    Raises
    ------
    CheckpointError
        At once, if another process holds the lock; the message names it.

    Examples
    --------
    >>> import os, tempfile
    >>> name = os.path.join(tempfile.mkdtemp(), ".lock")
    >>> with hold_lock(name, "a test folder"):
    ...     with hold_lock(name, "a test folder"):  # re-entrant in one process
    ...         os.path.exists(name)
    True
    >>> os.path.exists(name)
    False
    """
    if fcntl is None:  # pragma: no cover
        yield
        return
    real = os.path.realpath(path)
    entry = _HELD.get(real)
    if entry is not None and entry[2] == os.getpid():
        entry[1] += 1
    else:
        entry = _HELD[real] = [_acquire(real, what), 1, os.getpid()]
    try:
        yield
    finally:
        entry[1] -= 1
        if entry[1] == 0:
            del _HELD[real]
            if entry[0] >= 0:
                with contextlib.suppress(OSError):
                    os.unlink(real)
                os.close(entry[0])
