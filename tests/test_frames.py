"""Frames (binary header + levels) and the overlay (sonic line, arrows) of server/frames.py.

The header layout is our own (server/PROTOCOL.md); the contour checks use fields whose exact Mach = 1
line is known in closed form, so the marching-squares output can be checked point by point.
"""
from __future__ import annotations

import math
import struct

import numpy as np
import pytest

from shockslate.server import frames
from shockslate.solver.fields import VIEWS


def test_header_is_48_bytes_little_endian_and_round_trips():
    field = np.arange(12.0).reshape(3, 4)
    data = frames.encode_frame(field, "pressure", 100, 100, None, 1.25e-3, 77)
    assert len(data) == 48 + 4 * 3
    assert data[:4] == b"SSF1"
    assert struct.unpack_from("<I", data, 4)[0] == 48
    assert struct.unpack_from("<HH", data, 8) == (4, 3)
    assert data[12] == list(VIEWS).index("pressure")
    assert data[13] == 0 and struct.unpack_from("<H", data, 14)[0] == 0
    assert struct.unpack_from("<dddQ", data, 16) == (0.0, 11.0, 1.25e-3, 77)
    header, pixels = frames.decode_frame(data)
    assert (header.width, header.height, header.step) == (4, 3, 77)
    assert pixels.shape == (3, 4)


def test_row_zero_is_the_top_of_the_picture():
    ny, nx = 8, 16
    y_index = np.repeat(np.arange(ny, dtype=float)[:, None], nx, axis=1)  # grows with y
    _, pixels = frames.decode_frame(frames.encode_frame(y_index, "density", nx, ny, None, 0.0, 0))
    assert pixels[0].min() == frames.TOP_LEVEL  # top row holds the largest y
    assert pixels[-1].max() == 0
    assert np.all(np.diff(pixels[:, 0].astype(int)) < 0)


def test_frame_never_larger_than_canvas_and_keeps_aspect():
    assert frames.frame_size(256, 512, 1024, 1024) == (512, 256)  # never enlarged
    assert frames.frame_size(256, 512, 256, 1024) == (256, 128)   # width-limited
    assert frames.frame_size(256, 512, 1024, 64) == (128, 64)     # height-limited
    field = np.random.default_rng(1).random((256, 512))
    header, pixels = frames.decode_frame(frames.encode_frame(field, "mach", 200, 200, None, 0.0, 0))
    assert (header.width, header.height) == (200, 100)
    assert pixels.shape == (100, 200)


def test_levels_map_range_linearly_clamp_and_mark_walls():
    values = np.array([[0.0, 5.0, 10.0, -3.0, 99.0, np.nan]])
    levels = frames.quantise(values, 0.0, 10.0)
    assert levels.tolist() == [[0, 127, 254, 0, 254, 255]]  # 5 -> 127 (254 / 2, rounded half up)


def _quantise_numpy(pixels: np.ndarray, lo: float, hi: float) -> np.ndarray:
    """frames.quantise as NumPy steps in float32: the form the kernel replaced, kept here as its reference."""
    scale = frames.TOP_LEVEL / (hi - lo)
    with np.errstate(invalid="ignore", over="ignore"):
        work = np.array(pixels, dtype=np.float32)
        work -= np.float32(lo)
        work *= np.float32(scale)
        work += np.float32(0.5)
        np.clip(work, 0.0, frames.TOP_LEVEL, out=work)  # NaN stays NaN (and +-inf is clamped)
    np.nan_to_num(work, copy=False, nan=frames.WALL_LEVEL)
    return work.astype(np.uint8)


def test_compiled_levels_equal_the_numpy_steps_level_for_level():
    # frame_kernels.quantise_levels against the float32 NumPy steps it replaced (_quantise_numpy), on
    # random values around and beyond the range, exact half levels, NaN and infinities, a reversed view (the
    # full-size frame's rows top first) and float32 overflow
    rng = np.random.default_rng(3)
    values = rng.normal(0.5, 0.8, (97, 301))
    values[::7, ::5] = np.nan
    values[3, :6] = [np.inf, -np.inf, 1e300, -1e300, 0.0, 1.0]
    values[4, :254] = (np.arange(254) + 0.5) / 254.0  # exactly on the half levels
    for lo, hi in ((0.0, 1.0), (-0.3, 2.7), (0.2, 0.2000001), (-1e5, 3e4)):
        for pixels in (values, values[::-1], values[::-1, ::2]):
            assert np.array_equal(frames.quantise(pixels, lo, hi), _quantise_numpy(pixels, lo, hi)), (lo, hi)


def test_a_whole_grid_frame_is_the_reversed_rows_levels_and_a_smaller_one_the_sampled_ones():
    # encode_frame quantises a whole-grid frame from the field itself with its rows reversed in the kernel
    # (flip), a smaller one from the sampled pixels: both against the NumPy steps (_quantise_numpy) on the
    # picture's rows top first, as frames.downsample gives them
    rng = np.random.default_rng(5)
    field = rng.normal(1.0, 0.6, (40, 90))
    field[rng.random(field.shape) < 0.1] = np.nan
    lo, hi = frames.colour_range(field, None)
    for canvas in ((90, 40), (45, 20), (30, 13)):
        w, h = frames.frame_size(40, 90, *canvas)
        _, pixels = frames.decode_frame(frames.encode_frame(field, "mach", *canvas, None, 0.0, 0))
        assert pixels.shape == (h, w)
        assert np.array_equal(pixels, _quantise_numpy(frames.downsample(field, w, h), lo, hi)), canvas


def test_view_values_carry_the_finite_range_of_their_values():
    # the range the point-view kernel finds in its pass equals frames.finite_range of the values (NumPy's
    # NaN-skipping min and max), with walls, NaN, infinities and a row with no finite value
    from shockslate.solver.gas import Gas

    rng = np.random.default_rng(8)
    ny, nx = 12, 33
    rho = rng.uniform(0.5, 2.0, (ny, nx))
    u, v = rng.normal(0.0, 300.0, (ny, nx)), rng.normal(0.0, 100.0, (ny, nx))
    p = rng.uniform(1e4, 2e5, (ny, nx))
    mask = (rng.random((ny, nx)) < 0.2).astype(np.uint8)  # 1: wall
    mask[5] = 1  # a row of walls only
    p[2, 3] = 0.0  # temperature 0, Mach inf
    rho[7, 8] = np.nan
    gas = Gas(gamma=1.4, molar_mass_kg_kmol=28.97)
    for view in frames.frame_kernels.POINT_VIEWS:
        values, finite = frames.view_values(view, gas, rho, u, v, p, 1e-3, mask)
        assert finite == frames.finite_range(values), view
        assert frames.colour_range(values, None, finite) == frames.colour_range(values, None), view
    walls = np.ones((ny, nx), np.uint8)
    assert frames.view_values("mach", gas, rho, u, v, p, 1e-3, walls)[1] is None


def test_auto_and_fixed_colour_range():
    field = np.array([[1.0, np.nan], [3.0, 2.0]])
    assert frames.colour_range(field, None) == (1.0, 3.0)
    assert frames.colour_range(field, (0.0, 10.0)) == (0.0, 10.0)
    lo, hi = frames.colour_range(np.full((2, 2), 7.0), None)
    assert lo < 7.0 < hi  # a flat field still gets a usable range
    assert frames.colour_range(np.full((2, 2), np.nan), None) == (0.0, 1.0)
    # issue 12: a uniform field (to round-off) gets +-1 % around its value, not a sliver of 1e-6
    noisy = 5.0e4 * (1.0 + 1e-9 * np.array([[0.0, 1.0], [-1.0, 0.5]]))
    assert frames.colour_range(noisy, None) == pytest.approx((4.95e4, 5.05e4))
    assert frames.colour_range(np.zeros((2, 2)), None) == (0.0, 1.0)
    assert frames.colour_range(np.array([[5.0e4, 5.001e4]]), None) == (5.0e4, 5.001e4)  # a real 0.02 % wave stays
    header, _ = frames.decode_frame(frames.encode_frame(field, "mach", 16, 16, (0.5, 4.0), 0.0, 0))
    assert (header.min_value, header.max_value) == (0.5, 4.0)


def test_decode_refuses_a_truncated_or_foreign_frame():
    data = frames.encode_frame(np.ones((2, 2)), "mach", 16, 16, None, 0.0, 0)
    with pytest.raises(ValueError, match="does not hold"):
        frames.decode_frame(data[:-1])
    with pytest.raises(ValueError, match="not a frame"):
        frames.decode_frame(b"XXXX" + data[4:])


def test_sonic_line_of_a_linear_field_lies_on_the_exact_line():
    # Mach = x / 0.5 on cell centres: the exact M = 1 line is x = 0.5 m (linear interpolation is exact).
    nx, ny = 40, 10
    x = (np.arange(nx) + 0.5) * 0.025
    y = (np.arange(ny) + 0.5) * 0.025
    mach = np.repeat((x / 0.5)[None, :], ny, axis=0)
    segs = np.array(frames.sonic_line(mach, x, y))
    assert len(segs) == ny - 1  # one segment per square row that the line crosses
    assert np.allclose(segs[:, [0, 2]], 0.5, atol=1e-9)
    assert segs[:, [1, 3]].min() == pytest.approx(y[0]) and segs[:, [1, 3]].max() == pytest.approx(y[-1])


def test_sonic_line_of_a_radial_field_follows_the_circle():
    # Mach = r / 0.3: the M = 1 contour is the circle r = 0.3 m; linear interpolation errs by O(dx^2).
    n = 80
    c = (np.arange(n) + 0.5) / n * 2.0 - 1.0
    xx, yy = np.meshgrid(c, c)
    mach = np.hypot(xx, yy) / 0.3
    segs = np.array(frames.sonic_line(mach, c, c))
    pts = segs.reshape(-1, 2)
    r = np.hypot(pts[:, 0], pts[:, 1])
    dx = c[1] - c[0]
    assert np.abs(r - 0.3).max() < dx * dx / 0.3  # curvature error of linear interpolation, < dx^2 / r
    total = np.hypot(segs[:, 2] - segs[:, 0], segs[:, 3] - segs[:, 1]).sum()
    assert total == pytest.approx(2.0 * math.pi * 0.3, rel=0.02)


def test_sonic_line_skips_wall_squares_and_handles_saddles():
    mach = np.array([[2.0, 0.5], [0.5, 2.0]])  # a saddle: two segments
    segs = frames.sonic_line(mach, np.array([0.0, 1.0]), np.array([0.0, 1.0]))
    assert len(segs) == 2
    mach[0, 0] = np.nan
    assert frames.sonic_line(mach, np.array([0.0, 1.0]), np.array([0.0, 1.0])) == []


def _sonic_line_numpy(mach: np.ndarray, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """frames.sonic_line's segments as the NumPy joins that frame_kernels.level_segments replaced, kept here as
    its reference: crossed squares found, crossing points on all four edges, then the two-crossing squares and the
    saddles (split by the mean of their corners) joined by index arithmetic."""
    f = mach - 1.0
    jj, ii = np.nonzero(np.ones((f.shape[0] - 1, f.shape[1] - 1), bool))
    av, bv, cv, dv = f[jj, ii], f[jj, ii + 1], f[jj + 1, ii + 1], f[jj + 1, ii]
    keep = np.isfinite(av) & np.isfinite(bv) & np.isfinite(cv) & np.isfinite(dv)
    jj, ii, av, bv, cv, dv = jj[keep], ii[keep], av[keep], bv[keep], cv[keep], dv[keep]
    pa, pb, pc, pd = av > 0, bv > 0, cv > 0, dv > 0
    cr = np.stack([pa != pb, pb != pc, pd != pc, pa != pd])
    crossed = cr.sum(axis=0) >= 2
    jj, ii, av, bv, cv, dv, pa, cr = jj[crossed], ii[crossed], av[crossed], bv[crossed], cv[crossed], \
        dv[crossed], pa[crossed], cr[:, crossed]
    x0, y0, dx, dy = x[ii], y[jj], x[1] - x[0], y[1] - y[0]

    def frac(p, q):
        with np.errstate(invalid="ignore", divide="ignore"):
            t = p / (p - q)
        return np.clip(np.nan_to_num(t, nan=0.5), 0.0, 1.0)

    ex = np.stack([x0 + frac(av, bv) * dx, x0 + dx, x0 + frac(dv, cv) * dx, x0])
    ey = np.stack([y0, y0 + frac(bv, cv) * dy, y0 + dy, y0 + frac(av, dv) * dy])
    two = cr.sum(axis=0) == 2
    k = np.nonzero(two)[0]
    first, last = np.argmax(cr[:, k], axis=0), 3 - np.argmax(cr[::-1, k], axis=0)
    segments = [np.stack([ex[first, k], ey[first, k], ex[last, k], ey[last, k]], axis=1)]
    k = np.nonzero(~two)[0]
    join_ac = ((av[k] + bv[k] + cv[k] + dv[k]) > 0) == pa[k]
    for e1, e2 in ((np.where(join_ac, 0, 3), np.where(join_ac, 1, 0)), (np.where(join_ac, 2, 1), np.where(join_ac, 3, 2))):
        segments.append(np.stack([ex[e1, k], ey[e1, k], ex[e2, k], ey[e2, k]], axis=1))
    return np.concatenate(segments, axis=0)


def test_compiled_sonic_line_equals_the_numpy_joins_segment_for_segment():
    # frame_kernels.level_segments against the NumPy form it replaced (_sonic_line_numpy), on a noisy field
    # full of saddles, with walls (NaN) and infinities; the same segments, bit for bit, in any order
    rng = np.random.default_rng(12)
    mach = 1.0 + rng.normal(0.0, 1.0, (41, 57))
    mach[rng.random(mach.shape) < 0.08] = np.nan
    mach[0, :4] = [np.inf, -np.inf, 1.0, 1.0]
    x, y = np.arange(57) * 2.5e-3 + 1e-3, np.arange(41) * 2.5e-3 - 0.05
    mine = frames.sonic_segments(mach, x, y)
    ref = _sonic_line_numpy(mach, x, y)
    assert len(ref) > 300 and len(mine) == len(ref)
    assert sorted(map(tuple, mine.tolist())) == sorted(map(tuple, ref.tolist()))


def test_velocity_arrows_sample_gas_cells_only():
    ny, nx = 16, 64
    u = np.full((ny, nx), 100.0)
    v = np.zeros((ny, nx))
    gas = np.ones((ny, nx), bool)
    gas[:, : nx // 2] = False
    x = (np.arange(nx) + 0.5) * 0.01
    y = (np.arange(ny) + 0.5) * 0.01
    arrows = np.array(frames.velocity_arrows(u, v, gas, x, y, columns=16))
    assert len(arrows) > 0
    assert arrows[:, 0].min() > 0.32  # none in the wall half (x < 0.32 m)
    assert np.all(arrows[:, 2] == 100.0) and np.all(arrows[:, 3] == 0.0)


# ----------------------------------------------------------------------------- delivery (server/hub.py)

def _snapshot(version: int):
    from shockslate.server.session import FlowSnapshot
    from shockslate.solver.domain import Domain
    from shockslate.solver.gas import AIR

    dom = Domain(0.0, 0.4, 0.0, 0.1, 16)
    shape = dom.shape
    return FlowSnapshot(version, version * 1e-3, version, np.full(shape, 1.2), np.full(shape, 50.0 * version),
                        np.zeros(shape), np.full(shape, 1e5), np.zeros(shape, np.uint8), AIR, dom)


class _Socket:
    """Stands in for a websocket; a stuck one blocks in send until released."""

    def __init__(self, stuck: bool = False):
        import asyncio

        self.frames: list[int] = []
        self.texts: list[str] = []
        self.gate = asyncio.Event()
        if not stuck:
            self.gate.set()

    async def send_bytes(self, data: bytes) -> None:
        await self.gate.wait()
        self.frames.append(frames.decode_frame(data)[0].step)

    async def send_text(self, text: str) -> None:
        await self.gate.wait()
        self.texts.append(text)


def test_a_stuck_tab_does_not_hold_up_another_and_then_gets_only_the_newest_frame():
    import asyncio

    from shockslate.server.hub import Hub, ViewChoice

    async def until(condition) -> None:
        for _ in range(500):  # a bound on waiting, not a timing check
            if condition():
                return
            await asyncio.sleep(0.01)
        raise AssertionError("condition never became true")

    async def scenario() -> tuple[list[int], list[int]]:
        hub = Hub(max_frames_per_s=1000.0)
        fast, slow = _Socket(), _Socket(stuck=True)
        a, b = hub.new_client(fast), hub.new_client(slow)
        for c in (a, b):
            c.view = ViewChoice("speed", 64, 64, None, ())
        tasks = [asyncio.create_task(hub.sender(c)) for c in (a, b)]
        hub.publish_snapshot(_snapshot(1))
        await until(lambda: fast.frames == [1])
        for version in (2, 3, 4):  # the stuck tab is still inside its first send
            hub.publish_snapshot(_snapshot(version))
            await until(lambda: fast.frames[-1] == version)
        slow.gate.set()
        await until(lambda: len(slow.frames) >= 2)
        for c in (a, b):
            hub.remove(c)
        await asyncio.gather(*tasks, return_exceptions=True)
        return fast.frames, slow.frames

    fast_frames, slow_frames = asyncio.run(scenario())
    assert fast_frames == [1, 2, 3, 4]
    assert slow_frames == [1, 4]  # 2 and 3 were skipped: only the newest is ever sent


def test_frames_prepared_with_the_snapshot_serve_every_tab_of_that_view():
    import asyncio

    from shockslate.server.hub import Hub, ViewChoice

    async def scenario():
        hub = Hub()
        a, b = hub.new_client(_Socket()), hub.new_client(_Socket())
        a.view = b.view = ViewChoice("pressure", 64, 64, None, ("sonic_line",))
        snap = _snapshot(7)
        hub.prepare(snap)
        built = hub.frames_built
        fa = await hub.frame(snap, a.view, live=True)
        fb = await hub.frame(snap, b.view, live=True)
        overlay = await hub.overlay_text(snap, ("sonic_line",), live=True)
        other = await hub.frame(snap, ViewChoice("density", 64, 64, None, ()), live=True)
        return built, fa, fb, overlay, other

    built, fa, fb, overlay, other = asyncio.run(scenario())
    assert built == 1 and fa is fb  # one build for two tabs with the same view
    assert frames.decode_frame(fa)[0].step == 7
    assert '"type":"overlay"' in overlay
    assert other is None  # not prepared while the flow runs: the next snapshot will carry it


def test_a_running_flows_frames_from_its_own_arrays_equal_those_of_a_copy_and_are_never_built_later():
    # Session.snapshot(detached=False) reads the simulation's arrays in place (the frames of a running flow, made in
    # the solver's thread before its next step): its frames and overlay equal, byte for byte, those of a copy;
    # and the hub never builds another view from it afterwards, even when not told the flow is live (its arrays
    # go on changing), while it does from a copy. Reference: the copy (an internal yardstick).
    import asyncio

    from shockslate.server.hub import Hub, ViewChoice, build_frame, build_overlay_text, _ViewFields
    from shockslate.server.session import Session
    from shockslate.solver import scenario as scn

    session = Session(scn.load_builtin(scn.DEFAULT_SCENARIO))
    for _ in range(30):
        session.sim.step()
    assert (session.sim.mask == 1).any()  # walls in the picture
    in_place, copy = session.snapshot(detached=False), session.snapshot()
    assert not in_place.detached and copy.detached
    assert np.shares_memory(in_place.rho, session.sim.W) and not np.shares_memory(copy.rho, session.sim.W)
    for view in ("mach", "pressure", "temperature", "speed", "density", "schlieren"):
        for canvas in ((4096, 4096), (100, 60)):
            choice = ViewChoice(view, *canvas, None, ())
            assert build_frame(in_place, choice) == build_frame(copy, choice), (view, canvas)
    assert build_overlay_text(in_place, ("sonic_line", "arrows")) == build_overlay_text(copy, ("sonic_line", "arrows"))
    assert '"sonic_line":[[' in build_overlay_text(copy, ("sonic_line",), _ViewFields(copy))

    # the hub's prepare, with its view buffers kept from one snapshot to the next, makes those same frames
    hub = Hub()
    tab = hub.new_client(_Socket())
    tab.view = ViewChoice("mach", 4096, 4096, None, ("sonic_line",))
    for _ in range(2):
        session.sim.step()
        now, reference = session.snapshot(detached=False), session.snapshot()
        hub.prepare(now, with_overlays=True)
        assert asyncio.run(hub.frame(now, tab.view, live=True)) == build_frame(reference, tab.view)
        assert asyncio.run(hub.overlay_text(now, ("sonic_line",), live=True)) == \
            build_overlay_text(reference, ("sonic_line",))

    async def later(snap):
        hub = Hub()
        return (await hub.frame(snap, ViewChoice("mach", 64, 64, None, ()), live=False),
                await hub.overlay_text(snap, ("sonic_line",), live=False))

    assert asyncio.run(later(in_place)) == (None, None)
    built, overlay = asyncio.run(later(copy))
    assert frames.decode_frame(built)[0].step == copy.steps and '"type":"overlay"' in overlay


def test_frame_kernels_give_the_numpy_forms_values_bit_for_bit():
    """The point views of server/frame_kernels.py against what they replace on the frame path:
    solver.fields.derived (NaN on walls). Equality, not a tolerance: a frame
    must not change with the path that made it. Reference: those NumPy forms (an internal yardstick; the views'
    formulas themselves are checked against outside sources in tests/test_fields.py)."""
    from shockslate.solver import scenario as scn
    from shockslate.solver.fields import derived

    sim = scn.build_simulation(scn.load_builtin(scn.DEFAULT_SCENARIO), nx=64)
    for _ in range(5):  # a flow with gradients and walls, not the uniform start
        sim.step()
    rho, u, v, p = sim.primitive()
    mask = sim.mask
    assert (mask == 1).any()  # walls present: their NaN is checked too
    rng = np.random.default_rng(3)
    u = u + rng.normal(0.0, 50.0, u.shape)  # speeds of both signs everywhere
    for view in frames.frame_kernels.POINT_VIEWS:
        mine = frames.view_field(view, sim.setup.gas, rho, u, v, p, sim.domain.dx_m, mask)
        ref = derived(view, sim.setup.gas, rho, u, v, p, sim.domain.dx_m, mask)
        assert np.array_equal(mine, ref, equal_nan=True), view
    for view in ("vorticity", "schlieren"):  # neighbour views stay with solver.fields
        mine = frames.view_field(view, sim.setup.gas, rho, u, v, p, sim.domain.dx_m, mask)
        assert np.array_equal(mine, derived(view, sim.setup.gas, rho, u, v, p, sim.domain.dx_m, mask),
                              equal_nan=True)


def test_frames_are_taken_inside_the_solver_bursts_not_between_them(tmp_path):
    """A real uvicorn server and a real websocket tab: with bursts of 0.3 s, a tab still gets frames on the
    snapshot schedule (about 32 a second), made between two steps inside a burst, so a connected tab does not cut
    the bursts into pieces (each piece a hand-over between the event loop and the solver thread). Counted, not
    timed: before, every frame ended a burst (at least one burst per frame); now many frames come per burst.
    Common practice for a frame source beside a compute loop, no single source."""
    import json as _json

    from test_live_changes import LiveServer, _messages, _replies

    live = LiveServer(tmp_path, nx=128, runner_options={"burst_s": 0.3})
    try:
        runner = live.parts.runner
        bursts = [0]
        burst = runner._burst

        def counted():
            bursts[0] += 1
            return burst()

        runner._burst = counted
        with live.tab() as tab:
            tab.send(_json.dumps({"type": "run", "id": "r"}))
            _messages(tab, lambda got: _replies(got, "r"), "the run to start")
            _messages(tab, lambda got: sum(isinstance(m, bytes) for m in got) >= 2, "the first frames")
            before = bursts[0]
            got = _messages(tab, lambda got: sum(isinstance(m, bytes) for m in got) >= 24, "24 frames")
            during = bursts[0] - before
            tab.send(_json.dumps({"type": "pause", "id": "p"}))
            _messages(tab, lambda got: _replies(got, "p"), "the pause")
        frames_seen = sum(isinstance(m, bytes) for m in got)
        assert frames_seen >= 24 and during < frames_seen / 2, (during, frames_seen)
    finally:
        live.stop()


def test_sonic_line_on_a_rough_field_with_walls_matches_a_square_by_square_count():
    """Marching squares (Lorensen and Cline 1987; the saddle split by the mean of the corners, common practice):
    every square with four finite corners and 2 (4) crossed edges gives 1 (2) segments, each end on a crossed
    edge where the linear interpolation of Mach - 1 is zero. Counted here square by square in plain Python,
    independent of the vectorised search of frames.sonic_line."""
    rng = np.random.default_rng(11)
    mach = 1.0 + rng.normal(0.0, 1.0, (23, 31))
    mach[rng.random(mach.shape) < 0.1] = np.nan  # wall cells
    x = np.arange(31) * 0.5
    y = np.arange(23) * 0.5
    f = mach - 1.0
    expected = 0
    for j in range(22):
        for i in range(30):
            corners = [f[j, i], f[j, i + 1], f[j + 1, i + 1], f[j + 1, i]]
            if not all(math.isfinite(c) for c in corners):
                continue
            high = [c > 0 for c in corners]
            crossed = sum(high[k] != high[(k + 1) % 4] for k in range(4))
            expected += {0: 0, 2: 1, 4: 2}[crossed]
    segs = np.array(frames.sonic_line(mach, x, y))
    assert expected > 50 and len(segs) == expected
    for px, py in segs.reshape(-1, 2):  # each end lies on a cell-centre line, where f crosses zero
        on_x = abs(px / 0.5 - round(px / 0.5)) < 1e-6
        if on_x:  # on a vertical edge x = x_i: interpolate along y
            i, j = int(round(px / 0.5)), min(int(py / 0.5), 21)
            t = py / 0.5 - j
            value = (1 - t) * f[j, i] + t * f[j + 1, i]
        else:  # on a horizontal edge y = y_j
            j, i = int(round(py / 0.5)), min(int(px / 0.5), 29)
            t = px / 0.5 - i
            value = (1 - t) * f[j, i] + t * f[j, i + 1]
        assert abs(value) < 1e-5 * (1.0 + float(np.nanmax(np.abs(f))))  # positions are rounded to 1e-7 m
