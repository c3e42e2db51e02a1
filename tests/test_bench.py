"""Benchmark machinery: cost model, dense baseline, ``tnsim bench``/``gen``, run_all smoke run."""

from __future__ import annotations

import csv
import importlib.util
import json
import math
import os
import subprocess
import sys

import numpy as np
import opt_einsum
import pytest

from tnsim.circuits.families import grid_circuit, make_family
from tnsim.circuits.qasm import read_qasm
from tnsim.cli import main
from tnsim.errors import InputError
from tnsim.network.builders import amplitude_network
from tnsim.network.graph import TensorGraph
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import make_plan
from tnsim.queries.costsweep import FAMILIES, crossing_size, parse_sizes, plan_with, run_bench
from tnsim.testing import dense_state, random_circuit

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _load(name):
    spec = importlib.util.spec_from_file_location(
        name, os.path.join(ROOT, "benchmarks", name + ".py")
    )
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


dense = _load("dense")


@pytest.mark.parametrize(("dtype", "tol"), [(np.complex128, 1e-12), (np.complex64, 2e-6)])
@pytest.mark.parametrize(
    "circuit",
    [
        random_circuit(6, 80, seed=11),  # every gate kind, including 3-qubit ones
        grid_circuit(3, 3, 6, two_qubit="fsim", seed=2),
        make_family("qft", n=5),
    ],
)
def test_dense_baseline_matches_reference(circuit, dtype, tol):
    state = dense.simulate(circuit, dtype)
    assert state.dtype == dtype
    np.testing.assert_allclose(state, dense_state(circuit), atol=tol)


def test_dense_amplitude_bit_order():
    c = grid_circuit(2, 2, 3, seed=1)
    ref = dense_state(c)
    assert abs(dense.dense_amplitude(c, "0110", np.complex128) - ref[0b0110]) < 1e-12


def test_reported_flops_match_opt_einsum_on_a_matrix_chain():
    # opt_einsum's flop_count counts 2 per multiply-add of a pairwise contraction with
    # a summed index (opt_einsum helpers.flop_count); tnsim counts 8 real FLOPs per complex
    # multiply-add, so the ratio is exactly 4 on a chain where every step sums an index.
    sizes = {0: 3, 1: 5, 2: 7, 3: 2, 4: 6}
    inputs = [(0, 1), (1, 2), (2, 3), (3, 4)]
    shapes = [tuple(sizes[i] for i in ix) for ix in inputs]
    arrays = [np.ones(s, dtype=np.complex128) for s in shapes]
    net = TensorGraph(arrays, inputs, sizes, (0, 4))
    plan = plan_with("greedy", net)
    linear = plan.tree.linear_path()
    _, info = opt_einsum.contract_path("ab,bc,cd,de->ae", *shapes, shapes=True, optimize=linear)
    assert plan.flops == 4 * int(info.opt_cost)
    assert math.isclose(2**plan.width, int(info.largest_intermediate))


def test_tnsim_planner_row_is_make_plans_plan():
    net = absorb_small(amplitude_network(grid_circuit(3, 3, 4, seed=0), "0" * 9))
    want = make_plan(net, time_budget=0.2, seed=0)
    (row,) = run_bench(
        "grid",
        [{"rows": 3, "cols": 3}],
        params={"depth": 4},
        planners=["tnsim"],
        time_budget=0.2,
        seed=0,
    )
    assert (row.flops, row.width, row.num_slices) == (want.flops, want.width, want.num_slices)


@pytest.mark.parametrize("planner", ["tnsim", "greedy", "random-greedy"])
def test_every_planner_gives_the_right_amplitude(planner):
    rows = run_bench(
        "grid",
        [{"rows": 3, "cols": 3}],
        params={"depth": 4},
        planners=[planner],
        execute=True,
        time_budget=0.2,
        dtype=np.complex128,
    )
    (r,) = rows
    c = grid_circuit(3, 3, 4, seed=0)
    want = dense_state(c)[int(r.bits, 2)]
    assert r.executed and abs(complex(r.amplitude_real, r.amplitude_imag) - want) < 1e-10


def test_flop_cap_skips_contraction():
    (r,) = run_bench(
        "grid", [{"rows": 3, "cols": 3}], planners=["greedy"], execute=True, flop_cap=1.0
    )
    assert r.flops > 1.0
    assert not r.executed and math.isnan(r.contract_seconds)


def test_parse_sizes_errors():
    assert parse_sizes("20, 30", FAMILIES["qaoa"]) == [{"n": 20}, {"n": 30}]
    for bad in ("4x", "4", "axb", "0x3", "", "²x3", "3x" + "9" * 5000):
        with pytest.raises(InputError):
            parse_sizes(bad, FAMILIES["grid"])


def test_crossing_size_none_when_below():
    (r,) = run_bench("ghz", [{"n": 3}], planners=["greedy"])
    assert crossing_size([r], "greedy", 1e12) is None


def test_bench_cli_writes_csv_json_png(tmp_path, capsys):
    paths = {k: str(tmp_path / f"out.{k}") for k in ("csv", "json", "png")}
    status = main(
        [
            "bench",
            "--family",
            "grid",
            "--sizes",
            "2x2,2x3",
            "--depth",
            "3",
            "--execute",
            "--time-budget",
            "0.2",
            "--quiet",
            "--csv",
            paths["csv"],
            "--json",
            "-o",
            paths["json"],
            "--plot",
            paths["png"],
            "--precision",
            "double",
        ]
    )
    assert status == 0
    with open(paths["csv"]) as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 6 and {r["planner"] for r in rows} == {"tnsim", "greedy", "random-greedy"}
    for r in rows:
        c = grid_circuit(*map(int, r["size"].split("x")), 3, seed=0)
        want = dense_state(c)[int(r["bits"], 2)]
        assert abs(complex(float(r["amplitude_real"]), float(r["amplitude_imag"])) - want) < 1e-10
    with open(paths["json"]) as fh:
        doc = json.load(fh)
    assert doc["settings"]["family"] == "grid" and len(doc["records"]) == 6
    assert "complex multiply-add = 8" in doc["units"]["flops"]
    assert doc["matmul_flop_rate"] > 0
    with open(paths["png"], "rb") as fh:
        assert fh.read(8) == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    assert capsys.readouterr().out == ""  # --json -o FILE: nothing on standard output
    table = ["bench", "--family", "ghz", "--sizes", "3", "--planners", "greedy", "--quiet"]
    assert main(table) == 0
    assert "FLOPs" in capsys.readouterr().out
    assert main([*table, "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["settings"]["precision"] == "double"


def test_bench_former_flags_still_work_with_warnings(tmp_path, capsys):
    out = str(tmp_path / "old.json")
    argv = ["bench", "--family", "grid", "--sizes", "2x2", "--cycles", "2", "--planners"]
    argv += ["greedy", "--double", "--json", out, "--quiet"]
    assert main(argv) == 0
    err = capsys.readouterr().err
    for old in ("--cycles", "--double", "--json FILE"):
        assert f"tnsim: warning: {old} is deprecated" in err
    with open(out) as fh:
        doc = json.load(fh)
    assert doc["settings"]["params"] == {"depth": "2"} and doc["settings"]["dtype"] == "complex128"


@pytest.mark.parametrize(
    "argv",
    [
        ["bench", "--family", "nope", "--sizes", "4"],
        ["bench", "--family", "grid", "--sizes", "4x"],
        ["bench", "--family", "grid", "--sizes", "2x2", "--planners", "magic"],
        ["bench", "--family", "ghz", "--sizes", "4", "--depth", "3"],
        ["bench", "--family", "grid", "--sizes", "100000x100000"],
        ["bench", "--family", "grid", "--sizes", "2x2", "--time-budget", "inf"],
        ["gen", "grid", "--param", "rows=10**9"],
        ["gen", "grid", "--param", "rows=1000000000"],
        ["bench", "--family", "grid", "--sizes", "2x2", "--param", "rows=3"],
        ["bench", "--family", "grid", "--sizes", "2x2", "--param", "colour=red"],
        ["bench", "--family", "grid", "--sizes", "2x2", "--flop-cap", "-1"],
        ["bench", "--family", "grid"],
        ["gen", "nope"],
        ["gen", "grid", "--param", "rows"],
        ["gen"],
    ],
)
def test_bad_arguments_exit_2_without_files(argv, tmp_path, capsys):
    out = str(tmp_path / "x.csv")
    extra = ["--csv", out] if argv[0] == "bench" else ["-o", out]
    assert main(argv + extra) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("tnsim: error:") and "\n" not in err
    assert os.listdir(tmp_path) == []


def test_bench_refuses_missing_output_folder_before_writing(tmp_path):
    csv_path = str(tmp_path / "a.csv")
    plot = str(tmp_path / "no" / "such" / "p.png")
    argv = ["bench", "--sizes", "2x2", "--depth", "1", "--quiet", "--csv", csv_path]
    assert main([*argv, "--plot", plot]) == 2
    assert os.listdir(tmp_path) == []


def test_gen_writes_family_that_reads_back(tmp_path):
    path = str(tmp_path / "g.qasm")
    assert (
        main(
            [
                "gen",
                "grid",
                "--param",
                "rows=3",
                "--param",
                "cols=2",
                "--param",
                "depth=5",
                "--param",
                "two_qubit=fsim",
                "-o",
                path,
            ]
        )
        == 0
    )
    back = read_qasm(path)
    want = grid_circuit(3, 2, 5, two_qubit="fsim", seed=0)
    assert [(o.name, o.qubits) for o in back] == [(o.name, o.qubits) for o in want]
    np.testing.assert_allclose(dense_state(back), dense_state(want), atol=1e-12)


def test_gen_list(capsys):
    assert main(["gen", "--list"]) == 0
    out = capsys.readouterr().out
    assert all(name in out for name in FAMILIES)


def _run_all(tmp_path, *extra):
    return subprocess.run(
        [
            sys.executable,
            os.path.join(ROOT, "benchmarks", "run_all.py"),
            "--quick",
            "--out",
            str(tmp_path),
            *extra,
        ],
        capture_output=True,
        text=True,
        timeout=600,
        cwd=ROOT,
    )


def test_run_all_quick_own_steps(tmp_path):
    # The smoke run of this module's benchmark steps (the others' take longer: see below).
    result = _run_all(tmp_path, "--only", "bench_grid,bench_qaoa,crossover")
    assert result.returncode == 0, result.stderr[-3000:]
    for name in (
        "bench_grid_quick.csv",
        "bench_qaoa_quick.json",
        "bench_grid_quick.png",
        "crossover_quick.json",
    ):
        assert (tmp_path / name).is_file()


@pytest.mark.slow
def test_run_all_quick_smoke(tmp_path):
    # The CI smoke run of benchmarks/run_all.py, every committed script included.
    result = _run_all(tmp_path)
    assert result.returncode == 0, result.stderr[-3000:]
    assert (tmp_path / "crossover_quick.md").is_file()


def test_run_all_only_rejects_unknown_step(tmp_path):
    result = _run_all(tmp_path, "--only", "nope")
    assert result.returncode == 2 and "no step 'nope'" in result.stderr
    assert os.listdir(tmp_path) == []


def test_crossover_is_first_size_after_the_last_loss():
    crossover = _load("crossover")
    rows = [{"qubits": n, "speedup": s} for n, s in [(9, 0.5), (12, 1.5), (14, 0.9), (16, 3.0)]]
    assert crossover.crossover(rows) == 16
    rows.append({"qubits": 26, "speedup": None})  # dense not run: ignored
    assert crossover.crossover(rows) == 16
    assert crossover.crossover([{"qubits": 9, "speedup": 0.5}]) is None


def test_time_model_compares_the_planners_own_objectives(capsys):
    # Bug found: after the objectives were renamed, the script's comparison still looked up
    # "flops" and "time" and its quick run stopped with a KeyError.
    time_model = _load("time_model")
    time_model.objectives([(4, 4, 4)], 0.1)
    out = capsys.readouterr().out
    assert "operations-plan seconds / runtime-plan seconds" in out
