"""The page's design intents: a chamber and nozzle from numbers, and the chamber gas from a propellant pair.

The page only sends the numbers; this module calls the solver's own design code (solver/nozzle_design.py, the
same as `shockslate nozzle`; solver/propellant.py, the same as `shockslate gas`) and turns its refusals into
RequestErrors naming the message's field, the value and what is allowed. The session then applies the result
as one change that undo takes back.
"""
from __future__ import annotations

import importlib.util
from dataclasses import dataclass
from typing import Any

from shockslate.solver import nozzle_design as nd
from shockslate.solver import propellant
from shockslate.solver import scenario as scn

from .errors import RequestError

#: How to add the thermochemistry library when it is missing (`make run` installs without the design extra).
HOW_TO_ADD_THERMOCHEMISTRY = ("`make run` installs shockslate without the optional 'design' extra. Add it with "
                              "`.venv/bin/python -m pip install -e '.[design]'` in the checkout (or `make test`, "
                              "which installs it), or `pip install 'shockslate[design]'`, then restart the server.")

#: Design fields of solver/nozzle_design.py -> (label for sentences, unit as the message carries it).
NOZZLE_FIELDS = {
    "throat_radius_m": ("throat radius", "m"), "contraction_ratio": ("contraction ratio", ""),
    "chamber_length_m": ("chamber length", "m"), "exit_area_ratio": ("exit area ratio", ""),
    "half_angle_deg": ("divergent half angle", "deg"), "convergent_half_angle_deg": ("convergent half angle", "deg"),
    "upstream_rounding": ("throat curvature radius before the throat", "throat radii"),
    "downstream_rounding": ("throat curvature radius after the throat", "throat radii"),
    "bell_fraction": ("bell length", "of the 15 degree cone"), "inflection_angle_deg": ("bell inflection angle", "deg"),
    "exit_angle_deg": ("bell exit angle", "deg"), "cells_per_throat_radius": ("cells per throat radius", ""),
    "mode": ("mode", ""), "shape": ("contour", ""), "design_gamma": ("gamma of the gas", ""),
}
#: The choices of the design dialogs, in the order to offer them (sent in hello.vocabulary.choices).
NOZZLE_SHAPE_LABELS = {"cone": "conical", "bell": "bell (parabolic approximation, Rao)",
                       "moc": "minimum length (method of characteristics)"}
REACTANT_STATE_LABELS = {"gas": "gases at 298 K", "liquid": "liquids at their boiling points"}


def choices() -> dict:
    """`nozzle_shape` and `reactant_state` choices, {name, label}, from the solver's own tables."""
    return {"nozzle_shape": [{"name": n, "label": NOZZLE_SHAPE_LABELS.get(n, n)} for n in nd.SHAPES],
            "reactant_state": [{"name": n, "label": REACTANT_STATE_LABELS.get(n, n)} for n in propellant.STATES]}


PROPELLANT_FIELDS = {"fuel": "fuel", "oxidiser": "oxidiser", "mixture_ratio": "mixture ratio",
                     "p0_pa": "chamber pressure", "reactant_state": "propellant state",
                     "gamma_frozen": "frozen gamma"}


@dataclass(frozen=True)
class Thermochemistry:
    """Whether the gas-from-propellants choice can work on this server (told to every tab in `hello`)."""

    available: bool
    reason: str = ""

    def as_dict(self) -> dict:
        return {"available": self.available, "reason": self.reason, "how_to_add": HOW_TO_ADD_THERMOCHEMISTRY,
                "fuels": [{"name": k, "label": v} for k, v in propellant.FUELS.items()],
                "oxidisers": [{"name": k, "label": v} for k, v in propellant.OXIDISERS.items()],
                "states": list(propellant.STATES),
                "liquids": sorted(propellant.LIQUID_ENTHALPY_J_KMOL),
                "mixture_ratio": [propellant.MIXTURE_RATIO_MIN, propellant.MIXTURE_RATIO_MAX],
                "p0_pa": [propellant.P_MIN_PA, propellant.P_MAX_PA],
                "gamma_note": "frozen gamma at chamber conditions: cp/cv of the equilibrium products with their "
                              "composition held fixed (not the equilibrium gamma)"}


def thermochemistry(enabled: bool = True) -> Thermochemistry:
    """Cantera importable (without importing it: that takes a second) and not switched off for this server."""
    if not enabled:
        return Thermochemistry(False, "this server was started with --without-thermochemistry")
    if importlib.util.find_spec("cantera") is None:
        return Thermochemistry(False, "the thermochemistry library (Cantera) is not installed")
    return Thermochemistry(True)


def _sentence_value(value: Any, unit: str) -> str:
    if value is None:
        return "nothing"
    return f"{value:g} {unit}".strip() if isinstance(value, (int, float)) and not isinstance(value, bool) else repr(value)


def nozzle_document(fields: dict, current: scn.Scenario) -> dict:
    """The scenario document of the designed nozzle, run at the current chamber, ambient and gas.

    fields: the build_nozzle message's design fields (SI units), None where the designer's default applies.
    Raises RequestError naming the message field when the design module refuses a number."""
    spec_fields = {k: v for k, v in fields.items() if v is not None and k != "cells_per_throat_radius"}
    c = current.conditions
    gas = scn.to_gas(current)
    if spec_fields.get("shape") == "moc":
        spec_fields["design_gamma"] = gas.gamma
    try:
        spec = nd.NozzleSpec(**spec_fields)
        run = nd.RunChoices(p0_pa=c.reservoir.p0_pa, t0_k=c.reservoir.t0_k, ambient_p_pa=c.ambient.p_pa,
                            ambient_t_k=c.ambient.t_k, gas=gas,
                            cells_per_throat_radius=fields.get("cells_per_throat_radius") or 10)
        doc = nd.nozzle_scenario(spec, run, name="designed nozzle")
    except nd.DesignError as err:
        label, unit = NOZZLE_FIELDS.get(err.field, (err.field.replace("_", " "), ""))
        allowed = err.allowed[len("must be "):] if err.allowed.startswith("must be ") else err.allowed
        sentence = (f"The nozzle cannot be built: the {label} is missing; {allowed}." if err.value is None else
                    f"The nozzle cannot be built: the {label} of {_sentence_value(err.value, unit)} is not allowed; "
                    f"allowed: {allowed}.")
        raise RequestError(err.field, err.value, allowed, sentence, "design") from None
    except (ArithmeticError, ValueError):  # a length that overflows (numbers near 1e300) before any range check
        given = {k: v for k, v in fields.items() if isinstance(v, float)}
        field = max(given, key=lambda k: abs(given[k])) if given else "throat_radius_m"
        label, unit = NOZZLE_FIELDS.get(field, (field, ""))
        raise RequestError(field, fields.get(field), "numbers that give a nozzle of a size the solver can hold",
                           f"The nozzle cannot be built: with the {label} of {_sentence_value(fields.get(field), unit)} "
                           "its lengths overflow; give numbers of an engine's size.", "design") from None
    return doc


def chamber_gas(fields: dict, enabled: bool = True) -> propellant.ChamberGas:
    """The equilibrium chamber gas (solver/propellant.py); RequestError when refused or not available here."""
    info = thermochemistry(enabled)
    if not info.available:
        raise RequestError("fuel", fields.get("fuel"), "a server with the thermochemistry library (Cantera)",
                           f"Gas from propellants is not available: {info.reason}. {HOW_TO_ADD_THERMOCHEMISTRY}",
                           "unavailable")
    try:
        result = propellant.chamber_gas(fields["fuel"], fields["oxidiser"], fields["mixture_ratio"],
                                        fields["p0_pa"], fields.get("reactant_state") or "gas")
        result.to_gas()  # a gamma the solver cannot take is refused here, before anything changes
    except propellant.PropellantError as err:
        label = PROPELLANT_FIELDS.get(err.field, err.field)
        allowed = err.allowed[len("must be "):] if err.allowed.startswith("must be ") else err.allowed
        unit = "Pa" if err.field == "p0_pa" else ""
        raise RequestError(err.field, err.value, allowed,
                           f"The chamber gas cannot be computed: the {label} {_sentence_value(err.value, unit)} is "
                           f"not allowed; allowed: {allowed}.", "propellant") from None
    except propellant.ThermochemistryUnavailable as err:
        raise RequestError("fuel", fields.get("fuel"), "a server with the thermochemistry library (Cantera)",
                           f"Gas from propellants is not available: {err}. {HOW_TO_ADD_THERMOCHEMISTRY}",
                           "unavailable") from None
    return result


def gas_document(result: propellant.ChamberGas, current: scn.Scenario) -> dict:
    """The current scenario document with the products' gas (frozen gamma, molar mass) and the chamber's p0, T0."""
    doc = scn.scenario_to_dict(current)
    doc["gas"] = {"preset": None, "gamma": round(result.gamma_frozen, 6),
                  "molar_mass_kg_kmol": round(result.molar_mass_kg_kmol, 6)}
    doc["conditions"]["reservoir"] = {"p0_pa": float(result.p0_pa), "t0_k": round(result.chamber_temperature_k, 3)}
    return doc


def chamber_gas_message(result: propellant.ChamberGas) -> dict:
    """The `chamber_gas` reply: what was computed and applied, with what kind of gamma it is."""
    return {"type": "chamber_gas", "fuel": result.fuel, "oxidiser": result.oxidiser,
            "mixture_ratio": result.mixture_ratio, "p0_pa": result.p0_pa, "reactant_state": result.reactant_state,
            "t0_k": result.chamber_temperature_k, "gamma": result.gamma_frozen,
            "molar_mass_kg_kmol": result.molar_mass_kg_kmol, "c_star_m_s": result.c_star_perfect_gas_m_s,
            "mole_fractions": result.mole_fractions, "gamma_note": result.gamma_note}
