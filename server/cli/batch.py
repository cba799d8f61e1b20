"""The batch sub-commands of the `shockslate` console command: run, scenarios, check.

The command itself lives with the server; it calls `add_batch_commands(subparsers)` and then
`args.func(args)`, which returns the process exit code.
"""
from __future__ import annotations

import argparse
import json
import sys
import textwrap
from pathlib import Path

from shockslate.solver.fields import VIEWS
from shockslate.solver.scenario import (ScenarioError, builtin_names, builtin_path, load_builtin, load_scenario,
                                        scenario_to_dict)

from .arguments import positive_float, positive_int

#: Exit codes: 0 done (or steady), 1 the run diverged, stalled or did not settle, 2 bad input, 130 stopped with
#: Ctrl+C (shell convention).
EXIT_OK, EXIT_FAILED, EXIT_BAD_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130


def _until(text: str) -> float | str:
    if text == "steady":
        return text
    try:
        return positive_float(text)
    except argparse.ArgumentTypeError:
        raise argparse.ArgumentTypeError(f"{text!r} is neither a time in seconds greater than 0 nor 'steady'") from None


def add_batch_commands(subparsers) -> None:
    """Register `run`, `scenarios` and `check` on an argparse sub-parsers object."""
    run = subparsers.add_parser(
        "run", help="run a scenario without the browser and write results to a folder",
        description="Run a scenario headless. Writes summary.json, history.csv, fields (.npz, .vti), snapshot "
                    "PNGs, station CSVs and report.html. Ctrl+C stops cleanly and keeps what was written.")
    run.add_argument("scenario", help="a scenario JSON file, or the name of a built-in (see `scenarios`)")
    run.add_argument("--until", type=_until, metavar="SECONDS|steady",
                     help="simulated time to stop at (default: the scenario's end time), or 'steady': stop once the "
                          "flow has settled (see --tolerance, --time-limit)")
    run.add_argument("--tolerance", type=positive_float, metavar="R", default=None,
                     help="with --until steady: largest density residual, as the fraction of the mass changing per "
                          "acoustic transit of the domain (default 0.001)")
    run.add_argument("--time-limit", type=positive_float, metavar="SECONDS", default=None,
                     help="with --until steady: simulated time at which an unsettled run stops (default: the "
                          "scenario's end time)")
    run.add_argument("--settle", action="store_true",
                     help="with --until steady: settle mode, the steady end state sooner (coarse grid first, then "
                          "every cell at its own time step); the run's times are then pseudo times, not a time "
                          "history")
    run.add_argument("--steps", type=positive_int, metavar="N", help="stop after N steps at most")
    run.add_argument("--resolution", type=positive_int, metavar="NX", help="cells across x (default: the scenario's)")
    run.add_argument("--out", default="results", metavar="DIR", help="output folder (default: results)")
    run.add_argument("--every", type=positive_float, metavar="SECONDS",
                     help="interval of field files and snapshots (default: a tenth of the run)")
    run.add_argument("--view", default="mach", choices=list(VIEWS), help="field drawn in the snapshots (default: mach)")
    run.set_defaults(func=cmd_run)

    lst = subparsers.add_parser("scenarios", help="list the built-in scenarios with their descriptions")
    lst.set_defaults(func=cmd_scenarios)

    chk = subparsers.add_parser("check", help="validate a scenario file and say what is wrong with it")
    chk.add_argument("file", help="scenario JSON file")
    chk.set_defaults(func=cmd_check)


def cmd_run(args: argparse.Namespace) -> int:
    from shockslate.solver.batch import run_scenario  # matplotlib and friends only when running
    from shockslate.solver.steady import DEFAULT_TOLERANCE
    from shockslate.solver.warm import warm_kernels

    steady = args.until == "steady"
    if not steady and (args.tolerance is not None or args.time_limit is not None):
        print("shockslate run: --tolerance and --time-limit go with --until steady", file=sys.stderr)
        return EXIT_BAD_INPUT
    if args.settle and not steady:
        print("shockslate run: --settle goes with --until steady (settle mode gives the steady end state, not a time "
              "history)", file=sys.stderr)
        return EXIT_BAD_INPUT
    until = args.time_limit if steady else args.until
    tolerance = DEFAULT_TOLERANCE if args.tolerance is None else args.tolerance
    # Before the clock starts: a first run compiles the kernels, which would otherwise look like a stuck step 1.
    print("shockslate run: loading the solver kernels (a first run compiles them: one to three minutes)",
          file=sys.stderr, flush=True)
    warm_kernels()
    try:
        summary = run_scenario(args.scenario, Path(args.out), until_s=until, steps=args.steps,
                               nx=args.resolution, every_s=args.every, view=args.view,
                               until_steady=steady, tolerance=tolerance, settle_mode=args.settle)
    except (ScenarioError, ValueError) as err:
        print(f"shockslate run: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    print(f"{summary['status']}: {summary['scenario']} to t = {summary['sim_time_s']:.6g} s in {summary['steps']} "
          f"steps ({summary['wall_s']:.1f} s); results in {Path(args.out).resolve()}")
    if summary["message"]:
        print(summary["message"], file=sys.stderr)
    nozzle = summary.get("nozzle")
    if nozzle and summary["status"] not in ("finished", "steady"):
        print(f"nozzle figures are from an unfinished run (stopped at t = {summary['sim_time_s']:.6g} s of "
              f"{summary['end_time_s']:.6g} s); see summary.json", file=sys.stderr)
    elif nozzle:
        def fig(key: str, spec: str, unit: str = "") -> str:  # a figure the flow does not give yet is None
            value = nozzle.get(key)
            return "not available" if value is None else format(value, spec) + unit

        print(f"nozzle ({nozzle['regime']}): mass flow {fig('mass_flow_ratio', '.4f')} of choked, C_F "
              f"{fig('thrust_coefficient_ratio', '.4f')} of ideal ({fig('thrust_coefficient_ratio_with_divergence', '.4f')} "
              f"with divergence factor), Isp {fig('specific_impulse_s', '.1f', ' s')}")
    st = summary["steady"]
    if summary.get("settle"):
        print(f"settle mode: {summary['settle']['notice']}", file=sys.stderr)
    if steady:
        print(f"residual {st['residual']} over {st['residual_over']} (tolerance {st['tolerance']:g}), station "
              f"mass-flow imbalance {st['mass_imbalance']} ({', '.join(st['balanced_stations']) or 'no stations'})")
    return {"finished": EXIT_OK, "steady": EXIT_OK, "interrupted": EXIT_INTERRUPTED}.get(summary["status"], EXIT_FAILED)


def cmd_scenarios(args: argparse.Namespace) -> int:
    for name in builtin_names():
        s = load_builtin(name)
        print(f"{name}  ({s.mode}, {builtin_path(name)})")
        print(textwrap.fill(s.description, width=100, initial_indent="    ", subsequent_indent="    "))
        print()
    return EXIT_OK


def cmd_check(args: argparse.Namespace) -> int:
    try:
        s = load_scenario(args.file)
    except ScenarioError as err:
        print(f"refused: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    print(f"ok: {s.name} ({s.mode}, {len(s.sketch.shapes)} shapes, {len(s.stations)} stations, "
          f"{len(s.probes)} probes, end time {s.end_time_s:g} s)")
    defaulted = defaults_used(json.loads(Path(args.file).read_text(encoding="utf-8")), scenario_to_dict(s))
    if defaulted:
        print("note: the file leaves these out, so their defaults are used: "
              + ", ".join(f"{path} = {json.dumps(value)}" for path, value in defaulted))
    return EXIT_OK


def defaults_used(given: dict, full: dict, prefix: str = "") -> list[tuple[str, object]]:
    """(JSON path, value) of every setting the full scenario holds that the file did not give (objects only;
    list items are the file's own)."""
    out: list[tuple[str, object]] = []
    for key, value in full.items():
        path = f"{prefix}{key}"
        if key not in given:
            if isinstance(value, dict):
                out.extend(defaults_used({}, value, path + "."))
            else:
                out.append((path, value))
        elif isinstance(value, dict) and isinstance(given[key], dict):
            out.extend(defaults_used(given[key], value, path + "."))
    return out
