"""Ideal one-dimensional gas-dynamics relations for a calorically perfect gas.

These are the "ideal 1D theory" figures shown beside a simulation (isentropic ratios, shocks, expansion fans,
nozzle mass flow, c* and C_F), and they are used to check the solver. Pure Python / numpy, no third-party gas
library.

Sources (cited per function):
  [N] NACA Report 1135, Ames Research Staff, "Equations, Tables, and Charts for Compressible Flow", 1953.
  [A] J. D. Anderson, "Modern Compressible Flow", 3rd ed. (equation numbers from memory; check your edition).
  [SB] G. P. Sutton and O. Biblarz, "Rocket Propulsion Elements", ch. 3 (equation numbers from memory).

Conventions: every ratio is dimensionless; angles are in degrees (names end in ``_deg``); dimensional inputs and
outputs are SI with the unit in the name (``p0_pa``, ``t0_k``, ``throat_area_m2``, ``r_j_kg_k``). ``gamma`` is
the ratio of specific heats and must be > 1. Functions marked "array" accept numpy arrays and return arrays of the
same shape; a plain float in gives a plain float out.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

ArrayLike = float | np.ndarray

#: Relative tolerance on p_amb/p0 within which ``flow_regime`` reports "ideal" expansion: |pa - pe| <= 1e-3 * pe.
#: Common practice, no source: it only needs to be small compared with the gap to the shock-at-exit limit.
IDEAL_EXPANSION_RTOL = 1e-3

_BISECTION_MAX_ITER = 400


# --------------------------------------------------------------------------------------------------------------
# input checks and helpers
# --------------------------------------------------------------------------------------------------------------
def _check_gamma(gamma: float) -> float:
    gamma = float(gamma)
    if not (math.isfinite(gamma) and gamma > 1.0):
        raise ValueError(f"gamma = {gamma!r} is not allowed; the ratio of specific heats must be a finite number > 1")
    return gamma


def _as_array(name: str, value: ArrayLike) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"{name} = {value!r} is not allowed; it must be finite")
    return arr


def _first_bad(arr: np.ndarray, bad: np.ndarray) -> float:
    return float(np.atleast_1d(arr)[np.atleast_1d(bad)][0])


def _out(arr: np.ndarray) -> ArrayLike:
    """A 0-d result goes back as a plain float, anything else as an array."""
    return float(arr) if np.ndim(arr) == 0 else arr


def _bisect(func: Callable[[np.ndarray], np.ndarray], lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Vectorised bisection for a root of ``func`` that lies in [lo, hi] (elementwise).

    The sign of ``func`` at ``lo`` decides which half is kept, so func may be increasing or decreasing. Halving
    goes on until the bracket no longer shrinks in floating point, i.e. the root is found to machine precision;
    bisection cannot diverge, which is why it is preferred here over Newton's method.
    """
    lo = np.array(lo, dtype=float)
    hi = np.array(hi, dtype=float)
    f_lo = func(lo)
    for _ in range(_BISECTION_MAX_ITER):
        mid = 0.5 * (lo + hi)
        if np.all((mid == lo) | (mid == hi)):
            break
        f_mid = func(mid)
        same_side = np.sign(f_mid) == np.sign(f_lo)
        lo = np.where(same_side, mid, lo)
        f_lo = np.where(same_side, f_mid, f_lo)
        hi = np.where(same_side, hi, mid)
    return 0.5 * (lo + hi)


# --------------------------------------------------------------------------------------------------------------
# isentropic flow
# --------------------------------------------------------------------------------------------------------------
def _check_mach(mach: ArrayLike, name: str = "mach", minimum: float = 0.0, strict: bool = False) -> np.ndarray:
    m = _as_array(name, mach)
    bad = m <= minimum if strict else m < minimum
    if np.any(bad):
        rel = ">" if strict else ">="
        raise ValueError(f"{name} = {_first_bad(m, bad)!r} is not allowed; it must be {rel} {minimum}")
    return m


def t_t0(mach: ArrayLike, gamma: float = 1.4) -> ArrayLike:
    """Static-to-stagnation temperature ratio T/T0 = 1 / (1 + (gamma-1)/2 M^2). Array.

    Source: [N] isentropic relations; [A] eq. 3.28 (from memory).
    """
    g = _check_gamma(gamma)
    m = _check_mach(mach)
    return _out(1.0 / (1.0 + 0.5 * (g - 1.0) * m * m))


def p_p0(mach: ArrayLike, gamma: float = 1.4) -> ArrayLike:
    """Static-to-stagnation pressure ratio p/p0 = (T/T0)^(gamma/(gamma-1)). Array.

    Source: [N] isentropic relations; [A] eq. 3.30 (from memory).
    """
    g = _check_gamma(gamma)
    return _out(np.asarray(t_t0(mach, g)) ** (g / (g - 1.0)))


def rho_rho0(mach: ArrayLike, gamma: float = 1.4) -> ArrayLike:
    """Static-to-stagnation density ratio rho/rho0 = (T/T0)^(1/(gamma-1)). Array.

    Source: [N] isentropic relations; [A] eq. 3.31 (from memory).
    """
    g = _check_gamma(gamma)
    return _out(np.asarray(t_t0(mach, g)) ** (1.0 / (g - 1.0)))


def _area_ratio_raw(m: np.ndarray, g: float) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return (2.0 / (g + 1.0) * (1.0 + 0.5 * (g - 1.0) * m * m)) ** ((g + 1.0) / (2.0 * (g - 1.0))) / m


def area_ratio(mach: ArrayLike, gamma: float = 1.4) -> ArrayLike:
    """Isentropic area ratio A/A* = (1/M) [2/(gamma+1) (1 + (gamma-1)/2 M^2)]^((gamma+1)/(2(gamma-1))). Array.

    mach must be > 0. Source: [N] isentropic relations; [A] eq. 5.20 (from memory).
    """
    g = _check_gamma(gamma)
    m = _check_mach(mach, strict=True)
    return _out(_area_ratio_raw(m, g))


def mach_from_area_ratio(area_ratio: ArrayLike, gamma: float = 1.4, supersonic: bool = False) -> ArrayLike:
    """Mach number for a given A/A* on the subsonic (default) or supersonic branch. Array.

    A/A* must be >= 1 (the sonic throat is the smallest section). Solved by bisection on a bracket that is grown
    until it holds the root: (0, 1] on the subsonic branch, [1, 2^k] on the supersonic branch. Inverse of
    [A] eq. 5.20 (from memory).
    """
    g = _check_gamma(gamma)
    ar = _as_array("area_ratio", area_ratio)
    bad = ar < 1.0
    if np.any(bad):
        raise ValueError(
            f"area_ratio = {_first_bad(ar, bad)!r} is not allowed; A/A* must be >= 1 (the throat is the minimum area)"
        )
    ar = np.atleast_1d(ar)
    if supersonic:
        lo = np.ones_like(ar)
        hi = np.full_like(ar, 2.0)
        while np.any(short := _area_ratio_raw(hi, g) < ar):
            hi = np.where(short, 2.0 * hi, hi)
    else:
        hi = np.ones_like(ar)
        lo = np.full_like(ar, 0.5)
        while np.any(short := _area_ratio_raw(lo, g) < ar):
            lo = np.where(short, 0.5 * lo, lo)
    mach = _bisect(lambda m: _area_ratio_raw(m, g) - ar, lo, hi)
    mach = np.where(ar == 1.0, 1.0, mach)
    return _out(mach.reshape(np.shape(area_ratio)))


def mach_from_p_p0(p_p0: ArrayLike, gamma: float = 1.4) -> ArrayLike:
    """Mach number for a given static-to-stagnation pressure ratio, 0 < p/p0 <= 1. Array.

    Closed-form inverse of p/p0 = (1 + (gamma-1)/2 M^2)^(-gamma/(gamma-1)) ([A] eq. 3.30, from memory).
    """
    g = _check_gamma(gamma)
    r = _as_array("p_p0", p_p0)
    bad = (r <= 0.0) | (r > 1.0)
    if np.any(bad):
        raise ValueError(f"p_p0 = {_first_bad(r, bad)!r} is not allowed; p/p0 must satisfy 0 < p/p0 <= 1")
    m2 = 2.0 / (g - 1.0) * (r ** (-(g - 1.0) / g) - 1.0)
    return _out(np.sqrt(np.maximum(m2, 0.0)))


# --------------------------------------------------------------------------------------------------------------
# normal and oblique shocks
# --------------------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class NormalShock:
    """Jump across a stationary normal shock; index 1 = upstream, 2 = downstream."""

    m2: ArrayLike
    p2_p1: ArrayLike
    rho2_rho1: ArrayLike
    t2_t1: ArrayLike
    p02_p01: ArrayLike


def _normal_shock_raw(m1: np.ndarray, g: float) -> NormalShock:
    m1s = m1 * m1
    m2 = np.sqrt((1.0 + 0.5 * (g - 1.0) * m1s) / (g * m1s - 0.5 * (g - 1.0)))
    p21 = 1.0 + 2.0 * g / (g + 1.0) * (m1s - 1.0)
    r21 = (g + 1.0) * m1s / (2.0 + (g - 1.0) * m1s)
    t21 = p21 / r21
    # total-pressure ratio = (rho2/rho1)^(g/(g-1)) * (p2/p1)^(-1/(g-1))  (entropy rise across the shock)
    p0r = r21 ** (g / (g - 1.0)) * p21 ** (-1.0 / (g - 1.0))
    return NormalShock(m2=_out(m2), p2_p1=_out(p21), rho2_rho1=_out(r21), t2_t1=_out(t21), p02_p01=_out(p0r))


def normal_shock(m1: ArrayLike, gamma: float = 1.4) -> NormalShock:
    """Normal-shock relations for upstream Mach m1 >= 1. Array.

    Sources: [N] normal-shock relations; [A] eqs. 3.51 (M2), 3.53 (rho2/rho1),
    3.57 (p2/p1), 3.59 (T2/T1) (from memory).
    """
    g = _check_gamma(gamma)
    m = _as_array("m1", m1)
    bad = m < 1.0
    if np.any(bad):
        raise ValueError(
            f"m1 = {_first_bad(m, bad)!r} is not allowed; a normal shock needs a supersonic upstream Mach m1 >= 1"
        )
    return _normal_shock_raw(m, g)


def _theta_from_beta(mach: float, beta_rad: float | np.ndarray, g: float) -> np.ndarray:
    """theta-beta-M relation: tan(theta) = 2 cot(beta) (M^2 sin^2 beta - 1) / (M^2 (gamma + cos 2 beta) + 2).

    Source: [A] eq. 4.17 (from memory); [N] oblique-shock relations. Returns theta in radians.
    """
    b = np.asarray(beta_rad, dtype=float)
    num = 2.0 * (mach * mach * np.sin(b) ** 2 - 1.0)
    den = np.tan(b) * (mach * mach * (g + np.cos(2.0 * b)) + 2.0)
    return np.arctan2(num, den)


def _beta_at_theta_max_rad(mach: float, g: float) -> float:
    """Closed form for the wave angle of maximum deflection ([N] oblique-shock relations, formula from memory).

    sin^2 beta = [ (g+1)/4 M^2 - 1 + sqrt((g+1) ((g+1)/16 M^4 + (g-1)/2 M^2 + 1)) ] / (g M^2).
    The test suite checks this against a direct numerical maximisation of theta(beta).
    """
    m2 = mach * mach
    s2 = ((g + 1.0) / 4.0 * m2 - 1.0 + math.sqrt((g + 1.0) * ((g + 1.0) / 16.0 * m2 * m2 + (g - 1.0) / 2.0 * m2 + 1.0)))
    s2 /= g * m2
    return math.asin(math.sqrt(min(s2, 1.0)))


def _check_supersonic_scalar(mach: float) -> float:
    m = float(mach)
    if not (math.isfinite(m) and m > 1.0):
        raise ValueError(f"mach = {mach!r} is not allowed; an oblique shock needs a finite upstream Mach > 1")
    return m


def max_deflection_deg(mach: float, gamma: float = 1.4) -> tuple[float, float]:
    """Maximum flow deflection for an attached oblique shock: returns (theta_max_deg, beta_at_theta_max_deg).

    Beyond theta_max the shock detaches. Sources: [N] oblique-shock relations (formula from memory); [A] ch. 4.
    """
    g = _check_gamma(gamma)
    m = _check_supersonic_scalar(mach)
    beta = _beta_at_theta_max_rad(m, g)
    theta = float(_theta_from_beta(m, beta, g))
    return math.degrees(theta), math.degrees(beta)


def oblique_shock_beta_deg(mach: float, theta_deg: float, gamma: float = 1.4, strong: bool = False) -> float:
    """Wave angle beta (degrees) of the attached oblique shock that turns the flow by theta_deg.

    Weak branch by default (beta between the Mach angle and beta at theta_max), strong branch if ``strong``
    (beta between beta at theta_max and 90 deg). theta(beta) is monotonic on each branch, so bisection is safe.
    Raises ValueError when theta_deg exceeds the maximum deflection (detached shock). Source: [A] eq. 4.17 (from
    memory).
    """
    g = _check_gamma(gamma)
    m = _check_supersonic_scalar(mach)
    theta = float(theta_deg)
    if not (math.isfinite(theta) and theta >= 0.0):
        raise ValueError(f"theta_deg = {theta_deg!r} is not allowed; the deflection must be a finite angle >= 0 deg")
    theta_max_deg, beta_max_deg = max_deflection_deg(m, g)
    if theta > theta_max_deg:
        raise ValueError(
            f"theta_deg = {theta!r} exceeds the maximum deflection {theta_max_deg:.4f} deg for mach = {m!r}, "
            f"gamma = {g!r}; the shock detaches (allowed: 0 <= theta_deg <= theta_max)"
        )
    beta_max = math.radians(beta_max_deg)
    mu = math.asin(1.0 / m)
    theta_rad = math.radians(theta)
    if strong:
        lo, hi = beta_max, 0.5 * math.pi
    else:
        lo, hi = mu, beta_max
    if theta == theta_max_deg:
        return beta_max_deg
    if theta == 0.0:
        return math.degrees(hi if strong else lo)
    beta = _bisect(lambda b: _theta_from_beta(m, b, g) - theta_rad, np.array(lo), np.array(hi))
    return math.degrees(float(beta))


@dataclass(frozen=True)
class ObliqueShock:
    """Oblique-shock result: wave angle, downstream Mach and static jumps (1 = upstream, 2 = downstream)."""

    beta_deg: float
    m2: float
    p2_p1: float
    rho2_rho1: float
    t2_t1: float


def oblique_shock(mach: float, theta_deg: float, gamma: float = 1.4, strong: bool = False) -> ObliqueShock:
    """Full oblique-shock solution for upstream Mach and deflection theta_deg (weak branch unless ``strong``).

    The normal component M1 sin(beta) goes through the normal-shock relations; M2 = Mn2 / sin(beta - theta).
    Sources: [A] ch. 4 (from memory); [N] oblique-shock relations.
    """
    g = _check_gamma(gamma)
    beta_deg = oblique_shock_beta_deg(mach, theta_deg, g, strong=strong)
    beta = math.radians(beta_deg)
    mn1 = max(float(mach) * math.sin(beta), 1.0)  # rounding guard at theta = 0 on the weak branch
    ns = _normal_shock_raw(np.asarray(mn1), g)
    m2 = float(ns.m2) / math.sin(beta - math.radians(float(theta_deg)))
    return ObliqueShock(beta_deg=beta_deg, m2=m2, p2_p1=float(ns.p2_p1), rho2_rho1=float(ns.rho2_rho1),
                        t2_t1=float(ns.t2_t1))


# --------------------------------------------------------------------------------------------------------------
# Prandtl-Meyer expansion
# --------------------------------------------------------------------------------------------------------------
def _prandtl_meyer_rad(m: np.ndarray, g: float) -> np.ndarray:
    k = math.sqrt((g + 1.0) / (g - 1.0))
    s = np.sqrt(np.maximum(m * m - 1.0, 0.0))
    return k * np.arctan(s / k) - np.arctan(s)


def prandtl_meyer_deg(mach: ArrayLike, gamma: float = 1.4) -> ArrayLike:
    """Prandtl-Meyer function nu(M) in degrees, mach >= 1. Array.

    nu = sqrt((g+1)/(g-1)) atan(sqrt((g-1)/(g+1) (M^2-1))) - atan(sqrt(M^2-1)). Source: [A] eq. 4.44 (from
    memory); [N] Prandtl-Meyer relation.
    """
    g = _check_gamma(gamma)
    m = _check_mach(mach, minimum=1.0)
    return _out(np.degrees(_prandtl_meyer_rad(m, g)))


def prandtl_meyer_max_deg(gamma: float = 1.4) -> float:
    """Limit of nu as M -> infinity: (pi/2)(sqrt((g+1)/(g-1)) - 1), in degrees. Source: [A] ch. 4 (from memory)."""
    g = _check_gamma(gamma)
    return math.degrees(0.5 * math.pi * (math.sqrt((g + 1.0) / (g - 1.0)) - 1.0))


def mach_from_prandtl_meyer_deg(nu_deg: ArrayLike, gamma: float = 1.4) -> ArrayLike:
    """Inverse Prandtl-Meyer function: Mach >= 1 for 0 <= nu_deg < nu_max. Array; bisection on [1, 2^k]."""
    g = _check_gamma(gamma)
    nu = _as_array("nu_deg", nu_deg)
    nu_max = prandtl_meyer_max_deg(g)
    bad = (nu < 0.0) | (nu >= nu_max)
    if np.any(bad):
        raise ValueError(
            f"nu_deg = {_first_bad(nu, bad)!r} is not allowed; it must satisfy 0 <= nu_deg < {nu_max:.6f} "
            f"(the Prandtl-Meyer limit for gamma = {g!r})"
        )
    nu_rad = np.radians(np.atleast_1d(nu))
    lo = np.ones_like(nu_rad)
    hi = np.full_like(nu_rad, 2.0)
    while np.any(short := _prandtl_meyer_rad(hi, g) < nu_rad):
        if np.max(hi) > 1e300:
            raise ValueError(f"nu_deg = {nu_deg!r} is too close to the limit {nu_max!r} deg to be inverted")
        hi = np.where(short, 2.0 * hi, hi)
    mach = _bisect(lambda m: _prandtl_meyer_rad(m, g) - nu_rad, lo, hi)
    mach = np.where(nu_rad == 0.0, 1.0, mach)
    return _out(mach.reshape(np.shape(nu_deg)))


# --------------------------------------------------------------------------------------------------------------
# rocket nozzle figures
# --------------------------------------------------------------------------------------------------------------
def _check_positive(name: str, value: float) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 0.0):
        raise ValueError(f"{name} = {value!r} is not allowed; it must be a finite number > 0")
    return v


def _gamma_function(g: float) -> float:
    """Vandenkerckhove function Gamma(g) = sqrt(g) (2/(g+1))^((g+1)/(2(g-1)))."""
    return math.sqrt(g) * (2.0 / (g + 1.0)) ** ((g + 1.0) / (2.0 * (g - 1.0)))


def choked_mass_flow_kg_s(p0_pa: float, t0_k: float, throat_area_m2: float, gamma: float = 1.4,
                          r_j_kg_k: float = 287.05) -> float:
    """Mass flow through a choked (sonic) throat, kg/s: mdot = p0 A* sqrt(g/(R T0)) (2/(g+1))^((g+1)/(2(g-1))).

    Inputs: stagnation pressure in Pa, stagnation temperature in K, throat area in m^2, specific gas constant in
    J/(kg K) (default: dry air, common practice value). Sources: [A] ch. 5 (from memory); [SB] eq. 3-24 (from
    memory).
    """
    g = _check_gamma(gamma)
    p0 = _check_positive("p0_pa", p0_pa)
    t0 = _check_positive("t0_k", t0_k)
    at = _check_positive("throat_area_m2", throat_area_m2)
    r = _check_positive("r_j_kg_k", r_j_kg_k)
    return p0 * at * _gamma_function(g) / math.sqrt(r * t0)


def c_star_m_s(t0_k: float, gamma: float = 1.4, r_j_kg_k: float = 287.05) -> float:
    """Characteristic velocity c* = p0 A* / mdot = sqrt(R T0) / Gamma(g), m/s.

    Depends only on the chamber gas, not on the nozzle. Source: [SB] eq. 3-32 (from memory).
    """
    g = _check_gamma(gamma)
    t0 = _check_positive("t0_k", t0_k)
    r = _check_positive("r_j_kg_k", r_j_kg_k)
    return math.sqrt(r * t0) / _gamma_function(g)


def thrust_coefficient(pe_p0: float, pa_p0: float, area_ratio: float, gamma: float = 1.4) -> float:
    """Ideal thrust coefficient C_F = F / (p0 A*): momentum term plus pressure term.

    C_F = sqrt( 2 g^2/(g-1) (2/(g+1))^((g+1)/(g-1)) [1 - (pe/p0)^((g-1)/g)] ) + (pe/p0 - pa/p0) Ae/A*.

    pe_p0: exit-to-chamber pressure ratio (0 < pe_p0 <= 1), pa_p0: ambient-to-chamber ratio (>= 0, 0 = vacuum),
    area_ratio: Ae/A* (>= 1). pe_p0 and area_ratio are normally tied by isentropic expansion
    (see ``exit_pressure_ratio``) but are separate inputs, as in the source. Source: [SB] eq. 3-30 (from memory).
    """
    g = _check_gamma(gamma)
    pe = float(pe_p0)
    pa = float(pa_p0)
    eps = float(area_ratio)
    if not (math.isfinite(pe) and 0.0 < pe <= 1.0):
        raise ValueError(f"pe_p0 = {pe_p0!r} is not allowed; it must satisfy 0 < pe_p0 <= 1")
    if not (math.isfinite(pa) and pa >= 0.0):
        raise ValueError(f"pa_p0 = {pa_p0!r} is not allowed; it must be >= 0 (0 means vacuum)")
    if not (math.isfinite(eps) and eps >= 1.0):
        raise ValueError(f"area_ratio = {area_ratio!r} is not allowed; Ae/A* must be >= 1")
    return momentum_thrust_coefficient(pe, g) + (pe - pa) * eps


def momentum_thrust_coefficient(pe_p0: float, gamma: float = 1.4) -> float:
    """Momentum (jet) part of the ideal C_F, i.e. C_F at optimum expansion pe = pa. [SB] eq. 3-30 (from memory)."""
    g = _check_gamma(gamma)
    pe = float(pe_p0)
    if not (math.isfinite(pe) and 0.0 < pe <= 1.0):
        raise ValueError(f"pe_p0 = {pe_p0!r} is not allowed; it must satisfy 0 < pe_p0 <= 1")
    k = 2.0 * g * g / (g - 1.0) * (2.0 / (g + 1.0)) ** ((g + 1.0) / (g - 1.0))
    return math.sqrt(k * (1.0 - pe ** ((g - 1.0) / g)))


def exit_pressure_ratio(area_ratio: ArrayLike, gamma: float = 1.4) -> ArrayLike:
    """Design exit pressure ratio pe/p0 of a nozzle with Ae/A* = area_ratio, supersonic branch. Array."""
    return p_p0(mach_from_area_ratio(area_ratio, gamma, supersonic=True), gamma)


@dataclass(frozen=True)
class NozzlePressureLimits:
    """The three back-pressure ratios p_amb/p0 that split the 1D regimes of a converging-diverging nozzle.

    subsonic_pa_p0: throat just sonic, subsonic everywhere else (above this: no choking).
    shock_at_exit_pa_p0: normal shock standing in the exit plane (between this and subsonic: shock inside).
    design_pa_p0: isentropic supersonic exit, pe = pa (ideal expansion).
    """

    subsonic_pa_p0: float
    shock_at_exit_pa_p0: float
    design_pa_p0: float


def pressure_ratio_limits(area_ratio: float, gamma: float = 1.4) -> NozzlePressureLimits:
    """1D back-pressure limits for a converging-diverging nozzle with exit-to-throat area ratio Ae/A* >= 1.

    Sources: [A] ch. 5, nozzle flows (from memory); the shock-at-exit value is the design exit pressure times the normal-shock
    p2/p1 at the design exit Mach.
    """
    g = _check_gamma(gamma)
    eps = float(area_ratio)
    if not (math.isfinite(eps) and eps >= 1.0):
        raise ValueError(f"area_ratio = {area_ratio!r} is not allowed; Ae/A* must be >= 1")
    m_sub = mach_from_area_ratio(eps, g, supersonic=False)
    m_sup = mach_from_area_ratio(eps, g, supersonic=True)
    design = float(p_p0(m_sup, g))
    shock_at_exit = design * float(_normal_shock_raw(np.asarray(max(m_sup, 1.0)), g).p2_p1)
    return NozzlePressureLimits(subsonic_pa_p0=float(p_p0(m_sub, g)), shock_at_exit_pa_p0=shock_at_exit,
                                design_pa_p0=design)


def flow_regime(pa_p0: float, area_ratio: float, gamma: float = 1.4) -> str:
    """1D flow regime of a converging-diverging nozzle for back pressure ratio pa_p0 = p_amb/p0 (0 <= pa_p0 <= 1).

    Returns one of "subsonic", "shock in nozzle", "over-expanded", "ideal", "under-expanded". "ideal" means
    |pa - pe| <= IDEAL_EXPANSION_RTOL * pe (0.1 %), checked first. Otherwise: pa >= subsonic limit -> "subsonic"
    (at equality the throat is just sonic but the flow stays subsonic downstream); shock-at-exit < pa < subsonic
    limit -> "shock in nozzle"; design < pa <= shock-at-exit -> "over-expanded" (oblique shocks outside); pa below
    design -> "under-expanded" (expansion outside). Source: [A] ch. 5, nozzle flows (from memory).
    """
    g = _check_gamma(gamma)
    pa = float(pa_p0)
    if not (math.isfinite(pa) and 0.0 <= pa <= 1.0):
        raise ValueError(f"pa_p0 = {pa_p0!r} is not allowed; p_amb/p0 must satisfy 0 <= pa_p0 <= 1")
    limits = pressure_ratio_limits(area_ratio, g)
    if abs(pa - limits.design_pa_p0) <= IDEAL_EXPANSION_RTOL * limits.design_pa_p0:
        return "ideal"
    if pa >= limits.subsonic_pa_p0:
        return "subsonic"
    if pa > limits.shock_at_exit_pa_p0:
        return "shock in nozzle"
    if pa > limits.design_pa_p0:
        return "over-expanded"
    return "under-expanded"
