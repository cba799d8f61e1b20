"""Numerical options and the strong-stability-preserving Runge-Kutta tableaux.

A time integrator is data: each stage k forms U_k = a_k * U_0 + b_k * (U_{k-1} + dt * L(U_{k-1}))
(the Shu-Osher form). One generic stage loop in `simulation.py` runs any tableau.
"""
from __future__ import annotations

from dataclasses import dataclass

from .choices import Choice, table

#: Kernel ids of the slope limiters (id 0 is first order: no slope) and the numerical fluxes.
#: `kernels.py` compares against these; the tables below are the only place a name meets its id.
LIM_FIRST_ORDER, LIM_MINMOD, LIM_VAN_LEER, LIM_MC, LIM_VAN_LEER_SHOCK_MINMOD = 0, 1, 2, 3, 4
FLUX_HLLC, FLUX_HLL, FLUX_RUSANOV = 0, 1, 2

#: Reconstruction order: 1 piecewise constant, 2 MUSCL (van Leer 1979) with a slope limiter.
ORDERS: dict[int, Choice] = table(Choice(1, "1 (piecewise constant)"), Choice(2, "2 (MUSCL)"))
#: Slope limiters by scenario name.
LIMITERS: dict[str, Choice] = table(Choice("minmod", "minmod", LIM_MINMOD),
                                    Choice("van_leer", "van Leer", LIM_VAN_LEER),
                                    Choice("mc", "MC", LIM_MC),
                                    Choice("van_leer_shock_minmod", "van Leer, minmod at standing shocks",
                                           LIM_VAN_LEER_SHOCK_MINMOD))
#: Approximate Riemann solvers (numerical fluxes) by scenario name.
FLUXES: dict[str, Choice] = table(Choice("hllc", "HLLC", FLUX_HLLC),
                                  Choice("hll", "HLL", FLUX_HLL),
                                  Choice("rusanov", "Rusanov", FLUX_RUSANOV))

#: The time step is cfl * dx / max(|u| + |v| + 2a). Both SSP Runge-Kutta methods here have an SSP
#: coefficient of 1 (Gottlieb and Shu 1998): they keep the forward-Euler stability of the spatial
#: scheme up to a Courant number of 1 and no further, so larger values are refused.
CFL_MIN, CFL_MAX = 0.01, 1.0


@dataclass(frozen=True)
class SSPTableau:
    """Shu-Osher coefficients (a_k, b_k) of an SSP Runge-Kutta method."""

    name: str
    stages: tuple[tuple[float, float], ...]
    label: str = ""


#: Shu and Osher, J. Comput. Phys. 77 (1988); Gottlieb and Shu, Math. Comp. 67 (1998).
SSP_RK2 = SSPTableau("ssp_rk2", ((0.0, 1.0), (0.5, 0.5)), "SSP-RK2")
SSP_RK3 = SSPTableau("ssp_rk3", ((0.0, 1.0), (0.75, 0.25), (1.0 / 3.0, 2.0 / 3.0)), "SSP-RK3")
INTEGRATORS: dict[str, SSPTableau] = {t.name: t for t in (SSP_RK2, SSP_RK3)}
#: The integrators as choices for the page.
INTEGRATOR_CHOICES: dict[str, Choice] = table(*(Choice(t.name, t.label) for t in INTEGRATORS.values()))


def _choice(field: str, value: str, allowed: dict) -> None:
    if value not in allowed:
        raise ValueError(f"{field} = {value!r} is not one of: {', '.join(allowed)}")


@dataclass(frozen=True)
class Numerics:
    """How the equations are discretised.

    order: 1 (piecewise constant) or 2 (MUSCL reconstruction of primitive variables).
    limiter: slope limiter for order 2 (minmod, van_leer, mc, van_leer_shock_minmod). The default is van Leer with
        minmod for pressure and normal velocity on the faces of cells in slow (standing) shocks: with HLLC's
        switch to HLL there it keeps a bow shock and its stagnation pressure still (tests/test_blunt_bodies.py),
        where plain van Leer's slopes make the stagnation pressure ring by about 0.7 %. Shocks that run through
        the grid keep van Leer.
    flux: numerical flux (hllc, hll, rusanov).
    cfl: Courant number used to pick the time step every step.
    integrator: ssp_rk2 or ssp_rk3.
    """

    order: int = 2
    limiter: str = "van_leer_shock_minmod"
    flux: str = "hllc"
    cfl: float = 0.4
    integrator: str = "ssp_rk2"

    def __post_init__(self) -> None:
        if self.order not in ORDERS:
            raise ValueError(f"order = {self.order!r} is not one of: {', '.join(map(str, ORDERS))}")
        _choice("limiter", self.limiter, LIMITERS)
        _choice("flux", self.flux, FLUXES)
        _choice("integrator", self.integrator, INTEGRATORS)
        if not (CFL_MIN <= self.cfl <= CFL_MAX):
            raise ValueError(f"cfl = {self.cfl!r} is outside the allowed range {CFL_MIN} to {CFL_MAX:g} "
                             f"(the SSP time integrators are stable up to a Courant number of {CFL_MAX:g})")

    @property
    def limiter_id(self) -> int:
        return LIM_FIRST_ORDER if self.order == 1 else LIMITERS[self.limiter].kernel_id

    @property
    def flux_id(self) -> int:
        return FLUXES[self.flux].kernel_id

    @property
    def tableau(self) -> SSPTableau:
        return INTEGRATORS[self.integrator]
