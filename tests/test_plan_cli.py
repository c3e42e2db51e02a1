"""tnsim cost and tnsim.queries.forecast: the forecast report, its numbers and its errors."""

import json
import math
import os

import opt_einsum
import pytest

from tnsim import write_qasm
from tnsim.circuits.families import grid_circuit
from tnsim.cli import main
from tnsim.execution import rate as rate_module
from tnsim.network.builders import amplitude_network
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import make_plan
from tnsim.queries import forecast


@pytest.fixture
def qasm_file(tmp_path):
    circuit = grid_circuit(4, 4, 6, seed=3)
    path = tmp_path / "grid.qasm"
    path.write_text(write_qasm(circuit))
    return str(path), circuit


def test_cost_json_agrees_with_opt_einsum_count_of_the_exported_path(qasm_file, capsys):
    path, circuit = qasm_file
    assert main(["cost", path, "--json", "--bits", "0101" * 4]) == 0
    report = json.loads(capsys.readouterr().out)
    net = absorb_small(amplitude_network(circuit, "0101" * 4))
    plan = make_plan(net)
    tree = plan.tree
    sym = {i: opt_einsum.get_symbol(k) for k, i in enumerate(sorted(tree.size))}
    eq = ",".join("".join(sym[i] for i in ix) for ix in tree.inputs) + "->"
    shapes = [tuple(tree.size[i] for i in ix) for ix in tree.inputs]
    # Reference: opt_einsum.contract_path scores a given path with its own cost count.
    _, info = opt_einsum.contract_path(eq, *shapes, shapes=True, optimize=tree.linear_path())
    assert report["opt_einsum_cost"] == float(info.opt_cost)
    assert report["width"] == math.log2(int(info.largest_intermediate))
    assert report["flops"] == plan.flops and report["num_slices"] == 1
    assert report["units"]["flops"].startswith("real floating-point")
    assert len(report["profile"]) == len(tree.path)


def test_cost_table_and_memory_verdicts(qasm_file, capsys):
    path, _ = qasm_file
    assert main(["cost", path]) == 0
    text = capsys.readouterr().out
    assert "FLOPs (real, all slices)" in text and "histogram" in text
    full = json.loads((main(["cost", path, "--json"]), capsys.readouterr().out)[1])
    small = max(full["peak_bytes"] // 4, 1024)
    assert main(["cost", path, "--memory", str(small)]) == 0
    text = capsys.readouterr().out
    assert "does NOT fit" in text and "sliced into" in text


@pytest.mark.parametrize("memory", ["4XB", "-3GiB", "lots"])
def test_bad_memory_strings_exit_2_with_one_line(qasm_file, capsys, memory):
    path, _ = qasm_file
    assert main(["cost", path, "--memory", memory]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "memory" in err


def test_memory_limit_that_no_slicing_meets(qasm_file, capsys):
    path, _ = qasm_file
    assert main(["cost", path, "--memory", "16"]) == 2
    err = capsys.readouterr().err
    assert "give at least" in err and err.count("\n") == 1


def test_matmul_rate_is_cached_and_tolerates_unwritable_dirs(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    monkeypatch.setattr(rate_module, "_RATES", {})
    rate = rate_module.matmul_rate(n=64)
    stored = json.loads((tmp_path / "tnsim" / "matmul_rate.json").read_text())
    assert [entry["rate"] for entry in stored.values()] == [rate]
    monkeypatch.setattr(rate_module, "_RATES", {})
    assert rate_module.matmul_rate(n=64) == rate  # read back from the file
    blocker = tmp_path / "file"
    blocker.write_text("")
    monkeypatch.setenv("XDG_CACHE_HOME", str(blocker))
    monkeypatch.setattr(rate_module, "_RATES", {})
    assert rate_module.matmul_rate(n=64) > 0
    assert not os.path.exists(blocker / "tnsim")


def test_forecast_of_a_sliced_plan(qasm_file):
    _, circuit = qasm_file
    full = forecast.forecast(circuit)
    cut = forecast.forecast(circuit, memory_limit=max(full.peak_bytes // 4, 1024))
    assert cut.num_slices > 1 and not cut.fits_unsliced and cut.overhead >= 1.0
    from tnsim.fitted import WRITE_FLOPS

    # Elements written: every intermediate of the profile once per slice, except the
    # slice-invariant ones, written once (tnsim.execution.invariant).
    assert cut.written <= round(sum(2**w for w in cut.profile)) * cut.num_slices
    assert cut.flops_run <= cut.flops
    compute = (cut.flops_run + WRITE_FLOPS * cut.written) / cut.flop_rate
    assert cut.compute_seconds == pytest.approx(compute)
    fixed = cut.steps_per_slice * cut.num_slices * cut.step_seconds
    assert fixed <= cut.fixed_seconds <= fixed + len(cut.profile) * cut.step_seconds
    assert cut.seconds == pytest.approx(cut.compute_seconds + cut.fixed_seconds)
