"""The installed version of tnsim, from the package metadata, looked up once on first use."""

from __future__ import annotations

from functools import cache

__all__ = ["tnsim_version"]


@cache
def tnsim_version() -> str:
    """The installed package's version (``"0+unknown"`` in a never-installed source tree).

    Examples
    --------
    >>> isinstance(tnsim_version(), str)
    True
    """
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("tnsim")
    except PackageNotFoundError:
        return "0+unknown"
