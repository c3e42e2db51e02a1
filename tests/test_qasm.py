"""Tests of tnsim.circuits.qasm: the OpenQASM 2.0 reader and writer.

The language is the one of Cross, Bishop, Smolin, Gambetta, "Open Quantum Assembly
Language", arXiv:1707.03429 (2017); the statements exercised below follow its grammar
(header, qreg/creg, include, gate, barrier, measure, U and CX built-ins; from memory).
"""

from __future__ import annotations

import contextlib
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import tnsim.circuits.qasm.reader as qasm_reader
from tnsim import read_qasm, write_qasm
from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.gates import GATES
from tnsim.circuits.qasm import (
    DEFAULT_MAX_OPS,
    EXTENSION_DEFINITIONS,
    MAX_EXPR_DEPTH,
    MAX_GATE_DEPTH,
    QELIB1_GATES,
)
from tnsim.circuits.qasm.header import ADDED_DEFINITIONS, ORIGINAL_QELIB1
from tnsim.errors import InputError, QasmError

HEADER = 'OPENQASM 2.0;\ninclude "qelib1.inc";\n'
PRE = HEADER + "qreg q[2];\nqreg r[3];\ncreg c[2];\n"
MARK = "‸"  # marks the offending token in the error cases below; removed before parsing


def ops_of(text: str, **kwargs) -> list[tuple]:
    return [(op.name, op.qubits, op.params) for op in read_qasm(text, **kwargs).ops]


def locate(marked: str) -> tuple[str, int, int]:
    """Return the text without the marker and the 1-based line and column of the marker."""
    idx = marked.index(MARK)
    line = marked.count("\n", 0, idx) + 1
    column = idx - (marked.rfind("\n", 0, idx) + 1) + 1
    return marked.replace(MARK, ""), line, column


def dense_unitary(circuit: Circuit) -> np.ndarray:
    """Reference unitary of a small circuit (qubit 0 most significant), plain numpy."""
    n = circuit.num_qubits
    u = np.eye(2**n, dtype=complex).reshape((2,) * n + (2**n,))
    for op in circuit.ops:
        k = len(op.qubits)
        m = op.matrix().reshape((2,) * (2 * k))
        u = np.tensordot(m, u, axes=(list(range(k, 2 * k)), list(op.qubits)))
        u = np.moveaxis(u, list(range(k)), list(op.qubits))
    return u.reshape(2**n, 2**n)


# ---------------------------------------------------------------------------- valid programs


def test_multiple_registers_are_numbered_in_declaration_order():
    text = PRE + "h r[0];\ncx q[1], r[2];\nx q[0];\n"
    assert read_qasm(text).num_qubits == 5
    assert ops_of(text) == [("h", (2,), ()), ("cx", (1, 4), ()), ("x", (0,), ())]


def test_broadcasting_over_registers_and_mixed_arguments():
    text = HEADER + "qreg a[2];\nqreg b[2];\nh a;\ncx a, b;\ncz a[0], b;\nswap b, a[1];\n"
    assert ops_of(text) == [
        ("h", (0,), ()),
        ("h", (1,), ()),
        ("cx", (0, 2), ()),
        ("cx", (1, 3), ()),
        ("cz", (0, 2), ()),
        ("cz", (0, 3), ()),
        ("swap", (2, 1), ()),
        ("swap", (3, 1), ()),
    ]


def test_user_gates_with_parameters_and_nesting():
    text = PRE + (
        "gate rot(t, p) x { rz(p) x; rx(t / 2) x; }\n"
        "gate ent(t) x, y { rot(t, -t) x; cx x, y; rot(2 * t, t ^ 2) y; }\n"
        "ent(0.5) q[1], q[0];\n"
        "ent(0.5) q;\n"  # broadcast of a two-qubit user gate needs two arguments: error below
    )
    body = text.rsplit("ent(0.5) q;\n", 1)[0]
    assert ops_of(body) == [
        ("rz", (1,), (-0.5,)),
        ("rx", (1,), (0.25,)),
        ("cx", (1, 0), ()),
        ("rz", (0,), (0.25,)),
        ("rx", (0,), (0.5,)),
    ]
    with pytest.raises(QasmError, match="acts on 2 qubit"):
        read_qasm(text)


def test_user_gate_broadcast_over_registers():
    text = HEADER + "qreg a[2];\nqreg b[2];\ngate pair x, y { cx x, y; h y; }\npair a, b;\n"
    assert ops_of(text) == [
        ("cx", (0, 2), ()),
        ("h", (2,), ()),
        ("cx", (1, 3), ()),
        ("h", (3,), ()),
    ]


@pytest.mark.parametrize(
    ("expr", "value"),
    [
        ("-pi/2^2", -math.pi / 4),
        ("sin(pi/6)*2", math.sin(math.pi / 6) * 2),
        ("2^3^2", 512.0),
        ("-2^2", -4.0),
        ("2^-1", 0.5),
        ("(1+2)*3", 9.0),
        ("1-2-3", -4.0),
        ("8/4/2", 1.0),
        ("2*-3", -6.0),
        ("+3", 3.0),
        ("--3", 3.0),
        ("1e-3", 0.001),
        ("1E2", 100.0),
        (".5", 0.5),
        ("3.", 3.0),
        ("ln(exp(1))", 1.0),
        ("sqrt(16)", 4.0),
        ("cos(0) + tan(0)", 1.0),
        ("pi", math.pi),
    ],
)
def test_parameter_arithmetic(expr, value):
    [(_, _, params)] = ops_of(PRE + f"rz({expr}) q[0];\n")
    assert params == (value,)


def test_comments_barrier_and_measure_are_accepted():
    text = PRE + (
        "// a comment line\n"
        "h q[0]; // trailing comment\n"
        "barrier q, r[1];\n"
        "cx q[0], q[1];\n"
        "measure q -> c;\n"
        "measure r[0] -> c[1];\n"
        "x r[1];\n"  # not measured: still allowed
    )
    assert ops_of(text) == [("h", (0,), ()), ("cx", (0, 1), ()), ("x", (3,), ())]


@pytest.mark.parametrize(
    "after",
    ["measure q[1] -> c[1];\n", "barrier q;\n", "h q;\n", "rz(pi) q[1];\n", "@"],
)
def test_a_commented_out_gate_is_never_applied(after):
    # Regression: the comment regex once gave back characters on backtracking, so the
    # statement-level fast path read "// x q[0];" as "x q[0];" when the next statement
    # was one it could not take.
    text = PRE + "h q[0];\n// x q[0];\n" + after
    if after == "@":
        with pytest.raises(QasmError, match="unexpected character '@'"):
            read_qasm(text)
    else:
        assert all(op.name != "x" for op in read_qasm(text).ops)


def test_builtins_without_include_and_u0():
    text = "OPENQASM 2.0;\nqreg q[2];\nU(0.1, 0.2, 0.3) q[0];\nCX q[0], q[1];\n"
    assert ops_of(text) == [("u", (0,), (0.1, 0.2, 0.3)), ("cx", (0, 1), ())]
    assert ops_of(PRE + "u0(0.3) q[1];\n") == [("id", (1,), ())]


def test_empty_gate_and_empty_parameter_list():
    assert ops_of(PRE + "gate g() a { }\ng() q[0];\ng q;\nh() q[1];\n") == [("h", (1,), ())]


def test_empty_gate_on_a_huge_register_is_cheap():
    text = HEADER + "qreg q[2147483647];\ngate g a { barrier a; }\ng q;\n"
    assert read_qasm(text).ops == []


def test_register_beyond_any_machine_is_refused_where_it_is_declared():
    text = HEADER + "qreg q[10000000000];\nh q[0];\n"
    with pytest.raises(QasmError, match=r"<text>:3:8: register 'q' of 10,000,000,000 qubits"):
        read_qasm(text)


def test_every_qelib1_gate_reads_as_its_tnsim_gate():
    for name, tnsim_name in QELIB1_GATES.items():
        spec = GATES[tnsim_name]
        n_params = 1 if name == "u0" else spec.num_params
        params = "(" + ", ".join(["0.5"] * n_params) + ")" if n_params else ""
        qubits = ", ".join(f"r[{i}]" for i in range(spec.num_qubits))
        [(got, qs, _)] = ops_of(PRE + f"{name}{params} {qubits};\n")
        assert got == tnsim_name and qs == tuple(range(2, 2 + spec.num_qubits))


def test_file_path_and_pathlike(tmp_path):
    path = tmp_path / "bell.qasm"
    path.write_text(PRE + "h q[0];\ncx q[0], q[1];\n")
    assert read_qasm(path).ops == read_qasm(str(path)).ops
    assert len(read_qasm(path)) == 2
    path.write_text(PRE + "h q[0]\n")
    with pytest.raises(QasmError) as info:
        read_qasm(path)
    assert str(info.value).startswith(f"{path}:7:1:")


def test_bad_arguments_raise_input_error(tmp_path):
    with pytest.raises(InputError, match="text or a file path"):
        read_qasm(42)
    with pytest.raises(InputError, match="cannot read"):
        read_qasm(tmp_path / "missing.qasm")
    with pytest.raises(InputError, match="max_ops"):
        read_qasm(PRE, max_ops=-1)


# ---------------------------------------------------------------------------- errors

ERRORS_AFTER_PRE = [
    ("unknown gate", f"{MARK}foo q[0];\n", "unknown gate 'foo'"),
    ("case hint", f"{MARK}H q[0];\n", "did you mean 'h'"),
    ("extension undeclared", f"{MARK}iswap q[0], q[1];\n", "define it first"),
    ("too few params", f"{MARK}rx q[0];\n", "takes 1 parameter"),
    ("too many params", f"{MARK}h(1) q[0];\n", "takes 0 parameter"),
    ("too few qubits", f"{MARK}cx q[0];\n", "acts on 2 qubit"),
    ("too many qubits", f"{MARK}h q[0], q[1];\n", "acts on 1 qubit"),
    ("index out of range", f"h q[{MARK}2];\n", "out of range"),
    ("undeclared register", f"h {MARK}z[0];\n", "undeclared register 'z'"),
    ("classical as quantum", f"h {MARK}c[0];\n", "not a qubit register"),
    ("duplicate qreg", f"qreg {MARK}q[4];\n", "already declared"),
    ("creg named like qreg", f"creg {MARK}r[3];\n", "already declared"),
    ("duplicate gate", f"gate {MARK}h a {{ x a; }}\n", "already defined by qelib1.inc"),
    ("reserved register", f"qreg {MARK}pi[2];\n", "reserved word"),
    ("empty register", f"qreg t[{MARK}0];\n", "at least one"),
    ("missing semicolon", f"h q[0]\n{MARK}cx q[0], q[1];\n", "expected ';'"),
    ("missing semicolon at end", f"h q[0]{MARK}", "expected ';'"),
    ("unterminated body", f"gate g a {MARK}{{ h a;\nx a;\n", "never closed"),
    ("garbage", f"h q[0]; {MARK}$\n", "unexpected character '$'"),
    ("garbage unicode", f"h q[{MARK}\u00b9];\n", "unexpected character"),
    ("unterminated string", f'include {MARK}"defs.inc;\n', "unterminated string"),
    ("reset", f"{MARK}reset q[0];\n", "unitary circuits only"),
    ("if", f"{MARK}if (c == 1) x q[0];\n", "unitary circuits only"),
    ("opaque", f"{MARK}opaque g a;\n", "unitary circuits only"),
    ("reset in body", f"gate g a {{ {MARK}reset a; }}\n", "unitary circuits only"),
    ("division by zero", f"rx(1 {MARK}/ 0) q[0];\n", "division by zero"),
    ("ln of zero", f"rx(2 * {MARK}ln(0)) q[0];\n", "ln(0.0)"),
    ("sqrt of negative", f"rx({MARK}sqrt(-1)) q[0];\n", "sqrt(-1.0)"),
    ("exp overflow", f"rx({MARK}exp(1000)) q[0];\n", "exp(1000.0)"),
    ("power overflow", f"rx(10 {MARK}^ 400) q[0];\n", "not a finite"),
    ("product overflow", f"rx(1e300 {MARK}* 1e300) q[0];\n", "overflows"),
    ("huge literal", f"rx({MARK}1e400) q[0];\n", "too large"),
    ("character after a comment", f"h q[0]; // note\n  {MARK}@ q[0];\n", "unexpected char"),
    ("unknown name", f"rx({MARK}theta) q[0];\n", "unknown name 'theta'"),
    ("missing operand", f"rx(1 + {MARK}) q[0];\n", "expected a number"),
    ("size mismatch", f"cx q, {MARK}r;\n", "register sizes differ"),
    ("repeated qubit", f"cx q[0], {MARK}q[0];\n", "appears twice"),
    ("repeated by broadcast", f"cx q, {MARK}q;\n", "appears twice"),
    ("unknown body param", f"gate g(a) x {{ rx({MARK}b) x; }}\n", "unknown parameter 'b'"),
    ("indexed body arg", f"gate g a {{ h a{MARK}[0]; }}\n", "without indices"),
    ("unknown body arg", f"gate g a {{ h {MARK}b; }}\n", "not a qubit argument"),
    ("repeated body arg", f"gate g a, b {{ cx a, {MARK}a; }}\n", "appears twice"),
    ("repeated formal", f"gate g(t) a, {MARK}t {{ }}\n", "listed twice"),
    ("self call", f"gate g a {{ {MARK}g a; }}\n", "cannot call itself"),
    ("measure in body", f"gate g a {{ {MARK}measure a -> c[0]; }}\n", "inside a gate body"),
    ("gate without qubits", f"gate g {MARK}{{ }}\n", "qubit argument name"),
    ("measure mismatch", f"measure {MARK}q -> c[0];\n", "equal size"),
    ("measure arrow", f"measure q[0] {MARK}c[0];\n", "expected '->'"),
    ("measure into qreg", f"measure q[0] -> {MARK}r[0];\n", "not a classical register"),
    (
        "gate after measure",
        f"measure q[1] -> c[1];\nh q[0];\n{MARK}h q;\n",
        "after it was measured",
    ),
    ("after register measure", f"measure q -> c;\n{MARK}x q[1];\n", "after it was measured"),
    ("second header", f"{MARK}OPENQASM 2.0;\n", "only once"),
    ("not a statement", f"{MARK}; h q[0];\n", "expected a statement"),
    ("include from text", f'include {MARK}"defs.inc";\n', "cannot include 'defs.inc'"),
    ("qelib1 twice", f'include {MARK}"qelib1.inc";\n', "already defined by qelib1.inc"),
    ("body error at call", "gate g(a) x { rx(1 ‸/ a) x; }\ng(0) q[0];\n", "called at <text>:7:1"),
    (
        "deep parentheses",
        "rx(" + "(" * 100 + MARK + "(" * 99_900 + "1" + ")" * 100_000 + ") q[0];\n",
        "nested deeper",
    ),
    ("deep unary", "rx(" + "-" * 100 + MARK + "-" * 99_900 + "1) q[0];\n", "nested deeper"),
    ("deep power", "rx(" + "2^" * 100 + MARK + "2^" * 9_900 + "2) q[0];\n", "nested deeper"),
]


@pytest.mark.parametrize(
    ("marked", "fragment"), [c[1:] for c in ERRORS_AFTER_PRE], ids=[c[0] for c in ERRORS_AFTER_PRE]
)
def test_errors_report_line_and_column(marked, fragment):
    text, line, column = locate(PRE + marked)
    with pytest.raises(QasmError) as info:
        read_qasm(text)
    err = info.value
    assert fragment in str(err)
    assert (err.source, err.line, err.column) == ("<text>", line, column), str(err)
    assert str(err).startswith(f"<text>:{line}:{column}: ")


FULL_ERRORS = [
    ("missing header", f"{MARK}qreg q[1];\n", "missing header"),
    ("empty text", f"{MARK}", "missing header"),
    ("wrong version", f"OPENQASM {MARK}4.0;\nqreg q[1];\n", "version 4.0"),
    ("version not a number", f"OPENQASM {MARK}two;\n", "version 2.0"),
    ("no qreg", f"OPENQASM 2.0;\n{MARK}", "no qubit register"),
    ("qelib1 gate not included", f"OPENQASM 2.0;\nqreg q[1];\n{MARK}h q[0];\n", "qelib1.inc"),
    ("header semicolon", f"OPENQASM 2.0\n{MARK}qreg q[1];\n", "expected ';'"),
]


@pytest.mark.parametrize(
    ("marked", "fragment"), [c[1:] for c in FULL_ERRORS], ids=[c[0] for c in FULL_ERRORS]
)
def test_structural_errors_report_line_and_column(marked, fragment):
    text, line, column = locate(marked)
    with pytest.raises(QasmError) as info:
        read_qasm(text)
    assert fragment in str(info.value)
    assert (info.value.line, info.value.column) == (line, column), str(info.value)


def test_expression_depth_just_under_the_cap_is_fine():
    expr = "(" * (MAX_EXPR_DEPTH - 1) + "1" + ")" * (MAX_EXPR_DEPTH - 1)
    assert ops_of(PRE + f"rx({expr}) q[0];\n") == [("rx", (0,), (1.0,))]


# ---------------------------------------------------------------------------- includes


def test_include_beside_the_file(tmp_path):
    (tmp_path / "defs.inc").write_text("// my gates\ngate bell a, b { h a; cx a, b; }\n")
    main = tmp_path / "main.qasm"
    main.write_text(HEADER + 'include "defs.inc";\nqreg q[2];\nbell q[1], q[0];\n')
    assert ops_of(main) == [("h", (1,), ()), ("cx", (1, 0), ())]


def test_error_inside_an_include_names_the_include(tmp_path):
    (tmp_path / "defs.inc").write_text("gate bad a {\n  foo a;\n}\n")
    main = tmp_path / "main.qasm"
    main.write_text(HEADER + 'include "defs.inc";\nqreg q[1];\n')
    with pytest.raises(QasmError) as info:
        read_qasm(main)
    assert info.value.source == str(tmp_path / "defs.inc")
    assert (info.value.line, info.value.column) == (2, 3)


@pytest.mark.parametrize(
    ("files", "include", "fragment"),
    [
        ({}, "missing.inc", "not found"),
        ({}, "../defs.inc", "plain file name"),
        ({"loop.inc": 'include "loop.inc";\n'}, "loop.inc", "includes itself"),
        ({"regs.inc": "qreg z[1];\n"}, "regs.inc", "only gate definitions"),
    ],
)
def test_other_includes_are_refused(tmp_path, files, include, fragment):
    for name, content in files.items():
        (tmp_path / name).write_text(content)
    main = tmp_path / "main.qasm"
    main.write_text(HEADER + f'include "{include}";\nqreg q[1];\n')
    with pytest.raises(QasmError) as info:
        read_qasm(main)
    assert fragment in str(info.value)


def test_qelib1_is_built_in_even_beside_a_file(tmp_path):
    (tmp_path / "qelib1.inc").write_text("this file is never read $$$\n")
    main = tmp_path / "main.qasm"
    main.write_text(HEADER + "qreg q[1];\nh q[0];\n")
    assert ops_of(main) == [("h", (0,), ())]


# ---------------------------------------------------------------------------- limits


def nested_gates(levels: int, fanout: int) -> str:
    lines = [HEADER, "qreg q[1];\n", "gate g0 a { U(0, 0, 0) a; }\n"]
    for i in range(1, levels + 1):
        lines.append(f"gate g{i} a {{ " + f"g{i - 1} a; " * fanout + "}\n")
    lines.append(f"g{levels} q[0];\n")
    return "".join(lines)


def test_expansion_bomb_is_refused_before_anything_is_expanded(monkeypatch):
    # Counted, not timed: a program of 10**10 operations must be refused from the gate
    # sizes alone, before one operation is expanded or emitted.
    from tnsim.circuits.qasm import fast, program, statements

    calls = {"expand": 0, "emit": 0}
    real_expand, real_emit = statements.expand, program.Program.emit

    def counted_expand(*args):
        calls["expand"] += 1
        return real_expand(*args)

    def counted_emit(self, *args):
        calls["emit"] += 1
        return real_emit(self, *args)

    monkeypatch.setattr(statements, "expand", counted_expand)
    monkeypatch.setattr(fast, "expand", counted_expand)
    monkeypatch.setattr(program.Program, "emit", counted_emit)
    with pytest.raises(QasmError) as info:
        read_qasm(nested_gates(10, 10))  # 10**10 operations
    assert calls == {"expand": 0, "emit": 0}
    assert f"max_ops={DEFAULT_MAX_OPS}" in str(info.value)
    assert info.value.line == 15  # header (2) + qreg + 11 definitions, then the call


def test_max_ops_counts_expanded_operations():
    text = PRE + "h r;\n"
    assert len(read_qasm(text, max_ops=3)) == 3
    with pytest.raises(QasmError, match="max_ops=2"):
        read_qasm(text, max_ops=2)
    assert len(read_qasm(nested_gates(3, 4), max_ops=64)) == 64


def test_gate_nesting_depth_is_capped():
    assert len(read_qasm(nested_gates(MAX_GATE_DEPTH - 1, 1))) == 1
    with pytest.raises(QasmError, match="nest deeper"):
        read_qasm(nested_gates(MAX_GATE_DEPTH + 1, 1))


# ---------------------------------------------------------------------------- writer


def test_write_then_read_every_named_gate():
    rng = np.random.default_rng(7)
    circuit = Circuit(4)
    for name, spec in sorted(GATES.items()):
        qubits = [int(q) for q in rng.permutation(4)[: spec.num_qubits]]
        circuit.append(name, qubits, [float(p) for p in rng.normal(size=spec.num_params)])
    text = write_qasm(circuit)
    assert text.startswith(HEADER)
    assert read_qasm(text).ops == circuit.ops


def test_writer_refuses_custom_unitaries():
    circuit = Circuit(1).h(0).unitary(np.diag([1, 1j]), [0], name="mine")
    with pytest.raises(InputError, match="custom unitary"):
        write_qasm(circuit)


@pytest.mark.parametrize("name", sorted(EXTENSION_DEFINITIONS))
def test_extension_definitions_are_exact_decompositions(name):
    """Expanding the written definition (renamed, so tnsim does not keep it native) gives
    exactly the tnsim matrix, global phase included."""
    definition = EXTENSION_DEFINITIONS[name].replace(f"gate {name}", "gate expanded", 1)
    spec = GATES[name]
    rng = np.random.default_rng(11)
    for _ in range(3):
        params = [float(p) for p in rng.uniform(-np.pi, np.pi, spec.num_params)]
        args = f"({', '.join(map(repr, params))})" if params else ""
        circuit = read_qasm(HEADER + definition + f"\nqreg q[2];\nexpanded{args} q[0], q[1];\n")
        assert all(op.name in QELIB1_GATES for op in circuit.ops)
        np.testing.assert_allclose(dense_unitary(circuit), GATES[name].matrix(params), atol=1e-12)


def test_extension_definition_is_recognised_regardless_of_layout():
    compact = " ".join(EXTENSION_DEFINITIONS["fsim"].split()).replace("{", "{ // fsim\n")
    ops = ops_of(HEADER + compact + "\nqreg q[2];\nfsim(0.1, 0.2) q[1], q[0];\n")
    assert ops == [("fsim", (1, 0), (0.1, 0.2))]


def test_other_definitions_of_extension_names_are_ordinary_gates():
    text = HEADER + "gate iswap a, b { swap a, b; }\nqreg q[2];\niswap q[0], q[1];\n"
    assert ops_of(text) == [("swap", (0, 1), ())]


def test_written_parameters_round_trip_bit_for_bit():
    values = [0.1 + 0.2, -0.0, 5e-324, 1.7976931348623157e308, -math.pi / 3, 1e16 + 2]
    circuit = Circuit(1)
    for v in values:
        circuit.rz(v, 0)
    back = read_qasm(write_qasm(circuit))
    assert [op.params[0] for op in back.ops] == values
    assert [math.copysign(1, op.params[0]) for op in back.ops] == [
        math.copysign(1, v) for v in values
    ]


# ---------------------------------------------------------------------------- hypothesis

FAST = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def only_tnsim_errors(text: str) -> None:
    with contextlib.suppress(QasmError, InputError):
        read_qasm(text, max_ops=1000)


@FAST
@given(st.text(max_size=300))
def test_random_text_only_raises_tnsim_errors(text):
    only_tnsim_errors(text)


@FAST
@given(st.text(alphabet='OPENQASM2.0;qregh[]()cx,{}+-*/^pi\n"->', max_size=200))
def test_random_qasm_characters_only_raise_tnsim_errors(text):
    only_tnsim_errors(HEADER + text)


TOKENS = [
    "OPENQASM",
    "2.0",
    ";",
    "include",
    '"qelib1.inc"',
    '"x.inc"',
    "qreg",
    "creg",
    "q",
    "c",
    "r",
    "[",
    "]",
    "0",
    "1",
    "2",
    "3",
    "99999999",
    "1e400",
    "0.5",
    "gate",
    "g",
    "a",
    "b",
    "t",
    "(",
    ")",
    "{",
    "}",
    "h",
    "cx",
    "U",
    "CX",
    "rx",
    "u3",
    "iswap",
    "fsim",
    "pi",
    "+",
    "-",
    "*",
    "/",
    "^",
    "sin",
    "ln",
    "sqrt",
    "exp",
    ",",
    "->",
    "measure",
    "barrier",
    "reset",
    "if",
    "opaque",
    "//",
    "\n",
    "$",
]


@FAST
@given(st.lists(st.sampled_from(TOKENS), max_size=60), st.booleans())
def test_token_soup_only_raises_tnsim_errors(tokens, with_prefix):
    text = " ".join(tokens)
    only_tnsim_errors((PRE if with_prefix else "") + text)


@st.composite
def circuits(draw) -> Circuit:
    n = draw(st.integers(1, 5))
    names = sorted(name for name, spec in GATES.items() if spec.num_qubits <= n)
    circuit = Circuit(n)
    finite = st.floats(allow_nan=False, allow_infinity=False)
    for name in draw(st.lists(st.sampled_from(names), max_size=12)):
        spec = GATES[name]
        qubits = draw(st.permutations(range(n)))[: spec.num_qubits]
        params = draw(st.lists(finite, min_size=spec.num_params, max_size=spec.num_params))
        circuit.append(name, qubits, params)
    return circuit


@FAST
@given(circuits())
def test_round_trip_random_circuits(circuit):
    back = read_qasm(write_qasm(circuit))
    assert back.num_qubits == circuit.num_qubits
    assert back.ops == circuit.ops
    assert all(isinstance(op, Operation) for op in back.ops)


def test_a_missing_file_name_is_not_read_as_text():
    with pytest.raises(InputError, match="no such file"):
        read_qasm("circuits/missing_bell.qasm")


# ---------------------------------------------------------------------------- fast path

SIGNATURES = {"h": (0, 1), "rz": (1, 1), "rzz": (1, 2), "cx": (0, 2), "ccx": (0, 3), "U": (3, 1)}
SIGNATURES |= {"CX": (0, 2), "u0": (1, 1), "g": (1, 2), "iswap": (0, 2), "measure": (0, 1)}
NUMBERS = ["0.5", "-1", "+2", ".5", "5.", "1e3", "1e400", "-0", "0", "pi/2", " 3 ", "1.5e-3"]
NUMBERS += ["1/0", "2^2000", "pi*-", "t", "-pi/4", "- 2^2", "1 //x"]
ARGS = ["q[0]", "q[1]", "r[0]", "r[2]", "r[3]", "q", "c[0]", "q[01]", "q[ 1 ]", "s[0]"]
GAPS = [" ", "", "\t", "\n", " // c\n", "\n// h q[0];\n", "\n//x r[1];"]
DEFINITIONS = "gate g(t) a, b { rzz(t/2) a, b; rx(1/t) b; }\n" + EXTENSION_DEFINITIONS["iswap"]


@st.composite
def statements(draw) -> str:
    """A gate statement near the forms the fast path takes, now and then a little off."""
    name = draw(st.sampled_from(sorted(SIGNATURES)))
    n_params, n_qubits = SIGNATURES[name]
    n_params = max(0, n_params + draw(st.sampled_from([0] * 8 + [-1, 1])))
    n_qubits = max(0, n_qubits + draw(st.sampled_from([0] * 8 + [-1, 1])))
    gap = st.sampled_from(GAPS)
    params = ",".join(
        draw(st.lists(st.sampled_from(NUMBERS), min_size=n_params, max_size=n_params))
    )
    text = name + (f"({params})" if params or draw(st.booleans()) else draw(gap))
    args = draw(st.lists(st.sampled_from(ARGS), min_size=n_qubits, max_size=n_qubits))
    if name == "measure":
        return f"measure {args[0] if args else 'q[0]'} -> c[1];"
    return text + draw(gap) + ("," + draw(gap)).join(args) + draw(gap) + ";" + draw(gap)


def outcome(text: str):
    try:
        return ops_of(text, max_ops=50)
    except (QasmError, InputError) as exc:
        return str(exc)


@FAST
@given(st.lists(statements(), max_size=12))
def test_fast_path_changes_nothing_but_speed(monkeypatch_fast, program):
    # Differential check: the statement fast path against the general parser alone: the
    # same operations, or the same error at the same place.
    text = PRE + DEFINITIONS + "\nh q[0]; rzz(0.25) q[0], r[1];\n" + "\n".join(program)
    fast = outcome(text)
    with monkeypatch_fast():
        general = outcome(text)
    assert fast == general


@pytest.fixture(scope="module")
def monkeypatch_fast():
    """A context in which the reader's fast path takes no statement at all."""

    @contextlib.contextmanager
    def general_parser_only():
        saved = qasm_reader.read_simple_statements
        qasm_reader.read_simple_statements = lambda text, pos, *rest: pos
        try:
            yield
        finally:
            qasm_reader.read_simple_statements = saved

    return general_parser_only


def test_fast_path_is_used_and_agrees_on_a_long_program(monkeypatch, monkeypatch_fast):
    lines = [f"rzz({k / 7!r}) q[{k % 2}], r[{k % 3}];\nh r[{k % 3}];" for k in range(300)]
    text = PRE + "\n".join(lines) + "\nmeasure q[1] -> c[1];\n"
    taken = []
    real = qasm_reader.read_simple_statements

    def counting(text, pos, *rest):
        end = real(text, pos, *rest)
        taken.append(text[pos:end].count(";"))
        return end

    monkeypatch.setattr(qasm_reader, "read_simple_statements", counting)
    fast = read_qasm(text).ops
    monkeypatch.undo()
    with monkeypatch_fast():
        general = read_qasm(text).ops
    assert fast == general and len(fast) == 600
    assert sum(taken) == 600  # every gate statement went by the fast path


# --- measure statements, the classical-bit order, and the original-library writer ---


def test_measure_records_the_classical_bit_of_each_qubit():
    text = (
        HEADER + "qreg q[3];\ncreg a[2];\ncreg b[2];\n"
        "measure q[2] -> a[0];\nmeasure q[0] -> b[1];\nmeasure q[1] -> a[1];\n"
    )
    # Classical bits are numbered across the cregs in declaration order: b[1] is bit 3.
    assert read_qasm(text).measurements == {0: 2, 3: 0, 1: 1}


def test_register_measure_pairs_bits_in_order_and_later_ones_replace():
    text = HEADER + "qreg q[2];\nqreg r[2];\ncreg c[2];\nmeasure r -> c;\nmeasure q[0] -> c[1];\n"
    assert read_qasm(text).measurements == {0: 2, 1: 0}


def test_writer_keeps_measurements():
    c = Circuit(3).h(0).cx(0, 1).measure(2, 0).measure(0, 4)
    back = read_qasm(write_qasm(c))
    assert back.ops == c.ops
    assert back.measurements == {0: 2, 4: 0}


def test_writer_comments_follow_the_version_line():
    text = write_qasm(Circuit(1).h(0), comments=["family ghz", "two\nlines"])
    assert text.splitlines()[:4] == ["OPENQASM 2.0;", "// family ghz", "// two", "// lines"]
    assert read_qasm(text).ops == Circuit(1).h(0).ops


def _dense_unitary(circuit: Circuit) -> np.ndarray:
    """Columns: the state of the circuit run on each basis input (numpy reference)."""
    from tnsim.testing import dense_state

    n = circuit.num_qubits
    cols = []
    for k in range(1 << n):
        prep = Circuit(n)
        for q in range(n):
            if (k >> (n - 1 - q)) & 1:
                prep.x(q)
        prep.ops.extend(circuit.ops)
        cols.append(dense_state(prep).reshape(-1))
    return np.array(cols).T


@pytest.mark.parametrize("name", sorted({**ADDED_DEFINITIONS, **EXTENSION_DEFINITIONS}))
def test_each_written_definition_is_the_gate_exactly(name):
    # The bodies call only gates of the original qelib1.inc (Cross, Bishop, Smolin,
    # Gambetta, arXiv:1707.03429, 2017) or earlier definitions; renamed, they are read as
    # user gates, expanded, and must give tnsim's matrix, global phase included.
    spec = GATES[name]
    params = [0.37, -1.1, 2.3][: spec.num_params]
    defs = {**ADDED_DEFINITIONS, **EXTENSION_DEFINITIONS}
    text = defs[name].replace(f"gate {name}", f"gate my_{name}", 1)
    args = ", ".join(f"q[{i}]" for i in range(spec.num_qubits))
    call = f"my_{name}({', '.join(map(repr, params))})" if params else f"my_{name}"
    c = read_qasm(f"{HEADER}{text}\nqreg q[{spec.num_qubits}];\n{call} {args};\n")
    np.testing.assert_allclose(_dense_unitary(c), GATES[name].matrix(params), atol=1e-12, rtol=0)


def _all_gates_circuit() -> Circuit:
    c = Circuit(3).sx(0).sxdg(1).p(0.2, 2).fsim(0.3, 0.2, 0, 1).crx(0.5, 1, 2).cry(0.1, 0, 2)
    c.cswap(0, 1, 2).iswap(1, 2).u(0.1, 0.2, 0.3, 0).rzz(0.4, 0, 2).ryy(0.3, 1, 0)
    return c.swap(0, 2).cp(0.7, 1, 0).rxx(0.2, 2, 1).h(1).ccx(0, 1, 2).measure(1, 0)


def test_original_library_calls_only_original_gates_and_reads_back_the_same():
    c = _all_gates_circuit()
    text = write_qasm(c, library="original")
    lines = text.splitlines()
    defined = {line.split()[1].split("(")[0] for line in lines if line.startswith("gate ")}
    main = text[text.index("qreg") :]
    called = {
        line.split()[0].split("(")[0]
        for line in main.splitlines()[1:]
        if line and not line.startswith(("creg", "measure"))
    }
    assert called <= set(ORIGINAL_QELIB1) | defined | {"U"}
    body_calls = {
        line.strip().split()[0].split("(")[0]
        for line in text[: text.index("qreg")].splitlines()
        if line.startswith("  ")
    }
    assert body_calls <= set(ORIGINAL_QELIB1) | defined
    back = read_qasm(text)
    assert back.ops == c.ops
    assert back.measurements == c.measurements


def test_a_changed_definition_of_a_qelib1_gate_is_still_refused():
    text = ADDED_DEFINITIONS["rzz"].replace("rz(theta)", "rz(2*theta)")
    with pytest.raises(QasmError, match=r"already defined by qelib1\.inc"):
        read_qasm(f"{HEADER}{text}\nqreg q[2];\n")


def test_unknown_library_is_refused():
    with pytest.raises(InputError, match="library"):
        write_qasm(Circuit(1).h(0), library="strict")
