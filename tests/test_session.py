"""The session state machine and live scenario changes (server/session.py), without a server.

Grids are tiny (64 x 16) and step counts small: these check wiring and state, not physics.
"""
from __future__ import annotations

import numpy as np
import pytest

from shockslate.server import readings
from shockslate.server.errors import RequestError
from shockslate.server.session import (DIVERGED, PAUSED, RUNNING, TRANSITIONS, Session, SessionState, TransitionError,
                                       divergence_advice)
from shockslate.solver import relations
from shockslate.solver import scenario as scn
from shockslate.solver.kinds import CellKind
from shockslate.solver.numerics import CFL_MAX

from scenario_docs import duct_doc


@pytest.fixture
def saved() -> list:
    return []


@pytest.fixture
def session(saved) -> Session:
    return Session(scn.parse_scenario(duct_doc()), on_change=saved.append)


WALL_DISC = {"kind": "circle", "centre_m": [0.3, 0.05], "radius_m": 0.02, "paints": "wall"}


# ----------------------------------------------------------------------------- state machine

def test_starts_paused_and_run_pause_toggle(session):
    assert session.state is PAUSED
    session.run()
    assert session.state is RUNNING
    session.run()  # a second tab pressing run is harmless
    assert session.state is RUNNING
    session.pause()
    assert session.state is PAUSED


def test_step_while_running_is_refused_with_the_allowed_states(session):
    session.run()
    with pytest.raises(TransitionError) as info:
        session.step(1)
    err = info.value
    assert err.field == "state" and err.value == "running"
    assert "paused" in err.allowed and "pause first" in err.message
    assert session.state is RUNNING


def test_every_event_has_a_rule_from_every_state_or_none_on_purpose():
    events = {e for e, _ in TRANSITIONS}
    assert events == {"run", "pause", "step", "diverge", "reset_flow", "new_flow"}
    for event in ("run", "pause", "reset_flow", "new_flow"):
        assert all((event, s) in TRANSITIONS for s in SessionState)
    assert ("step", RUNNING) not in TRANSITIONS
    assert all(TRANSITIONS[("diverge", s)] is DIVERGED for s in SessionState)


def test_step_advances_time_and_count(session):
    out = session.step(3)
    assert out.steps == 3 and session.sim.steps == 3 and session.sim.time_s > 0.0
    assert session.state is PAUSED


def test_advance_does_nothing_unless_running(session):
    assert session.advance(0.01).steps == 0
    session.run()
    assert session.advance(0.0).steps >= 1  # at least one step per burst


def test_step_count_out_of_range(session):
    with pytest.raises(RequestError) as info:
        session.step(0)
    assert info.value.field == "count"


# ----------------------------------------------------------------------------- divergence

def test_divergence_pauses_keeps_sketch_and_last_good_state(session):
    # No setting the protocol accepts makes this small duct blow up within a test's few steps (the solver
    # floors density and pressure), so an absurd but finite velocity is written into one fluid cell
    # through the solver's own set_primitive: the next step overflows.
    sketch_before = scn.scenario_to_dict(session.scenario)["sketch"]
    rho, u, v, p = session.sim.primitive()
    u[8, 40] = 1e150
    session.sim.set_primitive(rho, u, v, p)
    kept = session.sim.U.copy()  # conserved state, ghosts included
    session.run()
    out = session.advance(1.0)
    assert out.divergence is not None
    assert session.state is DIVERGED
    d = out.divergence.to_message()
    assert d["type"] == "diverged" and d["step"] == 1 and d["variable"] in ("density", "x-momentum",
                                                                           "y-momentum", "total energy")
    assert any("CFL" in a for a in d["advice"]) and any("first order" in a for a in d["advice"])
    assert scn.scenario_to_dict(session.scenario)["sketch"] == sketch_before
    np.testing.assert_array_equal(session.sim.U, kept)  # the state before the failed step
    assert session.advance(0.1).steps == 0  # no longer running
    session.set_numerics(cfl=0.2, order=1)  # settings may change while diverged
    session.pause()
    assert session.state is PAUSED and session.divergence is None


def test_divergence_advice_follows_the_numerics(session):
    session.set_numerics(order=1, cfl=0.2, flux="rusanov")
    rho, u, v, p = session.sim.primitive()
    u[8, 40] = 1e150
    session.sim.set_primitive(rho, u, v, p)
    out = session.step(2)
    assert session.state is DIVERGED and out.steps == 0
    advice = " ".join(out.divergence.advice)
    assert "CFL" not in advice and "first order" not in advice and "pressure ratio" in advice


def test_divergence_advice_is_ordered_by_the_likely_cause_and_names_what_the_scenario_has(session):
    num, cond = session.scenario.numerics, session.scenario.conditions
    growing = divergence_advice(num, cond, "wave_speed_jump", frozenset({"stream", "ambient"}))
    assert "CFL" in growing[0]
    assert not any("p0 / p_amb" in a for a in growing) and any("stream Mach number" in a for a in growing)
    floors = divergence_advice(num, cond, "floors", frozenset({"reservoir", "ambient"}))
    assert floors[0].startswith("soften the conditions") and "p0 / p_amb" in floors[0]


def test_inspect_never_fails_on_a_bad_state(session):
    # a zero pressure in a gas cell (what a run gone bad can leave) must not break the reply
    j, i = session.sim.domain.cell_index(0.1, 0.05)
    session.sim.W[3, j + 2, i + 2] = 0.0
    session.sim.W[0, j + 2, i + 2] = -1.0
    r = session.inspect(0.1, 0.05)
    assert r["kind"] == "fluid" and r["p_pa"] == 0.0 and r["mach"] is None


# ----------------------------------------------------------------------------- sketch

def test_add_shape_paints_the_mask_and_keeps_the_flow(session, saved):
    session.step(2)
    t, steps = session.sim.time_s, session.sim.steps
    j, i = session.sim.domain.cell_index(0.3, 0.05)
    assert session.sim.mask[j, i] == CellKind.FLUID
    session.add_shape(WALL_DISC)
    assert session.sim.mask[j, i] == CellKind.WALL
    assert (session.sim.time_s, session.sim.steps) == (t, steps)
    assert session.revision == 1 and saved[-1] is session.scenario
    assert len(session.scenario.sketch.shapes) == 2


def test_bad_shape_names_the_field_and_changes_nothing(session):
    with pytest.raises(RequestError) as info:
        session.add_shape({**WALL_DISC, "radius_m": -1.0})
    assert info.value.field == "shape.radius_m" and info.value.value == -1.0
    assert info.value.allowed == "above 0 m" and info.value.rule == "above"
    assert info.value.message == "Circle radius must be above 0 m; you gave -1 m."
    with pytest.raises(RequestError) as info:
        session.add_shape({**WALL_DISC, "paints": "lava"})
    assert info.value.field == "shape.paints" and "wall" in info.value.allowed
    assert session.revision == 0 and len(session.scenario.sketch.shapes) == 1


def test_undo_redo_and_a_new_change_clears_redo(session):
    j, i = session.sim.domain.cell_index(0.3, 0.05)
    session.add_shape(WALL_DISC)
    session.undo()
    assert session.sim.mask[j, i] == CellKind.FLUID and len(session.scenario.sketch.shapes) == 1
    session.redo()
    assert session.sim.mask[j, i] == CellKind.WALL
    session.undo()
    session.set_mirror("midline")
    with pytest.raises(RequestError) as info:
        session.redo()
    assert info.value.field == "redo"
    session.undo()  # the mirror change
    assert session.scenario.sketch.mirror == "none" and len(session.scenario.sketch.shapes) == 1
    with pytest.raises(RequestError):
        session.undo()  # nothing before the first change of this session


def test_undo_with_nothing_to_undo(session):
    with pytest.raises(RequestError) as info:
        session.undo()
    assert info.value.field == "undo"


def test_remove_shape_and_clear(session):
    with pytest.raises(RequestError) as info:
        session.remove_shape(5)
    assert info.value.field == "index" and "0 to 0" in info.value.allowed
    session.add_shape(WALL_DISC)
    session.remove_shape(0)
    assert session.scenario.sketch.shapes[0].kind == "circle"
    session.clear_sketch()
    assert session.scenario.sketch.shapes == [] and not (session.sim.mask != CellKind.FLUID).any()
    with pytest.raises(RequestError):
        session.clear_sketch()
    session.undo()
    assert len(session.scenario.sketch.shapes) == 1


# ----------------------------------------------------------------------------- live settings

def test_conditions_change_the_held_cells_while_the_flow_goes_on(session):
    session.step(2)
    steps = session.sim.steps
    session.set_conditions(reservoir={"p0_pa": 500000.0})
    assert session.scenario.conditions.reservoir.p0_pa == 500000.0
    assert session.scenario.conditions.reservoir.t0_k == 300.0  # partial change keeps the rest
    _, _, _, p = session.sim.primitive()
    assert p[8, 1] == 500000.0 and session.sim.steps == steps


def test_bad_condition_names_the_message_field(session):
    with pytest.raises(RequestError) as info:
        session.set_conditions(reservoir={"p0_pa": -5.0})
    err = info.value
    assert err.field == "reservoir.p0_pa" and err.value == -5.0 and err.allowed == "above 0 Pa"
    assert err.message == "Reservoir pressure p0 must be above 0 Pa; you gave -5 Pa."
    assert session.scenario.conditions.reservoir.p0_pa == 300000.0


def test_gas_preset_and_custom(session):
    session.set_gas(preset="hot products")
    assert session.sim.setup.gas.gamma == 1.2 and session.scenario.gas.preset == "hot products"
    session.set_gas(gamma=1.3)
    assert session.scenario.gas.preset is None and session.scenario.gas.molar_mass_kg_kmol == 22.0
    with pytest.raises(RequestError) as info:
        session.set_gas(gamma=3.0)
    assert info.value.field == "gamma" and info.value.value == 3.0 and "1.8" in info.value.allowed


def test_numerics_change_and_refusal(session):
    session.set_numerics(flux="hll", cfl=0.3)
    assert session.sim.setup.numerics.flux == "hll" and session.sim.setup.numerics.cfl == 0.3
    with pytest.raises(RequestError) as info:
        session.set_numerics(cfl=CFL_MAX + 0.5)
    assert info.value.field == "cfl" and f"{CFL_MAX:g}" in info.value.allowed
    assert session.scenario.numerics.cfl == 0.3


def test_resolution_keeps_sketch_and_carries_flow(session):
    session.step(3)
    t = session.sim.time_s
    mean_p = float(session.sim.primitive()[3].mean())
    session.set_resolution(96)
    assert session.sim.domain.shape == (24, 96)
    assert session.sim.time_s == t
    assert session.scenario.domain.nx == 96 and len(session.scenario.sketch.shapes) == 1
    assert (session.sim.mask == CellKind.RESERVOIR).any()
    assert float(session.sim.primitive()[3].mean()) == pytest.approx(mean_p, rel=0.05)


def test_domain_edges_and_mode(session):
    session.set_domain(0.0, 0.5, 0.0, 0.125)
    assert session.sim.domain.shape == (16, 64) and session.scenario.domain.x_max_m == 0.5
    session.set_edges(top="ambient")
    assert session.sim.setup.edges.top == "ambient"
    with pytest.raises(RequestError) as info:
        session.set_edges(left="axis")
    assert info.value.field.startswith("edges.left") or info.value.field == "left"
    session.step(1)
    session.set_mode("axisymmetric")
    assert session.sim.setup.mode == "axisymmetric" and session.scenario.edges.bottom == "axis"
    assert session.sim.steps == 0  # a new geometry mode is a new flow
    session.set_mode("planar")
    assert session.scenario.edges.bottom == "wall"


def test_stations_and_probes(session):
    session.add_station("exit", [0.35, 0.0], [0.35, 0.1], "exit")
    assert [s.name for s in session.scenario.stations] == ["mid", "exit"]
    with pytest.raises(RequestError) as info:
        session.add_station("exit", [0.1, 0.0], [0.1, 0.1])
    assert info.value.field == "name" and "in use" in info.value.allowed
    with pytest.raises(RequestError) as info:
        session.add_station("far", [0.1, 0.0], [0.1, 5.0])
    assert info.value.field == "end_m" and info.value.value == [0.1, 5.0]
    session.remove_station("mid")
    with pytest.raises(RequestError) as info:
        session.remove_station("mid")
    assert info.value.field == "name" and "exit" in info.value.allowed
    session.add_probe("p2", 0.1, 0.02)
    with pytest.raises(RequestError) as info:
        session.add_probe("p3", 0.1, 0.9)
    assert info.value.field == "x_m" or info.value.field == "y_m"
    session.remove_probe("p1")
    assert [p.name for p in session.scenario.probes] == ["p2"]


def test_inspect_and_profiles(session):
    r = session.inspect(0.01, 0.05)
    assert r["kind"] == "reservoir" and r["p_pa"] == pytest.approx(300000.0)
    assert r["t_k"] == pytest.approx(300.0)
    with pytest.raises(RequestError) as info:
        session.inspect(0.5, 0.05)
    assert info.value.field == "x_m"
    prof = session.profile(station="mid")
    assert prof["station"] == "mid" and len(prof["p_pa"]) == len(prof["s_m"]) >= 16
    axis = session.profile(axis=True)
    assert axis["axis"] is True and len(axis["mach"]) >= 64
    with pytest.raises(RequestError):
        session.profile(station="nope")


def test_reset_flow_and_load(session):
    session.step(2)
    session.add_shape(WALL_DISC)
    session.reset_flow()
    assert session.sim.steps == 0 and len(session.scenario.sketch.shapes) == 2
    other = duct_doc(nx=48)
    other["name"] = "other"
    session.load(scn.parse_scenario(other))
    assert session.scenario.name == "other" and session.sim.domain.nx == 48
    with pytest.raises(RequestError):
        session.undo()  # history belongs to the scenario that was replaced


def test_snapshot_is_a_copy(session):
    snap = session.snapshot()
    session.step(2)
    assert snap.steps == 0 and snap.rho.shape == (16, 64)
    assert not np.shares_memory(snap.p, session.sim.W)


# ----------------------------------------------------------------------------- ideal nozzle figures

def nozzle_doc() -> dict:
    """Axisymmetric converging-diverging nozzle: throat radius 10 mm, exit radius 20 mm (Ae/A* = 4)."""
    doc = duct_doc(nx=128)
    doc.update(mode="axisymmetric", name="test nozzle")
    doc["domain"].update(x_max_m=0.16, y_max_m=0.04)
    doc["edges"].update(bottom="axis", top="ambient")
    doc["sketch"]["shapes"] = [
        {"kind": "polygon", "paints": "wall",
         "points_m": [[0.0, 0.03], [0.04, 0.03], [0.06, 0.01], [0.1, 0.02], [0.1, 0.04], [0.0, 0.04]]},
        {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [0.01, 0.03], "paints": "reservoir"},
    ]
    doc["stations"] = [{"name": "exit", "start_m": [0.099, 0.0], "end_m": [0.099, 0.0199], "role": "exit"},
                       {"name": "plume", "start_m": [0.14, 0.0], "end_m": [0.14, 0.04], "role": None}]
    doc["probes"] = []
    return doc


def test_geometric_throat_and_ideal_figures():
    s = Session(scn.parse_scenario(nozzle_doc()))
    noz = readings.nozzle_geometry(s.sim.mask, s.sim.domain, s.scenario)
    # The drawn throat: the polygon's vertex at x = 60 mm, radius 10 mm (exact geometry of the drawing).
    assert noz.throat_x_m == pytest.approx(0.06, abs=1e-12)
    assert noz.throat_area_m2 == pytest.approx(np.pi * 0.01 ** 2, rel=1e-12)
    status = readings.status_figures(s.sim, s.scenario, noz, 0)
    exit_fig, plume_fig = status["stations"]
    ideal = exit_fig["ideal"]
    assert plume_fig["ideal"] is None  # outside the nozzle: no 1D figure
    assert ideal["throat_area_m2"] == pytest.approx(noz.throat_area_m2, rel=1e-15)
    # The resolved (mask) throat is reported beside it, within a cell of the drawn radius.
    dx = s.sim.domain.dx_m
    assert abs((ideal["throat_area_resolved_m2"] / np.pi) ** 0.5 - 0.01) <= dx
    gas = scn.to_gas(s.scenario)
    # Choked mass flow and exit Mach from the solver's relations (NACA Report 1135 isentropic relations).
    assert ideal["choked_mass_flow_kg_s"] == pytest.approx(
        relations.choked_mass_flow_kg_s(300000.0, 300.0, noz.throat_area_m2, 1.4, gas.r_j_kg_k))
    assert ideal["ideal_exit_mach"] == pytest.approx(
        relations.mach_from_area_ratio(ideal["area_ratio"], 1.4, supersonic=True))
    # drawn radius on the exit line x = 99 mm: 10 mm + 39 mm * (10 / 40) (exact geometry of the drawing)
    assert ideal["area_ratio"] == pytest.approx((0.01 + 0.039 * 0.25) ** 2 / 0.01 ** 2, rel=1e-12)
    axis = s.profile(axis=True)
    ideal_mach = np.array([np.nan if m is None else m for m in axis["ideal_mach"]], float)
    x = np.array(axis["x_m"])
    assert np.nanmax(ideal_mach[x < 0.055]) < 1.0 < np.nanmin(ideal_mach[(x > 0.065) & (x < 0.1)])
    assert np.isnan(ideal_mach[x > 0.12]).all()


def test_step_stops_after_its_wall_time_budget_but_always_takes_one_step(session):
    advanced = session.step(50, max_wall_s=0.0)
    assert advanced.steps == 1 and session.sim.steps == 1
    advanced = session.step(5)
    assert advanced.steps == 5 and session.sim.steps == 6


# ----------------------------------------------------------------------------- issue 12: whole-scenario undo, edited marker

def test_undo_and_redo_cover_stations_probes_and_settings(session):
    session.add_station("S9", [0.3, 0.0], [0.3, 0.1])
    session.add_probe("P9", 0.35, 0.05)
    session.set_conditions(reservoir={"p0_pa": 5.0e5})
    session.set_numerics(cfl=0.3)
    session.set_resolution(48)
    assert session.undo_depth == 5
    session.undo()
    assert session.scenario.domain.nx == 64 and session.sim.domain.nx == 64  # the flow follows the scenario
    session.undo()
    assert session.scenario.numerics.cfl != 0.3 and session.sim.setup.numerics.cfl == session.scenario.numerics.cfl
    session.undo()
    assert session.scenario.conditions.reservoir.p0_pa == 3.0e5
    assert session.sim.setup.conditions.reservoir.p0_pa == 3.0e5
    session.undo()
    assert [p.name for p in session.scenario.probes] == ["p1"]
    session.undo()
    assert [s.name for s in session.scenario.stations] == ["mid"]
    assert session.redo_depth == 5
    session.redo()
    session.redo()
    assert [p.name for p in session.scenario.probes] == ["p1", "P9"]
    session.redo()
    assert session.sim.setup.conditions.reservoir.p0_pa == 5.0e5


def test_an_edited_scenario_says_so_and_its_description_holds_the_current_values(session, saved):
    assert not session.edited and session.scenario.name == "test duct"
    session.set_conditions(reservoir={"p0_pa": 3.0e6})
    session.set_gas(gamma=1.3)
    assert session.edited and session.scenario.name == "test duct edited"
    text = session.scenario.description
    assert "Edited from 'test duct'" in text and "p0 3000 kPa" in text and "gamma 1.3" in text
    assert saved[-1].name == "test duct edited" and saved[-1].description == text  # what is written to disk
    session.undo()
    session.undo()  # back to what was loaded: no longer edited
    assert not session.edited and session.scenario.name == "test duct"
    assert session.scenario.description == "tiny duct for server tests"


def test_kept_under_a_name_is_no_longer_edited(session):
    session.set_conditions(reservoir={"p0_pa": 4.0e5})
    session.kept_as("my duct")
    assert session.scenario.name == "my duct" and not session.edited
    session.set_numerics(cfl=0.3)
    assert session.scenario.name == "my duct edited"


def test_clear_all_empties_shapes_stations_probes_and_starting_gas_and_can_be_undone(session):
    session.set_initial("reservoir_upstream_of_x", x_m=0.2)
    session.step(2)
    session.clear_all()
    sc = session.scenario
    assert sc.sketch.shapes == [] and sc.stations == [] and sc.probes == [] and sc.initial.kind == "ambient"
    assert session.sim.steps == 0 and not (session.sim.mask != CellKind.FLUID).any()
    session.undo()
    assert len(session.scenario.sketch.shapes) == 1 and session.scenario.initial.kind == "reservoir_upstream_of_x"
    assert session.scenario.stations[0].name == "mid" and session.scenario.probes[0].name == "p1"


def test_set_initial_starts_the_flow_from_the_new_starting_gas(session):
    session.step(1)
    session.set_initial("reservoir_in_circle", centre_m=[0.3, 0.05], radius_m=0.02)
    assert session.sim.steps == 0
    p = session.inspect(0.3, 0.05)["p_pa"]
    assert p == pytest.approx(3.0e5)  # the reservoir's p0, held in the circle at the start
    assert session.inspect(0.38, 0.09)["p_pa"] == pytest.approx(1.0e5)  # ambient outside it
    with pytest.raises(RequestError) as info:
        session.set_initial("reservoir_in_circle", centre_m=[0.3, 0.05])
    assert info.value.field == "radius_m"
    assert session.scenario.initial.radius_m == 0.02  # refused: nothing changed


def test_setting_the_same_value_again_is_not_an_undo_step(session):
    session.set_conditions(reservoir={"p0_pa": 5.0e5})
    session.set_conditions(reservoir={"p0_pa": 5.0e5})  # a form sends its value again when it loses focus
    assert session.undo_depth == 1
    session.undo()
    assert session.scenario.conditions.reservoir.p0_pa == 3.0e5


def test_undo_of_a_new_mode_or_domain_brings_the_flow_back_to_match(session):
    session.set_domain(0.0, 0.5, 0.0, 0.1)
    assert session.sim.domain.x_max_m == 0.5
    session.set_mode("axisymmetric")
    assert session.scenario.edges.bottom == "axis"
    session.undo()
    assert session.scenario.mode == "planar" and session.sim.setup.mode == "planar"
    assert session.scenario.edges.bottom == "wall"
    session.undo()
    assert session.sim.domain.x_max_m == 0.4 and session.scenario.domain.x_max_m == 0.4
    assert not session.edited


# ----------------------------------------------------------------------------- changes made and saved apart

def test_a_rebuilt_grid_carries_the_flow_copied_at_the_plan_while_the_flow_steps_on(session):
    # the heavy part of a resolution change reads only a copy: the flow may step meanwhile (the server's solver
    # does), and the result is what a resolution change made at the moment of the plan gives
    import copy as _copy

    session.step(5)
    reference = _copy.deepcopy(session.sim)
    plan = session.plan_rebuild(nx=96)
    before = [q.copy() for q in session.sim.primitive()]
    session.build_rebuild(plan)
    for a, b in zip(before, session.sim.primitive()):
        np.testing.assert_array_equal(a, b)  # building the copy did not touch the running flow
    session.step(3)  # the flow steps on meanwhile; the rebuilt grid carries the state of the plan
    session.finish_rebuild(plan)
    assert session.sim.domain.nx == 96 and session.scenario.domain.nx == 96
    walls = session._walls.geometry
    reference.remesh(scn.to_domain(session.scenario), walls.mask, walls)
    for a, b in zip(reference.primitive(), session.sim.primitive()):
        np.testing.assert_array_equal(a, b)
    assert session.sim.steps == 5


def test_a_stale_rebuild_is_refused_and_a_failed_save_rolls_the_change_back(session, saved):
    plan = session.plan_rebuild(nx=80)
    session.build_rebuild(plan)
    session.reset_flow()  # another tab reset the flow meanwhile: the copy is no longer the flow
    with pytest.raises(RequestError) as err:
        session.finish_rebuild(plan)
    assert err.value.rule == "stale" and session.sim.domain.nx == 64
    # an unsaved change, then its save fails: scenario, revision, undo history and walls back as before
    mask, revision, depth = session.sim.mask.copy(), session.revision, session.undo_depth
    scenario, document = session.unsaved_change(
        session.add_shape, {"kind": "circle", "centre_m": [0.25, 0.05], "radius_m": 0.02, "paints": "wall"})
    assert document == scn.scenario_to_dict(scenario) and len(scenario.sketch.shapes) == 2
    assert saved == []  # the caller saves it, off the solver's thread
    assert not np.array_equal(session.sim.mask, mask)
    session.roll_back()
    np.testing.assert_array_equal(session.sim.mask, mask)
    assert (session.revision, session.undo_depth, len(session.scenario.sketch.shapes)) == (revision, depth, 1)


def test_a_shape_refused_for_itself_is_refused_before_the_flow_is_touched_with_the_same_words(session):
    # the segment from (-1e6, -1e6) m: check_shape reads only the scenario and refuses it as add_shape does
    far = {"kind": "segment", "start_m": [-1e6, -1e6], "end_m": [0.2, 0.05], "width_m": 0.002, "paints": "wall"}
    with pytest.raises(RequestError) as early:
        session.check_shape(far)
    with pytest.raises(RequestError) as late:
        session.add_shape(far)
    assert early.value.field == late.value.field == "shape.start_m"
    assert early.value.message == late.value.message and "10 domain sizes" in early.value.message
    with pytest.raises(RequestError) as bad:
        session.check_shape({"kind": "circle", "centre_m": [0.1, 0.05], "radius_m": -1.0, "paints": "wall"})
    assert bad.value.field == "shape.radius_m"
    session.check_shape(WALL_DISC)  # a fine shape passes, and nothing changed
    assert len(session.scenario.sketch.shapes) == 1 and session.revision == 0


def _same_geometry(a, b) -> None:
    for name in ("mask", "gas", "gas_r", "open_x", "open_x_r", "open_y", "drawn"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)


def test_a_flow_built_at_load_keeps_its_walls_so_the_first_change_matches_a_whole_sampling(session):
    # the walls of a new flow are kept with their samples when the flow is built (at start, load, new mode,
    # reset), so the first change after it samples only where it changes; the result must equal sampling the
    # whole sketch afresh (exact: the same sampling, cell by cell)
    from shockslate.solver.geometry import wall_geometry

    def check() -> None:
        _same_geometry(session.sim.geometry, wall_geometry(scn.to_sketch(session.scenario), session.sim.domain))

    check()
    session.add_shape(WALL_DISC)
    check()
    other = duct_doc()
    other["sketch"]["shapes"].append({"kind": "rectangle", "corner_a_m": [0.5, 0.0], "corner_b_m": [0.6, 0.03],
                                      "paints": "wall"})
    session.load(scn.parse_scenario(other))
    check()
    session.add_shape({**WALL_DISC, "centre_m": [0.2, 0.06]})
    check()
    session.reset_flow()
    check()
    session.remove_shape(0)
    check()
    session.set_mirror("axis" if session.scenario.sketch.mirror == "none" else "none")
    check()


def test_a_flow_too_slow_for_ten_frames_a_second_is_held_while_it_is_rebuilt_and_always_let_go(session, monkeypatch):
    # a running flow whose steps take longer than HOLD_STEP_S is not stepped between plan_rebuild and the swap
    # (its steps would be dropped there); a fast one steps on; a finished, refused or given-up rebuild lets go
    from shockslate.server import session as session_module

    session.run()
    assert session.advance(0.01).steps > 0
    fast = session.plan_rebuild(nx=48)
    assert session.advance(0.01).steps > 0  # fast steps: not held
    session.release_rebuild(fast)
    monkeypatch.setattr(session_module, "HOLD_STEP_S", 0.0)  # every step counts as slow now
    plan = session.plan_rebuild(nx=48)
    steps = session.sim.steps
    assert session.advance(0.01).steps == 0 and session.sim.steps == steps
    session.build_rebuild(plan)
    session.finish_rebuild(plan)
    assert session.sim.domain.nx == 48 and session.advance(0.01).steps > 0
    given_up = session.plan_rebuild(nx=64)
    assert session.advance(0.01).steps == 0
    session.release_rebuild(given_up)
    session.release_rebuild(given_up)  # more than once is harmless
    assert session.advance(0.01).steps > 0
    stale = session.plan_rebuild(nx=64)
    session.build_rebuild(stale)
    session.reset_flow()  # another tab reset the flow meanwhile: the rebuild is refused, the hold let go
    with pytest.raises(RequestError):
        session.finish_rebuild(stale)
    assert session.advance(0.01).steps > 0


def test_the_live_drawn_nozzle_after_changes_reads_as_the_same_document_parsed_afresh():
    # the session hands its converted shapes to the drawn-nozzle reader (solver/nozzle.py keeps them by model);
    # after changes, the live reading must equal that of the same document parsed from scratch (exact)
    from shockslate.solver import nozzle

    s = Session(scn.parse_scenario(nozzle_doc()))
    s.add_shape({"kind": "rectangle", "corner_a_m": [0.09, 0.016], "corner_b_m": [0.1, 0.05], "paints": "wall"})
    s.add_shape({"kind": "circle", "centre_m": [0.03, 0.045], "radius_m": 0.004, "paints": "wall"})
    s.remove_shape(len(s.scenario.sketch.shapes) - 1)
    live = readings.nozzle_geometry(s.sim.mask, s.sim.domain, s.scenario)
    fresh = nozzle.drawn_nozzle(scn.parse_scenario(scn.scenario_to_dict(s.scenario)))
    assert live == fresh
    # the new wall narrows the drawn exit line x = 99 mm to radius 16 mm (exact geometry of the drawing)
    assert live.exit_area_m2 == pytest.approx(np.pi * 0.016 ** 2, rel=1e-12)


def test_the_live_status_reads_a_big_drawn_nozzle_apart_and_finds_the_same_figures(monkeypatch):
    # wait=False (the runner's status): a sketch over READ_APART_VERTICES is read in a thread of its own; until it
    # is read the status has no nozzle and says so; then it gives exactly what reading it at once gives
    import time

    from shockslate.solver import nozzle

    monkeypatch.setattr(readings, "READ_APART_VERTICES", 0)  # every sketch counts as big here
    monkeypatch.setattr(readings, "READ_APART_WAIT_S", 0.0)
    s = Session(scn.parse_scenario(nozzle_doc()))
    s.add_shape({"kind": "circle", "centre_m": [0.03, 0.045], "radius_m": 0.004, "paints": "wall"})
    first = readings.nozzle_geometry(s.sim.mask, s.sim.domain, s.scenario, wait=False)
    if first is None:  # not read yet: the status says it is being read (or it has just finished)
        status = readings.status_figures(s.sim, s.scenario, None, 0)
        assert status["drawn_nozzle_reading"] == any("being read" in w for w in status["warnings"])
    deadline = time.monotonic() + 120.0
    while not nozzle.drawn_nozzle_known(s.scenario):
        assert time.monotonic() < deadline, "the drawn nozzle was never read"
        time.sleep(0.01)
    later = readings.nozzle_geometry(s.sim.mask, s.sim.domain, s.scenario, wait=False)
    fresh = nozzle.drawn_nozzle(scn.parse_scenario(scn.scenario_to_dict(s.scenario)))
    assert later == fresh and (first is None or first == fresh)
    assert readings.status_figures(s.sim, s.scenario, later, 0)["drawn_nozzle_reading"] is False
