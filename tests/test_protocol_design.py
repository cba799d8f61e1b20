"""The design intents (build_nozzle, propellant_gas), the engine figures and separation marks of the status, and
the harmless no-ops, through a real websocket (Starlette's TestClient, same fixtures as tests/test_protocol.py).

Sources:
- circle and strip areas: A = pi r^2 (axisymmetric), A = 2 h per metre of depth for a half height h mirrored about
  the symmetry line; solver/nozzle.py reads the planar area above the symmetry line only (h per metre).
- [SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, Table 5-5: the chamber temperature of liquid
  oxygen / liquid methane at 1000 psia (tests/data/propellant_check_values.csv, from memory).
- The engine figures and the separation marks must be THE SAME numbers as solver/nozzle_report.py and
  solver/separation.py give for the same flow (the report's modules), so page and report agree.
"""
from __future__ import annotations

import csv
import importlib.util
import json
import math
from pathlib import Path

import pytest
from starlette.testclient import TestClient

from shockslate.server.app import ServerConfig, create_app
from shockslate.solver import nozzle, nozzle_report, separation
from shockslate.solver import scenario as scn
from test_protocol import WS, BASE, ask, duct_doc, receive, refused  # noqa: F401 - fixtures by name
from test_protocol import server, ws  # noqa: F401

HAS_CANTERA = importlib.util.find_spec("cantera") is not None
ROWS = list(csv.DictReader((Path(__file__).parent / "data" / "propellant_check_values.csv").open(encoding="utf-8")))

#: A small axisymmetric cone nozzle: 6 mm throat, contraction 4, 12 mm chamber, area ratio 8, 4 cells per
#: throat radius (a coarse grid keeps the steps cheap; the areas are read off the drawn shapes).
NOZZLE = {"type": "build_nozzle", "throat_radius_m": 0.006, "contraction_ratio": 4.0, "chamber_length_m": 0.012,
          "exit_area_ratio": 8.0, "mode": "axisymmetric", "shape": "cone", "half_angle_deg": 15.0,
          "cells_per_throat_radius": 4}


def exit_plane_area_m2(doc: dict) -> float:
    """The drawn section (solver/nozzle.py) just inside the exit plane: the wall polygon's largest x."""
    x_exit = max(x for x, _ in doc["sketch"]["shapes"][0]["points_m"])
    return nozzle.drawing(scn.parse_scenario(doc)).area_m2(x_exit - 1e-9)


def test_build_nozzle_makes_the_requested_areas_the_current_scenario_and_undo_takes_it_back(ws):
    before = ask(ws, {"type": "list_scenarios"}, "scenario_list")  # (a round trip: the duct is on screen)
    assert before["type"] == "scenario_list"
    sc = ask(ws, NOZZLE, "scenario")
    doc = sc["scenario"]
    assert doc["mode"] == "axisymmetric" and sc["origin"] == "designed nozzle" and not sc["edited"]
    assert {s["role"] for s in doc["stations"]} == {"throat", "exit"}
    drawn = nozzle.drawn_nozzle(scn.parse_scenario(doc))
    # A = pi r^2 for the requested throat radius; the exit area ratio as requested at the exit plane (1 % for the
    # polygon's straight pieces, common practice, no source)
    assert drawn.throat_area_m2 == pytest.approx(math.pi * 0.006 ** 2, rel=0.01)
    assert exit_plane_area_m2(doc) / drawn.throat_area_m2 == pytest.approx(8.0, rel=0.01)
    # the run keeps the conditions and gas that were on screen
    duct = duct_doc()
    assert doc["conditions"]["reservoir"] == duct["conditions"]["reservoir"]
    assert doc["gas"]["gamma"] == duct["gas"]["gamma"]
    undone = ask(ws, {"type": "undo"}, "scenario")["scenario"]
    assert undone["sketch"] == duct["sketch"] and undone["domain"] == duct["domain"]
    redone = ask(ws, {"type": "redo"}, "scenario")["scenario"]
    assert redone["sketch"] == doc["sketch"]


def test_a_planar_nozzle_is_built_per_metre_of_depth(ws):
    doc = ask(ws, {**NOZZLE, "mode": "planar", "shape": "bell"}, "scenario")["scenario"]
    drawn = nozzle.drawn_nozzle(scn.parse_scenario(doc))
    assert doc["mode"] == "planar"
    # planar: the half height above the symmetry line, per metre of depth (solver/nozzle.py)
    assert drawn.throat_area_m2 == pytest.approx(0.006, rel=0.01)
    assert exit_plane_area_m2(doc) / drawn.throat_area_m2 == pytest.approx(8.0, rel=0.01)


@pytest.mark.parametrize("change, field, says", [
    ({"throat_radius_m": -0.005}, "throat_radius_m", "greater than 0"),
    ({"contraction_ratio": 0.5}, "contraction_ratio", "greater than 1"),
    ({"half_angle_deg": 60.0}, "half_angle_deg", "0 and less than 45"),
    ({"shape": "bell", "bell_fraction": 0.3}, "bell_fraction", "0.5 to 1.2"),
    ({"cells_per_throat_radius": 1}, "cells_per_throat_radius", "3 to 200"),
])
def test_a_refused_nozzle_names_the_field_the_value_and_the_range(ws, change, field, says):
    err = refused(ws, {**NOZZLE, **change})
    assert err["field"] == field and err["value"] == change[field] and says in err["allowed"], err
    assert not err.get("harmless")
    # nothing changed: the duct is still on screen
    assert ask(ws, {"type": "inspect", "x_m": 0.01, "y_m": 0.05}, "inspect")["kind"] == "reservoir"


def test_a_missing_nozzle_number_is_refused_by_name(ws):
    msg = {k: v for k, v in NOZZLE.items() if k != "exit_area_ratio"}
    err = refused(ws, msg)
    assert err["field"] == "exit_area_ratio" and err["rule"] == "required"


@pytest.mark.skipif(not HAS_CANTERA, reason="the design extra (Cantera) is not installed in this environment")
def test_gas_from_propellants_applies_frozen_gamma_molar_mass_and_chamber_state_as_one_change(ws):
    row = next(r for r in ROWS if r["fuel"] == "CH4" and r["reactant_state"] == "liquid")
    assert ws.hello["thermochemistry"]["available"] is True
    ws.send_json({"type": "propellant_gas", "fuel": "CH4", "oxidiser": "O2", "mixture_ratio": float(row["mixture_ratio"]),
                  "p0_pa": float(row["p0_pa"]), "reactant_state": "liquid", "id": "gas"})
    result = receive(ws, "chamber_gas", "gas")
    sc = receive(ws, "scenario", "gas")["scenario"]
    # [SB] Table 5-5 (from memory; the row's source column): LOX/CH4 at 1000 psia
    assert result["t0_k"] == pytest.approx(float(row["published_value"]), abs=float(row["tolerance"]))
    assert "frozen" in result["gamma_note"]
    assert sc["gas"]["preset"] is None
    assert sc["gas"]["gamma"] == pytest.approx(result["gamma"], rel=1e-5)
    assert sc["gas"]["molar_mass_kg_kmol"] == pytest.approx(result["molar_mass_kg_kmol"], rel=1e-5)
    assert sc["conditions"]["reservoir"]["t0_k"] == pytest.approx(result["t0_k"], rel=1e-5)
    assert sc["conditions"]["reservoir"]["p0_pa"] == float(row["p0_pa"])
    # one undo takes gas and chamber back together
    back = ask(ws, {"type": "undo"}, "scenario")["scenario"]
    assert back["gas"] == duct_doc()["gas"] and back["conditions"] == duct_doc()["conditions"]


@pytest.mark.skipif(not HAS_CANTERA, reason="the design extra (Cantera) is not installed in this environment")
def test_a_refused_propellant_input_names_the_field(ws):
    err = refused(ws, {"type": "propellant_gas", "fuel": "H2", "oxidiser": "O2", "mixture_ratio": 500.0,
                       "p0_pa": 7e6})
    assert err["field"] == "mixture_ratio" and err["value"] == 500.0 and "0.05" in err["allowed"]
    err = refused(ws, {"type": "propellant_gas", "fuel": "C3H8", "oxidiser": "O2", "mixture_ratio": 3.0,
                       "p0_pa": 7e6, "reactant_state": "liquid"})
    assert err["field"] == "fuel" and "liquid" in err["allowed"]


def test_without_thermochemistry_the_server_says_so_and_how_to_add_it(tmp_path):
    config = ServerConfig(data_dir=tmp_path / "data", scenario=scn.parse_scenario(duct_doc()),
                          start_running=False, warm=False, thermochemistry=False)
    with TestClient(create_app(config), base_url=BASE) as client, client.websocket_connect(WS) as sock:
        hello = sock.receive_json()
        info = hello["thermochemistry"]
        assert info["available"] is False and "pip install" in info["how_to_add"] and "design" in info["how_to_add"]
        err = refused(sock, {"type": "propellant_gas", "fuel": "H2", "oxidiser": "O2", "mixture_ratio": 6.0,
                             "p0_pa": 7e6})
        assert err["rule"] == "unavailable" and "make run" in err["message"] and "[design]" in err["message"]


@pytest.mark.parametrize("message, rule", [
    ({"type": "undo"}, "nothing_to_undo"),
    ({"type": "redo"}, "nothing_to_redo"),
    ({"type": "remove_probe", "name": "nobody"}, "one_of"),
    ({"type": "remove_station", "name": "nowhere"}, "one_of"),
    ({"type": "delete_scenario", "name": "never kept"}, None),
    ({"type": "delete_export", "name": "gone.npz"}, None),
    ({"type": "remove_shape", "index": 7}, "range"),
    ({"type": "profile", "station": "gone"}, "one_of"),
])
def test_a_harmless_no_op_is_marked_harmless(ws, message, rule):
    err = refused(ws, message)
    assert err["harmless"] is True and (rule is None or err["rule"] == rule), err


def test_clearing_an_empty_sketch_is_harmless_but_a_bad_value_is_not(ws):
    ask(ws, {"type": "clear_sketch"}, "scenario")
    err = refused(ws, {"type": "clear_sketch"})
    assert err["rule"] == "empty" and err["harmless"] is True
    # setting the value it already has is no refusal at all, and adds nothing to undo
    depth = ask(ws, {"type": "pause"}, "status")["undo_depth"]
    cfl = ws.hello["scenario"]["numerics"]["cfl"]
    for same in ({"type": "set_gas", "preset": "air"}, {"type": "set_mirror", "mirror": "none"},
                 {"type": "set_edges", "left": "wall"}, {"type": "set_numerics", "cfl": cfl}):
        assert ask(ws, same, "scenario")["type"] == "scenario"
    assert ask(ws, {"type": "pause"}, "status")["undo_depth"] == depth
    err = refused(ws, {"type": "set_numerics", "cfl": 5.0})
    assert "harmless" not in err
    err = refused(ws, {"type": "delete_scenario", "name": scn.DEFAULT_SCENARIO})  # a built-in: a real refusal
    assert "harmless" not in err
    ask(ws, {"type": "remove_station", "name": "mid"}, "scenario")
    err = refused(ws, {"type": "export", "what": "csv"})  # a station export with no station: nothing to export
    assert err["rule"] == "needs_station" and err["harmless"] is True


def test_engine_figures_and_separation_marks_are_the_reports_own(server, ws):
    ask(ws, {**NOZZLE, "exit_area_ratio": 12.0}, "scenario")
    # a low chamber pressure over a large area ratio: over-expanded, the wall pressure falls below 0.4 p_amb
    ask(ws, {"type": "set_conditions", "reservoir": {"p0_pa": 4.0e5}}, "scenario")
    status = None
    for _ in range(3):
        status = ask(ws, {"type": "step", "count": 400}, "status")
    parts = server.app.state.parts
    session = parts.session
    s = session.scenario
    assert status["steps"] == session.sim.steps  # the status is of this very state (paused)
    throat, exit_ = scn.station_by_role(s, "throat"), scn.station_by_role(s, "exit")
    fig = nozzle_report.figures(session.sim, s, nozzle.drawn_nozzle(s), throat, exit_)
    eng = status["engine"]
    for key in ("thrust_coefficient", "ideal_thrust_coefficient", "ideal_thrust_coefficient_with_divergence",
                "thrust_coefficient_ratio_with_divergence", "c_star_sim_m_s", "c_star_m_s", "specific_impulse_s",
                "ideal_specific_impulse_s"):
        assert eng[key] == pytest.approx(getattr(fig, key), rel=1e-12), key
    # sanity of the ideal figures: c* = p0 A* / mdot_choked (Sutton and Biblarz ch. 3)
    assert eng["c_star_m_s"] == pytest.approx(4.0e5 * eng["throat_area_m2"] / eng["choked_mass_flow_kg_s"], rel=1e-9)
    sep = separation.nozzle_wall_separation(session.sim, throat, exit_)
    got = status["separation"]
    assert got["separates"] == sep.separates and got["first_x_m"] == sep.first_x_m
    assert [m[0] for m in got["marks_m"]] == [float(x) for x, b in zip(sep.x_m, sep.below) if b]
    assert got["separates"], "p0 = 4 bar through area ratio 12 must over-expand below 0.4 p_amb"
    assert "Summerfield" in got["caution"]


def test_a_scenario_without_a_nozzle_has_no_engine_figures(ws):
    status = ask(ws, {"type": "step", "count": 1}, "status")
    assert status["engine"] is None and status["separation"] is None


def test_the_warm_up_reports_each_stage_before_it_runs():
    """What the server tells the tabs and prints while the kernels compile: every stage of solver/warm.py, in
    order, each before it runs, with a label of what compiles."""
    from shockslate.solver.warm import STAGES, warm_kernels

    seen = []
    warm_kernels(lambda done, total, stage, label: seen.append((done, total, stage, label)))
    assert [s[0] for s in seen] == list(range(len(STAGES))) and {s[1] for s in seen} == {len(STAGES)}
    assert [(s[2], s[3]) for s in seen] == list(STAGES)


HOSTILE = [0.0, -1.0, 1e-300, 1e300, 1.0, 1.0000001, 89.9, 1e6]


def answer(sock, rid: str) -> dict:
    """The reply (of any type) that echoes request id `rid`, skipping frames and other messages."""
    for _ in range(400):
        msg = sock.receive()
        if msg.get("text") is not None:
            data = json.loads(msg["text"])
            if data.get("id") == rid:
                return data
    raise AssertionError(f"no reply to {rid}")


def test_hostile_design_numbers_get_plain_refusals_never_an_internal_error(ws):
    """Every design field at values from zero to 1e300: a scenario, or a refusal naming a field in plain words
    (no Python words such as exception names), and the connection stays usable."""
    python_words = ("Traceback", "Error", "Exception", "NoneType", "<class")
    for field in ("throat_radius_m", "contraction_ratio", "chamber_length_m", "exit_area_ratio", "half_angle_deg",
                  "convergent_half_angle_deg", "upstream_rounding", "downstream_rounding"):
        for shape in (("cone", "moc") if field in ("throat_radius_m", "exit_area_ratio") else ("cone",)):
            for value in HOSTILE:
                ws.send_json({**NOZZLE, "shape": shape, field: value, "id": "h"})
                reply = answer(ws, "h")
                if reply["type"] == "error":
                    assert reply["rule"] != "internal" and reply["field"], reply
                    assert not any(w in reply["message"] for w in python_words), reply["message"]
                else:
                    assert reply["type"] == "scenario"
    for fuel, oxidiser, ratio in (("", "O2", 6.0), ("H2", "H2", 6.0), ("../x", "O2", 1e300), ("H2", "O2", 0.0)):
        err = refused(ws, {"type": "propellant_gas", "fuel": fuel, "oxidiser": oxidiser, "mixture_ratio": ratio,
                           "p0_pa": 7e6})
        assert err["rule"] != "internal" and not any(w in err["message"] for w in python_words), err
    assert ask(ws, {"type": "inspect", "x_m": 0.001, "y_m": 0.001}, "inspect")["type"] == "inspect"


def test_shockslate_warm_prints_each_stage(capsys):
    """Set-up (`make run` calls `shockslate warm`) says what compiles, stage by stage, on the console too."""
    from shockslate.server.cli import main
    from shockslate.solver.warm import STAGES

    assert main(["warm"]) == 0
    out = capsys.readouterr().out
    for k, (_name, label) in enumerate(STAGES):
        assert f"stage {k + 1} of {len(STAGES)}: {label}" in out
