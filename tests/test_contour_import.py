"""Contour import: CSV, DXF and SVG files written here become wall polygons of the right size and place.

Checks are against exact geometry (areas of rectangles and discs; the area of a regular polygon inscribed in a
circle, (n/2) r^2 sin(2 pi / n)), the SVG 1.1 path grammar and arc rules (W3C SVG 1.1, section 8 and
implementation notes F.6) and the DXF reference's entities as ezdxf writes them.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest

from shockslate.server.cli import main
from shockslate.solver.contour_import import SVG_CURVE_PIECES, ContourError, import_contours
from shockslate.solver.kinds import CellKind
from shockslate.solver.scenario import build_simulation, load_scenario


def area(poly) -> float:
    a = np.array(poly.points_m)
    return 0.5 * abs(float(np.sum(a[:, 0] * np.roll(a[:, 1], -1) - np.roll(a[:, 0], -1) * a[:, 1])))


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


# ----------------------------------------------------------------------------- CSV

def test_csv_in_millimetres_with_two_contours_and_a_mirror(tmp_path):
    f = write(tmp_path, "walls.csv", "x_mm,r_mm\n0,10\n50,10\n50,30\n0,30\n0,10\n\n60,0\n70,0\n60,5\n60,0\n")
    shapes = import_contours(f, "mm")
    assert len(shapes) == 2 and all(s.paints == "wall" for s in shapes)
    assert area(shapes[0]) == pytest.approx(0.050 * 0.020, rel=1e-12)  # rectangle 50 mm x 20 mm
    assert area(shapes[1]) == pytest.approx(0.5 * 0.010 * 0.005, rel=1e-12)  # right triangle
    assert min(p[1] for p in shapes[0].points_m) == pytest.approx(0.010)
    mirrored = import_contours(f, "in", mirror=True)
    assert len(mirrored) == 4
    assert area(mirrored[0]) == pytest.approx(50 * 20 * 0.0254 ** 2, rel=1e-12)  # 1 in = 25.4 mm exactly
    assert [(x, -y) for x, y in mirrored[0].points_m] == list(mirrored[1].points_m)


@pytest.mark.parametrize("text, says", [
    ("0,0\n10,0\n10,10\n0,10\n", "is open: its first point (0, 0) mm and last point (0, 10) mm are 10 mm apart"),
    ("0,0\n10,10\n10,0\n0,10\n0,0\n", "crosses itself"),
    ("x,r\n", "is empty"),
    ("", "is empty"),
    ("0,0\n10,0\n20,0\n0,0\n", "encloses no area"),
    ("0,0\n10,zero\n", "line 2: '10,zero' is not allowed: x and r must be numbers"),
])
def test_csv_bad_contours_are_refused_with_the_place(tmp_path, text, says):
    f = write(tmp_path, "bad.csv", text)
    with pytest.raises(ContourError) as info:
        import_contours(f, "mm")
    assert says in str(info.value) and "bad.csv" in str(info.value)


def test_open_contour_is_closed_when_asked(tmp_path):
    f = write(tmp_path, "open.csv", "0,0\n10,0\n10,10\n0,10\n")
    (shape,) = import_contours(f, "cm", close=True)
    assert area(shape) == pytest.approx(0.1 * 0.1, rel=1e-12)


# ----------------------------------------------------------------------------- DXF

def _dxf(tmp_path, build):
    import ezdxf
    doc = ezdxf.new()
    build(doc.modelspace())
    path = tmp_path / "drawing.dxf"
    doc.saveas(path)
    return path


def test_dxf_polyline_with_a_bulge_and_a_circle(tmp_path):
    def build(msp):
        # 40 x 20 rectangle whose right side is a half circle of radius 10 (bulge 1 = 180 degrees)
        msp.add_lwpolyline([(0, 0, 0), (40, 0, 1.0), (40, 20, 0), (0, 20, 0)], format="xyb", close=True)
        msp.add_circle((100, 50), 5)
        msp.add_line((0, 0), (1, 1))  # not a contour: left out
    shapes = import_contours(_dxf(tmp_path, build), "mm")
    assert len(shapes) == 2
    # exact geometry: rectangle + half disc; the flattening chords lie within 1e-4 of the drawing size
    assert area(shapes[0]) == pytest.approx((40 * 20 + 0.5 * math.pi * 10 ** 2) * 1e-6, rel=2e-3)
    assert max(p[0] for p in shapes[0].points_m) == pytest.approx(0.050, rel=1e-3)
    assert area(shapes[1]) == pytest.approx(math.pi * 25e-6, rel=2e-3)


def test_dxf_spline_through_points_closed(tmp_path):
    def build(msp):
        msp.add_spline([(0, 0), (10, 5), (20, 0), (10, -5), (0, 0)])
    (shape,) = import_contours(_dxf(tmp_path, build), "m")
    xs = [p[0] for p in shape.points_m]
    assert min(xs) == pytest.approx(0.0, abs=1e-6) and max(xs) == pytest.approx(20.0, abs=0.5)
    assert area(shape) > 0


@pytest.mark.parametrize("build, says", [
    (lambda msp: msp.add_lwpolyline([(0, 0), (10, 0), (10, 10)]), "is open"),
    (lambda msp: [msp.add_line((0, 0), (1, 0)), msp.add_line((1, 0), (1, 1))], "found 2 LINE in model space"),
    (lambda msp: msp.add_lwpolyline([(0, 0), (10, 10), (10, 0), (0, 10)], close=True), "crosses itself"),
])
def test_dxf_bad_contours_are_refused(tmp_path, build, says):
    with pytest.raises(ContourError) as info:
        import_contours(_dxf(tmp_path, build), "mm")
    assert says in str(info.value)


def test_dxf_that_is_not_a_drawing(tmp_path):
    f = write(tmp_path, "junk.dxf", "this is not a drawing\n")
    with pytest.raises(ContourError, match="junk.dxf"):
        import_contours(f, "mm")


# ----------------------------------------------------------------------------- SVG

SVG_HEAD = "<svg xmlns='http://www.w3.org/2000/svg' viewBox='0 0 200 200'>"


def test_svg_paths_lines_arcs_curves_and_transforms(tmp_path):
    f = write(tmp_path, "pic.svg", SVG_HEAD + """
      <path id="box" d="M 0 10 h 50 v 20 H 0 Z"/>
      <path d="M 110 100 A 10 10 0 0 1 90 100 A 10 10 0 0 1 110 100 Z"/>
      <g transform="translate(100,0) scale(2)"><polygon points="0,0 10,0 10,5 0,5"/></g>
      <path d="M0,150 C 0,140 20,140 20,150 L 20,160 L 0,160 z"/>
    </svg>""")
    shapes = import_contours(f, "mm")
    assert len(shapes) == 4
    box, disc, rect, cap = shapes
    # y is turned up: the box from y = 10..30 (down) lies at y = -30..-10 (up)
    ys = [p[1] for p in box.points_m]
    assert min(ys) == pytest.approx(-0.030) and max(ys) == pytest.approx(-0.010)
    assert area(box) == pytest.approx(50 * 20e-6, rel=1e-12)
    # two half-circle arcs of radius 10, each in SVG_CURVE_PIECES pieces: inscribed regular polygon
    n = 2 * SVG_CURVE_PIECES
    assert area(disc) == pytest.approx(0.5 * n * 100e-6 * math.sin(2 * math.pi / n), rel=1e-9)
    cx = np.mean([p[0] for p in disc.points_m])
    assert cx == pytest.approx(0.100, abs=1e-9)
    # translate(100, 0) scale(2) of a 10 x 5 rectangle: 20 x 10 from x = 100
    assert area(rect) == pytest.approx(200e-6, rel=1e-12)
    assert min(p[0] for p in rect.points_m) == pytest.approx(0.100)
    # a 20 x 10 box under a cubic with control points (0,0) (0,h) (w,h) (w,0) above its chord (h = 10, w = 20):
    # the area between curve and chord is the integral of y dx = 18 h w * B(3,3) = 3/5 h w = 120 (exact)
    assert area(cap) == pytest.approx((200 + 120) * 1e-6, rel=2e-3)


@pytest.mark.parametrize("body, says", [
    ("<path d='M 0 0 L 10 0 L 10 10'/>", "is open"),
    ("<path d='M 0 0 L 10 10 L 10 0 L 0 10 Z'/>", "crosses itself"),
    ("<rect width='5' height='5'/>", "is empty of contours"),
    ("<path d='M 0 0 L 10 0 Q 5'/>", "command 'Q' needs 4 numbers"),
    ("<path d='M 0 0 L 10 0 L 5 5 Z' transform='perspective(3)'/>", "transform perspective(3) is not allowed"),
])
def test_svg_bad_contours_are_refused(tmp_path, body, says):
    f = write(tmp_path, "bad.svg", SVG_HEAD + body + "</svg>")
    with pytest.raises(ContourError) as info:
        import_contours(f, "mm")
    assert says in str(info.value)


def test_unknown_units_and_formats_are_refused(tmp_path):
    f = write(tmp_path, "a.csv", "0,0\n1,0\n0,1\n0,0\n")
    with pytest.raises(ContourError, match=r"units = 'furlong' is not allowed: must be one of m, mm"):
        import_contours(f, "furlong")
    g = write(tmp_path, "a.txt", "0,0\n1,0\n0,1\n0,0\n")
    with pytest.raises(ContourError, match=r"file 'a.txt' is not allowed: the format must be one of csv, dxf, svg"):
        import_contours(g, "mm")
    assert len(import_contours(g, "mm", fmt="csv")) == 1


# ----------------------------------------------------------------------------- command line

def test_cli_adds_walls_to_a_scenario_that_then_rasterises_them(tmp_path, capsys):
    f = write(tmp_path, "plate.csv", "x,r\n400,5\n600,5\n600,10\n400,10\n400,5\n")
    out = tmp_path / "with_plate.json"
    assert main(["contour", str(f), "--units", "mm", "--into", "shock_tube_reflection", "--out", str(out)]) == 0
    s = load_scenario(out)
    assert s.sketch.shapes[-1].kind == "polygon" and s.sketch.shapes[-1].paints == "wall"
    sim = build_simulation(s)
    x, y = sim.domain.x_centres_m(), sim.domain.y_centres_m()
    j, i = int(np.searchsorted(y, 0.0075)), int(np.searchsorted(x, 0.5))
    assert sim.mask[j, i] == CellKind.WALL and sim.mask[1, i] != CellKind.WALL
    fragment = tmp_path / "sketch.json"
    assert main(["contour", str(f), "--units", "mm", "--mirror", "--out", str(fragment)]) == 0
    assert len(json.loads(fragment.read_text())["shapes"]) == 2


def test_cli_refuses_a_bad_contour_with_exit_code_2(tmp_path, capsys):
    f = write(tmp_path, "open.csv", "0,0\n1,0\n1,1\n")
    assert main(["contour", str(f), "--units", "mm", "--out", str(tmp_path / "o.json")]) == 2
    assert "open.csv: contour 1 (from line 1) is open" in capsys.readouterr().err
    assert not (tmp_path / "o.json").exists()
