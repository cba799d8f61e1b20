"""Exact Riemann solver for the 1D Euler equations of a calorically perfect gas.

Used as the reference answer for shock-tube checks of the finite-volume solver. Method of E. F. Toro, "Riemann
Solvers and Numerical Methods for Fluid Dynamics", 3rd ed., Springer, 2009, ch. 4: the pressure function
f(p) = f_L(p) + f_R(p) + (u_R - u_L) is solved for the star pressure p* by Newton's method (sec. 4.3), and the
self-similar solution is sampled at xi = (x - x0)/t (sec. 4.5). Section numbers other than 4.3.3 (the test
problems) are from memory; individual equation numbers are not quoted.

States are (rho, u, p) tuples in consistent units (SI: kg/m^3, m/s, Pa, or any non-dimensional set).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

State = tuple[float, float, float]

_NEWTON_RTOL = 1e-14
_NEWTON_MAX_ITER = 200


@dataclass(frozen=True)
class StarState:
    """Solution between the two nonlinear waves: pressure and velocity (common to both sides of the contact)
    and the density just left and just right of the contact."""

    p: float
    u: float
    rho_l: float
    rho_r: float


@dataclass(frozen=True)
class WaveSpeeds:
    """Speeds dx/dt of the wave edges. For a shock, head == tail == shock speed.

    left_head <= left_tail <= contact <= right_tail <= right_head.
    """

    left_head: float
    left_tail: float
    contact: float
    right_tail: float
    right_head: float
    left_is_shock: bool
    right_is_shock: bool


def _check_gamma(gamma: float) -> float:
    g = float(gamma)
    if not (math.isfinite(g) and g > 1.0):
        raise ValueError(f"gamma = {gamma!r} is not allowed; the ratio of specific heats must be a finite number > 1")
    return g


def _check_state(side: str, state: State) -> tuple[float, float, float]:
    try:
        rho, u, p = (float(v) for v in state)
    except (TypeError, ValueError):
        raise ValueError(f"{side} = {state!r} is not allowed; it must be a (rho, u, p) tuple of numbers") from None
    if not (math.isfinite(rho) and rho > 0.0):
        raise ValueError(f"{side} rho = {rho!r} is not allowed; the density must be a finite number > 0")
    if not math.isfinite(u):
        raise ValueError(f"{side} u = {u!r} is not allowed; the velocity must be finite")
    if not (math.isfinite(p) and p > 0.0):
        raise ValueError(f"{side} p = {p!r} is not allowed; the pressure must be a finite number > 0")
    return rho, u, p


def _pressure_function(p: float, rho_k: float, p_k: float, a_k: float, g: float) -> tuple[float, float]:
    """f_K(p) and its derivative: rarefaction branch for p <= p_K, shock branch for p > p_K (Toro sec. 4.2)."""
    if p <= p_k:
        ratio = p / p_k
        f = 2.0 * a_k / (g - 1.0) * (ratio ** ((g - 1.0) / (2.0 * g)) - 1.0)
        df = ratio ** (-(g + 1.0) / (2.0 * g)) / (rho_k * a_k)
    else:
        a_coef = 2.0 / ((g + 1.0) * rho_k)
        b_coef = (g - 1.0) / (g + 1.0) * p_k
        root = math.sqrt(a_coef / (b_coef + p))
        f = (p - p_k) * root
        df = root * (1.0 - 0.5 * (p - p_k) / (b_coef + p))
    return f, df


def _initial_guess(left, right, a_l: float, a_r: float, g: float) -> float:
    """Adaptive starting value (Toro sec. 4.3.2 and ch. 9): PVRS, else two-rarefaction or two-shock estimate."""
    rho_l, u_l, p_l = left
    rho_r, u_r, p_r = right
    p_min, p_max = min(p_l, p_r), max(p_l, p_r)
    p_pv = max(0.0, 0.5 * (p_l + p_r) - 0.125 * (u_r - u_l) * (rho_l + rho_r) * (a_l + a_r))
    if p_max / p_min <= 2.0 and p_min <= p_pv <= p_max:
        return p_pv
    if p_pv < p_min:  # two-rarefaction approximation
        z = (g - 1.0) / (2.0 * g)
        num = a_l + a_r - 0.5 * (g - 1.0) * (u_r - u_l)
        den = a_l / p_l**z + a_r / p_r**z
        return (num / den) ** (1.0 / z)
    # two-shock approximation, started from the PVRS value
    p0 = max(p_pv, 1e-300)
    g_l = math.sqrt((2.0 / ((g + 1.0) * rho_l)) / ((g - 1.0) / (g + 1.0) * p_l + p0))
    g_r = math.sqrt((2.0 / ((g + 1.0) * rho_r)) / ((g - 1.0) / (g + 1.0) * p_r + p0))
    return (g_l * p_l + g_r * p_r - (u_r - u_l)) / (g_l + g_r)


def star_state(left: State, right: State, gamma: float = 1.4) -> StarState:
    """Exact star-region state (p*, u*, rho*_L, rho*_R) of the Riemann problem with data left | right.

    Raises ValueError if the data generate vacuum, i.e. the pressure positivity condition
    (u_R - u_L) < 2 (a_L + a_R) / (gamma - 1) fails (Toro sec. 4.3.1): then no positive p* exists.
    p* is found by Newton's method on the pressure function; the function is increasing and concave, so after
    the first step the iterates approach p* monotonically from below (the first step is kept positive).
    """
    g = _check_gamma(gamma)
    rho_l, u_l, p_l = _check_state("left", left)
    rho_r, u_r, p_r = _check_state("right", right)
    a_l = math.sqrt(g * p_l / rho_l)
    a_r = math.sqrt(g * p_r / rho_r)
    du = u_r - u_l
    du_crit = 2.0 * (a_l + a_r) / (g - 1.0)
    if du >= du_crit:
        raise ValueError(
            f"left = {tuple(left)!r}, right = {tuple(right)!r} generate vacuum: u_R - u_L = {du!r} must be below "
            f"2 (a_L + a_R) / (gamma - 1) = {du_crit!r} (pressure positivity condition)"
        )

    p = _initial_guess((rho_l, u_l, p_l), (rho_r, u_r, p_r), a_l, a_r, g)
    p_floor = 1e-12 * min(p_l, p_r)
    p = max(p, p_floor)
    for _ in range(_NEWTON_MAX_ITER):
        f_l, df_l = _pressure_function(p, rho_l, p_l, a_l, g)
        f_r, df_r = _pressure_function(p, rho_r, p_r, a_r, g)
        p_new = p - (f_l + f_r + du) / (df_l + df_r)
        if p_new <= 0.0:
            p_new = 0.5 * p  # keep the iterate positive; the concave f brings it back up
        change = 2.0 * abs(p_new - p) / (p_new + p)
        p = p_new
        if change <= _NEWTON_RTOL:
            break
    else:
        raise RuntimeError(f"star pressure did not converge for left = {left!r}, right = {right!r}")

    f_l, _ = _pressure_function(p, rho_l, p_l, a_l, g)
    f_r, _ = _pressure_function(p, rho_r, p_r, a_r, g)
    u = 0.5 * (u_l + u_r) + 0.5 * (f_r - f_l)
    return StarState(p=p, u=u, rho_l=_star_density(p, rho_l, p_l, g), rho_r=_star_density(p, rho_r, p_r, g))


def _star_density(p_star: float, rho_k: float, p_k: float, g: float) -> float:
    """Density behind a shock (Hugoniot) or a rarefaction (isentrope) connecting to state K (Toro sec. 4.4)."""
    ratio = p_star / p_k
    if p_star > p_k:
        q = (g - 1.0) / (g + 1.0)
        return rho_k * (ratio + q) / (q * ratio + 1.0)
    return rho_k * ratio ** (1.0 / g)


def wave_speeds(left: State, right: State, gamma: float = 1.4) -> WaveSpeeds:
    """Speeds of the left wave, contact and right wave (Toro sec. 4.4: shock speeds and fan head/tail speeds)."""
    g = _check_gamma(gamma)
    star = star_state(left, right, g)
    rho_l, u_l, p_l = _check_state("left", left)
    rho_r, u_r, p_r = _check_state("right", right)
    a_l = math.sqrt(g * p_l / rho_l)
    a_r = math.sqrt(g * p_r / rho_r)
    c1 = (g + 1.0) / (2.0 * g)
    c2 = (g - 1.0) / (2.0 * g)
    left_shock = star.p > p_l
    right_shock = star.p > p_r
    if left_shock:
        s = u_l - a_l * math.sqrt(c1 * star.p / p_l + c2)
        l_head = l_tail = s
    else:
        l_head = u_l - a_l
        l_tail = star.u - a_l * (star.p / p_l) ** c2
    if right_shock:
        s = u_r + a_r * math.sqrt(c1 * star.p / p_r + c2)
        r_head = r_tail = s
    else:
        r_head = u_r + a_r
        r_tail = star.u + a_r * (star.p / p_r) ** c2
    return WaveSpeeds(left_head=l_head, left_tail=l_tail, contact=star.u, right_tail=r_tail, right_head=r_head,
                      left_is_shock=left_shock, right_is_shock=right_shock)


def sample(left: State, right: State, gamma: float, xi: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sample the exact solution at similarity coordinates xi = (x - x0)/t; returns (rho, u, p) arrays.

    Vectorised over xi (Toro sec. 4.5). Points exactly on the contact take the left star state.
    """
    g = _check_gamma(gamma)
    rho_l, u_l, p_l = _check_state("left", left)
    rho_r, u_r, p_r = _check_state("right", right)
    xi = np.asarray(xi, dtype=float)
    if not np.all(np.isfinite(xi)):
        raise ValueError("xi contains non-finite values; xi = (x - x0)/t must be finite")
    star = star_state(left, right, g)
    waves = wave_speeds(left, right, g)
    a_l = math.sqrt(g * p_l / rho_l)
    a_r = math.sqrt(g * p_r / rho_r)

    rho = np.empty_like(xi)
    u = np.empty_like(xi)
    p = np.empty_like(xi)

    on_left = xi <= star.u
    # --- left of the contact: left state | (fan) | left star state
    in_l = on_left & (xi < waves.left_head)
    in_star_l = on_left & (xi >= waves.left_tail) & ~in_l
    in_fan_l = on_left & ~in_l & ~in_star_l
    # --- right of the contact: right star state | (fan) | right state
    on_right = ~on_left
    in_r = on_right & (xi > waves.right_head)
    in_star_r = on_right & (xi <= waves.right_tail) & ~in_r
    in_fan_r = on_right & ~in_r & ~in_star_r

    for mask, state in ((in_l, (rho_l, u_l, p_l)), (in_r, (rho_r, u_r, p_r)),
                        (in_star_l, (star.rho_l, star.u, star.p)), (in_star_r, (star.rho_r, star.u, star.p))):
        rho[mask], u[mask], p[mask] = state

    gm, gp = g - 1.0, g + 1.0
    if np.any(in_fan_l):
        x = xi[in_fan_l]
        base = 2.0 / gp + gm / (gp * a_l) * (u_l - x)
        rho[in_fan_l] = rho_l * base ** (2.0 / gm)
        u[in_fan_l] = 2.0 / gp * (a_l + 0.5 * gm * u_l + x)
        p[in_fan_l] = p_l * base ** (2.0 * g / gm)
    if np.any(in_fan_r):
        x = xi[in_fan_r]
        base = 2.0 / gp - gm / (gp * a_r) * (u_r - x)
        rho[in_fan_r] = rho_r * base ** (2.0 / gm)
        u[in_fan_r] = 2.0 / gp * (-a_r + 0.5 * gm * u_r + x)
        p[in_fan_r] = p_r * base ** (2.0 * g / gm)
    return rho, u, p


def exact_solution(left: State, right: State, gamma: float, x: np.ndarray, x0: float,
                   t: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Exact (rho, u, p) at positions x (array) and time t > 0 for a diaphragm at x0 removed at t = 0."""
    t = float(t)
    if not (math.isfinite(t) and t > 0.0):
        raise ValueError(f"t = {t!r} is not allowed; the sampling time must be a finite number > 0")
    x0 = float(x0)
    if not math.isfinite(x0):
        raise ValueError(f"x0 = {x0!r} is not allowed; the diaphragm position must be finite")
    return sample(left, right, gamma, (np.asarray(x, dtype=float) - x0) / t)
