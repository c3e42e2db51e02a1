"""Samples of a noisy circuit's output: exact, or by quantum trajectories.

**Exact** (``method="exact"`` or ``"marginals"``): narrow circuits (at most
:data:`DIRECT_WIDTH` qubits) draw from all ``2**n`` outcome probabilities of
the noisy doubled network; wider ones use the chain rule of noisy marginals,
block by block: ``p(x_B | x_A)`` from the light cone of ``A ∪ B`` with the
legs of ``A`` fixed per distinct prefix (a batch axis) and those of ``B`` open.

**Trajectories** (``method="trajectories"``, the default for wide circuits):
each channel whose Kraus operators are all ``sqrt(p_j) U_j`` (Pauli channels,
depolarizing, bit and phase flips, phase damping) applies ``U_j`` with
probability ``p_j`` whatever the state, so each shot draws one ``j`` per such
channel: a *trajectory*, a unitary circuit.  Any other channel (amplitude
damping, thermal relaxation, general Kraus operators) is replaced by its
Stinespring dilation: a unitary ``V`` on its qubits and fresh ancilla qubits
in ``|0>`` with ``V|ψ>|0> = Σ_j K_j|ψ>|j>``; sampling the ancillas with the
rest draws ``K_j`` with its state-dependent probability ``||K_j ψ||²``
(Nielsen and Chuang, §8.2.3, from memory), and their bits are dropped.  Shots
that drew the same trajectory are sampled together, exactly, by the
gate-by-gate sampler (:mod:`tnsim.queries.gatewise`); the number of distinct
trajectories is reported.  The samples are exact draws of the noisy
distribution, independent across shots.

Readout errors (``readout=True``) flip each sampled bit with the qubit's
confusion matrix.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.channels import Channel, channel_from_superoperator
from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.noise import ChannelOp, NoiseModel, NoisyCircuit
from tnsim.errors import InputError, ResourceLimitError
from tnsim.execution.batch import fitted_engine
from tnsim.execution.options import DTypeLike, MemoryLimit, QueryOptions, resolve_options
from tnsim.network.noisy import canonical_noisy_cone, index_noisy, noisy_cone, noisy_doubled_network
from tnsim.queries.gatewise import sample_by_gates
from tnsim.queries.noisy import _cone_table, as_noisy
from tnsim.queries.sampling import sample_blocks

__all__ = ["DIRECT_WIDTH", "NoisySamples", "dilation", "noisy_sample"]

DIRECT_WIDTH = 20
"""Circuits of at most this many qubits are sampled exactly from all ``2**n`` probabilities."""

TABLE_WIDTH = 16
"""Chain-rule steps over at most this many qubits read every prefix from one table."""


@dataclass(frozen=True)
class NoisySamples:
    """Samples of a noisy circuit, and how they were drawn.

    Attributes
    ----------
    bits : numpy.ndarray
        ``(shots, num_qubits)`` ``uint8``; column ``i`` is qubit ``i``.
    method : str
        ``"distribution"`` (all probabilities), ``"marginals"`` (chain rule) or
        ``"trajectories"``.
    trajectories : int
        Distinct trajectories sampled (0 for the exact methods).
    ancillas : int
        Ancilla qubits of the dilated channels (trajectories only).
    """

    bits: np.ndarray
    method: str
    trajectories: int = 0
    ancillas: int = 0


def _read(bits: np.ndarray, noisy: NoisyCircuit, rng: np.random.Generator) -> np.ndarray:
    """Apply readout errors: bit ``y`` of qubit ``q`` is read 1 with probability ``C_q[1, y]``."""
    if not noisy.readout:
        return bits
    u = rng.random(bits.shape)
    out = bits.copy()
    for q, c in sorted(noisy.readout.items()):
        out[:, q] = (u[:, q] < c[1, bits[:, q]]).astype(np.uint8)
    return out


def _draw_rows(table: np.ndarray, rng: np.random.Generator, shots: int) -> np.ndarray:
    cum = np.cumsum(table / table.sum())
    cum[-1] = 1.0
    return np.searchsorted(cum, rng.random(shots), side="right")


def _exact_narrow(noisy, shots, rng, readout, opts: QueryOptions) -> np.ndarray:
    n = noisy.num_qubits
    index = index_noisy(noisy)
    _, items, qubits = canonical_noisy_cone(index, [(q, "P") for q in range(n)])
    table = _cone_table(noisy_cone(index, items, qubits), n, readout, opts)
    flat = _draw_rows(table, rng, shots)
    return ((flat[:, None] >> np.arange(n - 1, -1, -1)) & 1).astype(np.uint8)


def _conditional(index, prior, block, prefixes, readout, opts: QueryOptions) -> np.ndarray:
    """``p(x_block | x_prior)`` for each row of ``prefixes``: shape ``(rows, 2**len(block))``."""
    _, items, qubits = canonical_noisy_cone(index, [(q, "P") for q in prior + block])
    local = noisy_cone(index, items, qubits)
    a, b = len(prior), len(block)
    if a + b <= TABLE_WIDTH:
        table = _cone_table(local, a + b, readout, opts).reshape(1 << a, 1 << b)
        weights = 1 << np.arange(a - 1, -1, -1)
        rows = table[prefixes.astype(np.int64) @ weights if a else np.zeros(1, np.int64)]
    else:
        confusion = {q: local.readout[q] for q in range(a + b) if readout and q in local.readout}
        network = noisy_doubled_network(
            local, open_qubits=range(a + b), confusion=confusion, dtype=opts.dtype
        )
        out = network.output
        engine = fitted_engine(network, out[:a], out[a:], min(64, len(prefixes)), opts)
        parts = []
        for start in range(0, len(prefixes), engine.chunk):
            value = engine.run(prefixes[start : start + engine.chunk])
            parts.append(np.asarray(value.mantissa).real.reshape(-1, 1 << b))
        rows = np.clip(np.concatenate(parts), 0.0, None)
    totals = rows.sum(axis=1, keepdims=True)
    if np.any(totals <= 0):
        raise ArithmeticError("a sampled prefix has zero probability (numerical underflow)")
    return rows / totals


def _chain_rule(noisy, shots, rng, readout, block, opts: QueryOptions) -> np.ndarray:
    n = noisy.num_qubits
    index = index_noisy(noisy)
    out = np.zeros((shots, n), dtype=np.uint8)
    prior: list[int] = []
    for qs in sample_blocks(n, block):
        if prior:
            prefixes, group = np.unique(out[:, prior], axis=0, return_inverse=True)
            group = group.reshape(-1)
        else:
            prefixes, group = np.zeros((1, 0), np.uint8), np.zeros(shots, np.intp)
        table = _conditional(index, prior, qs, prefixes, readout, opts)
        cum = np.cumsum(table, axis=1)
        cum[:, -1] = 1.0
        outcome = (rng.random(shots)[:, None] >= cum[group]).sum(axis=1)
        out[:, qs] = (outcome[:, None] >> np.arange(len(qs) - 1, -1, -1)) & 1
        prior += qs
    return out


def dilation(channel: Channel) -> tuple[np.ndarray, int]:
    """A unitary ``V`` on the channel's qubits then ``a`` ancillas with ``V|ψ>|0> = Σ K_j|ψ>|j>``.

    Uses the fewest Kraus operators (the Choi rank).  Returns ``(V, a)``.

    Examples
    --------
    >>> from tnsim.circuits.channels import amplitude_damping
    >>> v, a = dilation(amplitude_damping(0.3))
    >>> v.shape, a, np.allclose(v.conj().T @ v, np.eye(4))
    ((4, 4), 1, True)
    """
    kraus = channel_from_superoperator(channel.superoperator()).kraus
    d = 1 << channel.num_qubits
    a = max(1, math.ceil(math.log2(len(kraus))))
    r = 1 << a
    iso = np.zeros((d * r, d), dtype=complex)
    for j, k in enumerate(kraus):
        iso[j::r] = k  # row s_out * r + j holds K_j[s_out, :]
    # The columns of iso are orthonormal (Σ K†K = I); the left singular vectors beyond
    # them span the rest of the space.
    complement = np.linalg.svd(iso, full_matrices=True)[0][:, d:]
    v = np.zeros((d * r, d * r), dtype=complex)
    v[:, 0::r] = iso  # input (s_in, ancillas 0)
    v[:, [c for c in range(d * r) if c % r]] = complement
    return v, a


def _trajectory_parts(noisy: NoisyCircuit):
    """Per channel item: ``("mix", probabilities, insertions)`` or ``("dilate", V, ancillas)``."""
    parts: dict[int, tuple] = {}
    for item in noisy.items:
        if isinstance(item, ChannelOp) and id(item.channel) not in parts:
            parts[id(item.channel)] = _part(item.channel)
    return parts


def _part(channel: Channel) -> tuple:
    d = 1 << channel.num_qubits
    probs: list[float] = []
    inserts: list[list[tuple[str, int]] | np.ndarray | None] = []
    for j, k in enumerate(channel.kraus):
        gram = k.conj().T @ k
        w = float(np.trace(gram).real) / d
        if not np.allclose(gram, w * np.eye(d), atol=1e-12):
            return ("dilate", *dilation(channel))
        if w <= 0:
            continue
        u = k / math.sqrt(w)
        probs.append(w)
        if np.allclose(u, u[0, 0] * np.eye(d), atol=1e-12):
            inserts.append(None)
        elif channel.paulis is not None:
            inserts.append([(letter.lower(), i) for i, letter in enumerate(channel.paulis[j])])
        else:
            inserts.append(u)
    return ("mix", np.array(probs) / sum(probs), inserts)


def _trajectory_circuit(noisy, parts, choice: np.ndarray, width: int) -> Circuit:
    """The unitary circuit of one trajectory (``choice``: one Kraus index per mixed channel)."""
    ops: list[Operation] = []
    n = noisy.num_qubits
    mixed = 0
    ancilla = n
    for item in noisy.items:
        if not isinstance(item, ChannelOp):
            ops.append(item)
            continue
        part = parts[id(item.channel)]
        if part[0] == "dilate":
            _, v, a = part
            qubits = (*item.qubits, *range(ancilla, ancilla + a))
            ops.append(Operation("dilation", qubits, (), v))
            ancilla += a
            continue
        insert = part[2][choice[mixed]]
        mixed += 1
        if insert is None:
            continue
        if isinstance(insert, list):
            ops.extend(
                Operation(letter, (item.qubits[i],)) for letter, i in insert if letter != "i"
            )
        else:
            ops.append(Operation("kraus", item.qubits, (), insert))
    c = Circuit(width)
    c.ops = ops
    return c


def _trajectories(noisy, shots, rng, opts: QueryOptions) -> tuple[np.ndarray, int, int]:
    parts = _trajectory_parts(noisy)
    channels = [item for item in noisy.items if isinstance(item, ChannelOp)]
    mixed = [parts[id(item.channel)] for item in channels if parts[id(item.channel)][0] == "mix"]
    ancillas = sum(parts[id(c.channel)][2] for c in channels if parts[id(c.channel)][0] != "mix")
    choices = np.zeros((shots, len(mixed)), dtype=np.int16)
    for j, (_, probs, _) in enumerate(mixed):
        if len(probs) > 1:
            cum = np.cumsum(probs)
            cum[-1] = 1.0
            choices[:, j] = np.searchsorted(cum, rng.random(shots), side="right")
    distinct, group = np.unique(choices, axis=0, return_inverse=True)
    group = group.reshape(-1)
    width = noisy.num_qubits + ancillas
    out = np.zeros((shots, noisy.num_qubits), dtype=np.uint8)
    for t, choice in enumerate(distinct):
        rows = np.flatnonzero(group == t)
        circuit = _trajectory_circuit(noisy, parts, choice, width)
        bits = sample_by_gates(circuit, len(rows), rng, opts)
        out[rows] = bits[:, : noisy.num_qubits]
    return out, len(distinct), ancillas


def noisy_sample(
    circuit: Circuit | NoisyCircuit,
    shots: int,
    *,
    noise: NoiseModel | None = None,
    seed: int | np.random.Generator | None = 0,
    method: str = "auto",
    readout: bool = True,
    block: int = 4,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> NoisySamples:
    """Draw samples of what a chip running the noisy circuit would read out.

    Parameters
    ----------
    circuit : Circuit or NoisyCircuit
        The circuit (with ``noise``) or a noisy circuit.
    shots : int
        Number of samples.
    noise : NoiseModel, optional
        Applied to ``circuit``.
    seed : int or numpy.random.Generator
        Source of randomness (same seed, same samples).
    method : {"auto", "exact", "marginals", "trajectories"}
        ``"exact"``: all probabilities up to :data:`DIRECT_WIDTH` qubits, the
        chain rule beyond; ``"marginals"``: the chain rule; ``"trajectories"``:
        see the module notes; ``"auto"``: ``"exact"`` up to :data:`DIRECT_WIDTH`
        qubits, ``"trajectories"`` beyond.
    readout : bool
        Apply readout errors to the sampled bits.
    block : int
        Qubits per chain-rule step.
    dtype, memory_limit : optional
        Contraction dtype and memory limit (default: the enclosing ``run_options``
        block's, else complex128 and half of the available memory).

    Returns
    -------
    NoisySamples

    Examples
    --------
    >>> from tnsim.circuits.channels import bit_flip
    >>> model = NoiseModel().after_gates(bit_flip(0.5), gates=["x"])
    >>> s = noisy_sample(Circuit(2).x(0).cx(0, 1), 400, noise=model, seed=3)
    >>> sorted({"".join(map(str, row)) for row in s.bits}), s.method
    (['00', '11'], 'distribution')
    >>> noisy_sample(Circuit(2).x(0).cx(0, 1), 400, noise=model, method="trajectories").trajectories
    2
    """
    noisy = as_noisy(circuit, noise)
    opts = resolve_options(memory_limit, dtype=dtype)
    if isinstance(shots, bool) or not isinstance(shots, numbers.Integral) or shots < 0:
        raise InputError(f"shots must be a non-negative integer, got {shots!r}")
    if isinstance(block, bool) or not isinstance(block, numbers.Integral) or not 1 <= block <= 16:
        raise InputError(f"block must be an integer from 1 to 16, got {block!r}")
    if method not in ("auto", "exact", "marginals", "trajectories"):
        raise InputError(
            f"method must be 'auto', 'exact', 'marginals' or 'trajectories', got {method!r}"
        )
    rng = np.random.default_rng(seed)
    n = noisy.num_qubits
    if method == "auto":
        method = "exact" if n <= DIRECT_WIDTH else "trajectories"
    if shots == 0:
        return NoisySamples(np.zeros((0, n), np.uint8), method)
    if method == "trajectories":
        bits, count, ancillas = _trajectories(noisy, int(shots), rng, opts)
        bits = _read(bits, noisy, rng) if readout else bits
        return NoisySamples(bits, "trajectories", count, ancillas)
    if method == "exact" and n <= DIRECT_WIDTH:
        bits = _exact_narrow(noisy, int(shots), rng, readout, opts)
        return NoisySamples(bits, "distribution")
    try:
        bits = _chain_rule(noisy, int(shots), rng, readout, int(block), opts)
    except MemoryError:
        raise ResourceLimitError(
            "exact noisy sampling by the chain rule ran out of memory; use "
            "method='trajectories' or a smaller block"
        ) from None
    return NoisySamples(bits, "marginals")
