"""The frame path's hot loops as small numba kernels: the point views (Mach number, speed, ...) and the squares
the sonic line crosses.

A live tab gets about 30 frames a second, and each is built in the solver's own thread between bursts (runner.py).
As NumPy expressions (solver.fields.derived: several temporaries of the grid's size), the Mach view of a
512 x 256 frame was most of the 3.2-5.1 ms (medians) the frame's making took in that thread on the loaded
machine, while the solver's second OpenMP thread waited. As one compiled loop it takes about 1 ms there,
releases the GIL and makes no temporaries. It is serial on purpose: a parallel region needs the solver's second
thread, and on a loaded machine waking it took longer than the work (one run at load 4.4, 512 x 256: 14.9 ms
parallel against 0.75 ms serial, medians of 150). The snapshot's copy of the flow stays NumPy's (row copies: 0.27
ms, against 0.56-0.63 ms for a compiled loop). The kernel computes exactly what the NumPy form does
(tests/test_frames.py checks them equal). The sonic line's search for crossed squares, a dozen NumPy passes over
the grid, is one pass here; the few squares found are joined in NumPy as before.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

_SERIAL = dict(nogil=True, cache=True, error_model="numpy")

#: The views computed cell by cell (no neighbours), by kernel id; the others stay in solver.fields.
POINT_VIEWS = {"density": 0, "pressure": 1, "temperature": 2, "mach": 3, "speed": 4}


@njit(**_SERIAL)
def point_view(view_id, rho, u, v, p, mask, wall, gamma, r_gas, out):
    """The point view `view_id` (POINT_VIEWS) of each cell in SI units, NaN where mask == wall (solver.fields)."""
    ny, nx = out.shape
    for j in range(ny):
        for i in range(nx):
            if mask[j, i] == wall:
                out[j, i] = np.nan
            elif view_id == 0:
                out[j, i] = rho[j, i]
            elif view_id == 1:
                out[j, i] = p[j, i]
            elif view_id == 2:
                out[j, i] = p[j, i] / (rho[j, i] * r_gas)
            elif view_id == 3:
                out[j, i] = math.hypot(u[j, i], v[j, i]) / math.sqrt(gamma * p[j, i] / rho[j, i])
            else:
                out[j, i] = math.hypot(u[j, i], v[j, i])


@njit(**_SERIAL)
def contour_squares(f):
    """Row-major (j, i) of the squares of cell centres (corners f[j, i], f[j, i+1], f[j+1, i+1], f[j+1, i]) whose
    corners are all finite and whose edges the zero level of f crosses at least twice (the sign test of
    frames.sonic_line, x > 0 against not), in one pass with no temporaries."""
    ny, nx = f.shape
    jj = np.empty((ny - 1) * (nx - 1), np.int64)
    ii = np.empty((ny - 1) * (nx - 1), np.int64)
    n = 0
    for j in range(ny - 1):
        for i in range(nx - 1):
            a, b, c, d = f[j, i], f[j, i + 1], f[j + 1, i + 1], f[j + 1, i]
            if not (math.isfinite(a) and math.isfinite(b) and math.isfinite(c) and math.isfinite(d)):
                continue
            pa, pb, pc, pd = a > 0.0, b > 0.0, c > 0.0, d > 0.0
            crossed = (pa != pb) + (pb != pc) + (pd != pc) + (pa != pd)
            if crossed >= 2:
                jj[n] = j
                ii[n] = i
                n += 1
    return jj[:n], ii[:n]


@njit(**_SERIAL)
def quantise_levels(pixels, lo, scale, top, wall, out):
    """Levels of frames.quantise in one pass into the uint8 `out`: (value - lo) * scale + 0.5 in float32, as
    NumPy's in-place float32 steps do, clamped to 0..top and truncated; NaN becomes `wall`. lo and scale are
    float32. The NumPy form made a float32 copy and five more passes over it, 30 times a second."""
    ny, nx = out.shape
    half = np.float32(0.5)
    zero = np.float32(0.0)
    ftop = np.float32(top)
    for j in range(ny):
        for i in range(nx):
            x = (np.float32(pixels[j, i]) - lo) * scale + half
            if x != x:
                out[j, i] = wall
            elif x <= zero:
                out[j, i] = 0
            elif x >= ftop:
                out[j, i] = top
            else:
                out[j, i] = np.uint8(x)


def warm() -> None:
    """Compile (or load from the kernel cache) every kernel here on a tiny array."""
    q = np.ones((2, 2))
    point_view(3, q, q, q, q, np.zeros((2, 2), np.uint8), 1, 1.4, 287.0, np.empty((2, 2)))
    contour_squares(q)
    quantise_levels(q, np.float32(0.0), np.float32(1.0), 254, 255, np.empty((2, 2), np.uint8))
