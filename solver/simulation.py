"""A running flow: the padded state arrays, the time step and the stage loop.

`Setup` says what is simulated (domain, gas, mode, edges, conditions, numerics); the mask says
which cell is what. `Simulation` owns the arrays and advances them; everything that can change
while it runs (conditions, gas, numerics, sketch, resolution) has a method that keeps the flow.
"""
from __future__ import annotations

import math
import statistics
from dataclasses import dataclass, field, replace

import numpy as np

from . import cut_cells, face_paths, kernels
from .conditions import Conditions, held_table
from .domain import Domain
from .errors import SolverDiverged
from .gas import AIR, Gas
from .kinds import EDGE_GHOST_KIND, HELD_KINDS, CellKind
from .geometry import WallGeometry, staircase_geometry
from .numerics import Numerics
from .wall_normals import wall_normals

MODES = ("planar", "axisymmetric")
GHOST = 2
_VARIABLES = ("density", "x-momentum", "y-momentum", "total energy")
#: Floors, relative to the largest held or initial density / pressure.
FLOOR_FRACTION = 1.0e-10

# Divergence guards (common practice, no source for the exact values). A healthy flow changes its
# largest wave speed by a few per cent a step; an unstable one grows it step after step.
#: A step is "troubled" when floors act, the largest wave speed grows by more than this in a step ...
RATE_WARN_STEP = 1.5
#: ... or stands more than this above the reference (the median over the kept snapshots).
RATE_WARN = 3.0
#: Diverged: the largest wave speed grows by more than this in one step,
RATE_JUMP = 4.0
#: or the time step falls below 1 / RATE_COLLAPSE of the reference,
RATE_COLLAPSE = 100.0
#: or floors act in at least max(FLOOR_CELLS_MIN, FLOOR_CELLS_FRACTION of the gas cells) for FLOOR_STEPS steps.
FLOOR_CELLS_MIN, FLOOR_CELLS_FRACTION, FLOOR_STEPS = 4, 0.005, 20
#: A snapshot of the state is kept every SNAPSHOT_EVERY untroubled steps, the newest SNAPSHOT_RING of them
#: (each one 32 bytes per cell; the arrays of a simulation stay under the 300 bytes per cell of the benchmark goal).
SNAPSHOT_EVERY, SNAPSHOT_RING = 25, 2
#: The reservoir feed follows its held state with this time constant, in acoustic transits of the domain at the
#: reservoir's sound speed (Simulation.feed_relax; long beside a chamber's acoustic periods, short beside a run).
#: Common practice to relax over a few such times, no source for the exact value.
FEED_RELAX_TRANSITS = 0.25


@dataclass(frozen=True)
class Edges:
    """Condition on each domain edge: wall, open, ambient, stream or axis (axisymmetric bottom only)."""

    left: str = "wall"
    right: str = "open"
    bottom: str = "wall"
    top: str = "wall"

    def __post_init__(self) -> None:
        for side in ("left", "right", "bottom", "top"):
            value = getattr(self, side)
            if value not in EDGE_GHOST_KIND:
                raise ValueError(f"edges.{side} = {value!r} is not one of: {', '.join(EDGE_GHOST_KIND)}")


@dataclass(frozen=True)
class Setup:
    """Everything about a simulation except the sketch mask and the flow state."""

    domain: Domain
    gas: Gas = AIR
    mode: str = "planar"
    edges: Edges = field(default_factory=Edges)
    conditions: Conditions = field(default_factory=Conditions)
    numerics: Numerics = field(default_factory=Numerics)

    def __post_init__(self) -> None:
        if self.mode not in MODES:
            raise ValueError(f"mode = {self.mode!r} is not one of: {', '.join(MODES)}")
        for side in ("left", "right", "top"):
            if getattr(self.edges, side) == "axis":
                raise ValueError(f"edges.{side} = 'axis' is not allowed: only the bottom edge can be the axis")
        if self.mode == "axisymmetric":
            if self.edges.bottom != "axis":
                raise ValueError(f"edges.bottom = {self.edges.bottom!r}: an axisymmetric domain needs 'axis' there")
            if self.domain.y_min_m != 0.0:
                raise ValueError(f"domain.y_min_m = {self.domain.y_min_m!r}: an axisymmetric domain starts at radius 0")
        elif self.edges.bottom == "axis":
            raise ValueError("edges.bottom = 'axis' needs mode = 'axisymmetric'; use 'wall' for a planar symmetry line")


@dataclass(frozen=True)
class LineFlux:
    """Fluxes through a line of x-faces (Simulation.x_line_flux)."""

    mass_flow_kg_s: float
    momentum_flux_n: float   #: x-momentum flux including the pressure force, p_amb not subtracted
    area_m2: float           #: open area of the faces
    face: int                #: index of the face line (face f lies left of cell column f)
    rows: np.ndarray         #: the rows it covers


class Simulation:
    """Owns the flow arrays and advances them with the configured scheme."""

    def __init__(self, setup: Setup, mask: np.ndarray | None = None, geometry: WallGeometry | None = None):
        """`geometry` (solver.geometry.wall_geometry of the sketch) puts walls where they are drawn,
        inside cells; with a mask alone every cell is wholly wall or gas."""
        self.setup = setup
        self.time_s = 0.0
        self.steps = 0
        self.floors_total = 0
        self.floors_last_step = 0
        self.last_dt_s = 0.0
        self._allocate(setup.domain)
        self._set_kind(np.zeros(setup.domain.shape, np.uint8) if mask is None else mask, geometry)
        self._refresh_held()
        self.reset_flow()

    # ----------------------------------------------------------------- layout
    @property
    def domain(self) -> Domain:
        return self.setup.domain

    @property
    def mask(self) -> np.ndarray:
        """The interior cell kinds (ny, nx), a view."""
        return self.kind[GHOST:-GHOST, GHOST:-GHOST]

    def _allocate(self, domain: Domain) -> None:
        ny, nx = domain.shape
        padded = (4, ny + 2 * GHOST, nx + 2 * GHOST)
        self.U = np.zeros(padded)
        self.U0 = np.zeros(padded)
        self.W = np.zeros(padded)
        self.Fx = np.zeros((4, ny, nx + 1))
        self.Gy = np.zeros((4, ny + 1, nx))
        self.kind = np.zeros(padded[1:], np.uint8)
        #: cells whose x- / y-faces take HLL across a strong shock (kernels.shock_switch); zero unless HLLC
        self._hll_x = np.zeros(padded[1:], np.uint8)
        self._hll_y = np.zeros(padded[1:], np.uint8)
        self._row_rate = np.zeros(ny)
        self._row_floors = np.zeros(ny, np.int64)
        self._row_bad = np.zeros(ny, np.int64)
        self._ring_U = np.zeros((SNAPSHOT_RING,) + padded)
        self._ring_meta: list[tuple[int, int, float, int, float]] = []  # (slot, steps, time_s, floors, rate)
        self._trouble_since: int | None = None
        self._floor_streak = 0
        j = np.arange(ny, dtype=float)
        if self.setup.mode == "axisymmetric":
            r_c = (j + 0.5) * domain.dx_m
            self._r_cell = j + 0.5
            self._r_face = np.arange(ny + 1, dtype=float)
            self._w_plus = (j + 1.0) / (j + 0.5)
            self._w_minus = j / (j + 0.5)
            self._source = 1.0 / r_c
        else:
            self._r_cell = np.ones(ny)
            self._r_face = np.ones(ny + 1)
            self._w_plus = np.ones(ny)
            self._w_minus = np.ones(ny)
            self._source = np.zeros(ny)

    def _set_kind(self, mask: np.ndarray, geometry: WallGeometry | None = None) -> None:
        if geometry is not None:
            mask = geometry.mask
        mask = np.asarray(mask)
        if mask.shape != self.domain.shape:
            raise ValueError(f"mask shape {mask.shape} does not match the domain's (ny, nx) = {self.domain.shape}")
        if mask.size and (mask.min() < 0 or mask.max() > int(CellKind.AMBIENT)):
            raise ValueError(f"mask values must be paintable cell kinds 0 to {int(CellKind.AMBIENT)}")
        k = self.kind
        e = self.setup.edges
        k[:, :] = CellKind.WALL  # corners are never read; walls are harmless
        k[:GHOST, :] = EDGE_GHOST_KIND[e.bottom]
        k[-GHOST:, :] = EDGE_GHOST_KIND[e.top]
        k[:, :GHOST] = EDGE_GHOST_KIND[e.left]
        k[:, -GHOST:] = EDGE_GHOST_KIND[e.right]
        k[:GHOST, :GHOST] = k[:GHOST, -GHOST:] = k[-GHOST:, :GHOST] = k[-GHOST:, -GHOST:] = CellKind.WALL
        k[GHOST:-GHOST, GHOST:-GHOST] = mask.astype(np.uint8)
        res = k == CellKind.RESERVOIR
        fluid = k == CellKind.FLUID
        touches = np.zeros_like(fluid)
        touches[:, :-1] |= fluid[:, 1:]
        touches[:, 1:] |= fluid[:, :-1]
        touches[:-1, :] |= fluid[1:, :]
        touches[1:, :] |= fluid[:-1, :]
        self._feed_j, self._feed_i = (a.astype(np.int64) for a in np.nonzero(res & touches))
        self._wall_nx, self._wall_ny = wall_normals(k, GHOST)
        self._face_paths = face_paths.build(self._wall_nx, self._wall_ny)  # the face sweeps' runs beside walls
        self._switch_rows_plain = kernels.switch_rows_plain(k)  # the shock switch's rows of gas only
        self.geometry = staircase_geometry(mask) if geometry is None else geometry
        if self.geometry.open_x.shape != (mask.shape[0], mask.shape[1] + 1):
            raise ValueError(f"geometry of shape {self.geometry.mask.shape} does not match the domain's {mask.shape}")
        self._cut_cells, owned = cut_cells.build(self.geometry, self.setup.mode)
        self._cut = np.zeros(k.shape, np.uint8)
        self._cut[GHOST:-GHOST, GHOST:-GHOST] = owned
        self._cut_out = np.zeros(3)
        ax, ay, vol, _ = cut_cells.face_areas(self.geometry, self.setup.mode)
        self._x_face_area = ax  # in cells (per radian / dx^2 in axisymmetric mode)
        self._cell_volume = vol

    # ------------------------------------------------------------ conditions
    def _refresh_held(self) -> None:
        """Write held states into held cells and derive floors and the held wave rate."""
        cons, prim = held_table(self.setup.gas, self.setup.conditions)
        self._held_cons, self._held_prim = cons, prim
        for kind in HELD_KINDS:
            where = self.kind == kind
            if where.any():
                self.U[:, where] = cons[kind][:, None]
                self.W[:, where] = prim[kind][:, None]
        present = [kd for kd in HELD_KINDS if (self.kind == kd).any()]
        gamma = self.setup.gas.gamma
        rates = [(abs(prim[kd][1]) + abs(prim[kd][2]) + 2.0 * math.sqrt(gamma * prim[kd][3] / prim[kd][0]))
                 for kd in present]
        self._held_rate = max(rates, default=0.0) / self.domain.dx_m
        scale_rho = float(np.max(prim[:, 0]))
        scale_p = float(np.max(prim[:, 3]))
        self._rho_floor = FLOOR_FRACTION * scale_rho
        self._p_floor = FLOOR_FRACTION * scale_p
        self._fill_edges()

    def _fill_edges(self) -> None:
        """Open edges copy the gas beside them; ambient edges are a characteristic pressure boundary."""
        kernels.fill_open_edges(self.U, self.W, self.kind)
        amb = self._held_prim[CellKind.AMBIENT]
        kernels.fill_pressure_edges(self.U, self.W, self.kind, amb[0], amb[3], self.setup.gas.gamma)

    def set_conditions(self, conditions: Conditions) -> None:
        """New reservoir, stream or ambient conditions; the flow goes on from where it is."""
        self.setup = replace(self.setup, conditions=conditions)
        self._refresh_held()
        self._update_rate()

    def set_gas(self, gas: Gas) -> None:
        """New gamma or molar mass; keeps rho, u, v, p of every cell."""
        rho, u, v, p = (self.W[c].copy() for c in range(4))
        self.setup = replace(self.setup, gas=gas)
        self._write_primitive_padded(rho, u, v, p)
        self._refresh_held()
        self._update_rate()

    def set_numerics(self, numerics: Numerics) -> None:
        self.setup = replace(self.setup, numerics=numerics)
        self._hll_x[:] = 0  # set again each step while the flux is HLLC or the limiter marks shocks
        self._hll_y[:] = 0
        self._update_rate()

    def set_mask(self, mask: np.ndarray, geometry: WallGeometry | None = None) -> None:
        """A new sketch at the same resolution. Cells that become fluid take the mean of their
        fluid neighbours (or the ambient state where there are none); the rest of the flow stays."""
        old = self.mask.copy()
        self._set_kind(mask, geometry)
        new = self.mask
        born = (new == CellKind.FLUID) & (old != CellKind.FLUID)
        if born.any():
            self._fill_born_cells(born, old == CellKind.FLUID)
        self._refresh_held()
        self._fill_edges()
        self._update_rate()

    def set_edges(self, edges: Edges) -> None:
        self.setup = replace(self.setup, edges=edges)
        mask = self.mask.copy()
        self._set_kind(mask, self.geometry)
        self._refresh_held()
        self._fill_edges()
        self._update_rate()

    def remesh(self, domain: Domain, mask: np.ndarray, geometry: WallGeometry | None = None) -> None:
        """Change resolution (or extent): the flow is carried over by bilinear interpolation."""
        old_prim = self.primitive()
        old_fluid = self.mask == CellKind.FLUID
        old_domain = self.domain
        self.setup = replace(self.setup, domain=domain)
        self._allocate(domain)
        self._set_kind(mask, geometry)
        self._refresh_held()
        self._fill_uniform_ambient()
        new_prim = [_bilinear(old_domain, q, old_fluid, domain) for q in old_prim]
        fluid = self.mask == CellKind.FLUID
        interior = (slice(None), slice(GHOST, -GHOST), slice(GHOST, -GHOST))
        rho, u, v, p = (np.where(fluid & np.isfinite(q), q, self.W[c][interior[1:]]) for c, q in enumerate(new_prim))
        self.set_primitive(rho, u, v, p)

    # ------------------------------------------------------------------ state
    def reset_flow(self) -> None:
        """Still gas at the ambient state everywhere but held cells; time back to zero."""
        self.time_s = 0.0
        self.steps = 0
        self.floors_total = 0
        self.floors_last_step = 0
        self._fill_uniform_ambient()
        self._refresh_held()
        self._fill_edges()
        self._update_rate()

    def _fill_uniform_ambient(self) -> None:
        amb_c = self._held_cons[CellKind.AMBIENT]
        amb_p = self._held_prim[CellKind.AMBIENT]
        self.U[:] = amb_c[:, None, None]
        self.W[:] = amb_p[:, None, None]

    def set_primitive(self, rho, u, v, p) -> None:
        """Set the fluid cells' state from (ny, nx) arrays or scalars; held cells keep their state."""
        shape = self.domain.shape
        fields = [np.broadcast_to(np.asarray(q, dtype=float), shape) for q in (rho, u, v, p)]
        names = ("rho", "u", "v", "p")
        for name, q in zip(names, fields):
            if not np.all(np.isfinite(q)):
                raise ValueError(f"initial {name} holds non-finite values")
        if np.any(fields[0] <= 0) or np.any(fields[3] <= 0):
            raise ValueError("initial density and pressure must be greater than 0")
        fluid = self.mask == CellKind.FLUID
        s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
        gm1 = self.setup.gas.gamma - 1.0
        r, vx, vy, pr = fields
        for c, q in enumerate(fields):
            self.W[c][s][fluid] = q[fluid]
        self.U[0][s][fluid] = r[fluid]
        self.U[1][s][fluid] = (r * vx)[fluid]
        self.U[2][s][fluid] = (r * vy)[fluid]
        self.U[3][s][fluid] = (pr / gm1 + 0.5 * r * (vx * vx + vy * vy))[fluid]
        self._refresh_held()
        self._fill_edges()
        self._update_rate()

    def _write_primitive_padded(self, rho, u, v, p) -> None:
        gm1 = self.setup.gas.gamma - 1.0
        self.W[0], self.W[1], self.W[2], self.W[3] = rho, u, v, p
        self.U[0] = rho
        self.U[1] = rho * u
        self.U[2] = rho * v
        self.U[3] = p / gm1 + 0.5 * rho * (u * u + v * v)

    def _fill_born_cells(self, born: np.ndarray, donors: np.ndarray) -> None:
        s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
        prim = [self.W[c][s] for c in range(4)]
        weight = np.zeros(born.shape)
        sums = [np.zeros(born.shape) for _ in range(4)]
        d = donors.astype(float)
        for dj in (-1, 0, 1):
            for di in (-1, 0, 1):
                if dj == 0 and di == 0:
                    continue
                wd = _shift(d, dj, di)
                weight += wd
                for c in range(4):
                    sums[c] += _shift(prim[c] * d, dj, di)
        amb = self._held_prim[CellKind.AMBIENT]
        has = weight > 0
        vals = [np.where(has, sums[c] / np.maximum(weight, 1.0), amb[c]) for c in range(4)]
        gm1 = self.setup.gas.gamma - 1.0
        r, u, v, p = vals
        for c, q in enumerate(vals):
            self.W[c][s][born] = q[born]
        self.U[0][s][born] = r[born]
        self.U[1][s][born] = (r * u)[born]
        self.U[2][s][born] = (r * v)[born]
        self.U[3][s][born] = (p / gm1 + 0.5 * r * (u * u + v * v))[born]

    def primitive(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Copies of (rho, u, v, p) on the interior cells, each (ny, nx). Walls hold filler values."""
        s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
        return tuple(self.W[c][s].copy() for c in range(4))  # type: ignore[return-value]

    # ---------------------------------------------------------- measurement
    def cell_volumes_m3(self) -> np.ndarray:
        """Gas volume of each interior cell (ny, nx): per metre of depth (planar) or over the full
        revolution (axisymmetric); walls drawn inside a cell take their share away."""
        dx = self.domain.dx_m
        if self.setup.mode == "axisymmetric":
            return 2.0 * math.pi * self._cell_volume * dx ** 3
        return self._cell_volume * dx * dx

    def x_face_areas_m2(self) -> np.ndarray:
        """Open area of each x-face (ny, nx + 1), face f left of cell column f: per metre of depth
        (planar) or over the full revolution (axisymmetric)."""
        dx = self.domain.dx_m
        if self.setup.mode == "axisymmetric":
            return 2.0 * math.pi * self._x_face_area * dx * dx
        return self._x_face_area * dx

    def x_line_flux(self, x_m: float, y_lo_m: float, y_hi_m: float) -> "LineFlux":
        """What the last step's face fluxes carried in +x through the line of x-faces nearest x = x_m,
        over the rows whose centres lie between y_lo_m and y_hi_m (at least one row).

        Mass flow (kg/s) and x-momentum flux including pressure (N) are the scheme's own fluxes times
        the faces' open areas, so a steady flow reads the same on every such line. Per metre of depth
        in planar mode. Needs `fluxes_current`; raises RuntimeError otherwise.
        """
        if not self.fluxes_current:
            raise RuntimeError("x_line_flux needs the fluxes of the last step: advance the flow first")
        dom = self.domain
        ny, nx = dom.shape
        f = int(np.clip(round((x_m - dom.x_min_m) / dom.dx_m), 0, nx))
        yc = dom.y_centres_m()
        rows = np.nonzero((yc >= min(y_lo_m, y_hi_m)) & (yc <= max(y_lo_m, y_hi_m)))[0]
        if rows.size == 0:
            rows = np.array([dom.cell_index(x_m, 0.5 * (y_lo_m + y_hi_m))[0]])
        area = self.x_face_areas_m2()[rows, f]
        return LineFlux(float(np.sum(self.Fx[0, rows, f] * area)), float(np.sum(self.Fx[1, rows, f] * area)),
                        float(np.sum(area)), f, rows)

    # -------------------------------------------------------------- stepping
    def _update_rate(self) -> None:
        """Wave rate of the current state; also the new starting point of the snapshot ring (every live
        change and every restore ends here, so a later divergence never restores across a change)."""
        self._fluxes_step = -1
        s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
        fluid = self.mask == CellKind.FLUID
        rate = 0.0
        if fluid.any():
            r, u, v, p = (self.W[c][s][fluid] for c in range(4))
            c_s = np.sqrt(self.setup.gas.gamma * p / r)
            with np.errstate(invalid="ignore"):
                rate = float(np.max((np.abs(u) + np.abs(v) + 2.0 * c_s) / self.domain.dx_m))
        self._rate = max(rate, self._held_rate)
        self._ring_meta = []
        self._trouble_since = None
        self._floor_streak = 0
        self._keep_snapshot()

    # ------------------------------------------------------------- snapshots
    def _keep_snapshot(self) -> None:
        used = {m[0] for m in self._ring_meta}
        if len(self._ring_meta) >= SNAPSHOT_RING:
            slot = self._ring_meta.pop(0)[0]
        else:
            slot = min(set(range(SNAPSHOT_RING)) - used)
        kernels.copy_state(self.U, self._ring_U[slot])
        self._ring_meta.append((slot, self.steps, self.time_s, self.floors_total, self._rate))

    @property
    def kept_steps(self) -> list[int]:
        """The step numbers of the snapshots kept for a restore after a divergence, oldest first."""
        return [m[1] for m in self._ring_meta]

    def _reference_rate(self) -> float:
        """The median wave rate of the kept snapshots. statistics.median on these few numbers gives np.median's
        value (the middle one, or the mean of the two middle ones) in about 2 us instead of 70, once a step."""
        return float(statistics.median([m[4] for m in self._ring_meta])) if self._ring_meta else self._rate

    def _restore_before_trouble(self) -> tuple[int, float]:
        """Go back to the newest snapshot from before the trouble began; returns its (step, time)."""
        since = self.steps if self._trouble_since is None else self._trouble_since
        older = [m for m in self._ring_meta if m[1] < since] or self._ring_meta[:1]
        slot, steps, time_s, floors, _ = older[-1]
        kernels.copy_state(self._ring_U[slot], self.U)
        kernels.primitive_from_conserved(self.U, self.W, self.setup.gas.gamma)
        self.steps, self.time_s, self.floors_total = steps, time_s, floors
        self.floors_last_step = 0
        self._refresh_held()
        self._update_rate()
        return steps, time_s

    @property
    def fluxes_current(self) -> bool:
        """True when Fx and Gy hold the face fluxes of the last step of the current state."""
        return self.steps > 0 and self._fluxes_step == self.steps

    @property
    def dt_s(self) -> float:
        """The time step the next step will take."""
        if self._rate <= 0.0 or not math.isfinite(self._rate):
            return 0.0
        return self.setup.numerics.cfl / self._rate

    @property
    def cells(self) -> int:
        ny, nx = self.domain.shape
        return ny * nx

    def stage_fluxes(self, res, gamma: float, lim: int, flux: int, feed_relax: float = 1.0) -> None:
        """The face fluxes of one stage (the reservoir feed, x and y faces, the faces beside cut cells): shared by
        the time-accurate step and settle mode's local steps (solver/settle.py), so both use one scheme.
        feed_relax: the fraction of the way the reservoir's feed cells move to their held state this stage."""
        kernels.feed_reservoir_edge(self.U, self.W, self.kind, self._feed_j, self._feed_i, res[0], res[3], gamma,
                                    feed_relax)
        kernels.x_face_fluxes(self.W, self._wall_nx, self._wall_ny, self.Fx, gamma, lim, flux, self._hll_x,
                              self._face_paths)
        kernels.y_face_fluxes(self.W, self._wall_nx, self._wall_ny, self.Gy, gamma, lim, flux, self._hll_y,
                              self._face_paths)
        cut_cells.reconstruct(self._cut_cells, self.W, self.kind, self.Fx, self.Gy, self._hll_x, self._hll_y, gamma,
                              lim, flux)

    def feed_relax(self, dt_s: float, stages: int) -> float:
        """The reservoir feed's relaxation per stage (kernels.feed_reservoir_edge): its cells follow their held
        state with the time constant FEED_RELAX_TRANSITS acoustic transits of the domain at the reservoir's sound
        speed, so sound leaves the chamber through the feed instead of ringing in it."""
        if self._feed_j.size == 0:
            return 1.0
        tau_s = FEED_RELAX_TRANSITS * (self.domain.x_max_m - self.domain.x_min_m) / self._feed_sound_speed_m_s()
        return 1.0 - math.exp(-dt_s / (tau_s * stages))

    def _feed_sound_speed_m_s(self) -> float:
        rho0, p0 = self._held_prim[CellKind.RESERVOIR][0], self._held_prim[CellKind.RESERVOIR][3]
        return math.sqrt(self.setup.gas.gamma * p0 / rho0)

    def mark_shocks(self, lim: int, flux: int) -> None:
        """The shock marks (kernels.shock_switch), once a step and before U0 takes the new step's start: a shock
        moves less than a cell, the marks reach two beyond it. HLLC takes HLL across strong shocks; the limiter
        van_leer_shock_minmod takes minmod in slow (standing) ones, told by how far the density moved since the
        previous step's start (U0), when the state came from that step and not from a change."""
        marks = ((kernels.MARK_HLL if flux == kernels.FLUX_HLLC else 0)
                 | (kernels.MARK_MINMOD if lim == kernels.LIM_VAN_LEER_SHOCK_MINMOD else 0))
        if marks:
            dt = self.last_dt_s
            dx_over_dt = self.domain.dx_m / dt if self.fluxes_current and dt > 0.0 else 0.0
            kernels.shock_switch(self.W, self.kind, self._hll_x, self._hll_y, kernels.SHOCK_PRESSURE_RATIO, marks,
                                 self.setup.gas.gamma, self.U0[0], dx_over_dt, kernels.SLOW_SHOCK_FRACTION,
                                 self._switch_rows_plain)

    def update_cut_cells(self, u0: np.ndarray, a: float, b: float, dt: float, inv_dx: float, gamma: float) -> None:
        """One stage's update of the cut cells (merged groups) with time step dt."""
        cc = self._cut_cells
        cut_cells.update_cut_cells(self.U, u0, self.W, self.Fx, self.Gy, a, b, dt, inv_dx, cc.j, cc.i, cc.volume,
                                   cc.area_left, cc.area_right, cc.area_bottom, cc.area_top, cc.area_2d,
                                   cc.wall_x, cc.wall_y, cc.start, cc.wall_ox, cc.wall_oy, cc.band, cc.grad, gamma,
                                   self._rho_floor, self._p_floor, self._cut_out)

    def step(self, max_dt_s: float = math.inf) -> float:
        """Advance one time step of at most max_dt_s; returns its dt in seconds.

        Raises SolverDiverged when a non-finite value appears; the state of the last good step
        is restored first.
        """
        dt = min(self.dt_s, max_dt_s)
        if dt <= 0.0:
            return 0.0
        num = self.setup.numerics
        gamma = self.setup.gas.gamma
        lim, flux = num.limiter_id, num.flux_id
        inv_dx = 1.0 / self.domain.dx_m
        self.mark_shocks(lim, flux)
        kernels.copy_state(self.U, self.U0)
        floors = 0
        res = self._held_prim[CellKind.RESERVOIR]
        relax = self.feed_relax(dt, len(num.tableau.stages))
        last = len(num.tableau.stages) - 1
        for k, (a, b) in enumerate(num.tableau.stages):
            self.stage_fluxes(res, gamma, lim, flux, relax)
            # a stage without U0 (a = 0) reads U in its place: the same memory, so no extra traffic
            u0 = self.U0 if a != 0.0 else self.U
            kernels.update_stage(self.U, u0, self.W, self.Fx, self.Gy, self.kind, self._cut, a, b, dt, inv_dx,
                                 self._w_plus, self._w_minus, self._source, gamma,
                                 self._rho_floor, self._p_floor, self._row_rate, self._row_floors, self._row_bad,
                                 k == last)
            self.update_cut_cells(u0, a, b, dt, inv_dx, gamma)
            self._fill_edges()
            floors += int(self._row_floors.sum()) + int(self._cut_out[1])
        self.finish_step(dt, floors)
        return dt

    def finish_step(self, dt_s: float, floors: int) -> None:
        """The end of every step (time-accurate, or settle mode's with its pseudo time step): the counts, the
        non-finite check and the divergence watch."""
        prev_rate = self._rate
        self.floors_last_step = floors
        self.floors_total += floors
        self.time_s += dt_s
        self.steps += 1
        self.last_dt_s = dt_s
        if self._row_bad.any() or self._cut_out[2] > 0:
            self._diverged("non_finite")
        self._rate = max(float(self._row_rate.max()), float(self._cut_out[0]), self._held_rate)
        self._fluxes_step = self.steps
        self._watch(prev_rate, floors)

    def _watch(self, prev_rate: float, floors: int) -> None:
        """Stop a run that is going bad before it produces garbage, and keep snapshots while it is well."""
        rate = self._rate
        ref = self._reference_rate()
        troubled = floors > 0 or rate > RATE_WARN_STEP * prev_rate or rate > RATE_WARN * ref
        if troubled and self._trouble_since is None:
            self._trouble_since = self.steps
        elif not troubled:
            self._trouble_since = None
        many = max(FLOOR_CELLS_MIN, int(FLOOR_CELLS_FRACTION * self.cells))
        self._floor_streak = self._floor_streak + 1 if floors >= many else 0
        if rate > RATE_JUMP * prev_rate and self.steps > 1:
            self._diverged("wave_speed_jump", prev_rate)
        if rate > RATE_COLLAPSE * ref:
            self._diverged("time_step_collapse", ref)
        if self._floor_streak >= FLOOR_STEPS:
            self._diverged("floors", float(floors))
        if self._trouble_since is None and self.steps % SNAPSHOT_EVERY == 0:
            self._keep_snapshot()

    def _diverged(self, reason: str, before: float = 0.0) -> None:
        """Find where it went bad, restore the last snapshot from before the trouble, raise SolverDiverged."""
        if self._trouble_since is None:
            self._trouble_since = self.steps
        s = (slice(None), slice(GHOST, -GHOST), slice(GHOST, -GHOST))
        fluid = self.mask == CellKind.FLUID
        dx = self.domain.dx_m
        if reason == "non_finite":
            interior = self.U[s]
            bad = ~np.isfinite(interior) & fluid[None]
            c, j, i = (int(x[0]) for x in np.nonzero(bad))
            variable, value, detail = _VARIABLES[c], float(interior[c, j, i]), ""
        elif reason == "floors":
            p = np.where(fluid, self.W[3][s[1:]], np.inf)
            j, i = (int(x) for x in np.unravel_index(np.argmin(p), p.shape))
            variable, value = "pressure", float(p[j, i])
            detail = (f"density or pressure floors acted in {int(before)} cells, in at least "
                      f"{max(FLOOR_CELLS_MIN, int(FLOOR_CELLS_FRACTION * self.cells))} cells for {FLOOR_STEPS} steps "
                      f"in a row; the lowest pressure is {value:.6g} Pa")
        else:
            r, u, v, p = (self.W[c][s[1:]] for c in range(4))
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                speed = np.where(fluid, np.abs(u) + np.abs(v) + 2.0 * np.sqrt(np.abs(self.setup.gas.gamma * p / r)), -1.0)
            speed = np.nan_to_num(speed, nan=-1.0, posinf=np.finfo(float).max)
            j, i = (int(x) for x in np.unravel_index(np.argmax(speed), speed.shape))
            variable, value = "wave speed", float(self._rate * dx)
            if reason == "wave_speed_jump":
                detail = (f"the largest wave speed (|u| + |v| + 2a) jumped from {before * dx:.6g} to {value:.6g} m/s "
                          f"in one step (more than {RATE_JUMP:g} times)")
            else:
                cfl = self.setup.numerics.cfl
                detail = (f"the time step fell to {cfl / self._rate:.3g} s, below 1/{RATE_COLLAPSE:g} of its recent "
                          f"{cfl / before:.3g} s (largest wave speed {value:.6g} m/s)")
        x_m = float(self.domain.x_centres_m()[i])
        y_m = float(self.domain.y_centres_m()[j])
        step, time_s = self.steps, self.time_s
        kept_step, kept_time_s = self._restore_before_trouble()
        raise SolverDiverged(step, time_s, x_m, y_m, variable, value, reason=reason, detail=detail,
                             kept_step=kept_step, kept_time_s=kept_time_s)

    def advance(self, n_steps: int) -> None:
        for _ in range(int(n_steps)):
            if self.step() <= 0.0:
                return

    def run_until(self, t_end_s: float, max_steps: int = 10_000_000) -> None:
        """Step until time t_end_s exactly (the last step is shortened)."""
        while self.time_s < t_end_s and self.steps < max_steps:
            if self.step(max_dt_s=t_end_s - self.time_s) <= 0.0:
                break


def _shift(a: np.ndarray, dj: int, di: int) -> np.ndarray:
    """a moved by (dj, di) with zeros shifted in."""
    out = np.zeros_like(a)
    ny, nx = a.shape
    ys, yd = (slice(0, ny - dj), slice(dj, ny)) if dj >= 0 else (slice(-dj, ny), slice(0, ny + dj))
    xs, xd = (slice(0, nx - di), slice(di, nx)) if di >= 0 else (slice(-di, nx), slice(0, nx + di))
    out[yd, xd] = a[ys, xs]
    return out


def _bilinear(src: Domain, q: np.ndarray, valid: np.ndarray, dst: Domain) -> np.ndarray:
    """Interpolate a cell-centred field to another grid, using valid cells only (NaN where none)."""
    xs = (dst.x_centres_m() - src.x_min_m) / src.dx_m - 0.5
    ys = (dst.y_centres_m() - src.y_min_m) / src.dx_m - 0.5
    ny, nx = q.shape
    x0 = np.clip(np.floor(xs).astype(int), 0, nx - 1)
    y0 = np.clip(np.floor(ys).astype(int), 0, ny - 1)
    x1 = np.clip(x0 + 1, 0, nx - 1)
    y1 = np.clip(y0 + 1, 0, ny - 1)
    fx = np.clip(xs - x0, 0.0, 1.0)[None, :]
    fy = np.clip(ys - y0, 0.0, 1.0)[:, None]
    w = valid.astype(float)
    qw = np.where(valid, q, 0.0)
    num = ((1 - fy) * (1 - fx) * qw[np.ix_(y0, x0)] + (1 - fy) * fx * qw[np.ix_(y0, x1)]
           + fy * (1 - fx) * qw[np.ix_(y1, x0)] + fy * fx * qw[np.ix_(y1, x1)])
    den = ((1 - fy) * (1 - fx) * w[np.ix_(y0, x0)] + (1 - fy) * fx * w[np.ix_(y0, x1)]
           + fy * (1 - fx) * w[np.ix_(y1, x0)] + fy * fx * w[np.ix_(y1, x1)])
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 1e-12, num / den, np.nan)
