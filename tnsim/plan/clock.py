"""Planning time: one clock, deadlines, and an account of where the time went.

Every planning stage reads the time through :func:`now` (tests fast-forward it)
and stops starting new work once its :class:`Deadline` has passed, so a time
budget is a promise: the whole of planning ends within it, up to the length of
one step of work.  :class:`TimeLog` adds up the seconds spent per stage
(search, slicing, re-planning) for the plan's report.
"""

from __future__ import annotations

import math
import time

__all__ = ["Deadline", "TimeLog", "now"]


def now() -> float:
    """Seconds on a monotonic clock (``time.perf_counter``)."""
    return time.perf_counter()


class Deadline:
    """A point in time to finish by (``None`` seconds: no deadline).

    Examples
    --------
    >>> d = Deadline(None)
    >>> d.left(), d.passed()
    (inf, False)
    >>> Deadline(0.0).passed()
    True
    """

    def __init__(self, seconds: float | None, *, start: float | None = None):
        begin = now() if start is None else start
        self.end = math.inf if seconds is None else begin + max(0.0, float(seconds))

    @property
    def timed(self) -> bool:
        """Whether there is a deadline at all."""
        return self.end != math.inf

    def left(self) -> float:
        """Seconds left (``inf`` without a deadline, never negative)."""
        return max(0.0, self.end - now()) if self.timed else math.inf

    def passed(self) -> bool:
        """Whether the deadline has passed."""
        return self.timed and now() >= self.end

    def part(self, fraction: float) -> Deadline:
        """A deadline ``fraction`` of the time left from now (never past this one)."""
        sub = Deadline(None)
        if self.timed:
            sub.end = now() + fraction * self.left()
        return sub

    def seconds(self) -> float | None:
        """Seconds left, or ``None`` without a deadline (for functions taking a budget)."""
        return self.left() if self.timed else None


class TimeLog:
    """Seconds spent per planning stage, in the order the stages first ran.

    Examples
    --------
    >>> log = TimeLog()
    >>> with log.stage("search"):
    ...     pass
    >>> [name for name, _ in log.items()]
    ['search']
    """

    def __init__(self):
        self._spent: dict[str, float] = {}

    def add(self, name: str, seconds: float) -> None:
        """Count ``seconds`` more for stage ``name``."""
        self._spent[name] = self._spent.get(name, 0.0) + seconds

    def stage(self, name: str) -> _Stage:
        """A ``with`` block whose wall time counts for stage ``name``."""
        return _Stage(self, name)

    def items(self) -> tuple[tuple[str, float], ...]:
        """``(stage, seconds)`` pairs."""
        return tuple(self._spent.items())


class _Stage:
    def __init__(self, log: TimeLog, name: str):
        self.log, self.name = log, name

    def __enter__(self) -> _Stage:
        self.began = now()
        return self

    def __exit__(self, *exc) -> None:
        self.log.add(self.name, now() - self.began)
