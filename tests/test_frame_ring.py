"""The server's ring of recent frames (server/frame_ring.py): bounded by count and by bytes, started again
when the flow goes back in time, and recalled frames marked as such in the header (PROTOCOL.md)."""
from __future__ import annotations

import pytest

from shockslate.server import frames
from shockslate.server.frame_ring import LIVE, RECALLED, FrameRing
from shockslate.server.hub import ViewChoice, build_frame, ring_key
from shockslate.server.session import Session
from shockslate.solver import scenario as scn


def _frame(steps: int, width: int = 64, height: int = 32) -> bytes:
    """A real frame of the shock tube's starting flow, stamped with a step number."""
    import numpy as np

    field = np.linspace(1.0e5, 1.0e6, width * height).reshape(height, width)
    return frames.encode_frame(field, "pressure", width, height, None, steps * 1e-6, steps)


def test_count_bound_drops_the_oldest():
    ring = FrameRing(max_frames=3, max_bytes=10**9)
    for steps in range(1, 6):
        ring.add(steps, steps * 1e-6, "pressure 64x32", _frame(steps))
    listing = ring.listing()
    assert listing["steps"] == [3, 4, 5] and len(ring) == 3
    assert listing["max_frames"] == 3 and listing["bytes"] == 3 * len(_frame(1))


def test_byte_bound_holds_over_views():
    one = len(_frame(1))  # 48-byte header + 64 x 32 pixels
    ring = FrameRing(max_frames=100, max_bytes=5 * one)
    for steps in range(1, 5):  # two views per instant: each instant costs two frames
        ring.add(steps, 0.0, "pressure 64x32", _frame(steps))
        ring.add(steps, 0.0, "mach 64x32", _frame(steps))
        assert ring.nbytes <= 5 * one
    assert ring.listing()["steps"] == [3, 4]  # four frames fit, a fifth does not
    ring.add(4, 0.0, "mach 64x32", _frame(4))  # the same view of the same instant replaces, not adds
    assert ring.nbytes == 4 * one


def test_earlier_step_starts_the_ring_again_and_recall_marks_the_channel():
    ring = FrameRing()
    for steps in (10, 20, 30):
        ring.add(steps, steps * 1e-6, "pressure 64x32", _frame(steps))
    head, _ = frames.decode_frame(_frame(20))
    out = ring.recall(25, "pressure 64x32")  # the newest at or before step 25
    h, _ = frames.decode_frame(out)
    assert h.step == 20 and h.time_s == pytest.approx(20e-6)
    assert out[14] == RECALLED and _frame(20)[14] == LIVE
    assert out[:14] == _frame(20)[:14] and out[16:] == _frame(20)[16:]  # nothing else changed
    assert ring.recall(5, "pressure 64x32") is None  # older than anything kept
    assert frames.decode_frame(ring.recall(30, "mach 10x10"))[0].step == 30  # another view: what was kept
    ring.add(2, 2e-6, "pressure 64x32", _frame(2))  # the flow was reset
    assert ring.listing()["steps"] == [2]
    ring.add(2, 5e-6, "mach 64x32", _frame(2))  # another flow at the same step count: its time tells
    assert ring.listing()["time_s"] == [5e-6] and ring.nbytes == len(_frame(2))


def test_frames_of_a_real_session_fit_the_documented_bound():
    """A real snapshot's frames at a large canvas: the byte bound, not the count, limits the ring."""
    session = Session(scn.load_builtin("forward_step_mach3"))
    view = ViewChoice("mach", 1024, 512)
    frame = build_frame(session.snapshot(), view)
    ring = FrameRing()
    for steps in range(ring.max_frames):
        ring.add(steps, 0.0, ring_key(view), frame)
    assert ring.nbytes <= ring.max_bytes
    assert len(ring) == min(ring.max_frames, ring.max_bytes // len(frame))


def test_a_ring_without_room_is_refused():
    with pytest.raises(ValueError, match="max_frames=0"):
        FrameRing(max_frames=0)
