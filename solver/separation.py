"""Where an over-expanded nozzle's wall pressure falls low enough for a real boundary layer to separate.

The solver is inviscid: its flow stays attached to the wall however far the wall pressure falls below the
ambient pressure. A real nozzle's boundary layer separates from the wall once the wall pressure falls to a
fraction of the ambient pressure, and the flow downstream of that point is then nothing like the simulated one
(a separated jet with ambient gas drawn in along the wall). This module marks that point along the divergent
wall, so the report and the page can say where the simulation stops describing a real nozzle.

Criterion: separation where p_wall < k p_ambient, k about 0.35 to 0.4.
[SFS] M. Summerfield, C. R. Foster, W. C. Swan, "Flow separation in overexpanded supersonic exhaust nozzles",
      Jet Propulsion 24 (1954) 319-321: wall pressure at separation about 0.4 of ambient (from memory). The
      range 0.35 to 0.4 is common practice; later correlations (e.g. Schmucker 1973) depend on the pressure
      ratio and are not used here.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .diagnostics import Station
from .kinds import CellKind
from .simulation import Simulation

#: Summerfield's criterion [SFS]: separation where the wall pressure falls below this fraction of ambient.
SUMMERFIELD_RATIO = 0.4
RATIO_MIN, RATIO_MAX = 0.1, 1.0

CAUTION = ("Inviscid flow does not separate: downstream of the marked point a real nozzle's boundary layer would "
           "separate from the wall (Summerfield's criterion, wall pressure below about 0.4 of ambient; "
           "Summerfield, Foster and Swan 1954), and the flow there, the exit figures and the thrust are not what a "
           "real nozzle does.")


@dataclass(frozen=True)
class WallSeparation:
    """Wall pressure along the divergent wall, column by column, and where it falls below the criterion.

    x_m, wall_radius_m, wall_pressure_pa, below: one entry per cell column from the throat to the exit
    (wall_radius_m is the open height: radius in axisymmetric mode, half height in planar mode).
    first_x_m: x of the first column, going downstream from the throat, below the criterion (None if none).
    """

    x_m: np.ndarray
    wall_radius_m: np.ndarray
    wall_pressure_pa: np.ndarray
    below: np.ndarray
    ambient_pa: float
    ratio: float
    first_x_m: float | None

    @property
    def separates(self) -> bool:
        return self.first_x_m is not None

    def as_dict(self) -> dict:
        """JSON-ready form (lists, SI units) for summary.json and the page."""
        return {"criterion": "Summerfield, Foster, Swan 1954: p_wall < ratio x p_ambient",
                "ratio": self.ratio, "ambient_pa": self.ambient_pa, "separates": self.separates,
                "first_x_m": self.first_x_m, "x_m": [float(v) for v in self.x_m],
                "wall_radius_m": [float(v) for v in self.wall_radius_m],
                "wall_pressure_pa": [float(v) for v in self.wall_pressure_pa],
                "below": [bool(v) for v in self.below], "caution": CAUTION if self.separates else ""}


def _check_ratio(ratio: float) -> float:
    r = float(ratio)
    if not (math.isfinite(r) and RATIO_MIN <= r <= RATIO_MAX):
        raise ValueError(f"separation ratio = {ratio!r} is not allowed: must be {RATIO_MIN:g} to {RATIO_MAX:g} "
                         f"(Summerfield's criterion is about {SUMMERFIELD_RATIO:g})")
    return r


def wall_separation(sim: Simulation, x_from_m: float, x_to_m: float, ratio: float = SUMMERFIELD_RATIO,
                    ambient_pa: float | None = None) -> WallSeparation:
    """Wall pressures between x_from_m (the throat) and x_to_m (the exit) and the Summerfield flags.

    In each column the wall is the first wall cell going up from the bottom row (the axis, or the symmetry line
    of a planar half nozzle); the wall pressure is the pressure of the gas cell just below it. ambient_pa
    defaults to the scenario's ambient pressure.
    """
    k = _check_ratio(ratio)
    if not x_to_m > x_from_m:
        raise ValueError(f"x_to_m = {x_to_m!r} is not allowed: must be greater than x_from_m = {x_from_m!r}")
    dom = sim.domain
    pa = float(sim.setup.conditions.ambient.p_pa if ambient_pa is None else ambient_pa)
    if not (math.isfinite(pa) and pa > 0.0):
        raise ValueError(f"ambient_pa = {ambient_pa!r} is not allowed: must be a pressure greater than 0 Pa")
    _, i0 = dom.cell_index(x_from_m, 0.0)
    _, i1 = dom.cell_index(x_to_m, 0.0)
    mask = sim.mask
    p = sim.primitive()[3]
    xs, rs, pw = [], [], []
    for i in range(i0, i1 + 1):
        col = mask[:, i] == CellKind.WALL
        if not col.any():
            continue  # no wall above this column: not a nozzle column
        jw = int(np.argmax(col))
        if jw == 0:
            continue  # wall down to the axis: not open here
        xs.append(float(dom.x_centres_m()[i]))
        rs.append(jw * dom.dx_m)
        pw.append(float(p[jw - 1, i]))
    x, r, pwall = np.array(xs), np.array(rs), np.array(pw)
    below = pwall < k * pa
    first = float(x[np.argmax(below)]) if below.any() else None
    return WallSeparation(x, r, pwall, below, pa, k, first)


def nozzle_wall_separation(sim: Simulation, throat: Station, exit_: Station,
                           ratio: float = SUMMERFIELD_RATIO) -> WallSeparation:
    """wall_separation between a scenario's throat and exit stations (their x)."""
    return wall_separation(sim, float(throat.start_m[0]), float(exit_.start_m[0]), ratio)


# ----------------------------------------------------------------------------- report hook
