"""Jobs and results kept in an embedded SQLite database, so a crash loses nothing.

One table holds every job: its id (128 random bits, hex), submission order,
state (``queued``, ``running``, ``done``, ``failed``, ``cancelled``), the job
document, the result document and timestamps.  The database runs in
write-ahead-log mode: a committed change survives a crash of the process
(``kill -9``) at any moment; with ``fsync=True`` submissions are also flushed to
the disk before they are acknowledged, so they survive a power loss (results
and state changes need not be: a job whose result was lost runs again).  When
a server starts, jobs left ``running`` by a crash go back to the queue
(:meth:`JobStore.requeue_running`) in their original order.
"""

from __future__ import annotations

import json
import secrets
import sqlite3
import threading
import time
from dataclasses import dataclass

__all__ = ["FINISHED", "JobRecord", "JobStore"]

FINISHED = ("done", "failed", "cancelled")
"""States of a job whose result is final."""

_SCHEMA = """
CREATE TABLE IF NOT EXISTS jobs (
    id TEXT PRIMARY KEY,
    seq INTEGER NOT NULL,
    state TEXT NOT NULL,
    document TEXT NOT NULL,
    result TEXT,
    submitted REAL NOT NULL,
    started REAL,
    finished REAL,
    attempts INTEGER NOT NULL DEFAULT 0
);
CREATE INDEX IF NOT EXISTS jobs_state_seq ON jobs (state, seq);
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
"""
_FORMAT = "tnsim-jobs-1"


@dataclass(frozen=True)
class JobRecord:
    """One row of the job table (the document and result as JSON text)."""

    id: str
    seq: int
    state: str
    document: str
    result: str | None
    submitted: float
    started: float | None
    finished: float | None
    attempts: int


class JobStore:
    """The job table of one state folder; every method is safe to call from any thread.

    Parameters
    ----------
    path : str
        The database file (created if missing).
    fsync : bool
        Flush each submission to the disk before acknowledging it.

    Examples
    --------
    >>> store = JobStore(":memory:")
    >>> job_id = store.submit('{"version": 1}')
    >>> store.claim_next().id == job_id, store.get(job_id).state
    (True, 'running')
    >>> store.finish(job_id, "done", '{"status": "done"}')
    True
    >>> store.get(job_id).result
    '{"status": "done"}'
    """

    def __init__(self, path: str, *, fsync: bool = False):
        self.fsync = fsync
        self._lock = threading.Lock()
        self._db = sqlite3.connect(path, isolation_level=None, check_same_thread=False)
        self._db.execute("PRAGMA journal_mode=WAL")
        self._db.execute("PRAGMA synchronous=NORMAL")
        self._db.executescript(_SCHEMA)
        row = self._db.execute("SELECT value FROM meta WHERE key = 'format'").fetchone()
        if row is None:
            self._db.execute("INSERT INTO meta VALUES ('format', ?)", (_FORMAT,))
        elif row[0] != _FORMAT:
            raise ValueError(f"the job database {path!r} has format {row[0]!r}, not {_FORMAT!r}")

    def close(self) -> None:
        """Close the database."""
        with self._lock:
            self._db.close()

    def _write(self, sql: str, args: tuple = (), *, durable: bool = False):
        with self._lock:
            if durable:
                self._db.execute("PRAGMA synchronous=FULL")
            try:
                self._db.execute("BEGIN IMMEDIATE")
                try:
                    cursor = self._db.execute(sql, args)
                    self._db.execute("COMMIT")
                except BaseException:
                    self._db.execute("ROLLBACK")
                    raise
            finally:
                if durable:
                    self._db.execute("PRAGMA synchronous=NORMAL")
            return cursor

    def submit(self, document: str) -> str:
        """Queue a job document (JSON text); return its new id."""
        job_id = secrets.token_hex(16)
        self._write(
            "INSERT INTO jobs (id, seq, state, document, submitted) VALUES "
            "(?, (SELECT COALESCE(MAX(seq), 0) + 1 FROM jobs), 'queued', ?, ?)",
            (job_id, document, time.time()),
            durable=self.fsync,
        )
        return job_id

    def claim_next(self) -> JobRecord | None:
        """Mark the oldest queued job running and return it (``None`` if none is queued)."""
        with self._lock:
            self._db.execute("BEGIN IMMEDIATE")
            try:
                row = self._db.execute(
                    "SELECT id FROM jobs WHERE state = 'queued' ORDER BY seq LIMIT 1"
                ).fetchone()
                if row is not None:
                    self._db.execute(
                        "UPDATE jobs SET state = 'running', started = ?, attempts = attempts + 1 "
                        "WHERE id = ?",
                        (time.time(), row[0]),
                    )
                self._db.execute("COMMIT")
            except BaseException:
                self._db.execute("ROLLBACK")
                raise
        return None if row is None else self.get(row[0])

    def finish(self, job_id: str, state: str, result: str, *, only_queued: bool = False) -> bool:
        """Record a job's final state and result; ``False`` if it had already finished.

        With ``only_queued``, only a job still waiting in the queue is finished.
        """
        states = "('queued')" if only_queued else "('queued', 'running')"
        cursor = self._write(
            "UPDATE jobs SET state = ?, result = ?, finished = ? "
            f"WHERE id = ? AND state IN {states}",
            (state, result, time.time(), job_id),
        )
        return cursor.rowcount == 1

    def requeue(self, job_id: str) -> None:
        """Put a running job back in the queue (it keeps its place)."""
        self._write(
            "UPDATE jobs SET state = 'queued' WHERE id = ? AND state = 'running'", (job_id,)
        )

    def requeue_running(self) -> list[str]:
        """Put every job left running (by a crash) back in the queue; return their ids."""
        with self._lock:
            ids = [r[0] for r in self._db.execute("SELECT id FROM jobs WHERE state = 'running'")]
        for job_id in ids:
            self.requeue(job_id)
        return ids

    def get(self, job_id: str) -> JobRecord | None:
        """The job with this id, or ``None``."""
        with self._lock:
            row = self._db.execute(
                "SELECT id, seq, state, document, result, submitted, started, finished, "
                "attempts FROM jobs WHERE id = ?",
                (job_id,),
            ).fetchone()
        return None if row is None else JobRecord(*row)

    def count(self, state: str) -> int:
        """Number of jobs in ``state``."""
        with self._lock:
            return self._db.execute(
                "SELECT COUNT(*) FROM jobs WHERE state = ?", (state,)
            ).fetchone()[0]

    def position(self, job_id: str) -> int | None:
        """How many queued jobs come before this queued job (``None`` if it is not queued)."""
        with self._lock:
            row = self._db.execute(
                "SELECT COUNT(*) FROM jobs WHERE state = 'queued' AND seq < "
                "(SELECT seq FROM jobs WHERE id = ? AND state = 'queued')",
                (job_id,),
            ).fetchone()
            queued = self._db.execute(
                "SELECT 1 FROM jobs WHERE id = ? AND state = 'queued'", (job_id,)
            ).fetchone()
        return None if queued is None else row[0]


def dumps(document) -> str:
    """Strict JSON text for the database."""
    return json.dumps(document, allow_nan=False, separators=(",", ":"))
