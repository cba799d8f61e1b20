"""Errors the solver raises for the layers above to show to a user."""
from __future__ import annotations


class SolverDiverged(RuntimeError):
    """A non-finite value appeared. The simulation keeps the state of the last good step."""

    def __init__(self, step: int, time_s: float, x_m: float, y_m: float, variable: str, value: float):
        self.step = step
        self.time_s = time_s
        self.x_m = x_m
        self.y_m = y_m
        self.variable = variable
        self.value = value
        super().__init__(
            f"solver diverged at step {step} (t = {time_s:.6g} s): {variable} = {value!r} "
            f"in the cell at x = {x_m:.6g} m, y = {y_m:.6g} m; the last good state is kept. "
            "Try a lower CFL number, first order, or softer conditions."
        )
