"""The orientation of each wall cell, so a staircase of cells can act as the wall it approximates.

A sketch is painted onto square cells, so an inclined wall becomes a staircase. Mirroring the
gas about each cell face would make every step a tiny forward or backward step, which sheds
spurious entropy and thickens into a layer that chokes nozzles early. Instead each wall cell
reflects the gas about the local wall orientation, estimated from the mask itself with a
structure tensor (smoothed outer product of the gradient of the smoothed wall indicator). The tensor is
blind to the sign of the normal, which is what a reflection needs, and it stays defined inside
thin walls that have gas on both sides. Straight walls along the grid come out exactly along an
axis, so boxes of such walls conserve mass and energy to round-off.
"""
from __future__ import annotations

import numpy as np

from .kinds import CellKind

#: Gaussian smoothing of the structure tensor, in cells.
SIGMA_CELLS = 2.0
#: Orientations within this many degrees of a grid axis are snapped onto it.
SNAP_DEG = 1.0


def _smooth(a: np.ndarray) -> np.ndarray:
    R = int(3 * SIGMA_CELLS)
    offsets = np.arange(-R, R + 1)
    w = np.exp(-0.5 * (offsets / SIGMA_CELLS) ** 2)
    w /= w.sum()
    out = np.zeros_like(a)
    padded = np.pad(a, R, mode="edge")
    for o, wo in zip(offsets, w):
        out += wo * padded[R + o: R + o + a.shape[0], R: R + a.shape[1]]
    tmp = np.pad(out, R, mode="edge")
    out = np.zeros_like(a)
    for o, wo in zip(offsets, w):
        out += wo * tmp[R: R + a.shape[0], R + o: R + o + a.shape[1]]
    return out


def wall_normals(kind: np.ndarray, ghost: int) -> tuple[np.ndarray, np.ndarray]:
    """Unit normal (nx, ny) of every wall cell of a padded kind array (its sign is irrelevant).

    The orientation is estimated on the interior mask as if walls ran on unchanged beyond the
    domain edge; wall ghost bands get their edge's exact normal. Non-wall cells get (0, 0): the
    flux kernels tell walls by a non-zero normal.
    """
    g = ghost
    interior = kind[g:-g, g:-g] == CellKind.WALL
    smooth = np.pad(_smooth(interior.astype(float)), 1, mode="edge")  # np.gradient needs 2+ cells a side
    gy, gx = (g[1:-1, 1:-1] for g in np.gradient(smooth))
    jxx = _smooth(gx * gx)
    jxy = _smooth(gx * gy)
    jyy = _smooth(gy * gy)
    theta = 0.5 * np.arctan2(2.0 * jxy, jxx - jyy)
    deg = np.degrees(theta)
    near_x = np.abs(deg) <= SNAP_DEG
    near_y = np.abs(np.abs(deg) - 90.0) <= SNAP_DEG
    nx = np.zeros(kind.shape)
    ny = np.zeros(kind.shape)
    nx[g:-g, g:-g] = np.where(near_x, 1.0, np.where(near_y, 0.0, np.cos(theta)))
    ny[g:-g, g:-g] = np.where(near_x, 0.0, np.where(near_y, 1.0, np.sin(theta)))
    nx[:g, :] = nx[-g:, :] = 0.0
    ny[:g, :] = ny[-g:, :] = 1.0
    nx[:, :g] = nx[:, -g:] = 1.0
    ny[:, :g] = ny[:, -g:] = 0.0
    not_wall = kind != CellKind.WALL
    nx[not_wall] = 0.0
    ny[not_wall] = 0.0
    return nx, ny


#: Wall imbalance is handed to fluid cells within this radius (cells), Gaussian weights of this width.
RETURN_RADIUS_CELLS = 4
RETURN_SIGMA_CELLS = 2.0


def imbalance_receivers(mask: np.ndarray):
    """For each wall cell touching fluid (the sources), the fluid cells that take back what the
    fluxes carry into it, with normalised Gaussian weights (CSR arrays, interior indices).

    Receivers are fluid cells that touch a wall; a source's weights sum to one, so handing back
    conserves exactly.
    """
    wall = mask == CellKind.WALL
    fluid = mask == CellKind.FLUID

    def touches(a: np.ndarray) -> np.ndarray:
        t = np.zeros_like(a)
        t[:, :-1] |= a[:, 1:]
        t[:, 1:] |= a[:, :-1]
        t[:-1, :] |= a[1:, :]
        t[1:, :] |= a[:-1, :]
        return t

    sources = np.argwhere(wall & touches(fluid))
    receiver = fluid & touches(wall)
    ny, nx = mask.shape
    R = RETURN_RADIUS_CELLS
    rows_j, rows_i, rows_w, rows_s = [], [], [], []
    for dj in range(-R, R + 1):
        for di in range(-R, R + 1):
            d2 = dj * dj + di * di
            if d2 > R * R:
                continue
            tj = sources[:, 0] + dj
            ti = sources[:, 1] + di
            ok = (tj >= 0) & (tj < ny) & (ti >= 0) & (ti < nx)
            idx = np.nonzero(ok)[0]
            hit = idx[receiver[tj[idx], ti[idx]]]
            rows_s.append(hit)
            rows_j.append(tj[hit])
            rows_i.append(ti[hit])
            rows_w.append(np.full(hit.size, np.exp(-0.5 * d2 / RETURN_SIGMA_CELLS ** 2)))
    s = np.concatenate(rows_s) if rows_s else np.zeros(0, np.int64)
    order = np.argsort(s, kind="stable")
    s = s[order]
    rec_j = np.concatenate(rows_j)[order].astype(np.int64)
    rec_i = np.concatenate(rows_i)[order].astype(np.int64)
    w = np.concatenate(rows_w)[order]
    counts = np.bincount(s, minlength=len(sources))
    start = np.zeros(len(sources) + 1, np.int64)
    np.cumsum(counts, out=start[1:])
    totals = np.add.reduceat(w, start[:-1]) if w.size else w
    w = w / np.repeat(totals, counts)
    return (sources[:, 0].astype(np.int64), sources[:, 1].astype(np.int64), start, rec_j, rec_i, w)
