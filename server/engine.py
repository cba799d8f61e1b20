"""The engine figures and separation marks of the status message, from the same solver modules as the report.

A scenario with a reservoir, a throat station and an exit station is an engine: its thrust coefficient,
characteristic velocity and specific impulse beside their ideal values come from solver/nozzle_report.py
(`figures`, what summary.json and report.html hold), and the wall points below Summerfield's separation
criterion from solver/separation.py (`nozzle_wall_separation`, what the report marks). One source each, so the
page and the report agree.
"""
from __future__ import annotations

import math
from typing import Any

from shockslate.solver import nozzle, nozzle_report, separation
from shockslate.solver import scenario as scn
from shockslate.solver.kinds import CellKind
from shockslate.solver.simulation import Simulation

#: NozzleFigures fields the page shows (simulated beside ideal), SI units.
ENGINE_FIELDS = ("regime", "p_amb_pa", "throat_area_m2", "exit_area_m2", "area_ratio", "thrust_n",
                 "mass_flow_throat_kg_s", "choked_mass_flow_kg_s",
                 "thrust_coefficient", "ideal_thrust_coefficient", "ideal_thrust_coefficient_with_divergence",
                 "thrust_coefficient_ratio", "thrust_coefficient_ratio_with_divergence", "c_star_sim_m_s", "c_star_m_s", "c_star_ratio",
                 "specific_impulse_s", "ideal_specific_impulse_s", "specific_impulse_ratio")


def _finite(value: Any) -> Any:
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    return value


def engine_parts(sim: Simulation, scenario: scn.Scenario, noz: nozzle.DrawnNozzle | None):
    """(throat, exit) stations of an engine, or None when the scenario is not one (as batch.py decides)."""
    if noz is None:
        return None
    throat, exit_ = scn.station_by_role(scenario, "throat"), scn.station_by_role(scenario, "exit")
    if throat is None or exit_ is None or not (sim.mask == CellKind.WALL).any():
        return None
    return throat, exit_


def engine_status(sim: Simulation, scenario: scn.Scenario, noz: nozzle.DrawnNozzle | None) -> dict[str, Any]:
    """`engine` and `separation` of the status message (both None when the scenario is not an engine)."""
    parts = engine_parts(sim, scenario, noz)
    if parts is None:
        return {"engine": None, "separation": None}
    throat, exit_ = parts
    fig = nozzle_report.figures(sim, scenario, noz, throat, exit_).as_dict()
    engine = {k: _finite(fig[k]) for k in ENGINE_FIELDS}
    try:
        sep = separation.nozzle_wall_separation(sim, throat, exit_)
    except ValueError:  # exit not downstream of the throat: no divergent wall to mark
        return {"engine": engine, "separation": None}
    y0 = sim.domain.y_min_m
    marks = [[float(x), float(y0 + r)] for x, r, below in zip(sep.x_m, sep.wall_radius_m, sep.below) if below]
    return {"engine": engine,
            "separation": {"ratio": sep.ratio, "ambient_pa": sep.ambient_pa, "separates": sep.separates,
                           "first_x_m": sep.first_x_m, "marks_m": marks, "caution": separation.CAUTION
                           if sep.separates else "", "source": "Summerfield, Foster and Swan 1954: wall pressure "
                           f"below {sep.ratio:g} of ambient"}}
