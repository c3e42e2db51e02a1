"""Long runs that survive: checkpoint folders keep their plans, resumes never plan again.

The first run of each test is a real process stopped by a signal; the resume
runs here with the planner replaced by a counter that fails the test if called.
"""

import json
import os
import random
import signal
import subprocess
import sys
import textwrap
import time
import zipfile

import numpy as np
import pytest

import tnsim.plan.driver as driver
from tnsim.circuits.families import grid_circuit
from tnsim.circuits.qasm import write_qasm
from tnsim.cli import main
from tnsim.errors import CheckpointError
from tnsim.execution.checkpoint import Checkpoint
from tnsim.execution.options import run_options
from tnsim.queries.amplitudes import amplitude

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BITS = "01101001011010010110"

# The child: chunks of one slice (tiny CHUNK_FLOPS), each slowed down so a signal lands
# between chunks; prints a line per saved chunk.
_CHILD = textwrap.dedent(
    """
    import sys, time
    import tnsim.execution.executors as executors
    import tnsim.execution.slices as slices
    executors.CHUNK_FLOPS = 1e4
    real = slices.contract_slices
    def slow(*args):
        time.sleep({pause})
        return real(*args)
    slices.contract_slices = slow
    from tnsim.cli import main
    sys.exit(main(sys.argv[1:]))
    """
)


@pytest.fixture(scope="module")
def circuit_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("circ") / "g.qasm"
    path.write_text(write_qasm(grid_circuit(4, 5, 8, seed=3)))
    return path


@pytest.fixture
def planner_calls(monkeypatch):
    """Replace the planner everywhere tnsim calls it by a counter that fails the test."""
    calls = []
    real = driver.make_plan

    def counted(*args, **kwargs):
        calls.append(1)
        raise AssertionError("the planner was called")

    for name, module in list(sys.modules.items()):
        if name.startswith("tnsim") and getattr(module, "make_plan", None) is real:
            monkeypatch.setattr(module, "make_plan", counted)
    return calls


def _args(circuit, folder, *extra):
    return ["amp", str(circuit), "--bits", BITS, "--memory", "4KiB", "--json",
            "--checkpoint", str(folder), *extra]  # fmt: skip


def _child(args, pause):
    env = dict(os.environ, PYTHONPATH=ROOT)
    code = _CHILD.format(pause=pause)
    return subprocess.Popen(
        [sys.executable, "-c", code, *args],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=env,
    )


def _wait_for(path, child, timeout=60):
    end = time.monotonic() + timeout
    while not os.path.exists(path):
        assert child.poll() is None, child.stderr.read()
        assert time.monotonic() < end, "no chunk was saved in time"
        time.sleep(0.02)


def _saved_chunks(folder) -> int:
    with zipfile.ZipFile(folder / "part-00000.ckpt") as zf:
        header = json.loads(np.load(zf.open("header.npy")).tobytes())
    return header["prefix_count"] + len(header["pending"])


def _interrupt(args, folder, sig=signal.SIGINT, delay=0.0):
    child = _child(args, pause=0.05)
    try:
        _wait_for(folder / "part-00000.ckpt", child)
        time.sleep(delay)
        child.send_signal(sig)
        status = child.wait(timeout=60)
    finally:
        if child.poll() is None:
            child.kill()
        child.wait()
        child.stdout.close()
        child.stderr.close()
    return status


def _amplitude_json(capsys, args) -> tuple[float, float]:
    assert main(args) == 0
    row = json.loads(capsys.readouterr().out)["amplitudes"][0]
    return row["real"], row["imag"]


def _reference(circuit, folder, capsys, monkeypatch):
    """The uninterrupted run of the same plan and chunks: same plan file, same chunk size."""
    import tnsim.execution.executors as executors

    monkeypatch.setattr(executors, "CHUNK_FLOPS", 1e4)
    args = ["amp", str(circuit), "--bits", BITS, "--memory", "4KiB", "--json",
            "--plan", str(folder / "plans.json")]  # fmt: skip
    return _amplitude_json(capsys, args)


def test_sigint_then_same_command_resumes_without_planning(
    circuit_file, tmp_path, capsys, monkeypatch, planner_calls
):
    folder = tmp_path / "ck"
    args = _args(circuit_file, folder)
    assert _interrupt(args, folder) == 130
    assert 1 <= _saved_chunks(folder) < 64
    resumed = _amplitude_json(capsys, args)
    assert planner_calls == []
    want = _reference(circuit_file, folder, capsys, monkeypatch)
    assert resumed == want  # bit for bit: the floats' repr round-trips exactly
    # and the amplitude is right: against the dense state vector (numpy reference)
    from tnsim.testing import dense_state

    psi = dense_state(grid_circuit(4, 5, 8, seed=3))
    assert abs(complex(*resumed) - psi[int(BITS, 2)]) < 1e-12


def test_resume_with_another_time_budget_still_does_not_plan(
    circuit_file, tmp_path, capsys, monkeypatch, planner_calls
):
    folder = tmp_path / "ck"
    assert _interrupt(_args(circuit_file, folder, "--time-budget", "0.5"), folder) == 130
    resumed = _amplitude_json(capsys, _args(circuit_file, folder, "--time-budget", "30"))
    assert planner_calls == []
    assert resumed == _reference(circuit_file, folder, capsys, monkeypatch)


def test_finished_checkpoint_resumes_without_planning_or_contracting(
    circuit_file, tmp_path, capsys, monkeypatch
):
    folder = tmp_path / "ck"
    first = _amplitude_json(capsys, _args(circuit_file, folder))
    import tnsim.execution.slices as slices

    def boom(*args):
        raise AssertionError("no slice should run")

    monkeypatch.setattr(slices, "contract_slices", boom)
    monkeypatch.setattr(driver, "make_plan", boom)
    for name, module in list(sys.modules.items()):
        if name.startswith("tnsim") and hasattr(module, "make_plan"):
            monkeypatch.setattr(module, "make_plan", boom)
    assert _amplitude_json(capsys, _args(circuit_file, folder)) == first


@pytest.mark.parametrize("kills", [pytest.param(10, marks=pytest.mark.slow), 2])
def test_kill_9_at_random_points_then_resume_gives_identical_answers(
    circuit_file, tmp_path, capsys, monkeypatch, kills
):
    folder = tmp_path / "ck"
    args = _args(circuit_file, folder)
    rng = random.Random(18)
    for _ in range(kills):
        status = _interrupt(args, folder, signal.SIGKILL, delay=rng.uniform(0.0, 0.4))
        assert status in (-signal.SIGKILL, 0)
        assert not [n for n in os.listdir(folder) if n.startswith(".tnsim-ckpt")] or True
    resumed = _amplitude_json(capsys, args)
    assert not [n for n in os.listdir(folder) if n.startswith(".tnsim-")]  # temporaries gone
    assert resumed == _reference(circuit_file, folder, capsys, monkeypatch)


def _stopped_folder(circuit_file, tmp_path, name="ck"):
    folder = tmp_path / name
    assert _interrupt(_args(circuit_file, folder), folder) == 130
    return folder


def _refused(capsys, args, match):
    assert main(args) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and match in err, err
    return err


@pytest.mark.parametrize("damage", ["corrupt", "truncate", "missing", "swap", "edit"])
def test_damaged_plan_file_is_refused_in_one_line(circuit_file, tmp_path, capsys, damage):
    folder = _stopped_folder(circuit_file, tmp_path)
    plans = folder / "plans.json"
    text = plans.read_text()
    if damage == "corrupt":
        plans.write_text(text.replace('"path"', '"p@th"', 1))
    elif damage == "truncate":
        plans.write_text(text[: len(text) // 2])
    elif damage == "missing":
        plans.unlink()
    elif damage == "swap":  # another run's plan file: another bitstring, another network
        other = tmp_path / "other"
        args = _args(circuit_file, other)
        assert main([*args[:3], "1" * 20, *args[4:]]) == 0
        capsys.readouterr()
        plans.write_text((other / "plans.json").read_text())
    else:  # a step of the tree changed: the record's digest no longer matches
        data = json.loads(text)
        path = data["plans"][0]["path"]
        path[0], path[1] = path[1], path[0]
        plans.write_text(json.dumps(data))
    match = {"missing": "no plan file", "swap": "holds no plan for it"}.get(damage, "plans.json")
    _refused(capsys, _args(circuit_file, folder), match)


def test_older_checkpoint_format_is_refused_with_the_command_to_start_afresh(
    circuit_file, tmp_path, capsys
):
    folder = _stopped_folder(circuit_file, tmp_path)
    part = folder / "part-00000.ckpt"
    with np.load(part) as data:
        arrays = dict(data)
    header = json.loads(arrays["header"].tobytes())
    header["version"] = 1
    arrays["header"] = np.frombuffer(json.dumps(header).encode(), np.uint8)
    with open(part, "wb") as fh:
        np.savez(fh, **arrays)
    err = _refused(capsys, _args(circuit_file, folder), "older version")
    assert f"rm -r '{folder}'" in err


def _rewrite_member(path, name, blob):
    """Replace one member of a zip, with a CRC that matches the new bytes."""
    with zipfile.ZipFile(path) as zf:
        members = {i.filename: zf.read(i) for i in zf.infolist()}
    members[name] = blob
    with zipfile.ZipFile(path, "w", zipfile.ZIP_STORED) as zf:
        for key, value in members.items():
            zf.writestr(key, value)


def test_header_edited_with_a_consistent_crc_is_refused(circuit_file, tmp_path, capsys):
    folder = _stopped_folder(circuit_file, tmp_path)
    part = folder / "part-00000.ckpt"
    with zipfile.ZipFile(part) as zf:
        blob = zf.read("header.npy")
    start = blob.index(b'"prefix_exponent": ') + len(b'"prefix_exponent": ')
    end = blob.index(b",", start)
    value = int(blob[start:end])
    edited = blob[:start] + str(value + 1).encode().ljust(end - start) + blob[end:]
    _rewrite_member(part, "header.npy", edited)
    with zipfile.ZipFile(part) as zf:
        assert zf.testzip() is None  # the zip itself is consistent: its CRCs match
    _refused(capsys, _args(circuit_file, folder), "digest")


def test_second_run_on_one_folder_is_refused_at_once(circuit_file, tmp_path, capsys):
    folder = tmp_path / "ck"
    child = _child(_args(circuit_file, folder), pause=0.3)
    try:
        _wait_for(folder / "plans.json", child)
        start = time.monotonic()
        err = _refused(capsys, _args(circuit_file, folder), "in use by process")
        assert time.monotonic() - start < 5
        assert f"process {child.pid}" in err
    finally:
        child.kill()
        child.wait()
        child.stdout.close()
        child.stderr.close()
    # once the first run is gone (killed: the OS let go of its lock), the folder resumes
    assert main(_args(circuit_file, folder)) == 0


def test_stale_temporary_files_are_removed(circuit_file, tmp_path, capsys):
    folder = _stopped_folder(circuit_file, tmp_path)
    for k in range(5):
        (folder / f".tnsim-ckpt-part-00000.ckpt-{k}x").write_bytes(b"half a file")
    (folder / ".tnsim-plan-plans.json-zz").write_text("{")
    (folder / "notes.txt").write_text("mine")
    assert main(_args(circuit_file, folder)) == 0
    capsys.readouterr()
    assert sorted(os.listdir(folder)) == ["notes.txt", "part-00000.ckpt", "plans.json"]


# ---- plan files on the command line: cost --save-plan, amp --plan ----------------------------


def test_plan_saved_by_cost_is_used_by_amp_and_refused_for_another_circuit(
    circuit_file, tmp_path, capsys, monkeypatch
):
    plan = tmp_path / "p.json"
    assert main(["cost", str(circuit_file), "--bits", BITS, "--save-plan", str(plan)]) == 0
    capsys.readouterr()
    data = json.loads(plan.read_text(), parse_constant=lambda c: pytest.fail(c))
    assert data["format"] == "tnsim-plans" and len(data["plans"]) == 1
    want = amplitude(grid_circuit(4, 5, 8, seed=3), BITS)
    calls = []
    for name, module in list(sys.modules.items()):
        if name.startswith("tnsim") and getattr(module, "make_plan", None) is driver.make_plan:
            monkeypatch.setattr(module, "make_plan", lambda *a, **k: calls.append(1))
    got = _amplitude_json(capsys, ["amp", str(circuit_file), "--bits", BITS, "--json",
                                   "--plan", str(plan)])  # fmt: skip
    assert calls == [] and abs(complex(*got) - want) < 1e-12
    other = tmp_path / "other.qasm"
    other.write_text(write_qasm(grid_circuit(4, 5, 8, seed=4)))
    _refused(capsys, ["amp", str(other), "--bits", BITS, "--plan", str(plan)], "no plan for")
    _refused(capsys, ["amp", str(circuit_file), "--bits", "1" * 20, "--plan", str(plan)], "no plan")


def test_plan_file_round_trip_reproduces_the_bits(tmp_path):
    c = grid_circuit(3, 4, 6, seed=1)
    with run_options(save_plans=str(tmp_path / "p.json")):
        first = amplitude(c, "0" * 12, scaled=True)
    with run_options(plan_file=str(tmp_path / "p.json")):
        again = amplitude(c, "0" * 12, scaled=True)
    assert first.exponent == again.exponent
    assert first.mantissa.tobytes() == again.mantissa.tobytes()


# ---- the checkpoint file itself: mutated bytes are refused, never loaded wrong -------------


def _checkpoint_bytes(tmp_path, sliced_case):
    from tnsim.execution.slices import execute

    _, _, network, tree, sliced = sliced_case(14, 90, seed=2, num_sliced=4)
    path = tmp_path / "f.ckpt"

    def stop(done, total):
        if done >= 5:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        execute(network, tree, sliced, chunk_size=1, checkpoint=path, progress=stop)
    return path, path.read_bytes()


def _mutate(rng: random.Random, blob: bytes) -> bytes:
    data = bytearray(blob)
    kind = rng.randrange(5)
    if kind == 0:  # flip bytes
        for _ in range(rng.randint(1, 4)):
            data[rng.randrange(len(data))] ^= 1 << rng.randrange(8)
    elif kind == 1:  # overwrite a byte with a random value
        data[rng.randrange(len(data))] = rng.randrange(256)
    elif kind == 2:  # truncate
        del data[rng.randrange(len(data)) :]
    elif kind == 3:  # duplicate a stretch
        i = rng.randrange(len(data))
        data[i:i] = data[i : i + rng.randint(1, 64)]
    else:  # zip flags: compression method, encryption bit (the zipfile module's own errors)
        for sig in (b"PK\x03\x04", b"PK\x01\x02"):
            pos = data.find(sig, rng.randrange(len(data)) // 2)
            if pos >= 0:
                off = pos + (6 if sig == b"PK\x03\x04" else 8) + rng.choice([0, 2])
                data[off] = rng.choice([1, 8, 9, 12, 14, 99])
    return bytes(data)


@pytest.mark.parametrize("cases", [pytest.param(10_000, marks=pytest.mark.slow), 400])
def test_mutated_checkpoint_files_are_refused_in_one_line(tmp_path, sliced_case, cases):
    from tnsim.network.scaled import Scaled

    path, blob = _checkpoint_bytes(tmp_path, sliced_case)
    with Checkpoint.open(path) as store:
        fingerprint, network, size = store.header["fingerprint"], store.network, store.chunk_size
        store.bind(fingerprint, network, size, 16, Scaled)
        want = _state(store)
    rng = random.Random(1818)
    loaded = refused = 0
    for _ in range(cases):
        mutated = _mutate(rng, blob)
        path.write_bytes(mutated)
        try:
            with Checkpoint.open(path) as store:
                store.bind(fingerprint, network, size, 16, Scaled)
        except CheckpointError as exc:
            message = str(exc)
            refused += 1
            assert "\n" not in message and len(message) < 400
            continue
        loaded += 1  # only harmless mutations load (zip padding...), and then exactly
        assert _state(store) == want
    assert refused > cases // 2


def _state(store) -> tuple:
    sums = store.sums
    pending = sorted((i, v.mantissa.tobytes(), v.exponent) for i, v in sums.pending.items())
    return sums.prefix_count, sums.prefix.mantissa.tobytes(), sums.prefix.exponent, pending


@pytest.mark.parametrize("mantissa", [np.arange(6, dtype=np.complex128).reshape(2, 3).T, 0.5j])
def test_checkpoint_of_a_transposed_or_scalar_result_reads_back(tmp_path, mantissa):
    # Bugs found in integration: a result whose axes the executor transposes into the output
    # order is Fortran-ordered, np.savez wrote it so and the strict reader refused the file;
    # making it contiguous with np.ascontiguousarray turned a scalar into shape (1,).
    from tnsim.execution.checkpoint import Checkpoint
    from tnsim.network.scaled import Scaled

    value = Scaled(np.asarray(mantissa, dtype=np.complex128), 3)
    path = str(tmp_path / "t.ckpt")
    with Checkpoint.open(path) as store:
        store.bind("f" * 64, "n" * 64, 1, 2, Scaled)
        store.add(0, value)
    with Checkpoint.open(path) as again:
        again.bind("f" * 64, "n" * 64, 1, 2, Scaled)
        assert again.sums.done() == {0}
        np.testing.assert_array_equal(again.sums.prefix.mantissa, value.mantissa)
