"""The ideal one-dimensional nozzle figures, from the DRAWN geometry: the one place the page, summary.json,
report.html and the sweep report take them from.

The gas cross-section at x is read off the vector shapes (not the cell mask): along the line x = const the
shapes are painted in sketch order (each followed by its mirror image), and the section runs from the symmetry
line up to the nearest drawn wall (and, for a symmetry line inside the domain, down to the nearest wall below).
Its area is pi (y_top^2 - y_bottom^2) in axisymmetric mode (full revolution) and y_top - y_bottom in planar mode
(per metre of depth). The drawing does not change with the resolution, so neither do these figures.

- throat: the narrowest drawn section of the fed gas column (the walled run of x that holds a reservoir),
  between its start and the exit;
- exit: the section on the line of the station with role "exit" (else the end of the fed column);
- the resolved areas (what the cell mask gives at the same places) are reported beside them, labelled, so a
  reader sees what the solver's staircase makes of the drawing.

Ideal figures (isentropic, calorically perfect gas; all through shockslate.solver.relations):
[SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3: choked mass flow, c*, C_F, Isp; the
     divergence factor (1 + cos a)/2 of a cone (after Malina 1940) and sin(a)/a of a planar nozzle (from memory).
[N]  NACA Report 1135 (1953): isentropic relations, area-Mach relation.
[A]  J. D. Anderson, Modern Compressible Flow, ch. 5: the 1D nozzle regimes.
"""
from __future__ import annotations

import functools
import json
import math
from collections import OrderedDict
from dataclasses import asdict, dataclass, field
from typing import Optional

import numpy as np

from . import relations
from .domain import Domain
from .geometry import mirror_of
from .kinds import CellKind
from .raster import points_array
from .shapes import Circle, Polygon, Rectangle, Segment, Shape, Stroke

#: Standard gravity for specific impulse in seconds (exact by definition, CGPM 1901).
G0_M_S2 = 9.80665
#: Evenly spaced lines x = const at which the drawing is read, besides every vertex x (common practice, no
#: source: enough to find each walled run; the throat is then refined between the neighbouring lines).
SECTION_LINES = 2048
#: Golden-section steps refining the throat between its neighbouring lines (shrinks the bracket by 0.618^n).
REFINE_STEPS = 80
#: A shape with more vertices than this adds no reading lines of its own (30 polygons of 15,000 vertices would
#: ask for 900,000 lines); common practice, no source: 512 covers every hand-drawn or designed contour here
VERTEX_LINES_PER_SHAPE = 512
#: A polygon crossing the reading lines more often than this is read line by line instead of all lines at once,
#: so the memory of the batched reading stays bounded whatever the outline (common practice, no source: about
#: 100 MB of work arrays at most)
BATCH_CROSSINGS = 2_000_000
#: Solver shapes kept converted from their scenario models (one per model object), least recently used first
#: out past this many vertices in all: a change of a big sketch then converts only the shapes it adds, and a
#: sketch left behind is not held for long (common practice, no source: four times the 450,000 vertices of 30
#: polygons of 15,000 points)
SHAPES_KEPT_VERTICES = 2_000_000
#: Share of the divergent length, ending at the exit, over which the wall's half angle is fitted.
HALF_ANGLE_TAIL = 0.4


# ----------------------------------------------------------------------------- the drawing along one line

def _polygon_crossings(points, x: float) -> list[float]:
    """y where the closed polygon's edges cross the line x (half-open rule: a vertex on the line counts once).
    A plain loop for the usual few dozen vertices; numpy for long outlines (an imported contour)."""
    n = len(points)
    if n <= 64:
        ys = []
        for k in range(n):
            (x1, y1), (x2, y2) = points[k], points[(k + 1) % n]
            if (x1 > x) != (x2 > x):
                ys.append(y1 + (x - x1) * (y2 - y1) / (x2 - x1))
        return sorted(ys)
    return _edge_crossings(_edges_of(np.asarray(points, dtype=np.float64)), x)


def _edges_of(pts: np.ndarray) -> np.ndarray:
    """(4, n) x1, y1, x2, y2 of the edges of the closed polygon through the (n, 2) points."""
    x1, y1 = pts[:, 0], pts[:, 1]
    return np.ascontiguousarray(np.stack([x1, y1, np.roll(x1, -1), np.roll(y1, -1)]))


def _polygon_edges(shape: Polygon) -> np.ndarray:
    """The polygon's edges (_edges_of), made once and kept on the frozen shape: a long outline is read at
    thousands of lines, and turning 15,000 pairs into an array each time cost seconds."""
    edges = shape.__dict__.get("_edges_xy")
    if edges is None:
        edges = _edges_of(points_array(shape))
        object.__setattr__(shape, "_edges_xy", edges)
    return edges


def _edge_crossings(edges: np.ndarray, x: float) -> list[float]:
    """_polygon_crossings from the polygon's edges (the same arithmetic, so the same numbers)."""
    x1, y1, x2, y2 = edges
    hit = (x1 > x) != (x2 > x)
    return sorted((y1[hit] + (x - x1[hit]) * (y2[hit] - y1[hit]) / (x2[hit] - x1[hit])).tolist())


def _edge_crossings_on(edges: np.ndarray, xs: np.ndarray):
    """The polygon's intervals on every line of the ascending xs at once: (line index, y_lo, y_hi) arrays in
    order of line, then y, equal line by line to pairing _edge_crossings; None past BATCH_CROSSINGS.
    An edge crosses the line x when min(x1, x2) <= x < max(x1, x2) (the half-open rule), so the lines it
    crosses are one run of xs, found by bisection."""
    x1, y1, x2, y2 = edges
    first = np.searchsorted(xs, np.minimum(x1, x2), "left")
    count = np.searchsorted(xs, np.maximum(x1, x2), "left") - first
    total = int(count.sum())
    if total > BATCH_CROSSINGS:
        return None
    edge = np.repeat(np.arange(count.size), count)
    line = first[edge] + (np.arange(total) - (np.cumsum(count) - count)[edge])
    x = xs[line]
    y = y1[edge] + (x - x1[edge]) * (y2[edge] - y1[edge]) / (x2[edge] - x1[edge])
    order = np.lexsort((y, line))
    line, y = line[order], y[order]
    at = np.arange(total)
    start, end = np.searchsorted(line, line, "left"), np.searchsorted(line, line, "right")
    lower = np.flatnonzero(((at - start) % 2 == 0) & (at + 1 < end))  # crossings 0-1, 2-3, ... of each line
    return line[lower], y[lower], y[lower + 1]


def _capsule_interval(a: tuple, b: tuple, half: float, x: float) -> Optional[tuple[float, float]]:
    """The points of the line x within `half` of the segment a-b (a convex set, so one interval or none)."""
    ys = []
    for (cx, cy) in (a, b):
        d = x - cx
        if abs(d) <= half:
            s = math.sqrt(half * half - d * d)
            ys += [cy - s, cy + s]
    ux, uy = b[0] - a[0], b[1] - a[1]
    length = math.hypot(ux, uy)
    if length > 0.0:
        nx_, ny_ = -uy / length * half, ux / length * half
        quad = ((a[0] + nx_, a[1] + ny_), (b[0] + nx_, b[1] + ny_), (b[0] - nx_, b[1] - ny_),
                (a[0] - nx_, a[1] - ny_))
        for k in range(4):
            (x1, y1), (x2, y2) = quad[k], quad[(k + 1) % 4]
            if x1 == x2:
                if x1 == x:
                    ys += [y1, y2]
            elif min(x1, x2) <= x <= max(x1, x2):
                ys.append(y1 + (x - x1) * (y2 - y1) / (x2 - x1))
    return (min(ys), max(ys)) if ys else None


def shape_intervals(shape: Shape, x: float) -> list[tuple[float, float]]:
    """The y intervals of the line x that a drawn shape covers (drawn widths, no resolution floor)."""
    if isinstance(shape, Rectangle):
        (ax, ay), (bx, by) = shape.corner_a_m, shape.corner_b_m
        return [(min(ay, by), max(ay, by))] if min(ax, bx) <= x <= max(ax, bx) else []
    if isinstance(shape, Circle):
        d = x - shape.centre_m[0]
        if abs(d) > shape.radius_m:
            return []
        s = math.sqrt(shape.radius_m ** 2 - d * d)
        return [(shape.centre_m[1] - s, shape.centre_m[1] + s)]
    if isinstance(shape, Polygon):
        ys = _polygon_crossings(shape.points_m, x)
        return [(ys[k], ys[k + 1]) for k in range(0, len(ys) - 1, 2)]
    if isinstance(shape, Segment):
        piece = _capsule_interval(shape.start_m, shape.end_m, 0.5 * shape.width_m, x)
        return [piece] if piece else []
    if isinstance(shape, Stroke):
        pts = shape.points_m
        pieces = (_capsule_interval(pts[k], pts[k + 1], 0.5 * shape.width_m, x) for k in range(len(pts) - 1))
        return [p for p in pieces if p]
    raise TypeError(f"shape = {shape!r} is not one of stroke, segment, rectangle, polygon, circle")


def _paint(line: list[tuple[float, float, str]], lo: float, hi: float, kind: str) -> list[tuple[float, float, str]]:
    """Paint [lo, hi] with `kind` over a sorted list of disjoint painted intervals (later paint wins)."""
    out = []
    for a, b, k in line:
        if b < lo or a > hi:
            out.append((a, b, k))
            continue
        if a < lo:
            out.append((a, lo, k))
        if b > hi:
            out.append((hi, b, k))
    out.append((lo, hi, kind))
    out.sort()
    return out


@dataclass(frozen=True)
class Drawing:
    """What the section reader needs of a scenario: shapes in paint order (mirror images included), the domain
    extent, the symmetry line and the mode. Built once per scenario (`drawing`).

    A line is read on its own (`painted`, `section`) or many lines at once (`painted_lines`, `sections`); both
    paint the same intervals in the same order, so they give the same numbers."""

    shapes: tuple[Shape, ...]
    x_min_m: float
    x_max_m: float
    y_min_m: float
    y_max_m: float
    axis_y_m: float
    mode: str
    vertex_x_m: tuple[float, ...]
    #: per shape, the x range it can cover, and for a stroke its pieces (ax, ay, bx, by, x_lo, x_hi), so a line
    #: only looks at the shapes and pieces it crosses (a freehand stroke has hundreds of pieces)
    x_ranges: tuple[tuple[float, float], ...] = field(default=(), repr=False, compare=False)
    pieces: tuple[Optional[np.ndarray], ...] = field(default=(), repr=False, compare=False)

    def __post_init__(self) -> None:
        ranges = []
        for shape in self.shapes:
            x0, _, x1, _ = shape.bounds_m()
            ranges.append((x0, x1))
        object.__setattr__(self, "x_ranges", tuple(ranges))
        object.__setattr__(self, "pieces", tuple(_stroke_pieces(s) if isinstance(s, Stroke) else None
                                                 for s in self.shapes))

    def _intervals(self, k: int, x: float) -> list[tuple[float, float]]:
        shape, pieces = self.shapes[k], self.pieces[k]
        if isinstance(shape, Polygon):
            ys = _edge_crossings(_polygon_edges(shape), x)
            return [(ys[j], ys[j + 1]) for j in range(0, len(ys) - 1, 2)]
        if pieces is None:
            return shape_intervals(shape, x)
        return _capsules_on_line(pieces, 0.5 * shape.width_m, x)

    def _intervals_on(self, k: int, xs: np.ndarray, i0: int, i1: int):
        """(line index, y_lo, y_hi) of shape k on the lines xs[i0:i1] (all within its x range), in the order
        `_intervals` gives them line by line: numpy for polygons, circles and rectangles, else line by line."""
        shape = self.shapes[k]
        part = xs[i0:i1]
        if isinstance(shape, Polygon):
            found = _edge_crossings_on(_polygon_edges(shape), part)
            if found is not None:
                line, lo, hi = found
                return zip((line + i0).tolist(), lo.tolist(), hi.tolist())
        elif isinstance(shape, Circle):
            d = part - shape.centre_m[0]
            on = np.flatnonzero(np.abs(d) <= shape.radius_m)
            s = np.sqrt(shape.radius_m ** 2 - d[on] * d[on])
            cy = shape.centre_m[1]
            return zip((on + i0).tolist(), (cy - s).tolist(), (cy + s).tolist())
        elif isinstance(shape, Rectangle):
            (ax, ay), (bx, by) = shape.corner_a_m, shape.corner_b_m
            on = np.flatnonzero((min(ax, bx) <= part) & (part <= max(ax, bx)))
            return ((int(i), min(ay, by), max(ay, by)) for i in on + i0)
        return ((i, lo, hi) for i in range(i0, i1) for lo, hi in self._intervals(k, float(xs[i])))

    def painted(self, x: float) -> list[tuple[float, float, str]]:
        """The painted intervals of the line x, clipped to the domain height, in order of y."""
        line: list[tuple[float, float, str]] = []
        for k, shape in enumerate(self.shapes):
            x0, x1 = self.x_ranges[k]
            if x < x0 or x > x1:
                continue
            for lo, hi in self._intervals(k, x):
                lo, hi = max(lo, self.y_min_m), min(hi, self.y_max_m)
                if hi >= lo:
                    line = _paint(line, lo, hi, shape.paints)
        return line

    def painted_lines(self, xs: np.ndarray) -> list[list[tuple[float, float, str]]]:
        """`painted` of every line of the ascending xs, each shape read on all its lines at once."""
        xs = np.asarray(xs, dtype=np.float64)
        lines: list[list[tuple[float, float, str]]] = [[] for _ in range(xs.size)]
        for k, shape in enumerate(self.shapes):
            x0, x1 = self.x_ranges[k]
            i0, i1 = int(np.searchsorted(xs, x0, "left")), int(np.searchsorted(xs, x1, "right"))
            if i0 >= i1:
                continue
            for i, lo, hi in self._intervals_on(k, xs, i0, i1):
                lo, hi = max(lo, self.y_min_m), min(hi, self.y_max_m)
                if hi >= lo:
                    lines[i] = _paint(lines[i], lo, hi, shape.paints)
        return lines

    def sections(self, xs) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """`section` of every line of xs (any order): area, y_bottom, y_top, reservoir-on-line arrays."""
        xs = np.asarray(xs, dtype=np.float64).ravel()
        order = np.argsort(xs, kind="stable")
        found = [self._section_of(line) for line in self.painted_lines(xs[order])]
        area, bottom, top = (np.empty(xs.size) for _ in range(3))
        fed = np.zeros(xs.size, dtype=bool)
        if found:
            for col, values in zip((area, bottom, top, fed), zip(*found)):
                col[order] = values
        return area, bottom, top, fed

    def section(self, x: float) -> tuple[float, float, float, bool]:
        """(area, y_bottom, y_top, reservoir on this line) of the gas column at x; area NaN if not walled."""
        return self._section_of(self.painted(x))

    def _section_of(self, line: list[tuple[float, float, str]]) -> tuple[float, float, float, bool]:
        walls = [(a, b) for a, b, k in line if k == "wall"]
        fed = any(k == "reservoir" for _, _, k in line)
        ya = self.axis_y_m
        nan = (math.nan, math.nan, math.nan, fed)
        if any(a <= ya < b or (a < ya <= b) for a, b in walls):
            return nan
        above = [a for a, b in walls if a > ya]
        if not above:
            return nan
        top = min(above)
        if ya > self.y_min_m:
            below = [b for a, b in walls if b < ya]
            if not below:
                return nan
            bottom = max(below)
        else:
            bottom = ya
        if self.mode == "axisymmetric":
            area = math.pi * (top * top - max(bottom, 0.0) ** 2)
        else:
            area = top - bottom
        return area, bottom, top, fed

    def area_m2(self, x: float) -> float:
        return self.section(x)[0]


def symmetry_line_m(mode: str, mirror: str, y_min_m: float, y_max_m: float) -> float:
    """y of the symmetry line: the mid-height for a planar sketch mirrored about its midline, y = 0 when it lies
    in the domain (always so in axisymmetric mode), else the bottom edge."""
    if mode == "planar" and mirror == "midline":
        return 0.5 * (y_min_m + y_max_m)
    if y_min_m <= 0.0 < y_max_m:
        return 0.0
    return y_min_m


def _stroke_pieces(shape: Stroke) -> np.ndarray:
    """(n - 1, 9) ax, ay, bx, by, x_lo, x_hi, off_x, off_y, length of a stroke's pieces (x_lo, x_hi: the x range
    each can cover; off: the half-width offset normal to the piece, as _capsule_interval makes it), in order of
    x_lo (what a line reads of them does not depend on their order), made once and kept on the frozen shape."""
    pieces = shape.__dict__.get("_nozzle_pieces")
    if pieces is None:
        pts = points_array(shape)
        a, b, h = pts[:-1], pts[1:], 0.5 * shape.width_m
        ux, uy = b[:, 0] - a[:, 0], b[:, 1] - a[:, 1]
        length = np.hypot(ux, uy)
        with np.errstate(divide="ignore", invalid="ignore"):
            off_x = np.where(length > 0.0, -uy / length * h, 0.0)
            off_y = np.where(length > 0.0, ux / length * h, 0.0)
        pieces = np.column_stack([a, b, np.minimum(a[:, 0], b[:, 0]) - h, np.maximum(a[:, 0], b[:, 0]) + h,
                                  off_x, off_y, length])
        pieces = np.ascontiguousarray(pieces[np.argsort(pieces[:, 4], kind="stable")])
        object.__setattr__(shape, "_nozzle_pieces", pieces)
    return pieces


def _capsules_on_line(pieces: np.ndarray, half: float, x: float) -> list[tuple[float, float]]:
    """What a stroke covers on the line x: each piece's capsule interval (_capsule_interval, all pieces near the
    line at once), joined where they overlap or touch, in order of y. A long freehand stroke has thousands of
    pieces on some lines; painted one by one they took minutes for one 15,000-point stroke. Joining changes no
    section: the pieces paint the same kind, and a section reads only where walls begin and end."""
    x_lo = pieces[:, 4]
    widest = float(np.max(pieces[:, 5] - x_lo)) if pieces.shape[0] else 0.0
    near = pieces[np.searchsorted(x_lo, x - widest, "left"): np.searchsorted(x_lo, x, "right")]
    near = near[x <= near[:, 5]]
    if near.shape[0] == 0:
        return []
    lo, hi = np.full(near.shape[0], math.inf), np.full(near.shape[0], -math.inf)
    for cx, cy in ((near[:, 0], near[:, 1]), (near[:, 2], near[:, 3])):  # the round ends
        d = x - cx
        on = np.abs(d) <= half
        s = np.sqrt(np.where(on, half * half - d * d, 0.0))
        lo, hi = np.where(on, np.minimum(lo, cy - s), lo), np.where(on, np.maximum(hi, cy + s), hi)
    ax, ay, bx, by, ox, oy = (near[:, c] for c in (0, 1, 2, 3, 6, 7))
    quad = ((ax + ox, ay + oy), (bx + ox, by + oy), (bx - ox, by - oy), (ax - ox, ay - oy))
    has_length = near[:, 8] > 0.0
    for k in range(4):  # the sides of the band between them
        (x1, y1), (x2, y2) = quad[k], quad[(k + 1) % 4]
        upright = x1 == x2
        on = has_length & upright & (x1 == x)
        lo, hi = np.where(on, np.minimum(lo, np.minimum(y1, y2)), lo), np.where(on, np.maximum(hi, np.maximum(y1, y2)), hi)
        on = has_length & ~upright & (np.minimum(x1, x2) <= x) & (x <= np.maximum(x1, x2))
        with np.errstate(divide="ignore", invalid="ignore"):
            y = y1 + (x - x1) * (y2 - y1) / (x2 - x1)
        lo, hi = np.where(on, np.minimum(lo, y), lo), np.where(on, np.maximum(hi, y), hi)
    found = np.isfinite(lo)
    lo, hi = lo[found], hi[found]
    if lo.size == 0:
        return []
    order = np.argsort(lo, kind="stable")
    lo, reach = lo[order], np.maximum.accumulate(hi[order])
    first = np.flatnonzero(np.concatenate([[True], lo[1:] > reach[:-1]]))
    last = np.concatenate([first[1:], [lo.size]]) - 1
    return list(zip(lo[first].tolist(), reach[last].tolist()))


def _vertex_count(shape: Shape) -> int:
    return len(shape.points_m) if isinstance(shape, (Polygon, Stroke)) else 2


def _vertices_x(shape: Shape) -> list[float]:
    if isinstance(shape, (Polygon, Stroke)):
        return [p[0] for p in shape.points_m]
    if isinstance(shape, Segment):
        return [shape.start_m[0], shape.end_m[0]]
    if isinstance(shape, Rectangle):
        return [shape.corner_a_m[0], shape.corner_b_m[0]]
    return [shape.centre_m[0]]


def _shape_of(model) -> Shape:
    """The solver shape of a scenario's shape model (model.to_shape()), converted once per model object: the
    scenario after a change holds the same model objects for the shapes it kept (server/session.py), so a
    change of a big sketch converts only what it adds. The model is kept with its shape, so its id is not reused
    while the entry lives."""
    kept = _SHAPES.get(id(model))
    if kept is not None and kept[0] is model:
        _SHAPES.move_to_end(id(model))
        return kept[1]
    return _remember(model, model.to_shape())


def remember_shapes(models, shapes) -> None:
    """Take the solver shapes already made from these scenario models (model.to_shape(), in the same order): the
    live session converts a sketch once for its walls, and the drawn nozzle need not convert it again."""
    for model, shape in zip(models, shapes):
        kept = _SHAPES.get(id(model))
        if kept is None or kept[0] is not model:
            _remember(model, shape)


def _remember(model, shape: Shape) -> Shape:
    global _SHAPES_VERTICES
    _SHAPES[id(model)] = (model, shape, _vertex_count(shape))
    _SHAPES_VERTICES += _vertex_count(shape)
    while _SHAPES_VERTICES > SHAPES_KEPT_VERTICES and len(_SHAPES) > 1:
        _SHAPES_VERTICES -= _SHAPES.popitem(last=False)[1][2]
    return shape


#: id(model) -> (model, its shape, the shape's vertex count); the vertices of all of them
_SHAPES: "OrderedDict[int, tuple]" = OrderedDict()
_SHAPES_VERTICES = 0


def _drawing(scenario) -> Drawing:
    sketch = scenario.sketch
    dom = scenario.domain
    mirror_y = {"none": None, "axis": 0.0, "midline": 0.5 * (dom.y_min_m + dom.y_max_m)}[sketch.mirror]
    shapes: list[Shape] = []
    for model in sketch.shapes:
        shape = _shape_of(model)
        shapes.append(shape)
        if mirror_y is not None:
            shapes.append(mirror_of(shape, mirror_y))
    # corners are read exactly where they are drawn; a long outline (an imported contour, a big freehand sketch)
    # is read on the SECTION_LINES grid instead, its throat found by the golden-section refinement
    vx = sorted({x for s in shapes if _vertex_count(s) <= VERTEX_LINES_PER_SHAPE for x in _vertices_x(s)
                 if dom.x_min_m <= x <= dom.x_max_m})
    return Drawing(tuple(shapes), dom.x_min_m, dom.x_max_m, dom.y_min_m, dom.y_max_m,
                   symmetry_line_m(scenario.mode, sketch.mirror, dom.y_min_m, dom.y_max_m), scenario.mode,
                   tuple(vx))


# ----------------------------------------------------------------------------- the drawn nozzle

@dataclass(frozen=True)
class DrawnNozzle:
    """The fed gas column read off the drawing (SI; areas per metre of depth in planar mode)."""

    throat_area_m2: float
    throat_x_m: float
    exit_area_m2: float
    exit_x_m: float
    area_ratio: float
    divergence_half_angle_deg: float
    #: first and last line of the fed, walled run of the gas column (it may go on past the exit line)
    run_m: tuple[float, float]
    #: the lines where the drawing was read (within the run) and the drawn area there
    section_x_m: tuple[float, ...]
    section_area_m2: tuple[float, ...]


def _lines(d: Drawing) -> np.ndarray:
    span = d.x_max_m - d.x_min_m
    grid = d.x_min_m + (np.arange(SECTION_LINES) + 0.5) * (span / SECTION_LINES)
    return np.unique(np.concatenate([grid, np.asarray(d.vertex_x_m, float)]))


def _runs(flags: np.ndarray) -> list[tuple[int, int]]:
    """Contiguous runs of True as (first, last) index pairs."""
    out, start = [], None
    for i, f in enumerate(flags.tolist()):
        if f and start is None:
            start = i
        elif not f and start is not None:
            out.append((start, i - 1))
            start = None
    if start is not None:
        out.append((start, len(flags) - 1))
    return out


def _golden_min(f, a: float, b: float) -> tuple[float, float]:
    """(x, f(x)) of a minimum of f on [a, b] by golden-section search (NaN counts as +inf)."""
    inv = (math.sqrt(5.0) - 1.0) / 2.0

    def val(x):
        v = f(x)
        return v if math.isfinite(v) else math.inf

    c, e = b - inv * (b - a), a + inv * (b - a)
    fc, fe = val(c), val(e)
    for _ in range(REFINE_STEPS):
        if fc <= fe:
            b, e, fe = e, c, fc
            c = b - inv * (b - a)
            fc = val(c)
        else:
            a, c, fc = c, e, fe
            e = a + inv * (b - a)
            fe = val(e)
    return (c, fc) if fc <= fe else (e, fe)


def exit_line_x_m(scenario) -> Optional[float]:
    """x of the station with role "exit" (its midpoint's x), or None."""
    for st in scenario.stations:
        if st.role == "exit":
            return 0.5 * (st.start_m[0] + st.end_m[0])
    return None


def _key(scenario) -> tuple:
    """What the drawn figures depend on: the shapes (by model object: scenarios are immutable and a change keeps
    the models of the shapes it keeps; dumping a big sketch to compare it took about a second), the mirror,
    domain, mode and stations."""
    rest = json.dumps({"domain": scenario.domain.model_dump(mode="json"), "mode": scenario.mode,
                       "mirror": scenario.sketch.mirror,
                       "stations": [st.model_dump(mode="json") for st in scenario.stations]}, sort_keys=True)
    return tuple(id(m) for m in scenario.sketch.shapes), rest


def _kept(scenario) -> dict:
    """What has been worked out for this drawing (the Drawing, the DrawnNozzle), kept for the last few drawings
    (keyed by `_key`), since the page asks at every status. The box holds the shape models its key names, so
    their ids are not reused while it lives."""
    for obj, known in _KEYS:
        if obj is scenario:
            key = known
            break
    else:
        key = _key(scenario)
        _KEYS.append((scenario, key))
        del _KEYS[:-8]
    if key in _KEPT:
        _KEPT.move_to_end(key)
        return _KEPT[key]
    box: dict = {"models": tuple(scenario.sketch.shapes)}
    _KEPT[key] = box
    while len(_KEPT) > 32:
        _KEPT.popitem(last=False)
    return box


_KEPT: "OrderedDict[tuple, dict]" = OrderedDict()
#: (scenario object, its key) of the last few scenarios asked about; scenarios are not changed in place
_KEYS: list = []


def drawing(scenario) -> Drawing:
    """The Drawing of a scenario (solver.scenario.Scenario)."""
    box = _kept(scenario)
    if "drawing" not in box:
        box["drawing"] = _drawing(scenario)
    return box["drawing"]


def drawn_nozzle(scenario) -> Optional[DrawnNozzle]:
    """The drawn nozzle of a scenario, or None when the gas column is walled nowhere."""
    box = _kept(scenario)
    if "nozzle" not in box:
        box["nozzle"] = _drawn_nozzle(scenario)
    return box["nozzle"]


def drawn_nozzle_known(scenario) -> bool:
    """Whether drawn_nozzle(scenario) is worked out already (then it answers at once)."""
    return "nozzle" in _kept(scenario)


def drawing_vertices(scenario) -> int:
    """How many vertices the scenario's sketch has (what the drawn nozzle's reading time grows with)."""
    return sum(len(m.points_m) if hasattr(m, "points_m") else 2 for m in scenario.sketch.shapes)


def _drawn_nozzle(scenario) -> Optional[DrawnNozzle]:
    d = drawing(scenario)
    xs = _lines(d)
    area, _, _, fed_line = d.sections(xs)
    runs = _runs(np.isfinite(area) & (area > 0.0))
    if not runs:
        return None
    fed = [r for r in runs if fed_line[max(r[0] - 1, 0): r[1] + 2].any()]
    i0, i1 = max(fed or runs, key=lambda r: xs[r[1]] - xs[r[0]])
    x_exit = exit_line_x_m(scenario)
    j1 = i1  # the throat is looked for between the start of the run and the exit
    if x_exit is not None and xs[i0] <= x_exit <= xs[i1]:
        j1 = int(np.searchsorted(xs, x_exit, side="right")) - 1
        exit_x, exit_area = float(x_exit), d.area_m2(float(x_exit))
        if not (math.isfinite(exit_area) and exit_area > 0.0):
            exit_x, exit_area = float(xs[j1]), float(area[j1])
    else:
        exit_x, exit_area = float(xs[i1]), float(area[i1])
    k = i0 + int(np.argmin(area[i0: j1 + 1]))
    throat_x, throat_area = float(xs[k]), float(area[k])
    lo, hi = float(xs[max(k - 1, i0)]), float(xs[min(k + 1, j1)])
    if hi > lo:
        x_ref, a_ref = _golden_min(d.area_m2, lo, hi)
        if a_ref < throat_area:
            throat_x, throat_area = float(x_ref), float(a_ref)
    if exit_area < throat_area:  # an exit line at the narrowest place: it is the throat
        throat_x, throat_area = exit_x, exit_area
    return DrawnNozzle(
        throat_area_m2=throat_area, throat_x_m=throat_x, exit_area_m2=exit_area, exit_x_m=exit_x,
        area_ratio=exit_area / throat_area, divergence_half_angle_deg=_half_angle_deg(d, throat_x, exit_x),
        run_m=(float(xs[i0]), float(xs[i1])),
        section_x_m=tuple(float(x) for x in xs[i0: i1 + 1]), section_area_m2=tuple(float(a) for a in area[i0: i1 + 1]))


def _half_angle_deg(d: Drawing, throat_x: float, exit_x: float) -> float:
    """Angle to the axis of the drawn wall over the last HALF_ANGLE_TAIL of the divergent length (least squares)."""
    if exit_x <= throat_x:
        return 0.0
    xs = np.linspace(exit_x - HALF_ANGLE_TAIL * (exit_x - throat_x), exit_x, 41)
    tops = d.sections(xs)[2]
    ok = np.isfinite(tops)
    if ok.sum() < 3:
        return 0.0
    slope = float(np.polyfit(xs[ok], tops[ok], 1)[0])
    return math.degrees(math.atan(max(slope, 0.0)))


def drawn_area_m2(scenario, x_m: float) -> float:
    """The drawn gas section at x (NaN where the column is not walled)."""
    return drawing(scenario).area_m2(float(x_m))


# ----------------------------------------------------------------------------- the resolved (cell mask) areas

def resolved_column_areas_m2(mask: np.ndarray, domain: Domain, axis_y_m: float, mode: str,
                             gas: np.ndarray | None = None) -> np.ndarray:
    """Per cell column, the gas section the solver sees: from the symmetry line's row to the first wall cell
    above (and below, for a line inside the domain), NaN where the column is not walled. (nx,)

    gas: each cell's gas fraction (the solver's cut-cell geometry, solver/geometry.py); a cell a wall crosses
    then counts only its gas, so the section is that of the drawn wall as the solver resolves it. Without it
    every cell that is not wall counts whole."""
    walls = mask == CellKind.WALL
    frac = np.where(walls, 0.0, 1.0) if gas is None else np.where(walls, 0.0, gas)
    dx = domain.dx_m
    ja = 0 if axis_y_m <= domain.y_min_m else domain.cell_index(domain.x_min_m, axis_y_m)[0]
    above = walls[ja:, :]
    has_top = above.any(axis=0)
    k_top = np.argmax(above, axis=0)
    below = walls[: ja + 1, :][::-1]
    has_bottom = below.any(axis=0)
    k_bottom = np.argmax(below, axis=0)
    # gas of the rows ja .. ja + k_top - 1 (above) and ja - k_bottom + 1 .. ja - 1 (below)
    before_top = np.cumsum(above, axis=0) == 0
    gas_above = np.sum(frac[ja:, :] * before_top, axis=0)
    before_bottom = np.cumsum(below, axis=0) == 0
    gas_below = np.sum(frac[: ja + 1, :][::-1] * before_bottom, axis=0) - frac[ja, :]
    y_line = domain.y_min_m + ja * dx
    y_top = y_line + gas_above * dx
    y_bottom = np.where(has_bottom, y_line - gas_below * dx, domain.y_min_m)
    bounded = has_top & ~walls[ja, :] & (k_top > 0)
    if ja > 0:
        bounded &= has_bottom & (k_bottom > 0)
    if mode == "axisymmetric":
        area = math.pi * (y_top ** 2 - np.maximum(y_bottom, 0.0) ** 2)
    else:
        area = y_top - y_bottom
    return np.where(bounded, area, np.nan)


@dataclass(frozen=True)
class ResolvedAreas:
    """The same places on the cell mask: the narrowest column of the drawn run up to the exit, the exit column."""

    throat_area_resolved_m2: float
    exit_area_resolved_m2: float
    area_ratio_resolved: float


def resolved_areas(nozzle: DrawnNozzle, scenario, mask: np.ndarray, domain: Domain,
                   gas: np.ndarray | None = None) -> ResolvedAreas:
    """The resolved throat and exit areas; gas: the cells' gas fractions (see resolved_column_areas_m2)."""
    d = drawing(scenario)
    cols = resolved_column_areas_m2(mask, domain, d.axis_y_m, scenario.mode, gas)
    xc = domain.x_centres_m()
    in_run = (xc >= nozzle.run_m[0]) & (xc <= nozzle.exit_x_m) & np.isfinite(cols)
    throat = float(np.min(cols[in_run])) if in_run.any() else math.nan
    exit_ = float(cols[domain.cell_index(nozzle.exit_x_m, domain.y_min_m)[1]])
    ratio = exit_ / throat if throat > 0 and math.isfinite(exit_) else math.nan
    return ResolvedAreas(throat, exit_, ratio)


# ----------------------------------------------------------------------------- ideal figures

@dataclass(frozen=True)
class IdealFigures:
    """Ideal 1D figures of a nozzle of throat area A* expanding to area_ratio A/A* (SI)."""

    throat_area_m2: float
    area_ratio: float
    regime: str
    choked_mass_flow_kg_s: float
    ideal_exit_mach: float
    ideal_exit_pressure_pa: float
    ideal_thrust_coefficient: float
    ideal_thrust_coefficient_with_divergence: float
    c_star_m_s: float
    ideal_specific_impulse_s: float
    ideal_thrust_n: float

    def as_dict(self) -> dict:
        return asdict(self)


def divergence_factor(half_angle_deg: float, mode: str) -> float:
    """Momentum-thrust loss factor of a diverging exit flow: (1 + cos a)/2 for a cone, sin(a)/a for a
    two-dimensional (planar) nozzle. [SB] ch. 3, after Malina 1940 (from memory)."""
    a = math.radians(half_angle_deg)
    if mode == "axisymmetric":
        return 0.5 * (1.0 + math.cos(a))
    return math.sin(a) / a if a > 0 else 1.0


def ideal_figures(p0_pa: float, t0_k: float, p_amb_pa: float, gamma: float, r_j_kg_k: float,
                  throat_area_m2: float, area_ratio: float, divergence_factor: float = 1.0) -> IdealFigures:
    """Choked mass flow, c*, exit Mach and pressure, C_F (with and without the divergence factor), Isp and
    thrust of the ideal nozzle at the ambient pressure ([SB] ch. 3; area-Mach [N]; regimes [A] ch. 5).
    An area ratio below 1 is taken as 1 (the exit is the throat). Remembered for the last few inputs: the page
    asks for the same figures at every status, and the area-Mach inversions are iterative."""
    return _ideal_figures(float(p0_pa), float(t0_k), float(p_amb_pa), float(gamma), float(r_j_kg_k),
                          float(throat_area_m2), float(area_ratio), float(divergence_factor))


@functools.lru_cache(maxsize=1024)
def _ideal_figures(p0_pa: float, t0_k: float, p_amb_pa: float, gamma: float, r_j_kg_k: float,
                   throat_area_m2: float, area_ratio: float, divergence_factor: float) -> IdealFigures:
    eps = max(float(area_ratio), 1.0)
    me = float(relations.mach_from_area_ratio(eps, gamma, supersonic=True)) if eps > 1.0 else 1.0
    pe_p0 = float(relations.p_p0(me, gamma))
    pa_p0 = min(max(p_amb_pa / p0_pa, 0.0), 1.0)
    regime = relations.flow_regime(pa_p0, eps, gamma) if eps > 1.0 else "convergent only"
    mdot = relations.choked_mass_flow_kg_s(p0_pa, t0_k, throat_area_m2, gamma, r_j_kg_k)
    cf = relations.thrust_coefficient(pe_p0, pa_p0, eps, gamma)
    cf_div = divergence_factor * relations.momentum_thrust_coefficient(pe_p0, gamma) + (pe_p0 - pa_p0) * eps
    cstar = relations.c_star_m_s(t0_k, gamma, r_j_kg_k)
    return IdealFigures(throat_area_m2=float(throat_area_m2), area_ratio=eps, regime=regime,
                        choked_mass_flow_kg_s=mdot, ideal_exit_mach=me, ideal_exit_pressure_pa=pe_p0 * p0_pa,
                        ideal_thrust_coefficient=cf, ideal_thrust_coefficient_with_divergence=cf_div,
                        c_star_m_s=cstar, ideal_specific_impulse_s=cf * cstar / G0_M_S2,
                        ideal_thrust_n=cf * p0_pa * throat_area_m2)


def scenario_ideal(scenario, nozzle: DrawnNozzle, area_m2: Optional[float] = None,
                   with_divergence: bool = True) -> Optional[IdealFigures]:
    """The ideal figures of a scenario's drawn nozzle at its exit, or at a section of area_m2 downstream of the
    throat (None when that section is narrower than the throat)."""
    from .scenario import to_gas

    area = nozzle.exit_area_m2 if area_m2 is None else float(area_m2)
    if not (area > 0.0 and nozzle.throat_area_m2 > 0.0) or area / nozzle.throat_area_m2 < 1.0 - 1e-9:
        return None
    gas = to_gas(scenario)
    res, amb = scenario.conditions.reservoir, scenario.conditions.ambient
    lam = divergence_factor(nozzle.divergence_half_angle_deg, scenario.mode) if with_divergence else 1.0
    return ideal_figures(res.p0_pa, res.t0_k, amb.p_pa, gas.gamma, gas.r_j_kg_k, nozzle.throat_area_m2,
                         area / nozzle.throat_area_m2, lam)


def ideal_axis_mach(scenario, nozzle: DrawnNozzle, xs_m: np.ndarray, gamma: float) -> np.ndarray:
    """Isentropic 1D Mach number at each x from the drawn area ratio: subsonic before the throat, supersonic
    after; NaN outside the fed run. [N] area-Mach relation."""
    d = drawing(scenario)
    xs_m = np.asarray(xs_m, float)
    out = np.full(xs_m.shape, np.nan)
    lo, hi = nozzle.run_m
    inside = np.flatnonzero((lo <= xs_m) & (xs_m <= hi))
    for k, a in zip(inside.tolist(), d.sections(xs_m[inside])[0].tolist()):
        x = xs_m[k]
        if not (math.isfinite(a) and a > 0.0):
            continue
        ratio = max(a / nozzle.throat_area_m2, 1.0)
        out[k] = relations.mach_from_area_ratio(ratio, gamma, supersonic=bool(x >= nozzle.throat_x_m))
    return out
