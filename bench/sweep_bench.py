"""Sweep throughput: cases per minute on a local Dask cluster against a plain sequential loop, in one run.

    NUMBA_CACHE_DIR=.numba_cache .venv/bin/python bench/sweep_bench.py [--cases 8] [--workers 2] [--nx 120]
                                                                       [--until 0.0015]

Eight cases of the over-expanded nozzle (nozzle_sea_level) over ambient pressure, each run through the same
function (solver.sweep.run_case, one numba thread):
  sequential  a plain loop in this process, which is warmed first (JIT cache loaded, one tiny run);
  cluster     solver.sweep.run_sweep on a fresh local cluster of --workers process workers, timed end to end:
              cluster start, worker start-up and JIT-cache load, the cases, writing case folders and sweep.csv
              (the HTML report is left out of both).
The cluster's figure is also given without the cluster start (from the first case handed out to the last back), as
the throughput a longer sweep approaches. Benchmark on a quiet machine: another busy process halves it.
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from solver import sweep  # noqa: E402
from solver.scenario import load_builtin  # noqa: E402


def plan_for(cases: int, nx: int, until_s: float) -> sweep.SweepPlan:
    return sweep.build_plan(load_builtin("nozzle_sea_level"),
                            [sweep.parse_vary(f"conditions.ambient.p_pa=101325:1000:{cases}")], nx=nx, until_s=until_s)


def time_sequential(plan: sweep.SweepPlan) -> tuple[float, list[str]]:
    sweep.run_case(plan.cases[0].scenario, 40, 1e-5)  # warm: imports and JIT cache, not timed
    start = time.perf_counter()
    statuses = []
    for case in plan.cases:
        outcome = sweep.run_case(case.scenario, case.nx, case.until_s)
        statuses.append(outcome["summary"]["status"] if outcome["summary"] else outcome["error"])
    return time.perf_counter() - start, statuses


def time_cluster(plan: sweep.SweepPlan, workers: int) -> tuple[float, float, list[str]]:
    marks: list[tuple[float, int]] = []

    def progress(pr: sweep.SweepProgress) -> None:
        marks.append((time.perf_counter(), pr.running + pr.done))

    with tempfile.TemporaryDirectory(prefix="sweep-bench-") as out:
        start = time.perf_counter()
        result = sweep.run_sweep(plan, out, workers=workers, progress=progress, progress_interval_s=0.05,
                                 write_report=False)
        total = time.perf_counter() - start
    first_busy = next((t for t, n in marks if n > 0), start)
    return total, total - (first_busy - start), [r["status"] for r in result.rows]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=8)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--nx", type=int, default=120)
    parser.add_argument("--until", type=float, default=1.5e-3)
    args = parser.parse_args(argv)
    plan = plan_for(args.cases, args.nx, args.until)
    print(f"sweep bench: {len(plan.cases)} cases of nozzle_sea_level over ambient pressure, nx {args.nx}, "
          f"until {args.until:g} s; {os.cpu_count()} cores; NUMBA_CACHE_DIR={os.environ.get('NUMBA_CACHE_DIR')}",
          flush=True)
    t_cluster, t_cluster_busy, st_cluster = time_cluster(plan, args.workers)
    t_seq, st_seq = time_sequential(plan)
    for name, statuses in (("cluster", st_cluster), ("sequential", st_seq)):
        if any(s != "finished" for s in statuses):
            print(f"warning: {name} cases did not all finish: {statuses}", file=sys.stderr)
    n = len(plan.cases)
    seq_rate, cl_rate, cl_busy_rate = 60 * n / t_seq, 60 * n / t_cluster, 60 * n / t_cluster_busy
    print(f"sequential loop, one process:      {t_seq:7.1f} s  {seq_rate:6.1f} cases/min")
    print(f"local cluster, {args.workers} workers, end to end: {t_cluster:7.1f} s  {cl_rate:6.1f} cases/min  "
          f"ratio {cl_rate / seq_rate:.2f}x")
    print(f"local cluster, without cluster start: {t_cluster_busy:7.1f} s  {cl_busy_rate:6.1f} cases/min  "
          f"ratio {cl_busy_rate / seq_rate:.2f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
