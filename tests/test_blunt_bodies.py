"""Blunt bodies at Mach 3 with the limiter `van_leer_shock_minmod` (solver/kernels.py shock_switch, MARK_MINMOD).

Sources:
  [N]  NACA Report 1135 (1953), Equations, tables and charts for compressible flow: Rayleigh's pitot formula
       (eq. 100, equation number from memory): p02 / p1 = 12.061 at Mach 3, gamma = 1.4.
  [T]  E. F. Toro, Riemann Solvers and Numerical Methods for Fluid Dynamics, 3rd ed. (2009), sec. 4.3.3: the
       shock-tube problems (Sod's is Test 1) and their exact solution (solver/riemann.py).
  [AR] M. Arora, P. L. Roe, J. Comput. Phys. 130 (1997) 25-40: post-shock oscillations of slowly moving shocks
       (from memory).

What was measured, before the limiter was added (Mach 3, 40 cells per radius, HLLC with the shock switch, scripts
reusing the setups below, largest gas pressure over the pitot value [N] every half flow time):
  - planar cylinder on a domain x 0.07 to 0.17 m, y +-0.06 m (+-2 radii): the bow shock stands at x = 88.4 mm
    from 7 to 12 flow times, then walks upstream (80.9 mm at 20, 76.4 mm at 30 flow times) with van Leer and with
    minmod alike, the same with the right edge at the cylinder's centre (no wake in the domain), and with a cut-cell
    body (from 22 flow times). On a domain +-4 radii high (the one below) it stays at 88.44 mm up to 30 flow times:
    the subsonic layer behind the bow shock reaching the open edges at +-2 radii let the shock walk;
  - on that taller domain the stagnation pressure still rang: 0.996 to 1.017 from 12 to 30 flow times with van
    Leer (HLLC with the switch), 0.998 to 1.013 from 12 to 24 with plain HLL, but 0.9964 to 0.9973 with minmod
    everywhere. So the ringing comes with van Leer's slopes, not with the flux or the wall;
  - minmod only on the faces normal to a shock (a four-cell pressure jump across the face) left the sphere at
    0.9899; minmod on all four faces of the cells the shock switch marks (a jump along either axis) reads 0.9938,
    so the faces along the shock matter too. The limiter kept applies minmod to pressure and normal velocity only
    on those faces (density and tangential velocity keep van Leer, for contacts): sphere 0.9915, cylinder 0.9971
    to 0.9979 from 13 to 20 flow times;
  - the sphere with a cut-cell body reads 0.9870 with the new limiter, 0.9863 with minmod everywhere (van Leer
    0.9858): there the loss is made in the shock on every limiter (total pressure 0.990 just behind it on the
    axis), and stays open;
  - contact width in a shock tube (cells between 10 and 90 % of the density jump at the contact; and the jump over
    the steepest one-cell step, a width that does not jump by whole cells), at 200 and 400 cells, van Leer against
    the new limiter (minmod everywhere in brackets): Sod 5 / 4.69 and 6 / 5.64 against 5 / 4.66 and 7 / 5.68 (7, 9);
    Toro 3: 7 / 5.82 and 7 / 6.83 against 7 / 5.77 and 7 / 6.85 (8, 10); Toro 5: 6 / 5.76 and 7 / 6.76 against
    6 / 5.91 and 7 / 6.85 (9, 11).
  - that limiter also smeared every shock the shock tubes of tests/test_simulation.py run: the L1 density error
    against [T]'s exact solution at 100 / 200 / 400 cells rose over van Leer's by 7 % (Sod, Toro 1), 3-6 %
    (Toro 3, 4) and 18-19 % (Toro 5). So the minmod marks are now kept to slow shocks [AR] (kernels.shock_switch,
    SLOW_SHOCK_FRACTION 0.1 of the sound speed): standing ones such as a bow shock stay marked, running ones keep
    van Leer. Measured with that: L1 over van Leer's +1.1 to +1.2 % (Sod, Toro 1: the first steps, when every
    shock still stands), 0.0 % (Toro 2, 3, 4), +9.6 / +10.6 / +12.1 % (Toro 5, whose left shock creeps at 0.08 of
    the sound speed, so it is a slow shock); contact cells between 10 and 90 % now the same as van Leer's in all
    six cases (Sod at 400 cells 6 again), the steepest-step width +0.2 % (Sod), 0.0 % (Toro 3), +2.4 % (Toro 5).
    Blunt bodies with it: staircase sphere at 40 cells per radius 0.9906, 0.9908, 0.9904, 0.9904 at 4 to 7 flow
    times; cut-cell sphere at 40 0.9857 (was 0.9870); the drawn sphere at 80 from its start 0.9937 to 0.9949;
    the cylinder from its start 0.9971 to 0.9990. A fraction of 0.05 or 0.02 left the staircase sphere ringing
    (0.977 to 0.986), and minmod only on the faces along a shock (as the HLL marks) 0.981 to 0.988.
  - Toro 5 still read +9.6 / +10.6 / +12.1 % and a contact 2.4 % wider: its left shock creeps at 0.061 of the
    sound speed behind it. The speed along the axis from the steady mass balance holds the gas sliding along an
    oblique shock, and cut below 0.1 it took the marks off the bow shock's flanks (above). So the two are now
    apart (kernels._slow_along): the steady balance along the axis under 0.1 (SLOW_SHOCK_SLIDE) says the shock
    lies nearly across the axis, and the density change of its five cells since the previous step says how fast
    it moves, under 0.04 (SLOW_SHOCK_FRACTION), with the changes' absolute sum under 0.08 (SLOW_SHOCK_CHURN) so
    that the waves of a shock-tube start (a shock and a contact in one stencil, changes of either sign) do not
    read as one slow front. Measured (/tmp scripts reusing this module's setups):
    - the six shock tubes at 200 and 400 cells: L1 error and contact widths exactly van Leer's (Toro 5 5.761
      and 6.758, Sod 4.688 and 5.642, Toro 3 5.817 and 6.834), so the bounds below are now 0.5 %;
    - staircase sphere at 40 cells per radius 0.9906, 0.9908, 0.9904, 0.9904 (as before); cut-cell sphere
      0.9848, 0.9856, 0.9857, 0.9857; cylinder from its start 0.9990, 0.9972, 0.9975, 0.9971, 0.9977, 0.9982;
      the cylinder of tests/test_shock_switch.py 0.9919 to 0.9923 from 6 to 8 flow times;
    - tried and not kept: the steady balance along the shock's normal instead of the axis marked the whole bow
      shock and left the cylinder of tests/test_shock_switch.py ringing (0.987 to 1.011); over seven cells
      instead of five the sphere read van Leer's 0.9835 (the balance there holds the gas turning sideways behind
      the shock, which the measured change does not); the measured motion without the slide test let the
      cut-cell sphere started from a uniform stream (a near vacuum behind it in the first steps) diverge at step
      82 at some fractions (0.04 of 0.02 to 0.15), while with it every fraction ran; the absolute sum alone under
      0.04 left the cylinder from its start at 1.005 to 0.9967.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from shockslate.solver.conditions import Conditions, Stream
from shockslate.solver.domain import Domain
from shockslate.solver.gas import AIR, Gas
from shockslate.solver.geometry import wall_geometry
from shockslate.solver.kinds import CellKind
from shockslate.solver.numerics import Numerics
from shockslate.solver.raster import rasterise
from shockslate.solver.riemann import exact_solution, star_state, wave_speeds
from shockslate.solver.shapes import Circle, Sketch
from shockslate.solver.simulation import Edges, Setup, Simulation

from test_simulation import RIEMANN_CASES

G, M = 1.4, 3.0
P1, T1 = 1.0e5, 300.0
RADIUS_M = 0.03
LIMITER = "van_leer_shock_minmod"
#: a starting state of the cylinder below (12 flow times from a uniform stream), made by `python
#: tests/test_blunt_bodies.py`; not a check value, only where the run starts, so the test needs a few flow times
CYLINDER_START = Path(__file__).parent / "data" / "cylinder_mach3_40_cells_per_radius_start.npz"
#: the same for the cut-cell sphere at 80 cells per radius (4 flow times), made by the same command
SPHERE_START = Path(__file__).parent / "data" / "sphere_cut_cells_mach3_80_cells_per_radius_start.npz"


def _pitot_pa(m: float = M) -> float:
    """[N] eq. 100, Rayleigh's pitot formula."""
    return P1 * ((G + 1) ** 2 * m * m / (4 * G * m * m - 2 * (G - 1))) ** (G / (G - 1)) * (1 - G + 2 * G * m * m) / (G + 1)


def _body(dom: Domain, mode: str, bottom: str, cut: bool, limiter: str | None = None) -> Simulation:
    """The sphere or cylinder in a Mach 3 stream; cut: a cut-cell body as the product builds a drawn one
    (solver/cut_cells.py), else the staircase; limiter None: the default numerics."""
    sketch = Sketch((Circle((0.14, 0.0), RADIUS_M, "wall"),))
    geo = wall_geometry(sketch, dom) if cut else None
    mask = geo.mask if cut else rasterise(sketch, dom)
    edges = Edges(left="stream", right="open", bottom=bottom, top="open")
    numerics = Numerics() if limiter is None else Numerics(limiter=limiter)
    return Simulation(Setup(dom, mode=mode, edges=edges, numerics=numerics,
                            conditions=Conditions(stream=Stream(mach=M, p_pa=P1, t_k=T1))), mask, geometry=geo)


def _stagnation(sim: Simulation) -> float:
    """Largest gas pressure over the pitot pressure [N]."""
    gas = sim.mask == CellKind.FLUID
    return float(np.max(np.where(gas, sim.primitive()[3], 0.0))) / _pitot_pa()


def _cylinder_domain() -> Domain:
    """x 0.07 to 0.14 m (the nose and the shoulders; the flow leaves supersonic), y +-4 radii, 40 cells per radius."""
    return Domain(0.07, 0.14, -0.12, 0.12, round(0.07 / RADIUS_M * 40))


def _flow_time_s(dom: Domain) -> float:
    return (dom.x_max_m - dom.x_min_m) / (M * AIR.sound_speed_m_s(T1))


def _shock_x_m(sim: Simulation) -> float:
    """Where the bow shock crosses the centre line: the first cell whose pressure is above the mean of the two sides."""
    p = sim.primitive()[3]
    j = int(np.argmin(np.abs(sim.domain.y_centres_m())))
    p2 = P1 * (2 * G * M * M - (G - 1)) / (G + 1)  # [N] eq. 93, normal-shock pressure ratio
    return float(sim.domain.x_centres_m()[np.nonzero(p[j] > 0.5 * (P1 + p2))[0][0]])


def _sphere_domain(cells_per_radius: int) -> Domain:
    """The nose of the sphere of tests/test_axis.py: x 0.095 to 0.17 m, r 0 to 0.05 m (axisymmetric)."""
    return Domain(0.095, 0.17, 0.0, 0.05, round(2.5 * cells_per_radius))


def _from_start(sim: Simulation, path: Path) -> Simulation:
    """sim with the kept starting state of `path` (tests/data), checked to be of its grid."""
    start = np.load(path)
    assert int(start["nx"]) == sim.domain.nx
    sim.set_primitive(*(start[k].astype(np.float64) for k in ("rho", "u", "v", "p")))
    return sim


def _stagnation_every_half_flow_time(sim: Simulation, halves: int) -> list[float]:
    out = []
    for k in range(1, halves + 1):
        sim.run_until(0.5 * k * _flow_time_s(sim.domain))
        out.append(_stagnation(sim))
    return out


def write_sphere_start() -> None:
    """Run the cut-cell sphere at 80 cells per radius 4 flow times from a uniform stream; keep its state (float32)."""
    dom = _sphere_domain(80)
    sim = _body(dom, "axisymmetric", "axis", True)
    sim.set_primitive(AIR.density_kg_m3(P1, T1), M * AIR.sound_speed_m_s(T1), 0.0, P1)
    sim.run_until(4.0 * _flow_time_s(dom))
    r, u, v, p = (a.astype(np.float32) for a in sim.primitive())
    np.savez_compressed(SPHERE_START, rho=r, u=u, v=v, p=p, nx=dom.nx, flow_times=4.0)


def write_cylinder_start() -> None:
    """Run the cylinder 12 flow times from a uniform stream and keep its state (float32) as the test's start."""
    dom = _cylinder_domain()
    sim = _body(dom, "planar", "open", False, LIMITER)
    sim.set_primitive(AIR.density_kg_m3(P1, T1), M * AIR.sound_speed_m_s(T1), 0.0, P1)
    sim.run_until(12.0 * _flow_time_s(dom))
    r, u, v, p = (a.astype(np.float32) for a in sim.primitive())
    np.savez_compressed(CYLINDER_START, rho=r, u=u, v=v, p=p, nx=dom.nx, flow_times=12.0)


def test_sphere_at_40_cells_per_radius_reads_the_pitot_pressure():
    # the sphere of tests/test_axis.py (nose domain, axisymmetric), where van Leer reads 0.9835 at this grid.
    # Measured with the new limiter: 0.9904 to 0.9908 at 4 to 7 flow times (0.9915 with minmod marks on every
    # shock). Not met with a cut-cell body: 0.9857 (van Leer 0.9858, minmod everywhere 0.9863): the total pressure
    # behind the shock on the axis is already 0.990 there with any of the three limiters, so it is set by where
    # the shock lies on the grid, not by the limiter.
    cut = False
    assert _pitot_pa() / P1 == pytest.approx(12.061, abs=1e-3)  # [N] eq. 100, its tabulated value
    dom = Domain(0.095, 0.17, 0.0, 0.05, round(2.5 * 40))
    sim = _body(dom, "axisymmetric", "axis", cut, LIMITER)
    sim.set_primitive(AIR.density_kg_m3(P1, T1), M * AIR.sound_speed_m_s(T1), 0.0, P1)
    stag = []
    for k in (4.0, 5.0, 6.0, 7.0):
        sim.run_until(k * _flow_time_s(dom))
        stag.append(_stagnation(sim))
    assert np.ptp(stag) < 0.003  # steady to 0.3 %
    assert np.mean(stag) == pytest.approx(1.0, abs=0.01)  # within 1 % of [N]


def test_the_default_limiter_is_the_one_these_checks_hold_for():
    assert Numerics().limiter == LIMITER


def test_a_drawn_sphere_at_80_cells_per_radius_reads_the_pitot_pressure():
    # The product's own path: a drawn circle becomes cut cells, with the default numerics. At 40 cells per radius
    # it reads 0.9857 (test above); measured from a uniform stream at 80 cells per radius: 0.9941, 0.9941, 0.9946,
    # 0.9948 at 4 to 7 flow times (the staircase body 0.9962 to 0.9968): the loss made in the shock halves with
    # the cell size. From the kept start with minmod marks on slow shocks only: 0.9937 to 0.9949.
    sim = _from_start(_body(_sphere_domain(80), "axisymmetric", "axis", True), SPHERE_START)
    stag = _stagnation_every_half_flow_time(sim, 4)  # two flow times
    assert np.ptp(stag) < 0.003  # steady to 0.3 %
    assert np.mean(stag) == pytest.approx(1.0, abs=0.01)  # within 1 % of [N]


def test_cylinder_at_40_cells_per_radius_is_steady_at_the_pitot_pressure():
    dom = _cylinder_domain()
    sim = _from_start(_body(dom, "planar", "open", False, LIMITER), CYLINDER_START)
    x_shock = _shock_x_m(sim)
    stag = _stagnation_every_half_flow_time(sim, 6)  # three flow times
    # Measured from a uniform stream: 0.9971 to 0.9979 from 13 to 20 flow times, the shock at 88.44 mm
    # throughout; van Leer on the same grid 0.996 to 1.017 (module docstring). From this start: 0.9971 to 0.9988
    # (0.17 %); van Leer from the same start 0.9942 to 1.0010 (0.67 %), so this test fails with van Leer.
    assert np.ptp(stag) < 0.003  # steady to 0.3 %
    assert np.mean(stag) == pytest.approx(1.0, abs=0.01)  # within 1 % of [N]
    assert abs(_shock_x_m(sim) - x_shock) <= dom.dx_m  # the shock stands still


def _contact_widths(name: str, limiter: str, n: int) -> tuple[int, float]:
    """A shock-tube problem [T] on an n x 4 strip: (cells between 10 and 90 % of the density jump at the contact,
    the jump over the steepest one-cell step there)."""
    (left, right, x0, t_end), x, rho = _shock_tube(name, limiter, n)
    star, waves = star_state(left, right, 1.4), wave_speeds(left, right, 1.4)
    x_contact = x0 + waves.contact * t_end
    # a window around the contact reaching halfway to the nearer wave beside it
    near = min(waves.right_head - waves.contact, waves.contact - waves.left_tail) * t_end
    win = np.abs(x - x_contact) < 0.5 * near
    lo, hi = sorted((star.rho_l, star.rho_r))
    cells = int(np.sum(win & (rho > lo + 0.1 * (hi - lo)) & (rho < hi - 0.1 * (hi - lo))))
    steepest = float(np.max(np.abs(np.diff(rho[win]))))
    # the scheme's solution is close to [T]'s everywhere, so the window holds the contact
    assert np.sum(np.abs(rho - exact_solution(left, right, 1.4, x, x0, t_end)[0])) / n < 0.2 * (hi - lo)
    return cells, (hi - lo) / steepest


@pytest.mark.parametrize("name", ["sod", "toro3", "toro5"])
def test_contacts_stay_as_sharp_as_with_van_leer(name):
    for n in (200, 400):
        cells_vl, width_vl = _contact_widths(name, "van_leer", n)
        cells, width = _contact_widths(name, LIMITER, n)
        cells_mm, width_mm = _contact_widths(name, "minmod", n)
        # measured (module docstring): the same cells between 10 and 90 % and the same steepest-step width as van
        # Leer in every case (Toro 5 at 200 cells was 5.90 against 5.76 before the motion was measured)
        assert width < 1.005 * width_vl, (n, width, width_vl)
        assert cells <= cells_vl, (n, cells, cells_vl)
        assert width < width_mm and cells <= cells_mm, (n, width, width_mm)


def _shock_tube(name: str, limiter: str, n: int) -> tuple[tuple, np.ndarray, np.ndarray]:
    """A shock-tube problem of tests/test_simulation.py ([T] sec. 4.3.3) run on an n x 4 strip to its output time:
    (its left state, right state, diaphragm and time; the cell centres; the density along the strip)."""
    case = next(c[1:] for c in RIEMANN_CASES if c[0] == name)
    left, right, x0, t_end = case
    dom = Domain(0.0, 1.0, 0.0, 4.0 / n, n)
    sim = Simulation(Setup(domain=dom, gas=Gas(1.4, 28.965), edges=Edges("open", "open", "wall", "wall"),
                           numerics=Numerics(limiter=limiter)), None)
    x = dom.x_centres_m()
    lft = np.broadcast_to(x < x0, (4, n))
    rho0, u0, p0 = (np.where(lft, a, b) for a, b in zip(left, right))
    sim.set_primitive(rho0, u0, 0.0, p0)
    sim.run_until(t_end)
    return case, x, sim.primitive()[0][2]


def _tube_l1(name: str, limiter: str, n: int) -> float:
    """The L1 density error against [T]'s exact solution of a shock tube, n cells."""
    (left, right, x0, t_end), x, rho = _shock_tube(name, limiter, n)
    return float(np.sum(np.abs(rho - exact_solution(left, right, 1.4, x, x0, t_end)[0])) / n)


#: How much larger the shock-tube L1 error of the default limiter may be than van Leer's: measured (module
#: docstring) 0.0 % in all six; the limiter with minmod on every shock was +7.3 % (Sod) and +18.9 % (Toro 5), and
#: with the slow test from the steady balance alone +1.2 % (Sod) and +10.6 % (Toro 5): both fail these bounds.
L1_OVER_VAN_LEER = {"sod": 0.005, "toro1": 0.005, "toro2": 0.005, "toro3": 0.005, "toro4": 0.005, "toro5": 0.005}


@pytest.mark.parametrize("name", sorted(L1_OVER_VAN_LEER))
def test_running_shocks_are_as_sharp_as_with_van_leer(name):
    for n in (100, 200):
        assert _tube_l1(name, LIMITER, n) < (1.0 + L1_OVER_VAN_LEER[name]) * _tube_l1(name, "van_leer", n), n


if __name__ == "__main__":
    write_cylinder_start()
    print(f"wrote {CYLINDER_START}")
    write_sphere_start()
    print(f"wrote {SPHERE_START}")
