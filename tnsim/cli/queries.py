"""The query subcommands: ``amp``, ``marginal``, ``expect``, ``sample`` and ``xeb``.

Registered on the ``tnsim`` parser by :func:`register`; every one takes the
common query flags (:func:`tnsim.cli.common.add_query_arguments`).  Numbers
are printed so that wide circuits lose nothing: amplitudes as exact decimal
mantissa-exponent text with ``log10|a|`` and the phase, XEB scores in log form
where they leave the range of a float (:mod:`tnsim.cli.numbers`).
"""

from __future__ import annotations

import argparse
import itertools
import json
import math
import sys
from typing import Any

from tnsim.cli.common import (
    OptionError,
    add_input_argument,
    add_query_arguments,
    check_array,
    count_type,
    dtype_of,
    emit_stats,
    load_circuit,
    seed_type,
    warn,
    write_output,
)
from tnsim.cli.inputs import gather_bits, observable_text, parse_qubit_list, read_records
from tnsim.cli.noiseflag import add_noise_argument, noisy_circuit
from tnsim.cli.numbers import (
    amplitude_record,
    bits_cell,
    json_float,
    log10_text,
    scaled_text,
)

__all__ = ["register"]


def _json_text(doc: dict) -> str:
    return json.dumps(doc, allow_nan=False) + "\n"


# --- marginal ---


def _cmd_marginal(args: argparse.Namespace) -> int:
    from tnsim.circuits.bits import format_bits
    from tnsim.queries.marginals import marginal

    qubits = [q for text in args.qubits for q in parse_qubit_list(text)]
    if len(qubits) > 24:
        raise OptionError(
            f"--qubits lists {len(qubits)} qubits: 2^{len(qubits)} outcomes are too many to "
            "print; list at most 24 (or sample the circuit)"
        )
    circuit = load_circuit(args.circuit, args.input)
    noisy = noisy_circuit(args, circuit)
    if noisy is None:
        probs = marginal(circuit, qubits, dtype=dtype_of(args))
    else:
        from tnsim.queries.noisy import noisy_marginal

        probs = noisy_marginal(noisy, qubits, dtype=dtype_of(args))
    k = len(qubits)
    outcomes = [format_bits([(i >> (k - 1 - j)) & 1 for j in range(k)]) for i in range(1 << k)]
    if args.json:
        doc = {
            "qubits": qubits,
            "outcomes": outcomes,
            "probabilities": [json_float(p) for p in probs.tolist()],
            "precision": args.precision,
            "units": {"outcomes": "character j is the j-th listed qubit"},
        }
        emit_stats(args, doc)
        write_output(_json_text(doc), args.output)
        return 0
    width = max(7, k)
    lines = [
        f"qubits {','.join(map(str, qubits))} (character j of an outcome is the j-th listed qubit)",
        f"{'outcome':<{width}}  probability",
    ]
    lines += [f"{bits:<{width}}  {p:.12f}" for bits, p in zip(outcomes, probs)]
    write_output("\n".join(lines) + "\n", args.output)
    emit_stats(args)
    return 0


# --- expect ---


def _cmd_expect(args: argparse.Namespace) -> int:
    from tnsim.queries.expectation import TermCache
    from tnsim.queries.noisy import NoisyTermCache
    from tnsim.queries.observables import parse_observable

    circuit = load_circuit(args.circuit, args.input)
    obs = parse_observable(observable_text(args), circuit.num_qubits)
    noisy = noisy_circuit(args, circuit)
    cache: TermCache | NoisyTermCache
    if noisy is None:
        cache = TermCache(circuit, dtype=dtype_of(args))
        get = cache.value
    else:
        cache = NoisyTermCache(noisy, dtype=dtype_of(args))
        get = cache.reported  # readout errors included
    rows: list[dict[str, Any]] = []
    for term in obs.terms:
        value = get(term.paulis)
        pauli = " ".join(f"{p}{q}" for q, p in term.paulis) or "I"
        rows.append({"coefficient": term.coefficient, "pauli": pauli, "expectation": value})
    total = float(sum(r["coefficient"] * r["expectation"] for r in rows))
    if args.json:
        doc = {
            "value": json_float(total),
            "terms": rows,
            "contractions": cache.misses,
            "precision": args.precision,
        }
        emit_stats(args, doc)
        write_output(_json_text(doc), args.output)
        return 0
    width = max(12, *(len(r["pauli"]) for r in rows))
    lines = [f"{'coefficient':>14}  {'Pauli string':<{width}}  expectation"]
    lines += [
        f"{r['coefficient']:14.8g}  {r['pauli']:<{width}}  {r['expectation']:+.12f}" for r in rows
    ]
    lines.append(f"total {total:+.12f}  ({len(rows)} terms, {cache.misses} contractions)")
    write_output("\n".join(lines) + "\n", args.output)
    emit_stats(args)
    return 0


# --- sample ---


def _cmd_sample(args: argparse.Namespace) -> int:
    from tnsim.circuits.bitfiles import from_qubit_order, order_width
    from tnsim.circuits.bits import format_bits
    from tnsim.queries.sampling import sample

    circuit = load_circuit(args.circuit, args.input)
    width = order_width(circuit, args.bit_order)
    check_array(args.shots, max(width, circuit.num_qubits), "--shots")
    noisy = noisy_circuit(args, circuit)
    extra: dict[str, Any] = {}
    if noisy is None:
        out = sample(
            circuit,
            args.shots,
            seed=args.seed,
            block=args.block,
            method=args.method,
            dtype=dtype_of(args),
        )
    else:
        out, extra = _noisy_samples(args, noisy)
    lines = [format_bits(row) for row in from_qubit_order(out, circuit, args.bit_order)]
    if args.json:
        doc = {
            "num_qubits": circuit.num_qubits,
            "bit_order": args.bit_order,
            "seed": args.seed,
            "method": args.method,
            **extra,
            "precision": args.precision,
            "samples": lines,
        }
        emit_stats(args, doc)
        write_output(_json_text(doc), args.output)
    else:
        write_output("".join(line + "\n" for line in lines), args.output)
        emit_stats(args)
    return 0


def _noisy_samples(args: argparse.Namespace, noisy) -> tuple[Any, dict[str, Any]]:
    """``sample --noise``: exact up to 20 qubits (or ``--method marginals``), else trajectories."""
    from tnsim.queries.noisy_sampling import noisy_sample

    method = {"gates": "trajectories", "marginals": "marginals"}.get(args.method, "auto")
    drawn = noisy_sample(
        noisy, args.shots, seed=args.seed, block=args.block, method=method, dtype=dtype_of(args)
    )
    if drawn.method == "trajectories" and not args.json:
        print(
            f"tnsim: {args.shots} noisy shots from {drawn.trajectories} distinct trajectories",
            file=sys.stderr,
        )
    return drawn.bits, {"noisy_method": drawn.method, "trajectories": drawn.trajectories}


# --- xeb ---


def _cmd_xeb(args: argparse.Namespace) -> int:
    from tnsim.circuits.bitfiles import to_qubit_order
    from tnsim.queries.xeb import xeb

    circuit = load_circuit(args.circuit, args.input)
    noisy = noisy_circuit(args, circuit)
    if args.samples is None:
        if noisy is None:
            raise OptionError("give a SAMPLES file, or --noise FILE for the predicted fidelity")
        return _predicted_xeb(args, noisy, {}, [])
    shown, counts = read_records(args.samples, circuit, args.bit_order)
    rows = to_qubit_order(shown, circuit, args.bit_order)
    r = xeb(circuit, rows, counts=counts, dtype=dtype_of(args))
    if noisy is not None:
        doc: dict[str, Any] = {
            "fidelity": json_float(r.fidelity),
            "standard_error": json_float(r.standard_error),
            "num_samples": r.num_samples,
        }
        lines = [
            f"linear XEB fidelity F   {_fidelity_text(r)}",
            f"standard error          {log10_text(r.log10_standard_error)}",
            f"samples                 {r.num_samples} ({len(rows)} distinct bitstrings)",
        ]
        return _predicted_xeb(args, noisy, doc, lines)
    if args.json:
        doc = {
            "fidelity": json_float(r.fidelity),
            "standard_error": json_float(r.standard_error),
            "log10_fidelity_plus_one": json_float(r.log10_mean),
            "log10_standard_error": json_float(r.log10_standard_error),
            "fidelity_text": _fidelity_text(r),
            "standard_error_text": log10_text(r.log10_standard_error),
            "num_samples": r.num_samples,
            "distinct": len(rows),
            "bit_order": args.bit_order,
            "precision": args.precision,
        }
        emit_stats(args, doc)
        write_output(_json_text(doc), args.output)
        return 0
    lines = [
        f"linear XEB fidelity F   {_fidelity_text(r)}   (log10(F + 1) = {r.log10_mean:.6f})",
        f"standard error          {log10_text(r.log10_standard_error)}   "
        f"(log10 = {r.log10_standard_error:.6f})",
        f"samples                 {r.num_samples} ({len(rows)} distinct bitstrings)",
    ]
    write_output("\n".join(lines) + "\n", args.output)
    emit_stats(args)
    return 0


def _predicted_xeb(args: argparse.Namespace, noisy, doc: dict, lines: list[str]) -> int:
    """``xeb --noise``: the predicted fidelity (exact where narrow; digital error model)."""
    from tnsim.queries.noisy_xeb import predict_xeb

    pred = predict_xeb(noisy, dtype=dtype_of(args))
    if args.json:
        doc.update(
            predicted_exact=None if pred.exact is None else json_float(pred.exact),
            noiseless_exact=None if pred.ideal is None else json_float(pred.ideal),
            predicted_digital=json_float(pred.digital),
            precision=args.precision,
        )
        emit_stats(args, doc)
        write_output(_json_text(doc), args.output)
        return 0
    wide = "(too wide to compute)"
    lines += [
        f"predicted F, exact      {wide if pred.exact is None else f'{pred.exact:+.6f}'}",
        f"noiseless F, exact      {wide if pred.ideal is None else f'{pred.ideal:+.6f}'}",
        f"predicted F, digital    {pred.digital:+.6f}  (product of gate and readout fidelities)",
    ]
    write_output("\n".join(lines) + "\n", args.output)
    emit_stats(args)
    return 0


def _fidelity_text(r) -> str:
    """``F`` as text: plain where a float holds it, else from ``log10(F + 1)``."""
    if math.isfinite(r.fidelity) and r.log10_mean < 15:
        return f"{r.fidelity:+.10e}"
    return "+" + log10_text(r.log10_mean)  # F + 1 and F agree to 15+ digits here


# --- amp ---


def _amp_records(circuit, rows, shown, dtype):
    """Yield one JSON-ready record per bitstring, chunk by chunk as the batch is contracted."""
    from tnsim.circuits.bits import format_bits
    from tnsim.queries.amplitudes import iter_amplitudes

    for start, mantissa, exponent in iter_amplitudes(circuit, rows, dtype=dtype, chunk=64):
        for k in range(len(mantissa)):
            bits = format_bits(shown[start + k])
            yield amplitude_record(bits, complex(mantissa[k]), int(exponent[k]))


def _amp_line(k: int, r: dict, cell: str, iw: int, bw: int) -> str:
    z = complex(*r["mantissa"])
    e = r["exponent2"]
    prob = scaled_text(abs(z) ** 2, 2 * e, digits=6, sign=False)
    log10 = r["log10_abs"]
    log10 = f"{log10:.6f}" if log10 is not None else "-inf"
    return (
        f"{k:>{iw}}  {cell:<{bw}}  {r['amplitude']:>38}  {prob:>14}  {log10:>12}  {r['phase']:+.6f}"
    )


def _amp_table(records, count: int, width: int, full: bool, order: str, stream) -> None:
    """Print the records as they come (flushing each), so long batches stream.

    The heading is printed with the first row, so a run that fails prints nothing.
    """
    records = iter(records)
    first = next(records, None)
    shown = width if full or width <= 64 else 51
    bw, iw = max(9, shown), max(1, len(str(count - 1)))
    note = "" if full or width <= 64 else "; long bitstrings show both ends (--full-bits: whole)"
    rule = "character i is qubit i" if order == "qubit" else "character j is classical bit j"
    print(
        f"# amplitudes <x|C|0...0>; bitstrings in {order} order ({rule}){note}; phase in radians",
        file=stream,
    )
    print(
        f"{'#':>{iw}}  {'bitstring':<{bw}}  {'amplitude (real, imaginary)':>38}  "
        f"{'|a|^2':>14}  {'log10|a|':>12}  phase",
        file=stream,
    )
    for k, r in enumerate(itertools.chain([first], records) if first else ()):
        cell = r["bits"] if full else bits_cell(r["bits"])
        print(_amp_line(k, r, cell, iw, bw), file=stream, flush=True)


def _cmd_amp(args: argparse.Namespace) -> int:
    import io

    if args.single:
        warn("--single is deprecated and will be removed; use --precision single")
        args.precision = "single"
    circuit = load_circuit(args.circuit, args.input)
    rows, shown = gather_bits(args, circuit)
    noisy = noisy_circuit(args, circuit)
    if noisy is not None:
        return _noisy_probabilities(args, noisy, rows, shown)
    records = _amp_records(circuit, rows, shown, dtype_of(args))
    if args.json:
        doc = {
            "num_qubits": circuit.num_qubits,
            "bit_order": args.bit_order,
            "precision": args.precision,
            "units": {
                "amplitude": "exact decimal text of <x|C|0...0>",
                "real, imag, probability": "floats; null where a double underflows",
                "log10_abs": "log10 |a| (null for a zero amplitude)",
                "phase": "radians in (-pi, pi]",
                "mantissa, exponent2": "a = (mantissa[0] + i mantissa[1]) * 2**exponent2",
            },
            "amplitudes": list(records),
        }
        emit_stats(args, doc)
        write_output(_json_text(doc), args.output)
        return 0
    if args.output:
        buffer = io.StringIO()
        _amp_table(records, len(rows), shown.shape[1], args.full_bits, args.bit_order, buffer)
        write_output(buffer.getvalue(), args.output)
    else:
        _amp_table(records, len(rows), shown.shape[1], args.full_bits, args.bit_order, sys.stdout)
    emit_stats(args)
    return 0


def _noisy_probabilities(args: argparse.Namespace, noisy, rows, shown) -> int:
    """``amp --noise``: a mixed state has no amplitudes; print the probabilities of reading x."""
    from tnsim.circuits.bits import format_bits
    from tnsim.queries.noisy import noisy_probabilities

    probs = noisy_probabilities(noisy, rows, dtype=dtype_of(args))
    pairs = [(format_bits(b), float(p)) for b, p in zip(shown, probs)]
    if args.json:
        doc = {
            "num_qubits": noisy.num_qubits,
            "bit_order": args.bit_order,
            "precision": args.precision,
            "units": {"probability": "<x|rho|x> of reading x, readout errors included"},
            "probabilities": [{"bits": b, "probability": json_float(p)} for b, p in pairs],
        }
        emit_stats(args, doc)
        write_output(_json_text(doc), args.output)
        return 0
    cells = [b if args.full_bits else bits_cell(b) for b, _ in pairs]
    bw = max(9, *(len(c) for c in cells)) if cells else 9
    lines = [f"# probabilities <x|rho|x> of reading x (noisy; {args.bit_order} order)"]
    lines.append(f"{'bitstring':<{bw}}  probability")
    lines += [f"{c:<{bw}}  {p:.12e}" for c, (_, p) in zip(cells, pairs)]
    write_output("\n".join(lines) + "\n", args.output)
    emit_stats(args)
    return 0


# --- the parsers ---


def register(sub) -> None:
    """Add ``amp``, ``marginal``, ``expect``, ``sample`` and ``xeb`` to a subparsers object."""
    circuit_help = "OpenQASM 2.0 or 3 file, or - to read it from standard input"
    amp = sub.add_parser(
        "amp",
        help="amplitudes <x|C|0...0> of bitstrings",
        description="Print amplitudes <x|C|0...0> as exact decimal text (no underflow at any "
        "width), with |a|^2, log10|a| and the phase in radians.",
    )
    amp.add_argument("circuit", help=circuit_help)
    add_input_argument(amp)
    amp.add_argument(
        "--bits", action="append", metavar="BITS", help="a bitstring (repeatable; they accumulate)"
    )
    amp.add_argument(
        "--bits-file",
        metavar="FILE",
        help="file of bitstrings (- for standard input): one per line, bits,count lines, or "
        "JSON (tnsim sample --json output, an object of counts); rows print as computed",
    )
    amp.add_argument(
        "--full-bits",
        action="store_true",
        help="print whole bitstrings (default: both ends of those over 64 characters; --json "
        "always holds whole ones)",
    )
    amp.add_argument("--single", action="store_true", help=argparse.SUPPRESS)
    add_noise_argument(amp, "prints the probabilities <x|rho|x> of reading x instead")
    add_query_arguments(amp)
    amp.set_defaults(func=_cmd_amp)

    m = sub.add_parser(
        "marginal",
        help="outcome probabilities of a few qubits",
        description="Print the probabilities of the outcomes of the listed qubits, summed over "
        "all others (light-cone-reduced doubled network). Character j of an outcome is the "
        "j-th listed qubit.",
    )
    m.add_argument("circuit", help=circuit_help)
    add_input_argument(m)
    m.add_argument(
        "--qubits",
        required=True,
        action="append",
        metavar="LIST",
        help="e.g. 0,3,5 (repeatable; the lists accumulate in order)",
    )
    add_noise_argument(m, "readout errors included")
    add_query_arguments(m, bit_order=False)
    m.set_defaults(func=_cmd_marginal)

    e = sub.add_parser(
        "expect",
        help="expectation value of a weighted sum of Pauli strings",
        description="Print <0|C† H C|0> for H written like '0.5 Z0 Z1 - 1.2 X3 + 0.7' "
        "(Pauli letter then qubit index; real coefficients; I or a bare number is the "
        "identity). Terms whose light cones match up to renaming qubits are contracted once. "
        "A value that starts with '-' is written --observable=-Z0 (or --observable -Z0).",
    )
    e.add_argument("circuit", help=circuit_help)
    add_input_argument(e)
    e.add_argument(
        "--observable",
        action="append",
        metavar="TEXT",
        help="e.g. '0.5 Z0 Z1 - 1.2 X3 + 0.7' (repeatable: the terms are summed)",
    )
    e.add_argument(
        "--observable-file",
        metavar="FILE",
        help="one term per line ('#' starts a comment; - for standard input); added to "
        "any --observable terms",
    )
    add_noise_argument(e, "readout errors included")
    add_query_arguments(e, bit_order=False)
    e.set_defaults(func=_cmd_expect)

    s = sub.add_parser(
        "sample",
        help="exact samples of the output distribution",
        description="Draw exact samples x from |<x|C|0...0>|^2 (gate by gate from amplitudes, "
        "or the chain rule of marginals) and write one bitstring per line, or JSON with "
        "--json; xeb and amp --bits-file read either back.",
    )
    s.add_argument("circuit", help=circuit_help)
    add_input_argument(s)
    s.add_argument(
        "--shots",
        type=count_type("--shots", 0, 10**12),
        required=True,
        metavar="N",
        help="number of samples",
    )
    s.add_argument("--seed", type=seed_type, default=0, help="random seed, 0 or more (default 0)")
    s.add_argument(
        "--block",
        type=count_type("--block", 1, 16),
        default=5,
        help="qubits per chain-rule step, 1 to 16 (default 5)",
    )
    s.add_argument(
        "--method",
        choices=("auto", "gates", "marginals"),
        default="auto",
        help="gates: gate by gate from amplitudes; marginals: chain rule over light cones; "
        "auto (default): all amplitudes at once up to 20 qubits, gate by gate beyond",
    )
    add_noise_argument(
        s,
        "auto: exact up to 20 qubits, else quantum trajectories; gates: trajectories; "
        "marginals: chain rule",
    )
    add_query_arguments(s)
    s.set_defaults(func=_cmd_sample)

    x = sub.add_parser(
        "xeb",
        help="linear cross-entropy fidelity of samples",
        description="Linear XEB fidelity F = 2^n mean p(x) - 1 of the bitstrings in SAMPLES, "
        "with its standard error; shown in mantissa-exponent form with log10(F + 1), which "
        "stays exact where F leaves the range of a float. Count files weight each bitstring.",
    )
    x.add_argument("circuit", help=circuit_help)
    add_input_argument(x)
    x.add_argument(
        "samples",
        nargs="?",
        help="bitstrings (- for standard input): one per line, bits,count lines (device "
        "counts), JSON of tnsim sample --json, or a JSON object of counts (optional with "
        "--noise)",
    )
    add_noise_argument(x, "adds the predicted fidelity: exact up to 16 qubits, and digital")
    add_query_arguments(x)
    x.set_defaults(func=_cmd_xeb)
