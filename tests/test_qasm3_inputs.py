"""OpenQASM 3 ``input`` parameters read without a value, as named angles.

``read_qasm(path, unbound="keep")`` turns each ``input float[64] NAME;`` that gets no
value into the named angle ``NAME`` (tnsim.circuits.parameters).  Checked here: what
tnsim writes it reads back as the same named circuit; binding after reading equals
reading with the values; the modifiers keep names where a named gate exists (checked
against numpy: the bound inverse times the gate is the identity); every non-affine use
is refused at its line and column; ``tnsim optimize`` finds the textbook minimum of a
one-qubit rotation, while the query commands keep refusing a file whose input has no
``--input``.

The language is the one of A. W. Cross et al., "OpenQASM 3: A broader and deeper quantum
assembly language", ACM Transactions on Quantum Computing 3, 12 (2022); the programs below
follow its grammar as we know it (from memory).
"""

from __future__ import annotations

import json
import math
import re
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tnsim import Circuit, read_qasm
from tnsim.circuits.gates import GATES
from tnsim.circuits.parameters import angle
from tnsim.circuits.qasm3 import read_qasm3
from tnsim.circuits.qasm3.writer import write_qasm3
from tnsim.cli import main
from tnsim.errors import InputError, QasmError
from tnsim.testing import dense_state

HEADER = 'OPENQASM 3.0;\ninclude "stdgates.inc";\ninput float[64] theta;\ninput float[64] phi;\n'
PARAMETRIC = sorted(name for name, spec in GATES.items() if spec.num_params)
NAMES = ("theta", "phi", "gamma_1")


def ops_close(a: Circuit, b: Circuit, atol: float = 1e-12) -> bool:
    """Same gates on the same qubits, numeric parameters equal to ``atol``."""
    if len(a.ops) != len(b.ops):
        return False
    for x, y in zip(a.ops, b.ops):
        if (x.name, x.qubits, len(x.params)) != (y.name, y.qubits, len(y.params)):
            return False
        if not np.allclose(x.params, y.params, rtol=0, atol=atol):
            return False
    return True


# --- round trip: what tnsim writes, it reads back as the same named circuit ---

_coef = st.floats(-8, 8, allow_nan=False, allow_subnormal=False).filter(lambda c: c != 0)
_offset = st.floats(-8, 8, allow_nan=False, allow_subnormal=False)


@st.composite
def _angles(draw):
    if draw(st.booleans()):
        return draw(_offset)
    names = draw(st.lists(st.sampled_from(NAMES), min_size=1, max_size=3, unique=True))
    expr = draw(_offset)
    for name in names:
        expr = expr + draw(_coef) * angle(name)
    return expr


@st.composite
def named_circuits(draw):
    n = draw(st.integers(3, 5))
    c = Circuit(n)
    for _ in range(draw(st.integers(1, 12))):
        name = draw(st.sampled_from([*PARAMETRIC, "h", "cx"]))
        spec = GATES[name]
        qubits = draw(st.permutations(range(n)))[: spec.num_qubits]
        c.append(name, qubits, [draw(_angles()) for _ in range(spec.num_params)])
    return c


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(named_circuits())
def test_written_named_circuit_reads_back_identical(circuit):
    back = read_qasm3(write_qasm3(circuit), unbound="keep")
    assert back.num_qubits == circuit.num_qubits
    assert back.ops == circuit.ops  # names, qubits and every AngleExpr, bit for bit
    assert back.parameters() == circuit.parameters()


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(named_circuits(), st.lists(st.floats(-4, 4), min_size=3, max_size=3))
def test_binding_after_reading_equals_reading_with_inputs(circuit, numbers):
    text = write_qasm3(circuit)
    values = dict(zip(circuit.parameters(), numbers))
    bound = read_qasm3(text, unbound="keep").bind(values)
    direct = read_qasm3(text, inputs=values)
    assert bound.ops == circuit.bind(values).ops
    # The writer orders each sum as AngleExpr.value adds it, so the bits agree too.
    assert direct.ops == bound.ops


# A program using every construct a named angle may go through: gate definitions with
# parameters, stdgates (cu has a body), U, modifiers (inv, pow, ctrl, negctrl), loops
# with numeric bounds, a const float[64] computed from an input, ctrl @ gphase.
PROGRAM = (
    HEADER
    + """const float[64] half = theta / 2;
gate layer(a, b) x, y {
  rz(a / 2 - b) x;
  ctrl @ ry(-a) x, y;
  inv @ U(a, b, 0.3) y;
  ctrl @ gphase(b) x;
}
qubit[4] q;
h q;
for int i in [0:2] {
  layer(theta + i, 2 * phi - 1) q[i], q[i + 1];
}
inv @ layer(half, phi / 3) q[3], q[0];
pow(2) @ rx(phi - theta) q[1];
pow(-1) @ p(theta) q[2];
negctrl @ rx(theta - half) q[0], q[1];
cu(theta, phi, half, -phi) q[1], q[2];
cp(3 * half) q[3], q[2];
u2(theta, phi) q[1];
"""
)


@pytest.mark.parametrize("values", [{"theta": 0.3, "phi": -1.1}, {"theta": 7.5, "phi": 0.0}])
def test_program_bound_after_reading_equals_program_read_with_inputs(values):
    named = read_qasm(PROGRAM, unbound="keep")
    assert named.parameters() == ("phi", "theta")
    direct = read_qasm(PROGRAM, inputs=values)
    bound = named.bind(values)
    # The state, by numpy's dense state vector (tnsim.testing).
    np.testing.assert_allclose(dense_state(bound), dense_state(direct), atol=1e-12)
    if values["phi"] != 0:
        # Sums are regrouped (theta/2 + i vs i + theta/2): equal to rounding, not bit for
        # bit.  (At phi = 0, 'ctrl @ gphase(phi / 3)' is no gate when read with the value
        # but p(0) when bound later: the same state, one gate more.)
        assert ops_close(bound, direct)


def test_partial_inputs_fix_some_names_and_keep_the_others():
    c = read_qasm(PROGRAM, inputs={"phi": 0.25}, unbound="keep")
    assert c.parameters() == ("theta",)
    full = read_qasm(PROGRAM, inputs={"phi": 0.25, "theta": 1.5})
    assert ops_close(c.bind({"theta": 1.5}), full)


def test_default_refuses_an_input_without_value_at_its_declaration():
    with pytest.raises(QasmError, match=r"<text>:3:17: input 'theta' has no value.*--input theta="):
        read_qasm(PROGRAM)
    with pytest.raises(InputError, match="unbound must be 'refuse'"):
        read_qasm(PROGRAM, unbound="yes")
    with pytest.raises(InputError, match="unbound must be"):
        read_qasm("OPENQASM 2.0;\nqreg q[1];\n", unbound=True)


@pytest.mark.parametrize(
    ("decl", "shown"),
    [("angle", "angle"), ("angle[16]", "angle[16]"), ("float[32]", "float[32]"), ("int", "int")],
)
def test_only_float64_inputs_become_named_angles(decl, shown):
    text = f'OPENQASM 3.0;\ninclude "stdgates.inc";\ninput {decl} t0;\nqubit q;\nrx(t0) q;\n'
    pattern = rf"<text>:3:\d+: input 't0' has no value and is declared {re.escape(shown)}\W"
    with pytest.raises(QasmError, match=pattern + r".*float\[64\]"):
        read_qasm(text, unbound="keep")
    plain = text.replace(f"input {decl} t0;", "input float t0;")
    assert read_qasm(plain, unbound="keep").parameters() == ("t0",)


def test_inverse_of_every_parametric_gate_stays_named_and_inverts_it():
    # For each parametric tnsim gate: 'inv @ g(names)' must read as one named gate whose
    # bound matrix times g's bound matrix is the identity (numpy's matrix product).
    rng = np.random.default_rng(7)
    for name in PARAMETRIC:
        spec = GATES[name]
        params = [(k + 1) * angle(NAMES[k]) - 0.25 * k for k in range(spec.num_params)]
        circuit = Circuit(spec.num_qubits).append(name, range(spec.num_qubits), params)
        text = write_qasm3(circuit)
        last = text.rstrip("\n").rsplit("\n", 1)[-1]
        text = text.replace(last, "inv @ " + last)
        inv = read_qasm3(text, unbound="keep")
        assert len(inv.ops) == 1 and inv.ops[0].custom is None, name
        values = dict(zip(inv.parameters(), rng.uniform(-3, 3, size=3)))
        product = inv.bind(values).ops[0].matrix() @ circuit.bind(values).ops[0].matrix()
        np.testing.assert_allclose(product, np.eye(2**spec.num_qubits), atol=1e-12)


def test_controls_stay_named_where_tnsim_has_the_controlled_gate():
    c = read_qasm(
        HEADER + "qubit[3] q;\nctrl @ rx(theta) q[0], q[1];\nctrl @ U(theta, phi, 1) q[2], q[0];\n",
        unbound="keep",
    )
    assert [(op.name, op.qubits) for op in c.ops] == [("crx", (0, 1)), ("cu3", (2, 0))]
    assert c.ops[0].params == (angle("theta"),)


def test_loop_variable_and_input_mix_affinely():
    c = read_qasm(
        HEADER + "qubit[3] q;\nfor int i in [0:2] { rz(i * theta + i) q[i]; }\n", unbound="keep"
    )
    assert [op.params[0] for op in c.ops] == [0.0, angle("theta") + 1, 2 * angle("theta") + 2]


REFUSED = [
    ("rz(sin(theta)) q[0];", "6:4", "sin(theta) is not an affine expression"),
    (
        "rz(theta * phi) q[0];",
        "6:10",
        "theta * phi is not an affine expression of the unbound inputs phi, theta",
    ),
    ("rz(theta * theta) q[0];", "6:10", "theta * theta is not an affine"),
    ("rz(theta ** 2) q[0];", "6:10", "theta ** 2 is not an affine"),
    ("rz(theta % 2) q[0];", "6:10", "theta % 2 is not an affine"),
    ("rz(1 / (theta + 1)) q[0];", "6:6", "1 / (theta + 1) is not an affine"),
    ("rz(exp(2 * phi)) q[0];", "6:4", "exp(2*phi) is not an affine"),
    ("for int i in [0:theta] { x q[0]; }", "6:17", "a loop bound must be a number known"),
    ("for int i in {1, phi} { x q[0]; }", "6:18", "a loop value must be a number known"),
    ("x q[theta];", "6:5", "an index must be a number known"),
    ("qubit[2 * theta] r;", "6:7", "2*theta depends on the unbound input theta"),
    ("pow(theta) @ x q[0];", "6:1", "the exponent of pow(k) @ must be a number"),
    ("ctrl(phi) @ x q[0], q[1];", "6:6", "the number of controls of 'ctrl' must be a number"),
    ("gphase(theta);", "6:1", "global phase theta"),
    ("gate g(a) r { gphase(a / 2); rz(a) r; }\ng(theta) q[0];", "7:1", "global phase 0.5*theta"),
    ("gate g(a) r { rz(sin(a)) r; }\ng(phi) q[0];", "6:18", "sin(phi) is not an affine"),
    (
        "gate g(a) r { rz(a) r; }\nctrl @ ctrl @ g(phi) q[0], q[1], q[2];",
        "7:15",
        "ctrl @ on crz(phi) needs the gate's matrix",
    ),
    ("const int k = theta;", "6:15", "constant 'k' is declared int but its value theta"),
    ("const angle k = theta;", "6:17", "declared angle but its value theta"),
]


@pytest.mark.parametrize(("statement", "where", "message"), REFUSED)
def test_non_affine_uses_are_refused_at_their_position(statement, where, message):
    text = HEADER + "qubit[3] q;\n" + statement + "\n"
    with pytest.raises(QasmError) as info:
        read_qasm(text, unbound="keep")
    shown = str(info.value)
    assert shown.startswith(f"<text>:{where}: ") and message in shown, shown
    assert "--input" in shown or "float[64]" in shown, shown


def test_ctrl_of_a_gate_without_named_controlled_form_is_refused():
    # rzz has no named controlled gate: ctrl @ needs its matrix, which needs a number.
    text = write_qasm3(Circuit(3).rzz("theta", 1, 2))
    text = re.sub(r"\nrzz\((.*)\) q\[1\], q\[2\];", r"\nctrl @ rzz(\1) q[0], q[1], q[2];", text)
    with pytest.raises(
        QasmError, match=r"<text>:10:8: ctrl @ on rzz\(theta\) needs the gate's matrix"
    ):
        read_qasm3(text, unbound="keep")
    assert read_qasm3(text, inputs={"theta": 0.4}).ops[0].custom is not None


# --- the command line ---

RX_FILE = """OPENQASM 3.0;
include "stdgates.inc";
input float[64] theta;
qubit[1] q;
rx(theta) q[0];
"""


def _strict(text: str) -> dict:
    return json.loads(text, parse_constant=lambda c: pytest.fail(f"non-strict JSON: {c}"))


def test_optimize_finds_the_minimum_of_z_after_rx(tmp_path, capsys):
    # <0| Rx(θ)† Z Rx(θ) |0> = cos θ for Rx(θ) = exp(-iθX/2) (Nielsen and Chuang, "Quantum
    # Computation and Quantum Information", Cambridge 2000, section 4.2): minimum -1 at θ = π.
    path = tmp_path / "rx.qasm"
    path.write_text(RX_FILE)
    args = ["optimize", "--circuit", str(path), "--observable", "Z0", "--json", "--seed", "3"]
    assert main([*args, "--starts", "2"]) == 0
    doc = _strict(capsys.readouterr().out)
    assert doc["names"] == ["theta"] and doc["problem"] == "observable"
    assert doc["energy"] == pytest.approx(-1.0, abs=1e-9)
    assert math.cos(doc["values"]["theta"]) == pytest.approx(-1.0, abs=1e-9)
    assert doc["evaluations"] == len(doc["history"]) > 0


def test_optimize_with_one_input_fixed(tmp_path, capsys):
    # ry(a) then rx(b): <Z> = cos a cos b (product of the two rotations' Bloch-sphere
    # cosines, common practice); with b fixed at 0.5 the minimum over a is -cos 0.5.
    path = tmp_path / "two.qasm"
    path.write_text(
        'OPENQASM 3.0;\ninclude "stdgates.inc";\ninput float[64] a;\ninput float[64] b;\n'
        "qubit[1] q;\nry(a) q[0];\nrx(b) q[0];\n"
    )
    cmd = ["optimize", "--circuit", str(path), "--observable", "Z0", "--json", "--starts", "2"]
    assert main([*cmd, "--input", "b=0.5"]) == 0
    doc = _strict(capsys.readouterr().out)
    assert doc["names"] == ["a"]
    assert doc["energy"] == pytest.approx(-math.cos(0.5), abs=1e-9)


def test_optimize_subprocess_prints_strict_json(tmp_path):
    path = tmp_path / "rx.qasm"
    path.write_text(RX_FILE)
    cmd = [sys.executable, "-m", "tnsim", "optimize", "--circuit", str(path)]
    cmd += ["--observable", "-1.5 Z0", "--maximize", "--json", "--starts", "1"]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr
    doc = _strict(done.stdout)
    assert doc["energy"] == pytest.approx(1.5, abs=1e-9) and doc["maximize"] is True


def test_query_commands_refuse_an_input_without_value_in_one_line(tmp_path, capsys):
    path = tmp_path / "rx.qasm"
    path.write_text(RX_FILE)
    for cmd in (["amp", str(path), "--bits", "0"], ["expect", str(path), "--observable", "Z0"]):
        assert main(cmd) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and f"{path}:3:17: input 'theta' has no value" in err, err
        assert "--input theta=VALUE" in err
    assert main(["expect", str(path), "--observable", "Z0", "--input", "theta=0.5", "--json"]) == 0
    out = capsys.readouterr().out
    assert "0.877582561890372" in out  # cos 0.5, as above


def test_optimize_refuses_a_2_0_file_and_says_why(tmp_path, capsys):
    qasm = tmp_path / "c.qasm"
    qasm.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nry(0.3) q[0];\n')
    assert main(["optimize", "--circuit", str(qasm), "--observable", "Z0"]) == 2
    err = capsys.readouterr().err
    assert "no named angles" in err and "OpenQASM 2.0 has no input declarations" in err
    assert err.count("\n") == 1
    bad = tmp_path / "bad.qasm"
    bad.write_text(RX_FILE.replace("rx(theta)", "rx(sin(theta))"))
    assert main(["optimize", "--circuit", str(bad), "--observable", "Z0"]) == 2
    err = capsys.readouterr().err
    assert f"{bad}:5:4: sin(theta) is not an affine" in err and err.count("\n") == 1


def test_optimize_help_says_2_0_has_no_inputs(capsys):
    with pytest.raises(SystemExit):
        main(["optimize", "--help"])
    assert "OpenQASM 2.0 has no input declarations" in " ".join(capsys.readouterr().out.split())
