"""Drives the session from the event loop: solver bursts in a worker thread, every change behind one lock.

The solver steps in bursts of about 20 ms in one dedicated worker thread (the numba kernels release
the GIL), so the event loop stays free to read messages and feed the tabs. Every call that touches
the simulation runs in that same thread: numba's OpenMP layer keeps a thread team per calling thread,
and teams of several callers spin against each other on a 2-core machine (measured: the solver ran at
less than half speed when bursts hopped between the default pool's threads). Requests take the same asyncio
lock, which is fair: a request waits at most one burst. While tabs are connected, the runner takes a flow
snapshot about 32 times a second inside the bursts (between two steps, on its own schedule) and after each
request, builds its frames in the solver thread and hands them to the event loop; a few times per second it
publishes a status.
"""
from __future__ import annotations

import asyncio
import functools
from concurrent.futures import ThreadPoolExecutor
import logging
import time
import weakref
from typing import Any, Callable

from . import engine, frame_kernels, readings
from .history import FlowHistory
from .hub import Hub
from .session import Advanced, Session
from .comparison import Comparison, content_key
from .errors import RequestError
from .wave_history import WaveHistory

log = logging.getLogger("shockslate.runner")

BURST_S = 0.02
STATUS_INTERVAL_S = 0.25
#: At most about this share of a running flow's solver thread goes to statuses: when reading one takes long (0.25-0.3 s
#: on a 2048 x 1024 grid, measured), they come further apart than STATUS_INTERVAL_S (there: every 1.25-1.5 s).
STATUS_SHARE = 0.2
#: Snapshots run on a fixed schedule a little faster than the 30 frames/s a tab may take, so that a
#: burst overrunning its deadline by part of a step does not lower the rate the tabs see.
SNAPSHOT_INTERVAL_S = 1.0 / 32.0


class Runner:
    def __init__(self, session: Session, hub: Hub, *, burst_s: float = BURST_S,
                 status_interval_s: float = STATUS_INTERVAL_S, snapshot_interval_s: float = SNAPSHOT_INTERVAL_S,
                 status_share: float | None = STATUS_SHARE):
        self.session = session
        self.hub = hub
        self.burst_s = burst_s
        self.status_interval_s = status_interval_s
        self.status_share = status_share  # None: a status every status_interval_s, whatever it costs
        self._status_cost_s = 0.0  # wall time of reading the last status
        self.snapshot_interval_s = snapshot_interval_s
        self.lock = asyncio.Lock()
        self._loop: asyncio.AbstractEventLoop | None = None  # the event loop, once started
        self._worker = ThreadPoolExecutor(max_workers=1, thread_name_prefix="shockslate-solver")
        self._kick = asyncio.Event()
        self._task: asyncio.Task | None = None
        self._ticker: asyncio.Task | None = None
        self._next_snapshot_t = 0.0
        self._snapshot_version = -1  # flow_version of the newest snapshot published
        self._last_status_t = 0.0
        self._rate_t = time.monotonic()
        self._rate_steps = session.sim.steps
        self._rate_floors = session.sim.floors_total
        self.steps_per_s = 0.0
        self.cell_updates_per_s = 0.0
        self.last_status: dict | None = None
        self._status_key: tuple | None = None
        self._status_failure: str | None = None
        #: Probe and station histories, sent to a tab when it joins.
        self.history = FlowHistory()
        #: Rows of a field along the wave diagram's line, taken every few steps (wave_history.py).
        self.waves = WaveHistory()
        #: The comparison run beside the main one, or None (comparison.py); its news for the tabs.
        self.comparison: Comparison | None = None
        self.comparison_news: dict | None = None

    # ------------------------------------------------------------ life cycle
    def start(self) -> None:
        self._loop = asyncio.get_running_loop()
        # the frame kernels load (or compile, once per user) in the solver thread before its first burst or
        # warm-up, so no first frame waits for them
        self._worker.submit(frame_kernels.warm)
        self._task = asyncio.create_task(self._run_forever(), name="shockslate-runner")
        self._ticker = asyncio.create_task(self._status_ticker(), name="shockslate-status")

    async def in_worker(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
        """Run fn in the solver's own thread (callers hold the lock when fn touches the session)."""
        return await asyncio.get_running_loop().run_in_executor(self._worker, functools.partial(fn, *args, **kwargs))

    async def stop(self) -> None:
        for task in (self._task, self._ticker):
            if task is not None:
                task.cancel()
        for task in (self._task, self._ticker):
            if task is not None:
                try:
                    await task
                except asyncio.CancelledError:
                    pass
        self._worker.shutdown(wait=False, cancel_futures=True)

    # ------------------------------------------------------------ requests
    async def call(self, fn: Callable[..., Any], *args: Any, fresh_status: bool = False, **kwargs: Any) -> Any:
        """Run a session method in the worker thread under the lock, then publish the flow it left.

        fresh_status: also compute and publish a status now (run control answers with one); other
        changes leave it to the next periodic status, so a new shape reaches the tabs sooner.
        """
        async with self.lock:
            result, snap, status = await self.in_worker(self._call_and_observe, fn, args, kwargs, fresh_status)
        news = self.take_comparison_news()
        if news is not None:
            self.hub.broadcast(news)
        if snap is not None:
            self.hub.publish_snapshot(snap)
        if status is not None:
            self.hub.publish_status(status)
        self._kick.set()
        return result

    async def read(self, fn: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
        """Run a read-only session method in the worker thread under the lock; publishes nothing."""
        async with self.lock:
            return await self.in_worker(fn, *args, **kwargs)

    def _call_and_observe(self, fn, args, kwargs, fresh_status: bool):
        started = time.perf_counter()
        result = fn(*args, **kwargs)
        self.waves.record(self.session.sim)  # a step request, or a reset: the wave diagram follows
        self.follow_comparison(time.perf_counter() - started)
        snap = None
        if self.hub.wants_frames:
            snap = self.session.snapshot()
            self._snapshot_version = snap.version
            self.hub.prepare(snap, with_overlays=True, comparison=self._comparison_snapshot())
        return result, snap, (self._status_or_none(time.monotonic()) if fresh_status else None)

    # ------------------------------------------------------------ the run loop
    async def _run_forever(self) -> None:
        while True:
            if not self.session.running:
                self._kick.clear()
                await self._kick.wait()
                continue
            try:
                async with self.lock:
                    advanced, _, status = await self.in_worker(self._burst)
            except Exception as err:  # a bug, not a divergence: stop the run, keep the server, say so
                log.exception("the run stopped on an unexpected error")
                await self._stop_after_failure(err)
                continue
            news = self.take_comparison_news()
            if news is not None:
                self.hub.broadcast(news)
            if advanced.divergence is not None:
                self.hub.broadcast(advanced.divergence.to_message())
            if status is not None:
                self.hub.publish_status(status)
            await asyncio.sleep(0)

    async def _stop_after_failure(self, err: Exception) -> None:
        async with self.lock:
            if self.session.running:
                self.session.pause()
        self.hub.broadcast({"type": "error", "request": "run", "field": "server", "value": None,
                            "allowed": "a run the server can carry out",
                            "message": f"the run stopped on an internal error and was paused: "
                                       f"{type(err).__name__}: {err}"})
        self._status_key = None  # the ticker sends a fresh status now that the run is paused

    def _burst(self) -> tuple[Advanced, Any, dict | None]:
        """One burst of about burst_s with the flow's snapshots taken inside it on their own schedule.

        A snapshot falls due every snapshot_interval_s while tabs are connected: the burst stops stepping at the
        first step boundary after that, makes the snapshot and its frames here (hub.prepare, on the solver's own
        thread team) and hands them to the event loop without waiting for it. The burst itself keeps its length,
        so a tab adds no hand-overs between the event loop and this thread (each costs a wake-up of both, which
        on a busy 2-core machine took longer than the frame itself), and the frames' sending overlaps the steps.
        """
        start = time.perf_counter()
        steps = 0
        divergence = None
        while True:
            left = max(self.burst_s - (time.perf_counter() - start), 0.0)
            if self.hub.wants_frames:
                left = min(left, max(self._next_snapshot_t - time.monotonic(), 0.0))
            piece = self._advance_sampling(left)
            steps += piece.steps
            divergence = piece.divergence
            now = time.monotonic()
            # a held flow (rebuilt on a new grid) has no new picture: no snapshot of it (each would repeat the last
            # one, made on the solver's thread while the rebuild wants the CPU); the tabs get held frames (hub.py)
            unchanged = self.session.holding and self.session.flow_version == self._snapshot_version
            if self.hub.wants_frames and (now >= self._next_snapshot_t or divergence is not None) and not unchanged:
                # a running flow's frames are made here and now from its own arrays (no copy); a flow that stopped
                # (a divergence) gets a copy, which tabs may still ask other views of
                live = self.session.running and divergence is None
                snap = self.session.snapshot(detached=not live)
                self._snapshot_version = snap.version
                self.hub.prepare(snap, comparison=self._comparison_snapshot())
                self._hand_to_loop(self.hub.publish_snapshot, snap, live)
                late = now - self._next_snapshot_t
                # Keep the schedule (so overruns average out) unless a whole interval behind.
                self._next_snapshot_t = (self._next_snapshot_t if late < self.snapshot_interval_s else now) \
                    + self.snapshot_interval_s
            if divergence is not None or piece.steps == 0 or time.perf_counter() - start >= self.burst_s:
                break
        advanced = Advanced(steps, time.perf_counter() - start, divergence)
        self.follow_comparison(advanced.wall_s)
        now = time.monotonic()
        status = None
        interval = self.status_interval_s
        if self.status_share is not None:
            interval = max(interval, self._status_cost_s / self.status_share)
        if now - self._last_status_t >= interval or advanced.divergence is not None:
            scenario, s = self.session.scenario, self.session
            if s.holding and self.last_status is not None and self._status_key == (s.revision, s.flow_version,
                                                                                   s.state):
                # held for a rebuild and unchanged: the last status again (reading a 2048-cell grid's status took
                # 0.25 s of the solver's thread, from the rebuild and from the swap waiting for it)
                status = self.last_status
                self._last_status_t = now
            elif self.hub.clients or advanced.divergence is not None or scenario.probes or scenario.stations:
                status = self._status_or_none(now)  # with no tab, for the histories a later tab is sent
            else:  # nobody to tell: keep only the rates /health reports
                self._update_rates(now)
                self._last_status_t = now
        return advanced, None, status  # the snapshots went to the event loop as they were made

    def _hand_to_loop(self, fn: Callable[..., Any], *args: Any) -> None:
        """fn(*args) in the event loop, soon; at once when the runner was never started (no loop to hand to)."""
        if self._loop is None:
            fn(*args)
        else:
            self._loop.call_soon_threadsafe(fn, *args)

    def _advance_sampling(self, budget: float) -> Advanced:
        """session.advance(budget); with a wave line set, in pieces of `every_steps` steps, a row after each."""
        waves = self.waves
        if waves.line is None:
            return self.session.advance(budget)
        start = time.perf_counter()
        steps = 0
        while True:
            left = max(budget - (time.perf_counter() - start), 0.0)
            piece = self.session.advance(left, max_steps=waves.every_steps)
            steps += piece.steps
            waves.record(self.session.sim)
            if piece.divergence is not None or piece.steps == 0 or time.perf_counter() - start >= budget:
                return Advanced(steps, time.perf_counter() - start, piece.divergence)

    # ------------------------------------------------------------ the comparison run
    def follow_comparison(self, budget_s: float) -> None:
        """Keep the comparison with the main run (worker thread, locked): started again with a new main flow
        (reset, load: a new simulation or fewer steps), given the same change as the main scenario otherwise,
        then stepped towards the main flow time for at most budget_s of wall time (comparison.py)."""
        c = self.comparison
        if c is None:
            return
        s = self.session
        before = c.diverged
        changed = s.revision != c.main_revision and content_key(s.scenario) != c.main_key
        new_flow = (c.main_sim() if c.main_sim is not None else None) is not s.sim or s.sim.steps < c.main_steps
        try:
            if new_flow and changed:
                c.rebuild(s.scenario, s.revision, "a new main flow: the comparison started again with it")
            elif new_flow:
                c.restart("the main flow started again, and the comparison with it")
            elif changed:
                c.carry(s.scenario, s.revision)
        except (RequestError, ValueError) as err:  # the changed main scenario cannot take the comparison's value
            self.comparison = None
            self.comparison_news = {"type": "comparison", "active": False,
                                    "note": "The comparison stopped: " + getattr(err, "message", str(err))}
            return
        if new_flow or changed:
            self.comparison_news = c.message(s.scenario)
        c.main_revision = s.revision
        c.main_sim = weakref.ref(s.sim)
        c.main_steps = s.sim.steps
        c.follow(s.sim.time_s, max(budget_s, 0.0))
        if c.diverged is not None and before is None:
            self.comparison_news = c.message(s.scenario)

    def _comparison_snapshot(self):
        c = self.comparison
        return c.snapshot() if c is not None and self.hub.wants_frames else None

    def take_comparison_news(self) -> dict | None:
        news, self.comparison_news = self.comparison_news, None
        return news

    async def _status_ticker(self) -> None:
        """A status a few times per second even while paused, so every tab sees the run state."""
        while True:
            await asyncio.sleep(self.status_interval_s)
            if self.session.running or not self.hub.clients:
                continue
            if time.monotonic() - self._last_status_t < self.status_interval_s:
                continue
            key = (self.session.revision, self.session.flow_version, self.session.state)
            if key == self._status_key and self.last_status is not None:
                self.hub.publish_status(self.last_status)  # nothing changed: no need to read the flow again
                continue
            try:
                async with self.lock:
                    status = await self.in_worker(self._status_now, time.monotonic())
            except Exception:
                log.exception("status could not be computed")
                continue
            self.hub.publish_status(status)

    # ------------------------------------------------------------ status
    def _update_rates(self, now: float) -> None:
        """Steps and cell updates per second since the last update (for status and /health)."""
        s, sim = self.session, self.session.shown_sim  # a coarse grid of settle mode's sequence while it runs
        elapsed = now - self._rate_t
        if elapsed >= 0.2 or not s.running:
            steps = sim.steps - self._rate_steps
            if s.running and steps >= 0 and elapsed > 0:
                self.steps_per_s = steps / elapsed
                self.cell_updates_per_s = self.steps_per_s * sim.cells
            elif not s.running:
                self.steps_per_s = self.cell_updates_per_s = 0.0
            self._rate_t, self._rate_steps = now, sim.steps

    def _status_or_none(self, now: float) -> dict | None:
        """The status, or None (logged once per kind of failure) when reading the flow fails: a broken
        figure must not stop the run or drop the tabs."""
        try:
            return self._status_now(now)
        except Exception as err:
            kind = f"{type(err).__name__}: {err}"
            if kind != self._status_failure:
                self._status_failure = kind
                log.exception("status could not be computed")
            return None

    def _status_now(self, now: float) -> dict:
        """The status message (without frames_per_s, which each client's sender adds). Worker thread, locked."""
        started = time.perf_counter()
        s = self.session
        sim = s.sim
        self._update_rates(now)
        floors = max(sim.floors_total - self._rate_floors, 0)
        self._rate_floors = sim.floors_total
        nozzle = readings.nozzle_geometry(sim.mask, sim.domain, s.scenario, wait=False)  # a big sketch: read apart
        status = {"type": "status", "state": s.state.value, "revision": s.revision,
                  "steps_per_s": self.steps_per_s, "cell_updates_per_s": self.cell_updates_per_s,
                  "nx": sim.domain.nx, "ny": sim.domain.ny, "undo_depth": s.undo_depth, "redo_depth": s.redo_depth}
        status["settle"] = s.settle  # settle mode: the page says the flow shown is no time history
        status["settle_grid"] = s.settle_grid()  # settle mode's grid sequence: which grid level the picture shows
        shown = s.shown_sim  # readings, time and steps of the grid the picture shows (settle's coarse grid)
        status.update(readings.status_figures(shown, s.scenario, nozzle, floors))
        status.update(engine.engine_status(shown, s.scenario, nozzle))  # engine figures, separation marks
        if self.comparison is not None:  # where the comparison run is (its time, how far behind, any trouble)
            c = self.comparison
            status["comparison"] = {"time_s": c.sim.time_s, "steps": c.sim.steps, "behind_s": c.behind_s,
                                    "diverged": c.diverged}
        if s.divergence is not None:
            status["warnings"].insert(0, "the run diverged and was paused: " + s.divergence.message)
        self._last_status_t = now
        self._status_key = (s.revision, s.flow_version, s.state)
        self.last_status = status
        self.history.record(status)
        self._status_cost_s = time.perf_counter() - started
        return status
