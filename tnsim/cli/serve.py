"""The ``serve`` subcommand: the local job service over HTTP, or JSON lines on stdio.

Registered on the ``tnsim`` parser by :func:`register`; the service itself is
:mod:`tnsim.service.server` (HTTP) and :mod:`tnsim.service.stdio`.
"""

from __future__ import annotations

import argparse
import sys

from tnsim.errors import InputError

__all__ = ["register"]


def _limits(args: argparse.Namespace):
    from tnsim.execution.options import current_options
    from tnsim.service.jobs import Limits

    if args.time_budget is not None and not 0 < args.time_budget < float("inf"):
        raise InputError(
            f"--time-budget must be a positive number of seconds, got {args.time_budget}"
        )
    opts = current_options()
    return Limits(
        memory_limit=opts.memory_limit,
        time_budget=args.time_budget,
        workers=1 if opts.workers is None else opts.workers,
        executor=opts.executor,
    )


def _cmd_serve(args: argparse.Namespace) -> int:
    limits = _limits(args)
    if args.stdio:
        from tnsim.service.stdio import serve_lines

        serve_lines(sys.stdin, sys.stdout, limits=limits)
        return 0
    from tnsim.service.server import Service, read_token, serve
    from tnsim.units import parse_memory

    token = read_token(args.token_file) if args.token_file else None
    service = Service(
        args.state,
        limits=limits,
        jobs=args.jobs,
        queue_size=args.queue,
        token=token,
        max_body=parse_memory(args.max_body),
        fsync=args.fsync,
    )
    try:
        serve(service, args.host, args.port, threads=args.http_threads)
    except InputError:
        service.close()
        raise
    return 0


def register(sub) -> None:
    """Add ``serve`` to a subparsers object."""
    s = sub.add_parser(
        "serve",
        help="local job service: submit JSON job documents over HTTP (or JSON lines on stdio)",
        description="Run the local job service. HTTP API (JSON): POST /v1/jobs (a job "
        "document; answers an id at once), GET /v1/jobs/ID (state and progress), GET "
        "/v1/jobs/ID/result?wait=S, DELETE /v1/jobs/ID (cancel), GET /v1/health. Jobs and "
        "results are kept in an SQLite database in the --state folder and long contractions "
        "checkpoint there, so after a crash or kill the restarted server resumes queued and "
        "running jobs and still serves finished results. Binds 127.0.0.1 unless --host says "
        "otherwise (which then needs --token-file). Bitstrings: character i is qubit i.",
    )
    s.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    s.add_argument("--port", type=int, default=8750, help="port (default 8750; 0: any free port)")
    s.add_argument(
        "--state",
        default="tnsim-state",
        metavar="DIR",
        help="folder of the job database and checkpoints (default ./tnsim-state)",
    )
    s.add_argument("--jobs", type=int, default=2, metavar="N", help="jobs run at once (default 2)")
    s.add_argument(
        "--queue",
        type=int,
        default=64,
        metavar="N",
        help="most jobs waiting; more submissions are answered 429 (default 64)",
    )
    s.add_argument(
        "--token-file",
        metavar="FILE",
        help="file whose first line is the token every request must send as "
        "'Authorization: Bearer TOKEN' (required to bind other than 127.0.0.1)",
    )
    s.add_argument(
        "--max-body",
        default="16MiB",
        metavar="SIZE",
        help="largest request body (default 16MiB); larger ones are answered 413",
    )
    s.add_argument(
        "--memory",
        metavar="SIZE",
        help="memory limit of a job's intermediates: the default, and the most a job may ask",
    )
    s.add_argument(
        "--time-budget",
        type=float,
        metavar="S",
        help="seconds a job may take: the default, and the most a job may ask",
    )
    s.add_argument(
        "--workers",
        type=int,
        metavar="N",
        help="local worker processes of each contraction (default 1)",
    )
    s.add_argument("--dask", metavar="ADDRESS", help="run slices on a Dask scheduler")
    s.add_argument(
        "--http-threads", type=int, default=16, metavar="N", help="HTTP threads (default 16)"
    )
    s.add_argument(
        "--fsync",
        action="store_true",
        help="flush each accepted job to the disk before answering (survives a power loss)",
    )
    s.add_argument(
        "--stdio",
        action="store_true",
        help="read job documents as JSON lines on stdin, write result lines on stdout",
    )
    s.set_defaults(func=_cmd_serve, quiet=True)
