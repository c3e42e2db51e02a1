"""Noise models: which channels follow which gates, and how qubits are misread.

A :class:`NoiseModel` is a list of rules.  :meth:`NoiseModel.after_gates`
puts a channel after every gate it matches (by gate name, by qubit, or by
qubit pair); :meth:`NoiseModel.after_layers` puts a channel on qubits after
every layer of the circuit (the as-soon-as-possible layers of
:meth:`~tnsim.circuits.circuit.Circuit.depth`, idle and busy qubits alike);
:meth:`NoiseModel.readout` sets a qubit's confusion matrix.
:meth:`NoiseModel.apply` turns a circuit into a :class:`NoisyCircuit`: its
gates with the channels in between, in an order equal to the circuit's, and
the readout matrices.

A one-qubit channel after a multi-qubit gate acts on each of the gate's
(selected) qubits; a channel of as many qubits as the gate acts on the gate's
qubits in the gate's order; a rule never applies a channel to a gate of
another width.  Rules apply in the order they were given.

Readout: ``confusion[i][j]`` is the probability of reading ``i`` when the
qubit is in ``j`` (columns sum to 1), so reported probabilities are
``confusion @ true`` per qubit.

Examples
--------
>>> from tnsim.circuits.circuit import Circuit
>>> from tnsim.circuits.channels import depolarizing
>>> model = NoiseModel().after_gates(depolarizing(0.01), gates=["h"])
>>> model = model.after_gates(depolarizing(0.02, 2), gates=["cx"])
>>> noisy = model.apply(Circuit(2).h(0).cx(0, 1))
>>> [getattr(item, "name", None) or item.channel.name for item in noisy.items]
['h', 'depolarizing', 'cx', 'depolarizing2']
"""

from __future__ import annotations

import numbers
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np

from tnsim.circuits.channels import Channel
from tnsim.circuits.circuit import Circuit, Operation
from tnsim.circuits.gates import GATES
from tnsim.errors import InputError

__all__ = ["ChannelOp", "NoiseModel", "NoisyCircuit", "check_confusion"]


@dataclass(frozen=True)
class ChannelOp:
    """A channel applied to some qubits at one point of a circuit.

    Attributes
    ----------
    channel : Channel
        The channel.
    qubits : tuple of int
        Its qubits; the first is the most significant bit of its matrices.
    """

    channel: Channel
    qubits: tuple[int, ...]


@dataclass
class NoisyCircuit:
    """A circuit's gates with channels in between, and its readout errors.

    Attributes
    ----------
    num_qubits : int
        Width.
    items : list of Operation or ChannelOp
        Gates and channels, in an order equal to the circuit's.
    readout : dict of int to numpy.ndarray
        Confusion matrix of each qubit that has one (see the module notes).
    """

    num_qubits: int
    items: list[Operation | ChannelOp]
    readout: dict[int, np.ndarray] = field(default_factory=dict)

    @classmethod
    def ideal(cls, circuit: Circuit) -> NoisyCircuit:
        """The circuit without noise."""
        return cls(circuit.num_qubits, list(circuit.ops), {})

    def gates(self) -> list[Operation]:
        """The gates, in order (the ideal circuit)."""
        return [item for item in self.items if isinstance(item, Operation)]

    def channel_ops(self) -> list[ChannelOp]:
        """The channels, in order."""
        return [item for item in self.items if isinstance(item, ChannelOp)]

    def ideal_circuit(self) -> Circuit:
        """The ideal circuit: the gates without the channels."""
        c = Circuit(self.num_qubits)
        c.ops = self.gates()
        return c

    def confusion(self, qubit: int) -> np.ndarray:
        """Confusion matrix of ``qubit`` (the identity when it is read perfectly)."""
        m = self.readout.get(qubit)
        return np.eye(2) if m is None else m

    def __repr__(self) -> str:
        return (
            f"NoisyCircuit(num_qubits={self.num_qubits}, gates={len(self.gates())}, "
            f"channels={len(self.channel_ops())}, readout={len(self.readout)})"
        )


def check_confusion(matrix, what: str = "readout") -> np.ndarray:
    """A 2x2 confusion matrix as float64, checked: entries in [0, 1], columns summing to 1.

    Examples
    --------
    >>> check_confusion([[0.9, 0.2], [0.1, 0.8]]).tolist()
    [[0.9, 0.2], [0.1, 0.8]]
    >>> check_confusion([[0.9, 0.2], [0.2, 0.8]])  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    tnsim.errors.InputError: readout: column 0 of the confusion matrix sums to 1.1, not 1; ...
    """
    try:
        m = np.array(matrix, dtype=float)
    except (TypeError, ValueError):
        m = np.zeros(0)
    if m.shape != (2, 2) or not np.isfinite(m).all():
        raise InputError(
            f"{what}: a confusion matrix is 2x2 real numbers [[p(0|0), p(0|1)], [p(1|0), p(1|1)]], "
            f"got {matrix!r}"
        )
    if (m < 0).any() or (m > 1).any():
        raise InputError(f"{what}: confusion matrix entries must be probabilities in [0, 1]")
    for j in range(2):
        total = m[:, j].sum()
        if abs(total - 1) > 1e-10:
            raise InputError(
                f"{what}: column {j} of the confusion matrix sums to {total:.6g}, not 1; "
                f"column j holds the probabilities of reading 0 and 1 when the qubit is in {j}"
            )
    m.setflags(write=False)
    return m


def _qubit_groups(qubits, what: str) -> tuple[tuple[int, ...], ...] | None:
    """Rule qubits: ``None`` (all), or entries each one qubit or a group of qubits."""
    if qubits is None:
        return None
    if isinstance(qubits, (str, bytes)) or not isinstance(qubits, Iterable):
        raise InputError(f"{what}: qubits must be a list of qubits or qubit groups, got {qubits!r}")
    groups = []
    for entry in qubits:
        group = (entry,) if isinstance(entry, numbers.Integral) else entry
        if isinstance(group, (str, bytes)) or not isinstance(group, Iterable):
            raise InputError(f"{what}: {entry!r} is neither a qubit nor a list of qubits")
        group = tuple(group)
        for q in group:
            if isinstance(q, bool) or not isinstance(q, numbers.Integral) or q < 0:
                raise InputError(f"{what}: qubit {q!r} is not a non-negative integer")
        if not group or len(set(group)) != len(group):
            raise InputError(f"{what}: qubit group {list(group)} is empty or repeats a qubit")
        groups.append(tuple(int(q) for q in group))
    if not groups:
        raise InputError(f"{what}: the qubit list is empty (leave it out to mean every qubit)")
    return tuple(groups)


@dataclass(frozen=True)
class _GateRule:
    channel: Channel
    gates: frozenset[str] | None
    qubits: tuple[tuple[int, ...], ...] | None

    def targets(self, op: Operation) -> list[tuple[int, ...]]:
        """Where the channel goes after ``op`` (no entry: the rule does not match)."""
        if self.gates is not None and op.name not in self.gates:
            return []
        k, arity = self.channel.num_qubits, len(op.qubits)
        chosen = op.qubits
        if self.qubits is not None:
            on = set(op.qubits)
            if any(len(g) > 1 and set(g) == on for g in self.qubits):
                chosen = op.qubits
            else:
                singles = {g[0] for g in self.qubits if len(g) == 1}
                chosen = tuple(q for q in op.qubits if q in singles)
        if not chosen:
            return []
        if k == 1:
            return [(q,) for q in chosen]
        return [op.qubits] if k == arity else []


@dataclass(frozen=True)
class _LayerRule:
    channel: Channel
    qubits: tuple[tuple[int, ...], ...] | None

    def targets(self, n: int) -> list[tuple[int, ...]]:
        if self.qubits is None:
            return [(q,) for q in range(n)]
        if self.channel.num_qubits == 1:
            return [(q,) for g in self.qubits for q in g]
        return list(self.qubits)


def _check_channel(channel, what: str) -> Channel:
    if not isinstance(channel, Channel):
        raise InputError(f"{what}: expected a tnsim Channel, got {type(channel).__name__}")
    return channel


class NoiseModel:
    """Rules that put channels into circuits, and readout errors.

    Methods return the model, so calls chain.  See the module notes for how
    rules match gates.

    Examples
    --------
    >>> from tnsim.circuits.channels import amplitude_damping, bit_flip
    >>> model = (
    ...     NoiseModel()
    ...     .after_gates(bit_flip(0.01), qubits=[0])
    ...     .after_layers(amplitude_damping(0.001))
    ...     .readout([[0.97, 0.05], [0.03, 0.95]], qubits=[1])
    ... )
    >>> noisy = model.apply(Circuit(2).h(0).h(1))
    >>> len(noisy.channel_ops()), sorted(noisy.readout)
    (3, [1])
    """

    def __init__(self):
        self.gate_rules: list[_GateRule] = []
        self.layer_rules: list[_LayerRule] = []
        self.readout_all: np.ndarray | None = None
        self.readout_qubits: dict[int, np.ndarray] = {}

    def __repr__(self) -> str:
        return (
            f"NoiseModel(after_gates={len(self.gate_rules)}, after_layers={len(self.layer_rules)}, "
            f"readout={'all' if self.readout_all is not None else len(self.readout_qubits)})"
        )

    def after_gates(
        self,
        channel: Channel,
        *,
        gates: Iterable[str] | None = None,
        qubits: Iterable[int | Sequence[int]] | None = None,
    ) -> NoiseModel:
        """Put ``channel`` after every matching gate.

        Parameters
        ----------
        channel : Channel
            The channel.
        gates : iterable of str, optional
            Gate names (lower case, as in :data:`tnsim.circuits.gates.GATES`, or the
            label of a custom unitary); default: every gate.
        qubits : iterable, optional
            Entries are qubits (gates acting on one of them match, and a one-qubit
            channel goes on those qubits only) or groups of qubits (gates acting on
            exactly that group match); default: every qubit.

        Raises
        ------
        InputError
            A multi-qubit channel after named gates of another width, or bad qubits.
        """
        what = f"noise rule on {channel.name if isinstance(channel, Channel) else channel!r}"
        channel = _check_channel(channel, what)
        names = None
        if gates is not None:
            if isinstance(gates, str):
                gates = [gates]
            names = frozenset(str(g).lower() for g in gates)
            if not names:
                raise InputError(f"{what}: the gate list is empty (leave it out for every gate)")
            k = channel.num_qubits
            for g in sorted(names):
                spec = GATES.get(g)
                if k > 1 and spec is not None and spec.num_qubits != k:
                    raise InputError(
                        f"{what}: a {k}-qubit channel cannot follow the {spec.num_qubits}-qubit "
                        f"gate '{g}'; use a one-qubit channel or {k}-qubit gates"
                    )
        groups = _qubit_groups(qubits, what)
        k = channel.num_qubits
        if groups is not None and k > 1 and any(len(g) not in (1, k) for g in groups):
            raise InputError(f"{what}: qubit groups of a {k}-qubit channel must have {k} qubits")
        self.gate_rules.append(_GateRule(channel, names, groups))
        return self

    def after_layers(
        self, channel: Channel, *, qubits: Iterable[int | Sequence[int]] | None = None
    ) -> NoiseModel:
        """Put ``channel`` after every layer of the circuit, on every qubit or on ``qubits``.

        A multi-qubit channel needs ``qubits`` given as groups of its width.
        """
        what = f"layer noise {channel.name if isinstance(channel, Channel) else channel!r}"
        channel = _check_channel(channel, what)
        groups = _qubit_groups(qubits, what)
        k = channel.num_qubits
        if k > 1 and (groups is None or any(len(g) != k for g in groups)):
            raise InputError(
                f"{what}: a {k}-qubit channel after every layer needs qubits given as groups "
                f"of {k}, e.g. qubits=[[0, 1], [2, 3]]"
            )
        self.layer_rules.append(_LayerRule(channel, groups))
        return self

    def readout(self, confusion, *, qubits: Iterable[int] | None = None) -> NoiseModel:
        """Set the confusion matrix of ``qubits`` (default: every qubit without its own)."""
        m = check_confusion(confusion)
        if qubits is None:
            self.readout_all = m
            return self
        groups = _qubit_groups(qubits, "readout")
        for g in groups or ():
            if len(g) != 1:
                raise InputError(f"readout: give single qubits, got the group {list(g)}")
            self.readout_qubits[g[0]] = m
        return self

    def apply(self, circuit: Circuit) -> NoisyCircuit:
        """Return ``circuit`` with this model's channels and readout errors.

        Raises
        ------
        InputError
            If a rule names a qubit the circuit does not have.
        """
        if not isinstance(circuit, Circuit):
            raise InputError(f"expected a tnsim.Circuit, got {type(circuit).__name__}")
        n = circuit.num_qubits
        self._check_width(n)
        items: list[Operation | ChannelOp] = []
        layer_targets = [(r.channel, r.targets(n)) for r in self.layer_rules]
        ops, layers = _layered(circuit) if layer_targets else (circuit.ops, None)
        for k, op in enumerate(ops):
            items.append(op)
            for rule in self.gate_rules:
                items.extend(ChannelOp(rule.channel, t) for t in rule.targets(op))
            if layers is not None and (k + 1 == len(ops) or layers[k + 1] != layers[k]):
                for channel, targets in layer_targets:
                    items.extend(ChannelOp(channel, t) for t in targets)
        readout = {}
        if self.readout_all is not None:
            readout = dict.fromkeys(range(n), self.readout_all)
        readout.update(self.readout_qubits)
        readout = {q: m for q, m in readout.items() if not np.array_equal(m, np.eye(2))}
        return NoisyCircuit(n, items, readout)

    def _check_width(self, n: int) -> None:
        groups = [(f"noise rule {r.channel.name!r}", r.qubits) for r in self.gate_rules]
        groups += [(f"layer noise {r.channel.name!r}", r.qubits) for r in self.layer_rules]
        groups.append(("readout", tuple((q,) for q in self.readout_qubits)))
        for what, gs in groups:
            for g in gs or ():
                for q in g:
                    if q >= n:
                        raise InputError(
                            f"{what}: qubit {q} is outside the {n}-qubit circuit "
                            f"(valid: 0..{n - 1})"
                        )


def _layered(circuit: Circuit) -> tuple[list[Operation], list[int]]:
    """The gates sorted by as-soon-as-possible layer (stable), and each one's layer."""
    level = [0] * circuit.num_qubits
    tagged = []
    for op in circuit.ops:
        d = 1 + max(level[q] for q in op.qubits)
        for q in op.qubits:
            level[q] = d
        tagged.append(d)
    order = sorted(range(len(tagged)), key=tagged.__getitem__)
    return [circuit.ops[k] for k in order], [tagged[k] for k in order]
