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
    """Volume of each interior cell: dx^2 per metre depth (planar) or 2*pi*r*dx^2 (axisymmetric)."""
    dom = sim.domain
    dx = dom.dx_m
    if sim.setup.mode == "axisymmetric":
        r = dom.y_centres_m()
        return np.broadcast_to((2.0 * math.pi * r * dx * dx)[:, None], dom.shape)
    return np.full(dom.shape, dx * dx)


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


#: A station reads the mean over parallel copies shifted this many cells along its normal. Walls
#: are staircases of cells, and gas crosses their cell faces (in at one step, out at the next),
#: so a single line of cells reads a little high or low by where it cuts the steps.
BAND_OFFSETS_CELLS = (-2, -1, 0, 1, 2)


def _samples(sim: Simulation, station: Station, shift_cells: float = 0.0):
    """Sample points along the station at half-cell spacing, with their weights (m or m^2)."""
    dom = sim.domain
    (x0, y0), (x1, y1) = station.start_m, station.end_m
    length0 = math.dist((x0, y0), (x1, y1))
    sx = (y1 - y0) / length0 * shift_cells * dom.dx_m
    sy = -(x1 - x0) / length0 * shift_cells * dom.dx_m
    x0, x1, y0, y1 = x0 + sx, x1 + sx, y0 + sy, y1 + sy
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

    Mean Mach, pressure and area are the mean over a band of parallel lines of cells
    (BAND_OFFSETS_CELLS). For a station along x = const, mass flow and thrust come from the
    scheme's own face fluxes on the nearest cell-face line plus the gas that the wall hand-back
    carries across that line, so a steady flow reads the same at every such station (discrete
    conservation); other stations use the band of cell values.
    """
    readings = [_read_line(sim, station, k) for k in BAND_OFFSETS_CELLS]
    band = StationReading(*(float(np.mean([getattr(r, f) for r in readings]))
                            for f in StationReading.__dataclass_fields__))
    (x0, y0), (x1, y1) = station.start_m, station.end_m
    if x0 != x1 or not (sim.domain.x_min_m <= x0 <= sim.domain.x_max_m) or not sim.fluxes_current:
        return band
    mdot, thrust = _face_line_fluxes(sim, x0, min(y0, y1), max(y0, y1))
    sign = 1.0 if y1 > y0 else -1.0
    return StationReading(sign * mdot, sign * thrust, band.mean_mach, band.mean_pressure_pa, band.area_m2)


def _face_line_fluxes(sim: Simulation, x_m: float, ya_m: float, yb_m: float) -> tuple[float, float]:
    """(mass flow, thrust) in +x through the x-face line nearest x_m between heights ya and yb."""
    dom = sim.domain
    dx = dom.dx_m
    ny, nx = dom.shape
    f = int(np.clip(round((x_m - dom.x_min_m) / dx), 0, nx))
    j0 = int(np.clip(math.floor((ya_m - dom.y_min_m) / dx), 0, ny - 1))
    j1 = int(np.clip(math.ceil((yb_m - dom.y_min_m) / dx) - 1, j0, ny - 1))
    rows = np.arange(j0, j1 + 1)
    axi = sim.setup.mode == "axisymmetric"
    r_cell = (rows + 0.5) if axi else np.ones(rows.size)
    area = (2.0 * math.pi * r_cell * dx * dx) if axi else np.full(rows.size, dx)
    kind = sim.kind[GHOST:-GHOST, :][rows]
    gas_face = (kind[:, f + GHOST - 1] != CellKind.WALL) & (kind[:, f + GHOST] != CellKind.WALL)
    p_amb = sim.setup.conditions.ambient.p_pa
    # mass: every face (gas crossing a wall face is part of the hand-back counted below);
    # thrust: gas faces only, a wall face carries the wall's pressure, not gas through the station
    mdot = float(np.sum(sim.Fx[0, rows, f] * area))
    thrust = float(np.sum(np.where(gas_face, (sim.Fx[1, rows, f] - p_amb) * area, 0.0)))
    # gas handed back across the line: source wall cell on one side, receiving cell on the other
    src_j, src_i, start, rec_j, rec_i, w = sim.wall_return
    if src_j.size:
        fx0, gy0 = sim.Fx[0], sim.Gy[0]
        rc = (src_j + 0.5) if axi else np.ones(src_j.size)
        rf_lo = src_j.astype(float) if axi else np.ones(src_j.size)
        rf_hi = (src_j + 1.0) if axi else np.ones(src_j.size)
        m = ((fx0[src_j, src_i] - fx0[src_j, src_i + 1]) * rc + gy0[src_j, src_i] * rf_lo
             - gy0[src_j + 1, src_i] * rf_hi)
        per = np.diff(start)
        s_of = np.repeat(np.arange(src_j.size), per)
        left_src = src_i[s_of] < f
        left_rec = rec_i < f
        in_rows = ((src_j[s_of] >= j0) & (src_j[s_of] <= j1)) | ((rec_j >= j0) & (rec_j <= j1))
        crossing = (left_src != left_rec) & in_rows
        direction = np.where(left_src, 1.0, -1.0)
        unit = 2.0 * math.pi * dx * dx if axi else dx
        moved = m[s_of] * w * direction * unit * crossing
        mdot += float(np.sum(moved))
        thrust += float(np.sum(moved * sim.W[1, rec_j + GHOST, rec_i + GHOST]))
    return mdot, thrust


def _read_line(sim: Simulation, station: Station, shift_cells: float) -> StationReading:
    jj, ii, w, (nx_, ny_) = _samples(sim, station, shift_cells)
    s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
    rho, u, v, p = (sim.W[c][s][jj, ii] for c in range(4))
    # the station's gas cross-section is that of its own line: a shifted line samples the same
    # stretch of it, so a station at a nozzle's exit plane does not take in the gas beside the lip
    c_jj, c_ii, _, _ = _samples(sim, station, 0.0) if shift_cells else (jj, ii, None, None)
    gas_cells = (sim.mask[jj, ii] != CellKind.WALL) & (sim.mask[c_jj, c_ii] != CellKind.WALL)
    w = np.where(gas_cells, w, 0.0)
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
    """The state of the cell that holds the point."""
    j, i = sim.domain.cell_index(x_m, y_m)
    rho, u, v, p = (float(sim.W[c, j + GHOST, i + GHOST]) for c in range(4))
    kind = CellKind(int(sim.mask[j, i])).name.lower()
    gas = sim.setup.gas
    if kind == "wall":
        nan = float("nan")
        return ProbeReading(nan, nan, nan, nan, nan, nan, kind)
    return ProbeReading(p, rho, p / (rho * gas.r_j_kg_k), u, v, math.hypot(u, v) / math.sqrt(gas.gamma * p / rho), kind)
