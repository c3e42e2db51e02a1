"""``tnsim serve``: a local HTTP service that answers job documents and loses no work.

A :class:`Service` owns a state folder::

    <state>/jobs.sqlite3        jobs and results (tnsim.service.store)
    <state>/checkpoints/<id>/   checkpoints of the running jobs' contractions
    <state>/server.json         where the running server listens (url, host, port, pid)
    <state>/server.lock         held while a server runs: one server per folder

and serves :class:`~tnsim.service.http.JobApp` with the ``waitress`` WSGI server
(the ``service`` extra).  On start, jobs that a crash left running go back to
the queue and resume from their checkpoints; finished results stay servable.
Safe defaults: the server binds ``127.0.0.1``; binding another address needs
a token (``token`` / ``--token-file``); request bodies are limited
(``max_body``); the limits cap what a job may ask for.
"""

from __future__ import annotations

import contextlib
import ipaddress
import json
import os
import signal
import sqlite3
import sys
import threading
import time
from pathlib import Path

from tnsim.errors import InputError
from tnsim.fileio import write_atomic
from tnsim.service.http import JobApp
from tnsim.service.jobs import Limits
from tnsim.service.schema import schema_errors
from tnsim.service.store import JobStore
from tnsim.service.workers import WorkerPool
from tnsim.version import tnsim_version

__all__ = [
    "DEFAULT_MAX_BODY",
    "Service",
    "is_loopback",
    "read_token",
    "serve",
    "wait_for_server",
]

DEFAULT_MAX_BODY = 16 * 1024 * 1024
"""Default limit on request bodies (bytes)."""


def is_loopback(host: str) -> bool:
    """Whether ``host`` names this machine only.

    Examples
    --------
    >>> is_loopback("127.0.0.1"), is_loopback("::1"), is_loopback("0.0.0.0")
    (True, True, False)
    """
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def read_token(path: str) -> str:
    """The token in a file (its first line, stripped), refused if empty or short."""
    try:
        with open(path, encoding="utf-8") as fh:
            token = fh.readline().strip()
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the token file {path!r}: {exc}") from None
    if len(token) < 16:
        raise InputError(f"the token in {path!r} is shorter than 16 characters; use a long one")
    return token


class _FolderLock:
    """An exclusive lock on ``<state>/server.lock`` (one server per state folder)."""

    def __init__(self, folder: Path):
        self.path = folder / "server.lock"
        self.fh = open(self.path, "a+")  # noqa: SIM115 - held open while the server runs
        try:
            import fcntl
        except ImportError:  # no advisory locks on this platform
            return
        try:
            fcntl.flock(self.fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            self.fh.seek(0)
            other = self.fh.read().strip() or "another process"
            self.fh.close()
            raise InputError(
                f"another tnsim serve ({other}) uses the state folder {str(folder)!r}; stop it "
                "or give another --state folder"
            ) from None
        self.fh.seek(0)
        self.fh.truncate()
        self.fh.write(f"pid {os.getpid()}\n")
        self.fh.flush()

    def release(self) -> None:
        """Let go of the lock."""
        self.fh.close()


class Service:
    """The job store, the worker pool and the settings of one running service.

    Parameters
    ----------
    state : path
        The state folder (created if missing).
    limits : Limits
        Caps on what jobs may ask for.
    jobs : int
        Jobs run at once (worker threads).
    queue_size : int
        Most jobs waiting in the queue; submissions beyond get 429.
    token : str, optional
        Required bearer token.
    max_body : int
        Largest request body (bytes).
    fsync : bool
        Flush each accepted submission to the disk before answering.
    """

    def __init__(
        self,
        state: str | os.PathLike,
        *,
        limits: Limits | None = None,
        jobs: int = 2,
        queue_size: int = 64,
        token: str | None = None,
        max_body: int = DEFAULT_MAX_BODY,
        fsync: bool = False,
    ):
        if jobs < 1 or queue_size < 1 or max_body < 1:
            raise InputError("--jobs, --queue and --max-body must be positive")
        self.folder = Path(state)
        try:
            (self.folder / "checkpoints").mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(f"cannot use the state folder {str(state)!r}: {exc}") from None
        self.lock = _FolderLock(self.folder)
        self.limits = limits or Limits()
        self.queue_size, self.token, self.max_body = queue_size, token, max_body
        try:
            self.store = JobStore(str(self.folder / "jobs.sqlite3"), fsync=fsync)
        except (sqlite3.Error, ValueError) as exc:
            self.lock.release()
            raise InputError(
                f"cannot open the job database in {str(state)!r}: {exc}; give another --state "
                "folder (or move the damaged jobs.sqlite3 away)"
            ) from None
        self.resumed = self.store.requeue_running()
        self.pool = WorkerPool(self.store, self.limits, self.folder / "checkpoints", jobs)
        self.admission = threading.Lock()
        self.app = JobApp(self)

    def start(self) -> None:
        """Load the schema validator, then start running queued jobs.

        Loading it now (not on the first job) keeps the first answer quick and the
        server's memory flat once it serves.
        """
        schema_errors({})
        self.pool.start()

    def close(self) -> None:
        """Stop the workers (running jobs go back to the queue) and close the store."""
        self.pool.stop()
        self.store.close()
        self.lock.release()

    def health(self) -> dict:
        """State of the service."""
        return {
            "status": "ok",
            "tnsim_version": tnsim_version(),
            "job_document_version": 1,
            "queued": self.store.count("queued"),
            "running": self.store.count("running"),
            "workers": self.pool.size,
            "queue_size": self.queue_size,
            "memory_limit": self.limits.memory_limit,
            "time_budget": self.limits.time_budget,
        }

    def status(self, record) -> dict:
        """The status document of a stored job."""
        out = {
            "id": record.id,
            "state": record.state,
            "submitted": record.submitted,
            "started": record.started,
            "finished": record.finished,
            "attempts": record.attempts,
        }
        if record.state == "queued":
            out["queue_position"] = self.store.position(record.id)
        elif record.state == "running":
            out["progress"] = self.pool.progress(record.id)
        return out


def serve(
    service: Service,
    host: str = "127.0.0.1",
    port: int = 8750,
    *,
    threads: int = 16,
    announce=None,
) -> None:
    """Serve ``service`` over HTTP until SIGINT or SIGTERM (or the process is killed).

    ``announce(url)`` is called once the socket listens (default: a line on stderr).
    Writes ``<state>/server.json`` with the address.
    """
    try:
        import waitress
    except ImportError:
        raise InputError(
            "tnsim serve needs the service extra: python -m pip install 'tnsim[service]'"
        ) from None
    if not is_loopback(host) and service.token is None:
        raise InputError(
            f"binding {host!r} exposes the service beyond this machine: give --token-file "
            "with a secret token (or bind 127.0.0.1)"
        )
    outer = max(4 * service.max_body + (1 << 20), service.max_body + 1)
    try:
        server = waitress.create_server(
            service.app,
            host=host,
            port=port,
            threads=threads,
            max_request_body_size=outer,
            channel_timeout=120,
            ident="tnsim",
        )
    except OSError as exc:
        raise InputError(f"cannot listen on {host}:{port}: {exc.strerror or exc}") from None
    bound_host = server.effective_host
    url_host = f"[{bound_host}]" if ":" in str(bound_host) else bound_host
    url = f"http://{url_host}:{server.effective_port}"
    info = {"url": url, "host": bound_host, "port": int(server.effective_port), "pid": os.getpid()}
    write_atomic(service.folder / "server.json", json.dumps(info) + "\n")
    service.start()
    (announce or _announce)(url, service)

    def stop(signum, frame):
        raise SystemExit(0)

    previous = signal.signal(signal.SIGTERM, stop)
    try:
        with contextlib.suppress(KeyboardInterrupt, SystemExit):
            server.run()
    finally:
        signal.signal(signal.SIGTERM, previous)
        server.close()
        service.close()


def _announce(url: str, service: Service) -> None:
    resumed = f", {len(service.resumed)} interrupted job(s) resumed" if service.resumed else ""
    print(
        f"tnsim serve: listening on {url} (state: {service.folder}{resumed})",
        file=sys.stderr,
        flush=True,
    )


def wait_for_server(folder: str | os.PathLike, pid: int, timeout: float = 30.0) -> dict:
    """Wait until the server of process ``pid`` on ``folder`` has written its address."""
    path = Path(folder) / "server.json"
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        with contextlib.suppress(OSError, ValueError):
            info = json.loads(path.read_text())
            if info.get("pid") == pid:
                return info
        time.sleep(0.05)
    raise TimeoutError(f"the server (pid {pid}) wrote no address in {folder} after {timeout} s")
