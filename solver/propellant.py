"""The gas in a rocket chamber from its propellants, by chemical equilibrium.

The solver needs one calorically perfect gas: a gamma, a molar mass and a stagnation temperature. For a
propellant pair those come from the equilibrium composition of the products at the chamber pressure and the
adiabatic flame temperature (constant pressure and enthalpy). This module asks Cantera (a general-purpose,
open-source thermochemistry library) for that equilibrium, with the NASA 9-coefficient thermodynamic data it
ships (nasa_gas.yaml, valid to 6000 K and above, wide enough for rocket chambers), and reports:

- the chamber (adiabatic flame) temperature, K;
- the mean molar mass of the equilibrium products, kg/kmol;
- the FROZEN gamma at chamber conditions: cp/cv of the equilibrium mixture with its composition held fixed.
  It is not the equilibrium ("shifting") gamma, which counts the heat of recombination and is lower, nor a
  nozzle-averaged value.

Reactants enter at 298.15 K as gases, or as cryogenic liquids at their normal boiling points (hydrogen, oxygen,
methane) with enthalpies of formation of the liquids from NASA's thermodynamic data ([MZG] below, from memory).

Sources:
[MZG] B. J. McBride, M. J. Zehe, S. Gordon, NASA Glenn coefficients for calculating thermodynamic properties of
      individual species, NASA/TP-2002-211556: the data in Cantera's nasa_gas.yaml; enthalpies of formation of
      H2(L) at 20.27 K -9.012 kJ/mol, O2(L) at 90.17 K -12.979 kJ/mol, CH4(L) at 111.64 K -89.233 kJ/mol
      (from memory).
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

from . import relations
from .gas import GAMMA_MAX, GAMMA_MIN, R_UNIVERSAL_J_KMOL_K, Gas

#: Fuels and oxidisers by their formula in the thermodynamic data (names of the trade beside them).
FUELS = {"H2": "hydrogen", "CH4": "methane", "C3H8": "propane", "C2H5OH": "ethanol"}
OXIDISERS = {"O2": "oxygen", "N2O": "nitrous oxide"}
STATES = ("gas", "liquid")
#: Enthalpy of formation of the cryogenic liquids at their normal boiling points, J/kmol [MZG] (from memory).
LIQUID_ENTHALPY_J_KMOL = {"H2": -9.012e6, "O2": -12.979e6, "CH4": -89.233e6}
REACTANT_T_K = 298.15
MIXTURE_RATIO_MIN, MIXTURE_RATIO_MAX = 0.05, 100.0
P_MIN_PA, P_MAX_PA = 1.0e3, 1.0e9
MECHANISM = "nasa_gas.yaml"
#: Product species with at most this many atoms are kept (enough for H/C/O/N combustion products).
_MAX_ATOMS = 6


class PropellantError(ValueError):
    """A propellant input was refused: names the field, the value and what is allowed."""

    def __init__(self, field: str, value, allowed: str):
        self.field, self.value, self.allowed = field, value, allowed
        super().__init__(f"{field} = {value!r} is not allowed: {allowed}")


class ThermochemistryUnavailable(RuntimeError):
    """Cantera is not installed."""


def _cantera():
    try:
        import cantera
    except ImportError:
        raise ThermochemistryUnavailable(
            "chemical equilibrium needs Cantera, which is not installed: pip install 'shockslate[design]'") from None
    return cantera


@dataclass(frozen=True)
class ChamberGas:
    """Equilibrium products at the chamber: what the solver's perfect gas and reservoir should be."""

    fuel: str
    oxidiser: str
    mixture_ratio: float
    p0_pa: float
    reactant_state: str
    chamber_temperature_k: float
    molar_mass_kg_kmol: float
    gamma_frozen: float
    cp_frozen_j_kg_k: float
    #: c* of a calorically perfect gas with the frozen gamma, molar mass and chamber temperature, m/s
    c_star_perfect_gas_m_s: float
    #: the main product species by mole fraction (at least 0.1 %)
    mole_fractions: dict = field(default_factory=dict)
    thermo_data: str = MECHANISM
    gamma_note: str = ("frozen gamma: cp/cv of the equilibrium mixture at chamber conditions with its composition "
                       "held fixed (not the equilibrium gamma)")

    def as_dict(self) -> dict:
        return asdict(self)

    def to_gas(self) -> Gas:
        """The solver's calorically perfect gas with the frozen gamma and the molar mass."""
        if not GAMMA_MIN <= self.gamma_frozen <= GAMMA_MAX:
            raise PropellantError("gamma_frozen", self.gamma_frozen,
                                  f"the solver takes gamma from {GAMMA_MIN} to {GAMMA_MAX}")
        return Gas(self.gamma_frozen, self.molar_mass_kg_kmol)


def _check(fuel: str, oxidiser: str, mixture_ratio: float, p0_pa: float, state: str) -> float:
    if fuel not in FUELS:
        raise PropellantError("fuel", fuel, "must be one of " + ", ".join(f"{k} ({v})" for k, v in FUELS.items()))
    if oxidiser not in OXIDISERS:
        raise PropellantError("oxidiser", oxidiser,
                              "must be one of " + ", ".join(f"{k} ({v})" for k, v in OXIDISERS.items()))
    if state not in STATES:
        raise PropellantError("reactant_state", state, "must be one of " + ", ".join(STATES))
    if state == "liquid":
        for name, species in (("fuel", fuel), ("oxidiser", oxidiser)):
            if species not in LIQUID_ENTHALPY_J_KMOL:
                raise PropellantError(name, species, "as a liquid must be one of "
                                      + ", ".join(sorted(LIQUID_ENTHALPY_J_KMOL)) + "; use gas for the others")
    try:
        mr = float(mixture_ratio)
    except (TypeError, ValueError):
        mr = float("nan")
    if not (math.isfinite(mr) and MIXTURE_RATIO_MIN <= mr <= MIXTURE_RATIO_MAX):
        raise PropellantError("mixture_ratio", mixture_ratio, f"must be an oxidiser-to-fuel mass ratio from "
                              f"{MIXTURE_RATIO_MIN:g} to {MIXTURE_RATIO_MAX:g}")
    try:
        p = float(p0_pa)
    except (TypeError, ValueError):
        p = float("nan")
    if not (math.isfinite(p) and P_MIN_PA <= p <= P_MAX_PA):
        raise PropellantError("p0_pa", p0_pa, f"must be a chamber pressure from {P_MIN_PA:g} to {P_MAX_PA:g} Pa")
    return mr


def _products_phase(ct, reactants: tuple[str, ...]):
    """An ideal-gas phase of the reactants and every small species made of their elements."""
    species = ct.Species.list_from_file(MECHANISM)
    by_name = {s.name: s for s in species}
    elements = set()
    for r in reactants:
        elements |= set(by_name[r].composition)
    keep = [s for s in species if set(s.composition) <= elements
            and (sum(s.composition.values()) <= _MAX_ATOMS or s.name in reactants)]
    return ct.Solution(thermo="ideal-gas", species=keep)


def chamber_gas(fuel: str, oxidiser: str, mixture_ratio: float, p0_pa: float, state: str = "gas") -> ChamberGas:
    """Adiabatic, constant-pressure chemical equilibrium of fuel + oxidiser at mixture_ratio (oxidiser / fuel by
    mass) and chamber pressure p0_pa; reactants as gases at 298.15 K or as liquids at their boiling points."""
    mr = _check(fuel, oxidiser, mixture_ratio, p0_pa, state)
    ct = _cantera()
    gas = _products_phase(ct, (fuel, oxidiser))
    y = {fuel: 1.0 / (1.0 + mr), oxidiser: mr / (1.0 + mr)}
    p = float(p0_pa)
    gas.TPY = REACTANT_T_K, p, y
    h = gas.enthalpy_mass
    if state == "liquid":
        h = sum(frac * LIQUID_ENTHALPY_J_KMOL[name] / gas.molecular_weights[gas.species_index(name)]
                for name, frac in y.items())
    # Equilibrate at a hot guess first: the products then hold the reactants' enthalpy at a temperature inside
    # the data's range (the unreacted liquids' enthalpy would put a frozen mixture below 200 K).
    gas.TPY = 3000.0, p, y
    gas.equilibrate("TP")
    gas.HP = h, p
    gas.equilibrate("HP")
    t = float(gas.T)
    molar = float(gas.mean_molecular_weight)
    cp = float(gas.cp_mass)
    gamma = cp / float(gas.cv_mass)
    cstar = relations.c_star_m_s(t, min(max(gamma, GAMMA_MIN), GAMMA_MAX), R_UNIVERSAL_J_KMOL_K / molar)
    fractions = {name: round(float(x), 5) for name, x in sorted(zip(gas.species_names, gas.X), key=lambda kv: -kv[1])
                 if x >= 1.0e-3}
    return ChamberGas(fuel=fuel, oxidiser=oxidiser, mixture_ratio=mr, p0_pa=p, reactant_state=state,
                      chamber_temperature_k=t, molar_mass_kg_kmol=molar, gamma_frozen=gamma, cp_frozen_j_kg_k=cp,
                      c_star_perfect_gas_m_s=cstar, mole_fractions=fractions)
