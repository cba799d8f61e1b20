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
from typing import Annotated, Any, Literal, Optional, Union

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from .conditions import Ambient, Conditions, Reservoir, Stream
from .diagnostics import Station
from .domain import MAX_NX, Domain
from .gas import GAMMA_MAX, GAMMA_MIN, PRESETS, Gas
from .kinds import CellKind
from .numerics import CFL_MAX, CFL_MIN, Numerics
from .geometry import wall_geometry
from .shapes import MAX_COORD_M, Sketch, shape_from_dict
from .simulation import Edges, Setup, Simulation

#: Folder of the built-in scenario files (package data of shockslate.scenarios; scenarios/ in a checkout).
SCENARIO_DIR = Path(str(resources.files("shockslate.scenarios")))
#: The scenario the server opens with: over-expanded axisymmetric nozzle into sea-level air.
DEFAULT_SCENARIO = "nozzle_sea_level"
SCHEMA_FILE = "schema.json"

P_MAX_PA = 1.0e9
T_MIN_K, T_MAX_K = 1.0, 1.0e4
END_TIME_MAX_S = 10.0

#: Shape kinds, used to drop pydantic's union tag from error paths.
_SHAPE_KINDS = ("stroke", "segment", "rectangle", "polygon", "circle")


class ScenarioError(ValueError):
    """A scenario document was refused; the message names the JSON path, the value and what is allowed."""


# ----------------------------------------------------------------------------- field types


Metres = Annotated[float, Field(strict=True, allow_inf_nan=False, ge=-MAX_COORD_M, le=MAX_COORD_M)]
PositiveMetres = Annotated[float, Field(strict=True, allow_inf_nan=False, gt=0.0, le=MAX_COORD_M)]
Point = tuple[Metres, Metres]
Pressure = Annotated[float, Field(strict=True, allow_inf_nan=False, gt=0.0, le=P_MAX_PA)]
Temperature = Annotated[float, Field(strict=True, allow_inf_nan=False, ge=T_MIN_K, le=T_MAX_K)]
Paint = Literal["fluid", "wall", "reservoir", "stream", "ambient"]
EdgeKind = Literal["wall", "open", "ambient", "stream", "axis"]
Name = Annotated[str, Field(min_length=1, max_length=80)]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


# ----------------------------------------------------------------------------- shapes (mirrors of solver/shapes.py)

class StrokeModel(_Strict):
    """Freehand path with a width (metres)."""

    kind: Literal["stroke"]
    points_m: list[Point] = Field(min_length=2, max_length=20000)
    width_m: PositiveMetres
    paints: Paint


class SegmentModel(_Strict):
    """Straight line with a width (metres), round ends."""

    kind: Literal["segment"]
    start_m: Point
    end_m: Point
    width_m: PositiveMetres
    paints: Paint


class RectangleModel(_Strict):
    """Axis-aligned rectangle from two opposite corners (metres)."""

    kind: Literal["rectangle"]
    corner_a_m: Point
    corner_b_m: Point
    paints: Paint


class PolygonModel(_Strict):
    """Closed polygon, filled by the even-odd rule (metres)."""

    kind: Literal["polygon"]
    points_m: list[Point] = Field(min_length=3, max_length=20000)
    paints: Paint


class CircleModel(_Strict):
    """Filled disc (metres)."""

    kind: Literal["circle"]
    centre_m: Point
    radius_m: PositiveMetres
    paints: Paint


ShapeModel = Annotated[Union[StrokeModel, SegmentModel, RectangleModel, PolygonModel, CircleModel],
                       Field(discriminator="kind")]


class SketchModel(_Strict):
    """What is drawn: shapes in order, later ones painting over earlier ones; optional mirror."""

    mirror: Literal["none", "axis", "midline"] = "none"
    shapes: list[ShapeModel] = Field(default_factory=list, max_length=2000)


# ----------------------------------------------------------------------------- the other parts

class GasModel(_Strict):
    """Calorically perfect gas. A named preset must agree with gamma and molar mass (null for a custom gas)."""

    preset: Optional[Literal["air", "hot products"]] = None
    gamma: float = Field(strict=True, allow_inf_nan=False, ge=GAMMA_MIN, le=GAMMA_MAX)
    molar_mass_kg_kmol: float = Field(strict=True, allow_inf_nan=False, gt=0.0, le=1000.0)

    @model_validator(mode="after")
    def _preset_agrees(self) -> "GasModel":
        if self.preset is not None:
            ref = PRESETS[self.preset]
            if not math.isclose(self.gamma, ref.gamma, rel_tol=1e-9):
                raise ValueError(f"gas.gamma = {self.gamma!r} does not match preset {self.preset!r} "
                                 f"(gamma {ref.gamma}); allowed: that value, or preset null for a custom gas")
            if not math.isclose(self.molar_mass_kg_kmol, ref.molar_mass_kg_kmol, rel_tol=1e-9):
                raise ValueError(f"gas.molar_mass_kg_kmol = {self.molar_mass_kg_kmol!r} does not match preset "
                                 f"{self.preset!r} ({ref.molar_mass_kg_kmol} kg/kmol); allowed: that value, "
                                 "or preset null for a custom gas")
        return self


class DomainModel(_Strict):
    """Computational rectangle in metres and its resolution (cells across x; cells are square)."""

    x_min_m: Metres
    x_max_m: Metres
    y_min_m: Metres
    y_max_m: Metres
    nx: int = Field(strict=True, ge=4, le=MAX_NX)

    @model_validator(mode="after")
    def _extent(self) -> "DomainModel":
        if not self.x_max_m > self.x_min_m:
            raise ValueError(f"domain.x_max_m = {self.x_max_m!r} is not allowed: must be greater than "
                             f"domain.x_min_m = {self.x_min_m!r}")
        if not self.y_max_m > self.y_min_m:
            raise ValueError(f"domain.y_max_m = {self.y_max_m!r} is not allowed: must be greater than "
                             f"domain.y_min_m = {self.y_min_m!r}")
        try:
            Domain(self.x_min_m, self.x_max_m, self.y_min_m, self.y_max_m, self.nx)
        except ValueError as err:
            raise ValueError(f"domain.{err}") from None
        return self


class EdgesModel(_Strict):
    """Condition on each domain edge; 'axis' only at the bottom of an axisymmetric domain."""

    left: EdgeKind = "wall"
    right: EdgeKind = "open"
    bottom: EdgeKind = "wall"
    top: EdgeKind = "wall"


class ReservoirModel(_Strict):
    """Chamber feed: gas at rest at stagnation pressure and temperature."""

    p0_pa: Pressure = 2.0e6
    t0_k: Temperature = 300.0


class StreamModel(_Strict):
    """Free stream: Mach number, direction from +x (anticlockwise), static pressure and temperature."""

    mach: float = Field(2.0, strict=True, allow_inf_nan=False, ge=0.0, le=30.0)
    angle_deg: float = Field(0.0, strict=True, allow_inf_nan=False, ge=-180.0, le=180.0)
    p_pa: Pressure = 101325.0
    t_k: Temperature = 288.15


class AmbientModel(_Strict):
    """Still surroundings that absorb outflow."""

    p_pa: Pressure = 101325.0
    t_k: Temperature = 288.15


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

    kind: Literal["ambient", "stream", "reservoir_upstream_of_x", "reservoir_in_circle"] = "ambient"
    x_m: Optional[Metres] = None
    centre_m: Optional[Point] = None
    radius_m: Optional[PositiveMetres] = None

    @model_validator(mode="after")
    def _needs(self) -> "InitialModel":
        need = {"reservoir_upstream_of_x": ("x_m",), "reservoir_in_circle": ("centre_m", "radius_m")}.get(self.kind, ())
        for name in ("x_m", "centre_m", "radius_m"):
            value = getattr(self, name)
            if name in need and value is None:
                raise ValueError(f"initial.{name} is missing: initial.kind {self.kind!r} needs " + ", ".join(need))
            if name not in need and value is not None:
                raise ValueError(f"initial.{name} = {value!r} is not allowed with initial.kind {self.kind!r}; "
                                 "it needs only " + (", ".join(need) or "no other field"))
        return self


class StationModel(_Strict):
    """Measuring segment across the flow; role marks a nozzle's throat or exit for the nozzle report."""

    name: Name
    start_m: Point
    end_m: Point
    role: Optional[Literal["throat", "exit"]] = None


class ProbeModel(_Strict):
    """Measuring point."""

    name: Name
    x_m: Metres
    y_m: Metres


class NumericsModel(_Strict):
    order: Literal[1, 2] = 2
    limiter: Literal["minmod", "van_leer", "mc"] = "van_leer"
    flux: Literal["hllc", "hll", "rusanov"] = "hllc"
    cfl: float = Field(0.4, strict=True, allow_inf_nan=False, ge=CFL_MIN, le=CFL_MAX)
    integrator: Literal["ssp_rk2", "ssp_rk3"] = "ssp_rk2"


class Scenario(_Strict):
    """One saved setup: gas, domain, edges, sketch, conditions, initial state, stations, probes, numerics."""

    name: Name
    description: str = Field("", max_length=4000)
    gas: GasModel
    mode: Literal["planar", "axisymmetric"] = "planar"
    domain: DomainModel
    edges: EdgesModel = Field(default_factory=EdgesModel)
    sketch: SketchModel = Field(default_factory=SketchModel)
    conditions: ConditionsModel = Field(default_factory=ConditionsModel)
    initial: InitialModel = Field(default_factory=InitialModel)
    stations: list[StationModel] = Field(default_factory=list, max_length=64)
    probes: list[ProbeModel] = Field(default_factory=list, max_length=64)
    numerics: NumericsModel = Field(default_factory=NumericsModel)
    end_time_s: float = Field(strict=True, allow_inf_nan=False, gt=0.0, le=END_TIME_MAX_S)

    @field_validator("sketch")
    @classmethod
    def _shapes_build(cls, sketch: SketchModel) -> SketchModel:
        for n, shape in enumerate(sketch.shapes):
            shape_from_dict(shape.model_dump(mode="json"), where=f"sketch.shapes[{n}]")
        return sketch

    @model_validator(mode="after")
    def _consistent(self) -> "Scenario":
        try:
            to_setup(self)
        except ValueError as err:
            text = str(err)
            # Setup and Edges name edges.<side>, mode and domain.<field> already.
            raise ValueError(text if text.split(" ")[0].split(".")[0] in ("edges", "mode", "domain")
                             else f"scenario: {text}") from None
        dom = self.domain
        for kind, items in (("stations", self.stations), ("probes", self.probes)):
            names = [it.name for it in items]
            for n, name in enumerate(names):
                if names.index(name) != n:
                    raise ValueError(f"{kind}[{n}].name = {name!r} is not allowed: names must be unique")
        for n, st in enumerate(self.stations):
            if st.start_m == st.end_m:
                raise ValueError(f"stations[{n}].end_m = {list(st.end_m)!r} is not allowed: must differ from start_m")
            for label, (x, y) in (("start_m", st.start_m), ("end_m", st.end_m)):
                if not (dom.x_min_m <= x <= dom.x_max_m and dom.y_min_m <= y <= dom.y_max_m):
                    raise ValueError(f"stations[{n}].{label} = {[x, y]!r} is not allowed: must lie inside the "
                                     f"domain x {dom.x_min_m:g} to {dom.x_max_m:g} m, y {dom.y_min_m:g} to "
                                     f"{dom.y_max_m:g} m")
        for role in ("throat", "exit"):
            marked = [n for n, st in enumerate(self.stations) if st.role == role]
            if len(marked) > 1:
                raise ValueError(f"stations[{marked[1]}].role = {role!r} is not allowed: only one station "
                                 f"may be the {role}")
        for n, pr in enumerate(self.probes):
            if not (dom.x_min_m <= pr.x_m <= dom.x_max_m and dom.y_min_m <= pr.y_m <= dom.y_max_m):
                raise ValueError(f"probes[{n}] = ({pr.x_m!r}, {pr.y_m!r}) is not allowed: must lie inside the "
                                 f"domain x {dom.x_min_m:g} to {dom.x_max_m:g} m, y {dom.y_min_m:g} to "
                                 f"{dom.y_max_m:g} m")
        return self


# ----------------------------------------------------------------------------- parsing

def _path(loc: tuple) -> str:
    """JSON path from a pydantic error location, without the union tag pydantic inserts for shapes."""
    parts: list[str] = []
    prev: Any = None
    for item in loc:
        if isinstance(item, int):
            parts.append(f"[{item}]")
        elif isinstance(prev, int) and item in _SHAPE_KINDS:
            pass  # discriminated-union tag
        else:
            parts.append(("." if parts else "") + str(item))
        prev = item
    return "".join(parts)


def _show(value: Any, limit: int = 80) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _message(err: ValidationError) -> str:
    lines = []
    for e in err.errors(include_url=False):
        path = _path(tuple(e["loc"]))
        msg = e["msg"]
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, "):]
            # our own validators already name the path; model-level ones come with an empty loc
            lines.append(msg if (not path or msg.startswith(path) or "." in msg.split(" ")[0]) else f"{path}: {msg}")
            continue
        if e["type"] == "missing":
            lines.append(f"{path} is missing: it is required")
        elif e["type"] == "extra_forbidden":
            lines.append(f"{path} = {_show(e['input'])} is not allowed: unknown field")
        else:
            lines.append(f"{path} = {_show(e['input'])} is not allowed: {msg[0].lower() + msg[1:]}")
    return "; ".join(lines)


def parse_scenario(data: dict | str) -> Scenario:
    """A validated Scenario from a dict or a JSON string; raises ScenarioError naming path, value and rule."""
    if isinstance(data, (str, bytes)):
        try:
            data = json.loads(data)
        except json.JSONDecodeError as err:
            raise ScenarioError(f"scenario is not valid JSON: {err}") from None
    if not isinstance(data, dict):
        raise ScenarioError(f"scenario = {_show(data)} is not allowed: must be a JSON object")
    try:
        return Scenario.model_validate(data)
    except ValidationError as err:
        raise ScenarioError(_message(err)) from None


def load_scenario(path: str | Path) -> Scenario:
    """Read and validate a scenario file; the error names the file too."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as err:
        raise ScenarioError(f"scenario file {str(p)!r} cannot be read: {err.strerror}") from None
    try:
        return parse_scenario(text)
    except ScenarioError as err:
        raise ScenarioError(f"{p.name}: {err}") from None


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
    return Sketch(tuple(shape_from_dict(sh.model_dump(mode="json"), where=f"sketch.shapes[{n}]")
                        for n, sh in enumerate(s.sketch.shapes)), s.sketch.mirror)


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


def build_simulation(s: Scenario, nx: int | None = None) -> Simulation:
    """A Simulation at the scenario's resolution (or nx), walls where the sketch draws them, `initial` applied."""
    setup = to_setup(s, nx)
    geo = wall_geometry(to_sketch(s), setup.domain)
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
        raise ScenarioError(f"scenario name = {name!r} is not allowed: built-ins are " + ", ".join(names))
    return SCENARIO_DIR / f"{name}.json"


def load_builtin(name: str) -> Scenario:
    return load_scenario(builtin_path(name))


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
