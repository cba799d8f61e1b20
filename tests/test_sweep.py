"""Parameter sweeps on Dask's distributed scheduler (solver/sweep.py, server/cli/sweep.py): real clusters only.

Sources:
[SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3 (thrust F = mdot u_e + (p_e - p_a) A_e,
     C_F = F / (p0 A*); from memory).
pygasflow 1.4.1 (PyPI): general-purpose gas-dynamics library, used here only as a test oracle (isentropic area
     ratio and pressure ratio, de Laval choked mass flow).

The tiny cases are the built-in blast room at 60 cells across (30 x 60 cells, a fraction of a second each). Its
default burst charge at CFL 1.9 blows up with NaN density at step 355 (seen on this machine): that is the
diverging case. Clusters are started by fixtures and closed in their teardown.
"""
from __future__ import annotations

import csv
import json
import math
import multiprocessing
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numba
import pytest
from distributed import Client
from pygasflow import isentropic as pg_ise
from pygasflow.solvers.de_laval import nozzle_mass_flow_rate as pg_mass_flow

from shockslate.server.cli import main as shockslate_main
from shockslate.solver import sweep
from shockslate.solver.gas import PRESETS
from shockslate.solver.report import CAUTION
from shockslate.solver.scenario import load_builtin

TINY_NX = 60
TINY_UNTIL_S = 0.004  # about 80 steps of the blast room at nx 60
CAUTION_TEXT = ("inviscid, calorically perfect gas model; not for sizing pressure hardware or clearing a test; "
                "defer to local codes and licensed engineering review")


@pytest.fixture(scope="module", autouse=True)
def one_numba_thread():
    """The test machine is shared: in-process runs use one kernel thread."""
    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


@pytest.fixture(scope="module")
def client():
    """A local cluster of two process workers, made the way `shockslate sweep` makes it; closed at the end."""
    cluster = sweep.local_cluster(2)
    c = Client(cluster)
    try:
        yield c
    finally:
        c.close()
        cluster.close()


def blast_plan(*varies: str, zip_: bool = False, until_s: float | None = TINY_UNTIL_S) -> sweep.SweepPlan:
    return sweep.build_plan(load_builtin("blast_room"), [sweep.parse_vary(v) for v in varies], zip_=zip_,
                            nx=TINY_NX, until_s=until_s)


def read_csv(path: Path) -> list[dict]:
    with path.open(newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


# ----------------------------------------------------------------------------- --vary and the plan

def test_vary_ranges_are_evenly_spaced_with_both_ends():
    v = sweep.parse_vary("conditions.ambient.p_pa=101325:1000:6")
    assert v.path == "conditions.ambient.p_pa"
    assert v.values == pytest.approx((101325.0, 81260.0, 61195.0, 41130.0, 21065.0, 1000.0), rel=1e-12)


def test_vary_lists_take_numbers_json_and_bare_words():
    assert sweep.parse_vary("numerics.flux=hllc,hll").values == ("hllc", "hll")
    assert sweep.parse_vary("numerics.cfl=0.4, 0.8").values == (0.4, 0.8)
    assert sweep.parse_vary("gas.preset=null").values == (None,)
    assert sweep.split_path("sketch.shapes[2].centre_m[0]") == ["sketch", "shapes", 2, "centre_m", 0]
    assert sweep.split_path("stations.0.name") == ["stations", 0, "name"]


def test_product_varies_the_first_slowest_and_zip_pairs():
    plan = blast_plan("conditions.reservoir.p0_pa=1e6,2e6", "numerics.limiter=minmod,mc")
    assert [tuple(c.values.values()) for c in plan.cases] == [
        (1e6, "minmod"), (1e6, "mc"), (2e6, "minmod"), (2e6, "mc")]
    for case in plan.cases:
        assert case.scenario["conditions"]["reservoir"]["p0_pa"] == case.values["conditions.reservoir.p0_pa"]
        assert case.scenario["numerics"]["limiter"] == case.values["numerics.limiter"]
    zipped = blast_plan("conditions.reservoir.p0_pa=1e6,2e6", "numerics.limiter=minmod,mc", zip_=True)
    assert [tuple(c.values.values()) for c in zipped.cases] == [(1e6, "minmod"), (2e6, "mc")]


def test_whole_numbers_go_into_float_fields_and_floats_into_whole_number_fields():
    plan = sweep.build_plan(load_builtin("blast_room"), [sweep.parse_vary("conditions.ambient.p_pa=90000,100000"),
                                                         sweep.parse_vary("domain.nx=40:60:2")])
    p = plan.cases[0].scenario["conditions"]["ambient"]["p_pa"]
    nx = plan.cases[-1].scenario["domain"]["nx"]
    assert isinstance(p, float) and p == 90000.0
    assert isinstance(nx, int) and nx == 60 and plan.cases[-1].nx == 60


def test_case_key_is_the_scenario_resolution_and_end_time():
    a = blast_plan("numerics.cfl=0.4").cases[0]
    b = blast_plan("numerics.cfl=0.4").cases[0]
    assert a.key == b.key and a.folder == b.folder and a.folder.startswith("case-")
    # issue 'the first hour': a case folder says what varies in it, then a short hash that keeps it unique
    assert a.folder == "case-numerics.cfl=0.4-" + a.key[:10]
    assert a.key == sweep.case_key(json.loads(json.dumps(a.scenario, sort_keys=False)), TINY_NX, TINY_UNTIL_S)
    assert blast_plan("numerics.cfl=0.4", until_s=0.005).cases[0].key != a.key
    assert sweep.case_key(a.scenario, TINY_NX + 1, TINY_UNTIL_S) != a.key
    assert blast_plan("numerics.cfl=0.41").cases[0].key != a.key


@pytest.mark.parametrize("spec, expected", [
    ("conditions.ambient.pp=1:2:3", ["'conditions.ambient.pp'", "has no field 'pp'", "p_pa, t_k"]),
    ("conditions.ambient=1,2", ["'conditions.ambient'", "is an object", "conditions.ambient.p_pa"]),
    ("stations[7].name=a", ["stations", "index 7", "0 to 0"]),
    ("conditions.ambient.p_pa=-5:100:3", ["conditions.ambient.p_pa = -5.0", "greater than 0", "at most 1e+09"]),
    ("numerics.cfl=0.5:3:3", ["numerics.cfl = 3.0", "at least 0.01 and at most 1"]),
    ("numerics.flux=hllc,roe", ["numerics.flux = 'roe'", '"hllc", "hll", "rusanov"']),
    ("domain.nx=60.5,70", ["domain.nx = 60.5", "a whole number at least 4 and at most 4096"]),
    ("conditions.ambient.p_pa=1:2", ["START:STOP:COUNT", "not 2"]),
    ("conditions.ambient.p_pa=1:2:0", ["COUNT = 0", "1 to 1000"]),
    ("conditions.ambient.p_pa=1:2:1", ["COUNT = 1", "START = STOP"]),
    ("conditions.ambient.p_pa=1:nan:3", ["STOP", "finite"]),
    ("a..b=1", ["'a..b'", "dotted field names"]),
])
def test_bad_vary_is_refused_on_the_command_line_before_any_case_runs(tmp_path, capsys, spec, expected):
    out = tmp_path / "never"
    code = shockslate_main(["sweep", "blast_room", "--vary", spec, "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2
    for text in expected:
        assert text in err, (text, err)
    assert not out.exists()  # refused before the output folder, let alone a case


def test_one_bad_value_refuses_the_whole_sweep_and_names_its_case():
    with pytest.raises(sweep.SweepError) as err:
        blast_plan("conditions.reservoir.p0_pa=1e6,2e6,0", "numerics.cfl=0.4,0.5")
    text = str(err.value)
    assert text.startswith("2 of 6 cases refused, nothing was run")
    assert "case 4 (conditions.reservoir.p0_pa = 0.0, numerics.cfl = 0.4)" in text
    assert "allowed at conditions.reservoir.p0_pa: a number greater than 0" in text


def test_zip_of_unequal_lengths_and_repeated_paths_are_refused():
    with pytest.raises(sweep.SweepError, match=r"same number of values; got numerics.cfl: 2, numerics.flux: 3"):
        blast_plan("numerics.cfl=0.4,0.5", "numerics.flux=hllc,hll,rusanov", zip_=True)
    with pytest.raises(sweep.SweepError, match="given twice"):
        blast_plan("numerics.cfl=0.4", "numerics.cfl=0.5")
    with pytest.raises(sweep.SweepError, match="--resolution cannot be given while --vary sets domain.nx"):
        blast_plan("domain.nx=40,60")


def test_scheduler_address_must_be_tcp_host_port(tmp_path, capsys):
    code = shockslate_main(["sweep", "blast_room", "--vary", "numerics.cfl=0.4", "--scheduler", "localhost",
                            "--out", str(tmp_path / "x")])
    assert code == 2 and "--scheduler = 'localhost' is not allowed: give the scheduler's address as tcp://HOST:PORT" \
        in capsys.readouterr().err


def test_builtin_sweep_example_is_the_nozzle_from_sea_level_to_near_vacuum():
    spec, scenario = sweep.load_sweep_file("nozzle_ambient_sweep")
    assert "nozzle_ambient_sweep" in sweep.builtin_sweep_names()
    assert scenario.name == "nozzle_sea_level"
    plan = sweep.build_plan(scenario, [sweep.parse_vary(v) for v in spec.vary], spec.zip, spec.nx, spec.until_s)
    pa = [c.values["conditions.ambient.p_pa"] for c in plan.cases]
    assert pa[0] == 101325.0 and pa[-1] == 1000.0 and pa == sorted(pa, reverse=True)
    assert 4 <= len(plan.cases) <= 8 and spec.nx <= 200 and spec.until_s <= 2e-3  # a few minutes on 2 cores


# ----------------------------------------------------------------------------- the ideal 1D curves of the report

@pytest.mark.parametrize("p_amb_pa", [101325.0, 65000.0, 1000.0])
def test_ideal_nozzle_curve_matches_momentum_balance_built_from_pygasflow(p_amb_pa):
    gas = PRESETS["hot products"]
    g, r = gas.gamma, gas.r_j_kg_k
    p0, t0, at, eps = 1.5e6, 3000.0, math.pi * 0.01 ** 2, 4.0
    ours = sweep.ideal_nozzle_figures(p0, t0, p_amb_pa, g, r, at, eps, divergence_factor=1.0)
    # pygasflow 1.4.1: exit Mach on the supersonic branch, exit pressure and temperature, choked mass flow
    me = float(pg_ise.m_from_critical_area_ratio(eps, "super", g))
    pe = p0 * float(pg_ise.pressure_ratio(me, g))
    te = t0 * float(pg_ise.temperature_ratio(me, g))
    mdot = float(pg_mass_flow(g, r, t0, p0, at))
    # [SB] ch. 3: F = mdot u_e + (p_e - p_a) A_e, C_F = F / (p0 A*)
    thrust = mdot * me * math.sqrt(g * r * te) + (pe - p_amb_pa) * eps * at
    assert ours["mdot"] == pytest.approx(mdot, rel=1e-9)
    assert ours["pe_pa"] == pytest.approx(pe, rel=1e-9)
    assert ours["cf"] == pytest.approx(thrust / (p0 * at), rel=1e-9)


# ----------------------------------------------------------------------------- running on a local cluster

def test_local_cluster_sweep_of_four_tiny_cases_gives_four_rows(tmp_path):
    plan = blast_plan("conditions.reservoir.p0_pa=1e6:2.5e6:4")
    lines: list[str] = []
    children_before = set(multiprocessing.active_children())
    result = sweep.run_sweep(plan, tmp_path, workers=2, announce=lines.append, progress=None)
    assert set(multiprocessing.active_children()) <= children_before  # the sweep's own cluster is closed again
    assert "local cluster of 2 process workers" in lines[0] and "4 to run" in lines[0]
    assert result.ran == [0, 1, 2, 3] and result.reused == []
    rows = read_csv(tmp_path / "sweep.csv")
    assert [float(r["conditions.reservoir.p0_pa"]) for r in rows] == pytest.approx([1e6, 1.5e6, 2e6, 2.5e6])
    assert [r["status"] for r in rows] == ["finished"] * 4 and all(r["error"] == "" for r in rows)
    header = list(rows[0])
    assert header[:2] == ["case", "conditions.reservoir.p0_pa"] and header[-3:] == ["status", "error", "folder"]
    assert {"sim_time_s", "steps", "stations.door.mass_flow_kg_s", "probes.far wall.p_pa"} <= set(header)
    for r in rows:
        assert float(r["sim_time_s"]) == pytest.approx(TINY_UNTIL_S, rel=1e-9)
        assert int(r["nx"]) == TINY_NX
        case_dir = tmp_path / r["folder"]
        summary = json.loads((case_dir / "summary.json").read_text())
        assert summary["status"] == "finished" and (case_dir / "history.csv").is_file()
        meta = json.loads((case_dir / "case.json").read_text())
        assert meta["ran_on"].split(":")[-1] != str(os.getpid())  # ran in a worker process, not here
    # (no ordering of the door's mass flow by charge: at TINY_UNTIL_S the blast has not reached the door, and
    # its readings are round-off, 1e-15 to 1e-11 kg/s, of either sign)
    doc = json.loads((tmp_path / "sweep.json").read_text())
    assert doc["vary"] == [{"path": "conditions.reservoir.p0_pa", "values": [1e6, 1.5e6, 2e6, 2.5e6]}]
    assert doc["counts"]["finished"] == 4 and len(doc["rows"]) == 4 and doc["caution"] == CAUTION
    page = (tmp_path / "sweep_report.html").read_text()
    assert CAUTION_TEXT in page and page.count("src='data:image/png;base64,") >= 3
    assert "stations.door against conditions.reservoir.p0_pa" in page


def _numba_settings() -> tuple:
    import numba as nb

    return os.environ.get("NUMBA_NUM_THREADS"), nb.config.NUMBA_NUM_THREADS, nb.get_num_threads(), nb.config.CACHE_DIR


def test_local_cluster_workers_hold_numba_to_one_thread_and_share_the_jit_cache(client):
    seen = list(client.run(_numba_settings).values())
    seen += client.gather([client.submit(_numba_settings, pure=False) for _ in range(4)])
    expected_cache = str(Path(os.environ["NUMBA_CACHE_DIR"]).resolve()) if os.environ.get("NUMBA_CACHE_DIR") else None
    for env_threads, config_threads, threads, cache in seen:
        assert (env_threads, config_threads, threads) == ("1", 1, 1)
        if expected_cache:
            assert cache == expected_cache
    assert set(client.nthreads().values()) == {1} and len(client.nthreads()) == 2


def test_starting_a_local_cluster_leaves_this_process_environment_alone():
    before = dict(os.environ)
    cluster = sweep.local_cluster(1)
    try:
        assert dict(os.environ) == before  # distributed writes its workers' variables here; they are put back
    finally:
        cluster.close()


def test_diverging_case_is_a_row_with_its_error_and_the_others_finish(client, tmp_path):
    # the scenario's 20 ms; a 1000 MPa charge bursting into a 1 Pa room pulls the gas behind the blast down to the
    # pressure floor for many steps, which stops that case as diverged (CFL itself is capped at the integrators'
    # limit of 1, so it can no longer be the way to break a case)
    plan = blast_plan("conditions.reservoir.p0_pa=2e6,1e9,3e6", "conditions.ambient.p_pa=101325,1,101325", zip_=True,
                      until_s=None)
    seen: list[sweep.SweepProgress] = []
    result = sweep.run_sweep(plan, tmp_path, client=client, progress=seen.append)
    by_p0 = {float(r["conditions.reservoir.p0_pa"]): r for r in read_csv(tmp_path / "sweep.csv")}
    bad = by_p0[1e9]
    assert bad["status"] == "diverged"
    assert bad["error"].startswith("solver diverged at step") and "from before the trouble began" in bad["error"]
    for p0 in (2e6, 3e6):
        assert by_p0[p0]["status"] == "finished" and by_p0[p0]["error"] == ""
        assert float(by_p0[p0]["sim_time_s"]) == pytest.approx(0.02, rel=1e-9)
    assert result.count("finished") == 2 and result.count("diverged") == 1
    assert seen[-1].done == 3 and seen[-1].failed == 1 and seen[-1].running == 0
    assert "1 failed" in sweep.progress_line(seen[-1]) and "2 finished" in sweep.progress_line(seen[-1])
    assert "<td>diverged</td>" in (tmp_path / "sweep_report.html").read_text()


def test_a_case_that_raises_on_its_worker_becomes_an_error_not_a_crash():
    # a scenario document the worker cannot read (e.g. written by another version): the task returns the error
    outcome = sweep.run_case({"name": "broken"}, TINY_NX, TINY_UNTIL_S)
    assert outcome["summary"] is None and outcome["error"].startswith("ScenarioError: ")
    assert "gas: Gas is missing" in outcome["error"]


def test_resume_runs_nothing_new_and_a_deleted_case_folder_reruns_alone(client, tmp_path):
    plan = blast_plan("conditions.ambient.p_pa=90000:110000:3")
    first = sweep.run_sweep(plan, tmp_path, client=client, progress=None)
    assert first.ran == [0, 1, 2]
    stamps = {c.folder: (tmp_path / c.folder / "summary.json").stat().st_mtime_ns for c in plan.cases}

    lines: list[str] = []
    again = sweep.run_sweep(plan, tmp_path, progress=None, announce=lines.append)  # no cluster is started
    assert again.ran == [] and again.reused == [0, 1, 2] and again.where == "nothing to run"
    assert "all 3 cases are already done" in lines[0]
    assert {c.folder: (tmp_path / c.folder / "summary.json").stat().st_mtime_ns for c in plan.cases} == stamps
    assert [r["status"] for r in read_csv(tmp_path / "sweep.csv")] == ["finished"] * 3

    shutil.rmtree(tmp_path / plan.cases[1].folder)
    third = sweep.run_sweep(plan, tmp_path, client=client, progress=None)
    assert third.ran == [1] and third.reused == [0, 2]
    for n in (0, 2):
        assert (tmp_path / plan.cases[n].folder / "summary.json").stat().st_mtime_ns == stamps[plan.cases[n].folder]
    rows = read_csv(tmp_path / "sweep.csv")
    assert [r["status"] for r in rows] == ["finished"] * 3
    assert json.loads((tmp_path / "sweep.json").read_text())["counts"]["ran_now"] == 1


def test_a_half_written_case_is_run_again(client, tmp_path):
    plan = blast_plan("numerics.cfl=0.4,0.5")
    sweep.run_sweep(plan, tmp_path, client=client, progress=None)
    summary_file = tmp_path / plan.cases[0].folder / "summary.json"
    summary = json.loads(summary_file.read_text())
    summary["status"] = "interrupted"  # as `shockslate run` leaves a run stopped with Ctrl+C
    summary_file.write_text(json.dumps(summary))
    again = sweep.run_sweep(plan, tmp_path, client=client, progress=None)
    assert again.ran == [0] and again.reused == [1]
    assert json.loads(summary_file.read_text())["status"] == "finished"


def test_tiny_nozzle_sweep_report_draws_the_ideal_curves(client, tmp_path):
    plan = sweep.build_plan(load_builtin("nozzle_sea_level"),
                            [sweep.parse_vary("conditions.ambient.p_pa=101325,20000")], nx=80, until_s=5e-5)
    result = sweep.run_sweep(plan, tmp_path, client=client, progress=None)
    assert result.all_finished
    rows = read_csv(tmp_path / "sweep.csv")
    assert {"nozzle.thrust_coefficient", "nozzle.ideal_thrust_coefficient", "nozzle.mass_flow_throat_kg_s",
            "nozzle.regime"} <= set(rows[0])
    assert [r["nozzle.regime"] for r in rows] == ["over-expanded", "under-expanded"]
    page = (tmp_path / "sweep_report.html").read_text()
    assert "Nozzle against ideal 1D theory" in page and "nozzle figures against conditions.ambient.p_pa" in page


# ----------------------------------------------------------------------------- an existing cluster on loopback

@pytest.fixture()
def dask_cluster_processes(tmp_path):
    """A real `dask scheduler` and one `dask worker` (no nanny, one thread) on 127.0.0.1; stopped at the end."""
    env = dict(os.environ, NUMBA_NUM_THREADS="1")
    sched_file = tmp_path / "scheduler.json"
    logs = [open(tmp_path / "scheduler.log", "w"), open(tmp_path / "worker.log", "w")]
    procs: list[subprocess.Popen] = []
    try:
        procs.append(subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1", "--port", "0",
             "--no-dashboard", "--dashboard-address", "127.0.0.1:0", "--scheduler-file", str(sched_file)],
            stdout=logs[0], stderr=subprocess.STDOUT, env=env))
        deadline = time.monotonic() + 60
        while not sched_file.exists() and time.monotonic() < deadline:
            assert procs[0].poll() is None, (tmp_path / "scheduler.log").read_text()
            time.sleep(0.1)
        time.sleep(0.2)
        address = json.loads(sched_file.read_text())["address"]
        procs.append(subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_worker", address, "--nthreads", "1", "--no-nanny",
             "--no-dashboard", "--dashboard-address", "127.0.0.1:0", "--host", "127.0.0.1"],
            stdout=logs[1], stderr=subprocess.STDOUT, env=env, cwd=str(Path(__file__).resolve().parent.parent)))
        yield address, procs[1].pid
    finally:
        for proc in reversed(procs):
            proc.terminate()
        for proc in reversed(procs):
            try:
                proc.wait(timeout=20)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()
        for log in logs:
            log.close()


def test_sweep_submits_to_an_existing_scheduler_and_says_so(dask_cluster_processes, tmp_path, capsys):
    address, worker_pid = dask_cluster_processes
    out = tmp_path / "out"
    code = shockslate_main(["sweep", "blast_room", "--vary", "conditions.reservoir.p0_pa=1e6,2e6",
                            "--resolution", str(TINY_NX), "--until", str(TINY_UNTIL_S), "--out", str(out),
                            "--scheduler", address])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    assert f"to run on the existing cluster at {address} (1 workers, 1 threads)" in captured.out
    assert "2 cases: 2 finished, 0 failed" in captured.out
    assert "2/2 done (2 finished, 0 failed" in captured.err  # the progress line
    rows = read_csv(out / "sweep.csv")
    assert [r["status"] for r in rows] == ["finished", "finished"]
    for r in rows:
        meta = json.loads((out / r["folder"] / "case.json").read_text())
        assert meta["ran_on"].endswith(f":{worker_pid}")  # the dask worker process ran it
