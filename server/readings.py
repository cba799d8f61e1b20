"""What the status message reports: station and probe figures beside ideal 1D nozzle theory, and warnings.

Ideal figures need a throat area A*: the station marked as the throat when there is one, else the
narrowest section of the gas column around the axis found on the cell mask (the geometric throat).
They are the isentropic, fully expanded 1D values (choked mass flow, exit Mach for the station's
area ratio, thrust from the ideal thrust coefficient), shown beside what the flow actually does.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from shockslate.solver import relations
from shockslate.solver import scenario as scn
from shockslate.solver.diagnostics import Station, read_probe, read_station, station_profile
from shockslate.solver.domain import Domain
from shockslate.solver.kinds import CellKind
from shockslate.solver.simulation import GHOST, Simulation
from shockslate.solver.steady import live_residual


@dataclass(frozen=True)
class Nozzle:
    """The gas column around the axis, column by column: its flow area and the throat."""

    axis_row: int
    areas_m2: np.ndarray        # (nx,), NaN where the column is not bounded by a sketched wall
    throat_index: int | None
    throat_area_m2: float | None
    run: tuple[int, int] | None  # first and last column of the bounded run holding the throat


def axis_row(scenario: scn.Scenario, domain: Domain) -> int:
    """The cell row of the symmetry line: y = 0 (axisymmetric, or planar when 0 is inside the domain),
    the mid-height for a sketch mirrored about its midline, else the bottom row."""
    if scenario.mode == "planar" and scenario.sketch.mirror == "midline":
        return domain.ny // 2
    top_m = domain.y_min_m + domain.ny * domain.dx_m
    if domain.y_min_m <= 0.0 < top_m:
        return domain.cell_index(domain.x_min_m, 0.0)[0]
    return 0


def nozzle_geometry(mask: np.ndarray, domain: Domain, scenario: scn.Scenario) -> Nozzle:
    """Flow area of each column between the axis and the first sketched wall (above and below)."""
    ny, nx = mask.shape
    ja = axis_row(scenario, domain)
    walls = mask == CellKind.WALL
    dx = domain.dx_m
    above = walls[ja:, :]
    has_top = above.any(axis=0)
    k_top = np.argmax(above, axis=0)  # offset of the first wall row at or above the axis row
    below = walls[: ja + 1, :][::-1]
    has_bottom = below.any(axis=0)
    k_bottom = np.argmax(below, axis=0)
    y_top = domain.y_min_m + (ja + k_top) * dx
    y_bottom = np.where(has_bottom, domain.y_min_m + (ja - k_bottom + 1) * dx, domain.y_min_m)
    bounded = has_top & ~walls[ja, :] & (k_top > 0)
    if ja > 0:  # a mid-height symmetry line needs a wall below as well
        bounded &= has_bottom & (k_bottom > 0)
    if scenario.mode == "axisymmetric":
        area = math.pi * (y_top ** 2 - np.maximum(y_bottom, 0.0) ** 2)
    else:
        area = y_top - y_bottom
    areas = np.where(bounded, area, np.nan)
    runs = _runs(bounded)
    if not runs:
        return Nozzle(ja, areas, None, None, None)
    reservoir_cols = (mask == CellKind.RESERVOIR).any(axis=0)
    fed = [r for r in runs if reservoir_cols[max(r[0] - 1, 0): r[1] + 2].any()]
    run = max(fed or runs, key=lambda r: r[1] - r[0])
    i0, i1 = run
    throat = i0 + int(np.nanargmin(areas[i0: i1 + 1]))
    return Nozzle(ja, areas, throat, float(areas[throat]), run)


def _runs(flags: np.ndarray) -> list[tuple[int, int]]:
    """Contiguous runs of True as (first, last) index pairs."""
    out = []
    start = None
    for i, f in enumerate(flags.tolist()):
        if f and start is None:
            start = i
        elif not f and start is not None:
            out.append((start, i - 1))
            start = None
    if start is not None:
        out.append((start, len(flags) - 1))
    return out


def ideal_axis_mach(nozzle: Nozzle, gamma: float) -> np.ndarray:
    """Isentropic 1D Mach number of each column of the throat's run: subsonic upstream, supersonic after."""
    out = np.full(nozzle.areas_m2.shape, np.nan)
    if nozzle.run is None or nozzle.throat_area_m2 is None or nozzle.throat_area_m2 <= 0.0:
        return out
    i0, i1 = nozzle.run
    t = nozzle.throat_index
    ratios = np.maximum(nozzle.areas_m2 / nozzle.throat_area_m2, 1.0)
    if t > i0:
        out[i0:t] = relations.mach_from_area_ratio(ratios[i0:t], gamma, supersonic=False)
    out[t: i1 + 1] = relations.mach_from_area_ratio(ratios[t: i1 + 1], gamma, supersonic=True)
    return out


def ideal_station_figures(area_m2: float, throat_area_m2: float, scenario: scn.Scenario) -> dict | None:
    """Ideal 1D figures for a section of area_m2 downstream of a throat of throat_area_m2 (None when undefined)."""
    if not (area_m2 > 0.0 and throat_area_m2 > 0.0):
        return None
    ratio = area_m2 / throat_area_m2
    if ratio < 1.0 - 1e-9:
        return None
    ratio = max(ratio, 1.0)
    gas = scn.to_gas(scenario)
    res = scenario.conditions.reservoir
    p_amb = scenario.conditions.ambient.p_pa
    g = gas.gamma
    mdot = relations.choked_mass_flow_kg_s(res.p0_pa, res.t0_k, throat_area_m2, g, gas.r_j_kg_k)
    exit_mach = float(relations.mach_from_area_ratio(ratio, g, supersonic=True))
    pe_p0 = float(relations.p_p0(exit_mach, g))
    cf = relations.thrust_coefficient(pe_p0, p_amb / res.p0_pa, ratio, g)
    return {"throat_area_m2": throat_area_m2, "area_ratio": ratio, "choked_mass_flow_kg_s": mdot,
            "ideal_exit_mach": exit_mach, "ideal_thrust_n": cf * res.p0_pa * throat_area_m2}


def throat_area_m2(sim: Simulation, scenario: scn.Scenario, nozzle: Nozzle | None,
                   readings_by_name: dict[str, Any] | None = None) -> float | None:
    """A*: the throat station's gas area, else the geometric throat; None without a reservoir."""
    if not scn.has_reservoir(scenario):
        return None
    station = scn.station_by_role(scenario, "throat")
    if station is not None:
        reading = (readings_by_name or {}).get(station.name) or read_station(sim, station)
        return reading.area_m2 if reading.area_m2 > 0.0 else None
    return nozzle.throat_area_m2 if nozzle is not None else None


def station_figures(sim: Simulation, scenario: scn.Scenario, nozzle: Nozzle | None) -> list[dict]:
    """Each station's reading, with the ideal 1D figures where they apply (each station read once)."""
    read = {st.name: read_station(sim, Station(tuple(st.start_m), tuple(st.end_m), st.name))
            for st in scenario.stations}
    a_star = throat_area_m2(sim, scenario, nozzle, read)
    out = []
    for st in scenario.stations:
        r = read[st.name]
        in_nozzle = st.role is not None or _crosses_nozzle(st, sim.domain, nozzle)
        ideal = ideal_station_figures(r.area_m2, a_star, scenario) if (a_star and in_nozzle) else None
        out.append({"name": st.name, "role": st.role, "mass_flow_kg_s": r.mass_flow_kg_s, "thrust_n": r.thrust_n,
                    "mean_mach": r.mean_mach, "mean_pressure_pa": r.mean_pressure_pa, "area_m2": r.area_m2,
                    "ideal": ideal})
    return out


def _crosses_nozzle(st: scn.StationModel, domain: Domain, nozzle: Nozzle | None) -> bool:
    """Whether a station's midpoint lies over the bounded run of columns holding the throat."""
    if nozzle is None or nozzle.run is None:
        return False
    x_mid = 0.5 * (st.start_m[0] + st.end_m[0])
    i = domain.cell_index(x_mid, domain.y_min_m)[1]
    return nozzle.run[0] <= i <= nozzle.run[1]


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
                    regime = relations.flow_regime(min(amb.p_pa / res.p0_pa, 1.0), ideal["area_ratio"],
                                                   scn.to_gas(scenario).gamma)
                    if regime in ("subsonic", "shock in nozzle"):
                        out.append(f"1D theory expects '{regime}' at p_amb/p0 = {amb.p_pa / res.p0_pa:.3g}: "
                                   "the ideal figures assume a fully supersonic exit and do not apply")
    return out


def status_figures(sim: Simulation, scenario: scn.Scenario, nozzle: Nozzle | None,
                   floors_since_last: int) -> dict[str, Any]:
    """The flow-dependent part of the status message."""
    stations = station_figures(sim, scenario, nozzle)
    residual, flow = live_residual(sim)
    return {"time_s": sim.time_s, "steps": sim.steps, "max_mach": max_mach(sim), "floors": sim.floors_total,
            "dt_s": sim.dt_s, "cells": sim.cells, "stations": stations, "probes": probe_figures(sim, scenario),
            "residual": residual, "flow": flow, "warnings": warnings(scenario, stations, floors_since_last)}


def axis_profile(sim: Simulation, scenario: scn.Scenario) -> dict[str, Any]:
    """Values along the symmetry line, with the ideal 1D Mach number of the geometric nozzle (the `profile` reply)."""
    dom = sim.domain
    nozzle = nozzle_geometry(sim.mask, dom, scenario)
    y = dom.y_min_m + (nozzle.axis_row + 0.5) * dom.dx_m
    prof = station_profile(sim, Station((dom.x_min_m, y), (dom.x_max_m, y), "axis"))
    out: dict[str, Any] = {"type": "profile", "station": None, "axis": True}
    out.update({k: v.tolist() for k, v in prof.items()})
    if scn.has_reservoir(scenario) and nozzle.run is not None:
        ideal = ideal_axis_mach(nozzle, sim.setup.gas.gamma)
        cols = np.clip(np.floor((prof["x_m"] - dom.x_min_m) / dom.dx_m).astype(int), 0, dom.nx - 1)
        out["ideal_mach"] = ideal[cols].tolist()
    else:
        out["ideal_mach"] = None
    return out
