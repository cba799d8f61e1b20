"""The one simulation a server runs: its scenario, its flow and its run state, as an explicit state machine.

States are paused, running and diverged; every run-control event goes through one transition table
(`TRANSITIONS`), so an event that makes no sense in the current state is refused with an error that
says which states allow it. Changes to the scenario are made on a copy of the scenario document,
validated by solver.scenario, and only then applied to the flow, so a refused change changes
nothing. The flow is kept across changes wherever the solver can keep it (sketch, conditions, gas,
numerics, resolution, edges); a new geometry mode or a loaded scenario starts a new flow.

A Session is not thread-safe: the live runner (server/runner.py) serialises every call behind one
lock and runs `advance` in a worker thread.
"""
from __future__ import annotations

import copy
import enum
import math
import re
import time
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from shockslate.solver import scenario as scn
from shockslate.solver.diagnostics import Station, read_probe, station_profile
from shockslate.solver.domain import Domain
from shockslate.solver.errors import SolverDiverged
from shockslate.solver.gas import PRESETS, Gas
from shockslate.solver.geometry import wall_geometry
from shockslate.solver.shapes import shape_from_dict
from shockslate.solver.simulation import Simulation

from . import readings
from .errors import RequestError

#: Sketch changes kept for undo (and redo).
UNDO_DEPTH = 200


class SessionState(str, enum.Enum):
    PAUSED = "paused"
    RUNNING = "running"
    DIVERGED = "diverged"


PAUSED, RUNNING, DIVERGED = SessionState.PAUSED, SessionState.RUNNING, SessionState.DIVERGED

#: (event, from state) -> to state. Pressing run or pause twice (two tabs at once) is harmless, so
#: those self-transitions are allowed; stepping while running is not (pause first).
TRANSITIONS: dict[tuple[str, SessionState], SessionState] = {
    ("run", PAUSED): RUNNING,
    ("run", RUNNING): RUNNING,
    ("run", DIVERGED): RUNNING,
    ("pause", RUNNING): PAUSED,
    ("pause", PAUSED): PAUSED,
    ("pause", DIVERGED): PAUSED,
    ("step", PAUSED): PAUSED,
    ("step", DIVERGED): PAUSED,
    ("diverge", RUNNING): DIVERGED,
    ("diverge", PAUSED): DIVERGED,
    ("diverge", DIVERGED): DIVERGED,
    ("reset_flow", PAUSED): PAUSED,
    ("reset_flow", RUNNING): RUNNING,
    ("reset_flow", DIVERGED): PAUSED,
    ("new_flow", PAUSED): PAUSED,
    ("new_flow", RUNNING): RUNNING,
    ("new_flow", DIVERGED): PAUSED,
}


class TransitionError(RequestError):
    """A run-control event the current state does not allow."""


@dataclass(frozen=True)
class Divergence:
    """What the `diverged` message tells the page: where it blew up and what to try."""

    message: str
    step: int
    time_s: float
    x_m: float
    y_m: float
    variable: str
    advice: tuple[str, ...]

    def to_message(self) -> dict:
        return {"type": "diverged", "message": self.message, "step": self.step, "time_s": self.time_s,
                "x_m": self.x_m, "y_m": self.y_m, "variable": self.variable, "advice": list(self.advice)}


@dataclass(frozen=True)
class Advanced:
    """Outcome of a burst of steps."""

    steps: int
    wall_s: float
    divergence: Divergence | None = None


@dataclass(frozen=True)
class FlowSnapshot:
    """A copy of the flow for drawing, taken between steps; safe to read in any thread."""

    version: int
    time_s: float
    steps: int
    rho: np.ndarray
    u: np.ndarray
    v: np.ndarray
    p: np.ndarray
    mask: np.ndarray
    gas: Gas
    domain: Domain

    @property
    def x_centres_m(self) -> np.ndarray:
        return self.domain.x_centres_m()

    @property
    def y_centres_m(self) -> np.ndarray:
        return self.domain.y_centres_m()


def divergence_advice(numerics: scn.NumericsModel, conditions: scn.ConditionsModel) -> tuple[str, ...]:
    """What to try after a divergence, given the numerics in use (lower CFL, first order, softer conditions)."""
    advice = []
    if numerics.cfl > 0.3:
        advice.append(f"lower the CFL number (now {numerics.cfl:g}; try 0.3 or less)")
    if numerics.order == 2:
        advice.append("start the flow at first order (order 1), then switch back to second order")
    if numerics.flux == "hllc":
        advice.append("use the more dissipative HLL or Rusanov flux")
    ratio = conditions.reservoir.p0_pa / conditions.ambient.p_pa
    advice.append(f"soften the conditions: a smaller pressure ratio (p0 / p_amb is now {ratio:.3g}) "
                  "or temperature jump, then raise it while the flow runs")
    advice.append("reset the flow to start again from the initial state")
    return tuple(advice)


_SCENARIO_CLAUSE = re.compile(r"^(?P<field>[A-Za-z_][\w.\[\]]*) (?:= (?P<value>.*?) )?is (?:not allowed|missing|outside)"
                              r"[:;,]? ?(?P<allowed>.*)$", re.S)


def _value_at(doc: Any, path: str) -> Any:
    """The value at a JSON path like 'stations[2].start_m' in doc, or None."""
    current = doc
    for name, index in re.findall(r"([A-Za-z_]\w*)|\[(\d+)\]", path):
        try:
            current = current[name] if name else current[int(index)]
        except (KeyError, IndexError, TypeError):
            return None
    return current


def request_error_from_scenario(err: ValueError, doc: dict, prefix_map: dict[str, str] | None = None) -> RequestError:
    """A RequestError from a ScenarioError (or a solver ValueError) raised on the changed document.

    prefix_map re-aims document paths at the message's fields, e.g. {"conditions.": ""} so that
    the error of set_conditions names reservoir.p0_pa.
    """
    text = str(err).split("; ")[0]
    match = _SCENARIO_CLAUSE.match(text)
    if match is None:
        return RequestError("scenario", None, text, text)
    path = match.group("field")
    value = _value_at(doc, path)
    field = path
    for prefix, replacement in (prefix_map or {}).items():
        if field.startswith(prefix):
            field = replacement + field[len(prefix):]
            break
    allowed = match.group("allowed") or text
    return RequestError(field, value, allowed, text)


class Session:
    """Scenario + flow + run state. Every public method either applies fully or raises RequestError."""

    def __init__(self, scenario: scn.Scenario, on_change: Callable[[scn.Scenario], None] | None = None,
                 state: SessionState = PAUSED):
        self.scenario = scenario
        self.sim: Simulation = scn.build_simulation(scenario)
        self.state = SessionState(state)
        self.revision = 0
        self.flow_version = 0
        self.divergence: Divergence | None = None
        self._undo: list[dict] = []
        self._redo: list[dict] = []
        self._on_change = on_change

    # ------------------------------------------------------------------ state machine
    def _transition(self, event: str) -> SessionState:
        target = TRANSITIONS.get((event, self.state))
        if target is None:
            allowed = [s.value for (e, s) in TRANSITIONS if e == event]
            hint = " (pause first)" if event == "step" else ""
            raise TransitionError("state", self.state.value, "one of: " + ", ".join(allowed),
                                  f"{event} is not allowed while the run is {self.state.value}{hint}; "
                                  f"it is allowed when {' or '.join(allowed)}")
        self.state = target
        if target is not DIVERGED:
            self.divergence = None
        return target

    def run(self) -> None:
        self._transition("run")

    def pause(self) -> None:
        self._transition("pause")

    @property
    def running(self) -> bool:
        return self.state is RUNNING

    # ------------------------------------------------------------------ stepping
    def step(self, count: int = 1) -> Advanced:
        """Advance `count` steps while paused (or after a divergence); stops early on divergence."""
        if not (isinstance(count, int) and 1 <= count <= 1000):
            raise RequestError("count", count, "an integer from 1 to 1000")
        if (("step", self.state)) not in TRANSITIONS:
            self._transition("step")  # raises with the allowed states
        start = time.perf_counter()
        done = 0
        for _ in range(count):
            try:
                if self.sim.step() <= 0.0:
                    break
            except SolverDiverged as err:
                return self._diverged(err, done, start)
            done += 1
        self._transition("step")
        self.flow_version += 1
        return Advanced(done, time.perf_counter() - start)

    def advance(self, max_wall_s: float, max_steps: int = 100_000) -> Advanced:
        """A burst of steps while running, for about max_wall_s seconds (at least one step)."""
        if self.state is not RUNNING:
            return Advanced(0, 0.0)
        start = time.perf_counter()
        done = 0
        while done < max_steps:
            try:
                if self.sim.step() <= 0.0:
                    break
            except SolverDiverged as err:
                return self._diverged(err, done, start)
            done += 1
            if time.perf_counter() - start >= max_wall_s:
                break
        if done:
            self.flow_version += 1
        return Advanced(done, time.perf_counter() - start)

    def _diverged(self, err: SolverDiverged, done: int, start: float) -> Advanced:
        self._transition("diverge")
        self.flow_version += 1
        self.divergence = Divergence(str(err), err.step, err.time_s, err.x_m, err.y_m, err.variable,
                                     divergence_advice(self.scenario.numerics, self.scenario.conditions))
        return Advanced(done, time.perf_counter() - start, self.divergence)

    def reset_flow(self) -> None:
        """Back to the scenario's initial state, time zero; the sketch stays."""
        self.sim = scn.build_simulation(self.scenario)
        self._transition("reset_flow")
        self.flow_version += 1

    # ------------------------------------------------------------------ scenario changes
    def _doc(self) -> dict:
        return scn.scenario_to_dict(self.scenario)

    def _validated(self, doc: dict, prefix_map: dict[str, str] | None = None) -> scn.Scenario:
        try:
            return scn.parse_scenario(doc)
        except scn.ScenarioError as err:
            raise request_error_from_scenario(err, doc, prefix_map) from None

    def _commit(self, new: scn.Scenario, apply: Callable[[scn.Scenario], None]) -> None:
        """Apply a validated scenario to the flow, then make it current (and tell the store)."""
        try:
            apply(new)
        except ValueError as err:
            raise RequestError("scenario", None, str(err), str(err)) from None
        self.scenario = new
        self.revision += 1
        self.flow_version += 1
        if self._on_change is not None:
            self._on_change(new)

    def _apply_mask(self, new: scn.Scenario) -> None:
        geo = wall_geometry(scn.to_sketch(new), self.sim.domain)
        self.sim.set_mask(geo.mask, geo)

    def _change_sketch(self, sketch: dict, prefix_map: dict[str, str] | None = None, *, record: bool = True) -> None:
        doc = self._doc()
        old_sketch = copy.deepcopy(doc["sketch"])
        doc["sketch"] = sketch
        new = self._validated(doc, prefix_map)
        self._commit(new, self._apply_mask)
        if record:
            self._undo.append(old_sketch)
            del self._undo[:-UNDO_DEPTH]
            self._redo.clear()

    def add_shape(self, shape: dict) -> None:
        try:
            shape_from_dict(shape, where="shape")
        except ValueError as err:
            raise request_error_from_scenario(err, {"shape": shape}) from None
        sketch = self._doc()["sketch"]
        n = len(sketch["shapes"])
        sketch["shapes"].append(shape)
        self._change_sketch(sketch, {f"sketch.shapes[{n}]": "shape", "sketch.shapes": "shape"})

    def remove_shape(self, index: int) -> None:
        sketch = self._doc()["sketch"]
        n = len(sketch["shapes"])
        if not (isinstance(index, int) and 0 <= index < n):
            allowed = f"an index from 0 to {n - 1}" if n else "no index: the sketch is empty"
            raise RequestError("index", index, allowed)
        del sketch["shapes"][index]
        self._change_sketch(sketch)

    def clear_sketch(self) -> None:
        sketch = self._doc()["sketch"]
        if not sketch["shapes"]:
            raise RequestError("sketch", 0, "a sketch with shapes (it is already empty)",
                               "clear_sketch: the sketch is already empty")
        sketch["shapes"] = []
        self._change_sketch(sketch)

    def set_mirror(self, mirror: str) -> None:
        sketch = self._doc()["sketch"]
        sketch["mirror"] = mirror
        self._change_sketch(sketch, {"sketch.": ""})

    def undo(self) -> None:
        if not self._undo:
            raise RequestError("undo", 0, "an earlier sketch change to undo (there is none)",
                               "undo: there is no sketch change to undo")
        previous = self._undo[-1]
        current = self._doc()["sketch"]
        self._change_sketch(previous, record=False)
        self._undo.pop()
        self._redo.append(current)

    def redo(self) -> None:
        if not self._redo:
            raise RequestError("redo", 0, "an undone sketch change to redo (there is none)",
                               "redo: there is no undone sketch change to redo")
        following = self._redo[-1]
        current = self._doc()["sketch"]
        self._change_sketch(following, record=False)
        self._redo.pop()
        self._undo.append(current)

    @property
    def undo_depth(self) -> int:
        return len(self._undo)

    @property
    def redo_depth(self) -> int:
        return len(self._redo)

    def set_gas(self, preset: str | None = None, gamma: float | None = None,
                molar_mass_kg_kmol: float | None = None) -> None:
        doc = self._doc()
        if preset is not None:
            if preset not in PRESETS:
                raise RequestError("preset", preset, "one of: " + ", ".join(PRESETS))
            ref = PRESETS[preset]
            doc["gas"] = {"preset": preset, "gamma": ref.gamma, "molar_mass_kg_kmol": ref.molar_mass_kg_kmol}
        else:
            gas = doc["gas"]
            doc["gas"] = {"preset": None,
                          "gamma": gas["gamma"] if gamma is None else gamma,
                          "molar_mass_kg_kmol": gas["molar_mass_kg_kmol"] if molar_mass_kg_kmol is None
                          else molar_mass_kg_kmol}
        new = self._validated(doc, {"gas.": ""})
        self._commit(new, lambda s: self.sim.set_gas(scn.to_gas(s)))

    def set_conditions(self, reservoir: dict | None = None, stream: dict | None = None,
                       ambient: dict | None = None) -> None:
        doc = self._doc()
        for part, changes in (("reservoir", reservoir), ("stream", stream), ("ambient", ambient)):
            for key, value in (changes or {}).items():
                if value is not None:
                    doc["conditions"][part][key] = value
        new = self._validated(doc, {"conditions.": ""})
        self._commit(new, lambda s: self.sim.set_conditions(scn.to_conditions(s)))

    def set_numerics(self, **changes: Any) -> None:
        doc = self._doc()
        doc["numerics"].update({k: v for k, v in changes.items() if v is not None})
        new = self._validated(doc, {"numerics.": ""})
        self._commit(new, lambda s: self.sim.set_numerics(scn.to_numerics(s)))

    def _remesh(self, new: scn.Scenario) -> None:
        domain = scn.to_domain(new)
        geo = wall_geometry(scn.to_sketch(new), domain)
        self.sim.remesh(domain, geo.mask, geo)

    def set_resolution(self, nx: int) -> None:
        doc = self._doc()
        doc["domain"]["nx"] = nx
        self._commit(self._validated(doc, {"domain.": ""}), self._remesh)

    def set_domain(self, x_min_m: float, x_max_m: float, y_min_m: float, y_max_m: float) -> None:
        doc = self._doc()
        doc["domain"].update(x_min_m=x_min_m, x_max_m=x_max_m, y_min_m=y_min_m, y_max_m=y_max_m)
        self._commit(self._validated(doc, {"domain.": ""}), self._remesh)

    def set_edges(self, **changes: str | None) -> None:
        doc = self._doc()
        doc["edges"].update({k: v for k, v in changes.items() if v is not None})
        new = self._validated(doc, {"edges.": ""})
        self._commit(new, lambda s: self.sim.set_edges(scn.to_setup(s).edges))

    def set_mode(self, mode: str) -> None:
        """Planar or axisymmetric: a different problem, so the flow starts again.

        Going axisymmetric puts the axis on the bottom edge at y = 0; going planar turns the axis
        into a wall (a symmetry line).
        """
        doc = self._doc()
        doc["mode"] = mode
        if mode == "axisymmetric":
            doc["edges"]["bottom"] = "axis"
            if doc["domain"]["y_min_m"] != 0.0:
                doc["domain"]["y_min_m"] = 0.0
        elif doc["edges"]["bottom"] == "axis":
            doc["edges"]["bottom"] = "wall"
        new = self._validated(doc)
        self._commit(new, self._new_flow)

    def _new_flow(self, new: scn.Scenario) -> None:
        self.sim = scn.build_simulation(new)
        self._transition("new_flow")

    def load(self, scenario: scn.Scenario) -> None:
        """Make another scenario current: new flow, undo history cleared."""
        self._commit(scenario, self._new_flow)
        self._undo.clear()
        self._redo.clear()

    # ------------------------------------------------------------------ stations and probes
    def add_station(self, name: str, start_m: list[float], end_m: list[float], role: str | None = None) -> None:
        doc = self._doc()
        used = [st["name"] for st in doc["stations"]]
        if name in used:
            raise RequestError("name", name, "a name no other station uses (in use: " + ", ".join(used) + ")")
        n = len(used)
        doc["stations"].append({"name": name, "start_m": list(start_m), "end_m": list(end_m), "role": role})
        if role is not None:  # the new station takes the role over
            for st in doc["stations"][:-1]:
                if st["role"] == role:
                    st["role"] = None
        new = self._validated(doc, {f"stations[{n}].": "", f"stations[{n}]": "station"})
        self._commit(new, lambda s: None)

    def remove_station(self, name: str) -> None:
        self._remove_named("stations", name)

    def add_probe(self, name: str, x_m: float, y_m: float) -> None:
        doc = self._doc()
        used = [pr["name"] for pr in doc["probes"]]
        if name in used:
            raise RequestError("name", name, "a name no other probe uses (in use: " + ", ".join(used) + ")")
        n = len(used)
        doc["probes"].append({"name": name, "x_m": x_m, "y_m": y_m})
        new = self._validated(doc, {f"probes[{n}].": "", f"probes[{n}]": "x_m"})
        self._commit(new, lambda s: None)

    def remove_probe(self, name: str) -> None:
        self._remove_named("probes", name)

    def _remove_named(self, key: str, name: str) -> None:
        """Remove the station or probe (`key`) of this name from the scenario."""
        doc = self._doc()
        names = [item["name"] for item in doc[key]]
        if name not in names:
            raise RequestError("name", name, f"one of the {key}: " + (", ".join(names) or "(there are none)"))
        del doc[key][names.index(name)]
        self._commit(self._validated(doc), lambda s: None)

    # ------------------------------------------------------------------ reading the flow
    def _check_inside(self, x_m: float, y_m: float) -> None:
        d = self.scenario.domain
        top = self.sim.domain.y_min_m + self.sim.domain.ny * self.sim.domain.dx_m
        if not (math.isfinite(x_m) and d.x_min_m <= x_m <= d.x_max_m):
            raise RequestError("x_m", x_m, f"a point inside the domain, x from {d.x_min_m:g} to {d.x_max_m:g} m")
        if not (math.isfinite(y_m) and d.y_min_m <= y_m <= top):
            raise RequestError("y_m", y_m, f"a point inside the domain, y from {d.y_min_m:g} to {top:g} m")

    def inspect(self, x_m: float, y_m: float) -> dict:
        """All values in the cell under a point (the `inspect` reply)."""
        self._check_inside(x_m, y_m)
        r = read_probe(self.sim, x_m, y_m)
        return {"type": "inspect", "x_m": x_m, "y_m": y_m, "kind": r.kind, "p_pa": r.p_pa,
                "rho_kg_m3": r.rho_kg_m3, "t_k": r.t_k, "u_m_s": r.u_m_s, "v_m_s": r.v_m_s, "mach": r.mach}

    def profile(self, station: str | None = None, axis: bool = False) -> dict:
        """Values along a station, or along the axis with the ideal 1D Mach number beside them."""
        if axis:
            return readings.axis_profile(self.sim, self.scenario)
        for st in self.scenario.stations:
            if st.name == station:
                prof = station_profile(self.sim, Station(tuple(st.start_m), tuple(st.end_m), st.name))
                out: dict[str, Any] = {"type": "profile", "station": st.name}
                out.update({k: v.tolist() for k, v in prof.items()})
                out["ideal_mach"] = None
                return out
        names = [st.name for st in self.scenario.stations]
        raise RequestError("station", station, "one of the stations: " + (", ".join(names) or "(there are none)"))

    def snapshot(self) -> FlowSnapshot:
        rho, u, v, p = self.sim.primitive()
        return FlowSnapshot(self.flow_version, self.sim.time_s, self.sim.steps, rho, u, v, p,
                            self.sim.mask.copy(), self.sim.setup.gas, self.sim.domain)


def warm_kernels() -> float:
    """Compile (or load from the numba cache) every kernel once, on a tiny flow; returns the seconds taken.

    Called at server start in a worker thread, so the first real burst does not stall for compilation.
    """
    from shockslate.solver.shapes import Rectangle, Segment, Sketch
    from shockslate.solver.simulation import Setup

    start = time.perf_counter()
    domain = Domain(0.0, 1.0, 0.0, 0.25, 16)
    geo = wall_geometry(Sketch((Segment((0.5, 0.0), (0.3, 0.1), 0.05, "wall"),
                                Rectangle((0.0, 0.0), (0.12, 0.25), "reservoir"))), domain)
    sim = Simulation(Setup(domain), geo.mask, geo)
    sim.step()
    sim.step()
    return time.perf_counter() - start
