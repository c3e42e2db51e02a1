"""``tnsim serve --stdio``: job documents as JSON lines on stdin, results on stdout.

For tools that embed tnsim as a subprocess.  Each non-blank input line is one
job document; each gets exactly one output line, its result document, in the
order of the input (a line that is not JSON gets an ``invalid`` result naming
the line).  The loop ends at the end of the input, or quietly when the reader
of the output goes away.
"""

from __future__ import annotations

import json
import time
from typing import IO

from tnsim.service.jobs import Limits, result_document, run_job

__all__ = ["serve_lines"]


def _reject_constant(name: str):
    raise ValueError(f"{name} is not a JSON number (JSON has no NaN or infinity)")


def _parse(line: str, number: int):
    try:
        return json.loads(line, parse_constant=_reject_constant), None
    except json.JSONDecodeError as exc:
        message = f"line {number}, column {exc.colno}: invalid JSON: {exc.msg}"
    except (ValueError, RecursionError) as exc:
        message = f"line {number}: invalid JSON: {exc}"
    return None, [{"path": "$", "message": message}]


def serve_lines(source: IO[str], sink: IO[str], *, limits: Limits | None = None) -> int:
    r"""Answer the job documents of ``source`` (one per line) on ``sink``; return the count.

    Examples
    --------
    >>> import io
    >>> job = ('{"version": 1, "circuit": {"num_qubits": 1, "operations": [["x", [0]]]}, '
    ...        '"queries": [{"kind": "marginal", "qubits": [0]}]}')
    >>> out = io.StringIO()
    >>> serve_lines(io.StringIO(job + "\n\nnot json\n"), out)
    2
    >>> [json.loads(line)["status"] for line in out.getvalue().splitlines()]
    ['done', 'invalid']
    """
    count = 0
    for number, line in enumerate(source, start=1):
        if not line.strip():
            continue
        began = time.perf_counter()
        document, errors = _parse(line, number)
        if errors is None:
            result = run_job(document, limits=limits)
        else:
            result = result_document("invalid", began, errors=errors)
        try:
            sink.write(json.dumps(result, allow_nan=False, ensure_ascii=False) + "\n")
            sink.flush()
        except BrokenPipeError:
            return count
        count += 1
    return count
