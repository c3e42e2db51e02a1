"""The energy of a circuit with named angles, as a function of the angles' values.

:class:`EnergyLandscape` answers ``E(x) = <0|C(x)† H C(x)|0>`` and its gradient
for many values ``x`` of the circuit's named angles, the workload of a
variational optimization.  Everything that does not depend on ``x`` is done
once, when the landscape is built:

* Each Pauli string of ``H`` gets its light cone in canonical form
  (:func:`tnsim.network.lightcone.canonical_cone`) on the circuit *with named
  angles*: two terms share a key when their cones are the same circuit up to
  renaming qubits, with the same angle expressions at the same places -- so
  they share a value at every ``x``.  The terms are grouped into these classes
  once; an evaluation costs one contraction per class, not per term.
* Each class's doubled network is laid out once
  (:func:`tnsim.network.batched.doubled_layout`), planned once per batch shape
  and compiled once -- shared by every class of the same structure (the same
  cone with other angle names); an evaluation only computes gate tensors and
  runs the compiled steps.

The gradient uses the parameter-shift rule (:mod:`tnsim.circuits.shifts`) on
every use of every angle: each gate of a class's cone whose angle depends on a
name gets its shifted copies of the cone; all of them and the unshifted cone
form one batch, contracted together (one shared batch axis).  A term's cone
that lacks a gate has no shifted copy for it -- its derivative through that
gate is zero.  The chain rule through the affine angle expressions gives the
gradient with respect to the names.

Cones whose ``2**m`` amplitudes cost less than their planned doubled network
(deep and narrow, see :func:`tnsim.queries.marginals.deep_and_narrow`) are
evaluated as a batch of state vectors instead.
"""

from __future__ import annotations

import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.circuits.gates import GATES, gate_matrix
from tnsim.circuits.parameters import AngleExpr, probe_values
from tnsim.circuits.shifts import shift_rule
from tnsim.errors import InputError
from tnsim.execution.budget import fit_plan
from tnsim.execution.options import DTypeLike, MemoryLimit, QueryOptions, resolve_options
from tnsim.execution.slices import execute
from tnsim.execution.steps import PairStep, compile_tree
from tnsim.execution.treerun import contract_tree
from tnsim.network.batched import DoubledLayout, doubled_layout, reduce_gate
from tnsim.network.builders import doubled_network, gate_tensor
from tnsim.network.graph import TensorGraph
from tnsim.network.lightcone import canonical_cone, cone_circuit, index_circuit
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import Plan
from tnsim.plan.greedy import greedy_tree
from tnsim.queries.checks import check_circuit
from tnsim.queries.marginals import deep_and_narrow
from tnsim.queries.observables import Observable, parse_observable

__all__ = ["DIRECT_FLOPS", "EnergyLandscape", "values_vector"]

DIRECT_FLOPS = 1e10


"""Unsliced cone contractions up to this many FLOPs run on their precompiled steps in this
process; larger ones go through :func:`tnsim.execution.slices.execute` (slices, workers,
checkpoints, progress).  Below it the per-call cost of ``execute`` (compiling about 10 ms
per 100 steps) would dominate the small contractions of a variational loop."""


def values_vector(names: Sequence[str], values, what: str = "values") -> np.ndarray:
    """The values of ``names`` as a float array, from a mapping or a sequence in that order.

    Raises
    ------
    InputError
        A missing, unknown or non-finite value, or a sequence of the wrong length.

    Examples
    --------
    >>> values_vector(("a", "b"), {"b": 2, "a": 1}).tolist()
    [1.0, 2.0]
    """
    if isinstance(values, Mapping):
        missing = [n for n in names if n not in values]
        unknown = sorted(set(values) - set(names))
        if missing or unknown:
            raise InputError(
                f"{what}: "
                + (f"no value for {', '.join(missing)}" if missing else "")
                + ("; " if missing and unknown else "")
                + (f"unknown name(s) {', '.join(map(str, unknown))}" if unknown else "")
                + f"; the circuit's parameters are: {', '.join(names) or 'none'}"
            )
        seq = [values[n] for n in names]
    else:
        try:
            seq = list(values)
        except TypeError:
            raise InputError(f"{what}: give a mapping name -> value, got {values!r}") from None
        if len(seq) != len(names):
            raise InputError(
                f"{what}: {len(seq)} value(s) for {len(names)} parameter(s) "
                f"({', '.join(names) or 'none'})"
            )
    try:
        x = np.array(seq, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{what}: values must be real numbers, got {seq!r}") from None
    if x.ndim != 1 or not np.all(np.isfinite(x)):
        raise InputError(f"{what}: values must be finite real numbers, got {seq!r}")
    return x


_Program = int | tuple[Plan, list[PairStep] | None]
"""A batch shape's entry in the plan cache: a chunk size to split the batch into, or the
plan with its compiled steps (``None`` when it runs through ``execute``)."""


@dataclass
class _Slot:
    """One named angle of one gate of a cone: ``angle = coefficients · x + offset``."""

    op: int
    slot: int
    coefficients: np.ndarray
    offset: float


@dataclass
class _ConeClass:
    """Terms whose cones are the same circuit with the same angle expressions."""

    weight: float
    terms: int
    circuit: Circuit
    letters: dict[int, str]
    slots: list[_Slot]
    by_op: dict[int, list[int]]
    diagonal: list[tuple[bool, ...]]
    fixed: dict[int, np.ndarray]
    layout: DoubledLayout | None = None
    structure: tuple | None = None
    vector: bool | None = None


def _compile_slot(expr: AngleExpr, position: dict[str, int], n: int) -> tuple[np.ndarray, float]:
    coefficients = np.zeros(n)
    for name, coef in expr.terms:
        coefficients[position[name]] = coef
    return coefficients, expr.offset


class EnergyLandscape:
    """``E(x) = <0|C(x)† H C(x)|0>`` for a circuit with named angles, evaluated many times.

    Parameters
    ----------
    circuit : Circuit
        A circuit whose gate angles may be named angles (:meth:`Circuit.parameters`).
    observable : str or mapping or Observable
        The Pauli sum ``H`` (see :mod:`tnsim.queries.observables`).
    dtype : numpy dtype, optional
        Contraction dtype, complex128 or complex64 (default: the enclosing
        :func:`tnsim.run_options` block's, else complex128).
    memory_limit : int or str, optional
        Bytes (or text such as ``"4GiB"``) for live intermediates of one
        contraction (default: the block's, else half of the available memory).

    Attributes
    ----------
    names : tuple of str
        The parameters, in the order of the value vectors.
    num_terms, num_classes : int
        Pauli strings of ``H`` that need a contraction, and distinct cone classes among them.
    evaluations : int
        Calls of :meth:`energy` and :meth:`energy_and_gradient` so far.
    contractions : int
        Batched contractions run so far (one per class and evaluation, or
        more where a batch was split to fit the memory limit).
    cone_values : int
        Cone values computed so far (each shifted copy counts).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> c = Circuit(2).ry("theta", 0).cx(0, 1)
    >>> land = EnergyLandscape(c, "Z0 Z1 + Z0")
    >>> land.names
    ('theta',)
    >>> e, g = land.energy_and_gradient([0.3])
    >>> round(e, 12), round(float(g[0]), 12)  # 1 + cos θ, -sin θ
    (1.955336489126, -0.295520206661)
    """

    def __init__(
        self,
        circuit: Circuit,
        observable,
        *,
        dtype: DTypeLike | None = None,
        memory_limit: MemoryLimit | None = None,
    ):
        check_circuit(circuit, bound=False)
        self.circuit = circuit
        self.options: QueryOptions = resolve_options(memory_limit, dtype=dtype)
        self.dtype = self.options.dtype
        self.observable: Observable = parse_observable(observable, circuit.num_qubits)
        self.names: tuple[str, ...] = circuit.parameters()
        self._position = {n: k for k, n in enumerate(self.names)}
        self.constant = 0.0
        self.classes: list[_ConeClass] = []
        self.evaluations = 0
        self.contractions = 0
        self.cone_values = 0
        self.seconds_setup = 0.0
        self._rules_checked = False
        self._routes: dict[tuple, bool] = {}
        self._plans: dict[tuple, _Program] = {}
        t0 = time.perf_counter()
        self._group_terms()
        self.seconds_setup = time.perf_counter() - t0

    @property
    def num_classes(self) -> int:
        """Distinct cone classes."""
        return len(self.classes)

    @property
    def num_terms(self) -> int:
        """Pauli strings of the observable that need a contraction."""
        return sum(c.terms for c in self.classes)

    # -- building --------------------------------------------------------------------------
    def _group_terms(self) -> None:
        index = index_circuit(self.circuit)
        found: dict[tuple, _ConeClass] = {}
        for term in self.observable.terms:
            if not term.paulis:
                self.constant += term.coefficient
                continue
            key, gates, qubits = canonical_cone(index, term.paulis)
            cls = found.get(key)
            if cls is None:
                local = cone_circuit(index, gates, len(qubits))
                letters = {k: letter for k, (_, letter) in enumerate(term.paulis)}
                cls = found[key] = self._new_class(local, letters)
            cls.weight += term.coefficient
            cls.terms += 1
        self.classes = list(found.values())

    def _new_class(self, local: Circuit, letters: dict[int, str]) -> _ConeClass:
        slots: list[_Slot] = []
        by_op: dict[int, list[int]] = {}
        diagonal, fixed = [], {}
        n = len(self.names)
        for i, op in enumerate(local.ops):
            if op.symbolic:
                probes = [op.bound(probe_values(k)) for k in (1, 2)]
                diagonal.append(tuple(all(f) for f in zip(*(gate_tensor(p)[1] for p in probes))))
                for j, p in enumerate(op.params):
                    if isinstance(p, AngleExpr):
                        coefficients, offset = _compile_slot(p, self._position, n)
                        by_op.setdefault(i, []).append(len(slots))
                        slots.append(_Slot(i, j, coefficients, offset))
            else:
                tensor, diag = gate_tensor(op)
                diagonal.append(diag)
                fixed[i] = tensor
        return _ConeClass(0.0, 0, local, letters, slots, by_op, diagonal, fixed)

    def check_gradient_rules(self) -> None:
        """Refuse, before any work, named angles of gates that have no parameter-shift rule.

        Raises
        ------
        InputError
            Naming the first such gate (its position in the circuit).
        """
        if self._rules_checked:
            return
        for k, op in enumerate(self.circuit.ops):
            for j, p in enumerate(op.params):
                if isinstance(p, AngleExpr):
                    try:
                        shift_rule(op.name, j)
                    except InputError as exc:
                        raise InputError(f"operation {k} on qubits {op.qubits}: {exc}") from None
        self._rules_checked = True

    # -- evaluating ------------------------------------------------------------------------
    def energy(self, values) -> float:
        """``E(x)`` at ``values``: a mapping name -> value, or a sequence in :attr:`names` order."""
        x = values_vector(self.names, values)
        self.evaluations += 1
        total = self.constant
        for cls in self.classes:
            if cls.weight:  # terms that cancel need no contraction
                total += cls.weight * float(self._class_values(cls, x, [])[0])
        return float(total)

    def energy_and_gradient(self, values) -> tuple[float, np.ndarray]:
        """``E(x)`` and ``dE/dx`` by the parameter-shift rule (array in :attr:`names` order).

        Raises
        ------
        InputError
            A named angle on a gate without a parameter-shift rule.
        """
        self.check_gradient_rules()
        x = values_vector(self.names, values)
        self.evaluations += 1
        total = self.constant
        grad = np.zeros(len(self.names))
        for cls in self.classes:
            if not cls.weight:
                continue
            variants, weights = [], []
            for s, slot in enumerate(cls.slots):
                op = cls.circuit.ops[slot.op]
                for coef, shift in shift_rule(op.name, slot.slot):
                    variants.append((s, shift))
                    weights.append(coef)
            vals = self._class_values(cls, x, variants)
            total += cls.weight * float(vals[0])
            if not variants:
                continue
            # dV/dangle of each slot: Σ_r c_r V(angle + s_r); then the chain rule.
            per_variant = np.asarray(weights) * vals[1:]
            slot_of = np.fromiter((s for s, _ in variants), dtype=np.intp, count=len(variants))
            d_angle = np.bincount(slot_of, weights=per_variant, minlength=len(cls.slots))
            jac = np.stack([slot.coefficients for slot in cls.slots])
            grad += cls.weight * (d_angle @ jac)
        return float(total), grad

    # -- one class -------------------------------------------------------------------------
    def _angles(self, cls: _ConeClass, x: np.ndarray) -> list[float]:
        return [float(slot.coefficients @ x + slot.offset) for slot in cls.slots]

    def _matrices(
        self, cls: _ConeClass, x: np.ndarray, variants: list[tuple[int, float]]
    ) -> tuple[list[np.ndarray | None], list[bool]]:
        """Per gate: its matrix, or a ``(B, d, d)`` stack over the batch where it varies.

        ``None`` for a gate without named angles (its tensor is kept in ``cls.fixed``).
        """
        angles = self._angles(cls, x)
        batch = 1 + len(variants)
        touched: dict[int, list[tuple[int, int, float]]] = {}
        for b, (s, shift) in enumerate(variants, start=1):
            touched.setdefault(cls.slots[s].op, []).append((b, cls.slots[s].slot, shift))
        mats: list[np.ndarray | None] = []
        batched: list[bool] = []
        for i, op in enumerate(cls.circuit.ops):
            if i in cls.fixed:
                mats.append(None)
                batched.append(False)
                continue
            params = list(op.params)
            for s in cls.by_op[i]:
                params[cls.slots[s].slot] = angles[s]
            make = GATES[op.name].make
            base = make(*params)
            if i not in touched:
                mats.append(base)
                batched.append(False)
                continue
            stack = np.repeat(base[None], batch, axis=0)
            for b, j, shift in touched[i]:
                shifted = list(params)
                shifted[j] += shift
                stack[b] = make(*shifted)
            mats.append(stack)
            batched.append(True)
        return mats, batched

    def _class_values(
        self, cls: _ConeClass, x: np.ndarray, variants: list[tuple[int, float]]
    ) -> np.ndarray:
        """Real values of the class's cone: unshifted first, then each variant."""
        mats, batched = self._matrices(cls, x, variants)
        if cls.vector is None:
            self._choose_route(cls)
        batch = 1 + len(variants)
        self.cone_values += batch
        if cls.vector:
            return self._vector_values(cls, mats, batched, batch)
        tensors = [
            cls.fixed[i] if m is None else reduce_gate(m, cls.diagonal[i])
            for i, m in enumerate(mats)
        ]
        return self._network_values(cls, tensors, batched, batch)

    def _choose_route(self, cls: _ConeClass) -> None:
        """State vectors or the doubled network, from the cone's structure (once per structure).

        Classes whose doubled networks have the same labels (the same cone up to
        the angle names and values) share the decision and the plans.
        """
        local = cls.circuit
        cls.layout = layout = doubled_layout(
            local.num_qubits, [op.qubits for op in local.ops], cls.diagonal, cls.letters
        )
        cls.structure = (layout.num_qubits, layout.ket, layout.bra, layout.fixed_indices)
        vector = self._routes.get(cls.structure)
        if vector is None:
            probe = local.bind({n: probe_values(1)[n] for n in local.parameters()})
            small = absorb_small(doubled_network(probe, paulis=cls.letters, dtype=self.dtype))
            vector = self._routes[cls.structure] = deep_and_narrow(probe, small)
        cls.vector = vector

    def _network_values(self, cls, tensors, batched, batch: int) -> np.ndarray:
        """Contract the batch; a batch whose plan would need slicing is split into chunks.

        Splitting repeats no work, slicing a batch would; a single cone is sliced
        as any contraction is.
        """
        network = cls.layout.network(tensors, batched, self.dtype)
        key = (cls.structure, tuple(batched), batch)
        program = self._plans.get(key)
        if program is None:
            program = self._plans[key] = self._program(network, batch)
        if isinstance(program, int):  # a chunk size
            parts = []
            for lo in range(0, batch, program):
                hi = min(batch, lo + program)
                sub = [t[lo:hi] if b else t for t, b in zip(tensors, batched)]
                parts.append(self._network_values(cls, sub, batched, hi - lo))
            return np.concatenate(parts)
        plan, steps = program
        self.contractions += 1
        if steps is not None:
            result = contract_tree(network.arrays, plan.tree, steps)
        else:
            limit = self.options.memory_limit
            result = execute(network, plan.tree, plan.sliced, memory_limit=limit)
        return np.atleast_1d(result.value().real).astype(float)

    def _program(self, network: TensorGraph, batch: int) -> _Program:
        """The plan (with compiled steps for small unsliced ones), or a smaller chunk size.

        The chunk size scales the batch by the memory limit over greedy's peak
        (halving when the plan found still needs slicing).
        """
        limit = self.options.slice_limit
        if batch > 1:
            greedy = greedy_tree(network.indices, network.output, network.size)
            peak = greedy.cost(itemsize=network.dtype.itemsize).peak_bytes
            if peak > limit:
                return max(1, min(batch // 2, batch * limit // peak))
        plan = fit_plan(network, self.options)
        if plan.sliced and batch > 1:
            return (batch + 1) // 2
        direct = not plan.sliced and plan.flops <= DIRECT_FLOPS
        return plan, compile_tree(plan.tree) if direct else None

    def _vector_values(self, cls, mats, batched, batch: int) -> np.ndarray:
        """All variants as state vectors of the cone, in chunks that fit the memory limit."""
        m = cls.circuit.num_qubits
        limit = self.options.slice_limit
        per_state = 4 * (16 << m)
        chunk = max(1, min(batch, int(limit) // per_state))
        out = []
        for lo in range(0, batch, chunk):
            hi = min(batch, lo + chunk)
            part = [mt[lo:hi] if b else mt for mt, b in zip(mats, batched)]
            out.append(self._states(cls, part, batched, hi - lo))
        self.contractions += len(out)
        return np.concatenate(out)

    def _states(self, cls, mats, batched, batch: int) -> np.ndarray:
        local = cls.circuit
        m = local.num_qubits
        psi = np.zeros((1,) + (2,) * m, dtype=self.dtype)
        psi[(0,) * (m + 1)] = 1
        for i, op in enumerate(local.ops):
            mat = op.matrix() if i in cls.fixed else mats[i]
            psi = _apply(psi, np.asarray(mat, dtype=self.dtype), op.qubits, batched[i])
        if psi.shape[0] != batch:
            psi = np.broadcast_to(psi, (batch, *psi.shape[1:]))
        out = psi
        for q, letter in cls.letters.items():
            out = _apply(out, gate_matrix(letter.lower()).astype(self.dtype), (q,), False)
        axes = tuple(range(1, m + 1))
        return np.sum(psi.conj() * out, axis=axes).real.astype(float)


def _apply(psi: np.ndarray, mat: np.ndarray, qubits: Sequence[int], batched: bool) -> np.ndarray:
    """Apply a gate (or a batch of gates, one per state) to a batch of states ``(B, 2, ..., 2)``."""
    k = len(qubits)
    axes = [1 + q for q in qubits]
    moved = np.moveaxis(psi, axes, list(range(1, k + 1)))
    shape = moved.shape
    flat = moved.reshape(shape[0], 1 << k, -1)
    mats = mat if batched else mat[None]
    new = np.matmul(mats, flat)
    new = new.reshape((new.shape[0], *shape[1:]))
    return np.moveaxis(new, list(range(1, k + 1)), axes)
