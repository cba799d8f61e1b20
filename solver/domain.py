"""The computational rectangle and its uniform square cells."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MAX_NX, MAX_NY = 4096, 2048


@dataclass(frozen=True)
class Domain:
    """A rectangle in metres cut into nx columns of square cells.

    The cell size is dx = (x_max_m - x_min_m) / nx; ny follows from the height and is rounded
    to the nearest whole number of cells (at least 1), and y_max is adjusted to ny * dx above y_min.
    In axisymmetric mode x is the axis and y the radius, so y_min_m must be 0.
    """

    x_min_m: float
    x_max_m: float
    y_min_m: float
    y_max_m: float
    nx: int

    def __post_init__(self) -> None:
        if not (self.x_max_m > self.x_min_m):
            raise ValueError(f"x_max_m = {self.x_max_m!r} must be greater than x_min_m = {self.x_min_m!r}")
        if not (self.y_max_m > self.y_min_m):
            raise ValueError(f"y_max_m = {self.y_max_m!r} must be greater than y_min_m = {self.y_min_m!r}")
        if not (4 <= int(self.nx) <= MAX_NX):
            raise ValueError(f"nx = {self.nx!r} is outside the allowed range 4 to {MAX_NX}")
        if not (1 <= self.ny <= MAX_NY):
            raise ValueError(f"ny = {self.ny!r} (from the height and nx) is outside the allowed range 1 to {MAX_NY}")

    @property
    def dx_m(self) -> float:
        """Cell size in metres (cells are square)."""
        return (self.x_max_m - self.x_min_m) / int(self.nx)

    @property
    def ny(self) -> int:
        return max(1, int(round((self.y_max_m - self.y_min_m) / self.dx_m)))

    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx), the layout of every field array."""
        return (self.ny, int(self.nx))

    def x_centres_m(self) -> np.ndarray:
        return self.x_min_m + (np.arange(int(self.nx)) + 0.5) * self.dx_m

    def y_centres_m(self) -> np.ndarray:
        return self.y_min_m + (np.arange(self.ny) + 0.5) * self.dx_m

    def cell_index(self, x_m: float, y_m: float) -> tuple[int, int]:
        """(j, i) of the cell holding the point, clamped to the domain."""
        i = int(np.clip(np.floor((x_m - self.x_min_m) / self.dx_m), 0, int(self.nx) - 1))
        j = int(np.clip(np.floor((y_m - self.y_min_m) / self.dx_m), 0, self.ny - 1))
        return j, i

    def with_nx(self, nx: int) -> "Domain":
        """The same rectangle at another resolution."""
        return Domain(self.x_min_m, self.x_max_m, self.y_min_m, self.y_max_m, int(nx))
