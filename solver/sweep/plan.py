"""The plan of a sweep: --vary specs, the validated cases (each a scenario document with the values set) and
saved sweep files. Nothing here runs a case.

    vary = parse_vary("conditions.ambient.p_pa=101325:1000:6")     # START:STOP:COUNT, evenly spaced
    vary = parse_vary("numerics.flux=hllc,hll")                    # a list of values (JSON or bare words)
    plan = build_plan(load_builtin("nozzle_sea_level"), [vary], nx=160, until_s=2e-3)

Several varies give the Cartesian product (the first varies slowest), or with ``zip_=True`` they are paired
(equal lengths required). Every case is a copy of the scenario document with the values set, validated by
``parse_scenario`` before anything runs, so a bad path or value is refused up front with the path, the value
and the allowed range.
"""
from __future__ import annotations

import hashlib
import itertools
import json
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal, Optional, get_args, get_origin

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from ..scenario import (
    END_TIME_MAX_S,
    SCENARIO_DIR,
    Scenario,
    ScenarioError,
    builtin_names,
    load_builtin,
    load_scenario,
    parse_scenario,
    scenario_to_dict,
    to_setup,
)

#: Built-in sweep files: scenarios/sweeps/<name>.json.
SWEEP_DIR = SCENARIO_DIR / "sweeps"
MAX_CASES = 10_000
MAX_COUNT = 1_000
CASE_PREFIX = "case-"


class SweepError(ScenarioError):
    """A sweep was refused before anything ran; the message names the --vary path, the value and what is allowed."""


# ----------------------------------------------------------------------------- --vary

@dataclass(frozen=True)
class Vary:
    """One varied quantity: a dotted path into the scenario document and the values it takes."""

    path: str
    values: tuple[Any, ...]
    text: str = ""

    def as_dict(self) -> dict:
        return {"path": self.path, "values": list(self.values)}


_SEGMENT = re.compile(r"([A-Za-z_][A-Za-z0-9_]*)((?:\[\d+\])*)")


def split_path(path: str) -> list[str | int]:
    """``stations[0].start_m[1]`` or ``stations.0.start_m.1`` -> ['stations', 0, 'start_m', 1]."""
    parts: list[str | int] = []
    for segment in path.split("."):
        match = _SEGMENT.fullmatch(segment)
        if match:
            parts.append(match.group(1))
            parts.extend(int(i) for i in re.findall(r"\d+", match.group(2)))
        elif segment.isdigit() and parts:
            parts.append(int(segment))
        else:
            raise SweepError(f"--vary path {path!r} is not allowed: use dotted field names with optional [index], "
                             "e.g. conditions.ambient.p_pa or sketch.shapes[2].radius_m")
    return parts


def _parse_item(text: str) -> Any:
    """A JSON value (number, true/false/null, quoted string) or, failing that, the bare word."""
    text = text.strip()
    try:
        return json.loads(text)
    except json.JSONDecodeError:
        return text


def _finite_number(text: str, what: str, spec: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise SweepError(f"--vary {spec!r}: {what} = {text!r} is not a number") from None
    if not math.isfinite(value):
        raise SweepError(f"--vary {spec!r}: {what} = {text!r} is not allowed: must be a finite number")
    return value


def parse_vary(spec: str) -> Vary:
    """``PATH=START:STOP:COUNT`` (COUNT evenly spaced values, ends included) or ``PATH=v1,v2,v3``."""
    if "=" not in spec:
        raise SweepError(f"--vary {spec!r} is not allowed: write PATH=START:STOP:COUNT or PATH=v1,v2,v3")
    path, _, rhs = spec.partition("=")
    path, rhs = path.strip(), rhs.strip()
    split_path(path)
    if not rhs:
        raise SweepError(f"--vary {spec!r}: no values after '='; write PATH=START:STOP:COUNT or PATH=v1,v2,v3")
    if ":" in rhs:
        parts = rhs.split(":")
        if len(parts) != 3:
            raise SweepError(f"--vary {spec!r}: a range is START:STOP:COUNT (three parts), not {len(parts)}")
        start = _finite_number(parts[0], "START", spec)
        stop = _finite_number(parts[1], "STOP", spec)
        try:
            count = int(parts[2])
        except ValueError:
            raise SweepError(f"--vary {spec!r}: COUNT = {parts[2]!r} is not a whole number") from None
        if not 1 <= count <= MAX_COUNT:
            raise SweepError(f"--vary {spec!r}: COUNT = {count} is not allowed: 1 to {MAX_COUNT}")
        if count == 1 and start != stop:
            raise SweepError(f"--vary {spec!r}: COUNT = 1 is not allowed when START != STOP: "
                             "give at least 2 values, or START = STOP")
        values = tuple(float(v) for v in np.linspace(start, stop, count))
    else:
        items = rhs.split(",")
        if any(not item.strip() for item in items):
            raise SweepError(f"--vary {spec!r}: empty value in the list; write PATH=v1,v2,v3")
        values = tuple(_parse_item(item) for item in items)
        if len(values) > MAX_COUNT:
            raise SweepError(f"--vary {spec!r}: {len(values)} values is not allowed: at most {MAX_COUNT}")
    return Vary(path, values, spec)


def _show_path(parts: list[str | int]) -> str:
    out = ""
    for p in parts:
        out += f"[{p}]" if isinstance(p, int) else (("." if out else "") + p)
    return out


def _locate(doc: dict, path: str) -> tuple[Any, str | int, Any]:
    """(container, key, current value) of the leaf at path; SweepError if the path leads nowhere or to a container."""
    parts = split_path(path)
    node: Any = doc
    for n, part in enumerate(parts):
        where = _show_path(parts[:n]) or "the scenario"
        if isinstance(node, dict):
            if not isinstance(part, str) or part not in node:
                fields = ", ".join(node)
                raise SweepError(f"--vary path {path!r} is not allowed: {where} has no field {part!r}; "
                                 f"its fields are: {fields}")
        elif isinstance(node, list):
            if not isinstance(part, int) or not 0 <= part < len(node):
                allowed = f"0 to {len(node) - 1}" if node else "none (the list is empty)"
                raise SweepError(f"--vary path {path!r} is not allowed: {where} is a list; index {part!r} is not "
                                 f"one of its indices ({allowed})")
        else:
            raise SweepError(f"--vary path {path!r} is not allowed: {where} = {node!r} is a single value "
                             "with no fields under it")
        if n == len(parts) - 1:
            current = node[part]
            if isinstance(current, (dict, list)):
                kind = "an object" if isinstance(current, dict) else "a list"
                raise SweepError(f"--vary path {path!r} is not allowed: it is {kind}; vary one value inside it, "
                                 + (f"e.g. {path}.{next(iter(current))}" if isinstance(current, dict) and current
                                    else f"e.g. {path}[0]"))
            return node, part, current
        node = node[part]
    raise SweepError(f"--vary path {path!r} is empty")


def _coerce(current: Any, value: Any) -> Any:
    """Match a number to the field's kind: 101325 into a float field, 120.0 into a whole-number field."""
    if isinstance(current, bool) or isinstance(value, bool):
        return value
    if isinstance(current, float) and isinstance(value, int):
        return float(value)
    if isinstance(current, int) and isinstance(value, float) and value.is_integer():
        return int(value)
    return value


def allowed_values(path: str) -> Optional[str]:
    """What the scenario models allow at a path, e.g. 'greater than 0 and at most 1e+09', or None if unknown."""
    try:
        parts = split_path(path)
    except SweepError:
        return None
    model: Any = Scenario
    info = None
    for part in parts:
        if isinstance(part, int):
            if info is None or get_origin(info.annotation) not in (list, tuple):
                return None
            inner = get_args(info.annotation)
            model = inner[0] if inner else None
            if isinstance(model, type) and issubclass(model, BaseModel):
                info = None
                continue
            return None
        if not (isinstance(model, type) and issubclass(model, BaseModel)) or part not in model.model_fields:
            return None
        info = model.model_fields[part]
        ann = info.annotation
        model = ann if isinstance(ann, type) and issubclass(ann, BaseModel) else None
    if info is None:
        return None
    ann = info.annotation
    if get_origin(ann) is Literal:
        return "one of " + ", ".join(json.dumps(a) for a in get_args(ann))
    if get_origin(ann) is not None and type(None) in get_args(ann):
        lits = [a for a in get_args(ann) if get_origin(a) is Literal]
        if lits:
            return "one of " + ", ".join(json.dumps(a) for a in get_args(lits[0])) + ", null"
    bounds = []
    for meta in info.metadata:
        for attr, word in (("gt", "greater than"), ("ge", "at least"), ("lt", "less than"), ("le", "at most")):
            value = getattr(meta, attr, None)
            if value is not None:
                bounds.append(f"{word} {value:g}")
    kind = {int: "a whole number", float: "a number", str: "text", bool: "true or false"}.get(ann)
    if not bounds:
        return kind
    return (f"{kind} " if kind else "") + " and ".join(bounds)


# ----------------------------------------------------------------------------- cases

#: Characters kept in a case folder's readable part; the rest become "_". Its length is capped.
_FOLDER_UNSAFE = re.compile(r"[^A-Za-z0-9._=+-]+")
FOLDER_TEXT_MAX = 80


def _leaf(path: str) -> str:
    """The last two names of a --vary path (conditions.ambient.p_pa -> ambient.p_pa; sketch.shapes[1].paints ->
    shapes[1].paints)."""
    names: list[str] = []
    for part in split_path(path):
        if isinstance(part, int) and names:
            names[-1] += f"[{part}]"
        else:
            names.append(str(part))
    return ".".join(names[-2:])


def _short(value: Any) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def canonical_json(value: Any) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)


def case_key(scenario: dict, nx: int, until_s: float) -> str:
    """sha256 of the case's canonical scenario JSON, its resolution and its end time."""
    return hashlib.sha256(canonical_json({"scenario": scenario, "nx": int(nx), "until_s": float(until_s)})
                          .encode("ascii")).hexdigest()


@dataclass(frozen=True)
class Case:
    """One validated case of a sweep."""

    index: int
    values: dict[str, Any]
    scenario: dict
    nx: int
    until_s: float
    key: str

    @property
    def folder(self) -> str:
        """case-<what varies>-<hash>: readable at a glance (ambient.p_pa=50662.5), unique and stable by the hash
        of the whole case, so a re-run of the same sweep finds its finished cases."""
        readable = _FOLDER_UNSAFE.sub("_", "_".join(f"{_leaf(p)}={_short(v)}" for p, v in self.values.items()))
        readable = readable.strip("_")[:FOLDER_TEXT_MAX]
        return f"{CASE_PREFIX}{readable}-{self.key[:10]}" if readable else CASE_PREFIX + self.key[:16]

    def label(self) -> str:
        return ", ".join(f"{p} = {v!r}" for p, v in self.values.items())


@dataclass(frozen=True)
class SweepPlan:
    """Everything a sweep runs, validated: the base scenario, what varies, and every case."""

    scenario_name: str
    description: str
    varies: tuple[Vary, ...]
    zip: bool
    nx: Optional[int]
    until_s: Optional[float]
    cases: tuple[Case, ...]

    def as_dict(self) -> dict:
        return {"scenario": self.scenario_name, "description": self.description,
                "vary": [v.as_dict() for v in self.varies], "zip": self.zip, "nx": self.nx, "until_s": self.until_s}


def _combinations(varies: list[Vary], zip_: bool) -> list[tuple[Any, ...]]:
    if zip_:
        lengths = {v.path: len(v.values) for v in varies}
        if len(set(lengths.values())) > 1:
            raise SweepError("--zip needs every --vary to have the same number of values; got "
                             + ", ".join(f"{p}: {n}" for p, n in lengths.items()))
        return list(zip(*(v.values for v in varies)))
    total = math.prod(len(v.values) for v in varies)
    if total > MAX_CASES:
        raise SweepError(f"the sweep has {total} cases ("
                         + " x ".join(str(len(v.values)) for v in varies) + f"); at most {MAX_CASES} are allowed")
    return list(itertools.product(*(v.values for v in varies)))


def build_plan(scenario: Scenario, varies: list[Vary], zip_: bool = False, nx: int | None = None,
               until_s: float | None = None) -> SweepPlan:
    """Every case of the sweep, each validated by parse_scenario; SweepError lists what is wrong before any run."""
    if not varies:
        raise SweepError("a sweep needs at least one --vary PATH=START:STOP:COUNT or PATH=v1,v2,v3")
    paths = [v.path for v in varies]
    for n, p in enumerate(paths):
        if p in paths[:n] or split_path(p) in [split_path(q) for q in paths[:n]]:
            raise SweepError(f"--vary path {p!r} is given twice; vary each path once")
    if nx is not None and not (isinstance(nx, int) and 4 <= nx):
        raise SweepError(f"--resolution = {nx!r} is not allowed: a whole number of cells, at least 4")
    if until_s is not None and not (math.isfinite(until_s) and 0.0 < until_s <= END_TIME_MAX_S):
        raise SweepError(f"--until = {until_s!r} is not allowed: greater than 0 s and at most {END_TIME_MAX_S:g} s")
    if nx is not None and any(split_path(p) == ["domain", "nx"] for p in paths):
        raise SweepError("--resolution cannot be given while --vary sets domain.nx: the resolution is what varies")
    base = scenario_to_dict(scenario)
    for v in varies:
        _locate(base, v.path)
    combos = _combinations(list(varies), zip_)

    cases: list[Case] = []
    problems: list[str] = []
    for index, combo in enumerate(combos):
        doc = json.loads(json.dumps(base))
        values: dict[str, Any] = {}
        for v, value in zip(varies, combo):
            container, key, current = _locate(doc, v.path)
            container[key] = _coerce(current, value)
            values[v.path] = container[key]
        try:
            parsed = parse_scenario(doc)
            to_setup(parsed, nx)
        except (ScenarioError, ValueError) as err:
            hints = [f"allowed at {p}: {a}" for p in values if (a := allowed_values(p))]
            problems.append(f"case {index} ({', '.join(f'{p} = {val!r}' for p, val in values.items())}): {err}"
                            + (f" [{'; '.join(hints)}]" if hints else ""))
            continue
        case_doc = scenario_to_dict(parsed)
        nx_case = int(nx if nx is not None else parsed.domain.nx)
        until_case = float(until_s if until_s is not None else parsed.end_time_s)
        cases.append(Case(index, values, case_doc, nx_case, until_case, case_key(case_doc, nx_case, until_case)))
    if problems:
        shown = problems[:5]
        more = f" (and {len(problems) - 5} more)" if len(problems) > 5 else ""
        raise SweepError(f"{len(problems)} of {len(combos)} cases refused, nothing was run{more}: "
                         + " | ".join(shown))
    return SweepPlan(scenario.name, scenario.description, tuple(varies), bool(zip_), nx, until_s, tuple(cases))


# ----------------------------------------------------------------------------- sweep files

class SweepFile(BaseModel):
    """A saved sweep: the scenario (built-in name, or a path relative to the file) and the --vary lines."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    name: str = Field(min_length=1, max_length=80)
    description: str = Field("", max_length=4000)
    scenario: str = Field(min_length=1)
    vary: list[str] = Field(min_length=1, max_length=16)
    zip: bool = False
    until_s: Optional[float] = Field(None, gt=0.0, le=END_TIME_MAX_S)
    nx: Optional[int] = Field(None, ge=4)


def builtin_sweep_names() -> list[str]:
    return sorted(p.stem for p in SWEEP_DIR.glob("*.json")) if SWEEP_DIR.is_dir() else []


def is_sweep_file(text: str) -> bool:
    """Whether SCENARIO names a sweep (a built-in sweep name, or a JSON file with a "vary" list)."""
    if not text.endswith(".json"):
        return text in builtin_sweep_names()
    try:
        doc = json.loads(Path(text).read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError):
        return False
    return isinstance(doc, dict) and "vary" in doc


def load_sweep_file(text: str) -> tuple[SweepFile, Scenario]:
    """The sweep file and its scenario; SweepError naming the field if either is refused."""
    from pydantic import ValidationError

    path = Path(text) if text.endswith(".json") else SWEEP_DIR / f"{text}.json"
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
        spec = SweepFile.model_validate(doc)
    except OSError as err:
        raise SweepError(f"sweep file {str(path)!r} cannot be read: {err.strerror}") from None
    except json.JSONDecodeError as err:
        raise SweepError(f"sweep file {path.name}: not valid JSON: {err}") from None
    except ValidationError as err:
        first = err.errors(include_url=False)[0]
        where = ".".join(str(p) for p in first["loc"])
        raise SweepError(f"sweep file {path.name}: {where} = {first.get('input')!r} is not allowed: "
                         f"{first['msg']}") from None
    return spec, resolve_scenario_ref(spec.scenario, path.parent)


def resolve_scenario_ref(ref: str, base_dir: Path | None = None) -> Scenario:
    """A built-in scenario name, or a scenario JSON file (relative to base_dir if given)."""
    if not ref.endswith(".json") and ref in builtin_names():
        return load_builtin(ref)
    path = Path(ref)
    if base_dir is not None and not path.is_absolute() and not path.exists():
        path = base_dir / path
    if not ref.endswith(".json") and not path.exists():
        raise SweepError(f"scenario {ref!r} is not allowed: not a file, and the built-ins are "
                         + ", ".join(builtin_names()))
    return load_scenario(path)


