"""Held conditions: the reservoir feed, the free stream and the still ambient.

Cells (and domain edges) of those kinds hold these states; changing a condition while a run
goes on only rewrites the held cells, so it takes effect without a restart.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .gas import Gas
from .kinds import CellKind

P_MAX_PA = 1.0e9
T_MIN_K, T_MAX_K = 1.0, 1.0e4
MACH_MAX = 30.0


def _positive(name: str, value: float, upper: float) -> None:
    if not (math.isfinite(value) and 0.0 < value <= upper):
        raise ValueError(f"{name} = {value!r} must be greater than 0 and at most {upper:g}")


def _temperature(name: str, value: float) -> None:
    if not (math.isfinite(value) and T_MIN_K <= value <= T_MAX_K):
        raise ValueError(f"{name} = {value!r} is outside the allowed range {T_MIN_K:g} to {T_MAX_K:g} K")


@dataclass(frozen=True)
class Reservoir:
    """Gas at rest at stagnation pressure p0_pa (Pa) and temperature t0_k (K): a chamber feed."""

    p0_pa: float = 2.0e6
    t0_k: float = 300.0

    def __post_init__(self) -> None:
        _positive("reservoir.p0_pa", self.p0_pa, P_MAX_PA)
        _temperature("reservoir.t0_k", self.t0_k)


@dataclass(frozen=True)
class Stream:
    """Gas held moving at `mach` in direction angle_deg (from +x, anticlockwise), static p_pa, t_k."""

    mach: float = 2.0
    angle_deg: float = 0.0
    p_pa: float = 101325.0
    t_k: float = 288.15

    def __post_init__(self) -> None:
        if not (math.isfinite(self.mach) and 0.0 <= self.mach <= MACH_MAX):
            raise ValueError(f"stream.mach = {self.mach!r} is outside the allowed range 0 to {MACH_MAX:g}")
        if not (math.isfinite(self.angle_deg) and -180.0 <= self.angle_deg <= 180.0):
            raise ValueError(f"stream.angle_deg = {self.angle_deg!r} is outside the allowed range -180 to 180")
        _positive("stream.p_pa", self.p_pa, P_MAX_PA)
        _temperature("stream.t_k", self.t_k)


@dataclass(frozen=True)
class Ambient:
    """Still surroundings at p_pa (Pa) and t_k (K) that absorb outflow."""

    p_pa: float = 101325.0
    t_k: float = 288.15

    def __post_init__(self) -> None:
        _positive("ambient.p_pa", self.p_pa, P_MAX_PA)
        _temperature("ambient.t_k", self.t_k)


@dataclass(frozen=True)
class Conditions:
    reservoir: Reservoir = field(default_factory=Reservoir)
    stream: Stream = field(default_factory=Stream)
    ambient: Ambient = field(default_factory=Ambient)


def conserved(gas: Gas, rho: float, u: float, v: float, p: float) -> np.ndarray:
    """(rho, rho u, rho v, E) of one state."""
    e = p / (gas.gamma - 1.0) + 0.5 * rho * (u * u + v * v)
    return np.array([rho, rho * u, rho * v, e])


def held_primitive(gas: Gas, conditions: Conditions) -> dict[CellKind, tuple[float, float, float, float]]:
    """(rho, u, v, p) held by each held kind."""
    res, st, amb = conditions.reservoir, conditions.stream, conditions.ambient
    speed = st.mach * gas.sound_speed_m_s(st.t_k)
    ang = math.radians(st.angle_deg)
    return {
        CellKind.RESERVOIR: (gas.density_kg_m3(res.p0_pa, res.t0_k), 0.0, 0.0, res.p0_pa),
        CellKind.STREAM: (gas.density_kg_m3(st.p_pa, st.t_k), speed * math.cos(ang), speed * math.sin(ang), st.p_pa),
        CellKind.AMBIENT: (gas.density_kg_m3(amb.p_pa, amb.t_k), 0.0, 0.0, amb.p_pa),
    }


def held_table(gas: Gas, conditions: Conditions) -> tuple[np.ndarray, np.ndarray]:
    """Conserved and primitive states indexed by cell kind, shape (len(CellKind), 4) each.

    Rows of kinds that hold nothing are the ambient state, a harmless filler.
    """
    prim = held_primitive(gas, conditions)
    cons_rows = np.empty((len(CellKind), 4))
    prim_rows = np.empty((len(CellKind), 4))
    for kind in CellKind:
        state = prim.get(kind, prim[CellKind.AMBIENT])
        prim_rows[kind] = state
        cons_rows[kind] = conserved(gas, *state)
    return cons_rows, prim_rows
