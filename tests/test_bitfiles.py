"""Bitstring files: plain lines, count files, JSON, and the classical-bit order."""

from __future__ import annotations

import json

import numpy as np
import pytest

from tnsim.circuits.bitfiles import (
    from_qubit_order,
    order_width,
    parse_bit_records,
    read_bit_records,
    to_qubit_order,
)
from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError


def test_plain_lines_with_comments_blank_lines_and_crlf():
    r = parse_bit_records("# head\r\n0101\r\n\r\n1111  # note\n", 4)
    assert r.rows.tolist() == [[0, 1, 0, 1], [1, 1, 1, 1]]
    assert r.counts.tolist() == [1, 1]


def test_count_lines_with_a_header_mixed_with_plain_lines():
    r = parse_bit_records("bitstring,count\n011, 7\n110,0\n000\n", 3)
    assert r.rows.tolist() == [[0, 1, 1], [1, 1, 0], [0, 0, 0]]
    assert r.counts.tolist() == [7, 0, 1]
    assert r.total == 8


def test_json_layouts():
    sample_doc = {"num_qubits": 2, "bit_order": "qubit", "samples": ["01", "11"]}
    assert parse_bit_records(json.dumps(sample_doc), 2).rows.tolist() == [[0, 1], [1, 1]]
    counts = parse_bit_records('{"counts": {"10": 4, "01": 1}}', 2)
    assert counts.counts.tolist() == [4, 1]
    plain = parse_bit_records('{"10": 2}', 2)
    assert plain.rows.tolist() == [[1, 0]] and plain.total == 2
    assert parse_bit_records('["00", "11"]', 2).total == 2


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("01\n0a\n", r"<text>:2:1: bitstring has 'a' at position 1"),
        ("01\n011\n", r"<text>:2:1: bitstring '011' has 3 character"),
        ("01,x\n", r"<text>:1:1: count 'x'"),
        ("01,-3\n", r"count '-3'"),
        ("01,٣\n", r"count"),  # non-ASCII digit
        ("# nothing\n", r"no bitstrings"),
        ('{"samples": 3}', r"JSON must be"),
        ('{"01": 1.5}', r"count 1.5"),
        ('{"01": true}', r"count True"),
        ("{bad json", r"not valid JSON"),
    ],
)
def test_malformed_input_names_the_place(text, match):
    with pytest.raises(InputError, match=match):
        parse_bit_records(text, 2)


def test_a_json_file_in_another_order_is_refused():
    doc = json.dumps({"bit_order": "classical", "samples": ["01"]})
    with pytest.raises(InputError, match="give --bit-order classical"):
        parse_bit_records(doc, 2, order="qubit")


def test_read_bit_records_errors(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_bit_records(tmp_path / "missing.txt", 2)
    with pytest.raises(InputError, match="is a folder"):
        read_bit_records(tmp_path, 2)
    (tmp_path / "ok.txt").write_text("01\n")
    assert read_bit_records(tmp_path / "ok.txt", 2).total == 1


def test_classical_order_round_trip_and_gaps():
    # measure q[0] -> c[2]; measure q[1] -> c[0]; measure q[2] -> c[3]; c[1] is never filled.
    c = Circuit(3).measure(0, 2).measure(1, 0).measure(2, 3)
    assert order_width(c, "classical") == 4
    rows = np.array([[1, 0, 1], [0, 1, 1]], dtype=np.uint8)
    written = from_qubit_order(rows, c, "classical")
    assert written.tolist() == [[0, 0, 1, 1], [1, 0, 0, 1]]
    assert to_qubit_order(written, c, "classical").tolist() == rows.tolist()
    assert to_qubit_order(rows, c, "qubit").tolist() == rows.tolist()


def test_classical_order_needs_every_qubit_measured_and_consistent_copies():
    with pytest.raises(InputError, match="no measure statements"):
        order_width(Circuit(2), "classical")
    with pytest.raises(InputError, match="qubit 1 is read by no measure"):
        to_qubit_order(np.zeros((1, 1), np.uint8), Circuit(2).measure(0, 0), "classical")
    twice = Circuit(1).measure(0, 0).measure(0, 1)
    assert to_qubit_order(np.array([[1, 1]], np.uint8), twice, "classical").tolist() == [[1]]
    with pytest.raises(InputError, match="both read qubit 0 but differ"):
        to_qubit_order(np.array([[1, 0]], np.uint8), twice, "classical")
    with pytest.raises(InputError, match="bit order"):
        order_width(twice, "msb")
