"""Writes the built-in scenario files of this folder (run: python -m shockslate.scenarios.build_builtins).

The geometry of the nozzles (arcs, cones) is easier to keep right as code than as hand-typed
polygons, so the JSON files are generated here and committed; the files are what the product reads.
Every number is an illustrative choice of ours, plausible for the trade, not data of any real engine.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

from shockslate.solver import relations
from shockslate.solver.gas import AIR, HOT_PRODUCTS
from shockslate.solver.scenario import parse_scenario, scenario_to_dict, write_schema

HERE = Path(__file__).resolve().parent

ILLUSTRATIVE = "All numbers are illustrative choices, plausible for the trade, not data of a real engine or rig."
SEA_LEVEL = {"p_pa": 101325.0, "t_k": 288.15}  # ISA sea level (common practice)


def r6(v: float) -> float:
    return round(float(v), 6)


# ----------------------------------------------------------------------------- the nozzle

THROAT_R_M = 0.010           # throat radius
CHAMBER_R_M = 0.025          # chamber radius (contraction ratio 6.25)
CHAMBER_L_M = 0.025          # cylindrical chamber length from the closed end
CONVERGE_DEG = 30.0          # convergent half angle
DIVERGE_DEG = 15.0           # divergent (conical) half angle
ROUNDING_R_M = 2.0 * THROAT_R_M  # throat radius of curvature, both sides
AREA_RATIO = 4.0             # exit / throat area, nominal
EXIT_R_M = THROAT_R_M * math.sqrt(AREA_RATIO)
STATION_INTO_WALL_M = 0.003  # how far the throat and exit stations reach into the (thick) wall


def nozzle_contour() -> tuple[list[tuple[float, float]], float, float]:
    """Wall contour from the closed end to the exit lip: (points, throat x, exit x)."""
    rc, rt, R = CHAMBER_R_M, THROAT_R_M, ROUNDING_R_M
    a_c, a_d = math.radians(CONVERGE_DEG), math.radians(DIVERGE_DEG)
    r_arc_in = rt + R * (1.0 - math.cos(a_c))
    x_t = CHAMBER_L_M + (rc - r_arc_in) / math.tan(a_c) + R * math.sin(a_c)
    pts = [(0.0, rc), (CHAMBER_L_M, rc)]
    n = 24
    for k in range(n + 1):  # arc from -a_c to +a_d about the centre (x_t, rt + R)
        ang = -a_c + (a_c + a_d) * k / n
        pts.append((x_t + R * math.sin(ang), rt + R * (1.0 - math.cos(ang))))
    r_arc_out = pts[-1][1]
    x_e = pts[-1][0] + (EXIT_R_M - r_arc_out) / math.tan(a_d)
    pts.append((x_e, EXIT_R_M))
    return [(r6(x), r6(y)) for x, y in pts], x_t, x_e


def nozzle(name: str, description: str, ambient: dict, initial: dict, end_time_s: float,
           x_max_m: float = 0.24, y_max_m: float = 0.06, nx: int = 320) -> dict:
    contour, x_t, x_e = nozzle_contour()
    top = y_max_m + 0.01
    wall = contour + [(r6(x_e), top), (-0.01, top), (-0.01, CHAMBER_R_M)]
    dx = (x_max_m - 0.0) / nx
    return {
        "name": name,
        "description": description,
        "gas": {"preset": "hot products", "gamma": HOT_PRODUCTS.gamma,
                "molar_mass_kg_kmol": HOT_PRODUCTS.molar_mass_kg_kmol},
        "mode": "axisymmetric",
        "domain": {"x_min_m": 0.0, "x_max_m": x_max_m, "y_min_m": 0.0, "y_max_m": y_max_m, "nx": nx},
        "edges": {"left": "wall", "right": "open", "bottom": "axis", "top": "ambient"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "polygon", "points_m": [list(p) for p in wall], "paints": "wall"},
            {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [0.004, CHAMBER_R_M], "paints": "reservoir"},
        ]},
        "conditions": {"reservoir": {"p0_pa": 1.5e6, "t0_k": 3000.0},
                       "stream": {"mach": 0.0, "angle_deg": 0.0, **SEA_LEVEL},
                       "ambient": ambient},
        "initial": initial,
        "stations": [
            # Throat and exit stations run from the axis into the wall: samples in wall cells count for nothing,
            # so the whole open column is integrated at any resolution (a station stopping short of the wall
            # would miss the outer ring of cells: 10 % of the area at 10 cells per throat radius).
            {"name": "throat", "start_m": [r6(x_t), 0.0], "end_m": [r6(x_t), r6(THROAT_R_M + STATION_INTO_WALL_M)],
             "role": "throat"},
            {"name": "exit", "start_m": [r6(x_e - 0.75 * dx), 0.0],
             "end_m": [r6(x_e - 0.75 * dx), r6(EXIT_R_M + STATION_INTO_WALL_M)], "role": "exit"},
            {"name": "plume", "start_m": [r6(x_e + 0.06), 0.0], "end_m": [r6(x_e + 0.06), r6(y_max_m - dx)], "role": None},
        ],
        "probes": [
            {"name": "chamber", "x_m": 0.015, "y_m": 0.005},
            {"name": "exit lip", "x_m": r6(x_e + 0.005), "y_m": r6(EXIT_R_M)},
            {"name": "plume axis", "x_m": r6(x_e + 0.04), "y_m": 0.001},
        ],
        "numerics": {"order": 2, "limiter": "van_leer_shock_minmod", "flux": "hllc", "cfl": 0.4, "integrator": "ssp_rk2"},
        "end_time_s": end_time_s,
    }


def nozzle_scenarios() -> list[dict]:
    _, x_t, _ = nozzle_contour()
    g = HOT_PRODUCTS.gamma
    pe = 1.5e6 * float(relations.exit_pressure_ratio(AREA_RATIO, g))
    common = (f"Chamber at 15 bar and 3000 K of 'hot products' (gamma 1.2, 22 kg/kmol), 20 mm throat, "
              f"rounded throat (radius of curvature 2 throat radii), 15 degree conical divergent section, "
              f"area ratio 4 (ideal exit Mach {relations.mach_from_area_ratio(AREA_RATIO, g, supersonic=True):.2f}, "
              f"ideal exit pressure {pe / 1e3:.0f} kPa). The gas outside is the same gas at the ambient state "
              "(one gas only). ")
    start = {"kind": "reservoir_upstream_of_x", "x_m": r6(x_t - 0.004)}
    return [
        nozzle("nozzle_sea_level",
               "Over-expanded nozzle into sea-level air. " + common +
               "Look for: the exit pressure below ambient, oblique shocks from the lip that cross on the axis "
               "(a small Mach disc may form) and repeat as a chain of shock cells in the plume; the sonic line "
               "bowed across the rounded throat; mass flow at the throat against the choked-flow formula and "
               "the thrust coefficient against ideal 1D theory in the nozzle report. " + ILLUSTRATIVE,
               dict(SEA_LEVEL), start, 0.003),
        nozzle("nozzle_high_altitude",
               "The same nozzle at about 12 km altitude (International Standard Atmosphere: 19.4 kPa, 216.65 K): "
               "under-expanded. "
               + common +
               "Look for: the plume ballooning out past the exit lip through a fan of expansion waves, the "
               "barrel shock forming inside the plume, and a higher thrust coefficient than at sea level. "
               + ILLUSTRATIVE,
               {"p_pa": 19400.0, "t_k": 216.65}, start, 0.003),
        nozzle("nozzle_start_up",
               "Nozzle start-up: the chamber is full and a diaphragm just upstream of the throat bursts at t = 0. "
               + common +
               "Look for: the starting shock running down the divergent section with the contact surface behind "
               "it, leaving the exit after a few tens of microseconds; the nozzle then runs full with the exit "
               "Mach near the area-Mach value and the plume settles into the sea-level pattern. "
               "Use step and pause; the whole start is over in about 0.1 ms. " + ILLUSTRATIVE,
               dict(SEA_LEVEL), start, 0.0003),
    ]


# ----------------------------------------------------------------------------- planar problems

def air() -> dict:
    return {"preset": "air", "gamma": AIR.gamma, "molar_mass_kg_kmol": AIR.molar_mass_kg_kmol}


def numerics(cfl: float = 0.4) -> dict:
    return {"order": 2, "limiter": "van_leer_shock_minmod", "flux": "hllc", "cfl": cfl, "integrator": "ssp_rk2"}


def shock_tube() -> dict:
    return {
        "name": "shock_tube_reflection",
        "description": (
            "Planar shock tube, 1 m long, closed at both ends; a diaphragm at x = 0.4 m separates air at 10 bar "
            "(driver, left) from air at 1 bar (driven, right), both at 300 K. Look for: the incident shock, the "
            "contact surface and the rarefaction leaving the diaphragm; the shock reflecting off the closed right "
            "end and running back into the gas it has already set moving, leaving still gas at a higher pressure "
            "at the end wall (probe 'end wall'); later the reflected shock meeting the contact surface. "
            + "The tube is a few cells high: the flow is one-dimensional. " + ILLUSTRATIVE),
        "gas": air(),
        "mode": "planar",
        "domain": {"x_min_m": 0.0, "x_max_m": 1.0, "y_min_m": 0.0, "y_max_m": 0.02, "nx": 400},
        "edges": {"left": "wall", "right": "wall", "bottom": "wall", "top": "wall"},
        "sketch": {"mirror": "none", "shapes": []},
        "conditions": {"reservoir": {"p0_pa": 1.0e6, "t0_k": 300.0},
                       "stream": {"mach": 0.0, "angle_deg": 0.0, **SEA_LEVEL},
                       "ambient": {"p_pa": 1.0e5, "t_k": 300.0}},
        "initial": {"kind": "reservoir_upstream_of_x", "x_m": 0.4},
        "stations": [{"name": "mid tube", "start_m": [0.7, 0.0], "end_m": [0.7, 0.02], "role": None}],
        "probes": [{"name": "end wall", "x_m": 0.995, "y_m": 0.01},
                   {"name": "mid tube", "x_m": 0.7, "y_m": 0.01}],
        "numerics": numerics(),
        "end_time_s": 0.0016,
    }


def wedge() -> dict:
    theta = 12.0
    x0, x1 = 0.2, 0.5
    h = (x1 - x0) * math.tan(math.radians(theta))
    beta = relations.oblique_shock_beta_deg(2.5, theta, AIR.gamma)
    return {
        "name": "wedge_oblique_shock",
        "description": (
            f"Wind-tunnel test section: a Mach 2.5 air stream (50 kPa, 220 K) over a {theta:g} degree wedge on the "
            "floor of a channel 0.4 m high. Look for: the attached oblique shock from the wedge tip at about "
            f"{beta:.1f} degrees to the stream (weak-branch theory), its regular reflection off the top wall, the "
            "expansion fan at the wedge shoulder bending the flow back, and the reflected shock crossing it. "
            + ILLUSTRATIVE),
        "gas": air(),
        "mode": "planar",
        "domain": {"x_min_m": 0.0, "x_max_m": 1.2, "y_min_m": 0.0, "y_max_m": 0.4, "nx": 360},
        "edges": {"left": "stream", "right": "open", "bottom": "wall", "top": "wall"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "polygon", "points_m": [[x0, -0.01], [x0, 0.0], [x1, r6(h)], [1.3, r6(h)], [1.3, -0.01]],
             "paints": "wall"}]},
        "conditions": {"reservoir": {"p0_pa": 2.0e6, "t0_k": 300.0},
                       "stream": {"mach": 2.5, "angle_deg": 0.0, "p_pa": 50000.0, "t_k": 220.0},
                       "ambient": {"p_pa": 50000.0, "t_k": 220.0}},
        "initial": {"kind": "stream"},
        "stations": [{"name": "outlet", "start_m": [1.15, r6(h + 0.002)], "end_m": [1.15, 0.398], "role": None}],
        "probes": [{"name": "behind shock", "x_m": 0.45, "y_m": r6(h + 0.01)}],
        "numerics": numerics(),
        "end_time_s": 0.004,
    }


def moving_shock_state(ms: float, p1: float, t1: float, gas) -> tuple[float, float, float]:
    """Gas set moving by a shock of Mach ms running into still gas: (flow Mach, p2, T2).

    Shock-frame normal-shock relations ([A] ch. 7, moving shocks, from memory): the gas behind moves at
    u2 = W (1 - rho1/rho2) with W = ms a1.
    """
    ns = relations.normal_shock(ms, gas.gamma)
    a1 = gas.sound_speed_m_s(t1)
    u2 = ms * a1 * (1.0 - 1.0 / float(ns.rho2_rho1))
    t2 = t1 * float(ns.t2_t1)
    return u2 / gas.sound_speed_m_s(t2), p1 * float(ns.p2_p1), t2


def ramp(name: str, angle_deg: float, kind: str) -> dict:
    ms = 2.0
    mach2, p2, t2 = moving_shock_state(ms, 101325.0, 288.15, AIR)
    x0 = 0.3
    length = 0.7
    top = 0.6
    x1 = x0 + length
    y1 = min(length * math.tan(math.radians(angle_deg)), top - 0.1)
    x1 = x0 + y1 / math.tan(math.radians(angle_deg))
    look = {
        "mach": ("a Mach stem standing on the ramp, with the incident shock, the reflected shock and the slip line "
                 "meeting at a triple point that climbs away from the ramp as the shock runs on. For a planar "
                 "shock meeting a ramp, shallow ramps give Mach reflection and steep ramps regular reflection "
                 "(the opposite of a steady oblique shock meeting a wall)"),
        "regular": ("the incident and reflected shocks meeting on the ramp surface itself (regular reflection, no "
                    "stem); compare with the shallow-ramp scenario, where a Mach stem forms"),
    }[kind]
    return {
        "name": name,
        "description": (
            f"A planar Mach {ms:g} shock in air (running into still air at sea-level state) meets a {angle_deg:g} "
            f"degree ramp. The left edge holds the gas behind the shock (Mach {mach2:.3f}, {p2 / 1e3:.1f} kPa, "
            f"{t2:.1f} K, from the moving normal-shock relations), so the shock forms at once and runs right. "
            f"Look for: {look}. " + ILLUSTRATIVE),
        "gas": air(),
        "mode": "planar",
        "domain": {"x_min_m": 0.0, "x_max_m": 1.5, "y_min_m": 0.0, "y_max_m": top, "nx": 300},
        "edges": {"left": "stream", "right": "open", "bottom": "wall", "top": "wall"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "polygon", "points_m": [[x0, -0.01], [x0, 0.0], [r6(x1), r6(y1)], [1.6, r6(y1)], [1.6, -0.01]],
             "paints": "wall"}]},
        "conditions": {"reservoir": {"p0_pa": 2.0e6, "t0_k": 300.0},
                       "stream": {"mach": r6(mach2), "angle_deg": 0.0, "p_pa": r6(p2), "t_k": r6(t2)},
                       "ambient": dict(SEA_LEVEL)},
        "initial": {"kind": "ambient"},
        "stations": [],
        "probes": [{"name": "ramp foot", "x_m": x0 - 0.02, "y_m": 0.01}],  # on the floor just ahead of the ramp
        "numerics": numerics(),
        "end_time_s": 0.0012,
    }


def blast_room() -> dict:
    w = 0.2  # wall thickness
    shapes = [
        # room 6 m x 4 m, walls of 0.2 m; door 1 m wide in the right wall
        {"kind": "segment", "start_m": [0.5, 0.5], "end_m": [6.5, 0.5], "width_m": w, "paints": "wall"},
        {"kind": "segment", "start_m": [0.5, 4.5], "end_m": [6.5, 4.5], "width_m": w, "paints": "wall"},
        {"kind": "segment", "start_m": [0.5, 0.5], "end_m": [0.5, 4.5], "width_m": w, "paints": "wall"},
        {"kind": "segment", "start_m": [6.5, 0.5], "end_m": [6.5, 2.0], "width_m": w, "paints": "wall"},
        {"kind": "segment", "start_m": [6.5, 3.0], "end_m": [6.5, 4.5], "width_m": w, "paints": "wall"},
    ]
    for cx in (3.0, 4.8):
        for cy in (1.8, 3.2):
            shapes.append({"kind": "circle", "centre_m": [cx, cy], "radius_m": 0.25, "paints": "wall"})
    return {
        "name": "blast_room",
        "description": (
            "A burst of hot pressurised gas (20 bar, 1500 K, 0.3 m radius) in a 6 m x 4 m room with four pillars "
            "and a 1 m door in the right wall, opening onto still air outside. Planar (a slice through tall "
            "walls). Look for: the blast front reflecting off walls and pillars, the shadow behind each pillar "
            "and the diffracted fronts closing in behind it, the jet and vortex pair pushed out through the "
            "door, and the pressure history at the probes (note the reflected peaks on the wall). "
            + ILLUSTRATIVE),
        "gas": air(),
        "mode": "planar",
        "domain": {"x_min_m": 0.0, "x_max_m": 10.0, "y_min_m": 0.0, "y_max_m": 5.0, "nx": 300},
        "edges": {"left": "ambient", "right": "open", "bottom": "ambient", "top": "ambient"},
        "sketch": {"mirror": "none", "shapes": shapes},
        "conditions": {"reservoir": {"p0_pa": 2.0e6, "t0_k": 1500.0},
                       "stream": {"mach": 0.0, "angle_deg": 0.0, **SEA_LEVEL},
                       "ambient": dict(SEA_LEVEL)},
        "initial": {"kind": "reservoir_in_circle", "centre_m": [1.8, 2.5], "radius_m": 0.3},
        "stations": [{"name": "door", "start_m": [6.5, 2.05], "end_m": [6.5, 2.95], "role": None}],
        "probes": [{"name": "far wall", "x_m": 6.3, "y_m": 4.0},
                   {"name": "behind pillar", "x_m": 3.5, "y_m": 1.8},
                   {"name": "outside door", "x_m": 7.5, "y_m": 2.5}],
        "numerics": numerics(),
        "end_time_s": 0.02,
    }


def forward_step() -> dict:
    # Woodward and Colella 1984: tunnel 3 x 1, step 0.2 high at x = 0.6, Mach 3 inflow, gamma 1.4, t_end = 4
    # in units where the inflow sound speed and the tunnel height are 1. Here in SI at 1 m height and a sea-level
    # stream, so t_end = 4 * 1 m / a_inf.
    a = AIR.sound_speed_m_s(288.15)
    return {
        "name": "forward_step_mach3",
        "description": (
            "Reference problem: the Mach 3 wind tunnel with a forward-facing step (P. Woodward and P. Colella, "
            "J. Comput. Phys. 54 (1984) 115-173): tunnel 3 units long and 1 high, step 0.2 high at x = 0.6, "
            "gamma 1.4, uniform Mach 3 flow at t = 0. Here in SI with 1 m as the unit and a sea-level stream, so "
            f"the published end time t = 4 becomes 4 m / a = {4.0 / a * 1e3:.2f} ms (the flow depends only on "
            "Mach number, gamma and geometry). Look for: the bow shock standing off the step, its reflection off "
            "the top wall (becoming a Mach reflection with a slip line), the expansion fan at the step corner, "
            "and the second reflection off the step top. The step corner is a singular point: the published "
            "runs left it untreated too, and a thin spurious layer along the step top is expected."),
        "gas": air(),
        "mode": "planar",
        "domain": {"x_min_m": 0.0, "x_max_m": 3.0, "y_min_m": 0.0, "y_max_m": 1.0, "nx": 240},
        "edges": {"left": "stream", "right": "open", "bottom": "wall", "top": "wall"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "rectangle", "corner_a_m": [0.6, -0.01], "corner_b_m": [3.1, 0.2], "paints": "wall"}]},
        "conditions": {"reservoir": {"p0_pa": 2.0e6, "t0_k": 300.0},
                       "stream": {"mach": 3.0, "angle_deg": 0.0, **SEA_LEVEL},
                       "ambient": dict(SEA_LEVEL)},
        "initial": {"kind": "stream"},
        "stations": [{"name": "outlet", "start_m": [2.95, 0.2], "end_m": [2.95, 1.0], "role": None}],
        "probes": [{"name": "stagnation", "x_m": 0.59, "y_m": 0.1}],
        "numerics": numerics(),
        "end_time_s": r6(4.0 / a),
    }


def all_builtins() -> list[dict]:
    return nozzle_scenarios() + [
        shock_tube(), wedge(),
        ramp("shock_ramp_shallow", 25.0, "mach"),
        ramp("shock_ramp_steep", 60.0, "regular"),
        blast_room(), forward_step(),
    ]


def main() -> None:
    for doc in all_builtins():
        scenario = parse_scenario(doc)
        (HERE / f"{scenario.name}.json").write_text(
            json.dumps(scenario_to_dict(scenario), indent=2) + "\n", encoding="utf-8")
        print("wrote", scenario.name)
    print("wrote", write_schema(HERE))


if __name__ == "__main__":
    main()
