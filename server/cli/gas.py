"""`shockslate gas`: the chamber gas of a propellant pair by chemical equilibrium (Cantera).

    shockslate gas --fuel H2 --oxidiser O2 --mixture-ratio 6 --p0 7e6 [--liquid] [--json] [--out products.json]

The file written by --out is what `shockslate nozzle --gas FILE` reads.
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from .arguments import number

EXIT_OK, EXIT_BAD_INPUT, EXIT_UNAVAILABLE = 0, 2, 3

FLAGS = {"fuel": "--fuel", "oxidiser": "--oxidiser", "mixture_ratio": "--mixture-ratio", "p0_pa": "--p0",
         "reactant_state": "--liquid", "gamma_frozen": "gamma"}


def add_gas_command(sub) -> argparse.ArgumentParser:
    from shockslate.solver.propellant import FUELS, OXIDISERS

    p = sub.add_parser(
        "gas", help="chamber temperature, frozen gamma and molar mass of a propellant pair's products",
        description="Adiabatic chemical equilibrium of the products at the chamber pressure (Cantera, NASA "
                    "thermodynamic data). Prints the chamber temperature, the mean molar mass and the FROZEN gamma "
                    "at chamber conditions (cp/cv with the composition held fixed). Needs the 'design' extra: "
                    "pip install 'shockslate[design]'.")
    p.add_argument("--fuel", required=True, metavar="NAME", help="one of " + ", ".join(FUELS))
    p.add_argument("--oxidiser", "--oxidizer", required=True, metavar="NAME", help="one of " + ", ".join(OXIDISERS))
    p.add_argument("--mixture-ratio", type=number, required=True, metavar="O/F",
                   help="oxidiser-to-fuel mass ratio")
    p.add_argument("--p0", type=number, required=True, metavar="PA", help="chamber pressure (Pa)")
    p.add_argument("--liquid", action="store_true",
                   help="propellants enter as cryogenic liquids at their boiling points (H2, O2, CH4); default: "
                        "gases at 298.15 K")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.add_argument("--out", type=Path, metavar="FILE", help="also write the result as JSON (for `shockslate nozzle --gas`)")
    p.set_defaults(func=cmd_gas)
    return p


def cmd_gas(args: argparse.Namespace) -> int:
    from shockslate.solver import propellant

    try:
        g = propellant.chamber_gas(args.fuel, args.oxidiser, args.mixture_ratio, args.p0,
                                   "liquid" if args.liquid else "gas")
    except propellant.PropellantError as err:
        print(f"shockslate gas: {FLAGS.get(err.field, err.field)} = {err.value!r} is not allowed: {err.allowed}",
              file=sys.stderr)
        return EXIT_BAD_INPUT
    except propellant.ThermochemistryUnavailable as err:
        print(f"shockslate gas: {err}", file=sys.stderr)
        return EXIT_UNAVAILABLE
    doc = g.as_dict()
    if args.out is not None:
        try:
            args.out.write_text(json.dumps(doc, indent=2) + "\n", encoding="utf-8")
        except OSError as err:
            print(f"shockslate gas: --out = {str(args.out)!r} cannot be written: {err.strerror}", file=sys.stderr)
            return EXIT_BAD_INPUT
    if args.json:
        print(json.dumps(doc, indent=2))
        return EXIT_OK
    state = "liquids at their boiling points" if args.liquid else "gases at 298.15 K"
    print(f"{g.fuel} / {g.oxidiser}, mixture ratio {g.mixture_ratio:g} (oxidiser/fuel by mass), chamber "
          f"{g.p0_pa / 1e5:g} bar, reactants {state}")
    print(f"  chamber temperature     {g.chamber_temperature_k:8.1f} K (adiabatic equilibrium)")
    print(f"  molar mass of products  {g.molar_mass_kg_kmol:8.3f} kg/kmol")
    print(f"  gamma (frozen)          {g.gamma_frozen:8.4f} -  cp/cv at chamber conditions, composition held fixed")
    print(f"  cp (frozen)             {g.cp_frozen_j_kg_k:8.1f} J/(kg K)")
    print(f"  c* of that perfect gas  {g.c_star_perfect_gas_m_s:8.1f} m/s")
    print("  products (mole fraction): " + ", ".join(f"{k} {v:.3f}" for k, v in list(g.mole_fractions.items())[:8]))
    print("  Caution: the solver then treats this as one calorically perfect gas (no chemistry in the nozzle).")
    if args.out is not None:
        print(f"wrote {args.out}")
    return EXIT_OK
