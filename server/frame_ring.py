"""The last few seconds of frames, kept by the server so a presenter can scrub back in time.

Every frame the hub prepares for the tabs (one per view the tabs look at) is kept here, newest
last, as the very bytes that went out. The ring is bounded twice: at most `max_frames` instants and
at most `max_bytes` of frame bytes in all (the oldest instants go first). With the defaults that is
240 instants (eight seconds at 30 frames/s) or 48 MiB, whichever binds first: a 1024 x 512 frame is
512 KiB, so a large canvas keeps about 90 instants. A recalled frame is sent with its channel field
set to RECALLED (PROTOCOL.md, "Binary frames"), so the page can tell it from a live one.

The ring starts again when the flow goes back in time (reset, a new scenario): a frame of a flow that
no longer exists is never shown as its past. Frames are added in the solver's thread and read on the
event loop, so one small lock guards the ring.
"""
from __future__ import annotations

import collections
import struct
import threading
from dataclasses import dataclass, field

from .frames import HEADER, HEADER_BYTES

#: Instants kept at most (eight seconds at 30 frames per second).
MAX_FRAMES = 240
#: Frame bytes kept at most, over all instants and views.
MAX_BYTES = 48 * 1024 * 1024
#: Channel values in the frame header's 16-bit field at byte 14 (0 in every live frame).
LIVE = 0
RECALLED = 1
_CHANNEL = struct.Struct("<H")
_CHANNEL_OFFSET = 14

assert HEADER.size == HEADER_BYTES


@dataclass
class Instant:
    """One moment of the flow: its step and time, and the frames built of it, by view key ("mach 800x400")."""

    steps: int
    time_s: float
    frames: dict[str, bytes] = field(default_factory=dict)

    @property
    def nbytes(self) -> int:
        return sum(len(b) for b in self.frames.values())


def with_channel(frame: bytes, channel: int) -> bytes:
    """A copy of a frame with its channel field set (the pixels untouched)."""
    out = bytearray(frame)
    _CHANNEL.pack_into(out, _CHANNEL_OFFSET, channel)
    return bytes(out)


class FrameRing:
    """Recent frames, bounded by count and by bytes; the oldest leave first."""

    def __init__(self, max_frames: int = MAX_FRAMES, max_bytes: int = MAX_BYTES):
        if max_frames < 1 or max_bytes < 1:
            raise ValueError(f"a frame ring needs room for at least one frame (max_frames={max_frames}, "
                             f"max_bytes={max_bytes})")
        self.max_frames = max_frames
        self.max_bytes = max_bytes
        self._lock = threading.Lock()
        self._instants: collections.deque[Instant] = collections.deque()
        self._bytes = 0

    # ------------------------------------------------------------ writing
    def add(self, steps: int, time_s: float, view: str, frame: bytes) -> None:
        """Keep one view's frame of the instant (steps, time_s); a frame of an earlier step clears the ring."""
        if len(frame) > self.max_bytes:
            return  # one frame larger than the whole ring: nothing sensible to keep
        with self._lock:
            last = self._instants[-1] if self._instants else None
            if last is not None and (steps < last.steps or (steps == last.steps and time_s != last.time_s)):
                # the flow started again (a reset or a load; at the same step count only the time tells)
                self._instants.clear()
                self._bytes = 0
                last = None
            if last is not None and last.steps == steps:
                self._bytes -= len(last.frames.get(view, b""))
                last.frames[view] = frame
            else:
                self._instants.append(Instant(steps, time_s, {view: frame}))
            self._bytes += len(frame)
            while self._instants and (len(self._instants) > self.max_frames or self._bytes > self.max_bytes):
                self._bytes -= self._instants.popleft().nbytes

    def clear(self) -> None:
        with self._lock:
            self._instants.clear()
            self._bytes = 0

    # ------------------------------------------------------------ reading
    @property
    def nbytes(self) -> int:
        with self._lock:
            return self._bytes

    def __len__(self) -> int:
        with self._lock:
            return len(self._instants)

    def listing(self) -> dict:
        """The `frame_ring` message: the kept instants, oldest first, and the bounds."""
        with self._lock:
            return {"type": "frame_ring", "steps": [i.steps for i in self._instants],
                    "time_s": [i.time_s for i in self._instants], "bytes": self._bytes,
                    "max_frames": self.max_frames, "max_bytes": self.max_bytes}

    def recall(self, steps: int, view: str) -> bytes | None:
        """The kept frame of the newest instant at or before `steps`, marked RECALLED; None when every kept
        instant is later (or none is kept). `view` is a key as given to add ("mach 800x400"): that frame if
        kept, else one of the same view at another size, else any view kept of that instant."""
        with self._lock:
            found = None
            for inst in reversed(self._instants):
                if inst.steps <= steps:
                    found = inst
                    break
            if found is None:
                return None
            same_view = [b for k, b in found.frames.items() if k.split(" ")[0] == view.split(" ")[0]]
            frame = found.frames.get(view) or (same_view[0] if same_view else next(iter(found.frames.values())))
        return with_channel(frame, RECALLED)

    def span(self) -> tuple[int, int] | None:
        """(oldest, newest) step kept, or None."""
        with self._lock:
            if not self._instants:
                return None
            return self._instants[0].steps, self._instants[-1].steps
