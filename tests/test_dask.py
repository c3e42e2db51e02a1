"""Slices on a Dask cluster of real worker processes: same bits, and survival of a dead worker."""

import os
import signal

import numpy as np
import pytest

distributed = pytest.importorskip("distributed")

from tnsim.execution.slices import execute  # noqa: E402 - after the importorskip
from tnsim.network.scaled import Scaled  # noqa: E402


def _same_bits(a: Scaled, b: Scaled) -> bool:
    assert np.all(np.abs(a.mantissa) > 0)  # comparing zeros would prove nothing
    return a.exponent == b.exponent and a.mantissa.tobytes() == b.mantissa.tobytes()


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(
        n_workers=2, processes=True, threads_per_worker=1, dashboard_address=None
    )
    with distributed.Client(cluster) as c:
        c.wait_for_workers(2, timeout=60)
        yield c
    cluster.close()


def _slow_slices_function():
    """Return the function run on each worker to make every slice ``delay`` seconds longer.

    It is made inside a function so that Dask ships it by value: the workers
    cannot import this test module.
    """

    def slow_slices(delay):
        import time

        import tnsim.execution.slices as ex

        real = getattr(ex, "_real_contract_tree", ex.contract_tree)
        ex._real_contract_tree = real

        def slow(*args, **kwargs):
            time.sleep(delay)
            return real(*args, **kwargs)

        ex.contract_tree = slow if delay else real

    return slow_slices


_slow_slices = _slow_slices_function()


def test_dask_executor_matches_serial_bit_for_bit(client, sliced_case):
    _, _, network, tree, sliced = sliced_case(16, 110, seed=4, num_sliced=4)
    serial = execute(network, tree, sliced, chunk_size=2)
    on_dask = execute(network, tree, sliced, chunk_size=2, executor=client.get_executor())
    assert _same_bits(serial, on_dask)


def test_killed_worker_does_not_change_result(client, sliced_case):
    _, _, network, tree, sliced = sliced_case(16, 110, seed=4, num_sliced=4)
    serial = execute(network, tree, sliced, chunk_size=1)
    pids = list(client.run(os.getpid).values())
    client.run(_slow_slices, 0.2)
    killed = []

    def kill_once(done, total):
        if not killed:
            os.kill(pids[0], signal.SIGKILL)
            killed.append(done)

    try:
        got = execute(
            network, tree, sliced, chunk_size=1, executor=client.get_executor(), progress=kill_once
        )
    finally:
        client.run(_slow_slices, 0)
    assert killed and killed[0] < 16
    assert pids[0] not in client.run(os.getpid).values() or len(pids) == 1
    assert _same_bits(got, serial)


def test_cli_dask_option_matches_serial(client, tmp_path, capsys):
    from tnsim.circuits.qasm import write_qasm
    from tnsim.cli import main
    from tnsim.testing import random_circuit

    path = tmp_path / "c.qasm"
    path.write_text(write_qasm(random_circuit(10, 50, seed=5, gates=["h", "cx", "rx"])))
    argv = ["amp", str(path), "--bits", "0101010101", "--json"]
    assert main(argv) == 0
    serial = capsys.readouterr().out
    assert main([*argv, "--dask", client.scheduler.address]) == 0
    assert capsys.readouterr().out == serial
