"""Exact samples by growing the circuit one gate at a time, from amplitudes only.

Gate-by-gate sampling (Bravyi, Gosset and Liu, "How to simulate quantum
measurement without computing marginals", Phys. Rev. Lett. 128, 220503, 2022;
cited from memory).  Group the circuit's gates into steps ``U_1 .. U_T``, step
``t`` acting on the qubits ``S_t``.  If ``x`` is an exact sample of
``|<x|U_{t-1} .. U_1|0>|²``, redrawing its bits on ``S_t`` from
``p(y) ∝ |<x with y on S_t| U_t .. U_1|0>|²`` gives an exact sample of the
circuit one step longer: ``U_t`` leaves the distribution of the other bits
unchanged.  After the last step ``x`` is an exact sample of the circuit.  Each
step needs ``2**|S_t|`` amplitudes per distinct current bitstring -- single
(not doubled) networks, no marginals.

Steps: each multi-qubit gate, with the single-qubit gates on its qubits since
their previous step (and, after a qubit's last multi-qubit gate, the rest of
that qubit's gates); a qubit without multi-qubit gates is one step.  Steps are
taken layer by layer (the as-soon-as-possible layer of their multi-qubit
gate).  The steps of one layer act on different qubits, so they share one
network shape: all layers up to that one, with the layer's steps not yet taken
as identities of the same shape (:func:`tnsim.network.identity_tensor`).  Each
layer is planned once; every step runs its distinct bitstrings (and their
``2**|S_t|`` variants) through :class:`tnsim.batch.BatchContraction`.  Qubits
that no step has reached yet are in ``|0>`` and are left out; a step of diagonal
gates only (no single-qubit gates attached) changes no outcome probability and
is taken without a redraw.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .batch import BatchContraction, fitted_engine
from .circuit import Circuit, Operation
from .memory import default_memory_limit
from .network import TensorNetwork, amplitude_network, gate_tensor, identity_tensor
from .plan.forecast import forecast_seconds, matmul_rate

__all__ = ["GateStep", "gate_steps", "sample_by_gates"]


@dataclass(frozen=True)
class GateStep:
    """Gates taken together: their qubits, the gates in order, and their layer."""

    qubits: tuple[int, ...]
    ops: tuple[Operation, ...]
    layer: int


def gate_steps(circuit: Circuit) -> list[GateStep]:
    """Group ``circuit``'s gates into steps, in the order they are taken.

    Examples
    --------
    >>> c = Circuit(3).h(0).cx(0, 1).x(2).cx(1, 2).h(1)
    >>> [(s.qubits, [op.name for op in s.ops], s.layer) for s in gate_steps(c)]
    [((0, 1), ['h', 'cx'], 0), ((1, 2), ['x', 'cx', 'h'], 1)]
    """
    n = circuit.num_qubits
    pending: list[list[Operation]] = [[] for _ in range(n)]
    depth = [0] * n
    last: list[int | None] = [None] * n
    groups: list[tuple[tuple[int, ...], list[Operation], int]] = []
    for op in circuit.ops:
        if len(op.qubits) == 1:
            pending[op.qubits[0]].append(op)
            continue
        before = [o for q in op.qubits for o in pending[q]]
        layer = max(depth[q] for q in op.qubits)
        for q in op.qubits:
            pending[q], depth[q], last[q] = [], layer + 1, len(groups)
        groups.append((tuple(op.qubits), [*before, op], layer))
    for q in range(n):
        if pending[q] and last[q] is None:
            groups.append(((q,), pending[q], 0))
        elif pending[q]:
            groups[last[q]][1].extend(pending[q])
    order = sorted(range(len(groups)), key=lambda k: (groups[k][2], k))
    return [GateStep(groups[k][0], tuple(groups[k][1]), groups[k][2]) for k in order]


def _layer_network(steps: Sequence[GateStep], taken: int, end: int, dtype) -> tuple:
    """Network of ``steps[:end]`` with ``steps[taken:end]`` as identities.

    Returns the network (output: every reached qubit's final wire, in the order
    of ``qubits``) and ``qubits``, the circuit qubits it holds.
    """
    qubits = sorted({q for s in steps[:end] for q in s.qubits})
    local = {q: k for k, q in enumerate(qubits)}
    ops, idle = [], []
    for k, s in enumerate(steps[:end]):
        for op in s.ops:
            ops.append(Operation(op.name, tuple(local[q] for q in op.qubits), op.params, op.custom))
            idle.append(k >= taken)
    m = len(qubits)
    grown = Circuit(m)
    grown.ops = ops
    net = amplitude_network(grown, None, open_qubits=range(m), dtype=dtype)
    # amplitude_network lays out the m input vectors, then one tensor per gate, in order.
    arrays = list(net.arrays)
    for k, (op, off) in enumerate(zip(ops, idle)):
        if off:
            arrays[m + k] = identity_tensor(op).astype(net.dtype)
    return TensorNetwork(arrays, net.indices, net.size, net.output, net.exponent, net.dtype), qubits


def _variants(rows: np.ndarray, cols: Sequence[int]) -> np.ndarray:
    """Each row repeated ``2**len(cols)`` times with ``cols`` set to 0..2**len(cols)-1."""
    s = len(cols)
    out = np.repeat(rows, 1 << s, axis=0)
    v = np.arange(len(out)) % (1 << s)
    for j, c in enumerate(cols):
        out[:, c] = (v >> (s - 1 - j)) & 1
    return out


def _step_probabilities(engine: BatchContraction, members: np.ndarray, s: int) -> np.ndarray:
    """``|amplitude|²`` of every member, normalised within each group of ``2**s``."""
    per = max(engine.chunk >> s, 1) << s
    probs = []
    for start in range(0, len(members), per):
        part = engine.run(members[start : start + per])
        amp = np.asarray(part.mantissa, dtype=np.complex128).reshape(-1, 1 << s)
        probs.append(amp.real**2 + amp.imag**2)
    table = np.concatenate(probs)
    totals = table.sum(axis=1, keepdims=True)
    if np.any(totals <= 0):
        raise ArithmeticError("a sampled bitstring has zero probability (numerical underflow)")
    return table / totals


def sample_by_gates(
    circuit: Circuit,
    shots: int,
    rng: np.random.Generator,
    *,
    dtype=np.complex128,
    chunk: int = 256,
    memory_limit: int | None = None,
) -> np.ndarray:
    """Draw ``shots`` exact samples of ``circuit`` gate step by gate step.

    The arguments are those of :func:`tnsim.sampling.sample` (which calls this
    with ``method="gates"``), with ``rng`` the generator; ``chunk`` is the
    number of amplitudes contracted together (whole groups of ``2**|S_t|``),
    shrunk to fit ``memory_limit``.  Returns ``(shots, num_qubits)`` ``uint8``.

    Examples
    --------
    >>> c = Circuit(3).h(0).cx(0, 1).cx(1, 2)
    >>> s = sample_by_gates(c, 100, np.random.default_rng(2))
    >>> sorted({"".join(map(str, row)) for row in s})
    ['000', '111']
    """
    out = np.zeros((shots, circuit.num_qubits), dtype=np.uint8)
    steps = gate_steps(circuit)
    limit = memory_limit or default_memory_limit()
    t = 0
    while t < len(steps):
        end = t
        while end < len(steps) and steps[end].layer == steps[t].layer:
            end += 1
        widest = 1 << max(len(steps[k].qubits) for k in range(t, end))
        plan, size = None, min(chunk, shots * widest)
        for taken in range(t + 1, end + 1):
            step = steps[taken - 1]
            if all(all(gate_tensor(op)[1]) for op in step.ops):
                continue  # diagonal gates do not change the distribution: nothing to redraw
            network, qubits = _layer_network(steps, taken, end, dtype)
            if plan is None:
                uses = shots * (end - taken + 1) * widest
                engine = _first_engine(network, size, widest, limit, uses)
            else:
                engine = BatchContraction(network, network.output, (), size, limit, plan=plan)
            plan, size = engine.plan, engine.chunk
            local = [qubits.index(q) for q in step.qubits]
            rows, group = np.unique(out[:, qubits], axis=0, return_inverse=True)
            table = _step_probabilities(engine, _variants(rows, local), len(local))
            cum = np.cumsum(table, axis=1)
            cum[:, -1] = 1.0
            y = (rng.random(shots)[:, None] >= cum[group.reshape(-1)]).sum(axis=1)
            for j, q in enumerate(step.qubits):
                out[:, q] = (y >> (len(local) - 1 - j)) & 1
        t = end
    return out


def _first_engine(network: TensorNetwork, size: int, least: int, limit: int, uses: int):
    """The batch engine of a layer's first step: it plans the layer and fits the chunk.

    The layer's plan serves about ``uses`` amplitudes: when the default plan's
    forecast for them (FLOPs and elements written, :func:`forecast_seconds`)
    is long, the planner searches again for up to :data:`PLAN_SHARE` of that
    forecast (at most :data:`MAX_PLAN_SECONDS`).
    The chunk shrinks (not below ``least``, one group of variants) to fit ``limit``.
    """
    first = BatchContraction(network, network.output, (), size, limit)
    fixed, per_run = first.flops()
    runs = uses / size
    rate = matmul_rate(np.complex128)
    seconds = PLAN_SHARE * forecast_seconds(
        fixed + per_run * runs, first.written_per_run() * runs, rate
    )
    budget = min(seconds, MAX_PLAN_SECONDS) if seconds > MIN_PLAN_SECONDS else None
    plan = first.plan if budget is None else None
    return fitted_engine(
        network, network.output, (), size, limit, least=least, plan=plan, time_budget=budget
    )


PLAN_SHARE = 0.05
"""Share of a layer's forecast contraction time spent searching for a better plan."""

MIN_PLAN_SECONDS = 0.5
"""A layer whose forecast share is below this keeps the planner's default plan."""

MAX_PLAN_SECONDS = 10.0
"""Longest search for one layer's plan."""
