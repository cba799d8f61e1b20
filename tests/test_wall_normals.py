"""Wall orientation from the mask, and who takes back gas that crosses a staircase."""
from __future__ import annotations

import math

import numpy as np
import pytest

from shockslate.solver.domain import Domain
from shockslate.solver.kinds import CellKind
from shockslate.solver.raster import rasterise
from shockslate.solver.shapes import Polygon, Rectangle, Sketch
from shockslate.solver.wall_normals import wall_normals


def _padded(mask):
    return np.pad(mask, 2, constant_values=CellKind.WALL)


def _boundary(kind):
    fluid = kind == CellKind.FLUID
    near = np.zeros_like(fluid)
    near[:, :-1] |= fluid[:, 1:]
    near[:, 1:] |= fluid[:, :-1]
    near[:-1, :] |= fluid[1:, :]
    near[1:, :] |= fluid[:-1, :]
    return (kind == CellKind.WALL) & near


@pytest.mark.parametrize("slope_deg", [10.0, 20.0, 35.0])
def test_sloped_staircase_gets_the_drawn_orientation(slope_deg):
    # exact geometry: the drawn wall's normal is at slope + 90 degrees (no source needed)
    dom = Domain(0.0, 1.0, 0.0, 0.6, 200)
    t = math.tan(math.radians(slope_deg))
    mask = rasterise(Sketch((Polygon(((-1.0, 0.2 - t), (2.0, 0.2 + 2.0 * t), (2.0, 3.0), (-1.0, 3.0)), "wall"),)), dom)
    kind = _padded(mask)
    nx, ny = wall_normals(kind, 2)
    edge = _boundary(kind)
    edge[:, :30] = edge[:, -30:] = False  # away from where the wall leaves the domain
    edge[:10, :] = edge[-10:, :] = False
    angles = np.degrees(np.arctan2(ny[edge], nx[edge])) % 180.0
    assert np.all(np.abs(angles - (slope_deg + 90.0)) < 3.0), angles


def test_straight_grid_walls_are_exact_axes():
    dom = Domain(0.0, 1.0, 0.0, 0.5, 100)
    mask = rasterise(Sketch((Rectangle((-1.0, 0.3), (2.0, 1.0), "wall"),)), dom)
    kind = _padded(mask)
    nx, ny = wall_normals(kind, 2)
    edge = _boundary(kind)
    edge[:2, :] = edge[-2:, :] = edge[:, :2] = edge[:, -2:] = False  # the ghost bands have their own normals
    assert edge.sum() == 100
    assert np.all(nx[edge] == 0.0) and np.all(np.abs(ny[edge]) == 1.0)
    assert np.all(nx[kind != CellKind.WALL] == 0.0) and np.all(ny[kind != CellKind.WALL] == 0.0)


def test_a_single_row_of_cells_has_orientations_too():
    # a 1D shock tube is one row of cells; the orientation estimate must not need two
    mask = np.zeros((1, 40), np.uint8)
    mask[0, 30:] = CellKind.WALL
    nx, ny = wall_normals(_padded(mask), 2)
    assert nx.shape == (5, 44) and np.all(np.isfinite(nx)) and np.all(np.isfinite(ny))
