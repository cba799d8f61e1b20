"""Derived views against their definitions (common practice, no source)."""
from __future__ import annotations

import numpy as np
import pytest

from shockslate.solver.fields import VIEWS, derived
from shockslate.solver.gas import AIR
from shockslate.solver.kinds import CellKind


def test_views_of_a_solid_body_rotation():
    n, dx = 64, 0.01
    y, x = (np.mgrid[0:n, 0:n] + 0.5) * dx
    omega = 30.0
    u, v = -omega * (y - 0.32), omega * (x - 0.32)
    rho = np.full((n, n), 1.2)
    p = np.full((n, n), 1.0e5)
    mask = np.zeros((n, n), np.uint8)
    mask[0, 0] = CellKind.WALL
    vort = derived("vorticity", AIR, rho, u, v, p, dx, mask)
    assert np.nanmax(np.abs(vort[1:-1, 1:-1] - 2.0 * omega)) < 1e-9  # curl of solid rotation is 2 omega
    assert np.isnan(vort[0, 0])
    t = derived("temperature", AIR, rho, u, v, p, dx, mask)
    assert t[5, 5] == pytest.approx(1.0e5 / (1.2 * AIR.r_j_kg_k))
    m = derived("mach", AIR, rho, u, v, p, dx, mask)
    assert m[5, 5] == pytest.approx(np.hypot(u[5, 5], v[5, 5]) / np.sqrt(1.4 * 1.0e5 / 1.2))
    s = derived("schlieren", AIR, rho, u, v, p, dx, mask)
    assert np.nanmin(s) == 1.0  # uniform density: nothing to see
    assert set(VIEWS) == {"density", "pressure", "temperature", "mach", "speed", "schlieren", "vorticity"}
    with pytest.raises(ValueError, match="view = 'colour'"):
        derived("colour", AIR, rho, u, v, p, dx, mask)
