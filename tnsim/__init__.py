"""tnsim: tensor-network contraction for wide, shallow quantum circuits.

The pipeline, one folder per stage: :mod:`tnsim.circuits` → :mod:`tnsim.network`
→ :mod:`tnsim.plan` → :mod:`tnsim.execution` → :mod:`tnsim.queries`, with the
command line in :mod:`tnsim.cli` and the job runner and local service in
:mod:`tnsim.service`.  The names below are the public API; each is
imported on first use, so ``import tnsim`` stays quick.

Queries: :func:`amplitude`, :func:`amplitudes`, :func:`iter_amplitudes`,
:func:`marginal`, :func:`expectation`, :func:`maxcut_energy`, :func:`sample`,
:func:`xeb`, :func:`contract` (any einsum) and :func:`forecast` (cost before a
run).  Each takes ``memory_limit`` (bytes or text such as ``"4GiB"``) and
``dtype``, or the enclosing :func:`run_options` block's.

What they return, besides numbers and numpy arrays:

* :class:`Scaled` -- ``mantissa * 2**exponent`` (``scaled=True``), exact where
  the value underflows;
* :class:`XebResult` -- fidelity, standard error and sample count of :func:`xeb`;
* :class:`ForecastReport` -- FLOPs, memory, slices and seconds of :func:`forecast`;
* :class:`Plan` -- tree, sliced labels and cost of :func:`make_plan`;
* :class:`ContractionRecord` -- what each contraction of a ``run_options(log=[...])``
  block ran; :class:`RunOptions` -- the options a block holds.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from tnsim.errors import (
    CheckpointError,
    InputError,
    PlanningError,
    QasmError,
    ResourceLimitError,
    TnsimError,
)

#: Public name -> module that defines it (imported when the name is first used).
_PUBLIC = {
    "Circuit": "tnsim.circuits.circuit",
    "Operation": "tnsim.circuits.circuit",
    "AngleExpr": "tnsim.circuits.parameters",
    "angle": "tnsim.circuits.parameters",
    "read_qasm": "tnsim.circuits.qasm",
    "write_qasm": "tnsim.circuits.qasm",
    "NoiseModel": "tnsim.circuits.noise",
    "read_noise_model": "tnsim.circuits.noisefile",
    "Scaled": "tnsim.network.scaled",
    "TensorGraph": "tnsim.network.graph",
    "PairTree": "tnsim.plan.tree",
    "Plan": "tnsim.plan.driver",
    "make_plan": "tnsim.plan.driver",
    "Planner": "tnsim.plan.optimizer",
    "run_options": "tnsim.execution.options",
    "RunOptions": "tnsim.execution.options",
    "ContractionRecord": "tnsim.execution.options",
    "amplitude": "tnsim.queries.amplitudes",
    "amplitudes": "tnsim.queries.amplitudes",
    "iter_amplitudes": "tnsim.queries.amplitudes",
    "marginal": "tnsim.queries.marginals",
    "expectation": "tnsim.queries.expectation",
    "maxcut_energy": "tnsim.queries.expectation",
    "Observable": "tnsim.queries.observables",
    "PauliTerm": "tnsim.queries.observables",
    "parse_observable": "tnsim.queries.observables",
    "sample": "tnsim.queries.sampling",
    "xeb": "tnsim.queries.xeb",
    "XebResult": "tnsim.queries.xeb",
    "forecast": "tnsim.queries.forecast",
    "ForecastReport": "tnsim.queries.forecast",
    "contract": "tnsim.queries.contract",
    "energy_and_gradient": "tnsim.queries.gradients",
    "EnergyLandscape": "tnsim.queries.landscape",
    "optimize_angles": "tnsim.queries.optimize",
    "AngleOptimum": "tnsim.queries.optimize",
    "optimize_maxcut": "tnsim.queries.maxcut",
    "MaxCutOptimum": "tnsim.queries.maxcut",
    "noisy_marginal": "tnsim.queries.noisy",
    "noisy_expectation": "tnsim.queries.noisy",
    "noisy_probabilities": "tnsim.queries.noisy",
    "noisy_sample": "tnsim.queries.noisy_sampling",
    "predict_xeb": "tnsim.queries.noisy_xeb",
    "run_job": "tnsim.service.jobs",
}

__all__ = [
    *_PUBLIC,
    "TnsimError",
    "InputError",
    "QasmError",
    "PlanningError",
    "ResourceLimitError",
    "CheckpointError",
    "__version__",
]


def _version() -> str:
    """The installed package's version (looked up on first use: importlib.metadata is slow)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("tnsim")
    except PackageNotFoundError:  # running from a source tree that was never installed
        return "0+unknown"


def __getattr__(name: str) -> Any:
    """Import a public name's module on first use (PEP 562)."""
    if name == "__version__":
        value = _version()
        globals()[name] = value
        return value
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'tnsim' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_PUBLIC))


if TYPE_CHECKING:  # the names as a type checker and an IDE should see them
    from tnsim.circuits.circuit import Circuit, Operation
    from tnsim.circuits.noise import NoiseModel
    from tnsim.circuits.noisefile import read_noise_model
    from tnsim.circuits.parameters import AngleExpr, angle
    from tnsim.circuits.qasm import read_qasm, write_qasm
    from tnsim.execution.options import ContractionRecord, RunOptions, run_options
    from tnsim.network.graph import TensorGraph
    from tnsim.network.scaled import Scaled
    from tnsim.plan.driver import Plan, make_plan
    from tnsim.plan.optimizer import Planner
    from tnsim.plan.tree import PairTree
    from tnsim.queries.amplitudes import amplitude, amplitudes, iter_amplitudes
    from tnsim.queries.contract import contract
    from tnsim.queries.expectation import expectation, maxcut_energy
    from tnsim.queries.forecast import ForecastReport, forecast
    from tnsim.queries.gradients import energy_and_gradient
    from tnsim.queries.landscape import EnergyLandscape
    from tnsim.queries.marginals import marginal
    from tnsim.queries.maxcut import MaxCutOptimum, optimize_maxcut
    from tnsim.queries.noisy import noisy_expectation, noisy_marginal, noisy_probabilities
    from tnsim.queries.noisy_sampling import noisy_sample
    from tnsim.queries.noisy_xeb import predict_xeb
    from tnsim.queries.observables import Observable, PauliTerm, parse_observable
    from tnsim.queries.optimize import AngleOptimum, optimize_angles
    from tnsim.queries.sampling import sample
    from tnsim.queries.xeb import XebResult, xeb
    from tnsim.service.jobs import run_job
