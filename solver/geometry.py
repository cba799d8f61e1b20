"""Walls where they are drawn: the gas fraction of each cell and the open fraction of each face.

A sketch is vector shapes in metres; the grid is square cells. Instead of turning every cell wholly
into wall or gas (a staircase), each cell keeps the fraction of its area that is gas, and each
face the fraction of its length that is open (embedded-boundary or cut-cell finite volumes:
Colella, Graves, Keen and Modiano 2006; Pember et al. 1995 for the axisymmetric case).

Fractions are found by sub-cell sampling, once per sketch change, never per step:
  1. the kind (last shape painting it wins, as in `raster`) is evaluated on a lattice of points half a
     cell apart; a cell whose nine lattice points are not all wall or all gas is a *cut candidate*;
  2. each candidate is sampled on SAMPLES x SAMPLES sub-cell centres (its gas fraction, and in
     axisymmetric mode its radius moment), and on FACE_SAMPLES points along each of its faces.
Only wall samples close a cell; reservoir, stream and ambient samples count as gas (their cells keep
the kind of their centre, as painted by `raster`). A candidate whose gas falls apart into separate
pieces (a wall thinner than a cell crossing it) becomes a wall cell, so a thin wall never lets gas
through a cell; so does a cell without gas or with every face closed. Faces beside wall cells are closed.

A change of the sketch need not sample everything again: a cell's samples depend only on the kinds at
points of that cell, so `resample_walls` samples again only the cells the added, removed or changed shapes
can reach (with a margin) and keeps the rest; steps 3 and 4 (kinds, slivers, closed faces) then run over the
whole grid as before, so the result equals the whole-sketch computation.

Everything the scheme needs follows from these numbers: a cut cell's wall has the area vector that
closes its faces (divergence theorem), so a uniform pressure exerts no net force on any cell,
whatever the sampling error.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit

from .domain import Domain
from .kinds import HELD_KINDS, PAINTABLE, CellKind
from .raster import _clip_pieces, _pad_m, footprint, mirror_line_m, path_half_width_m, points_array, rasterise
from .shapes import Segment, Sketch, Stroke

#: Sub-cell samples per cell side (gas fractions are multiples of 1 / SAMPLES^2).
SAMPLES = 16
#: Samples along each face of a cut cell. The wall's area vector is the difference of face fractions,
#: so their error turns the wall: with 16 samples a flat wall at 25 degrees came out a few degrees off
#: in single cells and the gas beside it lost 3-5 % of total pressure at Mach 2 whatever the cell size;
#: 512 samples keep the turn below about 0.1 degree.
FACE_SAMPLES = 512

_WALL = int(CellKind.WALL)


@dataclass(frozen=True)
class WallGeometry:
    """Cell kinds and the cut-cell fractions of one sketch on one domain.

    mask        (ny, nx) uint8: WALL where a cell holds no gas, held kinds by cell centre, FLUID else
    gas         (ny, nx) gas fraction of each cell's area (0 on wall cells)
    gas_r       (ny, nx) per-radian gas volume / dx^3, i.e. the gas area weighted by radius in cells
                ((j + 0.5) for a full cell of row j); used in axisymmetric mode
    open_x      (ny, nx + 1) open fraction of each x-face (face f lies left of cell f)
    open_x_r    (ny, nx + 1) radius moment of the open part of each x-face, in cells (per-radian area / dx^2)
    open_y      (ny + 1, nx) open fraction of each y-face (face f lies below row f)
    drawn       (ny, nx) uint8 kind painted at each cell centre (what a probe at that cell reads)
    """

    mask: np.ndarray
    gas: np.ndarray
    gas_r: np.ndarray
    open_x: np.ndarray
    open_x_r: np.ndarray
    open_y: np.ndarray
    drawn: np.ndarray

    @property
    def cut(self) -> np.ndarray:
        """Gas cells that are not plain full cells: part wall, or a face partly or wholly closed."""
        fluid = self.mask == CellKind.FLUID
        partial = (self.gas < 1.0) | (self.open_x[:, :-1] < 1.0) | (self.open_x[:, 1:] < 1.0)
        partial |= (self.open_y[:-1, :] < 1.0) | (self.open_y[1:, :] < 1.0)
        return fluid & partial


def staircase_geometry(mask: np.ndarray) -> WallGeometry:
    """The geometry of a bare mask: each cell wholly wall or wholly gas (faces beside walls closed)."""
    mask = np.asarray(mask, dtype=np.uint8)
    ny, nx = mask.shape
    gas = (mask != _WALL).astype(float)
    rows = np.arange(ny, dtype=float)[:, None]
    open_x, open_y = _faces_from_cells(mask, np.ones((ny, nx + 1)), np.ones((ny + 1, nx)))
    return WallGeometry(mask.copy(), gas, gas * (rows + 0.5), open_x, open_x * (rows + 0.5), open_y, mask.copy())


def _faces_from_cells(mask: np.ndarray, open_x: np.ndarray, open_y: np.ndarray):
    """Close every face that has a wall cell on either side (domain-edge faces keep their value)."""
    wall = mask == _WALL
    open_x = open_x.copy()
    open_y = open_y.copy()
    open_x[:, :-1][wall] = 0.0
    open_x[:, 1:][wall] = 0.0
    open_y[:-1, :][wall] = 0.0
    open_y[1:, :][wall] = 0.0
    return open_x, open_y


def _painted_shapes(sketch: Sketch, domain: Domain):
    """Shapes in paint order, each followed by its reflection when the sketch is mirrored."""
    y_line = mirror_line_m(sketch.mirror, domain)
    out = []
    for shape in sketch.shapes:
        out.append(shape)
        if y_line is not None:
            out.append(mirror_of(shape, y_line))
    return out


def mirror_of(shape, y_line_m: float):
    """The shape's reflection about y = y_line_m, made once per line and kept on the frozen shape."""
    kept = shape.__dict__.get("_mirror")
    if kept is None or kept[0] != y_line_m:
        kept = (y_line_m, shape.mirrored_about_y(y_line_m))
        object.__setattr__(shape, "_mirror", kept)
    return kept[1]


def _kinds_at(shapes, xs: np.ndarray, ys: np.ndarray, dx_m: float) -> np.ndarray:
    """Kind (uint8) at every point (xs[i], ys[j]) of ascending xs, ys: the last shape containing it."""
    out = np.full((ys.size, xs.size), int(CellKind.FLUID), np.uint8)
    if xs.size == 0 or ys.size == 0:
        return out
    pad = 0.75 * dx_m + 1e-12
    for shape in shapes:
        x0, y0, x1, y1 = shape.bounds_m()
        if x0 - pad > xs[-1] or x1 + pad < xs[0] or y0 - pad > ys[-1] or y1 + pad < ys[0]:
            continue
        i0, i1 = np.searchsorted(xs, x0 - pad, "left"), np.searchsorted(xs, x1 + pad, "right")
        j0, j1 = np.searchsorted(ys, y0 - pad, "left"), np.searchsorted(ys, y1 + pad, "right")
        if i0 >= i1 or j0 >= j1:
            continue
        inside = footprint(shape, xs[i0:i1], ys[j0:j1], dx_m)
        out[j0:j1, i0:i1][inside] = PAINTABLE[shape.paints]
    return out


@dataclass(frozen=True)
class _Samples:
    """What sub-cell sampling found (steps 1 and 2 of the module doc), before cell kinds are settled.

    Each cell's values depend only on the kinds at points of that cell (its inside and its edges), so a
    change of the sketch needs them again only in the cells its changed shapes can reach.
    all_wall, cand, broken (ny, nx) bool; gas, gas_r (ny, nx); open_x, open_x_r (ny, nx + 1); open_y (ny + 1, nx)
    """

    all_wall: np.ndarray
    cand: np.ndarray
    gas: np.ndarray
    gas_r: np.ndarray
    open_x: np.ndarray
    open_x_r: np.ndarray
    open_y: np.ndarray
    broken: np.ndarray


@dataclass(frozen=True)
class SampledWalls:
    """A sketch's WallGeometry on a domain together with its sub-cell samples, so that the next change of the
    sketch is sampled again only where it changed (resample_walls); `samples` is None when no shape paints
    wall (the staircase of the mask is then exact)."""

    sketch: Sketch
    domain: Domain
    samples_per_side: int
    face_samples: int
    geometry: WallGeometry
    samples: _Samples | None


def wall_geometry(sketch: Sketch, domain: Domain, samples: int = SAMPLES,
                  face_samples: int = FACE_SAMPLES) -> WallGeometry:
    """Gas fractions of cells and open fractions of faces of the sketch on the domain (see module doc)."""
    return sample_walls(sketch, domain, samples, face_samples).geometry


def sample_walls(sketch: Sketch, domain: Domain, samples: int = SAMPLES,
                 face_samples: int = FACE_SAMPLES) -> SampledWalls:
    """wall_geometry of the whole sketch, kept with its samples for resample_walls."""
    if not isinstance(sketch, Sketch):
        raise TypeError(f"sketch = {sketch!r} must be a solver.shapes.Sketch")
    centre_mask = rasterise(sketch, domain)
    shapes = _painted_shapes(sketch, domain)
    S, F = int(samples), int(face_samples)
    if not any(s.paints == "wall" for s in shapes):
        return SampledWalls(sketch, domain, S, F, staircase_geometry(centre_mask), None)
    ny, nx = domain.shape
    raw = _sample_block(shapes, domain, 0, ny, 0, nx, S, F)
    return SampledWalls(sketch, domain, S, F, _settle(raw, centre_mask, S), raw)


#: Above this share of the grid to sample again, a change is sampled whole (one pass costs less than many);
#: each window counts as this many cells more (its fixed cost: every shape's box is checked against it).
_WHOLE_SHARE = 0.5
_WINDOW_COST_CELLS = 1000


def resample_walls(previous: SampledWalls, sketch: Sketch) -> SampledWalls:
    """The SampledWalls of `sketch` on previous.domain, sampling again only the cells that shapes added,
    removed or changed since `previous` can reach; the result equals sample_walls(sketch, previous.domain).

    Shapes are compared in paint order: the common leading and trailing shapes are kept, everything between
    (in the old list and in the new) is a change. Cells keep their old samples where none of the changed
    shapes (nor their reflections) reaches: the kinds there come from the same shapes in the same order."""
    if not isinstance(previous, SampledWalls):
        raise TypeError(f"previous = {previous!r} must be a solver.geometry.SampledWalls")
    if not isinstance(sketch, Sketch):
        raise TypeError(f"sketch = {sketch!r} must be a solver.shapes.Sketch")
    domain, S, F = previous.domain, previous.samples_per_side, previous.face_samples
    if previous.samples is None or sketch.mirror != previous.sketch.mirror:
        return sample_walls(sketch, domain, S, F)
    shapes = _painted_shapes(sketch, domain)
    if not any(s.paints == "wall" for s in shapes):
        return sample_walls(sketch, domain, S, F)
    windows = _changed_windows(previous.sketch, sketch, domain)
    ny, nx = domain.shape
    if windows is None or sum((j1 - j0) * (i1 - i0) + _WINDOW_COST_CELLS
                              for j0, j1, i0, i1 in windows) > _WHOLE_SHARE * ny * nx:
        return sample_walls(sketch, domain, S, F)
    old = previous.samples
    raw = _Samples(*(np.array(a) for a in (old.all_wall, old.cand, old.gas, old.gas_r, old.open_x,
                                            old.open_x_r, old.open_y, old.broken)))
    for j0, j1, i0, i1 in windows:
        blk = _sample_block(shapes, domain, j0, j1, i0, i1, S, F)
        for name in ("all_wall", "cand", "gas", "gas_r", "broken"):
            getattr(raw, name)[j0:j1, i0:i1] = getattr(blk, name)
        # faces on the window's rim lie between unchanged cells (the window has a margin): keep them, unless
        # they are domain edges (one cell only, inside the window)
        a = 0 if i0 == 0 else 1
        b = (i1 - i0 + 1) if i1 == nx else (i1 - i0)
        raw.open_x[j0:j1, i0 + a:i0 + b] = blk.open_x[:, a:b]
        raw.open_x_r[j0:j1, i0 + a:i0 + b] = blk.open_x_r[:, a:b]
        a = 0 if j0 == 0 else 1
        b = (j1 - j0 + 1) if j1 == ny else (j1 - j0)
        raw.open_y[j0 + a:j0 + b, i0:i1] = blk.open_y[a:b, :]
    centre_mask = rasterise(sketch, domain)
    return SampledWalls(sketch, domain, S, F, _settle(raw, centre_mask, S), raw)


def _same(a, b) -> bool:
    return a is b or a == b


def _changed_windows(old: Sketch, new: Sketch, domain: Domain):
    """Cell windows (j0, j1, i0, i1) that hold every cell the shapes differing between the two sketches can
    reach, with a margin of two cells; None if the change cannot be bounded."""
    a, b = old.shapes, new.shapes
    n = min(len(a), len(b))
    p = 0
    while p < n and _same(a[p], b[p]):
        p += 1
    q = 0
    while q < n - p and _same(a[len(a) - 1 - q], b[len(b) - 1 - q]):
        q += 1
    changed = list(a[p:len(a) - q]) + list(b[p:len(b) - q])
    y_line = mirror_line_m(new.mirror, domain)
    dx = domain.dx_m
    ny, nx = domain.shape
    windows = []
    for shape in changed:
        boxes = _reach_boxes(shape, domain)
        if y_line is not None:
            boxes += [(x0, 2.0 * y_line - y1, x1, 2.0 * y_line - y0) for x0, y0, x1, y1 in boxes]
        for bx0, by0, bx1, by1 in boxes:
            cells = []
            for lo, hi, origin, count in ((by0, by1, domain.y_min_m, ny), (bx0, bx1, domain.x_min_m, nx)):
                k0 = (lo - origin) / dx
                k1 = (hi - origin) / dx
                if not (math.isfinite(k0) and math.isfinite(k1)):
                    return None
                cells.append((max(0, min(count, math.floor(k0) - 2)), max(0, min(count, math.floor(k1) + 3))))
            (j0, j1), (i0, i1) = cells
            if j0 < j1 and i0 < i1:
                windows.append((j0, j1, i0, i1))
    return windows


#: A path's reach is boxed in runs of about this many cells, so a long stroke or segment across the domain is
#: sampled again along itself, not over its whole bounding box.
_RUN_CELLS = 16.0


def _reach_boxes(shape, domain: Domain) -> list[tuple[float, float, float, float]]:
    """Boxes (x0, y0, x1, y1) in metres holding every point the shape can paint on the domain (a little more)."""
    dx = domain.dx_m
    slack = 1e-9 * dx
    if not isinstance(shape, (Segment, Stroke)):
        x0, y0, x1, y1 = shape.bounds_m()
        reach = _pad_m(shape, dx) + slack
        return [(x0 - reach, y0 - reach, x1 + reach, y1 + reach)]
    half = path_half_width_m(shape.width_m, dx) + slack
    pts = np.array((shape.start_m, shape.end_m)) if isinstance(shape, Segment) else points_array(shape)
    grow = half + 2.0 * dx
    a, b = _clip_pieces(pts[:-1], pts[1:], domain.x_min_m - grow, domain.x_max_m + grow,
                        domain.y_min_m - grow, domain.y_max_m + grow)
    if a.shape[0] == 0:
        return []
    run = _RUN_CELLS * dx
    n_sub = np.maximum(1, np.ceil(np.hypot(*(b - a).T) / run)).astype(np.int64)
    owner = np.repeat(np.arange(a.shape[0]), n_sub)
    step = np.arange(owner.size) - np.repeat(np.cumsum(n_sub) - n_sub, n_sub)
    f0 = (step / n_sub[owner])[:, None]
    f1 = ((step + 1) / n_sub[owner])[:, None]
    starts = a[owner] + (b[owner] - a[owner]) * f0
    ends = a[owner] + (b[owner] - a[owner]) * f1
    lo = np.minimum(starts, ends)
    hi = np.maximum(starts, ends)
    boxes = []
    bx0, by0 = lo[0]
    bx1, by1 = hi[0]
    for k in range(1, lo.shape[0]):
        nx0, ny0 = min(bx0, lo[k, 0]), min(by0, lo[k, 1])
        nx1, ny1 = max(bx1, hi[k, 0]), max(by1, hi[k, 1])
        if max(nx1 - nx0, ny1 - ny0) > run:  # this piece starts a new run
            boxes.append((bx0 - half, by0 - half, bx1 + half, by1 + half))
            bx0, by0, bx1, by1 = lo[k, 0], lo[k, 1], hi[k, 0], hi[k, 1]
        else:
            bx0, by0, bx1, by1 = nx0, ny0, nx1, ny1
    boxes.append((bx0 - half, by0 - half, bx1 + half, by1 + half))
    return boxes


def _sample_block(shapes, domain: Domain, j0: int, j1: int, i0: int, i1: int, S: int, F: int) -> _Samples:
    """Steps 1 and 2 of the module doc on the cells [j0, j1) x [i0, i1) (faces of the block included)."""
    ny, nx = j1 - j0, i1 - i0
    dx = domain.dx_m
    # 1. the half-cell lattice: candidates are cells whose 3 x 3 lattice points disagree on wall
    lx = domain.x_min_m + np.arange(2 * i0, 2 * i1 + 1) * (0.5 * dx)
    ly = domain.y_min_m + np.arange(2 * j0, 2 * j1 + 1) * (0.5 * dx)
    lat_wall = _kinds_at(shapes, lx, ly, dx) == _WALL
    any_wall = np.zeros((ny, nx), bool)
    all_wall = np.ones((ny, nx), bool)
    for a in range(3):
        for b in range(3):
            blk = lat_wall[a:a + 2 * ny:2, b:b + 2 * nx:2]
            any_wall |= blk
            all_wall &= blk
    cand = any_wall & ~all_wall
    gas = np.where(all_wall, 0.0, 1.0)
    rows = (j0 + np.arange(ny, dtype=float))[:, None]
    gas_r = gas * (rows + 0.5)
    # face values of uniform cells: their lattice points along the face
    open_x = np.where(lat_wall[1::2, ::2], 0.0, 1.0)  # (ny, nx + 1): mid-point of each x-face
    open_y = np.where(lat_wall[::2, 1::2], 0.0, 1.0)  # (ny + 1, nx)
    broken = np.zeros((ny, nx), bool)
    # 2. sub-cell samples of the candidates, row by row
    sub = (np.arange(S) + 0.5) / S
    sub_f = (np.arange(F) + 0.5) / F
    for jl in np.nonzero(cand.any(axis=1))[0]:
        j = j0 + jl
        cols_l = np.nonzero(cand[jl])[0]
        cols = i0 + cols_l
        y_lo = domain.y_min_m + j * dx
        ys = y_lo + sub * dx
        xs_c = (domain.x_min_m + (cols[:, None] + sub[None, :]) * dx).ravel()
        block = (_kinds_at(shapes, xs_c, ys, dx) != _WALL).reshape(S, cols.size, S)  # gas samples
        frac, frac_r, split = _cell_fractions(block, j + sub)
        gas[jl, cols_l] = frac
        gas_r[jl, cols_l] = frac_r
        broken[jl, cols_l] = split
        xs_f = (domain.x_min_m + (cols[:, None] + sub_f[None, :]) * dx).ravel()
        edge = _kinds_at(shapes, xs_f, np.array([y_lo, y_lo + dx]), dx) != _WALL
        edge = edge.reshape(2, cols.size, F)
        open_y[jl, cols_l] = edge[0].mean(axis=1)
        open_y[jl + 1, cols_l] = edge[1].mean(axis=1)
    # x-faces of candidates: open fraction and radius moment from samples along each face
    open_x_r = _x_face_moments(shapes, domain, j0, i0, cand, open_x, open_x * (rows + 0.5), F)
    return _Samples(all_wall, cand, gas, gas_r, open_x, open_x_r, open_y, broken)


def _settle(raw: _Samples, centre_mask: np.ndarray, S: int) -> WallGeometry:
    """Steps 3 and 4 of the module doc over the whole grid: cell kinds, slivers, closed faces."""
    ny, nx = centre_mask.shape
    rows = np.arange(ny, dtype=float)[:, None]
    gas, gas_r, open_x, open_y, broken = raw.gas.copy(), raw.gas_r.copy(), raw.open_x.copy(), raw.open_y.copy(), raw.broken
    open_x_r = raw.open_x_r
    # 3. kinds: held cells keep their centre's kind; a cell with no gas or broken gas is wall. A sliver
    #    whose sub-cell samples all fell on wall but whose faces open (two or more) keeps a small estimate of its gas:
    #    closing its faces would turn the wall of its neighbours (see FACE_SAMPLES).
    held = np.isin(centre_mask, [int(k) for k in HELD_KINDS])
    mask = np.where(held, centre_mask, np.uint8(CellKind.FLUID)).astype(np.uint8)
    # a sliver is crossed by gas: open on two faces or more. A wall cell with one open face is a drawn edge
    # lying exactly on that face (a rectangle on the grid lines), not gas: it stays wall.
    n_open = ((open_x[:, :-1] > 0).astype(int) + (open_x[:, 1:] > 0) + (open_y[:-1] > 0) + (open_y[1:] > 0))
    sliver = (gas <= 0.0) & (n_open >= 2) & ~broken & ~held
    estimate = 0.25 * (open_x[:, :-1] + open_x[:, 1:]) * (open_y[:-1] + open_y[1:])
    gas = np.where(sliver, np.maximum(estimate, 0.25 / (S * S)), gas)
    gas_r = np.where(sliver, gas * (rows + 0.5), gas_r)
    solid = ((gas <= 0.0) | broken) & ~held
    gas = np.where(held, 1.0, gas)
    gas_r = np.where(held, rows + 0.5, gas_r)
    # 4. close faces beside wall cells; a gas cell closed on every face holds gas no flow can reach, and a
    #    small one open only to held cells or the domain edge has no gas cell to merge with: wall too
    while solid.any():
        mask[solid] = _WALL
        gas[solid] = 0.0
        gas_r[solid] = 0.0
        open_x, open_y = _faces_from_cells(mask, open_x, open_y)
        solid = ((mask == CellKind.FLUID) & (open_x[:, :-1] == 0) & (open_x[:, 1:] == 0)
                 & (open_y[:-1] == 0) & (open_y[1:] == 0)) | _stranded(mask, gas, open_x, open_y)
    open_x_r = np.where(open_x > 0.0, open_x_r, 0.0)
    return WallGeometry(mask, gas, gas_r, open_x, open_x_r, open_y, centre_mask)


#: Cells with less gas than this are merged with gas neighbours (solver.cut_cells); one without any is wall.
SMALL_GAS_FRACTION = 0.5


def _stranded(mask, gas, open_x, open_y) -> np.ndarray:
    """Small gas cells with no open face to another gas cell."""
    fluid = mask == CellKind.FLUID
    reach = np.zeros_like(fluid)
    reach[:, :-1] |= (open_x[:, 1:-1] > 0) & fluid[:, 1:]
    reach[:, 1:] |= (open_x[:, 1:-1] > 0) & fluid[:, :-1]
    reach[:-1, :] |= (open_y[1:-1] > 0) & fluid[1:, :]
    reach[1:, :] |= (open_y[1:-1] > 0) & fluid[:-1, :]
    return fluid & ~reach & (gas < SMALL_GAS_FRACTION)


def _x_face_moments(shapes, domain: Domain, j0: int, i0: int, cand: np.ndarray, open_x, open_x_r, S: int):
    """Radius moments (in cells) of the x-faces of candidate cells, from samples along each face; sets the
    open fractions of those faces in open_x. cand is the block of cells from row j0, column i0."""
    ny, nx = cand.shape
    dx = domain.dx_m
    sub = (np.arange(S) + 0.5) / S
    out = open_x_r.copy()
    faces = np.zeros((ny, nx + 1), bool)
    faces[:, :-1] |= cand
    faces[:, 1:] |= cand
    for jl in np.nonzero(faces.any(axis=1))[0]:
        j = j0 + jl
        fs_l = np.nonzero(faces[jl])[0]
        xs = domain.x_min_m + (i0 + fs_l) * dx
        ys = domain.y_min_m + (j + sub) * dx
        gas = _kinds_at(shapes, xs, ys, dx) != _WALL  # (S, len(fs))
        out[jl, fs_l] = np.sum(gas * (j + sub)[:, None], axis=0) / S
        open_x[jl, fs_l] = gas.mean(axis=0)
    return out


@njit(cache=True)
def _cell_fractions(block, r_s):
    """Gas fraction, radius moment (in cells) and whether the gas falls apart, for each cell n of the
    (S, n_cells, S) block of gas samples; r_s is the radius of each sample row, in cells."""
    S0, n_cells, S1 = block.shape
    frac = np.zeros(n_cells)
    frac_r = np.zeros(n_cells)
    split = np.zeros(n_cells, np.bool_)
    area = S0 * S1
    for n in range(n_cells):
        count = 0
        moment = 0.0
        for a in range(S0):
            row = 0
            for b in range(S1):
                if block[a, n, b]:
                    row += 1
            count += row
            moment += row * r_s[a]
        frac[n] = count / area
        frac_r[n] = moment / area
        if count > 0 and _pieces_kernel(block[:, n, :]) > 1:
            split[n] = True
    return frac, frac_r, split


@njit(cache=True)
def _pieces_kernel(cell):
    """Number of 4-connected pieces of True in a small boolean block (flood fill)."""
    n0, n1 = cell.shape
    label = np.zeros((n0, n1), np.int64)
    stack = np.empty((n0 * n1, 2), np.int64)
    count = 0
    for a in range(n0):
        for b in range(n1):
            if not cell[a, b] or label[a, b] != 0:
                continue
            count += 1
            top = 0
            stack[0, 0] = a
            stack[0, 1] = b
            label[a, b] = count
            top = 1
            while top > 0:
                top -= 1
                p = stack[top, 0]
                q = stack[top, 1]
                for d in range(4):
                    pp = p + (1 if d == 0 else (-1 if d == 1 else 0))
                    qq = q + (1 if d == 2 else (-1 if d == 3 else 0))
                    if 0 <= pp < n0 and 0 <= qq < n1 and cell[pp, qq] and label[pp, qq] == 0:
                        label[pp, qq] = count
                        stack[top, 0] = pp
                        stack[top, 1] = qq
                        top += 1
    return count

