"""The published JSON Schemas of job and result documents, and validation with JSON paths.

The schemas ship inside the package (``tnsim/service/job.schema.json`` and
``result.schema.json``, JSON Schema draft 2020-12) and carry the document
version they describe.  Validation uses the ``jsonschema`` library (the
``service`` extra: ``pip install 'tnsim[service]'``) and reports every error of
a document at once, each with the JSON path of the offending part
(``$.queries[2].qubits[0]``).
"""

from __future__ import annotations

import json
from functools import cache
from importlib import resources
from typing import Any

from tnsim.errors import InputError

__all__ = ["JOB_VERSION", "job_schema", "json_path", "result_schema", "schema_errors"]

JOB_VERSION = 1
"""Version of the job and result document formats this tnsim reads and writes."""

MAX_MESSAGE = 300
"""Longest error message kept (messages quote the offending value, which may be huge)."""


@cache
def _load(name: str) -> dict:
    text = resources.files("tnsim.service").joinpath(name).read_text(encoding="utf-8")
    return json.loads(text)


def job_schema() -> dict:
    """The JSON Schema of job documents (a fresh copy)."""
    return json.loads(json.dumps(_load("job.schema.json")))


def result_schema() -> dict:
    """The JSON Schema of result documents (a fresh copy)."""
    return json.loads(json.dumps(_load("result.schema.json")))


def json_path(parts) -> str:
    """The JSON path of a sequence of keys and indices.

    Examples
    --------
    >>> json_path(["queries", 2, "qubits", 0]), json_path([]), json_path(["inputs", "θ x"])
    ('$.queries[2].qubits[0]', '$', "$.inputs['θ x']")
    """
    out = "$"
    for part in parts:
        if isinstance(part, int):
            out += f"[{part}]"
        elif isinstance(part, str) and part.isidentifier():
            out += f".{part}"
        else:
            out += "[" + repr(str(part)) + "]"
    return out


def shorten(message: str) -> str:
    """A message cut to :data:`MAX_MESSAGE` characters."""
    return message if len(message) <= MAX_MESSAGE else message[: MAX_MESSAGE - 3] + "..."


@cache
def _validator(name: str):
    try:
        import jsonschema
    except ImportError:
        raise InputError(
            "job documents are validated with the jsonschema library: "
            "python -m pip install 'tnsim[service]'"
        ) from None
    schema = _load(name)
    return jsonschema.Draft202012Validator(schema)


def schema_errors(document: Any, which: str = "job") -> list[dict[str, str]]:
    """Every way ``document`` breaks the job (or result) schema, as ``{path, message}`` items.

    Errors are sorted by path; an ``if``/``then`` failure reports the errors inside
    the branch that applied (the query kind given), not a summary.

    Examples
    --------
    >>> schema_errors({"version": 1, "circuit": {"qasm": "x"}, "queries": [{"kind": "amp"}]})
    [{'path': '$.queries[0].kind', 'message': "'amp' is not one of ['amplitudes', 'marginal', \
'expectation', 'samples', 'xeb', 'forecast']"}]
    """
    validator = _validator(f"{which}.schema.json")
    found = []
    for error in validator.iter_errors(document):
        leaves = [error]
        if error.context and error.validator in ("oneOf", "anyOf"):
            deepest = max(len(e.absolute_path) for e in error.context)
            leaves = [e for e in error.context if len(e.absolute_path) == deepest]
            if deepest == len(error.absolute_path):
                leaves = [error]
        for leaf in leaves:
            found.append({"path": json_path(leaf.absolute_path), "message": shorten(leaf.message)})
    unique = {(e["path"], e["message"]): e for e in found}
    return sorted(unique.values(), key=lambda e: (e["path"], e["message"]))
