"""`shockslate bench --serve`: what streaming costs and delivers, with one client on loopback.

It starts the real server (a subprocess, as a user would) on the default nozzle widened to a 2:1
domain at 512 x 256 cells, lets the flow develop, then measures, in interleaved phases so machine
noise hits both sides alike:
  - solver cell updates per second with no client attached and with one client streaming,
  - frames per second delivered to that client at 512 x 256,
  - latency from sending a shape to the first frame that shows it (a wall disc on a gas pixel),
  - a load phase: several tabs at once (8 by default), frames per second each and the server's memory growth,
  - one more shape after 30 polygons of 15,000 points (server side: parsed, applied and saved; in this process with
    the server's parts) beside the whole-sketch geometry time,
  - the same sketch live (its own server process, real websocket tabs): add_shape and undo to their acknowledgement
    and to another tab, a new tab's hello with another tab's frame gaps meanwhile, and (with playwright and
    Chromium) the real page's add_shape to its sketch drawn,
  - the issue's long segment: time to its answer and the server's peak memory growth,
  - frames per second another tab gets while the resolution changes (held frames, the newest frame again while
    no new one comes, counted apart), the longest gap between its frames.
Goals from the issue: 30 frames/s, latency under 150 ms, solver slowdown under 10 %.
"""
from __future__ import annotations

import argparse
import json
import os
import socket
import statistics
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

from shockslate.server.frames import WALL_LEVEL, decode_frame

FRAME_W, FRAME_H = 512, 256
#: Interleaved rounds (without a client, then with one) behind the slowdown figure; its medians are quoted.
SLOWDOWN_ROUNDS = 8


def add_serve_bench(parser: argparse.ArgumentParser) -> None:
    """Add --serve (and its options) to the `bench` parser, wrapping whatever handler it already has."""
    parser.add_argument("--serve", action="store_true",
                        help="benchmark the live server: frames/s at 512x256, shape-to-frame latency, "
                             "solver speed with and without a client")
    parser.add_argument("--phase-seconds", type=float, default=5.0, metavar="S",
                        help="length of each measuring phase of --serve (default 5)")
    parser.add_argument("--latency-samples", type=int, default=8, metavar="N",
                        help="shapes sent for the latency figure of --serve (default 8)")
    parser.add_argument("--load-clients", type=int, default=8, metavar="N",
                        help="tabs connected at once in the load phase of --serve (default 8; 0 skips it)")
    parser.add_argument("--serve-threads", type=int, metavar="N",
                        help="solver threads of the server under test (default: all cores)")
    parser.add_argument("--serve-slowdown-only", action="store_true",
                        help="with --serve: measure only the solver's slowdown with one streaming tab "
                             "(serve_slowdown_fraction), in --serve-rounds interleaved rounds")
    parser.add_argument("--serve-settle-only", action="store_true",
                        help="with --serve: measure only the page's settle mode, time to steady on nozzle_sea_level "
                             "with and without grid sequencing")
    parser.add_argument("--serve-resolution-only", action="store_true",
                        help="with --serve: measure only the frames another tab gets while one tab changes the "
                             "resolution (1024, 512, 2048, 512 cells across), on a fresh server, --serve-rounds times")
    parser.add_argument("--serve-rounds", type=int, default=SLOWDOWN_ROUNDS, metavar="N",
                        help=f"interleaved without/with-client rounds of the slowdown figure (default {SLOWDOWN_ROUNDS})")
    for key in ("handler", "func"):
        previous = parser.get_default(key)
        if previous is not None:
            parser.set_defaults(**{key: _either(previous)})
            return
    parser.set_defaults(func=_either(None))


def _either(previous):
    def run(args: argparse.Namespace) -> int:
        if getattr(args, "serve", False):
            return main(args)
        if previous is None:
            print("shockslate bench: use --serve", file=sys.stderr)
            return 2
        return previous(args)
    return run


def main(args: argparse.Namespace) -> int:
    if getattr(args, "serve_settle_only", False):
        report = live_settle_phase()
        print(json.dumps(report, indent=2) if getattr(args, "json", False) else format_live_settle(report))
        return 0
    if getattr(args, "serve_resolution_only", False):
        report = resolution_only(threads=args.serve_threads, rounds=args.serve_rounds)
        print(json.dumps(report, indent=2) if getattr(args, "json", False) else format_resolution_only(report))
        return 0
    if getattr(args, "serve_slowdown_only", False):
        report = slowdown_only(phase_s=args.phase_seconds, threads=args.serve_threads, rounds=args.serve_rounds)
        if getattr(args, "json", False):
            print(json.dumps(report, indent=2))
        else:
            print_slowdown(report)
        return 0
    report = run_serve_bench(phase_s=args.phase_seconds, latency_samples=args.latency_samples,
                             threads=args.serve_threads, load_clients=args.load_clients, rounds=args.serve_rounds)
    if getattr(args, "json", False):
        print(json.dumps(report, indent=2))
    else:
        print_report(report)
    return 0


# ----------------------------------------------------------------------------- the server under test

def bench_scenario() -> dict:
    """The default nozzle with its domain made 2:1 and 512 cells across (512 x 256)."""
    from shockslate.solver import scenario as scn

    doc = scn.scenario_to_dict(scn.load_builtin(scn.DEFAULT_SCENARIO))
    d = doc["domain"]
    d["y_max_m"] = d["y_min_m"] + 0.5 * (d["x_max_m"] - d["x_min_m"])
    d["nx"] = FRAME_W
    doc["name"] = "serving benchmark"
    return doc


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _health(url: str) -> dict:
    with urllib.request.urlopen(url + "/health", timeout=5) as r:
        return json.loads(r.read())


class ServerProcess:
    """`shockslate serve` in a subprocess with a throw-away data folder; output to a log file."""

    def __init__(self, scenario: dict | None, threads: int | None = None):
        """scenario None: the server's own start, on the built-in default scenario."""
        self.folder = Path(tempfile.mkdtemp(prefix="shockslate-bench-"))
        path = self.folder / "bench.json"
        path.write_text(json.dumps(scenario))
        self.started = time.monotonic()
        self.port = _free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        self.log_path = self.folder / "server.log"
        env = dict(os.environ)
        with open(self.log_path, "wb") as log:
            self.proc = subprocess.Popen(
                [sys.executable, "-m", "shockslate.server.cli", "serve", "--port", str(self.port),
                 *(["--scenario", str(path)] if scenario is not None else []),
                 "--data-dir", str(self.folder / "data"), *(["--threads", str(threads)] if threads else [])],
                cwd=self.folder, env=env, stdout=log, stderr=subprocess.STDOUT)

    def wait_running(self, timeout_s: float = 180.0) -> dict:
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"server exited: {self.log_path.read_text()[-2000:]}")
            try:
                h = _health(self.url)
                if h["state"] == "running" and h["steps"] > 0:
                    return h
            except OSError:
                pass
            time.sleep(0.2)
        raise RuntimeError("server did not start running in time")

    def stop(self) -> None:
        self.proc.terminate()
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()


# ----------------------------------------------------------------------------- phases

def solver_rate(url: str, seconds: float) -> float:
    """Cell updates per second over `seconds`, from the server's own step counter."""
    a = _health(url)
    t0 = time.monotonic()
    time.sleep(seconds)
    b = _health(url)
    wall = time.monotonic() - t0
    return (b["steps"] - a["steps"]) * b["cells"] / wall


def _connect(url: str):
    from websockets.sync.client import connect

    sock = connect(url.replace("http://", "ws://") + "/ws", max_size=None, open_timeout=30)
    hello = json.loads(sock.recv(timeout=30))
    sock.send(json.dumps({"type": "set_view", "view": "mach", "width": FRAME_W, "height": FRAME_H,
                          "range": "auto", "overlays": ["sonic_line"]}))
    return sock, hello


def streaming_phase(url: str, seconds: float) -> tuple[float, float, tuple[int, int]]:
    """(frames per second received, solver cell updates per second) while one client streams."""
    sock, _ = _connect(url)
    try:
        size = (0, 0)
        deadline = time.monotonic() + 10.0
        while time.monotonic() < deadline:  # first frame at the asked size
            msg = sock.recv(timeout=10)
            if isinstance(msg, bytes):
                header, _ = decode_frame(msg)
                size = (header.width, header.height)
                if size == (FRAME_W, FRAME_H):
                    break
        a = _health(url)
        t0 = time.monotonic()
        frames = 0
        while (now := time.monotonic()) - t0 < seconds:
            try:
                msg = sock.recv(timeout=max(0.01, seconds - (now - t0)))
            except TimeoutError:
                break
            if isinstance(msg, bytes):
                frames += 1
        wall = time.monotonic() - t0
        b = _health(url)
        return frames / wall, (b["steps"] - a["steps"]) * b["cells"] / wall, size
    finally:
        sock.close()


def slowdown_phase(url: str, seconds: float, rounds: int = SLOWDOWN_ROUNDS) -> dict:
    """The solver's cell updates per second with no client and with one tab streaming 512 x 256 Mach frames, in
    `rounds` phases with the tab, each between two phases without it (A0 C0 A1 C1 ... C(n-1) An), so that the
    drifting load of a shared machine hits both alike. Each phase with the tab is compared with the mean of the two
    phases around it, which cancels a load that drifts steadily across the three (comparing it with the phase
    before only did not: pair ratios of one run spread from 0.71 to 1.12). serve_slowdown_fraction = 1 - the
    median of those ratios."""
    alone, streaming, fps = [solver_rate(url, seconds)], [], []
    size = (0, 0)
    for _ in range(max(1, rounds)):
        f, rate, size = streaming_phase(url, seconds)
        fps.append(f)
        streaming.append(rate)
        time.sleep(1.0)  # let the server notice the client left
        alone.append(solver_rate(url, seconds))
    med_alone, med_streaming = statistics.median(alone), statistics.median(streaming)
    ratios = sandwich_ratios(alone, streaming)
    return {"phases_without_client": alone, "phases_with_client": streaming, "frames_per_s_phases": fps,
            "frame_size": list(size), "cell_updates_per_s_without_client": med_alone,
            "cell_updates_per_s_with_client": med_streaming, "frames_per_s": statistics.median(fps),
            "pair_ratios": ratios,
            "serve_slowdown_fraction": (1.0 - statistics.median(ratios)) if ratios else None}


def sandwich_ratios(alone: list[float], streaming: list[float]) -> list[float]:
    """Each streaming rate over the mean of the rates without a client just before and just after it
    (len(alone) == len(streaming) + 1)."""
    return [c / (0.5 * (a + b)) for a, c, b in zip(alone, streaming, alone[1:]) if a + b > 0]


def slowdown_only(phase_s: float = 5.0, threads: int | None = None, rounds: int = SLOWDOWN_ROUNDS,
                  develop_s: float = 3.0) -> dict:
    """`bench --serve --serve-slowdown-only`: the slowdown phase alone, on its own server process."""
    scenario = bench_scenario()
    server = ServerProcess(scenario, threads)
    try:
        first = server.wait_running()
        time.sleep(develop_s)  # a developed flow, not the initial condition
        out = slowdown_phase(server.url, phase_s, rounds)
        health = _health(server.url)
    finally:
        server.stop()
    out.update({"grid": [scenario["domain"]["nx"], first["cells"] // scenario["domain"]["nx"]],
                "numba_threading_layer": health.get("threading_layer"), "solver_threads": threads or "all cores",
                "cpu_count": os.cpu_count(), "load_average_1min": os.getloadavg()[0],
                "goals": {"frames_per_s": 30, "slowdown_fraction": 0.10}})
    return out


def print_slowdown(r: dict) -> None:
    print(f"streaming slowdown: grid {r['grid'][0]}x{r['grid'][1]}, frames {r['frame_size'][0]}x{r['frame_size'][1]}, "
          f"one loopback client; {r['cpu_count']} CPUs, load average {r['load_average_1min']:.2f}, "
          f"solver threads {r['solver_threads']}")
    _print_streaming(r)


def _print_streaming(r: dict) -> None:
    """The frames, solver and slowdown lines of slowdown_phase's figures (in either report)."""
    print(f"  frames delivered        {r['frames_per_s']:6.1f} /s median (goal 30; phases "
          + ", ".join(f"{f:.1f}" for f in r["frames_per_s_phases"]) + ")")
    print(f"  solver, no client       {r['cell_updates_per_s_without_client'] / 1e6:6.2f} M cell updates/s median "
          "(phases " + ", ".join(f"{v / 1e6:.2f}" for v in r["phases_without_client"]) + ")")
    print(f"  solver, one client      {r['cell_updates_per_s_with_client'] / 1e6:6.2f} M cell updates/s median "
          "(phases " + ", ".join(f"{v / 1e6:.2f}" for v in r["phases_with_client"]) + ")")
    if r["serve_slowdown_fraction"] is not None:
        print(f"  slowdown from streaming {100 * r['serve_slowdown_fraction']:6.1f} %        (goal < 10 %; 1 - median of "
              "the ratios to the phases around "
              + ", ".join(f"{x:.3f}" for x in r["pair_ratios"]) + ")")


#: Wall time of one burst of each live settle run when the two alternate.
SETTLE_BURST_S = 0.5
#: The run without grid sequencing stops at this multiple of the sequenced run's wall time if not steady by then.
SETTLE_CAP = 8.0


def _live_settle_run(session, check):
    """The page's settle mode on a session, a step at a time (a generator), as the runner steps it; once the flow
    is on the user's grid every step is judged by check(sim). Returns the session when steady."""
    session.set_settle(True)
    chk = None
    while True:
        grid = session.settle_grid()
        fine_step = grid["levels"] is not None and grid["level"] == grid["levels"]  # this step on the user's grid
        session.step(1)
        if fine_step and session._stepper is not None and session._stepper.sim is session.sim:
            chk = chk or check(session.sim)
            if chk.after_step(session._stepper.dt):
                return session
        yield


def live_settle_phase(scenario: str = "nozzle_sea_level") -> dict:
    """Wall time to steady of the page's settle mode (server.session.Session, the code the runner steps) on the
    scenario at its own resolution, with grid sequencing (settle.DEFAULT_LEVELS, what the page does) and without
    (settle_levels 1), one run each in alternating bursts of SETTLE_BURST_S in this process, so the load of a
    shared machine hits both alike. Steady: the criterion of `shockslate bench`'s settle_speedup
    (solver_bench.SETTLE_TOLERANCE inside the nozzle for 50 steps, station mass flows within
    SETTLE_MASS_TOLERANCE). The sequenced run's time includes its coarse grid."""
    from shockslate.server.session import Session
    from shockslate.solver import settle
    from shockslate.solver import scenario as scn
    from shockslate.solver.diagnostics import read_station

    from .solver_bench import SETTLE_MASS_TOLERANCE, SETTLE_TOLERANCE, alternate_bursts

    s = scn.load_builtin(scenario)
    throat, exit_ = scn.station_by_role(s, "throat"), scn.station_by_role(s, "exit")
    stations = [throat, exit_]
    x_max = settle.interior_end_m(exit_)
    small = scn.build_simulation(s, settle.MIN_COARSE_NX)  # load the kernels before the clock starts
    settle.LocalStepper(small).step()

    def check(sim):
        return settle.SettleCheck(sim, stations, x_max_m=x_max, tolerance=SETTLE_TOLERANCE,
                                  mass_tolerance=SETTLE_MASS_TOLERANCE)

    sessions = {"sequenced": Session(s), "own_grid_only": Session(s)}
    sessions["own_grid_only"].settle_levels = 1
    runs = {name: _live_settle_run(sess, check) for name, sess in sessions.items()}
    wall, ended = alternate_bursts(runs, SETTLE_BURST_S, "own_grid_only", "sequenced", SETTLE_CAP)
    seq, own = sessions["sequenced"], sessions["own_grid_only"]

    def figures(q: str) -> dict:
        a = [getattr(read_station(own.sim, st), q) for st in stations]
        b = [getattr(read_station(seq.sim, st), q) for st in stations]
        return {"stations": [st.name for st in stations], "own_grid_only": a, "sequenced": b,
                "largest_difference_fraction": max(abs(y - x) / abs(x) for x, y in zip(a, b))}

    return {"scenario": s.name, "nx": seq.sim.domain.nx, "ny": seq.sim.domain.ny,
            "criterion": f"residual figure up to x = {x_max:g} m below {SETTLE_TOLERANCE:g} for 50 steps, station "
                         f"mass flows within {SETTLE_MASS_TOLERANCE:g}",
            "timing": f"one run each, alternating bursts of {SETTLE_BURST_S:g} s, one process",
            "sequenced_wall_s": wall["sequenced"], "sequenced_fine_steps": seq.sim.steps,
            "coarse_levels": [vars(lv) for lv in seq._sequence.coarse],
            "own_grid_only_wall_s": wall["own_grid_only"], "own_grid_only_settled": ended["own_grid_only"] is not False,
            "own_grid_only_steps": own.sim.steps,
            "sequencing_speedup": wall["own_grid_only"] / wall["sequenced"],
            "mass_flow_kg_s": figures("mass_flow_kg_s"), "thrust_n": figures("thrust_n"),
            "load_average_1min": os.getloadavg()[0]}


def format_live_settle(r: dict) -> str:
    capped = "" if r["own_grid_only_settled"] else f" (stopped unsettled at {SETTLE_CAP:g}x: a lower bound)"
    return (f"page settle mode, {r['scenario']} at {r['nx']}x{r['ny']} ({r['timing']}; load average "
            f"{r['load_average_1min']:.2f}):\n"
            f"  with grid sequencing     {r['sequenced_wall_s']:7.1f} s to steady ({r['sequenced_fine_steps']} steps on "
            f"the user's grid after " + ", ".join(f"{lv['steps']} on {lv['nx']} ({lv['reason']})"
                                                   for lv in r["coarse_levels"]) + ")\n"
            f"  on the user's grid alone {r['own_grid_only_wall_s']:7.1f} s ({r['own_grid_only_steps']} steps){capped}\n"
            f"  gain from sequencing     {r['sequencing_speedup']:7.2f}x; mass flow and thrust differ by at most "
            f"{max(r['mass_flow_kg_s']['largest_difference_fraction'], r['thrust_n']['largest_difference_fraction']):.2%}")


def latency_phase(url: str, scenario: dict, samples: int) -> list[float]:
    """Seconds from sending a wall disc to the first frame whose pixel under it shows wall."""
    sock, _ = _connect(url)
    d = scenario["domain"]
    width_m = d["x_max_m"] - d["x_min_m"]
    dx = width_m / d["nx"]
    height_m = d["y_max_m"] - d["y_min_m"]
    out = []
    try:
        frame = None
        while frame is None:
            msg = sock.recv(timeout=10)
            if isinstance(msg, bytes):
                header, pixels = decode_frame(msg)
                if (header.width, header.height) == (FRAME_W, FRAME_H):
                    frame = pixels
        for k in range(samples):
            # Spots along the plume, right of the nozzle, in the lower third of the picture.
            x = d["x_min_m"] + width_m * (0.55 + 0.4 * k / max(samples - 1, 1))
            y = d["y_min_m"] + height_m * 0.15
            col = min(int((x - d["x_min_m"]) / width_m * FRAME_W), FRAME_W - 1)
            row = FRAME_H - 1 - min(int((y - d["y_min_m"]) / height_m * FRAME_H), FRAME_H - 1)
            cx = d["x_min_m"] + (col + 0.5) * width_m / FRAME_W
            cy = d["y_min_m"] + (FRAME_H - 1 - row + 0.5) * height_m / FRAME_H
            if frame[row, col] == WALL_LEVEL:
                continue
            shape = {"kind": "circle", "centre_m": [cx, cy], "radius_m": 2.5 * dx, "paints": "wall"}
            t0 = time.perf_counter()
            sock.send(json.dumps({"type": "add_shape", "shape": shape}))
            while True:
                msg = sock.recv(timeout=10)
                if isinstance(msg, bytes):
                    header, frame = decode_frame(msg)
                    if (header.width, header.height) == (FRAME_W, FRAME_H) and frame[row, col] == WALL_LEVEL:
                        out.append(time.perf_counter() - t0)
                        break
            time.sleep(0.2)
        for _ in out:
            sock.send(json.dumps({"type": "undo"}))
    finally:
        sock.close()
    return out


def _rss_bytes(pid: int) -> int:
    with open(f"/proc/{pid}/statm") as f:
        return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


def load_phase(server: "ServerProcess", clients: int, seconds: float) -> dict:
    """Several tabs at once, each in its own thread: frames per second each, and the server's memory growth."""
    import threading

    rss_before = _rss_bytes(server.proc.pid)
    counts = [0] * clients
    errors: list[str] = []
    start = threading.Barrier(clients + 1)

    def tab(k: int) -> None:
        try:
            sock, _ = _connect(server.url)
        except Exception as err:  # noqa: BLE001 - reported, not raised: the figure says how many tabs worked
            errors.append(f"{type(err).__name__}: {err}")
            start.wait()
            return
        try:
            start.wait()
            t0 = time.monotonic()
            while (now := time.monotonic()) - t0 < seconds:
                try:
                    msg = sock.recv(timeout=max(0.01, seconds - (now - t0)))
                except TimeoutError:
                    break
                if isinstance(msg, bytes):
                    counts[k] += 1
        finally:
            sock.close()

    threads = [threading.Thread(target=tab, args=(k,), daemon=True) for k in range(clients)]
    for th in threads:
        th.start()
    start.wait()
    for th in threads:
        th.join(seconds + 30)
    time.sleep(1.0)
    rss_after = _rss_bytes(server.proc.pid)
    fps = [c / seconds for c in counts]
    return {"clients": clients, "frames_per_s_each": fps, "frames_per_s_min": min(fps),
            "frames_per_s_median": statistics.median(fps), "connect_errors": errors,
            "server_rss_mb_before": rss_before / 2 ** 20, "server_rss_mb_after": rss_after / 2 ** 20,
            "server_rss_growth_percent": 100.0 * (rss_after / rss_before - 1.0)}


def big_sketch_scenario(polygons: int = 30, points: int = 15_000, seed: int = 7, base: str | None = None) -> dict:
    """The default nozzle (or the built-in `base`) with `polygons` wall polygons of `points` corners each (wavy
    rings, seeded), spread over its domain: the big sketch of the issue's goal (one more shape after 30 polygons
    of 15,000 points)."""
    import math

    import numpy as np
    from shockslate.solver import scenario as scn

    doc = scn.scenario_to_dict(scn.load_builtin(base or scn.DEFAULT_SCENARIO))
    d = doc["domain"]
    w, h = d["x_max_m"] - d["x_min_m"], d["y_max_m"] - d["y_min_m"]
    rng = np.random.default_rng(seed)
    t = np.linspace(0.0, 2.0 * math.pi, points, endpoint=False)
    for k in range(polygons):
        cx = d["x_min_m"] + w * rng.uniform(0.1, 0.9)
        cy = d["y_min_m"] + h * rng.uniform(0.15, 0.85)
        r = 0.1 * h * (1.0 + 0.2 * np.sin(7.0 * t + k))
        doc["sketch"]["shapes"].append({"kind": "polygon", "paints": "wall",
                                        "points_m": np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)]).tolist()})
    return doc


def sketch_change_phase(changes: int = 7) -> dict:
    """Server-side cost of one more shape on the big sketch, in this process with the server's own parts: the
    message parsed, the change applied to the flow (walls sampled again where it changed) and the autosave
    written, as the server does it (median over `changes` small wall discs). Also the whole-sketch geometry."""
    from shockslate.server import protocol as p
    from shockslate.server.persistence import ScenarioStore
    from shockslate.server.session import Session
    from shockslate.solver import scenario as scn
    from shockslate.solver.geometry import wall_geometry

    doc = big_sketch_scenario()
    scenario = scn.parse_scenario(doc)
    d = doc["domain"]
    w, h = d["x_max_m"] - d["x_min_m"], d["y_max_m"] - d["y_min_m"]
    with tempfile.TemporaryDirectory(prefix="shockslate-bench-") as folder:
        store = ScenarioStore(folder)
        session = Session(scenario, store.save_current)
        times = []
        for k in range(changes + 1):  # the first change after a load samples the whole sketch: not counted
            shape = {"kind": "circle", "centre_m": [d["x_min_m"] + w * (0.2 + 0.6 * k / changes),
                                                    d["y_min_m"] + 0.5 * h], "radius_m": 0.02 * h, "paints": "wall"}
            text = json.dumps({"type": "add_shape", "shape": shape, "id": k})
            t0 = time.perf_counter()
            message = p.parse_message(p.parse_json(text))
            new, document = session.unsaved_change(session.add_shape, message.shape)
            store.save_current(new, document)
            if k:
                times.append(time.perf_counter() - t0)
        autosave_mb = store.current_path.stat().st_size / 1e6
        whole = []
        for _ in range(3):
            sketch = scn.to_sketch(session.scenario)  # fresh shapes: nothing kept from an earlier sampling
            t0 = time.perf_counter()
            wall_geometry(sketch, session.sim.domain)
            whole.append(time.perf_counter() - t0)
    return {"sketch_change_s": statistics.median(times), "sketch_change_s_each": times,
            "whole_geometry_s": statistics.median(whole), "whole_geometry_s_each": whole,
            "polygons": 30, "points_per_polygon": 15_000, "grid": [d["nx"], session.sim.domain.ny],
            "autosave_mb": autosave_mb, "goal_s": 0.5}


def _recv_until(sock, want, timeout_s: float = 120.0):
    """Read messages until want(message) holds for a JSON one; that message (parsed), or TimeoutError."""
    deadline = time.monotonic() + timeout_s
    while True:
        msg = sock.recv(timeout=max(0.01, deadline - time.monotonic()))
        if isinstance(msg, str):
            data = json.loads(msg)
            if want(data):
                return data


def _note_frames(sock, arrivals: list[float], stop, poll_s: float, statuses: list | None = None,
                 held: list | None = None) -> None:
    """Note the arrival time of every binary frame on sock until stop is set or the socket closes (a thread);
    with `statuses`, also each status's (arrival time, revision); with `held`, also the arrival time of each
    held frame (channel 3: the newest frame again while a new grid is built), which is in `arrivals` too."""
    while not stop.is_set():
        try:
            msg = sock.recv(timeout=poll_s)
        except TimeoutError:
            continue
        except Exception:  # noqa: BLE001 - the socket closed at the end
            return
        if isinstance(msg, bytes):
            arrivals.append(time.monotonic())
            if held is not None and int.from_bytes(msg[14:16], "little") == 3:
                held.append(arrivals[-1])
        elif statuses is not None and '"type":"status"' in msg[:40].replace(" ", ""):
            statuses.append((time.monotonic(), json.loads(msg).get("revision")))


def _join_as_new_tab(url: str) -> tuple[float, float, int]:
    """A new tab in its own process (receiving 17 MB here would hold this process's GIL and stall a watcher
    thread): (monotonic time it connected, seconds from then to its hello, the hello's length)."""
    code = ("import json, sys, time\nfrom websockets.sync.client import connect\n"
            "with connect(sys.argv[1], max_size=None, open_timeout=30) as s:\n"
            "    t0 = time.perf_counter(); print('go', flush=True); hello = s.recv(timeout=120)\n"
            "    print(time.perf_counter() - t0, len(hello), flush=True)\n")
    newcomer = subprocess.Popen([sys.executable, "-c", code, url.replace("http://", "ws://") + "/ws"],
                                stdout=subprocess.PIPE, text=True)
    newcomer.stdout.readline()  # connected: the server makes the hello from now on
    joined = time.monotonic()
    seconds, size = newcomer.stdout.readline().split()
    newcomer.wait(30)
    return joined, float(seconds), int(size)


def _longest_gap(times: list[float]) -> float:
    return max((b - a for a, b in zip(times, times[1:])), default=float("nan"))


def sketch_roundtrip_phase(threads: int | None = None, repeats: int = 5) -> dict:
    """The big sketch (30 polygons of 15,000 points) as a user meets it: a real server process and real
    websocket tabs. Seconds from sending `add_shape` (and its `undo`) to its acknowledgement at the sender and
    to the change reaching a second tab; bytes each tab received for it; and seconds a new tab waits for its
    `hello`, with the longest gap between frames another tab saw meanwhile (beside the longest gap before)."""
    import threading

    # on the blast room; the same sketch on the nozzle (whose live status reads the drawn nozzle from every
    # shape, solver/nozzle.py) is nozzle_sketch_phase
    doc = big_sketch_scenario(base="blast_room")
    d = doc["domain"]
    w, h = d["x_max_m"] - d["x_min_m"], d["y_max_m"] - d["y_min_m"]
    server = ServerProcess(doc, threads)
    out: dict = {"polygons": 30, "points_per_polygon": 15_000, "goal_s": 0.5}
    try:
        server.wait_running(timeout_s=600)
        t0 = time.perf_counter()
        sender, hello = _connect(server.url)
        out["first_hello_s"] = time.perf_counter() - t0
        other, _ = _connect(server.url)
        adds, undos, reach_other, sent_bytes = [], [], [], []
        for k in range(repeats):
            shape = {"kind": "circle", "centre_m": [d["x_min_m"] + w * (0.2 + 0.6 * k / max(repeats - 1, 1)),
                                                    d["y_min_m"] + 0.5 * h], "radius_m": 0.02 * h, "paints": "wall"}
            for kind, times in (("add_shape", adds), ("undo", undos)):
                rid = f"{kind}{k}"
                body = {"type": kind, "id": rid, **({"shape": shape} if kind == "add_shape" else {})}
                t0 = time.perf_counter()
                sender.send(json.dumps(body))
                ack = _recv_until(sender, lambda m: m.get("id") == rid)
                times.append(time.perf_counter() - t0)
                if ack["type"] == "error":
                    raise RuntimeError(f"{kind} refused: {ack}")
                revision = ack["revision"]
                seen = _recv_until(other, lambda m: m.get("revision") == revision and
                                   m.get("type") in ("scenario", "sketch_change"))
                reach_other.append(time.perf_counter() - t0)
                sent_bytes.append(len(json.dumps(seen)))
        out.update({"sketch_change_roundtrip_s": statistics.median(adds), "add_shape_s_each": adds,
                    "undo_roundtrip_s": statistics.median(undos), "undo_s_each": undos,
                    "other_tab_s": statistics.median(reach_other), "message_bytes_median": statistics.median(sent_bytes)})
        # a new tab's hello, while the other tab watches frames
        arrivals: list[float] = []
        stop = threading.Event()

        watcher = threading.Thread(target=_note_frames, args=(other, arrivals, stop, 0.2), daemon=True)
        watcher.start()
        time.sleep(3.0)
        joined, out["new_tab_hello_s"], out["hello_bytes"] = _join_as_new_tab(server.url)
        time.sleep(1.0)
        stop.set()
        watcher.join(5)

        def longest_gap(times: list[float]) -> float:
            return max((b - a for a, b in zip(times, times[1:])), default=float("nan"))

        out["frame_gap_s_before_join"] = longest_gap([a for a in arrivals if a < joined])
        out["frame_gap_s_during_join"] = longest_gap([a for a in arrivals if a >= joined - 0.2])
        sender.close()
        other.close()
    finally:
        server.stop()
    return out


def nozzle_sketch_phase(threads: int | None = None, repeats: int = 6, settle_s: float = 3.0) -> dict:
    """The big sketch (30 polygons of 15,000 points) on the default NOZZLE, whose live status reads the drawn
    nozzle from every shape (solver/nozzle.py): a real server process running the flow and two real websocket
    tabs. For each add_shape (the first one right after the server started with this sketch: the first change
    after a load), seconds to its acknowledgement and to the first status of its revision at the other tab,
    and the longest gap between frames that tab saw while the changes were made (beside the longest before;
    a gap is the solver's thread held by something else)."""
    import threading

    doc = big_sketch_scenario()
    d = doc["domain"]
    w, h = d["x_max_m"] - d["x_min_m"], d["y_max_m"] - d["y_min_m"]
    server = ServerProcess(doc, threads)
    out: dict = {"base": doc["name"], "polygons": 30, "points_per_polygon": 15_000, "goal_s": 0.5}
    try:
        server.wait_running(timeout_s=600)
        watcher, _ = _connect(server.url)
        sender, _ = _connect(server.url)
        frames: list[float] = []
        statuses: list[tuple[float, int]] = []
        stop = threading.Event()
        thread = threading.Thread(target=_note_frames, args=(watcher, frames, stop, 0.2, statuses), daemon=True)
        thread.start()
        time.sleep(settle_s)
        began = time.monotonic()
        acks, to_status = [], []
        for k in range(repeats):
            shape = {"kind": "circle", "centre_m": [d["x_min_m"] + w * (0.2 + 0.6 * k / max(repeats - 1, 1)),
                                                    d["y_min_m"] + 0.5 * h], "radius_m": 0.02 * h, "paints": "wall"}
            rid = f"nozzle{k}"
            t0 = time.monotonic()
            sender.send(json.dumps({"type": "add_shape", "id": rid, "shape": shape}))
            ack = _recv_until(sender, lambda m: m.get("id") == rid)
            acks.append(time.monotonic() - t0)
            if ack["type"] == "error":
                raise RuntimeError(f"add_shape refused: {ack}")
            deadline = time.monotonic() + 120.0
            while not any(r == ack["revision"] for _, r in statuses) and time.monotonic() < deadline:
                time.sleep(0.005)
            to_status.append(min((t for t, r in statuses if r == ack["revision"]), default=float("nan")) - t0)
            time.sleep(0.5)
        ended = time.monotonic()
        stop.set()
        thread.join(5)
        sender.close()
        watcher.close()
        out.update({"first_change_s": acks[0], "sketch_change_roundtrip_s": statistics.median(acks[1:]),
                    "add_shape_s_each": acks, "status_after_change_s": statistics.median(to_status),
                    "status_after_change_s_each": to_status,
                    "frame_gap_s_before": _longest_gap([t for t in frames if t < began]),
                    "frame_gap_s_during": _longest_gap([t for t in frames if began - 0.2 <= t <= ended])})
    finally:
        server.stop()
    return out


def join_phase(threads: int | None = None, joins: int = 5, settle_s: float = 2.0) -> dict:
    """New tabs joining a server that holds the big sketch (30 polygons of 15,000 points, on the blast room): for
    each of `joins` tabs (each in its own process, so receiving its 17 MB hello does not hold this process), the
    seconds to its hello and the longest gap between frames another tab saw from its joining until one second
    after; beside that tab's longest gap over the same time before the first join."""
    import threading

    server = ServerProcess(big_sketch_scenario(base="blast_room"), threads)
    out: dict = {"polygons": 30, "points_per_polygon": 15_000}
    try:
        server.wait_running(timeout_s=600)
        watcher, _ = _connect(server.url)
        arrivals: list[float] = []
        stop = threading.Event()
        thread = threading.Thread(target=_note_frames, args=(watcher, arrivals, stop, 0.2), daemon=True)
        thread.start()
        time.sleep(settle_s)
        quiet = [a for a in arrivals if a >= time.monotonic() - settle_s]
        hellos, gaps, size = [], [], 0
        for _ in range(joins):
            joined, seconds, size = _join_as_new_tab(server.url)
            hellos.append(seconds)
            time.sleep(1.0)
            gaps.append(_longest_gap([a for a in arrivals if a >= joined - 0.2]))
        stop.set()
        thread.join(5)
        watcher.close()
        out.update({"hello_bytes": size, "new_tab_hello_s": statistics.median(hellos), "hello_s_each": hellos,
                    "frame_gap_s_during_join_max": max(gaps), "frame_gap_s_each_join": gaps,
                    "frame_gap_s_before": _longest_gap(quiet)})
    finally:
        server.stop()
    return out


def page_sketch_phase(threads: int | None = None, changes: int = 6) -> dict | None:
    """The real page in headless Chromium on the big sketch (30 polygons of 15,000 points): seconds from the page
    sending `add_shape` to its next drawing showing the new shape (median over `changes`; the first change after a
    load samples the whole sketch). None when playwright or Chromium is missing."""
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        return None
    if not Path("/usr/bin/chromium").exists():
        return None
    doc = big_sketch_scenario(base="blast_room")
    d = doc["domain"]
    w, h = d["x_max_m"] - d["x_min_m"], d["y_max_m"] - d["y_min_m"]
    server = ServerProcess(doc, threads)
    try:
        server.wait_running(timeout_s=600)
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path="/usr/bin/chromium", headless=True,
                                        args=["--no-sandbox", "--disable-gpu"])
            try:
                page = browser.new_page(viewport={"width": 1280, "height": 900})
                t0 = time.perf_counter()
                page.goto(server.url + "/")
                page.wait_for_function("window.shockslate && window.shockslate.scenario && "
                                       "window.shockslate.framesDrawn > 0", timeout=300_000)
                opened = time.perf_counter() - t0
                times = []
                for k in range(changes):
                    shape = {"kind": "circle", "centre_m": [d["x_min_m"] + w * (0.2 + 0.6 * k / max(changes - 1, 1)),
                                                            d["y_min_m"] + 0.5 * h], "radius_m": 0.02 * h,
                             "paints": "wall"}
                    ms = page.evaluate("""s => new Promise(done => {
                      const app = window.shockslate, n = app.scenario.sketch.shapes.length, t0 = performance.now();
                      app.send('add_shape', {shape: s});
                      const poll = () => {
                        if (app.scenario.sketch.shapes.length !== n + 1) return setTimeout(poll, 1);
                        const drawn = app.framesDrawn;  // the next drawing after the sketch changed shows it
                        const wait = () => app.framesDrawn > drawn ? done(performance.now() - t0)
                                                                   : requestAnimationFrame(wait);
                        requestAnimationFrame(wait);
                      };
                      poll();
                    })""", shape)
                    times.append(ms / 1000)
            finally:
                browser.close()
    finally:
        server.stop()
    return {"page_sketch_change_s": statistics.median(times), "page_sketch_change_s_each": times,
            "page_open_to_first_drawing_s": opened}


def resolution_change_phase(url: str, resolutions: tuple[int, ...] = (1024, 512, 2048, 512),
                            before_s: float = 3.0) -> dict:
    """Frames per second one tab receives while another changes the resolution (each change from sending it
    to its acknowledgement), how many of them were held frames (the newest frame again, marked so, while no new
    one came), the longest gap between two frames, how long each change took, and the frames per second of the
    same tab in the `before_s` seconds before it (the grid being left sets that: a step of a big grid takes long)."""
    import threading

    watcher, _ = _connect(url)
    arrivals: list[float] = []
    held: list[float] = []
    stop = threading.Event()

    thread = threading.Thread(target=_note_frames, args=(watcher, arrivals, stop, 0.5, None, held), daemon=True)
    thread.start()
    changer, _ = _connect(url)
    changes = []
    try:
        for n, nx in enumerate(resolutions):
            rid = f"res{n}"
            time.sleep(before_s)
            t0 = time.monotonic()
            before = sum(t0 - before_s <= a < t0 for a in arrivals) / before_s
            changer.send(json.dumps({"type": "set_resolution", "nx": nx, "id": rid}))
            while True:
                msg = changer.recv(timeout=300)
                if isinstance(msg, str) and json.loads(msg).get("id") == rid:
                    break
            t1 = time.monotonic()
            frames = sum(t0 <= a <= t1 for a in arrivals)
            during = [t0] + [a for a in arrivals if t0 <= a <= t1] + [t1]
            changes.append({"nx": nx, "seconds": t1 - t0, "frames": frames, "frames_per_s": frames / (t1 - t0),
                            "held_frames": sum(t0 <= a <= t1 for a in held), "longest_gap_s": _longest_gap(during),
                            "frames_per_s_before": before})
    finally:
        stop.set()
        changer.close()
        watcher.close()
        thread.join(5)
    return {"changes": changes, "frames_per_s_min": min(c["frames_per_s"] for c in changes), "goal_frames_per_s": 10}


def resolution_only(threads: int | None = None, rounds: int = 1, develop_s: float = 3.0) -> dict:
    """resolution_change_phase on a fresh server of the benchmark scenario, `rounds` times (one server each), with
    the load average before each round (the machine may be shared)."""
    out = []
    for _ in range(rounds):
        load = os.getloadavg()[0]
        server = ServerProcess(bench_scenario(), threads)
        try:
            server.wait_running()
            time.sleep(develop_s)
            out.append({**resolution_change_phase(server.url), "load_average_1min": load})
        finally:
            server.stop()
    return {"rounds": out, "frames_per_s_min": min(r["frames_per_s_min"] for r in out), "goal_frames_per_s": 10,
            "cpu_count": os.cpu_count()}


def format_resolution_only(r: dict) -> str:
    lines = [f"resolution changes on the serving benchmark's grid (512 wide to 1024, 512, 2048, 512); "
             f"{r['cpu_count']} CPUs; another tab's frames/s at least {r['frames_per_s_min']:.1f} (goal 10)"]
    for k, rnd in enumerate(r["rounds"], 1):
        lines.append(f"  round {k} (load average {rnd['load_average_1min']:.2f} before):")
        for c in rnd["changes"]:
            lines.append(f"    to nx {c['nx']:5d}  {c['seconds']:5.2f} s  {c['frames']:4d} frames ({c['held_frames']} held) "
                         f"{c['frames_per_s']:5.1f}/s, longest gap {c['longest_gap_s']:.2f} s; "
                         f"{c['frames_per_s_before']:.1f}/s before")
    return "\n".join(lines)


def _peak_rss_bytes(pid: int) -> int:
    with open(f"/proc/{pid}/status") as f:
        for line in f:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024
    return 0


def long_segment_phase(server: "ServerProcess") -> dict:
    """The issue's segment from (-1e6, -1e6) m to (0.2, 0.05) m: seconds to its answer and the server's peak
    memory growth (VmHWM); also a segment reaching as far as a shape may (10 domain sizes), which is accepted."""
    sock, hello = _connect(server.url)
    d = hello["scenario"]["domain"]
    size = max(d["x_max_m"] - d["x_min_m"], d["y_max_m"] - d["y_min_m"])
    out = {}
    try:
        for name, start in (("issue_segment", [-1e6, -1e6]),
                            ("farthest_allowed", [d["x_min_m"] - 9.9 * size, d["y_min_m"] - 9.9 * size])):
            peak = _peak_rss_bytes(server.proc.pid)
            shape = {"kind": "segment", "start_m": start, "end_m": [0.2, 0.05], "width_m": 0.002, "paints": "wall"}
            t0 = time.perf_counter()
            sock.send(json.dumps({"type": "add_shape", "shape": shape, "id": name}))
            while True:
                msg = sock.recv(timeout=60)
                if isinstance(msg, str) and json.loads(msg).get("id") == name:
                    reply = json.loads(msg)
                    break
            seconds = time.perf_counter() - t0
            out[name] = {"answer": reply["type"], "seconds": seconds,
                         "peak_rss_growth_mb": (_peak_rss_bytes(server.proc.pid) - peak) / 2 ** 20}
            if reply["type"] == "scenario":
                sock.send(json.dumps({"type": "undo"}))
    finally:
        sock.close()
    out["goal"] = {"seconds": 0.2, "memory_mb": 50}
    return out


def first_frame_phase(timeout_s: float = 300.0) -> dict:
    """A fresh `shockslate serve` on the built-in default scenario, as `make run` starts it: seconds from the
    address being printed to the first frame reaching a tab that connects at that moment (the first-hour goal:
    under 10 s after set-up, which compiles the kernels into the shared cache)."""
    server = ServerProcess(None)
    try:
        deadline = time.monotonic() + timeout_s
        printed = None
        while printed is None and time.monotonic() < deadline:
            if "shockslate: open" in server.log_path.read_text(errors="replace"):
                printed = time.monotonic()
                break
            if server.proc.poll() is not None:
                raise RuntimeError(f"server exited: {server.log_path.read_text()[-2000:]}")
            time.sleep(0.01)
        if printed is None:
            raise RuntimeError("the server printed no address in time")
        while True:  # the socket opens once uvicorn listens, a moment after the address is printed
            try:
                sock, _ = _connect(server.url)
                break
            except OSError:
                if time.monotonic() > deadline:
                    raise
                time.sleep(0.01)
        try:
            while True:
                msg = sock.recv(timeout=max(1.0, deadline - time.monotonic()))
                if isinstance(msg, bytes):
                    first = time.monotonic()
                    break
        finally:
            sock.close()
    finally:
        server.stop()
    return {"process_start_to_address_s": printed - server.started, "address_to_first_frame_s": first - printed}


def run_serve_bench(phase_s: float = 5.0, latency_samples: int = 8, develop_s: float = 3.0,
                    threads: int | None = None, load_clients: int = 8, rounds: int = SLOWDOWN_ROUNDS) -> dict:
    first_frame = first_frame_phase()
    sketch_change = sketch_change_phase()
    roundtrip = sketch_roundtrip_phase(threads)
    page_sketch = page_sketch_phase(threads)
    if page_sketch is not None:
        roundtrip.update(page_sketch)
    nozzle_sketch = nozzle_sketch_phase(threads)
    joins = join_phase(threads)
    scenario = bench_scenario()
    server = ServerProcess(scenario, threads)
    try:
        start = time.monotonic()
        first = server.wait_running()
        start_s = time.monotonic() - start
        time.sleep(develop_s)  # a developed flow, not the initial condition
        slow = slowdown_phase(server.url, phase_s, rounds)
        latencies = latency_phase(server.url, scenario, latency_samples)
        load = load_phase(server, load_clients, 2 * phase_s) if load_clients > 0 else None
        segment = long_segment_phase(server)
        resolution = resolution_change_phase(server.url)
        health = _health(server.url)
    finally:
        server.stop()
    return {
        "grid": [scenario["domain"]["nx"], first["cells"] // scenario["domain"]["nx"]],
        "frame_size": slow["frame_size"],
        "start_to_running_s": start_s,
        "frames_per_s": slow["frames_per_s"],
        "frames_per_s_phases": slow["frames_per_s_phases"],
        "latency_ms_median": 1e3 * statistics.median(latencies) if latencies else None,
        "latency_ms_max": 1e3 * max(latencies) if latencies else None,
        "latency_samples": len(latencies),
        "cell_updates_per_s_without_client": slow["cell_updates_per_s_without_client"],
        "cell_updates_per_s_with_client": slow["cell_updates_per_s_with_client"],
        "phases_without_client": slow["phases_without_client"],
        "phases_with_client": slow["phases_with_client"],
        "pair_ratios": slow["pair_ratios"],
        "solver_slowdown_percent": (100.0 * slow["serve_slowdown_fraction"]
                                    if slow["serve_slowdown_fraction"] is not None else None),
        "serve_slowdown_fraction": slow["serve_slowdown_fraction"],
        "first_frame": first_frame,
        "load": load,
        "sketch_change_s": sketch_change["sketch_change_s"],
        "whole_geometry_s": sketch_change["whole_geometry_s"],
        "sketch_change": sketch_change,
        "sketch_change_roundtrip_s": roundtrip["sketch_change_roundtrip_s"],
        "sketch_roundtrip": roundtrip,
        "nozzle_sketch": nozzle_sketch,
        "joins": joins,
        "resolution_change": resolution,
        "long_segment": segment,
        "numba_threading_layer": health.get("threading_layer"),
        "solver_threads": threads or "all cores",
        "cpu_count": os.cpu_count(),
        "load_average_1min": os.getloadavg()[0],
        "goals": {"frames_per_s": 30, "latency_ms": 150, "slowdown_percent": 10, "first_frame_s": 10},
    }


def print_report(r: dict) -> None:
    print(f"serving benchmark: grid {r['grid'][0]}x{r['grid'][1]}, frames {r['frame_size'][0]}x{r['frame_size'][1]}, "
          f"one loopback client; {r['cpu_count']} CPUs, load average {r['load_average_1min']:.2f}, "
          f"numba threading layer {r['numba_threading_layer']}, solver threads {r['solver_threads']}")
    _print_streaming(r)
    if r["latency_ms_median"] is not None:
        print(f"  shape -> frame latency  {r['latency_ms_median']:6.0f} ms median, {r['latency_ms_max']:.0f} ms max "
              f"over {r['latency_samples']} shapes (goal < 150 ms)")
    print(f"  start to running        {r['start_to_running_s']:6.1f} s")
    ff = r.get("first_frame")
    if ff:
        print(f"  first frame             {ff['address_to_first_frame_s']:6.1f} s after the address was printed "
              f"(goal < 10 s; {ff['process_start_to_address_s']:.1f} s from process start to the address)")
    load = r.get("load")
    if load:
        print(f"  load: {load['clients']} tabs at once  {load['frames_per_s_min']:6.1f} frames/s for the slowest, "
              f"{load['frames_per_s_median']:.1f} median; server memory {load['server_rss_mb_before']:.0f} -> "
              f"{load['server_rss_mb_after']:.0f} MB ({load['server_rss_growth_percent']:+.1f} %)"
              + (f"; {len(load['connect_errors'])} tabs could not connect" if load["connect_errors"] else ""))
    sc = r.get("sketch_change")
    if sc:
        print(f"  one more shape          {sc['sketch_change_s']:6.3f} s median (goal < 0.5 s) after {sc['polygons']} "
              f"polygons of {sc['points_per_polygon']} points, parsed + applied + saved ({sc['autosave_mb']:.1f} MB); "
              f"whole-sketch geometry {sc['whole_geometry_s']:.3f} s")
    rt = r.get("sketch_roundtrip")
    if rt:
        print(f"  one more shape, live    {rt['sketch_change_roundtrip_s']:6.3f} s median from add_shape to its "
              f"acknowledgement (goal < 0.5 s), undo {rt['undo_roundtrip_s']:.3f} s, to another tab "
              f"{rt['other_tab_s']:.3f} s, {rt['message_bytes_median']:.0f} bytes per change; a new tab's hello "
              f"({rt['hello_bytes'] / 1e6:.1f} MB) {rt['new_tab_hello_s']:.2f} s, another tab's longest frame gap "
              f"meanwhile {rt['frame_gap_s_during_join']:.2f} s ({rt['frame_gap_s_before_join']:.2f} s before)")
    if rt and "page_sketch_change_s" in rt:
        print(f"  one more shape, page    {rt['page_sketch_change_s']:6.3f} s median from the page's add_shape to its "
              f"sketch drawn (Chromium); page open to first drawing {rt['page_open_to_first_drawing_s']:.1f} s")
    nz = r.get("nozzle_sketch")
    if nz:
        print(f"  one more shape, nozzle  {nz['sketch_change_roundtrip_s']:6.3f} s median to its acknowledgement "
              f"(goal < 0.5 s), the first after start {nz['first_change_s']:.3f} s, its status at another tab "
              f"{nz['status_after_change_s']:.3f} s; longest frame gap meanwhile {nz['frame_gap_s_during']:.2f} s "
              f"({nz['frame_gap_s_before']:.2f} s before)")
    jn = r.get("joins")
    if jn:
        print(f"  tabs joining            hello ({jn['hello_bytes'] / 1e6:.1f} MB) {jn['new_tab_hello_s']:6.3f} s median; "
              f"another tab's longest frame gap per join {max(jn['frame_gap_s_each_join']):.2f} s at most "
              f"({jn['frame_gap_s_before']:.2f} s before)")
    rc = r.get("resolution_change")
    if rc:
        print(f"  resolution changes      {rc['frames_per_s_min']:6.1f} frames/s at least to another tab (goal 10); "
              + ", ".join(f"to nx {c['nx']} {c['seconds']:.1f} s {c['frames_per_s']:.0f}/s "
                          f"({c.get('held_frames', 0)} held, longest gap {c.get('longest_gap_s', 0):.2f} s; "
                          f"{c['frames_per_s_before']:.0f}/s before)" for c in rc["changes"]))
    seg = r.get("long_segment")
    if seg:
        for name in ("issue_segment", "farthest_allowed"):
            x = seg[name]
            print(f"  {name.replace('_', ' '):23s} {x['answer']} in {x['seconds']:.3f} s, peak memory "
                  f"+{x['peak_rss_growth_mb']:.1f} MB (goal 0.2 s, 50 MB)")
