"""Fan-out to the open tabs: one sender task per client that always sends only the newest frame.

The solver never waits for a client. It publishes a flow snapshot and a status; each client's own
sender task wakes, sends its queued replies, the newest status, and a frame of the newest snapshot
when one is due (at most 30 per second). A slow tab therefore only skips frames; it never slows the
solver or the other tabs. Frames and overlays are made once per snapshot and view and shared.
"""
from __future__ import annotations

import asyncio
import collections
import itertools
import logging
import time
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from starlette.websockets import WebSocket

from shockslate.solver.kinds import CellKind

from . import frames
from .comparison import COMPARISON_CHANNEL
from .frame_ring import FrameRing, with_channel
from .protocol import OVERLAYS, dumps
from .session import FlowSnapshot

log = logging.getLogger("shockslate.hub")

MAX_FRAMES_PER_S = 30.0
#: Frames a tab may receive back to back after a late one (token bucket); the average stays at most 30/s.
FRAME_BURST = 2.0
OVERLAYS_PER_S = 4.0
#: A client whose replies pile up beyond this many messages or bytes is not reading; it is disconnected.
MAX_QUEUED_MESSAGES = 2000
MAX_QUEUED_BYTES = 16 * 1024 * 1024
#: Tabs connected at once; one more is told so and closed (each tab costs frames and memory).
MAX_CLIENTS = 32
DEFAULT_VIEW = "mach"
#: While a new grid is built (a resolution or extent change), a tab that got no new frame for this long gets its
#: newest frame again, marked held: the picture stays live at 20 frames/s, though a big grid's flow may give
#: fewer (a 2048-cell grid gave 0.7-2.3 frames/s at load average 4-6 on 2 CPUs), is held still, or waits for a step
#: in progress.
HELD_FRAME_INTERVAL_S = 1.0 / 20.0
#: Channel of a held frame (PROTOCOL.md "Binary frames"): the newest frame again, the same instant of the flow.
HELD = 3


@dataclass(frozen=True)
class ViewChoice:
    """What a client draws: the view, its canvas in pixels, the colour range and the overlays."""

    view: str = DEFAULT_VIEW
    width: int = 1024
    height: int = 512
    fixed_range: tuple[float, float] | None = None
    overlays: tuple[str, ...] = OVERLAYS


@dataclass
class Client:
    id: str
    websocket: WebSocket
    view: ViewChoice = field(default_factory=ViewChoice)
    outbox: collections.deque = field(default_factory=collections.deque)
    status: dict | None = None
    wake: asyncio.Event = field(default_factory=asyncio.Event)
    last_frame_key: tuple | None = None
    #: the newest live frame sent, with its view and monotonic time (what a held frame repeats)
    last_frame: tuple[ViewChoice, bytes] | None = None
    last_frame_t: float = 0.0
    frame_tokens: float = FRAME_BURST
    frame_tokens_t: float = 0.0
    last_overlay_key: tuple | None = None
    last_overlay_t: float = 0.0
    frame_times: collections.deque = field(default_factory=lambda: collections.deque(maxlen=64))
    frames_sent: int = 0
    comparison_key: tuple | None = None
    queued_bytes: int = 0
    closed: bool = False

    def frames_per_s(self, now: float) -> float:
        recent = [t for t in self.frame_times if now - t <= 2.0]
        if len(recent) < 2:
            return 0.0
        return (len(recent) - 1) / max(recent[-1] - recent[0], 1e-6)

    def queue(self, text: str | bytes) -> None:
        """A reply to send: text, or bytes sent as a binary frame (a recalled frame)."""
        size = _counted(text)
        if len(self.outbox) >= MAX_QUEUED_MESSAGES or self.queued_bytes + size > MAX_QUEUED_BYTES:
            self.closed = True
        else:
            self.outbox.append(text)
            self.queued_bytes += size
        self.wake.set()

    def queue_first(self, text: str) -> None:
        """A message to send before everything queued (a tab's hello, made while broadcasts were queued)."""
        self.outbox.appendleft(text)
        self.queued_bytes += _counted(text)
        self.wake.set()

    def next_queued(self) -> str | bytes:
        text = self.outbox.popleft()
        self.queued_bytes -= _counted(text)
        return text


def _counted(text: str | bytes) -> int:
    """Bytes a queued message counts against MAX_QUEUED_BYTES: a message bigger than half of it (a big sketch's
    whole scenario, 19 MB for 30 polygons of 15,000 points) counts as half, so such a sketch still reaches a tab
    (its hello and the replies queued behind it) while a tab that reads none of two of them is dropped."""
    return min(len(text), MAX_QUEUED_BYTES // 2)


class Hub:
    """The set of connected clients and the newest snapshot, with a shared cache of frames."""

    def __init__(self, max_frames_per_s: float = MAX_FRAMES_PER_S):
        self.clients: dict[str, Client] = {}
        self.snapshot: FlowSnapshot | None = None
        self.max_frames_per_s = max_frames_per_s
        self._ids = itertools.count(1)
        self._cache: dict[tuple, asyncio.Future] = {}
        self._cache_version = -1
        self._ready: dict[tuple, Any] = {}
        self._overlays_prepared_t = 0.0
        #: Whether the newest snapshot came from a running flow (more will follow soon).
        self.snapshot_live = False
        self.frames_built = 0
        #: The last few seconds of prepared frames, for scrubbing back (frame_ring.py).
        self.ring = FrameRing()
        #: Frames of the comparison run (channel 2) by view key, made with the main frames, and their version.
        self.comparison_frames: dict[str, bytes] = {}
        self.comparison_version = -1
        #: Grid changes under way (resolution or extent): while any is, tabs get held frames (HELD_FRAME_INTERVAL_S).
        self.rebuilding = 0

    # ------------------------------------------------------------ membership
    def new_client(self, websocket: WebSocket) -> Client:
        client = Client(f"c{next(self._ids)}", websocket)
        self.clients[client.id] = client
        return client

    def remove(self, client: Client) -> None:
        client.closed = True
        client.wake.set()
        self.clients.pop(client.id, None)

    @property
    def wants_frames(self) -> bool:
        return bool(self.clients)

    def hold_frames(self, on: bool) -> None:
        """A grid change begins (True) or ends (False): meanwhile every tab keeps getting frames (held ones
        while no new snapshot comes). Changes may overlap: held frames go until the last one ends."""
        self.rebuilding = max(self.rebuilding + (1 if on else -1), 0)
        for client in self.clients.values():
            client.wake.set()

    # ------------------------------------------------------------ publishing
    def send(self, client: Client, message: dict) -> None:
        client.queue(dumps(message))

    def send_frame(self, client: Client, frame: bytes) -> None:
        """A binary frame for this client only, in turn with its replies (a recalled frame)."""
        client.queue(frame)

    def broadcast(self, message: dict, reply_to: Client | None = None, request_id: Any = None) -> None:
        """The same message to every client; the one that asked gets its id echoed."""
        text = dumps(message)
        for client in list(self.clients.values()):
            if client is reply_to and request_id is not None:
                client.queue(dumps({**message, "id": request_id}))
            else:
                client.queue(text)

    def publish_status(self, status: dict) -> None:
        """Newest status only: a client that has not sent the last one gets this one instead."""
        for client in self.clients.values():
            client.status = status
            client.wake.set()

    def publish_snapshot(self, snap: FlowSnapshot, live: bool = False) -> None:
        self.snapshot = snap
        self.snapshot_live = live
        for client in self.clients.values():
            frame = self.comparison_frames.get(ring_key(client.view))
            key = (self.comparison_version, ring_key(client.view))
            # a comparison frame goes with the main one, unless this tab is still behind with its replies
            if frame is not None and key != client.comparison_key and len(client.outbox) < 4:
                client.queue(frame)
                client.comparison_key = key
            client.wake.set()

    # ------------------------------------------------------------ frames
    def prepare(self, snap: FlowSnapshot, with_overlays: bool = False, comparison: FlowSnapshot | None = None) -> None:
        """Build, in the solver's own thread right after a snapshot, every frame the tabs will ask for.

        Doing it there, between bursts, keeps a third busy thread away from the solver's two OpenMP
        threads on a 2-core machine (a preempted OpenMP thread stalls its partner at each barrier).
        Overlays are built at most OVERLAYS_PER_S times a second, or when with_overlays is set.
        """
        clients = list(self.clients.values())
        ready: dict[tuple, Any] = {}
        fields = _ViewFields(snap)  # each view computed once, shared by frames and the sonic line
        compared: dict[str, bytes] = {}
        for view in {c.view for c in clients}:
            ready[_frame_key(snap, view)] = build_frame(snap, view, fields)
            self.frames_built += 1
            self.ring.add(snap.steps, snap.time_s, ring_key(view), ready[_frame_key(snap, view)])
            if comparison is not None:
                compared[ring_key(view)] = build_comparison_frame(comparison, view, fields)
        now = time.monotonic()
        if with_overlays or now - self._overlays_prepared_t >= 1.0 / OVERLAYS_PER_S:
            for overlays in {c.view.overlays for c in clients if c.view.overlays}:
                ready[_overlay_key(snap, overlays)] = build_overlay_text(snap, overlays, fields)
            self._overlays_prepared_t = now
        self._ready = ready
        if comparison is not None and compared:
            self.comparison_frames = compared
            self.comparison_version = comparison.version
        elif comparison is None:
            self.comparison_frames = {}

    async def _get(self, key: tuple, build, live: bool) -> Any:
        """A prepared frame or overlay; while the flow runs, None when it was not prepared (the next
        snapshot will have it); while it stands still, built on demand in a helper thread."""
        found = self._ready.get(key)
        if found is not None or live:
            return found
        if key[0] != self._cache_version:
            self._cache.clear()
            self._cache_version = key[0]
        fut = self._cache.get(key)
        if fut is None:
            fut = asyncio.ensure_future(asyncio.to_thread(build))
            self._cache[key] = fut
        return await asyncio.shield(fut)

    async def frame(self, snap: FlowSnapshot, view: ViewChoice, live: bool = False) -> bytes | None:
        # a snapshot that is no copy (the running flow's own arrays) is never read after its burst: prepared only
        return await self._get(_frame_key(snap, view), lambda: build_frame(snap, view), live or not snap.detached)

    async def overlay_text(self, snap: FlowSnapshot, overlays: tuple[str, ...], live: bool = False) -> str | None:
        return await self._get(_overlay_key(snap, overlays), lambda: build_overlay_text(snap, overlays),
                               live or not snap.detached)

    # ------------------------------------------------------------ the sender
    async def sender(self, client: Client) -> None:
        """Send this client's replies, status and newest frame until it goes away."""
        ws = client.websocket
        wait_s: float | None = None
        while not client.closed:
            try:
                if wait_s is None:
                    await client.wake.wait()
                else:
                    await asyncio.wait_for(client.wake.wait(), timeout=wait_s)
            except asyncio.TimeoutError:
                pass
            client.wake.clear()
            if client.closed:
                break
            while client.outbox:
                item = client.next_queued()
                if isinstance(item, bytes):
                    await ws.send_bytes(item)
                else:
                    await ws.send_text(item)
            now = time.monotonic()
            if client.status is not None:
                status, client.status = client.status, None
                await ws.send_text(dumps({**status, "frames_per_s": client.frames_per_s(now)}))
            wait_s = await self._send_frame_if_due(client)

    async def _send_frame_if_due(self, client: Client) -> float | None:
        """Send a frame (and, less often, an overlay) of the newest snapshot; the seconds until one is due."""
        snap, live = self.snapshot, self.snapshot_live
        if snap is None:
            return None
        view = client.view
        key = (snap.version, view)
        wait_s = None
        if key != client.last_frame_key:
            now = time.monotonic()
            client.frame_tokens = min(FRAME_BURST, client.frame_tokens
                                      + (now - client.frame_tokens_t) * self.max_frames_per_s)
            client.frame_tokens_t = now
            if client.frame_tokens < 1.0:
                wait_s = (1.0 - client.frame_tokens) / self.max_frames_per_s
            else:
                data = await self.frame(snap, view, live)
                if data is not None:
                    client.frame_tokens -= 1.0
                    await client.websocket.send_bytes(data)
                    client.last_frame_key = key
                    client.last_frame = (view, data)
                    client.last_frame_t = time.monotonic()
                    client.frame_times.append(time.monotonic())
                    client.frames_sent += 1
        if self.rebuilding and client.last_frame is not None and client.last_frame[0] == view:
            held_wait = await self._send_held_if_due(client)
            wait_s = held_wait if wait_s is None else min(wait_s, held_wait)
        if view.overlays:
            okey = (snap.version, view.overlays)
            if okey != client.last_overlay_key:
                due_in = client.last_overlay_t + 1.0 / OVERLAYS_PER_S - time.monotonic()
                if due_in > 0.001:
                    wait_s = due_in if wait_s is None else min(wait_s, due_in)
                else:
                    text = await self.overlay_text(snap, view.overlays, live)
                    if text is not None:
                        await client.websocket.send_text(text)
                        client.last_overlay_key = okey
                        client.last_overlay_t = time.monotonic()
        return wait_s

    async def _send_held_if_due(self, client: Client) -> float:
        """While a grid change is under way: the tab's newest frame again, marked HELD, when it got none for
        HELD_FRAME_INTERVAL_S (not counted in its frames_per_s: no new picture); the seconds until the next."""
        now = time.monotonic()
        due_in = client.last_frame_t + HELD_FRAME_INTERVAL_S - now
        if due_in > 0.001:
            return due_in
        if len(client.outbox) < 4:  # a tab behind with its replies needs no repeated picture
            await client.websocket.send_bytes(with_channel(client.last_frame[1], HELD))
        client.last_frame_t = time.monotonic()
        return HELD_FRAME_INTERVAL_S


def ring_key(view: ViewChoice) -> str:
    """The key a view's frames have in the frame ring: its name and canvas size ("mach 800x400")."""
    return f"{view.view} {view.width}x{view.height}"


def _frame_key(snap: FlowSnapshot, view: ViewChoice) -> tuple:
    return (snap.version, "frame", view.view, view.width, view.height, view.fixed_range)


def _overlay_key(snap: FlowSnapshot, overlays: tuple[str, ...]) -> tuple:
    return (snap.version, "overlay", overlays)


class _ViewFields:
    """The views of one snapshot, each computed on first use, with their finite min and max."""

    def __init__(self, snap: FlowSnapshot):
        self.snap = snap
        self._done: dict[str, tuple[np.ndarray, tuple[float, float] | None]] = {}

    def values(self, view: str) -> tuple[np.ndarray, tuple[float, float] | None]:
        if view not in self._done:
            s = self.snap
            padded = (s.state, s.kinds, s.ghost) if s.state is not None else None
            self._done[view] = frames.view_values(view, s.gas, s.rho, s.u, s.v, s.p, s.domain.dx_m, s.mask, padded)
        return self._done[view]

    def __getitem__(self, view: str) -> np.ndarray:
        return self.values(view)[0]


def build_frame(snap: FlowSnapshot, view: ViewChoice, fields: _ViewFields | None = None) -> bytes:
    fields = fields or _ViewFields(snap)
    fld, finite = fields.values(view.view)
    return frames.encode_frame(fld, view.view, view.width, view.height, view.fixed_range, snap.time_s, snap.steps,
                               finite)


def build_comparison_frame(comparison: FlowSnapshot, view: ViewChoice, main: _ViewFields) -> bytes:
    """A frame of the comparison run in the main picture's colour range (equal colours, equal values), channel 2."""
    rng = view.fixed_range or frames.colour_range(main[view.view], None, main.values(view.view)[1])
    frame = build_frame(comparison, ViewChoice(view.view, view.width, view.height, rng, ()))
    return with_channel(frame, COMPARISON_CHANNEL)


def build_overlay_text(snap: FlowSnapshot, overlays: tuple[str, ...], fields: _ViewFields | None = None) -> str:
    """The overlay message, as JSON text, for the overlays asked for."""
    out: dict[str, Any] = {"type": "overlay", "time_s": snap.time_s, "steps": snap.steps,
                           "sonic_line": [], "arrows": []}
    x, y = snap.x_centres_m, snap.y_centres_m
    if "sonic_line" in overlays:
        out["sonic_line"] = frames.sonic_line((fields or _ViewFields(snap))["mach"], x, y)
    if "arrows" in overlays:
        out["arrows"] = frames.velocity_arrows(snap.u, snap.v, snap.mask != CellKind.WALL, x, y)
    return dumps(out)
