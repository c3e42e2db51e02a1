"""Optimizing a circuit's named angles: several starts, scipy's minimizers, every evaluation kept.

:func:`optimize_angles` minimizes (or maximizes) ``E(x) = <0|C(x)† H C(x)|0>``
over the values ``x`` of the circuit's named angles with
:func:`scipy.optimize.minimize`: L-BFGS-B with the exact parameter-shift
gradient by default (:mod:`tnsim.queries.gradients`), or a gradient-free
method on request (Nelder-Mead, Powell, COBYLA).  It runs from the given
starting points, then from seeded random ones, and keeps the best.  The
landscape (light-cone classes, plans) is built once for all starts
(:class:`tnsim.queries.landscape.EnergyLandscape`).
"""

from __future__ import annotations

import math
import sys
import time
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass

import numpy as np
from scipy.optimize import minimize

from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError
from tnsim.execution.options import DTypeLike, MemoryLimit, current_options
from tnsim.queries.landscape import EnergyLandscape, values_vector

__all__ = ["GRADIENT_METHODS", "METHODS", "AngleOptimum", "Evaluation", "StartOutcome"]
__all__ += ["check_method", "optimize_angles"]

GRADIENT_METHODS = ("L-BFGS-B", "BFGS", "CG")
"""scipy methods given the exact gradient."""

METHODS = (*GRADIENT_METHODS, "Nelder-Mead", "Powell", "COBYLA")
"""Every method :func:`optimize_angles` accepts (scipy's names, any letter case)."""


@dataclass(frozen=True)
class Evaluation:
    """One evaluation of the energy during an optimization.

    Attributes
    ----------
    start : int
        Which start it belongs to.
    values : tuple of float
        The angles' values, in the order of :attr:`AngleOptimum.names`.
    energy : float
        ``E`` there.
    gradient_norm : float or None
        Euclidean norm of ``dE/dx`` (``None`` for gradient-free methods).
    seconds : float
        Time since the optimization began.
    """

    start: int
    values: tuple[float, ...]
    energy: float
    gradient_norm: float | None
    seconds: float


@dataclass(frozen=True)
class StartOutcome:
    """Where one start began and ended.

    Attributes
    ----------
    index : int
        Position among the starts.
    kind : str
        ``"given"`` (from ``initial``) or ``"random"``.
    initial, values : tuple of float
        First and best values.
    energy : float
        Best energy of this start.
    evaluations : int
        Energy evaluations this start used.
    converged : bool
        Whether scipy reported success.
    message : str
        scipy's message.
    """

    index: int
    kind: str
    initial: tuple[float, ...]
    values: tuple[float, ...]
    energy: float
    evaluations: int
    converged: bool
    message: str


@dataclass(frozen=True)
class AngleOptimum:
    """The result of :func:`optimize_angles`.

    Attributes
    ----------
    names : tuple of str
        The parameters.
    values : dict of str to float
        The best values found.
    energy : float
        ``E`` there.
    method : str
        The scipy method.
    maximize : bool
        Whether ``E`` was maximized.
    starts : tuple of StartOutcome
        Every start.
    evaluations : tuple of Evaluation
        Every evaluation, in order.
    seconds : float
        Wall time of the whole optimization, building the landscape included.
    setup_seconds : float
        Of which building the landscape (light cones grouped into classes).
    num_terms, num_classes : int
        Pauli strings of the observable, and distinct light-cone classes among them.
    contractions : int
        Batched cone contractions run.
    """

    names: tuple[str, ...]
    values: dict[str, float]
    energy: float
    method: str
    maximize: bool
    starts: tuple[StartOutcome, ...]
    evaluations: tuple[Evaluation, ...]
    seconds: float
    setup_seconds: float
    num_terms: int
    num_classes: int
    contractions: int

    def to_dict(self) -> dict:
        """A JSON-ready summary (plain numbers; every float finite)."""
        out = asdict(self)
        out["starts"] = [asdict(s) for s in self.starts]
        out["evaluations"] = [asdict(e) for e in self.evaluations]
        return out


def check_method(name: str) -> str:
    """The scipy spelling of an accepted method name, else an :class:`InputError`."""
    for m in METHODS:
        if m.lower() == str(name).lower():
            return m
    raise InputError(f"unknown method {name!r}; choose one of {', '.join(METHODS)}")


def _count(name: str, value, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise InputError(f"{name} must be an integer >= {minimum}, got {value!r}")
    return int(value)


def _box(names: Sequence[str], box) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper ends of the random starts, per name."""
    if box is None:
        box = (-math.pi, math.pi)
    if isinstance(box, Mapping):
        unknown = sorted(set(box) - set(names))
        if unknown:
            raise InputError(f"box: unknown name(s) {', '.join(unknown)}")
        pairs = [box.get(n, (-math.pi, math.pi)) for n in names]
    else:
        pairs = [box] * len(names)
    try:
        lo, hi = (np.array(col, dtype=float) for col in zip(*pairs))
    except (TypeError, ValueError):
        raise InputError(f"box: give (low, high) pairs of numbers, got {box!r}") from None
    if len(names) and (not np.all(np.isfinite(lo) & np.isfinite(hi)) or np.any(lo > hi)):
        raise InputError(f"box: every (low, high) must be finite with low <= high, got {box!r}")
    return (lo, hi) if len(names) else (np.zeros(0), np.zeros(0))


def _starts(names, initial, starts: int, seed, box) -> list[tuple[str, np.ndarray]]:
    given = [("given", values_vector(names, x, "initial")) for x in (initial or ())]
    lo, hi = _box(names, box)
    rng = np.random.default_rng(seed)
    randoms = [("random", rng.uniform(lo, hi)) for _ in range(max(0, starts - len(given)))]
    return given + randoms


def _progress_bar(progress, total: int):
    """A tqdm bar on stderr (shown on a terminal only, unless ``progress`` says otherwise)."""
    from tqdm.auto import tqdm

    if progress is None:
        progress = current_options().progress
    callback = progress if callable(progress) else None
    disable = None if progress is None or callback else not progress
    bar = tqdm(total=total, unit="start", file=sys.stderr, disable=disable, leave=False)
    return bar, callback


def optimize_angles(
    circuit: Circuit | EnergyLandscape,
    observable=None,
    *,
    starts: int = 4,
    seed: int | np.random.Generator | None = 0,
    initial: Sequence | None = None,
    method: str = "L-BFGS-B",
    maximize: bool = False,
    box=None,
    max_evaluations: int = 500,
    tolerance: float | None = None,
    progress: bool | None = None,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> AngleOptimum:
    """Find the values of a circuit's named angles that minimize (or maximize) an energy.

    Parameters
    ----------
    circuit : Circuit or EnergyLandscape
        A circuit with named angles (then ``observable`` is required), or a
        landscape already built for one.
    observable : str or mapping or Observable
        The Pauli sum ``H``.
    starts : int
        Number of starts: the ``initial`` points first, then seeded random
        points (uniform in ``box``) up to this number.
    seed : int or numpy.random.Generator
        Seed of the random starting points.
    initial : sequence, optional
        Starting points, each a mapping name -> value or a sequence in the
        order of ``circuit.parameters()``.
    method : str
        ``"L-BFGS-B"`` (default), ``"BFGS"`` or ``"CG"`` with the exact
        gradient; ``"Nelder-Mead"``, ``"Powell"`` or ``"COBYLA"`` without.
    maximize : bool
        Maximize ``E`` instead.
    box : (float, float) or mapping of str to (float, float), optional
        Range of the random starts (default ``(-π, π)`` for every name).
    max_evaluations : int
        Energy evaluations allowed per start.
    tolerance : float, optional
        Passed to :func:`scipy.optimize.minimize` as ``tol``.
    progress : bool, optional
        Progress bar on stderr, one step per start (default: the
        :func:`tnsim.run_options` setting, else only on a terminal).
    dtype : numpy dtype, optional
        Contraction dtype (default: the enclosing ``run_options`` block's, else complex128).
    memory_limit : int or str, optional
        Bytes (or text such as ``"4GiB"``) for live intermediates of one contraction.

    Returns
    -------
    AngleOptimum

    Raises
    ------
    InputError
        A bad option, a circuit without named angles, or (with a gradient
        method) a named angle on a gate without a parameter-shift rule.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> c = Circuit(2).ry("a", 0).cx(0, 1).ry("b", 1)
    >>> best = optimize_angles(c, "Z0 + Z1", starts=2, seed=1)   # minimum -2 at a=b=π
    >>> round(best.energy, 8), best.names
    (-2.0, ('a', 'b'))
    """
    t0 = time.perf_counter()
    method = check_method(method)
    starts = _count("starts", starts, 1)
    max_evaluations = _count("max_evaluations", max_evaluations, 1)
    if isinstance(circuit, EnergyLandscape):
        landscape = circuit
    else:
        if observable is None:
            raise InputError("give the observable to optimize, e.g. 'Z0 Z1 + 0.5 X0'")
        landscape = EnergyLandscape(circuit, observable, dtype=dtype, memory_limit=memory_limit)
    names = landscape.names
    if not names:
        raise InputError("the circuit has no named angles to optimize; write e.g. rx('theta', 0)")
    gradient = method in GRADIENT_METHODS
    if gradient:
        landscape.check_gradient_rules()
    points = _starts(names, initial, starts, seed, box)
    sign = -1.0 if maximize else 1.0
    records: list[Evaluation] = []
    outcomes: list[StartOutcome] = []
    bar, callback = _progress_bar(progress, len(points))
    try:
        for index, (kind, x0) in enumerate(points):
            outcomes.append(
                _run_start(
                    landscape,
                    index,
                    kind,
                    x0,
                    method,
                    sign,
                    max_evaluations,
                    tolerance,
                    records,
                    t0,
                )
            )
            best = min(outcomes, key=lambda o: sign * o.energy)
            bar.update(1)
            bar.set_postfix(best=f"{best.energy:.8g}", evaluations=len(records))
            if callback is not None:
                callback(index + 1, len(points))
    finally:
        bar.close()
    best = min(outcomes, key=lambda o: sign * o.energy)
    return AngleOptimum(
        names=names,
        values=dict(zip(names, best.values)),
        energy=best.energy,
        method=method,
        maximize=bool(maximize),
        starts=tuple(outcomes),
        evaluations=tuple(records),
        seconds=time.perf_counter() - t0,
        setup_seconds=landscape.seconds_setup,
        num_terms=landscape.num_terms,
        num_classes=landscape.num_classes,
        contractions=landscape.contractions,
    )


class _BudgetSpent(Exception):
    """Raised inside the objective when a start has used its evaluations."""


def _run_start(landscape, index, kind, x0, method, sign, max_evaluations, tolerance, records, t0):
    """One call of scipy's minimizer from ``x0``; every evaluation appended to ``records``."""
    first = len(records)
    best = {"energy": math.inf, "x": x0}

    def note(x, energy, grad):
        if len(records) - first >= max_evaluations:
            raise _BudgetSpent
        records.append(
            Evaluation(
                index,
                tuple(float(v) for v in x),
                float(energy),
                None if grad is None else float(np.linalg.norm(grad)),
                time.perf_counter() - t0,
            )
        )
        if sign * energy < sign * best["energy"] or not math.isfinite(best["energy"]):
            best.update(energy=float(energy), x=np.array(x, dtype=float))

    def with_gradient(x):
        energy, grad = landscape.energy_and_gradient(x)
        note(x, energy, grad)
        return sign * energy, sign * grad

    def without_gradient(x):
        energy = landscape.energy(x)
        note(x, energy, None)
        return sign * energy

    if method in GRADIENT_METHODS:
        fun, jac = with_gradient, True
    else:
        fun, jac = without_gradient, None
    options = {
        "L-BFGS-B": {"maxfun": max_evaluations, "maxiter": max_evaluations},
        "BFGS": {"maxiter": max_evaluations},
        "CG": {"maxiter": max_evaluations},
        "Nelder-Mead": {"maxfev": max_evaluations},
        "Powell": {"maxfev": max_evaluations},
        "COBYLA": {"maxiter": max(max_evaluations, len(x0) + 2)},  # its least budget
    }[method]
    try:
        result = minimize(fun, x0, jac=jac, method=method, tol=tolerance, options=options)
        converged, message = bool(result.success), str(result.message)
    except _BudgetSpent:
        converged, message = False, f"stopped after {max_evaluations} evaluations"
    return StartOutcome(
        index=index,
        kind=kind,
        initial=tuple(float(v) for v in x0),
        values=tuple(float(v) for v in best["x"]),
        energy=best["energy"],
        evaluations=len(records) - first,
        converged=converged,
        message=message,
    )
