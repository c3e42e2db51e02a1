"""Executor scaling: FLOP rate against matrix multiply, per-step overhead, workers, a big grid.

Run from the repository root::

    python benchmarks/scaling.py                 # every section, one BLAS thread per process
    python benchmarks/scaling.py rate overhead   # chosen sections
    python benchmarks/scaling.py --threads 0     # BLAS's own thread count

Sections (FLOPs are real floating-point operations, complex multiply-add = 8):

``rate``
    This machine's complex64 matrix-multiply rate (2048 x 2048, best of 3) and,
    in the same process, tnsim's contraction rate on a grid-circuit amplitude of
    at least 1e10 FLOPs (best of 4; the first run
    pays for first-touch page faults of fresh memory).  Reports their ratio (target >= 0.5).
``overhead``
    Microseconds per pairwise contraction on a network of thousands of tiny
    tensors (an unsimplified 1D brickwork amplitude), best of 5 (target <= 20 us).
``workers``
    A sliced contraction of about 1e11 FLOPs run serially and on a local pool of
    two worker processes; reports the speed-up (target >= 1.6) and checks the
    two results are bit-for-bit equal.
``grid``
    A 10 x 10 qubit, 12-cycle grid amplitude under ``memory_limit=2GiB``: its
    plan (``tnsim.execution.budget.fit_plan``) and forecast seconds (FLOPs, plus
    ``WRITE_FLOPS`` per element written, over the measured matmul rate, as
    ``tnsim.forecast`` gives them); run only if it is short.  Then a 7 x 7, 12-cycle
    amplitude sliced to fit 64 MiB, run: forecast against measured time.

``workspace``
    Slices of the 10 x 10, 12-cycle ABCDCDAB grid amplitude under 2 GiB (planned
    with 4 untimed trials, or ``--trials``), run one by one in this process:
    first with fresh memory for every large array, then through the slots of
    :mod:`tnsim.execution.workspace` reused by every slice.  Reports the seconds
    of each slice, the medians (the first slice of each kind left out) and
    whether the values are bit-for-bit equal.

``rescale``
    The slices of ``workspace`` (with slots), alternately with every intermediate
    scanned for its scale and with the scan skipped where a bound proves it
    needless (``tnsim.network.scaled.rescale_bounded``).  Reports the seconds of
    each slice, the medians (the first slice left out) and whether the values are
    bit-for-bit equal.  With ``--plans CIRCUIT PLANFILE`` (``workspace`` too): the
    plan a checkpoint folder keeps for the all-zero amplitude of CIRCUIT.

``sliced``
    One amplitude of an 8 x 8 grid circuit of 10 cycles (complex128, all-zero
    bitstring), planned and run three times: without a memory limit, and under
    1/50 and 1/1000 of the unlimited plan's peak.  Reports each run's planning
    and contraction seconds, the sliced totals against the unlimited total
    (target <= 3x at 1/50), and the forecast (``tnsim.execution.timemodel.forecast_run``:
    compute part + fixed per-step part) against the measured contraction
    (target within 2x at 1/50 and 1/1000).  With ``--no-reuse`` the sliced runs
    are repeated without slice-invariant reuse, side by side, bit-for-bit compared.
    ``--trials N`` plans with N search trials and no time limit (the same plans on
    any machine and under any load) instead of the planner's timed search.

The machine's load average is printed before and after: other processes on the
same cores lower every figure here.
"""

from __future__ import annotations

import argparse
import os
import sys
import time


def _set_threads(threads: int) -> None:
    if threads > 0:
        for key in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
            os.environ[key] = str(threads)


def _best(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def _grid_problem(rows, cols, cycles, num_sliced=0, seed=1):
    import numpy as np

    from tnsim.circuits.families import grid_circuit
    from tnsim.execution.steps import compile_tree
    from tnsim.network.builders import amplitude_network
    from tnsim.network.simplify import absorb_small
    from tnsim.plan.driver import greedy_tree

    circuit = grid_circuit(rows, cols, cycles, seed=seed)
    bits = "0" * (rows * cols)
    network = absorb_small(amplitude_network(circuit, bits, dtype=np.complex64))
    tree = greedy_tree(network.indices, network.output, network.size)
    steps = compile_tree(tree)
    big = max(steps, key=lambda s: math_prod(s.out_shape))
    sliced = [i for i in big.out_labels if i not in network.output][:num_sliced]
    return network, tree, sliced


def math_prod(shape) -> int:
    out = 1
    for d in shape:
        out *= d
    return out


def matmul_rate(n: int = 2048) -> float:
    """Measured complex64 matrix-multiply rate in FLOP/s (8 n^3 FLOPs per product), fresh."""
    import numpy as np

    from tnsim.execution.rate import matmul_rate as measure_rate

    return measure_rate(np.complex64, n=n, refresh=True)


def section_rate() -> None:
    from tnsim.execution.slices import execute
    from tnsim.execution.steps import compile_tree, count_flops

    network, tree, _ = _grid_problem(*((4, 4, 8) if QUICK[0] else (5, 6, 12)))
    flops = count_flops(compile_tree(tree))
    reference = matmul_rate(256 if QUICK[0] else 2048)
    seconds = _best(lambda: execute(network, tree, workers=1, progress=False), 4)
    rate = flops / seconds
    print(f"rate: matmul complex64 square {reference / 1e9:.1f} GFLOP/s")
    print(
        f"rate: grid amplitude, complex64, {flops:.3g} FLOPs in {seconds:.2f} s "
        f"= {rate / 1e9:.1f} GFLOP/s = {rate / reference:.2f} of matmul (target >= 0.5)"
    )


def section_overhead() -> None:
    from tnsim.circuits.families import brickwork
    from tnsim.execution.steps import compile_tree
    from tnsim.execution.treerun import contract_tree
    from tnsim.network.builders import amplitude_network
    from tnsim.plan.driver import greedy_tree

    n = 40 if QUICK[0] else 400
    network = amplitude_network(brickwork(n, 6, seed=1), "0" * n)
    tree = greedy_tree(network.indices, network.output, network.size)
    steps = compile_tree(tree)
    seconds = _best(lambda: contract_tree(network.arrays, tree, steps), 5)
    print(
        f"overhead: brickwork {n} qubits depth 6, {len(network)} tensors unsimplified: "
        f"{seconds / len(steps) * 1e6:.1f} us per pairwise contraction (target <= 20 us)"
    )


def section_workers(num_sliced: int = 5) -> None:
    from tnsim.execution.slices import execute
    from tnsim.execution.steps import compile_tree, count_flops

    size = (4, 4, 8) if QUICK[0] else (5, 6, 14)
    network, tree, sliced = _grid_problem(*size, 2 if QUICK[0] else num_sliced)
    flops = count_flops(compile_tree(tree, sliced)) * 2 ** len(sliced)
    import resource

    runs, cpu = {}, {}
    for workers in (1, 2):
        who = resource.RUSAGE_SELF if workers == 1 else resource.RUSAGE_CHILDREN
        before = resource.getrusage(who)
        start = time.perf_counter()
        chunk = 1 if QUICK[0] else None  # quick: tiny slices, one per chunk, to use the pool
        runs[workers] = execute(
            network, tree, sliced, workers=workers, progress=False, chunk_size=chunk
        )
        runs[workers, "s"] = time.perf_counter() - start
        after = resource.getrusage(who)
        cpu[workers] = after.ru_utime + after.ru_stime - before.ru_utime - before.ru_stime
    same = runs[1].mantissa.tobytes() == runs[2].mantissa.tobytes()
    print(
        f"workers: grid {size}, {len(sliced)} sliced labels, {flops:.3g} FLOPs: "
        f"1 worker {runs[1, 's']:.2f} s, 2 workers {runs[2, 's']:.2f} s, "
        f"speed-up {runs[1, 's'] / runs[2, 's']:.2f} (target >= 1.6), bit-for-bit equal: {same}"
    )
    print(
        f"workers: CPU seconds 1 worker {cpu[1]:.2f}, 2 workers {cpu[2]:.2f} (summed); "
        f"CPU share of the run {cpu[1] / runs[1, 's']:.2f} and {cpu[2] / runs[2, 's']:.2f} cores; "
        f"speed-up on two free cores at most {2 * cpu[1] / max(cpu[2], 1e-9):.2f}"
    )


def _forecast_rate(dtype) -> tuple[float, str]:
    """The matmul rate tnsim's forecasts use (measured once, cached)."""
    from tnsim.execution.rate import matmul_rate as planner_rate

    return planner_rate(dtype), "tnsim.execution.rate.matmul_rate"


def _grid_run(rows, cols, cycles, limit, run: bool) -> None:
    import numpy as np

    from tnsim.circuits.families import grid_circuit
    from tnsim.execution.budget import fit_plan
    from tnsim.execution.options import resolve_options
    from tnsim.execution.slices import execute
    from tnsim.network.builders import amplitude_network
    from tnsim.network.simplify import absorb_small
    from tnsim.units import format_bytes

    circuit = grid_circuit(rows, cols, cycles, seed=1)
    network = absorb_small(amplitude_network(circuit, "0" * (rows * cols), dtype=np.complex64))
    start = time.perf_counter()
    plan = fit_plan(network, resolve_options(limit))
    planning = time.perf_counter() - start
    rate, source = _forecast_rate(np.complex64)
    # tnsim's forecast (as tnsim.forecast gives it): FLOPs plus the fitted cost per element written.
    from tnsim.execution.timemodel import elements_written, forecast_seconds

    forecast = forecast_seconds(plan.flops, elements_written(plan), rate)
    head = (
        f"grid: {rows}x{cols} {cycles} cycles, memory_limit {format_bytes(limit)}: "
        f"{plan.flops:.3g} FLOPs, {plan.num_slices} slices, planned in {planning:.1f} s; "
        f"forecast {forecast:.3g} s at {rate / 1e9:.1f} GFLOP/s ({source})"
    )
    if not run:
        print(head + f" = {forecast / 86400:.3g} days: not run")
        return
    start = time.perf_counter()
    execute(network, plan.tree, plan.sliced, memory_limit=limit, progress=False)
    seconds = time.perf_counter() - start
    print(head + f"; measured {seconds:.1f} s, measured/forecast {seconds / forecast:.2f}")


def section_grid() -> None:
    if QUICK[0]:
        print("grid: skipped in quick mode")
        return
    _grid_run(10, 10, 12, 2 * 1024**3, run=False)  # the target instance: plan and forecast
    _grid_run(7, 7, 12, 64 * 1024**2, run=True)  # a sliced stand-in that runs in minutes


def _timed(fn):
    start = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - start


def _sliced_row(network, limit, label, baseline, no_reuse):
    from tnsim.execution.budget import fit_plan
    from tnsim.execution.options import resolve_options
    from tnsim.execution.slices import execute
    from tnsim.execution.timemodel import forecast_run
    from tnsim.units import format_bytes

    if TRIALS[0]:  # untimed planning: the same plans on any machine and under any load
        from tnsim.plan.driver import make_plan

        slice_limit = resolve_options(limit).slice_limit
        plan, planning = _timed(
            lambda: make_plan(network, memory_limit=slice_limit, max_trials=TRIALS[0], seed=0)
        )
    else:
        plan, planning = _timed(lambda: fit_plan(network, resolve_options(limit)))
    forecast = forecast_run(plan.tree, plan.sliced, network.dtype, memory_limit=limit)
    value, seconds = _timed(
        lambda: execute(network, plan.tree, plan.sliced, memory_limit=limit, progress=False)
    )
    total = planning + seconds
    print(
        f"sliced: {label} ({format_bytes(limit) if limit else 'default limit'}): "
        f"{plan.num_slices} slices, peak {format_bytes(plan.peak_bytes)}, "
        f"{forecast.flops:.3g} FLOPs run ({forecast.steps_per_slice} steps per slice); "
        f"planned {planning:.1f} s + ran {seconds:.1f} s = {total:.1f} s"
        + (f" = {total / baseline:.2f} x the unlimited run" if baseline else "")
    )
    print(
        f"sliced: {label}: forecast {forecast.seconds:.3g} s = {forecast.compute_seconds:.3g} s "
        f"compute + {forecast.fixed_seconds:.3g} s fixed ({forecast.step_seconds * 1e6:.3g} us "
        f"per step); measured/forecast {seconds / forecast.seconds:.2f} (target 0.5 to 2)"
    )
    if no_reuse:
        plain, plain_s = _timed(
            lambda: execute(
                network, plan.tree, plan.sliced, memory_limit=limit, progress=False, reuse=False
            )
        )
        same = plain.mantissa.tobytes() == value.mantissa.tobytes()
        print(
            f"sliced: {label}: without slice-invariant reuse {plain_s:.1f} s "
            f"({plain_s / seconds:.2f} x with reuse), bit-for-bit equal: {same}"
        )
    return plan, total


def section_sliced() -> None:
    import numpy as np

    from tnsim.circuits.families import grid_circuit
    from tnsim.network.builders import amplitude_network
    from tnsim.network.simplify import absorb_small

    rows, cols, cycles = (4, 4, 8) if QUICK[0] else (8, 8, 10)
    circuit = grid_circuit(rows, cols, cycles, seed=0)
    bits = "0" * (rows * cols)
    network = absorb_small(amplitude_network(circuit, bits, dtype=np.complex128))
    print(f"sliced: grid {rows}x{cols}, {cycles} cycles, one amplitude, complex128")
    full, baseline = _sliced_row(network, None, "unlimited", 0.0, False)
    for share in (4, 16) if QUICK[0] else SHARES:
        limit = max(full.peak_bytes // share, 1)
        _sliced_row(network, limit, f"1/{share} of the peak", baseline, NO_REUSE[0])


def _big_slices():
    """The 10 x 10, 12-cycle ABCDCDAB amplitude under 2 GiB (smoke: 5 x 5), planned untimed.

    With ``--plans``, the circuit file's all-zero amplitude and the plan its plan file keeps.
    Returns the network, the plan, the limit and the number of slices to time.
    """
    import tnsim.execution.workspace as workspace
    from tnsim.circuits.families import grid_circuit
    from tnsim.network.builders import amplitude_network
    from tnsim.network.simplify import absorb_small
    from tnsim.plan.driver import make_plan

    rows, cols, cycles, limit, count = (5, 5, 8, 2**16, 4) if QUICK[0] else (10, 10, 12, 2**31, 6)
    if QUICK[0]:
        workspace.MIN_SLOT_BYTES = 4096  # slots for the smoke test's small arrays
    if PLANS[0]:  # the all-zero amplitude of a circuit file, with the plan kept for it
        from tnsim.circuits.qasm.dispatch import read_qasm
        from tnsim.plan.store import PlanBook

        circuit, plans = PLANS[0]
        net = read_qasm(circuit)
        network = absorb_small(amplitude_network(net, "0" * net.num_qubits))
        plan = PlanBook(plans).get(network)
        if plan is None:
            raise SystemExit(f"{plans} keeps no plan for the all-zero amplitude of {circuit}")
        print(f"{circuit}, plan from {plans}: {plan.num_slices} slices, peak {plan.peak_bytes} B")
        return network, plan, limit, count
    circuit = grid_circuit(rows, cols, cycles, seed=0, sequence="abcdcdab")
    network = absorb_small(amplitude_network(circuit, "0" * (rows * cols)))
    plan, planning = _timed(
        lambda: make_plan(network, memory_limit=limit, max_trials=TRIALS[0] or 4, seed=0)
    )
    print(
        f"grid {rows}x{cols}, {cycles} cycles, ABCDCDAB, complex128, under {limit} bytes: "
        f"{plan.num_slices} slices, peak {plan.peak_bytes} bytes (planned in {planning:.0f} s)"
    )
    return network, plan, limit, count


def section_workspace() -> None:
    """Slices run with fresh memory for every large array, then through reused slots."""
    import statistics

    import tnsim.execution.workspace as workspace
    from tnsim.execution.slices import SliceJob, contract_slices, release_workspace
    from tnsim.execution.steps import compile_tree
    from tnsim.execution.timemodel import forecast_run
    from tnsim.units import format_bytes

    network, plan, limit, count = _big_slices()
    steps = compile_tree(plan.tree, plan.sliced)
    work = workspace.plan_workspace(plan.tree, steps, network.dtype, limit)
    forecast = forecast_run(plan.tree, plan.sliced, network.dtype, memory_limit=limit, reuse=False)
    print(
        "workspace: slots "
        + (f"{len(work.sizes)} of {format_bytes(sum(work.sizes) * 16)}" if work else "none")
        + f", with the small arrays {format_bytes(work.peak_bytes) if work else '-'}"
    )
    times = {}
    values = {}
    for room in (0, limit):
        job = SliceJob(tuple(network.arrays), plan.tree, plan.sliced, room=room)
        got = []
        for k in range(count):
            j = k % plan.num_slices
            value, seconds = _timed(lambda j=j, job=job: contract_slices(job, j, j + 1))
            got.append(seconds)
            values.setdefault(room, []).append(value.mantissa.tobytes())
        release_workspace()
        times[room] = got
        print(
            f"workspace: {'slots' if room else 'fresh memory'}: seconds per slice "
            + ", ".join(f"{t:.2f}" for t in got)
        )
    plain, slots = statistics.median(times[0][1:]), statistics.median(times[limit][1:])
    print(
        f"workspace: median of slices 2..{count}: fresh {plain:.2f} s, slots {slots:.2f} s "
        f"= {plain / slots:.2f} x faster; forecast {forecast.seconds / plan.num_slices:.2f} s "
        f"per slice; bit-for-bit equal: {values[0] == values[limit]}"
    )


def _alternate(name: str, setting, modes: dict) -> None:
    """Slices of :func:`_big_slices` run with ``setting`` at each of ``modes``, alternately.

    ``setting`` is ``(module, attribute)``; ``modes`` maps two names to their values,
    the reference first.  Prints the seconds of each slice, the medians (the first
    slice left out), the second mode's speed-up and whether both give the same bits.
    """
    import statistics

    from tnsim.execution.slices import SliceJob, contract_slices, release_workspace

    network, plan, limit, count = _big_slices()
    job = SliceJob(tuple(network.arrays), plan.tree, plan.sliced, room=limit)
    module, attribute = setting
    default = getattr(module, attribute)
    times: dict[str, list[float]] = {m: [] for m in modes}
    values: dict[str, list[bytes]] = {m: [] for m in modes}
    try:
        for k in range(count):  # the modes alternate, slice by slice, in one process
            for mode, value in modes.items():
                setattr(module, attribute, value)
                j = k % plan.num_slices
                out, seconds = _timed(lambda j=j: contract_slices(job, j, j + 1))
                times[mode].append(seconds)
                values[mode].append(out.mantissa.tobytes() + str(out.exponent).encode())
    finally:
        setattr(module, attribute, default)
        release_workspace()
    for mode in modes:
        print(f"{name}: {mode}: seconds per slice " + ", ".join(f"{t:.2f}" for t in times[mode]))
    (first, base), (second, new) = ((m, statistics.median(times[m][1:])) for m in modes)
    same = len({tuple(v) for v in values.values()}) == 1
    print(
        f"{name}: median of slices 2..{count} (slots reused): {first} {base:.2f} s, "
        f"{second} {new:.2f} s = {base / new:.2f} x faster; bit-for-bit equal: {same}"
    )


def section_rescale() -> None:
    """Slices with every intermediate scanned for its scale, against bounded rescaling."""
    import tnsim.execution.treerun as treerun

    modes = {"scanning every result": 1 << 62, "bounded": treerun.BOUNDED_MIN}
    _alternate("rescale", (treerun, "BOUNDED_MIN"), modes)


QUICK = [False]
NO_REUSE = [False]
TRIALS = [0]
PLANS: list = [None]
SHARES = [50, 1000]

SECTIONS = {
    "rate": section_rate,
    "overhead": section_overhead,
    "workers": section_workers,
    "grid": section_grid,
    "sliced": section_sliced,
    "workspace": section_workspace,
    "rescale": section_rescale,
}


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("sections", nargs="*", help=f"some of {', '.join(SECTIONS)} (default all)")
    parser.add_argument(
        "--threads", type=int, default=1, help="BLAS threads per process (0: library default)"
    )
    parser.add_argument("--quick", action="store_true", help="small smoke version (CI)")
    parser.add_argument(
        "--no-reuse", action="store_true", help="sliced: also run without slice-invariant reuse"
    )
    parser.add_argument(
        "--shares",
        default="50,1000",
        help="sliced: limits as shares of the unlimited peak (default 50,1000: 1/50, 1/1000)",
    )
    parser.add_argument(
        "--trials",
        type=int,
        default=0,
        help="sliced: plan with this many search trials and no time limit (same plans under "
        "any load; default: the planner's own timed search, as a user gets it)",
    )
    parser.add_argument(
        "--plans",
        nargs=2,
        metavar=("CIRCUIT", "PLANFILE"),
        help="workspace, rescale: the all-zero amplitude of CIRCUIT (OpenQASM) with the plan "
        "PLANFILE keeps for it (a checkpoint folder's plans.json), instead of the grid",
    )
    args = parser.parse_args(argv)
    PLANS[0] = args.plans
    unknown = sorted(set(args.sections) - set(SECTIONS))
    if unknown:
        parser.error(f"unknown sections {unknown}; choose from {', '.join(SECTIONS)}")
    _set_threads(args.threads)
    QUICK[0] = args.quick
    NO_REUSE[0] = args.no_reuse
    TRIALS[0] = args.trials
    SHARES[:] = [int(x) for x in args.shares.split(",")]
    cores = len(os.sched_getaffinity(0))
    print(
        f"machine: {cores} cores, load average {os.getloadavg()[0]:.2f}, "
        f"BLAS threads {args.threads or 'default'}, python {sys.version.split()[0]}"
        + (" (quick: small smoke sizes, figures not meaningful)" if args.quick else "")
    )
    for name in args.sections or SECTIONS:
        SECTIONS[name]()
    print(f"load average after: {os.getloadavg()[0]:.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
