"""The wave diagram's data: one field sampled along a line, every few steps, into a bounded history.

Along a straight line (a station's, or one drawn for it) the field is read at `samples` evenly spaced
points, each from the cell that holds it (nearest cell: fronts stay as sharp as the solver has
them); the rows, stacked in time, are the x-t (wave) diagram a shock tube is read from: a shock is
a straight edge whose slope is its speed. Reading the line costs a gather of a few hundred cells, so
the runner takes a row every `every_steps` steps while the flow runs.

Bounds: at most MAX_ROWS rows (the oldest dropped) of at most MAX_SAMPLES float32 values, so the
history holds at most 1500 x 400 x 4 bytes = 2.4 MB. It starts again (a new `generation`) when the
line, the field or the grid changes, or when the flow goes back in time (reset, a loaded scenario).
Rows are taken in the solver's thread and sent from the event loop, so one small lock guards them.
"""
from __future__ import annotations

import base64
import collections
import math
import threading
from dataclasses import dataclass

import numpy as np

from shockslate.solver.domain import Domain
from shockslate.solver.gas import Gas
from shockslate.solver.kinds import CellKind

#: Rows kept at most (the oldest go first).
MAX_ROWS = 1500
#: Points along the line at most; a line shorter than that many cells gets one point per cell length.
MAX_SAMPLES = 400
#: A row every this many steps by default (a step moves a wave at most CFL cells).
EVERY_STEPS = 2
#: Fields that can be read off one cell (name -> label, SI unit), a subset of the page's views.
WAVE_FIELDS: dict[str, tuple[str, str]] = {
    "pressure": ("pressure", "Pa"),
    "density": ("density", "kg/m^3"),
    "temperature": ("temperature", "K"),
    "mach": ("Mach number", "-"),
    "speed": ("speed", "m/s"),
}
#: The padding of the solver's arrays (solver/simulation.py GHOST).
_GHOST = 2


@dataclass(frozen=True)
class WaveLine:
    """Where and what to sample: a segment in metres and a field name of WAVE_FIELDS."""

    start_m: tuple[float, float]
    end_m: tuple[float, float]
    field: str = "pressure"
    station: str | None = None

    @property
    def length_m(self) -> float:
        return math.hypot(self.end_m[0] - self.start_m[0], self.end_m[1] - self.start_m[1])


def sample_points(line: WaveLine, domain: Domain) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(s_m, j, i): distances of the sample points from the line's start and the (row, column) of the cell
    holding each, about one point per cell length along the line, at most MAX_SAMPLES, at least 2."""
    n = int(min(MAX_SAMPLES, max(2, math.ceil(line.length_m / domain.dx_m))))
    s = (np.arange(n) + 0.5) / n
    x = line.start_m[0] + s * (line.end_m[0] - line.start_m[0])
    y = line.start_m[1] + s * (line.end_m[1] - line.start_m[1])
    i = np.clip(np.floor((x - domain.x_min_m) / domain.dx_m), 0, int(domain.nx) - 1).astype(np.int64)
    j = np.clip(np.floor((y - domain.y_min_m) / domain.dx_m), 0, domain.ny - 1).astype(np.int64)
    return s * line.length_m, j, i


def field_values(field: str, gas: Gas, rho: np.ndarray, u: np.ndarray, v: np.ndarray, p: np.ndarray) -> np.ndarray:
    """The named field of WAVE_FIELDS from primitive values, SI units."""
    with np.errstate(invalid="ignore", divide="ignore"):
        if field == "pressure":
            return p.copy()
        if field == "density":
            return rho.copy()
        if field == "temperature":
            return p / (rho * gas.r_j_kg_k)
        speed = np.hypot(u, v)
        if field == "speed":
            return speed
        if field == "mach":
            return speed / np.sqrt(gas.gamma * p / rho)
    raise ValueError(f"field {field!r} is not one of {', '.join(WAVE_FIELDS)}")


class WaveHistory:
    """Rows of one field along one line, newest last; bounded by MAX_ROWS."""

    def __init__(self, max_rows: int = MAX_ROWS, every_steps: int = EVERY_STEPS):
        self.max_rows = max_rows
        self.every_steps = every_steps
        self.line: WaveLine | None = None
        self.generation = 0
        self._lock = threading.Lock()
        self._rows: collections.deque = collections.deque(maxlen=max_rows)
        self._domain: Domain | None = None
        self._s_m = np.zeros(0)
        self._j = self._i = np.zeros(0, np.int64)
        self._last_steps = -1

    def set_line(self, line: WaveLine | None) -> None:
        """Sample along this line from now on (None: stop); the history starts again."""
        if line is not None and line.field not in WAVE_FIELDS:
            raise ValueError(f"field {line.field!r} is not one of {', '.join(WAVE_FIELDS)}")
        with self._lock:
            self.line = line
            self._domain = None
            self._restart()

    def _restart(self) -> None:
        self._rows.clear()
        self._last_steps = -1
        self.generation += 1

    def record(self, sim) -> bool:
        """Add a row from the simulation's current flow (solver thread); False when nothing was added."""
        line = self.line
        if line is None:
            return False
        steps = int(sim.steps)
        with self._lock:
            if self._domain != sim.domain:  # a new grid: new cells under the line, and a new history
                self._domain = sim.domain
                self._s_m, self._j, self._i = sample_points(line, sim.domain)
                self._restart()
            elif steps < self._last_steps:  # the flow started again
                self._restart()
            elif steps == self._last_steps:
                return False
            jj, ii = self._j + _GHOST, self._i + _GHOST
            w = sim.W
            values = field_values(line.field, sim.setup.gas, w[0, jj, ii], w[1, jj, ii], w[2, jj, ii], w[3, jj, ii])
            values[sim.mask[self._j, self._i] == CellKind.WALL] = np.nan
            self._rows.append((float(sim.time_s), steps, values.astype(np.float32)))
            self._last_steps = steps
            return True

    def __len__(self) -> int:
        with self._lock:
            return len(self._rows)

    def arrays(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(time_s, s_m, values[rows, samples]) of the whole history, for checks and tools."""
        with self._lock:
            rows = list(self._rows)
            s_m = self._s_m.copy()
        if not rows:
            return np.zeros(0), s_m, np.zeros((0, s_m.size), np.float32)
        return np.array([r[0] for r in rows]), s_m, np.stack([r[2] for r in rows])

    def line_message(self) -> dict:
        """The `wave_line` message: what is sampled (null line when nothing is)."""
        line = self.line
        if line is None:
            return {"type": "wave_line", "line": None, "generation": self.generation}
        label, unit = WAVE_FIELDS[line.field]
        return {"type": "wave_line", "generation": self.generation,
                "line": {"start_m": list(line.start_m), "end_m": list(line.end_m), "field": line.field,
                         "label": label, "unit": unit, "station": line.station, "length_m": line.length_m},
                "max_rows": self.max_rows, "every_steps": self.every_steps}

    def message(self, after_steps: int = -1) -> dict:
        """The `wave_history` message: the rows after step `after_steps` of this generation, oldest first,
        values as base64 of little-endian float32 (rows x samples, NaN on walls)."""
        with self._lock:
            rows = [r for r in self._rows if r[1] > after_steps]
            out = {"type": "wave_history", "generation": self.generation, "samples": int(self._s_m.size),
                   "s_m": [round(float(s), 9) for s in self._s_m], "rows": len(rows),
                   "time_s": [r[0] for r in rows], "steps": [r[1] for r in rows]}
        data = np.stack([r[2] for r in rows]).astype("<f4").tobytes() if rows else b""
        out["values_f32"] = base64.b64encode(data).decode("ascii")
        out["field"] = self.line.field if self.line is not None else None
        return out
