"""Run a scenario without a browser and write everything a review needs to a folder.

Outputs (all in out_dir):
  summary.json            run figures, per-station and per-probe readings, snapshot list, nozzle block
  history.csv             time series of every station and probe (columns in solver.export)
  fields_NNNN.npz / .vti  the flow at each snapshot time (arrays in solver.export.NPZ_ARRAYS / VTI_ARRAYS)
  snapshot_NNNN.png       the chosen view with colour bar, unit, scale bar and time stamp
  station_<name>.csv      distributions along each station at the end
  report.html             self-contained report with plots and, for a nozzle, theory beside simulation

Ctrl+C (KeyboardInterrupt) stops the run cleanly: the end-of-run files are still written from the
last completed step and summary.json says status "interrupted". A diverged run keeps its last good
state and says status "diverged".
"""
from __future__ import annotations

import json
import math
import re
import signal
import sys
import threading
import time
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Callable, Optional

from . import export, nozzle, nozzle_report, report, separation, settle, steady
from .diagnostics import read_probe, read_station, station_profile
from .errors import SolverDiverged
from .fields import VIEWS
from .scenario import (Scenario, ScenarioError, build_simulation, builtin_names, load_builtin, load_scenario,
                       scenario_to_json, station_by_role, to_stations)
from .suggest import did_you_mean

#: Keys every summary.json has (the nozzle block is null unless the scenario is a reservoir-fed nozzle).
SUMMARY_KEYS = ("scenario", "description", "status", "message", "sim_time_s", "end_time_s", "steps", "wall_s",
                "cell_updates_per_s", "resolution", "mode", "stations", "probes", "snapshots", "history_rows",
                "floors_total", "nozzle", "steady", "settle", "caution", "files")
#: Keys of each station entry of summary.json.
STATION_KEYS = ("mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa", "area_m2")
#: History samples per run, at most (plus one per snapshot).
HISTORY_SAMPLES = 400
DEFAULT_SNAPSHOTS = 10


@dataclass(frozen=True)
class Progress:
    """What the progress callback receives, about once a second and at the end."""

    sim_time_s: float
    until_s: float
    steps: int
    max_steps: Optional[int]
    steps_per_s: float
    eta_s: float
    fraction: float
    #: "running" while it goes, then the run's status: finished, interrupted, diverged, stalled.
    status: str = "running"


#: Below this much wall time or this fraction of the run, an estimate of the time left says nothing.
ETA_MIN_WALL_S = 3.0
ETA_MIN_FRACTION = 0.01


def progress_line(pr: Progress) -> str:
    if pr.status == "steady":  # `--until steady` settled: until_s was only its time limit
        return (f"steady at t = {pr.sim_time_s * 1e3:.4g} ms (step {pr.steps}, time limit "
                f"{pr.until_s * 1e3:.4g} ms); figures below are from the settled flow")
    if pr.status == "unsteady":
        return (f"not steady by the time limit t = {pr.until_s * 1e3:.4g} ms (step {pr.steps}); figures below are "
                f"from a flow still changing")
    if pr.status not in ("running", "finished"):
        return (f"stopped at t = {pr.sim_time_s * 1e3:.4g} ms of {pr.until_s * 1e3:.4g} ms (step {pr.steps}, "
                f"{pr.status}); figures below are from an unfinished run")
    eta = "estimating" if not math.isfinite(pr.eta_s) else f"{pr.eta_s:.0f} s"
    width = 24
    filled = int(round(width * min(max(pr.fraction, 0.0), 1.0)))
    return (f"[{'#' * filled}{'.' * (width - filled)}] {100 * pr.fraction:5.1f}%  t = {pr.sim_time_s * 1e3:.4g} ms "
            f"of {pr.until_s * 1e3:.4g} ms  step {pr.steps}  {pr.steps_per_s:.0f} steps/s  time left {eta}")


def print_progress(pr: Progress) -> None:
    """Default progress: one line on stderr, rewritten in place."""
    sys.stderr.write("\r" + progress_line(pr) + "  ")
    if pr.status != "running":
        sys.stderr.write("\n")
    sys.stderr.flush()


def resolve_scenario(scenario: Scenario | str | Path) -> Scenario:
    """A Scenario, a path to a scenario file, or the name of a built-in."""
    if isinstance(scenario, Scenario):
        return scenario
    text = str(scenario)
    if not text.endswith(".json") and text in builtin_names():
        return load_builtin(text)
    if not text.endswith(".json") and not Path(text).exists():
        raise ScenarioError(f"there is no built-in scenario or file named {text!r}{did_you_mean(text, builtin_names())}"
                            " (`shockslate scenarios` lists the built-ins)")
    return load_scenario(text)


def _safe(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", name).strip("_") or "station"


def _finite(value: float) -> Optional[float]:
    return float(value) if value is not None and math.isfinite(value) else None


def run_scenario(scenario: Scenario | str | Path, out_dir: str | Path, until_s: float | None = None,
                 steps: int | None = None, nx: int | None = None, every_s: float | None = None,
                 view: str = "mach", progress: Callable[[Progress], None] | None = print_progress,
                 write_fields: bool = True, write_pictures: bool = True, progress_interval_s: float = 1.0,
                 until_steady: bool = False, tolerance: float = steady.DEFAULT_TOLERANCE,
                 mass_tolerance: float = steady.DEFAULT_MASS_TOLERANCE, settle_mode: bool = False) -> dict:
    """Run a scenario headless to until_s (default: its end_time_s) or for `steps` steps, whichever comes first.

    With until_steady the run stops as soon as the flow is steady (solver.steady: the residual below
    `tolerance` for one transit time and the station mass flows within `mass_tolerance` of each other);
    until_s is then the time limit, and a run that reaches it unsettled ends with status "unsteady".
    Station readings averaged over a window (the last transit time of a steady run, else the last fifth
    of the run) with their unsteadiness (+-) go into summary["steady"]; history.csv carries the residual.

    settle_mode (with until_steady only) reaches the steady state by settle mode (solver.settle: grid sequencing,
    then local time steps on the scenario's grid): the end state only, the run's times are pseudo times and
    summary["settle"] says so; wall time includes the coarse grids.

    nx overrides the resolution; every_s is the interval of field files and snapshots (default a tenth of the
    run); view is one of solver.fields.VIEWS. progress(Progress) is called every progress_interval_s of wall
    time and at the end. write_fields / write_pictures turn off the .npz/.vti and the PNG/HTML outputs.
    Returns the summary (also written as summary.json).
    """
    s = resolve_scenario(scenario)
    if view not in VIEWS:
        raise ValueError(f"view = {view!r} is not one of: {', '.join(VIEWS)}")
    until = float(s.end_time_s if until_s is None else until_s)
    if not (math.isfinite(until) and until > 0.0):
        raise ValueError(f"until_s = {until_s!r} must be a finite time greater than 0 s")
    if steps is not None and int(steps) < 1:
        raise ValueError(f"steps = {steps!r} must be at least 1")
    if every_s is not None and not (math.isfinite(every_s) and every_s > 0.0):
        raise ValueError(f"every_s = {every_s!r} must be a finite interval greater than 0 s")
    if settle_mode and not until_steady:
        raise ValueError("settle_mode = True needs until_steady: settle mode gives the steady end state, not a "
                         "time history")
    every = float(every_s) if every_s is not None else until / DEFAULT_SNAPSHOTS
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)

    sim = build_simulation(s, nx)
    scenario_json = scenario_to_json(s)
    stations = to_stations(s)
    probes = list(s.probes)
    history = export.HistoryWriter(out / "history.csv", [st.name for st in stations], [p.name for p in probes])
    throat, exit_ = station_by_role(s, "throat"), station_by_role(s, "exit")
    is_nozzle = throat is not None and exit_ is not None and (sim.mask == 2).any()
    noz = nozzle.drawn_nozzle(s) if is_nozzle else None
    # a nozzle is steady when its interior is (a free plume never is): solver/steady.py
    region = steady.steady_region(sim, s)
    balanced = ([i for i, st in enumerate(s.stations) if st.role in ("throat", "exit")] if is_nozzle
                else list(range(len(stations))))
    monitor = steady.SteadyMonitor(sim, tolerance, mass_tolerance, region)

    snapshots: list[dict] = []
    files: list[str] = ["summary.json", "history.csv", "report.html"]

    sampled_at = [-1]
    last_dt = [0.0]
    sample_times: list[float] = []
    sample_readings: list[list] = []

    def sample() -> None:
        sampled_at[0] = sim.steps
        readings = [read_station(sim, st) for st in stations]
        monitor.check([readings[i] for i in balanced])
        residual = None
        if sim.fluxes_current and last_dt[0] > 0.0:
            residual = monitor.residual_now(last_dt[0])
        sample_times.append(sim.time_s)
        sample_readings.append(readings)
        history.write(sim.time_s, sim.steps, readings, [read_probe(sim, p.x_m, p.y_m) for p in probes], residual)

    def snapshot() -> None:
        k = len(snapshots)
        entry = {"index": k, "time_s": sim.time_s, "steps": sim.steps}
        if write_fields:
            arrays = export.field_arrays(sim, scenario_json)
            entry["npz"] = export.write_npz(out / f"fields_{k:04d}.npz", arrays).name
            entry["vti"] = export.write_vti(out / f"fields_{k:04d}.vti", arrays, sim.domain).name
        if write_pictures:
            entry["png"] = report.save_snapshot_png(out / f"snapshot_{k:04d}.png", sim, view).name
        snapshots.append(entry)
        files.extend(v for key, v in entry.items() if key in ("npz", "vti", "png"))

    status, message = "finished", ""
    history_dt = until / HISTORY_SAMPLES
    next_sample = history_dt
    next_snapshot = every
    start = time.perf_counter()
    last_report = start
    stepper = settle.LocalStepper(sim) if settle_mode else None
    settle_info = {"notice": settle.NOTICE, "coarse_levels": []} if settle_mode else None
    sample()
    snapshot()
    stop = _StopFlag()
    try:
        if settle_info is not None:  # grid sequencing: the coarse grids first, their flow carried over to sim
            levels = settle.settle_coarse(lambda n: build_simulation(s, n), sim, x_max_m=settle.interior_end_m(exit_),
                                          stop=lambda: stop.raised)
            settle_info["coarse_levels"] = [asdict(lv) for lv in levels]
            if stop.raised:
                raise KeyboardInterrupt
        while sim.time_s < until * (1.0 - 1e-12) and (steps is None or sim.steps < steps):
            if stop.raised:
                raise KeyboardInterrupt
            target = min(until, next_snapshot)
            dt = stepper.step() if stepper is not None else sim.step(max_dt_s=target - sim.time_s)
            if dt <= 0.0:
                status, message = "stalled", "time step is zero (no fluid cells or no wave speed)"
                break
            last_dt[0] = dt
            if until_steady:
                monitor.after_step(dt)
            if sim.time_s >= next_sample * (1.0 - 1e-12):
                sample()
                next_sample = (math.floor(sim.time_s / history_dt) + 1) * history_dt
                if until_steady and monitor.steady:  # decided at samples, where the mass balance is read
                    status = "steady"
                    break
            if sim.time_s >= next_snapshot * (1.0 - 1e-12) and sim.time_s < until * (1.0 - 1e-12):
                snapshot()
                next_snapshot += every
            now = time.perf_counter()
            if progress is not None and now - last_report >= progress_interval_s:
                last_report = now
                progress(_progress(sim, until, steps, now - start))
    except KeyboardInterrupt:
        status, message = "interrupted", "stopped by the user (Ctrl+C); files hold the last completed step"
    except SolverDiverged as err:
        status, message = "diverged", str(err)
    finally:
        stop.restore()
    wall = time.perf_counter() - start
    if until_steady and status == "finished":
        status = "unsteady"
        imb = "none" if monitor.imbalance is None else f"{monitor.imbalance:.3g}"
        message = (f"the flow did not settle by the time limit {until:.6g} s: residual {monitor.residual:.3g} "
                   f"(tolerance {tolerance:g}), station mass-flow imbalance {imb} (tolerance {mass_tolerance:g})")

    # end-of-run files from the last good state
    if not snapshots or snapshots[-1]["steps"] != sim.steps:
        snapshot()
    if sampled_at[0] != sim.steps:
        sample()
    history.close()
    window_from = (sim.time_s - monitor.transit_s if status == "steady"
                   else sim.time_s - steady.WINDOW_FRACTION * sim.time_s)
    averaged = steady.window_average(sample_times, sample_readings, [st.name for st in stations], window_from)
    for st in stations:
        name = f"station_{_safe(st.name)}.csv"
        export.write_station_csv(out / name, [(st.name, station_profile(sim, st))])
        files.append(name)

    summary = {
        "scenario": s.name,
        "description": s.description,
        "status": status,
        "message": message,
        "sim_time_s": sim.time_s,
        "end_time_s": until,
        "steps": sim.steps,
        "wall_s": wall,
        "cell_updates_per_s": sim.steps * sim.cells / wall if wall > 0 else None,
        "resolution": {"nx": sim.domain.nx, "ny": sim.domain.ny, "dx_m": sim.domain.dx_m},
        "mode": s.mode,
        "stations": {st.name: {k: _finite(v) for k, v in asdict(read_station(sim, st)).items()} for st in stations},
        "probes": {p.name: {k: (_finite(v) if isinstance(v, float) else v)
                            for k, v in asdict(read_probe(sim, p.x_m, p.y_m)).items()} for p in probes},
        "snapshots": snapshots,
        "history_rows": history.rows,
        "floors_total": sim.floors_total,
        "nozzle": None,
        "steady": {"until": "steady" if until_steady else "time", "settled": status == "steady",
                   "tolerance": tolerance, "mass_tolerance": mass_tolerance, "transit_s": _finite(monitor.transit_s),
                   "residual": _finite(monitor.residual_now(last_dt[0])
                                       if sim.fluxes_current and last_dt[0] > 0.0 else math.nan),
                   "residual_over": monitor.region.label,
                   # what the residual of every gas cell would read: a free plume keeps it high
                   "residual_whole_domain": _finite(steady.density_residual_per_s(sim, last_dt[0])
                                                    * steady.transit_time_s(sim) if sim.fluxes_current
                                                    and last_dt[0] > 0.0 else math.nan),
                   "balanced_stations": [stations[i].name for i in balanced],
                   "mass_imbalance": None if monitor.imbalance is None else _finite(monitor.imbalance),
                   "window": averaged},
        "settle": settle_info,
        "caution": report.CAUTION,
        "files": files,
    }
    axis = None
    if noz is not None:
        fig = nozzle_report.figures(sim, s, noz, throat, exit_)
        summary["nozzle"] = {k: (_finite(v) if isinstance(v, float) else v) for k, v in fig.as_dict().items()}
        # where the wall pressure falls below Summerfield's criterion (solver/separation.py)
        summary["nozzle"]["wall_separation"] = separation.nozzle_wall_separation(sim, throat, exit_).as_dict()
        axis = nozzle_report.axis_distribution(sim, s, noz)
    if not write_pictures:
        files.remove("report.html")
    (out / "summary.json").write_text(json.dumps(summary, indent=2) + "\n", encoding="utf-8")
    if write_pictures:
        report.write_report(out / "report.html", summary, s.description, sim, view,
                            export.read_history(out / "history.csv"), axis)
    if progress is not None:
        progress(_progress(sim, until, steps, wall, status=status))
    return summary


class _StopFlag:
    """Turns Ctrl+C into a flag checked between whole steps, so a step is never cut in half.

    Only in the main thread (signal handlers cannot be set elsewhere); a second Ctrl+C still interrupts at once.
    """

    def __init__(self) -> None:
        self.raised = False
        self._old = None
        if threading.current_thread() is threading.main_thread():
            self._old = signal.getsignal(signal.SIGINT)
            signal.signal(signal.SIGINT, self._handle)

    def _handle(self, signum, frame) -> None:
        if self.raised:
            raise KeyboardInterrupt
        self.raised = True

    def restore(self) -> None:
        if self._old is not None:
            signal.signal(signal.SIGINT, self._old)
            self._old = None


def _progress(sim, until: float, max_steps: Optional[int], wall: float, status: str = "running") -> Progress:
    """Where the run stands. The fraction reaches 1 only for a finished run; the time left is estimated only once
    the run has gone on long enough for the rate to mean something."""
    frac = sim.time_s / until
    if max_steps is not None:
        frac = max(frac, sim.steps / max_steps)
    frac = 1.0 if status == "finished" else min(frac, 1.0)
    rate = sim.steps / wall if wall > 0 else 0.0
    eta = float("inf")
    if status == "finished":
        eta = 0.0
    elif wall >= ETA_MIN_WALL_S and frac >= ETA_MIN_FRACTION:
        eta = wall * (1.0 - frac) / frac
    return Progress(sim.time_s, until, sim.steps, max_steps, rate, eta, frac, status)
