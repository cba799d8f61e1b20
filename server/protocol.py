"""Client messages of the live protocol (PROTOCOL.md) as pydantic models, and the error replies.

The models check shape and type (known fields only, finite numbers, named choices); ranges that
belong to the scenario (pressures, gamma, CFL, domain size ...) are checked once more when the
changed scenario document is validated by solver.scenario, so there is a single source of truth.
Every refusal becomes an `error` message naming the field, the value, the rule and what is allowed, with
a plain sentence; pydantic's records are read as data (solver/validation.py), never parsed from prose.
The choice tables (limiters, fluxes, edges, presets ...) are the solver's own, sent to the page by
`vocabulary()` in the hello message.
"""
from __future__ import annotations

import json
import math
from typing import Annotated, Any, Literal, Optional, Union

from pydantic import BaseModel, ConfigDict, Field, TypeAdapter, ValidationError, model_validator

from shockslate.solver import scenario as scn
from shockslate.solver.choices import literal
from shockslate.solver.domain import MAX_NX
from shockslate.solver.fields import VIEWS
from shockslate.solver.gas import PRESET_CHOICES
from shockslate.solver.kinds import EDGES
from shockslate.solver.nozzle_design import SHAPES
from shockslate.solver.numerics import FLUXES, INTEGRATOR_CHOICES, LIMITERS, ORDERS
from shockslate.solver.propellant import STATES
from shockslate.solver.shapes import MIRRORS
from shockslate.solver.validation import numeric_limits, problem_from_record

from . import design
from .errors import RequestError
from .comparison import COMPARE_SETTINGS
from .wave_history import EVERY_STEPS, WAVE_FIELDS

PROTOCOL_VERSION = 1
#: Largest accepted text message, bytes.
MAX_MESSAGE_BYTES = 256 * 1024
#: Messages per second a client may send (token bucket; bursts up to the same number).
MAX_MESSAGES_PER_S = 200
MAX_STEP_COUNT = 1000
MAX_CANVAS_PX = 4096
OVERLAYS = ("sonic_line", "arrows")

Finite = Annotated[float, Field(strict=True, allow_inf_nan=False)]
PointM = Annotated[list[Finite], Field(min_length=2, max_length=2, description="an [x, y] pair of finite numbers in metres")]
Label = Annotated[str, Field(min_length=1, max_length=80, description="1 to 80 characters")]
RequestId = Union[Annotated[int, Field(strict=True)], Annotated[str, Field(max_length=64)], None]


class _Message(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)
    id: RequestId = None


class _Part(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


# ----------------------------------------------------------------------------- sketch

class AddShape(_Message):
    """Append a shape (dict as in solver/shapes.py, checked there) to the sketch."""

    type: Literal["add_shape"]
    shape: dict[str, Any] = Field(description="a shape object with 'kind' (stroke, segment, rectangle, polygon, circle) and 'paints'")


class RemoveShape(_Message):
    type: Literal["remove_shape"]
    index: int = Field(ge=0, description="an integer index into the sketch's shapes, from 0")


class Undo(_Message):
    type: Literal["undo"]


class Redo(_Message):
    type: Literal["redo"]


class ClearSketch(_Message):
    type: Literal["clear_sketch"]


class ClearAll(_Message):
    """Shapes, stations, probes and the starting gas back to nothing; the flow starts again."""

    type: Literal["clear_all"]


class SetMirror(_Message):
    type: Literal["set_mirror"]
    mirror: literal(MIRRORS)  # type: ignore[valid-type]


# ----------------------------------------------------------------------------- gas, conditions, numerics

class SetGas(_Message):
    """A preset, or gamma and/or molar mass for a custom gas (the other value is kept)."""

    type: Literal["set_gas"]
    preset: Optional[literal(PRESET_CHOICES)] = None  # type: ignore[valid-type]
    gamma: Optional[Finite] = None
    molar_mass_kg_kmol: Optional[Finite] = None

    @model_validator(mode="after")
    def _one_way(self) -> "SetGas":
        custom = self.gamma is not None or self.molar_mass_kg_kmol is not None
        if self.preset is not None and custom:
            raise RequestError("preset", self.preset, "either preset, or gamma and/or molar_mass_kg_kmol, not both",
                               "Give either a preset or gamma and molar mass, not both.", "one_way")
        if self.preset is None and not custom:
            raise RequestError("preset", None, f"a preset ({', '.join(PRESET_CHOICES)}) or gamma and/or "
                               "molar_mass_kg_kmol", "Give a preset, or gamma and/or molar mass.", "required")
        return self


class ReservoirPart(_Part):
    p0_pa: Optional[Finite] = None
    t0_k: Optional[Finite] = None


class StreamPart(_Part):
    mach: Optional[Finite] = None
    angle_deg: Optional[Finite] = None
    p_pa: Optional[Finite] = None
    t_k: Optional[Finite] = None


class AmbientPart(_Part):
    p_pa: Optional[Finite] = None
    t_k: Optional[Finite] = None


class SetConditions(_Message):
    """Any of reservoir, stream, ambient, each partial; the rest is kept."""

    type: Literal["set_conditions"]
    reservoir: Optional[ReservoirPart] = None
    stream: Optional[StreamPart] = None
    ambient: Optional[AmbientPart] = None


class SetNumerics(_Message):
    type: Literal["set_numerics"]
    order: Optional[literal(ORDERS)] = None  # type: ignore[valid-type]
    limiter: Optional[literal(LIMITERS)] = None  # type: ignore[valid-type]
    flux: Optional[literal(FLUXES)] = None  # type: ignore[valid-type]
    cfl: Optional[Finite] = None
    integrator: Optional[literal(INTEGRATOR_CHOICES)] = None  # type: ignore[valid-type]


# ----------------------------------------------------------------------------- domain

class SetResolution(_Message):
    type: Literal["set_resolution"]
    nx: int = Field(ge=4, le=MAX_NX, description=f"an integer number of cells across x, 4 to {MAX_NX}")


class SetDomain(_Message):
    type: Literal["set_domain"]
    x_min_m: Finite
    x_max_m: Finite
    y_min_m: Finite
    y_max_m: Finite


EdgeKind = literal(EDGES)


class SetEdges(_Message):
    type: Literal["set_edges"]
    left: Optional[EdgeKind] = None
    right: Optional[EdgeKind] = None
    bottom: Optional[EdgeKind] = None
    top: Optional[EdgeKind] = None


class SetMode(_Message):
    type: Literal["set_mode"]
    mode: literal(scn.MODES)  # type: ignore[valid-type]


class SetInitial(_Message):
    """The starting gas (scenario `initial`); the flow starts again from it."""

    type: Literal["set_initial"]
    kind: literal(scn.INITIAL_KINDS)  # type: ignore[valid-type]
    x_m: Optional[Finite] = None
    centre_m: Optional[PointM] = None
    radius_m: Optional[Finite] = None


# ----------------------------------------------------------------------------- run control

class Run(_Message):
    type: Literal["run"]


class Pause(_Message):
    type: Literal["pause"]


class ResetFlow(_Message):
    type: Literal["reset_flow"]


class Step(_Message):
    type: Literal["step"]
    count: int = Field(1, ge=1, le=MAX_STEP_COUNT, description=f"an integer from 1 to {MAX_STEP_COUNT}")


class Settle(_Message):
    """Settle mode on or off: local time steps reach the steady end state sooner; no time history."""
    type: Literal["settle"]
    on: bool


# ----------------------------------------------------------------------------- measuring

class AddStation(_Message):
    type: Literal["add_station"]
    name: Label
    start_m: PointM
    end_m: PointM
    role: Optional[literal(scn.ROLES)] = None  # type: ignore[valid-type]


class RemoveStation(_Message):
    type: Literal["remove_station"]
    name: Label


class AddProbe(_Message):
    type: Literal["add_probe"]
    name: Label
    x_m: Finite
    y_m: Finite


class RemoveProbe(_Message):
    type: Literal["remove_probe"]
    name: Label


# ----------------------------------------------------------------------------- viewing

class SetView(_Message):
    type: Literal["set_view"]
    view: Literal[tuple(VIEWS)]  # type: ignore[valid-type]
    width: int = Field(ge=16, le=MAX_CANVAS_PX, description=f"an integer canvas width in pixels, 16 to {MAX_CANVAS_PX}")
    height: int = Field(ge=16, le=MAX_CANVAS_PX, description=f"an integer canvas height in pixels, 16 to {MAX_CANVAS_PX}")
    range: Any = Field("auto", description='"auto" or [min, max] in the SI unit of the view, max greater than min')
    overlays: list[Literal["sonic_line", "arrows"]] = Field(default_factory=lambda: list(OVERLAYS), max_length=2)

    @model_validator(mode="after")
    def _ordered(self) -> "SetView":
        r = self.range
        ok = r == "auto" or (
            isinstance(r, list) and len(r) == 2
            and all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in r)
            and r[1] > r[0])
        if not ok:
            raise RequestError("range", _short(r), '"auto" or [min, max] (finite numbers, SI unit of the view) '
                               "with max greater than min",
                               "The colour range must be auto, or two finite numbers with the upper above the lower.",
                               "range")
        return self

    @property
    def fixed_range(self) -> tuple[float, float] | None:
        return None if self.range == "auto" else (float(self.range[0]), float(self.range[1]))


class Inspect(_Message):
    type: Literal["inspect"]
    x_m: Finite
    y_m: Finite


class Profile(_Message):
    """Values along a station (by name) or along the axis."""

    type: Literal["profile"]
    station: Optional[Label] = None
    axis: Optional[bool] = None

    @model_validator(mode="after")
    def _one_of(self) -> "Profile":
        if (self.station is None) == (not self.axis):
            raise RequestError("station", self.station, "either a station name or axis: true, not both",
                               "Ask for a station by name, or for the axis, not both.", "one_way")
        return self


# ----------------------------------------------------------------------------- scenarios and files

class SaveScenario(_Message):
    type: Literal["save_scenario"]
    name: Annotated[str, Field(min_length=1, max_length=64)]


class LoadScenario(_Message):
    type: Literal["load_scenario"]
    name: Optional[Annotated[str, Field(min_length=1, max_length=64)]] = None
    scenario: Optional[dict[str, Any]] = None

    @model_validator(mode="after")
    def _one_of(self) -> "LoadScenario":
        if (self.name is None) == (self.scenario is None):
            raise RequestError("name", self.name, "either name (built-in or saved) or scenario (a document), not both",
                               "Give either the name of a scenario or a scenario document, not both.", "one_way")
        return self


class ListScenarios(_Message):
    type: Literal["list_scenarios"]


class DeleteScenario(_Message):
    """Delete a kept (saved) scenario; built-ins cannot be deleted."""

    type: Literal["delete_scenario"]
    name: Annotated[str, Field(min_length=1, max_length=64)]


class Export(_Message):
    type: Literal["export"]
    what: Literal["npz", "vti", "csv", "scenario"]


class ListExports(_Message):
    type: Literal["list_exports"]


class DeleteExport(_Message):
    """Delete one export file (by its file name), or all of them with `all: true`."""

    type: Literal["delete_export"]
    name: Optional[Annotated[str, Field(min_length=1, max_length=100)]] = None
    all: Optional[bool] = None

    @model_validator(mode="after")
    def _one_of(self) -> "DeleteExport":
        if (self.name is None) == (not self.all):
            raise RequestError("name", self.name, "either the name of an export file or all: true, not both",
                               "Name one export file to delete, or ask for all of them, not both.")
        return self


# ----------------------------------------------------------------------------- design (server/design.py)

class BuildNozzle(_Message):
    """A chamber and nozzle from its numbers (solver/nozzle_design.py), made the current scenario as one change
    that undo takes back. SI units; ranges are the design module's own (its refusals name these fields). Fields
    left out take the designer's defaults. Runs at the current chamber, ambient and gas."""

    type: Literal["build_nozzle"]
    throat_radius_m: Finite = Field(description="throat radius (half height in planar mode), metres, above 0")
    contraction_ratio: Finite = Field(description="chamber area / throat area, above 1")
    chamber_length_m: Finite = Field(description="cylindrical chamber length, metres, above 0")
    exit_area_ratio: Finite = Field(description="exit area / throat area, above 1")
    mode: literal(scn.MODES) = "axisymmetric"  # type: ignore[valid-type]
    shape: literal(SHAPES) = "cone"  # type: ignore[valid-type]
    half_angle_deg: Optional[Finite] = None
    convergent_half_angle_deg: Optional[Finite] = None
    upstream_rounding: Optional[Finite] = None
    downstream_rounding: Optional[Finite] = None
    bell_fraction: Optional[Finite] = None
    inflection_angle_deg: Optional[Finite] = None
    exit_angle_deg: Optional[Finite] = None
    cells_per_throat_radius: Optional[Annotated[int, Field(strict=True)]] = None


class PropellantGas(_Message):
    """The chamber gas of a propellant pair by chemical equilibrium (solver/propellant.py, Cantera): frozen gamma,
    molar mass and chamber temperature applied to the gas and reservoir (with p0) as one change."""

    type: Literal["propellant_gas"]
    fuel: Annotated[str, Field(max_length=16)]
    oxidiser: Annotated[str, Field(max_length=16)]
    mixture_ratio: Finite = Field(description="oxidiser-to-fuel mass ratio")
    p0_pa: Finite = Field(description="chamber pressure, Pa")
    reactant_state: literal(STATES) = "gas"  # type: ignore[valid-type]
# ----------------------------------------------------------------------------- presenting (scrub, wave diagram)

class ListFrames(_Message):
    """Which instants the server's frame ring holds (server/frame_ring.py); answered with `frame_ring`."""

    type: Literal["list_frames"]


class RecallFrame(_Message):
    """Send the kept frame of the newest instant at or before this step, as a binary frame of channel 1."""

    type: Literal["recall_frame"]
    steps: int = Field(ge=0, description="a step number (an integer from 0) of a kept instant, from `frame_ring`")


class SetWaveLine(_Message):
    """Sample a field along a station's line, or along a line from start_m to end_m, for the x-t diagram;
    `off: true` stops sampling."""

    type: Literal["set_wave_line"]
    station: Optional[Label] = None
    start_m: Optional[PointM] = None
    end_m: Optional[PointM] = None
    field: Literal[tuple(WAVE_FIELDS)] = "pressure"  # type: ignore[valid-type]
    every_steps: int = Field(EVERY_STEPS, ge=1, le=50, description="an integer from 1 to 50 (a row every so many steps)")
    off: Optional[bool] = None

    @model_validator(mode="after")
    def _one_way(self) -> "SetWaveLine":
        ways = [self.station is not None, self.start_m is not None or self.end_m is not None, bool(self.off)]
        if sum(ways) != 1 or (ways[1] and (self.start_m is None or self.end_m is None)):
            raise RequestError("station", self.station, "one of: a station name, start_m and end_m together, "
                               "or off: true", "Choose the line of the wave diagram by a station's name, or give "
                               "both of its end points, or switch it off.", "one_way")
        if ways[1] and self.start_m == self.end_m:
            raise RequestError("end_m", self.end_m, "a point other than start_m",
                               "The line of the wave diagram needs two different end points.", "distinct")
        return self


class SetComparison(_Message):
    """Run the main scenario a second time beside it with one setting changed (`value` in its SI unit), starting
    from the main run's flow as it is now; `off: true` ends the comparison."""

    type: Literal["set_comparison"]
    setting: Optional[Literal[tuple(COMPARE_SETTINGS)]] = None  # type: ignore[valid-type]
    value: Optional[Finite] = None
    off: Optional[bool] = None

    @model_validator(mode="after")
    def _one_way(self) -> "SetComparison":
        if bool(self.off) == (self.setting is not None or self.value is not None):
            raise RequestError("setting", self.setting, "a setting with its value, or off: true, not both",
                               "Give the setting to change and its value, or switch the comparison off.", "one_way")
        if not self.off and (self.setting is None or self.value is None):
            missing = "value" if self.value is None else "setting"
            raise RequestError(missing, None, "a setting of vocabulary.choices.compare_setting with its value (SI)",
                               f"A comparison needs both the setting and its value; the {missing} is missing.",
                               "required")
        return self


class WaveHistoryRequest(_Message):
    """The wave diagram's rows after a step (all of them with -1); answered with `wave_history`."""

    type: Literal["wave_history"]
    after_steps: int = Field(-1, ge=-1, description="an integer from -1 (every row) upwards")


class GetScenario(_Message):
    """The whole scenario, to the asking tab only (a tab whose copy missed a `sketch_change` asks for it)."""

    type: Literal["get_scenario"]


ClientMessage = Annotated[
    Union[AddShape, RemoveShape, Undo, Redo, ClearSketch, ClearAll, SetMirror, SetGas, SetConditions, SetNumerics,
          SetResolution, SetDomain, SetEdges, SetMode, SetInitial, Run, Pause, ResetFlow, Step, Settle, AddStation,
          RemoveStation, AddProbe, RemoveProbe, SetView, Inspect, Profile, SaveScenario, LoadScenario, ListScenarios,
          DeleteScenario, Export, ListExports, DeleteExport, BuildNozzle, PropellantGas,
          ListFrames, RecallFrame, SetWaveLine,
          WaveHistoryRequest, SetComparison, GetScenario],
    Field(discriminator="type"),
]
_ADAPTER: TypeAdapter = TypeAdapter(ClientMessage)
MESSAGE_TYPES: dict[str, type[_Message]] = {
    m.model_fields["type"].annotation.__args__[0]: m  # type: ignore[union-attr]
    for m in ClientMessage.__origin__.__args__  # type: ignore[attr-defined]
}


# ----------------------------------------------------------------------------- parsing and errors

def request_type(data: Any) -> str:
    """The `type` of a raw message, or "unknown" (for the `request` field of an error)."""
    if isinstance(data, dict) and isinstance(data.get("type"), str) and data["type"] in MESSAGE_TYPES:
        return data["type"]
    return "unknown"


def request_id(data: Any) -> Any:
    if isinstance(data, dict):
        rid = data.get("id")
        if isinstance(rid, (int, str)) and not isinstance(rid, bool) and len(str(rid)) <= 64:
            return rid
    return None


def parse_json(text: str) -> Any:
    """The JSON value of one text frame; RequestError when it is not JSON."""
    try:
        return json.loads(text)
    except json.JSONDecodeError as err:
        raise RequestError("message", _short(text), "a JSON object with a 'type' field",
                           f"The message is not valid JSON: {err}.", "json") from None
    except RecursionError:
        raise RequestError("message", _short(text), "JSON nested at most a few hundred levels deep",
                           "The message is nested too deeply to read.", "depth") from None
    except ValueError:  # an integer with more digits than Python converts (over 4,300)
        raise RequestError("message", _short(text), "numbers of at most 4,300 digits",
                           "The message holds a number with too many digits to read.", "digits") from None


def parse_text(text: str) -> tuple[Any, _Message]:
    """The raw object and the validated message of one text frame; RequestError otherwise."""
    data = parse_json(text)
    return data, parse_message(data)


def parse_message(data: Any) -> _Message:
    if not isinstance(data, dict):
        raise RequestError("message", _short(data), "a JSON object with a 'type' field",
                           "A message must be a JSON object with a type field.", "object")
    if "type" not in data:
        raise RequestError("type", None, "one of: " + ", ".join(MESSAGE_TYPES),
                           "The message has no type; it is required.", "required")
    kind = data["type"]
    if not isinstance(kind, str) or kind not in MESSAGE_TYPES:
        raise RequestError("type", _short(kind), "one of: " + ", ".join(MESSAGE_TYPES),
                           f"There is no message type {str(_short(kind))[:60]}.", "one_of")
    try:
        return _ADAPTER.validate_python(data)
    except ValidationError as err:
        raise error_from_validation(MESSAGE_TYPES[kind], err) from None


def error_from_validation(model: type[BaseModel], err: ValidationError) -> RequestError:
    """The first problem of a ValidationError as a RequestError (field path, value, rule, allowed, sentence)."""
    first = err.errors(include_url=False)[0]
    loc = [p for p in first["loc"] if p != model.model_fields["type"].annotation.__args__[0]]
    inner = (first.get("ctx") or {}).get("error")
    if isinstance(inner, RequestError):
        return inner
    problem = problem_from_record(model, {**first, "loc": tuple(loc)})
    field = problem.field or "message"
    value = _short(problem.value)
    described = _description(model, loc)
    if problem.rule == "required":
        allowed = "required" + (f": {described}" if described else "")
    elif problem.rule in ("unknown_field", "one_of"):
        allowed = problem.allowed
    else:
        allowed = described or problem.allowed
    return RequestError(field, value, allowed, problem.message, problem.rule)


def vocabulary() -> dict:
    """Choices and numeric limits the page builds its controls from: the scenario's own, plus the messages'."""
    out = scn.vocabulary()
    out["limits"] = {**out["limits"], **numeric_limits(Step, "step."), **numeric_limits(SetView, "view.")}
    out["choices"]["view"] = [{"name": n, "label": label} for n, (label, _unit) in VIEWS.items()]
    out["choices"]["overlay"] = [{"name": n, "label": n.replace("_", " ")} for n in OVERLAYS]
    out["choices"].update(design.choices())  # the design dialogs' contour shapes and propellant states
    out["choices"]["compare_setting"] = [{"name": n, "label": label, "unit": unit}
                                         for n, (label, unit) in COMPARE_SETTINGS.items()]
    out["choices"]["wave_field"] = [{"name": n, "label": label, "unit": unit} for n, (label, unit) in WAVE_FIELDS.items()]
    return out


def error_message(request: str, err: RequestError, rid: Any = None) -> dict:
    """The `error` reply (PROTOCOL.md)."""
    out = {"type": "error", "request": request, "field": err.field, "value": _jsonable(err.value),
           "rule": err.rule, "allowed": err.allowed, "message": err.message}
    if getattr(err, "harmless", False):  # a no-op refused (undo with nothing to undo ...): a calm note on the page
        out["harmless"] = True
    if rid is not None:
        out["id"] = rid
    return out


def finite_or_none(obj: Any) -> Any:
    """obj with every NaN or infinity replaced by None (JSON has no NaN; the page reads null as 'no value')."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: finite_or_none(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [finite_or_none(v) for v in obj]
    return obj


def dumps(obj: Any) -> str:
    """Compact JSON text of a server message, NaN and infinities as null. Most messages hold finite numbers only:
    they are encoded as they are, and only one that holds a NaN or an infinity is copied through finite_or_none
    (that walk cost as much again as the encoding, 30 times a second for the overlay's line)."""
    try:
        return json.dumps(obj, separators=(",", ":"), allow_nan=False)
    except ValueError:  # a NaN or an infinity somewhere: the same text with null in their places
        return json.dumps(finite_or_none(obj), separators=(",", ":"), allow_nan=False)


def _submodel(model: Any, name: str) -> Any:
    if not (isinstance(model, type) and issubclass(model, BaseModel)) or name not in model.model_fields:
        return None
    ann = model.model_fields[name].annotation
    for arg in (ann, *getattr(ann, "__args__", ())):
        if isinstance(arg, type) and issubclass(arg, BaseModel):
            return arg
    return None


def _description(model: type[BaseModel], loc: list) -> str | None:
    names = [n for n in loc if isinstance(n, str)]
    if not names:
        return None
    current: Any = model
    for name in names[:-1]:
        current = _submodel(current, name)
        if current is None:
            return None
    if not (isinstance(current, type) and issubclass(current, BaseModel)) or names[-1] not in current.model_fields:
        return None
    return current.model_fields[names[-1]].description


def _short(value: Any, limit: int = 200) -> Any:
    """The value itself when small and JSON-able, else a shortened text of it."""
    if value is None or isinstance(value, (bool, int)):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else repr(value)
    if isinstance(value, str):
        return value if len(value) <= limit else value[: limit - 3] + "..."
    try:
        text = json.dumps(value, allow_nan=False)
    except (TypeError, ValueError):
        text = repr(value)
    if len(text) <= limit:
        return value if isinstance(value, (list, dict)) else text
    return text[: limit - 3] + "..."


def _jsonable(value: Any) -> Any:
    try:
        json.dumps(value, allow_nan=False)
        return value
    except (TypeError, ValueError):
        return _short(repr(value))
