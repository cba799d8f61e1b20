"""What an engineer reads off a flow: totals, station figures and probe values.

Planar mode is per metre of depth (mass flow in kg/s per m, thrust in N per m); axisymmetric
mode integrates over the full revolution (2*pi*r weighting).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .fields import mach, temperature_k
from .kinds import CellKind
from .simulation import GHOST, Simulation


@dataclass(frozen=True)
class Totals:
    mass_kg: float
    energy_j: float


def cell_volumes_m3(sim: Simulation) -> np.ndarray:
    """Gas volume of each interior cell (Simulation.cell_volumes_m3): per metre depth (planar) or
    over the full revolution (axisymmetric), less what walls drawn inside the cell take."""
    return sim.cell_volumes_m3()


def totals(sim: Simulation) -> Totals:
    """Mass and total energy of the fluid cells."""
    s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
    fluid = sim.mask == CellKind.FLUID
    vol = cell_volumes_m3(sim)
    mass = float(np.sum(sim.U[0][s] * vol, where=fluid))
    energy = float(np.sum(sim.U[3][s] * vol, where=fluid))
    return Totals(mass, energy)


@dataclass(frozen=True)
class Station:
    """A measuring segment from start_m to end_m (x, y in metres).

    Its normal points to the right of the direction start -> end, so a station drawn upwards
    measures flow in +x.
    """

    start_m: tuple[float, float]
    end_m: tuple[float, float]
    name: str = "station"

    def __post_init__(self) -> None:
        for label, pt in (("start_m", self.start_m), ("end_m", self.end_m)):
            if len(pt) != 2 or not all(math.isfinite(float(c)) for c in pt):
                raise ValueError(f"station.{label} = {pt!r} must be two finite numbers (x, y) in metres")
        if math.dist(self.start_m, self.end_m) <= 0.0:
            raise ValueError("station start_m and end_m must differ")


@dataclass(frozen=True)
class StationReading:
    mass_flow_kg_s: float
    thrust_n: float
    mean_mach: float
    mean_pressure_pa: float
    area_m2: float


def _samples(sim: Simulation, station: Station):
    """Sample points along the station at half-cell spacing, with their weights (m or m^2)."""
    dom = sim.domain
    (x0, y0), (x1, y1) = station.start_m, station.end_m
    length = math.dist((x0, y0), (x1, y1))
    n = max(2, int(math.ceil(2.0 * length / dom.dx_m)))
    t = (np.arange(n) + 0.5) / n
    xs = x0 + (x1 - x0) * t
    ys = y0 + (y1 - y0) * t
    inside = (xs >= dom.x_min_m) & (xs < dom.x_max_m) & (ys >= dom.y_min_m) & (ys < dom.y_min_m + dom.ny * dom.dx_m)
    dl = length / n
    if sim.setup.mode == "axisymmetric":
        w = 2.0 * math.pi * np.abs(ys) * dl
    else:
        w = np.full(n, dl)
    ii = np.clip(np.floor((xs - dom.x_min_m) / dom.dx_m).astype(int), 0, dom.nx - 1)
    jj = np.clip(np.floor((ys - dom.y_min_m) / dom.dx_m).astype(int), 0, dom.ny - 1)
    tx, ty = (x1 - x0) / length, (y1 - y0) / length
    return jj, ii, w * inside, (ty, -tx)


def read_station(sim: Simulation, station: Station) -> StationReading:
    """Mass flow, axial thrust ((rho u_x u_n + (p - p_amb) n_x) dA), mean Mach and pressure.

    A station along x = const reads the line of cell faces nearest it: its area is the faces' open
    area (walls drawn inside cells take their share), mean Mach and pressure are open-area means of
    the gas on both sides of each face, and mass flow and thrust are the scheme's own face fluxes
    through the open areas (`Simulation.x_line_flux`) once a step has been taken, so a steady flow
    reads the same at every such station (discrete conservation). Other stations sample the cells
    along the segment, each weighted by its gas fraction.
    """
    (x0, y0), (x1, y1) = station.start_m, station.end_m
    dom = sim.domain
    if x0 == x1 and dom.x_min_m <= x0 <= dom.x_max_m:
        return _read_face_line(sim, x0, y0, y1)
    return _read_line(sim, station)


def _read_face_line(sim: Simulation, x_m: float, y0_m: float, y1_m: float) -> StationReading:
    sign = 1.0 if y1_m > y0_m else -1.0
    dom = sim.domain
    nx = dom.nx
    f = int(np.clip(round((x_m - dom.x_min_m) / dom.dx_m), 0, nx))
    yc = dom.y_centres_m()
    rows = np.nonzero((yc >= min(y0_m, y1_m)) & (yc <= max(y0_m, y1_m)))[0]
    if rows.size == 0:
        rows = np.array([dom.cell_index(x_m, 0.5 * (y0_m + y1_m))[0]])
    area = sim.x_face_areas_m2()[rows, f]
    total = float(area.sum())
    if total <= 0.0:
        return StationReading(0.0, 0.0, float("nan"), float("nan"), 0.0)
    # the gas beside each face: the mean of the cells on both sides that hold gas
    gas = sim.setup.gas
    cols = [c for c in (f - 1, f) if 0 <= c < nx]
    vals = np.zeros((5, rows.size))
    count = np.zeros(rows.size)
    for c in cols:
        rho, u, v, p = (sim.W[k, rows + GHOST, c + GHOST] for k in range(4))
        here = sim.mask[rows, c] != CellKind.WALL
        m = mach(gas, rho, u, v, p)
        for k, q in enumerate((m, p, rho * u, rho * u * u + p, rho)):
            vals[k] += np.where(here, q, 0.0)
        count += here
    vals /= np.maximum(count, 1)[None, :]
    p_amb = sim.setup.conditions.ambient.p_pa
    mean_mach = float(np.sum(vals[0] * area) / total)
    mean_p = float(np.sum(vals[1] * area) / total)
    if sim.fluxes_current:
        line = sim.x_line_flux(x_m, y0_m, y1_m)
        mdot, thrust = line.mass_flow_kg_s, line.momentum_flux_n - p_amb * line.area_m2
    else:
        mdot = float(np.sum(vals[2] * area))
        thrust = float(np.sum((vals[3] - p_amb) * area))
    return StationReading(sign * mdot, sign * thrust, mean_mach, mean_p, total)


def _read_line(sim: Simulation, station: Station) -> StationReading:
    jj, ii, w, (nx_, ny_) = _samples(sim, station)
    s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
    rho, u, v, p = (sim.W[c][s][jj, ii] for c in range(4))
    w = w * sim.geometry.gas[jj, ii]
    area = float(w.sum())
    if area <= 0.0:
        return StationReading(0.0, 0.0, float("nan"), float("nan"), 0.0)
    un = u * nx_ + v * ny_
    p_amb = sim.setup.conditions.ambient.p_pa
    mdot = float(np.sum(rho * un * w))
    thrust = float(np.sum((rho * u * un + (p - p_amb) * nx_) * w))
    m = mach(sim.setup.gas, rho, u, v, p)
    return StationReading(mdot, thrust, float(np.sum(m * w) / area), float(np.sum(p * w) / area), area)


def station_profile(sim: Simulation, station: Station) -> dict[str, np.ndarray]:
    """Values along a station: distance from start (m), x, y, p, rho, T, u, v, Mach."""
    dom = sim.domain
    (x0, y0), (x1, y1) = station.start_m, station.end_m
    length = math.dist((x0, y0), (x1, y1))
    n = max(2, int(math.ceil(length / dom.dx_m)))
    t = (np.arange(n) + 0.5) / n
    xs = x0 + (x1 - x0) * t
    ys = y0 + (y1 - y0) * t
    ii = np.clip(np.floor((xs - dom.x_min_m) / dom.dx_m).astype(int), 0, dom.nx - 1)
    jj = np.clip(np.floor((ys - dom.y_min_m) / dom.dx_m).astype(int), 0, dom.ny - 1)
    s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
    rho, u, v, p = (sim.W[c][s][jj, ii] for c in range(4))
    wall = sim.mask[jj, ii] == CellKind.WALL
    gas = sim.setup.gas

    def masked(q):
        return np.where(wall, np.nan, q)

    return {
        "s_m": t * length, "x_m": xs, "y_m": ys,
        "p_pa": masked(p), "rho_kg_m3": masked(rho), "t_k": masked(temperature_k(gas, rho, p)),
        "u_m_s": masked(u), "v_m_s": masked(v), "mach": masked(mach(gas, rho, u, v, p)),
    }


@dataclass(frozen=True)
class ProbeReading:
    p_pa: float
    rho_kg_m3: float
    t_k: float
    u_m_s: float
    v_m_s: float
    mach: float
    kind: str


def read_probe(sim: Simulation, x_m: float, y_m: float) -> ProbeReading:
    """The state of the cell that holds the point; its kind is the one drawn at the cell's centre (a cell that
    a wall crosses holds gas but reads "wall" when its centre lies in the wall)."""
    j, i = sim.domain.cell_index(x_m, y_m)
    rho, u, v, p = (float(sim.W[c, j + GHOST, i + GHOST]) for c in range(4))
    kind = CellKind(int(sim.geometry.drawn[j, i])).name.lower()
    gas = sim.setup.gas
    if kind == "wall":
        nan = float("nan")
        return ProbeReading(nan, nan, nan, nan, nan, nan, kind)
    return ProbeReading(p, rho, p / (rho * gas.r_j_kg_k), u, v, math.hypot(u, v) / math.sqrt(gas.gamma * p / rho), kind)
