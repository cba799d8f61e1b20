"""`shockslate nozzle`: write a scenario file for a chamber and nozzle given by its numbers.

    shockslate nozzle --throat-radius 0.01 --contraction-ratio 4 --chamber-length 0.03 --area-ratio 10 \
        [--half-angle 15 | --bell [--bell-length 0.8] [--inflection-angle 25 --exit-angle 10] | --moc] \
        [--planar] [--p0 7e6] [--t0 3500] [--gas products.json] --out my_nozzle.json
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from .arguments import number, whole

EXIT_OK, EXIT_BAD_INPUT = 0, 2

#: Design and run fields -> the flag that sets them, so errors name what the user typed.
FLAGS = {
    "throat_radius_m": "--throat-radius", "contraction_ratio": "--contraction-ratio",
    "chamber_length_m": "--chamber-length", "exit_area_ratio": "--area-ratio", "half_angle_deg": "--half-angle",
    "convergent_half_angle_deg": "--convergent-angle", "upstream_rounding": "--upstream-rounding",
    "downstream_rounding": "--downstream-rounding", "bell_fraction": "--bell-length",
    "inflection_angle_deg": "--inflection-angle", "exit_angle_deg": "--exit-angle", "p0_pa": "--p0",
    "t0_k": "--t0", "ambient_p_pa": "--p-ambient", "ambient_t_k": "--t-ambient",
    "cells_per_throat_radius": "--cells-per-throat-radius", "plume_length_m": "--plume-length",
    "end_time_s": "--end-time", "mode": "--planar", "shape": "--bell", "design_gamma": "--gas",
}


def add_nozzle_command(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        "nozzle", help="write a scenario for a chamber and nozzle given by its numbers",
        description="Build the chamber-and-nozzle wall from throat radius, contraction ratio, chamber length, "
                    "throat roundings, exit area ratio and a conical half angle or a bell (parabolic approximation "
                    "of a thrust-optimised contour, Rao 1958/1960), and write a scenario file. Lengths in metres, "
                    "angles in degrees, pressures in Pa, temperatures in K. In planar mode 'radius' means the half "
                    "height above the symmetry line and areas are per metre of depth.")
    g = p.add_argument_group("shape")
    g.add_argument("--throat-radius", type=number, required=True, metavar="M", help="throat radius (m)")
    g.add_argument("--contraction-ratio", type=number, required=True, metavar="RATIO",
                   help="chamber area / throat area (> 1)")
    g.add_argument("--chamber-length", type=number, required=True, metavar="M",
                   help="length of the cylindrical chamber before the convergent (m)")
    g.add_argument("--area-ratio", type=number, required=True, metavar="RATIO", help="exit area / throat area (> 1)")
    g.add_argument("--half-angle", type=number, default=15.0, metavar="DEG",
                   help="conical divergent half angle (default 15)")
    kind = g.add_mutually_exclusive_group()
    kind.add_argument("--bell", action="store_true",
                      help="a bell instead of a cone: Rao's parabolic approximation of a thrust-optimised contour")
    kind.add_argument("--moc", action="store_true",
                      help="the minimum-length contour by the method of characteristics for the gas's gamma "
                           "(sharp throat corner), planar or axisymmetric")
    g.add_argument("--bell-length", type=number, default=0.8, metavar="FRACTION",
                   help="bell length as a fraction of the 15 degree cone's (default 0.8)")
    g.add_argument("--inflection-angle", type=number, metavar="DEG",
                   help="bell wall angle after the throat rounding (default for an 80 %% bell: from a table of "
                        "Rao's chart, approximate)")
    g.add_argument("--exit-angle", type=number, metavar="DEG", help="bell wall angle at the exit (same default)")
    g.add_argument("--convergent-angle", type=number, default=30.0, metavar="DEG",
                   help="convergent half angle (default 30)")
    g.add_argument("--upstream-rounding", type=number, default=1.5, metavar="RT",
                   help="throat radius of curvature before the throat, in throat radii (default 1.5)")
    g.add_argument("--downstream-rounding", type=number, default=0.382, metavar="RT",
                   help="throat radius of curvature after the throat, in throat radii (default 0.382)")
    g.add_argument("--planar", action="store_true", help="a planar (two-dimensional) nozzle instead of axisymmetric")
    r = p.add_argument_group("run")
    r.add_argument("--p0", type=number, default=2.0e6, metavar="PA", help="chamber stagnation pressure (default 2e6)")
    r.add_argument("--t0", type=number, metavar="K",
                   help="chamber stagnation temperature (default: the --gas file's, else 3000)")
    r.add_argument("--p-ambient", type=number, default=101325.0, metavar="PA", help="ambient pressure (default 101325)")
    r.add_argument("--t-ambient", type=number, default=288.15, metavar="K", help="ambient temperature (default 288.15)")
    r.add_argument("--gas", type=Path, metavar="FILE",
                   help="gas of the products: a JSON file written by `shockslate gas --out` (gamma, molar mass, "
                        "chamber temperature); default the 'hot products' preset")
    r.add_argument("--cells-per-throat-radius", type=whole, default=10, metavar="N",
                   help="resolution: cells across the throat radius (default 10)")
    r.add_argument("--plume-length", type=number, metavar="M",
                   help="room behind the exit (default 4 exit radii)")
    r.add_argument("--end-time", type=number, metavar="S", help="simulated time (default about 12 sound crossings)")
    p.add_argument("--name", default="designed_nozzle", help="scenario name (default designed_nozzle)")
    p.add_argument("--out", required=True, type=Path, metavar="FILE", help="scenario file to write")
    p.set_defaults(func=cmd_nozzle)
    return p


def _bad(text: str) -> int:
    print(f"shockslate nozzle: {text}", file=sys.stderr)
    return EXIT_BAD_INPUT


def _read_gas_file(path: Path):
    """(Gas, chamber temperature in K or None) from a `shockslate gas --out` file."""
    from shockslate.solver.gas import Gas

    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except OSError as err:
        raise ValueError(f"--gas = {str(path)!r} cannot be read: {err.strerror}") from None
    except json.JSONDecodeError as err:
        raise ValueError(f"--gas = {str(path)!r} is not valid JSON: {err}") from None
    if not isinstance(doc, dict):
        raise ValueError(f"--gas = {str(path)!r} is not allowed: must hold a JSON object")
    try:
        gamma = float(doc["gamma_frozen"])
        molar = float(doc["molar_mass_kg_kmol"])
    except (KeyError, TypeError, ValueError):
        raise ValueError(f"--gas = {str(path)!r} is not allowed: needs numbers gamma_frozen and molar_mass_kg_kmol "
                         "(as written by `shockslate gas --out`)") from None
    try:
        gas = Gas(gamma, molar)
    except ValueError as err:
        raise ValueError(f"--gas = {str(path)!r}: {err}") from None
    t0 = doc.get("chamber_temperature_k")
    return gas, (float(t0) if isinstance(t0, (int, float)) else None)


def cmd_nozzle(args: argparse.Namespace) -> int:
    from shockslate.solver import nozzle_design as nd
    from shockslate.solver.gas import HOT_PRODUCTS
    from shockslate.solver.scenario import ScenarioError, parse_scenario, scenario_to_json

    gas, t0 = HOT_PRODUCTS, None
    if args.gas is not None:
        try:
            gas, t0 = _read_gas_file(args.gas)
        except ValueError as err:
            return _bad(str(err))
    if args.t0 is not None:
        t0 = args.t0
    try:
        spec = nd.NozzleSpec(
            throat_radius_m=args.throat_radius, contraction_ratio=args.contraction_ratio,
            chamber_length_m=args.chamber_length, exit_area_ratio=args.area_ratio,
            mode="planar" if args.planar else "axisymmetric",
            shape="bell" if args.bell else "moc" if args.moc else "cone", design_gamma=gas.gamma if args.moc else None,
            half_angle_deg=args.half_angle, convergent_half_angle_deg=args.convergent_angle,
            upstream_rounding=args.upstream_rounding, downstream_rounding=args.downstream_rounding,
            bell_fraction=args.bell_length, inflection_angle_deg=args.inflection_angle,
            exit_angle_deg=args.exit_angle)
        run = nd.RunChoices(p0_pa=args.p0, t0_k=3000.0 if t0 is None else t0, ambient_p_pa=args.p_ambient,
                            ambient_t_k=args.t_ambient, gas=gas, cells_per_throat_radius=args.cells_per_throat_radius,
                            plume_length_m=args.plume_length, end_time_s=args.end_time)
        doc = nd.nozzle_scenario(spec, run, name=args.name)
    except nd.DesignError as err:
        flag = FLAGS.get(err.field, err.field)
        if err.value is None:
            return _bad(f"{flag} is missing: {err.allowed}")
        return _bad(f"{flag} = {err.value} is not allowed: {err.allowed}")
    try:
        scenario = parse_scenario(doc)
    except ScenarioError as err:
        return _bad(f"the built scenario was refused: {err}")
    try:
        args.out.write_text(scenario_to_json(scenario), encoding="utf-8")
    except OSError as err:
        return _bad(f"--out = {str(args.out)!r} cannot be written: {err.strerror}")
    c = nd.build_contour(spec)
    d = scenario.domain
    print(f"wrote {args.out}: {spec.mode} {spec.shape}, throat at x = {c.throat_x_m * 1e3:.4g} mm, exit at "
          f"x = {c.exit_x_m * 1e3:.4g} mm (radius {spec.exit_radius_m * 1e3:.4g} mm), {d.nx} cells across x, "
          f"end time {scenario.end_time_s:.3g} s")
    if spec.shape == "bell":
        tn, te = spec.bell_angles_deg()
        print(f"bell angles {tn:.1f} and {te:.1f} degrees"
              + (" (defaults from a table of Rao's chart, approximate)"
                 if args.inflection_angle is None or args.exit_angle is None else ""))
    return EXIT_OK
