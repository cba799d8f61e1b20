"""solver/nozzle.py: the drawn gas section, the drawn nozzle, the ideal 1D figures, and the one-source promise
(the page, summary.json, report.html and the sweep report show the same ideal figures).

Sources:
[SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3 (thrust F = mdot u_e + (p_e - p_a) A_e,
     C_F = F / (p0 A*), c* = p0 A* / mdot, Isp = C_F c* / g0; from memory).
[N]  NACA Report 1135 (1953): choked mass-flow parameter mdot sqrt(R T0) / (p0 A*) = 0.6847 at gamma 1.4
     (isentropic table at M = 1; from memory).
pygasflow 1.4.1 (PyPI): general-purpose gas-dynamics library, a test oracle only (isentropic area ratio and
     pressure ratio, de Laval choked mass flow).
Exact geometry: the drawn shapes' own sections (circle chord, cone radius, capsule edge), worked by hand below.
"""
from __future__ import annotations

import html
import math
import re

import numba
import numpy as np
import pytest
from pygasflow import isentropic as pg_ise
from pygasflow.solvers.de_laval import nozzle_mass_flow_rate as pg_mass_flow

from shockslate.server import readings
from shockslate.solver import nozzle, sweep
from shockslate.solver.batch import run_scenario
from shockslate.solver.gas import PRESETS
from shockslate.solver.scenario import (build_simulation, builtin_names, has_reservoir, load_builtin, parse_scenario,
                                        to_gas)


@pytest.fixture(scope="module", autouse=True)
def one_numba_thread():
    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


def doc(shapes: list[dict], mode: str = "planar", mirror: str = "none", y_min: float = 0.0,
        stations: list[dict] | None = None) -> dict:
    return {
        "name": "drawn", "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965}, "mode": mode,
        "domain": {"x_min_m": 0.0, "x_max_m": 0.2, "y_min_m": y_min, "y_max_m": 0.05, "nx": 40},
        "edges": {"left": "wall", "right": "open", "bottom": "axis" if mode == "axisymmetric" else "wall",
                  "top": "wall"},
        "sketch": {"shapes": shapes, "mirror": mirror},
        "conditions": {"reservoir": {"p0_pa": 1.0e6, "t0_k": 300.0}, "ambient": {"p_pa": 1.0e5, "t_k": 300.0}},
        "stations": stations or [], "end_time_s": 1e-3,
    }


RESERVOIR = {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [0.01, 0.01], "paints": "reservoir"}


# ----------------------------------------------------------------------------- drawn sections

def test_circle_wall_section_is_the_chord_below_it():
    s = parse_scenario(doc([{"kind": "circle", "centre_m": [0.1, 0.045], "radius_m": 0.03, "paints": "wall"}]))
    d = nozzle.drawing(s)
    # exact geometry: the circle's lowest point at x = cx is cy - r; at x = cx + 0.018 it is cy - sqrt(r^2 - 0.018^2)
    assert d.area_m2(0.1) == pytest.approx(0.015, rel=1e-12)
    assert d.area_m2(0.118) == pytest.approx(0.045 - math.sqrt(0.03 ** 2 - 0.018 ** 2), rel=1e-12)
    assert math.isnan(d.area_m2(0.02))  # no wall above: the column is not walled


def test_capsule_walls_mirrored_about_the_midline_give_the_full_height():
    seg = {"kind": "segment", "start_m": [0.02, 0.04], "end_m": [0.18, 0.04], "width_m": 0.004, "paints": "wall"}
    s = parse_scenario(doc([seg], mirror="midline", y_min=-0.05))
    d = nozzle.drawing(s)
    assert d.axis_y_m == 0.0
    # exact geometry: walls at y = +-(40 mm - 2 mm half width); at the round end x = 18 mm + 1 mm the cap is
    # sqrt(2^2 - 1^2) mm thick each side of 40 mm
    assert d.area_m2(0.1) == pytest.approx(2 * 0.038, rel=1e-12)
    assert d.area_m2(0.181) == pytest.approx(2 * (0.04 - math.sqrt(0.002 ** 2 - 0.001 ** 2)), rel=1e-12)


def test_later_paint_wins_along_the_line():
    wall = {"kind": "rectangle", "corner_a_m": [0.0, 0.02], "corner_b_m": [0.2, 0.05], "paints": "wall"}
    notch = {"kind": "rectangle", "corner_a_m": [0.09, 0.01], "corner_b_m": [0.11, 0.03], "paints": "fluid"}
    s = parse_scenario(doc([wall, notch]))
    d = nozzle.drawing(s)
    assert d.area_m2(0.05) == pytest.approx(0.02, rel=1e-12)
    assert d.area_m2(0.1) == pytest.approx(0.03, rel=1e-12)  # the fluid notch opens the wall up to 30 mm


def test_axisymmetric_cone_nozzle_throat_exit_and_half_angle_are_the_drawn_ones():
    tan = math.tan(math.radians(12.0))
    wall = [[0.0, 0.03], [0.04, 0.03], [0.07, 0.01], [0.15, 0.01 + 0.08 * tan], [0.15, 0.05], [0.0, 0.05]]
    s = parse_scenario(doc([{"kind": "polygon", "points_m": wall, "paints": "wall"}, RESERVOIR],
                           mode="axisymmetric",
                           stations=[{"name": "e", "start_m": [0.14, 0.0], "end_m": [0.14, 0.02], "role": "exit"}]))
    noz = nozzle.drawn_nozzle(s)
    assert noz.throat_x_m == pytest.approx(0.07, abs=1e-12)
    assert noz.throat_area_m2 == pytest.approx(math.pi * 0.01 ** 2, rel=1e-12)
    r_e = 0.01 + 0.07 * tan  # exact geometry: the cone's radius on the exit line x = 140 mm
    assert noz.exit_x_m == 0.14 and noz.exit_area_m2 == pytest.approx(math.pi * r_e ** 2, rel=1e-12)
    assert noz.divergence_half_angle_deg == pytest.approx(12.0, abs=1e-9)
    # the drawing does not depend on the resolution: two cell grids resolve different throats beside it
    resolved = []
    for nx in (40, 64):
        sim = build_simulation(s, nx)
        resolved.append(nozzle.resolved_areas(noz, s, sim.mask, sim.domain).throat_area_resolved_m2)
        assert abs(math.sqrt(resolved[-1] / math.pi) - 0.01) <= sim.domain.dx_m
    assert resolved[0] != resolved[1]


def test_curved_throat_between_sample_lines_is_refined_to_the_drawn_minimum():
    # a circular bump of radius 20 mm whose lowest point (x = 0.10123 m) is not one of the reading lines
    bump = {"kind": "circle", "centre_m": [0.10123, 0.035], "radius_m": 0.02, "paints": "wall"}
    roof = {"kind": "rectangle", "corner_a_m": [0.0, 0.03], "corner_b_m": [0.2, 0.05], "paints": "wall"}
    s = parse_scenario(doc([roof, bump, RESERVOIR]))
    noz = nozzle.drawn_nozzle(s)
    # exact geometry: the narrowest section is cy - r = 15 mm (planar, per metre of depth)
    assert noz.throat_area_m2 == pytest.approx(0.015, rel=1e-9)
    assert noz.throat_x_m == pytest.approx(0.10123, abs=1e-4)


# ----------------------------------------------------------------------------- ideal figures

@pytest.mark.parametrize("p_amb_pa", [101325.0, 20000.0, 1000.0])
def test_ideal_figures_match_a_momentum_balance_built_from_pygasflow(p_amb_pa):
    gas = PRESETS["hot products"]
    g, r = gas.gamma, gas.r_j_kg_k
    p0, t0, at, eps = 1.5e6, 3000.0, math.pi * 0.01 ** 2, 4.0
    fig = nozzle.ideal_figures(p0, t0, p_amb_pa, g, r, at, eps)
    me = float(pg_ise.m_from_critical_area_ratio(eps, "super", g))
    pe = p0 * float(pg_ise.pressure_ratio(me, g))
    te = t0 * float(pg_ise.temperature_ratio(me, g))
    mdot = float(pg_mass_flow(g, r, t0, p0, at))
    thrust = mdot * me * math.sqrt(g * r * te) + (pe - p_amb_pa) * eps * at  # [SB] ch. 3
    assert fig.choked_mass_flow_kg_s == pytest.approx(mdot, rel=1e-9)
    assert fig.ideal_exit_mach == pytest.approx(me, rel=1e-9)
    assert fig.ideal_exit_pressure_pa == pytest.approx(pe, rel=1e-9)
    assert fig.ideal_thrust_n == pytest.approx(thrust, rel=1e-9)
    assert fig.ideal_thrust_coefficient == pytest.approx(thrust / (p0 * at), rel=1e-9)
    # [SB] ch. 3: Isp = C_F c* / g0, c* = p0 A* / mdot
    assert fig.c_star_m_s == pytest.approx(p0 * at / mdot, rel=1e-9)
    assert fig.ideal_specific_impulse_s == pytest.approx(thrust / mdot / 9.80665, rel=1e-9)


def test_choked_mass_flow_parameter_of_naca_1135():
    r = 8314.462618 / 28.965
    fig = nozzle.ideal_figures(1.0e6, 300.0, 1.0e5, 1.4, r, 1.0e-4, 2.0)
    # [N]: mdot sqrt(R T0) / (p0 A*) = 0.6847 for gamma 1.4
    assert fig.choked_mass_flow_kg_s * math.sqrt(r * 300.0) / (1.0e6 * 1.0e-4) == pytest.approx(0.6847, abs=1e-4)


# ----------------------------------------------------------------------------- one source, every caller

NOZZLE_BUILTINS = [n for n in builtin_names() if has_reservoir(load_builtin(n))
                   and {st.role for st in load_builtin(n).stations} >= {"throat", "exit"}]


def test_there_are_nozzle_builtins_to_compare():
    assert {"nozzle_sea_level", "nozzle_high_altitude", "nozzle_start_up"} <= set(NOZZLE_BUILTINS)


@pytest.mark.parametrize("name", NOZZLE_BUILTINS)
def test_page_summary_report_and_sweep_show_the_same_ideal_figures(name, tmp_path):
    """On every built-in nozzle at two resolutions: the page's exit-station figures, summary.json's nozzle
    block, report.html and the sweep report's curve function agree to round-off (they are one function)."""
    s = load_builtin(name)
    seen = []
    for n, nx in enumerate((80, 160)):
        sim = build_simulation(s, nx)
        noz = readings.nozzle_geometry(sim.mask, sim.domain, s)
        page = next(st["ideal"] for st in readings.status_figures(sim, s, noz, 0)["stations"] if st["role"] == "exit")
        out = tmp_path / f"run{nx}"
        summary = run_scenario(s, out, nx=nx, steps=1, progress=None, write_fields=False,
                               write_pictures=(n == 0))["nozzle"]
        gas = to_gas(s)
        g, r = gas.gamma, gas.r_j_kg_k
        curve = sweep.ideal_nozzle_figures(summary["p0_pa"], summary["t0_k"], summary["p_amb_pa"], g, r,
                                           summary["throat_area_m2"], summary["area_ratio"],
                                           summary["divergence_factor"])
        assert page["throat_area_m2"] == summary["throat_area_m2"]
        assert page["area_ratio"] == pytest.approx(summary["area_ratio"], rel=1e-14)
        assert page["choked_mass_flow_kg_s"] == pytest.approx(summary["choked_mass_flow_kg_s"], rel=1e-14)
        assert page["ideal_exit_mach"] == pytest.approx(summary["ideal_exit_mach"], rel=1e-14)
        assert page["ideal_thrust_n"] == pytest.approx(
            summary["ideal_thrust_coefficient"] * summary["p0_pa"] * summary["throat_area_m2"], rel=1e-14)
        assert page["throat_area_resolved_m2"] == summary["throat_area_resolved_m2"]
        assert curve["mdot"] == pytest.approx(summary["choked_mass_flow_kg_s"], rel=1e-14)
        assert curve["cf"] == pytest.approx(summary["ideal_thrust_coefficient"], rel=1e-14)
        assert curve["cf_div"] == pytest.approx(summary["ideal_thrust_coefficient_with_divergence"], rel=1e-14)
        if n == 0:
            text = html.unescape((out / "report.html").read_text())
            row = re.search(r"throat area A\* \(drawn\) \[m\^2\]</th><td>([^<]+)</td>", text)
            assert row and float(row.group(1)) == pytest.approx(summary["throat_area_m2"], rel=1e-4)
        seen.append((summary["throat_area_m2"], summary["choked_mass_flow_kg_s"], summary["throat_area_resolved_m2"]))
    # the drawn figures do not move with the resolution; the resolved area does, and is labelled as such
    assert seen[0][:2] == seen[1][:2]
    assert seen[0][2] != seen[1][2]


def test_freehand_stroke_wall_is_read_piece_by_piece():
    # a 300-point stroke along y = 30 mm, 4 mm wide, over a straight run: the section is 30 - 2 = 28 mm
    # (exact geometry), and a dip of the stroke to 20 mm between x = 90 and 110 mm narrows it to 18 mm
    pts = [[0.2 * k / 299, 0.02 if 0.09 <= 0.2 * k / 299 <= 0.11 else 0.03] for k in range(300)]
    s = parse_scenario(doc([{"kind": "stroke", "points_m": pts, "width_m": 0.004, "paints": "wall"}, RESERVOIR]))
    d = nozzle.drawing(s)
    assert d.area_m2(0.05) == pytest.approx(0.028, rel=1e-12)
    assert d.area_m2(0.1) == pytest.approx(0.018, rel=1e-12)
    assert nozzle.drawn_nozzle(s).throat_area_m2 == pytest.approx(0.018, rel=1e-12)


def test_long_outline_reads_like_a_short_one():
    # the same flat wall at 30 mm as a 4-vertex and as a 202-vertex polygon (the numpy path): exact geometry
    short = [[0.0, 0.03], [0.2, 0.03], [0.2, 0.05], [0.0, 0.05]]
    long_ = [[0.2 * k / 199, 0.03] for k in range(200)] + [[0.2, 0.05], [0.0, 0.05]]
    for outline in (short, long_):
        s = parse_scenario(doc([{"kind": "polygon", "points_m": outline, "paints": "wall"}, RESERVOIR]))
        assert nozzle.drawing(s).area_m2(0.1234) == pytest.approx(0.03, rel=1e-12)
        assert nozzle.drawn_nozzle(s).throat_area_m2 == pytest.approx(0.03, rel=1e-12)


# ----------------------------------------------------------------------------- reading many lines at once

def _mixed_sketch(seed: int) -> list[dict]:
    """Seeded shapes of every kind over the test domain: long and short polygons (some with vertical edges and
    corners on shared x), circles, rectangles, segments, strokes, fluid paint over wall, and a reservoir."""
    rng = np.random.default_rng(seed)
    shapes = [RESERVOIR]
    for k in range(6):
        n = int(rng.choice([3, 5, 64, 65, 400]))
        cx, cy = rng.uniform(0.02, 0.18), rng.uniform(0.0, 0.05)
        t = np.linspace(0.0, 2.0 * math.pi, n, endpoint=False)
        r = 0.01 * (1.0 + 0.3 * np.sin(5.0 * t + k))
        pts = np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])
        if k % 2:
            pts[:2, 0] = round(cx, 3)  # a vertical edge on a reading line
        shapes.append({"kind": "polygon", "points_m": pts.tolist(), "paints": "wall"})
    for _ in range(3):
        shapes.append({"kind": "circle", "centre_m": [rng.uniform(0, 0.2), rng.uniform(0, 0.05)],
                       "radius_m": rng.uniform(0.002, 0.02), "paints": str(rng.choice(["wall", "fluid"]))})
        a, b = rng.uniform(0, 0.2, 2), rng.uniform(0, 0.05, 2)
        shapes.append({"kind": "rectangle", "corner_a_m": [a[0], b[0]], "corner_b_m": [a[1], b[1]],
                       "paints": str(rng.choice(["wall", "fluid"]))})
        shapes.append({"kind": "segment", "start_m": [a[0], b[1]], "end_m": [a[1], b[0]], "width_m": 0.003,
                       "paints": "wall"})
    xs = np.linspace(0.0, 0.2, 200)
    shapes.append({"kind": "stroke", "points_m": np.column_stack([xs, 0.04 + 0.005 * np.sin(40 * xs)]).tolist(),
                   "width_m": 0.002, "paints": "wall"})
    return shapes


@pytest.mark.parametrize("mirror,y_min", [("none", 0.0), ("axis", 0.0), ("midline", -0.05)])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_lines_read_at_once_equal_lines_read_one_by_one(seed, mirror, y_min):
    # exact agreement (same arithmetic): the batched reader behind the drawn nozzle against the one-line reader
    # the throat refinement and the stations use, on reading lines, vertex lines and lines between them
    s = parse_scenario(doc(_mixed_sketch(seed), mirror=mirror, y_min=y_min))
    d = nozzle.drawing(s)
    xs = np.concatenate([nozzle._lines(d), np.linspace(-0.01, 0.21, 301)])[::-1]  # any order
    area, bottom, top, fed = d.sections(xs)
    one = [d.section(float(x)) for x in xs]
    for column, k in ((area, 0), (bottom, 1), (top, 2)):
        np.testing.assert_array_equal(column, np.array([o[k] for o in one]))
    np.testing.assert_array_equal(fed, np.array([o[3] for o in one]))
    assert np.isfinite(area).sum() > 50 and fed.any()  # the sketch is walled and fed on many of them


def test_a_scenario_built_from_the_last_one_reads_as_if_parsed_afresh():
    # the drawing is kept per shape model object: a scenario that shares the earlier models and adds one (what a
    # live change makes) must read exactly as the same document parsed from scratch
    shapes = _mixed_sketch(4)
    first = parse_scenario(doc(shapes))
    before = nozzle.drawn_nozzle(first)
    narrow = {"kind": "rectangle", "corner_a_m": [0.05, 0.012], "corner_b_m": [0.15, 0.05], "paints": "wall"}
    later = parse_scenario(doc(shapes + [narrow]))
    shared = first.model_copy(update={"sketch": first.sketch.model_copy(
        update={"shapes": [*first.sketch.shapes, later.sketch.shapes[-1]]})})
    assert shared.sketch.shapes[0] is first.sketch.shapes[0]
    got, fresh = nozzle.drawn_nozzle(shared), nozzle.drawn_nozzle(parse_scenario(doc(shapes + [narrow])))
    assert got == fresh and got != before
    assert nozzle.drawn_nozzle(first) == before


def test_a_strokes_joined_capsules_give_the_sections_of_its_pieces_painted_one_by_one():
    # a long wavy stroke folding over itself, with a reservoir: the reader joins the pieces' capsules on a line
    # before painting; painting every piece's capsule on its own (shape_intervals, piece by piece) must give the
    # same sections (exact: the same end points)
    t = np.linspace(0.0, 1.0, 1500)
    pts = np.column_stack([0.02 + 0.16 * t + 0.01 * np.sin(60 * t), 0.035 + 0.008 * np.sin(23 * t)])
    s = parse_scenario(doc([{"kind": "stroke", "points_m": pts.tolist(), "width_m": 0.003, "paints": "wall"},
                            RESERVOIR]))
    d = nozzle.drawing(s)
    stroke = d.shapes[0]
    xs = np.linspace(0.0, 0.2, 401)
    for x, area in zip(xs, d.sections(xs)[0]):
        line = []
        for k in (0, 1):  # the shapes in paint order, every interval painted on its own
            for lo, hi in nozzle.shape_intervals(d.shapes[k], float(x)):
                lo, hi = max(lo, d.y_min_m), min(hi, d.y_max_m)
                if hi >= lo:
                    line = nozzle._paint(line, lo, hi, d.shapes[k].paints)
        assert d._section_of(line)[0] == area or (math.isnan(area) and math.isnan(d._section_of(line)[0]))
    assert isinstance(stroke, nozzle.Stroke) and np.isfinite(d.sections(xs)[0]).sum() > 100
