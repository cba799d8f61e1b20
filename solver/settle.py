"""Settle mode: reach the steady state of a flow under fixed conditions fast, without its time history.

Two published convergence accelerators of time-marching solvers:

* Local time stepping (Jameson, Schmidt and Turkel 1981, AIAA 81-1259): every gas cell advances by the
  largest step its own wave speeds allow (solver/settle_kernels.py). The fluxes are the scheme's own and
  the update is conservative, so where the flow is steady (every cell's flux balance zero) it is the same
  steady state as time-accurate stepping reaches; the states on the way there are no time history.
* Grid sequencing (e.g. Blazek, Computational Fluid Dynamics: Principles and Applications, ch. 9): settle
  first on grids four and two times as coarse (DEFAULT_LEVELS; a sixteenth and a quarter of the cells, steps
  four and two times as long), carry the flow over to the next grid by interpolation and settle there from
  it. The hand-over also sets the new grid's reservoir feed to the flow beside it (settle_feed): a feed left
  at rest beside a flowing chamber was the largest transient on the fine grid.

`LocalStepper.step` takes one step and keeps `sim.time_s` as a pseudo time: it advances by the step
that, applied to every cell, would have made the same total density change (a residual-weighted mean of
the cells' steps). With that, solver.steady's SteadyMonitor reads the same residual figure (the L1 norm of
d(rho)/dt over the gas) from a settle step as from a time-accurate one, and its hold over a transit time
is a hold over a transit of pseudo time.
"""
from __future__ import annotations

import math
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Callable, Optional, Sequence

import numba
import numpy as np

from . import kernels, settle_kernels
from .diagnostics import Station, read_station
from .kinds import CellKind
from .numerics import CFL_MAX
from .simulation import GHOST, Simulation, _bilinear

#: Coarse grids of grid sequencing: at most this many halvings of the resolution ...
MAX_LEVELS = 3
#: Grid levels of `shockslate run --until steady --settle` and the benchmark: three (two coarse grids) where the
#: grid allows. On nozzle_sea_level at 320 cells across (NUMBA_NUM_THREADS=1, /tmp script over settle_coarse and
#: LocalStepper to SettleCheck): two levels took 796 steps at 160 and 1097 at 320; three took 369 at 80, 414 at 160
#: and 520 at 320, about half the work in fine-step equivalents.
DEFAULT_LEVELS = 3
#: ... and never fewer cells across x than this on the coarsest one.
MIN_COARSE_NX = 40
#: A coarse level hands over once its residual figure is below this (fraction of the mass changing per
#: transit; common practice, no source: the fine grid changes the flow at that level anyway) ...
COARSE_TOLERANCE = 1.0e-2
#: ... or once it has stopped falling: the smallest figure over the last STALL_TRANSITS transit times (of pseudo
#: time) is no smaller than STALL_GAIN times that of the window before (common practice, no source).
STALL_TRANSITS, STALL_GAIN = 1.0, 0.9
#: Coarse grids of fewer cells than this step on one kernel thread: a step there is a few dozen microseconds of
#: work a kernel, so the second thread gains little and, on a shared machine, every parallel region waits for a
#: descheduled thread (nozzle_sea_level's 80 and 160 grids, two threads, load average 3: 783 coarse steps 3.1 s,
#: one thread: see the commit; common practice, no source for the figure).
SERIAL_CELLS = 10_000
#: A coarse level takes at most this many steps.
COARSE_MAX_STEPS = 20_000
#: Settle mode steps at this multiple of the scenario's Courant number (at most numerics.CFL_MAX): time accuracy
#: no longer asks for margin, and the step measure (|u| + |v| + 2a) dt / dx <= 1 keeps the SSP update stable
#: (common practice, no source for the factor; stable on the test duct, the test nozzle and nozzle_sea_level).
SETTLE_CFL_FACTOR = 2.0
#: The notice every view of a settled flow carries.
NOTICE = ("Settle mode shows the end state only: every cell takes its own time step (local time stepping) "
          "and the flow starts on a coarser grid, so the states on the way are not a time history and the "
          "clock shows pseudo time.")


def settle_cfl(scenario_cfl: float) -> float:
    """The Courant number of settle mode for a scenario's (time-accurate) one."""
    return min(CFL_MAX, SETTLE_CFL_FACTOR * scenario_cfl)


class LocalStepper:
    """Advances a Simulation with local time steps (one SSP Runge-Kutta step per call).

    The scheme (flux, limiter, integrator, floors, divergence guards) is the simulation's own; only the
    step size differs per cell. Cut cells, which the cut-cell kernel advances by one step for all, take
    the smallest of their cells' local steps (stable: no cut cell steps beyond its own limit).
    """

    def __init__(self, sim: Simulation, cfl: Optional[float] = None):
        """cfl: the Courant number of the local steps; None follows the scenario's (settle_cfl), also when it
        changes while the stepper is in use."""
        self.sim = sim
        if cfl is not None and not (0.0 < cfl <= CFL_MAX):
            raise ValueError(f"cfl = {cfl!r} is outside the allowed range 0 to {CFL_MAX:g} for settle mode")
        self._cfl = None if cfl is None else float(cfl)
        self.dt = np.zeros(sim.kind.shape)
        self._rate = np.zeros(sim.kind.shape)  # scratch of local_time_steps
        self._cut_of: object = None
        self._feed_of: object = None
        self._feed_shape: tuple = ()
        #: the residual figure's rate sum of the last step: sum over gas cells of |d rho| / dt (kg/m^3/s)
        self.rate_sum = math.nan

    def _feed_dt_s(self) -> float:
        """The step of the gas beside the reservoir's feed: the largest local step of the feed cells' gas
        neighbours. The feed relaxes over that step as in a time-accurate step (Simulation.feed_relax), so the
        chamber's sound leaves through the feed here too instead of ringing between it and the throat."""
        j, i = self.sim._feed_j, self.sim._feed_i
        if j.size == 0:
            return 0.0
        if self._feed_of is not j or self._feed_shape != self.dt.shape:  # flat indices of the neighbours, once
            ny, nx = self._feed_shape = self.dt.shape
            self._feed_of = j
            self._feed_beside = np.concatenate([np.clip(j + dj, 0, ny - 1) * nx + np.clip(i + di, 0, nx - 1)
                                                for dj, di in ((1, 0), (-1, 0), (0, 1), (0, -1))])
        return float(self.dt.ravel()[self._feed_beside].max())

    @property
    def cfl(self) -> float:
        return settle_cfl(self.sim.setup.numerics.cfl) if self._cfl is None else self._cfl

    def step(self) -> float:
        """One local-time step; returns the pseudo-time increment (s). Raises SolverDiverged like sim.step."""
        sim = self.sim
        num = sim.setup.numerics
        gamma = sim.setup.gas.gamma
        lim, flux = num.limiter_id, num.flux_id
        inv_dx = 1.0 / sim.domain.dx_m
        if self.dt.shape != sim.kind.shape:  # the resolution changed
            self.dt = np.zeros(sim.kind.shape)
        if self._rate.shape != sim.kind.shape:
            self._rate = np.zeros(sim.kind.shape)
        if self._cut_of is not sim._cut_cells:  # the sketch changed
            self._cut_of = sim._cut_cells
            self._cut_j = sim._cut_cells.j + GHOST
            self._cut_i = sim._cut_cells.i + GHOST
        settle_kernels.local_time_steps(sim.W, sim.kind, self.cfl, inv_dx, gamma, self.dt, self._rate)
        dt_cut = 0.0
        if self._cut_j.size:
            h = self.dt[self._cut_j, self._cut_i]
            h = h[h > 0.0]
            dt_cut = float(h.min()) if h.size else 0.0
            self.dt[self._cut_j, self._cut_i] = dt_cut
        sim.mark_shocks(lim, flux)
        kernels.copy_state(sim.U, sim.U0)
        floors = 0
        res = sim._held_prim[CellKind.RESERVOIR]
        relax = sim.feed_relax(self._feed_dt_s(), len(num.tableau.stages))
        for a, b in num.tableau.stages:
            sim.stage_fluxes(res, gamma, lim, flux, relax)
            u0 = sim.U0 if a != 0.0 else sim.U
            settle_kernels.update_stage_local(sim.U, u0, sim.W, sim.Fx, sim.Gy, sim.kind, sim._cut, a, b, self.dt,
                                              inv_dx, sim._w_plus, sim._w_minus, sim._source, gamma,
                                              sim._rho_floor, sim._p_floor, sim._row_rate, sim._row_floors,
                                              sim._row_bad)
            sim.update_cut_cells(u0, a, b, dt_cut, inv_dx, gamma)
            sim._fill_edges()
            floors += int(sim._row_floors.sum()) + int(sim._cut_out[1])
        change, rate_sum, _ = settle_kernels.density_rates(sim.U, sim.U0, sim.kind, self.dt, 0, sim.domain.nx)
        self.rate_sum = rate_sum
        if rate_sum > 0.0 and change > 0.0:
            pseudo = change / rate_sum
        else:  # nothing changed: the smallest step (a boolean pick over the grid, so only here)
            positive = self.dt[self.dt > 0.0]
            pseudo = float(positive.min()) if positive.size else 0.0
        sim.finish_step(pseudo, floors)
        return pseudo


@dataclass
class RegionResidual:
    """The residual figure over the gas cells of the columns left of x_max_m (all with x_max_m = inf).

    figure = sum |d rho / dt| / sum rho * t_ref over those cells, with t_ref the domain's acoustic transit
    time (solver.steady.transit_time_s): the same measure as SteadyMonitor's, but over a region, so that the
    inside of a nozzle can be judged apart from a free jet's shear layer, which never settles. Call
    `after_step(dt)` after every step with the step's dt (a float for a time-accurate step, the stepper's
    per-cell array for a settle step).
    """

    sim: Simulation
    x_max_m: float = math.inf
    figure: float = math.nan
    _t_ref: float = field(default=math.nan, init=False)
    _i_hi: int = field(default=0, init=False)
    _dt: Optional[np.ndarray] = field(default=None, init=False)

    def __post_init__(self) -> None:
        from .steady import transit_time_s

        self._t_ref = transit_time_s(self.sim)
        dom = self.sim.domain
        self._i_hi = dom.nx if not math.isfinite(self.x_max_m) else int(
            np.clip(math.floor((self.x_max_m - dom.x_min_m) / dom.dx_m), 1, dom.nx))

    @property
    def transit_s(self) -> float:
        return self._t_ref

    def after_step(self, dt) -> float:
        if np.ndim(dt) == 0:
            if self._dt is None:
                self._dt = np.zeros(self.sim.kind.shape)
            self._dt.fill(float(dt))
            dt = self._dt
        _, rate, total = settle_kernels.density_rates(self.sim.U, self.sim.U0, self.sim.kind, dt, 0, self._i_hi)
        self.figure = rate / total * self._t_ref if total > 0.0 else math.nan
        return self.figure


def coarse_nx(nx: int, levels: int) -> list[int]:
    """The resolutions of grid sequencing, coarsest first, ending with nx: halvings while at least
    MIN_COARSE_NX cells remain across x, at most `levels` - 1 of them (levels = 1: nx alone)."""
    if levels < 1 or levels > MAX_LEVELS:
        raise ValueError(f"levels = {levels!r} must be between 1 and {MAX_LEVELS}")
    out = [int(nx)]
    while len(out) < levels and out[0] // 2 >= MIN_COARSE_NX:
        out.insert(0, out[0] // 2)
    return out


def prolong(coarse: Simulation, fine: Simulation) -> None:
    """Carry the coarse flow over to the fine grid (bilinear over the coarse gas cells); fine gas cells with
    no coarse gas near them keep their state."""
    old_fluid = coarse.mask == CellKind.FLUID
    new = [_bilinear(coarse.domain, q, old_fluid, fine.domain) for q in coarse.primitive()]
    mine = fine.primitive()
    fluid = fine.mask == CellKind.FLUID
    ok = fluid & np.all([np.isfinite(q) for q in new], axis=0) & (new[0] > 0.0) & (new[3] > 0.0)
    fine.set_primitive(*(np.where(ok, q, m) for q, m in zip(new, mine)))
    settle_feed(fine)


def settle_feed(sim: Simulation) -> None:
    """Move the reservoir's feed cells all the way to the stagnation state expanded to the velocity of the gas
    beside them (kernels.feed_reservoir_edge with relax 1), as they stand once the flow is steady.

    A freshly built grid holds its feed at rest; beside a flow carried over from a coarser grid such a feed
    passes gas through an unsteady expansion that loses total pressure, and its relaxation takes a few hundred
    local steps, in which the chamber pressure fell by 4 % and the throat mass flow by 10 % on nozzle_sea_level
    (measured): the largest transient of the hand-over."""
    if sim._feed_j.size == 0:
        return
    res = sim._held_prim[CellKind.RESERVOIR]
    kernels.feed_reservoir_edge(sim.U, sim.W, sim.kind, sim._feed_j, sim._feed_i, res[0], res[3],
                                sim.setup.gas.gamma, 1.0)


@dataclass
class CoarseLevel:
    """What one coarse level of grid sequencing did."""

    nx: int
    steps: int
    figure: float
    reason: str      #: "settled", "stalled" or "step limit"


def interior_end_m(exit_station: Optional[Station]) -> float:
    """Where the region judged on coarse grids ends: at a nozzle's exit station (the free jet beyond it has a
    shear layer that never settles), or nowhere (math.inf: the whole domain)."""
    if exit_station is None:
        return math.inf
    return max(exit_station.start_m[0], exit_station.end_m[0])


def settle_coarse(build: Callable[[int], Simulation], fine: Simulation, levels: int = DEFAULT_LEVELS,
                  cfl: Optional[float] = None, tolerance: float = COARSE_TOLERANCE, x_max_m: float = math.inf,
                  max_steps: int = COARSE_MAX_STEPS, stop: Callable[[], bool] = lambda: False) -> list[CoarseLevel]:
    """Grid sequencing before the fine grid: settle on the coarser grids `build(nx)` makes, coarsest first,
    each handing its flow to the next, and the last to `fine`. A level is judged by its residual figure over
    the columns left of x_max_m. Returns what each coarse level did."""
    steps = settle_coarse_steps(build, fine, levels, cfl, tolerance, x_max_m, max_steps, stop)
    while True:
        try:
            next(steps)
        except StopIteration as end:
            return end.value


def settle_coarse_steps(build: Callable[[int], Simulation], fine: Simulation, levels: int = DEFAULT_LEVELS,
                        cfl: Optional[float] = None, tolerance: float = COARSE_TOLERANCE, x_max_m: float = math.inf,
                        max_steps: int = COARSE_MAX_STEPS, stop: Callable[[], bool] = lambda: False,
                        pseudo_s: Optional[list] = None):
    """settle_coarse one step at a time: a generator that yields (after every coarse step) the coarse Simulation
    it is on, and returns the list of CoarseLevel (so a caller can interleave it with other work, as the
    benchmark and the live session do). pseudo_s: a one-element list the pseudo-time step of each coarse step is
    written to."""
    sizes = coarse_nx(fine.domain.nx, levels)[:-1]
    done: list[CoarseLevel] = []
    prev: Optional[Simulation] = None
    for nx in sizes:
        sim = build(nx)
        if prev is not None:
            prolong(prev, sim)
        level = yield from _settle_level(sim, cfl, tolerance, x_max_m, max_steps, stop, pseudo_s)
        done.append(level)
        prev = sim
    if prev is not None:
        prolong(prev, fine)
    return done


@contextmanager
def _threads_for(sim: Simulation):
    """One kernel thread for a grid of fewer than SERIAL_CELLS cells (the caller's count back afterwards, so
    whatever runs between two coarse steps keeps its own)."""
    if sim.cells >= SERIAL_CELLS:
        yield
        return
    before = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        yield
    finally:
        numba.set_num_threads(before)


def _settle_level(sim: Simulation, cfl, tolerance: float, x_max_m: float, max_steps: int,
                  stop: Callable[[], bool], pseudo_s: Optional[list] = None):
    """Settle one coarse level, yielding after every step; returns its CoarseLevel."""
    stepper = LocalStepper(sim, cfl)
    region = RegionResidual(sim, x_max_m)
    window_s = STALL_TRANSITS * region.transit_s
    best_prev, best_now, window_end = math.inf, math.inf, window_s
    reason = "step limit"
    for _ in range(max_steps):
        if stop():
            reason = "stopped"
            break
        with _threads_for(sim):
            dt = stepper.step()
            fig = region.after_step(stepper.dt)
        if pseudo_s is not None:
            pseudo_s[0] = dt
        if fig < tolerance:
            reason = "settled"
            break
        best_now = min(best_now, fig)
        if sim.time_s >= window_end:
            if best_now > STALL_GAIN * best_prev:
                reason = "stalled"
                break
            best_prev, best_now, window_end = best_now, math.inf, sim.time_s + window_s
        yield sim
    return CoarseLevel(sim.domain.nx, sim.steps, region.figure, reason)


@dataclass
class SettleCheck:
    """A steady criterion for comparing settle mode with time-accurate stepping: the residual figure over a
    region (RegionResidual) below `tolerance` for `hold` steps in a row, and the mass flows of `stations`
    within `mass_tolerance` of each other."""

    sim: Simulation
    stations: Sequence[Station]
    x_max_m: float = math.inf
    tolerance: float = 1.0e-3
    mass_tolerance: float = 0.005
    hold: int = 50
    below: int = 0
    imbalance: Optional[float] = None

    def __post_init__(self) -> None:
        self.region = RegionResidual(self.sim, self.x_max_m)

    def after_step(self, dt) -> bool:
        fig = self.region.after_step(dt)
        self.below = self.below + 1 if fig < self.tolerance else 0
        if self.below < self.hold:
            return False
        flows = [read_station(self.sim, st).mass_flow_kg_s for st in self.stations]
        if len(flows) >= 2:
            mean = float(np.mean(np.abs(flows)))
            self.imbalance = float(np.ptp(flows) / mean) if mean > 0.0 else math.inf
            return self.imbalance <= self.mass_tolerance
        return True


class GridSequence:
    """Grid sequencing a step at a time, for a flow that is stepped live (the page's settle mode).

    The coarse grids `build(nx)` makes (coarse_nx: halvings of the fine grid, coarsest first; by default
    DEFAULT_LEVELS, as `shockslate run --until steady --settle` uses) start from the
    scenario's initial state and settle in turn (settle_coarse_steps); the last hands its flow to `fine`, the
    user's own grid, which is only changed then. `step()` takes one step of whichever grid is current: a coarse
    step while levels remain, then nothing (done is True; the caller goes on with a LocalStepper on `fine`).
    `sim` is the grid the flow is on now, `level` its number (1 = coarsest) of `levels`.
    """

    def __init__(self, build: Callable[[int], Simulation], fine: Simulation, levels: int = DEFAULT_LEVELS,
                 cfl: Optional[float] = None, tolerance: float = COARSE_TOLERANCE, x_max_m: float = math.inf,
                 max_steps: int = COARSE_MAX_STEPS):
        self.fine = fine
        self.sizes = coarse_nx(fine.domain.nx, levels)
        self.levels = len(self.sizes)
        self._pseudo = [0.0]
        self._steps = settle_coarse_steps(build, fine, levels, cfl, tolerance, x_max_m, max_steps,
                                          pseudo_s=self._pseudo)
        self.coarse: list[CoarseLevel] = []
        self._coarse_sim: Optional[Simulation] = None
        self.done = self.levels == 1

    @property
    def sim(self) -> Simulation:
        """The grid the flow is on now (the fine one before the first coarse step and once done)."""
        return self.fine if self.done or self._coarse_sim is None else self._coarse_sim

    @property
    def level(self) -> int:
        """1 for the coarsest grid ... levels for the fine one (1 also before the first step)."""
        if self.done:
            return self.levels
        return 1 if self._coarse_sim is None else self.sizes.index(self._coarse_sim.domain.nx) + 1

    def _advance(self) -> None:
        try:
            self._coarse_sim = next(self._steps)
        except StopIteration as end:
            self.coarse = list(end.value)
            self._coarse_sim = None
            self.done = True

    def abandon(self) -> None:
        """End the sequence where it is (a coarse grid failed): the fine grid keeps its own flow."""
        self._steps.close()
        self._coarse_sim = None
        self.done = True

    def step(self) -> float:
        """One coarse step; the pseudo-time step it took (s), or 0.0 once the flow is on the fine grid. The step
        that settles a level hands its flow to the next grid at once. Raises SolverDiverged like sim.step."""
        if self.done:
            return 0.0
        self._advance()
        return self._pseudo[0]
