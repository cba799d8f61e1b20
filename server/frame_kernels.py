"""The frame path's hot loops as small numba kernels: the point views (Mach number, speed, ...) with their colour
range, the levels of a frame, and the sonic line's segments.

A live tab gets about 30 frames a second, and each is built in the solver's own thread between bursts (runner.py),
while the solver's second OpenMP thread waits; whatever a frame costs there comes off the solver's speed. So each
kernel is one pass with no temporaries of the grid's size, written so that its inner loop vectorises (one loop per
view, no branch inside, C-ordered rows). They are serial on purpose: a parallel region needs the solver's second
thread, and on a loaded machine waking it took longer than the work (one run at load 4.4, 512 x 256: 14.9 ms
parallel against 0.75 ms serial, medians of 150). A running flow's point views read its own padded arrays in place
(session.FlowSnapshot, detached=False): the copy of its four fields, 0.3 ms a frame there, is left out. The kernels
compute exactly what the NumPy forms do (tests/test_frames.py checks them equal).
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

_SERIAL = dict(nogil=True, cache=True, error_model="numpy")

#: The views computed cell by cell (no neighbours), by kernel id; the others stay in solver.fields.
POINT_VIEWS = {"density": 0, "pressure": 1, "temperature": 2, "mach": 3, "speed": 4}


@njit(**_SERIAL)
def point_view(view_id, w, kind, g, wall, gamma, r_gas, out, row_lo, row_hi):
    """The point view `view_id` (POINT_VIEWS) of each cell in SI units, NaN where kind == wall (solver.fields), and
    each row's smallest and largest finite value (inf and -inf for a row with none), so the colour range comes
    with the values. w: the primitive state (rho, u, v, p) as one C-ordered (4, ny + 2g, nx + 2g) array and kind
    its (ny + 2g, nx + 2g) kinds, g cells of padding around the (ny, nx) of `out`: a running simulation's own
    arrays (g its ghost cells) or a snapshot's copy (g = 0), read in place. One loop per view and row, with no
    branch inside, so that it vectorises."""
    ny, nx = out.shape
    for j in range(ny):
        r, uu, vv, pp, m, o = w[0, j + g], w[1, j + g], w[2, j + g], w[3, j + g], kind[j + g], out[j]
        if view_id == 0:
            for i in range(nx):
                o[i] = r[i + g]
        elif view_id == 1:
            for i in range(nx):
                o[i] = pp[i + g]
        elif view_id == 2:
            for i in range(nx):
                o[i] = pp[i + g] / (r[i + g] * r_gas)
        elif view_id == 3:
            for i in range(nx):
                a, b = uu[i + g], vv[i + g]
                o[i] = math.sqrt(a * a + b * b) / math.sqrt(gamma * pp[i + g] / r[i + g])
        else:
            for i in range(nx):
                a, b = uu[i + g], vv[i + g]
                o[i] = math.sqrt(a * a + b * b)
        lo, hi = np.inf, -np.inf
        for i in range(nx):
            x = np.nan if m[i + g] == wall else o[i]
            o[i] = x
            if x - x == 0.0:  # finite
                lo = min(lo, x)
                hi = max(hi, x)
        row_lo[j] = lo
        row_hi[j] = hi


@njit(nogil=True, cache=True, error_model="numpy", inline="always")
def _edge_fraction(p, q):
    """Where the zero of the line from p to q lies, 0..1 (a NaN fraction gives 0.5, as NumPy's nan_to_num)."""
    t = p / (p - q)
    if t != t:
        t = 0.5
    return min(max(t, 0.0), 1.0)


@njit(nogil=True, cache=True, error_model="numpy", inline="always")
def _edge_point(edge, a, b, c, d, x0, y0, dx, dy):
    """Crossing point (x, y) on edge 0 bottom (a-b), 1 right (b-c), 2 top (d-c) or 3 left (a-d) of a square."""
    if edge == 0:
        return x0 + _edge_fraction(a, b) * dx, y0
    if edge == 1:
        return x0 + dx, y0 + _edge_fraction(b, c) * dy
    if edge == 2:
        return x0 + _edge_fraction(d, c) * dx, y0 + dy
    return x0, y0 + _edge_fraction(a, d) * dy


@njit(**_SERIAL)
def level_segments(f, level, x_centres, y_centres, dx, dy):
    """Segments (n, 4: x1, y1, x2, y2) of the contour f = level by marching squares on cell centres, in one pass
    with no temporaries of the grid's size. Squares with a non-finite corner are skipped; a square whose four
    edges are crossed (a saddle) is split by the mean of its corners (frames.sonic_line). Corners: a bottom-left,
    b bottom-right, c top-right, d top-left; a corner is high when f - level > 0."""
    ny, nx = f.shape
    out = np.empty((256, 4))
    n = 0
    for j in range(ny - 1):
        low, high = f[j], f[j + 1]
        for i in range(nx - 1):
            a, b, c, d = low[i] - level, low[i + 1] - level, high[i + 1] - level, high[i] - level
            pa, pb, pc, pd = a > 0.0, b > 0.0, c > 0.0, d > 0.0
            if pa == pb and pb == pc and pc == pd:
                continue  # the usual square: no edge crossed
            if not (math.isfinite(a) and math.isfinite(b) and math.isfinite(c) and math.isfinite(d)):
                continue
            if n + 2 > out.shape[0]:
                grown = np.empty((2 * out.shape[0], 4))
                grown[:n] = out[:n]
                out = grown
            x0, y0 = x_centres[i], y_centres[j]
            crossed = (pa != pb) + (pb != pc) + (pd != pc) + (pa != pd)
            if crossed == 2:  # one segment, between the two crossed edges
                e1 = 0 if pa != pb else (1 if pb != pc else 2)
                e2 = 3 if pa != pd else (2 if pd != pc else 1)
                e3, e4, pieces = e1, e2, 1
            elif ((a + b + c + d) > 0.0) == pa:
                # a saddle whose centre agrees with corner a: a's region joins c's, cutting off b and d
                e1, e2, e3, e4, pieces = 0, 1, 2, 3, 2
            else:  # a saddle cutting off a and c
                e1, e2, e3, e4, pieces = 3, 0, 1, 2, 2
            out[n, 0], out[n, 1] = _edge_point(e1, a, b, c, d, x0, y0, dx, dy)
            out[n, 2], out[n, 3] = _edge_point(e2, a, b, c, d, x0, y0, dx, dy)
            if pieces == 2:
                out[n + 1, 0], out[n + 1, 1] = _edge_point(e3, a, b, c, d, x0, y0, dx, dy)
                out[n + 1, 2], out[n + 1, 3] = _edge_point(e4, a, b, c, d, x0, y0, dx, dy)
            n += pieces
    return out[:n]


@njit(**_SERIAL)
def quantise_levels(pixels, lo, scale, top, wall, flip, out):
    """Levels of frames.quantise in one pass into the uint8 `out`: (value - lo) * scale + 0.5 in float32, as
    NumPy's in-place float32 steps do, clamped to 0..top and truncated; NaN becomes `wall`. lo and scale are
    float32. flip: out's row j from the pixels' last row but j (a picture's top row is the grid's last), so that
    the pixels stay a C-ordered array: through a reversed view the loop did not vectorise (0.13 against 0.02 ms
    for 512 x 256). Branch-free (a clamp by min and max, NaN by a select) for the same reason."""
    ny, nx = out.shape
    half = np.float32(0.5)
    zero = np.float32(0.0)
    ftop = np.float32(top)
    for j in range(ny):
        src, o = pixels[ny - 1 - j if flip else j], out[j]
        for i in range(nx):
            x = (np.float32(src[i]) - lo) * scale + half
            level = np.uint8(min(max(x, zero), ftop))
            o[i] = wall if x != x else level


def warm() -> None:
    """Compile (or load from the kernel cache) every kernel here on tiny arrays laid out as the frame path's are
    (C-ordered float64 states, uint8 kinds)."""
    q = np.ones((2, 2))
    rows = np.empty(2)
    point_view(3, np.ones((4, 2, 2)), np.zeros((2, 2), np.uint8), 0, 1, 1.4, 287.0, q.copy(), rows, rows.copy())
    level_segments(q, 1.0, np.zeros(2), np.zeros(2), 1.0, 1.0)
    quantise_levels(q, np.float32(0.0), np.float32(1.0), 254, 255, True, np.empty((2, 2), np.uint8))
