"""Chamber-and-nozzle shapes from a handful of numbers, and a scenario that runs them.

An engineer usually knows a nozzle by its numbers (throat radius, contraction ratio, chamber length, throat
roundings, exit area ratio, a cone angle or a bell), not by a drawing. This module turns those numbers into the
wall contour, then into a scenario document (a wall polygon, a reservoir at the closed end, throat and exit
stations) that `shockslate.solver.scenario` validates and runs.

Geometry, from the closed chamber end at x = 0: a cylinder of radius r_c and length L_c, a straight convergent
cone at the convergent half angle, an upstream throat arc of radius R_u, the throat (radius r_t), a downstream
throat arc of radius R_d, then either a straight cone at the divergent half angle or a bell; or, after a sharp
throat corner, the minimum-length contour by the method of characteristics. In axisymmetric mode
"radius" is a radius and areas go with its square; in planar mode it is the half height above a symmetry line
(the domain's bottom edge, a slip wall), areas go with it linearly and are per metre of depth.

Sources:
[SB] G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3: conical nozzles, the 15 degree cone as the
     length reference of bell nozzles, and a table of bell angles (Table 3-4; read from memory).
[R]  G. V. R. Rao, "Exhaust nozzle contour for optimum thrust", Jet Propulsion 28 (1958), and Rao 1960
     ("Approximation of optimum thrust nozzle contour", ARS Journal 30): the thrust-optimised bell and its
     parabolic approximation, a parabola from the inflection point N (wall angle theta_n) to the exit E (wall
     angle theta_e), here drawn as the quadratic Bezier curve through N and E whose control point is where the
     two tangents meet. Downstream throat rounding 0.382 r_t and upstream 1.5 r_t are the values commonly used
     with it (common practice; from memory).
[AM] J. D. Anderson, Modern Compressible Flow, ch. 11, and M. J. Zucrow and J. D. Hoffman, Gas Dynamics ch. 12:
     the minimum-length contour by the method of characteristics (solver/characteristics.py; from memory).
[HH] D. K. Huzel and D. H. Huang, Modern Engineering for Design of Liquid-Propellant Rocket Engines (1992),
     fig. 4-16: theta_n and theta_e against area ratio for bells of 60 to 100 % of the cone length (from memory).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Optional

import numpy as np

from .characteristics import axisymmetric_minimum_length_wall, planar_minimum_length_wall
from .gas import GAMMA_MAX, GAMMA_MIN, HOT_PRODUCTS, PRESETS, Gas

MODES = ("axisymmetric", "planar")
SHAPES = ("cone", "bell", "moc")
#: Reference length of a bell: a cone of this half angle with the same throat and exit [SB], [R].
REFERENCE_CONE_DEG = 15.0

#: Default bell angles for an 80 % bell (length 0.8 of the 15 degree cone) against area ratio: approximate
#: readings of [HH] fig. 4-16 / [SB] Table 3-4, FROM MEMORY. Give your own angles for other bell lengths or for
#: a design that matters.
BELL80_AREA_RATIO = (4.0, 10.0, 25.0, 50.0, 100.0)
BELL80_THETA_N_DEG = (21.0, 25.0, 30.0, 32.5, 35.0)
BELL80_THETA_E_DEG = (14.0, 10.0, 8.5, 7.5, 7.0)
BELL_DEFAULT_FRACTION = 0.8

#: Points along each arc per degree of turning, and along the bell curve.
_ARC_POINTS_PER_DEG = 0.5
_BELL_POINTS = 48


class DesignError(ValueError):
    """A design number was refused: names the field, the value and what is allowed."""

    def __init__(self, field: str, value, allowed: str):
        self.field, self.value, self.allowed = field, value, allowed
        super().__init__(f"{field} is missing: {allowed}" if value is None
                         else f"{field} = {value!r} is not allowed: {allowed}")


def _positive(field: str, value: float, unit: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise DesignError(field, value, f"must be a number greater than 0 ({unit})") from None
    if not (math.isfinite(v) and v > 0.0):
        raise DesignError(field, value, f"must be a number greater than 0 ({unit})")
    return v


def _angle(field: str, value: float, lo: float, hi: float) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise DesignError(field, value, f"must be an angle from {lo:g} to {hi:g} degrees") from None
    if not (math.isfinite(v) and lo < v < hi):
        raise DesignError(field, value, f"must be an angle greater than {lo:g} and less than {hi:g} degrees")
    return v


def bell80_angles_deg(area_ratio: float) -> tuple[float, float]:
    """(theta_n, theta_e) in degrees for an 80 % bell, interpolated in log(area ratio) in the table above
    (approximate, from memory of [HH] fig. 4-16); held at the table's ends outside 4 to 100."""
    la = math.log(min(max(area_ratio, BELL80_AREA_RATIO[0]), BELL80_AREA_RATIO[-1]))
    xs = [math.log(a) for a in BELL80_AREA_RATIO]
    return float(np.interp(la, xs, BELL80_THETA_N_DEG)), float(np.interp(la, xs, BELL80_THETA_E_DEG))


@dataclass(frozen=True)
class NozzleSpec:
    """The numbers that make a chamber and nozzle (SI units; roundings in throat radii, angles in degrees).

    contraction_ratio: chamber area / throat area (> 1). exit_area_ratio: exit area / throat area (> 1).
    chamber_length_m: length of the cylindrical part from the closed end to the start of the convergent cone.
    upstream_rounding / downstream_rounding: throat radii of curvature before / after the throat, in throat radii.
    shape "cone": straight divergent wall at half_angle_deg. shape "bell": parabolic approximation of a
    thrust-optimised contour [R] of length bell_fraction x the 15 degree cone, leaving the downstream arc at
    inflection_angle_deg and reaching the exit at exit_angle_deg (defaults for an 80 % bell from a table, see
    bell80_angles_deg; other lengths need both angles). shape "moc": the minimum-length contour by the method
    of characteristics (solver/characteristics.py), planar or axisymmetric, for the exit Mach number of the area
    ratio at design_gamma; its throat has a sharp corner (downstream_rounding is not used).
    """

    throat_radius_m: float
    contraction_ratio: float
    chamber_length_m: float
    exit_area_ratio: float
    mode: str = "axisymmetric"
    shape: str = "cone"
    half_angle_deg: float = 15.0
    convergent_half_angle_deg: float = 30.0
    upstream_rounding: float = 1.5
    downstream_rounding: float = 0.382
    bell_fraction: float = BELL_DEFAULT_FRACTION
    inflection_angle_deg: Optional[float] = None
    exit_angle_deg: Optional[float] = None
    design_gamma: Optional[float] = None

    def __post_init__(self) -> None:
        if self.mode not in MODES:
            raise DesignError("mode", self.mode, "must be one of " + ", ".join(MODES))
        if self.shape not in SHAPES:
            raise DesignError("shape", self.shape, "must be one of " + ", ".join(SHAPES))
        _positive("throat_radius_m", self.throat_radius_m, "metres")
        _positive("chamber_length_m", self.chamber_length_m, "metres")
        for name in ("contraction_ratio", "exit_area_ratio"):
            v = _positive(name, getattr(self, name), "a ratio of areas")
            if not v > 1.0:
                raise DesignError(name, getattr(self, name), "must be a ratio of areas greater than 1")
        _angle("half_angle_deg", self.half_angle_deg, 0.0, 45.0)
        _angle("convergent_half_angle_deg", self.convergent_half_angle_deg, 0.0, 90.0)
        _positive("upstream_rounding", self.upstream_rounding, "throat radii")
        _positive("downstream_rounding", self.downstream_rounding, "throat radii")
        if self.shape == "moc":
            if self.design_gamma is None:
                raise DesignError("design_gamma", None, "the method-of-characteristics contour needs the gas's "
                                  f"gamma ({GAMMA_MIN} to {GAMMA_MAX})")
            g = _positive("design_gamma", self.design_gamma, "ratio of specific heats")
            if not GAMMA_MIN <= g <= GAMMA_MAX:
                raise DesignError("design_gamma", self.design_gamma, f"must be {GAMMA_MIN} to {GAMMA_MAX}")
        if self.shape == "bell":
            f = _positive("bell_fraction", self.bell_fraction, "a fraction of the 15 degree cone's length")
            if not 0.5 <= f <= 1.2:
                raise DesignError("bell_fraction", self.bell_fraction,
                                  "must be 0.5 to 1.2 of the 15 degree cone's length")
            given = (self.inflection_angle_deg is not None, self.exit_angle_deg is not None)
            if not all(given) and not math.isclose(f, BELL_DEFAULT_FRACTION):
                missing = "inflection_angle_deg" if not given[0] else "exit_angle_deg"
                raise DesignError(missing, None, f"a bell of length fraction {f:g} needs both bell angles; "
                                  f"defaults exist only for {BELL_DEFAULT_FRACTION:g}")
            if self.inflection_angle_deg is not None:
                _angle("inflection_angle_deg", self.inflection_angle_deg, 0.0, 60.0)
            if self.exit_angle_deg is not None:
                _angle("exit_angle_deg", self.exit_angle_deg, -10.0, 45.0)
            tn, te = self.bell_angles_deg()
            if not te < tn:
                raise DesignError("exit_angle_deg", te,
                                  f"must be less than the inflection angle ({tn:g} degrees): a bell turns back "
                                  "towards the axis")

    # ------------------------------------------------------------------ the radii the numbers ask for
    def _radius_for(self, area_ratio: float) -> float:
        return self.throat_radius_m * (math.sqrt(area_ratio) if self.mode == "axisymmetric" else area_ratio)

    @property
    def chamber_radius_m(self) -> float:
        """Chamber radius (half height in planar mode) that gives the contraction ratio."""
        return self._radius_for(self.contraction_ratio)

    @property
    def exit_radius_m(self) -> float:
        """Exit radius (half height in planar mode) that gives the exit area ratio."""
        return self._radius_for(self.exit_area_ratio)

    def bell_angles_deg(self) -> tuple[float, float]:
        """(theta_n, theta_e): the given ones, else the 80 % bell table's."""
        tn, te = bell80_angles_deg(self.exit_area_ratio)
        return (tn if self.inflection_angle_deg is None else float(self.inflection_angle_deg),
                te if self.exit_angle_deg is None else float(self.exit_angle_deg))

    def area_m2(self, radius_m: float) -> float:
        """Flow area at a radius: full revolution (axisymmetric) or per metre of depth for the half height."""
        return math.pi * radius_m ** 2 if self.mode == "axisymmetric" else radius_m


@dataclass(frozen=True)
class NozzleContour:
    """The wall line from the closed end (x = 0) to the exit lip, with the x of the throat and the exit."""

    points_m: tuple[tuple[float, float], ...]
    throat_x_m: float
    exit_x_m: float
    spec: NozzleSpec

    def radius_at(self, x_m: float) -> float:
        """Wall radius (half height) at x, by linear interpolation along the contour."""
        xs = np.array([p[0] for p in self.points_m])
        rs = np.array([p[1] for p in self.points_m])
        return float(np.interp(x_m, xs, rs))


def _arc(centre: tuple[float, float], radius: float, a0_deg: float, a1_deg: float) -> list[tuple[float, float]]:
    """Points of the throat arc about `centre` (below it), angles measured from straight down, a0 to a1."""
    n = max(4, int(math.ceil(abs(a1_deg - a0_deg) * _ARC_POINTS_PER_DEG)))
    out = []
    for k in range(n + 1):
        a = math.radians(a0_deg + (a1_deg - a0_deg) * k / n)
        out.append((centre[0] + radius * math.sin(a), centre[1] - radius * math.cos(a)))
    return out


@lru_cache(maxsize=32)
def build_contour(spec: NozzleSpec) -> NozzleContour:
    """The wall contour for the spec; raises DesignError when the numbers cannot make a wall. Cached: a
    characteristics net takes about a second."""
    rt = spec.throat_radius_m
    rc, re = spec.chamber_radius_m, spec.exit_radius_m
    ru, rd = spec.upstream_rounding * rt, spec.downstream_rounding * rt
    ac = spec.convergent_half_angle_deg
    tac = math.tan(math.radians(ac))
    r_conv_end = rt + ru * (1.0 - math.cos(math.radians(ac)))
    if not rc > r_conv_end:
        raise DesignError("contraction_ratio", spec.contraction_ratio,
                          f"too small for a {ac:g} degree convergent with an upstream rounding of "
                          f"{spec.upstream_rounding:g} throat radii: the chamber radius must exceed "
                          f"{r_conv_end:.6g} m (give a larger ratio, a smaller rounding or a steeper convergent)")
    x_t = spec.chamber_length_m + (rc - r_conv_end) / tac + ru * math.sin(math.radians(ac))
    pts = [(0.0, rc), (spec.chamber_length_m, rc)]
    pts += _arc((x_t, rt + ru), ru, -ac, 0.0)
    if spec.shape == "moc":
        build = planar_minimum_length_wall if spec.mode == "planar" else axisymmetric_minimum_length_wall
        try:
            wall = build(spec.exit_area_ratio, float(spec.design_gamma), rt)
        except (ValueError, ZeroDivisionError) as err:
            raise DesignError("exit_area_ratio", spec.exit_area_ratio, "the method of characteristics found no "
                              f"contour for it at gamma {spec.design_gamma:g} ({err}); the axisymmetric contour "
                              "needs an area ratio of about 3 or more (1.5 or more for gamma up to 1.4)") from None
        pts += [(x_t + x, r) for x, r in wall]
        return NozzleContour(tuple((float(x), float(r)) for x, r in pts), float(x_t), float(pts[-1][0]), spec)
    turn = spec.half_angle_deg if spec.shape == "cone" else spec.bell_angles_deg()[0]
    down = _arc((x_t, rt + rd), rd, 0.0, turn)
    pts += down[1:]
    xn, rn = down[-1]
    if not re > rn:
        raise DesignError("exit_area_ratio", spec.exit_area_ratio,
                          f"too small: the downstream rounding of {spec.downstream_rounding:g} throat radii "
                          f"already reaches radius {rn:.6g} m at {turn:g} degrees")
    if spec.shape == "cone":
        x_e = xn + (re - rn) / math.tan(math.radians(turn))
        pts.append((x_e, re))
    else:
        tn, te = (math.tan(math.radians(a)) for a in spec.bell_angles_deg())
        cone_len = (re - rt) / math.tan(math.radians(REFERENCE_CONE_DEG))
        x_e = x_t + spec.bell_fraction * cone_len
        # control point: where the tangent at N (slope tan theta_n) meets the tangent at E (slope tan theta_e)
        xq = (re - rn - te * x_e + tn * xn) / (tn - te)
        rq = rn + tn * (xq - xn)
        if not xn < xq < x_e:
            raise DesignError("bell_fraction", spec.bell_fraction,
                              f"the bell's tangents do not meet between the inflection point (x {xn:.4g} m) and "
                              f"the exit (x {x_e:.4g} m); make the bell longer or change its angles")
        for k in range(1, _BELL_POINTS + 1):
            t = k / _BELL_POINTS
            a, b, c = (1 - t) ** 2, 2 * t * (1 - t), t * t
            pts.append((a * xn + b * xq + c * x_e, a * rn + b * rq + c * re))
    return NozzleContour(tuple((float(x), float(r)) for x, r in pts), float(x_t), float(x_e), spec)


# ----------------------------------------------------------------------------- the scenario

@dataclass(frozen=True)
class RunChoices:
    """What the scenario runs at: chamber and ambient state, gas, resolution and the space behind the exit."""

    p0_pa: float = 2.0e6
    t0_k: float = 3000.0
    ambient_p_pa: float = 101325.0
    ambient_t_k: float = 288.15
    gas: Gas = HOT_PRODUCTS
    cells_per_throat_radius: int = 10
    plume_length_m: Optional[float] = None
    end_time_s: Optional[float] = None

    def __post_init__(self) -> None:
        for name, unit in (("p0_pa", "Pa"), ("t0_k", "K"), ("ambient_p_pa", "Pa"), ("ambient_t_k", "K")):
            _positive(name, getattr(self, name), unit)
        n = self.cells_per_throat_radius
        if not (isinstance(n, int) and 3 <= n <= 200):
            raise DesignError("cells_per_throat_radius", n, "must be a whole number from 3 to 200")
        if self.plume_length_m is not None:
            _positive("plume_length_m", self.plume_length_m, "metres")
        if self.end_time_s is not None:
            _positive("end_time_s", self.end_time_s, "seconds")


def _r(v: float) -> float:
    return round(float(v), 9)


def _gas_dict(gas: Gas) -> dict:
    preset = next((name for name, g in PRESETS.items() if g == gas), None)
    return {"preset": preset, "gamma": gas.gamma, "molar_mass_kg_kmol": gas.molar_mass_kg_kmol}


def nozzle_scenario(spec: NozzleSpec, run: RunChoices = RunChoices(), name: str = "designed_nozzle",
                    description: str | None = None) -> dict:
    """A scenario document (a dict; validate it with scenario.parse_scenario) for the designed nozzle.

    The cell size is the throat radius over cells_per_throat_radius, so the throat radius falls on a cell
    face and the solver's throat is the drawn one. The wall is one polygon: the contour, up the exit plane to
    above the domain, back over the top and down the closed end. The reservoir is a strip of four cells at
    the closed end. Stations "throat" and "exit" reach past the wall into it (samples in wall cells count for
    nothing), so the whole open column is measured. The chamber starts full up to just before the throat.
    """
    contour = build_contour(spec)
    rt, re, rc = spec.throat_radius_m, spec.exit_radius_m, spec.chamber_radius_m
    dx = rt / run.cells_per_throat_radius
    plume = run.plume_length_m if run.plume_length_m is not None else 4.0 * re
    x_e = contour.exit_x_m
    nx = int(math.ceil((x_e + plume) / dx))
    ny = int(math.ceil(max(rc, 2.5 * re) / dx)) + 2
    x_max, y_max = nx * dx, ny * dx
    from .domain import MAX_NX, MAX_NY

    if nx > MAX_NX or ny > MAX_NY:
        raise DesignError("cells_per_throat_radius", run.cells_per_throat_radius,
                          f"gives {nx} x {ny} cells, more than the solver's {MAX_NX} x {MAX_NY}; use fewer cells "
                          "per throat radius or a shorter plume")
    top = y_max + 2.0 * dx
    wall = list(contour.points_m) + [(x_e, top), (-2.0 * dx, top), (-2.0 * dx, rc)]
    gas = run.gas
    a0 = gas.sound_speed_m_s(run.t0_k)
    end_time = run.end_time_s if run.end_time_s is not None else 12.0 * x_max / a0
    into_wall = 3.0 * dx
    x_exit_station = x_e - 0.75 * dx
    planar = spec.mode == "planar"
    area_word = "half height" if planar else "radius"
    if description is None:
        if spec.shape == "cone":
            shape = f"{spec.half_angle_deg:g} degree conical divergent section"
        elif spec.shape == "bell":
            shape = ("parabolic bell (Rao's approximation of a thrust-optimised contour), length {:.0%} of the 15 "
                     "degree cone, wall angles {:.1f} to {:.1f} degrees".format(spec.bell_fraction,
                                                                               *spec.bell_angles_deg()))
        else:
            shape = (f"minimum-length contour by the method of characteristics for gamma {spec.design_gamma:g} "
                     "(sharp throat corner)")
        description = (f"Nozzle built from numbers ({spec.mode}): throat {area_word} {rt * 1e3:g} mm, contraction "
                       f"ratio {spec.contraction_ratio:g}, chamber length {spec.chamber_length_m * 1e3:g} mm, "
                       f"{spec.convergent_half_angle_deg:g} degree convergent, throat roundings "
                       f"{spec.upstream_rounding:g} and {spec.downstream_rounding:g} throat radii, exit area ratio "
                       f"{spec.exit_area_ratio:g}, {shape}. Chamber {run.p0_pa / 1e5:g} bar, {run.t0_k:g} K; "
                       f"ambient {run.ambient_p_pa / 1e3:g} kPa.")
    return {
        "name": name,
        "description": description,
        "gas": _gas_dict(gas),
        "mode": spec.mode,
        "domain": {"x_min_m": 0.0, "x_max_m": _r(x_max), "y_min_m": 0.0, "y_max_m": _r(y_max), "nx": nx},
        "edges": {"left": "wall", "right": "open", "bottom": "wall" if planar else "axis", "top": "ambient"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "polygon", "points_m": [[_r(x), _r(y)] for x, y in wall], "paints": "wall"},
            {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [_r(4.0 * dx), _r(rc)],
             "paints": "reservoir"},
        ]},
        "conditions": {"reservoir": {"p0_pa": float(run.p0_pa), "t0_k": float(run.t0_k)},
                       "stream": {"mach": 0.0, "angle_deg": 0.0, "p_pa": float(run.ambient_p_pa),
                                  "t_k": float(run.ambient_t_k)},
                       "ambient": {"p_pa": float(run.ambient_p_pa), "t_k": float(run.ambient_t_k)}},
        "initial": {"kind": "reservoir_upstream_of_x", "x_m": _r(contour.throat_x_m - 0.4 * rt)},
        "stations": [
            {"name": "throat", "start_m": [_r(contour.throat_x_m), 0.0],
             "end_m": [_r(contour.throat_x_m), _r(rt + into_wall)], "role": "throat"},
            {"name": "exit", "start_m": [_r(x_exit_station), 0.0],
             "end_m": [_r(x_exit_station), _r(min(re + into_wall, y_max))], "role": "exit"},
        ],
        "probes": [
            {"name": "chamber", "x_m": _r(0.5 * spec.chamber_length_m + 2.0 * dx), "y_m": _r(0.5 * rc)},
            {"name": "plume axis", "x_m": _r(x_e + 0.5 * plume), "y_m": _r(0.5 * dx)},
        ],
        "numerics": {"order": 2, "limiter": "van_leer", "flux": "hllc", "cfl": 0.4, "integrator": "ssp_rk2"},
        "end_time_s": float(end_time),
    }
