"""Errors the solver raises for the layers above to show to a user."""
from __future__ import annotations

from typing import Optional

#: Why a run was stopped as diverged (the `reason` of SolverDiverged).
REASONS = ("non_finite", "wave_speed_jump", "time_step_collapse", "floors")


class SolverDiverged(RuntimeError):
    """The run went bad: a non-finite value, a collapse of the time step, a jump of the largest wave
    speed, or density / pressure floors held in many cells for many steps.

    The simulation has already restored the last state it kept from before the trouble began
    (kept_step, kept_time_s), so a run can go on from there with softer numerics.
    """

    def __init__(self, step: int, time_s: float, x_m: float, y_m: float, variable: str, value: float, *,
                 reason: str = "non_finite", detail: str = "", kept_step: Optional[int] = None,
                 kept_time_s: Optional[float] = None):
        self.step = step
        self.time_s = time_s
        self.x_m = x_m
        self.y_m = y_m
        self.variable = variable
        self.value = value
        self.reason = reason
        self.kept_step = step - 1 if kept_step is None else kept_step
        self.kept_time_s = time_s if kept_time_s is None else kept_time_s
        what = detail or f"{variable} = {value!r}"
        super().__init__(
            f"solver diverged at step {step} (t = {time_s:.6g} s): {what} "
            f"in the cell at x = {x_m:.6g} m, y = {y_m:.6g} m; the state of step {self.kept_step} "
            f"(t = {self.kept_time_s:.6g} s), from before the trouble began, is kept."
        )
