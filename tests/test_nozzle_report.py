"""Nozzle report: the drawn areas beside the resolved (mask) ones, the divergence factor and the theory block.

Sources:
[SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3: conical divergence factor
     lambda = (1 + cos a)/2 (after Malina 1940), sin(a)/a for a planar nozzle (from memory).
[N]  NACA Report 1135 (1953): choked mass-flow parameter mdot sqrt(R T0) / (p0 A*) = 0.6847 for gamma 1.4
     (isentropic table at M = 1; from memory), area ratio A/A* = 1.6875 at M = 2 (isentropic table).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from shockslate.solver import nozzle
from shockslate.solver import nozzle_report as nr
from shockslate.solver.scenario import build_simulation, parse_scenario, station_by_role

DX = 0.001


def nozzle_doc(mode: str, half_angle_deg: float = 15.0, nx: int = 100) -> dict:
    """Chamber, a straight throat 8 cells high (radius), a cone opening at half_angle_deg to the exit."""
    x_t0, x_t1 = 0.030, 0.034           # throat column span
    r_t = 0.008
    length = 0.040
    r_e = r_t + length * math.tan(math.radians(half_angle_deg))
    x_e = x_t1 + length
    wall = [[0.0, 0.020], [0.020, 0.020], [x_t0, r_t], [x_t1, r_t], [x_e, r_e], [x_e, 0.05], [-0.01, 0.05],
            [-0.01, 0.020]]
    return {
        "name": "cone", "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965}, "mode": mode,
        "domain": {"x_min_m": 0.0, "x_max_m": 0.1, "y_min_m": 0.0, "y_max_m": 0.04, "nx": nx},
        "edges": {"left": "wall", "right": "open", "bottom": "axis" if mode == "axisymmetric" else "wall",
                  "top": "ambient"},
        "sketch": {"shapes": [{"kind": "polygon", "points_m": wall, "paints": "wall"},
                              {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [0.003, 0.02],
                               "paints": "reservoir"}]},
        "conditions": {"reservoir": {"p0_pa": 1.0e6, "t0_k": 300.0}},
        "stations": [{"name": "t", "start_m": [0.032, 0.0], "end_m": [0.032, 0.0075], "role": "throat"},
                     {"name": "e", "start_m": [x_e - 0.0008, 0.0], "end_m": [x_e - 0.0008, r_e - 0.0005],
                      "role": "exit"}],
        "end_time_s": 1e-3,
    }


def setup(mode: str, **kw):
    s = parse_scenario(nozzle_doc(mode, **kw))
    sim = build_simulation(s)
    return s, sim, station_by_role(s, "throat"), station_by_role(s, "exit")


def test_throat_area_is_the_drawn_one_and_the_resolved_one_is_beside_it():
    s, sim, th, ex = setup("axisymmetric")
    geo = nozzle.drawn_nozzle(s)
    # a straight drawn throat of radius 8 mm: pi (8 mm)^2, the full revolution (exact geometry)
    assert geo.throat_area_m2 == pytest.approx(math.pi * 0.008 ** 2, rel=1e-12)
    assert 0.030 <= geo.throat_x_m <= 0.034
    # the exit station's line: the drawn cone's radius there (exact geometry)
    r_e = 0.008 + (geo.exit_x_m - 0.034) * math.tan(math.radians(15.0))
    assert geo.exit_area_m2 == pytest.approx(math.pi * r_e ** 2, rel=1e-12)
    assert geo.area_ratio == pytest.approx((r_e / 0.008) ** 2, rel=1e-12)
    # 8 open cells of 1 mm at the throat: the cells resolve the same throat exactly here
    res = nozzle.resolved_areas(geo, s, sim.mask, sim.domain)
    assert res.throat_area_resolved_m2 == pytest.approx(math.pi * 0.008 ** 2, rel=1e-12)
    assert abs(math.sqrt(res.exit_area_resolved_m2 / math.pi) - r_e) <= DX
    s, sim, th, ex = setup("planar")
    geo = nozzle.drawn_nozzle(s)
    assert geo.throat_area_m2 == pytest.approx(0.008, rel=1e-12)  # per metre of depth
    r_e = 0.008 + (geo.exit_x_m - 0.034) * math.tan(math.radians(15.0))
    assert geo.area_ratio == pytest.approx(r_e / 0.008, rel=1e-12)


@pytest.mark.parametrize("angle", [10.0, 15.0, 20.0])
def test_half_angle_is_read_off_the_drawn_wall(angle):
    s, sim, th, ex = setup("axisymmetric", half_angle_deg=angle, nx=200)
    geo = nozzle.drawn_nozzle(s)
    assert geo.divergence_half_angle_deg == pytest.approx(angle, abs=1e-9)  # a straight drawn cone


def test_divergence_factor_values():
    # [SB] ch. 3: lambda(15 deg) = 0.983 for a cone (printed to 3 figures in the book's table, from memory)
    assert nozzle.divergence_factor(15.0, "axisymmetric") == pytest.approx(0.983, abs=5e-4)
    assert nozzle.divergence_factor(0.0, "axisymmetric") == 1.0
    assert nozzle.divergence_factor(15.0, "planar") == pytest.approx(math.sin(math.radians(15)) / math.radians(15))
    assert nozzle.divergence_factor(15.0, "planar") > nozzle.divergence_factor(15.0, "axisymmetric")


def test_theory_block_against_published_numbers():
    s, sim, th, ex = setup("axisymmetric")
    geo = nozzle.drawn_nozzle(s)
    f = nr.figures(sim, s, geo, th, ex)
    r = 8314.462618 / 28.965
    # [N]: mdot sqrt(R T0) / (p0 A*) = 0.6847 for gamma 1.4
    assert f.choked_mass_flow_kg_s * math.sqrt(r * 300.0) / (1.0e6 * geo.throat_area_m2) == pytest.approx(0.6847, abs=1e-4)
    assert f.c_star_m_s == pytest.approx(math.sqrt(r * 300.0) / 0.6847, rel=2e-4)
    # gas at rest (no run yet): nothing flows, so the simulated ratios are zero
    assert f.mass_flow_throat_kg_s == pytest.approx(0.0, abs=1e-12)
    assert f.thrust_coefficient == pytest.approx(0.0, abs=1e-9)
    assert f.regime in ("over-expanded", "under-expanded", "shock in nozzle", "ideal", "subsonic")
    assert f.ideal_thrust_coefficient_with_divergence < f.ideal_thrust_coefficient


def test_axis_distribution_follows_area_mach_on_each_side_of_throat():
    s, sim, th, ex = setup("axisymmetric")
    geo = nozzle.drawn_nozzle(s)
    ax = nr.axis_distribution(sim, s, geo)
    x = ax["x_m"]
    at_throat = ax["area_ratio"] == 1.0
    assert at_throat.any() and np.allclose(ax["mach_1d"][at_throat], 1.0)
    assert np.all(ax["mach_1d"][x < geo.throat_x_m] <= 1.0)
    assert np.all(ax["mach_1d"][(x > geo.throat_x_m) & (ax["area_ratio"] > 1.0)] > 1.0)
    # [N] isentropic table: A/A* = 1.6875 at M = 2 (gamma 1.4)
    k = np.argmin(np.abs(ax["area_ratio"] - 1.6875) + (x < geo.throat_x_m) * 10)
    if abs(ax["area_ratio"][k] - 1.6875) < 1e-9:
        assert ax["mach_1d"][k] == pytest.approx(2.0, rel=1e-6)
