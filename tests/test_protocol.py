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
    assert {"field", "value", "rule", "allowed", "message"} <= set(err)
    assert err["message"][:1].isupper() and err["message"].endswith((".", "?")), err["message"]
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
    maps = {m["name"] for m in h["colour_maps"]["maps"]}
    assert all(v["map"] in maps for v in h["views"])  # each view starts on one of the maps sent (solver/colourmaps.py)


def test_every_choice_the_hello_offers_is_accepted(ws):
    """The page builds its option lists from hello.vocabulary; each option must pass the server's checks."""
    choices = {what: [c["name"] for c in items] for what, items in ws.hello["vocabulary"]["choices"].items()}
    assert set(choices) >= {"order", "limiter", "flux", "integrator", "edge", "paint", "mirror", "preset", "mode",
                            "role", "view"}
    for key in ("order", "limiter", "flux", "integrator"):
        for name in choices[key]:
            assert ask(ws, {"type": "set_numerics", key: name}, "scenario")["scenario"]["numerics"][key] == name
    for name in choices["mirror"]:
        assert ask(ws, {"type": "set_mirror", "mirror": name}, "scenario")["scenario"]["sketch"]["mirror"] == name
    for name in choices["preset"]:
        assert ask(ws, {"type": "set_gas", "preset": name}, "scenario")["scenario"]["gas"]["preset"] == name
    for name in choices["paint"]:
        shape = {"kind": "circle", "centre_m": [0.2, 0.05], "radius_m": 0.01, "paints": name}
        assert ask(ws, {"type": "add_shape", "shape": shape}, "scenario")["scenario"]["sketch"]["shapes"][-1] == shape
    for n, role in enumerate(choices["role"]):
        sc = ask(ws, {"type": "add_station", "name": f"r{n}", "start_m": [0.3, 0.0], "end_m": [0.3, 0.1], "role": role},
                 "scenario")
        assert sc["scenario"]["stations"][-1]["role"] == role
    for name in choices["edge"]:
        if name == "axis":  # the axis is the bottom edge of an axisymmetric domain (set_mode puts it there)
            continue
        assert ask(ws, {"type": "set_edges", "top": name}, "scenario")["scenario"]["edges"]["top"] == name
    for name in choices["mode"]:
        sc = ask(ws, {"type": "set_mode", "mode": name}, "scenario")["scenario"]
        assert sc["mode"] == name
    sc = ask(ws, {"type": "set_mode", "mode": "axisymmetric"}, "scenario")["scenario"]
    assert sc["edges"]["bottom"] == "axis" and "axis" in choices["edge"]
    for name in choices["view"]:
        ws.send_json({"type": "set_view", "view": name, "width": 32, "height": 32})
    still_alive(ws)


def test_hello_limits_are_the_ones_validation_applies(ws):
    """A value just past each limit the page is given is refused naming that field; the limit itself passes."""
    limits = ws.hello["vocabulary"]["limits"]
    cases = {"conditions.reservoir.p0_pa": ("set_conditions", lambda v: {"reservoir": {"p0_pa": v}}),
             "conditions.ambient.t_k": ("set_conditions", lambda v: {"ambient": {"t_k": v}}),
             "conditions.stream.mach": ("set_conditions", lambda v: {"stream": {"mach": v}}),
             "gas.gamma": ("set_gas", lambda v: {"gamma": v}),
             "numerics.cfl": ("set_numerics", lambda v: {"cfl": v}),
             "step.count": ("step", lambda v: {"count": v})}
    for path, (kind, body) in cases.items():
        lim = limits[path]
        assert lim["label"] and "min" in lim and "max" in lim, (path, lim)
        for bound, side in ((lim["min"], "min"), (lim["max"], "max")):
            outside = bound - 1e-3 * max(1.0, abs(bound)) if side == "min" else bound + 1e-3 * max(1.0, abs(bound))
            if lim["integer"]:
                outside = bound - 1 if side == "min" else bound + 1
            err = refused(ws, {"type": kind, **body(outside)})
            assert err["field"].split(".")[-1] == path.split(".")[-1], (path, err)
            if not lim[f"{side}_exclusive"] and kind != "step":  # (a step's reply is a status, checked elsewhere)
                ask(ws, {"type": kind, **body(bound)}, "scenario")
    p0 = limits["conditions.reservoir.p0_pa"]
    assert p0["unit"] == "Pa" and p0["min_exclusive"]


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
    assert err["field"] == "reservoir.p0_pa" and err["value"] == -1.0 and err["rule"] == "above"
    assert err["allowed"] == "above 0 Pa"
    err = refused(ws, {"type": "set_conditions", "ambient": {"p_pa": -5000.0}})
    assert (err["field"], err["value"], err["rule"]) == ("ambient.p_pa", -5000.0, "above")
    assert err["message"] == "Ambient pressure must be above 0 Pa; you gave -5000 Pa."
    err = refused(ws, {"type": "set_conditions", "reservoir": {"pressure": 1.0}})
    assert err["field"] == "reservoir.pressure" and "p0_pa" in err["allowed"]
    err = refused(ws, {"type": "set_gas", "gamma": 0.9})
    assert err["field"] == "gamma" and err["value"] == 0.9
    err = refused(ws, {"type": "set_gas", "preset": "air", "gamma": 1.4})
    assert err["field"] == "preset"
    err = refused(ws, {"type": "set_numerics", "limiter": "superbee"})
    assert err["field"] == "limiter" and "van_leer" in err["allowed"] and err["rule"] == "one_of"
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
    for what, check in (("npz", "npz"), ("vti", "vti"), ("csv", "csv"), ("scenario", "json")):
        ready = ask(ws, {"type": "export", "what": what}, "export_ready")
        assert ready["what"] == what and ready["url"].startswith("/exports/") and ready["url"].endswith(check)
        body = server.get(ready["url"])
        assert body.status_code == 200
        if what == "npz":
            data = np.load(io.BytesIO(body.content))
            assert data["p_pa"].shape == (16, 64) and data["mach"].shape == (16, 64) and data["kind"].dtype == np.uint8
        elif what == "vti":  # VTK XML ImageData: one cell per solver cell (VTK file formats, ImageData; from memory)
            assert b'<VTKFile type="ImageData"' in body.content and b'WholeExtent="0 64 0 16 0 0"' in body.content
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
                  "set_view", "inspect", "profile", "save_scenario", "load_scenario", "list_scenarios", "export",
                  "clear_all", "set_initial", "delete_scenario", "list_exports", "delete_export", "build_nozzle",
                  "propellant_gas",
                  "list_frames", "recall_frame", "set_wave_line", "wave_history", "set_comparison",  # presenter tools
                  "settle",
                  "get_scenario"}  # a tab that missed a sketch_change
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


def test_a_long_step_request_runs_in_slices_and_still_does_every_step(server, ws, monkeypatch):
    # Issue 'bounded work per message': `step N` must not hold the solver for its whole length; each slice is
    # its own locked call, so other tabs get frames and requests between slices.
    from shockslate.server import dispatch

    monkeypatch.setattr(dispatch, "STEP_SLICE_S", 0.0)  # one step per slice: the most slices possible
    session = server.app.state.parts.session
    before = session.flow_version
    status = ask(ws, {"type": "step", "count": 40}, "status")
    assert status["steps"] == 40 and status["state"] == "paused"
    assert session.flow_version - before == 40  # forty separate slices, not one


def test_a_change_that_cannot_be_saved_is_not_made_and_every_tab_is_told(server, ws):
    # Issue 'nothing lost silently': a change is acknowledged only once applied and saved. The autosave is
    # made impossible by putting a folder where its temporary file's directory must be writable: the data
    # folder is replaced by a file, so every write fails with an OSError, as a full or read-only disk would.
    import shutil

    store = server.app.state.parts.store
    session = server.app.state.parts.session
    with server.websocket_connect(WS) as other:
        other.receive_json()
        before = (session.revision, len(session.scenario.sketch.shapes), session.undo_depth)
        shutil.rmtree(store.data_dir)
        store.data_dir.write_text("not a folder")
        try:
            err = refused(ws, {"type": "add_shape", "shape": SHAPE})
            assert err["field"] == "autosave" and "could not be saved" in err["message"]
            assert "Error" not in err["message"]
            told = receive(other, "error")
            assert told["field"] == "autosave"
            assert (session.revision, len(session.scenario.sketch.shapes), session.undo_depth) == before
        finally:
            store.data_dir.unlink()
        sc = ask(ws, {"type": "add_shape", "shape": SHAPE}, "scenario")  # the folder is back: it works again
        assert sc["revision"] == before[0] + 1
        assert json.loads(store.current_path.read_text())["sketch"]["shapes"][-1]["kind"] == "segment"


def test_a_kept_scenario_that_no_longer_validates_is_refused_in_plain_words(server, ws):
    store = server.app.state.parts.store
    store.saved_dir.mkdir(parents=True, exist_ok=True)
    doc = duct_doc()
    doc["conditions"]["ambient"]["p_pa"] = -5.0  # edited by hand after it was kept
    (store.saved_dir / "hand edited.json").write_text(json.dumps(doc))
    err = refused(ws, {"type": "load_scenario", "name": "hand edited"})
    assert err["field"] == "name" and err["value"] == "hand edited"
    assert "cannot be opened" in err["message"] and "internal error" not in err["message"]
    still_alive(ws)


# ----------------------------------------------------------------------------- issue 12: the first hour of a new user

def test_scenario_messages_say_whether_the_scenario_is_edited(ws):
    assert ws.hello["edited"] is False and ws.hello["origin"] == "protocol duct"
    sc = ask(ws, {"type": "set_conditions", "reservoir": {"p0_pa": 2.5e5}}, "scenario")
    assert sc["edited"] is True and sc["scenario"]["name"] == "protocol duct edited"
    assert "p0 250 kPa" in sc["scenario"]["description"]  # the description carries the current value
    sc = ask(ws, {"type": "undo"}, "scenario")
    assert sc["edited"] is False and sc["scenario"]["name"] == "protocol duct"


def test_undo_takes_back_a_station_a_probe_and_a_setting(ws):
    ask(ws, {"type": "add_probe", "name": "P5", "x_m": 0.25, "y_m": 0.05}, "scenario")
    ask(ws, {"type": "set_numerics", "cfl": 0.3}, "scenario")
    status = receive(ws, "status")
    assert status["undo_depth"] == 2
    assert ask(ws, {"type": "undo"}, "scenario")["scenario"]["numerics"]["cfl"] != 0.3
    assert [p["name"] for p in ask(ws, {"type": "undo"}, "scenario")["scenario"]["probes"]] == ["p1"]
    assert [p["name"] for p in ask(ws, {"type": "redo"}, "scenario")["scenario"]["probes"]] == ["p1", "P5"]


def test_clear_all_and_set_initial(ws):
    sc = ask(ws, {"type": "set_initial", "kind": "reservoir_upstream_of_x", "x_m": 0.1}, "scenario")
    assert sc["scenario"]["initial"] == {"kind": "reservoir_upstream_of_x", "x_m": 0.1}
    err = refused(ws, {"type": "set_initial", "kind": "reservoir_upstream_of_x"})
    assert err["field"] == "x_m"
    err = refused(ws, {"type": "set_initial", "kind": "lava"})
    assert err["field"] == "kind" and "reservoir_in_circle" in err["allowed"]
    sc = ask(ws, {"type": "clear_all"}, "scenario")["scenario"]
    assert (sc["sketch"]["shapes"], sc["stations"], sc["probes"], sc["initial"]) == ([], [], [], {"kind": "ambient"})
    sc = ask(ws, {"type": "undo"}, "scenario")["scenario"]
    assert sc["stations"][0]["name"] == "mid" and sc["initial"]["kind"] == "reservoir_upstream_of_x"


def test_kept_scenarios_can_be_deleted_but_not_built_ins(ws):
    ask(ws, {"type": "save_scenario", "name": "to go"}, "saved")
    listing = ask(ws, {"type": "delete_scenario", "name": "to go"}, "scenario_list")
    assert {"name": "to go"} not in listing["saved"]
    err = refused(ws, {"type": "delete_scenario", "name": "to go"})
    assert err["field"] == "name" and err["value"] == "to go"
    err = refused(ws, {"type": "delete_scenario", "name": scn.DEFAULT_SCENARIO})
    assert err["field"] == "name" and "built-in" in err["message"]
    for name in ("../current", "a/b", " lead"):
        assert refused(ws, {"type": "delete_scenario", "name": name})["field"] == "name"


def test_saving_renames_the_scenario_on_screen(ws):
    ask(ws, {"type": "set_numerics", "cfl": 0.3}, "scenario")
    ws.send_json({"type": "save_scenario", "name": "kept one", "id": "k"})
    receive(ws, "saved", "k")
    sc = receive(ws, "scenario", "k")
    assert sc["scenario"]["name"] == "kept one" and sc["edited"] is False


def test_exports_are_listed_and_deleted(server, ws, tmp_path):
    made = [ask(ws, {"type": "export", "what": what}, "export_ready")["filename"] for what in ("scenario", "csv")]
    files = ask(ws, {"type": "list_exports"}, "export_list")["files"]
    assert sorted(f["name"] for f in files) == sorted(made)
    assert {f["what"] for f in files} == {"scenario", "csv"} and all(f["bytes"] > 0 for f in files)
    after = ask(ws, {"type": "delete_export", "name": made[0]}, "export_list")["files"]
    assert [f["name"] for f in after] == [made[1]]
    assert server.get(f"/exports/{made[0]}").status_code == 404
    err = refused(ws, {"type": "delete_export", "name": "../current.json"})
    assert err["field"] == "name"
    assert (tmp_path / "data" / "current.json").is_file()  # never any other file
    assert ask(ws, {"type": "delete_export", "all": True}, "export_list")["files"] == []
    assert refused(ws, {"type": "delete_export"})["field"] == "name"


def test_a_tab_that_joins_late_gets_the_histories_and_why_the_run_stopped(server, ws):
    ws.send_json({"type": "step", "count": 6})
    for _ in range(MAX_READS):
        if receive(ws, "status")["steps"] >= 6:
            break
    session = server.app.state.parts.session
    rho, u, v, p = session.sim.primitive()
    u[8, 40] = 1e150  # an absurd velocity: the next step overflows (see the divergence test above)
    session.sim.set_primitive(rho, u, v, p)
    ws.send_json({"type": "step", "count": 1})
    receive(ws, "diverged")
    with server.websocket_connect(WS) as late:
        assert late.receive_json()["type"] == "hello"
        history = late.receive_json()
        assert history["type"] == "history" and history["limit"] >= 100
        probe = history["probes"]["p1"]
        assert len(probe["time_s"]) >= 2 and len(probe["time_s"]) == len(probe["p_pa"]) == len(probe["mach"])
        assert probe["time_s"] == sorted(probe["time_s"]) and probe["time_s"][-1] > 0
        station = history["stations"]["mid"]
        assert len(station["time_s"]) == len(station["mass_flow_kg_s"]) >= 2
        diverged = late.receive_json()
        assert diverged["type"] == "diverged" and diverged["advice"]


def test_a_segment_from_a_thousand_kilometres_away_is_refused_at_once_in_plain_words(ws):
    # Issue 'bounded work per message': coordinates are limited relative to the domain (10 domain sizes); the
    # refusal names the field, the value and the rule. The timing goal (0.2 s) lives in no test: it is shown here
    # only that nothing heavy runs before the refusal (the reply comes back and the tab stays usable).
    shape = {"kind": "segment", "start_m": [-1e6, -1e6], "end_m": [0.2, 0.05], "width_m": 0.01, "paints": "wall"}
    err = refused(ws, {"type": "add_shape", "shape": shape})
    assert err["field"] == "shape.start_m" and err["rule"] == "near_domain"
    assert "10 domain sizes" in err["message"]
    still_alive(ws)
    near = {**shape, "start_m": [-0.5, -0.5]}  # outside the domain but within reach: accepted, clipped when painted
    assert ask(ws, {"type": "add_shape", "shape": near}, "scenario")["scenario"]["sketch"]["shapes"][-1] == near
