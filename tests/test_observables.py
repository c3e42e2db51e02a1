"""The text form of observables: parsing, errors with columns, round trips."""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tnsim.errors import InputError
from tnsim.queries.observables import Observable, PauliTerm, parse_observable


def test_documented_example():
    obs = parse_observable("0.5 Z0 Z1 - 1.2 X3 + 0.7")
    assert obs.terms == (
        PauliTerm(0.5, ((0, "Z"), (1, "Z"))),
        PauliTerm(-1.2, ((3, "X"),)),
        PauliTerm(0.7, ()),
    )


@pytest.mark.parametrize(
    ("text", "terms"),
    [
        ("Z0*Z1 + Z1*Z2", [(1.0, ((0, "Z"), (1, "Z"))), (1.0, ((1, "Z"), (2, "Z")))]),
        ("-2e-3 * x0 y1 Z5", [(-0.002, ((0, "X"), (1, "Y"), (5, "Z")))]),
        ("Y7 X2", [(1.0, ((2, "X"), (7, "Y")))]),
        ("I", [(1.0, ())]),
        ("3 I4 - Z1", [(3.0, ()), (-1.0, ((1, "Z"),))]),
        ("  .5Z10  ", [(0.5, ((10, "Z"),))]),
    ],
)
def test_forms(text, terms):
    got = parse_observable(text)
    assert [(t.coefficient, t.paulis) for t in got.terms] == terms


@pytest.mark.parametrize(
    ("text", "column", "words"),
    [
        ("0.5 Q1", 5, "unexpected character 'Q'"),
        ("Z0 Z0", 4, "appears twice"),
        ("Z0 Z1 3", 7, "unexpected '3'"),
        ("", 1, "empty"),
        ("Z0 +", 5, "expected a coefficient"),
        ("Z0 * + Z1", 4, "'*' must be followed"),
        ("Z0 0.5 Z1", 4, "unexpected '0.5'"),
        ("Z0 - 1e999 X1", 6, "not finite"),
    ],
)
def test_errors_name_the_column(text, column, words):
    with pytest.raises(InputError, match=f"column {column}: .*{words}"):
        parse_observable(text)


def test_mapping_and_range_check():
    assert parse_observable({3: "z", 1: "X", 2: "I"}).terms[0].paulis == ((1, "X"), (3, "Z"))
    with pytest.raises(InputError, match="use 'X', 'Y', 'Z'"):
        parse_observable({0: "Q"})
    with pytest.raises(InputError, match="circuit has 4 qubit"):
        parse_observable("Z4", num_qubits=4)
    with pytest.raises(InputError, match="must be text"):
        parse_observable(3.0)


_term = st.tuples(
    st.floats(-100, 100, allow_nan=False).map(lambda x: round(x, 3)),
    st.dictionaries(st.integers(0, 30), st.sampled_from("XYZ"), max_size=4),
)


@settings(max_examples=60, deadline=None)
@given(st.lists(_term, min_size=1, max_size=5))
def test_text_round_trip(terms):
    obs = Observable(tuple(PauliTerm(float(c), tuple(sorted(f.items()))) for c, f in terms))
    back = parse_observable(str(obs))
    assert len(back.terms) == len(obs.terms)
    for a, b in zip(back.terms, obs.terms):
        assert a.paulis == b.paulis
        assert a.coefficient == pytest.approx(b.coefficient, rel=1e-5, abs=1e-9)


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("0.5*", r"'\*' must be followed by a Pauli factor"),
        ("Z١", r"'Z' must be followed by a qubit index"),  # Arabic-Indic digit one
        ("X²", r"'X' must be followed by a qubit index"),
        ("Z" + "1" * 5000, r"qubit index '1{20}'\.\.\. is too large"),
    ],
)
def test_trailing_operators_non_ascii_digits_and_huge_indices_are_refused(text, match):
    with pytest.raises(InputError, match=match) as info:
        parse_observable(text)
    assert len(str(info.value)) < 250  # the offending text is quoted short
