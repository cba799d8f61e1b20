"""The shock-stable HLLC: HLL on the faces across strong shocks (solver/kernels.py shock_switch).

Sources:
  [Q]  J. J. Quirk, Int. J. Numer. Meth. Fluids 18 (1994) 555-574: fluxes that resolve contacts exactly
       (HLLC, Roe) let a strong shock front grow perturbations along itself (carbuncle, odd-even
       decoupling); HLL does not.
  [NK] H. Nishikawa, K. Kitamura, J. Comput. Phys. 227 (2008) 2560-2581: dissipative flux across the
       shock front's tangential direction, contact-resolving flux elsewhere.
  [R]  Lord Rayleigh's pitot formula, NACA Report 1135 (1953) eq. 100: stagnation pressure behind a
       normal shock, p02 / p1 = 12.061 at Mach 3, gamma = 1.4 (computed below from the formula).
  [NS] NACA Report 1135 (1953), normal-shock relations: at Mach 2, gamma = 1.4, rho2 / rho1 = 2.6667 and
       p2 / p1 = 4.5 (eqs. 93-94; equation numbers from memory).
  [AR] M. Arora, P. L. Roe, J. Comput. Phys. 130 (1997) 25-40: shocks that move slowly through the grid leave
       post-shock oscillations that high-resolution limiters do not damp (from memory).
  [T]  E. F. Toro, Riemann Solvers and Numerical Methods for Fluid Dynamics, 3rd ed. (2009), sec. 4.3.3, Test 5:
       its left shock runs at 0.79 against the grid, 0.061 of the sound speed behind it (solver/riemann.py).
"""
from __future__ import annotations

import numpy as np
import pytest

from shockslate.solver import kernels
from shockslate.solver.conditions import Conditions, Stream
from shockslate.solver.domain import Domain
from shockslate.solver.gas import AIR
from shockslate.solver.kinds import CellKind
from shockslate.solver.numerics import Numerics
from shockslate.solver.raster import rasterise
from shockslate.solver.shapes import Circle, Sketch
from shockslate.solver.simulation import Edges, Setup, Simulation


def _switch(sim):
    kernels.shock_switch(sim.W, sim.kind, sim._hll_x, sim._hll_y, kernels.SHOCK_PRESSURE_RATIO)
    return sim._hll_x[2:-2, 2:-2].copy(), sim._hll_y[2:-2, 2:-2].copy()


def test_a_shock_along_x_switches_only_the_faces_across_its_front():
    # [NK]: the faces parallel to the shock normal (here the y-faces) take HLL; the others keep HLLC.
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.5, 40), edges=Edges("wall", "wall", "wall", "wall")))
    x = sim.domain.x_centres_m()[None, :]
    sim.set_primitive(np.where(x < 0.5, 4.0, 1.0), np.where(x < 0.5, 500.0, 0.0), 0.0, np.where(x < 0.5, 5e5, 1e5))
    hx, hy = _switch(sim)
    assert not hx.any()
    cols = np.nonzero(hy.any(axis=0))[0]
    assert cols.size and cols.min() >= 17 and cols.max() <= 22  # a few cells either side of x = 0.5
    assert hy[:, cols].all()


def _mach_2_shock(sim, frame_m_s: float = 0.0) -> None:
    """A normal shock at x = 0.5 m, Mach 2 air flowing in from the left [NS]: standing, or seen from a frame
    moving at -frame_m_s (both sides' velocity raised by frame_m_s: the shock then runs at frame_m_s)."""
    x = sim.domain.x_centres_m()[None, :]
    u1 = 2.0 * AIR.sound_speed_m_s(1.0e5 / AIR.r_j_kg_k)  # rho1 = 1 kg/m^3, p1 = 1e5 Pa
    sim.set_primitive(np.where(x < 0.5, 1.0, 2.6667), np.where(x < 0.5, u1, u1 / 2.6667) + frame_m_s, 0.0,
                      np.where(x < 0.5, 1.0e5, 4.5e5))


def _both_marks(sim):
    kernels.shock_switch(sim.W, sim.kind, sim._hll_x, sim._hll_y, kernels.SHOCK_PRESSURE_RATIO,
                         kernels.MARK_HLL | kernels.MARK_MINMOD, 1.4)
    return sim._hll_x[2:-2, 2:-2].copy(), sim._hll_y[2:-2, 2:-2].copy()


def test_the_minmod_marks_cover_all_faces_of_shock_cells_and_leave_the_hll_marks_alone():
    # the limiter van_leer_shock_minmod (kernels.MARK_MINMOD): a cell in a standing shock along x has both its x-
    # and y-faces marked for minmod; the HLL bit stays on the y-faces only, as [NK] has it
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.5, 40), edges=Edges("wall", "wall", "wall", "wall")))
    _mach_2_shock(sim)
    hx, hy = _both_marks(sim)
    hll_only = _switch(sim)
    assert np.array_equal(hx & kernels.MARK_HLL, hll_only[0]) and np.array_equal(hy & kernels.MARK_HLL, hll_only[1])
    assert np.array_equal((hx & kernels.MARK_MINMOD) > 0, hll_only[1] > 0)
    assert np.array_equal((hy & kernels.MARK_MINMOD) > 0, hll_only[1] > 0)
    # a limiter alone (plain HLL flux) marks minmod only
    sim2 = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.5, 40), edges=Edges("wall", "wall", "wall", "wall"),
                            numerics=Numerics(flux="hll", limiter="van_leer_shock_minmod")))
    _mach_2_shock(sim2)
    sim2.advance(1)
    assert not ((sim2._hll_x | sim2._hll_y) & kernels.MARK_HLL).any()
    assert (sim2._hll_y & kernels.MARK_MINMOD).any()


@pytest.mark.parametrize("frame_m_s", [150.0, -150.0, 600.0])
def test_without_a_previous_step_shocks_that_lie_across_an_axis_and_barely_move_take_minmod(frame_m_s):
    # [AR]: the ringing comes from shocks that stand or creep through the grid. With no previous step to measure
    # the motion by (a fresh state), only the steady mass balance along the axis counts (kernels._slow_along):
    # the Mach 2 shock [NS] running at 150 m/s (0.31 of the sound speed behind it, 486 m/s) or faster is not
    # slow (kernels.SLOW_SHOCK_SLIDE = 0.1); at 30 m/s (0.06) it is. The HLL marks of [NK] are the same whatever
    # the shock's speed.
    standing = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.5, 40), edges=Edges("wall", "wall", "wall", "wall")))
    _mach_2_shock(standing)
    hx0, hy0 = _both_marks(standing)
    assert (hx0 & kernels.MARK_MINMOD).any()
    for speed, slow in ((frame_m_s, False), (np.copysign(30.0, frame_m_s), True)):
        sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.5, 40), edges=Edges("wall", "wall", "wall", "wall")))
        _mach_2_shock(sim, speed)
        hx, hy = _both_marks(sim)
        assert np.array_equal(hy & kernels.MARK_HLL, hy0 & kernels.MARK_HLL)
        assert np.array_equal(hx & kernels.MARK_MINMOD, hx0 & kernels.MARK_MINMOD if slow else 0 * hx0), speed


@pytest.mark.parametrize("frame_m_s, slow", [(0.0, True), (5.0, True), (-5.0, True), (30.0, False),
                                              (-30.0, False), (150.0, False)])
def test_a_running_shock_is_told_by_how_far_its_density_moved_in_the_last_step(frame_m_s, slow):
    # [AR] again, now measured as the scheme steps: the Mach 2 shock [NS] creeping at 30 m/s (0.062 of the sound
    # speed behind it, like the left shock of [T]'s Test 5 at 0.061) is not slow (kernels.SLOW_SHOCK_FRACTION =
    # 0.04); at 5 m/s (0.010) or standing it is (at 10 m/s, measured, the marks come and go with where the shock
    # lies in its cell). The marks read are those of the last step, taken with the
    # density change since the step before.
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.5, 40), edges=Edges("open", "open", "wall", "wall")))
    _mach_2_shock(sim, frame_m_s)
    # the sharp start relaxes into the scheme's own shock profile in its first dozen steps (measured: no minmod
    # marks then, standing or not); the last eight of 40 steps are read
    sim.advance(32)
    for _ in range(8):
        sim.advance(1)
        minmod = (sim._hll_x & kernels.MARK_MINMOD) > 0
        cols = np.nonzero(minmod.any(axis=0))[0]
        if slow:
            assert cols.size and cols.min() >= 17 + 2 and cols.max() <= 24 + 2, cols  # around x = 0.5 (2 ghosts)
        else:
            assert not minmod.any(), cols
    if slow:
        assert abs(sim.time_s * frame_m_s) < sim.domain.dx_m  # it crept less than a cell meanwhile
    assert (sim._hll_y & kernels.MARK_HLL).any()  # the HLL marks whatever the speed


def test_expansions_and_weak_jumps_keep_hllc():
    sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.5, 40), edges=Edges("wall", "wall", "wall", "wall")))
    x = sim.domain.x_centres_m()[None, :]
    # gas moving apart: an expansion, however strong, is not a shock
    sim.set_primitive(1.0, np.where(x < 0.5, -300.0, 300.0), 0.0, np.where(x < 0.5, 5e5, 1e5))
    assert not any(a.any() for a in _switch(sim))
    # a compression below the threshold ratio
    sim.set_primitive(1.0, np.where(x < 0.5, 100.0, 0.0), 0.0, np.where(x < 0.5, 1.3e5, 1e5))
    assert not any(a.any() for a in _switch(sim))


@pytest.mark.parametrize("flux", ["hll", "rusanov"])
def test_other_fluxes_are_not_switched(flux):
    # with the default limiter the cells of a standing shock get the minmod mark only; with plain van Leer no mark
    for limiter, marks in (("van_leer_shock_minmod", kernels.MARK_MINMOD), ("van_leer", 0)):
        # open ends hold the shock where it stands (ambient ones would set it running and its marks would go)
        sim = Simulation(Setup(Domain(0.0, 1.0, 0.0, 0.5, 20), edges=Edges("open", "open", "wall", "wall"),
                               numerics=Numerics(flux=flux, limiter=limiter)))
        _mach_2_shock(sim)
        sim.advance(50)  # past the start, when the sharp jump still moves (measured: rusanov's marks from step 26)
        assert not (sim._hll_x & kernels.MARK_HLL).any() and not (sim._hll_y & kernels.MARK_HLL).any()
        assert set(np.unique(sim._hll_x)) | set(np.unique(sim._hll_y)) == {0, marks}


def test_bow_shock_on_a_cylinder_at_mach_3_is_steady_near_the_pitot_pressure():
    # [Q]: plain HLLC on this grid reads a stagnation pressure that wanders by about 4.5 % (measured: 0.9769 to
    # 1.02 of the pitot value over 4 flow times, 100 cells across); with the switch it stands still.
    M, p1, t1, g = 3.0, 1.0e5, 300.0, 1.4
    # [R] Rayleigh pitot formula
    pitot = p1 * ((g + 1) ** 2 * M * M / (4 * g * M * M - 2 * (g - 1))) ** (g / (g - 1)) * (1 - g + 2 * g * M * M) / (g + 1)
    assert pitot / p1 == pytest.approx(12.06, abs=0.01)
    dom = Domain(0.0, 0.2, -0.1, 0.1, 100)
    mask = rasterise(Sketch((Circle((0.14, 0.0), 0.03, "wall"),)), dom)
    sim = Simulation(Setup(dom, edges=Edges(left="stream", right="open", bottom="open", top="open"),
                           conditions=Conditions(stream=Stream(mach=M, p_pa=p1, t_k=t1))), mask)
    sim.set_primitive(AIR.density_kg_m3(p1, t1), M * AIR.sound_speed_m_s(t1), 0.0, p1)
    gas = sim.mask == CellKind.FLUID
    t_flow = 0.2 / (M * AIR.sound_speed_m_s(t1))
    stag = []
    for k in range(6):
        sim.run_until(t_flow * (6.0 + 0.4 * k))
        stag.append(np.max(np.where(gas, sim.primitive()[3], 0.0)) / pitot)
    stag = np.array(stag)
    # Measured (15 cells per radius): 1.0038 to 0.9936 between 2 and 6 flow times, then 0.9941 to 0.9940.
    # Limits measured alongside, not met by this test: at 24 cells per radius (160 across) 0.9963 +-0.15 % over
    # 5 to 8 flow times; at 40 cells per radius (266 across) the largest pressure wanders between 0.998 and 1.018
    # over 4 to 8 flow times (its cell hops between rows -4 and +3 of the nose; with plain HLL too, as measured
    # when the switch was added), and on a smaller domain (x 0.07 to 0.17 m, y +-0.06 m) with the staircase (0.998
    # to 1.008 from 6 to 10 of its flow times) as with a cut-cell body (0.997 to 1.004), while the total pressure
    # just behind the shock on the centre line creeps down from 1.01 to 0.996 as the shock settles. With minmod
    # instead of van Leer the same 266-across run holds 0.9963 to 0.9985 over 4 to 8 flow times: the wandering
    # comes with the compressive limiter, not with the flux or the wall. Run on to 30 flow times, the smaller domain
    # never settles with van Leer (0.997 to 1.033, the shock stepping upstream at times: 1.7 % more total pressure
    # behind it at 12.5 flow times), nor with minmod on the faces normal to a marked shock only (0.9962 to 0.9969
    # from 8.5 to 12.5 flow times, then the same step to 1.021), so that variant was not kept.
    assert np.ptp(stag) < 0.003  # steady to 0.3 %
    assert stag.mean() == pytest.approx(1.0, abs=0.01)  # within 1 % of [R]


def test_rows_of_gas_only_give_the_same_marks_without_reading_kinds():
    # kernels.switch_rows_plain lets shock_switch skip the kinds in rows whose stencils hold gas only; the marks
    # must be those of the general path, bit for bit, beside walls and away from them (common practice, no source:
    # an equivalence of two code paths)
    dom = Domain(0.0, 1.0, 0.0, 0.5, 80)
    sim = Simulation(Setup(dom, edges=Edges("wall", "wall", "wall", "wall")),
                     rasterise(Sketch((Circle((0.7, 0.2), 0.06, "wall"),)), dom))
    x, y = dom.x_centres_m()[None, :], dom.y_centres_m()[:, None]
    blast = (x - 0.3) ** 2 + (y - 0.3) ** 2 < 0.1 ** 2
    sim.set_primitive(np.where(blast, 5.0, 1.2), 0.0, 0.0, np.where(blast, 1.0e6, 1.0e5))
    plain = sim._switch_rows_plain
    assert plain[[0, 1, 2, 3, -4, -3, -2, -1]].sum() == 0  # rows beside the box's walls
    circle_rows = np.nonzero((sim.kind[:, 2:-2] == CellKind.WALL).any(axis=1))[0]
    assert circle_rows.size and not plain[circle_rows.min() - 2:circle_rows.max() + 3].any()  # and the circle's
    assert plain.sum() >= 0.4 * plain.size  # the rest take the fast path (22 of 44 rows here)
    for steps in (5, 25):
        sim.advance(steps)
        for marks in (kernels.MARK_HLL, kernels.MARK_HLL | kernels.MARK_MINMOD):
            out = []
            for rows in (None, plain):
                hx, hy = np.zeros_like(sim._hll_x), np.zeros_like(sim._hll_y)
                kernels.shock_switch(sim.W, sim.kind, hx, hy, kernels.SHOCK_PRESSURE_RATIO, marks, 1.4, sim.U0[0],
                                     dom.dx_m / sim.last_dt_s, kernels.SLOW_SHOCK_FRACTION, rows)
                out.append((hx, hy))
            assert (out[0][0] > 0).sum() > 50  # the blast's shock is marked
            assert np.array_equal(out[0][0], out[1][0]) and np.array_equal(out[0][1], out[1][1]), (steps, marks)
