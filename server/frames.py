"""What the page draws: a view as a small binary frame, and the overlay (sonic line, velocity arrows).

A frame is one byte per pixel behind a 48-byte little-endian header (layout in PROTOCOL.md), so a
512x256 picture is 128 KiB and the page maps levels to colours itself. Everything here is plain
numpy on a snapshot of the flow, so it can run in any thread while the solver goes on.
"""
from __future__ import annotations

import math
import struct
from dataclasses import dataclass

import numpy as np

from shockslate.solver.fields import VIEWS, derived
from shockslate.solver.gas import Gas
from shockslate.solver.kinds import CellKind

from . import frame_kernels

MAGIC = b"SSF1"
#: magic, header length, width, height, view index, encoding, reserved, min, max, time_s, step.
HEADER = struct.Struct("<4sIHHBBHdddQ")
HEADER_BYTES = HEADER.size  # 48
ENCODING_LEVELS = 0
#: Pixel value for wall cells (no gas); gas levels run 0..254.
WALL_LEVEL = 255
TOP_LEVEL = 254
#: Largest frame side the server will make, whatever the canvas.
MAX_SIDE_PX = 4096
VIEW_NAMES: tuple[str, ...] = tuple(VIEWS)
#: At most this many sonic-line segments go into one overlay message (keeps it under ~200 KB).
MAX_SONIC_SEGMENTS = 6000

assert HEADER_BYTES == 48


@dataclass(frozen=True)
class FrameHeader:
    width: int
    height: int
    view_index: int
    encoding: int
    min_value: float
    max_value: float
    time_s: float
    step: int


def frame_size(ny: int, nx: int, width_px: int, height_px: int) -> tuple[int, int]:
    """(width, height) of the frame: the grid shrunk to fit the canvas, aspect kept, never enlarged."""
    scale = min(1.0, width_px / nx, height_px / ny)
    return max(1, min(MAX_SIDE_PX, int(round(nx * scale)))), max(1, min(MAX_SIDE_PX, int(round(ny * scale))))


def _sample_indices(n_source: int, n_target: int) -> np.ndarray:
    """Index of the source cell under the centre of each target pixel (nearest neighbour)."""
    idx = ((np.arange(n_target) + 0.5) * (n_source / n_target)).astype(np.int64)
    return np.minimum(idx, n_source - 1)


def downsample(field: np.ndarray, width_px: int, height_px: int) -> np.ndarray:
    """The (ny, nx) field sampled onto (height, width) pixels, row 0 the TOP (largest y).

    Nearest-neighbour sampling keeps walls crisp (NaN stays NaN) and costs one gather.
    """
    ny, nx = field.shape
    if (height_px, width_px) == (ny, nx):
        return field[::-1]  # a view: no copy when the canvas holds the whole grid
    rows = _sample_indices(ny, height_px)[::-1]
    cols = _sample_indices(nx, width_px)
    return field[np.ix_(rows, cols)]


#: An auto range narrower than this fraction of the values is round-off on a uniform field ...
FLAT_RELATIVE = 1e-6
#: ... and is shown as the value plus and minus this fraction of it.
FLAT_PAD_RELATIVE = 0.01


def colour_range(field: np.ndarray, fixed: tuple[float, float] | None) -> tuple[float, float]:
    """The fixed range, or the finite min and max of the field (widened when flat, so levels are defined)."""
    if fixed is not None:
        return float(fixed[0]), float(fixed[1])
    with np.errstate(invalid="ignore"):
        lo, hi = float(np.fmin.reduce(field, axis=None)), float(np.fmax.reduce(field, axis=None))  # NaN-skipping
    if not (math.isfinite(lo) and math.isfinite(hi)):  # all NaN, or infinities: use the finite values only
        finite = field[np.isfinite(field)]
        if finite.size == 0:
            return 0.0, 1.0
        lo, hi = float(finite.min()), float(finite.max())
    scale = max(abs(lo), abs(hi))
    if hi - lo <= FLAT_RELATIVE * scale or hi <= lo:
        # a uniform field (or one uniform to round-off): a range of round numbers around it rather than
        # a sliver whose ticks read 49.99996 ... 50.00004
        mid = 0.5 * (lo + hi)
        if abs(mid) < 1e-30:
            return 0.0, 1.0
        pad = FLAT_PAD_RELATIVE * abs(mid)
        lo, hi = mid - pad, mid + pad
    return lo, hi


def quantise(pixels: np.ndarray, lo: float, hi: float) -> np.ndarray:
    """Levels 0..254 mapping [lo, hi] linearly (values outside are clamped); NaN becomes 255. One compiled pass
    (frame_kernels.quantise_levels), equal level for level to the NumPy steps it replaced
    (tests/test_frames.py keeps them as its reference)."""
    out = np.empty(pixels.shape, np.uint8)
    frame_kernels.quantise_levels(pixels, np.float32(lo), np.float32(TOP_LEVEL / (hi - lo)), TOP_LEVEL, WALL_LEVEL,
                                  out)
    return out


def encode_frame(field: np.ndarray, view: str, width_px: int, height_px: int,
                 fixed_range: tuple[float, float] | None, time_s: float, step: int) -> bytes:
    """Header + pixels of one frame of the (ny, nx) field (NaN on walls)."""
    ny, nx = field.shape
    w, h = frame_size(ny, nx, width_px, height_px)
    pixels = downsample(field, w, h)
    lo, hi = colour_range(field, fixed_range)
    levels = quantise(pixels, lo, hi)
    header = HEADER.pack(MAGIC, HEADER_BYTES, w, h, VIEW_NAMES.index(view), ENCODING_LEVELS, 0,
                         lo, hi, float(time_s), int(step))
    return header + levels.tobytes()


def decode_frame(data: bytes) -> tuple[FrameHeader, np.ndarray]:
    """The header and the (height, width) uint8 pixels of a frame; for tests, benchmarks and tools."""
    if len(data) < HEADER_BYTES:
        raise ValueError(f"frame of {len(data)} bytes is shorter than the {HEADER_BYTES}-byte header")
    magic, hlen, w, h, view, enc, _res, lo, hi, t, step = HEADER.unpack_from(data)
    if magic != MAGIC or hlen != HEADER_BYTES:
        raise ValueError(f"not a frame: magic {magic!r}, header length {hlen}")
    if len(data) != HEADER_BYTES + w * h:
        raise ValueError(f"frame of {len(data)} bytes does not hold {w}x{h} pixels")
    pixels = np.frombuffer(data, np.uint8, offset=HEADER_BYTES).reshape(h, w)
    return FrameHeader(w, h, view, enc, lo, hi, t, step), pixels


def view_field(view: str, gas: Gas, rho: np.ndarray, u: np.ndarray, v: np.ndarray, p: np.ndarray,
               dx_m: float, mask: np.ndarray) -> np.ndarray:
    """The named view in SI units with NaN on walls: solver.fields.derived's values (errors kept quiet), the
    views of one cell each by a compiled kernel (frame_kernels.point_view), the others by derived itself."""
    view_id = frame_kernels.POINT_VIEWS.get(view)
    if view_id is None:
        with np.errstate(invalid="ignore", divide="ignore"):
            return derived(view, gas, rho, u, v, p, dx_m, mask)
    out = np.empty(rho.shape)
    frame_kernels.point_view(view_id, rho, u, v, p, mask, int(CellKind.WALL), float(gas.gamma),
                             float(gas.r_j_kg_k), out)
    return out



# ----------------------------------------------------------------------------- overlay

def sonic_line(mach: np.ndarray, x_centres_m: np.ndarray, y_centres_m: np.ndarray,
               max_segments: int = MAX_SONIC_SEGMENTS) -> list[list[float]]:
    """Segments [x1, y1, x2, y2] (metres) of the Mach = 1 contour, by marching squares on cell centres.

    Squares with a wall corner (NaN) are skipped. Saddle squares are split by the mean of their
    corners. At most max_segments are returned (every k-th one past that, so the line stays visible).
    """
    f = mach - 1.0
    if f.shape[0] < 2 or f.shape[1] < 2:
        return []
    # Squares with all corners finite and at least two crossed edges (one compiled pass over the grid).
    jj, ii = frame_kernels.contour_squares(np.ascontiguousarray(f, dtype=np.float64))
    if jj.size == 0:
        return []
    x0 = x_centres_m[ii]
    y0 = y_centres_m[jj]
    dx = float(x_centres_m[1] - x_centres_m[0]) if x_centres_m.size > 1 else 1.0
    dy = float(y_centres_m[1] - y_centres_m[0]) if y_centres_m.size > 1 else 1.0
    # Corners: a bottom-left, b bottom-right, c top-right, d top-left of each square.
    av, bv, cv, dv = f[jj, ii], f[jj, ii + 1], f[jj + 1, ii + 1], f[jj + 1, ii]
    pa, pb, pc, pd = av > 0, bv > 0, cv > 0, dv > 0
    # Edges: 0 bottom (a-b), 1 right (b-c), 2 top (d-c), 3 left (a-d).
    cr = np.stack([pa != pb, pb != pc, pd != pc, pa != pd])

    def frac(p, q):
        with np.errstate(invalid="ignore", divide="ignore"):
            t = p / (p - q)
        return np.clip(np.nan_to_num(t, nan=0.5), 0.0, 1.0)

    # Crossing point on each edge (metres).
    ex = np.stack([x0 + frac(av, bv) * dx, x0 + dx, x0 + frac(dv, cv) * dx, x0])
    ey = np.stack([y0, y0 + frac(bv, cv) * dy, y0 + dy, y0 + frac(av, dv) * dy])
    segments: list[np.ndarray] = []
    two = cr.sum(axis=0) == 2
    if two.any():
        k = np.nonzero(two)[0]
        first = np.argmax(cr[:, k], axis=0)
        last = 3 - np.argmax(cr[::-1, k], axis=0)
        segments.append(np.stack([ex[first, k], ey[first, k], ex[last, k], ey[last, k]], axis=1))
    four = ~two
    if four.any():
        k = np.nonzero(four)[0]
        centre_high = (av[k] + bv[k] + cv[k] + dv[k]) > 0
        a_high = pa[k]
        # When the centre agrees with corner a, a's region joins c's: cut off b and d (edges 0-1, 2-3);
        # otherwise cut off a and c (edges 3-0, 1-2).
        join_ac = centre_high == a_high
        e1 = np.where(join_ac, 0, 3)
        e2 = np.where(join_ac, 1, 0)
        e3 = np.where(join_ac, 2, 1)
        e4 = np.where(join_ac, 3, 2)
        segments.append(np.stack([ex[e1, k], ey[e1, k], ex[e2, k], ey[e2, k]], axis=1))
        segments.append(np.stack([ex[e3, k], ey[e3, k], ex[e4, k], ey[e4, k]], axis=1))
    out = np.concatenate(segments, axis=0)
    if len(out) > max_segments:
        out = out[:: int(math.ceil(len(out) / max_segments))]
    return np.round(out, 7).tolist()


def velocity_arrows(u: np.ndarray, v: np.ndarray, gas_cells: np.ndarray, x_centres_m: np.ndarray,
                    y_centres_m: np.ndarray, columns: int = 32) -> list[list[float]]:
    """Arrows [x, y, u, v] (metres, m/s) on a coarse regular grid of gas cells, `columns` across."""
    ny, nx = u.shape
    step = max(1, int(math.ceil(nx / columns)))
    rows = np.arange(step // 2, ny, step)
    cols = np.arange(step // 2, nx, step)
    if rows.size == 0 or cols.size == 0:
        return []
    jj, ii = np.meshgrid(rows, cols, indexing="ij")
    keep = gas_cells[jj, ii] & np.isfinite(u[jj, ii]) & np.isfinite(v[jj, ii])
    jj, ii = jj[keep], ii[keep]
    arrows = np.stack([x_centres_m[ii], y_centres_m[jj], u[jj, ii], v[jj, ii]], axis=1)
    return np.round(arrows, 6).tolist()
