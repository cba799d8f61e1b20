"""Rasterising a sketch onto the cell mask.

Sources of the expected values:
- Areas and centroids are exact geometry, no source needed: rectangle w h, disc pi r^2, circular
  segment r^2 acos(d/r) - d sqrt(r^2 - d^2), polygon area and centroid by the shoelace (surveyor's)
  formula, regular pentagram (circumradius R): the inner pentagon's circumradius is
  R cos(72 deg) / cos(36 deg) and a regular n-gon of circumradius r has area n r^2 sin(2 pi / n) / 2.
- Point-in-polygon oracle: the crossing-number (even-odd) test as in W. R. Franklin's PNPOLY, written
  here in plain Python, independently of the vectorised scanline fill under test.
- Error bound for area by counting cell centres: the misclassified cells all touch the boundary,
  so |count dx^2 - A| <= (perimeter) x (a few dx) for a smooth or polygonal boundary; we assert
  the tighter |error| <= perimeter x dx / 2 (exact geometry, common practice for this bound).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from shockslate.solver.domain import Domain
from shockslate.solver.kinds import CellKind
from shockslate.solver.raster import MIN_HALF_WIDTH_CELLS, footprint, paint, paint_mirrored, rasterise
from shockslate.solver.shapes import Circle, Polygon, Rectangle, Segment, Sketch, Stroke

FLUID, WALL, RESERVOIR, STREAM, AMBIENT = (
    CellKind.FLUID, CellKind.WALL, CellKind.RESERVOIR, CellKind.STREAM, CellKind.AMBIENT
)


def raster_of(*shapes, domain, mirror="none"):
    return rasterise(Sketch(tuple(shapes), mirror), domain)


def painted_area_m2(mask, domain, kind=WALL):
    return np.count_nonzero(mask == kind) * domain.dx_m**2


def shoelace_area_m2(points):
    """Signed area (positive anticlockwise), exact geometry."""
    s = 0.0
    for (x1, y1), (x2, y2) in zip(points, points[1:] + points[:1]):
        s += x1 * y2 - x2 * y1
    return 0.5 * s


def shoelace_centroid_m(points):
    a = shoelace_area_m2(points)
    cx = cy = 0.0
    for (x1, y1), (x2, y2) in zip(points, points[1:] + points[:1]):
        cross = x1 * y2 - x2 * y1
        cx += (x1 + x2) * cross
        cy += (y1 + y2) * cross
    return cx / (6.0 * a), cy / (6.0 * a)


def reachable(free, seeds):
    """Cells of `free` reachable from `seeds` through face neighbours (4-connected flood fill)."""
    reach = seeds & free
    while True:
        grown = reach.copy()
        grown[1:, :] |= reach[:-1, :]
        grown[:-1, :] |= reach[1:, :]
        grown[:, 1:] |= reach[:, :-1]
        grown[:, :-1] |= reach[:, 1:]
        grown &= free
        if np.array_equal(grown, reach):
            return reach
        reach = grown


# ----------------------------------------------------------------------------- plain-Python oracle

def _point_segment_distance(px, py, ax, ay, bx, by):
    ux, uy = bx - ax, by - ay
    length2 = ux * ux + uy * uy
    t = 0.0 if length2 == 0.0 else max(0.0, min(1.0, ((px - ax) * ux + (py - ay) * uy) / length2))
    return math.hypot(px - ax - t * ux, py - ay - t * uy)


def _pnpoly(points, x, y):
    inside = False
    n = len(points)
    for k in range(n):
        (xi, yi), (xj, yj) = points[k], points[k - 1]
        if (yi > y) != (yj > y) and x < (xj - xi) * (y - yi) / (yj - yi) + xi:
            inside = not inside
    return inside


def oracle_contains(shape, x, y, dx):
    if isinstance(shape, Circle):
        return (x - shape.centre_m[0]) ** 2 + (y - shape.centre_m[1]) ** 2 <= shape.radius_m**2
    if isinstance(shape, Rectangle):
        (ax, ay), (bx, by) = shape.corner_a_m, shape.corner_b_m
        return min(ax, bx) <= x <= max(ax, bx) and min(ay, by) <= y <= max(ay, by)
    if isinstance(shape, Polygon):
        return _pnpoly(shape.points_m, x, y)
    pts = shape.points_m if isinstance(shape, Stroke) else (shape.start_m, shape.end_m)
    half = max(shape.width_m / 2.0, 0.75 * dx)  # the documented painted half-width
    return min(_point_segment_distance(x, y, *a, *b) for a, b in zip(pts[:-1], pts[1:])) <= half


def oracle_mask(shapes, domain):
    mask = np.zeros(domain.shape, dtype=np.uint8)
    xs, ys = domain.x_centres_m(), domain.y_centres_m()
    for shape in shapes:
        kind = {"fluid": 0, "wall": 1, "reservoir": 2, "stream": 3, "ambient": 4}[shape.paints]
        for j, y in enumerate(ys):
            for i, x in enumerate(xs):
                if oracle_contains(shape, float(x), float(y), domain.dx_m):
                    mask[j, i] = kind
    return mask


def random_shape(rng, kind, paints="wall"):
    """Random shapes over a 1.0 x 0.6 domain, often reaching beyond its edges."""
    def pt():
        return (float(rng.uniform(-0.2, 1.2)), float(rng.uniform(-0.2, 0.8)))

    if kind == "circle":
        return Circle(pt(), float(rng.uniform(0.01, 0.4)), paints)
    if kind == "rectangle":
        return Rectangle(pt(), pt(), paints)
    if kind == "polygon":
        return Polygon(tuple(pt() for _ in range(int(rng.integers(3, 12)))), paints)
    if kind == "segment":
        return Segment(pt(), pt(), float(rng.choice([1e-4, rng.uniform(0.0, 0.1)]) or 1e-3), paints)
    return Stroke(tuple(pt() for _ in range(int(rng.integers(2, 9)))), float(rng.uniform(1e-4, 0.08)), paints)


# ----------------------------------------------------------------------------- basics

def test_empty_sketch_is_all_fluid_uint8_of_domain_shape():
    domain = Domain(0.0, 1.0, 0.0, 0.5, 40)
    mask = rasterise(Sketch(), domain)
    assert mask.dtype == np.uint8
    assert mask.shape == domain.shape == (20, 40)
    assert np.all(mask == FLUID)


def test_cell_j_i_has_centre_at_x_min_plus_i_half_dx():
    domain = Domain(-1.0, 1.0, 0.5, 1.5, 20)  # dx = 0.1
    j, i = 3, 7
    x = -1.0 + (i + 0.5) * 0.1
    y = 0.5 + (j + 0.5) * 0.1
    mask = raster_of(Circle((x, y), 0.01, "reservoir"), domain=domain)
    assert list(zip(*np.nonzero(mask))) == [(j, i)]
    assert mask[j, i] == RESERVOIR


@pytest.mark.parametrize("kind", ["circle", "rectangle", "polygon", "segment", "stroke"])
def test_each_shape_matches_plain_python_oracle(kind):
    rng = np.random.default_rng({"circle": 1, "rectangle": 2, "polygon": 3, "segment": 4, "stroke": 5}[kind])
    domain = Domain(0.0, 1.0, 0.0, 0.6, 50)
    for _ in range(12):
        shape = random_shape(rng, kind)
        mask = raster_of(shape, domain=domain)
        expected = oracle_mask([shape], domain)
        assert np.array_equal(mask, expected), shape


def test_a_sketch_of_mixed_shapes_matches_the_oracle_in_order():
    rng = np.random.default_rng(11)
    kinds = ["circle", "rectangle", "polygon", "segment", "stroke"] * 3
    paints = ["wall", "reservoir", "stream", "ambient", "fluid"]
    shapes = [random_shape(rng, k, paints[int(rng.integers(0, 5))]) for k in kinds]
    domain = Domain(0.0, 1.0, 0.0, 0.6, 40)
    assert np.array_equal(raster_of(*shapes, domain=domain), oracle_mask(shapes, domain))


def test_polygon_points_in_a_few_rows_match_the_oracle_whatever_rows_are_asked():
    # The fill reads only the edges near the asked rows (edges sorted by their lower end, the tallest edge's
    # height as reach): a long wavy outline with one tall edge, asked on bands of rows, against PNPOLY per point.
    from shockslate.solver.raster import footprint

    t = np.linspace(0.0, 2.0 * math.pi, 400, endpoint=False)
    ring = [(float(0.5 + 0.3 * math.cos(a) * (1 + 0.1 * math.sin(9 * a))), float(0.3 + 0.25 * math.sin(a)))
            for a in t]
    shape = Polygon(tuple(ring[:200]) + ((0.45, 0.9), (0.44, -0.3)) + tuple(ring[200:]), "wall")
    xs = np.linspace(-0.05, 1.05, 37)
    rng = np.random.default_rng(21)
    for _ in range(8):
        y0 = float(rng.uniform(-0.4, 0.9))
        ys = y0 + np.sort(rng.uniform(0.0, 0.05, int(rng.integers(1, 5))))
        got = footprint(shape, xs, ys, 0.01)
        want = np.array([[oracle_contains(shape, float(x), float(y), 0.01) for x in xs] for y in ys])
        assert np.array_equal(got, want), y0


def test_long_stroke_with_many_points_matches_oracle():
    # Many short pieces plus long ones (which the rasteriser cuts up) in one freehand path.
    t = np.linspace(0.0, 1.0, 150)
    pts = [(float(-0.1 + 1.2 * s), float(0.3 + 0.25 * math.sin(9.0 * s))) for s in t] + [(0.05, 0.02), (0.95, 0.58)]
    stroke = Stroke(tuple(pts), 0.003, "wall")
    domain = Domain(0.0, 1.0, 0.0, 0.6, 60)
    assert np.array_equal(raster_of(stroke, domain=domain), oracle_mask([stroke], domain))


def test_paint_is_the_in_place_per_shape_step_and_checks_the_mask():
    domain = Domain(0.0, 1.0, 0.0, 0.5, 20)
    mask = np.zeros(domain.shape, dtype=np.uint8)
    paint(mask, Rectangle((0.0, 0.0), (0.5, 0.5), "stream"), domain)
    assert np.all(mask[:, :10] == STREAM) and np.all(mask[:, 10:] == FLUID)
    with pytest.raises(ValueError, match=r"mask .*\(\(10, 20\), dtype\('float64'\)\).*uint8 array of shape \(10, 20\)"):
        paint(np.zeros((10, 20)), Circle((0, 0), 1, "wall"), domain)
    with pytest.raises(ValueError, match=r"uint8 array of shape \(10, 20\)"):
        paint(np.zeros((20, 10), dtype=np.uint8), Circle((0, 0), 1, "wall"), domain)


def test_rasterise_refuses_wrong_argument_types():
    domain = Domain(0.0, 1.0, 0.0, 0.5, 20)
    with pytest.raises(TypeError, match="sketch"):
        rasterise({"shapes": []}, domain)
    with pytest.raises(TypeError, match="domain"):
        rasterise(Sketch(), (0.0, 1.0, 0.0, 0.5, 20))


# ----------------------------------------------------------------------------- order and erasing

def test_later_shapes_paint_over_earlier_ones():
    domain = Domain(0.0, 1.0, 0.0, 1.0, 20)  # dx = 0.05, faces at multiples of 0.05
    big = Rectangle((0.0, 0.0), (1.0, 1.0), "wall")
    inner = Rectangle((0.25, 0.25), (0.75, 0.75), "reservoir")
    mask = raster_of(big, inner, domain=domain)
    assert np.all(mask[5:15, 5:15] == RESERVOIR)
    assert np.count_nonzero(mask == WALL) == 400 - 100
    # Reversed order: the big rectangle covers the small one entirely.
    assert np.all(raster_of(inner, big, domain=domain) == WALL)


def test_fluid_erases_back_to_free_gas():
    domain = Domain(0.0, 1.0, 0.0, 1.0, 40)
    wall = Rectangle((0.1, 0.1), (0.9, 0.9), "wall")
    hole = Circle((0.5, 0.5), 0.2, "fluid")
    mask = raster_of(wall, hole, domain=domain)
    j, i = domain.cell_index(0.5, 0.5)
    assert mask[j, i] == FLUID
    erased = raster_of(Circle((0.5, 0.5), 0.2, "wall"), domain=domain) == WALL
    assert np.all(mask[erased] == FLUID)
    assert np.count_nonzero(mask == WALL) == np.count_nonzero(raster_of(wall, domain=domain)) - np.count_nonzero(erased)


# ----------------------------------------------------------------------------- exact areas

def test_rectangle_on_cell_faces_paints_exactly_its_area():
    domain = Domain(0.0, 2.0, 0.0, 1.0, 80)  # dx = 0.025
    mask = raster_of(Rectangle((1.5, 0.25), (0.5, 0.75), "wall"), domain=domain)  # corners in either order
    assert np.count_nonzero(mask) == 40 * 20
    assert painted_area_m2(mask, domain) == pytest.approx(1.0 * 0.5, rel=1e-12)  # w h, exact geometry


def test_rectangle_area_converges_off_the_grid():
    a, b = (0.1234, 0.0871), (1.3311, 0.7702)
    exact = (b[0] - a[0]) * (b[1] - a[1])
    perimeter = 2.0 * ((b[0] - a[0]) + (b[1] - a[1]))
    errors = []
    for nx in (32, 128, 512, 2048):
        domain = Domain(0.0, 1.6, 0.0, 1.0, nx)
        err = painted_area_m2(raster_of(Rectangle(a, b, "wall"), domain=domain), domain) - exact
        assert abs(err) <= 0.5 * perimeter * domain.dx_m
        errors.append(abs(err) / exact)
    assert errors[-1] < 1e-3


def test_circle_area_converges_to_pi_r_squared():
    centre, r = (0.8123, 0.4871), 0.3
    exact, perimeter = math.pi * r * r, 2.0 * math.pi * r  # exact geometry
    errors = []
    for nx in (40, 160, 640, 2560):
        domain = Domain(0.0, 1.6, 0.0, 1.0, nx)
        err = painted_area_m2(raster_of(Circle(centre, r, "wall"), domain=domain), domain) - exact
        assert abs(err) <= 0.5 * perimeter * domain.dx_m, nx
        errors.append(abs(err) / exact)
    assert errors[-1] < 1e-4


def test_non_convex_polygon_area_and_centroid_converge_to_shoelace():
    pts = [(0.11, 0.07), (1.43, 0.13), (1.21, 0.91), (0.77, 0.38), (0.52, 0.86), (0.19, 0.61)]
    exact = abs(shoelace_area_m2(pts))
    cx_exact, cy_exact = shoelace_centroid_m(pts)
    perimeter = sum(math.dist(p, q) for p, q in zip(pts, pts[1:] + pts[:1]))
    for nx in (48, 192, 768, 3072):
        domain = Domain(0.0, 1.6, 0.0, 1.0, nx)
        mask = raster_of(Polygon(tuple(pts), "wall"), domain=domain)
        err = painted_area_m2(mask, domain) - exact
        assert abs(err) <= 0.5 * perimeter * domain.dx_m, nx
        jj, ii = np.nonzero(mask)
        cx = float(domain.x_centres_m()[ii].mean())
        cy = float(domain.y_centres_m()[jj].mean())
        assert math.hypot(cx - cx_exact, cy - cy_exact) <= 2.0 * domain.dx_m, nx
    assert abs(err) / exact < 1e-3


def test_pentagram_is_filled_even_odd_centre_left_empty():
    R, c = 0.45, (0.8017, 0.5029)
    star = [(c[0] + R * math.cos(math.pi / 2 + 4 * math.pi * k / 5), c[1] + R * math.sin(math.pi / 2 + 4 * math.pi * k / 5))
            for k in range(5)]
    # Exact geometry: the star outline is a 10-gon alternating radii R and r_in, 36 deg apart, area
    # 5 R r_in sin(36 deg); even-odd leaves out the inner pentagon, so the fill is the 5 tips.
    r_in = R * math.cos(math.radians(72)) / math.cos(math.radians(36))
    pentagon = lambda rad: 5 * rad * rad * math.sin(2 * math.pi / 5) / 2  # noqa: E731
    exact = 5 * R * r_in * math.sin(math.radians(36)) - pentagon(r_in)
    # Cross-check: the shoelace sum counts the doubly-wound centre twice (tips + 2 x centre).
    assert abs(shoelace_area_m2(star)) == pytest.approx(exact + 2 * pentagon(r_in), rel=1e-12)
    domain = Domain(0.0, 1.6, 0.0, 1.0, 1600)
    mask = raster_of(Polygon(tuple(star), "wall"), domain=domain)
    assert mask[domain.cell_index(*c)] == FLUID
    tip = (c[0], c[1] + 0.9 * R)
    assert mask[domain.cell_index(*tip)] == WALL
    assert painted_area_m2(mask, domain) == pytest.approx(exact, rel=2e-3)


# ----------------------------------------------------------------------------- watertight walls

def _split_sides(domain, p, angle_deg, half):
    """Free cells clearly on either side of the infinite line through p at the angle."""
    nxv, nyv = -math.sin(math.radians(angle_deg)), math.cos(math.radians(angle_deg))
    x = domain.x_centres_m()[None, :]
    y = domain.y_centres_m()[:, None]
    signed = (x - p[0]) * nxv + (y - p[1]) * nyv
    return signed > half, signed < -half


ANGLES_DEG = [0.0, 1.3, 17.0, 30.0, 44.0, 45.0, 46.0, 60.0, 73.0, 88.7, 90.0, 112.0, 135.0, 151.0, 178.0]


@pytest.mark.parametrize("nx", [4, 7, 12, 23, 40])
@pytest.mark.parametrize("kind", ["segment", "stroke"])
def test_thin_diagonal_walls_leave_no_face_connected_gap(nx, kind):
    domain = Domain(0.0, 1.0, 0.0, 0.75, nx)
    half = MIN_HALF_WIDTH_CELLS * domain.dx_m
    p = (0.4871, 0.3907)
    for angle in ANGLES_DEG:
        ux, uy = math.cos(math.radians(angle)), math.sin(math.radians(angle))
        a, b = (p[0] - 3 * ux, p[1] - 3 * uy), (p[0] + 3 * ux, p[1] + 3 * uy)
        if kind == "segment":
            shape = Segment(a, b, 1e-6, "wall")
        else:  # the same line drawn as a freehand path of uneven pieces
            shape = Stroke((a, (p[0] - 0.11 * ux, p[1] - 0.11 * uy), (p[0] + 0.02 * ux, p[1] + 0.02 * uy), b), 1e-6, "wall")
        free = raster_of(shape, domain=domain) == FLUID
        side_a, side_b = _split_sides(domain, p, angle, half)
        if not (side_a.any() and side_b.any()):
            continue  # the line hugs a corner at this coarse grid: nothing to separate
        leaked = reachable(free, side_a) & side_b
        assert not leaked.any(), (nx, angle)


def test_flood_fill_check_does_catch_a_leaky_wall():
    # A band thinner than half a cell must leak at some angle: shows the check above can fail.
    domain = Domain(0.0, 1.0, 0.0, 0.75, 23)
    p = (0.4871, 0.3907)
    leaks = 0
    x = domain.x_centres_m()[None, :]
    y = domain.y_centres_m()[:, None]
    for angle in ANGLES_DEG:
        nxv, nyv = -math.sin(math.radians(angle)), math.cos(math.radians(angle))
        signed = (x - p[0]) * nxv + (y - p[1]) * nyv
        free = np.abs(signed) > 0.3 * domain.dx_m
        side_a, side_b = signed > 0.3 * domain.dx_m, signed < -0.3 * domain.dx_m
        leaks += int((reachable(free, side_a) & side_b).any())
    assert leaks > 0


@pytest.mark.parametrize("nx", [9, 14, 25, 61])
def test_closed_thin_ring_holds_its_inside(nx):
    domain = Domain(0.0, 1.0, 0.0, 1.0, nx)
    c, r = (0.5123, 0.4977), 0.31
    ring = [(c[0] + r * math.cos(0.3 + 2 * math.pi * k / 7), c[1] + r * math.sin(0.3 + 2 * math.pi * k / 7)) for k in range(8)]
    free = raster_of(Stroke(tuple(ring), 1e-5, "wall"), domain=domain) == FLUID
    centre = np.zeros(domain.shape, dtype=bool)
    centre[domain.cell_index(*c)] = True
    border = np.zeros(domain.shape, dtype=bool)
    border[0, :] = border[-1, :] = border[:, 0] = border[:, -1] = True
    assert free[centre].all() and free[border].any()
    assert not (reachable(free, centre) & border).any()


def test_wide_paths_use_their_width_and_thin_ones_the_floor():
    domain = Domain(0.0, 1.0, 0.0, 0.5, 100)  # dx = 0.01
    wide = raster_of(Segment((0.2, 0.25), (0.8, 0.25), 0.1, "wall"), domain=domain)
    # rows whose centres lie within 0.05 of y = 0.25: centres 0.205 ... 0.295 -> 10 rows
    assert np.count_nonzero(wide[:, 50]) == 10
    thin = raster_of(Segment((0.2, 0.25), (0.8, 0.25), 1e-5, "wall"), domain=domain)
    # within 0.75 dx = 0.0075 of y = 0.25: centres 0.245 and 0.255
    assert np.flatnonzero(thin[:, 50]).tolist() == [24, 25]


# ----------------------------------------------------------------------------- mirror

def _upper_half_shapes():
    # Round coordinates on purpose: edges pass exactly through rows of cell centres.
    return (
        Rectangle((0.2, 0.05), (0.6, 0.24375), "wall"),
        Circle((1.0, 0.2), 0.15, "reservoir"),
        Polygon(((1.3, 0.0), (1.9, 0.1), (1.5, 0.45)), "stream"),
        Segment((0.1, 0.45), (1.9, 0.3), 0.02, "wall"),
        Stroke(((0.1, -0.1), (0.5, 0.1), (0.9, 0.05)), 0.005, "ambient"),
        Circle((1.2, 0.05), 0.1, "fluid"),
    )


def test_axis_mirror_gives_a_symmetric_mask():
    domain = Domain(0.0, 2.0, -0.5, 0.5, 160)  # symmetric about y = 0
    plain = raster_of(*_upper_half_shapes(), domain=domain)
    assert not np.array_equal(plain, plain[::-1])
    mask = raster_of(*_upper_half_shapes(), domain=domain, mirror="axis")
    assert np.array_equal(mask, mask[::-1])
    # every kind drawn survives in the upper half
    assert set(np.unique(mask[domain.ny // 2:])) == {FLUID, WALL, RESERVOIR, STREAM, AMBIENT}


@pytest.mark.parametrize("y_range,nx", [((0.1, 0.9), 160), ((0.0, 0.63), 100), ((-0.2, 0.53), 111)])
def test_midline_mirror_gives_a_symmetric_mask(y_range, nx):
    domain = Domain(0.0, 2.0, y_range[0], y_range[1], nx)  # even and odd ny
    mask = raster_of(*_upper_half_shapes(), domain=domain, mirror="midline")
    assert np.array_equal(mask, mask[::-1])
    assert np.count_nonzero(mask) > 0.05 * mask.size


def test_mirror_image_is_painted_right_after_its_shape():
    domain = Domain(0.0, 1.0, -0.5, 0.5, 40)
    wall = Rectangle((0.1, 0.1), (0.9, 0.4), "wall")       # upper half; its image is in the lower half
    hole = Circle((0.5, -0.25), 0.1, "fluid")            # lower half, on top of the wall's image
    mask = raster_of(wall, hole, domain=domain, mirror="axis")
    assert mask[domain.cell_index(0.5, -0.25)] == FLUID   # the image came before the hole
    assert mask[domain.cell_index(0.5, 0.25)] == FLUID    # and the hole's image erased the wall
    assert mask[domain.cell_index(0.2, -0.2)] == WALL
    assert np.array_equal(mask, mask[::-1])


def test_axis_mirror_off_the_grid_paints_the_reflected_shapes():
    # y = 0 is neither a face nor a centre row here, so the reflected shapes are painted as shapes.
    domain = Domain(0.0, 2.0, -0.4037, 0.5, 160)
    shapes = (Circle((0.7031, 0.2113), 0.1717, "wall"), Segment((1.1, 0.05), (1.8, 0.31), 0.0123, "reservoir"))
    mirrored = raster_of(*shapes, domain=domain, mirror="axis")
    explicit = raster_of(shapes[0], shapes[0].mirrored_about_y(0.0), shapes[1], shapes[1].mirrored_about_y(0.0),
                         domain=domain)
    assert np.array_equal(mirrored, explicit)
    assert np.array_equal(mirrored, oracle_mask(
        [shapes[0], shapes[0].mirrored_about_y(0.0), shapes[1], shapes[1].mirrored_about_y(0.0)], domain))
    assert mirrored[domain.cell_index(0.7031, -0.2113)] == WALL


def test_axis_mirror_on_a_radius_domain_adds_nothing_inside():
    # Axisymmetric domains start at y = 0: the image lies below the domain.
    domain = Domain(0.0, 1.0, 0.0, 0.5, 50)
    shapes = (Circle((0.4, 0.1), 0.2, "wall"), Polygon(((0.5, 0.3), (0.9, 0.2), (0.8, 0.45)), "reservoir"))
    assert np.array_equal(raster_of(*shapes, domain=domain, mirror="axis"), raster_of(*shapes, domain=domain))


def test_mirror_reaches_shapes_drawn_outside_the_domain():
    # A shape entirely below the domain still paints its image inside it.
    domain = Domain(0.0, 1.0, -0.2, 0.5, 50)  # dx = 0.02; y = 0 lies on a cell face
    below = Circle((0.5, -0.35), 0.1, "wall")
    mask = np.zeros(domain.shape, dtype=np.uint8)
    paint_mirrored(mask, below, domain, 0.0)
    expected = raster_of(Circle((0.5, 0.35), 0.1, "wall"), domain=domain)
    assert np.count_nonzero(mask) > 50
    assert np.count_nonzero(mask != expected) <= 4  # equal up to cells whose centres tie with the rim


# ----------------------------------------------------------------------------- domain edges and clipping

def test_rectangle_on_the_domain_edges_covers_every_cell():
    domain = Domain(-0.3, 0.7, 0.2, 0.7, 33)
    mask = raster_of(Rectangle((0.7, 0.2 + domain.ny * domain.dx_m), (-0.3, 0.2), "wall"), domain=domain)
    assert np.all(mask == WALL)


def test_paths_along_domain_edges_paint_the_edge_cells_only():
    domain = Domain(0.0, 1.0, 0.0, 0.5, 40)
    bottom = raster_of(Segment((0.0, 0.0), (1.0, 0.0), 1e-6, "wall"), domain=domain)
    assert np.all(bottom[0] == WALL) and np.count_nonzero(bottom) == domain.nx
    right = raster_of(Stroke(((1.0, 0.0), (1.0, 0.5)), 1e-6, "wall"), domain=domain)
    assert np.all(right[:, -1] == WALL) and np.count_nonzero(right) == domain.ny


def test_circle_centred_on_a_domain_corner_paints_a_quarter_disc():
    domain = Domain(0.0, 1.0, 0.0, 1.0, 800)
    r = 0.4
    mask = raster_of(Circle((0.0, 0.0), r, "wall"), domain=domain)
    exact = math.pi * r * r / 4.0  # exact geometry
    assert abs(painted_area_m2(mask, domain) - exact) <= 0.5 * (math.pi * r / 2 + 2 * r) * domain.dx_m


def test_triangle_with_vertices_on_domain_corners_paints_half_the_domain():
    domain = Domain(0.0, 1.0, 0.0, 1.0, 400)
    mask = raster_of(Polygon(((0.0, 0.0), (1.0, 0.0), (0.0, 1.0)), "wall"), domain=domain)
    assert painted_area_m2(mask, domain) == pytest.approx(0.5, abs=0.5 * (2 + math.sqrt(2)) * domain.dx_m)
    assert mask[0, 0] == WALL and mask[-1, -1] == FLUID


def test_shapes_partly_outside_are_clipped():
    domain = Domain(0.0, 1.0, 0.0, 0.5, 40)  # dx = 0.025
    mask = raster_of(Rectangle((-1.0, -1.0), (0.5, 0.25), "wall"), domain=domain)
    assert np.all(mask[:10, :20] == WALL) and np.count_nonzero(mask) == 200

    # Circle whose centre is outside: circular segment r^2 acos(d/r) - d sqrt(r^2 - d^2) (exact geometry).
    fine = Domain(0.0, 1.0, 0.0, 0.5, 1000)
    r, d = 0.3, 0.1
    mask = raster_of(Circle((0.5, -d), r, "wall"), domain=fine)
    exact = r * r * math.acos(d / r) - d * math.sqrt(r * r - d * d)
    perimeter = r * 2 * math.acos(d / r) + 2 * math.sqrt(r * r - d * d)
    assert abs(painted_area_m2(mask, fine) - exact) <= 0.5 * perimeter * fine.dx_m

    stroke = Stroke(((-5.0, -5.0), (0.5, 0.25), (7.0, 0.25)), 0.05, "wall")
    assert np.array_equal(raster_of(stroke, domain=domain), oracle_mask([stroke], domain))


def test_shapes_wholly_outside_paint_nothing_and_huge_ones_everything():
    domain = Domain(0.0, 1.0, 0.0, 0.5, 40)
    outside = (
        Circle((3.0, 3.0), 1.0, "wall"),
        Rectangle((-2.0, -2.0), (-1.0, 2.0), "wall"),
        Polygon(((2.0, 0.0), (3.0, 0.0), (2.5, 1.0)), "wall"),
        Segment((-1.0, -1.0), (2.0, -1.0), 0.1, "wall"),
        Stroke(((-1.0, 0.6), (2.0, 0.6), (2.0, 3.0)), 0.1, "wall"),
    )
    assert np.all(raster_of(*outside, domain=domain) == FLUID)
    huge = Circle((0.5, 0.25), 1.0e5, "ambient")
    assert np.all(raster_of(huge, domain=domain) == AMBIENT)


def test_resolution_change_keeps_the_sketch():
    # The same metres at four resolutions: the painted circle centre stays put, within a cell.
    sketch = Sketch((Circle((0.6321, 0.2718), 0.13, "wall"),))
    for nx in (20, 80, 320, 1280):
        domain = Domain(0.0, 1.0, 0.0, 0.5, nx)
        mask = rasterise(sketch, domain)
        jj, ii = np.nonzero(mask)
        assert abs(domain.x_centres_m()[ii].mean() - 0.6321) <= domain.dx_m
        assert abs(domain.y_centres_m()[jj].mean() - 0.2718) <= domain.dx_m


def test_footprint_of_an_unknown_shape_is_refused():
    with pytest.raises(TypeError, match="not one of stroke"):
        footprint("circle", np.zeros(3), np.zeros(3), 0.1)
