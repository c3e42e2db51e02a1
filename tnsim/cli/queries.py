"""The query subcommands: ``amp``, ``marginal``, ``expect``, ``sample`` and ``xeb``.

Registered on the ``tnsim`` parser by :func:`register`.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from typing import Any

import numpy as np

from tnsim.circuits.bits import format_bits, parse_many, read_bits_file
from tnsim.circuits.circuit import Circuit
from tnsim.cli.common import BITS_HELP, add_run_arguments, load_circuit, write_output
from tnsim.errors import InputError

__all__ = ["parse_qubit_list", "register"]

_BITS = "character i of a bitstring is qubit i (the leftmost character is qubit 0)"


def parse_qubit_list(text: str) -> list[int]:
    """Parse ``"0,3,5"`` into ``[0, 3, 5]``.

    Examples
    --------
    >>> parse_qubit_list(" 4, 0,2 ")
    [4, 0, 2]
    """
    out = []
    for k, part in enumerate(text.split(",")):
        item = part.strip()
        if not item.isdigit():
            raise InputError(
                f"--qubits: item {k + 1} is {item!r}, not a qubit index; write e.g. --qubits 0,3,5"
            )
        out.append(int(item))
    return out


def _cmd_marginal(args: argparse.Namespace) -> int:
    from tnsim.queries.marginals import marginal

    circuit = load_circuit(args.circuit)
    qubits = parse_qubit_list(args.qubits)
    probs = marginal(circuit, qubits)
    k = len(qubits)
    outcomes = [format_bits([(i >> (k - 1 - j)) & 1 for j in range(k)]) for i in range(1 << k)]
    if args.json:
        print(json.dumps({"qubits": qubits, "outcomes": outcomes, "probabilities": probs.tolist()}))
        return 0
    print(
        f"qubits {','.join(map(str, qubits))} (character j of an outcome is the j-th listed qubit)"
    )
    width = max(7, k)
    print(f"{'outcome':<{width}}  probability")
    for bits, p in zip(outcomes, probs):
        print(f"{bits:<{width}}  {p:.12f}")
    return 0


def _read_observable(args: argparse.Namespace) -> str:
    if (args.observable is None) == (args.observable_file is None):
        raise InputError("give exactly one of --observable TEXT and --observable-file FILE")
    if args.observable is not None:
        return args.observable
    try:
        with open(args.observable_file, encoding="utf-8") as fh:
            lines = [line.split("#", 1)[0].strip() for line in fh]
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read observable file {args.observable_file!r}: {exc}") from None
    terms = [line for line in lines if line]
    if not terms:
        raise InputError(f"{args.observable_file}: no terms found; write one term per line")
    return " ".join(t if t[0] in "+-" else "+ " + t for t in terms)


def _cmd_expect(args: argparse.Namespace) -> int:
    from tnsim.queries.expectation import TermCache
    from tnsim.queries.observables import parse_observable

    circuit = load_circuit(args.circuit)
    obs = parse_observable(_read_observable(args), circuit.num_qubits)
    cache = TermCache(circuit)
    rows: list[dict[str, Any]] = []
    for term in obs.terms:
        value = cache.value(term.paulis)
        pauli = " ".join(f"{p}{q}" for q, p in term.paulis) or "I"
        rows.append({"coefficient": term.coefficient, "pauli": pauli, "expectation": value})
    total = float(sum(r["coefficient"] * r["expectation"] for r in rows))
    if args.json:
        print(json.dumps({"value": total, "terms": rows, "contractions": cache.misses}))
        return 0
    width = max(12, *(len(r["pauli"]) for r in rows))
    print(f"{'coefficient':>14}  {'Pauli string':<{width}}  expectation")
    for r in rows:
        print(f"{r['coefficient']:14.8g}  {r['pauli']:<{width}}  {r['expectation']:+.12f}")
    print(f"total {total:+.12f}  ({len(rows)} terms, {cache.misses} contractions)")
    return 0


def _cmd_sample(args: argparse.Namespace) -> int:
    from tnsim.queries.sampling import sample

    if args.shots < 0:
        raise InputError(f"--shots must be non-negative, got {args.shots}")
    circuit = load_circuit(args.circuit)
    out = sample(circuit, args.shots, seed=args.seed, block=args.block, method=args.method)
    lines = [format_bits(row) for row in out]
    if args.json:
        text = json.dumps({"num_qubits": circuit.num_qubits, "seed": args.seed, "samples": lines})
        text += "\n"
    else:
        text = "".join(line + "\n" for line in lines)
    write_output(text, args.output)
    return 0


def _cmd_xeb(args: argparse.Namespace) -> int:
    from tnsim.queries.xeb import xeb

    circuit = load_circuit(args.circuit)
    if not os.path.isfile(args.samples):
        raise InputError(f"{args.samples}: no such file; give a file with one bitstring per line")
    rows = read_bits_file(args.samples, circuit.num_qubits)
    r = xeb(circuit, rows)
    if args.json:
        print(
            json.dumps(
                {
                    "fidelity": r.fidelity,
                    "standard_error": r.standard_error,
                    "num_samples": r.num_samples,
                }
            )
        )
        return 0
    print(f"linear XEB fidelity  {r.fidelity:+.6f}")
    print(f"standard error        {r.standard_error:.6f}")
    print(f"samples               {r.num_samples}")
    return 0


def _gather_bits(args: argparse.Namespace, n: int) -> np.ndarray:
    rows = []
    if args.bits:
        rows.append(parse_many(args.bits, n))
    if args.bits_file:
        rows.append(read_bits_file(args.bits_file, n))
    if not rows:
        raise InputError("give at least one bitstring with --bits or --bits-file")
    return np.concatenate(rows)


def _amp_rows(circuit: Circuit, rows: np.ndarray, dtype):
    """Yield one record per bitstring, chunk by chunk as the batch is contracted."""
    from tnsim.network.scaled import Scaled
    from tnsim.queries.amplitudes import iter_amplitudes

    for start, mantissa, exponent in iter_amplitudes(circuit, rows, dtype=dtype, chunk=64):
        for k in range(len(mantissa)):
            a = Scaled(np.asarray(mantissa[k]), int(exponent[k]))
            value = complex(a)
            yield {
                "bits": format_bits(rows[start + k]),
                "real": value.real,
                "imag": value.imag,
                "probability": abs(value) ** 2,
                "log10_abs": a.log10_abs(),
                "phase": a.phase(),
            }


def _print_amp_table(rows, num_bits: int, stream=None) -> None:
    """Print records as they come (flushing each), so long batches stream."""
    stream = stream or sys.stdout
    width = max(12, num_bits) if num_bits <= 64 else 12
    print(f"{'bitstring':<{width}}  {'amplitude':>34}  {'probability':>12}  log10|a|", file=stream)
    for r in rows:
        bits = r["bits"] if len(r["bits"]) <= 64 else r["bits"][:9] + "..."
        amp = f"{r['real']:+.10e}{r['imag']:+.10e}j"
        print(
            f"{bits:<{width}}  {amp:>34}  {r['probability']:12.6e}  {r['log10_abs']:.6f}",
            file=stream,
            flush=True,
        )


def _cmd_amp(args: argparse.Namespace) -> int:
    circuit = load_circuit(args.circuit)
    rows = _gather_bits(args, circuit.num_qubits)
    dtype = np.complex64 if args.single else np.complex128
    result = _amp_rows(circuit, rows, dtype)
    if args.json:
        print(json.dumps({"num_qubits": circuit.num_qubits, "amplitudes": list(result)}))
    else:
        _print_amp_table(result, circuit.num_qubits)
    return 0


def register(sub) -> None:
    """Add ``amp``, ``marginal``, ``expect``, ``sample`` and ``xeb`` to a subparsers object."""
    amp = sub.add_parser(
        "amp",
        help="amplitudes <x|C|0...0> of bitstrings",
        description=f"Print amplitudes <x|C|0...0>. {BITS_HELP}.",
    )
    amp.add_argument("circuit", help="OpenQASM 2.0 file")
    amp.add_argument(
        "--bits", action="append", metavar="BITS", help=f"a bitstring (repeatable); {BITS_HELP}"
    )
    amp.add_argument(
        "--bits-file",
        metavar="FILE",
        help="file with one bitstring per line; rows are printed as they are computed",
    )
    amp.add_argument("--single", action="store_true", help="contract in complex64")
    amp.add_argument("--json", action="store_true", help="machine-readable output")
    add_run_arguments(amp)
    amp.set_defaults(func=_cmd_amp)

    m = sub.add_parser(
        "marginal",
        help="outcome probabilities of a few qubits",
        description="Print the probabilities of the outcomes of the listed qubits, summed over "
        "all others (light-cone-reduced doubled network). Character j of an outcome is the "
        f"j-th listed qubit. Bitstrings elsewhere: {_BITS}.",
    )
    m.add_argument("circuit", help="OpenQASM 2.0 file")
    m.add_argument("--qubits", required=True, metavar="LIST", help="e.g. 0,3,5")
    m.add_argument("--json", action="store_true", help="machine-readable output")
    m.set_defaults(func=_cmd_marginal)

    e = sub.add_parser(
        "expect",
        help="expectation value of a weighted sum of Pauli strings",
        description="Print <0|C† H C|0> for H written like '0.5 Z0 Z1 - 1.2 X3 + 0.7' "
        "(Pauli letter then qubit index; real coefficients; I or a bare number is the "
        "identity). Terms whose light cones match up to renaming qubits are contracted once.",
    )
    e.add_argument("circuit", help="OpenQASM 2.0 file")
    e.add_argument("--observable", metavar="TEXT", help="e.g. '0.5 Z0 Z1 - 1.2 X3 + 0.7'")
    e.add_argument(
        "--observable-file", metavar="FILE", help="one term per line ('#' starts a comment)"
    )
    e.add_argument("--json", action="store_true", help="machine-readable output")
    e.set_defaults(func=_cmd_expect)

    s = sub.add_parser(
        "sample",
        help="exact samples of the output distribution",
        description="Draw exact samples x from |<x|C|0...0>|^2 (chain rule of marginals, "
        f"or gate by gate from amplitudes) and write one bitstring per line; {_BITS}.",
    )
    s.add_argument("circuit", help="OpenQASM 2.0 file")
    s.add_argument("--shots", type=int, required=True, metavar="N", help="number of samples")
    s.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    s.add_argument("--block", type=int, default=5, help="qubits per chain-rule step (default 5)")
    s.add_argument(
        "--method",
        choices=("auto", "gates", "marginals"),
        default="auto",
        help="gates: gate by gate from amplitudes; marginals: chain rule over light cones; "
        "auto (default): all amplitudes at once up to 20 qubits, gate by gate beyond",
    )
    s.add_argument("-o", "--output", metavar="FILE", help="output file (default: stdout)")
    s.add_argument("--json", action="store_true", help="write JSON instead of lines")
    s.set_defaults(func=_cmd_sample)

    x = sub.add_parser(
        "xeb",
        help="linear cross-entropy fidelity of samples",
        description="Linear XEB fidelity F = 2^n mean p(x) - 1 of the bitstrings in SAMPLES "
        f"(one per line; {_BITS}) with its standard error.",
    )
    x.add_argument("circuit", help="OpenQASM 2.0 file")
    x.add_argument("samples", help="file with one bitstring per line")
    x.add_argument("--json", action="store_true", help="machine-readable output")
    x.set_defaults(func=_cmd_xeb)
    for name in ("amp", "marginal", "expect", "sample", "xeb"):
        if name != "amp":
            add_run_arguments(sub.choices[name])
