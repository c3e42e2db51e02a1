"""The ``run`` subcommand: answer one JSON job document (a file, or ``-`` for stdin).

Registered on the ``tnsim`` parser by :func:`register`.  The result document
(strict JSON) goes to stdout or ``-o FILE``; the exit status is 0 when every
query was answered and 2 otherwise (an invalid document, or a query that
failed), with one line on stderr saying why -- the result document is written
in every case.
"""

from __future__ import annotations

import argparse
import json
import os
import sys

from tnsim.cli.common import add_run_arguments, write_output
from tnsim.errors import InputError

__all__ = ["dump_json", "load_json", "register", "summary"]


def _reject_constant(name: str):
    raise ValueError(f"{name} is not a JSON number (JSON has no NaN or infinity)")


def load_json(text: str, where: str):
    """Parse strict JSON (no NaN or infinity); errors name ``where:line:column``."""
    try:
        return json.loads(text, parse_constant=_reject_constant)
    except json.JSONDecodeError as exc:
        raise InputError(f"{where}:{exc.lineno}:{exc.colno}: invalid JSON: {exc.msg}") from None
    except (ValueError, RecursionError) as exc:
        raise InputError(f"{where}: invalid JSON: {exc}") from None


def dump_json(document, indent: int | None = None) -> str:
    """Strict JSON text of a result document, ending with a newline."""
    return json.dumps(document, allow_nan=False, indent=indent, ensure_ascii=False) + "\n"


def summary(result: dict) -> str | None:
    """One line saying why a result is not ``done`` (``None`` when it is)."""
    if result["status"] == "done":
        return None
    if result["status"] == "invalid":
        errors = result["errors"]
        first = errors[0]
        more = f" (and {len(errors) - 1} more)" if len(errors) > 1 else ""
        return f"invalid job document: {first['path']}: {first['message']}{more}"
    failed = [(k, a) for k, a in enumerate(result["answers"]) if a["status"] == "failed"]
    k, answer = failed[0]
    error = answer["error"]
    return (
        f"{len(failed)} of {len(result['answers'])} queries not answered (query {k}, "
        f"{answer['kind']}: {error['type']}: {error['message']})"
    )


def _read(path: str) -> str:
    if path == "-":
        data = sys.stdin.buffer.read()
        where = "<stdin>"
    else:
        if not os.path.isfile(path):
            raise InputError(f"{path}: no such file; give the path of a JSON job document or -")
        try:
            with open(path, "rb") as fh:
                data = fh.read()
        except OSError as exc:
            raise InputError(f"cannot read {path!r}: {exc.strerror}") from None
        where = path
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{where}: the job document is not UTF-8 text") from None


def _cmd_run(args: argparse.Namespace) -> int:
    from tnsim.service.jobs import run_job

    where = "<stdin>" if args.job == "-" else args.job
    document = load_json(_read(args.job), where)
    result = run_job(document, checkpoint=args.checkpoint)
    try:
        write_output(dump_json(result, args.indent), args.output)
        sys.stdout.flush()
    except BrokenPipeError:  # a reader that stopped early is not an error
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    why = summary(result)
    if why is not None:
        print(f"tnsim: error: {where}: {why}", file=sys.stderr)
        return 2
    return 0


def register(sub) -> None:
    """Add ``run`` to a subparsers object."""
    run = sub.add_parser(
        "run",
        help="answer a JSON job document (circuit, inputs, queries, options)",
        description="Answer every query of a JSON job document and write one result document "
        "(strict JSON) with the answers, the plan figures of each contraction and the tnsim "
        "version. The document's schema ships with tnsim (tnsim/service/job.schema.json). "
        "Bitstrings: character i is qubit i (the leftmost character is qubit 0). Exit status "
        "0 when every query is answered, 2 otherwise (the result document says why).",
    )
    run.add_argument("job", help="the job document (JSON file), or - for stdin")
    run.add_argument("-o", "--output", metavar="FILE", help="result file (default: stdout)")
    run.add_argument("--indent", type=int, metavar="N", help="indent the JSON output by N")
    add_run_arguments(run)
    run.set_defaults(func=_cmd_run)
