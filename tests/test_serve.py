"""Tests of ``tnsim serve``: a live server on 127.0.0.1 driven by a real HTTP client.

Each server is a separate process (``python -m tnsim serve --port 0``) with its own state
folder; requests go through :mod:`urllib.request`.  Answers are compared with
:func:`tnsim.run_job` in this process on the same documents.
"""

from __future__ import annotations

import copy
import json
import os
import signal
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest

import tnsim
from tnsim import run_job, write_qasm
from tnsim.circuits.families import brickwork, grid_circuit

ROOT = Path(__file__).resolve().parent.parent

SMALL = {
    "version": 1,
    "circuit": {"qasm": write_qasm(grid_circuit(3, 3, 4, seed=1), version=3)},
    "queries": [
        {"kind": "amplitudes", "bitstrings": ["000000000", "110000001"]},
        {"kind": "marginal", "qubits": [0, 4]},
        {"kind": "expectation", "observable": "Z0 Z1 - 0.5 X4"},
        {"kind": "samples", "shots": 10, "seed": 5},
        {"kind": "xeb", "bitstrings": ["000000000", "110000001", "111111111"]},
        {"kind": "forecast"},
    ],
}


def slow_job(width: int = 30, terms: int = 60) -> dict:
    """A job of many light-cone contractions (a second or more): a checkpointed amplitude
    query first, then an expectation value of many terms."""
    circuit = brickwork(width, 6, seed=3)
    observable = " + ".join(f"Z{i % width} Z{(i + 1) % width}" for i in range(terms // 2))
    observable += " + " + " + ".join(f"X{i % width}" for i in range(terms // 2))
    return {
        "version": 1,
        "circuit": {"qasm": write_qasm(circuit)},
        "queries": [
            {"kind": "amplitudes", "bitstrings": ["0" * width, "1" + "0" * (width - 1)]},
            {"kind": "expectation", "observable": observable},
        ],
    }


class Server:
    """A ``tnsim serve`` process on a free port of 127.0.0.1."""

    def __init__(self, state: Path, *args: str):
        env = dict(os.environ)
        env["PYTHONPATH"] = os.pathsep.join([str(ROOT), env.get("PYTHONPATH", "")])
        cmd = [sys.executable, "-m", "tnsim", "serve", "--port", "0", "--state", str(state)]
        self.proc = subprocess.Popen(
            [*cmd, *args], env=env, stderr=subprocess.PIPE, stdout=subprocess.DEVNULL, text=True
        )
        line = self.proc.stderr.readline()
        if "listening on " not in line:
            self.proc.kill()
            raise RuntimeError(f"server did not start: {line}{self.proc.stderr.read()}")
        self.url = line.split("listening on ")[1].split()[0]
        self.banner = line

    def call(self, method: str, path: str, body=None, headers=None) -> tuple[int, dict]:
        data = body if isinstance(body, bytes) or body is None else json.dumps(body).encode()
        request = urllib.request.Request(self.url + path, data=data, method=method)
        for key, value in (headers or {}).items():
            request.add_header(key, value)
        try:
            with urllib.request.urlopen(request, timeout=120) as response:
                return response.status, json.loads(response.read())
        except urllib.error.HTTPError as error:
            with error:
                code, kind, body = error.code, error.headers["Content-Type"], error.read()
        if not kind.startswith("application/json"):
            raise AssertionError(f"a refusal that is not JSON: {kind}: {body[:200]!r}")
        return code, json.loads(body)

    def submit(self, document: dict, headers=None) -> str:
        status, reply = self.call("POST", "/v1/jobs", document, headers)
        assert status == 202, reply
        return reply["id"]

    def result(self, job_id: str, headers=None) -> dict:
        deadline = time.monotonic() + 300
        while time.monotonic() < deadline:
            status, reply = self.call("GET", f"/v1/jobs/{job_id}/result?wait=30", None, headers)
            if status == 200:
                return reply
            assert status == 202, reply
        raise TimeoutError(job_id)

    def wait_state(self, job_id: str, test, timeout: float = 120.0) -> dict:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            status, reply = self.call("GET", f"/v1/jobs/{job_id}")
            assert status == 200, reply
            if test(reply):
                return reply
            time.sleep(0.01)
        raise TimeoutError(f"{job_id}: {reply}")

    def stop(self) -> None:
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
            try:
                self.proc.wait(30)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        self.proc.stderr.close()

    def kill(self) -> None:
        self.proc.kill()  # SIGKILL: no clean-up of any kind
        self.proc.wait()
        self.proc.stderr.close()


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    s = Server(tmp_path_factory.mktemp("serve") / "state")
    yield s
    s.stop()


def without_timings(result: dict) -> dict:
    """A result without what depends on the moment: wall times, the forecast's measured
    rate and its default memory limit."""
    out = copy.deepcopy(result)
    out.pop("seconds")
    for answer in out["answers"]:
        answer.pop("seconds")
        answer.pop("contractions")
        if answer["kind"] == "forecast":
            # the measured rates and every time made from them (another process may
            # have measured them anew); the default limit is half of the memory free now
            report = answer["report"]
            for key in [k for k in report if k.endswith("seconds")]:
                report.pop(key)
            for key in ("flop_rate", "memory_limit"):
                report.pop(key)
    return out


# ---------------------------------------------------------------------------- the API


def test_submit_poll_and_result_give_the_numbers_of_run_job(server):
    job_id = server.submit(SMALL)
    status, reply = server.call("GET", f"/v1/jobs/{job_id}")
    assert status == 200 and reply["id"] == job_id
    assert reply["state"] in ("queued", "running", "done")
    result = server.result(job_id)
    assert result["status"] == "done"
    assert without_timings(result) == without_timings(run_job(SMALL))
    status, reply = server.call("GET", f"/v1/jobs/{job_id}")
    assert reply["state"] == "done" and reply["attempts"] == 1 and reply["finished"] > 0


def test_health_schemas_and_refusals_are_json(server):
    status, health = server.call("GET", "/v1/health")
    assert status == 200 and health["status"] == "ok" and health["workers"] == 2
    status, schema = server.call("GET", "/v1/schemas/job")
    assert status == 200 and schema["$id"] == "urn:tnsim:schema:job:1"
    for method, path, code in [
        ("GET", "/nowhere", 404),
        ("GET", "/v1/jobs/" + "0" * 32, 404),
        ("GET", "/v1/jobs/../../etc/passwd", 404),
        ("PUT", "/v1/jobs", 405),
        ("POST", "/v1/health", 405),
        ("GET", "/v1/jobs/" + "0" * 32 + "/result?wait=9999", 404),
    ]:
        status, reply = server.call(method, path)
        assert status == code and reply["error"]["status"] == code, (path, reply)
        assert "Traceback" not in json.dumps(reply)


def test_schema_errors_come_back_with_json_paths(server):
    document = copy.deepcopy(SMALL)
    document["queries"][0]["bitstrings"][1] = "1100"
    document["queries"][1]["qubits"] = [0, 12]
    document["options"] = {"precision": "half"}
    status, reply = server.call("POST", "/v1/jobs", document)
    assert status == 400
    assert reply["error"]["message"].startswith("invalid job document (1 error(s))")
    assert [e["path"] for e in reply["error"]["errors"]] == ["$.options.precision"]
    document["options"] = {}
    status, reply = server.call("POST", "/v1/jobs", document)
    assert [e["path"] for e in reply["error"]["errors"]] == [
        "$.queries[0].bitstrings[1]",
        "$.queries[1].qubits[1]",
    ]
    for body, fragment in [
        (b'{"version": 1', "invalid JSON at line 1, column 14"),
        (b'{"version": Infinity}', "Infinity is not a JSON number"),
        (b"\xff\xfe", "not UTF-8"),
    ]:
        status, reply = server.call("POST", "/v1/jobs", body)
        assert status == 400 and fragment in reply["error"]["message"]


def test_results_and_status_of_a_waiting_request(server):
    status, reply = server.call("GET", "/v1/jobs/" + "a" * 32 + "/result")
    assert status == 404
    job_id = server.submit(slow_job(terms=20))
    status, reply = server.call("GET", f"/v1/jobs/{job_id}/result?wait=0")
    assert status in (200, 202)
    if status == 202:
        assert reply["state"] in ("queued", "running")
    status, reply = server.call("GET", f"/v1/jobs/{job_id}/result?wait=abc")
    assert status == 400 and "wait must be seconds" in reply["error"]["message"]
    assert server.result(job_id)["status"] == "done"


# ---------------------------------------------------------------------------- limits


def test_queue_full_is_429_and_cancel_works_queued_and_running(tmp_path):
    s = Server(tmp_path / "state", "--jobs", "1", "--queue", "1")
    try:
        running = server_running(s, s.submit(slow_job(terms=400)))
        queued = s.submit(SMALL)
        status, reply = s.call("POST", "/v1/jobs", SMALL)
        assert status == 429 and "queue is full" in reply["error"]["message"]
        status, reply = s.call("DELETE", f"/v1/jobs/{queued}")
        assert (status, reply["state"]) == (200, "cancelled")
        assert s.result(queued)["status"] == "cancelled"
        status, reply = s.call("DELETE", f"/v1/jobs/{running}")
        assert (status, reply["state"]) == (200, "cancelling")
        result = s.result(running)
        assert result["status"] == "cancelled"
        assert result["answers"][-1]["status"] in ("failed", "not run")
        status, reply = s.call("DELETE", f"/v1/jobs/{running}")
        assert status == 409 and "already finished (cancelled)" in reply["error"]["message"]
        assert s.result(s.submit(SMALL))["status"] == "done"  # the queue has room again
    finally:
        s.stop()


def server_running(s: Server, job_id: str) -> str:
    s.wait_state(job_id, lambda r: r["state"] == "running" and r["progress"] is not None)
    return job_id


def test_token_and_body_limit(tmp_path):
    token = "s3cret-token-0123456789"
    (tmp_path / "token").write_text(token + "\n")
    s = Server(tmp_path / "state", "--token-file", str(tmp_path / "token"), "--max-body", "4KiB")
    good = {"Authorization": f"Bearer {token}"}
    try:
        for headers in ({}, {"Authorization": "Bearer wrong"}, {"Authorization": token}):
            status, reply = s.call("GET", "/v1/health", None, headers)
            assert status == 401 and "token" in reply["error"]["message"]
            status, _ = s.call("POST", "/v1/jobs", SMALL, headers)
            assert status == 401
        status, _ = s.call("GET", "/v1/health", None, good)
        assert status == 200
        big = copy.deepcopy(SMALL)
        big["queries"].append({"kind": "amplitudes", "bitstrings": ["0" * 9] * 500})
        status, reply = s.call("POST", "/v1/jobs", big, good)
        assert status == 413 and "4096 bytes" in reply["error"]["message"]
        job_id = s.submit(SMALL, good)
        assert s.result(job_id, good)["status"] == "done"
    finally:
        s.stop()


def test_binding_beyond_this_machine_needs_a_token(tmp_path):
    env = dict(
        os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")])
    )
    args = ["serve", "--host", "0.0.0.0", "--port", "0", "--state", str(tmp_path / "s")]
    done = subprocess.run(
        [sys.executable, "-m", "tnsim", *args], env=env, capture_output=True, text=True, timeout=60
    )
    assert done.returncode == 2
    assert done.stderr.count("\n") == 1 and "--token-file" in done.stderr


def test_one_server_per_state_folder(tmp_path):
    s = Server(tmp_path / "state")
    try:
        env = dict(os.environ)
        env["PYTHONPATH"] = os.pathsep.join([str(ROOT), env.get("PYTHONPATH", "")])
        args = ["serve", "--port", "0", "--state", str(tmp_path / "state")]
        done = subprocess.run(
            [sys.executable, "-m", "tnsim", *args], env=env, capture_output=True, text=True,
            timeout=60,
        )  # fmt: skip
        assert done.returncode == 2 and "another tnsim serve" in done.stderr
    finally:
        s.stop()


# ---------------------------------------------------------------------------- crashes


def test_kill_9_and_restart_loses_nothing(tmp_path):
    """A finished result survives; the job killed while running runs again and resumes
    its finished contractions from their checkpoints; the queued job runs."""
    state = tmp_path / "state"
    s = Server(state, "--jobs", "1")
    try:
        finished = s.submit(SMALL)
        before = s.result(finished)
        running = s.submit(slow_job())
        queued = s.submit(SMALL)
        s.wait_state(running, lambda r: r["state"] == "running" and r["progress"]["query"] == 1)
    finally:
        s.kill()
    s = Server(state, "--jobs", "1")
    try:
        assert "1 interrupted job(s) resumed" in s.banner
        assert s.result(finished) == before
        result = s.result(running)
        _, reply = s.call("GET", f"/v1/jobs/{running}")
        assert reply["attempts"] == 2
        assert without_timings(result) == without_timings(run_job(slow_job()))
        amplitude_runs = result["answers"][0]["contractions"]
        assert amplitude_runs and all(c["slices_run"] == 0 for c in amplitude_runs)
        assert s.result(queued)["status"] == "done"
        assert not (state / "checkpoints" / running).exists()
    finally:
        s.stop()


@pytest.mark.slow
def test_kill_9_during_a_checkpointed_sliced_contraction(tmp_path):
    """The running job is a sliced amplitude under its memory limit; the server is killed
    after two chunks were checkpointed; the restarted server finishes the job from the
    checkpoint, with the plan kept in it (issue 18: no planning again, so no other tree),
    and the amplitude is bit for bit that of an uninterrupted run of the same plan."""
    circuit = brickwork(18, 40, seed=1)
    document = {
        "version": 1,
        "circuit": {"qasm": write_qasm(circuit, version=3)},
        "queries": [{"kind": "amplitudes", "bitstrings": ["0" * 18]}],
        "options": {"memory_limit": 1145044992 // 64},
    }
    state = tmp_path / "state"
    s = Server(state, "--jobs", "1")
    try:
        job_id = s.submit(document)
        reply = s.wait_state(
            job_id,
            lambda r: r["state"] == "done" or (r.get("progress") or {}).get("chunks_done", 0) >= 2,
            600,
        )
    finally:
        s.kill()
    assert reply["state"] != "done", "the job ended before the server was killed"
    kept = tmp_path / "plans.json"  # the plan the killed run made, for the reference run
    kept.write_bytes((state / "checkpoints" / job_id / "query-0000" / "plans.json").read_bytes())
    s = Server(state, "--jobs", "1")
    try:
        result = s.result(job_id)
    finally:
        s.stop()
    answer = result["answers"][0]
    assert result["status"] == "done"
    direct = tnsim.amplitude(circuit, "0" * 18)
    got = answer["amplitudes"][0]["real"] + 1j * answer["amplitudes"][0]["imag"]
    assert got == pytest.approx(direct, rel=1e-12)
    [record] = answer["contractions"][-1:]
    assert "checkpoint" not in answer  # resumed, not restarted on another plan
    assert 0 < record["slices_run"] < record["num_slices"]  # resumed from the checkpoint
    with tnsim.run_options(plan_file=str(kept)):  # the same plan, run without interruption
        reference = run_job(document)
    [full] = reference["answers"][0]["contractions"]
    assert full["slices_run"] == full["num_slices"] == record["num_slices"]
    assert answer["amplitudes"] == reference["answers"][0]["amplitudes"]  # bit for bit


# ---------------------------------------------------------------------------- stdio


def test_stdio_round_trip():
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT), env.get("PYTHONPATH", "")])
    lines = json.dumps(SMALL) + "\n" + '{"version": 1}\n' + json.dumps(SMALL) + "\n"
    done = subprocess.run(
        [sys.executable, "-m", "tnsim", "serve", "--stdio"],
        input=lines,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    results = [json.loads(line) for line in done.stdout.splitlines()]
    assert [r["status"] for r in results] == ["done", "invalid", "done"]
    assert without_timings(results[0]) == without_timings(run_job(SMALL))
