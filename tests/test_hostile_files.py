"""Hostile scenario files through `shockslate check` and `shockslate run`: a plain refusal, never a traceback.

Each file is written by the test. `check` must exit 0 (valid) or 2 (refused) and `run` must exit 0, 1 or 2, with
no Python exception escaping and no Python wording (exception or class names) in what the user reads.
Common practice for input handling, no single source.
"""
from __future__ import annotations

import json
import re

import pytest

from shockslate.server.cli import main
from shockslate.solver.scenario import builtin_path

PYTHON_WORDS = re.compile(r"Traceback|Error\b|Exception|<class|\.py\b|sys\.set_int_max_str_digits|NoneType")


def _base() -> dict:
    return json.loads(builtin_path("shock_tube_reflection").read_text())


def _with(path: str, value) -> dict:
    doc = _base()
    keys = path.split(".")
    node = doc
    for key in keys[:-1]:
        node = node[int(key)] if isinstance(node, list) else node[key]
    last = keys[-1]
    if isinstance(node, list):
        node[int(last)] = value
    else:
        node[last] = value
    return doc


def _without(path: str) -> dict:
    doc = _base()
    keys = path.split(".")
    node = doc
    for key in keys[:-1]:
        node = node[key]
    node.pop(keys[-1], None)
    return doc


BYTES = {
    "empty": b"",
    "not utf-8": b'{"name": "\xff\xfe"}',
    "binary": bytes(range(256)),
    "a list": b"[1, 2, 3]",
    "a number": b"42",
    "nested deeply": b"[" * 100_000 + b"]" * 100_000,
    "huge integer": b'{"name": "x", "domain": {"nx": ' + b"9" * 5000 + b"}}",
    "truncated": json.dumps(_base()).encode()[:-20],
    "NaN pressure": json.dumps(_with("conditions.ambient.p_pa", float("nan"))).encode(),
}
DOCS = {
    "domain 1e-300 wide": _with("domain.x_max_m", 1e-300),
    "domain upside down": _with("domain.x_max_m", -1.0),
    "nx zero": _with("domain.nx", 0),
    "nx huge": _with("domain.nx", 10 ** 9),
    "nx a string": _with("domain.nx", "many"),
    "nx a float": _with("domain.nx", 64.5),
    "gamma one": _with("gas.gamma", 1.0),
    "gamma a list": _with("gas.gamma", [1.4]),
    "reservoir a number": _with("conditions.reservoir", 5),
    "conditions null": _with("conditions", None),
    "negative ambient pressure": _with("conditions.ambient.p_pa", -5000.0),
    "absurd temperature": _with("conditions.ambient.t_k", 1e30),
    "unknown key": {**_base(), "colour": "blue"},
    "no gas": _without("gas"),
    "no domain": _without("domain"),
    "name too long": _with("name", "n" * 10_000),
    "end time negative": _with("end_time_s", -1.0),
    "mode nonsense": _with("mode", "spherical"),
    "edges nonsense": _with("edges.left", "teleport"),
    "sketch a string": _with("sketch", "walls please"),
    "shape kind unknown": {**_base(), "sketch": {"mirror": "none", "shapes": [{"kind": "hexagon", "paints": "wall"}]}},
    "shape with NaN": {**_base(), "sketch": {"mirror": "none", "shapes": [
        {"kind": "circle", "paints": "wall", "centre_m": [0.1, float("nan")], "radius_m": 0.01}]}},
    "polygon of one point": {**_base(), "sketch": {"mirror": "none", "shapes": [
        {"kind": "polygon", "paints": "wall", "points_m": [[0.1, 0.1]]}]}},
    "station outside": {**_base(), "stations": [{"name": "far", "start_m": [1e6, 0.0], "end_m": [1e6, 1.0]}]},
    "probe a string": {**_base(), "probes": ["here"]},
}


def pytest_generate_tests(metafunc):
    if "hostile" in metafunc.fixturenames:
        names = list(BYTES) + list(DOCS) + ["a folder", "missing"]
        metafunc.parametrize("hostile", names)


def _path_for(tmp_path, hostile: str):
    if hostile == "a folder":
        folder = tmp_path / "a_folder.json"
        folder.mkdir()
        return folder
    if hostile == "missing":
        return tmp_path / "missing.json"
    data = BYTES[hostile] if hostile in BYTES else json.dumps(DOCS[hostile]).encode()
    path = tmp_path / "hostile.json"
    path.write_bytes(data)
    return path


def test_check_refuses_in_plain_words(tmp_path, capsys, hostile):
    path = _path_for(tmp_path, hostile)
    code = main(["check", str(path)])
    out = capsys.readouterr()
    assert code in (0, 2), out
    said = out.out + out.err
    assert not PYTHON_WORDS.search(said), said[-2000:]
    if code == 2:
        assert said.strip(), "a refusal must say why"


def test_run_refuses_in_plain_words(tmp_path, capsys, hostile):
    path = _path_for(tmp_path, hostile)
    code = main(["run", str(path), "--steps", "1", "--resolution", "16", "--out", str(tmp_path / "out")])
    out = capsys.readouterr()
    assert code in (0, 1, 2), out
    said = out.out + out.err
    assert not PYTHON_WORDS.search(said), said[-2000:]
