"""Nozzles from numbers: the shapes have the areas asked for, and a run passes the choked mass flow.

Sources:
[SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3: contraction ratio and exit area ratio as
     ratios of flow areas; choked mass flow mdot = p0 A* sqrt(g/(R T0)) (2/(g+1))^((g+1)/(2(g-1))) (eq. 3-24,
     from memory); a bell's length as a fraction of the 15 degree cone with the same throat and exit.
[R]  G. V. R. Rao 1958/1960: the parabolic (quadratic Bezier) bell from the inflection angle theta_n to the
     exit angle theta_e.
[AM] J. D. Anderson, Modern Compressible Flow, ch. 11: the planar minimum-length nozzle by the method of
     characteristics: the wall leaves the sharp throat corner at nu(M_e)/2, ends parallel to the axis, and its exit
     height tends to the area-Mach value as the characteristics multiply (from memory).
[ZH] M. J. Zucrow and J. D. Hoffman, Gas Dynamics, vol. 1, ch. 12: axisymmetric compatibility relations, used for
     the axisymmetric minimum-length contour (from memory).
[N]  NACA Report 1135 (1953): the choked-flow relation behind solver.relations.choked_mass_flow_kg_s (checked
     against the report's tables in tests/test_relations.py).
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest

from shockslate.server.cli import main
from shockslate.solver import nozzle_design as nd
from shockslate.solver import relations
from shockslate.solver.diagnostics import read_station
from shockslate.solver.kinds import CellKind
from shockslate.solver.scenario import build_simulation, load_scenario, parse_scenario, station_by_role

RT = 0.01

SPECS = {
    "axi cone": nd.NozzleSpec(RT, 4.0, 0.02, 4.0),
    "axi bell": nd.NozzleSpec(RT, 5.0, 0.03, 12.0, shape="bell"),
    "planar cone": nd.NozzleSpec(RT, 2.5, 0.02, 2.0, mode="planar", half_angle_deg=20.0),
    "planar bell": nd.NozzleSpec(RT, 3.0, 0.02, 3.0, mode="planar", shape="bell", inflection_angle_deg=25.0,
                                 exit_angle_deg=8.0),
}


MOC = nd.NozzleSpec(RT, 2.5, 0.02, 2.0, mode="planar", shape="moc", design_gamma=1.4)


def _slope_deg(p, q):
    return math.degrees(math.atan2(q[1] - p[1], q[0] - p[0]))


@pytest.mark.parametrize("key", list(SPECS))
def test_contour_has_the_requested_areas(key):
    spec = SPECS[key]
    c = nd.build_contour(spec)
    pts = np.array(c.points_m)
    x, r = pts[:, 0], pts[:, 1]
    # [SB] ch. 3: contraction ratio Ac/At and exit area ratio Ae/At are ratios of the flow areas
    a_t = spec.area_m2(float(r.min()))
    assert r.min() == pytest.approx(RT, rel=1e-12)
    assert c.radius_at(c.throat_x_m) == pytest.approx(RT, rel=1e-12)
    assert spec.area_m2(float(r[0])) / a_t == pytest.approx(spec.contraction_ratio, rel=1e-12)
    assert spec.area_m2(float(r[-1])) / a_t == pytest.approx(spec.exit_area_ratio, rel=1e-12)
    assert x[-1] == pytest.approx(c.exit_x_m) and x[0] == 0.0
    # one wall line: x never goes back, the radius falls to the throat and rises after it
    assert np.all(np.diff(x) >= 0.0)
    k_t = int(np.argmin(r))
    assert np.all(np.diff(r[: k_t + 1]) <= 1e-15) and np.all(np.diff(r[k_t:]) >= -1e-15)
    # cylindrical chamber of the requested length
    assert r[1] == r[0] and x[1] == pytest.approx(spec.chamber_length_m)


def test_cone_and_bell_wall_angles():
    c = nd.build_contour(SPECS["axi cone"])
    assert _slope_deg(c.points_m[-2], c.points_m[-1]) == pytest.approx(15.0, abs=1e-9)
    spec = SPECS["axi bell"]
    c = nd.build_contour(spec)
    tn, te = spec.bell_angles_deg()
    n = nd._BELL_POINTS
    bell = c.points_m[-(n + 1):]
    # [R]: the parabola leaves the inflection point at theta_n and meets the exit at theta_e (its end tangents);
    # the chords of the first and last of 48 pieces are within a fraction of a degree of them
    assert _slope_deg(bell[0], bell[1]) == pytest.approx(tn, abs=0.6)
    assert _slope_deg(bell[-2], bell[-1]) == pytest.approx(te, abs=0.6)
    # [SB]/[R]: bell length (throat to exit) is the fraction of the 15 degree cone's length
    cone_length = (spec.exit_radius_m - RT) / math.tan(math.radians(15.0))
    assert c.exit_x_m - c.throat_x_m == pytest.approx(0.8 * cone_length, rel=1e-12)
    # a bell is shorter than the cone of the same area ratio
    cone = nd.build_contour(nd.NozzleSpec(RT, 5.0, 0.03, 12.0))
    assert c.exit_x_m < cone.exit_x_m


@pytest.mark.parametrize("key", [*SPECS, "planar moc"])
def test_scenario_validates_and_the_cells_have_the_areas(key):
    spec = SPECS.get(key, MOC)
    n = 10
    s = parse_scenario(nd.nozzle_scenario(spec, nd.RunChoices(cells_per_throat_radius=n, plume_length_m=0.01)))
    assert s.mode == spec.mode
    sim = build_simulation(s)
    dx = sim.domain.dx_m
    assert dx == pytest.approx(RT / n, rel=1e-9)
    mask = sim.mask
    x = sim.domain.x_centres_m()

    gas = sim.geometry.gas  # each cell's gas fraction: the walls are drawn inside the cells (cut cells)

    def open_height(i):
        """Gas height of column i from the axis up to the first cell that is mostly wall."""
        n = int(np.argmax(gas[:, i] < 0.5))
        return float(np.sum(gas[:n, i])) * dx

    c = nd.build_contour(spec)
    i_t = int(np.argmin(np.abs(x - c.throat_x_m)))
    # the cells hold the drawn throat: the gas over the throat column's width is the throat radius, up to the
    # rise of the wall across the column (the rounding's sagitta, and the column centre lying up to half a cell
    # from the drawn throat); at 10 cells per throat radius that stays within a fifth of a cell
    assert abs(open_height(i_t) - RT) <= 0.2 * dx
    i_e = int(np.searchsorted(x, c.exit_x_m)) - 2  # the last column wholly inside the nozzle
    # the drawn wall at that column's centre, read to within the half cell the 'mostly wall' cut leaves
    assert abs(open_height(i_e) - c.radius_at(float(x[i_e]))) <= 0.5 * dx
    assert station_by_role(s, "throat") is not None and station_by_role(s, "exit") is not None
    assert (mask == CellKind.RESERVOIR).any()


def test_bad_numbers_are_refused_by_name():
    with pytest.raises(nd.DesignError, match=r"throat_radius_m = -0.01 is not allowed: must be a number greater"):
        nd.NozzleSpec(-0.01, 4.0, 0.02, 4.0)
    with pytest.raises(nd.DesignError, match=r"exit_area_ratio = 0.5 is not allowed: must be a ratio of areas"):
        nd.NozzleSpec(RT, 4.0, 0.02, 0.5)
    with pytest.raises(nd.DesignError, match=r"shape = 'spike' is not allowed: must be one of cone, bell"):
        nd.NozzleSpec(RT, 4.0, 0.02, 4.0, shape="spike")
    with pytest.raises(nd.DesignError, match=r"inflection_angle_deg is missing: a bell of length "
                                             r"fraction 0.7 needs both bell angles"):
        nd.NozzleSpec(RT, 4.0, 0.02, 4.0, shape="bell", bell_fraction=0.7)
    with pytest.raises(nd.DesignError, match=r"contraction_ratio = 1.05 is not allowed: too small for a 30 degree"):
        nd.build_contour(nd.NozzleSpec(RT, 1.05, 0.02, 4.0))
    with pytest.raises(nd.DesignError, match=r"cells_per_throat_radius = 2 is not allowed"):
        nd.RunChoices(cells_per_throat_radius=2)


def _choked_ratio(key: str, spec: nd.NozzleSpec, run: nd.RunChoices) -> float:
    s = parse_scenario(nd.nozzle_scenario(spec, run, name=key.replace(" ", "_")))
    sim = build_simulation(s)
    sim.run_until(s.end_time_s)
    gas = s.gas
    ideal = relations.choked_mass_flow_kg_s(run.p0_pa, run.t0_k, spec.area_m2(spec.throat_radius_m), gas.gamma,
                                            8314.462618 / gas.molar_mass_kg_kmol)
    throat = read_station(sim, station_by_role(s, "throat")).mass_flow_kg_s
    exit_ = read_station(sim, station_by_role(s, "exit")).mass_flow_kg_s
    assert exit_ == pytest.approx(throat, rel=0.01), "not steady yet: throat and exit flows differ"
    return throat / ideal


@pytest.mark.slow
@pytest.mark.parametrize("key, spec", [
    ("axi bell", nd.NozzleSpec(RT, 4.0, 0.02, 4.0, shape="bell")),
    ("planar cone", nd.NozzleSpec(RT, 2.5, 0.02, 2.0, mode="planar", upstream_rounding=1.5, downstream_rounding=1.0)),
])
def test_a_built_nozzle_passes_the_choked_mass_flow(key, spec):
    # [SB] eq. 3-24 / [N]: choked mass flow for the drawn throat area (pi r_t^2, or r_t per metre of depth for the
    # planar half nozzle). README, known limits: the solver is within about 2 % of it. First honest run at
    # 8 cells per throat radius: axisymmetric bell 1.000, planar cone 0.990.
    run = nd.RunChoices(p0_pa=1.0e6, t0_k=3000.0, cells_per_throat_radius=8, plume_length_m=0.01)
    assert _choked_ratio(key, spec, run) == pytest.approx(1.0, abs=0.02)


@pytest.mark.slow
@pytest.mark.parametrize("spec, cells, end_time_s", [
    (MOC, 8, 0.002),
    (nd.NozzleSpec(RT, 3.0, 0.02, 4.0, shape="moc", design_gamma=1.4), 10, 0.0015),
], ids=["planar", "axisymmetric"])
def test_a_minimum_length_nozzle_passes_the_choked_mass_flow_and_reaches_its_exit_mach(spec, cells, end_time_s):
    # [SB] eq. 3-24 / [N] choked mass flow for the drawn throat (README: the solver is within about 2 %); [N]
    # area-Mach: the exit Mach number of the area ratio at gamma 1.4 (2.197 for 2, 2.940 for 4). First honest
    # runs: planar at 8 cells per throat half height, mass flow 0.994 and exit-station mean Mach 1.2 % low;
    # axisymmetric at 10 cells per throat radius, 0.988 and 2.2 % low (at 8 cells: 0.982 and 0.9 % low).
    from shockslate.solver.gas import AIR

    run = nd.RunChoices(p0_pa=1.0e6, t0_k=300.0, ambient_p_pa=1.0e4, gas=AIR, cells_per_throat_radius=cells,
                        plume_length_m=0.01, end_time_s=end_time_s)
    s = parse_scenario(nd.nozzle_scenario(spec, run))
    sim = build_simulation(s)
    sim.run_until(s.end_time_s)
    ideal = relations.choked_mass_flow_kg_s(1.0e6, 300.0, spec.area_m2(RT), 1.4, AIR.r_j_kg_k)
    assert read_station(sim, station_by_role(s, "throat")).mass_flow_kg_s == pytest.approx(ideal, rel=0.02)
    me = float(relations.mach_from_area_ratio(spec.exit_area_ratio, 1.4, supersonic=True))
    assert read_station(sim, station_by_role(s, "exit")).mean_mach == pytest.approx(me, rel=0.03)


def test_cli_writes_a_scenario_that_check_accepts(tmp_path, capsys):
    out = tmp_path / "my_nozzle.json"
    code = main(["nozzle", "--throat-radius", "0.01", "--contraction-ratio", "4", "--chamber-length", "0.03",
                 "--area-ratio", "10", "--bell", "--p0", "7e6", "--t0", "3500", "--out", str(out)])
    assert code == 0, capsys.readouterr().err
    s = load_scenario(out)
    assert s.mode == "axisymmetric" and s.conditions.reservoir.p0_pa == 7e6
    assert main(["check", str(out)]) == 0
    doc = json.loads(out.read_text())
    wall = np.array(doc["sketch"]["shapes"][0]["points_m"])
    # the exit radius gives area ratio 10 [SB] ch. 3
    assert (wall[:, 1][wall[:, 0] < s.domain.x_max_m].max() >= 0.01 * math.sqrt(10) - 1e-9)


@pytest.mark.parametrize("argv, says", [
    (["--throat-radius", "-1"], "--throat-radius = -1.0 is not allowed: must be a number greater than 0"),
    (["--area-ratio", "0.5"], "--area-ratio = 0.5 is not allowed: must be a ratio of areas greater than 1"),
    (["--half-angle", "60"], "--half-angle = 60.0 is not allowed: must be an angle"),
    (["--p0", "0"], "--p0 = 0.0 is not allowed"),
    (["--downstream-rounding", "0"], "--downstream-rounding = 0.0 is not allowed: must be a number greater than 0"),
])
def test_cli_refuses_bad_numbers_with_exit_code_2(tmp_path, capsys, argv, says):
    base = {"--throat-radius": "0.01", "--contraction-ratio": "4", "--chamber-length": "0.03", "--area-ratio": "4"}
    base.update(dict(zip(argv[::2], argv[1::2])))
    args = ["nozzle", *[v for kv in base.items() for v in kv if v], "--out", str(tmp_path / "n.json")]
    assert main(args) == 2
    assert says in capsys.readouterr().err
    assert not (tmp_path / "n.json").exists()
