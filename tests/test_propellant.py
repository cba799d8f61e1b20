"""Chamber gas from propellants by chemical equilibrium (Cantera), against published flame temperatures.

Sources (every published value is in tests/data/propellant_check_values.csv with its row's source and status;
all of them are from memory):
[Tu] S. R. Turns, An Introduction to Combustion, 2nd ed.: adiabatic flame temperatures at 1 atm.
[SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, Table 5-5: chamber temperatures at 1000 psia.
[GM] S. Gordon and B. J. McBride, NASA RP-1311 Part II (1996): example H2(L)/O2(L) rocket problem.
Ideal-gas mixture identity: cp - cv = R / M for a mixture of ideal gases (any thermodynamics text).
"""
from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

from shockslate.server.cli import main
from shockslate.solver import propellant
from shockslate.solver.gas import R_UNIVERSAL_J_KMOL_K

ROWS = list(csv.DictReader((Path(__file__).parent / "data" / "propellant_check_values.csv").open(encoding="utf-8")))


@pytest.mark.parametrize("row", ROWS, ids=[f"{r['fuel']}-{r['oxidiser']}-{r['reactant_state']}-{r['mixture_ratio']}"
                                           for r in ROWS])
def test_chamber_temperature_matches_the_published_value(row):
    # the source of each row is in its 'source' column ([Tu], [SB] or [GM]); all from memory
    g = propellant.chamber_gas(row["fuel"], row["oxidiser"], float(row["mixture_ratio"]), float(row["p0_pa"]),
                               row["reactant_state"])
    assert row["quantity"] == "chamber_temperature_k"
    assert g.chamber_temperature_k == pytest.approx(float(row["published_value"]), abs=float(row["tolerance"]))


def test_frozen_gamma_and_molar_mass_are_those_of_the_equilibrium_mixture():
    g = propellant.chamber_gas("H2", "O2", 6.0, 7.0e6)
    # ideal-gas mixture identity: gamma = cp / (cp - R/M)
    r = R_UNIVERSAL_J_KMOL_K / g.molar_mass_kg_kmol
    assert g.gamma_frozen == pytest.approx(g.cp_frozen_j_kg_k / (g.cp_frozen_j_kg_k - r), rel=1e-9)
    # fuel-rich hydrogen/oxygen: water and leftover hydrogen dominate, so the mean molar mass lies between
    # hydrogen's 2.016 and water's 18.015 kg/kmol, and the products are mostly water (stoichiometry)
    assert 2.016 < g.molar_mass_kg_kmol < 18.015
    assert max(g.mole_fractions, key=g.mole_fractions.get) == "H2O"
    assert 1.1 < g.gamma_frozen < 1.3 and "frozen" in g.gamma_note
    gas = g.to_gas()
    assert gas.gamma == g.gamma_frozen and gas.molar_mass_kg_kmol == g.molar_mass_kg_kmol
    # a leaner (closer to stoichiometric) hydrogen mixture burns hotter [SB] ch. 5 (figure of T against mixture ratio)
    assert propellant.chamber_gas("H2", "O2", 4.0, 7.0e6).chamber_temperature_k < g.chamber_temperature_k


def test_methane_oxygen_products_carry_carbon():
    g = propellant.chamber_gas("CH4", "O2", 3.2, 7.0e6)
    assert {"H2O", "CO", "CO2"} <= set(g.mole_fractions)
    assert g.molar_mass_kg_kmol > propellant.chamber_gas("H2", "O2", 6.0, 7.0e6).molar_mass_kg_kmol


@pytest.mark.parametrize("args, says", [
    (("UDMH", "O2", 2.0, 7e6, "gas"), "fuel = 'UDMH' is not allowed: must be one of H2 (hydrogen)"),
    (("H2", "F2", 2.0, 7e6, "gas"), "oxidiser = 'F2' is not allowed: must be one of O2 (oxygen)"),
    (("H2", "O2", -1.0, 7e6, "gas"), "mixture_ratio = -1.0 is not allowed: must be an oxidiser-to-fuel mass ratio"),
    (("H2", "O2", 6.0, 0.0, "gas"), "p0_pa = 0.0 is not allowed: must be a chamber pressure"),
    (("C3H8", "O2", 2.5, 7e6, "liquid"), "fuel = 'C3H8' is not allowed: as a liquid must be one of"),
])
def test_bad_inputs_are_refused_by_name(args, says):
    with pytest.raises(propellant.PropellantError) as info:
        propellant.chamber_gas(*args)
    assert says in str(info.value)


def test_cli_prints_and_writes_the_gas_and_nozzle_takes_it(tmp_path, capsys):
    out = tmp_path / "products.json"
    assert main(["gas", "--fuel", "H2", "--oxidiser", "O2", "--mixture-ratio", "6", "--p0", "7e6",
                 "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "chamber temperature" in text and "frozen" in text and " K" in text and "kg/kmol" in text
    doc = json.loads(out.read_text())
    assert doc["fuel"] == "H2" and doc["gamma_frozen"] > 1.0
    scenario = tmp_path / "n.json"
    assert main(["nozzle", "--throat-radius", "0.01", "--contraction-ratio", "4", "--chamber-length", "0.03",
                 "--area-ratio", "4", "--p0", "7e6", "--gas", str(out), "--out", str(scenario)]) == 0
    s = json.loads(scenario.read_text())
    assert s["gas"]["gamma"] == doc["gamma_frozen"] and s["gas"]["preset"] is None
    assert s["conditions"]["reservoir"]["t0_k"] == doc["chamber_temperature_k"]


@pytest.mark.parametrize("argv, says", [
    (["--fuel", "kerosene"], "--fuel = 'kerosene' is not allowed"),
    (["--mixture-ratio", "500"], "--mixture-ratio = 500.0 is not allowed"),
    (["--p0", "-3"], "--p0 = -3.0 is not allowed"),
])
def test_cli_refuses_bad_input_with_exit_code_2(capsys, argv, says):
    base = {"--fuel": "H2", "--oxidiser": "O2", "--mixture-ratio": "6", "--p0": "7e6"}
    base.update(dict(zip(argv[::2], argv[1::2])))
    assert main(["gas", *[v for kv in base.items() for v in kv]]) == 2
    assert says in capsys.readouterr().err
