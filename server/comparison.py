"""A second run beside the main one: the same scenario with one setting changed (before/after, two ambients).

The comparison is the main scenario's document with one number of COMPARE_SETTINGS replaced, validated
by the scenario's own models, and built into its own Simulation. It never runs by itself: after each burst
(or step request) of the main run the runner steps it towards the main run's flow time, with at most as
much wall time as the main burst took (`follow`), so the two pictures show the same instant and the
comparison at most doubles the solver's work. When it cannot keep up it falls behind and says by how
much (`behind_s`); it never slows the main run further.

It starts from the main run's flow as it is (state and time), so the two part at that instant; Reset
flow starts both from the starting gas together. The main scenario decides: a change to it (a shape,
a condition, the numerics) is made to the comparison too, which keeps its flow as the main run does (a
new mode or starting gas starts both again); stations and probes do not concern it; a main flow that goes
back in time (reset flow, a loaded scenario) restarts it; a paused main run leaves it still. A
comparison that diverges stops stepping and says so; the main run is not touched.
"""
from __future__ import annotations

import copy
import json
import time
import weakref
from dataclasses import dataclass

import numpy as np

from shockslate.solver import scenario as scn
from shockslate.solver.errors import SolverDiverged
from shockslate.solver.geometry import wall_geometry
from shockslate.solver.kinds import CellKind

from .errors import RequestError
from .session import FlowSnapshot, request_error_from_scenario

#: The settings a comparison may change: scenario document path -> (label, SI unit).
COMPARE_SETTINGS: dict[str, tuple[str, str]] = {
    "conditions.ambient.p_pa": ("ambient pressure", "Pa"),
    "conditions.ambient.t_k": ("ambient temperature", "K"),
    "conditions.reservoir.p0_pa": ("reservoir pressure p0", "Pa"),
    "conditions.reservoir.t0_k": ("reservoir temperature T0", "K"),
    "conditions.stream.mach": ("stream Mach number", "-"),
    "conditions.stream.p_pa": ("stream pressure", "Pa"),
    "gas.gamma": ("gamma", "-"),
}
#: Frame channel of comparison frames (PROTOCOL.md "Binary frames").
COMPARISON_CHANNEL = 2


def _get(doc: dict, path: str):
    node = doc
    for key in path.split("."):
        node = node[key]
    return node


def _set(doc: dict, path: str, value: float) -> None:
    keys = path.split(".")
    node = doc
    for key in keys[:-1]:
        node = node[key]
    node[keys[-1]] = value


@dataclass
class Comparison:
    """The comparison run: which setting, its value, the scenario it makes and its simulation."""

    setting: str
    value: float
    scenario: scn.Scenario
    sim: object
    main_revision: int
    version: int = 0
    note: str = ""
    diverged: str | None = None
    behind_s: float = 0.0
    #: The main run's step count when last followed: fewer means the main flow started again.
    main_steps: int = 0
    #: The main scenario's content (without names, stations and probes) this comparison was built from.
    main_key: str = ""
    #: The main run's simulation when last followed (a reset or a load replaces it: a new flow).
    main_sim: object = None

    @classmethod
    def build(cls, main: scn.Scenario, setting: str, value: float, main_revision: int,
              with_flow: bool = True) -> "Comparison":
        """The main scenario with `setting` set to `value` (SI), validated; RequestError naming `value` if not.
        with_flow: also build its simulation (at its starting gas)."""
        if setting not in COMPARE_SETTINGS:
            raise RequestError("setting", setting, "one of: " + ", ".join(COMPARE_SETTINGS),
                               f"A comparison cannot change {setting}.", "one_of")
        doc = copy.deepcopy(scn.scenario_to_dict(main))
        _set(doc, setting, float(value))
        if setting == "gas.gamma":
            doc["gas"]["preset"] = None  # a changed gamma is a custom gas
        doc["name"] = f"{main.name} (comparison)"
        try:
            scenario = scn.parse_scenario(doc)
        except scn.ScenarioError as err:
            refused = request_error_from_scenario(err, doc)
            raise RequestError("value", value, refused.allowed,
                               f"The comparison's {COMPARE_SETTINGS[setting][0]} is refused: {refused.message}",
                               refused.rule) from None
        return cls(setting, float(value), scenario, scn.build_simulation(scenario) if with_flow else None,
                   main_revision, main_key=content_key(main))

    def main_value(self, main: scn.Scenario) -> float:
        return float(_get(scn.scenario_to_dict(main), self.setting))

    def start_from(self, main_sim) -> None:
        """Take the main run's flow as it is now (state, time, step count): the two runs part from this instant,
        the comparison with its one setting changed."""
        rho, u, v, p = main_sim.primitive()
        fluid = self.sim.mask == CellKind.FLUID
        self.sim.set_primitive(*(np.where(fluid, q, 1.0) for q in (rho, u, v, p)))  # walls hold filler values
        self.sim.time_s, self.sim.steps = main_sim.time_s, main_sim.steps
        self.main_steps = main_sim.steps
        self.main_sim = weakref.ref(main_sim)
        self.version += 1

    def carry(self, main: scn.Scenario, main_revision: int) -> None:
        """The main scenario changed: make the same change to the comparison, which keeps its flow as the main
        run keeps its own (a new mode or starting gas starts it again, as it does the main flow)."""
        new = Comparison.build(main, self.setting, self.value, main_revision, with_flow=False).scenario
        old, sim = self.scenario, self.sim
        if old.mode != new.mode or old.initial != new.initial:  # (the main flow started again too)
            self.sim = scn.build_simulation(new)
            self.note = "the main run's mode or starting gas changed: the comparison started again with it"
        else:
            if old.domain != new.domain:
                geo = wall_geometry(scn.to_sketch(new), scn.to_domain(new))
                sim.remesh(scn.to_domain(new), geo.mask, geo)
            elif old.sketch != new.sketch:
                geo = wall_geometry(scn.to_sketch(new), sim.domain)
                sim.set_mask(geo.mask, geo)
            if old.gas != new.gas:
                sim.set_gas(scn.to_gas(new))
            if old.conditions != new.conditions:
                sim.set_conditions(scn.to_conditions(new))
            if old.numerics != new.numerics:
                sim.set_numerics(scn.to_numerics(new))
            if old.edges != new.edges:
                sim.set_edges(scn.to_setup(new).edges)
            self.note = "the main scenario changed: the comparison took the same change"
        self.scenario, self.main_revision, self.main_key = new, main_revision, content_key(main)
        self.version += 1

    def rebuild(self, main: scn.Scenario, main_revision: int, why: str) -> None:
        """Start again from the starting gas of the (changed) main scenario, with the same one setting."""
        fresh = Comparison.build(main, self.setting, self.value, main_revision)
        self.scenario, self.sim, self.main_revision, self.main_key = fresh.scenario, fresh.sim, main_revision, \
            fresh.main_key
        self.diverged = None
        self.behind_s = 0.0
        self.version += 1
        self.note = why

    def restart(self, why: str) -> None:
        self.sim = scn.build_simulation(self.scenario)
        self.diverged = None
        self.behind_s = 0.0
        self.version += 1
        self.note = why

    def follow(self, main_time_s: float, budget_s: float) -> int:
        """Step towards the main run's flow time for at most budget_s of wall time; the steps taken."""
        if self.diverged is not None:
            return 0
        start = time.perf_counter()
        steps = 0
        while self.sim.time_s < main_time_s:
            try:
                if self.sim.step() <= 0.0:
                    break
            except SolverDiverged as err:
                self.diverged = str(err)
                self.note = "the comparison diverged and stopped: " + str(err)
                break
            steps += 1
            if time.perf_counter() - start >= budget_s:
                break
        self.behind_s = max(0.0, main_time_s - self.sim.time_s)
        if steps:
            self.version += 1
        return steps

    def snapshot(self) -> FlowSnapshot:
        return FlowSnapshot.of_simulation(self.sim, self.version)

    def message(self, main: scn.Scenario) -> dict:
        """The `comparison` message: what differs, by how much the comparison is behind, any note."""
        label, unit = COMPARE_SETTINGS[self.setting]
        return {"type": "comparison", "active": True, "setting": self.setting, "label": label, "unit": unit,
                "value": self.value, "main_value": self.main_value(main), "time_s": self.sim.time_s,
                "behind_s": self.behind_s, "diverged": self.diverged, "note": self.note}


def content_key(s: scn.Scenario) -> str:
    """What makes the flow of a scenario, as text: stations, probes, names and the end time left out (adding a
    station to the main run changes nothing in the comparison)."""
    doc = scn.scenario_to_dict(s)
    return json.dumps({k: v for k, v in doc.items() if k not in ("name", "description", "stations", "probes",
                                                                   "end_time_s")}, sort_keys=True)


def off_message() -> dict:
    return {"type": "comparison", "active": False}
