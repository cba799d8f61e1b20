"""The symmetry axis of an axisymmetric domain (solver/kernels.py update_stage, r-weighted faces and the p / r source).

Sources:
  [N]  NACA Report 1135 (1953), Equations, tables and charts for compressible flow: normal-shock pressure and
       density ratios (eqs. 93 and 94 as numbered there, equation numbers from memory) and Rayleigh's pitot
       formula (eq. 100): p02 / p1 = 12.061 at Mach 3, gamma = 1.4.
  [A]  J. D. Anderson, Modern Compressible Flow, 3rd ed., sec. 7.2: a normal shock moving at Ms into gas at rest
       is the stationary shock seen from a frame moving with it; the gas behind it follows at
       u2 = a1 * 2 / (gamma + 1) * (Ms - 1 / Ms).
  [T]  E. F. Toro, Riemann Solvers and Numerical Methods for Fluid Dynamics, 3rd ed. (2009), sec. 17.2: the
       r-weighted finite-volume form, whose p / r source equals the pressure times the difference of the two radial
       face areas, so a uniform state is kept exactly.

What was measured while looking for the low stagnation pressure of a sphere (Mach 3, nose domain of this module,
HLLC with the shock switch, van Leer, 6 flow times; `python` on a copy of `_sphere` below):
  - the entropy p / rho^gamma behind the captured bow shock is 0.45 to 0.5 % above the normal-shock value [N] in
    the rows next to the axis of the sphere at 40 cells per radius, and the same 0.45 % on the centre line of the
    planar cylinder of tests/test_shock_switch.py at 15 cells per radius: both have about 10 cells between shock and
    body. The excess is made inside the captured shock and is the same in rows 0 to 8, so it is not an axis defect
    but the shock-capturing error of a thin shock layer (the sphere's stand-off is about a third of the
    cylinder's, so it needs about three times the cells per radius for the same reading);
  - plain HLL reads the same as HLLC with the switch (0.9840 against 0.9835 at 40 cells per radius), and a body
    with cut cells the same as the staircase (0.9858 and 0.9915 at 40 and 60 cells per radius), so neither the
    flux nor the wall treatment at the nose sets the shortfall;
  - the limiter does: 0.9934 with minmod, 0.9835 with van Leer, 0.9815 with MC at 40 cells per radius (the
    default limiter since, van Leer with minmod at shocks, 0.9915; with those marks on standing shocks only, as
    now, 0.9904 to 0.9908: tests/test_blunt_bodies.py);
  - a uniform stream along the axis and a normal shock running along it in a pipe stay exactly one-dimensional
    (the two tests below), which is what the r-weighted form [T] promises.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from shockslate.solver.conditions import Conditions, Stream
from shockslate.solver.domain import Domain
from shockslate.solver.gas import AIR
from shockslate.solver.geometry import wall_geometry
from shockslate.solver.kinds import CellKind
from shockslate.solver.raster import rasterise
from shockslate.solver.shapes import Circle, Sketch
from shockslate.solver.simulation import Edges, Setup, Simulation

G = 1.4
P1, T1 = 1.0e5, 300.0


def _pitot(m: float) -> float:
    """[N] eq. 100, Rayleigh's pitot formula: p02 / p1 for a supersonic stream."""
    return ((G + 1) ** 2 * m * m / (4 * G * m * m - 2 * (G - 1))) ** (G / (G - 1)) * (1 - G + 2 * G * m * m) / (G + 1)


def test_a_uniform_stream_along_the_axis_stays_uniform():
    # [T]: the p / r source balances the radial face areas exactly, so nothing starts to move towards or away from
    # the axis; measured: |v| below 1e-12 of the sound speed after 60 steps.
    a1 = AIR.sound_speed_m_s(T1)
    dom = Domain(0.0, 0.1, 0.0, 0.05, 40)
    edges = Edges(left="stream", right="open", bottom="axis", top="open")
    sim = Simulation(Setup(dom, mode="axisymmetric", edges=edges,
                           conditions=Conditions(stream=Stream(mach=2.0, p_pa=P1, t_k=T1))))
    rho1 = AIR.density_kg_m3(P1, T1)
    sim.set_primitive(rho1, 2.0 * a1, 0.0, P1)
    sim.advance(60)
    r, u, v, p = sim.primitive()
    assert np.max(np.abs(v)) < 1e-10 * a1
    assert np.max(np.abs(p / P1 - 1.0)) < 1e-12
    assert np.max(np.abs(r / rho1 - 1.0)) < 1e-12
    assert np.max(np.abs(u / (2.0 * a1) - 1.0)) < 1e-12


def test_a_normal_shock_running_along_the_axis_keeps_the_rankine_hugoniot_jump_in_every_row():
    ms = 3.0
    a1 = AIR.sound_speed_m_s(T1)
    rho1 = AIR.density_kg_m3(P1, T1)
    p2 = P1 * (2 * G * ms * ms - (G - 1)) / (G + 1)  # [N] eq. 93
    rho2 = rho1 * (G + 1) * ms * ms / ((G - 1) * ms * ms + 2)  # [N] eq. 94
    u2 = a1 * 2 / (G + 1) * (ms - 1 / ms)  # [A] sec. 7.2
    assert p2 / P1 == pytest.approx(10.333, abs=1e-3) and rho2 / rho1 == pytest.approx(3.857, abs=1e-3)
    # a pipe of radius 25 mm along the axis, closed at the right; the gas behind the shock leaves through the open
    # left edge supersonically (u2 / a2 = 1.36), so the exact solution is the shock alone
    dom = Domain(0.0, 0.4, 0.0, 0.025, 160)
    sim = Simulation(Setup(dom, mode="axisymmetric", edges=Edges(left="open", right="wall", bottom="axis", top="wall")))
    x = dom.x_centres_m()[None, :] * np.ones((dom.ny, 1))
    behind = x < 0.1
    sim.set_primitive(np.where(behind, rho2, rho1), np.where(behind, u2, 0.0), 0.0, np.where(behind, p2, P1))
    t_end = 0.15 / (ms * a1)
    sim.run_until(t_end)
    r, u, v, p = sim.primitive()
    x_shock = 0.1 + ms * a1 * t_end
    # every row is the same row: the axis and the p / r source leave the flow one-dimensional
    assert np.max(np.abs(p - p[:1])) < 1e-9 * p2
    assert np.max(np.abs(r - r[:1])) < 1e-9 * rho2
    assert np.max(np.abs(v)) < 1e-9 * a1
    # the jump in each row: the states behind the shock are [N]'s, the shock where [A] puts it. The first steps
    # from the sharp initial jump leave the known start-up errors behind (measured: a 2 % pressure dip near
    # x = 0.13 m running left, and a 2 % density dip carried with the gas near x = 0.21 m), so pressure and velocity
    # are compared between them and the shock, and density to 3 %. With minmod marks on every shock (the default
    # limiter before its marks were kept to slow shocks) the pressure dip's tail was wider: 0.105 % at x = 0.16 m,
    # 0.087 % a cell further, so the window starts there.
    xc = dom.x_centres_m()
    behind_shock = (xc > 0.165) & (xc < x_shock - 0.01)
    for j in range(dom.ny):
        assert np.max(np.abs(p[j, behind_shock] / p2 - 1)) < 1e-3
        assert np.max(np.abs(u[j, behind_shock] / u2 - 1)) < 1e-3
        assert np.max(np.abs(r[j, behind_shock] / rho2 - 1)) < 3e-2
        assert np.max(np.abs(p[j, xc > x_shock + 0.02] / P1 - 1)) < 1e-12
        i = np.nonzero(p[j] < 0.5 * (P1 + p2))[0]
        i = i[xc[i] > 0.12][0]
        assert abs(xc[i] - x_shock) < 2.0 * dom.dx_m


def _sphere(cells_per_radius: int, cut: bool, flow_times: tuple[float, ...]) -> np.ndarray:
    """Max gas pressure / pitot pressure [N] of a sphere of radius 30 mm at Mach 3, at the given flow times.

    The domain holds the nose only (the shock layer and the sonic line near 45 degrees); its outflow edges are
    supersonic.
    """
    m, radius = 3.0, 0.03
    nx = round(2.5 * cells_per_radius)
    dom = Domain(0.095, 0.17, 0.0, 0.05, nx)
    sketch = Sketch((Circle((0.14, 0.0), radius, "wall"),))
    geo = wall_geometry(sketch, dom) if cut else None
    mask = geo.mask if cut else rasterise(sketch, dom)
    edges = Edges(left="stream", right="open", bottom="axis", top="open")
    sim = Simulation(Setup(dom, mode="axisymmetric", edges=edges,
                           conditions=Conditions(stream=Stream(mach=m, p_pa=P1, t_k=T1))), mask, geometry=geo)
    a1 = AIR.sound_speed_m_s(T1)
    sim.set_primitive(AIR.density_kg_m3(P1, T1), m * a1, 0.0, P1)
    gas = sim.mask == CellKind.FLUID
    t_flow = (dom.x_max_m - dom.x_min_m) / (m * a1)
    out = []
    for k in flow_times:
        sim.run_until(k * t_flow)
        out.append(np.max(np.where(gas, sim.primitive()[3], 0.0)) / (_pitot(m) * P1))
    return np.array(out)


@pytest.mark.parametrize("cut", [False, True], ids=["staircase", "cut_cells"])
def test_sphere_at_mach_3_reads_the_pitot_pressure_and_is_steady(cut):
    assert _pitot(3.0) == pytest.approx(12.061, abs=1e-3)  # [N] eq. 100, its tabulated value
    stag = _sphere(60, cut, (4.0, 5.0, 6.0, 7.0))
    # Measured at 60 cells per radius: 0.9920 / 0.9919 (staircase), 0.9915 / 0.9916 (cut cells) from 3.5 to
    # 12 flow times. At 40 cells per radius 0.9835 and 0.9858, steady as well: see the module docstring. With the
    # default limiter now (minmod on standing shocks), at 4 to 7 flow times: 0.9923 to 0.9928 (staircase),
    # 0.9922 (cut cells).
    assert np.ptp(stag) < 0.003  # steady to 0.3 %
    assert stag.mean() == pytest.approx(1.0, abs=0.01)  # within 1 % of [N]


def test_the_sphere_comes_closer_to_the_pitot_pressure_as_the_grid_is_refined():
    # the shortfall is the shock-capturing error of the thin shock layer (module docstring): it falls with the cells
    # per radius. Measured with van Leer: 1.65 % at 40, 0.8 % at 60 cells per radius; with the default limiter
    # (van Leer, minmod at shocks) 0.853 % at 40, 0.682 % at 60 (ratio 0.80) and 0.37 % at 80 (tests/test_blunt_bodies.py);
    # with its marks on standing shocks only, as now, 0.955 % at 40 and 0.725 % at 60 (ratio 0.76).
    coarse = _sphere(40, False, (6.0,))[0]
    fine = _sphere(60, False, (6.0,))[0]
    assert 1.0 - fine < 0.9 * (1.0 - coarse)
    assert math.isfinite(coarse) and coarse < 1.0
