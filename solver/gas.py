"""Calorically perfect gas: constant gamma and molar mass."""
from __future__ import annotations

from dataclasses import dataclass

from .choices import Choice, table

#: Universal gas constant, J/(kmol K) (CODATA 2018 exact value).
R_UNIVERSAL_J_KMOL_K = 8314.462618

GAMMA_MIN, GAMMA_MAX = 1.05, 1.8


@dataclass(frozen=True)
class Gas:
    """A calorically perfect gas.

    gamma: ratio of specific heats (1.05 to 1.8).
    molar_mass_kg_kmol: molar mass in kg/kmol; the specific gas constant is R = 8314.462618 / M.
    """

    gamma: float = 1.4
    molar_mass_kg_kmol: float = 28.965

    def __post_init__(self) -> None:
        if not (GAMMA_MIN <= self.gamma <= GAMMA_MAX):
            raise ValueError(f"gamma = {self.gamma!r} is outside the allowed range {GAMMA_MIN} to {GAMMA_MAX}")
        if not (self.molar_mass_kg_kmol > 0.0):
            raise ValueError(f"molar_mass_kg_kmol = {self.molar_mass_kg_kmol!r} must be greater than 0")

    @property
    def r_j_kg_k(self) -> float:
        """Specific gas constant, J/(kg K)."""
        return R_UNIVERSAL_J_KMOL_K / self.molar_mass_kg_kmol

    @property
    def cp_j_kg_k(self) -> float:
        """Specific heat at constant pressure, J/(kg K)."""
        return self.gamma * self.r_j_kg_k / (self.gamma - 1.0)

    def density_kg_m3(self, p_pa: float, t_k: float) -> float:
        return p_pa / (self.r_j_kg_k * t_k)

    def sound_speed_m_s(self, t_k: float) -> float:
        return (self.gamma * self.r_j_kg_k * t_k) ** 0.5


#: Dry air near room temperature.
AIR = Gas(gamma=1.4, molar_mass_kg_kmol=28.965)
#: Hot combustion products: ILLUSTRATIVE round values for a generic propellant, not any real mixture.
HOT_PRODUCTS = Gas(gamma=1.20, molar_mass_kg_kmol=22.0)

#: Named gases: the choice (name as in scenario files, label for the page) and the gas itself.
_PRESET_TABLE: tuple[tuple[Choice, Gas], ...] = (
    (Choice("air", "air"), AIR),
    (Choice("hot products", "hot products (illustrative)"), HOT_PRODUCTS),
)
PRESETS: dict[str, Gas] = {c.name: gas for c, gas in _PRESET_TABLE}
PRESET_CHOICES: dict[str, Choice] = table(*(c for c, _ in _PRESET_TABLE))
