"""How a reservoir-fed nozzle performs: the simulated figures at its throat and exit stations beside the ideal
1D figures of solver.nozzle (the one source of those, computed from the drawn geometry).

Sources: [SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3 (C_F = F / (p0 A*),
c* = p0 A* / mdot, Isp = F / (mdot g0)); [A] J. D. Anderson, Modern Compressible Flow, ch. 5 (area-Mach
relation along the axis).
"""
from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from . import nozzle, relations
from .diagnostics import Station, read_station
from .fields import mach as mach_field
from .simulation import Simulation

G0_M_S2 = nozzle.G0_M_S2


@dataclass(frozen=True)
class NozzleFigures:
    """Theory beside simulation for one moment of a run (SI units; ratios are simulated / ideal).

    Areas without a suffix are the drawn ones (solver.nozzle); `_resolved` ones are what the cell mask gives at
    the same places, reported beside them."""

    regime: str
    p0_pa: float
    t0_k: float
    p_amb_pa: float
    throat_area_m2: float
    throat_x_m: float
    exit_area_m2: float
    exit_x_m: float
    area_ratio: float
    throat_area_resolved_m2: float
    exit_area_resolved_m2: float
    area_ratio_resolved: float
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


def figures(sim: Simulation, scenario, noz: nozzle.DrawnNozzle, throat: Station, exit_: Station) -> NozzleFigures:
    """Theory (solver.nozzle, drawn A*) and simulation (the throat and exit stations) for the current state."""
    ideal = nozzle.scenario_ideal(scenario, noz)
    resolved = nozzle.resolved_areas(noz, scenario, sim.mask, sim.domain, sim.geometry.gas)
    lam = nozzle.divergence_factor(noz.divergence_half_angle_deg, scenario.mode)
    cond = scenario.conditions
    p0, t0, pa = cond.reservoir.p0_pa, cond.reservoir.t0_k, cond.ambient.p_pa
    a_t = noz.throat_area_m2
    at = read_station(sim, throat)
    ex = read_station(sim, exit_)
    thrust = ex.thrust_n
    cf = thrust / (p0 * a_t)
    mdot = at.mass_flow_kg_s
    cstar_sim = p0 * a_t / mdot if mdot > 0 else float("nan")
    isp = thrust / (ex.mass_flow_kg_s * G0_M_S2) if ex.mass_flow_kg_s > 0 else float("nan")
    return NozzleFigures(
        regime=ideal.regime, p0_pa=p0, t0_k=t0, p_amb_pa=pa,
        throat_area_m2=a_t, throat_x_m=noz.throat_x_m, exit_area_m2=noz.exit_area_m2, exit_x_m=noz.exit_x_m,
        area_ratio=ideal.area_ratio, throat_area_resolved_m2=resolved.throat_area_resolved_m2,
        exit_area_resolved_m2=resolved.exit_area_resolved_m2, area_ratio_resolved=resolved.area_ratio_resolved,
        divergence_half_angle_deg=noz.divergence_half_angle_deg, divergence_factor=lam,
        choked_mass_flow_kg_s=ideal.choked_mass_flow_kg_s, ideal_exit_mach=ideal.ideal_exit_mach,
        ideal_exit_pressure_pa=ideal.ideal_exit_pressure_pa, ideal_thrust_coefficient=ideal.ideal_thrust_coefficient,
        ideal_thrust_coefficient_with_divergence=ideal.ideal_thrust_coefficient_with_divergence,
        c_star_m_s=ideal.c_star_m_s, ideal_specific_impulse_s=ideal.ideal_specific_impulse_s,
        mass_flow_throat_kg_s=mdot, mass_flow_exit_kg_s=ex.mass_flow_kg_s, thrust_n=thrust,
        exit_mach=ex.mean_mach, exit_pressure_pa=ex.mean_pressure_pa,
        thrust_coefficient=cf, c_star_sim_m_s=cstar_sim, specific_impulse_s=isp,
        mass_flow_ratio=mdot / ideal.choked_mass_flow_kg_s, thrust_coefficient_ratio=cf / ideal.ideal_thrust_coefficient,
        thrust_coefficient_ratio_with_divergence=cf / ideal.ideal_thrust_coefficient_with_divergence,
        c_star_ratio=cstar_sim / ideal.c_star_m_s, specific_impulse_ratio=isp / ideal.ideal_specific_impulse_s,
        exit_mach_ratio=ex.mean_mach / ideal.ideal_exit_mach,
    )


def axis_distribution(sim: Simulation, scenario, noz: nozzle.DrawnNozzle) -> dict[str, np.ndarray]:
    """Mach and p/p0 along the bottom row (the axis) through the nozzle, beside the isentropic 1D values for the
    drawn area ratio at each cell column (subsonic branch before the throat, supersonic after). [A] ch. 5."""
    gas = sim.setup.gas
    p0 = scenario.conditions.reservoir.p0_pa
    dom = sim.domain
    xc = dom.x_centres_m()
    cols = np.nonzero((xc >= noz.run_m[0]) & (xc <= noz.exit_x_m))[0]
    x = xc[cols]
    rho, u, v, p = (q[0, cols] for q in sim.primitive())
    m_sim = mach_field(gas, rho, u, v, p)
    m_1d = nozzle.ideal_axis_mach(scenario, noz, x, gas.gamma)
    area = np.array([nozzle.drawn_area_m2(scenario, float(xx)) for xx in x])
    return {"x_m": x, "mach_sim": m_sim, "p_p0_sim": p / p0, "mach_1d": m_1d,
            "p_p0_1d": np.asarray(relations.p_p0(np.nan_to_num(m_1d, nan=0.0), gas.gamma), dtype=float)
            * np.where(np.isfinite(m_1d), 1.0, np.nan),
            "area_ratio": area / noz.throat_area_m2}
