"""Scenario files: one JSON document holding everything needed to set up and run a flow.

A scenario is validated by pydantic models (unknown fields refused, every number with its unit in
its name and a range) and then by the solver's own dataclasses, so a bad file is refused with a
message naming the JSON path (e.g. ``conditions.reservoir.p0_pa``), the value and what is allowed.
The JSON Schema of the models is written to ``scenarios/schema.json`` for other tools and editors.

Built-in scenarios live as JSON files in the repository's ``scenarios/`` folder.
"""
from __future__ import annotations

import json
import math
from importlib import resources
from pathlib import Path
from typing import Annotated, Any, Literal, Optional

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from .choices import Choice, literal, table
from .conditions import MACH_MAX, P_MAX_PA, T_MAX_K, T_MIN_K, Ambient, Conditions, Reservoir, Stream
from .diagnostics import Station
from .domain import MAX_NX, Domain
from .gas import GAMMA_MAX, GAMMA_MIN, PRESET_CHOICES, PRESETS, Gas
from .geometry import WallGeometry, wall_geometry
from .kinds import EDGES, PAINTS
from .numerics import CFL_MAX, CFL_MIN, FLUXES, INTEGRATOR_CHOICES, LIMITERS, ORDERS, Numerics
from .shapes import MIRRORS, SHAPE_KINDS, Metres, PositiveMetres, Sketch, SketchModel
from .simulation import Edges, Setup, Simulation
from .validation import Invalid, Problem, Refused, numeric_limits, problems, show_value

#: Folder of the built-in scenario files (package data of shockslate.scenarios; scenarios/ in a checkout).
SCENARIO_DIR = Path(str(resources.files("shockslate.scenarios")))
#: The scenario the server opens with: over-expanded axisymmetric nozzle into sea-level air.
DEFAULT_SCENARIO = "nozzle_sea_level"
SCHEMA_FILE = "schema.json"

END_TIME_MAX_S = 10.0
MOLAR_MASS_MAX_KG_KMOL = 1000.0

#: Geometry modes: planar (per metre of depth) or axisymmetric (x the axis, y the radius).
MODES: dict[str, Choice] = table(Choice("planar", "planar"), Choice("axisymmetric", "axisymmetric (x axis, y radius)"))
#: Roles a station may have in the nozzle figures.
ROLES: dict[str, Choice] = table(Choice("throat", "throat"), Choice("exit", "exit"))
#: How the fluid cells start (the scenario's `initial.kind`).
INITIAL_KINDS: dict[str, Choice] = table(
    Choice("ambient", "still ambient gas"), Choice("stream", "stream state everywhere"),
    Choice("reservoir_upstream_of_x", "reservoir gas left of a line"),
    Choice("reservoir_in_circle", "reservoir gas in a circle"))


class ScenarioError(Refused):
    """A scenario document was refused; `problems` name the JSON path, the value, the rule and say it plainly."""

    @classmethod
    def one(cls, field: str, value: Any, rule: str, allowed: str, message: str) -> "ScenarioError":
        return cls([Problem(field, value, rule, allowed, message)])


# ----------------------------------------------------------------------------- field types


Point = tuple[Metres, Metres]
Pressure = Annotated[float, Field(strict=True, allow_inf_nan=False, gt=0.0, le=P_MAX_PA)]
Temperature = Annotated[float, Field(strict=True, allow_inf_nan=False, ge=T_MIN_K, le=T_MAX_K)]
Paint = literal(PAINTS)
EdgeKind = literal(EDGES)
Name = Annotated[str, Field(min_length=1, max_length=80)]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


# ----------------------------------------------------------------------------- the other parts

class GasModel(_Strict):
    """Calorically perfect gas. A named preset must agree with gamma and molar mass (null for a custom gas)."""

    preset: Optional[literal(PRESET_CHOICES)] = Field(None, title="gas preset")  # type: ignore[valid-type]
    gamma: float = Field(strict=True, allow_inf_nan=False, ge=GAMMA_MIN, le=GAMMA_MAX, title="ratio of specific heats")
    molar_mass_kg_kmol: float = Field(strict=True, allow_inf_nan=False, gt=0.0, le=MOLAR_MASS_MAX_KG_KMOL,
                                      title="molar mass")

    @model_validator(mode="after")
    def _preset_agrees(self) -> "GasModel":
        if self.preset is not None:
            ref = PRESETS[self.preset]
            for name, value, want, unit in (("gamma", self.gamma, ref.gamma, ""),
                                            ("molar_mass_kg_kmol", self.molar_mass_kg_kmol, ref.molar_mass_kg_kmol,
                                             "kg/kmol")):
                if not math.isclose(value, want, rel_tol=1e-9):
                    raise Invalid(name, value, "matches_preset", f"{show_value(want, unit)} (or preset null)",
                                  f"The preset {self.preset} has {name.split('_kg')[0].replace('_', ' ')} "
                                  f"{show_value(want, unit)}; you gave {show_value(value, unit)}. Give that value, "
                                  "or no preset for a custom gas.")
        return self


class DomainModel(_Strict):
    """Computational rectangle in metres and its resolution (cells across x; cells are square)."""

    x_min_m: Metres = Field(title="domain left edge x")
    x_max_m: Metres = Field(title="domain right edge x")
    y_min_m: Metres = Field(title="domain bottom edge y")
    y_max_m: Metres = Field(title="domain top edge y")
    nx: int = Field(strict=True, ge=4, le=MAX_NX, title="resolution (cells across x)")

    @model_validator(mode="after")
    def _extent(self) -> "DomainModel":
        for low, high, words in (("x_min_m", "x_max_m", "right edge"), ("y_min_m", "y_max_m", "top edge")):
            lo, hi = getattr(self, low), getattr(self, high)
            if not hi > lo:
                raise Invalid(high, hi, "greater_than_field", f"above {low} = {show_value(lo, 'm')}",
                              f"The domain's {words} must lie beyond {show_value(lo, 'm')}; you gave "
                              f"{show_value(hi, 'm')}.")
        try:
            Domain(self.x_min_m, self.x_max_m, self.y_min_m, self.y_max_m, self.nx)
        except ValueError as err:  # the cell count across y, which follows from nx and the extent
            raise Invalid("nx", self.nx, "cells", "a resolution that keeps the cell grid within its limits",
                          f"This resolution does not fit the domain: {err}.") from None
        return self


class EdgesModel(_Strict):
    """Condition on each domain edge; 'axis' only at the bottom of an axisymmetric domain."""

    left: EdgeKind = Field("wall", title="left edge")
    right: EdgeKind = Field("open", title="right edge")
    bottom: EdgeKind = Field("wall", title="bottom edge")
    top: EdgeKind = Field("wall", title="top edge")


class ReservoirModel(_Strict):
    """Chamber feed: gas at rest at stagnation pressure and temperature."""

    p0_pa: Pressure = Field(2.0e6, title="reservoir pressure p0")
    t0_k: Temperature = Field(300.0, title="reservoir temperature T0")


class StreamModel(_Strict):
    """Free stream: Mach number, direction from +x (anticlockwise), static pressure and temperature."""

    mach: float = Field(2.0, strict=True, allow_inf_nan=False, ge=0.0, le=MACH_MAX, title="stream Mach number")
    angle_deg: float = Field(0.0, strict=True, allow_inf_nan=False, ge=-180.0, le=180.0, title="stream direction")
    p_pa: Pressure = Field(101325.0, title="stream pressure")
    t_k: Temperature = Field(288.15, title="stream temperature")


class AmbientModel(_Strict):
    """Still surroundings that absorb outflow."""

    p_pa: Pressure = Field(101325.0, title="ambient pressure")
    t_k: Temperature = Field(288.15, title="ambient temperature")


class ConditionsModel(_Strict):
    reservoir: ReservoirModel = Field(default_factory=ReservoirModel)
    stream: StreamModel = Field(default_factory=StreamModel)
    ambient: AmbientModel = Field(default_factory=AmbientModel)


class InitialModel(_Strict):
    """How the fluid cells start.

    ambient: still gas at the ambient state (default).
    stream: every fluid cell at the stream state (a tunnel already running).
    reservoir_upstream_of_x: fluid cells with centre x < x_m at the reservoir state, at rest (a diaphragm).
    reservoir_in_circle: fluid cells within radius_m of centre_m at the reservoir state (a burst charge).
    """

    kind: literal(INITIAL_KINDS) = Field("ambient", title="initial state")  # type: ignore[valid-type]
    x_m: Optional[Metres] = Field(None, title="diaphragm position x")
    centre_m: Optional[Point] = Field(None, title="charge centre")
    radius_m: Optional[PositiveMetres] = Field(None, title="charge radius")

    @model_validator(mode="after")
    def _needs(self) -> "InitialModel":
        need = {"reservoir_upstream_of_x": ("x_m",), "reservoir_in_circle": ("centre_m", "radius_m")}.get(self.kind, ())
        for name in ("x_m", "centre_m", "radius_m"):
            value = getattr(self, name)
            if name in need and value is None:
                raise Invalid(name, None, "required", f"a value with kind {self.kind}",
                              f"The initial state {self.kind} needs {', '.join(need)}; {name} is missing.")
            if name not in need and value is not None:
                raise Invalid(name, value, "not_used", "no value with kind " + self.kind,
                              f"The initial state {self.kind} takes only {', '.join(need) or 'no other field'}; "
                              f"leave out {name}.")
        return self


class StationModel(_Strict):
    """Measuring segment across the flow; role marks a nozzle's throat or exit for the nozzle report."""

    name: Name = Field(title="station name")
    start_m: Point = Field(title="station start")
    end_m: Point = Field(title="station end")
    role: Optional[literal(ROLES)] = Field(None, title="station role")  # type: ignore[valid-type]


class ProbeModel(_Strict):
    """Measuring point."""

    name: Name = Field(title="probe name")
    x_m: Metres = Field(title="probe x")
    y_m: Metres = Field(title="probe y")


#: The defaults of a scenario's numerics are the solver's own (one place: solver/numerics.py).
_NUMERICS_DEFAULT = Numerics()


class NumericsModel(_Strict):
    order: literal(ORDERS) = Field(_NUMERICS_DEFAULT.order, title="order")  # type: ignore[valid-type]
    limiter: literal(LIMITERS) = Field(_NUMERICS_DEFAULT.limiter, title="limiter")  # type: ignore[valid-type]
    flux: literal(FLUXES) = Field(_NUMERICS_DEFAULT.flux, title="flux")  # type: ignore[valid-type]
    cfl: float = Field(_NUMERICS_DEFAULT.cfl, strict=True, allow_inf_nan=False, ge=CFL_MIN, le=CFL_MAX,
                       title="CFL number")
    integrator: literal(INTEGRATOR_CHOICES) = Field(_NUMERICS_DEFAULT.integrator,  # type: ignore[valid-type]
                                                    title="time integrator")


def _inside(dom: DomainModel, x: float, y: float) -> bool:
    return dom.x_min_m <= x <= dom.x_max_m and dom.y_min_m <= y <= dom.y_max_m


def _outside(field: str, value: Any, what: str, dom: DomainModel) -> Invalid:
    box = (f"x {show_value(dom.x_min_m)} to {show_value(dom.x_max_m, 'm')}, "
           f"y {show_value(dom.y_min_m)} to {show_value(dom.y_max_m, 'm')}")
    return Invalid(field, value, "inside_domain", f"a point inside the domain: {box}",
                   f"The {what} must lie inside the domain ({box}); you gave {show_value(value)}.")


class Scenario(_Strict):
    """One saved setup: gas, domain, edges, sketch, conditions, initial state, stations, probes, numerics."""

    name: Name = Field(title="scenario name")
    description: str = Field("", max_length=4000, title="description")
    gas: GasModel
    mode: literal(MODES) = Field("planar", title="geometry mode")  # type: ignore[valid-type]
    domain: DomainModel
    edges: EdgesModel = Field(default_factory=EdgesModel)
    sketch: SketchModel = Field(default_factory=SketchModel)
    conditions: ConditionsModel = Field(default_factory=ConditionsModel)
    initial: InitialModel = Field(default_factory=InitialModel)
    stations: list[StationModel] = Field(default_factory=list, max_length=64, title="stations")
    probes: list[ProbeModel] = Field(default_factory=list, max_length=64, title="probes")
    numerics: NumericsModel = Field(default_factory=NumericsModel)
    end_time_s: float = Field(strict=True, allow_inf_nan=False, gt=0.0, le=END_TIME_MAX_S, title="end time")

    @model_validator(mode="after")
    def _consistent(self) -> "Scenario":
        e = self.edges
        for side in ("left", "right", "top"):
            if getattr(e, side) == "axis":
                raise Invalid(f"edges.{side}", "axis", "axis_bottom_only", "wall, open, ambient or stream",
                              f"Only the bottom edge can be the axis; the {side} edge cannot.")
        if self.mode == "axisymmetric" and e.bottom != "axis":
            raise Invalid("edges.bottom", e.bottom, "axisymmetric_needs_axis", "axis (in axisymmetric mode)",
                          f"An axisymmetric domain needs the axis on its bottom edge; you gave {e.bottom}.")
        if self.mode == "axisymmetric" and self.domain.y_min_m != 0.0:
            raise Invalid("domain.y_min_m", self.domain.y_min_m, "axis_at_zero", "0 m (in axisymmetric mode)",
                          "An axisymmetric domain starts at radius 0 m; "
                          f"you gave {show_value(self.domain.y_min_m, 'm')}.")
        if self.mode != "axisymmetric" and e.bottom == "axis":
            raise Invalid("edges.bottom", "axis", "axis_needs_axisymmetric", "wall, open, ambient or stream (planar)",
                          "The axis needs the axisymmetric mode; use a wall for a planar symmetry line.")
        try:
            to_setup(self)
        except ValueError as err:  # a rule of the solver's own that the checks above do not repeat
            raise Invalid("", None, "solver", "a setup the solver accepts", f"{err}.") from None
        dom = self.domain
        for kind, items in (("stations", self.stations), ("probes", self.probes)):
            names = [it.name for it in items]
            for n, name in enumerate(names):
                if names.index(name) != n:
                    raise Invalid(f"{kind}[{n}].name", name, "unique", "a name no other one uses",
                                  f"Two {kind} are called {name}; names must be unique.")
        for n, st in enumerate(self.stations):
            if st.start_m == st.end_m:
                raise Invalid(f"stations[{n}].end_m", list(st.end_m), "differs_from_start",
                              "a point other than the start",
                              f"Station {st.name} ends where it starts; a station needs two different points.")
            for label, (x, y) in (("start_m", st.start_m), ("end_m", st.end_m)):
                if not _inside(dom, x, y):
                    raise _outside(f"stations[{n}].{label}", [x, y], f"station {st.name}", dom)
        for role in ROLES:
            marked = [n for n, st in enumerate(self.stations) if st.role == role]
            if len(marked) > 1:
                raise Invalid(f"stations[{marked[1]}].role", role, "one_per_role", f"only one station as the {role}",
                              f"Only one station may be the {role}.")
        for n, pr in enumerate(self.probes):
            if not _inside(dom, pr.x_m, pr.y_m):
                raise _outside(f"probes[{n}]", [pr.x_m, pr.y_m], f"probe {pr.name}", dom)
        _check_sketch_reach(self.sketch, dom)
        return self


#: How far beyond the domain a drawn point may lie, in domain sizes (the larger of width and height). Shapes are
#: clipped to the domain before they are painted, so the reach only keeps coordinates meaningful; common practice,
#: no source.
SKETCH_REACH = 10.0


def _check_sketch_reach(sketch, dom: DomainModel) -> None:
    """Every drawn point within SKETCH_REACH domain sizes of the domain, every width and radius within that size."""
    size = max(dom.x_max_m - dom.x_min_m, dom.y_max_m - dom.y_min_m)
    reach = SKETCH_REACH * size
    x0, x1, y0, y1 = dom.x_min_m - reach, dom.x_max_m + reach, dom.y_min_m - reach, dom.y_max_m + reach
    box = (f"x {show_value(x0)} to {show_value(x1, 'm')}, y {show_value(y0)} to {show_value(y1, 'm')}")
    for n, shape in enumerate(sketch.shapes):
        where = f"sketch.shapes[{n}]"
        for name in ("points_m", "start_m", "end_m", "corner_a_m", "corner_b_m", "centre_m"):
            value = getattr(shape, name, None)
            if value is None:
                continue
            points = value if name == "points_m" else [value]
            for k, (x, y) in enumerate(points):
                if not (x0 <= x <= x1 and y0 <= y <= y1):
                    field = f"{where}.{name}[{k}]" if name == "points_m" else f"{where}.{name}"
                    raise Invalid(field, [x, y], "near_domain", f"a point within {SKETCH_REACH:g} domain sizes of "
                                  f"the domain: {box}", f"A drawn point must lie within {SKETCH_REACH:g} domain "
                                  f"sizes of the domain ({box}); you gave {show_value([x, y])}.")
        for name in ("width_m", "radius_m"):
            value = getattr(shape, name, None)
            if value is not None and value > reach:
                raise Invalid(f"{where}.{name}", value, "at_most", f"at most {show_value(reach, 'm')}",
                              f"A {name[:-2]} must be at most {SKETCH_REACH:g} domain sizes "
                              f"({show_value(reach, 'm')}); you gave {show_value(value, 'm')}.")


# ----------------------------------------------------------------------------- parsing

def _show(value: Any, limit: int = 80) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def parse_scenario(data: dict | str) -> Scenario:
    """A validated Scenario from a dict or a JSON string; raises ScenarioError with structured problems."""
    if isinstance(data, (str, bytes)):
        try:
            data = json.loads(data)
        except json.JSONDecodeError as err:
            raise ScenarioError.one("", None, "json", "a JSON object",
                                    f"The scenario is not valid JSON: {err}.") from None
        except RecursionError:
            raise ScenarioError.one("", None, "depth", "JSON nested at most a few hundred levels deep",
                                    "The scenario is nested too deeply to read.") from None
        except ValueError:  # an integer of more than 4,300 digits
            raise ScenarioError.one("", None, "digits", "numbers of at most 4,300 digits",
                                    "The scenario holds a number with too many digits to read (at most 4,300).") \
                from None
    if not isinstance(data, dict):
        raise ScenarioError.one("", _show(data), "object", "a JSON object",
                                f"A scenario must be a JSON object; you gave {_show(data)}.")
    try:
        return Scenario.model_validate(data)
    except ValidationError as err:
        raise ScenarioError(problems(Scenario, err, tags=SHAPE_KINDS)) from None


def load_scenario(path: str | Path) -> Scenario:
    """Read and validate a scenario file; the error names the file too."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError as err:
        raise ScenarioError.one(str(p), None, "utf8", "UTF-8 text",
                                f"The scenario file {p} is not UTF-8 text (byte {err.start} cannot be read).") from None
    except OSError as err:
        raise ScenarioError.one(str(p), None, "readable", "a readable file",
                                f"The scenario file {p} cannot be read: {err.strerror}.") from None
    try:
        return parse_scenario(text)
    except ScenarioError as err:
        raise ScenarioError([pr.at(f"{p.name}: {pr.field}" if pr.field else p.name) for pr in err.problems]) from None


def scenario_to_dict(s: Scenario) -> dict:
    """JSON-shaped dict of every field (defaults written out), so a file says everything it means.

    Only the fields of `initial` that its kind uses are written.
    """
    out = s.model_dump(mode="json")
    out["initial"] = {k: v for k, v in out["initial"].items() if v is not None}
    return out


def scenario_to_json(s: Scenario) -> str:
    return json.dumps(scenario_to_dict(s), indent=2) + "\n"


# ----------------------------------------------------------------------------- building a simulation

def to_sketch(s: Scenario) -> Sketch:
    return s.sketch.to_sketch()


def to_domain(s: Scenario, nx: int | None = None) -> Domain:
    d = s.domain
    return Domain(d.x_min_m, d.x_max_m, d.y_min_m, d.y_max_m, int(nx if nx is not None else d.nx))


def to_gas(s: Scenario) -> Gas:
    return Gas(s.gas.gamma, s.gas.molar_mass_kg_kmol)


def to_conditions(s: Scenario) -> Conditions:
    c = s.conditions
    return Conditions(Reservoir(c.reservoir.p0_pa, c.reservoir.t0_k),
                      Stream(c.stream.mach, c.stream.angle_deg, c.stream.p_pa, c.stream.t_k),
                      Ambient(c.ambient.p_pa, c.ambient.t_k))


def to_numerics(s: Scenario) -> Numerics:
    n = s.numerics
    return Numerics(order=n.order, limiter=n.limiter, flux=n.flux, cfl=n.cfl, integrator=n.integrator)


def to_setup(s: Scenario, nx: int | None = None) -> Setup:
    e = s.edges
    return Setup(domain=to_domain(s, nx), gas=to_gas(s), mode=s.mode, edges=Edges(e.left, e.right, e.bottom, e.top),
                 conditions=to_conditions(s), numerics=to_numerics(s))


def to_stations(s: Scenario) -> list[Station]:
    return [Station(tuple(st.start_m), tuple(st.end_m), st.name) for st in s.stations]


def station_by_role(s: Scenario, role: str) -> Station | None:
    """The station marked with a role ("throat" or "exit"), if any."""
    for st in s.stations:
        if st.role == role:
            return Station(tuple(st.start_m), tuple(st.end_m), st.name)
    return None


def initial_region(s: Scenario, domain: Domain) -> np.ndarray:
    """Boolean (ny, nx): the cells that start at the reservoir state (empty for other kinds)."""
    ini = s.initial
    x = domain.x_centres_m()[None, :]
    y = domain.y_centres_m()[:, None]
    if ini.kind == "reservoir_upstream_of_x":
        return np.broadcast_to(x < ini.x_m, domain.shape).copy()
    if ini.kind == "reservoir_in_circle":
        cx, cy = ini.centre_m
        return (x - cx) ** 2 + (y - cy) ** 2 <= ini.radius_m ** 2
    return np.zeros(domain.shape, bool)


def build_simulation(s: Scenario, nx: int | None = None, geometry: WallGeometry | None = None) -> Simulation:
    """A Simulation at the scenario's resolution (or nx), walls where the sketch draws them, `initial` applied.
    geometry: the sketch's wall geometry on that grid when the caller has it already (the live session keeps it)."""
    setup = to_setup(s, nx)
    geo = geometry if geometry is not None else wall_geometry(to_sketch(s), setup.domain)
    sim = Simulation(setup, geo.mask, geo)
    gas, cond = setup.gas, setup.conditions
    if s.initial.kind == "stream":
        st = cond.stream
        speed = st.mach * gas.sound_speed_m_s(st.t_k)
        ang = math.radians(st.angle_deg)
        sim.set_primitive(gas.density_kg_m3(st.p_pa, st.t_k), speed * math.cos(ang), speed * math.sin(ang), st.p_pa)
    elif s.initial.kind != "ambient":
        region = initial_region(s, setup.domain)
        res, amb = cond.reservoir, cond.ambient
        rho = np.where(region, gas.density_kg_m3(res.p0_pa, res.t0_k), gas.density_kg_m3(amb.p_pa, amb.t_k))
        p = np.where(region, res.p0_pa, amb.p_pa)
        sim.set_primitive(rho, 0.0, 0.0, p)
    return sim


def has_reservoir(s: Scenario) -> bool:
    return any(sh.paints == "reservoir" for sh in s.sketch.shapes)


# ----------------------------------------------------------------------------- built-ins and schema

def builtin_names() -> list[str]:
    """Names of the built-in scenarios (file stems in scenarios/), default first."""
    names = sorted(p.stem for p in SCENARIO_DIR.glob("*.json") if p.name != SCHEMA_FILE)
    if DEFAULT_SCENARIO in names:
        names.remove(DEFAULT_SCENARIO)
        names.insert(0, DEFAULT_SCENARIO)
    return names


def builtin_path(name: str) -> Path:
    names = builtin_names()
    if name not in names:
        raise ScenarioError.one("name", name, "one_of", "one of: " + ", ".join(names),
                                f"There is no built-in scenario called {name}; the built-ins are {', '.join(names)}.")
    return SCENARIO_DIR / f"{name}.json"


def load_builtin(name: str) -> Scenario:
    return load_scenario(builtin_path(name))


def vocabulary() -> dict:
    """Every choice and numeric limit of a scenario, for the page to build its controls from.

    choices: {what: [{name, label}]} in the order to offer them; limits: {JSON path: {label, unit, min,
    max, min_exclusive, max_exclusive, integer}} read from the models' own constraints.
    """
    tables = {"order": ORDERS, "limiter": LIMITERS, "flux": FLUXES, "integrator": INTEGRATOR_CHOICES,
              "edge": EDGES, "paint": PAINTS, "mirror": MIRRORS, "preset": PRESET_CHOICES, "mode": MODES,
              "role": ROLES, "initial": INITIAL_KINDS}
    return {"choices": {what: [c.to_dict() for c in t.values()] for what, t in tables.items()},
            "limits": numeric_limits(Scenario)}


def schema() -> dict:
    """JSON Schema (draft 2020-12) of a scenario document."""
    out = Scenario.model_json_schema()
    out["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    out["title"] = "shockslate scenario"
    return out


def schema_json() -> str:
    return json.dumps(schema(), indent=2, sort_keys=True) + "\n"


def write_schema(folder: str | Path = SCENARIO_DIR) -> Path:
    """Write schema() to <folder>/schema.json (the copy kept in the repository is checked by a test)."""
    path = Path(folder) / SCHEMA_FILE
    path.write_text(schema_json(), encoding="utf-8")
    return path
