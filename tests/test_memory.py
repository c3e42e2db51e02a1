"""Memory limits: parsing, the default, and refusal before allocation."""

import os
import re
import subprocess
import sys
import textwrap

import pytest

from tnsim.errors import InputError
from tnsim.execution.memory import available_memory, default_memory_limit
from tnsim.execution.options import current_options, resolve_options, run_options
from tnsim.units import format_bytes, parse_memory


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        # Binary prefixes are powers of 1024, decimal ones powers of 1000:
        # IEC 80000-13:2008, Quantities and units - Information science and technology.
        ("4GiB", 4 * 2**30),
        ("512 MiB", 512 * 2**20),
        ("1KiB", 1024),
        ("2TiB", 2 * 2**40),
        ("1.5GB", 1_500_000_000),
        ("8gb", 8 * 10**9),
        ("250kB", 250_000),
        ("1e9", 10**9),
        ("  4096 ", 4096),
        (123456, 123456),
        (2.5e6, 2_500_000),
    ],
)
def test_parse_memory_units(text, expected):
    assert parse_memory(text) == expected


@pytest.mark.parametrize("bad", ["", "GiB", "4 GiBs", "-1GiB", "0", "four", "1e999", True, None])
def test_parse_memory_rejects_bad_text(bad):
    with pytest.raises(InputError, match="memory limit"):
        parse_memory(bad)


def test_available_memory_agrees_with_the_operating_system():
    # POSIX sysconf: physical pages and free pages times the page size bound what
    # the kernel can call available (MemAvailable counts free pages plus reclaimable).
    page = os.sysconf("SC_PAGE_SIZE")
    total = os.sysconf("SC_PHYS_PAGES") * page
    free = os.sysconf("SC_AVPHYS_PAGES") * page
    avail = available_memory()
    assert 0.5 * free <= avail <= total
    assert default_memory_limit() == pytest.approx(avail / 2, rel=0.2)


def test_format_bytes():
    assert format_bytes(1536) == "1.50 KiB"
    assert format_bytes(5 * 2**40) == "5.00 TiB"


def test_run_options_scope_and_slice_budget():
    with run_options(memory_limit="8GiB", workers=4):
        assert current_options().memory_limit == 8 * 2**30
        assert resolve_options().slice_limit == 2 * 2**30
        assert resolve_options("1GiB").slice_limit == 2**28
        assert resolve_options("1GiB").memory_limit == 2**30
        with run_options(workers=1):
            assert resolve_options().slice_limit == 8 * 2**30
    assert current_options().workers is None
    with pytest.raises(InputError, match="workers"), run_options(workers=0):
        pass


def test_resolve_options_argument_over_block_over_default():
    import numpy as np

    assert resolve_options().memory_limit == pytest.approx(default_memory_limit(), rel=0.2)
    assert resolve_options().dtype == np.complex128
    with run_options(memory_limit=2**20, dtype="complex64", progress=False, backend="numpy"):
        opts = resolve_options()
        assert (opts.memory_limit, opts.dtype, opts.progress) == (2**20, np.complex64, False)
        opts = resolve_options("3 KiB", dtype=np.complex128, progress=True)
        assert (opts.memory_limit, opts.dtype, opts.progress) == (3072, np.complex128, True)
        # an executor given to one call means no local workers, whatever the block says
        with run_options(workers=4):
            assert resolve_options().slice_limit == 2**18
            assert resolve_options(executor=object()).slice_limit == 2**20
    for bad in ({"memory_limit": "lots"}, {"dtype": "float64"}, {"workers": 0}):
        with pytest.raises(InputError):
            resolve_options(**bad)
    with pytest.raises(InputError, match="dtype"), run_options(dtype=np.float32):
        pass


_CHILD = textwrap.dedent(
    """
    import resource, sys
    from tnsim import Circuit
    from tnsim.errors import PlanningError, ResourceLimitError
    from tnsim.network.builders import amplitude_network
    from tnsim.queries.amplitudes import contract_network
    from tnsim.execution.options import run_options

    n = 28  # all qubits open: the result alone is 2**28 complex128 = 4 GiB
    circuit = Circuit(n)
    for q in range(n):
        circuit.h(q)
    network = amplitude_network(circuit, None, open_qubits=range(n))
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    try:
        with run_options(memory_limit="256MiB"):
            contract_network(network)
    except (ResourceLimitError, PlanningError) as exc:
        after = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        print(after - before, exc)
        sys.exit(0)
    sys.exit(1)
    """
)


def test_query_over_the_cap_is_refused_before_allocating():
    child = subprocess.run(
        [sys.executable, "-c", _CHILD], capture_output=True, text=True, timeout=120
    )
    assert child.returncode == 0, child.stderr
    grown_kib, message = child.stdout.split(" ", 1)
    assert int(grown_kib) < 64 * 1024  # ru_maxrss is in KiB on Linux (getrusage(2))
    assert "at least" in message  # names a limit that works: at least the 4 GiB result
    assert re.search(r"\b(4294967296|[4-9]\.\d\d GiB|\d{10,} bytes)", message)


def test_fit_plan_fits_the_executor_count(sliced_case):
    from tnsim.errors import ResourceLimitError
    from tnsim.execution.budget import fit_plan, plan_peak_memory
    from tnsim.execution.slices import execute
    from tnsim.plan.driver import make_plan

    _, _, network, _, _ = sliced_case(16, 110, seed=4)
    full = plan_peak_memory(network, make_plan(network))
    limit = full // 3
    try:
        plan = fit_plan(network, resolve_options(limit))
    except ResourceLimitError as exc:  # a planner that cannot slice enough
        message = str(exc)
        assert "at least" in message
    else:
        assert plan.sliced and plan_peak_memory(network, plan) <= limit
        whole = complex(execute(network, make_plan(network).tree))
        assert complex(execute(network, plan.tree, plan.sliced, memory_limit=limit)) == (
            pytest.approx(whole, abs=1e-13)
        )
