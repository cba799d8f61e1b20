"""Parameter sweeps: one scenario, values set at dotted paths into its document, every case run on Dask.

A design question is a curve (thrust coefficient against ambient pressure, start-up pressure ratio against area
ratio), so a sweep states the ranges once and gets one table and one report back:

    vary = parse_vary("conditions.ambient.p_pa=101325:1000:6")     # START:STOP:COUNT, evenly spaced
    vary = parse_vary("numerics.flux=hllc,hll")                    # a list of values (JSON or bare words)
    plan = build_plan(load_builtin("nozzle_sea_level"), [vary], nx=160, until_s=2e-3)
    result = run_sweep(plan, "sweep_results", workers=2)

Several varies give the Cartesian product (the first varies slowest), or with ``zip_=True`` they are paired
(equal lengths required). Every case is a copy of the scenario document with the values set, validated by
``parse_scenario`` before anything runs, so a bad path or value is refused up front with the path, the value
and the allowed range.

Each case runs through ``solver.batch.run_scenario`` (the function behind ``shockslate run``) as one task on
Dask's distributed scheduler: by default a local cluster of process workers, one per core, each limited to one
numba thread so that workers do not fight over cores; or an existing cluster given by its scheduler address.
A task runs into a temporary folder on its worker and sends the files back, so a remote cluster needs no shared
file system. The case's folder is named by a hash of its scenario, resolution and end time; a case whose
summary.json says it came to an end (finished, diverged, stalled: outcomes a re-run would repeat) is kept on a
re-run, so an interrupted sweep resumes and deleting one case folder reruns only that case. A case that raises
is a row with its error, and the other cases go on.

Outputs in the sweep folder: sweep.csv (one row per case: case number, varied values, summary figures with units
in the column names, status, error, folder), sweep.json (the plan and the same rows) and sweep_report.html
(self-contained; plots of each summary figure against each varied value and, for a reservoir-fed nozzle, thrust
coefficient and mass flow beside the ideal 1D curves over the same range from shockslate.solver.relations).
"""
from __future__ import annotations

import base64
import csv
import hashlib
import html
import io
import itertools
import json
import math
import os
import re
import sys
import tempfile
import time
import uuid
from contextlib import ExitStack, contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Literal, Optional, get_args, get_origin

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from . import nozzle
from .gas import Gas
from .report import CAUTION
from .scenario import (
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
#: Outcomes that a re-run would only repeat: such a case is kept when the sweep is run again.
DONE_STATUSES = ("finished", "diverged", "stalled")
#: Status of a case that raised (kept as error.json in its folder; it is run again on the next sweep) and of a
#: case that never ran because the sweep was stopped.
FAILED, NOT_RUN = "failed", "not run"
MAX_CASES = 10_000
#: How long a sweep waits for the first worker of a cluster, seconds.
WORKER_WAIT_S = 60.0
MAX_COUNT = 1_000
CASE_PREFIX = "case-"
#: Leading columns and trailing columns of sweep.csv; the varied paths and the figures go between.
LEAD_COLUMNS = ("case",)
TAIL_COLUMNS = ("status", "error", "folder")
#: Run figures of summary.json copied into the table (resolution.* flattened to nx, ny, dx_m).
RUN_FIGURES = ("sim_time_s", "steps", "wall_s", "cell_updates_per_s", "nx", "ny", "dx_m", "floors_total")
#: A figure whose spread across the finished cases is within this fraction of its size is listed, not plotted.
CONSTANT_RTOL = 1e-6
#: Varied paths along which the ideal 1D nozzle figures can be drawn as a continuous curve.
IDEAL_CURVE_PATHS = ("conditions.ambient.p_pa", "conditions.reservoir.p0_pa", "conditions.reservoir.t0_k",
                     "gas.gamma", "gas.molar_mass_kg_kmol")


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
        return CASE_PREFIX + self.key[:16]

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


# ----------------------------------------------------------------------------- one case (runs on a worker)

def run_case(scenario: dict, nx: int, until_s: float, write_fields: bool = False,
             write_pictures: bool = False) -> dict:
    """Run one case through run_scenario in a temporary folder; return its summary and files (name -> bytes).

    Runs on a Dask worker (or in-process): numba is held to one thread for the duration, so that workers sharing
    a machine do not fight over its cores. Any exception becomes {"error": ...} so the sweep goes on.
    """
    import numba

    from .batch import run_scenario

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    started = time.perf_counter()
    try:
        with tempfile.TemporaryDirectory(prefix="shockslate-case-") as tmp:
            summary = run_scenario(parse_scenario(scenario), tmp, until_s=until_s, nx=nx, progress=None,
                                   write_fields=write_fields, write_pictures=write_pictures)
            files = {p.name: p.read_bytes() for p in sorted(Path(tmp).iterdir())
                     if p.is_file() and p.name != "summary.json"}
        return {"summary": summary, "files": files, "error": None, "host": _host(),
                "wall_s": time.perf_counter() - started}
    except Exception as err:  # noqa: BLE001 - a failing case is a row, not the end of the sweep
        return {"summary": None, "files": {}, "error": f"{type(err).__name__}: {err}", "host": _host(),
                "wall_s": time.perf_counter() - started}
    finally:
        numba.set_num_threads(before)


def _host() -> str:
    import socket

    return f"{socket.gethostname()}:{os.getpid()}"


# ----------------------------------------------------------------------------- rows

def summary_row(summary: dict) -> dict[str, Any]:
    """The summary figures of one case as flat columns with units in their names."""
    row: dict[str, Any] = {}
    res = summary.get("resolution") or {}
    for name in RUN_FIGURES:
        row[name] = res.get(name) if name in ("nx", "ny", "dx_m") else summary.get(name)
    for group in ("stations", "probes"):
        for item, readings in (summary.get(group) or {}).items():
            for key, value in readings.items():
                if key != "kind":
                    row[f"{group}.{item}.{key}"] = value
    for key, value in (summary.get("nozzle") or {}).items():
        row[f"nozzle.{key}"] = value
    return row


def _case_row(case: Case, status: str, error: str, summary: dict | None) -> dict[str, Any]:
    row: dict[str, Any] = {"case": case.index}
    row.update(case.values)
    if summary is not None:
        row.update(summary_row(summary))
    row.update({"status": status, "error": error, "folder": case.folder})
    return row


def _columns(rows: list[dict], varied: list[str]) -> list[str]:
    figures: list[str] = []
    seen = set(LEAD_COLUMNS) | set(varied) | set(TAIL_COLUMNS)
    for row in rows:
        for key in row:
            if key not in seen:
                seen.add(key)
                figures.append(key)
    return [*LEAD_COLUMNS, *varied, *figures, *TAIL_COLUMNS]


def _read_done(folder: Path, key: str) -> Optional[dict]:
    """The summary of a case folder that came to an end for this very case, else None."""
    try:
        summary = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
        meta = json.loads((folder / "case.json").read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError):
        return None
    if meta.get("key") != key or summary.get("status") not in DONE_STATUSES:
        return None
    return summary


def _write_case(folder: Path, case: Case, outcome: dict) -> None:
    """Files first, summary.json last (by rename), so a folder with a summary.json is a complete case."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "error.json").unlink(missing_ok=True)
    (folder / "summary.json").unlink(missing_ok=True)
    meta = {"key": case.key, "values": case.values, "nx": case.nx, "until_s": case.until_s,
            "ran_on": outcome.get("host"), "scenario": case.scenario}
    (folder / "case.json").write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")
    if outcome.get("summary") is None:
        (folder / "error.json").write_text(json.dumps({"error": outcome.get("error")}, indent=2) + "\n",
                                           encoding="utf-8")
        return
    for name, data in outcome["files"].items():
        (folder / name).write_bytes(data)
    tmp = folder / "summary.json.part"
    tmp.write_text(json.dumps(outcome["summary"], indent=2) + "\n", encoding="utf-8")
    tmp.replace(folder / "summary.json")


# ----------------------------------------------------------------------------- running

@dataclass(frozen=True)
class SweepProgress:
    """Counts for the progress line: finished (came to an end), running, failed (diverged, stalled or raised)."""

    total: int
    done: int
    running: int
    failed: int
    reused: int
    elapsed_s: float

    @property
    def waiting(self) -> int:
        return self.total - self.done - self.running


def progress_line(pr: SweepProgress) -> str:
    width = 24
    filled = int(round(width * pr.done / pr.total)) if pr.total else width
    return (f"sweep [{'#' * filled}{'.' * (width - filled)}] {pr.done}/{pr.total} done "
            f"({pr.done - pr.failed} finished, {pr.failed} failed, {pr.reused} kept from before), "
            f"{pr.running} running, {max(pr.waiting, 0)} waiting  {pr.elapsed_s:.0f} s")


class ProgressPrinter:
    """Default progress: on a terminal one line on stderr rewritten in place; in a log a new line only when the
    counts change."""

    def __init__(self, stream=None) -> None:
        self.stream = stream or sys.stderr
        self.last: Optional[tuple[int, int, int]] = None

    def __call__(self, pr: SweepProgress) -> None:
        tty = getattr(self.stream, "isatty", lambda: False)()
        counts = (pr.done, pr.running, pr.failed)
        if tty:
            self.stream.write("\r" + progress_line(pr) + "  " + ("\n" if pr.done >= pr.total else ""))
        elif counts != self.last:
            self.stream.write(progress_line(pr) + "\n")
        self.last = counts
        self.stream.flush()


def print_progress(pr: SweepProgress) -> None:
    """The progress line on stderr (see ProgressPrinter); run_sweep makes a fresh printer per sweep."""
    ProgressPrinter()(pr)


@dataclass
class SweepResult:
    """What a sweep produced: rows in case order, which cases ran now, which were kept, and where it ran."""

    out_dir: Path
    plan: SweepPlan
    rows: list[dict]
    columns: list[str]
    ran: list[int] = field(default_factory=list)
    reused: list[int] = field(default_factory=list)
    where: str = ""
    interrupted: bool = False

    def count(self, *statuses: str) -> int:
        return sum(1 for r in self.rows if r["status"] in statuses)

    @property
    def all_finished(self) -> bool:
        return self.count("finished") == len(self.rows)


def worker_environment() -> dict[str, str]:
    """Environment of a local worker: numba held to one thread, and the JIT cache of this process."""
    env = {"NUMBA_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"}
    cache_dir = os.environ.get("NUMBA_CACHE_DIR")
    if not cache_dir:
        import numba

        cache_dir = numba.config.CACHE_DIR or ""
    if cache_dir:
        env["NUMBA_CACHE_DIR"] = str(Path(cache_dir).resolve())
    return env


@contextmanager
def kept_environ():
    """Put os.environ back as it was: a Nanny writes the variables of its workers into this process before it
    spawns them (distributed's pre-spawn environment)."""
    saved = dict(os.environ)
    try:
        yield
    finally:
        if dict(os.environ) != saved:
            os.environ.clear()
            os.environ.update(saved)


def local_cluster(workers: int | None = None):
    """A distributed.LocalCluster of process workers (default: one per core), one thread each, numba held to one
    thread and pointed at the same JIT cache as this process.

    The variables are given as the pre-spawn environment, so they are set before the worker process starts:
    numba reads NUMBA_NUM_THREADS and NUMBA_CACHE_DIR once, at import, and a spawned worker may import it early
    (it re-imports the main module of this process). This process's own environment is left as it was.
    """
    import logging

    import dask
    from distributed import LocalCluster

    n = int(workers) if workers else (len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity")
                                      else (os.cpu_count() or 1))
    env = worker_environment()
    pre_spawn = {**(dask.config.get("distributed.nanny.pre-spawn-environ", default={}) or {}), **env}
    with kept_environ(), dask.config.set({"distributed.nanny.pre-spawn-environ": pre_spawn}):
        # no dashboard; the scheduler's small HTTP server on a free loopback port rather than on 8787
        return LocalCluster(n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1",
                            dashboard_address="127.0.0.1:0", scheduler_kwargs={"dashboard": False},
                            silence_logs=logging.ERROR, env=env)


def check_scheduler_address(address: str) -> str:
    if not re.fullmatch(r"(tcp|tls)://[^\s/:]+:\d{1,5}", address or ""):
        raise SweepError(f"--scheduler = {address!r} is not allowed: give the scheduler's address as "
                         "tcp://HOST:PORT (or tls://HOST:PORT)")
    return address


def run_sweep(plan: SweepPlan, out_dir: str | Path, *, scheduler: str | None = None, workers: int | None = None,
              client: Any = None, write_fields: bool = False, write_pictures: bool = False,
              progress: Callable[[SweepProgress], None] | None | Literal["default"] = "default",
              announce: Callable[[str], None] | None = None, progress_interval_s: float = 1.0,
              write_report: bool = True) -> SweepResult:
    """Run every case not already done in out_dir and write sweep.csv, sweep.json and sweep_report.html.

    Where it runs: `client` (a distributed.Client, left open), else `scheduler` (address of an existing cluster),
    else a local cluster of `workers` process workers (default: one per core) started and closed here. Nothing is
    started when every case is already done. announce(text) is told where the cases go. Ctrl+C cancels what is
    left; the tables are still written, with those cases as "not run".
    """
    out = Path(out_dir)
    if progress == "default":
        progress = ProgressPrinter()
    say = announce or (lambda text: None)
    started = time.perf_counter()
    summaries: dict[str, Optional[dict]] = {}
    errors: dict[str, str] = {}
    statuses: dict[str, str] = {}
    unique: dict[str, Case] = {}
    for case in plan.cases:
        unique.setdefault(case.key, case)
    reused_keys: set[str] = set()
    ran_keys: set[str] = set()
    for key, case in unique.items():
        summary = _read_done(out / case.folder, key)
        if summary is not None:
            summaries[key] = summary
            statuses[key] = summary["status"]
            errors[key] = summary.get("message") or ""
            reused_keys.add(key)
    pending = [c for k, c in unique.items() if k not in reused_keys]
    result = SweepResult(out, plan, [], [], reused=[c.index for c in plan.cases if c.key in reused_keys])

    def report_progress(running: int) -> None:
        if progress is None:
            return
        done = len(statuses)
        failed = sum(1 for s in statuses.values() if s != "finished")
        progress(SweepProgress(len(unique), done, min(running, len(unique) - done), failed, len(reused_keys),
                               time.perf_counter() - started))

    if not pending:
        result.where = "nothing to run"
        say(f"sweep: all {len(unique)} cases are already done in {out}; writing the tables")
    else:
        from distributed import Client

        with ExitStack() as stack:
            if client is not None:
                result.where = f"the given cluster at {client.scheduler.address}"
            elif scheduler is not None:
                address = check_scheduler_address(scheduler)
                try:
                    client = stack.enter_context(Client(address, timeout="15s"))
                except (OSError, TimeoutError) as err:
                    raise SweepError(f"--scheduler = {address!r}: cannot reach a scheduler there ({err})") from None
                result.where = f"the existing cluster at {address}"
            else:
                stack.enter_context(kept_environ())  # a worker restarted by its Nanny writes it again
                cluster = stack.enter_context(local_cluster(workers))
                client = stack.enter_context(Client(cluster))
                result.where = f"a local cluster of {len(cluster.workers)} process workers, one numba thread each"
            try:
                client.wait_for_workers(1, timeout=WORKER_WAIT_S)
            except TimeoutError:
                raise SweepError(f"no worker joined {result.where} within {WORKER_WAIT_S:g} s; start one with "
                                 "`dask worker SCHEDULER_ADDRESS --nthreads 1`") from None
            threads = client.nthreads()
            out.mkdir(parents=True, exist_ok=True)
            say(f"sweep: {len(unique)} cases, {len(reused_keys)} kept from before, {len(pending)} to run on "
                f"{result.where} ({len(threads)} workers, {sum(threads.values())} threads)")
            token = uuid.uuid4().hex[:8]
            futures = {client.submit(run_case, c.scenario, c.nx, c.until_s, write_fields, write_pictures,
                                     key=f"shockslate-case-{c.key[:16]}-{token}", pure=False): c for c in pending}
            remaining = set(futures)
            last = 0.0
            try:
                while remaining:
                    for fut in [f for f in remaining if f.done()]:
                        remaining.discard(fut)
                        case = futures[fut]
                        outcome = _outcome(fut)
                        _write_case(out / case.folder, case, outcome)
                        summary = outcome.get("summary")
                        summaries[case.key] = summary
                        statuses[case.key] = summary["status"] if summary else FAILED
                        errors[case.key] = (summary.get("message") or "") if summary else outcome.get("error", "")
                        ran_keys.add(case.key)
                        last = 0.0
                    now = time.perf_counter()
                    if now - last >= progress_interval_s:
                        last = now
                        report_progress(_running(client, remaining, threads))
                    if remaining:
                        time.sleep(0.05)
            except KeyboardInterrupt:
                result.interrupted = True
                client.cancel(list(remaining))
    result.ran = [c.index for c in plan.cases if c.key in ran_keys]
    for case in plan.cases:
        status = statuses.get(case.key, NOT_RUN)
        result.rows.append(_case_row(case, status, errors.get(case.key, ""), summaries.get(case.key)))
    result.columns = _columns(result.rows, [v.path for v in plan.varies])
    out.mkdir(parents=True, exist_ok=True)
    write_tables(result)
    if write_report:
        write_sweep_report(out / "sweep_report.html", result)
    return result


def _outcome(fut) -> dict:
    """The task's result, or a failed outcome naming why the cluster could not run it."""
    if fut.status == "finished":
        return fut.result()
    if fut.status == "cancelled":
        return {"summary": None, "files": {}, "error": "cancelled: the cluster dropped the task"}
    try:
        exc = fut.exception()
    except Exception as err:  # noqa: BLE001
        exc = err
    return {"summary": None, "files": {}, "error": f"{type(exc).__name__}: {exc}"}


def _running(client, remaining: set, threads: dict[str, int]) -> int:
    """Cases of ours being worked on: per worker, our tasks assigned to it, up to its thread count."""
    ours = {f.key for f in remaining}
    try:
        processing = client.processing()
    except Exception:  # noqa: BLE001 - the count is only for the progress line
        return min(len(remaining), sum(threads.values()))
    return sum(min(sum(1 for k in keys if k in ours), threads.get(w, 1)) for w, keys in processing.items())


# ----------------------------------------------------------------------------- tables

def _csv_cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return str(value)


def write_tables(result: SweepResult) -> None:
    """sweep.csv (one row per case) and sweep.json (the plan, where it ran, the same rows)."""
    out = result.out_dir
    with (out / "sweep.csv").open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(result.columns)
        for row in result.rows:
            writer.writerow([_csv_cell(row.get(c)) for c in result.columns])
    doc = {
        **result.plan.as_dict(),
        "where": result.where,
        "interrupted": result.interrupted,
        "counts": {"cases": len(result.rows), "finished": result.count("finished"),
                   "diverged": result.count("diverged"), "stalled": result.count("stalled"),
                   "failed": result.count(FAILED), "not_run": result.count(NOT_RUN),
                   "ran_now": len(result.ran), "kept_from_before": len(result.reused)},
        "columns": result.columns,
        "rows": [{c: (_json_value(row.get(c))) for c in result.columns} for row in result.rows],
        "caution": CAUTION,
    }
    (out / "sweep.json").write_text(json.dumps(doc, indent=2) + "\n", encoding="utf-8")


def _json_value(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


# ----------------------------------------------------------------------------- report

def _number(value: Any) -> Optional[float]:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    return float(value) if math.isfinite(value) else None


def _column(rows: list[dict], col: str) -> list[float]:
    """A column as floats, NaN where a case has no finite value (matplotlib leaves a gap)."""
    return [v if (v := _number(r.get(col))) is not None else math.nan for r in rows]


def _png(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90, bbox_inches="tight")
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _x_axis(values: list[Any]) -> tuple[list[float], Optional[list[str]]]:
    """Numeric x for numeric values; positions and tick labels for words."""
    if all(_number(v) is not None for v in values):
        return [float(v) for v in values], None
    labels = list(dict.fromkeys(str(v) for v in values))
    return [float(labels.index(str(v))) for v in values], labels


def _series(rows: list[dict], path: str, varied: list[str]) -> dict[str, list[dict]]:
    """Rows grouped by the values of the other varied paths (one line per group), sorted along path."""
    others = [p for p in varied if p != path]
    groups: dict[str, list[dict]] = {}
    for row in rows:
        label = ", ".join(f"{p} = {row[p]!r}" for p in others)
        groups.setdefault(label, []).append(row)
    for items in groups.values():
        items.sort(key=lambda r: (_number(r[path]) if _number(r[path]) is not None else 0.0, str(r[path])))
    return groups


def _figure_groups(columns: list[str]) -> dict[str, list[str]]:
    groups: dict[str, list[str]] = {}
    for col in columns:
        if col.startswith(("stations.", "probes.")):
            group = ".".join(col.split(".")[:2])
        elif col.startswith("nozzle."):
            group = "nozzle"
        else:
            group = "run"
        groups.setdefault(group, []).append(col)
    return groups


def ideal_nozzle_figures(p0_pa: float, t0_k: float, p_amb_pa: float, gamma: float, r_j_kg_k: float,
                         throat_area_m2: float, area_ratio: float, divergence_factor: float) -> dict[str, float]:
    """Ideal 1D C_F (with and without the divergence factor), choked mass flow and exit pressure for a point of
    a report curve: solver.nozzle.ideal_figures, the same function behind summary.json and the page."""
    fig = nozzle.ideal_figures(p0_pa, t0_k, p_amb_pa, gamma, r_j_kg_k, throat_area_m2, area_ratio,
                               divergence_factor)
    return {"cf": fig.ideal_thrust_coefficient, "cf_div": fig.ideal_thrust_coefficient_with_divergence,
            "mdot": fig.choked_mass_flow_kg_s, "pe_pa": fig.ideal_exit_pressure_pa}


def _case_gas(case: Case) -> tuple[float, float]:
    gas = Gas(case.scenario["gas"]["gamma"], case.scenario["gas"]["molar_mass_kg_kmol"])
    return gas.gamma, gas.r_j_kg_k


def _nozzle_plots(plt, result: SweepResult, finished: list[dict]) -> list[str]:
    """Per varied path: simulated C_F and throat mass flow beside the ideal 1D values over the same range."""
    varied = [v.path for v in result.plan.varies]
    by_index = {c.index: c for c in result.plan.cases}
    parts: list[str] = []
    for path in varied:
        groups = _series(finished, path, varied)
        fig, (ax_cf, ax_m) = plt.subplots(1, 2, figsize=(11.0, 3.8))
        for n, (label, rows) in enumerate(groups.items()):
            colour = f"C{n % 10}"
            xs, ticks = _x_axis([r[path] for r in rows])
            tag = f" ({label})" if label else ""
            ax_cf.plot(xs, _column(rows, "nozzle.thrust_coefficient"), "o", color=colour,
                       label="simulated" + tag)
            ax_m.plot(xs, _column(rows, "nozzle.mass_flow_throat_kg_s"), "o", color=colour,
                      label="simulated, throat" + tag)
            first = by_index[rows[0]["case"]]
            dense = path in IDEAL_CURVE_PATHS and ticks is None and len(xs) > 1
            if dense:
                grid = np.linspace(min(xs), max(xs), 200)
                g, r = _case_gas(first)
                base = {"p0_pa": rows[0]["nozzle.p0_pa"], "t0_k": rows[0]["nozzle.t0_k"],
                        "p_amb_pa": rows[0]["nozzle.p_amb_pa"], "gamma": g, "r_j_kg_k": r}
                key = {"conditions.ambient.p_pa": "p_amb_pa", "conditions.reservoir.p0_pa": "p0_pa",
                       "conditions.reservoir.t0_k": "t0_k", "gas.gamma": "gamma"}.get(path)
                curves = []
                for x in grid:
                    args = dict(base)
                    if key is not None:
                        args[key] = float(x)
                    else:  # molar mass
                        args["r_j_kg_k"] = Gas(g, float(x)).r_j_kg_k
                    curves.append(ideal_nozzle_figures(
                        throat_area_m2=rows[0]["nozzle.throat_area_m2"], area_ratio=rows[0]["nozzle.area_ratio"],
                        divergence_factor=rows[0]["nozzle.divergence_factor"], **args))
                ax_cf.plot(grid, [c["cf"] for c in curves], "-", color=colour, label="ideal 1D" + tag)
                ax_cf.plot(grid, [c["cf_div"] for c in curves], "--", color=colour,
                           label="ideal 1D x divergence factor" + tag)
                ax_m.plot(grid, [c["mdot"] for c in curves], "-", color=colour, label="ideal 1D, choked" + tag)
                if path == "conditions.ambient.p_pa" and n == 0:
                    pe = curves[0]["pe_pa"]
                    if min(xs) <= pe <= max(xs):
                        ax_cf.axvline(pe, color="0.5", lw=0.8, ls=":")
                        ax_cf.annotate("pa = pe (design)", (pe, ax_cf.get_ylim()[0]), fontsize=8, rotation=90,
                                       va="bottom", ha="right", color="0.4")
            else:
                ax_cf.plot(xs, _column(rows, "nozzle.ideal_thrust_coefficient"), "-", color=colour,
                           label="ideal 1D at each case" + tag)
                ax_cf.plot(xs, _column(rows, "nozzle.ideal_thrust_coefficient_with_divergence"), "--",
                           color=colour, label="ideal 1D x divergence factor" + tag)
                ax_m.plot(xs, _column(rows, "nozzle.choked_mass_flow_kg_s"), "-", color=colour,
                          label="ideal 1D, choked, at each case" + tag)
            if ticks is not None:
                for ax in (ax_cf, ax_m):
                    ax.set_xticks(range(len(ticks)), ticks)
        ax_cf.set_ylabel("thrust coefficient C_F [-]")
        ax_m.set_ylabel("mass flow [kg/s]")
        for ax in (ax_cf, ax_m):
            ax.set_xlabel(path)
            ax.grid(alpha=0.3)
            ax.legend(fontsize=7)
        fig.tight_layout()
        parts.append(f"<h3>against {html.escape(path)}</h3><img alt='nozzle figures against "
                     f"{html.escape(path)}' src='data:image/png;base64,{_png(fig)}'>")
        plt.close(fig)
    return parts


def _figure_plots(plt, result: SweepResult, finished: list[dict]) -> tuple[list[str], list[tuple[str, Any]]]:
    """Small multiples of every summary figure that changes across the sweep; the constant ones as a list."""
    varied = [v.path for v in result.plan.varies]
    figure_cols = [c for c in result.columns if c not in varied and c not in LEAD_COLUMNS + TAIL_COLUMNS]
    numeric = [c for c in figure_cols if any(_number(r.get(c)) is not None for r in finished)]
    changing, constant = [], []
    for col in numeric:
        vals = [_number(r.get(col)) for r in finished if _number(r.get(col)) is not None]
        spread = max(vals) - min(vals)
        (changing if spread > CONSTANT_RTOL * max(abs(v) for v in vals) else constant).append(col)
    const_rows = [(c, finished[0].get(c)) for c in constant]
    parts: list[str] = []
    for path in varied:
        groups = _series(finished, path, varied)
        for group, cols in _figure_groups(changing).items():
            ncols = min(4, len(cols))
            nrows = math.ceil(len(cols) / ncols)
            fig, axes = plt.subplots(nrows, ncols, figsize=(3.1 * ncols, 2.4 * nrows), squeeze=False)
            for ax, col in zip(axes.flat, cols):
                for n, (label, rows) in enumerate(groups.items()):
                    xs, ticks = _x_axis([r[path] for r in rows])
                    ax.plot(xs, _column(rows, col), "o-", ms=3, color=f"C{n % 10}", label=label or None)
                    if ticks is not None:
                        ax.set_xticks(range(len(ticks)), ticks)
                ax.set_title(col.split(".")[-1] if group != "run" else col, fontsize=8)
                ax.tick_params(labelsize=7)
                ax.grid(alpha=0.3)
            for ax in list(axes.flat)[len(cols):]:
                ax.axis("off")
            if len(groups) > 1:
                axes.flat[0].legend(fontsize=6)
            fig.suptitle(f"{group} against {path}", fontsize=9)
            fig.tight_layout()
            parts.append(f"<h3>{html.escape(group)} against {html.escape(path)}</h3><img alt='{html.escape(group)}"
                         f" against {html.escape(path)}' src='data:image/png;base64,{_png(fig)}'>")
            plt.close(fig)
    return parts, const_rows


def _table(header: list[str], rows: list[list[Any]]) -> str:
    def cell(v: Any) -> str:
        if isinstance(v, float):
            return f"{v:.6g}"
        return html.escape("" if v is None else str(v))

    head = "".join(f"<th>{html.escape(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{cell(v)}</td>" for v in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def write_sweep_report(path: Path, result: SweepResult) -> Path:
    """Self-contained HTML: the plan, every case's status, and base64 PNG plots drawn with matplotlib."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    plan = result.plan
    varied = [v.path for v in plan.varies]
    finished = [r for r in result.rows if r["status"] == "finished"]
    parts = [
        "<!doctype html><html><head><meta charset='utf-8'>",
        f"<title>shockslate sweep: {html.escape(plan.scenario_name)}</title>",
        "<style>body{font-family:sans-serif;max-width:1150px;margin:1em auto;color:#222}"
        "table{border-collapse:collapse;font-size:12px;margin:0.5em 0}td,th{border:1px solid #ccc;padding:2px 6px}"
        "th{background:#eee}.caution{background:#fff4d6;border:1px solid #e0b84c;padding:0.5em}"
        "img{max-width:100%}</style></head><body>",
        f"<h1>Sweep of {html.escape(plan.scenario_name)}</h1>",
        f"<p class='caution'>{html.escape(CAUTION)}</p>",
        f"<p>{html.escape(plan.description)}</p>",
        "<h2>Plan</h2>",
        _table(["what", "value"], [
            *[(f"vary {v.path}", ", ".join(repr(x) for x in v.values)) for v in plan.varies],
            ("combined as", "pairs (zip)" if plan.zip else "every combination (Cartesian product)"),
            ("resolution nx", plan.nx if plan.nx is not None else "the scenario's"),
            ("until [s]", plan.until_s if plan.until_s is not None else "the scenario's end time"),
            ("ran on", result.where),
            ("cases", f"{len(result.rows)}: {result.count('finished')} finished, "
                      f"{result.count('diverged', 'stalled', FAILED)} failed, {result.count(NOT_RUN)} not run; "
                      f"{len(result.ran)} ran now, {len(result.reused)} kept from before"),
        ]),
        "<h2>Cases</h2>",
        _table(["case", *varied, "status", "error", "folder"],
               [[r["case"], *[r[p] for p in varied], r["status"], r["error"], r["folder"]] for r in result.rows]),
    ]
    if not finished:
        parts.append("<p>No case finished, so there is nothing to plot.</p>")
    else:
        if any(r.get("nozzle.thrust_coefficient") is not None for r in finished):
            parts.append("<h2>Nozzle against ideal 1D theory</h2>"
                         "<p>Points: simulated thrust coefficient C_F = F / (p0 A*) at the exit station and mass "
                         "flow at the throat station, at the end of each case. Lines: ideal 1D values from "
                         "solver.relations (Sutton and Biblarz, ch. 3) for each series' rasterised throat area and "
                         "area ratio, drawn continuously where the varied quantity enters the 1D relations directly, "
                         "else joined case to case. The ideal C_F assumes a full-flowing nozzle; it does not hold "
                         "where a shock stands inside the nozzle.</p>")
            parts.extend(_nozzle_plots(plt, result, finished))
        plots, constant = _figure_plots(plt, result, finished)
        parts.append("<h2>Summary figures against the varied values</h2><p>Finished cases only; the names are "
                     "columns of sweep.csv (units in the names).</p>")
        parts.extend(plots)
        if constant:
            parts.append(f"<h3>Figures that did not change across the sweep (within {CONSTANT_RTOL:g} of their "
                         "size)</h3>")
            parts.append(_table(["figure", "value"], constant))
    parts.append("</body></html>")
    path.write_text("\n".join(parts), encoding="utf-8")
    return path
