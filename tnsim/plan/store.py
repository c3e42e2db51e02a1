"""Saved plans: plans as plain JSON, each bound to the network it was made for.

A *plan file* holds one or more plans, each under the fingerprint of its
network (:func:`network_fingerprint`: SHA-256 of the labels, sizes, output,
dtype, scale and every array's bytes), so a plan is only ever used for the
very network -- circuit, query, bitstring, precision -- it was made for.  The
command line's ``--save-plan FILE`` / ``--plan FILE`` and checkpoint folders
(``plans.json``) use this one format.

File format (strict JSON: no NaN or Infinity, no pickle)::

    {"format": "tnsim-plans", "version": 1,
     "plans": [{"network": "<sha256 hex>",
                "num_tensors": 123,
                "path": [[x, y], ...],         # the tree, SSA form (see PairTree)
                "sliced": [label, ...],
                "dtype": "<c16",
                "figures": {"flops": ..., "peak_bytes": ..., "num_slices": ...,
                            "method": "...", ...},
                "digest": "<sha256 hex of this record without the digest>"}, ...]}

The tree's leaves, labels and sizes are the network's own (they are part of
the fingerprint), so only the path is stored.  A record whose digest does not
match, whose path is not a contraction tree of the network, or whose sliced
labels are not summed labels of it, is refused.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import os
from collections.abc import Iterator

import numpy as np

from tnsim.errors import InputError
from tnsim.fileio import write_atomic
from tnsim.network.graph import TensorGraph
from tnsim.plan.driver import Plan
from tnsim.plan.tree import PairTree

__all__ = [
    "PLAN_FORMAT",
    "PlanBook",
    "network_fingerprint",
    "plan_from_record",
    "plan_record",
    "read_plan_file",
]

PLAN_FORMAT, PLAN_VERSION = "tnsim-plans", 1

#: The largest plan file read (bytes): far above any real plan, far below trouble.
MAX_PLAN_FILE = 1 << 30


def network_fingerprint(network: TensorGraph) -> str:
    """SHA-256 hex digest of a network: labels, sizes, output, dtype, scale and arrays.

    Examples
    --------
    >>> a = TensorGraph([np.ones(2)], [(0,)], {0: 2})
    >>> b = TensorGraph([np.array([1.0, 2.0])], [(0,)], {0: 2})
    >>> network_fingerprint(a) == network_fingerprint(b)
    False
    """
    structure = {
        "indices": [[int(i) for i in ix] for ix in network.indices],
        "output": [int(i) for i in network.output],
        "size": sorted([int(k), int(v)] for k, v in network.size.items()),
        "dtype": np.dtype(network.dtype).str,
        "exponent": int(network.exponent),
    }
    h = hashlib.sha256(json.dumps(structure, sort_keys=True).encode())
    for arr in network.arrays:
        arr = np.ascontiguousarray(arr)
        h.update(json.dumps([arr.dtype.str, list(arr.shape)]).encode())
        h.update(arr.reshape(-1).view(np.uint8).data)
    return h.hexdigest()


def _digest(record: dict) -> str:
    body = {k: v for k, v in record.items() if k != "digest"}
    text = json.dumps(body, sort_keys=True, allow_nan=False, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _figures(plan: Plan) -> dict:
    """The plan's figures (every field but the tree and the sliced labels) that JSON holds."""
    out = {}
    for f in dataclasses.fields(plan):
        value = getattr(plan, f.name)
        if f.name in ("tree", "sliced") or isinstance(value, bool):
            continue
        if isinstance(value, (int, str)) or (isinstance(value, float) and math.isfinite(value)):
            out[f.name] = value
    return out


def plan_record(plan: Plan, network: TensorGraph, fingerprint: str | None = None) -> dict:
    """The JSON record of ``plan`` for ``network`` (see the module notes).

    Raises
    ------
    InputError
        If the plan's tree is not over the network's tensors.
    """
    tree = plan.tree
    if tuple(map(tuple, tree.inputs)) != tuple(map(tuple, network.indices)):
        raise InputError("the plan's tree is over other tensors than the network's")
    record = {
        "network": fingerprint or network_fingerprint(network),
        "num_tensors": len(network),
        "path": [[int(x), int(y)] for x, y in tree.path],
        "sliced": [int(i) for i in plan.sliced],
        "dtype": np.dtype(network.dtype).str,
        "figures": _figures(plan),
    }
    record["digest"] = _digest(record)
    return record


def _int_pairs(value, what: str) -> list[tuple[int, int]]:
    if not isinstance(value, list):
        raise ValueError(f"{what} is not a list")
    out = []
    for item in value:
        if not (isinstance(item, list) and len(item) == 2 and all(_is_int(v) for v in item)):
            raise ValueError(f"{what} holds {str(item)[:40]!r}, not a pair of integers")
        out.append((item[0], item[1]))
    return out


def _is_int(v) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _check_path(path: list[tuple[int, int]], n: int) -> None:
    """Raise ValueError unless ``path`` joins ``n`` leaves into one tree in SSA form."""
    if len(path) != max(n - 1, 0):
        raise ValueError(f"the path has {len(path)} steps; a tree over {n} tensors has {n - 1}")
    used = set()
    for s, (x, y) in enumerate(path):
        for node in (x, y):
            if not 0 <= node < n + s or node in used:
                raise ValueError(f"step {s} of the path uses node {node}, which is not available")
            used.add(node)
        if x == y:
            raise ValueError(f"step {s} of the path joins node {x} with itself")


def plan_from_record(record: dict, network: TensorGraph, fingerprint: str | None = None) -> Plan:
    """Rebuild the plan of ``record`` for ``network``, checking it belongs to it.

    Raises
    ------
    ValueError
        If the record is damaged, edited, or made for another network.
    """
    if not isinstance(record, dict) or record.get("digest") != _digest(record):
        raise ValueError("a plan record does not match its digest (damaged or edited)")
    if record.get("network") != (fingerprint or network_fingerprint(network)):
        raise ValueError("the plan was made for another network")
    n = len(network)
    path = _int_pairs(record.get("path"), "the path")
    _check_path(path, n)
    sliced = record.get("sliced")
    out = set(network.output)
    if not isinstance(sliced, list) or not all(
        _is_int(i) and i in network.size and i not in out for i in sliced
    ):
        raise ValueError("the sliced labels are not summed labels of the network")
    if len(set(sliced)) != len(sliced):
        raise ValueError("the sliced labels repeat a label")
    tree = PairTree(
        tuple(tuple(ix) for ix in network.indices),
        tuple(network.output),
        dict(network.size),
        tuple(path),
    )
    figures = record.get("figures")
    if not isinstance(figures, dict):
        raise ValueError("the plan's figures are missing")
    kwargs = {}
    for f in dataclasses.fields(Plan):
        if f.name in ("tree", "sliced") or f.name not in figures:
            continue
        value, default = figures[f.name], f.default
        fits = isinstance(value, type(default)) and not isinstance(value, bool)
        if not (fits or (isinstance(default, float) and _is_int(value))):
            raise ValueError(f"figure {f.name!r} of the plan has the wrong type")
        kwargs[f.name] = value
    return Plan(tree, tuple(sliced), **kwargs)


class PlanBook:
    """Plans by network fingerprint, read from and written to a plan file.

    Parameters
    ----------
    path : str, optional
        The plan file: read if it exists (and ``read``), rewritten (atomically)
        when a plan is added.
    read : bool
        Read the plans already in ``path`` (default); ``False`` starts an
        empty book that replaces the file when its first plan is added.

    Raises
    ------
    InputError
        If the file exists but is not a readable plan file of this version.

    Examples
    --------
    >>> from tnsim.plan.driver import make_plan
    >>> tn = TensorGraph([np.ones((2, 2))] * 2, [(0, 1), (1, 0)], {0: 2, 1: 2})
    >>> book = PlanBook()
    >>> book.get(tn) is None
    True
    >>> book.add(tn, make_plan(tn))
    >>> book.get(tn).tree.path
    ((0, 1),)
    """

    def __init__(self, path: str | os.PathLike | None = None, *, read: bool = True):
        self.path = None if path is None else os.fspath(path)
        self.records: dict[str, dict] = {}
        if read and self.path is not None and os.path.exists(self.path):
            for record in read_plan_file(self.path):
                self.records[record["network"]] = record

    def __len__(self) -> int:
        return len(self.records)

    def get(self, network: TensorGraph, fingerprint: str | None = None) -> Plan | None:
        """The plan kept for ``network``, or None if there is none.

        Raises
        ------
        InputError
            If the kept record is damaged.
        """
        key = fingerprint or network_fingerprint(network)
        record = self.records.get(key)
        if record is None:
            return None
        try:
            return plan_from_record(record, network, key)
        except ValueError as exc:
            raise InputError(f"{self._where()}: {exc}") from None

    def add(self, network: TensorGraph, plan: Plan, fingerprint: str | None = None) -> None:
        """Keep ``plan`` for ``network``, and rewrite the plan file if there is one."""
        record = plan_record(plan, network, fingerprint)
        self.records[record["network"]] = record
        if self.path is not None:
            self.save(self.path)

    def save(self, path: str | os.PathLike) -> None:
        """Write every kept plan to ``path`` (strict JSON, atomically)."""
        data = {"format": PLAN_FORMAT, "version": PLAN_VERSION, "plans": list(self)}
        text = json.dumps(data, allow_nan=False, separators=(",", ":")) + "\n"
        name = os.path.basename(os.fspath(path))
        write_atomic(path, text, prefix=f".tnsim-plan-{name}-", durable=True)

    def __iter__(self) -> Iterator[dict]:
        return iter(self.records.values())

    def _where(self) -> str:
        return f"plan file {self.path!r}" if self.path else "plan"


def _refuse(path: str, what: str) -> InputError:
    return InputError(f"plan file {path!r} {what}")


def read_plan_file(path: str | os.PathLike) -> list[dict]:
    """The plan records of a plan file (each checked against its digest when used).

    Raises
    ------
    InputError
        If the file cannot be read, is not strict JSON, not a tnsim plan file,
        or of another version.
    """
    path = os.fspath(path)
    try:
        if os.path.getsize(path) > MAX_PLAN_FILE:
            raise _refuse(path, f"is larger than {MAX_PLAN_FILE} bytes; it is not a plan file")
        with open(path, "rb") as fh:
            text = fh.read().decode("utf-8")
        data = json.loads(text, parse_constant=_no_constant)
    except (OSError, UnicodeError, ValueError, RecursionError) as exc:
        what = exc.strerror if isinstance(exc, OSError) else type(exc).__name__
        raise _refuse(path, f"cannot be read ({what}); it is damaged or not a plan file") from None
    if not isinstance(data, dict) or data.get("format") != PLAN_FORMAT:
        raise _refuse(path, "is not a tnsim plan file")
    if data.get("version") != PLAN_VERSION:
        raise _refuse(
            path,
            f"has format version {str(data.get('version'))[:20]!r}; this tnsim reads version "
            f"{PLAN_VERSION}: plan again and save the plan anew",
        )
    records = data.get("plans")
    if not isinstance(records, list) or not all(
        isinstance(r, dict) and isinstance(r.get("network"), str) for r in records
    ):
        raise _refuse(path, "is damaged (its list of plans is malformed)")
    return records


def _no_constant(name: str):
    raise ValueError(f"{name} is not strict JSON")
