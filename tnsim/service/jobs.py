"""The job document runner: one JSON document in, one result document out.

A job document (schema: ``tnsim/service/job.schema.json``) holds a circuit
(OpenQASM 2.0 or 3 text, or an operation list), the values of its ``input``
parameters, a list of queries and run options.  :func:`run_job` checks the
whole document first -- the schema, then what the schema cannot say (the
circuit reads, bitstrings have one bit per qubit, qubits exist, the options
are within the limits of whoever runs it) -- and refuses an invalid document
with every error and its JSON path, running nothing.  A valid document's
queries run in order, each inside a :func:`tnsim.execution.options.run_options`
block that logs every contraction, so each answer carries the plan figures of
the contractions it ran (FLOPs, slices, peak bytes, seconds).

The result (schema: ``tnsim/service/result.schema.json``) is plain, strict JSON:
no NaN or infinity; amplitudes as ``real``/``imag`` plus ``log10_abs`` and
``phase``, which stay exact where a wide circuit's amplitude underflows.
``tnsim run`` and ``tnsim serve`` answer the same documents with this code.
"""

from __future__ import annotations

import math
import os
import shutil
import time
from collections.abc import Callable, Mapping
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from tnsim.circuits.bits import format_bits, parse_many
from tnsim.circuits.circuit import Circuit
from tnsim.circuits.qasm import qasm_version, read_qasm
from tnsim.errors import CheckpointError, InputError, QasmError, TnsimError
from tnsim.execution.options import run_options
from tnsim.queries.amplitudes import iter_amplitudes
from tnsim.queries.expectation import expectation
from tnsim.queries.forecast import forecast
from tnsim.queries.marginals import marginal
from tnsim.queries.observables import Observable, PauliTerm, parse_observable
from tnsim.queries.sampling import sample
from tnsim.queries.xeb import xeb
from tnsim.service.schema import JOB_VERSION, json_path, schema_errors, shorten
from tnsim.units import format_bytes, parse_memory
from tnsim.version import tnsim_version

__all__ = [
    "JobStopped",
    "Limits",
    "Monitor",
    "Prepared",
    "prepare",
    "result_document",
    "run_job",
    "run_prepared",
]

MAX_OUTPUT_BITS = 100_000_000
"""Most characters of bitstrings one samples query may return (shots x qubits)."""

MAX_ERRORS_PER_FIELD = 20
"""Errors reported for one list (bitstrings of a query) before the rest are counted."""


class JobStopped(TnsimError):
    """A job stopped before its end.

    ``reason`` is ``"cancelled"``, ``"time budget"`` or ``"shutdown"`` (the runner
    stops; :func:`run_prepared` lets this one through, so the job can run again).
    """

    def __init__(self, message: str, reason: str):
        super().__init__(message)
        self.reason = reason


@dataclass(frozen=True)
class Limits:
    """What a job may ask for, set by whoever runs it (the server's options).

    Attributes
    ----------
    memory_limit : int, optional
        Most bytes of intermediates a job may ask for (and the default).
    time_budget : float, optional
        Most seconds a job may ask for (and the default).
    max_qubits : int
        Widest circuit accepted.
    max_ops : int
        Most operations a circuit may expand to.
    workers : int, optional
        Local worker processes of each contraction (``None``: automatic).
    executor : concurrent.futures.Executor, optional
        Where slices run (e.g. a Dask client's executor).
    """

    memory_limit: int | None = None
    time_budget: float | None = None
    max_qubits: int = 1_000_000
    max_ops: int = 10_000_000
    workers: int | None = None
    executor: Any = None


class Monitor:
    """Watches a running job: progress reports, the time budget, and (in subclasses) cancel.

    :meth:`check` is called between queries and after every finished chunk of
    slices; it raises :class:`JobStopped` to stop the job.  :meth:`progress` is
    told each finished chunk.
    """

    def __init__(self) -> None:
        self.deadline: float | None = None
        self.budget: float | None = None

    def start(self, time_budget: float | None) -> None:
        """Begin timing the job against ``time_budget`` seconds."""
        self.budget = time_budget
        self.deadline = None if time_budget is None else time.monotonic() + time_budget

    def check(self) -> None:
        """Raise :class:`JobStopped` when the time budget is spent."""
        if self.deadline is not None and time.monotonic() > self.deadline:
            raise JobStopped(
                f"the time budget of {self.budget:g} s is spent; give a larger time_budget",
                "time budget",
            )

    def query_started(self, index: int) -> None:
        """Query ``index`` starts."""

    def progress(self, index: int, chunks_done: int, num_chunks: int) -> None:
        """A chunk of slices of query ``index`` finished."""

    def contraction_done(self, index: int, record) -> None:
        """A contraction of query ``index`` finished (its ContractionRecord)."""


@dataclass
class Prepared:
    """A checked job, ready to run."""

    circuit: Circuit
    source: str
    queries: list[dict]
    memory_limit: int | None
    dtype: type
    seed: int
    time_budget: float | None
    limits: Limits = field(default_factory=Limits)


# ---------------------------------------------------------------------------- checking


class _Errors(list):
    def add(self, parts, message: str) -> None:
        self.append({"path": json_path(parts), "message": shorten(message)})


def _non_finite(value, parts, errors: _Errors) -> None:
    """Report NaN and infinities anywhere in the document (JSON has no such numbers)."""
    if isinstance(value, float):
        if not math.isfinite(value):
            errors.add(parts, f"{value!r} is not a finite number")
    elif isinstance(value, Mapping):
        for key, item in value.items():
            _non_finite(item, [*parts, key], errors)
    elif isinstance(value, list):
        for k, item in enumerate(value):
            _non_finite(item, [*parts, k], errors)


def _qasm_circuit(text: str, inputs: dict, limits: Limits, errors: _Errors):
    if "OPENQASM" not in text:
        errors.add(
            ["circuit", "qasm"],
            "not OpenQASM text: it must start with 'OPENQASM 2.0;' or 'OPENQASM 3.0;'",
        )
        return None, ""
    source = "openqasm3" if qasm_version(text) == "3" else "openqasm2"
    try:
        return read_qasm(text, inputs=inputs or None, max_ops=limits.max_ops), source
    except QasmError as exc:
        message = str(exc).split(": ", 1)[-1] if exc.line else str(exc)
        errors.add(["circuit", "qasm"], f"line {exc.line}, column {exc.column}: {message}")
    except InputError as exc:
        errors.add(["inputs"] if "input" in str(exc) else ["circuit", "qasm"], str(exc))
    return None, source


def _ops_circuit(spec: dict, inputs: dict, limits: Limits, errors: _Errors):
    n = spec["num_qubits"]
    if len(spec["operations"]) > limits.max_ops:
        errors.add(["circuit", "operations"], f"more than {limits.max_ops} operations")
        return None
    circuit = Circuit(n)
    for k, op in enumerate(spec["operations"]):
        try:
            circuit.ops.extend(Circuit.from_ops(n, [op]).ops)
        except InputError as exc:
            errors.add(["circuit", "operations", k], str(exc).removeprefix("operation 0: "))
    names = circuit.parameters()
    if not names and inputs:
        errors.add(["inputs"], "the operation list has no named angle to give a value to")
    elif names:
        try:
            return circuit.bind(inputs)
        except InputError as exc:
            errors.add(["inputs"], str(exc))
            return None
    return circuit


def _check_bitstrings(items, n: int, parts, errors: _Errors) -> None:
    bad = [(j, b) for j, b in enumerate(items) if len(b) != n]
    for j, b in bad[:MAX_ERRORS_PER_FIELD]:
        errors.add(
            [*parts, j],
            f"bitstring has {len(b)} bit(s) but the circuit has {n} "
            "qubit(s); give one bit per qubit (character i is qubit i)",
        )
    if len(bad) > MAX_ERRORS_PER_FIELD:
        errors.add(
            parts, f"... and {len(bad) - MAX_ERRORS_PER_FIELD} more bitstrings of the wrong length"
        )


def _observable(spec, n: int) -> Observable:
    if isinstance(spec, str):
        return parse_observable(spec, n)
    terms = []
    for term in spec:
        one = parse_observable(term["pauli"], n)
        if len(one.terms) != 1:
            raise InputError(f"term {term['pauli']!r} is not one Pauli string")
        terms.append(PauliTerm(term["coefficient"] * one.terms[0].coefficient, one.terms[0].paulis))
    return Observable(tuple(terms))


def _check_query(k: int, query: dict, circuit: Circuit, errors: _Errors) -> dict:
    n, kind, parts = circuit.num_qubits, query["kind"], ["queries", k]
    query = dict(query)
    if kind in ("amplitudes", "xeb"):
        _check_bitstrings(query["bitstrings"], n, [*parts, "bitstrings"], errors)
    elif kind == "forecast" and "bitstring" in query:
        _check_bitstrings([query["bitstring"]], n, [*parts, "bitstring"], errors)
    elif kind == "marginal":
        for j, q in enumerate(query["qubits"]):
            if q >= n:
                errors.add(
                    [*parts, "qubits", j],
                    f"qubit {q} is out of range for a {n}-qubit circuit (valid: 0..{n - 1})",
                )
    elif kind == "expectation":
        try:
            query["observable"] = _observable(query["observable"], n)
        except InputError as exc:
            errors.add([*parts, "observable"], str(exc))
    elif kind == "samples" and query["shots"] * n > MAX_OUTPUT_BITS:
        errors.add(
            [*parts, "shots"],
            f"{query['shots']} shots of {n} qubits would return "
            f"more than {MAX_OUTPUT_BITS} characters; ask for fewer shots per query",
        )
    return query


def _check_options(options: dict, limits: Limits, errors: _Errors) -> tuple:
    memory = limits.memory_limit
    if "memory_limit" in options:
        try:
            memory = parse_memory(options["memory_limit"])
        except InputError as exc:
            errors.add(["options", "memory_limit"], str(exc))
        else:
            if limits.memory_limit is not None and memory > limits.memory_limit:
                errors.add(
                    ["options", "memory_limit"],
                    f"asks for {format_bytes(memory)}, more "
                    f"than this server's limit of {format_bytes(limits.memory_limit)}",
                )
    budget = limits.time_budget
    if "time_budget" in options:
        budget = float(options["time_budget"])
        if limits.time_budget is not None and budget > limits.time_budget:
            errors.add(
                ["options", "time_budget"],
                f"asks for {budget:g} s, more than this server's limit of {limits.time_budget:g} s",
            )
    dtype = np.complex64 if options.get("precision") == "single" else np.complex128
    return memory, budget, dtype, int(options.get("seed", 0))


def prepare(document: Any, limits: Limits | None = None) -> Prepared | list[dict]:
    """Check a job document; return the job ready to run, or the list of its errors.

    Each error is ``{"path": "$.queries[1].qubits[0]", "message": ...}``.
    """
    limits = limits or Limits()
    errors = _Errors(schema_errors(document))
    if errors:
        return list(errors)
    _non_finite(document, [], errors)
    if errors:
        return list(errors)
    spec, inputs = document["circuit"], document.get("inputs", {})
    if "qasm" in spec:
        circuit, source = _qasm_circuit(spec["qasm"], inputs, limits, errors)
    else:
        circuit, source = _ops_circuit(spec, inputs, limits, errors), "operations"
    memory, budget, dtype, seed = _check_options(document.get("options", {}), limits, errors)
    if circuit is not None and circuit.num_qubits > limits.max_qubits:
        errors.add(
            ["circuit"],
            f"the circuit has {circuit.num_qubits} qubits, more than the "
            f"{limits.max_qubits} this runner accepts",
        )
        circuit = None
    queries = []
    if circuit is not None:
        queries = [_check_query(k, q, circuit, errors) for k, q in enumerate(document["queries"])]
    if errors:
        return sorted(errors, key=lambda e: e["path"])
    return Prepared(circuit, source, queries, memory, dtype, seed, budget, limits)


# ---------------------------------------------------------------------------- answering


def _number(x: float | np.floating) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _amplitude_entries(mantissa: np.ndarray, exponent: np.ndarray) -> list[dict]:
    out = []
    log2 = math.log10(2.0)
    for m, e in zip(mantissa.tolist(), exponent.tolist()):
        m = complex(m)
        size = abs(m)
        out.append(
            {
                "real": math.ldexp(m.real, e),
                "imag": math.ldexp(m.imag, e),
                "log10_abs": math.log10(size) + e * log2 if size > 0 else None,
                "phase": math.atan2(m.imag, m.real),
            }
        )
    return out


def _amplitudes(job: Prepared, query: dict) -> dict:
    rows = parse_many(query["bitstrings"], job.circuit.num_qubits)
    entries: list[dict] = []
    for _, mantissa, exponent in iter_amplitudes(
        job.circuit, rows, dtype=job.dtype, memory_limit=job.memory_limit
    ):
        entries += _amplitude_entries(mantissa, exponent)
    return {"amplitudes": entries}


def _marginal(job: Prepared, query: dict) -> dict:
    qubits = list(query["qubits"])
    probs = marginal(job.circuit, qubits, dtype=job.dtype, memory_limit=job.memory_limit)
    k = len(qubits)
    outcomes = [format_bits([(i >> (k - 1 - j)) & 1 for j in range(k)]) for i in range(1 << k)]
    return {"qubits": qubits, "outcomes": outcomes, "probabilities": [_number(p) for p in probs]}


def _expectation(job: Prepared, query: dict) -> dict:
    value = expectation(
        job.circuit, query["observable"], dtype=job.dtype, memory_limit=job.memory_limit
    )
    return {"value": _number(value)}


def _samples(job: Prepared, query: dict) -> dict:
    seed = query.get("seed", job.seed)
    rows = sample(
        job.circuit, query["shots"], seed=seed, dtype=job.dtype, memory_limit=job.memory_limit
    )
    return {"bitstrings": [format_bits(row) for row in rows]}


def _xeb(job: Prepared, query: dict) -> dict:
    result = xeb(job.circuit, query["bitstrings"], dtype=job.dtype)
    return {
        "fidelity": _number(result.fidelity),
        "standard_error": _number(result.standard_error),
        "num_samples": result.num_samples,
    }


def _forecast(job: Prepared, query: dict) -> dict:
    report = forecast(
        job.circuit,
        query.get("bitstring"),
        memory_limit=job.memory_limit,
        seed=job.seed,
        dtype=job.dtype,
    )
    return {"report": _clean(report.to_dict())}


def _clean(value):
    """Plain JSON values: numpy scalars to Python, tuples to lists, non-finite floats to null."""
    if isinstance(value, dict):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return _number(value)
    return value


ANSWERS: dict[str, Callable[[Prepared, dict], dict]] = {
    "amplitudes": _amplitudes,
    "marginal": _marginal,
    "expectation": _expectation,
    "samples": _samples,
    "xeb": _xeb,
    "forecast": _forecast,
}
"""Query kind -> the function answering it."""


class CheckpointRestart(Exception):
    """A query answered after its checkpoint was refused and discarded (see :func:`_run_query`)."""

    def __init__(self, answer: dict, reason: str):
        super().__init__(reason)
        self.answer, self.reason = answer, reason


def _run_query(job: Prepared, query: dict, options: dict) -> dict:
    """Answer one query in a run-options block; a refused checkpoint is discarded once.

    A checkpoint that belongs to another plan (a resumed job whose time-limited
    planning chose another tree) or is damaged cannot be resumed: its folder is
    removed and the query starts afresh, and the answer says so in ``checkpoint``.
    """
    try:
        with run_options(**options):
            return ANSWERS[query["kind"]](job, query)
    except CheckpointError as exc:
        folder = options.get("checkpoint")
        if folder is None:
            raise
        shutil.rmtree(folder, ignore_errors=True)
        with run_options(**options):
            answer = ANSWERS[query["kind"]](job, query)
        raise CheckpointRestart(answer, f"restarted: {shorten(str(exc))}") from None


class _Log(list):
    """The block's contraction log, telling the monitor of each record as it arrives."""

    def __init__(self, monitor: Monitor, query: int):
        super().__init__()
        self.monitor, self.query = monitor, query

    def append(self, record) -> None:
        """Keep the record and tell the monitor."""
        super().append(record)
        self.monitor.contraction_done(self.query, record)


def _answer(job: Prepared, k: int, query: dict, monitor: Monitor, checkpoint: str | None) -> dict:
    answer: dict[str, Any] = {"kind": query["kind"]}
    if "id" in query:
        answer["id"] = query["id"]
    log = _Log(monitor, k)

    def progress(done: int, total: int) -> None:
        monitor.progress(k, done, total)
        monitor.check()

    options: dict[str, Any] = {"log": log, "progress": progress}
    if job.memory_limit is not None:
        options["memory_limit"] = job.memory_limit
    if job.limits.executor is not None:
        options["executor"] = job.limits.executor
    elif job.limits.workers is not None:
        options["workers"] = job.limits.workers
    if checkpoint is not None:
        options["checkpoint"] = os.path.join(checkpoint, f"query-{k:04d}")
    began = time.perf_counter()
    monitor.query_started(k)
    try:
        monitor.check()
        answer.update(_run_query(job, query, options))
        answer["status"] = "done"
    except JobStopped:
        raise
    except CheckpointRestart as exc:
        answer.update(exc.answer)
        answer["status"] = "done"
        answer["checkpoint"] = exc.reason
    except TnsimError as exc:
        answer["status"] = "failed"
        answer["error"] = {"type": type(exc).__name__, "message": shorten(str(exc))}
    except MemoryError:
        answer["status"] = "failed"
        answer["error"] = {
            "type": "MemoryError",
            "message": "the machine ran out of memory; give a smaller memory_limit so the "
            "contraction is sliced",
        }
    answer["seconds"] = time.perf_counter() - began
    answer["contractions"] = [_clean(asdict(r)) for r in log]
    return answer


def result_document(status: str, began: float, **fields) -> dict:
    """A result document with ``status``, timed from ``began`` (``time.perf_counter()``)."""
    out = {"version": JOB_VERSION, "tnsim_version": tnsim_version(), "status": status, "errors": []}
    out.update(fields)
    out.setdefault("answers", [])
    out["seconds"] = time.perf_counter() - began
    return out


def run_prepared(
    job: Prepared, *, checkpoint: str | None = None, monitor: Monitor | None = None
) -> dict:
    """Answer the queries of a checked job in order; return the result document.

    A query that fails gets its error in its answer and the others still run
    (status ``"failed"``); a :class:`JobStopped` from the monitor (time budget
    spent, or cancelled) ends the job there: the running query is failed, the
    rest ``"not run"``.
    """
    began = time.perf_counter()
    monitor = monitor or Monitor()
    monitor.start(job.time_budget)
    answers: list[dict] = []
    status = "done"
    for k, query in enumerate(job.queries):
        try:
            answers.append(_answer(job, k, query, monitor, checkpoint))
        except JobStopped as exc:
            if exc.reason == "shutdown":
                raise
            stopped = {"kind": query["kind"], "status": "failed", "seconds": 0.0}
            stopped["error"] = {"type": "JobStopped", "message": str(exc)}
            stopped["contractions"] = []
            answers.append(stopped)
            answers += [
                {"kind": q["kind"], "status": "not run", "seconds": 0.0, "contractions": []}
                for q in job.queries[k + 1 :]
            ]
            status = "cancelled" if exc.reason == "cancelled" else "failed"
            break
        if answers[-1]["status"] != "done":
            status = "failed"
    circuit = {
        "num_qubits": job.circuit.num_qubits,
        "num_operations": len(job.circuit.ops),
        "source": job.source,
    }
    return result_document(status, began, circuit=circuit, answers=answers)


def run_job(
    document: Any,
    *,
    limits: Limits | None = None,
    checkpoint: str | os.PathLike | None = None,
    monitor: Monitor | None = None,
) -> dict:
    """Answer a job document; return the result document (plain, strict-JSON data).

    Parameters
    ----------
    document : dict
        A job document (see ``tnsim/service/job.schema.json``).
    limits : Limits, optional
        Caps on what the job may ask for (a server's options); default none.
    checkpoint : path, optional
        Folder where long contractions record finished slices; running the
        same document again with the same folder resumes them.
    monitor : Monitor, optional
        Receives progress and may stop the job.

    Returns
    -------
    dict
        ``status`` ``"done"`` (every query answered), ``"failed"`` (see the
        answers' errors), ``"invalid"`` (``errors`` lists each problem with its
        JSON path; nothing ran) or ``"cancelled"``.

    Examples
    --------
    >>> result = run_job({
    ...     "version": 1,
    ...     "circuit": {"qasm": 'OPENQASM 3.0; include "stdgates.inc"; qubit[2] q; '
    ...                         'h q[0]; ctrl @ x q[0], q[1];'},
    ...     "queries": [{"kind": "amplitudes", "bitstrings": ["11"]},
    ...                 {"kind": "marginal", "qubits": [1]}],
    ... })
    >>> result["status"], round(result["answers"][0]["amplitudes"][0]["real"], 6)
    ('done', 0.707107)
    >>> [round(p, 6) for p in result["answers"][1]["probabilities"]]
    [0.5, 0.5]
    >>> run_job({"version": 1, "circuit": {"qasm": "h"}, "queries": []})["errors"]
    [{'path': '$.queries', 'message': '[] should be non-empty'}]
    """
    began = time.perf_counter()
    job = prepare(document, limits)
    if isinstance(job, list):
        return result_document("invalid", began, errors=job)
    path = None if checkpoint is None else os.fspath(checkpoint)
    return run_prepared(job, checkpoint=path, monitor=monitor)
