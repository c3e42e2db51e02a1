"""Constants fitted on a machine: time-model coefficients and measured cross-over points.

Every number here was chosen by measuring tnsim on the development machine
(2-core x86-64, numpy's bundled OpenBLAS); each docstring names the benchmark
whose output refits it.  On a very different machine, rerun those benchmarks
and change the values here: the modules that use them import them from this
one module (it imports nothing of tnsim, so any stage may use it).

Examples
--------
>>> from tnsim import fitted
>>> fitted.WRITE_FLOPS > 0 and fitted.SMALL_PRODUCT == 2**26
True
"""

from __future__ import annotations

__all__ = [
    "AMPLITUDE_WIDTH",
    "BATCH_ELEMENTS",
    "CHUNK_FLOPS",
    "DIRECT_WIDTH",
    "LIVE_PASSES",
    "NARROW",
    "ROW_SECONDS",
    "SMALL_PRODUCT",
    "WRITE_FLOPS",
]

# ------------------------------------------------------------------ the time model

WRITE_FLOPS = 400
"""FLOPs that writing one element of an intermediate costs in time, at the matmul rate.

Used by the planner's ``"runtime"`` objective (:func:`tnsim.plan.search.score`)
and by every forecast (:func:`tnsim.execution.timemodel.forecast_seconds`).
Refit by ``python benchmarks/time_model.py``, which executes plans and fits
execution time = FLOPs / rate + seconds per element written: on the development
machine (complex128) FLOPs / (6.1-7.2e10 FLOP/s) + 5.0-5.4 ns per element
written (+ a per-step term), over 17 plans of grid circuits with 10^6.8 to
10^10.4 FLOPs; 300 and 390 FLOPs per element in two runs.  Sweeps, whose every
step rewrites the whole front to absorb one small tensor, need up to 3x fewer
FLOPs than bisection trees there but ran 3-4x slower."""

ROW_SECONDS = 5e-5
"""Python seconds per tensor of rebuilding, simplifying and contracting one bitstring's
network on its own (:func:`tnsim.queries.amplitudes.iter_amplitudes` compares this
row-by-row cost with a batched contraction).

About 50 microseconds on the development machine, measured on 7x7 grid circuits
of 8 cycles (order of magnitude).  Refit by ``python benchmarks/queries.py --only
amplitudes`` with the value moved up and down: it decides the route of the row of
10,000 independent bitstrings; keep the value under which that row is fastest."""

LIVE_PASSES = 5
"""Run time per shot and layer of gate-by-gate sampling, in forecasts of one contraction
of the layer's tree, for the plan search (:mod:`tnsim.queries.gatewise`).

Values are computed about twice and environments once, well below the matmul
rate; 4.7 to 7.5 measured on 7x7 grid circuits.  Refit by ``python
benchmarks/queries.py --only sampling`` with the value moved up and down (it sets
how long each layer's plan is searched); keep the value under which the 7x7
gate-by-gate row is fastest."""

# ------------------------------------------------------------------ memory traffic

BATCH_ELEMENTS = 1 << 21
"""Most elements of one intermediate redone per run of a batch of bitstrings or shots
(:mod:`tnsim.execution.batch`, :mod:`tnsim.queries.gatewise`).

Batches of larger arrays ran up to 2x slower on 7x7 grid circuits: arrays over
the allocator's reuse threshold (32 MiB) come as fresh pages on every step.
Refit by ``python benchmarks/queries.py --only amplitudes,sampling`` with this
value doubled and halved: keep the fastest."""

SMALL_PRODUCT = 1 << 26
"""Matrix products with fewer complex multiply-adds than this run on one BLAS thread
(:mod:`tnsim.execution.blas`).

A multi-threaded BLAS gains little on the many small products of a shallow
circuit's contraction, and on a busy 2-core machine its spinning threads made
them ~30x slower.  Refit by ``python benchmarks/scaling.py overhead`` and
``python benchmarks/scaling.py rate --threads 0`` (many tiny steps, and large
products with the library's own thread count) with this value moved."""

CHUNK_FLOPS = 2e9
"""FLOPs per task the chunking of slices aims at: about a second of one core's work
(:func:`tnsim.execution.executors.chunk_bounds`).

Refit by ``python benchmarks/scaling.py rate``: its measured FLOP rate of one
core, times the seconds a task should take (long enough that sending a chunk to a
worker is negligible, short enough that a checkpoint loses little)."""

# ------------------------------------------------------------------ dense cross-overs

DIRECT_WIDTH = 20
"""Circuits of at most this many qubits are sampled from all ``2**n`` amplitudes at once
(:func:`tnsim.queries.sampling.sample`); wider ones gate by gate.

``2**20`` complex128 amplitudes are 16 MiB.  Refit by ``python
benchmarks/queries.py --only routes,sampling``: the width from which gate by gate
beats all amplitudes at once."""

AMPLITUDE_WIDTH = 20
"""Largest ``|B ∪ D|`` for which the chain rule of marginals considers amplitudes with
open legs (``2**20`` outputs per prefix; :mod:`tnsim.queries.sampling`).

Refit by ``python benchmarks/queries.py --only routes`` with the value moved up
and down: keep the value under which its chain-rule column is fastest."""

NARROW = 20
"""Light cones of at most this many qubits may be answered from all ``2**m`` amplitudes
of the cone instead of the doubled network (:mod:`tnsim.queries.marginals`,
:mod:`tnsim.queries.expectation`; the greedy cost decides within this width).

Refit by ``python benchmarks/queries.py --only qaoa`` (deep QAOA cones) with
this value moved."""
