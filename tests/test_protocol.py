"""Every client message of server/PROTOCOL.md through a real websocket (Starlette's TestClient).

The server runs in-process on a tiny planar duct (64 x 16 cells), paused, so each check sees exactly
the effect of its own messages. Bad messages must be answered with an `error` naming field, value
and what is allowed, and the connection must stay usable afterwards.
"""
from __future__ import annotations

import io
import json

import numpy as np
import pytest
from starlette.testclient import TestClient

from shockslate.server import protocol
from shockslate.server.app import ServerConfig, create_app
from shockslate.server.frames import decode_frame
from shockslate.server.security import Access
from shockslate.solver import scenario as scn
from shockslate.solver.fields import VIEWS
from scenario_docs import duct_doc as shared_duct_doc

BASE = "http://127.0.0.1:8765"
WS = "ws://127.0.0.1:8765/ws"
#: Upper bound on messages read while waiting for one kind (status arrives 4 times a second, so a
#: missing reply fails the test instead of hanging it).
MAX_READS = 80


def duct_doc(nx: int = 64) -> dict:
    return shared_duct_doc(nx, name="protocol duct")


@pytest.fixture
def server(tmp_path):
    config = ServerConfig(data_dir=tmp_path / "data", scenario=scn.parse_scenario(duct_doc()),
                          start_running=False, warm=False)
    with TestClient(create_app(config), base_url=BASE) as client:
        yield client


@pytest.fixture
def ws(server):
    with server.websocket_connect(WS) as sock:
        hello = sock.receive_json()
        assert hello["type"] == "hello"
        sock.hello = hello
        yield sock


def receive(sock, kind: str, request_id=None):
    """The next message of `kind` ('frame' for a binary frame), skipping others; fails after MAX_READS."""
    for _ in range(MAX_READS):
        msg = sock.receive()
        if msg.get("bytes") is not None:
            if kind == "frame":
                return msg["bytes"]
            continue
        if msg.get("text") is None:
            continue
        data = json.loads(msg["text"])
        if data["type"] == kind and (request_id is None or data.get("id") == request_id):
            return data
        if data["type"] == "error" and kind != "error":
            raise AssertionError(f"unexpected error while waiting for {kind}: {data}")
    raise AssertionError(f"no {kind} message within {MAX_READS} messages")


def ask(sock, message: dict, kind: str) -> dict:
    """Send a message with an id and wait for the reply of `kind` that echoes it."""
    rid = f"r{id(message)}"
    sock.send_json({**message, "id": rid})
    return receive(sock, kind, rid)


def refused(sock, message: dict) -> dict:
    err = ask(sock, message, "error")
    assert err["request"] == message.get("type", "unknown") or err["request"] == "unknown"
    assert {"field", "value", "allowed", "message"} <= set(err)
    return err


def still_alive(sock) -> None:
    reply = ask(sock, {"type": "inspect", "x_m": 0.01, "y_m": 0.05}, "inspect")
    assert reply["kind"] == "reservoir"


# ----------------------------------------------------------------------------- hello, status, frames

def test_hello_lists_views_scenario_and_state(ws):
    h = ws.hello
    assert h["protocol"] == protocol.PROTOCOL_VERSION == 1
    assert [v["name"] for v in h["views"]] == list(VIEWS)
    assert all({"name", "label", "unit"} <= set(v) for v in h["views"])
    assert h["scenario"]["name"] == "protocol duct" and h["state"] == "paused" and h["revision"] == 0
    assert h["client_id"]


def test_status_has_the_documented_fields(ws):
    status = receive(ws, "status")
    for key in ("state", "time_s", "steps", "steps_per_s", "cell_updates_per_s", "frames_per_s", "max_mach",
                "floors", "stations", "probes", "residual", "flow", "warnings"):
        assert key in status, key
    assert status["stations"][0]["name"] == "mid"
    assert {"mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa", "area_m2", "ideal"} <= set(
        status["stations"][0])
    probe = status["probes"][0]
    assert probe["name"] == "p1" and probe["p_pa"] == pytest.approx(100000.0)


def test_frames_follow_set_view(ws):
    seen: dict = {}
    for _ in range(MAX_READS):
        msg = ws.receive()
        if msg.get("bytes") is not None:
            seen.setdefault("frame", msg["bytes"])
        elif json.loads(msg["text"])["type"] == "overlay":
            seen.setdefault("overlay", json.loads(msg["text"]))
        if len(seen) == 2:
            break
    header, pixels = decode_frame(seen["frame"])
    assert header.view_index == list(VIEWS).index("mach")  # the default view
    assert "sonic_line" in seen["overlay"] and "arrows" in seen["overlay"]
    ws.send_json({"type": "set_view", "view": "pressure", "width": 32, "height": 32, "range": [1e5, 3e5]})
    for _ in range(50):
        header, pixels = decode_frame(receive(ws, "frame"))
        if header.view_index == list(VIEWS).index("pressure"):
            break
    assert (header.width, header.height) == (32, 8)  # 64 x 16 grid shrunk into 32 x 32, aspect kept
    assert (header.min_value, header.max_value) == (1e5, 3e5)
    assert pixels[:, 0].min() == 254  # reservoir at p0 = 3e5 = top of the fixed range


# ----------------------------------------------------------------------------- sketch messages

SHAPE = {"kind": "segment", "start_m": [0.3, 0.0], "end_m": [0.3, 0.06], "width_m": 0.01, "paints": "wall"}


def test_add_remove_undo_redo_clear_and_mirror(ws):
    sc = ask(ws, {"type": "add_shape", "shape": SHAPE}, "scenario")
    assert sc["revision"] == 1 and sc["scenario"]["sketch"]["shapes"][-1]["kind"] == "segment"
    assert ask(ws, {"type": "inspect", "x_m": 0.3, "y_m": 0.03}, "inspect")["kind"] == "wall"
    sc = ask(ws, {"type": "undo"}, "scenario")
    assert len(sc["scenario"]["sketch"]["shapes"]) == 1
    assert ask(ws, {"type": "inspect", "x_m": 0.3, "y_m": 0.03}, "inspect")["kind"] == "fluid"
    sc = ask(ws, {"type": "redo"}, "scenario")
    assert len(sc["scenario"]["sketch"]["shapes"]) == 2
    sc = ask(ws, {"type": "remove_shape", "index": 0}, "scenario")
    assert [s["paints"] for s in sc["scenario"]["sketch"]["shapes"]] == ["wall"]
    sc = ask(ws, {"type": "set_mirror", "mirror": "midline"}, "scenario")
    assert sc["scenario"]["sketch"]["mirror"] == "midline"
    sc = ask(ws, {"type": "clear_sketch"}, "scenario")
    assert sc["scenario"]["sketch"]["shapes"] == []


def test_sketch_errors(ws):
    err = refused(ws, {"type": "add_shape", "shape": {**SHAPE, "width_m": 0}})
    assert err["field"] == "shape.width_m" and err["value"] == 0
    err = refused(ws, {"type": "add_shape", "shape": {"kind": "blob", "paints": "wall"}})
    assert err["field"] == "shape.kind" and "circle" in err["allowed"]
    err = refused(ws, {"type": "remove_shape", "index": 9})
    assert err["field"] == "index" and err["value"] == 9
    err = refused(ws, {"type": "redo"})
    assert err["field"] == "redo"
    err = refused(ws, {"type": "set_mirror", "mirror": "diagonal"})
    assert err["field"] == "mirror" and "midline" in err["allowed"]
    still_alive(ws)


def test_a_change_reaches_every_tab(server, ws):
    with server.websocket_connect(WS) as other:
        assert other.receive_json()["type"] == "hello"
        ask(ws, {"type": "add_shape", "shape": SHAPE}, "scenario")
        seen = receive(other, "scenario")
        assert seen["revision"] == 1 and "id" not in seen  # the id is echoed to the sender only


# ----------------------------------------------------------------------------- settings

def test_gas_conditions_numerics(ws):
    sc = ask(ws, {"type": "set_gas", "preset": "hot products"}, "scenario")
    assert sc["scenario"]["gas"]["gamma"] == 1.2
    sc = ask(ws, {"type": "set_gas", "gamma": 1.3, "molar_mass_kg_kmol": 20.0}, "scenario")
    assert sc["scenario"]["gas"] == {"preset": None, "gamma": 1.3, "molar_mass_kg_kmol": 20.0}
    sc = ask(ws, {"type": "set_conditions", "reservoir": {"p0_pa": 4e5}, "ambient": {"t_k": 290.0}}, "scenario")
    cond = sc["scenario"]["conditions"]
    assert cond["reservoir"] == {"p0_pa": 4e5, "t0_k": 300.0} and cond["ambient"]["t_k"] == 290.0
    assert ask(ws, {"type": "inspect", "x_m": 0.01, "y_m": 0.05}, "inspect")["p_pa"] == pytest.approx(4e5)
    sc = ask(ws, {"type": "set_numerics", "order": 1, "flux": "rusanov", "cfl": 0.3}, "scenario")
    assert sc["scenario"]["numerics"]["order"] == 1 and sc["scenario"]["numerics"]["cfl"] == 0.3


def test_settings_errors(ws):
    err = refused(ws, {"type": "set_conditions", "reservoir": {"p0_pa": -1.0}})
    assert err["field"] == "reservoir.p0_pa" and err["value"] == -1.0 and "greater than 0" in err["allowed"]
    err = refused(ws, {"type": "set_conditions", "reservoir": {"pressure": 1.0}})
    assert err["field"] == "reservoir.pressure" and "p0_pa" in err["allowed"]
    err = refused(ws, {"type": "set_gas", "gamma": 0.9})
    assert err["field"] == "gamma" and err["value"] == 0.9
    err = refused(ws, {"type": "set_gas", "preset": "air", "gamma": 1.4})
    assert err["field"] == "preset"
    err = refused(ws, {"type": "set_numerics", "limiter": "superbee"})
    assert err["field"] == "limiter" and "van_leer" in err["allowed"]
    err = refused(ws, {"type": "set_numerics", "cfl": "fast"})
    assert err["field"] == "cfl" and err["value"] == "fast"
    still_alive(ws)


def test_resolution_domain_edges_mode(ws):
    sc = ask(ws, {"type": "set_resolution", "nx": 96}, "scenario")
    assert sc["scenario"]["domain"]["nx"] == 96
    assert receive(ws, "status")["nx"] == 96
    sc = ask(ws, {"type": "set_domain", "x_min_m": 0.0, "x_max_m": 0.5, "y_min_m": 0.0, "y_max_m": 0.1},
             "scenario")
    assert sc["scenario"]["domain"]["x_max_m"] == 0.5 and sc["scenario"]["domain"]["nx"] == 96
    sc = ask(ws, {"type": "set_edges", "top": "ambient", "right": "ambient"}, "scenario")
    assert sc["scenario"]["edges"] == {"left": "wall", "right": "ambient", "bottom": "wall", "top": "ambient"}
    sc = ask(ws, {"type": "set_mode", "mode": "axisymmetric"}, "scenario")
    assert sc["scenario"]["mode"] == "axisymmetric" and sc["scenario"]["edges"]["bottom"] == "axis"
    err = refused(ws, {"type": "set_resolution", "nx": 2})
    assert err["field"] == "nx" and "4 to 4096" in err["allowed"]
    err = refused(ws, {"type": "set_domain", "x_min_m": 0.0, "x_max_m": -1.0, "y_min_m": 0.0, "y_max_m": 0.1})
    assert err["field"] == "x_max_m"
    err = refused(ws, {"type": "set_edges", "left": "axis"})
    assert "left" in err["field"]
    err = refused(ws, {"type": "set_mode", "mode": "spherical"})
    assert err["field"] == "mode"
    still_alive(ws)


# ----------------------------------------------------------------------------- run control

def test_step_run_pause_reset(ws):
    status = ask(ws, {"type": "step", "count": 3}, "status")
    assert status["steps"] == 3 and status["state"] == "paused" and status["time_s"] > 0
    status = ask(ws, {"type": "run"}, "status")
    assert status["state"] == "running"
    err = refused(ws, {"type": "step", "count": 1})
    assert err["field"] == "state" and err["value"] == "running" and "paused" in err["allowed"]
    for _ in range(MAX_READS):
        if receive(ws, "status")["steps"] > 3:
            break
    status = ask(ws, {"type": "pause"}, "status")
    assert status["state"] == "paused"
    status = ask(ws, {"type": "reset_flow"}, "status")
    assert status["steps"] == 0 and status["time_s"] == 0.0
    err = refused(ws, {"type": "step", "count": 5000})
    assert err["field"] == "count" and "1000" in err["allowed"]


def test_divergence_pauses_keeps_the_sketch_and_tells_every_tab(server, ws):
    # No protocol setting makes this small duct diverge within a test's few steps (the solver floors
    # density and pressure), so an absurd but finite velocity is written into one fluid cell through the
    # solver's own set_primitive, while the run is paused; the next step overflows.
    ask(ws, {"type": "add_shape", "shape": SHAPE}, "scenario")
    session = server.app.state.parts.session
    rho, u, v, p = session.sim.primitive()
    u[8, 40] = 1e150
    session.sim.set_primitive(rho, u, v, p)
    ws.send_json({"type": "step", "count": 5})
    diverged = receive(ws, "diverged")
    assert diverged["step"] == 1 and diverged["advice"] and "x_m" in diverged and "variable" in diverged
    status = receive(ws, "status")
    assert status["state"] == "diverged" and status["steps"] == 0
    assert any("diverged" in w for w in status["warnings"])
    sc = ask(ws, {"type": "set_numerics", "cfl": 0.2}, "scenario")  # settings can still change
    assert len(sc["scenario"]["sketch"]["shapes"]) == 2  # the sketch is kept
    assert ask(ws, {"type": "pause"}, "status")["state"] == "paused"


# ----------------------------------------------------------------------------- stations, probes, readings

def test_stations_and_probes(ws):
    sc = ask(ws, {"type": "add_station", "name": "exit", "start_m": [0.35, 0.0], "end_m": [0.35, 0.1],
                  "role": "exit"}, "scenario")
    assert [s["name"] for s in sc["scenario"]["stations"]] == ["mid", "exit"]
    sc = ask(ws, {"type": "remove_station", "name": "mid"}, "scenario")
    assert [s["name"] for s in sc["scenario"]["stations"]] == ["exit"]
    sc = ask(ws, {"type": "add_probe", "name": "p2", "x_m": 0.1, "y_m": 0.05}, "scenario")
    assert [p["name"] for p in sc["scenario"]["probes"]] == ["p1", "p2"]
    sc = ask(ws, {"type": "remove_probe", "name": "p1"}, "scenario")
    assert [p["name"] for p in sc["scenario"]["probes"]] == ["p2"]
    err = refused(ws, {"type": "add_station", "name": "exit", "start_m": [0.1, 0.0], "end_m": [0.1, 0.1]})
    assert err["field"] == "name" and err["value"] == "exit"
    err = refused(ws, {"type": "add_station", "name": "x", "start_m": [0.1, 0.0]})
    assert err["field"] == "end_m" and "required" in err["allowed"]
    err = refused(ws, {"type": "add_probe", "name": "far", "x_m": 9.0, "y_m": 0.05})
    assert err["field"] in ("x_m", "y_m")
    err = refused(ws, {"type": "remove_probe", "name": "nobody"})
    assert err["field"] == "name" and "p2" in err["allowed"]


def test_inspect_and_profile(ws):
    r = ask(ws, {"type": "inspect", "x_m": 0.3, "y_m": 0.05}, "inspect")
    assert r["kind"] == "fluid" and r["p_pa"] == pytest.approx(1e5) and r["t_k"] == pytest.approx(300.0)
    err = refused(ws, {"type": "inspect", "x_m": 0.3, "y_m": 7.0})
    assert err["field"] == "y_m" and err["value"] == 7.0
    prof = ask(ws, {"type": "profile", "station": "mid"}, "profile")
    assert prof["station"] == "mid" and len(prof["s_m"]) == len(prof["p_pa"]) == len(prof["mach"])
    axis = ask(ws, {"type": "profile", "axis": True}, "profile")
    assert axis["axis"] is True and len(axis["x_m"]) >= 64 and "ideal_mach" in axis
    err = refused(ws, {"type": "profile", "station": "nope"})
    assert err["field"] == "station" and "mid" in err["allowed"]
    err = refused(ws, {"type": "profile"})
    assert err["field"] == "station"


def test_set_view_errors(ws):
    err = refused(ws, {"type": "set_view", "view": "colour", "width": 100, "height": 100})
    assert err["field"] == "view" and "schlieren" in err["allowed"]
    err = refused(ws, {"type": "set_view", "view": "mach", "width": 100, "height": 100, "range": [3, 1]})
    assert err["field"] == "range"
    err = refused(ws, {"type": "set_view", "view": "mach", "width": 5, "height": 100})
    assert err["field"] == "width"
    still_alive(ws)


# ----------------------------------------------------------------------------- scenarios and exports

def test_save_list_and_load_by_name(ws, tmp_path):
    ask(ws, {"type": "add_shape", "shape": SHAPE}, "scenario")
    saved = ask(ws, {"type": "save_scenario", "name": "my duct 1"}, "saved")
    assert saved["name"] == "my duct 1" and saved["path"].startswith(str(tmp_path / "data"))
    listing = ask(ws, {"type": "list_scenarios"}, "scenario_list")
    assert {"name": "my duct 1"} in listing["saved"]
    assert scn.DEFAULT_SCENARIO in [b["name"] for b in listing["builtin"]]
    ask(ws, {"type": "clear_sketch"}, "scenario")
    sc = ask(ws, {"type": "load_scenario", "name": "my duct 1"}, "scenario")
    assert sc["scenario"]["name"] == "my duct 1" and len(sc["scenario"]["sketch"]["shapes"]) == 2
    sc = ask(ws, {"type": "load_scenario", "name": scn.DEFAULT_SCENARIO}, "scenario")
    assert sc["scenario"]["name"] == scn.DEFAULT_SCENARIO


def test_load_a_document_and_refuse_bad_ones(ws):
    doc = duct_doc(nx=48)
    doc["name"] = "uploaded"
    sc = ask(ws, {"type": "load_scenario", "scenario": doc}, "scenario")
    assert sc["scenario"]["name"] == "uploaded" and sc["scenario"]["domain"]["nx"] == 48
    bad = {**doc, "conditions": {**doc["conditions"], "reservoir": {"p0_pa": -1.0, "t0_k": 300.0}}}
    err = refused(ws, {"type": "load_scenario", "scenario": bad})
    assert err["field"] == "scenario.conditions.reservoir.p0_pa" and err["value"] == -1.0
    for name in ("../../etc/passwd", "a/b", "x.json", " lead"):
        err = refused(ws, {"type": "load_scenario", "name": name})
        assert err["field"] == "name" and err["value"] == name
    err = refused(ws, {"type": "save_scenario", "name": "../escape"})
    assert err["field"] == "name"
    err = refused(ws, {"type": "load_scenario", "name": "never saved"})
    assert err["field"] == "name"
    err = refused(ws, {"type": "load_scenario", "name": "x", "scenario": doc})
    assert err["field"] == "name"


def test_exports_download(server, ws):
    for what, check in (("npz", "npz"), ("csv", "csv"), ("scenario", "json")):
        ready = ask(ws, {"type": "export", "what": what}, "export_ready")
        assert ready["what"] == what and ready["url"].startswith("/exports/") and ready["url"].endswith(check)
        body = server.get(ready["url"])
        assert body.status_code == 200
        if what == "npz":
            data = np.load(io.BytesIO(body.content))
            assert data["p_pa"].shape == (16, 64) and data["view_mach"].shape == (16, 64)
        elif what == "csv":
            lines = body.text.strip().splitlines()
            assert lines[0].startswith("station,s_m,x_m,y_m,p_pa") and lines[1].startswith("mid,")
        else:
            assert json.loads(body.text)["name"] == "protocol duct"
    assert server.get("/exports/..%2F..%2Fcurrent.json").status_code == 404
    assert server.get("/exports/current.json").status_code == 404
    err = refused(ws, {"type": "export", "what": "png"})
    assert err["field"] == "what" and "npz" in err["allowed"]


# ----------------------------------------------------------------------------- malformed messages

@pytest.mark.parametrize("text, field", [
    ("not json", "message"),
    ("[1, 2]", "message"),
    ('{"no_type": 1}', "type"),
    ('{"type": "explode"}', "type"),
    ('{"type": "step", "count": 2, "extra": true}', "extra"),
    ('{"type": "add_probe", "name": "", "x_m": 0.1, "y_m": 0.1}', "name"),
    ('{"type": "inspect", "x_m": NaN, "y_m": 0.1}', "x_m"),
])
def test_malformed_messages_are_answered_and_the_connection_stays(ws, text, field):
    ws.send_text(text)
    err = receive(ws, "error")
    assert err["field"] == field, err
    assert err["message"] and "allowed" in err
    still_alive(ws)


def test_every_message_type_of_the_protocol_has_a_model():
    documented = {"add_shape", "remove_shape", "undo", "redo", "clear_sketch", "set_mirror", "set_gas",
                  "set_conditions", "set_numerics", "set_resolution", "set_domain", "set_edges", "set_mode", "run",
                  "pause", "reset_flow", "step", "add_station", "remove_station", "add_probe", "remove_probe",
                  "set_view", "inspect", "profile", "save_scenario", "load_scenario", "list_scenarios", "export"}
    assert set(protocol.MESSAGE_TYPES) == documented
    text = (protocol.__file__.rsplit("/", 1)[0] + "/PROTOCOL.md")
    with open(text, encoding="utf-8") as f:
        doc = f.read()
    for name in documented:
        assert f"`{name}`" in doc, name


def test_error_value_is_json_even_for_odd_input():
    err = protocol.error_message("x", protocol.RequestError("f", float("nan"), "a number"))
    json.dumps(err, allow_nan=False)
    assert protocol.dumps({"a": float("inf"), "b": [float("nan"), 1.0]}) == '{"a":null,"b":[null,1.0]}'


def test_off_loopback_export_urls_carry_the_token(tmp_path):
    access = Access.for_bind("0.0.0.0", 8765)
    config = ServerConfig(access=access, data_dir=tmp_path, scenario=scn.parse_scenario(duct_doc()),
                          start_running=False, warm=False)
    with TestClient(create_app(config), base_url="http://192.0.2.1:8765") as client:
        with client.websocket_connect(f"ws://192.0.2.1:8765/ws?token={access.token}") as sock:
            sock.receive_json()
            ready = ask(sock, {"type": "export", "what": "scenario"}, "export_ready")
            assert ready["url"].endswith(f"?token={access.token}")
            assert client.get(ready["url"]).status_code == 200
            assert client.get(ready["url"].split("?")[0]).status_code == 403


def test_an_unexpected_solver_error_pauses_the_run_and_keeps_the_server(server, ws):
    session = server.app.state.parts.session

    def broken(max_wall_s, max_steps=100_000):
        raise RuntimeError("simulated bug in a burst")

    session.advance = broken  # instance attribute: only this server's session
    ws.send_json({"type": "run"})
    err = receive(ws, "error")
    assert err["request"] == "run" and "simulated bug" in err["message"]
    for _ in range(MAX_READS):
        if receive(ws, "status")["state"] == "paused":
            break
    else:
        raise AssertionError("the run was not paused")
    del session.advance
    still_alive(ws)


def test_a_failing_status_figure_neither_drops_tabs_nor_stops_requests(server, monkeypatch):
    from shockslate.server import readings

    def broken(*args, **kwargs):
        raise RuntimeError("simulated bug in a status figure")

    monkeypatch.setattr(readings, "status_figures", broken)
    with server.websocket_connect(WS) as sock:
        assert sock.receive_json()["type"] == "hello"
        still_alive(sock)
        sc = ask(sock, {"type": "add_shape", "shape": SHAPE}, "scenario")
        assert sc["revision"] == 1
