"""Input files read at the door: includes stay in their folder, lines are lines, echoes short."""

import os

import numpy as np
import pytest

from tnsim.circuits.bits import read_bits_file
from tnsim.circuits.qasm import read_qasm
from tnsim.errors import InputError, QasmError

HEAD = 'OPENQASM 2.0;\ninclude "qelib1.inc";\n'


def test_include_through_a_symlink_out_of_the_folder_is_refused_unread(tmp_path):
    secret = tmp_path / "outside" / "secret.txt"
    secret.parent.mkdir()
    secret.write_text("topsecretword x:0:0\n")
    folder = tmp_path / "circuit"
    folder.mkdir()
    (folder / "defs.inc").symlink_to(secret)
    (folder / "c.qasm").write_text(HEAD + 'include "defs.inc";\nqreg q[1];\n')
    with pytest.raises(QasmError, match="outside the circuit's folder") as info:
        read_qasm(folder / "c.qasm")
    assert "topsecretword" not in str(info.value)


def test_include_through_a_symlink_inside_the_folder_is_read(tmp_path):
    (tmp_path / "real.inc").write_text("gate flip a { x a; }\n")
    (tmp_path / "defs.inc").symlink_to("real.inc")
    (tmp_path / "c.qasm").write_text(HEAD + 'include "defs.inc";\nqreg q[1];\nflip q[0];\n')
    assert [op.name for op in read_qasm(tmp_path / "c.qasm").ops] == ["x"]


def test_cr_only_qasm_reports_true_line_numbers(tmp_path):
    path = tmp_path / "cr.qasm"
    path.write_bytes(b'OPENQASM 2.0;\rinclude "qelib1.inc";\rqreg q[2];\rh q[0];\rfoo q[1];\r')
    with pytest.raises(QasmError, match=r"cr\.qasm:5:1: unknown gate 'foo'"):
        read_qasm(path)
    path.write_bytes(b"OPENQASM 2.0;\r// a comment\rqreg q[2];\rU(0,0,0) q[0];\r")
    assert len(read_qasm(path).ops) == 1  # the comment ends at its line's end


def test_a_20_mb_token_is_not_echoed(tmp_path):
    path = tmp_path / "huge.qasm"
    path.write_text(HEAD + "qreg q[2];\n" + "x" * 20_000_000 + " q[0];\n")
    with pytest.raises(QasmError, match=r"huge\.qasm:4:1: .*20000000 characters") as info:
        read_qasm(path)
    assert len(str(info.value)) < 300


def test_bit_files_split_on_newlines_only(tmp_path):
    path = tmp_path / "bits.txt"
    path.write_bytes(b"0101\n01\x0c01\n1111\n")  # a form feed is not a line break here
    with pytest.raises(InputError, match=r"bits\.txt:2:1: .*'\\x0c' at position 2"):
        read_bits_file(path, 4)
    path.write_bytes(b"01\n0\x1c1\n")
    with pytest.raises(InputError, match=r"bits\.txt:2:1"):
        read_bits_file(path, 2)


def test_cr_only_bit_files_report_true_line_numbers(tmp_path):
    path = tmp_path / "cr.txt"
    path.write_bytes(b"0101\r1111\r\r0121\r")
    with pytest.raises(InputError, match=r"cr\.txt:4:1: .*'2' at position 2"):
        read_bits_file(path, 4)
    path.write_bytes(b"0101\r\n1111\r0000\n")
    assert read_bits_file(path, 4).tolist() == [[0, 1, 0, 1], [1, 1, 1, 1], [0, 0, 0, 0]]


def test_bit_file_error_quotes_at_most_a_few_dozen_characters(tmp_path):
    path = tmp_path / "long.txt"
    path.write_text("01" + "z" * 1_000_000 + "\n")
    with pytest.raises(InputError) as info:
        read_bits_file(path, 2)
    assert len(str(info.value)) < 300 and os.fspath(path) in str(info.value)
    assert np.array_equal(read_bits_file(_write(tmp_path, "ok.txt", "01\n"), 2), [[0, 1]])


def _write(folder, name, text):
    path = folder / name
    path.write_text(text)
    return path
