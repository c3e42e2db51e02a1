"""Progress of long contractions: a tqdm bar on stderr.

The bar counts slices done and shows the FLOP rate (real floating-point
operations per second, complex multiply-add = 8) and the time left.  By
default (``progress=None``) it appears only when stderr is a terminal and the
work is large, so scripts, tests and ``--json`` output never see it.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable

__all__ = ["AUTO_FLOPS", "SliceProgress", "wants_bar"]

#: Total FLOPs above which the automatic setting shows a bar.
AUTO_FLOPS = 1e10


def wants_bar(progress: bool | Callable | None, total_flops: float) -> bool:
    """Whether a bar should be shown for ``progress`` (``None``: automatic).

    Examples
    --------
    >>> wants_bar(False, 1e15), wants_bar(True, 0.0)
    (False, True)
    """
    if progress is None:
        return total_flops >= AUTO_FLOPS and sys.stderr.isatty()
    return progress is True


class SliceProgress:
    """Reports finished chunks to a bar and/or a callback.

    Parameters
    ----------
    progress : bool, None or callable
        ``True``/``False``/``None`` (automatic) for the bar; a callable is called as
        ``progress(chunks_done, num_chunks)`` after every chunk instead.
    num_slices, num_chunks : int
        Totals of the run.
    slice_flops : float
        FLOPs of one slice.
    done_slices, done_chunks : int
        Already finished (from a checkpoint).
    """

    def __init__(
        self,
        progress: bool | Callable | None,
        num_slices: int,
        num_chunks: int,
        slice_flops: float,
        done_slices: int = 0,
        done_chunks: int = 0,
    ):
        self.callback = progress if callable(progress) else None
        self.num_chunks, self.done_chunks = num_chunks, done_chunks
        self.slice_flops = slice_flops
        self.new_slices = 0
        self.start = time.perf_counter()
        self.bar = None
        if self.callback is None and wants_bar(progress, slice_flops * num_slices):
            from tqdm import tqdm

            self.bar = tqdm(
                total=num_slices, initial=done_slices, unit="slice", file=sys.stderr, leave=True
            )

    def advance(self, slices: int) -> None:
        """Record one finished chunk of ``slices`` slices."""
        self.done_chunks += 1
        self.new_slices += slices
        if self.callback is not None:
            self.callback(self.done_chunks, self.num_chunks)
        if self.bar is not None:
            elapsed = max(time.perf_counter() - self.start, 1e-9)
            rate = self.new_slices * self.slice_flops / elapsed
            self.bar.set_postfix_str(f"{rate / 1e9:.3g} GFLOP/s", refresh=False)
            self.bar.update(slices)

    def close(self) -> None:
        """Remove the bar."""
        if self.bar is not None:
            self.bar.close()
