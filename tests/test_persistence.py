"""The user data folder (server/persistence.py): current scenario after every change, named saves, safe names.

"Nothing is lost": a restart resumes the scenario of the last session. Names from the page never
become paths outside the folders they belong to.
"""
from __future__ import annotations

import json
import os

import pytest
from starlette.testclient import TestClient

from shockslate.server.app import ServerConfig, create_app
from shockslate.server.errors import RequestError
from shockslate.server.persistence import ScenarioStore, check_name, default_data_dir, scenario_from_argument
from shockslate.solver import scenario as scn

BASE = "http://127.0.0.1:8765"
WS = "ws://127.0.0.1:8765/ws"


def doc(name: str = "kept duct") -> dict:
    return {
        "name": name, "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965},
        "domain": {"x_min_m": 0.0, "x_max_m": 0.4, "y_min_m": 0.0, "y_max_m": 0.1, "nx": 32},
        "end_time_s": 0.001,
    }


@pytest.mark.parametrize("name", ["nozzle 2", "A-b_c", "x" * 64, "7"])
def test_good_names(name):
    assert check_name(name) == name


@pytest.mark.parametrize("name", ["", " ", " lead", "trail ", "../up", "a/b", "a\\b", "x.json", "x" * 65,
                                  "café", "nul\x00", "~home", 5, None])
def test_bad_names_name_the_field_value_and_rule(name):
    with pytest.raises(RequestError) as info:
        check_name(name)
    assert info.value.field == "name" and info.value.value == name and "letters, digits" in info.value.allowed


def test_data_dir_from_environment(monkeypatch, tmp_path):
    monkeypatch.setenv("SHOCKSLATE_DATA_DIR", str(tmp_path / "here"))
    assert default_data_dir() == tmp_path / "here"
    monkeypatch.delenv("SHOCKSLATE_DATA_DIR")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    assert default_data_dir() == tmp_path / "xdg" / "shockslate"
    monkeypatch.delenv("XDG_DATA_HOME")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert default_data_dir() == tmp_path / "home" / ".local" / "share" / "shockslate"


def test_current_round_trips_and_leaves_no_temporary_files(tmp_path):
    store = ScenarioStore(tmp_path)
    assert store.restore_current().scenario is None
    s = scn.parse_scenario(doc())
    store.save_current(s)
    assert store.restore_current().scenario == s
    assert sorted(p.name for p in tmp_path.iterdir()) == ["current.json"]


def test_a_broken_current_file_is_set_aside_not_lost(tmp_path):
    store = ScenarioStore(tmp_path)
    store.current_path.write_text('{"name": "broken"}')
    restored = store.restore_current()
    assert restored.scenario is None and "could not be restored" in restored.warning
    kept = [p for p in tmp_path.iterdir() if p.name.startswith("current.damaged-")]
    assert len(kept) == 1 and kept[0].read_text() == '{"name": "broken"}'
    assert kept[0].name in restored.warning


DAMAGE = {
    "not UTF-8": b'{"name": "\xff\xfe"}',
    "nested too deeply": b"[" * 100_000 + b"]" * 100_000,
    "a 5,000-digit number": b'{"name": "x", "end_time_s": ' + b"9" * 5000 + b"}",
    "not JSON": b"\x00\x01 hello",
}


@pytest.mark.parametrize("damage", sorted(DAMAGE))
def test_any_damage_to_the_autosave_is_set_aside_with_a_plain_reason(tmp_path, damage):
    store = ScenarioStore(tmp_path)
    store.current_path.write_bytes(DAMAGE[damage])
    restored = store.restore_current()
    assert restored.scenario is None
    assert "Traceback" not in restored.warning and "Error" not in restored.warning
    kept = [p for p in tmp_path.iterdir() if p.name.startswith("current.damaged-")]
    assert len(kept) == 1 and kept[0].read_bytes() == DAMAGE[damage]
    assert not store.current_path.exists()


def test_a_folder_in_place_of_the_autosave_is_set_aside(tmp_path):
    store = ScenarioStore(tmp_path)
    store.current_path.mkdir()
    (store.current_path / "inside.txt").write_text("kept")
    restored = store.restore_current()
    assert restored.scenario is None and "not a file" in restored.warning
    kept = [p for p in tmp_path.iterdir() if p.name.startswith("current.damaged-")]
    assert len(kept) == 1 and (kept[0] / "inside.txt").read_text() == "kept"


def test_named_saves_stay_in_saved_and_builtins_load(tmp_path):
    store = ScenarioStore(tmp_path / "data")
    path = store.save_named("my duct", scn.parse_scenario(doc()))
    assert path == (tmp_path / "data" / "saved" / "my duct.json").resolve()
    assert json.loads(path.read_text())["name"] == "my duct"
    assert store.load_named("my duct").name == "my duct"
    assert store.load_named(scn.DEFAULT_SCENARIO).name == scn.DEFAULT_SCENARIO
    with pytest.raises(RequestError) as info:
        store.save_named(scn.DEFAULT_SCENARIO, scn.parse_scenario(doc()))
    assert "built-in" in info.value.message
    with pytest.raises(RequestError) as info:
        store.load_named("never saved")
    assert info.value.field == "name"
    listing = store.listing()
    assert listing["saved"] == [{"name": "my duct"}]
    assert listing["builtin"][0]["name"] == scn.DEFAULT_SCENARIO and listing["builtin"][0]["description"]
    outside = tmp_path / "outside.json"
    outside.write_text(json.dumps(doc("outside")))
    with pytest.raises(RequestError):
        store.load_named("../outside")


def test_command_line_scenario_may_be_a_path_or_a_name(tmp_path):
    store = ScenarioStore(tmp_path)
    path = tmp_path / "mine.json"
    path.write_text(json.dumps(doc("from file")))
    assert scenario_from_argument(str(path), store).name == "from file"
    assert scenario_from_argument(scn.DEFAULT_SCENARIO, store).name == scn.DEFAULT_SCENARIO


def test_a_restart_resumes_the_last_scenario(tmp_path):
    data = tmp_path / "data"
    first = ServerConfig(data_dir=data, scenario=scn.parse_scenario(doc()), start_running=False, warm=False)
    shape = {"kind": "circle", "centre_m": [0.2, 0.05], "radius_m": 0.01, "paints": "wall"}
    with TestClient(create_app(first), base_url=BASE) as client, client.websocket_connect(WS) as sock:
        sock.receive_json()
        sock.send_json({"type": "add_shape", "shape": shape, "id": 1})
        sock.send_json({"type": "set_conditions", "reservoir": {"p0_pa": 7e5}, "id": 2})
        for _ in range(80):
            msg = sock.receive()
            if msg.get("text") and json.loads(msg["text"]).get("id") == 2:
                break
    saved = json.loads((data / "current.json").read_text())
    assert saved["sketch"]["shapes"] == [shape] and saved["conditions"]["reservoir"]["p0_pa"] == 7e5
    again = ServerConfig(data_dir=data, start_running=False, warm=False)  # no scenario: restore
    with TestClient(create_app(again), base_url=BASE) as client, client.websocket_connect(WS) as sock:
        hello = sock.receive_json()
        # an edited scenario keeps saying so after a restart (issue 12: the page knows what is loaded)
        assert hello["scenario"]["name"] == "kept duct edited"
        assert hello["scenario"]["sketch"]["shapes"] == [shape]
        assert hello["scenario"]["conditions"]["reservoir"]["p0_pa"] == 7e5


def test_first_start_uses_the_builtin_default(tmp_path):
    config = ServerConfig(data_dir=tmp_path, start_running=False, warm=False)
    with TestClient(create_app(config), base_url=BASE) as client:
        with client.websocket_connect(WS) as sock:
            assert sock.receive_json()["scenario"]["name"] == scn.DEFAULT_SCENARIO
        assert os.path.isfile(tmp_path / "current.json")


def test_kept_scenarios_are_capped_but_an_existing_name_can_be_saved_over(tmp_path, monkeypatch):
    from shockslate.server import persistence

    monkeypatch.setattr(persistence, "MAX_SAVED", 2)
    store = ScenarioStore(tmp_path)
    s = scn.parse_scenario(doc())
    store.save_named("one", s)
    store.save_named("two", s)
    with pytest.raises(RequestError) as info:
        store.save_named("three", s)
    assert info.value.field == "name" and "at most 2" in info.value.allowed
    store.save_named("two", s)  # saving over a kept name is still allowed
    assert store.saved_names() == ["one", "two"]


def test_a_kept_scenario_can_be_deleted_and_nothing_else(tmp_path):
    store = ScenarioStore(tmp_path)
    s = scn.parse_scenario(doc())
    store.save_named("old one", s)
    (tmp_path / "current.json").write_text("{}")
    store.delete_named("old one")
    assert store.saved_names() == []
    for name, field in (("old one", "name"), (scn.DEFAULT_SCENARIO, "name"), ("../current", "name"), ("", "name")):
        with pytest.raises(RequestError) as info:
            store.delete_named(name)
        assert info.value.field == field and info.value.value == name
    assert (tmp_path / "current.json").is_file()


def test_a_tab_is_told_that_the_last_scenario_was_set_aside(tmp_path):
    # issue 'safe start after damage': the console and the page say so, naming the kept file
    data = tmp_path / "data"
    data.mkdir()
    (data / "current.json").write_bytes(b"[" * 100_000)
    config = ServerConfig(data_dir=data, start_running=False, warm=False)
    with TestClient(create_app(config), base_url="http://127.0.0.1:8765") as client:
        with client.websocket_connect("ws://127.0.0.1:8765/ws") as sock:
            hello = sock.receive_json()
    assert hello["warming"] is False
    kept = [p.name for p in data.iterdir() if p.name.startswith("current.damaged-")]
    assert len(kept) == 1 and len(hello["notices"]) == 1
    assert kept[0] in hello["notices"][0] and "could not be restored" in hello["notices"][0]
    assert hello["scenario"]["name"] == scn.DEFAULT_SCENARIO


def test_document_text_is_the_compact_json_of_the_document_and_reuses_shape_texts():
    # json.dumps with separators (",", ":") is the reference (Python standard library); the store's text must be
    # byte for byte the same, for a first document, after a shape is added and removed, and for odd documents
    import json as _json

    from shockslate.server.persistence import DocumentText
    from scenario_docs import duct_doc as _duct

    text = DocumentText()
    doc = _duct(48, name="text duct")
    shapes = doc["sketch"]["shapes"]
    assert text(doc) == _json.dumps(doc, separators=(",", ":"))
    disc = {"kind": "circle", "centre_m": [0.2, 0.05], "radius_m": 0.01, "paints": "wall"}
    grown = {**doc, "sketch": {**doc["sketch"], "shapes": [*shapes, disc]}}
    assert text(grown) == _json.dumps(grown, separators=(",", ":"))
    assert text._shapes[id(shapes[0])][0] is shapes[0]  # the kept shape's text was kept
    empty = {**doc, "sketch": {"mirror": "axis", "shapes": []}}
    assert text(empty) == _json.dumps(empty, separators=(",", ":"))
    for odd in ({"name": "no sketch"}, {"sketch": {"shapes": "not a list"}}):
        assert text(odd) == _json.dumps(odd, separators=(",", ":"))
    assert "".join(text.pieces(grown)) == text(grown)
