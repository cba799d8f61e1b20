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

from shockslate.server.app import ServerConfig, create_app
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
        seen = _messages(other, lambda got: _frames(got) >= 10, "frames while the new grid is built")
        assert _frames(seen) >= 10 and session.sim.steps > steps
        assert session.sim.domain.nx == 64  # the old grid runs on until the new one is ready
        held.release()
        reply = _replies(_messages(sender, lambda got: _replies(got, "res"), "the acknowledgement"), "res")[0]
        assert reply["type"] == "scenario" and reply["scenario"]["domain"]["nx"] == 160
        assert session.sim.domain.nx == 160 and session.running
        _messages(other, lambda got: _frames(got) >= 3, "frames of the new grid")
