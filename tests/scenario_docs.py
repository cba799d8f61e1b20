"""Small scenario documents shared by the server tests."""
from __future__ import annotations


def duct_doc(nx: int = 64, name: str = "test duct") -> dict:
    """A planar duct 0.4 m x 0.1 m fed by a reservoir at the left, open at the right."""
    return {
        "name": name, "description": "tiny duct for server tests",
        "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965},
        "mode": "planar",
        "domain": {"x_min_m": 0.0, "x_max_m": 0.4, "y_min_m": 0.0, "y_max_m": 0.1, "nx": nx},
        "edges": {"left": "wall", "right": "open", "bottom": "wall", "top": "wall"},
        "sketch": {"mirror": "none", "shapes": [
            {"kind": "rectangle", "corner_a_m": [0.0, 0.0], "corner_b_m": [0.05, 0.1], "paints": "reservoir"}]},
        "conditions": {"reservoir": {"p0_pa": 300000.0, "t0_k": 300.0},
                       "stream": {"mach": 2.0, "angle_deg": 0.0, "p_pa": 101325.0, "t_k": 288.15},
                       "ambient": {"p_pa": 100000.0, "t_k": 300.0}},
        "stations": [{"name": "mid", "start_m": [0.2, 0.0], "end_m": [0.2, 0.1], "role": None}],
        "probes": [{"name": "p1", "x_m": 0.3, "y_m": 0.05}],
        "end_time_s": 0.001,
    }
