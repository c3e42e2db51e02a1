"""Mutation fuzzing of every text reader: only tnsim's own errors, no hang, nothing read wrong.

Seed corpora of valid OpenQASM programs, observables, qubit lists and bitstrings
are mutated (characters flipped, inserted, deleted, duplicated, swapped;
numbers replaced by extreme ones; pieces of other entries spliced in;
non-ASCII digits, NULs and odd line breaks slipped in) with a seeded
generator.  Each mutant is read; it must be read or refused with a
:class:`~tnsim.errors.TnsimError`, within a few seconds, and what is read
must be valid (finite coefficients, qubits in range, 0/1 bits, ASCII digits).
A few thousand cases run by default, over 10^5 in the slow set.
"""

from __future__ import annotations

import random
import resource
import signal
from collections.abc import Callable

import numpy as np
import pytest

from tnsim.circuits.bits import parse_bits
from tnsim.circuits.qasm import read_qasm
from tnsim.cli.inputs import parse_qubit_list
from tnsim.errors import TnsimError
from tnsim.queries.observables import parse_observable

QASM = [
    'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[3];\ncreg c[3];\nh q[0];\ncx q[0],q[1];\n'
    "rz(pi/4) q[2];\nu3(0.1,0.2,-0.3) q[1];\nbarrier q;\nmeasure q -> c;\n",
    'OPENQASM 2.0;\ninclude "qelib1.inc";\ngate g(a) x, y { rx(a/2) x; cz x, y; }\n'
    "qreg a[2];\nqreg b[2];\ng(sin(0.3)^2) a[0], b[1];\nh a;\nccx a[0], a[1], b[0];\n",
    "OPENQASM 2.0;\nqreg q[2];\nU(pi, 0, pi) q[0];\nCX q[0], q[1];  // the two built-ins\n",
    'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg r[4];\nswap r[0], r[3];\ncu1(-1e-3) r[1], r[2];\n'
    "rzz(2*pi/3) r[2], r[3];\nsx r;\n",
]
OBSERVABLES = [
    "0.5 Z0 Z1 - 1.2 X3 + 0.7",
    "Z0*Z1 + Z1*Z2 - 2e-3 X0 Y1 Z5",
    "-1.5 I + x2 y4",
    "3 * Z7 - .25 X6*Y5",
]
QUBIT_LISTS = ["0,3,5", " 4, 0,2 ", "7", "1,2,3,4,5,6"]
BITSTRINGS = ["01100101", "11111111", "00000000", "10101010"]

EXTREMES = ["9" * 30, "0", "-1", "1e999", "nan", "inf", "4294967296", "2147483648", ".", "1e-400"]
ODD = ["\u0661", "\u00b2", "\u0663", "\u00e9", "\u2028", "\x00", "\r", "\r\n", "\x0c", "\t", "\x1c"]


def mutate(rng: random.Random, text: str, corpus: list[str], alphabet: str) -> str:
    """One to three random edits of ``text``."""
    for _ in range(rng.randint(1, 3)):
        kind = rng.randrange(8)
        i = rng.randrange(len(text) + 1)
        j = min(len(text), i + rng.randint(1, 12))
        if kind == 0:  # replace a character
            text = text[:i] + rng.choice(alphabet) + text[i + 1 :]
        elif kind == 1:  # insert characters
            text = text[:i] + "".join(rng.choices(alphabet, k=rng.randint(1, 4))) + text[i:]
        elif kind == 2:  # delete a stretch
            text = text[:i] + text[j:]
        elif kind == 3:  # duplicate a stretch
            text = text[:j] + text[i:j] + text[j:]
        elif kind == 4:  # an extreme number in place of a digit run
            runs = [k for k, ch in enumerate(text) if ch.isdigit()]
            if runs:
                k = rng.choice(runs)
                end = k
                while end < len(text) and text[end].isdigit():
                    end += 1
                text = text[:k] + rng.choice(EXTREMES) + text[end:]
        elif kind == 5:  # an odd character: other scripts' digits, NUL, line breaks
            text = text[:i] + rng.choice(ODD) + text[i:]
        elif kind == 6:  # splice in a piece of another entry
            other = rng.choice(corpus)
            a = rng.randrange(len(other) + 1)
            text = text[:i] + other[a : a + rng.randint(1, 30)] + text[j:]
        else:  # swap two stretches
            k = rng.randrange(len(text) + 1)
            a, b = sorted((i, k))
            text = text[a:b][::-1] + text[:a] + text[b:] if rng.random() < 0.3 else text
    return text


class _Hang(Exception):
    pass


def _alarm(signum, frame):
    raise _Hang


def run_fuzz(
    corpus: list[str],
    read: Callable[[str], object],
    check: Callable[[str, object], None],
    cases: int,
    seed: int,
    alphabet: str,
    seconds: float = 5.0,
) -> dict[str, int]:
    """Mutate and read ``cases`` texts; return how many were read and refused."""
    rng = random.Random(seed)
    counts = {"read": 0, "refused": 0}
    old = signal.signal(signal.SIGALRM, _alarm)
    try:
        for _ in range(cases):
            text = mutate(rng, rng.choice(corpus), corpus, alphabet)
            signal.setitimer(signal.ITIMER_REAL, seconds)
            try:
                value = read(text)
            except TnsimError as exc:
                message = str(exc)
                counts["refused"] += 1
                assert "\n" not in message, f"a multi-line message for {text!r}"
                continue
            except _Hang:
                pytest.fail(f"reading took over {seconds} s: {text[:200]!r}")
            except Exception as exc:
                pytest.fail(f"{type(exc).__name__}: {str(exc)[:200]} escaped for {text[:300]!r}")
            finally:
                signal.setitimer(signal.ITIMER_REAL, 0)
            check(text, value)
            counts["read"] += 1
    finally:
        signal.signal(signal.SIGALRM, old)
    return counts


def _check_circuit(text, circuit) -> None:
    assert circuit.num_qubits >= 1
    for op in circuit.ops:
        assert all(0 <= q < circuit.num_qubits for q in op.qubits)
        assert all(np.isfinite(p) for p in op.params if isinstance(p, float))


def _check_observable(text, obs) -> None:
    assert all(ch.isascii() or ch.isspace() for ch in text)  # no other script's digits
    for term in obs.terms:
        assert np.isfinite(term.coefficient)
        assert all(0 <= q < 8 and p in "XYZ" for q, p in term.paulis)


def _check_qubits(text, qubits) -> None:
    items = [part.strip() for part in text.split(",")]
    assert all(item.isascii() and item.isdigit() for item in items)
    assert qubits == [int(item) for item in items]


def _check_bits(text, bits) -> None:
    assert set(np.unique(bits)) <= {0, 1} and len(bits) == 8
    assert "".join(map(str, bits)) == text.strip()


TARGETS = {
    "qasm": (QASM, read_qasm, _check_circuit, "qregcxhu3()[]{};,->+-*/^pi0123456789 \n\"'."),
    "observable": (
        OBSERVABLES,
        lambda t: parse_observable(t, 8),
        _check_observable,
        "XYZIxyzi0123456789.eE+-* ",
    ),
    "qubit list": (QUBIT_LISTS, parse_qubit_list, _check_qubits, "0123456789, -+"),
    "bitstring": (BITSTRINGS, lambda t: parse_bits(t, 8), _check_bits, "01 2x"),
}


def _peak_mib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


@pytest.mark.parametrize("target", list(TARGETS))
def test_mutants_are_read_or_refused_by_tnsim(target):
    corpus, read, check, alphabet = TARGETS[target]
    cases = 1500 if target == "qasm" else 1000
    before = _peak_mib()
    counts = run_fuzz(corpus, read, check, cases, seed=len(target) * 1000 + 18, alphabet=alphabet)
    assert counts["refused"] > cases // 10 and counts["read"] > 0  # the mutations bite
    assert _peak_mib() - before < 500  # no memory blow-up


@pytest.mark.slow
@pytest.mark.parametrize("target", list(TARGETS))
def test_mutants_at_scale(target):
    corpus, read, check, alphabet = TARGETS[target]
    cases = 40_000 if target == "qasm" else 25_000  # 115,000 in all
    before = _peak_mib()
    counts = run_fuzz(corpus, read, check, cases, seed=18 + len(target), alphabet=alphabet)
    assert counts["refused"] + counts["read"] == cases
    assert _peak_mib() - before < 500
