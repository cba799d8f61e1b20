"""One-shape changes sent as `sketch_change` (server/scenario_delta.py, PROTOCOL.md): a real uvicorn server in a
thread of the test, real websockets, two tabs that each keep their own copy of the scenario the way the page does.

What must hold is agreement, checked by comparing documents, never by timing: after a series of adds, removes,
undos and redos (some sent as deltas, some whole) both tabs hold exactly the server's document and revision; a tab
that missed a delta notices it from the revision, asks with `get_scenario`, and is whole again. Keeping replicas
in step by a revision number and a resend on a gap is common practice, no single source.
"""
from __future__ import annotations

import contextlib
import json
import time

import numpy as np
import pytest
from websockets.sync.client import connect

from shockslate.server.scenario_delta import DELTA_MIN_BYTES, apply_delta, sketch_delta
from shockslate.solver import scenario as scn
from scenario_docs import duct_doc
from test_live_changes import LiveServer as BaseLiveServer

#: Generous limit for anything the test waits for (a busy 2-core machine).
WAIT_S = 120.0


def disc(x_m: float, r_m: float = 0.01) -> dict:
    return {"kind": "circle", "centre_m": [x_m, 0.05], "radius_m": r_m, "paints": "wall"}


class LiveServer(BaseLiveServer):
    """The live server of test_live_changes on a given document, with tabs that keep their own scenario copy."""

    def __init__(self, tmp_path, doc: dict, delta_min_bytes: int):
        super().__init__(tmp_path, doc=doc, delta_min_bytes=delta_min_bytes)

    def saved_document(self) -> dict:
        """The autosave as written after the last acknowledged change."""
        return json.loads(self.parts.store.current_path.read_text(encoding="utf-8"))

    @contextlib.contextmanager
    def tab(self):
        with connect(f"ws://127.0.0.1:{self.port}/ws", max_size=None) as sock:
            yield Tab(sock)



class Tab:
    """A tab's copy of the scenario, kept as web/main.js keeps it (takeScenario, takeSketchChange)."""

    def __init__(self, sock):
        self.sock = sock
        hello = self._next()
        assert hello["type"] == "hello"
        self.doc, self.revision = hello["scenario"], hello["revision"]
        self.awaiting = False
        self.deltas = 0
        self.delta_bytes: list[int] = []
        self.wholes = 0
        self.asked = 0

    def _next(self) -> dict:
        while True:
            msg = self.sock.recv(timeout=WAIT_S)
            if isinstance(msg, str):
                return json.loads(msg)

    def take(self, msg: dict, drop_deltas: bool = False) -> None:
        if msg["type"] == "scenario":
            self.awaiting = False
            self.doc, self.revision = msg["scenario"], msg["revision"]
            self.wholes += 1
        elif msg["type"] == "sketch_change":
            self.deltas += 1
            self.delta_bytes.append(len(json.dumps(msg)))
            if drop_deltas or msg["revision"] <= self.revision or self.awaiting:
                return
            if msg["base_revision"] != self.revision:
                self.awaiting = True
                self.asked += 1
                self.sock.send(json.dumps({"type": "get_scenario", "id": f"whole{self.asked}"}))
                return
            self.doc, self.revision = apply_delta(self.doc, msg), msg["revision"]

    def send(self, message: dict, rid: str) -> dict:
        """Send a request and read (taking every scenario message on the way) until its reply."""
        self.sock.send(json.dumps({**message, "id": rid}))
        return self.until(lambda m: m.get("id") == rid)

    def until(self, want, drop_deltas: bool = False) -> dict:
        deadline = time.monotonic() + WAIT_S
        while time.monotonic() < deadline:
            msg = self._next()
            self.take(msg, drop_deltas)
            if want(msg):
                return msg
        raise AssertionError(f"waited {WAIT_S} s for a message")

    def reach(self, revision: int) -> None:
        """Read until this tab's copy is at `revision` and not waiting for a whole scenario."""
        if self.revision == revision and not self.awaiting:
            return
        self.until(lambda m: self.revision == revision and not self.awaiting)


@pytest.fixture
def live(tmp_path):
    server = LiveServer(tmp_path, duct_doc(name="delta duct"), delta_min_bytes=0)
    try:
        yield server
    finally:
        server.stop()


# ----------------------------------------------------------------------------- the difference itself

def test_sketch_delta_finds_one_inserted_or_removed_shape():
    a = duct_doc()
    kept = a["sketch"]["shapes"][0]
    b = {**a, "name": "x edited", "sketch": {**a["sketch"], "shapes": [disc(0.2), kept]}}
    assert sketch_delta(a, b) == {"insert": {"index": 0, "shape": disc(0.2)}}
    c = {**b, "sketch": {**b["sketch"], "shapes": [disc(0.2), disc(0.3), kept]}}
    assert sketch_delta(b, c) == {"insert": {"index": 1, "shape": disc(0.3)}}
    assert sketch_delta(c, b) == {"remove": {"index": 1}}
    assert apply_delta(b, sketch_delta(b, c)) == c and apply_delta(c, sketch_delta(c, b)) == b
    assert apply_delta(a, {**sketch_delta(a, b), "name": "x edited"}) == b
    # anything else is sent whole: two shapes at once, a moved shape, the mirror, any other part
    assert sketch_delta(a, {**c, "name": a["name"]}) is None
    assert sketch_delta(c, {**c, "sketch": {**c["sketch"], "shapes": [disc(0.3), disc(0.2), kept]}}) is None
    assert sketch_delta(b, {**c, "sketch": {**c["sketch"], "mirror": "midline"}}) is None
    assert sketch_delta(b, {**c, "probes": []}) is None
    assert sketch_delta(b, {**c, "domain": {**c["domain"], "nx": 32}}) is None


# ----------------------------------------------------------------------------- two tabs over real websockets

def test_two_tabs_hold_the_servers_scenario_after_adds_removes_undos_and_redos(live):
    with live.tab() as a, live.tab() as b:
        assert a.doc == b.doc == live.saved_document() and a.revision == 0  # the hello's scenario, made in a thread
        steps = [({"type": "add_shape", "shape": disc(0.15)}, "sketch_change"),
                 ({"type": "add_shape", "shape": disc(0.25)}, "sketch_change"),
                 ({"type": "add_shape", "shape": disc(0.35)}, "sketch_change"),
                 ({"type": "remove_shape", "index": 2}, "sketch_change"),
                 ({"type": "undo"}, "sketch_change"),
                 ({"type": "undo"}, "sketch_change"),
                 ({"type": "redo"}, "sketch_change"),
                 ({"type": "set_mirror", "mirror": "midline"}, "scenario"),  # not one shape: whole
                 ({"type": "add_shape", "shape": disc(0.3, 0.005)}, "sketch_change"),
                 ({"type": "clear_sketch"}, "scenario"),
                 ({"type": "undo"}, "scenario"),
                 ({"type": "remove_shape", "index": 0}, "sketch_change")]
        for n, (message, kind) in enumerate(steps):
            sender = a if n % 3 else b  # both tabs make changes
            reply = sender.send(message, f"s{n}")
            assert reply["type"] == kind, (message, reply)
            revision = live.parts.session.revision
            assert reply["revision"] == revision
            a.reach(revision)
            b.reach(revision)
            saved = live.saved_document()
            assert a.doc == saved and b.doc == saved, message  # each tab's copy is the acknowledged, saved document
        assert a.doc == live.parts.session.document() == b.doc
        assert a.revision == b.revision == live.parts.session.revision == len(steps)
        # 1 + 3 - 1 + 1 - 1 + 1 + 1 (after clear and its undo) - 1 = 4 shapes: the reservoir is removed last
        assert len(a.doc["sketch"]["shapes"]) == 4 and a.doc["sketch"]["mirror"] == "midline"
        assert a.doc["sketch"]["shapes"][0] == disc(0.15)
        assert a.deltas == b.deltas == 9 and a.asked == b.asked == 0
        # a delta carries one shape, not the scenario: far smaller than the document
        assert max(a.delta_bytes) < len(json.dumps(a.doc)) / 2


def test_a_tab_that_missed_a_change_asks_for_the_whole_scenario(live):
    with live.tab() as a, live.tab() as b:
        a.send({"type": "add_shape", "shape": disc(0.15)}, "first")
        b.until(lambda m: m["type"] == "sketch_change", drop_deltas=True)  # b loses this one
        assert b.revision == 0 and len(b.doc["sketch"]["shapes"]) == 1
        a.send({"type": "add_shape", "shape": disc(0.25)}, "second")
        # b sees a change from revision 1 while it holds 0: it asks for the scenario (get_scenario) and takes it
        whole = b.until(lambda m: m["type"] == "scenario")
        assert b.asked == 1 and whole.get("id") == "whole1"
        assert whole["revision"] == live.parts.session.revision == 2
        assert b.doc == live.saved_document() == a.doc
        # later deltas apply to the recovered copy
        a.send({"type": "remove_shape", "index": 1}, "third")
        b.reach(3)
        assert b.doc == live.saved_document() == a.doc and len(b.doc["sketch"]["shapes"]) == 2


def test_get_scenario_answers_only_the_asking_tab(live):
    with live.tab() as a, live.tab() as b:
        whole = a.send({"type": "get_scenario"}, "mine")
        assert whole["type"] == "scenario" and whole["scenario"] == live.saved_document()
        assert whole["revision"] == 0 and whole["edited"] is False and whole["origin"] == "delta duct"
        b.sock.send(json.dumps({"type": "inspect", "x_m": 0.3, "y_m": 0.05, "id": "probe"}))
        seen = []
        b.until(lambda m: seen.append(m["type"]) or m.get("id") == "probe")
        assert "scenario" not in seen


def test_small_sketches_go_whole_and_big_ones_as_deltas(tmp_path):
    """At the default threshold a small scenario is still sent whole; a big sketch's one shape is a delta."""
    doc = duct_doc(name="big duct")
    t = np.linspace(0.0, 2.0 * np.pi, 10_000, endpoint=False)
    for cx in (0.15, 0.3):
        ring = np.column_stack([cx + 0.02 * np.cos(t), 0.05 + 0.02 * np.sin(t)])
        doc["sketch"]["shapes"].append({"kind": "polygon", "paints": "wall", "points_m": ring.tolist()})
    assert len(json.dumps(doc)) > DELTA_MIN_BYTES > len(json.dumps(duct_doc()))
    server = LiveServer(tmp_path, doc, delta_min_bytes=DELTA_MIN_BYTES)
    try:
        with server.tab() as a, server.tab() as b:
            assert a.send({"type": "add_shape", "shape": disc(0.22)}, "one")["type"] == "sketch_change"
            assert a.send({"type": "undo"}, "two")["type"] == "sketch_change"
            assert a.send({"type": "set_mirror", "mirror": "midline"}, "three")["type"] == "scenario"
            b.reach(3)
            assert a.doc == b.doc == server.saved_document()
            assert max(a.delta_bytes) < 1000 < DELTA_MIN_BYTES
    finally:
        server.stop()
    small = LiveServer(tmp_path / "small", duct_doc(), delta_min_bytes=DELTA_MIN_BYTES)
    try:
        with small.tab() as a:
            assert a.send({"type": "add_shape", "shape": disc(0.22)}, "one")["type"] == "scenario"
    finally:
        small.stop()


def test_a_scenario_bigger_than_the_queue_cap_still_reaches_a_tab():
    """A big sketch's hello (17.5 MB for 30 polygons of 15,000 points) is larger than the per-tab queue cap; it
    counts as half the cap, so it and the replies behind it are queued, while a tab that reads none of two such
    messages is dropped as before."""
    from shockslate.server.hub import MAX_QUEUED_BYTES, Client

    tab = Client("c1", websocket=None)
    big = "x" * (MAX_QUEUED_BYTES + 1)
    tab.queue_first(big)
    tab.queue('{"type":"history"}')
    assert not tab.closed and len(tab.outbox) == 2 and tab.outbox[0] is big
    assert tab.next_queued() is big and tab.queued_bytes == len('{"type":"history"}')
    tab.queue(big)
    assert not tab.closed
    tab.queue(big)  # a second unread whole scenario beside a reply: this tab is not reading
    assert tab.closed


def test_the_hello_takes_the_scenario_text_the_autosave_made_and_parses_as_the_document():
    """A joining tab's hello is joined from the store's kept shape texts (no big sketch encoded again per tab);
    it must parse as the hello's fields plus the session's document, with the same text as the autosave's."""
    from shockslate.server.dispatch import hello_text
    from shockslate.server.persistence import DocumentText

    doc = duct_doc()
    doc["sketch"]["shapes"] += [disc(0.2 + 0.1 * k) for k in range(3)]
    document = scn.scenario_to_dict(scn.parse_scenario(doc))
    text = DocumentText()
    saved = text(document)  # what the autosave wrote
    hello = {"type": "hello", "revision": 3, "limits": {"max_frames_per_s": 30.0}}
    made = hello_text(hello, document, text)
    assert json.loads(made) == {**hello, "scenario": document}
    assert made.endswith(',"scenario":' + saved + "}")
