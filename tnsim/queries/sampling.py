"""Exact samples of a circuit's output distribution by the chain rule of marginals.

The qubits are split into blocks ``B_1, B_2, ...`` in index order.  For block
``j`` with earlier qubits ``A`` (already sampled), the conditional
distribution ``p(x_B | x_A)`` comes from the backward light cone of ``A ∪ B``
(:mod:`tnsim.network.lightcone`): with ``D`` the other qubits of that cone,
``p(x_A, x_B) = sum over x_D of |<x_A x_B x_D| C_cone |0>|²``.  It is computed
from every amplitude of the cone at once (small cones), from amplitudes with
the legs of ``B ∪ D`` open per prefix (when ``B ∪ D`` is small), or from the
doubled network with ``B`` open and ``D`` summed, whichever has the fewest
estimated FLOPs within the memory limit.  Shots
that share ``x_A`` share the conditional distribution: the distinct
prefixes are one batch (:class:`tnsim.execution.batch.BatchContraction`), so the part of
the network that does not depend on ``x_A`` is contracted once per block.
Circuits of at most :data:`~tnsim.fitted.DIRECT_WIDTH` qubits skip the chain rule: every
amplitude is contracted once, with all output legs open.  ``method="gates"``
samples gate by gate from amplitudes instead (:mod:`tnsim.queries.gatewise`): no
doubled networks and no conditionals on growing prefixes; it is the default
(``method="auto"``) for circuits of more than :data:`~tnsim.fitted.DIRECT_WIDTH` qubits.
"""

from __future__ import annotations

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError, ResourceLimitError
from tnsim.execution.batch import BatchContraction, fitted_engine
from tnsim.execution.budget import fit_plan
from tnsim.execution.memory import available_memory
from tnsim.execution.options import DTypeLike, MemoryLimit, QueryOptions, resolve_options
from tnsim.execution.slices import execute
from tnsim.execution.steps import compile_tree, count_flops, largest_intermediate
from tnsim.fitted import AMPLITUDE_WIDTH, DIRECT_WIDTH
from tnsim.network.builders import amplitude_network, doubled_network
from tnsim.network.graph import TensorGraph
from tnsim.network.lightcone import CircuitIndex, canonical_cone, cone_circuit, index_circuit
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import Plan
from tnsim.queries.checks import check_circuit, check_positive
from tnsim.queries.gatewise import sample_by_gates
from tnsim.queries.marginals import all_probabilities
from tnsim.validate import integer, make_rng, quote

__all__ = ["sample", "sample_blocks"]


def sample_blocks(num_qubits: int, block: int) -> list[list[int]]:
    """Split ``0..num_qubits-1`` into consecutive blocks of at most ``block`` qubits.

    Examples
    --------
    >>> sample_blocks(5, 2)
    [[0, 1], [2, 3], [4]]
    """
    return [list(range(k, min(k + block, num_qubits))) for k in range(0, num_qubits, block)]


def _engine_cost(engine: BatchContraction, prefixes: int) -> tuple[int, int]:
    """(real FLOPs for all prefixes, largest intermediate in elements) of a batched engine."""
    fixed, per_run = engine.flops()
    runs = -(-prefixes // engine.chunk)
    return fixed + per_run * runs, largest_intermediate(engine.steps)


def _planned(network: TensorGraph, opts: QueryOptions) -> tuple[int, int, tuple[TensorGraph, Plan]]:
    """Simplify and plan a network; return (cost, peak elements, runner)."""
    small = absorb_small(network)
    plan = fit_plan(small, opts)
    steps = compile_tree(plan.tree, plan.sliced)
    cost = count_flops(steps) << len(plan.sliced)
    return cost, largest_intermediate(steps), (small, plan)


def _batched(
    network: TensorGraph, a: int, prefixes: int, chunk: int, opts: QueryOptions
) -> tuple[int, int, BatchContraction]:
    """A batch engine over the first ``a`` output legs, its chunk shrunk to fit the limit."""
    out = network.output
    engine = fitted_engine(network, out[:a], out[a:], min(chunk, prefixes), opts)
    return (*_engine_cost(engine, prefixes), engine)


def _candidates(local: Circuit, a: int, b: int, dtype: np.dtype) -> list[tuple[str, TensorGraph]]:
    """Ways to get ``p(x_B | x_A)``: ``(kind, network)`` pairs.

    ``"all"``: every amplitude of the cone, once (small cones); ``"amp"``:
    amplitudes with ``B ∪ D`` open per prefix; ``"dbl"``: the doubled network with
    ``B`` open and ``D`` summed, per prefix.
    """
    m = local.num_qubits
    everything = list(range(m))
    out = []
    if m <= AMPLITUDE_WIDTH:
        out.append(("all", amplitude_network(local, None, open_qubits=everything, dtype=dtype)))
    elif a and m - a <= AMPLITUDE_WIDTH:
        out.append(("amp", amplitude_network(local, None, open_qubits=everything, dtype=dtype)))
    out.append(("dbl", doubled_network(local, open_qubits=range(a + b), dtype=dtype)))
    return out


def _conditional(
    index: CircuitIndex,
    prior: list[int],
    block: list[int],
    prefixes: np.ndarray,
    chunk: int,
    opts: QueryOptions,
) -> np.ndarray:
    """``p(x_block | x_prior)`` for each row of ``prefixes``: shape ``(rows, 2**len(block))``.

    Of the networks that give it (:func:`_candidates`), the one with the fewest
    estimated FLOPs whose largest intermediate fits ``opts.memory_limit`` is contracted.
    """
    targets = [(q, "P") for q in prior + block]
    _, gates, qubits = canonical_cone(index, targets)
    local = cone_circuit(index, gates, len(qubits))
    a, b = len(prior), len(block)
    limit = opts.memory_limit
    itemsize = opts.dtype.itemsize
    best: tuple[int, str, tuple[TensorGraph, Plan] | BatchContraction] | None = None
    runner: tuple[TensorGraph, Plan] | BatchContraction
    for kind, network in _candidates(local, a, b, opts.dtype):
        if kind == "all" or a == 0:
            cost, peak, runner = _planned(network, opts)
        else:
            cost, peak, runner = _batched(network, a, len(prefixes), chunk, opts)
        if peak * itemsize * 3 <= limit and (best is None or cost < best[0]):
            best = (cost, kind, runner)
    if best is None:
        raise ResourceLimitError(
            f"sampling qubits {block[0]}..{block[-1]}: every network for the conditional "
            f"distribution needs intermediates over the memory limit of {limit} bytes; "
            "use a smaller --block or raise the limit"
        )
    _, kind, runner = best
    if not isinstance(runner, BatchContraction):  # kind "all", or no prefix yet
        small, plan = runner
        values = execute(small, plan.tree, plan.sliced, memory_limit=limit).value()
        if kind == "dbl":
            table = np.clip(values.real.reshape(1, -1), 0.0, None)
        else:
            probs = (np.abs(values) ** 2).reshape(1 << a, 1 << b, -1).sum(axis=2)
            weights = 1 << np.arange(a - 1, -1, -1)
            table = probs[prefixes.astype(np.int64) @ weights if a else np.zeros(1, np.int64)]
    else:
        parts = []
        for start in range(0, len(prefixes), runner.chunk):
            part = runner.run(prefixes[start : start + runner.chunk])
            parts.append(np.asarray(part.mantissa, dtype=np.complex128))
        table = np.concatenate([v.reshape(len(v), -1) for v in parts])
        if kind == "amp":
            table = (np.abs(table) ** 2).reshape(len(table), 1 << b, -1).sum(axis=2)
        else:
            table = np.clip(table.real, 0.0, None)
    totals = table.sum(axis=1, keepdims=True)
    if np.any(totals <= 0):
        raise ArithmeticError("a sampled prefix has zero probability (numerical underflow)")
    return table / totals


def _sample_from_all(
    circuit: Circuit, shots: int, rng: np.random.Generator, opts: QueryOptions
) -> np.ndarray:
    """Narrow circuits: contract every amplitude once (all output legs open) and draw from them."""
    n = circuit.num_qubits
    probs = all_probabilities(circuit, opts)
    cum = np.cumsum(probs / probs.sum())
    cum[-1] = 1.0
    index = np.searchsorted(cum, rng.random(shots), side="right")
    shifts = np.arange(n - 1, -1, -1)
    return ((index[:, None] >> shifts) & 1).astype(np.uint8)


#: Bytes each shot needs while sampling, besides its bits: random numbers, indices, groups.
SHOT_BYTES = 64


def _check_shots(shots: int, num_qubits: int) -> None:
    """Refuse, before allocating, shots whose bits and bookkeeping exceed the memory available.

    (The memory limit is for the contractions' intermediates; the samples are the output.)
    """
    have = available_memory()
    need = shots * (num_qubits + SHOT_BYTES)
    if need > have:
        raise ResourceLimitError(
            f"{shots} shots of {num_qubits} qubits need about {need:.3g} bytes, more than the "
            f"{have:.3g} bytes available; draw at most {have // (num_qubits + SHOT_BYTES)} "
            "shots at a time (with a different seed each time)"
        )


def sample(
    circuit: Circuit,
    shots: int,
    *,
    seed: int | np.random.Generator | None = 0,
    block: int = 5,
    dtype: DTypeLike | None = None,
    chunk: int = 64,
    memory_limit: MemoryLimit | None = None,
    method: str = "auto",
) -> np.ndarray:
    """Draw exact samples from ``p(x) = |<x|C|0...0>|²``.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    shots : int
        Number of samples.
    seed : int or numpy.random.Generator or None
        Source of randomness (same seed, same samples); any integer, negative
        ones included; ``None`` draws fresh entropy from the system.
    block : int
        Qubits sampled together per chain-rule step (``2**block`` outcomes).
    dtype : numpy dtype, optional
        Contraction dtype: complex128 or complex64; default the enclosing
        ``run_options`` block's, else complex128.
    chunk : int
        Distinct prefixes contracted together.
    memory_limit : int or str, optional
        Bytes, or text such as ``"4GiB"``, for live intermediates; default the
        enclosing ``run_options`` block's, else half of the available memory.
    method : {"auto", "gates", "marginals"}
        ``"gates"``: gate by gate from amplitudes (:mod:`tnsim.queries.gatewise`;
        ``block`` is not used); ``"marginals"``: the chain rule over light
        cones; ``"auto"`` (default): circuits of at most :data:`~tnsim.fitted.DIRECT_WIDTH`
        qubits from all their amplitudes at once, wider ones gate by gate.
        Measured side by side (``benchmarks/queries.py --only routes,sampling``),
        gate by gate was 3-77x faster on brickwork, IQP and QAOA circuits of
        24-100 qubits and ~2,000x per sample on a 7×7 grid of 8 cycles, and
        slower by under 0.2 s on a 60-qubit GHZ and a 30-qubit
        hardware-efficient circuit.

    Returns
    -------
    numpy.ndarray
        ``(shots, num_qubits)`` ``uint8``; column ``i`` is qubit ``i``.

    Examples
    --------
    >>> c = Circuit(3).h(0).cx(0, 1).cx(1, 2)
    >>> s = sample(c, 200, seed=1)
    >>> sorted({"".join(map(str, row)) for row in s})
    ['000', '111']
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    shots = integer(shots, "shots", 0)
    block = integer(block, "block", 1, 16)
    chunk = check_positive(chunk, "chunk")
    if method not in ("auto", "gates", "marginals"):
        raise InputError(f"method must be 'auto', 'gates' or 'marginals', got {quote(method)}")
    _check_shots(shots, circuit.num_qubits)
    rng = make_rng(seed)
    n = circuit.num_qubits
    if shots == 0:
        return np.zeros((0, n), dtype=np.uint8)
    if method == "gates" or (method == "auto" and n > DIRECT_WIDTH):
        return sample_by_gates(circuit, shots, rng, opts)
    if n <= DIRECT_WIDTH:
        return _sample_from_all(circuit, shots, rng, opts)
    out = np.zeros((shots, n), dtype=np.uint8)
    index = index_circuit(circuit)
    prior: list[int] = []
    for qs in sample_blocks(n, int(block)):
        if prior:
            prefixes, group = np.unique(out[:, prior], axis=0, return_inverse=True)
            group = group.reshape(-1)
        else:
            prefixes, group = np.zeros((1, 0), np.uint8), np.zeros(shots, np.intp)
        table = _conditional(index, prior, qs, prefixes, chunk, opts)
        cum = np.cumsum(table, axis=1)
        cum[:, -1] = 1.0
        u = rng.random(shots)
        outcome = (u[:, None] >= cum[group]).sum(axis=1)
        shifts = np.arange(len(qs) - 1, -1, -1)
        out[:, qs] = (outcome[:, None] >> shifts) & 1
        prior += qs
    return out
