"""Turn a sketch (metres) into the cell-kind mask (cells) of a domain.

A cell takes the kind of the last shape that contains its centre. Strokes and segments paint
every cell whose centre lies within max(width_m / 2, 0.75 dx) of the path. That floor keeps a
drawn wall watertight at any resolution: two face neighbours are dx apart, so where the line
between their centres crosses the path, one of the two lies within dx / 2 < 0.75 dx of it and
is painted; no face-connected chain of free cells can pass through a wall.

Each shape is evaluated only over the cells of its bounding box: vectorised numpy for rectangles and
circles, small numba kernels for polygons (edge by edge, reading only the edges near the asked rows, so
an outline of 15,000 points asked on a few rows costs those rows) and for paths (a freehand stroke has
hundreds of pieces, each scanned over its own small box; long pieces are cut so a thin diagonal wall
does not cost its whole box). A long outline's point array and sorted edges are kept on its frozen shape.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from shockslate.solver.domain import Domain
from shockslate.solver.kinds import PAINTABLE, CellKind
from shockslate.solver.shapes import Circle, Polygon, Rectangle, Segment, Shape, Sketch, Stroke

#: Smallest half-width of a painted path, in cells (see the module docstring for why > 0.5).
MIN_HALF_WIDTH_CELLS = 0.75

#: Path pieces longer than this many cells (or 4 half-widths) are split before painting.
_PIECE_CELLS = 32.0


def path_half_width_m(width_m: float, dx_m: float) -> float:
    """The half-width a stroke or segment is painted with on cells of size dx_m."""
    return max(0.5 * width_m, MIN_HALF_WIDTH_CELLS * dx_m)


def rasterise(sketch: Sketch, domain: Domain) -> np.ndarray:
    """The (ny, nx) uint8 mask of CellKind values for the sketch; unpainted cells are FLUID."""
    if not isinstance(sketch, Sketch):
        raise TypeError(f"sketch = {sketch!r} must be a solver.shapes.Sketch")
    if not isinstance(domain, Domain):
        raise TypeError(f"domain = {domain!r} must be a solver.domain.Domain")
    mask = np.full(domain.shape, CellKind.FLUID, dtype=np.uint8)
    mirror_y_m = mirror_line_m(sketch.mirror, domain)
    for shape in sketch.shapes:
        paint(mask, shape, domain)
        if mirror_y_m is not None:
            paint_mirrored(mask, shape, domain, mirror_y_m)
    return mask


def mirror_line_m(mirror: str, domain: Domain) -> float | None:
    """The y of the mirror line: 0 for "axis", the mid-height of the cell grid for "midline"."""
    if mirror == "none":
        return None
    if mirror == "axis":
        return 0.0
    if mirror == "midline":
        # The grid holds ny whole cells above y_min, so its mid-height is y_min + ny dx / 2.
        return domain.y_min_m + 0.5 * domain.ny * domain.dx_m
    raise ValueError(f"mirror = {mirror!r} is not allowed: must be one of none, axis, midline")


def paint(mask: np.ndarray, shape: Shape, domain: Domain) -> None:
    """Paint one shape's kind, in place, on every cell of `mask` whose centre the shape contains."""
    _check_mask(mask, domain)
    rows = _index_range(shape, domain, axis="y")
    cols = _index_range(shape, domain, axis="x")
    j0, j1 = max(rows[0], 0), min(rows[1], domain.ny)
    i0, i1 = max(cols[0], 0), min(cols[1], int(domain.nx))
    if j0 >= j1 or i0 >= i1:
        return
    xs = _centres(domain.x_min_m, domain.dx_m, i0, i1)
    ys = _centres(domain.y_min_m, domain.dx_m, j0, j1)
    inside = footprint(shape, xs, ys, domain.dx_m)
    mask[j0:j1, i0:i1][inside] = PAINTABLE[shape.paints]


def paint_mirrored(mask: np.ndarray, shape: Shape, domain: Domain, y_line_m: float) -> None:
    """Paint the shape's reflection about y = y_line_m, in place.

    When the line falls on a cell face or centre row (always so for the midline; for the axis
    when y_min is a multiple of dx / 2), the reflection is the shape's own footprint with the
    rows flipped, so the mask comes out exactly symmetric even where a shape edge passes
    through cell centres. Otherwise the reflected shape is painted as a shape of its own.
    """
    _check_mask(mask, domain)
    dx = domain.dx_m
    # Row j reflects onto row m - j, with m = 2 (y_line - y_min) / dx - 1.
    m = 2.0 * (y_line_m - domain.y_min_m) / dx - 1.0
    m_int = round(m)
    if abs(m - m_int) > 1e-9 * max(1.0, abs(m)):
        paint(mask, shape.mirrored_about_y(y_line_m), domain)
        return
    rows = _index_range(shape, domain, axis="y")  # source rows, possibly outside the grid
    k0, k1 = max(rows[0], m_int - domain.ny + 1), min(rows[1], m_int + 1)
    cols = _index_range(shape, domain, axis="x")
    i0, i1 = max(cols[0], 0), min(cols[1], int(domain.nx))
    if k0 >= k1 or i0 >= i1:
        return
    xs = _centres(domain.x_min_m, dx, i0, i1)
    ys = _centres(domain.y_min_m, dx, k0, k1)  # same formula as the direct paint: bitwise equal
    inside = footprint(shape, xs, ys, dx)
    target_rows = m_int - np.arange(k0, k1)
    block = mask[target_rows, i0:i1]
    block[inside] = PAINTABLE[shape.paints]
    mask[target_rows, i0:i1] = block


def footprint(shape: Shape, xs_m: np.ndarray, ys_m: np.ndarray, dx_m: float) -> np.ndarray:
    """Boolean (len(ys), len(xs)): whether the shape contains each point (xs[i], ys[j]).

    xs_m and ys_m must be ascending; dx_m sets the least painted half-width of paths.
    """
    xs_m = np.asarray(xs_m, dtype=np.float64)
    ys_m = np.asarray(ys_m, dtype=np.float64)
    if isinstance(shape, Rectangle):
        return _rectangle_footprint(shape, xs_m, ys_m)
    if isinstance(shape, Circle):
        return _circle_footprint(shape, xs_m, ys_m)
    if isinstance(shape, Polygon):
        return _polygon_footprint(shape, xs_m, ys_m)
    if isinstance(shape, Segment):
        return _path_footprint((shape.start_m, shape.end_m), shape.width_m, xs_m, ys_m, dx_m)
    if isinstance(shape, Stroke):
        return _path_footprint(points_array(shape), shape.width_m, xs_m, ys_m, dx_m)
    raise TypeError(f"shape = {shape!r} is not one of stroke, segment, rectangle, polygon, circle")


# ----------------------------------------------------------------------------- helpers

def _check_mask(mask: np.ndarray, domain: Domain) -> None:
    if not isinstance(mask, np.ndarray) or mask.dtype != np.uint8 or mask.shape != domain.shape:
        got = (getattr(mask, "shape", None), getattr(mask, "dtype", type(mask).__name__))
        raise ValueError(f"mask (shape, dtype) = {got!r} is not allowed: must be a uint8 array of shape {domain.shape}")


def _centres(origin_m: float, dx_m: float, k0: int, k1: int) -> np.ndarray:
    """Centres of cells k0..k1-1 (k may lie outside the grid): origin + (k + 0.5) dx."""
    return origin_m + (np.arange(k0, k1, dtype=np.float64) + 0.5) * dx_m


def _pad_m(shape: Shape, dx_m: float) -> float:
    """How far a shape can paint beyond its own bounds_m() (paths get the half-width floor)."""
    if isinstance(shape, (Segment, Stroke)):
        return max(0.0, path_half_width_m(shape.width_m, dx_m) - 0.5 * shape.width_m)
    return 0.0


def _index_range(shape: Shape, domain: Domain, axis: str) -> tuple[int, int]:
    """Cells [k0, k1) (unclipped) whose centres may lie inside the shape, with one cell of margin."""
    x0, y0, x1, y1 = shape.bounds_m()
    pad = _pad_m(shape, domain.dx_m)
    lo, hi, origin = (x0, x1, domain.x_min_m) if axis == "x" else (y0, y1, domain.y_min_m)
    k0 = math.floor((lo - pad - origin) / domain.dx_m - 0.5) - 1
    k1 = math.ceil((hi + pad - origin) / domain.dx_m - 0.5) + 2
    return k0, k1


def _rectangle_footprint(shape: Rectangle, xs: np.ndarray, ys: np.ndarray) -> np.ndarray:
    (ax, ay), (bx, by) = shape.corner_a_m, shape.corner_b_m
    in_x = (xs >= min(ax, bx)) & (xs <= max(ax, bx))
    in_y = (ys >= min(ay, by)) & (ys <= max(ay, by))
    return in_y[:, None] & in_x[None, :]


def _circle_footprint(shape: Circle, xs: np.ndarray, ys: np.ndarray) -> np.ndarray:
    cx, cy = shape.centre_m
    r = shape.radius_m
    return ((ys - cy) ** 2)[:, None] + ((xs - cx) ** 2)[None, :] <= r * r


def _polygon_footprint(shape: Polygon, xs: np.ndarray, ys: np.ndarray) -> np.ndarray:
    """Even-odd fill by scanlines: count, per row, the edge crossings left of each centre."""
    if ys.size == 0 or xs.size == 0:
        return np.zeros((ys.size, xs.size), dtype=bool)
    x1, y1, x2, y2, y_low, tallest = _polygon_edges(shape)
    # only edges whose lower end lies within [ys[0] - tallest, ys[-1]] can cross a row
    e0 = np.searchsorted(y_low, ys[0] - tallest, side="left")
    e1 = np.searchsorted(y_low, ys[-1], side="right")
    return _polygon_kernel(x1[e0:e1], y1[e0:e1], x2[e0:e1], y2[e0:e1], xs, ys)


def _polygon_edges(shape: Polygon):
    """The polygon's non-horizontal edges (x1, y1, x2, y2) sorted by their lower end, those lower ends, and
    the tallest edge's height: a query over a few rows then reads only the edges near them. Made once and
    kept on the frozen shape."""
    kept = shape.__dict__.get("_edges")
    if kept is None:
        pts = points_array(shape)
        x1, y1 = pts[:, 0], pts[:, 1]
        x2, y2 = np.roll(x1, -1), np.roll(y1, -1)
        keep = y1 != y2
        x1, y1, x2, y2 = x1[keep], y1[keep], x2[keep], y2[keep]
        low = np.minimum(y1, y2)
        order = np.argsort(low, kind="stable")
        tallest = float(np.max(np.abs(y2 - y1))) if order.size else 0.0
        kept = (x1[order].copy(), y1[order].copy(), x2[order].copy(), y2[order].copy(), low[order].copy(), tallest)
        object.__setattr__(shape, "_edges", kept)
    return kept


def points_array(shape: Polygon | Stroke) -> np.ndarray:
    """The (n, 2) float64 array of a polygon's or stroke's points, made once and kept on the frozen shape:
    a long outline is read on every change of the sketch, and turning 15,000 pairs into an array costs
    milliseconds each time."""
    pts = shape.__dict__.get("_points_xy")
    if pts is None:
        pts = np.asarray(shape.points_m, dtype=np.float64).reshape(-1, 2)
        pts.flags.writeable = False
        object.__setattr__(shape, "_points_xy", pts)
    return pts


@njit(cache=True)
def _polygon_kernel(ex1, ey1, ex2, ey2, xs, ys):
    """Even-odd inside test of the points (xs[i], ys[j]) against the edges (ex1, ey1)-(ex2, ey2).

    Edge by edge: an edge crosses the rows y with min(y1, y2) <= y < max(y1, y2) (one end above, the other at
    or below: a vertex on a row counts once), and each crossing toggles every point strictly to its right. The
    work is the number of edges plus the number of crossings, not edges times rows."""
    n_rows = ys.size
    n_cols = xs.size
    toggles = np.zeros((n_rows, n_cols + 1), np.uint8)
    for e in range(ex1.size):
        x1 = ex1[e]
        y1 = ey1[e]
        x2 = ex2[e]
        y2 = ey2[e]
        j0 = np.searchsorted(ys, min(y1, y2), side="left")
        j1 = np.searchsorted(ys, max(y1, y2), side="left")
        dy = y2 - y1
        for j in range(j0, j1):
            x_cross = x1 + (ys[j] - y1) * (x2 - x1) / dy
            toggles[j, np.searchsorted(xs, x_cross, side="right")] ^= 1
    inside = np.zeros((n_rows, n_cols), np.bool_)
    for j in range(n_rows):
        parity = 0
        for i in range(n_cols):
            parity ^= toggles[j, i]
            inside[j, i] = parity == 1
    return inside


def _path_footprint(points, width_m: float, xs: np.ndarray, ys: np.ndarray, dx_m: float) -> np.ndarray:
    """Cells within the path half-width of any piece of the polyline (round ends and joins)."""
    half = path_half_width_m(width_m, dx_m)
    inside = np.zeros((ys.size, xs.size), dtype=np.bool_)
    if ys.size == 0 or xs.size == 0:
        return inside
    pts = points if isinstance(points, np.ndarray) else np.asarray(points, dtype=np.float64)
    # Only the part of each piece near the sampled points can paint: clip the pieces to that box first, so a
    # piece kilometres long costs what its part over the domain costs.
    margin = half + (xs[-1] - xs[0]) * 1e-12 + 1e-300
    a, b = _clip_pieces(pts[:-1], pts[1:], xs[0] - margin, xs[-1] + margin, ys[0] - margin, ys[-1] + margin)
    if a.shape[0] == 0:
        return inside
    # Cut long pieces so each is scanned over a small box, not the whole diagonal's box.
    # Collinear pieces: their capsules together are exactly the capsule of the whole line.
    piece_max_m = max(_PIECE_CELLS * dx_m, 4.0 * half)
    n_pieces = np.maximum(1, np.ceil(np.hypot(*(b - a).T) / piece_max_m)).astype(np.int64)
    owner = np.repeat(np.arange(a.shape[0]), n_pieces)
    step = np.arange(owner.size) - np.repeat(np.cumsum(n_pieces) - n_pieces, n_pieces)
    f0 = (step / n_pieces[owner])[:, None]
    f1 = ((step + 1) / n_pieces[owner])[:, None]
    starts = a[owner] + (b[owner] - a[owner]) * f0
    ends = a[owner] + (b[owner] - a[owner]) * f1
    _capsules_kernel(inside, xs, ys, starts[:, 0].copy(), starts[:, 1].copy(), ends[:, 0].copy(), ends[:, 1].copy(), half)
    return inside


def _clip_pieces(a: np.ndarray, b: np.ndarray, x0: float, x1: float, y0: float, y1: float):
    """The parts of the pieces a-b inside the box [x0, x1] x [y0, y1] (Liang and Barsky 1984); pieces that miss it
    are dropped. A capsule's points within the box lie within its half-width of the clipped piece when the box
    was grown by that half-width, so the painted cells do not change. (A small numba kernel: a sketch's paths
    are clipped hundreds of times per change, once per sampled row, and numpy's fixed cost per call dominated.)"""
    a = np.ascontiguousarray(a, dtype=np.float64).reshape(-1, 2)
    b = np.ascontiguousarray(b, dtype=np.float64).reshape(-1, 2)
    return _clip_kernel(a, b, float(x0), float(x1), float(y0), float(y1))


@njit(cache=True)
def _clip_kernel(a, b, x0, x1, y0, y1):
    n = a.shape[0]
    out_a = np.empty((n, 2))
    out_b = np.empty((n, 2))
    kept = 0
    for k in range(n):
        dx = b[k, 0] - a[k, 0]
        dy = b[k, 1] - a[k, 1]
        t0 = 0.0
        t1 = 1.0
        keep = True
        for side in range(4):
            if side == 0:
                p, q = -dx, a[k, 0] - x0
            elif side == 1:
                p, q = dx, x1 - a[k, 0]
            elif side == 2:
                p, q = -dy, a[k, 1] - y0
            else:
                p, q = dy, y1 - a[k, 1]
            if p == 0.0:
                if q < 0.0:
                    keep = False
            else:
                r = q / p
                if p < 0.0:
                    t0 = max(t0, r)
                else:
                    t1 = min(t1, r)
        if keep and t0 <= t1:
            out_a[kept, 0] = a[k, 0] + t0 * dx
            out_a[kept, 1] = a[k, 1] + t0 * dy
            out_b[kept, 0] = a[k, 0] + t1 * dx
            out_b[kept, 1] = a[k, 1] + t1 * dy
            kept += 1
    return out_a[:kept].copy(), out_b[:kept].copy()


@njit(cache=True)
def _capsules_kernel(inside, xs, ys, ax, ay, bx, by, half):
    """Set inside[j, i] where (xs[i], ys[j]) lies within `half` of any piece a-b, scanning each piece's box."""
    half2 = half * half
    for s in range(ax.size):
        i0 = np.searchsorted(xs, min(ax[s], bx[s]) - half, side="left")
        i1 = np.searchsorted(xs, max(ax[s], bx[s]) + half, side="right")
        j0 = np.searchsorted(ys, min(ay[s], by[s]) - half, side="left")
        j1 = np.searchsorted(ys, max(ay[s], by[s]) + half, side="right")
        ux = bx[s] - ax[s]
        uy = by[s] - ay[s]
        length2 = ux * ux + uy * uy
        for j in range(j0, j1):
            py = ys[j] - ay[s]
            for i in range(i0, i1):
                px = xs[i] - ax[s]
                t = 0.0
                if length2 > 0.0:
                    t = (px * ux + py * uy) / length2
                    t = min(1.0, max(0.0, t))
                ex = px - t * ux
                ey = py - t * uy
                if ex * ex + ey * ey <= half2:
                    inside[j, i] = True
