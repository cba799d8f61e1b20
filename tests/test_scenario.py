"""Scenario files: refusal of bad documents with their JSON path, round trips, the schema file, built-ins.

The checks here are about the file format and its validation (no physics, no source needed), except the
built-in smoke runs, which only ask that every built-in runs a few coarse steps without divergence.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest

from shockslate.solver.kinds import CellKind
from shockslate.solver.scenario import (
    DEFAULT_SCENARIO,
    SCENARIO_DIR,
    Scenario,
    ScenarioError,
    build_simulation,
    builtin_names,
    builtin_path,
    initial_region,
    load_builtin,
    load_scenario,
    parse_scenario,
    scenario_to_dict,
    scenario_to_json,
    schema,
    schema_json,
    to_domain,
    to_setup,
    to_sketch,
    to_stations,
)


def good() -> dict:
    """A small valid planar document touching every part."""
    return {
        "name": "test box",
        "description": "a box",
        "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965},
        "mode": "planar",
        "domain": {"x_min_m": 0.0, "x_max_m": 1.0, "y_min_m": 0.0, "y_max_m": 0.5, "nx": 40},
        "edges": {"left": "wall", "right": "open", "bottom": "wall", "top": "wall"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [0.1, 0.5], "paints": "reservoir"},
            {"kind": "polygon", "points_m": [[0.4, 0.0], [0.6, 0.0], [0.5, 0.2]], "paints": "wall"},
            {"kind": "circle", "centre_m": [0.8, 0.3], "radius_m": 0.05, "paints": "wall"},
        ]},
        "conditions": {"reservoir": {"p0_pa": 300000.0, "t0_k": 300.0},
                       "stream": {"mach": 2.0, "angle_deg": 0.0, "p_pa": 101325.0, "t_k": 288.15},
                       "ambient": {"p_pa": 101325.0, "t_k": 288.15}},
        "initial": {"kind": "reservoir_upstream_of_x", "x_m": 0.3},
        "stations": [{"name": "s1", "start_m": [0.9, 0.0], "end_m": [0.9, 0.5], "role": None}],
        "probes": [{"name": "p1", "x_m": 0.5, "y_m": 0.4}],
        "numerics": {"order": 2, "limiter": "van_leer", "flux": "hllc", "cfl": 0.4, "integrator": "ssp_rk2"},
        "end_time_s": 0.001,
    }


def edited(path: str, value, delete: bool = False) -> dict:
    """good() with the value at a dotted path (list indices as [n]) replaced or deleted."""
    doc = good()
    parts = path.replace("[", ".").replace("]", "").split(".")
    node = doc
    for part in parts[:-1]:
        node = node[int(part)] if part.isdigit() else node[part]
    last = parts[-1]
    key = int(last) if last.isdigit() else last
    if delete:
        del node[key]
    else:
        node[key] = value
    return doc


# (document, JSON path of the field, the rule broken, a fragment of the plain sentence)
BAD = [
    (edited("conditions.reservoir.p0_pa", -5.0), "conditions.reservoir.p0_pa", "above",
     "Reservoir pressure p0 must be above 0 Pa; you gave -5 Pa."),
    (edited("conditions.reservoir.t0_k", 0.5), "conditions.reservoir.t0_k", "at_least", "at least 1 K; you gave 0.5 K"),
    (edited("conditions.ambient.p_pa", "101325"), "conditions.ambient.p_pa", "type",
     "Ambient pressure must be a number"),
    (edited("conditions.stream.mach", 45.0), "conditions.stream.mach", "at_most",
     "Stream Mach number must be at most 30"),
    (edited("domain.nx", 2), "domain.nx", "at_least", "at least 4"),
    (edited("domain.nx", 100.5), "domain.nx", "type", "a whole number"),
    (edited("domain.x_max_m", -1.0), "domain.x_max_m", "greater_than_field", "right edge"),
    (edited("gas.gamma", 2.5), "gas.gamma", "at_most", "at most 1.8"),
    (edited("gas.gamma", 1.3), "gas.gamma", "matches_preset", "preset air"),
    (edited("mode", "spherical"), "mode", "one_of", "planar, axisymmetric"),
    (edited("edges.left", "porous"), "edges.left", "one_of", "wall, open, ambient, stream, axis"),
    (edited("edges.bottom", "axis"), "edges.bottom", "axis_needs_axisymmetric", "axisymmetric"),
    (edited("numerics.limiter", "superbee"), "numerics.limiter", "one_of", "minmod, van_leer, mc"),
    (edited("numerics.cfl", 50.0), "numerics.cfl", "at_most", "CFL number must be at most"),
    (edited("numerics.order", 3), "numerics.order", "one_of", "1, 2"),
    (edited("sketch.shapes[0].paints", "lava"), "sketch.shapes[0].paints", "one_of", "wall, reservoir"),
    (edited("sketch.shapes[1].points_m", [[0.0, 0.0], [1.0, 1.0]]), "sketch.shapes[1].points_m", "length",
     "at least 3"),
    (edited("sketch.shapes[2].radius_m", 0.0), "sketch.shapes[2].radius_m", "above", "above 0 m"),
    (edited("sketch.shapes[2].kind", "star"), "sketch.shapes[2].kind", "one_of", "stroke, segment"),
    (edited("sketch.shapes[1].points_m[2][0]", float("nan")), "sketch.shapes[1].points_m[2][0]", "finite", "finite"),
    (edited("sketch.shapes[0].colour", "red"), "sketch.shapes[0].colour", "unknown_field", "no field colour"),
    (edited("stations[0].end_m", [5.0, 0.5]), "stations[0].end_m", "inside_domain", "inside the domain"),
    (edited("stations[0].role", "nozzle"), "stations[0].role", "one_of", "throat, exit"),
    (edited("probes[0].y_m", 9.0), "probes[0]", "inside_domain", "inside the domain"),
    (edited("initial.x_m", None, delete=True), "initial.x_m", "required", "missing"),
    (edited("end_time_s", 0.0), "end_time_s", "above", "End time must be above 0 s"),
    (edited("name", None, delete=True), "name", "required", "missing"),
    (edited("colour", "blue"), "colour", "unknown_field", "no field colour"),
]


def _value_at(doc, path):
    node = doc
    for part in path.replace("[", ".").replace("]", "").split("."):
        node = node[int(part)] if part.isdigit() else node.get(part) if isinstance(node, dict) else None
        if node is None:
            return None
    return node


@pytest.mark.parametrize("doc, path, rule, words", BAD, ids=[f"{n}:{b[1]}" for n, b in enumerate(BAD)])
def test_bad_documents_are_refused_with_path_value_rule_and_a_sentence(doc, path, rule, words):
    with pytest.raises(ScenarioError) as info:
        parse_scenario(doc)
    first = info.value.first
    assert (first.field, first.rule) == (path, rule), first
    assert words in first.message, first
    assert first.message[0].isupper() and first.message.endswith("."), first
    given = _value_at(doc, path)
    if rule == "required":
        assert first.value is None
    elif isinstance(given, float) and math.isnan(given):
        assert math.isnan(first.value)
    elif not isinstance(given, dict):  # a probe is refused as its [x, y] point
        assert first.value == given, (first.value, given)
    assert first.allowed


def test_bad_document_message_shows_the_value():
    with pytest.raises(ScenarioError) as info:
        parse_scenario(edited("conditions.reservoir.p0_pa", -5.0))
    assert info.value.first.value == -5.0
    assert "conditions.reservoir.p0_pa" in str(info.value) and "-5 Pa" in str(info.value)


def test_duplicate_roles_and_names_are_refused():
    doc = good()
    doc["stations"].append({"name": "s1", "start_m": [0.7, 0.0], "end_m": [0.7, 0.5], "role": None})
    with pytest.raises(ScenarioError) as info:
        parse_scenario(doc)
    first = info.value.first
    assert (first.field, first.value, first.rule) == ("stations[1].name", "s1", "unique")
    doc = good()
    doc["stations"] = [{"name": f"s{n}", "start_m": [0.7, 0.0], "end_m": [0.7, 0.5], "role": "exit"} for n in range(2)]
    with pytest.raises(ScenarioError) as info:
        parse_scenario(doc)
    assert (info.value.first.field, info.value.first.value) == ("stations[1].role", "exit")


def test_not_json_and_not_an_object_are_refused():
    with pytest.raises(ScenarioError, match="not valid JSON"):
        parse_scenario("{ nope")
    with pytest.raises(ScenarioError, match="JSON object"):
        parse_scenario("[1, 2]")


def test_round_trip_is_exact():
    doc = good()
    s = parse_scenario(doc)
    assert scenario_to_dict(s) == doc
    again = parse_scenario(scenario_to_json(s))
    assert again == s
    assert scenario_to_json(again) == scenario_to_json(s)


def test_defaults_are_written_out_so_a_file_says_everything():
    minimal = {k: good()[k] for k in ("name", "gas", "domain", "end_time_s")}
    s = parse_scenario(minimal)
    full = scenario_to_dict(s)
    assert full["numerics"]["flux"] == "hllc" and full["initial"]["kind"] == "ambient"
    assert parse_scenario(full) == s


def test_schema_file_matches_schema_function():
    on_disk = json.loads((SCENARIO_DIR / "schema.json").read_text(encoding="utf-8"))
    assert on_disk == json.loads(schema_json())
    assert on_disk == json.loads(json.dumps(schema()))
    assert on_disk["additionalProperties"] is False
    assert set(on_disk["required"]) >= {"name", "gas", "domain", "end_time_s"}


def test_to_setup_and_stations_and_sketch_carry_the_document():
    s = parse_scenario(good())
    setup = to_setup(s)
    assert setup.domain.shape == (20, 40)
    assert setup.conditions.reservoir.p0_pa == 300000.0
    assert setup.edges.right == "open" and setup.numerics.flux == "hllc"
    assert [st.name for st in to_stations(s)] == ["s1"]
    assert len(to_sketch(s).shapes) == 3
    assert to_domain(s, nx=80).shape == (40, 80)


def test_initial_reservoir_region_fills_fluid_cells_left_of_x():
    s = parse_scenario(good())
    sim = build_simulation(s)
    rho, u, v, p = sim.primitive()
    fluid = sim.mask == CellKind.FLUID
    left = initial_region(s, sim.domain)
    assert np.allclose(p[fluid & left], 300000.0)
    assert np.allclose(p[fluid & ~left], 101325.0)
    assert (fluid & left).any() and (fluid & ~left).any()


def test_initial_circle_and_stream():
    doc = good()
    doc["initial"] = {"kind": "reservoir_in_circle", "centre_m": [0.3, 0.25], "radius_m": 0.1}
    sim = build_simulation(parse_scenario(doc))
    p = sim.primitive()[3]
    j, i = sim.domain.cell_index(0.3, 0.25)
    assert p[j, i] == pytest.approx(300000.0)
    j, i = sim.domain.cell_index(0.3, 0.45)
    assert p[j, i] == pytest.approx(101325.0)
    doc["initial"] = {"kind": "stream"}
    sim = build_simulation(parse_scenario(doc))
    rho, u, v, p = sim.primitive()
    j, i = sim.domain.cell_index(0.7, 0.45)
    a = math.sqrt(1.4 * 8314.462618 / 28.965 * 288.15)
    assert u[j, i] == pytest.approx(2.0 * a)
    doc["initial"] = {"kind": "stream", "x_m": 0.2}
    with pytest.raises(ScenarioError) as info:
        parse_scenario(doc)
    assert (info.value.first.field, info.value.first.value, info.value.first.rule) == ("initial.x_m", 0.2, "not_used")


def test_load_scenario_names_the_file(tmp_path):
    path = tmp_path / "broken.json"
    path.write_text(json.dumps(edited("domain.nx", 1)), encoding="utf-8")
    with pytest.raises(ScenarioError, match=r"broken\.json: domain\.nx"):
        load_scenario(path)
    with pytest.raises(ScenarioError, match="cannot be read"):
        load_scenario(tmp_path / "missing.json")


# ----------------------------------------------------------------------------- built-ins

def test_there_are_at_least_eight_builtins_with_the_default_first():
    names = builtin_names()
    assert len(names) >= 8
    assert names[0] == DEFAULT_SCENARIO
    with pytest.raises(ScenarioError, match="built-ins are"):
        builtin_path("no such scenario")


def test_default_is_an_over_expanded_axisymmetric_nozzle():
    s = load_builtin(DEFAULT_SCENARIO)
    assert s.mode == "axisymmetric"
    assert {st.role for st in s.stations} >= {"throat", "exit"}
    assert s.conditions.ambient.p_pa == pytest.approx(101325.0)
    assert "over-expanded" in s.description.lower()


@pytest.mark.parametrize("name", builtin_names())
def test_builtin_validates_builds_and_runs_coarse(name):
    path = builtin_path(name)
    doc = json.loads(path.read_text(encoding="utf-8"))
    s = parse_scenario(doc)
    assert s.name == name == path.stem
    assert scenario_to_dict(s) == doc, "built-in files are kept in their canonical written-out form"
    assert "look for" in s.description.lower()
    sim = build_simulation(s, nx=80)
    assert (sim.mask == CellKind.FLUID).any()
    sim.advance(5)
    assert sim.steps == 5 and sim.time_s > 0.0
    rho, u, v, p = sim.primitive()
    fluid = sim.mask == CellKind.FLUID
    assert np.all(np.isfinite(p[fluid])) and np.all(p[fluid] > 0.0) and np.all(rho[fluid] > 0.0)


def test_nozzle_builtins_are_light_enough_to_run_live():
    for name in builtin_names():
        s = load_builtin(name)
        if s.mode == "axisymmetric":
            assert 300 <= s.domain.nx <= 400
        sim_cells = to_domain(s).shape[0] * to_domain(s).shape[1]
        assert sim_cells <= 200_000, name


# ----------------------------------------------------------------------------- vocabulary

def test_vocabulary_names_every_number_and_ties_the_tables():
    """Every number of a scenario has a title and unit for the page and for error sentences, and the
    solver's own lists agree with the vocabulary tables."""
    from shockslate.solver import simulation
    from shockslate.solver.kinds import EDGE_GHOST_KIND, EDGES, PAINTABLE, PAINTS
    from shockslate.solver.scenario import MODES, vocabulary

    voc = vocabulary()
    for path, lim in voc["limits"].items():
        assert lim["label"] and lim["label"] != path.split(".")[-1].replace("_", " "), path
        assert "min" in lim or "max" in lim, path
    assert voc["limits"]["conditions.ambient.p_pa"]["unit"] == "Pa"
    assert voc["limits"]["conditions.reservoir.t0_k"]["unit"] == "K"
    assert tuple(MODES) == simulation.MODES
    assert list(PAINTABLE) == list(PAINTS) and list(EDGE_GHOST_KIND) == list(EDGES)
    assert all(PAINTABLE[name] == choice.kernel_id for name, choice in PAINTS.items())


def test_a_near_miss_of_a_choice_gets_a_suggestion():
    with pytest.raises(ScenarioError) as info:
        parse_scenario(edited("numerics.limiter", "vanleer"))
    assert info.value.first.message.endswith("Did you mean 'van_leer'?")
    with pytest.raises(ScenarioError) as info:
        parse_scenario(edited("conditions.ambient.t_kk", 300.0))
    assert info.value.first.rule == "unknown_field" and "Did you mean 't_k'?" in info.value.first.message
