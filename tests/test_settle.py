"""Settle mode (solver/settle.py, solver/settle_kernels.py): the same steady state as time-accurate stepping,
by local time steps and grid sequencing; `shockslate run --until steady --settle`; the live `settle` intent.

Sources:
  [N]  NACA Report 1135 (1953), isentropic area-Mach relation and choked mass-flow parameter (via
       solver.relations, itself checked against the report's tables in tests/test_relations.py).
  [J]  Jameson, Schmidt and Turkel 1981 (AIAA 81-1259): local time stepping changes the way to the steady
       state, not the steady state of a conservative scheme (from memory).
  [B]  J. Blazek, Computational Fluid Dynamics: Principles and Applications, ch. 9: local time stepping and
       grid sequencing as convergence accelerators; the density residual as the convergence measure (from
       memory).
Tolerances on the agreement between settle mode and time-accurate stepping (0.5 %) are the issue's goal.
"""
from __future__ import annotations

import json
import math

import numba
import numpy as np
import pytest

from shockslate.server import protocol
from shockslate.server.cli import batch as batch_cli
from shockslate.server.cli import main as cli_main
from shockslate.server.errors import RequestError
from shockslate.server.session import Session
from shockslate.solver import batch, relations, settle
from shockslate.solver.diagnostics import read_station
from shockslate.solver.domain import Domain
from shockslate.solver.gas import AIR
from shockslate.solver.geometry import wall_geometry
from shockslate.solver.scenario import build_simulation, parse_scenario, station_by_role, to_stations
from shockslate.solver.shapes import Polygon, Sketch
from shockslate.solver.simulation import Edges, Setup, Simulation

P0, T0 = 1.0e6, 300.0


@pytest.fixture(scope="module", autouse=True)
def one_numba_thread():
    """The test machine is shared: one kernel thread per run avoids oversubscribing its two cores."""
    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


# ----------------------------------------------------------------------------- shapes of our own

def duct_half_height_m(x: float) -> float:
    """A planar converging-diverging duct (our own design): 40 mm inlet half-height, cosine contraction to a
    20 mm throat at x = 80 mm, cosine expansion to 30 mm at the end (zero slope there: near-1D exit flow)."""
    if x <= 0.02:
        return 0.04
    if x <= 0.08:
        return 0.03 + 0.01 * math.cos(math.pi * (x - 0.02) / 0.06)
    return 0.025 - 0.005 * math.cos(math.pi * (x - 0.08) / 0.12)


def duct_doc(nx: int = 80) -> dict:
    """The duct above the bottom wall (a symmetry line), fed from a reservoir, supersonic out of the open end."""
    pts = [[float(x), duct_half_height_m(float(x))] for x in np.linspace(0.0, 0.2, 101)] + [[0.2, 0.06], [0.0, 0.06]]
    return {
        "name": "settle duct", "description": "converging-diverging test duct",
        "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965}, "mode": "planar",
        "domain": {"x_min_m": 0.0, "x_max_m": 0.2, "y_min_m": 0.0, "y_max_m": 0.05, "nx": nx},
        "edges": {"left": "wall", "right": "open", "bottom": "wall", "top": "wall"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "polygon", "points_m": pts, "paints": "wall"},
            {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [0.006, 0.04], "paints": "reservoir"}]},
        "conditions": {"reservoir": {"p0_pa": P0, "t0_k": T0}, "ambient": {"p_pa": 1.0e5, "t_k": T0}},
        "initial": {"kind": "reservoir_upstream_of_x", "x_m": 0.05},
        "stations": [{"name": "throat", "start_m": [0.08, 0.0], "end_m": [0.08, 0.05], "role": "throat"},
                     {"name": "exit", "start_m": [0.19, 0.0], "end_m": [0.19, 0.05], "role": "exit"}],
        "end_time_s": 0.02,
    }


def nozzle_radius_m(x: float) -> float:
    """A small axisymmetric nozzle (our own design): 10 mm chamber radius, cosine contraction to a 6 mm throat
    at x = 30 mm, a 12 degree cone to the exit at x = 55 mm."""
    if x <= 0.01:
        return 0.010
    if x <= 0.03:
        return 0.008 + 0.002 * math.cos(math.pi * (x - 0.01) / 0.02)
    return 0.006 + (x - 0.03) * math.tan(math.radians(12.0))


def nozzle_doc(nx: int = 96) -> dict:
    """The nozzle, its outside wall up to the top edge, blowing into still air (ambient top edge and open end
    beyond the exit): a free jet."""
    x_exit = 0.055
    pts = ([[float(x), nozzle_radius_m(float(x))] for x in np.linspace(0.0, x_exit, 56)]
           + [[x_exit, 0.035], [0.0, 0.035]])
    return {
        "name": "settle nozzle", "description": "small conical test nozzle",
        "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965}, "mode": "axisymmetric",
        "domain": {"x_min_m": 0.0, "x_max_m": 0.12, "y_min_m": 0.0, "y_max_m": 0.03, "nx": nx},
        "edges": {"left": "wall", "right": "open", "bottom": "axis", "top": "ambient"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "polygon", "points_m": pts, "paints": "wall"},
            {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [0.003, 0.010], "paints": "reservoir"}]},
        "conditions": {"reservoir": {"p0_pa": 5.0e5, "t0_k": T0}, "ambient": {"p_pa": 1.0e5, "t_k": T0}},
        "initial": {"kind": "reservoir_upstream_of_x", "x_m": 0.02},
        "stations": [{"name": "throat", "start_m": [0.03, 0.0], "end_m": [0.03, 0.012], "role": "throat"},
                     {"name": "exit", "start_m": [0.054, 0.0], "end_m": [0.054, 0.015], "role": "exit"}],
        "end_time_s": 0.01,
    }


def settle_to_steady(doc: dict, settled: bool, tolerance: float = 1.0e-3, x_max_m: float = math.inf,
                     max_steps: int = 60_000, levels: int = 2):
    """Run a scenario to the criterion settle.SettleCheck, by settle mode or by time-accurate steps."""
    s = parse_scenario(doc)
    sim = build_simulation(s)
    if settled:
        done = settle.settle_coarse(lambda n: build_simulation(s, n), sim, levels=levels, x_max_m=x_max_m)
        assert [lv.nx for lv in done] == settle.coarse_nx(sim.domain.nx, levels)[:-1]
    stepper = settle.LocalStepper(sim) if settled else None
    check = settle.SettleCheck(sim, to_stations(s), x_max_m=x_max_m, tolerance=tolerance)
    for _ in range(max_steps):
        if stepper is not None:
            stepper.step()
            if check.after_step(stepper.dt):
                break
        elif check.after_step(sim.step()):
            break
    else:
        raise AssertionError(f"no steady state in {max_steps} steps: residual {check.region.figure:.3g}")
    return s, sim, [read_station(sim, st) for st in to_stations(s)]


# ----------------------------------------------------------------------------- the steady state is the same

@pytest.fixture(scope="module")
def duct_runs():
    return settle_to_steady(duct_doc(), settled=False), settle_to_steady(duct_doc(), settled=True)


def test_settled_duct_is_the_time_accurate_steady_state(duct_runs):
    (_, accurate, acc), (_, settled, sett) = duct_runs
    for a, b in zip(acc, sett):  # [J]: the same steady state; the 0.5 %
        assert b.mass_flow_kg_s == pytest.approx(a.mass_flow_kg_s, rel=0.005)
        assert b.thrust_n == pytest.approx(a.thrust_n, rel=0.005)
    assert settled.domain.nx == accurate.domain.nx  # the end state is on the scenario's own grid


def test_three_grid_levels_end_at_the_time_accurate_steady_state():
    # the default of run --until steady --settle and the benchmark: coarse grids of 40 and 80 before 160 [B]
    assert settle.DEFAULT_LEVELS == 3 and settle.coarse_nx(160, settle.DEFAULT_LEVELS) == [40, 80, 160]
    _, _, acc = settle_to_steady(duct_doc(160), settled=False)
    _, sim, sett = settle_to_steady(duct_doc(160), settled=True, levels=settle.DEFAULT_LEVELS)
    for a, b in zip(acc, sett):  # [J]: the same steady state; the 0.5 %
        assert b.mass_flow_kg_s == pytest.approx(a.mass_flow_kg_s, rel=0.005)
        assert b.thrust_n == pytest.approx(a.thrust_n, rel=0.005)
    assert sim.domain.nx == 160 and sim.floors_total == 0


def test_settled_duct_follows_the_area_mach_relation(duct_runs):
    _, (s, sim, (throat, exit_)) = duct_runs
    area_ratio = duct_half_height_m(0.19) / duct_half_height_m(0.08)
    mach_1d = float(relations.mach_from_area_ratio(area_ratio, 1.4, supersonic=True))  # [N]
    assert exit_.mean_mach == pytest.approx(mach_1d, rel=0.01)
    assert throat.mean_mach == pytest.approx(1.0, abs=0.03)  # [N]: sonic at the throat
    # [N]: choked mass flow per metre of depth through the 20 mm half-throat; a 2D throat passes a little less
    choked = relations.choked_mass_flow_kg_s(P0, T0, duct_half_height_m(0.08), 1.4, AIR.r_j_kg_k)
    assert 0.98 * choked < exit_.mass_flow_kg_s <= choked


def test_settled_nozzle_with_a_free_jet_is_the_time_accurate_steady_state():
    # cut cells along a cone, an axis, a free jet beyond the exit: judged inside the nozzle (x up to the exit)
    doc = nozzle_doc()
    x_exit = doc["stations"][1]["start_m"][0]
    _, _, acc = settle_to_steady(doc, settled=False, tolerance=2e-3, x_max_m=x_exit)
    _, sim, sett = settle_to_steady(doc, settled=True, tolerance=2e-3, x_max_m=x_exit)
    for a, b in zip(acc, sett):  # [J]; the 0.5 %
        assert b.mass_flow_kg_s == pytest.approx(a.mass_flow_kg_s, rel=0.005)
        assert b.thrust_n == pytest.approx(a.thrust_n, rel=0.005)
    assert sim.floors_total == 0
    # [N]: both are the choked flow of the 6 mm throat (a 2D throat passes a little less)
    choked = relations.choked_mass_flow_kg_s(5.0e5, T0, math.pi * 0.006 ** 2, 1.4, AIR.r_j_kg_k)
    assert 0.98 * choked < sett[0].mass_flow_kg_s <= choked
    assert sett[1].mean_mach > 2.0  # supersonic at the exit


def test_gas_at_rest_beside_an_inclined_wall_stays_at_rest():
    # local steps, cut cells and all: a uniform state at rest has zero flux balance in every cell (common
    # practice, no source: the well-balanced check of a finite-volume update)
    dom = Domain(0.0, 0.2, 0.0, 0.1, 40)
    geo = wall_geometry(Sketch((Polygon(((0.05, 0.0), (0.15, 0.06), (0.15, 0.0)), "wall"),)), dom)
    sim = Simulation(Setup(dom, edges=Edges("wall", "wall", "wall", "wall"), mode="planar"), geo.mask, geo)
    stepper = settle.LocalStepper(sim)
    for _ in range(20):
        stepper.step()
    rho, u, v, p = sim.primitive()
    gas = sim.mask == 0
    assert np.abs(u[gas]).max() < 1e-9 and np.abs(v[gas]).max() < 1e-9
    assert np.ptp(p[gas]) < 1e-9 * p[gas].max()


def test_local_steps_follow_the_local_wave_speed():
    # hot gas on the left, cold on the right: a cell's step is cfl * dx / (|u| + |v| + 2a) of itself and its
    # neighbours [J]
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.25, 16), edges=Edges("wall", "wall", "wall", "wall")))
    x = sim.domain.x_centres_m()[None, :]
    p = 1.0e5
    rho = np.where(x < 0.5, p / (AIR.r_j_kg_k * 1200.0), p / (AIR.r_j_kg_k * 300.0))
    sim.set_primitive(rho, 0.0, 0.0, p)
    stepper = settle.LocalStepper(sim, 0.5)
    stepper.step()
    dx = sim.domain.dx_m
    a_hot, a_cold = AIR.sound_speed_m_s(1200.0), AIR.sound_speed_m_s(300.0)
    assert stepper.dt[4, 2 + 1] == pytest.approx(0.5 * dx / (2.0 * a_hot), rel=1e-12)
    assert stepper.dt[4, 2 + 14] == pytest.approx(0.5 * dx / (2.0 * a_cold), rel=1e-12)
    assert stepper.dt[4, 2 + 8] == pytest.approx(0.5 * dx / (2.0 * a_hot), rel=1e-12)  # beside a hot cell


def test_settle_steps_relax_the_reservoir_feed_over_the_chambers_local_step(monkeypatch):
    # The feed relaxes towards its held state (Poinsot and Lele 1992, tests/test_reservoir_feed.py) in settle mode
    # too, over the local step of the gas beside it; with the feed set at once, nozzle_sea_level at 320 cells took
    # 5159 fine-grid settle steps (shockslate bench --settle-only), with the relaxed feed 3379.
    s = parse_scenario(duct_doc())
    sim = build_simulation(s)
    seen = []
    real = settle.kernels.feed_reservoir_edge

    def spy(*args):
        seen.append(args[-1])  # the relax fraction this stage
        return real(*args)

    monkeypatch.setattr(settle.kernels, "feed_reservoir_edge", spy)
    stepper = settle.LocalStepper(sim)
    stepper.step()
    j, i = sim._feed_j, sim._feed_i
    beside = max(float(stepper.dt[j + dj, i + di].max()) for dj, di in ((1, 0), (-1, 0), (0, 1), (0, -1)))
    assert beside > 0.0
    stages = len(sim.setup.numerics.tableau.stages)
    assert seen == [pytest.approx(sim.feed_relax(beside, stages), rel=1e-12)] * stages
    assert 0.0 < seen[0] < 0.5  # a fraction of the way, not the held state at once


def test_hand_over_sets_the_feed_to_the_flow_beside_it():
    # A fresh fine grid holds its feed at rest; after the hand-over the feed cells carry the reservoir's stagnation
    # state expanded to the velocity of the gas beside them, as in the steady state (on nozzle_sea_level the feed
    # at rest cost about 2300 of 3379 fine-grid settle steps: the chamber lost 4 % pressure while it relaxed).
    s = parse_scenario(duct_doc())
    coarse = build_simulation(s, 40)
    stepper = settle.LocalStepper(coarse)
    for _ in range(300):
        stepper.step()
    fine = build_simulation(s)
    settle.prolong(coarse, fine)
    j, i = fine._feed_j, fine._feed_i
    rho, u, v, p = (fine.W[c][j, i] for c in range(4))
    beside = []
    for n in range(j.size):
        near = [(j[n] + dj, i[n] + di) for dj, di in ((1, 0), (-1, 0), (0, 1), (0, -1))
                if fine.kind[j[n] + dj, i[n] + di] == 0]
        beside.append(np.mean([fine.W[1][q] for q in near]))
    assert np.all(np.array(beside) > 10.0)  # the gas beside the feed moves ...
    assert u == pytest.approx(np.array(beside), rel=1e-12)  # ... and so does the feed, at its speed
    gamma = 1.4
    mach_sq = (u * u + v * v) / (gamma * p / rho)
    # [N]: isentropic total pressure and total temperature of the feed are the reservoir's
    assert p * (1.0 + 0.5 * (gamma - 1.0) * mach_sq) ** (gamma / (gamma - 1.0)) == pytest.approx(P0, rel=1e-9)
    t_total = p / (rho * AIR.r_j_kg_k) * (1.0 + 0.5 * (gamma - 1.0) * mach_sq)
    assert t_total == pytest.approx(T0, rel=1e-9)


def test_coarse_grids_step_on_one_thread_and_give_the_count_back(monkeypatch):
    # small grids step on one kernel thread (settle.SERIAL_CELLS; common practice, no source), and the caller's
    # thread count is back between coarse steps, for whatever it runs in between
    if numba.config.NUMBA_NUM_THREADS < 2:
        pytest.skip("needs two kernel threads")
    s = parse_scenario(duct_doc())
    fine = build_simulation(s)
    seen = []
    real = settle.LocalStepper.step

    def spy(self):
        seen.append(numba.get_num_threads())
        return real(self)

    monkeypatch.setattr(settle.LocalStepper, "step", spy)
    numba.set_num_threads(2)
    try:
        steps = settle.settle_coarse_steps(lambda n: build_simulation(s, n), fine, levels=2)
        for _ in range(5):
            next(steps)
            assert numba.get_num_threads() == 2
        assert seen == [1] * 5 and build_simulation(s, 40).cells < settle.SERIAL_CELLS
    finally:
        numba.set_num_threads(1)


def test_coarse_levels_and_bad_input():
    assert settle.coarse_nx(320, 2) == [160, 320]
    assert settle.coarse_nx(320, 3) == [80, 160, 320]
    assert settle.coarse_nx(60, 3) == [60]  # never below MIN_COARSE_NX cells across
    with pytest.raises(ValueError) as info:
        settle.coarse_nx(320, 9)
    assert "levels = 9" in str(info.value)
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.25, 16)))
    with pytest.raises(ValueError) as info:
        settle.LocalStepper(sim, 1.5)
    assert "cfl = 1.5" in str(info.value) and "0 to 1" in str(info.value)


# ----------------------------------------------------------------------------- shockslate run --until steady --settle

def test_run_until_steady_in_settle_mode(tmp_path, duct_runs):
    (_, _, acc), _ = duct_runs
    summary = batch.run_scenario(parse_scenario(duct_doc()), tmp_path, until_steady=True, tolerance=1e-3,
                                 settle_mode=True, progress=None, write_fields=False, write_pictures=False)
    assert summary["status"] == "steady" and summary["steady"]["settled"]
    info = summary["settle"]
    assert "end state" in info["notice"] and "not a time history" in info["notice"]
    assert [lv["nx"] for lv in info["coarse_levels"]] == [40]
    for name, a in zip(("throat", "exit"), acc):  # the 0.5 % against time-accurate stepping
        assert summary["stations"][name]["mass_flow_kg_s"] == pytest.approx(a.mass_flow_kg_s, rel=0.005)
        assert summary["stations"][name]["thrust_n"] == pytest.approx(a.thrust_n, rel=0.005)
    plain = batch.run_scenario(parse_scenario(duct_doc(48)), tmp_path / "plain", until_s=1e-4, progress=None,
                               write_fields=False, write_pictures=False)
    assert plain["settle"] is None
    with pytest.raises(ValueError) as err:
        batch.run_scenario(parse_scenario(duct_doc(48)), tmp_path / "x", settle_mode=True, progress=None)
    assert "settle_mode" in str(err.value) and "until_steady" in str(err.value)


def test_cli_settle_goes_with_until_steady(tmp_path, capsys):
    doc = tmp_path / "duct.json"
    doc.write_text(json.dumps(duct_doc(48)))
    assert cli_main(["run", str(doc), "--settle", "--out", str(tmp_path / "x")]) == batch_cli.EXIT_BAD_INPUT
    assert "--settle goes with --until steady" in capsys.readouterr().err
    out = tmp_path / "run"
    code = cli_main(["run", str(doc), "--until", "steady", "--settle", "--tolerance", "0.01", "--out", str(out)])
    summary = json.loads((out / "summary.json").read_text())
    assert code == batch_cli.EXIT_OK and summary["status"] == "steady" and summary["settle"] is not None
    assert "settle mode" in capsys.readouterr().err


# ----------------------------------------------------------------------------- the live settle intent

def test_session_settle_mode_steps_with_local_steps_and_back():
    session = Session(parse_scenario(duct_doc(48)))
    session.step(5)
    assert not session.settle
    session.set_settle(True)
    session.step(5)
    assert session.settle and session._stepper is not None and session._stepper.sim is session.sim
    assert session.sim.steps == 10
    assert session._stepper.cfl == pytest.approx(2.0 * 0.4)  # twice the scenario's Courant number
    session.set_numerics(cfl=0.3)
    assert session._stepper.cfl == pytest.approx(0.6)  # follows a live change
    session.reset_flow()  # a new flow: the next settle step follows it
    session.step(1)
    assert session._stepper.sim is session.sim
    session.set_settle(False)
    t = session.sim.time_s
    session.step(1)
    assert session.sim.time_s == pytest.approx(t + session.sim.last_dt_s)
    with pytest.raises(RequestError) as info:
        session.set_settle("yes")  # type: ignore[arg-type]
    assert info.value.field == "on"


def test_settle_message_is_validated():
    assert protocol.parse_message({"type": "settle", "on": True}).on is True
    with pytest.raises(RequestError) as info:
        protocol.parse_message({"type": "settle", "on": "yes"})
    assert info.value.field == "on"
    with pytest.raises(RequestError):
        protocol.parse_message({"type": "settle"})


def test_settle_intent_through_a_real_websocket(tmp_path):
    # the server in-process (Starlette's TestClient, as tests/test_protocol.py), paused on the test duct
    from starlette.testclient import TestClient

    from shockslate.server.app import ServerConfig, create_app

    config = ServerConfig(data_dir=tmp_path / "data", scenario=parse_scenario(duct_doc(48)), start_running=False,
                          warm=False)

    def reply(sock, rid):
        for _ in range(80):
            msg = sock.receive()
            if msg.get("text") is not None:
                data = json.loads(msg["text"])
                if data.get("id") == rid:
                    return data
        raise AssertionError(f"no reply to {rid}")

    with TestClient(create_app(config), base_url="http://127.0.0.1:8765") as client:
        with client.websocket_connect("ws://127.0.0.1:8765/ws") as ws:
            assert ws.receive_json()["type"] == "hello"
            ws.send_json({"type": "settle", "on": True, "id": "a"})
            status = reply(ws, "a")
            assert status["type"] == "status" and status["settle"] is True
            ws.send_json({"type": "step", "count": 3, "id": "b"})
            status = reply(ws, "b")
            assert status["steps"] == 3 and status["settle"] is True
            ws.send_json({"type": "settle", "on": "yes", "id": "c"})
            err = reply(ws, "c")
            assert err["type"] == "error" and err["field"] == "on"
            ws.send_json({"type": "settle", "on": False, "id": "d"})
            assert reply(ws, "d")["settle"] is False


# ----------------------------------------------------------------------------- the page's settle control

from test_page import browser, page, server_url  # noqa: E402,F401  (the page tests' real server and Chromium)


def test_page_settle_control_says_the_view_is_no_time_history(page):
    notice = page.locator("#settle-notice")
    assert notice.is_hidden()
    page.click("#settle-mode")
    page.wait_for_function("window.shockslate.status && window.shockslate.status.settle === true", timeout=60_000)
    notice.wait_for(state="visible", timeout=60_000)
    text = notice.inner_text()
    assert "end state" in text and "not the true time history" in text and "pseudo time" in text
    page.click("#settle-mode")  # off again: time-accurate steps, the notice goes
    page.wait_for_function("window.shockslate.status && window.shockslate.status.settle === false", timeout=60_000)
    notice.wait_for(state="hidden", timeout=60_000)
