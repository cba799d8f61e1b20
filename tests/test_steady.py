"""Steady state (solver/steady.py) and `shockslate run --until steady`.

Sources:
  [N]  NACA Report 1135 (1953), isentropic relations (via solver.relations, itself checked against the
       report's tables in tests/test_relations.py): a reservoir at p0, T0 blowing through a constant-area
       duct into surroundings at p_b reaches p = p_b and p / p0 = (1 + (g - 1)/2 M^2)^(-g/(g - 1)).
  [B]  J. Blazek, Computational Fluid Dynamics: Principles and Applications, ch. 9: the density residual
       as the convergence measure of time-marching towards a steady state (from memory).
"""
from __future__ import annotations

import json
import math

import numba
import numpy as np
import pytest

from shockslate.server.cli import batch as batch_cli
from shockslate.server.cli import main as cli_main
from shockslate.solver import batch, export, relations, steady
from shockslate.solver.diagnostics import StationReading
from shockslate.solver.domain import Domain
from shockslate.solver.gas import AIR
from shockslate.solver.scenario import parse_scenario
from shockslate.solver.simulation import Edges, Setup, Simulation

from scenario_docs import duct_doc

P0, T0, PB = 300000.0, 300.0, 270000.0


@pytest.fixture(scope="module", autouse=True)
def one_numba_thread():
    """The test machine is shared: one kernel thread per run avoids oversubscribing its two cores."""
    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


def blowdown_doc() -> dict:
    """The test duct fed from its reservoir, ending on an ambient edge at 0.9 p0, two stations."""
    doc = duct_doc(nx=64)
    doc["edges"]["right"] = "ambient"
    doc["conditions"]["reservoir"] = {"p0_pa": P0, "t0_k": T0}
    doc["conditions"]["ambient"] = {"p_pa": PB, "t_k": T0}
    doc["stations"] = [{"name": "a", "start_m": [0.15, 0.0], "end_m": [0.15, 0.1], "role": None},
                       {"name": "b", "start_m": [0.3, 0.0], "end_m": [0.3, 0.1], "role": None}]
    doc["end_time_s"] = 0.04
    return doc


def test_density_residual_is_zero_at_rest_and_positive_while_the_gas_moves():
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.25, 32), edges=Edges("wall", "wall", "wall", "wall")))
    assert steady.density_residual_per_s(sim, sim.step()) == 0.0  # still gas stays still
    x = sim.domain.x_centres_m()[None, :]
    sim.set_primitive(np.where(x < 0.5, 2.0, 1.0), 0.0, 0.0, np.where(x < 0.5, 2.0e5, 1.0e5))
    dt = sim.step()
    r = steady.density_residual_per_s(sim, dt)
    # by hand: the change of the first step over the mass and the step
    rho_new = sim.U[0, 2:-2, 2:-2]
    rho_old = sim.U0[0, 2:-2, 2:-2]
    assert r == pytest.approx(np.abs(rho_new - rho_old).sum() / (rho_new.sum() * dt), rel=1e-12) and r > 0.0


def test_mass_imbalance_between_stations():
    def reading(mdot):
        return StationReading(mdot, 0.0, 0.0, 0.0, 0.1)

    assert steady.mass_imbalance([reading(1.0), reading(1.02)]) == pytest.approx(0.02 / 1.01)
    assert steady.mass_imbalance([reading(1.0)]) is None
    assert steady.mass_imbalance([reading(1.0), reading(0.0)]) is None  # one station carries no flow


@pytest.fixture(scope="module")
def blowdown(tmp_path_factory):
    out = tmp_path_factory.mktemp("steady")
    summary = batch.run_scenario(parse_scenario(blowdown_doc()), out, until_steady=True, tolerance=1e-3,
                                 progress=None, write_fields=False, write_pictures=False)
    return out, summary


def test_run_until_steady_stops_settled_at_the_isentropic_state(blowdown):
    out, summary = blowdown
    st = summary["steady"]
    assert summary["status"] == "steady" and st["settled"] and st["until"] == "steady"
    assert summary["sim_time_s"] < summary["end_time_s"]  # stopped by the criterion, not the time limit
    assert st["residual"] < 1e-3 and st["mass_imbalance"] < 0.01
    mach_theory = float(relations.mach_from_p_p0(PB / P0))  # [N]
    t = T0 * float(relations.t_t0(mach_theory))
    rho = P0 / (AIR.r_j_kg_k * T0) * float(relations.rho_rho0(mach_theory))
    mdot_theory = rho * mach_theory * AIR.sound_speed_m_s(t) * 0.1  # per metre of depth
    for name in ("a", "b"):
        q = st["window"]["stations"][name]
        assert q["mean_mach"]["mean"] == pytest.approx(mach_theory, rel=0.01)
        assert q["mean_pressure_pa"]["mean"] == pytest.approx(PB, rel=0.005)
        assert q["mass_flow_kg_s"]["mean"] == pytest.approx(mdot_theory, rel=0.01)
        assert q["mass_flow_kg_s"]["plus_minus"] < 0.005 * mdot_theory
    assert st["window"]["samples"] >= 2 and st["window"]["from_s"] < st["window"]["to_s"]
    hist = export.read_history(out / "history.csv")
    res = hist["residual"][np.isfinite(hist["residual"])]
    assert res[0] > 30 * res[-1]  # [B]: the residual falls by orders of magnitude on the way to steady
    assert res[-1] < 1e-3


def test_a_run_that_has_not_settled_by_the_time_limit_says_so(tmp_path):
    summary = batch.run_scenario(parse_scenario(blowdown_doc()), tmp_path, until_s=0.002, until_steady=True,
                                 progress=None, write_fields=False, write_pictures=False)
    assert summary["status"] == "unsteady" and not summary["steady"]["settled"]
    assert "did not settle" in summary["message"] and "tolerance 0.001" in summary["message"]
    assert summary["sim_time_s"] == pytest.approx(0.002)


def test_monitor_refuses_a_bad_tolerance():
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.25, 16)))
    with pytest.raises(ValueError) as info:
        steady.SteadyMonitor(sim, tolerance=-1.0)
    assert "tolerance = -1.0" in str(info.value)


def test_cli_until_steady(tmp_path, capsys):
    doc = tmp_path / "blowdown.json"
    doc.write_text(json.dumps(blowdown_doc()))
    assert cli_main(["run", str(doc), "--tolerance", "0.01", "--out", str(tmp_path / "x")]) == batch_cli.EXIT_BAD_INPUT
    assert "--until steady" in capsys.readouterr().err
    with pytest.raises(SystemExit):
        cli_main(["run", str(doc), "--until", "soon"])
    assert "'steady'" in capsys.readouterr().err
    out = tmp_path / "run"
    code = cli_main(["run", str(doc), "--until", "steady", "--time-limit", "0.003", "--tolerance", "0.5",
                     "--resolution", "32", "--out", str(out)])
    summary = json.loads((out / "summary.json").read_text())
    assert code == batch_cli.EXIT_OK and summary["status"] == "steady" and summary["steady"]["tolerance"] == 0.5
    assert "residual" in capsys.readouterr().out
    text = (out / "report.html").read_text()
    assert "Stations averaged from t = " in text and "\u00b1" in text  # each average with its unsteadiness


def test_live_status_figures_settling_then_steady():
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.25, 32), edges=Edges("wall", "wall", "wall", "wall")))
    assert steady.live_residual(sim) == (None, None)  # no step yet
    sim.step()
    assert steady.live_residual(sim) == (0.0, "steady")  # still gas
    x = sim.domain.x_centres_m()[None, :]
    sim.set_primitive(np.where(x < 0.5, 2.0, 1.0), 0.0, 0.0, np.where(x < 0.5, 2.0e5, 1.0e5))
    assert steady.live_residual(sim) == (None, None)  # a change: no step of this flow yet
    sim.step()
    r, flow = steady.live_residual(sim)
    assert flow == "settling" and r > steady.DEFAULT_TOLERANCE


def test_nozzle_into_free_air_is_steady_when_its_interior_is(tmp_path):
    # The built-in over-expanded nozzle: its free jet's shear layer never settles, so the residual of the whole
    # domain stays near 1 (measured: 1.1 to 2.7 per transit over the first millisecond); the interior upstream of
    # the exit station settles (chamber ringing decays: 0.125, 0.043, 0.017, 0.0097 at 0.2 to 0.8 ms, measured).
    from shockslate.solver.scenario import load_builtin, to_conditions, to_gas

    s = load_builtin("nozzle_sea_level")
    summary = batch.run_scenario(s, tmp_path, nx=160, until_s=0.004, until_steady=True, progress=None,
                                 write_fields=False, write_pictures=False)
    st = summary["steady"]
    assert summary["status"] == "steady" and st["settled"], summary["message"]
    assert summary["sim_time_s"] < 0.004
    assert "nozzle interior" in st["residual_over"] and "'exit'" in st["residual_over"]
    assert st["balanced_stations"] == ["throat", "exit"]  # the plume station also counts entrained gas
    assert st["residual"] < 1e-3 < 10.0 * 1e-3 < st["residual_whole_domain"]
    # [N] choked mass flow at the throat (gamma 1.2, 22 kg/kmol, 15 bar, 3000 K, 20 mm throat): 0.2866 kg/s
    gas, res = to_gas(s), to_conditions(s).reservoir
    ideal = relations.choked_mass_flow_kg_s(res.p0_pa, res.t0_k, math.pi * 0.01 ** 2, gas.gamma, gas.r_j_kg_k)
    assert ideal == pytest.approx(0.2866, abs=0.0005)
    window = st["window"]["stations"]
    for name in ("throat", "exit"):
        q = window[name]["mass_flow_kg_s"]
        assert q["mean"] == pytest.approx(ideal, rel=0.015)  # rounded throat, 6.7 cells across its radius
        assert q["plus_minus"] < 0.005 * ideal
    hist = export.read_history(tmp_path / "history.csv")
    res = hist["residual"][np.isfinite(hist["residual"])]
    assert res[-1] < 1e-3 and res.max() > 100 * res[-1]


def test_nozzle_region_and_the_live_figure_over_it():
    # The residual over a region counts only its cells: a disturbance downstream of the region leaves it at zero.
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.25, 32), edges=Edges("wall", "wall", "wall", "wall")))
    region = steady.nozzle_region(sim, 0.5, "exit")
    assert region.columns == 16 and region.x_end_m == pytest.approx(0.5) and "'exit'" in region.label
    x = sim.domain.x_centres_m()[None, :]
    sim.set_primitive(1.0, 0.0, 0.0, np.where(x > 0.8, 2.0e5, 1.0e5))  # a pressure jump at x = 0.8 m
    sim.step()
    assert steady.live_residual(sim, region) == (0.0, "steady")
    r, flow = steady.live_residual(sim)
    assert flow == "settling" and r > 0.0
    with pytest.raises(ValueError) as info:
        steady.nozzle_region(sim, -1.0)
    assert "x = -1.0" in str(info.value) and "upstream of every cell" in str(info.value)


def test_the_live_status_judges_a_nozzle_by_its_interior_as_a_batch_run_does():
    # common practice, no source: a free jet's shear layer never settles, so a nozzle's steadiness is read
    # upstream of its exit station (the same region in the live status and in `run --until steady`)
    from shockslate.server import readings
    from shockslate.solver.scenario import build_simulation, load_builtin
    nozzle = load_builtin("nozzle_sea_level")
    sim = build_simulation(nozzle, 80)
    region = steady.steady_region(sim, nozzle)
    exit_x = next(st for st in nozzle.stations if st.role == "exit").start_m[0]
    assert region is not None and 0 < region.columns < sim.domain.nx
    assert region.x_end_m == pytest.approx(sim.domain.x_min_m + region.columns * sim.domain.dx_m)
    assert abs(region.x_end_m - exit_x) <= sim.domain.dx_m
    for _ in range(5):
        sim.step()
    status = readings.status_figures(sim, nozzle, None, 0)
    assert status["residual"] == pytest.approx(steady.live_residual(sim, region)[0], rel=1e-12)
    assert status["residual"] != pytest.approx(steady.live_residual(sim)[0], rel=1e-3)  # not the whole domain
    tube = load_builtin("shock_tube_reflection")
    assert steady.steady_region(build_simulation(tube, 80), tube) is None  # no nozzle: the whole domain
