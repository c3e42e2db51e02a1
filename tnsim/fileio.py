"""Writing files so that a failure loses nothing: the one write helper of tnsim.

:func:`write_atomic` writes a new version of a regular file next to it and
renames it into place, so a reader sees the old file or the new one, never a
partial one.  Every file tnsim writes (command output, checkpoints, cached
measurements, plots) goes through it.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from typing import IO

from tnsim.errors import InputError

__all__ = ["write_atomic"]


def write_atomic(
    path: str | os.PathLike,
    data: str | bytes | Callable[[IO], None],
    *,
    prefix: str = ".tnsim-",
    durable: bool = False,
) -> None:
    """Write ``data`` to ``path`` through a temporary file and a rename.

    Parameters
    ----------
    path : path
        The file to create or replace.
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
        If the folder cannot hold a new file; a failed write leaves no partial
        file behind.
    """
    path = os.fspath(path)
    directory = os.path.dirname(os.path.abspath(path))
    try:
        fd, tmp = tempfile.mkstemp(prefix=prefix, dir=directory)
    except OSError as exc:
        raise InputError(f"cannot write {path!r}: {exc.strerror}") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            if callable(data):
                data(fh)
            else:
                fh.write(data.encode("utf-8") if isinstance(data, str) else data)
            if durable:
                fh.flush()
                os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        os.unlink(tmp)
        raise
