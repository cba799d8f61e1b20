"""Sweep throughput: cases per minute on a local Dask cluster against a plain sequential loop, in one run.

    .venv/bin/python -m shockslate.bench.sweep_bench [--cases 8] [--workers 2] [--nx 160]
                                                                       [--until 0.0012] [--repeat 1]

Eight cases of the over-expanded nozzle (nozzle_sea_level) over ambient pressure, at the resolution and end time
of the built-in sweep example (scenarios/sweeps/nozzle_ambient_sweep.json), each run through the same function
(solver.sweep_run.run_case, one numba thread):
  sequential  a plain loop in this process;
  cluster     solver.sweep.run.run_sweep on a fresh local cluster of --workers process workers (solver.sweep.
              run.local_cluster), timed end to end: cluster start, worker warm-up (imports and JIT-cache load, one tiny
              case on each worker), then the cases with their case folders and sweep.csv (no HTML report).
The JIT cache on disk is warm for both (one tiny untimed run in this process first), and this process's imports
are done before the sequential loop. The cluster's figure is also given with warm workers, the throughput a
longer sweep approaches. Benchmark on a quiet machine: another busy process halves it.
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path


from shockslate.solver.scenario import load_builtin
from shockslate.solver.sweep import plan as sweep_plan
from shockslate.solver.sweep import run as sweep_run


def plan_for(cases: int, nx: int, until_s: float) -> sweep_plan.SweepPlan:
    return sweep_plan.build_plan(load_builtin("nozzle_sea_level"),
                            [sweep_plan.parse_vary(f"conditions.ambient.p_pa=101325:1000:{cases}")], nx=nx, until_s=until_s)


def warm(plan: sweep_plan.SweepPlan) -> None:
    """Imports and the JIT cache, not timed: after this the workers load compiled kernels instead of compiling."""
    sweep_run.run_case(plan.cases[0].scenario, 40, 1e-5)


def time_sequential(plan: sweep_plan.SweepPlan) -> tuple[float, float, list[str]]:
    """(wall time, summed time-loop time of the cases) in seconds, and the case statuses."""
    start = time.perf_counter()
    statuses, loop_s = [], 0.0
    for case in plan.cases:
        outcome = sweep_run.run_case(case.scenario, case.nx, case.until_s)
        statuses.append(outcome["summary"]["status"] if outcome["summary"] else outcome["error"])
        loop_s += outcome["summary"]["wall_s"] if outcome["summary"] else 0.0
    return time.perf_counter() - start, loop_s, statuses


def time_cluster(plan: sweep_plan.SweepPlan, workers: int) -> tuple[float, float, float, float, list[str]]:
    """(cluster start, worker warm-up, the sweep itself, summed time-loop time of the cases) in seconds, and the
    case statuses."""
    from distributed import Client

    start = time.perf_counter()
    cluster = sweep_run.local_cluster(workers)
    client = Client(cluster)
    try:
        client.wait_for_workers(workers)
        t_start = time.perf_counter() - start
        warm_start = time.perf_counter()
        client.run(sweep_run.run_case, plan.cases[0].scenario, 40, 1e-5)  # imports and JIT-cache load on every worker
        t_warm = time.perf_counter() - warm_start
        with tempfile.TemporaryDirectory(prefix="sweep-bench-") as out:
            run_start = time.perf_counter()
            result = sweep_run.run_sweep(plan, out, client=client, progress=None, write_report=False)
            t_run = time.perf_counter() - run_start
    finally:
        client.close()
        cluster.close()
    loop_s = sum(r["wall_s"] or 0.0 for r in result.rows)
    return t_start, t_warm, t_run, loop_s, [r["status"] for r in result.rows]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=8)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--nx", type=int, default=160)
    parser.add_argument("--until", type=float, default=1.2e-3)
    parser.add_argument("--repeat", type=int, default=1,
                        help="alternate cluster and sequential runs this many times and keep the best of each")
    args = parser.parse_args(argv)
    plan = plan_for(args.cases, args.nx, args.until)
    print(f"sweep bench: {len(plan.cases)} cases of nozzle_sea_level over ambient pressure, nx {args.nx}, "
          f"until {args.until:g} s; {os.cpu_count()} cores; NUMBA_CACHE_DIR={os.environ.get('NUMBA_CACHE_DIR')}",
          flush=True)
    warm(plan)
    runs_cluster, runs_seq = [], []
    for _ in range(max(args.repeat, 1)):
        runs_cluster.append(time_cluster(plan, args.workers))
        runs_seq.append(time_sequential(plan))
        c, q = runs_cluster[-1], runs_seq[-1]
        print(f"  run: cluster {sum(c[:3]):.1f} s (start {c[0]:.1f} s, worker warm-up {c[1]:.1f} s, "
              f"cases {c[2]:.1f} s; their time loops add up to {c[3]:.1f} s), "
              f"sequential {q[0]:.1f} s (time loops {q[1]:.1f} s)", flush=True)
    t_start, t_warm, t_run, loops_cluster, st_cluster = min(runs_cluster, key=lambda r: sum(r[:3]))
    t_cluster = t_start + t_warm + t_run
    t_seq, loops_seq, st_seq = min(runs_seq, key=lambda r: r[0])
    for name, statuses in (("cluster", st_cluster), ("sequential", st_seq)):
        if any(s != "finished" for s in statuses):
            print(f"warning: {name} cases did not all finish: {statuses}", file=sys.stderr)
    n = len(plan.cases)
    seq_rate, cl_rate, cl_busy_rate = 60 * n / t_seq, 60 * n / t_cluster, 60 * n / t_run
    print(f"sequential loop, one process:         {t_seq:7.1f} s  {seq_rate:6.1f} cases/min")
    print(f"local cluster, {args.workers} workers, end to end: {t_cluster:7.1f} s  {cl_rate:6.1f} cases/min  "
          f"ratio {cl_rate / seq_rate:.2f}x")
    print(f"local cluster, warm workers:          {t_run:7.1f} s  {cl_busy_rate:6.1f} cases/min  "
          f"ratio {cl_busy_rate / seq_rate:.2f}x")
    if loops_cluster > 1.1 * loops_seq:
        print(f"note: the cases ran {loops_cluster / loops_seq:.2f}x slower each on the cluster than in the loop "
              "(time loops added up); another busy process on the machine is the usual cause", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
