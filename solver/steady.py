"""Steady state: how fast the flow still changes, whether mass balances between stations, and
station readings averaged over a window with their unsteadiness.

The residual is the normalised L1 change of density per unit time,
    r = sum |rho_new - rho_old| / (sum rho_new * dt)          [1/s] over the gas cells,
the common convergence measure of time-marching solvers (Blazek, Computational Fluid Dynamics:
Principles and Applications, ch. 9: the density residual). Multiplied by the domain's acoustic
transit time t_ref = (x extent) / (largest sound speed of the held states) it becomes the fraction
of the mass that would change in one transit at the present rate: that dimensionless figure is
what a tolerance is compared with.

A flow counts as steady when that figure has stayed below the tolerance for one transit time and,
where two or more stations carry a mass flow, the spread of their mass flows is within
`mass_tolerance` of the mean (a steady flow carries the same mass through every section).

Where a nozzle blows into free air (a scenario with a throat and an exit station), the residual is
taken over the nozzle interior only: the gas cells upstream of the exit station (`nozzle_region`),
and the transit time over that region's length; the mass balance is between the throat and the
exit station. An inviscid free jet's shear layer rolls up for ever (a Kelvin-Helmholtz instability
that no grid damps), so a domain-wide residual of such a run stays near 0.1 to 0.2 however long it
runs, while the readings an engineer takes (mass flow, thrust, exit Mach and pressure) come from
the nozzle, which a supersonic exit shields from the plume.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Optional, Sequence

import numpy as np
from numba import njit, prange

from .diagnostics import Station, StationReading, read_station
from .kinds import HELD_KINDS, CellKind
from .simulation import GHOST, Simulation

#: Default tolerance on the residual times the transit time (common practice, no source: three orders
#: of magnitude below a flow that is still being set up, where that figure is of order one).
DEFAULT_TOLERANCE = 1.0e-3
#: Default tolerance on the spread of station mass flows, relative to their mean.
DEFAULT_MASS_TOLERANCE = 0.01
#: Stations whose mass flow is below this fraction of the largest count as carrying none.
_NO_FLOW = 1.0e-6
#: The averaging window of a time-limited run: its last fifth.
WINDOW_FRACTION = 0.2


@njit(nogil=True, cache=True, error_model="numpy", parallel=True)
def _density_change(U, U0, kind, i_end):
    """(sum |U[0] - U0[0]|, sum U[0]) over the interior gas cells of the padded columns below i_end."""
    nyp = U.shape[1]
    nxp = min(U.shape[2], i_end + 2)
    change = np.zeros(nyp)
    total = np.zeros(nyp)
    for jj in prange(2, nyp - 2):
        k = kind[jj]
        r = U[0, jj]
        r0 = U0[0, jj]
        c = 0.0
        t = 0.0
        for ii in range(2, nxp - 2):
            if k[ii] == 0:
                c += abs(r[ii] - r0[ii])
                t += r[ii]
        change[jj] = c
        total[jj] = t
    return change.sum(), total.sum()


def live_residual(sim: Simulation, region: Optional["Region"] = None) -> tuple[Optional[float], Optional[str]]:
    """(residual figure, "settling" | "steady") of the last step, or (None, None) before a step. For the live
    status: a single step's figure against DEFAULT_TOLERANCE, without the hold over a transit of SteadyMonitor.
    `region` (e.g. `nozzle_region`) limits it as in a batch run; default the whole domain."""
    dt = getattr(sim, "last_dt_s", 0.0)
    if not (sim.fluxes_current and dt > 0.0):
        return None, None
    r = density_residual_per_s(sim, dt, region) * transit_time_s(sim, present_only=False, region=region)
    if not math.isfinite(r):
        return None, None
    return r, ("steady" if r < DEFAULT_TOLERANCE else "settling")


@dataclass(frozen=True)
class Region:
    """Where the residual is taken: the interior columns 0 .. columns - 1 (all of them: the whole domain).

    `x_end_m` is the x at which the region ends, `label` says what it is, for summaries and reports."""

    columns: int
    x_end_m: float
    label: str = "the whole domain"


def whole_domain(sim: Simulation) -> Region:
    return Region(sim.domain.nx, sim.domain.x_max_m)


def nozzle_region(sim: Simulation, exit_x_m: float, exit_name: str = "exit") -> Region:
    """The gas cells whose centres lie upstream of the exit station at x = exit_x_m: chamber and nozzle."""
    dom = sim.domain
    columns = int(np.searchsorted(dom.x_centres_m(), exit_x_m, side="right"))
    if columns < 1:
        raise ValueError(f"exit station x = {exit_x_m!r} m lies upstream of every cell (domain starts at "
                         f"x = {dom.x_min_m:g} m); the nozzle interior would be empty")
    columns = min(columns, dom.nx)
    return Region(columns, dom.x_min_m + columns * dom.dx_m,
                  f"the nozzle interior (x up to {exit_x_m:.6g} m, the station '{exit_name}')")


def steady_region(sim: Simulation, scenario) -> Optional[Region]:
    """Where a scenario's steadiness is judged, for batch runs and the live status alike: a nozzle (a throat and
    an exit station and a reservoir) by its interior, since its free plume never settles; anything else by the
    whole domain (None)."""
    from .scenario import station_by_role  # scenario imports the solver's modules; kept local to avoid a cycle
    throat, exit_ = station_by_role(scenario, "throat"), station_by_role(scenario, "exit")
    if throat is None or exit_ is None or not (sim.mask == int(CellKind.RESERVOIR)).any():
        return None
    return nozzle_region(sim, 0.5 * (exit_.start_m[0] + exit_.end_m[0]), exit_.name)


def density_residual_per_s(sim: Simulation, dt_s: float, region: Optional[Region] = None) -> float:
    """The density residual of the step just taken (sim.step returned dt_s), in 1/s, over `region`
    (default: every gas cell).

    Reads the step-start copy the stage loop keeps (sim.U0), so call it right after the step.
    """
    if not (dt_s > 0.0):
        return math.nan
    columns = sim.domain.nx if region is None else region.columns
    change, total = _density_change(sim.U, sim.U0, sim.kind, columns + 2)
    return change / (total * dt_s) if total > 0.0 else math.nan


def transit_time_s(sim: Simulation, present_only: bool = True, region: Optional[Region] = None) -> float:
    """x extent of the domain (or of `region`) over the largest sound speed of the held states in use (or
    the gas now).

    present_only=False takes every held condition whether painted or not: no pass over the mask, for
    a figure computed often (the live status)."""
    gamma = sim.setup.gas.gamma
    present = [k for k in HELD_KINDS if not present_only or (sim.kind == k).any()]
    speeds = [math.sqrt(gamma * sim._held_prim[k][3] / sim._held_prim[k][0]) for k in present]
    if not speeds:
        fluid = sim.mask == CellKind.FLUID
        s = (slice(GHOST, -GHOST), slice(GHOST, -GHOST))
        if fluid.any():
            speeds = [float(np.max(np.sqrt(gamma * sim.W[3][s][fluid] / sim.W[0][s][fluid])))]
    a = max(speeds, default=0.0)
    width = (sim.domain.x_max_m if region is None else region.x_end_m) - sim.domain.x_min_m
    return width / a if a > 0.0 else math.inf


def mass_imbalance(readings: Sequence[StationReading]) -> Optional[float]:
    """Spread (max - min) of the stations' mass flows over their mean magnitude; None with fewer than two
    stations that carry a flow."""
    flows = np.array([r.mass_flow_kg_s for r in readings], dtype=float)
    flows = flows[np.isfinite(flows)]
    if flows.size < 2:
        return None
    big = np.max(np.abs(flows))
    carrying = flows[np.abs(flows) > _NO_FLOW * big] if big > 0.0 else flows[:0]
    if carrying.size < 2:
        return None
    return float(np.ptp(carrying) / np.mean(np.abs(carrying)))


@dataclass
class SteadyMonitor:
    """Follows a run step by step and says when it has settled.

    Call `after_step(dt)` after every `sim.step()`; `check(readings)` with station readings now and
    then (the mass balance needs them). `steady` is True once the residual figure has stayed below
    `tolerance` for one transit time and the mass balance (if there is one) is within `mass_tolerance`.
    `region` limits the residual (and the transit length) to part of the domain (`nozzle_region`).
    """

    sim: Simulation
    tolerance: float = DEFAULT_TOLERANCE
    mass_tolerance: float = DEFAULT_MASS_TOLERANCE
    region: Optional[Region] = None
    residual_per_s: float = math.nan
    imbalance: Optional[float] = None
    below_since_s: Optional[float] = None
    _t_ref: float = field(default=math.nan, init=False)

    def __post_init__(self) -> None:
        if not (math.isfinite(self.tolerance) and self.tolerance > 0.0):
            raise ValueError(f"tolerance = {self.tolerance!r} must be a finite number greater than 0")
        if not (math.isfinite(self.mass_tolerance) and self.mass_tolerance > 0.0):
            raise ValueError(f"mass_tolerance = {self.mass_tolerance!r} must be a finite number greater than 0")
        if self.region is None:
            self.region = whole_domain(self.sim)
        self._t_ref = transit_time_s(self.sim, region=self.region)

    @property
    def transit_s(self) -> float:
        return self._t_ref

    @property
    def residual(self) -> float:
        """The residual times the transit time: the fraction of the mass changing per transit."""
        return self.residual_per_s * self._t_ref

    def residual_now(self, dt_s: float) -> float:
        """The residual figure of the step just taken (dt_s), over the monitor's region; NaN before a step."""
        return density_residual_per_s(self.sim, dt_s, self.region) * self._t_ref

    def after_step(self, dt_s: float) -> float:
        self.residual_per_s = density_residual_per_s(self.sim, dt_s, self.region)
        if self.residual < self.tolerance:
            if self.below_since_s is None:
                self.below_since_s = self.sim.time_s
        else:
            self.below_since_s = None
        return self.residual

    def check(self, readings: Sequence[StationReading]) -> None:
        self.imbalance = mass_imbalance(readings)

    @property
    def steady(self) -> bool:
        held = self.below_since_s is not None and self.sim.time_s - self.below_since_s >= self._t_ref
        balanced = self.imbalance is None or self.imbalance <= self.mass_tolerance
        return held and balanced


def read_stations(sim: Simulation, stations: Sequence[Station]) -> list[StationReading]:
    return [read_station(sim, st) for st in stations]


#: Station quantities averaged over the window.
AVERAGED = ("mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa")


def window_average(times_s: Sequence[float], readings: Sequence[Sequence[StationReading]], names: Sequence[str],
                   from_s: float) -> dict:
    """Mean and unsteadiness (+-: half the range) of each station quantity over the samples at or after from_s.

    readings[k][i] is station i at times_s[k]. Returns {"from_s", "to_s", "samples", "stations": {name:
    {quantity: {"mean": ., "plus_minus": .}}}}.
    """
    t = np.asarray(times_s, dtype=float)
    pick = [k for k in range(t.size) if t[k] >= from_s] or ([t.size - 1] if t.size else [])
    out: dict = {"from_s": float(t[pick[0]]) if pick else None, "to_s": float(t[pick[-1]]) if pick else None,
                 "samples": len(pick), "stations": {}}
    for i, name in enumerate(names):
        entry = {}
        for q in AVERAGED:
            vals = np.array([getattr(readings[k][i], q) for k in pick], dtype=float)
            vals = vals[np.isfinite(vals)]
            if vals.size:
                entry[q] = {"mean": float(np.mean(vals)), "plus_minus": float(0.5 * np.ptp(vals))}
            else:
                entry[q] = {"mean": None, "plus_minus": None}
        out["stations"][name] = entry
    return out
