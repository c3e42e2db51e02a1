"""Seeded circuit families for demos, tests and benchmarks.

Every family is a plain function returning a :class:`~tnsim.circuits.circuit.Circuit`
(:func:`qaoa_maxcut` also returns its graph).  Random choices come from one
``numpy.random.Generator`` made from ``seed``: the same arguments give the same
circuit.  Every family uses named gates only, so each one can be written as
OpenQASM 2.0 by :func:`tnsim.circuits.qasm.write_qasm`.

:data:`FAMILIES` maps a short name to a :class:`Family` record (builder and
parameter specification); the command line (``tnsim gen``, ``tnsim bench``)
works from it.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError

if TYPE_CHECKING:
    import networkx as nx

__all__ = [
    "FAMILIES",
    "GRID_SEQUENCES",
    "MAX_GATES",
    "SQRT_W_U3",
    "Family",
    "Param",
    "brickwork",
    "family_values",
    "ghz",
    "grid_circuit",
    "grid_edge_layer",
    "grid_layer_pairs",
    "hardware_efficient",
    "iqp",
    "ising_trotter",
    "layout_2018",
    "make_family",
    "qaoa_maxcut",
    "qft",
    "staggered_edge_layer",
]


SQRT_W_U3: tuple[float, float, float] = (math.pi / 2, -math.pi / 4, math.pi / 4)


"""``u3`` angles of √W = exp(-iπ/4 · (X+Y)/√2), with no global-phase difference.

Derivation: √W = (1/√2)[[1, e^(-3iπ/4)], [e^(-iπ/4), 1]], and OpenQASM's
``u3(π/2, φ, λ)`` = (1/√2)[[1, -e^(iλ)], [e^(iφ), e^(i(φ+λ))]]; φ = -π/4, λ = π/4
match every entry (checked against ``scipy.linalg.expm`` in the tests).
"""


def _positive(name: str, value: int, minimum: int = 1) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise InputError(f"{name} must be an integer >= {minimum}, got {value!r}")
    return int(value)


def grid_edge_layer(rows: int, cols: int, layer: int) -> list[tuple[int, int]]:
    """Return the qubit pairs of one of the four nearest-neighbour edge layers of a grid.

    Qubit ``r * cols + c`` sits at row ``r``, column ``c``.  Layers, used in
    rotation (``layer % 4``): 0 horizontal pairs starting at even columns,
    1 horizontal pairs starting at odd columns, 2 vertical pairs starting at
    even rows, 3 vertical pairs starting at odd rows.  Within a layer no qubit
    appears twice.

    Examples
    --------
    >>> grid_edge_layer(2, 3, 0)
    [(0, 1), (3, 4)]
    >>> grid_edge_layer(2, 3, 2)
    [(0, 3), (1, 4), (2, 5)]
    >>> grid_edge_layer(2, 3, 3)
    []
    """
    kind = layer % 4
    parity = kind % 2
    if kind < 2:
        return [
            (r * cols + c, r * cols + c + 1)
            for r in range(rows)
            for c in range(parity, cols - 1, 2)
        ]
    return [
        (r * cols + c, (r + 1) * cols + c) for r in range(parity, rows - 1, 2) for c in range(cols)
    ]


def staggered_edge_layer(
    rows: int, cols: int, vertical: bool, offset: int
) -> list[tuple[int, int]]:
    """Return one staggered nearest-neighbour layer of a grid: every other edge, shifted by row.

    A vertical layer holds the pairs ``(r, c)``-``(r + 1, c)`` with
    ``r + c + offset`` even; a horizontal one the pairs ``(r, c)``-``(r, c + 1)``
    with ``r + c + offset`` even.  Qubit ``r * cols + c`` sits at row ``r``,
    column ``c``; no qubit appears twice.

    Examples
    --------
    >>> staggered_edge_layer(2, 3, False, 0)
    [(0, 1), (4, 5)]
    >>> staggered_edge_layer(3, 2, True, 1)
    [(1, 3), (2, 4)]
    """
    pairs = []
    for r in range(rows - int(vertical)):
        for c in range(cols - int(not vertical)):
            if (r + c + offset) % 2 == 0:
                b = (r + 1) * cols + c if vertical else r * cols + c + 1
                pairs.append((r * cols + c, b))
    return pairs


def layout_2018(rows: int, cols: int, k: int) -> list[tuple[int, int]]:
    """Return layout ``k % 8`` of the eight CZ layouts of the 2018 supremacy proposal.

    Each layout holds one edge in four along one direction, staggered from row
    to row (or column to column), so that a layer touches at most half of the
    qubits.  Edge ``(r, c)``-``(r, c + 1)`` is in layout ``2c + 4 (r mod 2)``
    (mod 8); edge ``(r, c)``-``(r + 1, c)`` in layout ``3 - 2r + 4 (c mod 2)``
    (mod 8): even layouts are horizontal, odd ones vertical, and the eight
    together hold every edge once.  (Boixo et al., "Characterizing quantum
    supremacy in near-term devices", Nature Physics 14, 595, 2018, Fig. 6 and
    its circuit recipe; the layout numbering is recalled from memory.)

    Examples
    --------
    >>> layout_2018(2, 5, 0)
    [(0, 1), (7, 8)]
    >>> layout_2018(4, 4, 1)
    [(4, 8), (6, 10)]
    """
    k %= 8
    pairs = []
    for r in range(rows):
        for c in range(cols - 1):
            if (2 * c + 4 * (r % 2)) % 8 == k:
                pairs.append((r * cols + c, r * cols + c + 1))
    for r in range(rows - 1):
        for c in range(cols):
            if (3 - 2 * r + 4 * (c % 2)) % 8 == k:
                pairs.append((r * cols + c, (r + 1) * cols + c))
    return sorted(pairs)


GRID_SEQUENCES = ("rotation", "abcdcdab", "layouts2018")
"""Two-qubit layer sequences of :func:`grid_circuit`.

``"rotation"``: the four aligned layers of :func:`grid_edge_layer` in turn (0, 1, 2, 3);
``"abcdcdab"``: the four staggered patterns A, B, C, D of a grid processor in the
order A B C D C D A B, repeated (Arute et al., "Quantum supremacy using a
programmable superconducting processor", Nature 574, 505, 2019; patterns A and B
vertical, C and D horizontal, recalled from memory), see :func:`staggered_edge_layer`;
``"layouts2018"``: the eight layouts of :func:`layout_2018` in turn.
"""

# Pattern A, B, C, D of the staggered sequence as (vertical, offset) of staggered_edge_layer.
_PATTERNS = {"A": (True, 0), "B": (True, 1), "C": (False, 1), "D": (False, 0)}


def grid_layer_pairs(
    rows: int, cols: int, cycle: int, sequence: str = "rotation"
) -> list[tuple[int, int]]:
    """Return the qubit pairs of the two-qubit layer of ``cycle`` in a layer ``sequence``.

    See :data:`GRID_SEQUENCES`.

    Examples
    --------
    >>> grid_layer_pairs(2, 2, 0, "abcdcdab")
    [(0, 2)]
    >>> grid_layer_pairs(2, 2, 2, "abcdcdab")
    [(2, 3)]
    """
    if sequence == "rotation":
        return grid_edge_layer(rows, cols, cycle)
    if sequence == "abcdcdab":
        return staggered_edge_layer(rows, cols, *_PATTERNS["ABCDCDAB"[cycle % 8]])
    if sequence == "layouts2018":
        return layout_2018(rows, cols, cycle)
    raise InputError(f"unknown grid sequence {sequence!r}; use one of {', '.join(GRID_SEQUENCES)}")


def _grid_single(c: Circuit, kind: int, q: int) -> None:
    if kind == 0:
        c.sx(q)
    elif kind == 1:
        c.ry(math.pi / 2, q)
    else:
        c.u3(*SQRT_W_U3, q)


def grid_circuit(
    rows: int,
    cols: int,
    cycles: int,
    *,
    two_qubit: str = "cz",
    seed: int = 0,
    sequence: str = "rotation",
) -> Circuit:
    """Random circuit on a 2D grid of qubits (the random-circuit-sampling pattern).

    Each cycle applies a random single-qubit gate to every qubit, then a
    two-qubit gate to every pair of one edge layer, the layers following
    ``sequence`` (:data:`GRID_SEQUENCES`; by default the aligned layers of
    :func:`grid_edge_layer` in rotation 0, 1, 2, 3, 0, ...).  Single-qubit gates are drawn
    from {√X, √Y, √W}, never the same gate on a qubit in two consecutive
    cycles:

    * √X is ``sx`` (exact);
    * √Y is ``ry(π/2)`` = exp(-iπ/4 · Y), which is √Y times the global phase
      exp(-iπ/4);
    * √W = exp(-iπ/4 · (X+Y)/√2) is ``u3`` with angles :data:`SQRT_W_U3` (exact).

    Parameters
    ----------
    rows, cols : int
        Grid shape; qubit ``r * cols + c`` is at row ``r``, column ``c``.
    cycles : int
        Number of cycles.
    two_qubit : {"cz", "fsim"}
        ``cz``, or ``fsim(π/2, π/6)``.
    seed : int
        Seed of the single-qubit gate choices.
    sequence : {"rotation", "abcdcdab", "layouts2018"}
        Sequence of two-qubit layers (:data:`GRID_SEQUENCES`).

    Returns
    -------
    Circuit

    Examples
    --------
    >>> c = grid_circuit(3, 3, 4, seed=1)
    >>> c.num_qubits, len(c)
    (9, 48)
    >>> sorted({op.name for op in c})
    ['cz', 'ry', 'sx', 'u3']
    """
    rows, cols = _positive("rows", rows), _positive("cols", cols)
    cycles = _positive("cycles", cycles, 0)
    if two_qubit not in ("cz", "fsim"):
        raise InputError(f"two_qubit must be 'cz' or 'fsim', got {two_qubit!r}")
    if sequence not in GRID_SEQUENCES:
        raise InputError(f"sequence must be one of {', '.join(GRID_SEQUENCES)}, got {sequence!r}")
    rng = np.random.default_rng(seed)
    n = rows * cols
    c = Circuit(n)
    last = np.full(n, -1)
    for cycle in range(cycles):
        # Draw from the two gates that differ from last cycle's (any of three at first).
        pick = rng.integers(0, 3, n)
        shift = rng.integers(1, 3, n)
        kinds = np.where(last < 0, pick, (last + shift) % 3)
        for q in range(n):
            _grid_single(c, int(kinds[q]), q)
        last = kinds
        for a, b in grid_layer_pairs(rows, cols, cycle, sequence):
            if two_qubit == "cz":
                c.cz(a, b)
            else:
                c.fsim(math.pi / 2, math.pi / 6, a, b)
    return c


def brickwork(n: int, depth: int, seed: int = 0) -> Circuit:
    """Random ``u3`` layers alternating with ``cz`` bricks on a line of qubits.

    Layer ``k`` applies ``u3`` with three angles uniform in ``[0, 2π)`` to every
    qubit, then ``cz`` on pairs ``(q, q+1)`` with ``q ≡ k (mod 2)``.

    Parameters
    ----------
    n : int
        Qubits on the line.
    depth : int
        Number of layers.
    seed : int
        Seed of the angles.

    Returns
    -------
    Circuit

    Examples
    --------
    >>> c = brickwork(5, 2, seed=0)
    >>> [op.qubits for op in c if op.name == "cz"]
    [(0, 1), (2, 3), (1, 2), (3, 4)]
    """
    n, depth = _positive("n", n), _positive("depth", depth, 0)
    rng = np.random.default_rng(seed)
    c = Circuit(n)
    for layer in range(depth):
        for q in range(n):
            c.u3(*rng.uniform(0, 2 * math.pi, 3), q)
        for q in range(layer % 2, n - 1, 2):
            c.cz(q, q + 1)
    return c


def qaoa_maxcut(
    graph: nx.Graph | None = None,
    gammas: list[float] | tuple[float, ...] = (0.4,),
    betas: list[float] | tuple[float, ...] = (0.3,),
    *,
    num_nodes: int = 16,
    degree: int = 3,
    seed: int = 0,
) -> tuple[Circuit, nx.Graph]:
    """QAOA for MaxCut (Farhi, Goldstone, Gutmann, arXiv:1411.4028, 2014).

    The circuit is ``h`` on every qubit, then for each layer ``k``:
    ``rzz(2 γ_k)`` on every edge (``exp(-i γ Z_u Z_v)``) and ``rx(2 β_k)`` on every
    qubit (``exp(-i β X)``).  The graph's nodes are relabelled ``0..n-1`` in sorted order.

    Parameters
    ----------
    graph : networkx.Graph, optional
        The graph; default a random ``degree``-regular graph on ``num_nodes`` nodes.
    gammas, betas : sequence of float
        One angle of each kind per layer (``p = len(gammas)``).
    num_nodes, degree, seed : int
        Size, degree and seed of the default random regular graph.

    Returns
    -------
    circuit : Circuit
    graph : networkx.Graph
        The graph on nodes ``0..n-1`` that the circuit encodes.

    Examples
    --------
    >>> c, g = qaoa_maxcut(num_nodes=6, degree=3, seed=1)
    >>> c.num_qubits, g.number_of_edges(), len(c)
    (6, 9, 21)
    """
    import networkx as nx  # only here: the other families do without it

    if len(gammas) != len(betas) or not gammas:
        raise InputError("give the same positive number of gammas and betas (one per layer)")
    if graph is None:
        if num_nodes * degree % 2 or not 0 <= degree < num_nodes:
            raise InputError(
                f"no {degree}-regular graph on {num_nodes} nodes: need degree < num_nodes "
                "and an even num_nodes * degree"
            )
        graph = nx.random_regular_graph(degree, num_nodes, seed=seed)
    if graph.number_of_nodes() == 0:
        raise InputError("the graph has no nodes")
    graph = nx.convert_node_labels_to_integers(graph, ordering="sorted")
    c = Circuit(graph.number_of_nodes())
    for q in range(c.num_qubits):
        c.h(q)
    for gamma, beta in zip(gammas, betas):
        for u, v in graph.edges():
            c.rzz(2 * float(gamma), u, v)
        for q in range(c.num_qubits):
            c.rx(2 * float(beta), q)
    return c, graph


def iqp(n: int, seed: int = 0, density: float = 0.3) -> Circuit:
    """An instantaneous-quantum-polynomial circuit: ``h``, diagonal gates, ``h``.

    Every pair of qubits independently, with probability ``density``, gets
    ``cz`` or ``rzz(θ)`` (each half the time, θ uniform in ``[0, 2π)``); then
    every qubit gets ``t`` or ``rz(θ)`` (each half the time).  A layer of ``h``
    on every qubit comes before and after, so the amplitude of ``0...0`` is
    the mean of the diagonal's entries.

    Parameters
    ----------
    n : int
        Qubits.
    seed : int
        Seed of the gate choices and angles.
    density : float
        Probability in ``[0, 1]`` that a pair gets a two-qubit gate.

    Returns
    -------
    Circuit

    Examples
    --------
    >>> c = iqp(4, seed=3, density=1.0)
    >>> sum(len(op.qubits) == 2 for op in c)
    6
    """
    n = _positive("n", n)
    if not 0.0 <= float(density) <= 1.0:
        raise InputError(f"density must lie in [0, 1], got {density!r}")
    rng = np.random.default_rng(seed)
    c = Circuit(n)
    for q in range(n):
        c.h(q)
    for a in range(n):
        for b in range(a + 1, n):
            if rng.random() < density:
                if rng.random() < 0.5:
                    c.cz(a, b)
                else:
                    c.rzz(rng.uniform(0, 2 * math.pi), a, b)
    for q in range(n):
        if rng.random() < 0.5:
            c.t(q)
        else:
            c.rz(rng.uniform(0, 2 * math.pi), q)
    for q in range(n):
        c.h(q)
    return c


def ising_trotter(
    rows: int, cols: int, steps: int, dt: float = 0.1, J: float = 1.0, h: float = 1.0
) -> Circuit:
    """First-order Trotter circuit of the transverse-field Ising model on a grid.

    H = -J Σ_<uv> Z_u Z_v - h Σ_u X_u over the nearest-neighbour edges of a
    ``rows`` × ``cols`` lattice (qubit ``r * cols + c``).  Each step applies
    exp(+i J dt Z_u Z_v) = ``rzz(-2 J dt)`` on every edge, then
    exp(+i h dt X_u) = ``rx(-2 h dt)`` on every site, approximating
    exp(-i H dt) (Trotter product formula; Suzuki, Commun. Math. Phys. 51, 183, 1976).
    The initial state is ``|0...0>`` (all spins up along Z).

    Parameters
    ----------
    rows, cols : int
        Lattice shape.
    steps : int
        Number of Trotter steps.
    dt : float
        Time step.
    J, h : float
        Coupling and transverse field.

    Returns
    -------
    Circuit

    Examples
    --------
    >>> c = ising_trotter(2, 2, 3)
    >>> c.num_qubits, len(c), c.ops[0].name
    (4, 24, 'rzz')
    """
    rows, cols = _positive("rows", rows), _positive("cols", cols)
    steps = _positive("steps", steps, 0)
    for name, v in (("dt", dt), ("J", J), ("h", h)):
        if not np.isfinite(v):
            raise InputError(f"{name} must be a finite number, got {v!r}")
    edges = grid_edge_layer(rows, cols, 0) + grid_edge_layer(rows, cols, 1)
    edges += grid_edge_layer(rows, cols, 2) + grid_edge_layer(rows, cols, 3)
    c = Circuit(rows * cols)
    for _ in range(steps):
        for a, b in edges:
            c.rzz(-2 * J * dt, a, b)
        for q in range(rows * cols):
            c.rx(-2 * h * dt, q)
    return c


def ghz(n: int) -> Circuit:
    """The GHZ state (|0...0> + |1...1>)/√2: ``h`` on qubit 0, then a ``cx`` chain.

    Parameters
    ----------
    n : int
        Qubits.

    Returns
    -------
    Circuit

    Examples
    --------
    >>> [op.name for op in ghz(3)]
    ['h', 'cx', 'cx']
    """
    n = _positive("n", n)
    c = Circuit(n).h(0)
    for q in range(n - 1):
        c.cx(q, q + 1)
    return c


def qft(n: int, *, swaps: bool = True) -> Circuit:
    """The quantum Fourier transform on ``n`` qubits, qubit 0 most significant.

    The textbook circuit (Nielsen and Chuang, Quantum Computation and Quantum
    Information, 2000, Fig. 5.1): for each qubit ``q``, ``h(q)`` then
    ``cp(2π / 2^(m-q+1))`` controlled by each later qubit ``m``; finally
    ``swap`` reverses the qubit order (omit with ``swaps=False``).  It maps
    |j> to 2^(-n/2) Σ_k exp(2πi jk / 2^n) |k> (their eq. 5.2).  Applied to
    ``|0...0>`` it gives the uniform superposition; prepend ``x`` gates for
    other inputs.

    Parameters
    ----------
    n : int
        Qubits.
    swaps : bool
        Whether to end with the swaps that reverse the qubit order.

    Returns
    -------
    Circuit

    Examples
    --------
    >>> len(qft(4)), len(qft(4, swaps=False))
    (12, 10)
    """
    n = _positive("n", n)
    c = Circuit(n)
    for q in range(n):
        c.h(q)
        for m in range(q + 1, n):
            c.cp(2 * math.pi / 2 ** (m - q + 1), m, q)
    if swaps:
        for q in range(n // 2):
            c.swap(q, n - 1 - q)
    return c


def hardware_efficient(n: int, layers: int, seed: int = 0) -> Circuit:
    """A layered variational ansatz: ``ry``/``rz`` rotations and a ``cx`` ladder.

    Each layer applies ``ry(θ)`` and ``rz(φ)`` (angles uniform in ``[0, 2π)``)
    to every qubit, then ``cx(q, q+1)`` for ``q = 0 .. n-2``; a last rotation
    layer follows.

    Parameters
    ----------
    n : int
        Qubits.
    layers : int
        Number of rotation-plus-ladder layers.
    seed : int
        Seed of the angles.

    Returns
    -------
    Circuit

    Examples
    --------
    >>> c = hardware_efficient(3, 2, seed=0)
    >>> len(c), sum(op.name == "cx" for op in c)
    (22, 4)
    """
    n, layers = _positive("n", n), _positive("layers", layers, 0)
    rng = np.random.default_rng(seed)
    c = Circuit(n)
    for layer in range(layers + 1):
        angles = rng.uniform(0, 2 * math.pi, (n, 2))
        for q in range(n):
            c.ry(float(angles[q, 0]), q)
            c.rz(float(angles[q, 1]), q)
        if layer < layers:
            for q in range(n - 1):
                c.cx(q, q + 1)
    return c


@dataclass(frozen=True)
class Param:
    """One parameter of a family on the command line.

    Attributes
    ----------
    name : str
        Keyword name.
    kind : type
        ``int``, ``float`` or ``str``.
    default : int, float or str
        Value when not given.
    help : str
        One-line description.
    """

    name: str
    kind: type
    default: int | float | str
    help: str


@dataclass(frozen=True)
class Family:
    """A circuit family as the command line sees it.

    Attributes
    ----------
    name : str
        Registry key.
    build : callable
        ``build(**params) -> Circuit``.
    params : tuple of Param
        Every parameter, with its default.
    size : tuple of str
        Parameters a ``--sizes`` item sets: ``"4x5"`` sets two, ``"20"`` one.
    depth : str
        Parameter ``--depth`` sets in a benchmark sweep (every family with a
        depth calls it ``depth``).
    summary : str
        One line for help texts.
    aliases : dict of str to str
        Former parameter names still accepted, with a warning, for one release
        (``cycles``, ``p``, ``steps``, ``layers`` became ``depth``; ``num_nodes``
        became ``n``).
    """

    name: str
    build: Callable[..., Circuit]
    params: tuple[Param, ...]
    size: tuple[str, ...]
    depth: str
    summary: str
    aliases: dict[str, str] = field(default_factory=dict)


def _qaoa(n: int, degree: int, depth: int, gamma: float, beta: float, seed: int) -> Circuit:
    p = _positive("depth", depth)
    return qaoa_maxcut(None, (gamma,) * p, (beta,) * p, num_nodes=n, degree=degree, seed=seed)[0]


_SEED = Param("seed", int, 0, "seed of the random choices")


FAMILIES: dict[str, Family] = {
    f.name: f
    for f in [
        Family(
            "grid",
            lambda rows, cols, depth, two_qubit, seed, sequence: grid_circuit(
                rows, cols, depth, two_qubit=two_qubit, seed=seed, sequence=sequence
            ),
            (
                Param("rows", int, 4, "grid rows"),
                Param("cols", int, 4, "grid columns"),
                Param("depth", int, 8, "cycles (single-qubit layer + one edge layer)"),
                Param("two_qubit", str, "cz", "two-qubit gate: cz or fsim"),
                _SEED,
                Param(
                    "sequence",
                    str,
                    "rotation",
                    "two-qubit layer sequence: rotation, abcdcdab or layouts2018",
                ),
            ),
            ("rows", "cols"),
            "depth",
            "random circuit on a 2D grid (sx/ry/√W + cz or fsim on rotating edge layers)",
            {"cycles": "depth"},
        ),
        Family(
            "brickwork",
            brickwork,
            (Param("n", int, 16, "qubits"), Param("depth", int, 8, "layers"), _SEED),
            ("n",),
            "depth",
            "random u3 layers and cz bricks on a line",
        ),
        Family(
            "qaoa",
            _qaoa,
            (
                Param("n", int, 16, "nodes of the random regular graph (qubits)"),
                Param("degree", int, 3, "degree of the graph"),
                Param("depth", int, 1, "QAOA layers p (same gamma and beta in each)"),
                Param("gamma", float, 0.4, "cost angle"),
                Param("beta", float, 0.3, "mixer angle"),
                _SEED,
            ),
            ("n",),
            "depth",
            "QAOA MaxCut on a random regular graph",
            {"num_nodes": "n", "p": "depth"},
        ),
        Family(
            "iqp",
            iqp,
            (
                Param("n", int, 16, "qubits"),
                _SEED,
                Param("density", float, 0.3, "probability of a gate on each pair"),
            ),
            ("n",),
            "",
            "h, random diagonal cz/rzz/t/rz gates, h",
        ),
        Family(
            "ising",
            lambda rows, cols, depth, dt, J, h: ising_trotter(rows, cols, depth, dt, J, h),
            (
                Param("rows", int, 4, "lattice rows"),
                Param("cols", int, 4, "lattice columns"),
                Param("depth", int, 4, "Trotter steps"),
                Param("dt", float, 0.1, "time step"),
                Param("J", float, 1.0, "coupling"),
                Param("h", float, 1.0, "transverse field"),
            ),
            ("rows", "cols"),
            "depth",
            "Trotterized transverse-field Ising model on a lattice",
            {"steps": "depth"},
        ),
        Family("ghz", ghz, (Param("n", int, 16, "qubits"),), ("n",), "", "GHZ state (h, cx chain)"),
        Family(
            "qft", qft, (Param("n", int, 8, "qubits"),), ("n",), "", "quantum Fourier transform"
        ),
        Family(
            "hardware-efficient",
            lambda n, depth, seed: hardware_efficient(n, depth, seed),
            (Param("n", int, 16, "qubits"), Param("depth", int, 4, "layers"), _SEED),
            ("n",),
            "depth",
            "ry/rz rotation layers and cx ladders",
            {"layers": "depth"},
        ),
    ]
}


"""Every family by command-line name."""


MAX_GATES = 10_000_000
"""Most gates a family may be asked to build (the operation cap of
:func:`tnsim.circuits.qasm.read_qasm`, so what ``tnsim gen`` writes can be read back)."""


_GATE_BOUNDS: dict[str, Callable[[dict], int]] = {  # upper bounds of each family's gate count
    "grid": lambda v: 2 * v["rows"] * v["cols"] * (v["depth"] + 1),
    "brickwork": lambda v: 2 * v["n"] * v["depth"],
    "qaoa": lambda v: v["n"] * (v["degree"] + 2) * (v["depth"] + 1),
    "iqp": lambda v: v["n"] * v["n"] + 3 * v["n"],
    "ising": lambda v: 3 * v["rows"] * v["cols"] * (v["depth"] + 1),
    "ghz": lambda v: v["n"],
    "qft": lambda v: v["n"] * v["n"],
    "hardware-efficient": lambda v: 3 * v["n"] * (v["depth"] + 1),
}


def _convert(family: Family, param: Param, value) -> int | float | str:
    if not isinstance(value, str):
        return value
    try:
        if param.kind is not str and not (value.isascii() and len(value.strip()) <= 24):
            raise ValueError(value)  # digits 0-9 only, and no 4,000-digit sizes
        return param.kind(value)
    except ValueError:
        kind = "an integer" if param.kind is int else "a number"
        shown = repr(value) if len(value) <= 40 else repr(value[:40]) + "..."
        raise InputError(
            f"family '{family.name}': parameter {param.name}={shown} is not {kind}"
        ) from None


def make_family(name: str, **params) -> Circuit:
    """Build a circuit of the named family; unset parameters take their defaults.

    String values are converted to the parameter's type (for the command line).
    Former parameter names (:attr:`Family.aliases`) are accepted with a
    ``FutureWarning``.

    Raises
    ------
    InputError
        Unknown family or parameter, a value of the wrong type, or sizes that
        would build more than :data:`MAX_GATES` gates.

    Examples
    --------
    >>> make_family("ghz", n="5").num_qubits
    5
    """
    values = family_values(name, **params)
    return FAMILIES[name].build(**values)


def family_values(name: str, **params) -> dict:
    """Check a family's parameters without building it; return every value, converted.

    Does all that :func:`make_family` checks (names, types, size), so a sweep can
    refuse an oversized instance before building anything.

    Examples
    --------
    >>> family_values("brickwork", n="8", depth=2)
    {'n': 8, 'depth': 2, 'seed': 0}
    """
    family = FAMILIES.get(name)
    if family is None:
        raise InputError(f"unknown family {name!r}; known families: {', '.join(FAMILIES)}")
    params = dict(params)
    known = {p.name: p for p in family.params}
    for old, new in family.aliases.items():
        if old in params:
            if new in params:
                raise InputError(f"family '{name}': give {new} or its old name {old}, not both")
            warnings.warn(
                f"family '{name}': parameter {old} is now called {new}; the old name will be "
                "removed in the next release",
                FutureWarning,
                stacklevel=3,
            )
            params[new] = params.pop(old)
    unknown = sorted(set(params) - set(known))
    if unknown:
        raise InputError(
            f"family '{name}' has no parameter {unknown[0]!r}; its parameters: {', '.join(known)}"
        )
    values = {p.name: _convert(family, p, params.get(p.name, p.default)) for p in family.params}
    _check_size(family, values)
    return values


def _check_size(family: Family, values: dict) -> None:
    """Refuse a family instance whose gate count would exceed :data:`MAX_GATES`."""
    bound_of = _GATE_BOUNDS.get(family.name)
    if bound_of is None:
        return
    numbers = {k: v for k, v in values.items() if isinstance(v, int) and not isinstance(v, bool)}
    if any(v < 0 for v in numbers.values()):
        return  # the builder names the bad value
    bound = bound_of(values)
    if bound > MAX_GATES:
        sizes = ", ".join(f"{k}={v:,}" for k, v in numbers.items() if k != "seed")
        raise InputError(
            f"family '{family.name}' with {sizes} would have up to {bound:.3g} gates, more than "
            f"{MAX_GATES:,}; choose smaller sizes"
        )
