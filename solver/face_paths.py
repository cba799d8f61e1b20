"""Where the faces beside walls are: the faces whose stencil (four cells across the face) holds a wall cell.

Those faces need kernels._face's general stencil (mirror states, wall tests, pressure-only fluxes); every other
face could run a lean stencil. The runs of such faces along each face row are found once per mask (`build`,
from the wall normals, with kernels._face's own test `mn * mn + mt * mt > 0.5`) and give the benchmark's
wall_path_face_share; `y_rows_plain` marks the rows of y-faces with no such face, which the y sweep of the van
Leer limiters runs without reading the eight rows of wall normals (0.79 against 1.4-1.65 ms at 512x256, 1 thread).
Splitting rows into runs inside the face loops has lost each time: the lean runs' loops start at an index read
from an array (or any start other than 0), and those loops did not vectorise. Measured at 512x256 on 1 thread: a
split of the x sweep into runs gained 0.1 ms of 2.0 ms and lost 1.1 ms on the y sweep (its per-pair variants, made
as closures, were also recompiled by every process: numba's cache missed them, 1.4 s of warm start); with the van
Leer sweeps, runs took x from 1.0-1.4 to 3.9-7.2 ms and y to 3.7-5.0 ms, and faces 0-1 / 2 .. nx-2 / nx-1 - nx
as three loops took x to 3.1 ms (all under load of another helper's runs). What works (x_rows_mid_plain): one lean
loop over the whole row from face 0, then the two faces at each end again through the general stencil, 0.76-1.07
against 1.0-1.4 ms.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class FacePaths:
    """Runs of faces, CSR-wise per face row: run s covers faces lo[s]:hi[s] and has no wall cell in any of its
    faces' stencils when plain[s] is 1.

    x: rows of x-faces (ny rows; face f lies left of interior cell f). y: rows of y-faces (ny + 1 rows; face row f
    lies below interior row f), runs over interior columns.
    """

    x_ptr: np.ndarray
    x_lo: np.ndarray
    x_hi: np.ndarray
    x_plain: np.ndarray
    y_ptr: np.ndarray
    y_lo: np.ndarray
    y_hi: np.ndarray
    y_plain: np.ndarray
    general_x_faces: int
    general_y_faces: int
    faces: int
    #: 1 for each row of y-faces with no wall cell in any face's stencil (kernels.y_face_fluxes skips the wall
    #: normals there)
    y_rows_plain: np.ndarray
    #: 1 for each row of x-faces whose faces 2 .. nx - 2 have no wall cell in their stencils (kernels.x_face_fluxes
    #: reads the wall normals only for the two faces at each end there)
    x_rows_mid_plain: np.ndarray

    @property
    def general_face_share(self) -> float:
        """The fraction of all faces with a wall cell in their stencil."""
        return (self.general_x_faces + self.general_y_faces) / self.faces if self.faces else 0.0


def _runs(general: np.ndarray):
    """CSR runs of equal flags along each row of a (rows, n) bool array: (ptr, lo, hi, plain)."""
    rows, n = general.shape
    ptr = np.zeros(rows + 1, np.int64)
    lo, hi, plain = [], [], []
    for r in range(rows):
        g = general[r]
        cuts = np.flatnonzero(g[1:] != g[:-1]) + 1
        starts = np.concatenate(([0], cuts))
        ends = np.concatenate((cuts, [n]))
        lo.append(starts)
        hi.append(ends)
        plain.append(~g[starts])
        ptr[r + 1] = ptr[r] + starts.size
    cat = (lambda a, t: np.concatenate(a).astype(t)) if rows else (lambda a, t: np.zeros(0, t))
    return ptr, cat(lo, np.int64), cat(hi, np.int64), cat(plain, np.uint8)


def build(wall_nx: np.ndarray, wall_ny: np.ndarray) -> FacePaths:
    """The plain and wall-side runs of both face directions from the padded wall normals (two ghost cells a side)."""
    wall = wall_nx * wall_nx + wall_ny * wall_ny > 0.5  # kernels._face's test of a wall cell
    nyp, nxp = wall.shape
    ny, nx = nyp - 4, nxp - 4
    gx = np.zeros((ny, nx + 1), bool)
    for k in range(4):  # x-face f of row j reads cells f .. f + 3 of padded row j + 2
        gx |= wall[2:-2, k:k + nx + 1]
    gy = np.zeros((ny + 1, nx), bool)
    for k in range(4):  # y-face row f reads padded rows f .. f + 3 of padded column i + 2
        gy |= wall[k:k + ny + 1, 2:-2]
    return FacePaths(*_runs(gx), *_runs(gy), int(gx.sum()), int(gy.sum()), gx.size + gy.size,
                     (~gy.any(axis=1)).astype(np.uint8), (~gx[:, 2:nx - 1].any(axis=1)).astype(np.uint8))
