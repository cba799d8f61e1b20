"""The presenter messages of server/PROTOCOL.md through a real websocket (Starlette's TestClient, as in
test_protocol.py): listing and recalling kept frames, and setting and reading the wave diagram's line."""
from __future__ import annotations

import base64

import numpy as np
import pytest
from starlette.testclient import TestClient

from shockslate.server.app import ServerConfig, create_app
from shockslate.server.frame_ring import RECALLED
from shockslate.server.frames import decode_frame
from shockslate.solver import scenario as scn
from shockslate.solver.fields import VIEWS

from test_protocol import BASE, MAX_READS, WS, ask, duct_doc, receive, refused


@pytest.fixture
def server(tmp_path):
    config = ServerConfig(data_dir=tmp_path / "data", scenario=scn.parse_scenario(duct_doc()),
                          start_running=False, warm=False)
    with TestClient(create_app(config), base_url=BASE) as client:
        yield client


@pytest.fixture
def ws(server):
    with server.websocket_connect(WS) as sock:
        assert sock.receive_json()["type"] == "hello"
        yield sock


def _step(sock, count: int) -> int:
    return ask(sock, {"type": "step", "count": count}, "status")["steps"]


def _recalled(sock) -> bytes:
    """The next binary frame of channel 1 (live frames of channel 0 may come first)."""
    for _ in range(MAX_READS):
        data = receive(sock, "frame")
        if data[14] == RECALLED:
            return data
    raise AssertionError("no recalled frame")


def test_kept_frames_are_listed_and_an_earlier_one_comes_back_marked(ws):
    ws.send_json({"type": "set_view", "view": "pressure", "width": 128, "height": 32})
    done = [_step(ws, 3) for _ in range(4)]
    ring = ask(ws, {"type": "list_frames"}, "frame_ring")
    assert ring["max_frames"] == 240 and ring["max_bytes"] == 48 * 1024 * 1024
    assert ring["steps"] == sorted(ring["steps"]) and set(done) <= set(ring["steps"])
    assert len(ring["time_s"]) == len(ring["steps"]) and ring["bytes"] > 0
    ws.send_json({"type": "recall_frame", "steps": done[1] + 1})  # between two kept instants: the earlier one
    head, pixels = decode_frame(_recalled(ws))
    assert head.step == done[1] and pixels.shape == (head.height, head.width)
    assert head.view_index == list(VIEWS).index("pressure")
    err = refused(ws, {"type": "recall_frame", "steps": -1})
    assert err["field"] == "steps"


def test_a_reset_flow_starts_the_ring_again(ws):
    _step(ws, 5)
    ask(ws, {"type": "reset_flow"}, "status")
    ring = ask(ws, {"type": "list_frames"}, "frame_ring")
    assert ring["steps"] == [0]


def test_wave_line_along_the_duct_gives_rows_of_one_sample_per_cell(ws):
    line = ask(ws, {"type": "set_wave_line", "start_m": [0.0, 0.05], "end_m": [0.4, 0.05], "field": "pressure",
                    "every_steps": 1}, "wave_line")
    assert line["line"]["field"] == "pressure" and line["line"]["unit"] == "Pa"
    assert line["line"]["length_m"] == pytest.approx(0.4)
    for _ in range(3):
        _step(ws, 2)
    hist = ask(ws, {"type": "wave_history", "after_steps": -1}, "wave_history")
    assert hist["generation"] == line["generation"] and hist["samples"] == 64  # the duct is 64 cells long
    assert hist["rows"] >= 4 and hist["steps"] == sorted(hist["steps"])
    values = np.frombuffer(base64.b64decode(hist["values_f32"]), "<f4").reshape(hist["rows"], 64)
    # the reservoir (left eighth) holds its 300 kPa; the duct starts at the 100 kPa ambient pressure
    assert values[0, 2] == pytest.approx(3.0e5, rel=0.01) and values[0, 40] == pytest.approx(1.0e5, rel=0.01)
    later = ask(ws, {"type": "wave_history", "after_steps": hist["steps"][-2]}, "wave_history")
    assert later["steps"] == hist["steps"][-1:]
    by_station = ask(ws, {"type": "set_wave_line", "station": "mid", "field": "mach"}, "wave_line")
    assert by_station["line"]["station"] == "mid" and by_station["generation"] > line["generation"]
    off = ask(ws, {"type": "set_wave_line", "off": True}, "wave_line")
    assert off["line"] is None


@pytest.mark.parametrize("message, field, rule", [
    ({"station": "nowhere"}, "station", "one_of"),
    ({"station": "mid", "start_m": [0.0, 0.0], "end_m": [0.1, 0.0]}, "station", "one_way"),
    ({"start_m": [0.0, 0.0]}, "station", "one_way"),
    ({"start_m": [0.1, 0.0], "end_m": [0.1, 0.0]}, "end_m", "distinct"),
    ({"station": "mid", "field": "vorticity"}, "field", None),
    ({"station": "mid", "every_steps": 0}, "every_steps", None),
])
def test_bad_wave_lines_are_refused_by_name(ws, message, field, rule):
    err = refused(ws, {"type": "set_wave_line", **message})
    assert err["field"] == field
    if rule:
        assert err["rule"] == rule


def _channel_frame(sock, channel: int) -> bytes:
    for _ in range(MAX_READS):
        data = receive(sock, "frame")
        if data[14] == channel:
            return data
    raise AssertionError(f"no frame of channel {channel}")


def test_a_comparison_run_sends_its_frames_beside_the_main_ones(ws):
    ws.send_json({"type": "set_view", "view": "pressure", "width": 128, "height": 32})
    on = ask(ws, {"type": "set_comparison", "setting": "conditions.ambient.p_pa", "value": 5.0e4}, "comparison")
    assert on["active"] and on["label"] == "ambient pressure" and on["unit"] == "Pa"
    assert on["value"] == 5.0e4 and on["main_value"] == 1.0e5 and on["time_s"] == 0.0
    ws.send_json({"type": "step", "count": 4})
    head, _ = decode_frame(_channel_frame(ws, 2))  # it comes with the main frame, before the step's status
    assert head.step >= 1 and head.view_index == list(VIEWS).index("pressure")
    status = receive(ws, "status")
    assert status["comparison"]["steps"] >= 1 and status["comparison"]["diverged"] is None
    off = ask(ws, {"type": "set_comparison", "off": True}, "comparison")
    assert off["active"] is False
    assert "comparison" not in ask(ws, {"type": "step", "count": 1}, "status")


@pytest.mark.parametrize("message, field", [
    ({"setting": "conditions.ambient.p_pa", "value": -1.0}, "value"),
    ({"setting": "domain.nx", "value": 10.0}, "setting"),
    ({"setting": "conditions.ambient.p_pa"}, "value"),
    ({"off": True, "value": 1.0}, "setting"),
])
def test_bad_comparisons_are_refused_by_name(ws, message, field):
    err = refused(ws, {"type": "set_comparison", **message})
    assert err["field"] == field
