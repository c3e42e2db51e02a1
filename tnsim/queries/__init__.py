"""Stage 5 of the pipeline: the questions users ask.

Each query composes the stages below it: amplitudes (:mod:`.amplitudes`),
marginals (:mod:`.marginals`), expectation values (:mod:`.expectation`,
observables in :mod:`.observables`), samples (:mod:`.sampling`,
:mod:`.gatewise`), XEB (:mod:`.xeb`), forecasts (:mod:`.forecast`), any
einsum (:mod:`.contract`) and contraction-cost sweeps (:mod:`.costsweep`).
"""
