"""What the status message reports: station and probe figures beside ideal 1D nozzle theory, and warnings.

The ideal figures come from solver.nozzle, the one source for every page, report and sweep: A* is the
narrowest DRAWN section of the fed gas column, and each station's area ratio is the drawn section on its
line over A*. They are the isentropic, fully expanded 1D values (choked mass flow, exit Mach for the
station's area ratio, thrust from the ideal thrust coefficient), shown beside what the flow actually does;
the resolved (cell mask) throat area goes with them, labelled.
"""
from __future__ import annotations

import logging
import math
import threading
from typing import Any

import numpy as np

from shockslate.solver import nozzle
from shockslate.solver import scenario as scn
from shockslate.solver.diagnostics import Station, read_probe, read_station, station_profile
from shockslate.solver.domain import Domain
from shockslate.solver.kinds import CellKind
from shockslate.solver.simulation import GHOST, Simulation
from shockslate.solver.steady import live_residual, steady_region


log = logging.getLogger("shockslate.readings")

#: A sketch with more vertices than this has its drawn nozzle read in a thread of its own when the live status
#: asks (wait=False), and the status waits for it at most READ_APART_WAIT_S, so the solver's thread is never held
#: longer; a smaller one is read at once (common practice, no source: 30 polygons of 15,000 points read in about
#: 0.1 s, 30 strokes of 15,000 points in about 5 s)
READ_APART_VERTICES = 100_000
READ_APART_WAIT_S = 0.2


class _DrawnNozzleReader:
    """Reads one scenario's drawn nozzle at a time in a thread of its own; solver.nozzle keeps the result, so the
    next status finds it. A reading that fails is not tried again apart: that scenario is then read at once."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._thread: threading.Thread | None = None
        self._scenario: scn.Scenario | None = None
        self._failed: scn.Scenario | None = None

    def busy_with(self, scenario: scn.Scenario) -> bool:
        with self._lock:
            return self._scenario is scenario and self._thread is not None and self._thread.is_alive()

    def failed(self, scenario: scn.Scenario) -> bool:
        return self._failed is scenario

    def start(self, scenario: scn.Scenario, wait_s: float) -> None:
        """Read this scenario apart and wait for it at most wait_s seconds, unless a reading is under way
        already (then return at once: the next status asks again)."""
        with self._lock:
            if self._thread is not None and self._thread.is_alive():
                return
            self._scenario = scenario
            self._thread = thread = threading.Thread(target=self._read, args=(scenario,), name="drawn-nozzle",
                                                     daemon=True)
            thread.start()
        thread.join(wait_s)

    def _read(self, scenario: scn.Scenario) -> None:
        try:
            nozzle.drawn_nozzle(scenario)
        except Exception:  # noqa: BLE001 - told once; the status then reads it at once and reports it there
            log.exception("the drawn nozzle could not be read")
            self._failed = scenario


_READER = _DrawnNozzleReader()


def nozzle_geometry(mask: np.ndarray, domain: Domain, scenario: scn.Scenario,
                    wait: bool = True) -> nozzle.DrawnNozzle | None:
    """The drawn nozzle (solver.nozzle) when the sketch has a reservoir, else None. mask and domain are not
    needed for the drawn figures (the resolved ones are read in station_figures); kept for the runner's call.

    wait=False (the live status): a big sketch not read yet is read in another thread and None comes back
    meanwhile if it takes longer than READ_APART_WAIT_S (drawn_nozzle_reading tells); a later status finds it."""
    if not scn.has_reservoir(scenario):
        return None
    if wait or nozzle.drawn_nozzle_known(scenario) or _READER.failed(scenario) \
            or nozzle.drawing_vertices(scenario) <= READ_APART_VERTICES:
        return nozzle.drawn_nozzle(scenario)
    _READER.start(scenario, READ_APART_WAIT_S)
    return nozzle.drawn_nozzle(scenario) if nozzle.drawn_nozzle_known(scenario) else None


def drawn_nozzle_reading(scenario: scn.Scenario) -> bool:
    """Whether the scenario's drawn nozzle is being read apart (its ideal figures follow in a later status)."""
    return scn.has_reservoir(scenario) and not nozzle.drawn_nozzle_known(scenario) and _READER.busy_with(scenario)


def _station_x_m(st: scn.StationModel) -> float:
    return 0.5 * (st.start_m[0] + st.end_m[0])


def station_ideal(scenario: scn.Scenario, noz: nozzle.DrawnNozzle, st: scn.StationModel,
                  resolved: nozzle.ResolvedAreas) -> dict | None:
    """Ideal 1D figures at a station's line: drawn section over the drawn throat (solver.nozzle), with the
    resolved (cell mask) throat area beside them; None where the section is narrower than the throat."""
    section = nozzle.drawing(scenario).area_m2(_station_x_m(st))
    fig = nozzle.scenario_ideal(scenario, noz, section) if math.isfinite(section) else None
    if fig is None:
        return None
    return {"throat_area_m2": fig.throat_area_m2, "section_area_m2": section, "area_ratio": fig.area_ratio,
            "choked_mass_flow_kg_s": fig.choked_mass_flow_kg_s, "ideal_exit_mach": fig.ideal_exit_mach,
            "ideal_thrust_n": fig.ideal_thrust_n, "regime": fig.regime,
            "throat_area_resolved_m2": _finite(resolved.throat_area_resolved_m2)}


def _finite(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def station_figures(sim: Simulation, scenario: scn.Scenario, noz: nozzle.DrawnNozzle | None) -> list[dict]:
    """Each station's reading, with the ideal 1D figures where they apply (each station read once)."""
    out = []
    resolved = None
    for st in scenario.stations:
        r = read_station(sim, Station(tuple(st.start_m), tuple(st.end_m), st.name))
        ideal = None
        if noz is not None and (st.role is not None or noz.run_m[0] <= _station_x_m(st) <= noz.run_m[1]):
            resolved = resolved or nozzle.resolved_areas(noz, scenario, sim.mask, sim.domain, sim.geometry.gas)
            ideal = station_ideal(scenario, noz, st, resolved)
        out.append({"name": st.name, "role": st.role, "mass_flow_kg_s": r.mass_flow_kg_s, "thrust_n": r.thrust_n,
                    "mean_mach": r.mean_mach, "mean_pressure_pa": r.mean_pressure_pa, "area_m2": r.area_m2,
                    "ideal": ideal})
    return out


def probe_figures(sim: Simulation, scenario: scn.Scenario) -> list[dict]:
    out = []
    for pr in scenario.probes:
        r = read_probe(sim, pr.x_m, pr.y_m)
        out.append({"name": pr.name, "x_m": pr.x_m, "y_m": pr.y_m, "kind": r.kind, "p_pa": r.p_pa,
                    "rho_kg_m3": r.rho_kg_m3, "t_k": r.t_k, "u_m_s": r.u_m_s, "v_m_s": r.v_m_s, "mach": r.mach})
    return out


def max_mach(sim: Simulation) -> float:
    """Largest Mach number over the gas cells that the scheme updates (views of the state, no copies)."""
    fluid = sim.mask == CellKind.FLUID
    if not fluid.any():
        return 0.0
    rho, u, v, p = (sim.W[c, GHOST:-GHOST, GHOST:-GHOST] for c in range(4))
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        m2 = (u * u + v * v) * rho / (sim.setup.gas.gamma * p)
    m2 = np.where(fluid & np.isfinite(m2), m2, -1.0)
    top = float(m2.max())
    return math.sqrt(top) if top >= 0.0 else float("nan")


def warnings(scenario: scn.Scenario, stations: list[dict], floors_since_last: int) -> list[str]:
    """Plain-language cautions about the flow on screen (from the station figures just computed)."""
    out = []
    if drawn_nozzle_reading(scenario):
        out.append("the drawn nozzle of this big sketch is being read: its ideal 1D figures follow in a moment")
    if floors_since_last > 0:
        out.append(f"density or pressure floors were applied {floors_since_last} times since the last status: "
                   "near-vacuum somewhere; results there are not physical (try a finer grid or softer conditions)")
    if scn.has_reservoir(scenario):
        res, amb = scenario.conditions.reservoir, scenario.conditions.ambient
        if res.p0_pa <= amb.p_pa:
            out.append("reservoir p0 is not above ambient pressure: no outflow is expected")
        else:
            for fig in stations:
                ideal = fig["ideal"]
                if fig["role"] == "exit" and ideal is not None and ideal["area_ratio"] > 1.0:
                    regime = ideal["regime"]
                    if regime in ("subsonic", "shock in nozzle"):
                        out.append(f"1D theory expects '{regime}' at p_amb/p0 = {amb.p_pa / res.p0_pa:.3g}: "
                                   "the ideal figures assume a fully supersonic exit and do not apply")
    return out


def status_figures(sim: Simulation, scenario: scn.Scenario, noz: nozzle.DrawnNozzle | None,
                   floors_since_last: int) -> dict[str, Any]:
    """The flow-dependent part of the status message."""
    stations = station_figures(sim, scenario, noz)
    try:  # judged where a batch run judges it: a nozzle by its interior (its free plume never settles)
        region = steady_region(sim, scenario)
    except ValueError:  # an exit station upstream of the domain: the whole domain then
        region = None
    residual, flow = live_residual(sim, region)
    return {"time_s": sim.time_s, "steps": sim.steps, "max_mach": max_mach(sim), "floors": sim.floors_total,
            "dt_s": sim.dt_s, "cells": sim.cells, "stations": stations, "probes": probe_figures(sim, scenario),
            "residual": residual, "flow": flow, "warnings": warnings(scenario, stations, floors_since_last),
            "drawn_nozzle_reading": drawn_nozzle_reading(scenario)}


def axis_profile(sim: Simulation, scenario: scn.Scenario) -> dict[str, Any]:
    """Values along the symmetry line, with the ideal 1D Mach number of the drawn nozzle (the `profile` reply)."""
    dom = sim.domain
    d = nozzle.drawing(scenario)
    j = 0 if d.axis_y_m <= dom.y_min_m else dom.cell_index(dom.x_min_m, d.axis_y_m)[0]
    y = dom.y_min_m + (j + 0.5) * dom.dx_m
    prof = station_profile(sim, Station((dom.x_min_m, y), (dom.x_max_m, y), "axis"))
    out: dict[str, Any] = {"type": "profile", "station": None, "axis": True}
    out.update({k: v.tolist() for k, v in prof.items()})
    noz = nozzle_geometry(sim.mask, dom, scenario)
    if noz is not None:
        ideal = nozzle.ideal_axis_mach(scenario, noz, prof["x_m"], sim.setup.gas.gamma)
        out["ideal_mach"] = [None if not math.isfinite(m) else float(m) for m in ideal]
    else:
        out["ideal_mach"] = None
    return out
