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


def colour_range(field: np.ndarray, fixed: tuple[float, float] | None,
                 finite: tuple[float, float] | None = None) -> tuple[float, float]:
    """The fixed range, or the finite min and max of the field (widened when flat, so levels are defined).
    finite: that min and max when already known (view_values finds them in the same pass as the values)."""
    if fixed is not None:
        return float(fixed[0]), float(fixed[1])
    if finite is None:
        finite = finite_range(field)
    if finite is None:
        return 0.0, 1.0
    lo, hi = finite
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


def finite_range(field: np.ndarray) -> tuple[float, float] | None:
    """The smallest and largest finite value of the field; None when it has none."""
    with np.errstate(invalid="ignore"):
        lo, hi = float(np.fmin.reduce(field, axis=None)), float(np.fmax.reduce(field, axis=None))  # NaN-skipping
    if not (math.isfinite(lo) and math.isfinite(hi)):  # all NaN, or infinities: use the finite values only
        finite = field[np.isfinite(field)]
        if finite.size == 0:
            return None
        lo, hi = float(finite.min()), float(finite.max())
    return lo, hi


def quantise(pixels: np.ndarray, lo: float, hi: float, out: np.ndarray | None = None,
             flip: bool = False) -> np.ndarray:
    """Levels 0..254 mapping [lo, hi] linearly (values outside are clamped); NaN becomes 255. One compiled pass
    (frame_kernels.quantise_levels), equal level for level to the NumPy steps it replaced
    (tests/test_frames.py keeps them as its reference). out: the uint8 array to fill (a new one when None);
    flip: out's rows are the pixels' rows in reverse order."""
    if out is None:
        out = np.empty(pixels.shape, np.uint8)
    frame_kernels.quantise_levels(pixels, np.float32(lo), np.float32(TOP_LEVEL / (hi - lo)), TOP_LEVEL, WALL_LEVEL,
                                  flip, out)
    return out


def encode_frame(field: np.ndarray, view: str, width_px: int, height_px: int,
                 fixed_range: tuple[float, float] | None, time_s: float, step: int,
                 finite: tuple[float, float] | None = None) -> bytes:
    """Header + pixels of one frame of the (ny, nx) field (NaN on walls). finite: the field's finite min and max
    when already known (view_values). The levels are written behind the header in one buffer; a frame of the
    whole grid is quantised from the field itself, its rows reversed in the kernel (no reversed view)."""
    ny, nx = field.shape
    w, h = frame_size(ny, nx, width_px, height_px)
    lo, hi = colour_range(field, fixed_range, finite)
    data = np.empty(HEADER_BYTES + w * h, np.uint8)
    HEADER.pack_into(data, 0, MAGIC, HEADER_BYTES, w, h, VIEW_NAMES.index(view), ENCODING_LEVELS, 0,
                     lo, hi, float(time_s), int(step))
    levels = data[HEADER_BYTES:].reshape(h, w)
    if (h, w) == (ny, nx) and field.flags.c_contiguous:
        quantise(field, lo, hi, levels, flip=True)
    else:
        quantise(np.ascontiguousarray(downsample(field, w, h)), lo, hi, levels)
    return data.tobytes()


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
    """The named view in SI units with NaN on walls: solver.fields.derived's values (errors kept quiet)."""
    return view_values(view, gas, rho, u, v, p, dx_m, mask)[0]


def view_values(view: str, gas: Gas, rho: np.ndarray, u: np.ndarray, v: np.ndarray, p: np.ndarray,
                dx_m: float, mask: np.ndarray, padded: tuple[np.ndarray, np.ndarray, int] | None = None
                ) -> tuple[np.ndarray, tuple[float, float] | None]:
    """view_field's values and their finite min and max (None when there is none). The views of one cell each
    come from a compiled kernel (frame_kernels.point_view) that finds the range in the same pass; the others
    from derived itself. padded: (state, kinds, ghost), the C-ordered (4, ny + 2 ghost, nx + 2 ghost) block that
    rho, u, v and p are interior views of and its kinds (a FlowSnapshot's), read in place by the kernel; without
    it the four fields are stacked into one first."""
    view_id = frame_kernels.POINT_VIEWS.get(view)
    if view_id is None:
        with np.errstate(invalid="ignore", divide="ignore"):
            out = derived(view, gas, rho, u, v, p, dx_m, mask)
        return out, finite_range(out)
    state, kinds, ghost = padded if padded is not None else (np.stack([rho, u, v, p]), np.ascontiguousarray(mask), 0)
    out = np.empty(rho.shape)
    row_lo, row_hi = np.empty(rho.shape[0]), np.empty(rho.shape[0])
    frame_kernels.point_view(view_id, state, kinds, ghost, int(CellKind.WALL), float(gas.gamma),
                             float(gas.r_j_kg_k), out, row_lo, row_hi)
    lo, hi = float(row_lo.min(initial=math.inf)), float(row_hi.max(initial=-math.inf))
    return out, ((lo, hi) if lo <= hi else None)


# ----------------------------------------------------------------------------- overlay

def sonic_line(mach: np.ndarray, x_centres_m: np.ndarray, y_centres_m: np.ndarray,
               max_segments: int = MAX_SONIC_SEGMENTS) -> list[list[float]]:
    """Segments [x1, y1, x2, y2] (metres) of the Mach = 1 contour, by marching squares on cell centres.

    Squares with a wall corner (NaN) are skipped. Saddle squares are split by the mean of their
    corners. At most max_segments are returned (every k-th one past that, so the line stays visible).
    """
    return np.round(sonic_segments(mach, x_centres_m, y_centres_m, max_segments), 7).tolist()


def sonic_segments(mach: np.ndarray, x_centres_m: np.ndarray, y_centres_m: np.ndarray,
                   max_segments: int = MAX_SONIC_SEGMENTS) -> np.ndarray:
    """sonic_line's segments as an (n, 4) array, unrounded: one compiled pass (frame_kernels.level_segments)."""
    if mach.shape[0] < 2 or mach.shape[1] < 2:
        return np.empty((0, 4))
    dx = float(x_centres_m[1] - x_centres_m[0]) if x_centres_m.size > 1 else 1.0
    dy = float(y_centres_m[1] - y_centres_m[0]) if y_centres_m.size > 1 else 1.0
    out = frame_kernels.level_segments(np.ascontiguousarray(mach, dtype=np.float64), 1.0,
                                       np.ascontiguousarray(x_centres_m, dtype=np.float64),
                                       np.ascontiguousarray(y_centres_m, dtype=np.float64), dx, dy)
    if len(out) > max_segments:
        out = out[:: int(math.ceil(len(out) / max_segments))]
    return out


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
