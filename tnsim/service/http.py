"""The HTTP interface of ``tnsim serve``: a WSGI application answering JSON.

Routes (every request and answer body is JSON; every refusal is
``{"error": {"status": ..., "message": ...}}``, never a stack trace):

``POST /v1/jobs``
    Submit a job document: ``202 {"id", "state": "queued"}`` at once; ``400``
    for invalid JSON or an invalid document (``error.errors`` lists each
    problem with its JSON path); ``413`` for a body over the size limit; ``429``
    when the queue is full (retry later).
``GET /v1/jobs/{id}``
    State and progress: ``queue_position`` while queued; while running, the
    query running, contractions and slices done, chunks of slices done of the
    running contraction and a forecast of its seconds left.
``GET /v1/jobs/{id}/result?wait=S``
    The result document once the job has finished (``200``); before that
    ``202`` with the state, after waiting up to ``S`` seconds (at most 60) for
    it to finish.
``DELETE /v1/jobs/{id}``
    Cancel: a queued job at once, a running one at its next chunk of slices;
    ``409`` if it had finished.
``GET /v1/health``, ``GET /v1/schemas/job``, ``GET /v1/schemas/result``
    The service's state and versions; the JSON Schemas of the documents.

With a token set, every request must carry ``Authorization: Bearer TOKEN``
(compared in constant time, :func:`hmac.compare_digest`), else ``401``.
"""

from __future__ import annotations

import hmac
import json
import re
import sys
import traceback
from collections.abc import Callable, Iterable
from http import HTTPStatus
from typing import Any
from urllib.parse import parse_qs

from tnsim.service.jobs import prepare
from tnsim.service.schema import job_schema, result_schema
from tnsim.service.store import FINISHED, dumps

__all__ = ["MAX_WAIT", "HttpError", "JobApp"]

MAX_WAIT = 60.0
"""Longest ``wait`` (seconds) one result request may block."""

_ID = re.compile(r"^[0-9a-f]{32}$")
_ROUTE = re.compile(r"^/v1/jobs/([^/]+)(/result)?/?$")


class HttpError(Exception):
    """A refusal: HTTP status, message, and extra fields of the error object."""

    def __init__(self, status: int, message: str, **extra):
        super().__init__(message)
        self.status, self.message, self.extra = status, message, extra
        self.headers: list[tuple[str, str]] = []


def _reject_constant(name: str):
    raise ValueError(f"{name} is not a JSON number")


class JobApp:
    """The WSGI application of a :class:`~tnsim.service.server.Service` (``service``).

    It uses the service's ``store``, ``pool``, ``limits``, ``token``, ``max_body``,
    ``queue_size``, ``admission`` lock, ``health()`` and ``status(record)``.
    """

    def __init__(self, service: Any):
        self.service = service

    def __call__(self, environ: dict, start_response: Callable) -> Iterable[bytes]:
        """Answer one request (the WSGI protocol, PEP 3333)."""
        headers: list[tuple[str, str]] = []
        try:
            self.authorize(environ)
            status, body = self.route(environ)
        except HttpError as exc:
            status = exc.status
            body = {"error": {"status": exc.status, "message": exc.message, **exc.extra}}
            headers += exc.headers
        except Exception:  # never a stack trace to the client; the server log has it
            traceback.print_exc(file=sys.stderr)
            status = 500
            body = {"error": {"status": 500, "message": "internal error; see the server log"}}
        data = (dumps(body) + "\n").encode("utf-8")
        phrase = HTTPStatus(status).phrase
        headers += [
            ("Content-Type", "application/json; charset=utf-8"),
            ("Content-Length", str(len(data))),
            ("Cache-Control", "no-store"),
        ]
        start_response(f"{status} {phrase}", headers)
        return [data]

    def authorize(self, environ: dict) -> None:
        """Refuse a request without the right token (when the service has one)."""
        token = self.service.token
        if token is None:
            return
        given = environ.get("HTTP_AUTHORIZATION", "")
        scheme, _, value = given.partition(" ")
        ok = hmac.compare_digest(value.strip().encode(), token.encode())
        if scheme.lower() != "bearer" or not ok:
            error = HttpError(401, "missing or wrong token: send 'Authorization: Bearer TOKEN'")
            error.headers.append(("WWW-Authenticate", 'Bearer realm="tnsim"'))
            raise error

    def route(self, environ: dict) -> tuple[int, dict]:
        """Dispatch one request; return the status and the body."""
        method, path = environ.get("REQUEST_METHOD", "GET"), environ.get("PATH_INFO", "/")
        if path in ("/v1/jobs", "/v1/jobs/"):
            self.allow(method, "POST")
            return self.submit(environ)
        if path == "/v1/health":
            self.allow(method, "GET")
            return 200, self.service.health()
        if path in ("/v1/schemas/job", "/v1/schemas/result"):
            self.allow(method, "GET")
            return 200, job_schema() if path.endswith("job") else result_schema()
        match = _ROUTE.match(path)
        if match is None:
            raise HttpError(404, f"no such resource: {path[:100]}; see /v1/jobs and /v1/health")
        job_id, result = match.group(1), match.group(2)
        if result:
            self.allow(method, "GET")
            return self.result(job_id, environ)
        self.allow(method, "GET", "DELETE")
        if method == "DELETE":
            return self.cancel(job_id)
        return 200, self.service.status(self.known(job_id))

    @staticmethod
    def allow(method: str, *methods: str) -> None:
        """Refuse a method the resource does not take."""
        if method not in methods:
            error = HttpError(405, f"method {method} is not allowed here; use {', '.join(methods)}")
            error.headers.append(("Allow", ", ".join(methods)))
            raise error

    def known(self, job_id: str):
        """The stored job with this id, or a 404."""
        record = self.service.store.get(job_id) if _ID.match(job_id) else None
        if record is None:
            raise HttpError(404, f"no job with id {job_id[:40]!r}")
        return record

    def body(self, environ: dict) -> bytes:
        """The request body, refused (413) beyond the size limit."""
        limit = self.service.max_body
        length = environ.get("CONTENT_LENGTH") or ""
        too_large = HttpError(
            413, f"the request body is larger than this server's limit of {limit} bytes"
        )
        if length:
            if not length.isdigit():
                raise HttpError(400, "bad Content-Length header")
            if int(length) > limit:
                raise too_large
            return environ["wsgi.input"].read(int(length))
        data = environ["wsgi.input"].read(limit + 1)
        if len(data) > limit:
            raise too_large
        return data

    def submit(self, environ: dict) -> tuple[int, dict]:
        """Check and queue a job document."""
        data = self.body(environ)
        try:
            document = json.loads(data.decode("utf-8"), parse_constant=_reject_constant)
        except UnicodeDecodeError:
            raise HttpError(400, "the request body is not UTF-8 text") from None
        except json.JSONDecodeError as exc:
            raise HttpError(
                400, f"invalid JSON at line {exc.lineno}, column {exc.colno}: {exc.msg}"
            ) from None
        except (ValueError, RecursionError) as exc:
            raise HttpError(400, f"invalid JSON: {exc}") from None
        job = prepare(document, self.service.limits)
        if isinstance(job, list):
            raise HttpError(
                400, f"invalid job document ({len(job)} error(s)); nothing was queued", errors=job
            )
        service = self.service
        with service.admission:
            if service.store.count("queued") >= service.queue_size:
                error = HttpError(
                    429, f"the queue is full ({service.queue_size} jobs waiting); retry later"
                )
                error.headers.append(("Retry-After", "1"))
                raise error
            job_id = service.store.submit(dumps(document))
            service.pool.prepared[job_id] = job
        service.pool.wake()
        return 202, {
            "id": job_id,
            "state": "queued",
            "status_url": f"/v1/jobs/{job_id}",
            "result_url": f"/v1/jobs/{job_id}/result",
        }

    def result(self, job_id: str, environ: dict) -> tuple[int, dict]:
        """The result of a finished job; 202 with its state otherwise."""
        record = self.known(job_id)
        wait = parse_qs(environ.get("QUERY_STRING", "")).get("wait", ["0"])[-1]
        try:
            seconds = float(wait)
        except ValueError:
            seconds = -1.0
        if not 0 <= seconds <= MAX_WAIT:
            raise HttpError(400, f"wait must be seconds from 0 to {MAX_WAIT:g}, got {wait[:20]!r}")
        if record.state not in FINISHED and seconds > 0:
            self.service.pool.wait(job_id, seconds)
            record = self.known(job_id)
        if record.state not in FINISHED:
            return 202, self.service.status(record)
        return 200, json.loads(record.result)

    def cancel(self, job_id: str) -> tuple[int, dict]:
        """Cancel a queued or running job."""
        record = self.known(job_id)
        outcome = self.service.pool.cancel(record.id)
        if outcome is None:
            record = self.known(job_id)
            raise HttpError(409, f"job {job_id} has already finished ({record.state})")
        return 200, {"id": job_id, "state": outcome}
