"""The one simulation a server runs: its scenario, its flow and its run state, as an explicit state machine.

States are paused, running and diverged; every run-control event goes through one transition table
(`TRANSITIONS`), so an event that makes no sense in the current state is refused with an error that
says which states allow it. Changes to the scenario are made on a copy of the scenario document,
validated by solver.scenario, and only then applied to the flow, so a refused change changes
nothing. The flow is kept across changes wherever the solver can keep it (sketch, conditions, gas,
numerics, resolution, edges); a new geometry mode or a loaded scenario starts a new flow. Undo and
redo hold whole scenario documents, so every change (sketch, stations, probes, settings) can be
taken back; a scenario that differs from the one loaded is named '<name> edited' and described by
the values it now holds.

A Session is not thread-safe: the live runner (server/runner.py) serialises every call behind one
lock and runs `advance` in a worker thread.
"""
from __future__ import annotations

import copy
import enum
import math
import time
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from shockslate.solver import nozzle
from shockslate.solver import scenario as scn
from shockslate.solver.diagnostics import Station, read_probe, station_profile
from shockslate.solver.domain import Domain
from shockslate.solver.errors import SolverDiverged
from shockslate.solver.kinds import HELD_KINDS, CellKind
from shockslate.solver.gas import PRESETS, Gas
from shockslate.solver.geometry import SampledWalls, resample_walls, sample_walls
from shockslate.solver.shapes import Sketch, shape_from_dict
from shockslate.solver.settle import DEFAULT_LEVELS, GridSequence, LocalStepper, interior_end_m
from shockslate.solver.simulation import GHOST, Simulation
from shockslate.solver.validation import Refused

from . import readings
from .errors import RequestError

#: Scenario changes kept for undo (and redo).
UNDO_DEPTH = 200
#: Added to the name of a scenario that differs from the one loaded (in downloads and exports too).
EDITED_SUFFIX = " edited"
#: A running flow whose steps take longer than this (seconds) is not stepped while it is rebuilt on a new grid:
#: it cannot give the tabs 10 frames per second anyway, the steps made meanwhile are dropped at the swap, and
#: each one delays the swap (leaving a 2048-cell grid, two of them made the change last 0.8 s)
HOLD_STEP_S = 0.1
#: What a held flow's burst waits instead of stepping (seconds): the runner's loop comes back without spinning
HELD_NAP_S = 0.01


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
    """The flow for drawing, taken between steps. A detached snapshot is a copy, safe to read in any thread at any
    time. One that is not (Session.snapshot(detached=False)) reads the running simulation's own arrays: only for
    the solver's thread, before its next step (the frames of a running flow, made right there, runner.py)."""

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
    #: rho, u, v, p as one C-ordered (4, ny + 2 ghost, nx + 2 ghost) array and its kinds, which the fields above
    #: are interior views of (the frame kernels read these in place)
    state: np.ndarray | None = None
    kinds: np.ndarray | None = None
    ghost: int = 0
    detached: bool = True

    @classmethod
    def of_state(cls, version: int, time_s: float, steps: int, state: np.ndarray, kinds: np.ndarray, ghost: int,
                 gas: Gas, domain: Domain, detached: bool) -> "FlowSnapshot":
        """A snapshot over a padded primitive state and its kinds (ghost cells around the domain's)."""
        inner = (slice(ghost, kinds.shape[0] - ghost), slice(ghost, kinds.shape[1] - ghost))
        return cls(version, time_s, steps, *(state[c][inner] for c in range(4)), kinds[inner], gas, domain,
                   state, kinds, ghost, detached)

    @classmethod
    def of_simulation(cls, sim: Simulation, version: int, detached: bool = True) -> "FlowSnapshot":
        """A snapshot of the simulation: a copy of its interior (detached), or its own arrays in place."""
        if not detached:
            return cls.of_state(version, sim.time_s, sim.steps, sim.W, sim.kind, GHOST, sim.setup.gas, sim.domain,
                                detached=False)
        state = sim.W[:, GHOST:-GHOST, GHOST:-GHOST].copy()  # one C-ordered block of the four fields
        return cls.of_state(version, sim.time_s, sim.steps, state, sim.mask.copy(), 0, sim.setup.gas, sim.domain,
                            detached=True)

    @property
    def x_centres_m(self) -> np.ndarray:
        return self.domain.x_centres_m()

    @property
    def y_centres_m(self) -> np.ndarray:
        return self.domain.y_centres_m()


def divergence_advice(numerics: scn.NumericsModel, conditions: scn.ConditionsModel, reason: str = "non_finite",
                      held: frozenset[str] = frozenset({"reservoir"})) -> tuple[str, ...]:
    """What to try after a divergence, most likely cause first.

    `reason` is SolverDiverged.reason; `held` names the held kinds in the flow ("reservoir", "stream",
    "ambient"), so the conditions advice speaks of what this scenario has. A growing wave speed or a
    collapsing time step points at the time step first; floors in many cells point at the conditions
    (an expansion towards vacuum) first.
    """
    cfl = (f"lower the CFL number (now {numerics.cfl:g}; try 0.3 or less)" if numerics.cfl > 0.3 else None)
    order = ("start the flow at first order (order 1), then switch back to second order"
             if numerics.order == 2 else None)
    flux = "use the more dissipative HLL or Rusanov flux" if numerics.flux == "hllc" else None
    if "reservoir" in held:
        ratio = conditions.reservoir.p0_pa / conditions.ambient.p_pa
        soften = (f"soften the conditions: a smaller pressure ratio (p0 / p_amb is now {ratio:.3g}) "
                  "or temperature jump, then raise it while the flow runs")
    elif "stream" in held:
        soften = (f"soften the conditions: a lower stream Mach number (now {conditions.stream.mach:g}), "
                  "then raise it while the flow runs")
    else:
        soften = "soften the conditions: a smaller pressure or temperature jump in the initial state"
    if reason == "floors":
        ordered = [soften, order, cfl, flux]
    elif reason in ("wave_speed_jump", "time_step_collapse") or numerics.cfl > 0.5:
        ordered = [cfl, order, flux, soften]
    else:
        ordered = [order, cfl, flux, soften]
    advice = [a for a in ordered if a]
    advice.append("reset the flow to start again from the initial state")
    return tuple(advice)


def request_error_from_scenario(err: ValueError, doc: dict | None = None,
                                prefix_map: dict[str, str] | None = None) -> RequestError:
    """A RequestError from the first Problem of a refused scenario document (or shape).

    prefix_map re-aims document paths at the message's fields, e.g. {"conditions.": ""} so that
    the error of set_conditions names reservoir.p0_pa. A plain ValueError (a solver rule) is passed on
    as it is, under the field "scenario".
    """
    if not isinstance(err, Refused):
        return RequestError("scenario", None, "a setup the solver accepts", str(err), "solver")
    problem = err.first
    field = problem.field
    for prefix, replacement in (prefix_map or {}).items() if field else ():
        if field.startswith(prefix):
            field = replacement + field[len(prefix):]
            break
    return RequestError.from_problem(problem, field or "scenario")


@dataclass
class Rebuild:
    """A resolution or extent change on its way: the scenario it changes, the new one, its sketch, a copy of
    the flow that build_rebuild carries over to the new grid (with the walls sampled there), and the flow it
    was copied from (if that is no longer current, the rebuilt one is stale)."""

    base: scn.Scenario
    new: scn.Scenario
    sketch: Sketch
    sim: Simulation
    source: Simulation
    walls: SampledWalls | None = None
    refusal: RequestError | None = None


class Session:
    """Scenario + flow + run state. Every public method either applies fully or raises RequestError."""

    def __init__(self, scenario: scn.Scenario, on_change: Callable[[scn.Scenario], None] | None = None,
                 state: SessionState = PAUSED):
        self.scenario = scenario
        self._walls: SampledWalls | None = None  # the flow's wall geometry with its samples
        self._shapes: tuple[list, tuple] = ([], ())  # the shape models of the last sketch built, and its shapes
        self.sim: Simulation = self._flow_of(scenario)
        self.state = SessionState(state)
        self.revision = 0
        self.flow_version = 0
        self.divergence: Divergence | None = None
        # scenarios before and after the changes made (validated and immutable: going back needs no new check)
        self._undo: list[scn.Scenario] = []
        self._redo: list[scn.Scenario] = []
        self._on_change = on_change
        self._dicts: list[tuple[scn.Scenario, dict]] = []
        self._before_unsaved: tuple | None = None  # what the last unsaved_change replaced, until it is saved
        #: settle mode: every cell takes its own time step (solver/settle.py); the flow on the way to the
        #: steady state is no time history, so the page says so while it is on
        self.settle = False
        self._stepper: LocalStepper | None = None
        self._step_s = 0.0  # wall time of one step in the last burst (decides whether a rebuild holds the flow)
        self._held: Rebuild | None = None  # the rebuild the flow is held for, if any
        #: settle mode's grid sequencing (coarse grids first, then the flow's own grid), begun when settle is
        #: switched on and with each new flow while it is on; the user's grid and sketch are never changed by it
        self._sequence: GridSequence | None = None
        #: its grid levels: settle.DEFAULT_LEVELS (as `run --until steady --settle`); 1 settles on the flow's grid alone
        self.settle_levels = DEFAULT_LEVELS
        self._sequence_note = ""
        self._set_origin(scenario)

    # ------------------------------------------------------------------ what was loaded, what is edited
    def _set_origin(self, scenario: scn.Scenario) -> None:
        """Remember the loaded scenario: a change away from it marks the scenario edited."""
        doc = self._as_dict(scenario)
        self._origin_name = scenario.name
        self._origin_description = scenario.description
        self._origin_content = _content(doc)

    @property
    def edited(self) -> bool:
        """Whether the scenario differs from the one loaded (undo back to it, and it is not edited again)."""
        return _content(self._as_dict(self.scenario)) != self._origin_content

    @property
    def origin_name(self) -> str:
        return self._origin_name

    def _marked(self, new: scn.Scenario) -> scn.Scenario:
        """The scenario with the name and description that say what it is: the loaded one's, or, once it
        differs from that, '<name> edited' and a description of the values it now holds."""
        if _content(self._as_dict(new)) == self._origin_content:
            name, description = self._origin_name, self._origin_description
        else:
            base = self._origin_name
            if base.endswith(EDITED_SUFFIX) and len(base) > len(EDITED_SUFFIX):  # restored from an edited session
                base = base[: -len(EDITED_SUFFIX)]
            name = base[: 80 - len(EDITED_SUFFIX)] + EDITED_SUFFIX
            description = describe_values(new, base)
        if new.name == name and new.description == description:
            return new
        marked = new.model_copy(update={"name": name, "description": description})
        doc = {**self._as_dict(new), "name": name, "description": description}
        self._dicts = [(marked, doc), *self._dicts[:3]]
        return marked

    # ------------------------------------------------------------------ state machine
    def _transition(self, event: str) -> SessionState:
        target = TRANSITIONS.get((event, self.state))
        if target is None:
            allowed = [s.value for (e, s) in TRANSITIONS if e == event]
            hint = " (pause first)" if event == "step" else ""
            raise TransitionError("state", self.state.value, "one of: " + ", ".join(allowed),
                                  f"{event.capitalize()} is not allowed while the run is {self.state.value}{hint}; "
                                  f"it is allowed when {' or '.join(allowed)}.", "state")
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

    def set_settle(self, on: bool) -> None:
        """Settle mode on (local time steps: the steady end state sooner, no time history) or off (time-accurate
        steps again, from the flow as it is)."""
        if not isinstance(on, bool):
            raise RequestError("on", on, "true or false", rule="type")
        if on and not self.settle:
            self._sequence = None  # switched on: the next settle step begins the grid sequence
        self.settle = on

    def _one_step(self) -> float:
        """One step of the current flow: time-accurate, or a local-time step in settle mode."""
        if not self.settle:
            return self.sim.step()
        coarse = self._coarse_step()
        if coarse is not None:
            return coarse
        if self._stepper is None or self._stepper.sim is not self.sim:  # a new flow since the last step
            self._stepper = LocalStepper(self.sim)
        return self._stepper.step()

    def _coarse_step(self) -> float | None:
        """One step of settle mode's grid sequence while it is on a coarse grid, else None. The sequence begins
        with settle and with each new flow; a change of the scenario on a coarse grid begins it again. A coarse
        grid that cannot be built or diverges ends the sequence: the flow settles on its own grid from its
        state (untouched by the coarse grids), and settle_grid() says why."""
        seq = self._sequence
        if seq is None or seq.fine is not self.sim or (not seq.done and self._sequence_revision != self.revision):
            scenario = self.scenario
            seq = self._sequence = GridSequence(
                lambda nx: scn.build_simulation(scenario, nx), self.sim, levels=self.settle_levels,
                x_max_m=interior_end_m(scn.station_by_role(scenario, "exit")))
            self._sequence_revision = self.revision
            self._sequence_note = ""
        if seq.done:
            return None
        try:
            return seq.step()
        except Exception as err:  # noqa: BLE001  (a coarse grid's trouble must not stop the settle)
            nx = seq.sim.domain.nx
            seq.abandon()
            self._sequence_note = (f"the coarse grid of {nx} cells across could not settle "
                                   f"({getattr(err, 'message', str(err))[:200]}); settling on your grid directly")
            return None

    @property
    def shown_sim(self) -> Simulation:
        """The grid the picture shows: a coarse grid of settle mode's grid sequence while it runs, else the flow's."""
        seq = self._sequence
        if self.settle and seq is not None and seq.fine is self.sim and not seq.done:
            return seq.sim
        return self.sim

    def settle_grid(self) -> dict | None:
        """Where settle mode's grid sequence is, for the status: the level (1 = coarsest) of how many, its cells,
        the flow's own grid beside it; None while settle is off."""
        if not self.settle:
            return None
        seq = self._sequence
        fine = self.sim.domain
        if seq is None or seq.fine is not self.sim:  # not begun yet: it begins with the next settle step
            return {"level": 1, "levels": None, "nx": None, "ny": None, "fine_nx": fine.nx, "fine_ny": fine.ny,
                    "note": self._sequence_note}
        shown = self.shown_sim.domain
        return {"level": seq.level, "levels": seq.levels, "nx": shown.nx, "ny": shown.ny,
                "fine_nx": fine.nx, "fine_ny": fine.ny, "note": self._sequence_note}

    # ------------------------------------------------------------------ stepping
    def step(self, count: int = 1, max_wall_s: float = math.inf) -> Advanced:
        """Advance `count` steps while paused (or after a divergence); stops early on divergence, and after
        max_wall_s seconds of work (at least one step), so that a long request can be served in slices."""
        if not (isinstance(count, int) and 1 <= count <= 1000):
            raise RequestError("count", count, "an integer from 1 to 1000", rule="range")
        if (("step", self.state)) not in TRANSITIONS:
            self._transition("step")  # raises with the allowed states
        start = time.perf_counter()
        done = 0
        for _ in range(count):
            try:
                if self._one_step() <= 0.0:
                    break
            except SolverDiverged as err:
                return self._diverged(err, done, start)
            done += 1
            if time.perf_counter() - start >= max_wall_s:
                break
        self._transition("step")
        self.flow_version += 1
        return Advanced(done, time.perf_counter() - start)

    def advance(self, max_wall_s: float, max_steps: int = 100_000) -> Advanced:
        """A burst of steps while running, for about max_wall_s seconds (at least one step)."""
        if self.state is not RUNNING:
            return Advanced(0, 0.0)
        if self._held is not None:  # being rebuilt on a new grid (plan_rebuild): its steps would be dropped
            time.sleep(HELD_NAP_S)
            return Advanced(0, 0.0)
        start = time.perf_counter()
        done = 0
        while done < max_steps:
            try:
                if self._one_step() <= 0.0:
                    break
            except SolverDiverged as err:
                return self._diverged(err, done, start)
            done += 1
            if time.perf_counter() - start >= max_wall_s:
                break
        if done:
            self.flow_version += 1
            self._step_s = (time.perf_counter() - start) / done
        return Advanced(done, time.perf_counter() - start)

    def _diverged(self, err: SolverDiverged, done: int, start: float) -> Advanced:
        self._transition("diverge")
        self.flow_version += 1
        held = frozenset(k.name.lower() for k in HELD_KINDS if (self.sim.kind == k).any())
        self.divergence = Divergence(str(err), err.step, err.time_s, err.x_m, err.y_m, err.variable,
                                     divergence_advice(self.scenario.numerics, self.scenario.conditions,
                                                       getattr(err, "reason", "non_finite"), held))
        return Advanced(done, time.perf_counter() - start, self.divergence)

    def reset_flow(self) -> None:
        """Back to the scenario's initial state, time zero; the sketch stays."""
        self.sim = self._flow_of(self.scenario)
        self._transition("reset_flow")
        self.flow_version += 1

    # ------------------------------------------------------------------ scenario changes
    def _doc(self) -> dict:
        """The current scenario document, a copy the caller may change."""
        return _copy_doc(self._as_dict(self.scenario))

    def _as_dict(self, scenario: scn.Scenario) -> dict:
        """scenario_to_dict of a scenario, read-only, remembered for the last few scenario objects: a change
        reads the document several times, and a big sketch takes half a second to turn into one. A shape
        model that the last scenarios share (a change builds the next scenario from the same shape objects)
        is turned into its dict once."""
        for obj, doc in self._dicts:
            if obj is scenario:
                return doc
        doc = scenario.model_dump(mode="json", exclude={"sketch": {"shapes"}})
        doc["initial"] = {k: v for k, v in doc["initial"].items() if v is not None}  # as scenario_to_dict
        known = {id(m): d for obj, old in self._dicts for m, d in zip(obj.sketch.shapes, old["sketch"]["shapes"])}
        doc["sketch"]["shapes"] = [known.get(id(m)) or m.model_dump(mode="json") for m in scenario.sketch.shapes]
        self._dicts = [(scenario, doc), *self._dicts[:3]]
        return doc

    def document(self) -> dict:
        """The current scenario as scenario_to_dict gives it; read-only (shared with the session's caches)."""
        return self._as_dict(self.scenario)

    def _validated(self, doc: dict, prefix_map: dict[str, str] | None = None) -> scn.Scenario:
        try:
            return scn.parse_scenario(doc)
        except scn.ScenarioError as err:
            raise request_error_from_scenario(err, doc, prefix_map) from None

    def _commit(self, new: scn.Scenario, apply: Callable[[scn.Scenario], None], *, record: bool = True) -> None:
        """Keep a validated scenario (tell the store first: a change that cannot be saved is not made), then
        apply it to the flow and make it current. If the flow refuses it, the saved file is put back.

        record: put the scenario as it was on the undo stack (every change but a load and undo/redo).
        """
        new = self._marked(new)
        if self._on_change is not None:
            self._on_change(new)
        try:
            apply(new)
        except ValueError as err:
            if self._on_change is not None:
                self._on_change(self.scenario)
            raise RequestError("scenario", None, "a setup the solver accepts", str(err), "solver") from None
        before = self.scenario
        self.scenario = new
        self.revision += 1
        self.flow_version += 1
        if record and self._as_dict(before) != self._as_dict(self.scenario):  # the same values again (a repeated input) is no change
            self._undo.append(before)
            del self._undo[:-UNDO_DEPTH]
            self._redo.clear()

    # ------------------------------------------------------------------ saving off the solver's thread
    def unsaved_change(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> tuple[scn.Scenario, dict]:
        """Make a change (a public method and its arguments) without telling the store, and return the
        scenario and document to save. The server saves them outside the solver's lock, so the flow keeps
        stepping meanwhile, and acknowledges the change only once saved; if saving fails it calls
        roll_back(), which puts the session back as it was before this change."""
        before = (self.scenario, self.revision, list(self._undo), list(self._redo),
                  (self._origin_name, self._origin_description, self._origin_content))
        on_change, self._on_change = self._on_change, None
        try:
            fn(*args, **kwargs)
        finally:
            self._on_change = on_change
        self._before_unsaved = before
        return self.scenario, self.document()

    def roll_back(self) -> None:
        """Undo the last unsaved_change (its save failed): the scenario, revision, undo history and origin it
        replaced, and the flow brought back to that scenario as undo would."""
        before = self._before_unsaved
        if before is None:
            return
        self._before_unsaved = None
        scenario, revision, undo, redo, origin = before
        if scenario is not self.scenario:
            self._apply_difference(scenario)
            self.scenario = scenario
            self.flow_version += 1
        self.revision = revision  # the change was never acknowledged: no tab holds its revision
        self._undo, self._redo = undo, redo
        self._origin_name, self._origin_description, self._origin_content = origin

    def _apply_difference(self, new: scn.Scenario) -> None:
        """Bring the flow from the current scenario to `new`, whatever differs (for undo and redo): a new
        mode or starting gas starts the flow again; everything else keeps it, as the single changes do."""
        old = self.scenario
        if old.mode != new.mode or old.initial != new.initial:
            self._new_flow(new)
            return
        if old.domain != new.domain:
            self._remesh(new)
        elif old.sketch != new.sketch:
            self._apply_mask(new)
        if old.gas != new.gas:
            self.sim.set_gas(scn.to_gas(new))
        if old.conditions != new.conditions:
            self.sim.set_conditions(scn.to_conditions(new))
        if old.numerics != new.numerics:
            self.sim.set_numerics(scn.to_numerics(new))
        if old.edges != new.edges:
            self.sim.set_edges(scn.to_setup(new).edges)

    def _sketch_of(self, scenario: scn.Scenario) -> Sketch:
        """The scenario's sketch, keeping the shape objects of the last sketch built for shapes that did not
        change (matched in paint order from both ends): a long shape is then neither converted again nor
        compared point by point in the geometry, and its arrays stay with it."""
        models = list(scenario.sketch.shapes)
        old_models, old_shapes = self._shapes
        n = min(len(models), len(old_models))
        p = 0
        while p < n and (models[p] is old_models[p] or models[p] == old_models[p]):
            p += 1
        q = 0
        while q < n - p and (models[-1 - q] is old_models[-1 - q] or models[-1 - q] == old_models[-1 - q]):
            q += 1
        middle = tuple(m.to_shape() for m in models[p:len(models) - q])
        shapes = old_shapes[:p] + middle + (old_shapes[len(old_shapes) - q:] if q else ())
        self._shapes = (models, shapes)
        nozzle.remember_shapes(models, shapes)  # the live status's drawn nozzle reads the same shapes
        return Sketch(shapes, scenario.sketch.mirror)

    def _walls_for(self, new: scn.Scenario, domain: Domain) -> SampledWalls:
        """The wall geometry of the scenario's sketch on `domain`: sampled again only where the sketch changed
        when the last geometry is on the same domain, else whole."""
        sketch = self._sketch_of(new)
        if self._walls is not None and self._walls.domain == domain:
            return resample_walls(self._walls, sketch)
        return sample_walls(sketch, domain)

    def _apply_mask(self, new: scn.Scenario) -> None:
        walls = self._walls_for(new, self.sim.domain)
        self.sim.set_mask(walls.geometry.mask, walls.geometry)
        self._walls = walls

    def _change_sketch(self, sketch: dict, prefix_map: dict[str, str] | None = None) -> None:
        doc = {k: v for k, v in self._as_dict(self.scenario).items() if k != "sketch"}  # read-only: not changed here
        doc["sketch"] = sketch
        new = self._validated(doc, prefix_map)
        self._commit(new, self._apply_mask)

    def _kept_shapes(self) -> list:
        """The current shape models, to build the next sketch from: validation takes a model as it is, so
        only a new shape is checked point by point, and the unchanged ones stay the same objects."""
        return list(self.scenario.sketch.shapes)

    def check_shape(self, shape: dict) -> None:
        """Refuse a shape add_shape would refuse for itself (its fields, or a point too far from the domain),
        reading only the current scenario (an immutable object), not the flow: the server calls it before
        waiting for the solver, so such a refusal never waits for a burst of steps (a ~1e6 m segment is refused
        in milliseconds whatever the grid)."""
        try:
            shape_from_dict(shape, where="shape")
        except ValueError as err:
            raise request_error_from_scenario(err, {"shape": shape}) from None
        scenario = self.scenario
        doc = scn.scenario_to_dict(scenario.model_copy(update={"sketch": scn.SketchModel()}))  # no big sketch
        doc["sketch"] = {"mirror": scenario.sketch.mirror, "shapes": [shape]}
        self._validated(doc, {"sketch.shapes[0]": "shape", "sketch.shapes": "shape"})

    def add_shape(self, shape: dict) -> None:
        try:
            shape_from_dict(shape, where="shape")
        except ValueError as err:
            raise request_error_from_scenario(err, {"shape": shape}) from None
        shapes = self._kept_shapes()
        n = len(shapes)
        sketch = {"mirror": self.scenario.sketch.mirror, "shapes": [*shapes, shape]}
        self._change_sketch(sketch, {f"sketch.shapes[{n}]": "shape", "sketch.shapes": "shape"})

    def remove_shape(self, index: int) -> None:
        shapes = self._kept_shapes()
        n = len(shapes)
        if not (isinstance(index, int) and 0 <= index < n):
            allowed = f"an index from 0 to {n - 1}" if n else "no index: the sketch is empty"
            raise RequestError("index", index, allowed, f"There is no shape {index}; the sketch has {n}.", "range")
        del shapes[index]
        self._change_sketch({"mirror": self.scenario.sketch.mirror, "shapes": shapes})

    def clear_sketch(self) -> None:
        sketch = self._doc()["sketch"]
        if not sketch["shapes"]:
            raise RequestError("sketch", 0, "a sketch with shapes (it is already empty)",
                               "The sketch is already empty.", "empty")
        sketch["shapes"] = []
        self._change_sketch(sketch)

    def set_mirror(self, mirror: str) -> None:
        self._change_sketch({"mirror": mirror, "shapes": self._kept_shapes()}, {"sketch.": ""})

    def clear_all(self) -> None:
        """An empty slate in the same box: no shapes, stations or probes, no mirror, still ambient gas as the
        starting state, and the flow started again. Gas, domain, edges, conditions and numerics stay."""
        doc = self._doc()
        doc["sketch"] = {"mirror": "none", "shapes": []}
        doc["stations"] = []
        doc["probes"] = []
        doc["initial"] = {"kind": "ambient"}
        self._commit(self._validated(doc), self._new_flow)

    def set_initial(self, kind: str, x_m: float | None = None, centre_m: list[float] | None = None,
                    radius_m: float | None = None) -> None:
        """The starting gas (scenario `initial`); the flow starts again from it."""
        doc = self._doc()
        initial: dict[str, Any] = {"kind": kind}
        for key, value in (("x_m", x_m), ("centre_m", centre_m), ("radius_m", radius_m)):
            if value is not None:
                initial[key] = list(value) if key == "centre_m" else value
        doc["initial"] = initial
        self._commit(self._validated(doc, {"initial.": ""}), self._new_flow)

    def undo(self) -> None:
        """Back to the scenario before the last change (sketch, stations, probes or any setting)."""
        if not self._undo:
            raise RequestError("undo", 0, "an earlier change to undo (there is none)",
                               "There is no change to undo.", "nothing_to_undo")
        current = self.scenario
        self._commit(self._undo[-1], self._apply_difference, record=False)
        self._undo.pop()
        self._redo.append(current)

    def redo(self) -> None:
        if not self._redo:
            raise RequestError("redo", 0, "an undone change to redo (there is none)",
                               "There is no undone change to redo.", "nothing_to_redo")
        current = self.scenario
        self._commit(self._redo[-1], self._apply_difference, record=False)
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
                raise RequestError("preset", preset, "one of: " + ", ".join(PRESETS),
                                   f"There is no gas preset {preset}; the presets are {', '.join(PRESETS)}.", "one_of")
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
        walls = self._walls_for(new, domain)
        self.sim.remesh(domain, walls.geometry.mask, walls.geometry)
        self._walls = walls

    def _domain_doc(self, domain_changes: dict) -> dict:
        """The current document with the domain changed; the sketch passes as its (validated) model, so a
        big sketch is not checked point by point again."""
        doc = {k: v for k, v in self._as_dict(self.scenario).items() if k not in ("domain", "sketch")}
        doc["domain"] = {**self._as_dict(self.scenario)["domain"], **domain_changes}
        doc["sketch"] = self.scenario.sketch
        return doc

    def set_resolution(self, nx: int) -> None:
        self.rebuild(self.plan_rebuild(nx=nx))

    def set_domain(self, x_min_m: float, x_max_m: float, y_min_m: float, y_max_m: float) -> None:
        self.rebuild(self.plan_rebuild(x_min_m=x_min_m, x_max_m=x_max_m, y_min_m=y_min_m, y_max_m=y_max_m))

    # ------------------------------------------------------------------ resolution and extent, off the solver's lock
    def plan_rebuild(self, **domain_changes: Any) -> "Rebuild":
        """Check a new resolution or extent and copy the flow to rebuild on it (quick: call under the lock).
        The heavy part, build_rebuild, reads only the copy, so it can run while the flow steps on."""
        new = self._validated(self._domain_doc(domain_changes), {"domain.": ""})
        plan = Rebuild(self.scenario, new, self._sketch_of(new), _detached_copy(self.sim), self.sim)
        if self.running and self._step_s > HOLD_STEP_S:
            self._held = plan  # until finish_rebuild or release_rebuild
        return plan

    @property
    def holding(self) -> bool:
        """Whether the flow is held (not stepped) while it is rebuilt on a new grid."""
        return self._held is not None

    def release_rebuild(self, plan: "Rebuild") -> None:
        """Let the flow step again if it was held for this rebuild (one that failed or was given up); safe in
        any thread and more than once."""
        if self._held is plan:
            self._held = None

    @staticmethod
    def build_rebuild(plan: "Rebuild") -> None:
        """Sample the walls on the new grid and carry the copied flow over to it (any thread, no lock)."""
        domain = scn.to_domain(plan.new)
        plan.walls = sample_walls(plan.sketch, domain)
        try:
            plan.sim.remesh(domain, plan.walls.geometry.mask, plan.walls.geometry)
        except ValueError as err:
            plan.refusal = RequestError("scenario", None, "a setup the solver accepts", str(err), "solver")

    def finish_rebuild(self, plan: "Rebuild") -> None:
        """Make the rebuilt flow current (quick: call under the lock). The flow it carries is the one copied
        by plan_rebuild: the steps made while it was rebuilt are dropped, as if the run had paused."""
        self.release_rebuild(plan)
        if plan.refusal is not None:
            raise plan.refusal
        if plan.base is not self.scenario or plan.source is not self.sim:
            raise RequestError("domain", plan.new.domain.nx, "a change made on the current scenario",
                               "The scenario or the flow changed while the new grid was built; try again.", "stale")

        def swap(_: scn.Scenario) -> None:
            self.sim = plan.sim
            self._walls = plan.walls

        self._commit(plan.new, swap)

    def rebuild(self, plan: "Rebuild") -> None:
        """build_rebuild then finish_rebuild, in the calling thread."""
        try:
            self.build_rebuild(plan)
            self.finish_rebuild(plan)
        finally:
            self.release_rebuild(plan)

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

    def _flow_of(self, scenario: scn.Scenario) -> Simulation:
        """A new flow of the scenario. Its wall geometry is kept with its samples and its shapes converted now,
        as part of building the flow, so the first sketch change after a load samples again only where it
        changes (on a big sketch it sampled and converted everything: most of its 0.8 s)."""
        walls = self._walls_for(scenario, scn.to_domain(scenario))
        sim = scn.build_simulation(scenario, geometry=walls.geometry)
        self._walls = walls
        return sim

    def _new_flow(self, new: scn.Scenario) -> None:
        self.sim = self._flow_of(new)
        self._transition("new_flow")

    def load(self, scenario: scn.Scenario) -> None:
        """Make another scenario current: new flow, undo history cleared, not edited."""
        origin = (self._origin_name, self._origin_description, self._origin_content)
        self._set_origin(scenario)
        try:
            self._commit(scenario, self._new_flow, record=False)
        except RequestError:
            self._origin_name, self._origin_description, self._origin_content = origin
            raise
        self._undo.clear()
        self._redo.clear()

    def replace(self, scenario: scn.Scenario) -> None:
        """A whole new scenario made on the page (a nozzle built from numbers) as ONE change that undo takes
        back: new flow, its name and description are what is loaded now, the undo history is kept."""
        origin = (self._origin_name, self._origin_description, self._origin_content)
        self._set_origin(scenario)
        try:
            self._commit(scenario, self._new_flow)
        except RequestError:
            self._origin_name, self._origin_description, self._origin_content = origin
            raise

    def change_document(self, doc: dict) -> None:
        """Several values changed at once (gas and chamber from propellants) as one undoable change."""
        self._commit(self._validated(doc), self._apply_difference)

    def kept_as(self, name: str) -> None:
        """The scenario was kept under `name`: it now is that scenario, not an edited one."""
        doc = self._doc()
        doc["name"] = name
        kept = self._validated(doc)
        origin = (self._origin_name, self._origin_description, self._origin_content)
        self._set_origin(kept)
        try:
            self._commit(kept, lambda s: None, record=False)
        except RequestError:
            self._origin_name, self._origin_description, self._origin_content = origin
            raise

    # ------------------------------------------------------------------ stations and probes
    def add_station(self, name: str, start_m: list[float], end_m: list[float], role: str | None = None) -> None:
        doc = self._doc()
        used = [st["name"] for st in doc["stations"]]
        if name in used:
            raise RequestError("name", name, "a name no other station uses (in use: " + ", ".join(used) + ")",
                               f"A station called {name} is there already; pick another name.", "unique")
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
            raise RequestError("name", name, "a name no other probe uses (in use: " + ", ".join(used) + ")",
                               f"A probe called {name} is there already; pick another name.", "unique")
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
            raise RequestError("name", name, f"one of the {key}: " + (", ".join(names) or "(there are none)"),
                               f"There is no {key[:-1]} called {name}.", "one_of")
        del doc[key][names.index(name)]
        self._commit(self._validated(doc), lambda s: None)

    # ------------------------------------------------------------------ reading the flow
    def _check_inside(self, x_m: float, y_m: float) -> None:
        d = self.scenario.domain
        top = self.sim.domain.y_min_m + self.sim.domain.ny * self.sim.domain.dx_m
        if not (math.isfinite(x_m) and d.x_min_m <= x_m <= d.x_max_m):
            raise RequestError("x_m", x_m, f"a point inside the domain, x from {d.x_min_m:g} to {d.x_max_m:g} m",
                               f"The point must lie inside the domain, x from {d.x_min_m:g} to {d.x_max_m:g} m; "
                               f"you gave x {x_m:g} m.", "inside_domain")
        if not (math.isfinite(y_m) and d.y_min_m <= y_m <= top):
            raise RequestError("y_m", y_m, f"a point inside the domain, y from {d.y_min_m:g} to {top:g} m",
                               f"The point must lie inside the domain, y from {d.y_min_m:g} to {top:g} m; "
                               f"you gave y {y_m:g} m.", "inside_domain")

    def inspect(self, x_m: float, y_m: float) -> dict:
        """All values in the cell under a point (the `inspect` reply)."""
        self._check_inside(x_m, y_m)
        try:
            r = read_probe(self.sim, x_m, y_m)
            values = (r.kind, r.p_pa, r.rho_kg_m3, r.t_k, r.u_m_s, r.v_m_s, r.mach)
        except (ArithmeticError, ValueError):
            # a bad state (zero or negative pressure or density): show the raw cell, derived values unknown
            values = self._raw_cell(x_m, y_m)
        kind, p_pa, rho, t_k, u, v, mach = values
        return {"type": "inspect", "x_m": x_m, "y_m": y_m, "kind": kind, "p_pa": p_pa,
                "rho_kg_m3": rho, "t_k": t_k, "u_m_s": u, "v_m_s": v, "mach": mach}

    def _raw_cell(self, x_m: float, y_m: float) -> tuple:
        j, i = self.sim.domain.cell_index(x_m, y_m)
        rho, u, v, p = (float(self.sim.W[c, j + 2, i + 2]) for c in range(4))
        kind = str(CellKind(int(self.sim.mask[j, i])).name.lower())
        return kind, p, rho, None, u, v, None

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
        raise RequestError("station", station, "one of the stations: " + (", ".join(names) or "(there are none)"),
                           f"There is no station called {station}.", "one_of")

    def snapshot(self, detached: bool = True) -> FlowSnapshot:
        """The flow the picture shows (a coarse grid while settle mode's grid sequence runs). detached: a copy;
        otherwise the simulation's own arrays, read in place by the frames the solver's thread makes before its
        next step (no copy of the four fields 30 times a second)."""
        return FlowSnapshot.of_simulation(self.shown_sim, self.flow_version, detached)


def _detached_copy(sim: Simulation) -> Simulation:
    """A copy of the simulation to rebuild on a new grid while the original steps on.

    Simulation.remesh reads the old primitive state (W) and kinds, then allocates every array anew: those two
    are copied (a consistent state, taken under the lock), the other arrays are shared as read-only views
    (copying a 4096-cell grid's gigabyte would hold the solver for seconds; a write through one would fail
    loudly instead of changing the running flow), and lists and dicts are copied."""
    clone = copy.copy(sim)
    for name, value in vars(sim).items():
        if isinstance(value, np.ndarray):
            if name in ("W", "kind"):
                setattr(clone, name, value.copy())
            else:
                view = value.view()
                view.flags.writeable = False
                setattr(clone, name, view)
        elif isinstance(value, (list, dict, set)):
            setattr(clone, name, copy.deepcopy(value))
    return clone


def _copy_doc(value: Any) -> Any:
    """A copy of a scenario document to change: dicts and lists are new, but the [x, y] pairs of a shape's
    points are shared (nothing changes a point in place; a changed shape is a new dict)."""
    if isinstance(value, dict):
        return {k: (list(v) if k == "points_m" else _copy_doc(v)) for k, v in value.items()}
    if isinstance(value, list):
        return [_copy_doc(v) for v in value]
    return value


def _content(doc: dict) -> dict:
    """A scenario document without its name and description: what makes the flow."""
    return {k: v for k, v in doc.items() if k not in ("name", "description")}


def describe_values(s: scn.Scenario, origin: str) -> str:
    """The description of an edited scenario: what it was edited from and the values it now holds, so a
    download never carries a description whose numbers no longer hold. Units as on the page (kPa, mm)."""
    c, d, e = s.conditions, s.domain, s.edges
    kpa = lambda pa: f"{pa / 1e3:.5g} kPa"  # noqa: E731
    mm = lambda m: f"{m * 1e3:.5g} mm"  # noqa: E731
    preset = f" ({s.gas.preset})" if s.gas.preset else ""
    ini = s.initial
    if ini.kind == "reservoir_upstream_of_x":
        start = f"reservoir gas left of x = {mm(ini.x_m)}"
    elif ini.kind == "reservoir_in_circle":
        start = f"reservoir gas within {mm(ini.radius_m)} of ({mm(ini.centre_m[0])}, {mm(ini.centre_m[1])})"
    else:
        start = "the stream state everywhere" if ini.kind == "stream" else "still ambient gas"
    n_shapes, n_st, n_pr = len(s.sketch.shapes), len(s.stations), len(s.probes)
    plural = lambda n, word: f"{n} {word}{'' if n == 1 else 's'}"  # noqa: E731
    return (f"Edited from '{origin}'. Gas: gamma {s.gas.gamma:g}, molar mass {s.gas.molar_mass_kg_kmol:g} kg/kmol"
            f"{preset}. Reservoir p0 {kpa(c.reservoir.p0_pa)}, T0 {c.reservoir.t0_k:g} K; ambient "
            f"{kpa(c.ambient.p_pa)}, {c.ambient.t_k:g} K; stream Mach {c.stream.mach:g} at {c.stream.angle_deg:g} deg, "
            f"{kpa(c.stream.p_pa)}, {c.stream.t_k:g} K. {s.mode.capitalize()}, x {mm(d.x_min_m)} to {mm(d.x_max_m)}, "
            f"y {mm(d.y_min_m)} to {mm(d.y_max_m)}, {d.nx} cells across; edges left {e.left}, right {e.right}, "
            f"bottom {e.bottom}, top {e.top}. Starts with {start}. {plural(n_shapes, 'shape')}, "
            f"{plural(n_st, 'station')}, {plural(n_pr, 'probe')}. Numerics: order {s.numerics.order}, "
            f"{s.numerics.limiter}, {s.numerics.flux}, CFL {s.numerics.cfl:g}, {s.numerics.integrator}.")
