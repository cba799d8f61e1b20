"""Minimum-length nozzle walls by the method of characteristics, planar and axisymmetric.

A minimum-length nozzle turns the flow at a sharp throat corner through a centred Prandtl-Meyer fan and then
straightens it back with the wall, so that the exit flow is uniform and parallel at the design Mach number.
The fan's C- characteristics reflect off the symmetry line (axis) as C+ characteristics; the net of their
crossings is computed point by point, and the wall is laid where each C+ ends.

Planar: theta + nu is constant along C-, theta - nu along C+, theta_max = nu(M_e)/2, and the wall point on each
C+ is where it meets the wall drawn at the mean of the old and the new flow angle [AM].

Axisymmetric: the compatibility relations carry a source term [ZH]:
    along C- (dy/dx = tan(theta - mu)):  d(theta + nu) = + sin(mu) sin(theta) / cos(theta - mu) dx / y
    along C+ (dy/dx = tan(theta + mu)):  d(theta - nu) = - sin(mu) sin(theta) / cos(theta + mu) dx / y
solved by a predictor (coefficients at the known points) and corrector (mean of known and new point) step.
On the axis (theta = 0, y = 0) the C- term is taken from the point upstream. The fan angle theta_max is found
by bisection so that the last axis point has the design Mach number, and each wall point is placed on its C+
where the mass flow between the axis and the wall equals the throat's (the wall is a streamline; the throat is
taken as uniform and sonic).

Sources:
[AM] J. D. Anderson, Modern Compressible Flow, ch. 11 (method of characteristics; minimum-length nozzle) (from
     memory).
[ZH] M. J. Zucrow and J. D. Hoffman, Gas Dynamics, vol. 1 (1976), ch. 12: compatibility equations of steady
     two-dimensional and axisymmetric irrotational supersonic flow (from memory).
"""
from __future__ import annotations

import math

import numpy as np

from . import relations

#: Characteristics in the centred fan (planar; the axisymmetric net is solved many times in the bisection).
PLANAR_CHARACTERISTICS = 200
AXISYMMETRIC_CHARACTERISTICS = 40
_BISECTION_STEPS = 30


def _meet(p, slope_p, q, slope_q):
    """Intersection of the line through p with slope_p and the line through q with slope_q."""
    x = (q[1] - p[1] + slope_p * p[0] - slope_q * q[0]) / (slope_p - slope_q)
    return (x, p[1] + slope_p * (x - p[0]))


def planar_minimum_length_wall(area_ratio: float, gamma: float, throat_half_height_m: float,
                               characteristics: int = PLANAR_CHARACTERISTICS) -> list[tuple[float, float]]:
    """Wall points (x from the throat, half height) of a planar minimum-length nozzle [AM] ch. 11.

    A centred fan at the sharp corner turns the flow to theta_max = nu(M_e)/2. Its n characteristics (C-,
    carrying K- = theta + nu = 2 theta_i) reflect off the symmetry line (theta = 0) as C+ (K+ = theta - nu =
    -K-), cross the later C- ones, and are cancelled where they meet the wall, which is turned to the flow angle
    there. Points join by straight pieces at the mean slope of their ends (theta - mu for C-, theta + mu for
    C+). The exit half height approaches h_t A/A*(M_e) as n grows. The first point is the throat corner
    (0, h_t); the last has theta = 0 and the exit Mach number.
    """
    me = float(relations.mach_from_area_ratio(area_ratio, gamma, supersonic=True))
    theta_max = 0.5 * math.radians(float(relations.prandtl_meyer_deg(me, gamma)))
    n = int(characteristics)
    theta_i = [theta_max * (i + 1) / n for i in range(n)]
    k_minus = [2.0 * t for t in theta_i]
    # every nu on the net is theta_max * k / n for a whole k from 1 to 2n: one vectorised inversion for all
    step = theta_max / n
    machs = np.asarray(relations.mach_from_prandtl_meyer_deg(np.degrees(step * np.arange(1, 2 * n + 1)), gamma))
    mach_angles = np.arcsin(1.0 / machs)

    def mu(nu: float) -> float:
        """Mach angle at Prandtl-Meyer angle nu (radians)."""
        return float(mach_angles[int(round(nu / step)) - 1])

    corner = (0.0, throat_half_height_m)
    # state at the corner along each fan characteristic: theta_i, nu_i = theta_i
    prev_col: list[tuple[tuple[float, float], float, float]] = [(corner, t, t) for t in theta_i]  # (point, theta, nu)
    wall = [corner]
    wall_theta = theta_max
    for j in range(n):  # the C+ characteristic that starts on the axis where C-_j lands
        col: list[tuple[tuple[float, float], float, float]] = []
        k_plus = -k_minus[j]
        for i in range(j, n):
            th, nu = 0.5 * (k_minus[i] + k_plus), 0.5 * (k_minus[i] - k_plus)
            p_minus, th_m, nu_m = prev_col[i] if j == 0 else prev_col[i - j + 1]  # C-_i's previous point
            slope_minus = math.tan(0.5 * ((th_m - mu(nu_m)) + (th - mu(nu))))
            if i == j:
                x = p_minus[0] - p_minus[1] / slope_minus  # down to the symmetry line
                col.append(((x, 0.0), 0.0, nu))
            else:
                q, th_q, nu_q = col[-1]
                slope_plus = math.tan(0.5 * ((th_q + mu(nu_q)) + (th + mu(nu))))
                col.append((_meet(p_minus, slope_minus, q, slope_plus), th, nu))
        last, th_l, nu_l = col[-1]
        slope_wall = math.tan(0.5 * (wall_theta + th_l))
        slope_c = math.tan(th_l + mu(nu_l))
        wall.append(_meet(wall[-1], slope_wall, last, slope_c))
        wall_theta = th_l
        prev_col = col
    return wall


# ----------------------------------------------------------------------------- axisymmetric

class _Gas:
    """M(nu), mu(nu) and A*/A(M) for one gamma by interpolation in a fine table (nu is monotone in M)."""

    def __init__(self, gamma: float, mach_max: float):
        self.g = gamma
        m = np.linspace(1.0, mach_max, 40001)
        self.m = m
        self.nu = np.asarray(relations.prandtl_meyer_deg(m, gamma)) * math.pi / 180.0

    def mach(self, nu: float) -> float:
        if not nu <= self.nu[-1]:
            raise ValueError("the net ran beyond the Mach numbers of this nozzle")
        return float(np.interp(max(nu, 0.0), self.nu, self.m))

    def mu(self, nu: float) -> float:
        return math.asin(1.0 / self.mach(nu))

    def flux(self, nu: float) -> float:
        """rho V / (rho* a*) = A*/A at the Mach number of nu."""
        m = self.mach(nu)
        g = self.g
        return m / (2.0 / (g + 1.0) * (1.0 + 0.5 * (g - 1.0) * m * m)) ** ((g + 1.0) / (2.0 * (g - 1.0)))


def _source_minus(th: float, mu: float) -> float:
    return math.sin(mu) * math.sin(th) / math.cos(th - mu)


def _source_plus(th: float, mu: float) -> float:
    return math.sin(mu) * math.sin(th) / math.cos(th + mu)


def _axisymmetric_net(theta_max: float, n: int, gas: _Gas, rt: float, want_wall: bool):
    """Solve the net for a fan of theta_max; returns (nu at the last axis point, wall points or None)."""
    corner = (0.0, rt)
    theta_i = [theta_max * (i + 1) / n for i in range(n)]
    prev = [(corner, t, t) for t in theta_i]  # (point, theta, nu) on each C-_i
    wall = [corner] if want_wall else None
    for j in range(n):
        col: list[tuple[tuple[float, float], float, float]] = []
        for i in range(j, n):
            (x1, y1), th1, nu1 = prev[i] if j == 0 else prev[i - j + 1]
            mu1 = gas.mu(nu1)
            if i == j:
                # axis point: theta = 0, y = 0; C- from point 1 with its own source term
                s1 = _source_minus(th1, mu1) / y1
                slope = math.tan(th1 - mu1)
                x3 = x1 - y1 / slope
                nu3 = th1 + nu1 + s1 * (x3 - x1)
                for _ in range(2):
                    slope = math.tan(0.5 * ((th1 - mu1) + (0.0 - gas.mu(nu3))))
                    x3 = x1 - y1 / slope
                    nu3 = th1 + nu1 + s1 * (x3 - x1)
                col.append(((x3, 0.0), 0.0, nu3))
                continue
            (x2, y2), th2, nu2 = col[-1]
            mu2 = gas.mu(nu2)
            # predictor: slopes and source terms at the known points (the C+ term is 0 on the axis)
            sm = _source_minus(th1, mu1) / y1
            sp = _source_plus(th2, mu2) / y2 if y2 > 0 else 0.0
            p3 = _meet((x1, y1), math.tan(th1 - mu1), (x2, y2), math.tan(th2 + mu2))
            th3 = nu3 = 0.0
            for k in range(3):
                a = th1 + nu1 + sm * (p3[0] - x1)   # theta3 + nu3
                b = th2 - nu2 - sp * (p3[0] - x2)   # theta3 - nu3
                th3, nu3 = 0.5 * (a + b), 0.5 * (a - b)
                mu3 = gas.mu(nu3)
                # corrector: mean of the known and the new point
                thm, mum, ym = 0.5 * (th1 + th3), 0.5 * (mu1 + mu3), 0.5 * (y1 + p3[1])
                thp, mup, yp = 0.5 * (th2 + th3), 0.5 * (mu2 + mu3), 0.5 * (y2 + p3[1])
                sm = _source_minus(thm, mum) / ym
                sp = _source_plus(thp, mup) / yp
                p3 = _meet((x1, y1), math.tan(thm - mum), (x2, y2), math.tan(thp + mup))
            col.append((p3, th3, nu3))
        if want_wall:
            wall.append(_wall_point(col, gas, rt))
        prev = col
    return prev[-1][2], wall


def _wall_point(col, gas: _Gas, rt: float) -> tuple[float, float]:
    """Where the C+ of `col` (axis to its last net point) must end so that the mass flow between the axis and
    the wall equals the sonic throat's: integral of rho V sin(mu) 2 pi y ds over the C+ = rho* a* pi rt^2."""
    need = 0.5 * rt * rt  # divided by 2 pi rho* a*
    got = 0.0
    f_prev = None
    for k, ((x, y), th, nu) in enumerate(col):
        f = gas.flux(nu) * math.sin(gas.mu(nu)) * y
        if k:
            (xp, yp), _, _ = col[k - 1]
            got += 0.5 * (f + f_prev) * math.hypot(x - xp, y - yp)
        f_prev = f
    (xl, yl), thl, nul = col[-1]
    mul = gas.mu(nul)
    rest = need - got
    if rest <= 0.0:
        raise ValueError("the characteristic net passes more than the throat's mass flow")
    c = gas.flux(nul) * math.sin(mul)
    s = math.sin(thl + mul)
    # c (yl L + s L^2 / 2) = rest
    length = (-yl + math.sqrt(yl * yl + 2.0 * s * rest / c)) / s if s > 1e-12 else rest / (c * yl)
    return (xl + length * math.cos(thl + mul), yl + length * s)


def axisymmetric_minimum_length_wall(area_ratio: float, gamma: float, throat_radius_m: float,
                                     characteristics: int = AXISYMMETRIC_CHARACTERISTICS
                                     ) -> list[tuple[float, float]]:
    """Wall points (x from the throat, radius) of an axisymmetric minimum-length nozzle for the exit Mach number
    of area_ratio [AM], [ZH]. The exit radius comes out of the mass balance: it is a check, not an input."""
    me = float(relations.mach_from_area_ratio(area_ratio, gamma, supersonic=True))
    nu_e = math.radians(float(relations.prandtl_meyer_deg(me, gamma)))
    gas = _Gas(gamma, 3.0 * me + 2.0)
    n = int(characteristics)
    lo, hi = 0.0, 0.5 * nu_e  # the axisymmetric fan turns less than the planar one
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        try:
            nu_last, _ = _axisymmetric_net(mid, n, gas, throat_radius_m, False)
        except ValueError:  # the net ran beyond any Mach number of interest: far too much turning
            nu_last = math.inf
        if nu_last < nu_e:
            lo = mid
        else:
            hi = mid
    nu_last, wall = _axisymmetric_net(0.5 * (lo + hi), n, gas, throat_radius_m, True)
    if not abs(nu_last - nu_e) <= 1.0e-4 * nu_e:
        raise ValueError(f"the characteristics net reached Prandtl-Meyer angle {math.degrees(nu_last):.4g} deg on "
                         f"the axis instead of the exit's {math.degrees(nu_e):.4g} deg")
    return wall
