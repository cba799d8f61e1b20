"""How a reservoir-fed nozzle performs against ideal one-dimensional theory.

Sources (numbers and equation labels from memory):
[SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3 (ideal rocket: choked mass flow, c*, C_F,
     Isp; the divergence correction lambda = (1 + cos alpha)/2 of a conical nozzle, after Malina 1940, and
     sin(alpha)/alpha for a two-dimensional wedge nozzle).
[A]  J. D. Anderson, Modern Compressible Flow, ch. 5 (area-Mach relation and the 1D nozzle regimes).

The throat and exit areas are those the solver sees (its cut-cell geometry, walls where they are drawn to
within the sampling): for each column the open height is the gas of the cells from the station's first cell
(the axis in axisymmetric mode) up to the first wall cell, each cell counting its gas fraction, and the area
is pi h^2 (axisymmetric, full revolution) or h x 1 m (planar, per metre of depth).
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from . import relations
from .diagnostics import Station, read_station
from .fields import mach as mach_field
from .kinds import CellKind
from .simulation import Simulation

#: Standard gravity for specific impulse in seconds (exact by definition, CGPM 1901).
G0_M_S2 = 9.80665


@dataclass(frozen=True)
class NozzleGeometry:
    """Areas and the wall angle read off the solver's geometry (cell kinds and gas fractions)."""

    throat_area_m2: float
    throat_x_m: float
    exit_area_m2: float
    exit_x_m: float
    area_ratio: float
    divergence_half_angle_deg: float
    #: open height (radius in axisymmetric mode) of every column from the feed to the exit, and its x
    column_x_m: tuple[float, ...]
    column_height_m: tuple[float, ...]


@dataclass(frozen=True)
class NozzleFigures:
    """Theory beside simulation for one moment of a run (SI units; ratios are simulated / ideal)."""

    regime: str
    p0_pa: float
    t0_k: float
    p_amb_pa: float
    throat_area_m2: float
    exit_area_m2: float
    area_ratio: float
    divergence_half_angle_deg: float
    divergence_factor: float
    choked_mass_flow_kg_s: float
    ideal_exit_mach: float
    ideal_exit_pressure_pa: float
    ideal_thrust_coefficient: float
    ideal_thrust_coefficient_with_divergence: float
    c_star_m_s: float
    ideal_specific_impulse_s: float
    mass_flow_throat_kg_s: float
    mass_flow_exit_kg_s: float
    thrust_n: float
    exit_mach: float
    exit_pressure_pa: float
    thrust_coefficient: float
    c_star_sim_m_s: float
    specific_impulse_s: float
    mass_flow_ratio: float
    thrust_coefficient_ratio: float
    thrust_coefficient_ratio_with_divergence: float
    c_star_ratio: float
    specific_impulse_ratio: float
    exit_mach_ratio: float

    def as_dict(self) -> dict:
        return asdict(self)


def _open_height_cells(mask: np.ndarray, gas: np.ndarray, i: int, j0: int) -> float:
    """Gas of column i, in cells, counted upwards from row j0 until the first wall cell (a cell a wall
    crosses counts its gas fraction, so the height is that of the drawn wall the solver sees)."""
    col = mask[j0:, i] == CellKind.WALL
    n = int(np.argmax(col)) if col.any() else int(col.size)
    return float(np.sum(gas[j0:j0 + n, i]))


def geometry(sim: Simulation, throat: Station, exit_: Station) -> NozzleGeometry:
    """Throat and exit areas of the solver's cut-cell geometry, and the divergent wall's half angle near the exit.

    The throat is the narrowest column between the feed (the last reservoir column) and the exit station;
    the half angle is the least-squares slope of the open height over the last 40 % of the divergent length.
    """
    dom = sim.domain
    mask = sim.mask
    dx = dom.dx_m
    axisym = sim.setup.mode == "axisymmetric"
    j0, _ = dom.cell_index(exit_.start_m[0], min(exit_.start_m[1], exit_.end_m[1]))
    _, i_exit = dom.cell_index(exit_.start_m[0], exit_.start_m[1])
    _, i_throat_guess = dom.cell_index(throat.start_m[0], throat.start_m[1])
    res_cols = np.nonzero((mask == CellKind.RESERVOIR).any(axis=0))[0]
    i_first = int(res_cols.max()) + 1 if res_cols.size and res_cols.max() < i_throat_guess else 0
    cols = np.arange(i_first, i_exit + 1)
    heights = np.array([_open_height_cells(mask, sim.geometry.gas, i, j0) for i in cols]) * dx

    def area(h: float) -> float:
        return math.pi * h * h if axisym else h  # per metre of depth in planar mode

    k_t = int(np.argmin(heights))
    h_t, h_e = float(heights[k_t]), float(heights[-1])
    x = dom.x_centres_m()[cols]
    div = slice(k_t, None)
    xd, hd = x[div], heights[div]
    tail = xd >= xd[0] + 0.6 * (xd[-1] - xd[0])
    if tail.sum() >= 3 and np.ptp(xd[tail]) > 0:
        slope = float(np.polyfit(xd[tail], hd[tail], 1)[0])
    else:
        slope = 0.0
    a_t = area(h_t)
    return NozzleGeometry(
        throat_area_m2=a_t, throat_x_m=float(x[k_t]), exit_area_m2=area(h_e), exit_x_m=float(x[-1]),
        area_ratio=area(h_e) / a_t if a_t > 0 else float("nan"),
        divergence_half_angle_deg=math.degrees(math.atan(max(slope, 0.0))),
        column_x_m=tuple(float(v) for v in x), column_height_m=tuple(float(v) for v in heights),
    )


def divergence_factor(half_angle_deg: float, mode: str) -> float:
    """Momentum-thrust loss factor of a diverging exit flow: (1 + cos a)/2 for a cone, sin(a)/a for a
    two-dimensional (planar) nozzle. [SB] ch. 3, after Malina 1940 (from memory)."""
    a = math.radians(half_angle_deg)
    if mode == "axisymmetric":
        return 0.5 * (1.0 + math.cos(a))
    return math.sin(a) / a if a > 0 else 1.0


def figures(sim: Simulation, throat: Station, exit_: Station, geo: NozzleGeometry | None = None) -> NozzleFigures:
    """Theory and simulation side by side for the current state of a run."""
    geo = geo or geometry(sim, throat, exit_)
    gas = sim.setup.gas
    g, r = gas.gamma, gas.r_j_kg_k
    cond = sim.setup.conditions
    p0, t0, pa = cond.reservoir.p0_pa, cond.reservoir.t0_k, cond.ambient.p_pa
    eps = max(geo.area_ratio, 1.0)
    me = float(relations.mach_from_area_ratio(eps, g, supersonic=True)) if eps > 1.0 else 1.0
    pe_p0 = float(relations.p_p0(me, g))
    pa_p0 = min(pa / p0, 1.0)
    regime = relations.flow_regime(pa_p0, eps, g) if eps > 1.0 else "convergent only"
    mdot_ideal = relations.choked_mass_flow_kg_s(p0, t0, geo.throat_area_m2, g, r)
    cf_ideal = relations.thrust_coefficient(pe_p0, pa_p0, eps, g)
    lam = divergence_factor(geo.divergence_half_angle_deg, sim.setup.mode)
    cf_div = lam * relations.momentum_thrust_coefficient(pe_p0, g) + (pe_p0 - pa_p0) * eps
    cstar = relations.c_star_m_s(t0, g, r)
    isp_ideal = cf_ideal * cstar / G0_M_S2

    at = read_station(sim, throat)
    ex = read_station(sim, exit_)
    thrust = ex.thrust_n
    cf = thrust / (p0 * geo.throat_area_m2)
    mdot = at.mass_flow_kg_s
    cstar_sim = p0 * geo.throat_area_m2 / mdot if mdot > 0 else float("nan")
    isp = thrust / (ex.mass_flow_kg_s * G0_M_S2) if ex.mass_flow_kg_s > 0 else float("nan")
    return NozzleFigures(
        regime=regime, p0_pa=p0, t0_k=t0, p_amb_pa=pa,
        throat_area_m2=geo.throat_area_m2, exit_area_m2=geo.exit_area_m2, area_ratio=geo.area_ratio,
        divergence_half_angle_deg=geo.divergence_half_angle_deg, divergence_factor=lam,
        choked_mass_flow_kg_s=mdot_ideal, ideal_exit_mach=me, ideal_exit_pressure_pa=pe_p0 * p0,
        ideal_thrust_coefficient=cf_ideal, ideal_thrust_coefficient_with_divergence=cf_div,
        c_star_m_s=cstar, ideal_specific_impulse_s=isp_ideal,
        mass_flow_throat_kg_s=mdot, mass_flow_exit_kg_s=ex.mass_flow_kg_s, thrust_n=thrust,
        exit_mach=ex.mean_mach, exit_pressure_pa=ex.mean_pressure_pa,
        thrust_coefficient=cf, c_star_sim_m_s=cstar_sim, specific_impulse_s=isp,
        mass_flow_ratio=mdot / mdot_ideal, thrust_coefficient_ratio=cf / cf_ideal,
        thrust_coefficient_ratio_with_divergence=cf / cf_div, c_star_ratio=cstar_sim / cstar,
        specific_impulse_ratio=isp / isp_ideal, exit_mach_ratio=ex.mean_mach / me,
    )


def axis_distribution(sim: Simulation, geo: NozzleGeometry) -> dict[str, np.ndarray]:
    """Mach and p/p0 along the bottom row (the axis) through the nozzle, beside the isentropic 1D values
    for the local area ratio (subsonic branch before the throat, supersonic after). [A] ch. 5."""
    gas = sim.setup.gas
    g = gas.gamma
    p0 = sim.setup.conditions.reservoir.p0_pa
    dom = sim.domain
    x = np.array(geo.column_x_m)
    h = np.array(geo.column_height_m)
    idx = np.array([dom.cell_index(xx, 0.0)[1] for xx in x])
    rho, u, v, p = (q[0, idx] for q in sim.primitive())
    m_sim = mach_field(gas, rho, u, v, p)
    ar = (h / h.min()) ** (2 if sim.setup.mode == "axisymmetric" else 1)
    after = x >= geo.throat_x_m
    m_1d = np.array([float(relations.mach_from_area_ratio(max(a, 1.0), g, supersonic=bool(s)))
                     for a, s in zip(ar, after)])
    return {"x_m": x, "mach_sim": m_sim, "p_p0_sim": p / p0, "mach_1d": m_1d,
            "p_p0_1d": np.asarray(relations.p_p0(m_1d, g), dtype=float), "area_ratio": ar}
