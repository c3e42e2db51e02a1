"""``tnsim optimize`` and the graph families of ``tnsim gen``."""

import json
import math
import subprocess
import sys

import networkx as nx
import pytest

from tnsim import Circuit, InputError
from tnsim.circuits.graphs import (
    edge_list_text,
    erdos_renyi,
    lattice_2d,
    make_graph,
    random_regular,
    read_graph,
)
from tnsim.circuits.qasm3.writer import write_qasm3
from tnsim.cli import main

# Farhi, Goldstone, Gutmann, arXiv:1411.4028 (2014): the best p = 1 cut fraction on
# 3-regular graphs without triangles.
P1_CUBIC = 0.5 + 1 / (3 * math.sqrt(3))


@pytest.fixture
def prism_file(tmp_path):
    """A triangle-free 3-regular graph written by networkx (edges carry '{}')."""
    path = tmp_path / "prism.edges"
    nx.write_edgelist(nx.circular_ladder_graph(20), path)
    return path


def test_optimize_json_on_networkx_edge_list(prism_file, capsys):
    assert main(["optimize", str(prism_file), "--p", "1", "--json", "--seed", "1"]) == 0
    text = capsys.readouterr().out
    doc = json.loads(text, parse_constant=lambda c: pytest.fail(f"non-strict JSON: {c}"))
    assert doc["nodes"] == 40 and doc["edges"] == 60 and doc["p"] == 1
    assert doc["cut_fraction"] == pytest.approx(P1_CUBIC, abs=1e-8)
    assert doc["cut"] == pytest.approx(doc["cut_fraction"] * 60)
    assert len(doc["gammas"]) == 1 and len(doc["betas"]) == 1
    assert doc["evaluations"] == len(doc["history"]) > 0
    assert doc["seconds"] > 0 and len(doc["depths"][0]["starts"]) == 4


def test_optimize_p2_table_output_and_plot(prism_file, tmp_path, capsys):
    pytest.importorskip("matplotlib")
    plot = tmp_path / "conv.png"
    args = ["optimize", str(prism_file), "--p", "2", "--starts", "2", "--plot", str(plot)]
    assert main([*args, "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "p=1: cut fraction" in out and "p=2: cut fraction" in out
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_weighted_graph_and_gradient_free_method(tmp_path, capsys):
    path = tmp_path / "w.edges"
    path.write_text("# weighted\n0 1 2.0\n1 2 0.5\n2 3 1.0\n3 0 1.5\n")
    assert main(["optimize", str(path), "--json", "--method", "nelder-mead", "--starts", "2"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["total_weight"] == 5.0 and doc["method"] == "nelder-mead"
    assert all(row["gradient_norm"] is None for row in doc["history"])
    assert 0.5 < doc["cut_fraction"] <= 1.0


def test_output_file(prism_file, tmp_path):
    out = tmp_path / "r.json"
    assert main(["optimize", str(prism_file), "--json", "--starts", "1", "-o", str(out)]) == 0
    assert json.loads(out.read_text())["problem"] == "maxcut"


@pytest.mark.parametrize(
    ("text", "extra", "match"),
    [
        ("0 1\n1\n", [], "g.edges:2:1: expected 'u v'"),
        ("0 1 heavy\n", [], "g.edges:1:5: edge data 'heavy'"),
        ("0 0\n0 1\n", [], "self-loop"),
        ("# nothing\n", [], "no edges"),
        ("0 1\n", ["--p", "0"], "--p must be at least 1"),
        ("0 1\n", ["--method", "newton"], "unknown method 'newton'"),
        ("0 1\n", ["--plot", "x.unknownext"], "unknown image format"),
        ("0 1\n", ["--maximize"], "--maximize, --initial and --input go with --circuit"),
        ("0 1\n", ["--input", "a=1"], "--maximize, --initial and --input go with --circuit"),
        ("0 1\n", ["--circuit", "c.qasm"], "not both"),
    ],
)
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, text, extra, match):
    path = tmp_path / "g.edges"
    path.write_text(text)
    assert main(["optimize", str(path), *extra]) == 2
    err = capsys.readouterr().err
    assert match in err and err.count("\n") == 1 and err.startswith("tnsim: error:")


def test_missing_graph_file(capsys):
    assert main(["optimize", "/nonexistent/g.edges"]) == 2
    assert "no such file" in capsys.readouterr().err


def test_circuit_mode(tmp_path, capsys):
    # The OpenQASM 2.0 reader has no named angles: a circuit from it is refused clearly.
    qasm = tmp_path / "c.qasm"
    qasm.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nry(0.3) q[0];\n')
    assert main(["optimize", "--circuit", str(qasm), "--observable", "Z0"]) == 2
    assert "no named angles" in capsys.readouterr().err
    # OpenQASM 3 inputs without a value are the named angles.
    named = tmp_path / "named.qasm"
    named.write_text(write_qasm3(Circuit(2).ry("a", 0).cx(0, 1).ry("b", 1)))
    args = ["optimize", "--circuit", str(named), "--observable", "Z0 + Z1", "--json"]
    assert main([*args, "--initial", "a=3.0", "--initial", "b=0.1", "--starts", "2"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["energy"] == pytest.approx(-2.0, abs=1e-6)
    assert doc["names"] == ["a", "b"] and doc["starts"][0]["initial"] == {"a": 3.0, "b": 0.1}
    assert main([*args, "--maximize", "--starts", "1"]) == 0
    assert json.loads(capsys.readouterr().out)["energy"] == pytest.approx(2.0, abs=1e-6)
    assert main([*args, "--initial", "a=x"]) == 2
    assert "NAME=NUMBER" in capsys.readouterr().err


def test_gen_graph_families_round_trip(tmp_path, capsys):
    out = tmp_path / "g.edges"
    cmd = ["gen", "regular-graph", "--param", "nodes=50", "--param", "seed=3", "-o", str(out)]
    assert main(cmd) == 0
    g = read_graph(out)
    assert g.number_of_nodes() == 50 and set(dict(g.degree()).values()) == {3}
    assert nx.utils.graphs_equal(g, random_regular(50, 3, seed=3))
    assert main(["gen", "lattice-graph", "--param", "rows=3", "--param", "cols=4"]) == 0
    assert capsys.readouterr().out.count("\n") == 17
    assert main(["gen", "--list"]) == 0
    assert "erdos-renyi-graph" in capsys.readouterr().out
    assert main(["gen", "regular-graph", "--param", "nodes=5"]) == 2
    assert "no 3-regular graph on 5 nodes" in capsys.readouterr().err


def test_graph_families():
    assert nx.utils.graphs_equal(erdos_renyi(200, 0.05, seed=4), erdos_renyi(200, 0.05, seed=4))
    assert erdos_renyi(30, 0.0, seed=1).number_of_edges() == 0
    assert erdos_renyi(30, 1.0, seed=1).number_of_edges() == 30 * 29 // 2
    torus = lattice_2d(4, 5, periodic=1)
    assert set(dict(torus.degree()).values()) == {4} and torus.number_of_edges() == 40
    assert make_graph("erdos-renyi-graph", nodes="20", probability="0.5").number_of_nodes() == 20
    for bad in (
        lambda: make_graph("nope"),
        lambda: make_graph("lattice-graph", depth=3),
        lambda: make_graph("lattice-graph", rows="x"),
        lambda: erdos_renyi(10, 1.5),
        lambda: lattice_2d(2, 5, periodic=1),
    ):
        with pytest.raises(InputError):
            bad()


def test_edge_list_text_round_trips_weights(tmp_path):
    g = nx.Graph()
    g.add_edge(0, 1, weight=2.5)
    g.add_edge(1, 2)
    path = tmp_path / "w.edges"
    path.write_text(edge_list_text(g))
    back = read_graph(path)
    assert back[0][1]["weight"] == 2.5 and back[1][2]["weight"] == 1.0
    assert nx.utils.graphs_equal(nx.read_edgelist(path, nodetype=int), back)


@pytest.mark.slow
def test_must_show_10000_node_p1(tmp_path):
    # 'tnsim optimize GRAPH.edges --p 1 --json --seed 1' on a 10,000-node random 3-regular
    # graph written by networkx: the cut fraction is within 1e-3 of 0.6925.
    path = tmp_path / "g.edges"
    nx.write_edgelist(nx.random_regular_graph(3, 10_000, seed=1), path)
    cmd = [sys.executable, "-m", "tnsim", "optimize", str(path), "--p", "1", "--json"]
    out = subprocess.run([*cmd, "--seed", "1"], capture_output=True, text=True, check=True)
    doc = json.loads(out.stdout)
    assert doc["cut_fraction"] == pytest.approx(0.6925, abs=1e-3)
