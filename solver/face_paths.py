"""The x-face sweep split by where the faces lie: plain faces away from walls take a lean stencil compiled for
the run's limiter and flux; faces beside walls take the general stencil of kernels._face.

Almost every face of a real grid has no wall among the four cells of its stencil. For such a face the general
stencil's mirror states, wall tests and pressure-only zeroing all fall away, and what is left is MUSCL plus the
Riemann flux. Those faces run in contiguous runs along x, with the limiter and the flux fixed when the sweep is
compiled (one compiled sweep per (limiter, flux) pair, made on first use; van_leer_shock_minmod shares van Leer's).
The faces with a wall-normal cell in the stencil (kernels._face's `mn * mn + mt * mt > 0.5`) keep the general
stencil. The runs are found once per mask (`build`), from the wall normals alone: held cells (reservoir, ambient,
open edges) and cut cells enter the stencil as ordinary gas in the general path too, and the faces beside cut
cells are overwritten afterwards by cut_cells.reconstruct either way. The y-faces' runs are found too (the
benchmark's wall_path_face_share counts both), but the y sweep stays kernels.y_face_fluxes: split the same way it
measured slower (see face_fluxes).

The shock marks (kernels.MARK_HLL, MARK_MINMOD) change every step, so they are not part of the runs: after a run
of plain faces, its faces with a mark on either cell are computed again through the general stencil with the
marked flux and limiter, exactly as kernels.x_face_fluxes does. Results are bit-identical to the kernels as they
were before the split (tests/test_face_paths.py).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit, prange

from . import kernels
from .kernels import (FLUX_HLL, LIM_SHOCK_FACE, LIM_VAN_LEER, LIM_VAN_LEER_SHOCK_MINMOD, MARK_HLL, MARK_MINMOD,
                      _face, _riemann_flux, _slope)

_INLINE = dict(nogil=True, cache=True, error_model="numpy", inline="always")
_PARALLEL = dict(nogil=True, cache=True, error_model="numpy", parallel=True)
_SERIAL = dict(nogil=True, cache=True, error_model="numpy")


@dataclass(frozen=True)
class FacePaths:
    """Runs of faces, CSR-wise per face row: run s covers faces lo[s]:hi[s] and is plain when plain[s] is 1.

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

    @property
    def general_face_share(self) -> float:
        """The fraction of all faces that take the general (wall) stencil."""
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
    """The plain and general runs of both sweeps from the padded wall normals (two ghost cells a side)."""
    wall = wall_nx * wall_nx + wall_ny * wall_ny > 0.5  # kernels._face's test of a wall cell
    nyp, nxp = wall.shape
    ny, nx = nyp - 4, nxp - 4
    gx = np.zeros((ny, nx + 1), bool)
    for k in range(4):  # x-face f of row j reads cells f .. f + 3 of padded row j + 2
        gx |= wall[2:-2, k:k + nx + 1]
    gy = np.zeros((ny + 1, nx), bool)
    for k in range(4):  # y-face row f reads padded rows f .. f + 3 of padded column i + 2
        gy |= wall[k:k + ny + 1, 2:-2]
    return FacePaths(*_runs(gx), *_runs(gy), int(gx.sum()), int(gy.sum()), gx.size + gy.size)


@njit(**_INLINE)
def _plain_face(ra, rb, rc, rd, na, nb, nc, nd, ta, tb, tc, td, pa, pb, pc, pd, gamma, limiter, flux):
    """kernels._face with no wall in the stencil and no shock mark: the same operations in the same order."""
    rl = rb + 0.5 * _slope(rb - ra, rc - rb, limiter)
    nl = nb + 0.5 * _slope(nb - na, nc - nb, limiter)
    tl = tb + 0.5 * _slope(tb - ta, tc - tb, limiter)
    pl = pb + 0.5 * _slope(pb - pa, pc - pb, limiter)
    rr = rc - 0.5 * _slope(rc - rb, rd - rc, limiter)
    nr = nc - 0.5 * _slope(nc - nb, nd - nc, limiter)
    tr = tc - 0.5 * _slope(tc - tb, td - tc, limiter)
    pr = pc - 0.5 * _slope(pc - pb, pd - pc, limiter)
    bad = (rl <= 0.0) or (pl <= 0.0) or (rr <= 0.0) or (pr <= 0.0)
    rl = rb if bad else rl
    nl = nb if bad else nl
    tl = tb if bad else tl
    pl = pb if bad else pl
    rr = rc if bad else rr
    nr = nc if bad else nr
    tr = tc if bad else tr
    pr = pc if bad else pr
    return _riemann_flux(rl, nl, tl, pl, rr, nr, tr, pr, gamma, flux)


def _make_sweeps(limiter: int, flux: int):
    """The x-face sweep with `limiter` and `flux` folded in as constants (closure constants: numba compiles
    and caches one variant per pair). The general runs and the marked faces take the run-time `lim` and `fid`.

    The work of a row is a serial function called from the parallel loop: closure constants reach a serial
    function's code as constants, where a parallel loop's body seemingly takes them as arguments (measured, 512x256,
    1 thread: 3.2 ms an x sweep with the faces in the parallel body, 1.6-1.9 ms with this, 2.0 ms the general
    kernels.x_face_fluxes)."""

    @njit(**_SERIAL)
    def x_row(r, u, v, p, mx, my, sw, f0, f1, f2, f3, gamma, lim, fid, s0, s1, lo, hi, plain):
        for s in range(s0, s1):
            if plain[s]:
                for f in range(lo[s], hi[s]):
                    m0, m1, m2, m3 = _plain_face(r[f], r[f + 1], r[f + 2], r[f + 3], u[f], u[f + 1], u[f + 2],
                                                 u[f + 3], v[f], v[f + 1], v[f + 2], v[f + 3], p[f], p[f + 1],
                                                 p[f + 2], p[f + 3], gamma, limiter, flux)
                    f0[f] = m0
                    f1[f] = m1
                    f2[f] = m2
                    f3[f] = m3
                marked = False
                for f in range(lo[s], hi[s]):
                    marked |= (sw[f + 1] | sw[f + 2]) != 0
                if not marked:
                    continue
            for f in range(lo[s], hi[s]):
                mk = sw[f + 1] | sw[f + 2]
                if plain[s] and mk == 0:
                    continue
                a = f
                b = f + 1
                c = f + 2
                d = f + 3
                fl = FLUX_HLL if (mk & MARK_HLL) else fid
                li = LIM_SHOCK_FACE if (mk & MARK_MINMOD) else lim
                m0, m1, m2, m3 = _face(r[a], r[b], r[c], r[d], u[a], u[b], u[c], u[d],
                                       v[a], v[b], v[c], v[d], p[a], p[b], p[c], p[d],
                                       mx[a], my[a], mx[b], my[b], mx[c], my[c],
                                       mx[d], my[d], gamma, li, fl)
                f0[f] = m0
                f1[f] = m1
                f2[f] = m2
                f3[f] = m3

    @njit(**_PARALLEL)
    def x_sweep(W, wall_nx, wall_ny, Fx, gamma, lim, fid, hll_x, ptr, lo, hi, plain):
        for j in prange(Fx.shape[1]):
            jj = j + 2
            x_row(W[0, jj], W[1, jj], W[2, jj], W[3, jj], wall_nx[jj], wall_ny[jj], hll_x[jj],
                  Fx[0, j], Fx[1, j], Fx[2, j], Fx[3, j], gamma, lim, fid, ptr[j], ptr[j + 1], lo, hi, plain)

    return x_sweep


def plain_pair(limiter: int, flux: int) -> tuple[int, int]:
    """The (limiter, flux) the plain faces compile for: van_leer_shock_minmod is van Leer on unmarked faces
    (kernels._slope), so it shares van Leer's sweeps."""
    return (LIM_VAN_LEER if limiter == LIM_VAN_LEER_SHOCK_MINMOD else limiter), flux


_SWEEPS: dict[tuple[int, int], object] = {}


def sweeps(limiter: int, flux: int):
    """The x-face sweep for a limiter and flux id, made on first use (compiled, or loaded from the cache, on its
    first call)."""
    key = plain_pair(limiter, flux)
    pair = _SWEEPS.get(key)
    if pair is None:
        pair = _SWEEPS[key] = _make_sweeps(*key)
    return pair


def face_fluxes(paths: FacePaths, W, wall_nx, wall_ny, Fx, Gy, gamma: float, limiter: int, flux: int,
                hll_x, hll_y) -> None:
    """Every x- and y-face flux of a stage (what kernels.x_face_fluxes and y_face_fluxes give, bit for bit).

    The y-faces keep kernels.y_face_fluxes: split the same way they measured slower here (3.1 against 2.0 ms a
    sweep at 512x256 on 1 thread, minimum of 15, on a loaded machine), the x-faces faster (1.6-1.9 against 2.0 ms).
    """
    sweeps(limiter, flux)(W, wall_nx, wall_ny, Fx, gamma, limiter, flux, hll_x, paths.x_ptr, paths.x_lo, paths.x_hi,
                          paths.x_plain)
    kernels.y_face_fluxes(W, wall_nx, wall_ny, Gy, gamma, limiter, flux, hll_y)
