"""Tests of tnsim.circuits.qasm3: the OpenQASM 3 reader and writer.

The language is the one of A. W. Cross, A. Javadi-Abhari, T. Alexander, N. de Beaudrap,
L. S. Bishop, S. Heidel, C. A. Ryan, P. Sivarajah, J. Smolin, J. M. Gambetta,
B. R. Johnson, "OpenQASM 3: A broader and deeper quantum assembly language", ACM
Transactions on Quantum Computing 3, 12 (2022).  The programs below follow its grammar as
we know it; the example programs and the definitions of the standard gate library
(stdgates.inc) are written from memory, and say so.

Three kinds of check: (1) every valid OpenQASM 2.0 circuit of tests/test_qasm.py, rewritten
in OpenQASM 3, has the same amplitudes (tnsim's contraction and a plain numpy state vector);
(2) examples and definitions of the specification; (3) every bad-input class of the 2.0
reader tried on the 3.0 reader, and mutation fuzzing that only tnsim's own errors come out.
"""

from __future__ import annotations

import contextlib
import itertools
import math
import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import tnsim
import tnsim.circuits.qasm3.reader as qasm3_reader
from tnsim import read_qasm, write_qasm
from tnsim.circuits.circuit import Circuit
from tnsim.circuits.gates import GATES, gate_matrix
from tnsim.circuits.qasm3 import (
    EXTENSION_DEFINITIONS3,
    MAX_CUSTOM_QUBITS,
    MAX_GATE_DEPTH,
    STDGATE_NAMES,
    read_qasm3,
)
from tnsim.circuits.qasm3.declarations import convert
from tnsim.circuits.qasm3.program import Program
from tnsim.circuits.qasm3.writer import write_qasm3
from tnsim.cli import main
from tnsim.errors import InputError, QasmError
from tnsim.testing import dense_state

H2 = 'OPENQASM 2.0;\ninclude "qelib1.inc";\n'
H3 = 'OPENQASM 3.0;\ninclude "stdgates.inc";\n'
PRE2 = H2 + "qreg q[2];\nqreg r[3];\ncreg c[2];\n"
PRE3 = H3 + "qubit[2] q;\nqubit[3] r;\nbit[2] c;\n"
MARK = "‸"


def ops_of(text: str, **kwargs) -> list[tuple]:
    return [(op.name, op.qubits, op.params) for op in read_qasm(text, **kwargs).ops]


def locate(marked: str) -> tuple[str, int, int]:
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


def all_bitstrings(n: int) -> list[str]:
    return ["".join(bits) for bits in itertools.product("01", repeat=n)]


def assert_same_amplitudes(c2: Circuit, c3: Circuit) -> None:
    """Same amplitudes of every bitstring: tnsim's contraction and a numpy state vector."""
    assert c2.num_qubits == c3.num_qubits
    bits = all_bitstrings(c2.num_qubits)
    a2, a3 = tnsim.amplitudes(c2, bits), tnsim.amplitudes(c3, bits)
    np.testing.assert_allclose(a3, a2, atol=1e-12)
    np.testing.assert_allclose(a3, dense_state(c2), atol=1e-12)


# ---------------------------------------------------------------------------- 2.0 / 3.0 pairs
# Each valid program of tests/test_qasm.py, and its OpenQASM 3 rewrite.

EQUIVALENT = {
    "registers in declaration order": (
        PRE2 + "h r[0];\ncx q[1], r[2];\nx q[0];\n",
        PRE3 + "h r[0];\ncx q[1], r[2];\nx q[0];\n",
    ),
    "broadcasting": (
        H2 + "qreg a[2];\nqreg b[2];\nh a;\ncx a, b;\ncz a[0], b;\nswap b, a[1];\n",
        H3 + "qubit[2] a;\nqubit[2] b;\nh a;\ncx a, b;\ncz a[0], b;\nswap b, a[1];\n",
    ),
    "user gates with parameters and nesting": (
        PRE2 + "gate rot(t, p) x { rz(p) x; rx(t / 2) x; }\n"
        "gate ent(t) x, y { rot(t, -t) x; cx x, y; rot(2 * t, t ^ 2) y; }\n"
        "ent(0.5) q[1], q[0];\n",
        PRE3 + "gate rot(t, p) x { rz(p) x; rx(t / 2) x; }\n"
        "gate ent(t) x, y { rot(t, -t) x; cx x, y; rot(2 * t, t ** 2) y; }\n"
        "ent(0.5) q[1], q[0];\n",
    ),
    "user gate broadcast": (
        H2 + "qreg a[2];\nqreg b[2];\ngate pair x, y { cx x, y; h y; }\npair a, b;\n",
        H3 + "qreg a[2];\nqreg b[2];\ngate pair x, y { cx x, y; h y; }\npair a, b;\n",
    ),
    "comments, barrier, measure": (
        PRE2 + "// c\nh q[0]; // t\nbarrier q, r[1];\ncx q[0], q[1];\nmeasure q -> c;\n"
        "measure r[0] -> c[1];\nx r[1];\n",
        PRE3 + "/* c */\nh q[0]; // t\nbarrier q, r[1];\ncx q[0], q[1];\nc = measure q;\n"
        "c[1] = measure r[0];\nx r[1];\n",
    ),
    "built-ins": (
        "OPENQASM 2.0;\nqreg q[2];\nU(0.1, 0.2, 0.3) q[0];\nCX q[0], q[1];\n",
        H3 + "qubit[2] q;\nU(0.1, 0.2, 0.3) q[0];\nCX q[0], q[1];\n",
    ),
    "empty gate, empty parameter list": (
        PRE2 + "gate g() a { }\ng() q[0];\ng q;\nh() q[1];\n",
        PRE3 + "gate g() a { }\ng() q[0];\ng q;\nh() q[1];\n",
    ),
    "extension gates by their definitions": (
        PRE2
        + "\n".join(tnsim.circuits.qasm.EXTENSION_DEFINITIONS.values())
        + "\nh q; h r; iswap q[0], r[1]; ryy(0.3) r[2], q[1]; fsim(0.4, 0.5) q[1], r[0];\n",
        H3
        + "\n".join(EXTENSION_DEFINITIONS3.values())
        + "\nqubit[2] q; qubit[3] r;\nh q; h r; iswap q[0], r[1]; ryy(0.3) r[2], q[1];"
        " fsim(0.4, 0.5) q[1], r[0];\n",
    ),
}

ARITHMETIC = [
    ("-pi/2^2", "-pi/2**2"),
    ("sin(pi/6)*2", "sin(pi/6)*2"),
    ("2^3^2", "2**3**2"),
    ("-2^2", "-2**2"),
    ("2^-1", "2**-1"),
    ("(1+2)*3", "(1+2)*3"),
    ("1-2-3", "1-2-3"),
    ("8/4/2", "8/4/2"),
    ("2*-3", "2*-3"),
    ("+3", "+3"),
    ("--3", "--3"),
    ("1e-3", "1e-3"),
    ("1E2", "1E2"),
    (".5", ".5"),
    ("3.", "3."),
    ("ln(exp(1))", "log(exp(1))"),
    ("sqrt(16)", "sqrt(16)"),
    ("cos(0) + tan(0)", "cos(0) + tan(0)"),
    ("pi", "π"),
]


@pytest.mark.parametrize("name", sorted(EQUIVALENT))
def test_each_2_0_circuit_rewritten_in_3_0_has_the_same_amplitudes(name):
    v2, v3 = EQUIVALENT[name]
    c2, c3 = read_qasm(v2), read_qasm(v3)
    assert_same_amplitudes(c2, c3)
    if name != "extension gates by their definitions":
        assert c3.ops == c2.ops


@pytest.mark.parametrize(("e2", "e3"), ARITHMETIC)
def test_parameter_arithmetic_matches_2_0(e2, e3):
    [(_, _, p2)] = ops_of(PRE2 + f"rz({e2}) q[0];\n")
    [(_, _, p3)] = ops_of(PRE3 + f"rz({e3}) q[0];\n")
    assert p3 == p2


def test_every_qelib1_gate_has_a_3_0_spelling_with_the_same_matrix():
    """qelib1.inc gates of 2.0 against stdgates.inc (or tnsim's definitions) in 3.0."""
    rename = {"u": "U", "u0": None, "cu1": "cu1", "cu3": "cu3", "sxdg": "sxdg"}
    lib2 = tnsim.circuits.qasm.QELIB1_GATES
    for name, tnsim_name in lib2.items():
        if rename.get(name, name) is None:
            continue
        spec = GATES[tnsim_name]
        params = "(" + ", ".join(["0.5"] * spec.num_params) + ")" if spec.num_params else ""
        qubits = ", ".join(f"r[{i}]" for i in range(spec.num_qubits))
        defs = "\n".join(EXTENSION_DEFINITIONS3.values())
        c2 = read_qasm(PRE2 + f"{name}{params} {qubits};\n")
        c3 = read_qasm(PRE3 + defs + f"\n{rename.get(name, name)}{params} {qubits};\n")
        assert c3.ops == c2.ops, name


def test_stdgates_table_names_tnsim_gates():
    assert set(STDGATE_NAMES) >= {"x", "cx", "rz", "cu", "CX", "phase", "cphase", "u3"}
    for name, target in STDGATE_NAMES.items():
        if name != "cu":
            assert target in GATES


# ---------------------------------------------------------------------------- must show


V2_FILE = """OPENQASM 2.0;
include "qelib1.inc";
qreg q[4];
h q[0];
crx(0.3) q[0], q[1];
crx(0.3) q[1], q[2];
crx(0.3) q[2], q[3];
sdg q[3];
cu1(0.3) q[3], q[0];
u3(0.3, 0.2, 0.1) q[2];
"""

V3_FILE = """OPENQASM 3.0;
include "stdgates.inc";
input angle theta;
qubit[4] q;
h q[0];
for int i in [0:2] {
  ctrl @ rx(theta) q[i], q[i + 1];
}
inv @ s q[3];
ctrl @ p(theta) q[3], q[0];
inv @ inv @ u3(theta, 0.2, 0.1) q[2];
"""


def test_a_3_0_file_with_modifiers_an_input_and_a_loop_equals_its_2_0_file(tmp_path, capsys):
    p2, p3 = tmp_path / "v2.qasm", tmp_path / "v3.qasm"
    p2.write_text(V2_FILE)
    p3.write_text(V3_FILE)
    c2, c3 = read_qasm(p2), read_qasm(p3, inputs={"theta": 0.3})
    assert_same_amplitudes(c2, c3)
    bits = all_bitstrings(4)
    args = [a for b in bits for a in ("--bits", b)] + ["--json"]
    assert main(["amp", str(p2), *args]) == 0
    out2 = capsys.readouterr().out
    assert main(["amp", str(p3), *args, "--input", "theta=0.3"]) == 0
    out3 = capsys.readouterr().out
    assert out3 == out2


def test_inputs_are_required_and_checked():
    with pytest.raises(QasmError, match="input 'theta' has no value"):
        read_qasm(V3_FILE)
    with pytest.raises(InputError, match="not declared"):
        read_qasm(V3_FILE, inputs={"theta": 0.3, "phi": 1.0})
    with pytest.raises(InputError, match="real number"):
        read_qasm(V3_FILE, inputs={"theta": "0.3"})
    with pytest.raises(InputError, match="finite"):
        read_qasm(V3_FILE, inputs={"theta": math.inf})
    with pytest.raises(InputError, match=r"OpenQASM 2\.0 program has no inputs"):
        read_qasm(V2_FILE, inputs={"theta": 0.3})


def test_cli_input_errors_are_one_line(tmp_path, capsys):
    path = tmp_path / "v3.qasm"
    path.write_text(V3_FILE)
    for extra, fragment in [
        ([], "has no value"),
        (["--input", "theta"], "NAME=VALUE"),
        (["--input", "theta=abc"], "not a number"),
        (["--input", "theta=1", "--input", "theta=2"], "twice"),
        (["--input", "theta=nan"], "finite"),
    ]:
        assert main(["amp", str(path), "--bits", "0000", *extra]) == 2
        err = capsys.readouterr().err
        assert fragment in err and err.count("\n") == 1, err


@pytest.mark.parametrize(
    ("kind", "width", "value", "expected"),
    [
        ("float", 64, 0.1, 0.1),
        ("float", 32, 0.1, float(np.float32(0.1))),
        ("angle", None, -math.pi / 2, 1.5 * math.pi),
        ("angle", None, 2 * math.pi, 0.0),
        ("angle", 3, 1.0, math.pi / 4),  # nearest multiple of 2π/8
        ("int", None, 5.0, 5),
        ("uint", 4, 15, 15),
    ],
)
def test_declared_types_apply_to_values(kind, width, value, expected):
    assert convert(kind, width, value, "x") == pytest.approx(expected, abs=1e-15)


def test_declared_types_refuse_values_that_do_not_fit():
    for args in [("int", None, 1.5), ("uint", 4, 16), ("uint", None, -1), ("int", 8, 128)]:
        with pytest.raises(ValueError, match="x"):
            convert(*args, "x")
    with pytest.raises(QasmError, match="does not fit"):
        read_qasm(H3 + "input uint[2] n;\nqubit q;\n", inputs={"n": 7})


def test_constants_inputs_and_loops_drive_indices_and_counts():
    text = H3 + (
        "input int n;\nconst int last = n - 1;\nqubit[n] q;\n"
        "for uint i in [0:last - 1] { cx q[i], q[i + 1]; }\n"
        "for int i in [last:-2:0] rz(i * pi / 4) q[i];\n"
        "pow(n) @ x q[last];\n"
    )
    got = ops_of(text, inputs={"n": 4})
    assert got[:3] == [("cx", (0, 1), ()), ("cx", (1, 2), ()), ("cx", (2, 3), ())]
    assert [(name, qs) for name, qs, _ in got[3:5]] == [("rz", (3,)), ("rz", (1,))]
    assert got[3][2][0] == 3 * math.pi / 4
    assert got[5:] == [("x", (3,), ())] * 4


# ---------------------------------------------------------------------------- specification
# Definitions of stdgates.inc as we remember them (from memory): each, under another name,
# must give exactly the matrix tnsim reads for the gate (global phase included).

STDGATES_FROM_MEMORY = {
    "x": ("gate my a { U(π, 0, π) a; }", 1),
    "y": ("gate my a { U(π, π/2, π/2) a; }", 1),
    "h": ("gate my a { U(π/2, 0, π) a; }", 1),
    "p": ("gate my(λ) a { ctrl @ gphase(λ) a; }", 1),
    "z": ("gate my a { ctrl @ gphase(π) a; }", 1),
    "rx": ("gate my(θ) a { U(θ, -π/2, π/2) a; }", 1),
    "ry": ("gate my(θ) a { U(θ, 0, 0) a; }", 1),
    "rz": ("gate my(λ) a { gphase(-λ/2); U(0, 0, λ) a; }", 1),
    "u1": ("gate my(λ) a { U(0, 0, λ) a; }", 1),
    "id": ("gate my a { U(0, 0, 0) a; }", 1),
    "cx": ("gate my a, b { ctrl @ x a, b; }", 2),
    "cy": ("gate my a, b { ctrl @ y a, b; }", 2),
    "cz": ("gate my a, b { ctrl @ z a, b; }", 2),
    "cp": ("gate my(λ) a, b { ctrl @ p(λ) a, b; }", 2),
    "crx": ("gate my(θ) a, b { ctrl @ rx(θ) a, b; }", 2),
    "cry": ("gate my(θ) a, b { ctrl @ ry(θ) a, b; }", 2),
    "crz": ("gate my(θ) a, b { ctrl @ rz(θ) a, b; }", 2),
    "ch": ("gate my a, b { ctrl @ h a, b; }", 2),
    "swap": ("gate my a, b { cx a, b; cx b, a; cx a, b; }", 2),
    "ccx": ("gate my a, b, c { ctrl @ ctrl @ x a, b, c; }", 3),
    "cswap": ("gate my a, b, c { ctrl @ swap a, b, c; }", 3),
    "s": ("gate my a { pow(2) @ t a; }", 1),
    "sdg": ("gate my a { inv @ pow(2) @ t a; }", 1),
    "t": ("gate my a { ctrl @ gphase(π/4) a; }", 1),
}


@pytest.mark.parametrize("name", sorted(STDGATES_FROM_MEMORY))
def test_standard_library_definitions_give_the_gates_tnsim_reads(name):
    definition, arity = STDGATES_FROM_MEMORY[name]
    spec = GATES[name]
    params = [0.37] * spec.num_params
    args = f"({', '.join(map(repr, params))})" if params else ""
    qubits = ", ".join(f"q[{i}]" for i in range(arity))
    circuit = read_qasm(H3 + definition + f"\nqubit[{arity}] q;\nmy{args} {qubits};\n")
    np.testing.assert_allclose(dense_unitary(circuit), gate_matrix(name, params), atol=1e-12)


def test_cu_is_the_controlled_u_with_a_phase_on_the_control():
    """cu(θ, φ, λ, γ) = |0><0| ⊗ I + e^{iγ} |1><1| ⊗ U(θ, φ, λ) (from memory of the library)."""
    t, f, lam, g = 0.3, 0.5, -0.7, 1.1
    circuit = read_qasm(H3 + f"qubit[2] q;\ncu({t}, {f}, {lam}, {g}) q[0], q[1];\n")
    expected = np.eye(4, dtype=complex)
    expected[2:, 2:] = np.exp(1j * g) * gate_matrix("u", [t, f, lam])
    np.testing.assert_allclose(dense_unitary(circuit), expected, atol=1e-12)


def test_cphase_built_from_u_and_cx_as_in_the_specification():
    # The specification's example of a user-defined controlled phase (from memory).
    text = H3 + (
        "gate cphase2(θ) a, b {\n  U(0, 0, θ / 2) a;\n  CX a, b;\n  U(0, 0, -θ / 2) b;\n"
        "  CX a, b;\n  U(0, 0, θ / 2) b;\n}\nqubit[2] q;\ncphase2(π / 2) q[0], q[1];\n"
    )
    np.testing.assert_allclose(
        dense_unitary(read_qasm(text)), gate_matrix("cp", [math.pi / 2]), atol=1e-12
    )


def test_modifier_rules_of_the_specification():
    """inv @ U(a, b, c) = U(-a, -c, -b); pow(k) is the k-fold product, pow(-k) its inverse;
    negctrl is ctrl between x gates; ctrl(2) @ g = ctrl @ ctrl @ g; inv @ gphase(a) =
    gphase(-a) (the specification's modifier rules, from memory)."""
    u = gate_matrix("u", [0.3, 0.5, 0.7])
    [op] = read_qasm(H3 + "qubit q;\ninv @ U(0.3, 0.5, 0.7) q;\n").ops
    np.testing.assert_allclose(op.matrix(), u.conj().T, atol=1e-15)
    c = read_qasm(H3 + "qubit q;\npow(-3) @ rx(0.2) q;\n")
    expected = np.linalg.matrix_power(gate_matrix("rx", [0.2]).conj().T, 3)
    np.testing.assert_allclose(dense_unitary(c), expected, atol=1e-12)
    assert read_qasm(H3 + "qubit q;\npow(0) @ h q;\n").ops == []
    neg = read_qasm(H3 + "qubit[2] q;\nnegctrl @ ry(0.4) q[0], q[1];\n")
    expected = np.eye(4, dtype=complex)
    expected[:2, :2] = gate_matrix("ry", [0.4])
    np.testing.assert_allclose(dense_unitary(neg), expected, atol=1e-12)
    a = read_qasm(H3 + "qubit[3] q;\nctrl(2) @ sx q[0], q[1], q[2];\n")
    b = read_qasm(H3 + "qubit[3] q;\nctrl @ ctrl @ sx q[0], q[1], q[2];\n")
    expected = np.eye(8, dtype=complex)
    expected[6:, 6:] = gate_matrix("sx")
    np.testing.assert_allclose(dense_unitary(a), expected, atol=1e-15)
    np.testing.assert_allclose(dense_unitary(b), expected, atol=1e-15)
    g = read_qasm(H3 + "qubit q;\ngphase(0.5);\ninv @ gphase(0.2);\nh q;\n")
    np.testing.assert_allclose(dense_unitary(g), np.exp(0.3j) * gate_matrix("h"), atol=1e-15)


def test_inverse_of_a_defined_gate_reverses_its_body():
    text = H3 + (
        "gate g(a) x, y { rx(a) x; cx x, y; s y; gphase(a); }\nqubit[2] q;\n"
        "g(0.4) q[0], q[1];\ninv @ g(0.4) q[0], q[1];\n"
    )
    np.testing.assert_allclose(dense_unitary(read_qasm(text)), np.eye(4), atol=1e-14)


def test_controlled_defined_gate_with_a_global_phase():
    # ctrl @ g for g = e^{iγ} X: the phase lands on the control (C(e^{iγ}X) != CX).
    text = H3 + "gate g a { gphase(0.7); x a; }\nqubit[2] q;\nctrl @ g q[0], q[1];\n"
    expected = np.eye(4, dtype=complex)
    expected[2:, 2:] = np.exp(0.7j) * gate_matrix("x")
    np.testing.assert_allclose(dense_unitary(read_qasm(text)), expected, atol=1e-15)


def test_ripple_carry_adder_example_adds():
    """The specification's ripple-carry adder (majority / unmajority gates, from memory),
    with its classical input bits set by x gates instead of an if statement: the output is
    the basis state holding a + b.  A closed-form check: 13 + 7 = 20 = 0b10100."""
    a_in, b_in = 13, 7
    prep = "".join(f"x a[{i}];\n" for i in range(4) if a_in >> i & 1)
    prep += "".join(f"x b[{i}];\n" for i in range(4) if b_in >> i & 1)
    text = H3 + (
        "gate majority a, b, c {\n  cx c, b;\n  cx c, a;\n  ccx a, b, c;\n}\n"
        "gate unmaj a, b, c {\n  ccx a, b, c;\n  cx c, a;\n  cx a, b;\n}\n"
        "qubit[1] cin;\nqubit[4] a;\nqubit[4] b;\nqubit[1] cout;\nbit[5] ans;\n"
        + prep
        + "majority cin[0], b[0], a[0];\n"
        "for int i in [0:2] { majority a[i], b[i + 1], a[i + 1]; }\n"
        "cx a[3], cout[0];\n"
        "for int i in [2:-1:0] { unmaj a[i], b[i + 1], a[i + 1]; }\n"
        "unmaj cin[0], b[0], a[0];\n"
        "measure b[0:3] -> ans[0:3];\nans[4] = measure cout[0];\n"
    )
    circuit = read_qasm(text)
    psi = dense_state(circuit)
    top = int(np.argmax(np.abs(psi)))
    assert abs(psi[top]) == pytest.approx(1.0)
    bits = format(top, f"0{circuit.num_qubits}b")  # qubit 0 first
    b_bits = [int(bits[5 + i]) for i in range(4)] + [int(bits[9])]
    assert sum(v << i for i, v in enumerate(b_bits)) == a_in + b_in
    assert circuit.measurements == {0: 5, 1: 6, 2: 7, 3: 8, 4: 9}


def test_teleportation_example_is_refused_at_its_if():
    # The specification's teleportation example uses classical feedback (from memory).
    text = H3 + (
        "qubit[3] q;\nbit c0;\nbit c1;\nreset q;\nh q[1];\ncx q[1], q[2];\ncx q[0], q[1];\n"
        "h q[0];\nc0 = measure q[0];\nc1 = measure q[1];\nif (c0 == 1) z q[2];\n"
    )
    with pytest.raises(QasmError) as info:
        read_qasm(text)
    assert (info.value.line, info.value.column) == (13, 1)
    assert "classical control flow" in str(info.value)


def test_measurements_record_the_classical_bit_order():
    text = PRE3 + "h q;\nc[1] = measure q[0];\nmeasure q[1] -> c[0];\nmeasure r[2];\n"
    circuit = read_qasm(text)
    assert circuit.measurements == {1: 0, 0: 1}
    both = read_qasm(H3 + "qubit[3] q;\nbit[2] a;\nbit[3] b;\nb = measure q;\n")
    assert both.measurements == {2: 0, 3: 1, 4: 2}


def test_reset_is_read_only_as_a_first_operation():
    assert ops_of(PRE3 + "reset q;\nreset r[1];\nh q[0];\nreset r;\n") == [("h", (0,), ())]


def test_hardware_qubits():
    circuit = read_qasm(H3 + "h $0;\ncx $0, $3;\n")
    assert circuit.num_qubits == 4 and [op.qubits for op in circuit.ops] == [(0,), (0, 3)]
    with pytest.raises(QasmError, match="hardware qubits"):
        read_qasm(H3 + "h $0;\nqubit[2] q;\n")


def test_global_phase_is_one_custom_operation_and_amplitudes_keep_it():
    circuit = read_qasm(H3 + "qubit[2] q;\ngphase(0.25);\nh q[0];\ngphase(0.5);\n")
    assert [op.name for op in circuit.ops] == ["h", "gphase"]
    np.testing.assert_allclose(
        tnsim.amplitudes(circuit, ["00", "10"]), np.exp(0.75j) / math.sqrt(2) * np.ones(2)
    )
    assert tnsim.expectation(circuit, "Z1") == pytest.approx(1.0)


def test_large_controls_are_refused_before_building_a_matrix():
    n = MAX_CUSTOM_QUBITS
    ok = read_qasm(
        H3
        + f"qubit[{n}] q;\nctrl({n - 1}) @ h q;\n".replace(
            "h q;", "h " + ", ".join(f"q[{i}]" for i in range(n)) + ";"
        )
    )
    assert ok.ops[-1].custom.shape == (2**n, 2**n)
    qs = ", ".join(f"q[{i}]" for i in range(n + 1))
    with pytest.raises(QasmError, match=f"at most {n} qubits"):
        read_qasm(H3 + f"qubit[{n + 1}] q;\nctrl({n}) @ h {qs};\n")


# ---------------------------------------------------------------------------- errors
# The bad-input classes of tests/test_qasm.py, in OpenQASM 3, plus 3.0's own.

ERRORS_AFTER_PRE = [
    ("unknown gate", f"{MARK}foo q[0];\n", "unknown gate 'foo'"),
    ("case hint", f"{MARK}H q[0];\n", "did you mean 'h'"),
    ("extension undeclared", f"{MARK}iswap q[0], q[1];\n", "unknown gate 'iswap'"),
    ("too few params", f"{MARK}rx q[0];\n", "takes 1 parameter"),
    ("too many params", f"{MARK}h(1) q[0];\n", "takes 0 parameter"),
    ("too few qubits", f"{MARK}cx q[0];\n", "acts on 2 qubit"),
    ("too many qubits", f"{MARK}h q[0], q[1];\n", "acts on 1 qubit"),
    ("index out of range", f"h q[{MARK}2];\n", "out of range"),
    ("negative index out of range", f"h q[{MARK}-3];\n", "out of range"),
    ("undeclared register", f"h {MARK}z[0];\n", "undeclared register 'z'"),
    ("bits as qubits", f"h {MARK}c[0];\n", "not a qubit register"),
    ("duplicate register", f"qubit[4] {MARK}q;\n", "already declared"),
    ("bit named like qubit", f"bit[3] {MARK}r;\n", "already declared"),
    ("duplicate gate", f"gate {MARK}h a {{ x a; }}\n", "stdgates.inc"),
    ("reserved register", f"qubit[2] {MARK}pi;\n", "reserved word"),
    ("reserved keyword", f"qubit[2] {MARK}ctrl;\n", "reserved word"),
    ("empty register", f"qubit[{MARK}0] t;\n", "at least 1"),
    ("missing semicolon", f"h q[0]\n{MARK}cx q[0], q[1];\n", "expected ';'"),
    ("missing semicolon at end", f"h q[0]{MARK}", "expected ';'"),
    ("unterminated body", f"gate g a {MARK}{{ h a;\nx a;\n", "never closed"),
    ("garbage", f"h q[0]; {MARK}?\n", "unexpected character '?'"),
    ("garbage unicode", f"h q[{MARK}\u00b9];\n", "unexpected character"),
    ("unterminated string", f'include {MARK}"defs.inc;\n', "unterminated string"),
    ("unterminated block comment", f"h q[0]; {MARK}/* note\nx q[0];\n", "block comment"),
    ("reset after use", f"h q[0];\n{MARK}reset q[0];\n", "first operation"),
    ("reset after measure", f"c[0] = measure q[0];\n{MARK}reset q;\n", "first operation"),
    ("if", f"{MARK}if (c[0] == 1) x q[0];\n", "classical control flow"),
    ("while", f"{MARK}while (true) {{ x q[0]; }}\n", "while loops"),
    ("switch", f"{MARK}switch (c) {{ }}\n", "switch"),
    ("opaque", f"{MARK}opaque g a;\n", "opaque gates"),
    ("def", f"{MARK}def f(qubit a) {{ x a; }}\n", "subroutine"),
    ("extern", f"{MARK}extern f(int) -> int;\n", "extern"),
    ("defcal", f"{MARK}defcal x $0 {{ }}\n", "pulse calibrations"),
    ("cal", f"{MARK}cal {{ }}\n", "pulse-level"),
    ("defcalgrammar", f'{MARK}defcalgrammar "openpulse";\n', "calibration grammars"),
    ("delay", f"{MARK}delay[100ns] q[0];\n", "delays (timing)"),
    ("box", f"{MARK}box {{ x q[0]; }}\n", "timing boxes"),
    ("duration type", f"{MARK}duration d = 10ns;\n", "durations"),
    ("timed gate", f"x{MARK}[20ns] q[0];\n", "gate durations"),
    ("duration literal", f"rx({MARK}100ns) q[0];\n", "timing"),
    ("mutable variable", f"{MARK}float[64] x = 1.0;\n", "mutable classical variables"),
    ("classical assignment", f"c[0] {MARK}= 1;\n", "classical assignments"),
    ("compound assignment", f"c {MARK}|= 1;\n", "classical assignments"),
    ("initialised bits", f"bit[2] d {MARK}= measure q;\n", "initialised bit declarations"),
    ("let", f"{MARK}let a = q;\n", "aliases"),
    ("output", f"{MARK}output float[64] e;\n", "output variables"),
    ("array", f"{MARK}array[int[8], 2] v;\n", "classical arrays"),
    ("annotation", f"{MARK}@bind x q[0];\n", "annotations"),
    ("pragma", f"{MARK}pragma verbatim\n", "pragmas"),
    ("scope block", f"{MARK}{{ x q[0]; }}\n", "scope blocks"),
    ("comparison", f"rx(1 {MARK}< 2) q[0];\n", "comparison"),
    ("xor", f"rx(2 {MARK}^ 3) q[0];\n", "'**' for a power"),
    ("boolean", f"rx({MARK}true) q[0];\n", "boolean"),
    ("cast", f"rx({MARK}float(1)) q[0];\n", "type cast"),
    ("imaginary", f"rx({MARK}2im) q[0];\n", "complex number"),
    ("non-integer pow", f"{MARK}pow(0.5) @ x q[0];\n", "integer powers only"),
    ("multi-dim index", f"h q[0]{MARK}[1];\n", "multi-dimensional"),
    ("loop over floats", f"for {MARK}float x in {{0.1}} {{ }}\n", "other than integers"),
    ("loop over a register", f"for int i in {MARK}q {{ }}\n", "range"),
    ("declaration in a loop", f"for int i in [0:1] {{ {MARK}qubit k; }}\n", "inside a loop"),
    ("loop step zero", f"{MARK}for int i in [0:0:3] {{ }}\n", "cannot be 0"),
    (
        "index error inside a loop",
        f"for int i in [0:3] {{ h q[{MARK}i]; }}\n",
        "out of range for qubit register 'q' of size 2 (valid: 0..1, or -2..-1 from the end)"
        " (when i = 2)",
    ),
    ("division by zero", f"rx(1 {MARK}/ 0) q[0];\n", "division by zero"),
    ("log of zero", f"rx(2 * {MARK}log(0)) q[0];\n", "log(0)"),
    ("sqrt of negative", f"rx({MARK}sqrt(-1)) q[0];\n", "sqrt(-1)"),
    ("exp overflow", f"rx({MARK}exp(1000)) q[0];\n", "exp(1000)"),
    ("power overflow", f"rx(10.0 {MARK}** 400) q[0];\n", "not a finite"),
    ("integer overflow", f"rx(2 {MARK}** 70) q[0];\n", "not a finite"),
    ("product overflow", f"rx(1e300 {MARK}* 1e300) q[0];\n", "overflows"),
    ("huge literal", f"rx({MARK}1e400) q[0];\n", "too large"),
    ("huge integer", f"rx({MARK}99999999999999999999) q[0];\n", "64 bits"),
    ("negative remainder", f"rx(-3 {MARK}% 2) q[0];\n", "non-negative"),
    ("character after a comment", f"h q[0]; // note\n  {MARK}? q[0];\n", "unexpected char"),
    ("unknown name", f"rx({MARK}theta) q[0];\n", "unknown name 'theta'"),
    ("register as a value", f"rx({MARK}q) q[0];\n", "qubit register"),
    ("missing operand", f"rx(1 + {MARK}) q[0];\n", "expected a number"),
    ("function arity", f"rx(mod(3{MARK})) q[0];\n", "takes 2"),
    ("size mismatch", f"cx q, {MARK}r;\n", "register sizes differ"),
    ("repeated qubit", f"cx q[0], {MARK}q[0];\n", "appears twice"),
    ("repeated by broadcast", f"cx q, {MARK}q;\n", "appears twice"),
    ("repeated control", f"ctrl @ x q[0], {MARK}q[0];\n", "appears twice"),
    ("unknown body param", f"gate g(a) x {{ rx({MARK}b) x; }}\n", "unknown name 'b'"),
    ("indexed body arg", f"gate g a {{ h a{MARK}[0]; }}\n", "without indices"),
    ("unknown body arg", f"gate g a {{ h {MARK}b; }}\n", "not a qubit argument"),
    ("repeated body arg", f"gate g a, b {{ cx a, {MARK}a; }}\n", "appears twice"),
    ("repeated formal", f"gate g(t) a, {MARK}t {{ }}\n", "listed twice"),
    ("self call", f"gate g a {{ {MARK}g a; }}\n", "cannot call itself"),
    ("measure in body", f"gate g a {{ {MARK}measure a; }}\n", "inside a gate body"),
    ("loop in body", f"gate g a {{ {MARK}for int i in [0:1] x a; }}\n", "inside a gate body"),
    ("reset in body", f"gate g a {{ {MARK}reset a; }}\n", "inside a gate body"),
    ("variable pow in body", f"gate g(k) a {{ {MARK}pow(k) @ x a; }}\n", "constant"),
    ("gate without qubits", f"gate g {MARK}{{ }}\n", "qubit argument name"),
    ("gphase with a qubit", f"{MARK}gphase(0.1) q[0];\n", "acts on no qubit"),
    ("controls missing", f"ctrl(2) @ {MARK}x q[0], q[1];\n", "acts on 1 qubit"),
    ("zero controls", f"ctrl({MARK}0) @ x q[0];\n", "at least 1"),
    ("modifier without @", f"inv {MARK}x q[0];\n", "expected '@'"),
    ("measure mismatch", f"measure {MARK}q -> c[0];\n", "equal size"),
    ("measure arrow", f"measure q[0] {MARK}c[0];\n", "expected '->'"),
    ("measure into qubits", f"measure q[0] -> {MARK}r[0];\n", "not a bit register"),
    (
        "gate after measure",
        f"c[1] = measure q[1];\nh q[0];\n{MARK}h q;\n",
        "after it was measured",
    ),
    ("after register measure", f"c = measure q;\n{MARK}x q[1];\n", "after it was measured"),
    ("second header", f"{MARK}OPENQASM 3.0;\n", "only once"),
    ("not a statement", f"{MARK}; h q[0];\n", "expected a statement"),
    ("include from text", f'include {MARK}"defs.inc";\n', "cannot include 'defs.inc'"),
    ("stdgates twice", f'include {MARK}"stdgates.inc";\n', "include stdgates.inc once"),
    ("qelib1 in 3.0", f'include {MARK}"qelib1.inc";\n', "OpenQASM 2.0 library"),
    ("body error at call", "gate g(a) x { rx(1 ‸/ a) x; }\ng(0) q[0];\n", "called at <text>:7:1"),
    (
        "deep parentheses",
        "rx(" + "(" * 100 + MARK + "(" * 99_900 + "1" + ")" * 100_000 + ") q[0];\n",
        "nested deeper",
    ),
    ("deep unary", "rx(" + "-" * 100 + MARK + "-" * 99_900 + "1) q[0];\n", "nested deeper"),
    ("deep power", "rx(" + "2**" * 100 + MARK + "2**" * 9_900 + "2) q[0];\n", "nested deeper"),
]


@pytest.mark.parametrize(
    ("marked", "fragment"), [c[1:] for c in ERRORS_AFTER_PRE], ids=[c[0] for c in ERRORS_AFTER_PRE]
)
def test_errors_report_line_and_column(marked, fragment):
    text, line, column = locate(PRE3 + marked)
    with pytest.raises(QasmError) as info:
        read_qasm(text)
    err = info.value
    assert fragment in str(err)
    assert (err.source, err.line, err.column) == ("<text>", line, column), str(err)
    assert str(err).startswith(f"<text>:{line}:{column}: ")


FULL_ERRORS = [
    ("missing header", f"{MARK}qubit[1] q;\n", "missing header"),
    ("empty text", f"{MARK}", "missing header"),
    ("version not a number", f"OPENQASM {MARK}three;\n", "version 3.0"),
    ("no qubit", f"OPENQASM 3.0;\n{MARK}", "no qubit"),
    ("stdgates gate not included", f"OPENQASM 3.0;\nqubit q;\n{MARK}h q;\n", "stdgates.inc"),
    ("CX is not built in", f"OPENQASM 3.0;\nqubit[2] q;\n{MARK}CX q[0], q[1];\n", "stdgates"),
    ("header semicolon", f"OPENQASM 3.0\n{MARK}qubit q;\n", "expected ';'"),
    ("2.0 header", f"OPENQASM {MARK}2.0;\nqubit q;\n", "version 2.0"),
]


@pytest.mark.parametrize(
    ("marked", "fragment"), [c[1:] for c in FULL_ERRORS], ids=[c[0] for c in FULL_ERRORS]
)
def test_structural_errors_report_line_and_column(marked, fragment):
    text, line, column = locate(marked)
    with pytest.raises(QasmError) as info:
        read_qasm3(text)
    assert fragment in str(info.value)
    assert (info.value.line, info.value.column) == (line, column), str(info.value)


def test_dispatch_on_the_version_line():
    assert read_qasm("/* lead */ // c\nOPENQASM 3;\nqubit q;\n").num_qubits == 1
    assert read_qasm("\ufeffOPENQASM 3.0;\nqubit[2] q;\n").num_qubits == 2
    with pytest.raises(QasmError, match=r"version 4\.0") as info:
        read_qasm("OPENQASM 4.0;\nqreg q[1];\n")
    assert "2.0 and 3" in str(info.value)
    with pytest.raises(InputError, match="version must be 2 or 3"):
        write_qasm(Circuit(1), version=4)


def test_bad_arguments_raise_input_error(tmp_path):
    for reader in (read_qasm, read_qasm3):
        with pytest.raises(InputError, match="text or a file path"):
            reader(42)
        with pytest.raises(InputError, match="cannot read"):
            reader(tmp_path / "missing.qasm")
        with pytest.raises(InputError, match="no such file"):
            reader("circuits/missing.qasm")
    with pytest.raises(InputError, match="max_ops"):
        read_qasm3(PRE3, max_ops=-1)


# ---------------------------------------------------------------------------- includes


def test_include_beside_the_file(tmp_path):
    (tmp_path / "defs.inc").write_text(
        "// my gates\nconst float[64] half = π / 2;\ngate bell a, b { h a; cx a, b; }\n"
    )
    main_file = tmp_path / "main.qasm"
    main_file.write_text(
        H3 + 'include "defs.inc";\nqubit[2] q;\nbell q[1], q[0];\nrz(half) q[0];\n'
    )
    assert ops_of(main_file) == [("h", (1,), ()), ("cx", (1, 0), ()), ("rz", (0,), (math.pi / 2,))]


def test_error_inside_an_include_names_the_include(tmp_path):
    (tmp_path / "defs.inc").write_text("gate bad a {\n  foo a;\n}\n")
    main_file = tmp_path / "main.qasm"
    main_file.write_text(H3 + 'include "defs.inc";\nqubit q;\n')
    with pytest.raises(QasmError) as info:
        read_qasm(main_file)
    assert info.value.source == str((tmp_path / "defs.inc").resolve())
    assert (info.value.line, info.value.column) == (2, 3)


@pytest.mark.parametrize(
    ("files", "include", "fragment"),
    [
        ({}, "missing.inc", "not found"),
        ({}, "../defs.inc", "plain file name"),
        ({"loop.inc": 'include "loop.inc";\n'}, "loop.inc", "includes itself"),
        ({"regs.inc": "qubit z;\n"}, "regs.inc", "only gate definitions"),
    ],
)
def test_other_includes_are_refused(tmp_path, files, include, fragment):
    for name, content in files.items():
        (tmp_path / name).write_text(content)
    main_file = tmp_path / "main.qasm"
    main_file.write_text(H3 + f'include "{include}";\nqubit q;\n')
    with pytest.raises(QasmError) as info:
        read_qasm(main_file)
    assert fragment in str(info.value)


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symbolic links")
@pytest.mark.parametrize(
    ("header", "register"), [(H3, "qubit q;"), ("OPENQASM 2.0;\n", "qreg q[1];")]
)
def test_an_include_linking_out_of_the_folder_is_refused(tmp_path, header, register):
    # One rule for both readers (tnsim.circuits.qasm.files.include_path).
    outside = tmp_path / "outside"
    outside.mkdir()
    (outside / "secret.inc").write_text("gate secret a { x a; }\n")
    inside = tmp_path / "inside"
    inside.mkdir()
    (inside / "defs.inc").symlink_to(outside / "secret.inc")
    main_file = inside / "main.qasm"
    main_file.write_text(header + f'include "defs.inc";\n{register}\n')
    with pytest.raises(QasmError, match="links leading elsewhere"):
        read_qasm(main_file)


def test_stdgates_is_built_in_even_beside_a_file(tmp_path):
    (tmp_path / "stdgates.inc").write_text("this file is never read $$$\n")
    main_file = tmp_path / "main.qasm"
    main_file.write_text(H3 + "qubit q;\nh q;\n")
    assert ops_of(main_file) == [("h", (0,), ())]


# ---------------------------------------------------------------------------- limits


def nested_gates(levels: int, fanout: int) -> str:
    lines = [H3, "qubit q;\n", "gate g0 a { U(0, 0, 0) a; }\n"]
    for i in range(1, levels + 1):
        lines.append(f"gate g{i} a {{ " + f"g{i - 1} a; " * fanout + "}\n")
    lines.append(f"g{levels} q;\n")
    return "".join(lines)


@pytest.mark.parametrize(
    "text",
    [
        nested_gates(10, 10),
        H3 + "qubit q;\ngate a1 x { pow(100000) @ h x; }\ngate a2 x { pow(100000) @ a1 x; }\n"
        "a2 q;\n",
        H3 + "qubit q;\nfor int i in [0:9999] { for int j in [0:9999] { h q; } }\n",
        H3 + "qubit q;\nfor int i in [0:99999999999] { }\n",
        H3 + "qubit[2000000000] q;\nh q;\n",
        H3 + "qubit[2000000000] q;\nbit[2000000000] c;\nc = measure q;\n",
    ],
    ids=["definition bomb", "power bomb", "nested loops", "empty loop", "broadcast", "measure"],
)
def test_expansion_bombs_are_refused_before_expanding(text, monkeypatch):
    emitted = []
    real = Program.emit
    monkeypatch.setattr(Program, "emit", lambda self, ops, phase: emitted.append(len(ops)))
    with pytest.raises(QasmError, match="max_ops=") as info:
        read_qasm(text)
    assert "raise max_ops" in str(info.value)
    assert emitted == []  # nothing was expanded before the refusal
    assert real is not Program.emit


def test_max_ops_counts_expanded_operations():
    text = PRE3 + "h r;\n"
    assert len(read_qasm(text, max_ops=3)) == 3
    with pytest.raises(QasmError, match="max_ops=2"):
        read_qasm(text, max_ops=2)
    assert len(read_qasm(nested_gates(3, 4), max_ops=64)) == 64
    loop = H3 + "qubit q;\nfor int i in [1:5] { pow(i) @ x q; }\n"
    assert len(read_qasm(loop, max_ops=100)) == 15


def test_gate_nesting_depth_is_capped():
    assert len(read_qasm(nested_gates(MAX_GATE_DEPTH - 1, 1))) == 1
    with pytest.raises(QasmError, match="nest deeper"):
        read_qasm(nested_gates(MAX_GATE_DEPTH + 1, 1))


def test_empty_gate_on_a_huge_register_is_cheap():
    text = H3 + "qubit[1000000] q;\ngate g a { barrier a; }\ng q;\nbarrier q;\nreset q;\n"
    assert read_qasm(text).ops == []


def test_register_past_the_qubit_cap_is_refused_at_its_declaration():
    # 10**12 qubits: refused before anything is allocated, located like every reader error.
    text = H3 + "qubit[1000000000000] q;\n"
    with pytest.raises(QasmError, match=r"<text>:3:\d+: register 'q' of 1,000,000,000,000"):
        read_qasm(text)


# ---------------------------------------------------------------------------- writer


def test_write_then_read_every_named_gate_and_measurements():
    rng = np.random.default_rng(7)
    circuit = Circuit(4)
    for name, spec in sorted(GATES.items()):
        qubits = [int(q) for q in rng.permutation(4)[: spec.num_qubits]]
        circuit.append(name, qubits, [float(p) for p in rng.normal(size=spec.num_params)])
    circuit.measure(2, 0).measure(1, 3)
    text = write_qasm(circuit, version=3)
    assert text.startswith(H3)
    back = read_qasm(text)
    assert back.ops == circuit.ops and back.measurements == circuit.measurements


@pytest.mark.parametrize("name", sorted(EXTENSION_DEFINITIONS3))
def test_extension_definitions_are_exact_decompositions(name):
    """Each written definition, renamed so tnsim does not keep it native, expands to exactly
    the tnsim matrix, global phase included."""
    needs = {"rxx": ["rzz"], "ryy": ["rzz"], "iswap": ["rzz", "rxx"], "fsim": ["rzz", "rxx"]}
    spec = GATES[name]
    deps = "\n".join(EXTENSION_DEFINITIONS3[d] for d in needs.get(name, []))
    definition = EXTENSION_DEFINITIONS3[name].replace(f"gate {name}", "gate expanded", 1)
    rng = np.random.default_rng(11)
    for _ in range(3):
        params = [float(p) for p in rng.uniform(-np.pi, np.pi, spec.num_params)]
        args = f"({', '.join(map(repr, params))})" if params else ""
        qubits = ", ".join(f"q[{i}]" for i in range(spec.num_qubits))
        text = H3 + deps + "\n" + definition
        text += f"\nqubit[{spec.num_qubits}] q;\nexpanded{args} {qubits};\n"
        circuit = read_qasm(text)
        np.testing.assert_allclose(dense_unitary(circuit), spec.matrix(params), atol=1e-12)


def test_named_angles_are_written_as_inputs_and_read_back_as_bind():
    circuit = Circuit(3).rx("2*gamma + 0.1", 0).rzz("-0.5*beta + gamma", 0, 2).h(1)
    circuit.u(0.2, "beta", 0.3, 1)
    text = write_qasm3(circuit)
    assert "input float[64] beta;" in text and "input float[64] gamma;" in text
    values = {"gamma": 0.3, "beta": -1.7}
    back = read_qasm(text, inputs=values)
    assert back.ops == circuit.bind(values).ops  # the same bits as binding
    with pytest.raises(InputError, match="rename"):
        write_qasm3(Circuit(1).rx("h", 0))


def test_global_phase_round_trips():
    circuit = read_qasm(H3 + "qubit[2] q;\ngphase(0.25);\nh q[0];\n")
    back = read_qasm(write_qasm3(circuit))
    assert [op.name for op in back.ops] == ["h", "gphase"]
    np.testing.assert_array_equal(back.ops[1].custom, circuit.ops[1].custom)


def test_writer_comments_and_the_version_door():
    text = write_qasm(Circuit(1).h(0), version=3, comments=["made by a test", "second"])
    assert text.splitlines()[:3] == ["OPENQASM 3.0;", "// made by a test", "// second"]
    assert read_qasm(text).ops == Circuit(1).h(0).ops
    with pytest.raises(InputError, match=r"stdgates\.inc"):
        write_qasm(Circuit(1), version=3, library="original")


def test_writer_refuses_custom_unitaries():
    circuit = Circuit(1).h(0).unitary(np.diag([1, 1j]), [0], name="mine")
    with pytest.raises(InputError, match="custom unitary"):
        write_qasm3(circuit)


FAST = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


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
    for clbit in draw(st.lists(st.integers(0, 6), max_size=4)):
        circuit.measure(draw(st.integers(0, n - 1)), clbit)
    return circuit


@FAST
@given(circuits())
def test_round_trip_random_circuits(circuit):
    back = read_qasm(write_qasm3(circuit))
    assert back.num_qubits == circuit.num_qubits
    assert back.ops == circuit.ops
    assert back.measurements == circuit.measurements


# ---------------------------------------------------------------------------- fuzzing


def only_tnsim_errors(text: str) -> None:
    with contextlib.suppress(QasmError, InputError):
        read_qasm3(text, max_ops=1000, inputs={})


@FAST
@given(st.text(max_size=300))
def test_random_text_only_raises_tnsim_errors(text):
    only_tnsim_errors(text)


@FAST
@given(st.text(alphabet='OPENQASM3.0;qubitbh[]()cx,{}+-*/%@$π\n"-><=:ctrlinvpow', max_size=200))
def test_random_qasm_characters_only_raise_tnsim_errors(text):
    only_tnsim_errors(H3 + text)


TOKENS = [
    "OPENQASM", "3.0", ";", "include", '"stdgates.inc"', '"x.inc"', "qubit", "bit", "qreg",
    "creg", "q", "c", "[", "]", "0", "1", "2", "-1", "99999999", "1e400", "0.5", "0x1F",
    "gate", "g", "a", "b", "t", "(", ")", "{", "}", "h", "cx", "U", "rx", "u3", "cu",
    "gphase", "ctrl", "negctrl", "inv", "pow", "@", "for", "int", "uint", "in", ":", "i",
    "const", "input", "float[64]", "angle", "=", "π", "pi", "+", "-", "*", "/", "**", "%",
    "^", "sin", "log", "sqrt", "mod", ",", "->", "measure", "barrier", "reset", "if", "$0",
    "//", "/*", "*/", "\n", "?", "100ns", "2im",
]  # fmt: skip


@FAST
@given(st.lists(st.sampled_from(TOKENS), max_size=60), st.booleans())
def test_token_soup_only_raises_tnsim_errors(tokens, with_prefix):
    only_tnsim_errors((PRE3 if with_prefix else "") + " ".join(tokens))


MUTATION_SEEDS = [
    V3_FILE.replace("input angle theta;", "const angle theta = 0.3;"),
    EQUIVALENT["user gates with parameters and nesting"][1],
    EQUIVALENT["comments, barrier, measure"][1],
    H3 + "qubit[4] q;\nbit[4] c;\ngate g(a) x, y { ctrl @ rx(a) x, y; gphase(a); }\n"
    "for int i in {0, 2} { negctrl @ g(i * π / 3) q[i], q[i + 1]; }\n"
    "pow(-2) @ inv @ cu(0.1, 0.2, 0.3, 0.4) q[3], q[0];\nctrl(2) @ sx q[0:1], q[3];\n"
    "c[0:2] = measure q[{1, 2, 3}];\n",
]


def mutate(text: str, rng: np.random.Generator) -> str:
    """One random edit: delete, duplicate or replace a span, or insert a token."""
    i = int(rng.integers(0, len(text) + 1))
    j = min(len(text), i + int(rng.integers(0, 12)))
    move = int(rng.integers(0, 4))
    if move == 0:
        return text[:i] + text[j:]
    if move == 1:
        return text[:j] + text[i:j] + text[j:]
    if move == 2:
        return text[:i] + str(rng.choice(TOKENS)) + text[j:]
    return text[:i] + chr(int(rng.integers(0, 0x3000))) + text[i:]


def mutation_fuzz(cases: int, seed: int) -> int:
    """Feed mutated programs to the reader; return how many escaped as foreign exceptions."""
    rng = np.random.default_rng(seed)
    foreign = 0
    for k in range(cases):
        text = MUTATION_SEEDS[k % len(MUTATION_SEEDS)]
        for _ in range(int(rng.integers(1, 4))):
            text = mutate(text, rng)
        try:
            read_qasm3(text, max_ops=10_000)
        except (QasmError, InputError):
            pass
        except Exception as exc:  # counting what escapes is the point
            foreign += 1
            print(f"foreign {type(exc).__name__}: {exc} on {text!r}")
    return foreign


def test_mutation_fuzz_gives_only_tnsim_errors():
    assert mutation_fuzz(2000, seed=1) == 0


@pytest.mark.slow
def test_mutation_fuzz_gives_only_tnsim_errors_long():
    assert mutation_fuzz(100_000, seed=2) == 0


# ---------------------------------------------------------------------------- fast path

SIGNATURES = {"h": (0, 1), "rz": (1, 1), "cx": (0, 2), "ccx": (0, 3), "U": (3, 1), "cu": (4, 2)}
SIGNATURES |= {"g": (1, 2), "rzz": (1, 2), "measure": (0, 1), "gphase": (1, 0), "reset": (0, 1)}
NUMBERS = ["0.5", "-1", "+2", ".5", "5.", "1e3", "1e400", "-0", "0", "pi/2", " 3 ", "1.5e-3"]
NUMBERS += [
    "1/0",
    "2**2000",
    "pi*-",
    "t",
    "-pi/4",
    "- 2**2",
    "1 //x",
    "2**70",
    "99999999999999999999",
]
NUMBERS += ["0x1F", "1_000", "π", "7 % 2", "half", "tau"]
ARGS = ["q[0]", "q[1]", "r[0]", "r[2]", "r[3]", "q", "c[0]", "q[01]", "q[ 1 ]", "s[0]", "$0"]
ARGS += ["q[-1]", "r[0:1]"]
GAPS = [" ", "", "\t", "\n", " // c\n", "\n// h q[0];\n", "\n//x r[1];", "/* x q[0]; */", "\n/**/"]
DEFINITIONS = (
    "const float[64] half = 0.5;\ngate g(t) a, b { rzz(t/2) a, b; rx(1/t) b; rz(t ** 70) a; }\n"
    + "\n".join(EXTENSION_DEFINITIONS3[n] for n in ("rzz",))
)


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
    prefix = draw(st.sampled_from([""] * 6 + ["ctrl @ ", "inv @ ", "pow(2) @ "]))
    text = prefix + name + (f"({params})" if params or draw(st.booleans()) else draw(gap))
    args = draw(st.lists(st.sampled_from(ARGS), min_size=n_qubits, max_size=n_qubits))
    if name == "measure":
        return f"c[1] = measure {args[0] if args else 'q[0]'};"
    return text + draw(gap) + ("," + draw(gap)).join(args) + draw(gap) + ";" + draw(gap)


def outcome(text: str):
    try:
        c = read_qasm(text, max_ops=50)
        return [(op.name, op.qubits, op.params) for op in c.ops], c.measurements
    except (QasmError, InputError) as exc:
        return str(exc)


@contextlib.contextmanager
def general_parser_only():
    saved = qasm3_reader.read_simple_statements
    qasm3_reader.read_simple_statements = lambda text, pos, *rest: pos
    try:
        yield
    finally:
        qasm3_reader.read_simple_statements = saved


@FAST
@given(st.lists(statements(), max_size=12))
def test_fast_path_changes_nothing_but_speed(program):
    # Differential check: the statement fast path against the general parser alone: the
    # same operations, or the same error at the same place.
    text = PRE3 + DEFINITIONS + "\nh q[0]; rzz(0.25) q[0], r[1];\n" + "\n".join(program)
    fast = outcome(text)
    with general_parser_only():
        general = outcome(text)
    assert fast == general


def test_fast_path_is_used_and_agrees_on_a_long_program(monkeypatch):
    lines = [f"rzz({k / 7!r}) q[{k % 2}], r[{k % 3}];\nh r[{k % 3}];" for k in range(300)]
    text = (
        PRE3 + EXTENSION_DEFINITIONS3["rzz"] + "\n" + "\n".join(lines) + "\nc[1] = measure q[1];\n"
    )
    taken = []
    real = qasm3_reader.read_simple_statements

    def counting(text, pos, *rest):
        end = real(text, pos, *rest)
        taken.append(text[pos:end].count(";"))
        return end

    monkeypatch.setattr(qasm3_reader, "read_simple_statements", counting)
    fast = read_qasm(text).ops
    monkeypatch.undo()
    with general_parser_only():
        general = read_qasm(text).ops
    assert fast == general and len(fast) == 600
    assert sum(taken) == 600  # every gate statement went by the fast path
