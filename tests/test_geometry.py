"""Gas and face fractions of drawn shapes (solver.geometry) against exact areas, lengths and volumes.

Areas of a square and a disc, the circumference of a circle and Pappus's centroid theorem for the volume
of a solid of revolution are elementary geometry (no source needed beyond any calculus text).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from shockslate.solver.cut_cells import build
from shockslate.solver.domain import Domain
from shockslate.solver.geometry import staircase_geometry, wall_geometry
from shockslate.solver.kinds import CellKind
from shockslate.solver.shapes import Circle, Polygon, Rectangle, Segment, Sketch, Stroke

DOM = Domain(0.0, 1.0, 0.0, 0.6, 100)


def _rotated_square(cx, cy, half, deg):
    c, s = math.cos(math.radians(deg)), math.sin(math.radians(deg))
    return tuple((cx + half * (c * x - s * y), cy + half * (s * x + c * y)) for x, y in ((-1, -1), (1, -1), (1, 1), (-1, 1)))


def _wall_area(geo, dom):
    return float(np.sum(1.0 - geo.gas)) * dom.dx_m ** 2


def test_areas_of_a_rotated_square_and_a_disc():
    # 16 x 16 samples per cut cell: the first honest run was off by 2e-5 (square) and 2.0e-4 (disc); bound 5e-4
    geo = wall_geometry(Sketch((Polygon(_rotated_square(0.3, 0.3, 0.15, 17.0), "wall"),)), DOM)
    assert _wall_area(geo, DOM) == pytest.approx(0.3 ** 2, rel=5e-4)
    geo = wall_geometry(Sketch((Circle((0.61, 0.33), 0.173, "wall"),)), DOM)
    assert _wall_area(geo, DOM) == pytest.approx(math.pi * 0.173 ** 2, rel=5e-4)


def test_the_wall_of_the_cut_cells_is_as_long_as_the_drawn_outline():
    # each cut cell's wall area vector closes its faces; summed, their lengths are the outline's length
    r = 0.173
    geo = wall_geometry(Sketch((Circle((0.61, 0.33), r, "wall"),)), DOM)
    cc, _ = build(geo, "planar")
    length = float(np.sum(np.hypot(cc.wall_x, cc.wall_y))) * DOM.dx_m
    assert length == pytest.approx(2.0 * math.pi * r, rel=0.01)


def test_volume_of_revolution_follows_pappus():
    # a disc of radius a centred at radius R turns into a torus of volume 2 pi R * pi a^2
    dom = Domain(0.0, 1.0, 0.0, 0.6, 100)
    a, R = 0.1, 0.3
    geo = wall_geometry(Sketch((Circle((0.5, R), a, "wall"),)), dom)
    rows = np.arange(dom.ny)[:, None] + 0.5
    solid = float(np.sum(rows - geo.gas_r)) * 2.0 * math.pi * dom.dx_m ** 3
    assert solid == pytest.approx(2.0 * math.pi * R * math.pi * a * a, rel=1e-3)


def test_cell_kinds_keep_held_regions_and_close_faces_beside_walls():
    sketch = Sketch((Rectangle((0.0, 0.0), (0.1, 0.6), "reservoir"), Polygon(((0.2, 0.0), (0.9, 0.35), (0.9, 0.0)), "wall")))
    geo = wall_geometry(sketch, DOM)
    assert (geo.mask[:, :10] == CellKind.RESERVOIR).all()
    wall = geo.mask == CellKind.WALL
    assert wall.any() and np.all(geo.gas[wall] == 0.0)
    assert np.all(geo.open_x[:, :-1][wall] == 0.0) and np.all(geo.open_x[:, 1:][wall] == 0.0)
    assert np.all(geo.open_y[:-1][wall] == 0.0) and np.all(geo.open_y[1:][wall] == 0.0)
    cut = geo.cut
    assert cut.any() and np.all((geo.gas[cut] > 0.0) & (geo.gas[cut] <= 1.0))


def test_a_bare_mask_gives_whole_cells():
    mask = np.zeros((4, 6), np.uint8)
    mask[2:, 3:] = CellKind.WALL
    geo = staircase_geometry(mask)
    assert np.array_equal(geo.gas, (mask != CellKind.WALL).astype(float))
    assert geo.open_x[3, 3] == 0.0 and geo.open_x[0, 3] == 1.0 and geo.open_y[2, 4] == 0.0


@pytest.mark.parametrize("width_cells", [0.05, 0.5, 1.0, 3.0])
def test_a_closed_thin_stroke_seals_its_inside(width_cells):
    # gas inside a loop drawn with a thin stroke must not reach the outside through any open face
    dx = DOM.dx_m
    loop = [(0.3 + 0.2 * math.cos(t), 0.3 + 0.17 * math.sin(t)) for t in np.linspace(0.0, 2.0 * math.pi, 37)]
    geo = wall_geometry(Sketch((Stroke(tuple(loop), width_cells * dx, "wall"),)), DOM)
    gas = geo.mask == CellKind.FLUID
    ny, nx = gas.shape
    reached = np.zeros_like(gas)
    start = DOM.cell_index(0.3, 0.3)
    assert gas[start]
    stack = [start]
    reached[start] = True
    while stack:
        j, i = stack.pop()
        for dj, di, frac in ((0, 1, geo.open_x[j, i + 1]), (0, -1, geo.open_x[j, i]),
                             (1, 0, geo.open_y[j + 1, i]), (-1, 0, geo.open_y[j, i])):
            j2, i2 = j + dj, i + di
            if frac > 0.0 and 0 <= j2 < ny and 0 <= i2 < nx and gas[j2, i2] and not reached[j2, i2]:
                reached[j2, i2] = True
                stack.append((j2, i2))
    assert not reached[DOM.cell_index(0.05, 0.05)]
    assert reached.sum() > 100


def test_a_wall_edge_on_a_grid_line_leaves_no_gas_in_the_cell_below_it():
    # a rectangle drawn on the grid lines (as snapping draws it): every cell inside it is wall, including the
    # row whose top face is the rectangle's top edge (its one "open" face is the drawn edge itself)
    from shockslate.solver.domain import Domain
    from shockslate.solver.geometry import wall_geometry
    from shockslate.solver.kinds import CellKind
    from shockslate.solver.shapes import Polygon, Sketch

    domain = Domain(0.0, 1.0, 0.0, 0.02, 400)
    plate = Polygon(((0.4, 0.005), (0.6, 0.005), (0.6, 0.01), (0.4, 0.01), (0.4, 0.005)), "wall")
    geo = wall_geometry(Sketch((plate,)), domain)
    i = 200
    assert list(geo.mask[:, i]) == [0, 0, 1, 1, 0, 0, 0, 0]
    assert geo.gas[2, i] == 0.0 and geo.gas[3, i] == 0.0


# ----------------------------------------------------------------------------- a change sampled only where it changed

def _random_shape(rng, dom):
    """A shape of random kind near or across the domain (wall mostly; some reservoir and fluid)."""
    w, h = dom.x_max_m - dom.x_min_m, dom.y_max_m - dom.y_min_m
    c = np.array([dom.x_min_m + w * rng.uniform(-0.1, 1.1), dom.y_min_m + h * rng.uniform(-0.1, 1.1)])
    paints = ["wall", "wall", "wall", "reservoir", "fluid"][rng.integers(5)]
    k = rng.integers(5)
    if k == 0:
        return Circle(tuple(c), h * rng.uniform(0.03, 0.3), paints)
    if k == 1:
        return Rectangle(tuple(c), tuple(c + rng.uniform(-0.3, 0.3, 2) * h), paints)
    if k == 2:
        t = np.sort(rng.uniform(0.0, 2.0 * math.pi, 40))
        r = h * rng.uniform(0.05, 0.3, 40)
        return Polygon(tuple(zip(c[0] + r * np.cos(t), c[1] + r * np.sin(t))), paints)
    if k == 3:
        pts = c + np.cumsum(rng.normal(0.0, 0.04 * h, (25, 2)), axis=0)
        return Stroke(tuple(map(tuple, pts)), h * rng.uniform(0.0, 0.05) + 1e-6, paints)
    return Segment(tuple(c), tuple(c + rng.normal(0.0, 0.3 * h, 2)), h * rng.uniform(0.0, 0.04) + 1e-6, paints)


def _assert_same_geometry(a, b):
    for name in ("mask", "drawn"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
    for name in ("gas", "gas_r", "open_x", "open_x_r", "open_y"):
        np.testing.assert_allclose(getattr(a, name), getattr(b, name), rtol=0.0, atol=1e-12, err_msg=name)


@pytest.mark.parametrize("mode", ["planar", "axisymmetric"])
def test_resampling_a_changed_sketch_equals_sampling_it_whole(mode):
    # incremental == whole to round-off for add, remove (first, middle, last), undo of each and redo,
    # on random mixed sketches; axisymmetric sketches are mirrored about the axis, planar ones about the midline
    from shockslate.solver.geometry import resample_walls, sample_walls

    if mode == "axisymmetric":
        dom, mirror = Domain(0.0, 0.5, 0.0, 0.2, 90), "axis"
    else:
        dom, mirror = Domain(-0.2, 0.3, -0.1, 0.15, 80), "midline"
    rng = np.random.default_rng(11 if mode == "planar" else 12)
    for trial in range(3):
        shapes = tuple(_random_shape(rng, dom) for _ in range(6))
        m = mirror if trial != 1 else "none"
        history = [Sketch(shapes, m)]
        history.append(Sketch(shapes + (_random_shape(rng, dom),), m))  # add
        history.append(Sketch(history[-1].shapes[1:], m))  # remove the first
        mid = len(history[-1].shapes) // 2
        history.append(Sketch(history[-1].shapes[:mid] + history[-1].shapes[mid + 1:], m))  # remove one inside
        history.append(Sketch(history[-1].shapes[:-1], m))  # remove the last
        history += history[-2::-1]  # undo back to the start
        history += history[1:3]  # redo
        walls = sample_walls(history[0], dom)
        for sketch in history[1:]:
            walls = resample_walls(walls, sketch)
            _assert_same_geometry(walls.geometry, wall_geometry(sketch, dom))


def test_resampling_is_local_and_follows_a_new_mirror_or_an_empty_sketch():
    from shockslate.solver.geometry import _changed_windows, resample_walls, sample_walls

    dom = Domain(0.0, 1.0, 0.0, 0.5, 100)
    base = Sketch((Circle((0.3, 0.25), 0.1, "wall"), Rectangle((0.6, 0.1), (0.8, 0.3), "wall")))
    dot = Circle((0.9, 0.05), 0.02, "wall")
    added = Sketch(base.shapes + (dot,))
    # the window of a small disc: its cells (0.07 m across, 7 cells) and a margin of two or three cells each side
    ((j0, j1, i0, i1),) = _changed_windows(base, added, dom)
    assert (j1 - j0) <= 7 + 6 and (i1 - i0) <= 7 + 6 and i0 <= 88 - 2 and i1 >= 92 + 2
    walls = resample_walls(sample_walls(base, dom), added)
    _assert_same_geometry(walls.geometry, wall_geometry(added, dom))
    for sketch in (Sketch(added.shapes, "midline"), Sketch(), Sketch((Rectangle((0, 0), (0.2, 0.5), "reservoir"),)), added):
        walls = resample_walls(walls, sketch)
        _assert_same_geometry(walls.geometry, wall_geometry(sketch, dom))


@pytest.mark.parametrize("mirror", ["none", "axis", "midline"])
def test_a_long_path_is_resampled_along_itself_and_equals_the_whole(mirror):
    # a stroke and a segment across the whole domain (and far beyond it) are boxed in runs along themselves:
    # several small windows, far fewer cells than the grid, and the same geometry as sampling it whole
    from shockslate.solver.geometry import _WHOLE_SHARE, _WINDOW_COST_CELLS, _changed_windows, resample_walls, sample_walls

    dom = Domain(0.0, 1.0, 0.0, 0.5, 400)
    base = Sketch((Circle((0.3, 0.25), 0.1, "wall"), Rectangle((0.6, 0.1), (0.8, 0.3), "reservoir")), mirror)
    t = np.linspace(0.0, 1.0, 300)
    stroke = Stroke(tuple(zip(-0.1 + 1.2 * t, 0.2 + 0.05 * np.sin(11.0 * t))), 0.004, "wall")
    segment = Segment((-2.0, -1.2), (0.7, 0.4), 0.01, "wall")
    walls = sample_walls(base, dom)
    for shape in (stroke, segment):
        grown = Sketch(base.shapes + (shape,), mirror)
        windows = _changed_windows(base, grown, dom)
        assert len(windows) >= 4
        if mirror != "midline":  # few enough to be resampled in windows, not whole (a midline doubles them)
            assert sum((j1 - j0) * (i1 - i0) + _WINDOW_COST_CELLS for j0, j1, i0, i1 in windows) \
                <= _WHOLE_SHARE * dom.nx * dom.ny
        walls = resample_walls(walls, grown)
        _assert_same_geometry(walls.geometry, wall_geometry(grown, dom))
        walls = resample_walls(walls, base)
        _assert_same_geometry(walls.geometry, wall_geometry(base, dom))
