"""The orientation of each wall cell (a cell holding no gas), for the reconstruction beside walls.

Walls cross cells where they are drawn (solver.geometry, solver.cut_cells); a face next to a cell
that holds no gas is closed. The slopes of the faces one cell away still read that cell: it stands
for the mirror image of the gas beside it, reflected about the local wall orientation (a face-wise
mirror would turn a sloped wall into tiny forward and backward steps). The orientation is estimated from the mask itself with a
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
