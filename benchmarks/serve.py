"""Latency and memory of ``tnsim serve`` against the Python API, side by side in one run.

Not part of the tnsim library.  ``--jobs`` small job documents (default 200),
each the amplitudes of ``--bitstrings`` random bitstrings of a 20-qubit random
grid circuit (4 x 5 qubits, 8 cycles, its own seed per job, as OpenQASM 2.0
text), are answered three ways on this machine:

1. the Python API, ``tnsim.run_job(document)``, one job after another: the API's
   own time per job;
2. ``tnsim serve`` on 127.0.0.1 (a subprocess, ``--workers`` jobs at once), one
   client: submit (``POST /v1/jobs``) then fetch with ``GET .../result?wait=60``
   over one kept-alive HTTP connection: latency per job, from the submission to
   the last byte of the result;
3. the same server, ``--clients`` concurrent clients (default 8), each with
   its own connection; beside it the Python API driven the same way (the
   same number of threads calling ``run_job`` at once in one process).

Every service result must equal the API's (the amplitudes bit for bit).  The
server's resident memory (``VmRSS``) is read before the first job, after a
warm-up of 10% of the jobs, and at the end.  Figures are medians (and 90th
percentiles) in milliseconds; the load average is printed, as timings on a
shared machine move with it.

Usage::

    python benchmarks/serve.py            # 200 jobs, 8 clients
    python benchmarks/serve.py --quick    # 40 jobs, 4 clients (CI)
"""

from __future__ import annotations

import argparse
import http.client
import json
import os
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from tnsim import run_job, write_qasm  # noqa: E402
from tnsim.circuits.families import grid_circuit  # noqa: E402


def make_jobs(count: int, bitstrings: int, seed: int = 0) -> list[dict]:
    """``count`` job documents: amplitudes of random bitstrings of 20-qubit grid circuits."""
    rng = np.random.default_rng(seed)
    jobs = []
    for k in range(count):
        circuit = grid_circuit(4, 5, 8, seed=seed + k)
        bits = ["".join(map(str, rng.integers(0, 2, 20))) for _ in range(bitstrings)]
        jobs.append(
            {
                "version": 1,
                "circuit": {"qasm": write_qasm(circuit)},
                "queries": [{"kind": "amplitudes", "bitstrings": bits}],
            }
        )
    return jobs


def rss_bytes(pid: int) -> int:
    """Resident memory of a process (Linux ``/proc``; psutil elsewhere)."""
    try:
        with open(f"/proc/{pid}/status") as fh:
            for line in fh:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    import psutil

    return psutil.Process(pid).memory_info().rss


class Client:
    """One kept-alive HTTP connection to the server."""

    def __init__(self, host: str, port: int):
        self.conn = http.client.HTTPConnection(host, port, timeout=120)

    def call(self, method: str, path: str, body: bytes | None = None) -> tuple[int, dict]:
        headers = {"Content-Type": "application/json"} if body is not None else {}
        self.conn.request(method, path, body=body, headers=headers)
        response = self.conn.getresponse()
        return response.status, json.loads(response.read())

    def run(self, document: dict) -> tuple[float, dict]:
        """Submit a job and fetch its result; return the latency (s) and the result."""
        body = json.dumps(document).encode()
        start = time.perf_counter()
        status, reply = self.call("POST", "/v1/jobs", body)
        if status != 202:
            raise RuntimeError(f"submission refused: {status} {reply}")
        while True:
            status, result = self.call("GET", f"/v1/jobs/{reply['id']}/result?wait=60")
            if status == 200:
                return time.perf_counter() - start, result


def start_server(folder: str, workers: int) -> tuple[subprocess.Popen, str, int]:
    """Start ``tnsim serve`` on a free port; return the process, host and port."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    args = [sys.executable, "-m", "tnsim", "serve", "--port", "0", "--state", folder]
    args += ["--jobs", str(workers), "--queue", "100000"]
    proc = subprocess.Popen(args, env=env, stderr=subprocess.PIPE, text=True)
    line = proc.stderr.readline()
    if "listening on http://" not in line:
        proc.kill()
        raise RuntimeError(f"the server did not start: {line}{proc.stderr.read()}")
    info = json.loads((Path(folder) / "server.json").read_text())
    return proc, info["host"], info["port"]


def concurrent(jobs: list[dict], clients: int, work) -> tuple[list[float], list[dict]]:
    """Run ``work(k, document) -> (seconds, result)`` over the jobs from ``clients`` threads."""
    times: list[float] = [0.0] * len(jobs)
    results: list[dict] = [{}] * len(jobs)
    errors: list[BaseException] = []

    def loop(offset: int) -> None:
        try:
            for k in range(offset, len(jobs), clients):
                times[k], results[k] = work(offset, jobs[k])
        except BaseException as exc:  # reported after the threads end
            errors.append(exc)

    threads = [threading.Thread(target=loop, args=(c,)) for c in range(clients)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    if errors:
        raise errors[0]
    return times, results


def api_call(_: int, document: dict) -> tuple[float, dict]:
    start = time.perf_counter()
    result = run_job(document)
    return time.perf_counter() - start, result


def amplitudes_of(result: dict) -> list:
    return [(a["real"], a["imag"]) for q in result["answers"] for a in q.get("amplitudes", [])]


def summary(label: str, seconds: list[float]) -> tuple[float, float]:
    ms = sorted(1e3 * s for s in seconds)
    median, p90 = statistics.median(ms), ms[int(0.9 * (len(ms) - 1))]
    print(f"  {label:<44} median {median:8.1f} ms   p90 {p90:8.1f} ms")
    return median, p90


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--jobs", type=int, default=200, help="job documents (default 200)")
    ap.add_argument("--clients", type=int, default=8, help="concurrent clients (default 8)")
    ap.add_argument("--workers", type=int, default=2, help="jobs the server runs at once")
    ap.add_argument("--bitstrings", type=int, default=4, help="bitstrings per job (default 4)")
    ap.add_argument("--quick", action="store_true", help="40 jobs, 4 clients")
    args = ap.parse_args(argv)
    if args.quick:
        args.jobs, args.clients = 40, 4
    jobs = make_jobs(args.jobs, args.bitstrings)
    print(
        f"{args.jobs} jobs (20-qubit amplitudes, {args.bitstrings} bitstrings each), "
        f"load average {os.getloadavg()[0]:.2f}"
    )
    api_serial, api_results = concurrent(jobs, 1, api_call)
    with tempfile.TemporaryDirectory() as folder:
        proc, host, port = start_server(folder, args.workers)
        try:
            rss0 = rss_bytes(proc.pid)
            client = Client(host, port)
            warm = max(1, args.jobs // 10)
            for document in jobs[:warm]:
                client.run(document)
            rss_warm = rss_bytes(proc.pid)
            one, one_results = concurrent(jobs, 1, lambda _, d: client.run(d))
            clients = [Client(host, port) for _ in range(args.clients)]
            many, many_results = concurrent(jobs, args.clients, lambda c, d: clients[c].run(d))
            rss_end = rss_bytes(proc.pid)
        finally:
            proc.terminate()
            proc.wait(30)
    api_many, api_many_results = concurrent(jobs, args.clients, api_call)
    pairs = [
        (r, a)
        for results in (one_results, many_results, api_many_results)
        for r, a in zip(results, api_results)
    ]
    done = all(r["status"] == "done" for r, _ in pairs)
    equal = sum(amplitudes_of(r) == amplitudes_of(a) for r, a in pairs)
    worst = max(
        abs(complex(*x) - complex(*y)) / max(abs(complex(*y)), 1e-300)
        for r, a in pairs
        for x, y in zip(amplitudes_of(r), amplitudes_of(a))
    )
    same = done and worst <= 1e-12
    print(
        f"all {len(pairs)} service and threaded-API results answered: {done}; equal to the "
        f"API's bit for bit: {equal}; largest relative difference {worst:.1e} (a different "
        "contraction order, chosen by the time-limited planner, rounds differently)"
    )
    print("one client at a time:")
    api_median, _ = summary("Python API, run_job (the API's own time)", api_serial)
    one_median, _ = summary("tnsim serve, submit + result", one)
    print(f"  service overhead (median difference): {one_median - api_median:.1f} ms")
    print(f"{args.clients} concurrent clients, server running {args.workers} jobs at once:")
    api_many_median, _ = summary(f"Python API, {args.clients} threads", api_many)
    many_median, _ = summary("tnsim serve", many)
    print(
        f"  service latency above the threaded API (median): {many_median - api_many_median:.1f} ms"
    )
    mib = 1024 * 1024
    print(
        f"server RSS: {rss0 / mib:.1f} MiB at start, {rss_warm / mib:.1f} MiB after {warm} "
        f"warm-up jobs, {rss_end / mib:.1f} MiB after {warm + 2 * args.jobs} jobs "
        f"(growth after warm-up {(rss_end - rss_warm) / mib:.1f} MiB)"
    )
    print(f"load average at the end {os.getloadavg()[0]:.2f}")
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
