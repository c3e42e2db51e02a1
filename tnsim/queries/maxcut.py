"""QAOA for MaxCut: the cut observable, the usual starting angles, depth-by-depth optimization.

:func:`optimize_maxcut` maximizes the expected cut of the QAOA state
(:func:`tnsim.circuits.qaoa.maxcut_ansatz`) depth by depth: depth 1 starts from
the linear ramp (:func:`linear_ramp`) and seeded random angles; each further
depth starts from the previous depth's best angles interpolated to one more
layer (:func:`interpolate_angles`) and seeded random angles.  Angles follow
tnsim's convention (``rzz(2γ)``, ``rx(2β)``, see :mod:`tnsim.circuits.qaoa`).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import networkx as nx

from tnsim.circuits.qaoa import maxcut_ansatz, qaoa_names
from tnsim.errors import InputError
from tnsim.execution.options import DTypeLike, MemoryLimit
from tnsim.queries.landscape import EnergyLandscape
from tnsim.queries.observables import Observable, PauliTerm
from tnsim.queries.optimize import AngleOptimum, optimize_angles

__all__ = [
    "RAMP_STEP",
    "MaxCutOptimum",
    "canonical_angles",
    "interpolate_angles",
    "linear_ramp",
    "maxcut_observable",
    "optimize_maxcut",
]

RAMP_STEP = 0.75


"""Time step ``Δt`` of the linear ramp in the standard convention (about 0.75 gives good
angles for MaxCut on regular graphs; Sack and Serbyn, "Quantum annealing initialization of
the quantum approximate optimization algorithm", Quantum 5, 491, 2021 -- from memory)."""


def maxcut_observable(graph: nx.Graph) -> Observable:
    """``C = Σ_(u,v) w_uv (1 - Z_u Z_v) / 2``, the cut weight, on a graph with nodes ``0..n-1``.

    Examples
    --------
    >>> print(maxcut_observable(nx.path_graph(3)))
    -0.5 Z0 Z1 - 0.5 Z1 Z2 + 1
    """
    terms, total = [], 0.0
    for u, v, d in graph.edges(data=True):
        w = float(d.get("weight", 1.0))
        total += w
        a, b = (u, v) if u < v else (v, u)
        terms.append(PauliTerm(-0.5 * w, ((a, "Z"), (b, "Z"))))
    terms.append(PauliTerm(0.5 * total, ()))
    return Observable(tuple(terms))


def linear_ramp(p: int, step: float = RAMP_STEP) -> tuple[list[float], list[float]]:
    """The linear-ramp angles of depth ``p``, in tnsim's convention.

    In the standard convention (``exp(-i γ' C)``, ``exp(-i β B)``) the ramp is
    ``γ'_k = (k + 1/2) Δt / p`` and ``β_k = (1 - (k + 1/2) / p) Δt``, a
    discretized annealing path (common practice; Zhou, Wang, Choi, Pichler, Lukin,
    "Quantum approximate optimization algorithm: performance, mechanism, and
    implementation on near-term devices", Phys. Rev. X 10, 021067, 2020 -- from
    memory).  tnsim's ``γ`` is ``-γ'/2``.

    Examples
    --------
    >>> linear_ramp(2, 1.0)
    ([-0.125, -0.375], [0.75, 0.25])
    """
    if isinstance(p, bool) or not isinstance(p, int) or p < 1:
        raise InputError(f"p must be an integer >= 1, got {p!r}")
    fractions = [(k + 0.5) / p for k in range(p)]
    return [-0.5 * f * step for f in fractions], [(1 - f) * step for f in fractions]


def interpolate_angles(gammas: list[float], betas: list[float]) -> tuple[list[float], list[float]]:
    """Depth ``p + 1`` starting angles from the best depth-``p`` ones (linear interpolation).

    ``x'_i = (i - 1)/p · x_(i-1) + (p - i + 1)/p · x_i`` for ``i = 1 .. p+1``, with
    ``x_0 = x_(p+1) = 0`` (the INTERP strategy of Zhou et al., Phys. Rev. X 10,
    021067, 2020 -- from memory); it keeps the shape of the angle schedule.

    Examples
    --------
    >>> interpolate_angles([1.0, 2.0], [4.0, 2.0])
    ([1.0, 1.5, 2.0], [4.0, 3.0, 2.0])
    """
    if len(gammas) != len(betas) or not gammas:
        raise InputError("give the same positive number of gammas and betas")

    def grow(x: list[float]) -> list[float]:
        p = len(x)
        padded = [0.0, *x, 0.0]
        return [(i - 1) / p * padded[i - 1] + (p - i + 1) / p * padded[i] for i in range(1, p + 2)]

    return grow(list(gammas)), grow(list(betas))


def _gamma_period(graph: nx.Graph) -> tuple[float | None, bool]:
    """The shift of ``γ_k`` that leaves the energy unchanged, and whether it flips later ``β``.

    With integer weights ``exp(-i π w Z Z)`` is a global phase, so ``π`` is a
    period.  A shift by ``π/2`` multiplies the state by ``Π_i Z_i^(d_i)`` (``d_i``
    the weighted degree of node ``i``): with every ``d_i`` even that is the
    identity; with every ``d_i`` odd it is ``Z⊗n``, which commutes with the cost
    and flips the sign of every later mixer angle (``Z⊗n e^{-iβX} = e^{iβX} Z⊗n``).
    """
    weights = [d.get("weight", 1.0) for _, _, d in graph.edges(data=True)]
    if not all(float(w).is_integer() for w in weights):
        return None, False
    parity = dict.fromkeys(graph.nodes(), 0)
    for u, v, d in graph.edges(data=True):
        w = int(d.get("weight", 1))
        parity[u] += w
        parity[v] += w
    odd = {x % 2 for x in parity.values()}
    if odd == {0}:
        return math.pi / 2, False
    if odd == {1}:
        return math.pi / 2, True
    return math.pi, False


def canonical_angles(
    graph: nx.Graph, gammas: list[float], betas: list[float]
) -> tuple[list[float], list[float]]:
    """The representative of QAOA angles that tnsim reports and interpolates from.

    Every change leaves the expected cut unchanged (common practice; derivations
    in :func:`_gamma_period`): each ``β_k`` is reduced into ``(-π/4, π/4]``
    (``Π X`` commutes with everything); each ``γ_k`` into half a period around 0
    where the graph's weights give one; then, if ``γ_0 > 0``, every angle
    changes sign (time reversal: the cost, the mixer and ``|+...+>`` are real).
    For an unweighted 3-regular graph the depth-1 optimum comes out as
    ``γ = -0.3078, β = 0.3927`` (``γ' = 0.6155``, ``β = π/8``).

    Examples
    --------
    >>> g = nx.random_regular_graph(3, 8, seed=1)
    >>> gammas, betas = canonical_angles(g, [1.2630], [-0.3927])
    >>> round(gammas[0], 4), round(betas[0], 4)
    (-0.3078, 0.3927)
    """
    gammas, betas = list(gammas), list(betas)
    period, flips = _gamma_period(graph)
    quarter = math.pi / 2
    for k in range(len(gammas)):
        if period is not None:
            shift = round(gammas[k] / period)
            gammas[k] -= shift * period
            if flips and shift % 2:
                betas[k:] = [-b for b in betas[k:]]
        betas[k] -= round(betas[k] / quarter) * quarter
    if gammas and gammas[0] > 0:
        gammas, betas = [-g for g in gammas], [-b for b in betas]
    return [g + 0.0 for g in gammas], [b + 0.0 for b in betas]


@dataclass(frozen=True)
class MaxCutOptimum:
    """The result of :func:`optimize_maxcut`.

    Attributes
    ----------
    p : int
        Depth of the final optimization.
    gammas, betas : list of float
        Its best angles (tnsim's convention; the representative of
        :func:`canonical_angles`).
    cut : float
        Expected cut weight of the QAOA state at those angles.
    cut_fraction : float
        ``cut`` divided by the total edge weight.
    nodes, edges : int
        Size of the graph.
    total_weight : float
        Sum of edge weights (the edge count for an unweighted graph).
    depths : tuple of AngleOptimum
        The optimization of each depth ``1 .. p``.
    seconds : float
        Wall time, building circuits and landscapes included.
    """

    p: int
    gammas: list[float]
    betas: list[float]
    cut: float
    cut_fraction: float
    nodes: int
    edges: int
    total_weight: float
    depths: tuple[AngleOptimum, ...]
    seconds: float

    @property
    def evaluations(self) -> int:
        """Energy evaluations over all depths and starts."""
        return sum(len(d.evaluations) for d in self.depths)


def _split(result: AngleOptimum, p: int) -> tuple[list[float], list[float]]:
    return (
        [result.values[f"gamma{k}"] for k in range(p)],
        [result.values[f"beta{k}"] for k in range(p)],
    )


def optimize_maxcut(
    graph: nx.Graph,
    p: int = 1,
    *,
    starts: int = 4,
    seed: int = 0,
    method: str = "L-BFGS-B",
    max_evaluations: int = 500,
    progress: bool | None = None,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> MaxCutOptimum:
    """Maximize the expected cut of the depth-``p`` QAOA state on ``graph``, depth by depth.

    Parameters
    ----------
    graph : networkx.Graph
        The graph (an edge's ``weight`` defaults to 1); nodes are relabelled
        ``0 .. n-1`` in sorted order.
    p : int
        Final depth.
    starts : int
        Starts per depth: the linear ramp (depth 1) or the interpolated
        previous best (deeper), then seeded random angles with ``γ`` in
        ``[-π/2, π/2)`` and ``β`` in ``[-π/4, π/4)`` (the periods of an
        unweighted graph's energy).
    seed : int
        Seed of the random starts (depth ``d`` uses ``seed + d - 1``).
    method, max_evaluations, progress, dtype, memory_limit
        As for :func:`tnsim.queries.optimize.optimize_angles`.

    Returns
    -------
    MaxCutOptimum

    Examples
    --------
    >>> best = optimize_maxcut(nx.cycle_graph(10), 1, starts=2, seed=1)
    >>> round(best.cut_fraction, 6)   # a ring: 3/4 at p = 1 (Farhi et al. 2014)
    0.75
    """
    t0 = time.perf_counter()
    if isinstance(p, bool) or not isinstance(p, int) or p < 1:
        raise InputError(f"p (QAOA layers) must be an integer >= 1, got {p!r}")
    depths: list[AngleOptimum] = []
    gammas, betas = linear_ramp(1)
    g = nx.Graph()
    for depth in range(1, p + 1):
        circuit, g = maxcut_ansatz(graph, depth)
        if depth > 1:
            gammas, betas = interpolate_angles(*canonical_angles(g, *_split(depths[-1], depth - 1)))
        names = qaoa_names(depth)
        box = {
            n: (-math.pi / 2, math.pi / 2) if n[0] == "g" else (-math.pi / 4, math.pi / 4)
            for n in names
        }
        landscape = EnergyLandscape(
            circuit, maxcut_observable(g), dtype=dtype, memory_limit=memory_limit
        )
        result = optimize_angles(
            landscape,
            starts=starts,
            seed=seed + depth - 1,
            initial=[dict(zip(names, gammas + betas))],
            method=method,
            maximize=True,
            box=box,
            max_evaluations=max_evaluations,
            progress=progress,
        )
        depths.append(result)
    gammas, betas = canonical_angles(g, *_split(depths[-1], p))
    total = float(sum(d.get("weight", 1.0) for _, _, d in g.edges(data=True)))
    cut = depths[-1].energy
    return MaxCutOptimum(
        p=p,
        gammas=gammas,
        betas=betas,
        cut=cut,
        cut_fraction=cut / total if total else 0.0,
        nodes=g.number_of_nodes(),
        edges=g.number_of_edges(),
        total_weight=total,
        depths=tuple(depths),
        seconds=time.perf_counter() - t0,
    )
