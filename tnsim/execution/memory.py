"""How much memory this machine has for contractions, and the default limit.

The default limit is half of the memory the operating system reports as
available (limits given as text are read by :func:`tnsim.units.parse_memory`).
"""

from __future__ import annotations

import os

__all__ = ["available_memory", "default_memory_limit"]


def available_memory() -> int:
    """Return the bytes of memory the operating system reports as available.

    Reads ``MemAvailable`` from ``/proc/meminfo`` (Linux); elsewhere falls back
    to free pages times page size from ``os.sysconf``, and to 4 GiB when
    neither is known.
    """
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (AttributeError, ValueError, OSError):
        return 4 * 1024**3


def default_memory_limit() -> int:
    """Return the default memory limit: half of :func:`available_memory`."""
    return max(1, available_memory() // 2)
