"""Changes that take long do not hold the other tabs: a real uvicorn server (in a thread of the test), real
websockets, two tabs.

The slow part of each change is held on purpose (the save of a change, the rebuild of a new grid) with an event
the test releases, so what must happen meanwhile is checked by counting, never by timing: the flow steps on and
the other tab keeps getting frames while the change is held, and the change is acknowledged only after it is
saved. Common practice for responsive servers (long work off the loop and off the shared lock), no single source.
"""
from __future__ import annotations

import contextlib
import json
import shutil
import socket
import threading
import time

import numpy as np
import pytest
import uvicorn
from websockets.sync.client import connect

from shockslate.server import session as session_module
from shockslate.server.app import ServerConfig, create_app
from shockslate.server.frames import decode_frame
from shockslate.server.hub import HELD
from shockslate.solver import scenario as scn
from scenario_docs import duct_doc

#: Generous limit for anything the test waits for (a busy 2-core machine, a first compile of the kernels).
WAIT_S = 120.0
DISC = {"kind": "circle", "centre_m": [0.3, 0.05], "radius_m": 0.02, "paints": "wall"}


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class LiveServer:
    """create_app served by uvicorn on a free loopback port, in a thread; parts gives the server's own objects."""

    def __init__(self, tmp_path, nx: int = 64, doc: dict | None = None, **config: object):
        """The test duct at nx cells (or the scenario document `doc`), paused, one solver thread; `config` adds
        ServerConfig fields."""
        doc = doc if doc is not None else duct_doc(nx, name="live duct")
        self.app = create_app(ServerConfig(data_dir=tmp_path / "data", scenario=scn.parse_scenario(doc),
                                           start_running=False, warm=False, solver_threads=1, **config))
        self.port = _free_port()
        self.server = uvicorn.Server(uvicorn.Config(self.app, host="127.0.0.1", port=self.port, log_level="warning"))
        self.thread = threading.Thread(target=self.server.run, daemon=True)
        self.thread.start()
        deadline = time.monotonic() + WAIT_S
        while not self.server.started:
            if not self.thread.is_alive() or time.monotonic() > deadline:
                raise AssertionError("the server did not start")
            time.sleep(0.05)

    @property
    def parts(self):
        return self.app.state.parts

    @contextlib.contextmanager
    def tab(self):
        with connect(f"ws://127.0.0.1:{self.port}/ws", max_size=None) as sock:
            hello = json.loads(sock.recv(timeout=WAIT_S))
            assert hello["type"] == "hello"
            yield sock

    def stop(self) -> None:
        self.server.should_exit = True
        self.thread.join(timeout=30)


@pytest.fixture
def live(tmp_path):
    server = LiveServer(tmp_path)
    try:
        yield server
    finally:
        server.stop()


def _until(predicate, what: str) -> None:
    deadline = time.monotonic() + WAIT_S
    while not predicate():
        if time.monotonic() > deadline:
            raise AssertionError(f"waited {WAIT_S} s for {what}")
        time.sleep(0.01)


def _messages(sock, until, what: str) -> list:
    """Messages from a tab (text as dicts, frames as bytes) until `until(messages)` holds."""
    got: list = []
    deadline = time.monotonic() + WAIT_S
    while not until(got):
        if time.monotonic() > deadline:
            raise AssertionError(f"waited {WAIT_S} s for {what}; got {len(got)} messages")
        msg = sock.recv(timeout=WAIT_S)
        got.append(msg if isinstance(msg, bytes) else json.loads(msg))
    return got


def _frames(messages) -> int:
    return sum(isinstance(m, bytes) for m in messages)


def _channel(frame: bytes) -> int:
    """The frame's channel (PROTOCOL.md "Binary frames": 0 live, 3 held)."""
    return int.from_bytes(frame[14:16], "little")


def _live_frames(messages) -> list:
    return [m for m in messages if isinstance(m, bytes) and _channel(m) == 0]


def _held_frames(messages) -> list:
    return [m for m in messages if isinstance(m, bytes) and _channel(m) == HELD]


def _after_last_live(messages) -> list:
    live = [k for k, m in enumerate(messages) if isinstance(m, bytes) and _channel(m) == 0]
    return messages[live[-1] + 1:] if live else messages


def _replies(messages, rid: str) -> list:
    return [m for m in messages if isinstance(m, dict) and m.get("id") == rid]


class Held:
    """Wraps a callable so each call waits for release() before it runs (the work itself is real)."""

    def __init__(self, fn):
        self.fn = fn
        self.entered = threading.Event()
        self.released = threading.Event()

    def __call__(self, *args, **kwargs):
        self.entered.set()
        assert self.released.wait(WAIT_S), "the test never released the held call"
        return self.fn(*args, **kwargs)

    def release(self) -> None:
        self.released.set()


def _run(tab, live) -> None:
    tab.send(json.dumps({"type": "run", "id": "run"}))
    _messages(tab, lambda got: _replies(got, "run"), "the run to start")
    _until(lambda: live.parts.session.running, "the run state")


def test_the_flow_steps_on_while_a_change_is_saved_and_the_change_is_acknowledged_after(live):
    store = live.parts.store
    held = Held(store.save_current)
    store.save_current = held
    with live.tab() as sender, live.tab() as other:
        _run(sender, live)
        sender.send(json.dumps({"type": "add_shape", "shape": DISC, "id": "disc"}))
        assert held.entered.wait(WAIT_S)
        session = live.parts.session
        steps = session.sim.steps
        assert len(session.scenario.sketch.shapes) == 2  # applied: the flow now runs with the disc
        # while the save is held: the solver keeps stepping and the other tab keeps getting frames
        _until(lambda: session.sim.steps >= steps + 5, "steps while the save is held")
        seen = _messages(other, lambda got: _frames(got) >= 5, "frames while the save is held")
        assert not [m for m in seen if isinstance(m, dict) and m["type"] == "scenario"]  # not acknowledged yet
        saved = json.loads(store.current_path.read_text())
        assert len(saved["sketch"]["shapes"]) == 1
        held.release()
        reply = _replies(_messages(sender, lambda got: _replies(got, "disc"), "the acknowledgement"), "disc")[0]
        assert reply["type"] == "scenario" and len(reply["scenario"]["sketch"]["shapes"]) == 2
        # the file was written before the acknowledgement was sent
        assert json.loads(store.current_path.read_text())["sketch"]["shapes"][-1]["kind"] == "circle"
        told = _messages(other, lambda got: any(isinstance(m, dict) and m["type"] == "scenario" for m in got),
                         "the other tab's copy")
        assert [m for m in told if isinstance(m, dict) and m["type"] == "scenario"][0]["revision"] == reply["revision"]


def test_a_failed_save_puts_walls_and_flow_back_and_tells_every_tab(live):
    # the data folder is replaced by a file, so every write fails with an OSError, as a full or read-only disk would
    store = live.parts.store
    session = live.parts.session
    with live.tab() as sender, live.tab() as other:
        mask, revision = session.sim.mask.copy(), session.revision
        shutil.rmtree(store.data_dir)
        store.data_dir.write_text("not a folder")
        try:
            sender.send(json.dumps({"type": "add_shape", "shape": DISC, "id": "disc"}))
            err = _replies(_messages(sender, lambda got: _replies(got, "disc"), "the refusal"), "disc")[0]
            assert err["type"] == "error" and err["field"] == "autosave"
            told = _messages(other, lambda got: any(isinstance(m, dict) and m["type"] == "error" for m in got),
                             "the other tab's notice")
            assert [m for m in told if isinstance(m, dict) and m["type"] == "error"][0]["field"] == "autosave"
            np.testing.assert_array_equal(session.sim.mask, mask)  # the disc was applied, then taken back
            assert session.revision == revision and len(session.scenario.sketch.shapes) == 1
            assert session.undo_depth == 0
        finally:
            store.data_dir.unlink()


def test_other_tabs_keep_getting_frames_while_a_new_resolution_is_built(live):
    session = live.parts.session
    held = Held(session.build_rebuild)
    session.build_rebuild = held
    with live.tab() as sender, live.tab() as other:
        _run(sender, live)
        sender.send(json.dumps({"type": "set_resolution", "nx": 160, "id": "res"}))
        assert held.entered.wait(WAIT_S)
        steps = session.sim.steps
        seen = _messages(other, lambda got: len(_live_frames(got)) >= 10, "live frames while the new grid is built")
        assert len(_live_frames(seen)) >= 10 and session.sim.steps > steps
        assert session.sim.domain.nx == 64  # the old grid runs on until the new one is ready
        held.release()
        reply = _replies(_messages(sender, lambda got: _replies(got, "res"), "the acknowledgement"), "res")[0]
        assert reply["type"] == "scenario" and reply["scenario"]["domain"]["nx"] == 160
        assert session.sim.domain.nx == 160 and session.running
        _messages(other, lambda got: sum(decode_frame(f)[0].width == 160 for f in _live_frames(got)) >= 3,
                  "live frames of the new grid, at its width")


def test_a_slow_flow_is_held_while_its_new_grid_is_built_and_the_tabs_get_held_frames_of_it(live, monkeypatch):
    """Leaving a grid whose steps are slow (a 2048-cell one), the flow is held, not stepped, while the new grid is
    built; the other tab keeps getting frames: its newest frame again, marked held (channel 3), the same instant
    and pixels each time; then the acknowledgement, and live frames of the new grid at its new size."""
    monkeypatch.setattr(session_module, "HOLD_STEP_S", 0.0)  # every running flow counts as slow: it is held
    session = live.parts.session
    held = Held(session.build_rebuild)
    session.build_rebuild = held
    with live.tab() as sender, live.tab() as other:
        _run(sender, live)
        before = _messages(other, lambda got: len(_live_frames(got)) >= 2, "live frames of the running flow")
        assert decode_frame(_live_frames(before)[-1])[0].width == 64  # the default canvas holds the whole grid
        sender.send(json.dumps({"type": "set_resolution", "nx": 160, "id": "res"}))
        assert held.entered.wait(WAIT_S)
        _until(lambda: session.holding, "the flow to be held")
        _messages(other, lambda got: len(_held_frames(got)) >= 2, "held frames")  # a step in progress has ended
        steps = session.sim.steps
        seen = _messages(other, lambda got: len(_held_frames(_after_last_live(got))) >= 4,
                         "held frames while the new grid is built")
        assert session.sim.steps == steps and session.sim.domain.nx == 64 and session.holding  # held, not stepped
        repeats = _held_frames(_after_last_live(seen))  # the flow's last picture (one may be made as it is held)
        headers = [decode_frame(f)[0] for f in repeats]
        assert {(h.width, h.step, h.time_s) for h in headers} == {(64, headers[0].step, headers[0].time_s)}
        assert headers[0].step <= steps
        assert len({f[48:] for f in repeats}) == 1  # the same pixels: the flow as it stands, not a new picture
        held.release()
        reply = _replies(_messages(sender, lambda got: _replies(got, "res"), "the acknowledgement"), "res")[0]
        assert reply["type"] == "scenario" and reply["scenario"]["domain"]["nx"] == 160
        assert session.sim.domain.nx == 160 and session.running and not session.holding
        after = _messages(other, lambda got: sum(decode_frame(f)[0].width == 160 for f in _live_frames(got)) >= 3,
                          "live frames of the new grid")
        new_grid = [decode_frame(f)[0] for f in _live_frames(after) if decode_frame(f)[0].width == 160]
        assert new_grid[-1].step > new_grid[0].step  # the new grid runs
