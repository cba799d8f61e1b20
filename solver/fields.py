"""Derived fields a user looks at, computed from the primitive state (off the hot path)."""
from __future__ import annotations

import numpy as np

from .gas import Gas
from .kinds import CellKind

#: View name -> (label, SI unit). The page and reports convert units at the edge.
VIEWS: dict[str, tuple[str, str]] = {
    "density": ("density", "kg/m^3"),
    "pressure": ("pressure", "Pa"),
    "temperature": ("temperature", "K"),
    "mach": ("Mach number", "-"),
    "speed": ("speed", "m/s"),
    "schlieren": ("numerical schlieren", "-"),
    "vorticity": ("vorticity", "1/s"),
}


def temperature_k(gas: Gas, rho: np.ndarray, p: np.ndarray) -> np.ndarray:
    return p / (rho * gas.r_j_kg_k)


def speed_m_s(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """sqrt(u^2 + v^2) as written (not np.hypot), so the frame kernels' compiled loops match it bit for bit."""
    return np.sqrt(u * u + v * v)


def mach(gas: Gas, rho: np.ndarray, u: np.ndarray, v: np.ndarray, p: np.ndarray) -> np.ndarray:
    return speed_m_s(u, v) / np.sqrt(gas.gamma * p / rho)


def vorticity_1_s(u: np.ndarray, v: np.ndarray, dx_m: float) -> np.ndarray:
    """omega_z = dv/dx - du/dy by central differences (one-sided at the array edges)."""
    if min(u.shape) < 2:
        return np.zeros_like(u)
    dv_dx = np.gradient(v, dx_m, axis=1)
    du_dy = np.gradient(u, dx_m, axis=0)
    return dv_dx - du_dy


def schlieren(rho: np.ndarray, dx_m: float, fluid: np.ndarray, contrast: float = 15.0) -> np.ndarray:
    """Numerical schlieren: exp(-contrast * |grad rho| / max |grad rho|); 1 is still gas, 0 a sharp front."""
    if min(rho.shape) < 2:
        return np.ones_like(rho)
    gy, gx = np.gradient(rho, dx_m)
    g = np.hypot(gx, gy)
    g = np.where(fluid, g, 0.0)
    top = float(g.max())
    if top <= 0.0:
        return np.ones_like(rho)
    return np.exp(-contrast * g / top)


def derived(view: str, gas: Gas, rho, u, v, p, dx_m: float, mask: np.ndarray) -> np.ndarray:
    """The named view as an (ny, nx) array in SI units; NaN on wall cells."""
    if view not in VIEWS:
        raise ValueError(f"view = {view!r} is not one of: {', '.join(VIEWS)}")
    fluid = mask != CellKind.WALL
    if view == "density":
        out = rho.copy()
    elif view == "pressure":
        out = p.copy()
    elif view == "temperature":
        out = temperature_k(gas, rho, p)
    elif view == "mach":
        out = mach(gas, rho, u, v, p)
    elif view == "speed":
        out = speed_m_s(u, v)
    elif view == "vorticity":
        out = vorticity_1_s(np.where(fluid, u, 0.0), np.where(fluid, v, 0.0), dx_m)
    else:
        out = schlieren(rho, dx_m, fluid)
    return np.where(fluid, out, np.nan)
