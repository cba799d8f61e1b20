"""Access rules (server/security.py) and how the app applies them: origin, host, token, size and rate caps.

The rules follow the browser security model of RFC 6454 (origins) and RFC 6455 sec. 10.2 (servers
should check the Origin of a websocket handshake); the DNS-rebinding guard (Host must be a loopback
name on a loopback server) is common practice, no single source.
"""
from __future__ import annotations

import json

import pytest
from starlette.testclient import TestClient
from starlette.websockets import WebSocketDisconnect

from shockslate.server.app import ServerConfig, create_app
from shockslate.server.security import Access, RateLimiter, is_loopback
from shockslate.solver import scenario as scn

BASE = "http://127.0.0.1:8765"
WS = "ws://127.0.0.1:8765/ws"


def tiny_doc() -> dict:
    return {
        "name": "security duct", "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965},
        "domain": {"x_min_m": 0.0, "x_max_m": 0.4, "y_min_m": 0.0, "y_max_m": 0.1, "nx": 32},
        "end_time_s": 0.001,
    }


def make_client(tmp_path, access: Access | None = None, base: str = BASE) -> TestClient:
    config = ServerConfig(access=access or Access(), data_dir=tmp_path, scenario=scn.parse_scenario(tiny_doc()),
                          start_running=False, warm=False)
    return TestClient(create_app(config), base_url=base)


def first_error(sock, limit: int = 80) -> dict:
    for _ in range(limit):
        msg = sock.receive()
        if msg.get("text"):
            data = json.loads(msg["text"])
            if data["type"] == "error":
                return data
    raise AssertionError("no error message")


def assert_alive(sock) -> None:
    sock.send_json({"type": "inspect", "x_m": 0.2, "y_m": 0.05, "id": "alive"})
    for _ in range(80):
        msg = sock.receive()
        if msg.get("text") and json.loads(msg["text"]).get("id") == "alive":
            return
    raise AssertionError("no reply: connection not usable")


# ----------------------------------------------------------------------------- rules

@pytest.mark.parametrize("host, loopback", [
    ("127.0.0.1", True), ("127.8.9.10", True), ("::1", True), ("[::1]", True), ("localhost", True),
    ("0.0.0.0", False), ("192.168.1.20", False), ("example.com", False), ("localhost.example.com", False),
])
def test_is_loopback(host, loopback):
    assert is_loopback(host) is loopback


def test_token_only_off_loopback():
    assert Access.for_bind("127.0.0.1", 8765).token is None
    off = Access.for_bind("0.0.0.0", 8765)
    assert off.token and len(off.token) >= 24
    assert off.token != Access.for_bind("0.0.0.0", 8765).token  # random each start
    assert off.url().endswith(f":8765/?token={off.token}")
    assert off.token_ok(off.token) and not off.token_ok(None) and not off.token_ok(off.token + "x")


def test_origin_rules():
    access = Access()
    assert access.origin_ok(None, "127.0.0.1:8765")  # not a browser
    assert access.origin_ok("http://127.0.0.1:8765", "127.0.0.1:8765")
    assert access.origin_ok("http://localhost:8765", "localhost:8765")
    assert not access.origin_ok("http://evil.example", "127.0.0.1:8765")
    assert not access.origin_ok("http://127.0.0.1:9999", "127.0.0.1:8765")  # another local server
    assert not access.origin_ok("null", "127.0.0.1:8765")
    # DNS rebinding: a foreign name resolved to 127.0.0.1 makes Origin and Host agree; still refused.
    assert not access.origin_ok("http://rebind.example:8765", "rebind.example:8765")
    off = Access.for_bind("0.0.0.0", 8765)
    assert off.origin_ok("http://192.168.1.20:8765", "192.168.1.20:8765")
    assert not off.origin_ok("http://evil.example", "192.168.1.20:8765")


def test_rate_limiter_allows_the_rate_and_refuses_beyond():
    now = [0.0]
    limiter = RateLimiter(200, clock=lambda: now[0])
    assert sum(limiter.allow() for _ in range(250)) == 200  # one second's worth in a burst
    now[0] += 0.5
    assert sum(limiter.allow() for _ in range(250)) == 100  # refilled at 200 per second


# ----------------------------------------------------------------------------- applied by the app

def test_foreign_origin_is_refused(tmp_path):
    with make_client(tmp_path) as client:
        with pytest.raises(WebSocketDisconnect) as info:
            with client.websocket_connect(WS, headers={"origin": "http://evil.example"}):
                pass
        assert info.value.code == 1008
        with client.websocket_connect(WS, headers={"origin": "http://127.0.0.1:8765"}) as sock:
            assert sock.receive_json()["type"] == "hello"


def test_rebinding_host_is_refused_on_loopback(tmp_path):
    with make_client(tmp_path, base="http://rebind.example:8765") as client:
        assert client.get("/health").status_code == 400
        with pytest.raises(WebSocketDisconnect) as info:
            with client.websocket_connect("ws://rebind.example:8765/ws",
                                          headers={"origin": "http://rebind.example:8765"}):
                pass
        assert info.value.code == 1008


def test_token_required_off_loopback(tmp_path):
    access = Access.for_bind("0.0.0.0", 8765)
    base = "http://192.0.2.7:8765"
    with make_client(tmp_path, access, base) as client:
        for query in ("", "?token=wrong"):
            with pytest.raises(WebSocketDisconnect) as info:
                with client.websocket_connect(f"ws://192.0.2.7:8765/ws{query}"):
                    pass
            assert info.value.code == 1008
        with client.websocket_connect(f"ws://192.0.2.7:8765/ws?token={access.token}") as sock:
            assert sock.receive_json()["type"] == "hello"
        assert client.get("/exports/x-aaaaaaaaaaaaaaaaaaaa.npz").status_code == 403
        # /health tells the state, the client count and file names: off loopback it needs the token too
        assert client.get("/health").status_code == 403
        assert client.get("/health?token=wrong").status_code == 403
        assert client.get(f"/health?token={access.token}").json()["status"] == "ok"


def test_one_tab_too_many_is_told_why_and_closed(tmp_path, monkeypatch):
    from shockslate.server import app as app_module

    monkeypatch.setattr(app_module, "MAX_CLIENTS", 2)
    with make_client(tmp_path) as client, client.websocket_connect(WS) as a, client.websocket_connect(WS) as b:
        a.receive_json(), b.receive_json()
        with client.websocket_connect(WS) as c:
            err = c.receive_json()
            assert err["type"] == "error" and err["field"] == "connection" and "at most 2 tabs" in err["allowed"]
            with pytest.raises(WebSocketDisconnect) as info:
                c.receive_json()
            assert info.value.code == 1013
        assert_alive(a)


def test_a_tab_that_does_not_read_is_capped_by_queued_bytes():
    from shockslate.server.hub import MAX_QUEUED_BYTES, Client

    client = Client("c1", websocket=None)
    chunk = "x" * (1024 * 1024)
    for _ in range(MAX_QUEUED_BYTES // len(chunk)):
        client.queue(chunk)
    assert not client.closed and client.queued_bytes == MAX_QUEUED_BYTES
    client.next_queued()
    assert client.queued_bytes == MAX_QUEUED_BYTES - len(chunk)
    client.queue(chunk)
    client.queue("one byte more than the cap")
    assert client.closed


def test_oversized_message_gets_an_error_and_the_connection_stays(tmp_path):
    with make_client(tmp_path) as client, client.websocket_connect(WS) as sock:
        sock.receive_json()
        big = json.dumps({"type": "add_shape", "shape": {"kind": "stroke", "paints": "wall", "width_m": 0.01,
                                                         "points_m": [[0.1, 0.05]] * 30000}})
        assert len(big) > 256 * 1024
        sock.send_text(big)
        err = first_error(sock)
        assert err["field"] == "message" and err["request"] == "add_shape" and "262144" in err["allowed"]
        assert_alive(sock)


def test_flood_is_rate_limited_with_an_error_and_the_connection_stays(tmp_path):
    with make_client(tmp_path) as client, client.websocket_connect(WS) as sock:
        sock.receive_json()
        for _ in range(400):
            sock.send_json({"type": "inspect", "x_m": 0.2, "y_m": 0.05})
        err = first_error(sock, limit=2000)
        assert err["field"] == "message" and "200 messages per second" in err["allowed"]
        assert_alive(sock)


def test_binary_message_is_refused_politely(tmp_path):
    with make_client(tmp_path) as client, client.websocket_connect(WS) as sock:
        sock.receive_json()
        sock.send_bytes(b"\x00\x01")
        err = first_error(sock)
        assert err["field"] == "message" and "text" in err["allowed"]
        assert_alive(sock)
