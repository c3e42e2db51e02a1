"""The API's bad-input table: every case ends in tnsim's own error, in one short line.

One row per case the user report listed (and their neighbours): wrong types,
out-of-range qubits, non-finite or non-real numbers, float or out-of-range bit
arrays, directed or missing graphs, real dtypes, zero or huge sizes.  None may
escape as numpy's or Python's exception, none may be accepted silently, and
none may allocate what it refuses.
"""

from decimal import Decimal
from fractions import Fraction

import networkx as nx
import numpy as np
import pytest

import tnsim
from tnsim import Circuit
from tnsim.errors import InputError, ResourceLimitError, TnsimError

C3 = Circuit(3).h(0).cx(0, 1).rx(0.3, 2)
C21 = Circuit(21).h(0)
NAN, INF = float("nan"), float("inf")


def _term(coefficient, paulis):
    return tnsim.Observable((tnsim.PauliTerm(coefficient, paulis),))


def _enter(**options):
    with tnsim.run_options(**options):
        pass


E, R = InputError, ResourceLimitError

CASES = {
    # the circuit model
    "Circuit(-1)": (lambda: Circuit(-1), E, "num_qubits"),
    "Circuit(1.5)": (lambda: Circuit(1.5), E, "integer"),
    "Circuit('3')": (lambda: Circuit("3"), E, "integer"),
    "Circuit(None)": (lambda: Circuit(None), E, "integer"),
    "Circuit(10**10)": (lambda: Circuit(10**10), E, "at most|from 1 to"),
    "Circuit(10**400)": (lambda: Circuit(10**400), E, "1329 bits"),
    "rx(10**400)": (lambda: Circuit(3).rx(10**400, 0), E, "1329 bits"),
    "rx(Decimal)": (lambda: Circuit(3).rx(Decimal("0.5"), 0), E, "real number"),
    "rx(nan)": (lambda: Circuit(3).rx(NAN, 0), E, "finite"),
    "rx(inf)": (lambda: Circuit(3).rx(INF, 0), E, "finite"),
    "rx(b'0.5')": (lambda: Circuit(3).rx(b"0.5", 0), E, "real number"),
    "rx('0.5 +')": (lambda: Circuit(3).rx("0.5 +", 0), E, "rx"),
    "rx(1j)": (lambda: Circuit(3).rx(1j, 0), E, "real number"),
    "rx(array)": (lambda: Circuit(3).rx(np.array([0.5, 1]), 0), E, "real number"),
    "rx(q=3)": (lambda: Circuit(3).rx(0.5, 3), E, "out of range"),
    "rx(q=-1)": (lambda: Circuit(3).rx(0.5, -1), E, "out of range"),
    "rx(q=1.0)": (lambda: Circuit(3).rx(0.5, 1.0), E, "not an integer"),
    "rx(q=10**400)": (lambda: Circuit(3).rx(0.5, 10**400), E, "1329 bits"),
    "rx(q=True)": (lambda: Circuit(3).rx(0.5, True), E, "not an integer"),
    "cx(0, 0)": (lambda: Circuit(3).cx(0, 0), E, "repeats a qubit"),
    "append('rx', [0], 0.5)": (lambda: Circuit(3).append("rx", [0], 0.5), E, "must be a list"),
    "append('rx', 0, [0.5])": (lambda: Circuit(3).append("rx", 0, [0.5]), E, "must be a list"),
    "append(5, [0])": (lambda: Circuit(3).append(5, [0]), E, "unknown gate 5"),
    "append(['h'], [0])": (lambda: Circuit(3).append(["h"], [0]), E, "unknown gate"),
    "append('h', [0], None)": (lambda: Circuit(3).append("h", [0], None), E, "must be a list"),
    "append('h', None)": (lambda: Circuit(3).append("h", None), E, "must be a list"),
    "append('h', 'ab')": (lambda: Circuit(3).append("h", "ab"), E, "must be a list"),
    "append('rx', [0], dict)": (lambda: Circuit(3).append("rx", [0], {"a": 1}), E, "a list"),
    "unitary(text)": (lambda: Circuit(3).unitary("abc", [0]), E, "not an array of numbers"),
    "unitary(nan)": (lambda: Circuit(3).unitary(np.full((2, 2), NAN), [0]), E, "not finite"),
    "unitary(None entries)": (lambda: Circuit(3).unitary([[None, 1], [1, 0]], [0]), E, "finite"),
    "unitary(q=5)": (lambda: Circuit(3).unitary(np.eye(2), [5]), E, "out of range"),
    "unitary(qubits=None)": (lambda: Circuit(3).unitary(np.eye(2), None), E, "must be a list"),
    "unitary(40 qubits)": (lambda: Circuit(3).unitary(np.eye(2), list(range(40))), E, "at most"),
    "measure(0, -1)": (lambda: Circuit(3).measure(0, -1), E, "classical bit"),
    "from_ops(params 0.5)": (lambda: Circuit.from_ops(3, [("rx", [0], 0.5)]), E, "operation 0"),
    "from_ops(None)": (lambda: Circuit.from_ops(3, None), E, "must be a list"),
    "from_ops([5])": (lambda: Circuit.from_ops(3, [5]), E, "operation 0"),
    "from_ops(qubits '0')": (
        lambda: Circuit.from_ops(3, [{"name": "h", "qubits": "0"}]),
        E,
        "must be a list",
    ),
    # amplitudes
    "amplitude(c, '012')": (lambda: tnsim.amplitude(C3, "012"), E, "'2' at position 2"),
    "amplitude(c, [0, 2, 1])": (lambda: tnsim.amplitude(C3, [0, 2, 1]), E, "holds 2"),
    "amplitude(c, floats)": (lambda: tnsim.amplitude(C3, np.array([0.5, 0, 0])), E, "integers"),
    "amplitude(c, None)": (lambda: tnsim.amplitude(C3, None), E, "give a bitstring"),
    "amplitude(c, 5)": (lambda: tnsim.amplitude(C3, 5), E, "integers 0 and 1"),
    "amplitude(c, bytes)": (lambda: tnsim.amplitude(C3, b"000"), E, "give a bitstring"),
    "amplitude(text, ...)": (lambda: tnsim.amplitude("c", "000"), E, "expected a tnsim.Circuit"),
    "amplitude dtype float64": (lambda: tnsim.amplitude(C3, "000", dtype=np.float64), E, "dtype"),
    "amplitude dtype 'x'": (lambda: tnsim.amplitude(C3, "000", dtype="x"), E, "dtype"),
    "amplitude memory -1": (lambda: tnsim.amplitude(C3, "000", memory_limit=-1), E, "1 byte"),
    "amplitude memory 'abc'": (lambda: tnsim.amplitude(C3, "000", memory_limit="abc"), E, "read"),
    "amplitude memory nan": (lambda: tnsim.amplitude(C3, "000", memory_limit=NAN), E, "1 byte"),
    "amplitudes floats": (
        lambda: tnsim.amplitudes(C3, np.array([[0.5, 0, 0], [1, 1, 1]])),
        E,
        "integers 0 and 1",
    ),
    "amplitudes 256": (lambda: tnsim.amplitudes(C3, np.array([[256, 0, 0]])), E, "holds 256"),
    "amplitudes -1": (lambda: tnsim.amplitudes(C3, np.array([[-1, 0, 0]])), E, "holds -1"),
    "amplitudes 5": (lambda: tnsim.amplitudes(C3, 5), E, "list of bitstrings"),
    "amplitudes ragged": (lambda: tnsim.amplitudes(C3, ["000", "00"]), E, "bitstring 1"),
    "amplitudes 3-D": (lambda: tnsim.amplitudes(C3, np.zeros((2, 2, 3))), E, "integers"),
    "amplitudes None": (lambda: tnsim.amplitudes(C3, None), E, "list of bitstrings"),
    "amplitudes nan": (lambda: tnsim.amplitudes(C3, np.array([[NAN, 0, 0]])), E, "integers"),
    "iter_amplitudes floats": (
        lambda: list(tnsim.iter_amplitudes(C3, np.array([[0.5, 0, 0]]))),
        E,
        "integers",
    ),
    "iter_amplitudes 2": (lambda: list(tnsim.iter_amplitudes(C3, np.array([[2, 0, 0]]))), E, "2"),
    "iter_amplitudes chunk 0": (
        lambda: list(tnsim.iter_amplitudes(C3, np.array([[1, 0, 0]]), chunk=0)),
        E,
        "chunk",
    ),
    "iter_amplitudes 1-D": (
        lambda: list(tnsim.iter_amplitudes(C3, np.array([1, 0, 0]))),
        E,
        "integers 0 and 1",
    ),
    # XEB: the report's 3.0 from a float array is refused
    "xeb floats": (lambda: tnsim.xeb(C3, np.array([[0.5, 0, 0], [1, 1, 1]])), E, "integers"),
    "xeb 256": (lambda: tnsim.xeb(C3, np.array([[256, 0, 0], [1, 1, 1]])), E, "holds 256"),
    "xeb []": (lambda: tnsim.xeb(C3, []), E, "at least 2"),
    "xeb [[0, 0, 2]]": (lambda: tnsim.xeb(C3, [[0, 0, 2], [0, 0, 0]]), E, "holds 2"),
    "xeb '000'": (lambda: tnsim.xeb(C3, "000"), E, "list of bitstrings"),
    "xeb None": (lambda: tnsim.xeb(C3, None), E, "list of bitstrings"),
    "xeb dtype float64": (lambda: tnsim.xeb(C3, ["000", "111"], dtype=np.float64), E, "dtype"),
    # marginals
    "marginal [-1]": (lambda: tnsim.marginal(C3, [-1]), E, "qubit -1"),
    "marginal [3]": (lambda: tnsim.marginal(C3, [3]), E, "qubit 3"),
    "marginal [0.5]": (lambda: tnsim.marginal(C3, [0.5]), E, "qubit 0.5"),
    "marginal []": (lambda: tnsim.marginal(C3, []), E, "at least one"),
    "marginal None": (lambda: tnsim.marginal(C3, None), E, "list of qubit"),
    "marginal '0'": (lambda: tnsim.marginal(C3, "0"), E, "list of qubit"),
    "marginal 0": (lambda: tnsim.marginal(C3, 0), E, "list of qubit"),
    "marginal dtype float32": (lambda: tnsim.marginal(C3, [0], dtype=np.float32), E, "dtype"),
    "marginal of 40 qubits": (lambda: tnsim.marginal(Circuit(45), list(range(40))), R, "memory"),
    # expectation values and observables
    "expect 'Z-1'": (lambda: tnsim.expectation(C3, "Z-1"), E, "qubit index"),
    "expect 'Z3'": (lambda: tnsim.expectation(C3, "Z3"), E, "qubit 3"),
    "expect 'nan Z0'": (lambda: tnsim.expectation(C3, "nan Z0"), E, "column 1"),
    "expect 'inf Z0'": (lambda: tnsim.expectation(C3, "inf Z0"), E, "column"),
    "expect '1e999 Z0'": (lambda: tnsim.expectation(C3, "1e999 Z0"), E, "not finite"),
    "expect '0.5*'": (lambda: tnsim.expectation(C3, "0.5*"), E, "followed by a Pauli"),
    "expect 'Z' + Arabic-Indic 1": (lambda: tnsim.expectation(C3, "Z\u0661"), E, "qubit index"),
    "expect None": (lambda: tnsim.expectation(C3, None), E, "observable must be"),
    "expect 5": (lambda: tnsim.expectation(C3, 5), E, "observable must be"),
    "expect {-1: 'Z'}": (lambda: tnsim.expectation(C3, {-1: "Z"}), E, "qubit -1"),
    "expect {0: 'Q'}": (lambda: tnsim.expectation(C3, {0: "Q"}), E, "'Q'"),
    "expect {0.5: 'Z'}": (lambda: tnsim.expectation(C3, {0.5: "Z"}), E, "qubit 0.5"),
    "expect {0: 5}": (lambda: tnsim.expectation(C3, {0: 5}), E, "has 5"),
    "expect term on qubit -1": (
        lambda: tnsim.expectation(C3, _term(1.0, ((-1, "Z"),))),
        E,
        "qubit -1",
    ),
    "expect term nan": (lambda: tnsim.expectation(C3, _term(NAN, ((0, "Z"),))), E, "finite"),
    "expect term complex": (lambda: tnsim.expectation(C3, _term(1j, ((0, "Z"),))), E, "real"),
    "expect term 'Q'": (lambda: tnsim.expectation(C3, _term(1.0, ((0, "Q"),))), E, "'Q'"),
    "expect dtype int8": (lambda: tnsim.expectation(C3, "Z0", dtype=np.int8), E, "dtype"),
    "expect 5,000-digit index": (lambda: tnsim.expectation(C3, "Z" + "9" * 5000), E, "too large"),
    # sampling
    "sample -1": (lambda: tnsim.sample(C3, -1), E, "shots"),
    "sample 1.5": (lambda: tnsim.sample(C3, 1.5), E, "shots"),
    "sample '5'": (lambda: tnsim.sample(C3, "5"), E, "shots"),
    "sample 10**11": (lambda: tnsim.sample(C3, 10**11), R, "shots at a time"),
    "sample seed 1.5": (lambda: tnsim.sample(C3, 5, seed=1.5), E, "seed"),
    "sample seed 'a'": (lambda: tnsim.sample(C3, 5, seed="a"), E, "seed"),
    "sample dtype float64 (gates)": (lambda: tnsim.sample(C21, 20, dtype=np.float64), E, "dtype"),
    "sample dtype float64": (lambda: tnsim.sample(C3, 20, dtype=np.float64), E, "dtype"),
    "sample chunk 0": (lambda: tnsim.sample(C3, 5, chunk=0), E, "chunk"),
    "sample chunk -1": (lambda: tnsim.sample(C3, 5, chunk=-1), E, "chunk"),
    "sample chunk 1.5": (lambda: tnsim.sample(C3, 5, chunk=1.5), E, "chunk"),
    "sample block 0": (lambda: tnsim.sample(C3, 5, block=0), E, "block"),
    "sample method 'x'": (lambda: tnsim.sample(C3, 5, method="x"), E, "method"),
    "sample memory -5": (lambda: tnsim.sample(C3, 5, memory_limit=-5), E, "1 byte"),
    # MaxCut
    "maxcut None": (lambda: tnsim.maxcut_energy(None, [0.1], [0.2]), E, "networkx.Graph"),
    "maxcut directed": (
        lambda: tnsim.maxcut_energy(nx.DiGraph([(0, 1), (1, 2)]), [0.1], [0.2]),
        E,
        "directed",
    ),
    "maxcut 'graph'": (lambda: tnsim.maxcut_energy("graph", [0.1], [0.2]), E, "networkx.Graph"),
    "maxcut gamma nan": (lambda: tnsim.maxcut_energy(nx.cycle_graph(4), [NAN], [0.2]), E, "finite"),
    "maxcut 2 gammas 1 beta": (
        lambda: tnsim.maxcut_energy(nx.cycle_graph(4), [0.1, 0.2], [0.2]),
        E,
        "same positive number",
    ),
    "maxcut gammas 'ab'": (lambda: tnsim.maxcut_energy(nx.cycle_graph(4), "ab", "cd"), E, "list"),
    "maxcut gammas None": (lambda: tnsim.maxcut_energy(nx.cycle_graph(4), None, None), E, "list"),
    "maxcut empty graph": (lambda: tnsim.maxcut_energy(nx.Graph(), [0.1], [0.2]), E, "no nodes"),
    "maxcut self-loop": (
        lambda: tnsim.maxcut_energy(nx.Graph([(0, 0), (0, 1)]), [0.1], [0.2]),
        E,
        "self-loop",
    ),
    "maxcut multigraph": (
        lambda: tnsim.maxcut_energy(nx.MultiGraph([(0, 1), (0, 1)]), [0.1], [0.2]),
        E,
        "parallel edges",
    ),
    "maxcut dtype float": (
        lambda: tnsim.maxcut_energy(nx.cycle_graph(4), [0.1], [0.2], dtype=float),
        E,
        "dtype",
    ),
    # forecasts, contraction, reading, options, planning
    "forecast bits '012'": (lambda: tnsim.forecast(C3, "012"), E, "'2'"),
    "forecast memory -5": (lambda: tnsim.forecast(C3, memory_limit=-5), E, "1 byte"),
    "forecast time_budget -1": (lambda: tnsim.forecast(C3, time_budget=-1), E, "positive"),
    "forecast time_budget nan": (lambda: tnsim.forecast(C3, time_budget=NAN), E, "finite"),
    "forecast time_budget inf": (lambda: tnsim.forecast(C3, time_budget=INF), E, "finite"),
    "forecast dtype float64": (lambda: tnsim.forecast(C3, dtype=np.float64), E, "dtype"),
    "forecast objective 'x'": (lambda: tnsim.forecast(C3, objective="x"), E, "objective"),
    "contract equation 5": (lambda: tnsim.contract(5, np.ones(2)), E, "equation"),
    "contract text array": (lambda: tnsim.contract("i->", np.array(["a", "b"])), E, "numbers"),
    "contract memory -3": (lambda: tnsim.contract("i->", np.ones(2), memory_limit=-3), E, "byte"),
    "contract time_budget nan": (
        lambda: tnsim.contract("i->", np.ones(2), time_budget=NAN),
        E,
        "finite",
    ),
    "contract seed 'x'": (lambda: tnsim.contract("i->", np.ones(2), seed="x"), E, "seed"),
    "read_qasm(5)": (lambda: tnsim.read_qasm(5), E, "text or a file path"),
    "read_qasm(None)": (lambda: tnsim.read_qasm(None), E, "text or a file path"),
    "run_options memory -1": (lambda: _enter(memory_limit=-1), E, "1 byte"),
    "run_options workers 0": (lambda: _enter(workers=0), E, "workers"),
    "run_options workers 1.5": (lambda: _enter(workers=1.5), E, "workers"),
    "run_options workers 'a'": (lambda: _enter(workers="a"), E, "workers"),
    "run_options checkpoint 5": (lambda: _enter(checkpoint=5), E, "checkpoint"),
    "run_options time_budget inf": (lambda: _enter(time_budget=INF), E, "finite"),
    "make_plan(5)": (lambda: tnsim.make_plan(5), E, "TensorGraph"),
}


@pytest.mark.parametrize("name", list(CASES))
def test_bad_api_input_raises_tnsims_own_error_in_one_line(name):
    call, kind, match = CASES[name]
    with pytest.raises(TnsimError) as info:
        call()
    assert isinstance(info.value, kind), f"{type(info.value).__name__}: {info.value}"
    message = str(info.value)
    assert "\n" not in message and len(message) < 300, message
    assert match in message or any(m in message for m in match.split("|")), message


def test_messages_quote_at_most_about_80_characters_of_huge_values():
    for call in (
        lambda: tnsim.amplitude(C3, "01" + "x" * 10**6),
        lambda: tnsim.expectation(C3, "Z0 " + "@" * 10**6),
        lambda: Circuit(3).append("g" * 10**6, [0]),
        lambda: tnsim.read_qasm("OPENQASM 2.0;\nqreg q[1];\n" + "u" * 10**6 + " q[0];"),
    ):
        with pytest.raises(TnsimError) as info:
            call()
        assert len(str(info.value)) < 400


def test_what_is_accepted_is_right():
    # A Fraction is a real number: the same gate as its float.
    a = Circuit(1).rx(Fraction(1, 3), 0).ops[0]
    assert a.params == (1 / 3,)
    # Any integer is a seed: negative seeds reproduce and differ from their positive twins.
    c = Circuit(4).h(0).h(1).h(2).h(3)
    one, again = tnsim.sample(c, 50, seed=-7), tnsim.sample(c, 50, seed=-7)
    assert (one == again).all() and not (one == tnsim.sample(c, 50, seed=7)).all()
    # Boolean arrays are bits.
    bell = Circuit(2).h(0).cx(0, 1)
    assert tnsim.amplitude(bell, np.array([True, True])) == pytest.approx(2**-0.5)
    # The report's case: a float array no longer scores 3.0; the same rows as integers do
    # what the formula says (F = 2^n <p> - 1, Arute et al., Nature 574, 505 (2019)).
    rows = np.array([[0, 0], [1, 1]])
    assert tnsim.xeb(bell, rows).fidelity == pytest.approx(1.0)
