"""Circuit families: reproducibility, structure, closed forms, QASM round trips."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg

from tnsim import amplitude
from tnsim.circuits.families import (
    FAMILIES,
    SQRT_W_U3,
    brickwork,
    ghz,
    grid_circuit,
    grid_edge_layer,
    hardware_efficient,
    iqp,
    ising_trotter,
    layout_2018,
    make_family,
    qaoa_maxcut,
    qft,
    staggered_edge_layer,
)
from tnsim.circuits.gates import gate_matrix
from tnsim.circuits.qasm import read_qasm, write_qasm
from tnsim.errors import InputError
from tnsim.testing import dense_state

X = np.array([[0, 1], [1, 0]], dtype=complex)
Y = np.array([[0, -1j], [1j, 0]], dtype=complex)
Z = np.diag([1.0, -1.0]).astype(complex)

# Small instance of every registered family (must cover FAMILIES).
SMALL = {
    "grid": {"rows": 2, "cols": 3, "depth": 5, "seed": 3},
    "brickwork": {"n": 5, "depth": 4, "seed": 3},
    "qaoa": {"n": 6, "degree": 3, "depth": 2, "seed": 3},
    "iqp": {"n": 5, "seed": 3, "density": 0.6},
    "ising": {"rows": 2, "cols": 2, "depth": 3},
    "ghz": {"n": 5},
    "qft": {"n": 4},
    "hardware-efficient": {"n": 4, "depth": 2, "seed": 3},
}


def _ops(circuit):
    return [(op.name, op.qubits, op.params) for op in circuit]


def test_small_table_covers_registry():
    assert set(SMALL) == set(FAMILIES)


@pytest.mark.parametrize("name", sorted(SMALL))
def test_family_is_reproducible(name):
    assert _ops(make_family(name, **SMALL[name])) == _ops(make_family(name, **SMALL[name]))


@pytest.mark.parametrize("name", ["grid", "brickwork", "qaoa", "iqp", "hardware-efficient"])
def test_seed_changes_random_families(name):
    other = {**SMALL[name], "seed": SMALL[name]["seed"] + 1}
    assert _ops(make_family(name, **SMALL[name])) != _ops(make_family(name, **other))


@pytest.mark.parametrize("name", sorted(SMALL))
def test_qasm_round_trip(name):
    c = make_family(name, **SMALL[name])
    back = read_qasm(write_qasm(c))
    assert back.num_qubits == c.num_qubits
    assert [(o.name, o.qubits) for o in back] == [(o.name, o.qubits) for o in c]
    for a, b in zip(back, c):
        np.testing.assert_allclose(a.params, b.params, atol=1e-12)


@pytest.mark.parametrize("name", sorted(SMALL))
def test_amplitudes_match_dense_reference(name):
    c = make_family(name, **SMALL[name])
    state = dense_state(c)
    rng = np.random.default_rng(0)
    for _ in range(3):
        bits = rng.integers(0, 2, c.num_qubits)
        index = int("".join(map(str, bits)), 2)  # qubit 0 is the most significant bit
        assert abs(amplitude(c, bits) - state[index]) < 1e-10


def test_sqrt_w_u3_is_exact():
    # √W = exp(-iπ/4 (X+Y)/√2), the matrix itself (common practice for random-circuit sampling);
    # reference exponential from scipy.linalg.expm; no global phase allowed.
    want = scipy.linalg.expm(-1j * math.pi / 4 * (X + Y) / math.sqrt(2))
    np.testing.assert_allclose(gate_matrix("u3", SQRT_W_U3), want, atol=1e-14)
    np.testing.assert_allclose(
        np.linalg.matrix_power(want, 2), (X + Y) / math.sqrt(2) * -1j, atol=1e-14
    )


def test_grid_single_qubit_gates_are_roots_of_paulis():
    # sx squared is X exactly; ry(π/2) squared is -iY (√Y up to the phase exp(-iπ/4)).
    sx, ry = gate_matrix("sx"), gate_matrix("ry", (math.pi / 2,))
    np.testing.assert_allclose(sx @ sx, X, atol=1e-14)
    np.testing.assert_allclose(ry @ ry, -1j * Y, atol=1e-14)


def _kind(op):
    return (op.name, op.params)


@pytest.mark.parametrize(("rows", "cols", "two"), [(3, 4, "cz"), (4, 3, "fsim"), (1, 5, "cz")])
def test_grid_structure(rows, cols, two):
    cycles = 9
    c = grid_circuit(rows, cols, cycles, two_qubit=two, seed=5)
    n = rows * cols
    ops = list(c)
    pos = 0
    last = [None] * n
    for cycle in range(cycles):
        singles = ops[pos : pos + n]
        assert [op.qubits for op in singles] == [(q,) for q in range(n)]
        for q, op in enumerate(singles):
            assert _kind(op) != last[q], "same single-qubit gate twice in a row"
            last[q] = _kind(op)
        pos += n
        layer = grid_edge_layer(rows, cols, cycle)
        pairs = ops[pos : pos + len(layer)]
        pos += len(layer)
        assert [op.qubits for op in pairs] == layer
        assert {op.name for op in pairs} <= {two}
        for a, b in layer:
            (ra, ca), (rb, cb) = divmod(a, cols), divmod(b, cols)
            assert abs(ra - rb) + abs(ca - cb) == 1  # nearest neighbours
            if cycle % 4 < 2:
                assert ra == rb and ca % 2 == cycle % 2
            else:
                assert ca == cb and ra % 2 == cycle % 2
    assert pos == len(ops)


def test_grid_fsim_angles():
    c = grid_circuit(2, 2, 1, two_qubit="fsim")
    assert [op.params for op in c if op.name == "fsim"] == [(math.pi / 2, math.pi / 6)] * 2


def test_grid_edge_layers_cover_every_edge_once():
    rows, cols = 4, 5
    edges = [e for k in range(4) for e in grid_edge_layer(rows, cols, k)]
    assert len(edges) == len(set(edges)) == rows * (cols - 1) + cols * (rows - 1)


def test_ghz_closed_form():
    # (|0..0> + |1..1>)/√2 (Greenberger, Horne, Zeilinger, 1989; common practice).
    for n in (3, 40):
        c = ghz(n)
        assert abs(amplitude(c, "0" * n) - 1 / math.sqrt(2)) < 1e-12
        assert abs(amplitude(c, "1" * n) - 1 / math.sqrt(2)) < 1e-12
        assert abs(amplitude(c, "1" + "0" * (n - 1))) < 1e-12


@pytest.mark.parametrize("n", [3, 4])
def test_qft_matches_nielsen_chuang(n):
    # Nielsen & Chuang, Quantum Computation and Quantum Information, 2000, eq. 5.2:
    # |j> -> 2^(-n/2) Σ_k exp(2πi jk / 2^n) |k>; qubit 0 is the most significant bit.
    N = 2**n
    for j in range(N):
        bits = [(j >> (n - 1 - q)) & 1 for q in range(n)]
        c = make_family("qft", n=n)
        prep = type(c)(n)
        for q, b in enumerate(bits):
            if b:
                prep.x(q)
        prep.ops.extend(c.ops)
        want = np.exp(2j * np.pi * j * np.arange(N) / N) / math.sqrt(N)
        np.testing.assert_allclose(dense_state(prep), want, atol=1e-12)
        k = (3 * j + 1) % N
        kbits = [(k >> (n - 1 - q)) & 1 for q in range(n)]
        assert abs(amplitude(prep, kbits) - want[k]) < 1e-12


def test_qft_without_swaps_reverses_output_order():
    n = 3
    a, b = dense_state(qft(n)), dense_state(qft(n, swaps=False))
    np.testing.assert_allclose(a, b, atol=1e-12)  # uniform superposition either way
    assert sum(op.name == "swap" for op in qft(5)) == 2


def test_ising_closed_forms():
    # J = 0: each spin precesses, exp(i h t X)|0> = cos(ht)|0> + i sin(ht)|1> (common practice).
    t, steps, h = 0.6, 3, 0.8
    c = ising_trotter(2, 2, steps, dt=t / steps, J=0.0, h=h)
    want = math.cos(h * t) ** 3 * (1j * math.sin(h * t))
    assert abs(amplitude(c, "0010") - want) < 1e-12
    # h = 0: |0...0> is an eigenstate with ZZ = +1 on all 4 edges: phase exp(+i J t * 4).
    c = ising_trotter(2, 2, steps, dt=t / steps, J=0.7, h=0.0)
    assert abs(amplitude(c, "0000") - np.exp(1j * 0.7 * t * 4)) < 1e-12


def test_ising_trotter_converges_to_exact_evolution():
    # First-order Trotter error is O(dt) (Suzuki, Commun. Math. Phys. 51, 183, 1976);
    # exact exp(-iHt) from scipy.linalg.expm on H = -J Σ ZZ - h Σ X, chain of 3 spins.
    J, h, t = 1.0, 0.9, 1.0
    eye = np.eye(2)

    def site(op, q):
        mats = [op if k == q else eye for k in range(3)]
        return np.kron(np.kron(mats[0], mats[1]), mats[2])

    H = -J * (site(Z, 0) @ site(Z, 1) + site(Z, 1) @ site(Z, 2)) - h * sum(
        site(X, q) for q in range(3)
    )
    exact = scipy.linalg.expm(-1j * H * t)[:, 0]
    errors = [
        np.abs(dense_state(ising_trotter(1, 3, s, dt=t / s, J=J, h=h)) - exact).max()
        for s in (10, 20, 40)
    ]
    assert errors[0] > errors[1] > errors[2]
    assert 1.6 < errors[0] / errors[1] < 2.5 and 1.6 < errors[1] / errors[2] < 2.5
    assert errors[2] < 0.02


def _iqp_diagonal(c, n):
    # Diagonal from the gate definitions, not the matrices: cz = (-1)^(ab),
    # rzz(θ) = exp(-iθ/2 (-1)^(a⊕b)), t = exp(iπ/4 a), rz(θ) = exp(-iθ/2 (-1)^a)
    # (OpenQASM 2.0, arXiv:1707.03429, and tnsim.circuits.gates' rotation convention).
    x = (np.arange(2**n)[:, None] >> (n - 1 - np.arange(n))) & 1
    d = np.ones(2**n, dtype=complex)
    for op in c.ops[n:-n]:
        if op.name == "cz":
            d *= (-1.0) ** (x[:, op.qubits[0]] * x[:, op.qubits[1]])
        elif op.name == "rzz":
            d *= np.exp(-0.5j * op.params[0] * (-1.0) ** (x[:, op.qubits[0]] ^ x[:, op.qubits[1]]))
        elif op.name == "t":
            d *= np.exp(0.25j * np.pi * x[:, op.qubits[0]])
        else:
            assert op.name == "rz"
            d *= np.exp(-0.5j * op.params[0] * (-1.0) ** x[:, op.qubits[0]])
    return d


def test_iqp_zero_amplitude_is_mean_of_diagonal():
    # <0|H^n D H^n|0> = 2^-n Σ_x d(x) (Shepherd & Bremner, Proc. R. Soc. A 465, 1413, 2009).
    n = 6
    c = iqp(n, seed=4, density=0.5)
    assert [op.name for op in c.ops[:n]] == ["h"] * n == [op.name for op in c.ops[-n:]]
    assert all(op.diagonal for op in c.ops[n:-n])
    assert abs(amplitude(c, "0" * n) - _iqp_diagonal(c, n).mean()) < 1e-12


def test_iqp_density_extremes():
    assert sum(len(op.qubits) == 2 for op in iqp(6, density=0.0)) == 0
    assert sum(len(op.qubits) == 2 for op in iqp(6, density=1.0)) == 15


def test_hardware_efficient_structure():
    c = hardware_efficient(5, 3, seed=1)
    assert len(c) == 4 * 10 + 3 * 4
    assert [op.qubits for op in c if op.name == "cx"] == [(q, q + 1) for q in range(4)] * 3


def test_brickwork_bricks_alternate():
    c = brickwork(6, 3, seed=0)
    assert [op.qubits for op in c if op.name == "cz"] == [
        (0, 1),
        (2, 3),
        (4, 5),
        (1, 2),
        (3, 4),
        (0, 1),
        (2, 3),
        (4, 5),
    ]


def test_qaoa_registry_layers():
    c = make_family("qaoa", n=8, degree=3, depth=3)
    direct, _ = qaoa_maxcut(None, (0.4,) * 3, (0.3,) * 3, num_nodes=8, degree=3, seed=0)
    assert _ops(c) == _ops(direct)


@pytest.mark.parametrize(
    "call",
    [
        lambda: make_family("nope"),
        lambda: make_family("grid", bogus=1),
        lambda: make_family("grid", rows="four"),
        lambda: make_family("grid", two_qubit="cx"),
        lambda: grid_circuit(0, 3, 2),
        lambda: iqp(4, density=1.5),
        lambda: make_family("qaoa", n=5, degree=3),
        lambda: make_family("grid", rows="١"),  # a non-ASCII digit
        lambda: make_family("ghz", n="9" * 5000),
        lambda: make_family("grid", rows=10**9),  # refused before building
        lambda: make_family("qft", n=10**5),
        lambda: make_family("grid", depth=3, cycles=3),  # a name and its old alias
        lambda: ising_trotter(2, 2, 1, dt=float("nan")),
    ],
)
def test_bad_input_raises(call):
    with pytest.raises(InputError):
        call()


def _pairs_of(circuit, n):
    """Two-qubit pairs of each cycle of a grid circuit (n single-qubit gates start a cycle)."""
    ops, layers, pos = list(circuit), [], 0
    while pos < len(ops):
        pos += n
        layer = []
        while pos < len(ops) and len(ops[pos].qubits) == 2:
            layer.append(ops[pos].qubits)
            pos += 1
        layers.append(layer)
    return layers


def test_abcdcdab_sequence_follows_the_published_order():
    # Arute et al., "Quantum supremacy using a programmable superconducting processor",
    # Nature 574, 505 (2019): cycles apply the coupler patterns in the order
    # A B C D C D A B, repeated; A and B activate couplers of one orientation, C and D
    # the other, each pattern every other coupler, staggered from line to line (the
    # orientation of each pattern on a square grid is recalled from memory).
    rows, cols = 4, 5
    c = grid_circuit(rows, cols, 16, seed=1, sequence="abcdcdab")
    layers = _pairs_of(c, rows * cols)
    patterns = {
        p: staggered_edge_layer(rows, cols, vertical, offset)
        for p, (vertical, offset) in {"A": (1, 0), "B": (1, 1), "C": (0, 1), "D": (0, 0)}.items()
    }
    assert [layers[k] for k in range(16)] == [patterns[p] for p in "ABCDCDAB" * 2]
    for p, pairs in patterns.items():
        for a, b in pairs:
            (ra, ca), (rb, cb) = divmod(a, cols), divmod(b, cols)
            assert (rb - ra, cb - ca) == ((1, 0) if p in "AB" else (0, 1))
    # A and B together hold every vertical edge once, C and D every horizontal edge once.
    vertical = sorted(patterns["A"] + patterns["B"])
    assert vertical == sorted(
        (r * cols + k, (r + 1) * cols + k) for r in range(rows - 1) for k in range(cols)
    )
    horizontal = sorted(patterns["C"] + patterns["D"])
    assert horizontal == sorted(
        (r * cols + k, r * cols + k + 1) for r in range(rows) for k in range(cols - 1)
    )
    # Staggered: a pattern's horizontal pairs start on even columns in one row, odd in the next.
    assert {a % cols % 2 for a, _ in patterns["D"] if a // cols == 0} == {0}
    assert {a % cols % 2 for a, _ in patterns["D"] if a // cols == 1} == {1}


def test_layouts_2018_follow_the_published_recipe():
    # Boixo et al., "Characterizing quantum supremacy in near-term devices", Nature Physics
    # 14, 595 (2018), Fig. 6: eight CZ layouts used in turn, alternating horizontal and
    # vertical, each holding one edge in four of its orientation, shifted by two from one
    # line to the next, so that no qubit has two CZs in a cycle and every edge of the grid
    # is used once per eight cycles (layout numbering recalled from memory).
    rows, cols = 6, 6
    layouts = [layout_2018(rows, cols, k) for k in range(8)]
    c = grid_circuit(rows, cols, 9, seed=2, sequence="layouts2018")
    assert _pairs_of(c, rows * cols) == [*layouts, layouts[0]]
    every = sorted(p for lay in layouts for p in lay)
    edges = [(r * cols + k, r * cols + k + 1) for r in range(rows) for k in range(cols - 1)]
    edges += [(r * cols + k, (r + 1) * cols + k) for r in range(rows - 1) for k in range(cols)]
    assert every == sorted(edges)
    for k, lay in enumerate(layouts):
        qubits = [q for p in lay for q in p]
        assert len(qubits) == len(set(qubits)) <= rows * cols // 2
        assert all((b - a == 1) == (k % 2 == 0) for a, b in lay)
    # Layout 0 on the first two rows: pairs starting at columns 0 and 4, then at column 2.
    assert [p for p in layouts[0] if p[0] < 2 * cols] == [(0, 1), (4, 5), (8, 9)]


def test_grid_sequence_is_a_family_parameter_and_is_checked():
    c = make_family("grid", rows=3, cols=3, depth=3, sequence="abcdcdab", seed=0)
    assert _ops(c) == _ops(grid_circuit(3, 3, 3, seed=0, sequence="abcdcdab"))
    with pytest.raises(InputError, match="sequence"):
        grid_circuit(3, 3, 2, sequence="zigzag")


def test_every_family_with_a_depth_calls_it_depth_and_size_n_or_rows_cols():
    for fam in FAMILIES.values():
        names = [p.name for p in fam.params]
        assert fam.depth in ("", "depth")
        assert fam.size in (("n",), ("rows", "cols"))
        assert set(fam.size) <= set(names)


@pytest.mark.parametrize(
    ("name", "old", "new"),
    [
        ("grid", {"cycles": 3}, {"depth": 3}),
        ("qaoa", {"num_nodes": 6, "p": 2}, {"n": 6, "depth": 2}),
        ("ising", {"steps": 2}, {"depth": 2}),
        ("hardware-efficient", {"layers": 2}, {"depth": 2}),
    ],
)
def test_old_parameter_names_still_work_with_a_warning(name, old, new):
    with pytest.warns(FutureWarning, match="is now called"):
        before = make_family(name, **old)
    assert _ops(before) == _ops(make_family(name, **new))


def test_gate_bounds_hold_for_every_family():
    from tnsim.circuits.families import _GATE_BOUNDS

    for name, params in SMALL.items():
        fam = FAMILIES[name]
        values = {p.name: params.get(p.name, p.default) for p in fam.params}
        assert len(make_family(name, **params)) <= _GATE_BOUNDS[name](values)
