"""The `shockslate sweep` sub-command: one scenario over ranges of values, every case on Dask's scheduler.

The command itself lives with the server; it calls `add_sweep_command(subparsers)` and then `args.func(args)`,
which returns the process exit code.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from .arguments import positive_float, positive_int
from .batch import EXIT_BAD_INPUT, EXIT_FAILED, EXIT_INTERRUPTED, EXIT_OK
from shockslate.solver.scenario import ScenarioError

EPILOG = """\
examples:
  shockslate sweep nozzle_ambient_sweep --out results/ambient
      the built-in sweep example (scenarios/sweeps/): the over-expanded nozzle from sea level to near vacuum
  shockslate sweep nozzle_sea_level --vary conditions.ambient.p_pa=101325:1000:6 --until 0.002 --resolution 160
  shockslate sweep blast_room --vary conditions.reservoir.p0_pa=1e6,2e6 --vary numerics.limiter=minmod,mc
  shockslate sweep my.json --vary conditions.reservoir.p0_pa=1e6:3e6:3 --vary conditions.reservoir.t0_k=300:900:3 --zip
  shockslate sweep nozzle_ambient_sweep --scheduler tcp://SCHEDULER_HOST:8786
      submit to a running cluster (start it with `dask scheduler` and `dask worker ADDRESS --nthreads 1` on
      machines with shockslate installed; give the workers NUMBA_NUM_THREADS=1 and a NUMBA_CACHE_DIR)

PATH is a dotted path into the scenario document, with [n] for list items: conditions.ambient.p_pa,
numerics.cfl, gas.gamma, sketch.shapes[2].radius_m. START:STOP:COUNT gives COUNT evenly spaced values, ends
included. Finished cases are kept: run the same sweep into the same folder again to resume it, or delete one
case folder to rerun that case. Exit codes: 0 every case finished, 1 some case diverged, stalled or failed,
2 bad input, 130 stopped with Ctrl+C.
"""


def add_sweep_command(subparsers) -> argparse.ArgumentParser:
    """Register `sweep` on an argparse sub-parsers object."""
    p = subparsers.add_parser(
        "sweep", help="run a scenario over ranges of values on Dask's distributed scheduler; one table back",
        description="Run one scenario over ranges of values, each case through the same code as `shockslate run`, "
                    "on a local cluster of process workers (one per core) or an existing Dask cluster. Writes "
                    "DIR/sweep.csv, DIR/sweep.json, DIR/sweep_report.html and a folder per case.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("scenario", metavar="SCENARIO",
                   help="a scenario JSON file or built-in name, or a sweep file or built-in sweep name "
                        "(its --vary lines, --until and --resolution are used unless given here)")
    p.add_argument("--vary", action="append", default=[], metavar="PATH=START:STOP:COUNT|PATH=v1,v2,...",
                   help="a varied value; repeat for more (every combination, or pairs with --zip)")
    p.add_argument("--zip", action="store_true", help="pair the --vary lists value by value (equal lengths)")
    p.add_argument("--until", type=positive_float, metavar="SECONDS",
                   help="simulated time of every case (default: the scenario's end time)")
    p.add_argument("--resolution", type=positive_int, metavar="NX", help="cells across x (default: the scenario's)")
    p.add_argument("--out", default="sweep_results", metavar="DIR", help="output folder (default: sweep_results)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="submit to the existing Dask cluster at tcp://HOST:PORT instead of starting a local one")
    p.add_argument("--workers", type=positive_int, metavar="N",
                   help="process workers of the local cluster (default: one per core)")
    p.add_argument("--full", action="store_true",
                   help="also write each case's fields, snapshots and report.html, as `shockslate run` does")
    p.set_defaults(func=cmd_sweep)
    return p


def cmd_sweep(args: argparse.Namespace) -> int:
    from shockslate.solver.sweep import plan as sweep_plan
    from shockslate.solver.sweep import run as sweep_run
    from shockslate.solver.sweep import tables

    def refuse(err: Exception) -> int:
        print(f"shockslate sweep: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT

    if args.scheduler and args.workers:
        return refuse(ValueError("--workers sizes the local cluster; it cannot be given with --scheduler"))
    try:
        if sweep_plan.is_sweep_file(args.scenario):
            spec, scenario = sweep_plan.load_sweep_file(args.scenario)
            lines = args.vary or spec.vary
            zip_ = args.zip or spec.zip
            until = args.until if args.until is not None else spec.until_s
            nx = args.resolution if args.resolution is not None else spec.nx
            if spec.description:
                print(f"sweep {spec.name}: {spec.description}")
        else:
            scenario = sweep_plan.resolve_scenario_ref(args.scenario)
            lines, zip_, until, nx = args.vary, args.zip, args.until, args.resolution
        if args.scheduler:
            sweep_run.check_scheduler_address(args.scheduler)
        plan = sweep_plan.build_plan(scenario, [sweep_plan.parse_vary(text) for text in lines], zip_=zip_, nx=nx, until_s=until)
    except (ScenarioError, ValueError) as err:
        return refuse(err)

    out = Path(args.out)
    try:
        result = sweep_run.run_sweep(plan, out, scheduler=args.scheduler, workers=args.workers,
                                     write_fields=args.full, write_pictures=args.full, announce=print)
    except ScenarioError as err:
        return refuse(err)
    except KeyboardInterrupt:
        print("\nshockslate sweep: stopped", file=sys.stderr)
        return EXIT_INTERRUPTED
    failed = result.count("diverged", "stalled", tables.FAILED)
    print(f"{len(result.rows)} cases: {result.count('finished')} finished, {failed} failed, "
          f"{result.count(tables.NOT_RUN)} not run ({len(result.ran)} ran now, {len(result.reused)} kept from before)")
    for row in result.rows:
        if row["status"] not in ("finished", tables.NOT_RUN):
            print(f"  case {row['case']} ({row['folder']}) {row['status']}: {row['error']}", file=sys.stderr)
    print(f"table: {(out / 'sweep.csv').resolve()}\nreport: {(out / 'sweep_report.html').resolve()}")
    if result.interrupted:
        return EXIT_INTERRUPTED
    return EXIT_OK if failed == 0 else EXIT_FAILED
