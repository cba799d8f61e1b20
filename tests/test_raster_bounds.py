"""Bounded work for shapes that reach far outside the domain (issue: one ordinary-looking message cost gigabytes).

A path piece is clipped to the sampled box grown by its half-width before it is cut and painted (Liang and Barsky
1984); the painted cells must be exactly those within the half-width of the whole, unclipped piece (checked here
against the point-to-segment distance, computed directly), and the work must not grow with the piece's length.
"""
from __future__ import annotations

import tracemalloc

import numpy as np

from shockslate.solver.domain import Domain
from shockslate.solver.kinds import CellKind
from shockslate.solver.raster import path_half_width_m, rasterise
from shockslate.solver.shapes import Segment, Sketch, Stroke


def _within(domain: Domain, a, b, half: float) -> np.ndarray:
    """Cells whose centre lies within `half` of the segment a-b: the textbook point-to-segment distance."""
    x = domain.x_centres_m()[None, :]
    y = domain.y_centres_m()[:, None]
    ax, ay = a
    ux, uy = b[0] - ax, b[1] - ay
    t = np.clip(((x - ax) * ux + (y - ay) * uy) / (ux * ux + uy * uy), 0.0, 1.0)
    return (x - ax - t * ux) ** 2 + (y - ay - t * uy) ** 2 <= half * half


def test_a_segment_a_thousand_kilometres_long_paints_exactly_its_part_in_bounded_memory():
    domain = Domain(0.0, 0.4, 0.0, 0.1, 400)
    a, b, width = (-1e6, -1e6), (0.2, 0.05), 0.01
    tracemalloc.start()
    mask = rasterise(Sketch((Segment(a, b, width, "wall"),)), domain)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 50e6, f"{peak / 1e6:.0f} MB"
    expected = _within(domain, a, b, path_half_width_m(width, domain.dx_m))
    assert expected.sum() > 100
    np.testing.assert_array_equal(mask == CellKind.WALL, expected)


def test_clipping_keeps_strokes_that_cross_and_leave_the_domain_the_same():
    domain = Domain(0.0, 0.4, 0.0, 0.1, 200)
    points = [(-3.0, 0.02), (0.1, 0.05), (0.2, -5.0), (0.3, 0.08), (50.0, 0.09)]
    mask = rasterise(Sketch((Stroke(points, 0.006, "wall"),)), domain)
    half = path_half_width_m(0.006, domain.dx_m)
    expected = np.zeros(domain.shape, bool)
    for a, b in zip(points[:-1], points[1:]):
        expected |= _within(domain, a, b, half)
    np.testing.assert_array_equal(mask == CellKind.WALL, expected)


def test_a_segment_that_misses_the_domain_paints_nothing():
    domain = Domain(0.0, 0.4, 0.0, 0.1, 100)
    mask = rasterise(Sketch((Segment((-1e6, 5.0), (1e6, 5.0), 0.01, "wall"),)), domain)
    assert (mask == CellKind.FLUID).all()
