"""The service's bounded pool of job workers: claim, run, checkpoint, report, cancel.

Each worker thread claims the oldest queued job from the
:class:`~tnsim.service.store.JobStore`, runs it with
:func:`~tnsim.service.jobs.run_prepared` (contractions checkpointed in
``<state>/checkpoints/<job id>/``, so a job interrupted by a crash resumes from
its finished slices when it runs again) and records the result.  A
:class:`JobWatch` per running job publishes its progress (query, chunks of
slices done, contractions done, a forecast of the running contraction's
seconds left) and stops it at the next chunk when it is cancelled or the
service stops; a job stopped by a stopping service goes back to the queue.
"""

from __future__ import annotations

import json
import shutil
import sys
import threading
import time
import traceback
from pathlib import Path
from typing import Any

from tnsim.service.jobs import (
    JobStopped,
    Limits,
    Monitor,
    Prepared,
    prepare,
    result_document,
    run_prepared,
)
from tnsim.service.store import FINISHED, JobStore, dumps
from tnsim.version import tnsim_version

__all__ = ["JobWatch", "WorkerPool", "cancelled_result"]


def cancelled_result(document: dict | None = None) -> dict:
    """The result document of a job cancelled before it ran."""
    queries = (document or {}).get("queries", [])
    answers = [
        {"kind": q.get("kind", "?"), "status": "not run", "seconds": 0.0, "contractions": []}
        for q in queries
        if isinstance(q, dict)
    ]
    return {
        "version": 1,
        "tnsim_version": tnsim_version(),
        "status": "cancelled",
        "errors": [],
        "answers": answers,
        "seconds": 0.0,
    }


class JobWatch(Monitor):
    """Progress and stop requests of one running job (read by the status endpoint)."""

    def __init__(self, pool: WorkerPool, job_id: str, num_queries: int):
        super().__init__()
        self.pool, self.job_id = pool, job_id
        self.cancelled = threading.Event()
        self.lock = threading.Lock()
        self.began = time.monotonic()
        self.mark = self.began
        self.figures: dict[str, Any] = {
            "query": 0,
            "queries": num_queries,
            "contractions_done": 0,
            "slices_done": 0,
            "chunks_done": 0,
            "chunks_total": None,
        }
        self.first_done: int | None = None
        self.started_at = self.began

    def check(self) -> None:
        """Stop at a cancel request or a stopping service, else check the time budget."""
        if self.cancelled.is_set():
            raise JobStopped("the job was cancelled", "cancelled")
        if self.pool.stopping.is_set():
            raise JobStopped("the server is stopping; the job will run again", "shutdown")
        super().check()

    def query_started(self, index: int) -> None:
        """Record the query now running."""
        with self.lock:
            self.figures.update(query=index, chunks_done=0, chunks_total=None)
            self.first_done, self.mark = None, time.monotonic()

    def progress(self, index: int, chunks_done: int, num_chunks: int) -> None:
        """Record a finished chunk of the running contraction."""
        with self.lock:
            if self.first_done is None:
                self.first_done, self.started_at = chunks_done, self.mark
            self.figures.update(chunks_done=chunks_done, chunks_total=num_chunks)

    def contraction_done(self, index: int, record) -> None:
        """Record a finished contraction."""
        with self.lock:
            self.figures["contractions_done"] += 1
            self.figures["slices_done"] += record.slices_run
            self.figures.update(chunks_done=0, chunks_total=None)
            self.first_done, self.mark = None, time.monotonic()

    def snapshot(self) -> dict:
        """The published progress figures."""
        now = time.monotonic()
        with self.lock:
            out = dict(self.figures)
            left: float | None = None
            total, done, first = out["chunks_total"], out["chunks_done"], self.first_done
            if total is not None and first is not None and done - first + 1 > 0:
                left = (now - self.started_at) / (done - first + 1) * (total - done)
        out["seconds_elapsed"] = now - self.began
        out["contraction_seconds_left"] = left
        return out


class WorkerPool:
    """``size`` threads running queued jobs of ``store`` one at a time each.

    Parameters
    ----------
    store : JobStore
        Where jobs are claimed and results written.
    limits : Limits
        What jobs may ask for, and where their slices run.
    checkpoints : Path
        Folder of the jobs' checkpoint folders.
    size : int
        Jobs run at once.
    """

    def __init__(self, store: JobStore, limits: Limits, checkpoints: Path, size: int):
        self.store, self.limits, self.checkpoints, self.size = store, limits, checkpoints, size
        self.stopping = threading.Event()
        self.wakeup = threading.Condition()
        self.finished = threading.Condition()
        self.running: dict[str, JobWatch] = {}
        self.prepared: dict[str, Prepared] = {}
        self.cancel_requests: set[str] = set()
        self.lock = threading.Lock()
        self.threads: list[threading.Thread] = []

    def start(self) -> None:
        """Start the worker threads."""
        for k in range(self.size):
            thread = threading.Thread(target=self._loop, name=f"tnsim-job-{k}", daemon=True)
            thread.start()
            self.threads.append(thread)

    def wake(self) -> None:
        """Tell the workers a job was queued."""
        with self.wakeup:
            self.wakeup.notify()

    def stop(self, timeout: float = 10.0) -> None:
        """Stop the workers: running jobs stop at their next chunk and go back to the queue."""
        self.stopping.set()
        with self.wakeup:
            self.wakeup.notify_all()
        deadline = time.monotonic() + timeout
        for thread in self.threads:
            thread.join(max(0.0, deadline - time.monotonic()))

    def cancel(self, job_id: str) -> str | None:
        """Cancel a job; return what became of it.

        ``"cancelled"`` (it was queued), ``"cancelling"`` (it is running, and stops at
        its next chunk) or ``None`` (it had already finished).
        """
        with self.lock:
            watch = self.running.get(job_id)
            if watch is not None:
                watch.cancelled.set()
                return "cancelling"
            self.cancel_requests.add(job_id)
        record = self.store.get(job_id)
        document = json.loads(record.document) if record is not None else None
        if self.store.finish(
            job_id, "cancelled", dumps(cancelled_result(document)), only_queued=True
        ):
            with self.lock:
                self.cancel_requests.discard(job_id)
                self.prepared.pop(job_id, None)
            self._announce()
            return "cancelled"
        with self.lock:
            watch = self.running.get(job_id)
            if watch is not None:
                watch.cancelled.set()
                return "cancelling"
            self.cancel_requests.discard(job_id)
        return None

    def progress(self, job_id: str) -> dict | None:
        """Progress figures of a running job (``None`` if it is not running here)."""
        with self.lock:
            watch = self.running.get(job_id)
        return None if watch is None else watch.snapshot()

    def wait(self, job_id: str, seconds: float) -> None:
        """Wait up to ``seconds`` for a job to finish."""
        deadline = time.monotonic() + seconds
        with self.finished:
            while not self.stopping.is_set():
                record = self.store.get(job_id)
                left = deadline - time.monotonic()
                if record is None or record.state in FINISHED or left <= 0:
                    return
                self.finished.wait(min(left, 1.0))

    def _announce(self) -> None:
        with self.finished:
            self.finished.notify_all()

    def _loop(self) -> None:
        while not self.stopping.is_set():
            record = self.store.claim_next()
            if record is None:
                with self.wakeup:
                    self.wakeup.wait(1.0)
                continue
            try:
                self._run(record)
            except Exception:  # a bug must not kill the worker; the server log has it
                traceback.print_exc(file=sys.stderr)
                self.store.finish(record.id, "failed", dumps(_internal_error()))
            self._announce()

    def _run(self, record) -> None:
        document = json.loads(record.document)
        with self.lock:
            cached = self.prepared.pop(record.id, None)
        job = prepare(document, self.limits) if cached is None else cached
        if isinstance(job, list):  # e.g. the server restarted with smaller limits
            result = result_document("invalid", time.perf_counter(), errors=job)
            self.store.finish(record.id, "failed", dumps(result))
            return
        watch = JobWatch(self, record.id, len(job.queries))
        with self.lock:
            self.running[record.id] = watch
            if record.id in self.cancel_requests:
                self.cancel_requests.discard(record.id)
                watch.cancelled.set()
        folder = self.checkpoints / record.id
        try:
            result = run_prepared(job, checkpoint=str(folder), monitor=watch)
        except JobStopped:  # the service is stopping: run again after the restart
            self.store.requeue(record.id)
            return
        finally:
            with self.lock:
                self.running.pop(record.id, None)
        state = {"done": "done", "cancelled": "cancelled"}.get(result["status"], "failed")
        self.store.finish(record.id, state, dumps(result))
        shutil.rmtree(folder, ignore_errors=True)


def _internal_error() -> dict:
    return {
        "version": 1,
        "tnsim_version": tnsim_version(),
        "status": "failed",
        "errors": [{"path": "$", "message": "internal error; the server log has the details"}],
        "answers": [],
        "seconds": 0.0,
    }
