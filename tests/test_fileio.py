"""Writing outputs: nothing lost on a failed write, nothing clobbered, pipes and full disks."""

import errno
import os
import stat
import subprocess
import sys
import threading

import pytest

from tnsim.errors import InputError, OutputError
from tnsim.fileio import current_umask, write_atomic

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _leftovers(folder) -> list[str]:
    return [p for p in os.listdir(folder) if p.startswith(".tnsim")]


@pytest.fixture
def umask_027():
    old = os.umask(0o027)
    yield
    os.umask(old)


def test_new_file_follows_the_umask(tmp_path, umask_027):
    # POSIX open(2)/creat: a new file's mode is the requested mode with the umask's bits
    # cleared; 0o666 is what the shell's `>` asks for (common practice).
    assert current_umask() == 0o027
    path = tmp_path / "new.txt"
    write_atomic(path, "x")
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o640


def test_replaced_file_keeps_its_mode(tmp_path):
    path = tmp_path / "kept.txt"
    path.write_text("old")
    os.chmod(path, 0o604)
    write_atomic(path, "new")
    assert path.read_text() == "new"
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o604


def test_symlink_is_written_through(tmp_path):
    real = tmp_path / "real.txt"
    real.write_text("old")
    link = tmp_path / "link.txt"
    link.symlink_to(real.name)
    write_atomic(link, "new")
    assert link.is_symlink() and os.readlink(link) == real.name
    assert real.read_text() == "new"


def test_dangling_symlink_creates_its_target(tmp_path):
    link = tmp_path / "link.txt"
    link.symlink_to("target.txt")
    write_atomic(link, "made")
    assert link.is_symlink() and (tmp_path / "target.txt").read_text() == "made"


def test_fifo_is_written_directly(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    got = []
    reader = threading.Thread(target=lambda: got.append(fifo.read_bytes()))
    reader.start()
    write_atomic(fifo, b"through the pipe")
    reader.join(10)
    assert got == [b"through the pipe"]
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode)
    assert not _leftovers(tmp_path)


def test_device_is_written_directly_not_replaced():
    before = os.stat("/dev/null")
    write_atomic("/dev/null", "discarded")
    after = os.stat("/dev/null")
    assert stat.S_ISCHR(after.st_mode) and after.st_ino == before.st_ino


def test_full_device_fails_in_one_line():
    with pytest.raises(OutputError, match=r"/dev/full.*No space left"):
        write_atomic("/dev/full", "x" * 100_000)


def test_read_only_file_is_refused_and_kept(tmp_path):
    path = tmp_path / "ro.txt"
    path.write_text("precious")
    os.chmod(path, 0o444)
    with pytest.raises(InputError, match="read-only"):
        write_atomic(path, "clobbered")
    assert path.read_text() == "precious"
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o444


def test_folder_in_the_way_is_refused(tmp_path):
    with pytest.raises(InputError, match="is a folder"):
        write_atomic(tmp_path, "x")
    with pytest.raises(InputError, match="does not exist"):
        write_atomic(tmp_path / "no" / "such.txt", "x")


def test_failed_write_keeps_old_file_and_leaves_no_temporary(tmp_path):
    path = tmp_path / "out.txt"
    path.write_text("old contents")

    def half_then_full_disk(fh):
        fh.write(b"partial")
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    with pytest.raises(OutputError, match="No space left on device; nothing was changed"):
        write_atomic(path, half_then_full_disk)
    assert path.read_text() == "old contents"
    assert not _leftovers(tmp_path)


# ---- through the command line, in real processes ----------------------------------------


def _tnsim(args, *, stdout=subprocess.PIPE, preexec=None, cwd=None):
    env = dict(os.environ, PYTHONPATH=ROOT)
    return subprocess.run(
        [sys.executable, "-m", "tnsim", *args],
        stdout=stdout,
        stderr=subprocess.PIPE,
        text=True,
        env=env,
        preexec_fn=preexec,
        cwd=cwd,
        timeout=120,
    )


def _one_line(stderr: str) -> str:
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in stderr, stderr
    return lines[0]


def test_stdout_to_a_full_device_fails_with_one_line():
    with open("/dev/full", "w") as full:
        run = _tnsim(["gen", "grid", "--param", "rows=6", "--param", "cols=6"], stdout=full)
    assert run.returncode == 1
    assert "standard output: No space left on device" in _one_line(run.stderr)


def test_closed_pipe_ends_quietly_with_status_0():
    env = dict(os.environ, PYTHONPATH=ROOT)
    for args in (["gen", "--list"], ["gen", "grid", "--param", "rows=12", "--param", "cols=12"]):
        child = subprocess.Popen(
            [sys.executable, "-m", "tnsim", *args],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            env=env,
        )
        first = child.stdout.readline()  # like `| head -1`
        child.stdout.close()
        err = child.stderr.read().decode()
        assert child.wait(timeout=60) == 0 and first
        assert err == "", err


def _limit_file_size():
    import resource
    import signal

    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # the write fails with EFBIG instead
    resource.setrlimit(resource.RLIMIT_FSIZE, (2000, 2000))


def test_output_file_that_cannot_grow_leaves_nothing(tmp_path):
    # A real failing write: the kernel refuses to let a file grow past RLIMIT_FSIZE.
    out = tmp_path / "grid.qasm"
    run = _tnsim(
        ["gen", "grid", "--param", "rows=6", "--param", "cols=6", "-o", str(out)],
        preexec=_limit_file_size,
    )
    assert run.returncode == 1
    assert "grid.qasm" in _one_line(run.stderr)
    assert os.listdir(tmp_path) == []


def test_output_onto_symlink_fifo_and_read_only_file(tmp_path):
    args = ["gen", "ghz", "--param", "n=4", "-o"]
    real = tmp_path / "real.qasm"
    real.write_text("old")
    link = tmp_path / "link.qasm"
    link.symlink_to(real)
    assert _tnsim([*args, str(link)]).returncode == 0
    assert link.is_symlink() and real.read_text().startswith("OPENQASM 2.0;")

    fifo = tmp_path / "fifo"
    os.mkfifo(fifo)
    got = []
    reader = threading.Thread(target=lambda: got.append(fifo.read_text()))
    reader.start()
    assert _tnsim([*args, str(fifo)]).returncode == 0
    reader.join(30)
    assert got[0].startswith("OPENQASM 2.0;") and stat.S_ISFIFO(os.lstat(fifo).st_mode)

    ro = tmp_path / "ro.qasm"
    ro.write_text("keep me")
    os.chmod(ro, 0o444)
    run = _tnsim([*args, str(ro)])
    assert run.returncode == 2 and "read-only" in _one_line(run.stderr)
    assert ro.read_text() == "keep me"
    assert not _leftovers(tmp_path)
