"""Seeded fuzzing of the live protocol: thousands of random and malformed messages through a real websocket.

Every message must be answered without an internal error, and the connection must stay open: after each one a
sentinel `inspect` is sent and its reply awaited. Values are drawn from pools that hold the usual troublemakers
(wrong types, NaN and infinities, huge and negative numbers, 5,000-digit integers, deep nesting, long strings,
unknown keys and types, text that is not JSON). Common practice for protocol robustness, no single source.
"""
from __future__ import annotations

import json
import random
import re

import pytest
from starlette.testclient import TestClient

from shockslate.server.app import ServerConfig, create_app
from shockslate.server.security import Access
from shockslate.solver import scenario as scn
from scenario_docs import duct_doc

WS = "ws://127.0.0.1:8765/ws"
SEED = 20261202
MESSAGES = 2000
MAX_READS = 400
#: What a refusal must not show a user: Python's own words (exception and class names, tracebacks).
PYTHON_WORDS = re.compile(r"Traceback|Error\b|Exception|<class|NoneType|\bdict\b|\bstr\b|\bint\b|"
                          r"sys\.set_int_max_str_digits|pydantic|validation error")

TYPES = ["add_shape", "remove_shape", "undo", "redo", "clear_sketch", "set_mirror", "set_gas", "set_conditions",
         "set_numerics", "set_resolution", "set_domain", "set_edges", "set_mode", "run", "pause", "reset_flow",
         "step", "add_station", "remove_station", "add_probe", "remove_probe", "set_view", "inspect", "profile",
         "save_scenario", "load_scenario", "list_scenarios", "export", "bogus", "", "ADD_SHAPE"]
FIELDS = ["shape", "index", "mirror", "preset", "gamma", "molar_mass_kg_kmol", "reservoir", "stream", "ambient",
          "p0_pa", "t0_k", "mach", "angle_deg", "p_pa", "t_k", "order", "limiter", "flux", "cfl", "integrator", "nx",
          "x_min_m", "x_max_m", "y_min_m", "y_max_m", "left", "right", "top", "bottom", "mode", "count", "name",
          "start_m", "end_m", "role", "x_m", "y_m", "view", "width", "height", "fixed_range", "overlays", "station",
          "axis", "what", "scenario", "kind", "paints", "points_m", "width_m", "centre_m", "radius_m", "corner_m",
          "size_m", "angle", "zzz"]
WORDS = ["wall", "fluid", "reservoir", "stream", "ambient", "open", "axis", "planar", "axisymmetric", "air",
         "hot products", "hllc", "hll", "rusanov", "minmod", "van_leer", "mc", "ssp_rk2", "ssp_rk3", "none", "midline",
         "throat", "exit", "mach", "pressure", "npz", "csv", "scenario", "segment", "stroke", "rectangle", "polygon",
         "circle", "nozzle_sea_level", "../../etc/passwd", "a" * 300, "", " ", "\u00e9\u00df\u4e2d", "null"]


def _number(rng: random.Random):
    return rng.choice([0, 1, -1, 2, 3, 7, 17, 64, 0.05, 0.1, 0.2, -0.05, 0.5, 1.4, 1.2, 300.0, 101325.0, 1e6, -1e6,
                       1e300, -1e-300, 1e-300, 2 ** 63, 10 ** 30, float("nan"), float("inf"), float("-inf"), True])


def _value(rng: random.Random, depth: int = 0):
    roll = rng.random()
    if roll < 0.3:
        return _number(rng)
    if roll < 0.5:
        return rng.choice(WORDS)
    if roll < 0.6:
        return None
    if roll < 0.75 and depth < 3:
        return [_value(rng, depth + 1) for _ in range(rng.choice([0, 1, 2, 2, 3, 5]))]
    if roll < 0.9 and depth < 3:
        return {rng.choice(FIELDS): _value(rng, depth + 1) for _ in range(rng.randint(0, 4))}
    if roll < 0.95:
        return [[0.1, 0.02], [0.2, 0.03], [0.15, 0.05]]
    return rng.choice([[[[[[[[1.0]]]]]]], {"kind": "circle", "paints": "wall", "centre_m": [0.2, 0.05],
                                                "radius_m": 0.01}, [0.1] * 300])


def _text(rng: random.Random, n: int) -> str:
    roll = rng.random()
    if roll < 0.04:
        return rng.choice(["not json", "{", "[1, 2]", "42", '"text"', "null", "{}", "\u0000"])
    if roll < 0.05:
        return '{"type": "step", "count": ' + "9" * 5000 + "}"
    if roll < 0.06:
        return '{"type": "add_shape", "shape": ' + "[" * 500 + "]" * 500 + "}"
    message = {"type": rng.choice(TYPES), "id": f"f{n}" if rng.random() < 0.9 else rng.choice([n, None, [n], 1.5])}
    for _ in range(rng.randint(0, 4)):
        message[rng.choice(FIELDS)] = _value(rng)
    return json.dumps(message)


@pytest.fixture
def client(tmp_path):
    access = Access(max_messages_per_s=1e9)  # the fuzzer waits for every reply; the rate cap is tested elsewhere
    config = ServerConfig(access=access, data_dir=tmp_path / "data",
                          scenario=scn.parse_scenario(duct_doc(48, name="fuzz duct")), start_running=False,
                          warm=False)
    with TestClient(create_app(config), base_url="http://127.0.0.1:8765") as c:
        yield c


def _until_sentinel(sock, rid: str) -> list[dict]:
    seen = []
    for _ in range(MAX_READS):
        msg = sock.receive()
        if msg.get("type") == "websocket.close":
            raise AssertionError(f"the server closed the connection: {msg}")
        text = msg.get("text")
        if text is None:
            continue
        reply = json.loads(text)
        if reply.get("id") == rid:
            return seen
        seen.append(reply)
    raise AssertionError(f"no reply to the sentinel {rid} after {MAX_READS} messages")


def test_thousands_of_random_and_malformed_messages_get_answers_and_never_drop_the_tab(client):
    rng = random.Random(SEED)
    internal, wording, refusals = [], [], 0
    with client.websocket_connect(WS) as sock:
        sock.receive_json()
        for n in range(MESSAGES):
            text = _text(rng, n)
            sock.send_text(text)
            if '"run"' in text:
                sock.send_json({"type": "pause"})
            rid = f"sentinel{n}"
            sock.send_json({"type": "inspect", "x_m": 0.05, "y_m": 0.02, "id": rid})
            for reply in _until_sentinel(sock, rid):
                if reply.get("type") == "error":
                    refusals += 1
                    said = str(reply.get("message"))
                    if reply.get("field") == "server" or "internal error" in said:
                        internal.append((text[:300], said[:300]))
                    if PYTHON_WORDS.search(said) or not (said[:1].isupper() and said.endswith((".", "?"))):
                        wording.append((text[:300], said[:300]))
    assert not internal, f"{len(internal)} internal errors, e.g. {internal[:3]}"
    assert not wording, f"{len(wording)} refusals not in plain sentences, e.g. {wording[:3]}"
    assert refusals > MESSAGES // 2  # most of what the fuzzer sends is wrong and must be refused, not ignored
