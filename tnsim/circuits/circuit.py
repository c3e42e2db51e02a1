"""The circuit model: an ordered list of operations on numbered qubits."""

from __future__ import annotations

import math
import numbers
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, cast

import numpy as np

from tnsim.circuits.gates import GATES, gate_matrix, is_unitary
from tnsim.circuits.parameters import AngleExpr, as_angle
from tnsim.errors import InputError
from tnsim.validate import integer, quote, real_number, sequence

__all__ = ["MAX_QUBITS", "Circuit", "Operation"]

#: The most qubits a circuit may have: every query needs at least one small tensor
#: (hundreds of bytes) per qubit, so beyond this no machine can answer any query.
MAX_QUBITS = 2**31 - 1

#: The most qubits of one custom unitary (a ``2**k`` square matrix).
MAX_UNITARY_QUBITS = 12


@dataclass(frozen=True)
class Operation:
    """One gate applied to qubits.

    Attributes
    ----------
    name : str
        Gate name (a key of :data:`tnsim.circuits.gates.GATES`), or any label for a
        custom unitary.
    qubits : tuple of int
        The qubits it acts on; the first is the most significant bit of the matrix.
    params : tuple of float or AngleExpr
        Real parameters of a named gate: numbers, or affine expressions of
        named angles (:mod:`tnsim.circuits.parameters`) until the circuit is bound.
    custom : numpy.ndarray or None
        The matrix of a custom unitary (``None`` for named gates).
    """

    name: str
    qubits: tuple[int, ...]
    params: tuple[float | AngleExpr, ...] = ()
    custom: np.ndarray | None = field(default=None, compare=False, repr=False)

    def matrix(self) -> np.ndarray:
        """Return the operation's unitary matrix (complex128).

        Raises
        ------
        InputError
            If a parameter is still a named angle (bind the circuit first).
        """
        if self.custom is not None:
            return self.custom
        if self.symbolic:
            free = ", ".join(str(p) for p in self.params if isinstance(p, AngleExpr))
            raise InputError(
                f"gate '{self.name}' on qubits {self.qubits} has the unbound angle(s) {free}; "
                "give numbers with circuit.bind({name: value, ...})"
            )
        return gate_matrix(self.name, cast("tuple[float, ...]", self.params))

    @property
    def symbolic(self) -> bool:
        """Whether a parameter is a named angle (an :class:`AngleExpr`)."""
        return any(isinstance(p, AngleExpr) for p in self.params)

    def bound(self, values: Mapping[str, float]) -> Operation:
        """Return the operation with every named angle replaced by its value in ``values``."""
        if not self.symbolic:
            return self
        params = tuple(p.value(values) if isinstance(p, AngleExpr) else p for p in self.params)
        return Operation(self.name, self.qubits, params, self.custom)

    @property
    def diagonal(self) -> bool:
        """Whether the matrix is diagonal."""
        if self.custom is not None:
            return bool(np.count_nonzero(self.custom - np.diag(np.diag(self.custom))) == 0)
        return GATES[self.name].diagonal


def _builder(name: str) -> Callable[..., Circuit]:
    spec = GATES[name]

    def method(self: Circuit, *args: Any) -> Circuit:
        if len(args) != spec.num_qubits + spec.num_params:
            raise InputError(
                f"{name} takes {spec.num_params} parameter(s) then {spec.num_qubits} "
                f"qubit(s), got {len(args)} argument(s)"
            )
        params, qubits = args[: spec.num_params], args[spec.num_params :]
        return self.append(name, qubits, params)

    method.__name__ = name
    params = "".join(f"p{i}, " for i in range(spec.num_params))
    qubits = ", ".join(f"q{i}" for i in range(spec.num_qubits))
    method.__doc__ = f"Append ``{name}``: call as ``circuit.{name}({params}{qubits})``." + (
        "  Angles may be numbers or named angles (text or AngleExpr)." if params else ""
    )
    return method


class Circuit:
    """An ordered list of gates on ``num_qubits`` qubits, all starting in ``|0>``.

    Every gate of :data:`tnsim.circuits.gates.GATES` has a builder method taking the
    gate's parameters first, then its qubits; builders return the circuit so
    calls chain.  A parameter may be a number or a named angle: a name or an
    affine expression of names (``"theta"``, ``"2*gamma1"``, ``"-0.5*beta + 0.1"``,
    see :mod:`tnsim.circuits.parameters`); :meth:`bind` gives the numeric circuit.

    Parameters
    ----------
    num_qubits : int
        Number of qubits (at least 1).

    Examples
    --------
    >>> c = Circuit(3).h(0).cx(0, 1).cx(1, 2)
    >>> len(c), c.num_qubits
    (3, 3)
    >>> c.rz(0.5, 2).ops[-1]
    Operation(name='rz', qubits=(2,), params=(0.5,))
    >>> v = Circuit(2).rx("theta", 0).rzz("2*gamma", 0, 1)
    >>> v.parameters()
    ('gamma', 'theta')
    >>> v.bind({"theta": 0.1, "gamma": 0.2}).ops[1]
    Operation(name='rzz', qubits=(0, 1), params=(0.4,))
    """

    def __init__(self, num_qubits: int):
        self.num_qubits: int = integer(num_qubits, "num_qubits", 1, MAX_QUBITS)
        self.ops: list[Operation] = []
        self.measurements: dict[int, int] = {}
        """Classical bit -> the qubit read into it (``measure`` statements), final values."""

    if TYPE_CHECKING:  # the gate builders, added below for every gate of GATES

        def __getattr__(self, name: str) -> Callable[..., Circuit]: ...

    def _check_qubits(self, name: str, qubits: Iterable[int], arity: int) -> tuple[int, ...]:
        qs = tuple(sequence(qubits, f"gate '{name}': the qubits"))
        if len(qs) != arity:
            raise InputError(f"gate '{name}' acts on {arity} qubit(s), got {len(qs)}: {quote(qs)}")
        for q in qs:
            if isinstance(q, (bool, np.bool_)) or not isinstance(q, numbers.Integral):
                raise InputError(f"gate '{name}': qubit index {quote(q)} is not an integer")
            if not 0 <= int(q) < self.num_qubits:
                raise InputError(
                    f"gate '{name}': qubit {quote(q)} is out of range for a "
                    f"{self.num_qubits}-qubit circuit (valid: 0..{self.num_qubits - 1})"
                )
        if len(set(qs)) != len(qs):
            raise InputError(f"gate '{name}' repeats a qubit: {qs}")
        return tuple(int(q) for q in qs)

    def append(self, name: str, qubits: Sequence[int], params: Sequence = ()) -> Circuit:
        """Append the named gate on ``qubits`` with ``params``; return ``self``.

        Each parameter is a finite real number or a named angle (an
        :class:`~tnsim.circuits.parameters.AngleExpr` or its text).

        Raises
        ------
        InputError
            Unknown gate, wrong qubit or parameter count, qubit out of range,
            or a parameter that is neither a finite real number nor an affine
            expression of names.
        """
        spec = GATES.get(name) if isinstance(name, str) else None
        if spec is None:
            raise InputError(f"unknown gate {quote(name)}; known gates: {', '.join(sorted(GATES))}")
        qs = self._check_qubits(name, qubits, spec.num_qubits)
        ps = sequence(params, f"gate '{name}': the parameters")
        if len(ps) != spec.num_params:
            raise InputError(f"gate '{name}' takes {spec.num_params} parameter(s), got {len(ps)}")
        values = []
        for p in ps:
            if isinstance(p, (str, AngleExpr)):
                try:
                    values.append(as_angle(p))
                except InputError as exc:
                    raise InputError(f"gate '{name}': {exc}") from None
            else:
                try:
                    values.append(real_number(p, "parameter"))
                except InputError:
                    raise InputError(
                        f"gate '{name}': parameter {quote(p)} is not a finite real number or a "
                        "named angle"
                    ) from None
        self.ops.append(Operation(name, qs, tuple(values)))
        return self

    def parameters(self) -> tuple[str, ...]:
        """The names of the circuit's named angles, sorted (empty for a numeric circuit)."""
        names: set[str] = set()
        for op in self.ops:
            for p in op.params:
                if isinstance(p, AngleExpr):
                    names.update(p.names)
        return tuple(sorted(names))

    def bind(self, values: Mapping[str, float]) -> Circuit:
        """Return the numeric circuit: every named angle evaluated at ``values``.

        Parameters
        ----------
        values : mapping of str to float
            A finite real value for every name of :meth:`parameters` (and no others).

        Raises
        ------
        InputError
            A missing or unknown name, or a value that is not a finite real number.

        Examples
        --------
        >>> c = Circuit(1).rx("2*t + 0.5", 0)
        >>> c.bind({"t": 0.25}).ops[0].params
        (1.0,)
        """
        if not isinstance(values, Mapping):
            raise InputError(f"bind takes a mapping of parameter names to numbers, got {values!r}")
        names = self.parameters()
        missing = [n for n in names if n not in values]
        unknown = sorted(set(values) - set(names))
        if missing or unknown:
            parts = [f"no value for {', '.join(missing)}"] if missing else []
            parts += [f"unknown name(s) {', '.join(unknown)}"] if unknown else []
            what = "; ".join(parts)
            raise InputError(
                f"bind: {what}; the circuit's parameters are: {', '.join(names) or 'none'}"
            )
        clean: dict[str, float] = {}
        for n in names:
            v = values[n]
            if isinstance(v, bool) or not isinstance(v, numbers.Real) or not math.isfinite(v):
                raise InputError(f"bind: value {v!r} of '{n}' is not a finite real number")
            clean[n] = float(v)
        c = self.copy()
        c.ops = [op.bound(clean) for op in self.ops]
        return c

    def unitary(self, matrix: np.ndarray, qubits: Sequence[int], name: str = "unitary") -> Circuit:
        """Append any k-qubit unitary; the first qubit is the matrix's most significant bit.

        Raises
        ------
        InputError
            If the matrix is not a ``2**k`` square unitary (to 1e-8).
        """
        qs = tuple(sequence(qubits, f"'{name}': the qubits"))
        if len(qs) > MAX_UNITARY_QUBITS:
            raise InputError(
                f"unitary on {len(qs)} qubits: at most {MAX_UNITARY_QUBITS} qubits per matrix"
            )
        try:
            m = np.array(matrix, dtype=complex)
        except (TypeError, ValueError, OverflowError):
            raise InputError(f"matrix for '{name}' is not an array of numbers") from None
        if not np.isfinite(m).all():
            raise InputError(f"matrix for '{name}' holds a value that is not finite")
        if m.ndim != 2 or m.shape != (2 ** len(qs), 2 ** len(qs)):
            raise InputError(
                f"unitary on {len(qs)} qubit(s) needs a {2 ** len(qs)}x{2 ** len(qs)} matrix, "
                f"got shape {m.shape}"
            )
        if not is_unitary(m):
            err = np.abs(m.conj().T @ m - np.eye(m.shape[0])).max()
            raise InputError(
                f"matrix for '{name}' on qubits {qs} is not unitary (max |U†U - I| = {err:.3g}); "
                "pass a unitary matrix"
            )
        qs = self._check_qubits(name, qs, len(qs))
        m.setflags(write=False)
        self.ops.append(Operation(name, qs, (), m))
        return self

    @classmethod
    def from_ops(cls, num_qubits: int, ops: Iterable) -> Circuit:
        """Build a circuit from plain operations.

        Parameters
        ----------
        num_qubits : int
            Number of qubits.
        ops : iterable
            Items are ``(name, qubits)`` or ``(name, qubits, params)`` tuples,
            mappings with keys ``name``, ``qubits`` and optionally ``params`` or
            ``matrix`` (a custom unitary), or :class:`Operation` objects.

        Examples
        --------
        >>> Circuit.from_ops(2, [("h", [0]), ("cx", [0, 1]), {"name": "rz", "qubits": [1],
        ...                      "params": [0.1]}]).ops[1].name
        'cx'
        """
        circuit = cls(num_qubits)
        for k, op in enumerate(sequence(ops, "ops")):
            circuit._add_plain(k, op)
        return circuit

    def _add_plain(self, k: int, op) -> None:
        if isinstance(op, Operation):
            if op.custom is not None:
                self.unitary(op.custom, op.qubits, op.name)
            else:
                self.append(op.name, op.qubits, op.params)
            return
        if isinstance(op, Mapping):
            name, qubits = op.get("name"), op.get("qubits")
            params, matrix = op.get("params", ()), op.get("matrix")
        elif isinstance(op, (tuple, list)) and len(op) in (2, 3):
            name, qubits, params, matrix = op[0], op[1], op[2] if len(op) == 3 else (), None
        else:
            raise InputError(f"operation {k}: expected (name, qubits[, params]), got {quote(op)}")
        if not isinstance(name, str) or qubits is None:
            raise InputError(f"operation {k}: needs a name and qubits, got {quote(op)}")
        targets: Sequence[Any] = (qubits,) if isinstance(qubits, numbers.Integral) else qubits
        try:
            if matrix is not None:
                self.unitary(matrix, targets, name)
            else:
                self.append(name.lower(), targets, params)
        except InputError as exc:
            raise InputError(f"operation {k}: {exc}") from None

    def measure(self, qubit: int, clbit: int) -> Circuit:
        """Record that ``qubit`` is read into classical bit ``clbit`` at the end; return ``self``.

        Measurements do not change the queries (every query is of the final
        state); they give the classical-bit order in which bitstrings may be
        read and written.  A later measurement into the same classical bit
        replaces an earlier one.

        Examples
        --------
        >>> Circuit(2).h(0).measure(0, 1).measure(1, 0).measurements
        {1: 0, 0: 1}
        """
        (q,) = self._check_qubits("measure", (qubit,), 1)
        if isinstance(clbit, bool) or not isinstance(clbit, numbers.Integral) or clbit < 0:
            raise InputError(f"measure: classical bit {quote(clbit)} is not a non-negative integer")
        self.measurements[int(clbit)] = q
        return self

    def copy(self) -> Circuit:
        """Return a shallow copy (operations are immutable)."""
        c = Circuit(self.num_qubits)
        c.ops = list(self.ops)
        c.measurements = dict(self.measurements)
        return c

    def depth(self) -> int:
        """Number of layers when each gate goes as early as its qubits allow."""
        level = [0] * self.num_qubits
        for op in self.ops:
            d = 1 + max(level[q] for q in op.qubits)
            for q in op.qubits:
                level[q] = d
        return max(level, default=0)

    def __len__(self) -> int:
        return len(self.ops)

    def __iter__(self) -> Iterator[Operation]:
        return iter(self.ops)

    def __repr__(self) -> str:
        return f"Circuit(num_qubits={self.num_qubits}, ops={len(self.ops)})"


for _name in GATES:
    setattr(Circuit, _name, _builder(_name))
del _name
