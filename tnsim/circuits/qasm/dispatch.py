"""One door for both OpenQASM versions: the version line chooses the reader.

:func:`read_qasm` looks at the header (``OPENQASM 2.0;`` or ``OPENQASM 3.0;``,
after any blanks and comments) and hands the program to the OpenQASM 2.0 reader
(:func:`tnsim.circuits.qasm.reader.read_qasm`) or the OpenQASM 3 reader
(:func:`tnsim.circuits.qasm3.read_qasm3`); a program without a header, or with
another version, goes to the 2.0 reader, which reports it.  :func:`write_qasm`
writes either version.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping, Sequence
from pathlib import Path

from tnsim.circuits.circuit import Circuit
from tnsim.circuits.qasm.files import names_file
from tnsim.circuits.qasm.reader import DEFAULT_MAX_OPS
from tnsim.circuits.qasm.reader import read_qasm as read_qasm2
from tnsim.circuits.qasm.writer import write_qasm as write_qasm2
from tnsim.circuits.qasm3.lexer import SKIP
from tnsim.circuits.qasm3.reader import check_unbound, read_qasm3
from tnsim.circuits.qasm3.writer import write_qasm3
from tnsim.errors import InputError

__all__ = ["qasm_version", "read_qasm", "write_qasm"]

_HEADER_RE = re.compile("\ufeff?" + SKIP + r"OPENQASM[ \t\r\n]+([0-9]+(?:\.[0-9]*)?)")
_HEAD_BYTES = 1 << 16


def qasm_version(text: str) -> str | None:
    r"""The major version named by the header of ``text`` (``"2"``, ``"3"`` ...), or ``None``.

    Examples
    --------
    >>> qasm_version("// generated\nOPENQASM 3;"), qasm_version("OPENQASM 2.0;"), qasm_version("h")
    ('3', '2', None)
    """
    match = _HEADER_RE.match(text)
    return None if match is None else match.group(1).split(".")[0]


def _head(path: Path) -> str:
    """The start of a file, enough to find its header (unreadable files go to the reader)."""
    try:
        with open(path, "rb") as fh:
            data = fh.read(_HEAD_BYTES)
    except OSError:
        return ""
    return data.decode("utf-8", errors="ignore")


def read_qasm(
    path_or_text: str | os.PathLike,
    *,
    max_ops: int = DEFAULT_MAX_OPS,
    inputs: Mapping[str, float] | None = None,
    unbound: str = "refuse",
    name: str | None = None,
) -> Circuit:
    """Read an OpenQASM 2.0 or 3 program (the header says which) into a Circuit.

    Parameters
    ----------
    path_or_text : str or os.PathLike
        A path, or a string naming an existing file, is read as a file; any other
        string is the program text.
    max_ops : int
        Refuse programs that expand to more operations than this.
    inputs : mapping of str to float, optional
        Values of an OpenQASM 3 program's ``input`` declarations (an OpenQASM 2.0
        program has none).
    unbound : {"refuse", "keep"}
        An OpenQASM 3 ``input`` given no value: refused at its declaration
        (default), or kept as a named angle of the same name when declared
        ``float[64]`` (see :func:`~tnsim.circuits.qasm3.read_qasm3`); bind it
        later with :meth:`Circuit.bind`.  An OpenQASM 2.0 program has no inputs,
        so its gate angles are always numbers.
    name : str, optional
        How errors name program text (default ``<text>``), e.g. ``<stdin>``.

    Returns
    -------
    Circuit

    Raises
    ------
    QasmError
        Any problem in the program, as ``file:line:column: what and what to do``.
    InputError
        A file that cannot be read, an argument of the wrong type, or inputs the
        program does not declare.

    Notes
    -----
    The accepted languages are described in :mod:`tnsim.circuits.qasm` (2.0) and
    :mod:`tnsim.circuits.qasm3` (3).

    Examples
    --------
    >>> v2 = read_qasm('OPENQASM 2.0; include "qelib1.inc"; qreg q[2]; cx q[0], q[1];')
    >>> v3 = read_qasm('OPENQASM 3.0; include "stdgates.inc"; qubit[2] q; ctrl @ x q[0], q[1];')
    >>> v2.ops == v3.ops
    True
    >>> p = read_qasm('''OPENQASM 3.0; include "stdgates.inc"; input float[64] g;
    ... qubit[2] q; crx(2 * g) q[0], q[1];''', unbound="keep")
    >>> p.parameters(), p.bind({"g": 0.25}).ops[0].params
    (('g',), (0.5,))
    """
    if isinstance(path_or_text, os.PathLike) or (
        isinstance(path_or_text, str) and names_file(path_or_text)
    ):
        head = _head(Path(path_or_text))
    elif isinstance(path_or_text, str):
        head = path_or_text
    else:
        raise InputError(
            f"read_qasm takes OpenQASM text or a file path, got {type(path_or_text).__name__}"
        )
    check_unbound(unbound)
    if qasm_version(head) == "3":
        return read_qasm3(path_or_text, inputs=inputs, unbound=unbound, max_ops=max_ops, name=name)
    if inputs:
        raise InputError(
            f"inputs {sorted(inputs)} given, but an OpenQASM 2.0 program has no inputs; "
            "declare them in an OpenQASM 3 program ('input float[64] theta;')"
        )
    return read_qasm2(path_or_text, max_ops=max_ops, name=name)


def write_qasm(
    circuit: Circuit,
    version: int = 2,
    *,
    library: str = "extended",
    comments: Sequence[str] = (),
) -> str:
    """Return ``circuit`` as OpenQASM text of the given major ``version`` (2 or 3).

    See :func:`tnsim.circuits.qasm.writer.write_qasm` (2.0: ``library`` and
    ``comments``) and :func:`tnsim.circuits.qasm3.writer.write_qasm3` (3:
    ``comments``; its library is stdgates.inc).

    Examples
    --------
    >>> write_qasm(Circuit(1).h(0), version=3).splitlines()[0]
    'OPENQASM 3.0;'
    """
    if version == 3:
        if library != "extended":
            raise InputError(
                f"library={library!r} chooses among OpenQASM 2.0 gate sets; OpenQASM 3 files "
                "include stdgates.inc"
            )
        return write_qasm3(circuit, comments=comments)
    if version == 2:
        return write_qasm2(circuit, library=library, comments=comments)
    raise InputError(f"OpenQASM version must be 2 or 3, got {version!r}")
