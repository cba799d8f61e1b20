"""The page keeps its sketch in step with the server through `sketch_change` messages (PROTOCOL.md): a real
`shockslate serve` process on a sketch big enough for deltas, the real page in Debian's Chromium (playwright) and a
second tab over a real websocket. Changes come from both; afterwards the page's scenario must equal the server's
document, and a page that missed a change (its revision set back, as if a message were lost) must ask for the
whole scenario and hold it again. Waits are for states, never for fixed times. Keeping replicas in step by a
revision number and a resend on a gap is common practice, no single source.
"""
from __future__ import annotations

import json
import time

import numpy as np
import pytest
from websockets.sync.client import connect

from shockslate.server.scenario_delta import DELTA_MIN_BYTES
from scenario_docs import duct_doc

from test_page import WAIT_MS, browser, start_server, stop_server  # noqa: F401 - fixtures are found by name


def big_duct() -> dict:
    """The test duct with two wall rings of 10,000 corners each: over the size at which one-shape changes go as
    deltas."""
    doc = duct_doc(name="page delta duct")
    t = np.linspace(0.0, 2.0 * np.pi, 10_000, endpoint=False)
    for cx in (0.15, 0.3):
        ring = np.column_stack([cx + 0.02 * np.cos(t), 0.05 + 0.02 * np.sin(t)])
        doc["sketch"]["shapes"].append({"kind": "polygon", "paints": "wall", "points_m": ring.tolist()})
    assert len(json.dumps(doc)) > DELTA_MIN_BYTES
    return doc


def disc(x_m: float) -> dict:
    return {"kind": "circle", "centre_m": [x_m, 0.05], "radius_m": 0.008, "paints": "wall"}


@pytest.fixture(scope="module")
def server_url(tmp_path_factory):
    """`shockslate serve --paused` on the big duct, a free loopback port, a fresh data folder, output to a log."""
    folder = tmp_path_factory.mktemp("page-deltas")
    scenario = folder / "big_duct.json"
    scenario.write_text(json.dumps(big_duct()))
    proc, url = start_server(["--scenario", str(scenario), "--paused", "--threads", "1"], folder / "data",
                             folder / "server.log", wait_s=120.0)
    try:
        yield url
    finally:
        stop_server(proc)


class OtherTab:
    """A second tab over a websocket that only asks: its requests and the server's whole document."""

    def __init__(self, sock):
        self.sock = sock
        assert json.loads(self.sock.recv(timeout=WAIT_MS / 1000))["type"] == "hello"
        self.n = 0

    def ask(self, message: dict) -> dict:
        self.n += 1
        rid = f"other{self.n}"
        self.sock.send(json.dumps({**message, "id": rid}))
        deadline = time.monotonic() + WAIT_MS / 1000
        while time.monotonic() < deadline:
            msg = self.sock.recv(timeout=WAIT_MS / 1000)
            if isinstance(msg, str) and json.loads(msg).get("id") == rid:
                return json.loads(msg)
        raise AssertionError(f"no reply to {message['type']}")

    def document(self) -> tuple[dict, int]:
        whole = self.ask({"type": "get_scenario"})
        return whole["scenario"], whole["revision"]


def test_the_pages_sketch_after_deltas_equals_the_servers(browser, server_url):
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    page = context.new_page()
    errors: list[str] = []
    kinds: list[str] = []
    page.on("pageerror", lambda e: errors.append(str(e)))

    def watch(ws) -> None:  # what the page receives, by message type
        ws.on("framereceived", lambda payload: kinds.append(json.loads(payload)["type"])
              if isinstance(payload, str) and payload.startswith("{") else None)

    page.on("websocket", watch)
    with connect(server_url.replace("http://", "ws://") + "/ws", max_size=None) as sock:
        other = OtherTab(sock)
        _changes_from_both(page, server_url, other, kinds)
    context.close()
    assert not errors, f"script errors on the page: {errors}"


def _changes_from_both(page, server_url: str, other: OtherTab, kinds: list[str]) -> None:
    """Changes from the other tab and from the page itself; then a change the page misses."""
    page.goto(server_url + "/")
    page.wait_for_function("window.shockslate && window.shockslate.scenario", timeout=WAIT_MS)

    def page_holds_server() -> None:
        doc, revision = other.document()
        page.wait_for_function("rev => window.shockslate.revision === rev && !window.shockslate.awaitingScenario",
                               arg=revision, timeout=WAIT_MS)
        assert page.evaluate("window.shockslate.scenario") == doc

    # changes from the other tab and from the page itself
    assert other.ask({"type": "add_shape", "shape": disc(0.22)})["type"] == "sketch_change"
    page.evaluate("s => window.shockslate.send('add_shape', {shape: s})", disc(0.36))
    page.wait_for_function("window.shockslate.scenario.sketch.shapes.length === 5", timeout=WAIT_MS)
    assert other.ask({"type": "remove_shape", "index": 1})["type"] == "sketch_change"  # a big ring
    page.evaluate("window.shockslate.send('undo')")
    page.wait_for_function("window.shockslate.scenario.sketch.shapes.length === 5", timeout=WAIT_MS)
    assert other.ask({"type": "redo"})["type"] == "sketch_change"
    page_holds_server()
    assert page.evaluate("window.shockslate.scenario.sketch.shapes.length") == 4
    assert kinds.count("sketch_change") == 5 and kinds.count("scenario") == 0  # deltas only, nothing whole
    assert page.evaluate("document.querySelector('#scenario-name').textContent") == "page delta duct edited"

    # a missed change: the page's revision set back one, as if a sketch_change were lost on the way
    page.evaluate("window.shockslate.revision -= 1")
    assert other.ask({"type": "add_shape", "shape": disc(0.05 + 0.2)})["type"] == "sketch_change"
    page_holds_server()
    assert kinds.count("scenario") == 1  # the page asked (get_scenario) and took the whole scenario
    assert page.evaluate("window.shockslate.scenario.sketch.shapes.length") == 5
