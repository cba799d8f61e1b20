"""Separation marks along an over-expanded nozzle's wall (Summerfield's criterion).

Sources:
[SFS] M. Summerfield, C. R. Foster, W. C. Swan, Jet Propulsion 24 (1954): separation where the wall pressure
      falls below about 0.4 of ambient (from memory).
[A]   J. D. Anderson, Modern Compressible Flow, ch. 5: isentropic area-Mach relation and p/p0 (through
      solver.relations, checked against NACA Report 1135 tables in tests/test_relations.py).
"""
from __future__ import annotations

import numpy as np
import pytest

from shockslate.solver import nozzle_design as nd
from shockslate.solver import relations, separation
from shockslate.solver.scenario import build_simulation, parse_scenario, station_by_role

RT = 0.01
P0 = 6.0e5
P_SEA = 101325.0


@pytest.fixture(scope="module")
def over_expanded():
    """An axisymmetric 15 degree cone of area ratio 4 at 6 bar into sea-level air, run to a steady flow.

    Hot products (gamma 1.2): ideal exit pressure about 28 kPa, below 0.4 x 101 kPa, so Summerfield's
    criterion puts separation inside the nozzle; a normal shock would need an ambient of about 7 x the exit
    pressure [A], so the inviscid flow inside stays supersonic and attached up to the lip.
    """
    spec = nd.NozzleSpec(RT, 4.0, 0.02, 4.0)
    run = nd.RunChoices(p0_pa=P0, t0_k=3000.0, ambient_p_pa=P_SEA, cells_per_throat_radius=8, plume_length_m=0.02)
    s = parse_scenario(nd.nozzle_scenario(spec, run))
    sim = build_simulation(s)
    sim.run_until(s.end_time_s)
    return spec, s, sim


def test_separation_point_agrees_with_the_isentropic_wall_pressure(over_expanded):
    spec, s, sim = over_expanded
    sep = separation.nozzle_wall_separation(sim, station_by_role(s, "throat"), station_by_role(s, "exit"))
    assert sep.separates and sep.ratio == 0.4  # [SFS]
    # once below the criterion the wall stays below it to the exit (the pressure falls monotonically downstream)
    k = int(np.argmax(sep.below))
    assert sep.below[k:].all() and not sep.below[:k].any()
    # [A] + [SFS]: where the 1D wall pressure p0 p/p0(M(A/A*)) falls to 0.4 x ambient on the drawn contour
    c = nd.build_contour(spec)
    xs = np.linspace(c.throat_x_m, c.exit_x_m, 2000)
    g = s.gas.gamma
    p_1d = np.array([P0 * float(relations.p_p0(relations.mach_from_area_ratio(max((c.radius_at(x) / RT) ** 2, 1.0),
                                                                                g, supersonic=True), g))
                     for x in xs])
    x_1d = xs[np.argmax(p_1d < 0.4 * P_SEA)]
    dx = sim.domain.dx_m
    # staircase walls make the wall-cell pressure jump at each step; first honest run: 2.4 cells downstream
    assert abs(sep.first_x_m - x_1d) <= 4.0 * dx, (sep.first_x_m, x_1d)
    d = sep.as_dict()
    assert d["separates"] and d["first_x_m"] == sep.first_x_m and len(d["x_m"]) == len(d["below"])
    assert "not what a real" in d["caution"]


def test_no_marks_when_the_ambient_is_low(over_expanded):
    # the supersonic flow inside does not feel the ambient; at 5 kPa (0.4 x 5 kPa far below the exit pressure)
    # no wall pressure is below the criterion [SFS]
    spec, s, sim = over_expanded
    sep = separation.nozzle_wall_separation(sim, station_by_role(s, "throat"), station_by_role(s, "exit"))
    low = separation.wall_separation(sim, float(sep.x_m[0]), float(sep.x_m[-1]), ambient_pa=5000.0)
    assert not low.separates and not low.below.any() and low.first_x_m is None
    # the wall pressures are the same readings; only the criterion moved
    np.testing.assert_array_equal(low.wall_pressure_pa, sep.wall_pressure_pa)


def test_bad_criterion_is_refused(over_expanded):
    _, _, sim = over_expanded
    with pytest.raises(ValueError, match=r"separation ratio = 1.5 is not allowed: must be 0.1 to 1"):
        separation.wall_separation(sim, 0.04, 0.07, ratio=1.5)
    with pytest.raises(ValueError, match=r"x_to_m = 0.01 is not allowed: must be greater than x_from_m"):
        separation.wall_separation(sim, 0.04, 0.01)
