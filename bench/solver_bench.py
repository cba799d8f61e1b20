"""`shockslate bench`: solver speed, start-up time and memory, beside a plain NumPy baseline, and what streaming to
one tab costs the live server's solver (`serve_slowdown_fraction`, measure_serving).

Settle mode (solver/settle.py) is timed against time-accurate stepping to the same steady criterion on
nozzle_sea_level at its own resolution (`settle_speedup`, measure_settle).

Speed is cell updates per second (one full time step of one cell = one update), the median of
several timed bursts on a developed flow (a blast in a closed box of walls; planar, HLLC, MUSCL with van Leer's
limiter, SSP-RK2, CFL 0.4: bench_numerics, the scheme of the bare kernel; `scheme` names it. The product's default
limiter adds minmod at shocks, which costs nothing where no cell is marked).
Beside it, in the same process and run so that ratios are fair on a noisy shared machine: the bare kernel
(bench/bare_kernel.py, the same scheme with nothing else, timed in alternating bursts with the product:
`product_over_bare`) and the NumPy baseline (bench/numpy_baseline.py).
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

GRIDS = ((256, 128), (512, 256), (1024, 512), (2048, 1024))
GOALS = {
    "cell_updates_per_s_2_threads_512x256": 20e6,
    "ratio_to_numpy_2_threads_512x256": 20.0,
    "cell_updates_per_s_1_thread_512x256": 10e6,
    "warm_start_s": 2.0,
    "bytes_per_cell_2048x1024": 300.0,
    "product_over_bare_2_threads_512x256": 0.85,
    "settle_speedup": 5.0,
    "serve_slowdown_fraction_below": 0.10,
}
#: Settle mode against time-accurate stepping: the scenario, and the steady criterion both runs are held to
#: (settle.SettleCheck: residual figure inside the nozzle, up to its exit station, below the tolerance for 50
#: steps and throat and exit mass flows within 0.5 %; the free jet beyond the exit never settles).
SETTLE_SCENARIO = "nozzle_sea_level"
SETTLE_TOLERANCE = 1.0e-2
SETTLE_MASS_TOLERANCE = 0.005
#: The time-accurate run stops at this multiple of the settle run's wall time if it has not settled by then:
#: the speedup is then at least the cap (reported as capped), and the benchmark ends in bounded time. Well above
#: the measured speedup (8.0 capped, 2026-12-03), so that the time-accurate run reaches its own steady state and the
#: station figures compare two steady states.
SETTLE_CAP = 20.0


def _baseline_module():
    from . import numpy_baseline

    return numpy_baseline


def blast_initial(nx: int, ny: int):
    """A developed-flow start: a hot, dense disc off centre in still air, in a 2:1 box (SI)."""
    x = (np.arange(nx) + 0.5) / nx * 2.0
    y = (np.arange(ny) + 0.5) / ny * (2.0 * ny / nx)
    xx, yy = np.meshgrid(x, y)
    hot = (xx - 0.7) ** 2 + (yy - 0.45 * yy.max()) ** 2 < (0.12 * 2.0) ** 2
    rho = np.where(hot, 4.0, 1.2)
    p = np.where(hot, 1.0e6, 1.0e5)
    return rho, np.zeros_like(rho), np.zeros_like(rho), p


def bench_numerics():
    """The scheme the bare kernel and the NumPy baseline implement (HLLC, MUSCL with van Leer's limiter, SSP-RK2):
    the product is timed with it, not with its default limiter (van Leer with minmod at shocks), so that the ratios
    compare one scheme."""
    from shockslate.solver.numerics import Numerics

    return Numerics(order=2, limiter="van_leer", flux="hllc", integrator="ssp_rk2")


def build_box(nx: int, ny: int):
    from shockslate.solver.domain import Domain
    from shockslate.solver.simulation import Edges, Setup, Simulation

    dom = Domain(0.0, 2.0, 0.0, 2.0 * ny / nx, nx)
    sim = Simulation(Setup(domain=dom, edges=Edges("wall", "wall", "wall", "wall"), numerics=bench_numerics()))
    sim.set_primitive(*blast_initial(nx, ny))
    return sim


def wall_sketch():
    """Walls drawn across the box of build_box: a polygon rotated off the grid, a disc and a sloped strip."""
    import math

    from shockslate.solver.shapes import Circle, Polygon, Sketch, Stroke

    c, s = math.cos(math.radians(23.0)), math.sin(math.radians(23.0))
    square = tuple((1.45 + 0.15 * (c * x - s * y), 0.3 + 0.15 * (s * x + c * y)) for x, y in ((-1, -1), (1, -1), (1, 1), (-1, 1)))
    return Sketch((Polygon(square, "wall"), Circle((0.25, 0.75), 0.12, "wall"),
                   Stroke(((0.9, 0.05), (1.3, 0.7), (1.9, 0.85)), 0.03, "wall")))


def build_walled_box(nx: int, ny: int):
    """build_box with walls drawn inside it (cut cells), the same grid and the same blast."""
    from shockslate.solver.domain import Domain
    from shockslate.solver.geometry import wall_geometry
    from shockslate.solver.simulation import Edges, Setup, Simulation

    dom = Domain(0.0, 2.0, 0.0, 2.0 * ny / nx, nx)
    geo = wall_geometry(wall_sketch(), dom)
    sim = Simulation(Setup(domain=dom, edges=Edges("wall", "wall", "wall", "wall"), numerics=bench_numerics()),
                     geo.mask, geo)
    sim.set_primitive(*blast_initial(nx, ny))
    return sim


def scheme_label() -> str:
    """The scheme the benchmark times (bench_numerics), named from the solver's own tables."""
    from shockslate.solver.numerics import FLUXES, INTEGRATOR_CHOICES, LIMITERS

    n = bench_numerics()
    return (f"planar, closed box of walls, {FLUXES[n.flux].label}, MUSCL {LIMITERS[n.limiter].label} "
            f"(limiter {n.limiter}), {INTEGRATOR_CHOICES[n.integrator].label}, CFL {n.cfl:g}")


def wall_path_face_share(sim) -> float:
    """The fraction of a simulation's x- and y-faces with a wall cell in their stencil (solver/face_paths.py): the
    faces that need the general stencil; the rest could run a lean one."""
    return sim._face_paths.general_face_share


def measure_walls(nx: int, ny: int, threads: int, repeats: int) -> tuple[float, float]:
    """(plain box, box with drawn walls) cell updates per second on the same grid, alternating bursts."""
    import numba

    numba.set_num_threads(threads)
    plain, walled = build_box(nx, ny), build_walled_box(nx, ny)
    develop = max(3, _steps_for(nx * ny) // 2)
    plain.advance(develop)
    walled.advance(develop)
    steps = _steps_for(nx * ny)
    a, b = [], []
    for _ in range(repeats):
        a.append(_median_rate(plain.step, nx * ny, steps, 1))
        b.append(_median_rate(walled.step, nx * ny, steps, 1))
    return statistics.median(a), statistics.median(b)


def _median_rate(step, cells: int, steps: int, repeats: int) -> float:
    rates = []
    for _ in range(repeats):
        t = time.perf_counter()
        for _ in range(steps):
            step()
        rates.append(cells * steps / (time.perf_counter() - t))
    return statistics.median(rates)


def _steps_for(cells: int) -> int:
    return max(2, int(4e6 // cells))


def measure_solver(nx: int, ny: int, threads: int, repeats: int) -> tuple[float, float]:
    """(product, bare kernel) cell updates per second, timed in alternating bursts so noise hits both alike."""
    import numba

    from .bare_kernel import BareBox

    numba.set_num_threads(threads)
    sim = build_box(nx, ny)
    bare = BareBox(*blast_initial(nx, ny), dx_m=2.0 / nx)
    develop = max(3, _steps_for(nx * ny) // 2)
    sim.advance(develop)  # develop the flow before timing
    for _ in range(develop):
        bare.step()
    steps = _steps_for(nx * ny)
    product, bare_rates = [], []
    for _ in range(repeats):
        product.append(_median_rate(sim.step, nx * ny, steps, 1))
        bare_rates.append(_median_rate(bare.step, nx * ny, steps, 1))
    return statistics.median(product), statistics.median(bare_rates)


def measure_numpy(nx: int, ny: int, repeats: int) -> float:
    base = _baseline_module()
    box = base.NumpyBox(*blast_initial(nx, ny), dx_m=2.0 / nx)
    box.step()
    steps = max(1, int(2e5 // (nx * ny)))
    return _median_rate(box.step, nx * ny, steps, repeats)


def measure_warm_start() -> float:
    """Seconds from starting a fresh Python process to the first finished step (warm JIT cache)."""
    code = "from shockslate.bench.solver_bench import build_box; build_box(256, 128).step()"
    env = dict(os.environ)
    times = []
    for _ in range(3):  # the first run may fill the cache
        t = time.perf_counter()
        subprocess.run([sys.executable, "-c", code], check=True, env=env)
        times.append(time.perf_counter() - t)
    return min(times[1:])


def _rss_bytes() -> int:
    with open("/proc/self/statm") as f:
        return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


def measure_memory(nx: int, ny: int) -> tuple[float, float]:
    """(bytes per cell held by the simulation's arrays, resident growth per cell) at nx x ny."""
    before = _rss_bytes()
    sim = build_box(nx, ny)
    sim.step()
    grown = _rss_bytes() - before
    arrays = sum(v.nbytes for v in vars(sim).values() if isinstance(v, np.ndarray))
    return arrays / (nx * ny), grown / (nx * ny)


#: Wall time of one burst of each run when settle mode and time-accurate stepping alternate.
SETTLE_BURST_S = 0.5


def _settle_run(s, nx, x_max: float, check):
    """Settle mode to the criterion, a step at a time (a generator): grid sequencing, then local time steps.
    Returns (the simulation, its coarse levels, settled)."""
    from shockslate.solver import settle
    from shockslate.solver.scenario import build_simulation

    fast = build_simulation(s, nx)
    levels = yield from settle.settle_coarse_steps(lambda n: build_simulation(s, n), fast, settle.DEFAULT_LEVELS,
                                                   x_max_m=x_max)
    stepper, chk = settle.LocalStepper(fast), check(fast)
    while True:
        stepper.step()
        if chk.after_step(stepper.dt):
            return fast, levels, True
        yield


def _plain_run(sim, chk):
    """Time-accurate steps to the criterion, a step at a time (a generator); returns True once steady."""
    while True:
        if chk.after_step(sim.step()):
            return True
        yield


def alternate_bursts(runs: dict, burst_s: float, capped: str, reference: str, cap: float) -> tuple[dict, dict]:
    """Advance the generators `runs` (name -> generator) in turn, burst_s of wall time each, until each has
    returned, so that the load of a shared machine hits them alike. Run `capped` stops once its wall time passes
    cap times that of `reference` after that one ended. Returns (wall seconds, return values) by name; a stopped
    run's value is False."""
    wall = {name: 0.0 for name in runs}
    ended: dict = {}
    while len(ended) < len(runs):
        for name, run in runs.items():
            if name in ended:
                continue
            if name == capped and reference in ended and wall[name] > cap * wall[reference]:
                ended[name] = False  # stopped unfinished: the gain is at least the cap
                continue
            t = time.perf_counter()
            try:
                while time.perf_counter() - t < burst_s:
                    next(run)
            except StopIteration as end:
                ended[name] = end.value
            wall[name] += time.perf_counter() - t
    return wall, ended


def measure_settle(scenario=SETTLE_SCENARIO, nx: int | None = None, tolerance: float = SETTLE_TOLERANCE,
                   cap: float = SETTLE_CAP) -> dict:
    """Wall time to the same steady criterion by settle mode (grid sequencing, then local time steps) and by
    time-accurate stepping, one run each, in alternating bursts of SETTLE_BURST_S in this process so that the
    load of a shared machine hits both alike; and the station figures both end with. The settle run's wall time
    includes its coarse grid."""
    from shockslate.solver import settle
    from shockslate.solver.batch import resolve_scenario
    from shockslate.solver.diagnostics import read_station
    from shockslate.solver.scenario import build_simulation, station_by_role, to_stations

    s = resolve_scenario(scenario)
    throat, exit_ = station_by_role(s, "throat"), station_by_role(s, "exit")
    stations = [throat, exit_] if throat is not None and exit_ is not None else to_stations(s)
    x_max = settle.interior_end_m(exit_)
    small = build_simulation(s, settle.MIN_COARSE_NX)  # load the kernels before the clock starts
    settle.LocalStepper(small).step()
    small.step()

    def check(sim):
        return settle.SettleCheck(sim, stations, x_max_m=x_max, tolerance=tolerance,
                                  mass_tolerance=SETTLE_MASS_TOLERANCE)

    plain = build_simulation(s, nx)
    runs = {"settle": _settle_run(s, nx, x_max, check), "time_accurate": _plain_run(plain, check(plain))}
    wall, ended = alternate_bursts(runs, SETTLE_BURST_S, "time_accurate", "settle", cap)
    fast, levels, settled = ended["settle"]
    plain_settled = ended["time_accurate"]

    def figures(q: str) -> dict:
        a = [getattr(read_station(plain, st), q) for st in stations]
        b = [getattr(read_station(fast, st), q) for st in stations]
        return {"stations": [st.name for st in stations], "time_accurate": a, "settle": b,
                "largest_difference_fraction": max(abs(y - x) / abs(x) for x, y in zip(a, b))}

    return {
        "scenario": s.name, "nx": fast.domain.nx, "ny": fast.domain.ny,
        "criterion": f"residual figure up to x = {x_max:g} m below {tolerance:g} for {check(fast).hold} steps, "
                     f"station mass flows within {SETTLE_MASS_TOLERANCE:g}",
        "timing": f"one run each, alternating bursts of {SETTLE_BURST_S:g} s",
        "settle_wall_s": wall["settle"], "settle_settled": settled,
        "settle_steps": fast.steps, "coarse_levels": [vars(lv) for lv in levels],
        "time_accurate_wall_s": wall["time_accurate"], "time_accurate_settled": plain_settled,
        "time_accurate_steps": plain.steps, "time_accurate_sim_time_s": plain.time_s,
        "settle_speedup": wall["time_accurate"] / wall["settle"], "capped": not plain_settled, "cap": cap,
        "mass_flow_kg_s": figures("mass_flow_kg_s"), "thrust_n": figures("thrust_n"),
    }


#: The streaming slowdown of the whole benchmark: with-client phases and their length (bench --serve
#: --serve-slowdown-only measures it alone, 8 phases of 5 s by default); --quick takes fewer.
SERVE_ROUNDS, SERVE_PHASE_S = 8, 4.0
SERVE_ROUNDS_QUICK = 4


def measure_serving(quick: bool = False) -> dict:
    """serve_slowdown_fraction beside the solver's figures: the live server (a subprocess) on the default nozzle at
    512 x 256, its solver's cell updates per second without a tab and with one streaming 30 frames a second
    (serve_bench.slowdown_only, each phase with the tab against the mean of the phases around it)."""
    from .serve_bench import slowdown_only

    return slowdown_only(phase_s=SERVE_PHASE_S, rounds=SERVE_ROUNDS_QUICK if quick else SERVE_ROUNDS)


def run_benchmark(repeats: int = 5, grids=GRIDS, settle_nx: int | None = None, solver_only: bool = False,
                  quick: bool = False) -> dict:
    """Every figure; solver_only: the solver speed figures at 512x256 (product, bare, NumPy, with walls, the wall
    path's face share) and memory, without the other grids, settle mode, the streaming slowdown and the warm
    start; quick: the streaming slowdown from fewer phases (SERVE_ROUNDS_QUICK)."""
    import numba

    all_threads = numba.config.NUMBA_NUM_THREADS
    build_box(64, 32).step()  # compile or load the kernels before timing anything
    if solver_only:
        grids = ((512, 256),)
    results = []
    for nx, ny in grids:
        np_rate = measure_numpy(nx, ny, max(1, repeats // 2))
        for threads in sorted({1, all_threads}):
            rate, bare = measure_solver(nx, ny, threads, repeats)
            results.append({"nx": nx, "ny": ny, "threads": threads, "cell_updates_per_s": rate,
                            "bare_cell_updates_per_s": bare, "product_over_bare": rate / bare,
                            "numpy_cell_updates_per_s": np_rate, "ratio_to_numpy": rate / np_rate})
    plain, walled = measure_walls(512, 256, all_threads, repeats)
    shares = {"plain": wall_path_face_share(build_box(512, 256)),
              "walls": wall_path_face_share(build_walled_box(512, 256))}
    numba.set_num_threads(all_threads)
    array_bytes, rss_bytes = measure_memory(2048, 1024)
    key = next((g for g in results if (g["nx"], g["ny"], g["threads"]) == (512, 256, all_threads)), results[-1])
    settled = None if solver_only else measure_settle(nx=settle_nx)
    serving = None if solver_only else measure_serving(quick=quick)
    return {
        "scheme": scheme_label(),
        "bare_cell_updates_per_s": key["bare_cell_updates_per_s"],
        "product_over_bare": key["product_over_bare"],
        "headline_grid": f"{key['nx']}x{key['ny']}, {key['threads']} threads",
        "threading_layer": numba.threading_layer(),
        "cpu_count": os.cpu_count(),
        "repeats": repeats,
        "grids": results,
        "walls": {"grid": f"512x256, {all_threads} threads", "sketch": "rotated square, disc, sloped stroke",
                  "plain_cell_updates_per_s": plain, "walls_cell_updates_per_s": walled,
                  "walls_over_plain": walled / plain, "wall_path_face_share": shares["walls"],
                  "plain_wall_path_face_share": shares["plain"]},
        "settle_speedup": None if settled is None else settled["settle_speedup"],
        "settle": settled,
        "serve_slowdown_fraction": None if serving is None else serving["serve_slowdown_fraction"],
        "serve": serving,
        "warm_start_s": None if solver_only else measure_warm_start(),
        "bytes_per_cell_2048x1024": array_bytes,
        "rss_growth_bytes_per_cell_2048x1024": rss_bytes,
        "goals": GOALS,
    }


def _print_table(report: dict) -> None:
    print(f"shockslate solver benchmark: {report['scheme']}")
    print(f"threading layer {report['threading_layer']}, {report['cpu_count']} cores, "
          f"median of {report['repeats']} bursts")
    print(f"{'grid':>11} {'threads':>7} {'Mcell-updates/s':>16} {'bare':>7} {'/bare':>6} {'NumPy':>8} {'ratio':>7}")
    for g in report["grids"]:
        print(f"{g['nx']:>5}x{g['ny']:<5} {g['threads']:>7} {g['cell_updates_per_s'] / 1e6:>16.1f} "
              f"{g['bare_cell_updates_per_s'] / 1e6:>7.1f} {g['product_over_bare']:>6.2f} "
              f"{g['numpy_cell_updates_per_s'] / 1e6:>8.2f} {g['ratio_to_numpy']:>7.1f}")
    w = report["walls"]
    print(f"drawn walls ({w['sketch']}) at {w['grid']}: {w['walls_cell_updates_per_s'] / 1e6:.1f} against "
          f"{w['plain_cell_updates_per_s'] / 1e6:.1f} Mcell-updates/s without, ratio {w['walls_over_plain']:.2f}; "
          f"faces on the wall path: {100 * w['wall_path_face_share']:.1f} % with the walls, "
          f"{100 * w['plain_wall_path_face_share']:.1f} % without")
    st = report["settle"]
    if st is None:  # --solver-only
        print(f"memory at 2048x1024: {report['bytes_per_cell_2048x1024']:.0f} bytes/cell in arrays")
        return
    print(f"settle mode on {st['scenario']} at {st['nx']}x{st['ny']}: {st['settle_wall_s']:.1f} s to steady against "
          f"{st['time_accurate_wall_s']:.1f} s time-accurate, speedup {st['settle_speedup']:.1f}"
          f"{' (at least: the time-accurate run was stopped unsettled)' if st['capped'] else ''}; mass flow and "
          f"thrust differ by at most {100 * st['mass_flow_kg_s']['largest_difference_fraction']:.2f} % and "
          f"{100 * st['thrust_n']['largest_difference_fraction']:.2f} %")
    sv = report["serve"]
    print(f"streaming one tab at {sv['frame_size'][0]}x{sv['frame_size'][1]}, {sv['frames_per_s']:.1f} frames/s: "
          f"solver {sv['cell_updates_per_s_with_client'] / 1e6:.1f} against "
          f"{sv['cell_updates_per_s_without_client'] / 1e6:.1f} Mcell-updates/s without, slowdown "
          f"{100 * sv['serve_slowdown_fraction']:.1f} % (goal < 10 %)")
    print(f"warm start to first step: {report['warm_start_s']:.2f} s")
    print(f"memory at 2048x1024: {report['bytes_per_cell_2048x1024']:.0f} bytes/cell in arrays, "
          f"{report['rss_growth_bytes_per_cell_2048x1024']:.0f} bytes/cell resident growth")


def main(args: argparse.Namespace) -> int:
    if args.settle_only:
        import numba

        fig = measure_settle()
        fig["threads"] = numba.get_num_threads()
        print(json.dumps({"settle_speedup": fig["settle_speedup"], "settle": fig}, indent=2) if args.json else
              f"settle mode on {fig['scenario']} at {fig['nx']}x{fig['ny']}: {fig['settle_wall_s']:.1f} s to steady "
              f"against {fig['time_accurate_wall_s']:.1f} s time-accurate, speedup {fig['settle_speedup']:.1f}"
              f"{' (at least: the time-accurate run was stopped unsettled)' if fig['capped'] else ''}")
        return 0
    grids = GRIDS[:2] if args.quick else GRIDS
    # --quick: settle mode on the scenario at half its resolution
    settle_nx = None
    if args.quick:
        from shockslate.solver.scenario import load_builtin

        settle_nx = load_builtin(SETTLE_SCENARIO).domain.nx // 2
    report = run_benchmark(repeats=args.repeats, grids=grids, settle_nx=settle_nx, solver_only=args.solver_only,
                           quick=args.quick)
    if args.json:
        print(json.dumps(report, indent=2))
    else:
        _print_table(report)
    return 0


def add_bench_command(subparsers) -> argparse.ArgumentParser:
    """Register `bench` on the command line's sub-command parsers."""
    p = subparsers.add_parser("bench", help="measure solver speed, start-up time and memory")
    p.add_argument("--json", action="store_true", help="print the figures as JSON")
    p.add_argument("--repeats", type=int, default=5, help="timed bursts per figure (median is reported)")
    p.add_argument("--quick", action="store_true", help="only the two smaller grids (settle mode at half resolution)")
    p.add_argument("--solver-only", action="store_true",
                   help="only the solver speed at 512x256 (product, bare kernel, NumPy, with walls) and memory")
    p.add_argument("--settle-only", action="store_true",
                   help=f"only settle mode against time-accurate stepping on {SETTLE_SCENARIO} (settle_speedup)")
    p.set_defaults(handler=main)
    return p
