"""Stage 5 of the pipeline: the questions users ask.

Each query composes the stages below it: amplitudes (:mod:`.amplitudes`),
marginals (:mod:`.marginals`), expectation values (:mod:`.expectation`,
observables in :mod:`.observables`), samples (:mod:`.sampling`,
:mod:`.gatewise`), XEB (:mod:`.xeb`), forecasts of one amplitude
(:mod:`.forecast`) and of whole queries (:mod:`.workload`), any einsum
(:mod:`.contract`), contraction-cost sweeps (:mod:`.costsweep`), and
variational workloads: energies of circuits with named angles over many values
(:mod:`.landscape`), their gradients (:mod:`.gradients`), angle optimization
(:mod:`.optimize`) and QAOA MaxCut (:mod:`.maxcut`).  Noisy circuits: exact
marginals, expectation values and bitstring probabilities (:mod:`.noisy`, small
cones in time order by :mod:`.timeorder`), samples exact or by trajectories
(:mod:`.noisy_sampling`) and the predicted XEB of a noisy chip (:mod:`.noisy_xeb`).
"""
