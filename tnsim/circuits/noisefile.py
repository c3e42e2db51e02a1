"""Noise models as files: tnsim's own small JSON (or TOML) format.

A file holds one object (a TOML file is its top-level table) with any of
these keys::

    {
      "format": "tnsim-noise/1",
      "channels": {"gate1": {"kind": "depolarizing", "p": 0.001}},
      "after_gates": [
        {"gates": ["h", "rx"], "channel": "gate1"},
        {"gates": ["cz"], "qubits": [[0, 1]],
         "channel": {"kind": "depolarizing", "num_qubits": 2, "p": 0.01}},
        {"qubits": [3], "channel": {"kind": "amplitude_damping", "gamma": 0.002}}
      ],
      "after_layers": [
        {"channel": {"kind": "thermal_relaxation", "t1": 50e-6, "t2": 70e-6, "time": 25e-9}}
      ],
      "readout": [
        {"confusion": [[0.98, 0.04], [0.02, 0.96]]},
        {"qubits": [5], "confusion": [[0.9, 0.1], [0.1, 0.9]]}
      ]
    }

``format`` is optional (``"tnsim-noise/1"`` if given).  ``channels`` names
channels that rules use by name.  Rules are those of
:class:`~tnsim.circuits.noise.NoiseModel`: ``gates`` and ``qubits`` are
optional; ``confusion[i][j]`` is the probability of reading ``i`` when the
qubit is in ``j``.  Channels are written ``{"kind": ..., parameters}``:

========================  ====================================================
kind                      parameters
========================  ====================================================
``depolarizing``          ``p``, optional ``num_qubits`` (1, 2 or 3; default 1)
``bit_flip``              ``p``
``phase_flip``            ``p``
``pauli``                 ``rates``: ``{"X": 0.01, "Z": 0.02}`` or ``{"ZZ": ...}``
``amplitude_damping``     ``gamma``
``phase_damping``         ``lambda``
``thermal_relaxation``    ``t1``, ``t2``, ``time`` (one time unit for all three)
``kraus``                 ``operators``: matrices whose entries are numbers or
                          ``[real, imaginary]`` pairs
========================  ====================================================

TOML needs Python 3.11 or later (the standard library's ``tomllib``); on
older Pythons write the model as JSON.  Errors name the file, the place
(``line:column`` for JSON) and the key path, e.g. ``after_gates[1].channel.p``.
"""

from __future__ import annotations

import importlib
import json
import os
from collections.abc import Mapping

import numpy as np

from tnsim.circuits import channels as ch
from tnsim.circuits.noise import NoiseModel
from tnsim.errors import InputError

__all__ = ["FORMAT", "noise_model_from_dict", "read_noise_model"]

FORMAT = "tnsim-noise/1"
"""The ``format`` value of this version of the file format."""

_TOP = ("format", "channels", "after_gates", "after_layers", "readout")
_KINDS = {
    "depolarizing": (("p",), ("num_qubits",)),
    "bit_flip": (("p",), ()),
    "phase_flip": (("p",), ()),
    "pauli": (("rates",), ()),
    "amplitude_damping": (("gamma",), ()),
    "phase_damping": (("lambda",), ()),
    "thermal_relaxation": (("t1", "t2", "time"), ()),
    "kraus": (("operators",), ()),
}


class _Where(Exception):
    """A problem at a key path inside the document (located by the caller)."""

    def __init__(self, path: tuple, message: str):
        super().__init__(message)
        self.path, self.message = path, message


def _path_text(path: tuple) -> str:
    out = ""
    for p in path:
        out += f"[{p}]" if isinstance(p, int) else (f".{p}" if out else str(p))
    return out or "(top level)"


def _keys(obj, path: tuple, allowed: tuple[str, ...], required: tuple[str, ...] = ()) -> None:
    if not isinstance(obj, Mapping):
        raise _Where(path, f"expected an object with keys {', '.join(allowed)}")
    for key in obj:
        if key not in allowed:
            raise _Where((*path, key), f"unknown key {key!r}; allowed here: {', '.join(allowed)}")
    for key in required:
        if key not in obj:
            raise _Where(path, f"missing key {key!r}")


def _complex_matrix(value, path: tuple) -> np.ndarray:
    def entry(x, p):
        if isinstance(x, (int, float)) and not isinstance(x, bool):
            return complex(x)
        if (
            isinstance(x, list)
            and len(x) == 2
            and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in x)
        ):
            return complex(x[0], x[1])
        raise _Where(p, f"matrix entry {x!r} is neither a number nor a [real, imaginary] pair")

    if not isinstance(value, list) or not all(isinstance(row, list) for row in value):
        raise _Where(path, "a matrix is a list of rows")
    return np.array(
        [[entry(x, (*path, i, j)) for j, x in enumerate(row)] for i, row in enumerate(value)]
    )


def _channel(spec, path: tuple, named: dict) -> ch.Channel:
    if isinstance(spec, str):
        if spec not in named:
            known = ", ".join(sorted(named)) or "none defined"
            raise _Where(path, f"no channel named {spec!r} in 'channels' ({known})")
        return named[spec]
    if not isinstance(spec, Mapping) or "kind" not in spec:
        raise _Where(path, 'a channel is {"kind": ..., parameters} or the name of one')
    kind = spec["kind"]
    if kind not in _KINDS:
        raise _Where((*path, "kind"), f"unknown kind {kind!r}; kinds: {', '.join(_KINDS)}")
    required, optional = _KINDS[kind]
    _keys(spec, path, ("kind", *required, *optional), required)
    args = {k: spec[k] for k in (*required, *optional) if k in spec}
    try:
        if kind == "depolarizing":
            return ch.depolarizing(args["p"], args.get("num_qubits", 1))
        if kind == "pauli":
            return ch.pauli_channel(args["rates"])
        if kind == "kraus":
            ops = args["operators"]
            if not isinstance(ops, list):
                raise _Where((*path, "operators"), "give a list of matrices")
            mats = [_complex_matrix(m, (*path, "operators", j)) for j, m in enumerate(ops)]
            return ch.kraus_channel(mats, "kraus")
        if kind == "thermal_relaxation":
            return ch.thermal_relaxation(args["t1"], args["t2"], args["time"])
        if kind == "phase_damping":
            return ch.phase_damping(args["lambda"])
        return getattr(ch, kind)(*args.values())
    except InputError as exc:
        raise _Where(path, str(exc)) from None


def _build(data, named: dict) -> NoiseModel:
    _keys(data, (), _TOP)
    if "format" in data and data["format"] != FORMAT:
        raise _Where(("format",), f"unknown format {data['format']!r}; this tnsim reads {FORMAT!r}")
    channels = data.get("channels", {})
    if not isinstance(channels, Mapping):
        raise _Where(("channels",), "expected an object of named channels")
    for name, spec in channels.items():
        named[name] = _channel(spec, ("channels", name), named)
    model = NoiseModel()
    for section in ("after_gates", "after_layers", "readout"):
        rules = data.get(section, [])
        if not isinstance(rules, list):
            raise _Where((section,), "expected a list of rules")
        for k, rule in enumerate(rules):
            _rule(model, section, rule, (section, k), named)
    return model


def _rule(model: NoiseModel, section: str, rule, path: tuple, named: dict) -> None:
    try:
        if section == "readout":
            _keys(rule, path, ("qubits", "confusion"), ("confusion",))
            model.readout(rule["confusion"], qubits=rule.get("qubits"))
        elif section == "after_gates":
            _keys(rule, path, ("gates", "qubits", "channel"), ("channel",))
            channel = _channel(rule["channel"], (*path, "channel"), named)
            model.after_gates(channel, gates=rule.get("gates"), qubits=rule.get("qubits"))
        else:
            _keys(rule, path, ("qubits", "channel"), ("channel",))
            channel = _channel(rule["channel"], (*path, "channel"), named)
            model.after_layers(channel, qubits=rule.get("qubits"))
    except InputError as exc:
        raise _Where(path, str(exc)) from None


def noise_model_from_dict(data: Mapping, source: str = "<noise model>") -> NoiseModel:
    """Build a :class:`~tnsim.circuits.noise.NoiseModel` from the file format's data.

    Examples
    --------
    >>> model = noise_model_from_dict(
    ...     {"after_gates": [{"gates": ["h"], "channel": {"kind": "bit_flip", "p": 0.1}}]}
    ... )
    >>> model.gate_rules[0].channel.name
    'bit_flip'
    >>> noise_model_from_dict({"after_gates": [{"channel": {"kind": "bit_flip", "p": 2}}]})
    ... # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    tnsim.errors.InputError: <noise model>: after_gates[0].channel: bit_flip: p must be ...
    """
    try:
        return _build(data, {})
    except _Where as w:
        raise InputError(f"{source}: {_path_text(w.path)}: {w.message}") from None


def read_noise_model(path: str | os.PathLike) -> NoiseModel:
    """Read a noise model file (``.toml``: TOML; anything else: JSON).

    Raises
    ------
    InputError
        The file is missing or unreadable, not valid JSON/TOML (with line and
        column), or a rule or channel is wrong (with its place and key path).
    """
    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
        text = raw.decode("utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read the noise model ({exc})") from None
    if path.lower().endswith(".toml"):
        data = _load_toml(text, path)
        locate = None
    else:
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise InputError(
                f"{path}:{exc.lineno}:{exc.colno}: not valid JSON ({exc.msg}); "
                "see 'tnsim.circuits.noisefile' for the format"
            ) from None
        locate = text
    try:
        return _build(data, {})
    except _Where as w:
        where = path
        if locate is not None:
            line, col = _json_position(locate, w.path)
            where = f"{path}:{line}:{col}"
        raise InputError(f"{where}: {_path_text(w.path)}: {w.message}") from None


def _load_toml(text: str, path: str):
    try:
        tomllib = importlib.import_module("tomllib")
    except ImportError:
        raise InputError(
            f"{path}: reading TOML needs Python 3.11 or later (tomllib); write the noise "
            "model as JSON instead (same keys)"
        ) from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML ({exc})") from None


def _json_position(text: str, path: tuple) -> tuple[int, int]:
    """Line and column (1-based) of the value at ``path`` in a JSON text (best effort)."""
    decoder = json.JSONDecoder()
    pos = _skip(text, 0)
    for key in path:
        try:
            pos = _member(text, pos, key, decoder)
        except (ValueError, IndexError):
            break
    line = text.count("\n", 0, pos) + 1
    return line, pos - (text.rfind("\n", 0, pos) + 1) + 1


def _skip(text: str, pos: int) -> int:
    while pos < len(text) and text[pos] in " \t\r\n":
        pos += 1
    return pos


def _member(text: str, pos: int, key, decoder: json.JSONDecoder) -> int:
    """Start of the member ``key`` (a string key or a list index) of the value at ``pos``."""
    opener = text[pos]
    pos = _skip(text, pos + 1)
    index = 0
    while text[pos] not in "]}":
        if opener == "{":
            name, pos = decoder.raw_decode(text, pos)
            pos = _skip(text, _skip(text, pos) + 1)
            if name == key:
                return pos
        elif index == key:
            return pos
        _, pos = decoder.raw_decode(text, pos)
        pos = _skip(text, pos)
        if text[pos] == ",":
            pos = _skip(text, pos + 1)
        index += 1
    raise ValueError(key)
