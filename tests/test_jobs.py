"""Tests of the job document runner (tnsim.service.jobs), its schemas and ``tnsim run``.

Every answer is checked against the Python API called directly on the same circuit, and
the 1- and 2-qubit answers against closed forms (a Bell pair: amplitudes 1/sqrt(2),
marginals 1/2, <ZZ> = 1; common practice).  Documents are validated against the shipped
JSON Schemas (JSON Schema draft 2020-12, json-schema.org).
"""

from __future__ import annotations

import copy
import io
import json
import math
import os

import jsonschema
import numpy as np
import pytest

import tnsim
from tnsim.cli import main
from tnsim.service.jobs import JobStopped, Limits, Monitor, run_job
from tnsim.service.schema import job_schema, result_schema, schema_errors
from tnsim.service.stdio import serve_lines

QASM3 = """OPENQASM 3.0;
include "stdgates.inc";
input angle theta;
qubit[6] q;
for int i in [0:5] { h q[i]; }
for int i in [0:4] { ctrl @ rz(theta) q[i], q[i + 1]; }
inv @ s q[0];
cx q[2], q[5];
"""

ONE_OF_EACH = {
    "version": 1,
    "circuit": {"qasm": QASM3},
    "inputs": {"theta": 0.7},
    "queries": [
        {"kind": "amplitudes", "id": "amps", "bitstrings": ["000000", "101010", "111111"]},
        {"kind": "marginal", "qubits": [0, 3]},
        {"kind": "expectation", "observable": "0.5 Z0 Z1 - X3"},
        {"kind": "samples", "shots": 20, "seed": 3},
        {"kind": "xeb", "bitstrings": ["000000", "101010", "111111"]},
        {"kind": "forecast", "bitstring": "000111"},
    ],
    "options": {"memory_limit": "1GiB", "precision": "double", "seed": 1, "time_budget": 600},
}


def circuit_of(document: dict) -> tnsim.Circuit:
    return tnsim.read_qasm(document["circuit"]["qasm"], inputs=document.get("inputs"))


def test_shipped_schemas_are_valid_json_schemas():
    for schema in (job_schema(), result_schema()):
        jsonschema.Draft202012Validator.check_schema(schema)
    assert job_schema()["properties"]["version"] == {
        "description": "Version of the job document format.",
        "const": 1,
    }


def test_one_query_of_each_kind_matches_the_python_api():
    result = run_job(ONE_OF_EACH)
    assert result["status"] == "done" and result["errors"] == []
    assert result["tnsim_version"] == tnsim.__version__
    assert schema_errors(result, "result") == []
    json.dumps(result, allow_nan=False)  # strict JSON
    circuit = circuit_of(ONE_OF_EACH)
    amps, marg, expect, samples, xeb, fore = result["answers"]
    assert amps["id"] == "amps"
    expected = tnsim.amplitudes(circuit, ONE_OF_EACH["queries"][0]["bitstrings"])
    got = np.array([a["real"] + 1j * a["imag"] for a in amps["amplitudes"]])
    np.testing.assert_array_equal(got, expected)
    for a, e in zip(amps["amplitudes"], expected):
        assert a["log10_abs"] == pytest.approx(math.log10(abs(e)), abs=1e-14)
        assert a["phase"] == pytest.approx(np.angle(e), abs=1e-14)
    np.testing.assert_allclose(marg["probabilities"], tnsim.marginal(circuit, [0, 3]), atol=1e-15)
    assert marg["outcomes"] == ["00", "01", "10", "11"]
    assert expect["value"] == pytest.approx(tnsim.expectation(circuit, "0.5 Z0 Z1 - X3"), abs=1e-14)
    rows = tnsim.sample(circuit, 20, seed=3)
    assert samples["bitstrings"] == ["".join(map(str, r)) for r in rows]
    ref = tnsim.xeb(circuit, ONE_OF_EACH["queries"][4]["bitstrings"])
    assert xeb["fidelity"] == pytest.approx(ref.fidelity, abs=1e-12)
    assert xeb["num_samples"] == 3
    report = tnsim.forecast(circuit, "000111", memory_limit="1GiB", seed=1)
    assert fore["report"]["flops"] == report.flops
    assert fore["report"]["num_slices"] == report.num_slices
    for answer in result["answers"]:
        assert answer["status"] == "done" and answer["seconds"] >= 0
    # Plan figures of each contraction run (the forecast contracts nothing).
    assert amps["contractions"] and fore["contractions"] == []
    record = amps["contractions"][0]
    assert record["memory_limit"] == 1 << 30 and record["num_slices"] >= 1
    assert record["flops"] > 0 and record["itemsize"] == 16


def test_bell_pair_closed_forms_and_the_operation_list_form():
    document = {
        "version": 1,
        "circuit": {"num_qubits": 2, "operations": [["h", [0]], {"name": "cx", "qubits": [0, 1]}]},
        "queries": [
            {"kind": "amplitudes", "bitstrings": ["00", "01", "11"]},
            {"kind": "marginal", "qubits": [1]},
            {
                "kind": "expectation",
                "observable": [
                    {"coefficient": 2, "pauli": "Z0 Z1"},
                    {"coefficient": 1, "pauli": "I"},
                ],
            },
        ],
        "options": {"precision": "single"},
    }
    result = run_job(document)
    amps, marg, expect = result["answers"]
    assert [a["real"] for a in amps["amplitudes"]] == pytest.approx(
        [1 / math.sqrt(2), 0, 1 / math.sqrt(2)], abs=1e-7
    )
    assert amps["amplitudes"][1]["log10_abs"] is None  # an exact zero
    assert marg["probabilities"] == pytest.approx([0.5, 0.5], abs=1e-7)
    assert expect["value"] == pytest.approx(3.0, abs=1e-6)
    assert amps["contractions"][0]["itemsize"] == 8  # complex64
    assert result["circuit"] == {"num_qubits": 2, "num_operations": 2, "source": "operations"}


def test_wide_circuit_amplitudes_keep_their_log_magnitude_where_they_underflow():
    n = 2200  # |a| = 2**-1100, below the smallest double
    document = {
        "version": 1,
        "circuit": {"num_qubits": n, "operations": [["h", [q]] for q in range(n)]},
        "queries": [{"kind": "amplitudes", "bitstrings": ["1" * n, "0" * n]}],
    }
    result = run_job(document)
    for a in result["answers"][0]["amplitudes"]:
        assert a["real"] == 0.0 and a["imag"] == 0.0
        assert a["log10_abs"] == pytest.approx(-1100 * math.log10(2), abs=1e-9)
        assert a["phase"] == pytest.approx(0.0, abs=1e-12)
    json.dumps(result, allow_nan=False)


INVALID = [
    ("not an object", [], "$", "is not of type 'object'"),
    ("no version", {"version": None}, "$", "'version' is a required property"),
    ("unknown kind", {"queries": [{"kind": "amps"}]}, "$.queries[0].kind", "is not one of"),
    ("extra field", {"queries": [{"kind": "forecast", "shots": 3}]}, "$.queries[0]", "'shots'"),
    ("bad bit", {"queries": [{"kind": "amplitudes", "bitstrings": ["0x"]}]},
     "$.queries[0].bitstrings[0]", "does not match"),
    ("short bitstring", {"queries": [{"kind": "amplitudes", "bitstrings": ["01"]}]},
     "$.queries[0].bitstrings[0]", "has 2 bit(s) but the circuit has 6"),
    ("qubit out of range", {"queries": [{"kind": "marginal", "qubits": [1, 9]}]},
     "$.queries[0].qubits[1]", "out of range"),
    ("repeated qubits", {"queries": [{"kind": "marginal", "qubits": [1, 1]}]},
     "$.queries[0].qubits", "non-unique"),
    ("bad observable", {"queries": [{"kind": "expectation", "observable": "Z0 Q1"}]},
     "$.queries[0].observable", "unexpected character"),
    ("observable qubit", {"queries": [{"kind": "expectation", "observable": "Z7"}]},
     "$.queries[0].observable", "qubit 7"),
    ("zero shots", {"queries": [{"kind": "samples", "shots": 0}]},
     "$.queries[0].shots", "less than the minimum"),
    ("one xeb sample", {"queries": [{"kind": "xeb", "bitstrings": ["000000"]}]},
     "$.queries[0].bitstrings", "too short"),
    ("precision", {"options": {"precision": "quad"}}, "$.options.precision", "is not one of"),
    ("memory text", {"options": {"memory_limit": "lots"}}, "$.options.memory_limit", "memory"),
    ("time budget", {"options": {"time_budget": 0}}, "$.options.time_budget", "less than or equal"),
    ("missing input", {"inputs": {}}, "$.circuit.qasm", "line 3, column 13: input 'theta'"),
    ("unknown input", {"inputs": {"theta": 1, "phi": 2}}, "$.inputs", "not declared"),
    ("qasm error", {"circuit": {"qasm": "OPENQASM 3.0;\nqubit q;\nfoo q;\n"}, "inputs": {}},
     "$.circuit.qasm", "line 3, column 1: unknown gate 'foo'"),
    ("file name instead of text", {"circuit": {"qasm": "/etc/hostname"}, "inputs": {}},
     "$.circuit.qasm", "not OpenQASM text"),
    ("include", {"circuit": {"qasm": 'OPENQASM 2.0;\ninclude "other.inc";\nqreg q[1];\n'},
                 "inputs": {}}, "$.circuit.qasm", "cannot include 'other.inc'"),
    ("bad gate", {"circuit": {"num_qubits": 2, "operations": [["h", [0]], ["cx", [0, 0]]]},
                  "inputs": {}}, "$.circuit.operations[1]", "repeats a qubit"),
    ("inputs with operations", {"circuit": {"num_qubits": 1, "operations": []}},
     "$.inputs", "no named angle"),
    ("angle without input", {"circuit": {"num_qubits": 1, "operations": [["rx", [0], ["2*t"]]]},
                             "inputs": {}}, "$.inputs", "no value for t"),
    ("NaN", {"inputs": {"theta": float("nan")}}, "$.inputs.theta", "not a finite number"),
]  # fmt: skip


def merged(changes) -> object:
    """ONE_OF_EACH with top-level fields replaced (``None`` removes one); a non-dict as is."""
    if not isinstance(changes, dict):
        return changes
    document = copy.deepcopy(ONE_OF_EACH)
    for key, value in copy.deepcopy(changes).items():
        if value is None:
            del document[key]
        else:
            document[key] = value
    if "circuit" in changes:  # another circuit: keep only a query that fits any circuit
        document["queries"] = [{"kind": "forecast"}]
    return document


@pytest.mark.parametrize(
    ("changes", "path", "fragment"), [c[1:] for c in INVALID], ids=[c[0] for c in INVALID]
)
def test_invalid_documents_are_refused_with_json_paths(changes, path, fragment):
    result = run_job(merged(changes))
    assert result["status"] == "invalid" and result["answers"] == []
    assert schema_errors(result, "result") == []
    found = [e for e in result["errors"] if e["path"] == path]
    assert found and any(fragment in e["message"] for e in found), result["errors"]


def test_every_error_is_reported_at_once():
    document = copy.deepcopy(ONE_OF_EACH)
    document["queries"][0]["bitstrings"] = ["0" * 5, "1" * 7, "000000"]
    document["queries"][1]["qubits"] = [6, 0]
    result = run_job(document)
    assert [e["path"] for e in result["errors"]] == [
        "$.queries[0].bitstrings[0]",
        "$.queries[0].bitstrings[1]",
        "$.queries[1].qubits[0]",
    ]


def test_limits_cap_what_a_job_may_ask_for():
    limits = Limits(memory_limit=1 << 20, time_budget=10.0, max_qubits=4)
    result = run_job(ONE_OF_EACH, limits=limits)
    paths = {e["path"]: e["message"] for e in result["errors"]}
    assert "limit of 1.00 MiB" in paths["$.options.memory_limit"]
    assert "limit of 10 s" in paths["$.options.time_budget"]
    assert "more than the 4" in paths["$.circuit"]


def test_the_time_budget_stops_a_job_between_queries():
    document = copy.deepcopy(ONE_OF_EACH)
    document["options"]["time_budget"] = 1e-6
    result = run_job(document)
    assert result["status"] == "failed"
    first = result["answers"][0]
    assert first["status"] == "failed" and first["error"]["type"] == "JobStopped"
    assert "time budget" in first["error"]["message"]
    assert {a["status"] for a in result["answers"][1:]} == {"not run"}


class CancelAfter(Monitor):
    """Cancels the job at its ``n``-th check."""

    def __init__(self, n: int):
        super().__init__()
        self.n, self.events = n, []

    def check(self):
        self.n -= 1
        if self.n < 0:
            raise JobStopped("the job was cancelled", "cancelled")

    def query_started(self, index):
        self.events.append(("query", index))

    def contraction_done(self, index, record):
        self.events.append(("contraction", index, record.num_slices))


def test_a_monitor_sees_progress_and_can_cancel():
    monitor = CancelAfter(2)
    result = run_job(ONE_OF_EACH, monitor=monitor)
    assert result["status"] == "cancelled"
    assert [a["status"] for a in result["answers"]] == ["done", "failed"] + ["not run"] * 4
    assert monitor.events[0] == ("query", 0) and ("contraction", 0, 1) in monitor.events


def test_a_rerun_with_the_same_checkpoint_folder_resumes_and_gives_the_same_bits(tmp_path):
    first = run_job(ONE_OF_EACH, checkpoint=tmp_path)
    again = run_job(ONE_OF_EACH, checkpoint=tmp_path)
    for a, b in zip(first["answers"], again["answers"]):
        a, b = dict(a), dict(b)
        for key in ("seconds", "contractions"):
            a.pop(key), b.pop(key)
        if a["kind"] == "forecast":
            continue  # planning time and the measured rate are not reproducible
        assert a == b
    redone = [c["slices_run"] for c in again["answers"][0]["contractions"]]
    assert redone and set(redone) == {0}  # every contraction came from its checkpoint


def test_a_checkpoint_of_another_plan_is_discarded_and_the_query_restarts(tmp_path):
    first = run_job(ONE_OF_EACH, checkpoint=tmp_path)
    other = copy.deepcopy(ONE_OF_EACH)
    other["inputs"]["theta"] = 0.1  # other gate values: the old checkpoint does not fit
    result = run_job(other, checkpoint=tmp_path)
    answer = result["answers"][0]
    assert answer["status"] == "done" and answer["checkpoint"].startswith("restarted:")
    expected = tnsim.amplitudes(circuit_of(other), other["queries"][0]["bitstrings"])
    got = [a["real"] + 1j * a["imag"] for a in answer["amplitudes"]]
    np.testing.assert_array_equal(got, expected)
    assert first["answers"][0]["amplitudes"] != answer["amplitudes"]


def test_a_failing_query_does_not_stop_the_others():
    document = copy.deepcopy(ONE_OF_EACH)
    document["options"]["memory_limit"] = 64
    result = run_job(document)
    assert result["status"] == "failed"
    statuses = [a["status"] for a in result["answers"]]
    assert "failed" in statuses and "not run" not in statuses
    failed = next(a for a in result["answers"] if a["status"] == "failed")
    assert failed["error"]["type"] == "ResourceLimitError"


# ---------------------------------------------------------------------------- tnsim run


def test_tnsim_run_answers_a_document_with_one_query_of_each_kind(tmp_path, capsys):
    path = tmp_path / "job.json"
    path.write_text(json.dumps(ONE_OF_EACH))
    out = tmp_path / "result.json"
    assert main(["run", str(path), "-o", str(out)]) == 0
    result = json.loads(out.read_text())
    assert result["status"] == "done" and len(result["answers"]) == 6
    assert [a["kind"] for a in result["answers"]] == [q["kind"] for q in ONE_OF_EACH["queries"]]
    direct = run_job(ONE_OF_EACH)
    assert result["answers"][0]["amplitudes"] == direct["answers"][0]["amplitudes"]
    assert capsys.readouterr().err == ""


def test_tnsim_run_reads_stdin(monkeypatch, capsys):
    data = json.dumps(ONE_OF_EACH).encode()
    monkeypatch.setattr("sys.stdin", io.TextIOWrapper(io.BytesIO(data)))
    assert main(["run", "-"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["status"] == "done"


@pytest.mark.parametrize(
    ("text", "fragment"),
    [
        ('{"version": 1,', "job.json:1:15: invalid JSON"),
        ('{"version": NaN}', "NaN is not a JSON number"),
        (
            '{"version": 1}',
            "invalid job document: $: 'circuit' is a required property (and 1 more)",
        ),
    ],
)
def test_tnsim_run_refuses_bad_documents_in_one_line(tmp_path, capsys, text, fragment, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "job.json").write_text(text)
    assert main(["run", "job.json"]) == 2
    captured = capsys.readouterr()
    assert fragment in captured.err and captured.err.count("\n") == 1, captured.err
    if "invalid job document" in fragment:
        assert json.loads(captured.out)["status"] == "invalid"  # the result is still written
    else:
        assert captured.out == ""


def test_tnsim_run_missing_file(capsys):
    assert main(["run", os.path.join("no", "such.json")]) == 2
    assert "no such file" in capsys.readouterr().err


# ---------------------------------------------------------------------------- stdio


def test_stdio_lines_in_order_with_invalid_lines_answered():
    lines = [json.dumps(ONE_OF_EACH), "", "{not json", json.dumps({"version": 1})]
    out = io.StringIO()
    assert serve_lines(io.StringIO("\n".join(lines) + "\n"), out) == 3
    results = [json.loads(line) for line in out.getvalue().splitlines()]
    assert [r["status"] for r in results] == ["done", "invalid", "invalid"]
    assert results[1]["errors"][0]["message"].startswith("line 3, column 2: invalid JSON")
    direct = run_job(ONE_OF_EACH)
    assert results[0]["answers"][0]["amplitudes"] == direct["answers"][0]["amplitudes"]


def test_operation_lists_take_named_angles_bound_by_inputs():
    document = {
        "version": 1,
        "circuit": {
            "num_qubits": 2,
            "operations": [["rx", [0], ["2*gamma + 0.1"]], ["rzz", [0, 1], ["-0.5*beta"]]],
        },
        "inputs": {"gamma": 0.3, "beta": -1.2},
        "queries": [{"kind": "amplitudes", "bitstrings": ["00", "10"]}],
    }
    result = run_job(document)
    circuit = tnsim.Circuit(2).rx("2*gamma + 0.1", 0).rzz("-0.5*beta", 0, 1)
    expected = tnsim.amplitudes(circuit.bind(document["inputs"]), ["00", "10"])
    got = [a["real"] + 1j * a["imag"] for a in result["answers"][0]["amplitudes"]]
    np.testing.assert_array_equal(got, expected)
