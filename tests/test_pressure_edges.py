"""Ambient edges as a characteristic pressure boundary (solver/kernels.py fill_pressure_edges).

Sources:
  [TH] K. W. Thompson, J. Comput. Phys. 68 (1987) 1-24 and 89 (1990) 439-461; T. J. Poinsot,
       S. K. Lele, J. Comput. Phys. 101 (1992) 104-129: characteristic boundary conditions (a
       subsonic outlet fixes one incoming quantity, the static pressure; a supersonic outlet none).
  [A]  J. D. Anderson, Modern Compressible Flow, 3rd ed., McGraw-Hill 2003, ch. 5 (a uniform
       stream in a constant-area duct stays uniform: nothing in it changes the state).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from shockslate.solver.conditions import Ambient, Conditions, Stream
from shockslate.solver.domain import Domain
from shockslate.solver.gas import AIR
from shockslate.solver.simulation import Edges, Setup, Simulation


def _duct(mach, p_stream_pa, p_amb_pa, t_end_s=0.01):
    """A 1 m duct, stream edge on the left, ambient edge on the right, started uniform."""
    dom = Domain(0.0, 1.0, 0.0, 0.125, 64)
    cond = Conditions(stream=Stream(mach=mach, p_pa=p_stream_pa, t_k=300.0), ambient=Ambient(p_pa=p_amb_pa, t_k=300.0))
    sim = Simulation(Setup(dom, edges=Edges(left="stream", right="ambient", bottom="wall", top="wall"),
                           conditions=cond))
    sim.set_primitive(AIR.density_kg_m3(p_stream_pa, 300.0), mach * AIR.sound_speed_m_s(300.0), 0.0, p_stream_pa)
    sim.run_until(t_end_s)
    return sim


@pytest.mark.parametrize("mach", [0.2, 0.4])
def test_subsonic_stream_leaves_through_an_ambient_edge_at_its_own_pressure_unchanged(mach):
    # [A]: nothing in the duct changes a uniform stream; [TH]: the outlet fixes the pressure it already has.
    # An edge that held still gas at 100 kPa stagnated this stream to 115 / 133 kPa (measured before).
    sim = _duct(mach, 1.0e5, 1.0e5)
    p = sim.primitive()[3]
    assert np.max(np.abs(p / 1.0e5 - 1.0)) < 0.005
    u = sim.primitive()[1]
    assert np.mean(u) == pytest.approx(mach * AIR.sound_speed_m_s(300.0), rel=0.005)


def test_subsonic_outlet_takes_the_ambient_pressure():
    # [TH]: at a subsonic outlet the static pressure is the one imposed quantity.
    sim = _duct(0.3, 1.0e5, 0.97e5, t_end_s=0.03)
    p_exit = sim.primitive()[3][:, -1]
    assert np.mean(p_exit) == pytest.approx(0.97e5, rel=0.005)


def test_supersonic_outlet_takes_everything_from_inside():
    # [TH]: all characteristics leave a supersonic outlet; the ambient pressure cannot reach the duct
    # (an edge holding still gas would push a shock upstream into it).
    sim = _duct(2.0, 1.0e5, 0.3e5)
    p = sim.primitive()[3]
    assert np.max(np.abs(p / 1.0e5 - 1.0)) < 0.005


def test_gas_drawn_in_through_an_ambient_edge_enters_at_the_ambient_stagnation_state():
    # Still gas below the ambient pressure beside an ambient edge: gas flows in with the ambient total
    # pressure and temperature (isentropic relations, NACA Report 1135 eq. 44-45, via p0 = p (1 + ...)).
    dom = Domain(0.0, 1.0, 0.0, 0.125, 64)
    sim = Simulation(Setup(dom, edges=Edges(left="wall", right="ambient", bottom="wall", top="wall"),
                           conditions=Conditions(ambient=Ambient(p_pa=1.0e5, t_k=300.0))))
    sim.set_primitive(AIR.density_kg_m3(0.8e5, 300.0), 0.0, 0.0, 0.8e5)
    sim.run_until(0.0005)
    ghost = sim.W[:, 5, -1]  # an ambient ghost cell on the right edge (row 3 of 8)
    rho, u, v, p = ghost
    assert u < 0.0 and p < 1.0e5
    mach2 = (u * u + v * v) / (AIR.gamma * p / rho)
    p0 = p * (1.0 + 0.5 * (AIR.gamma - 1.0) * mach2) ** (AIR.gamma / (AIR.gamma - 1.0))
    t0 = p / (rho * AIR.r_j_kg_k) * (1.0 + 0.5 * (AIR.gamma - 1.0) * mach2)
    assert p0 == pytest.approx(1.0e5, rel=1e-9) and t0 == pytest.approx(300.0, rel=1e-9)


def _shock_area_ratio_from_exit_pressure(pe_p0: float, ae_astar: float, gamma: float = 1.4) -> float:
    """Area ratio A_s / A* of the normal shock that gives exit pressure pe in a nozzle of exit ratio Ae / A*.

    [A] ch. 5 (the worked method, from memory): pe Ae / (p0 A*) = pe Ae / (p02 A2*) fixes the subsonic exit
    Mach number Me through (1 / Me) (2 / (g + 1))^((g + 1) / (2 (g - 1))) (1 + (g - 1) / 2 Me^2)^(-1/2);
    then p02 = pe / (p / p0)(Me), p02 / p01 gives the shock Mach number, and the area-Mach relation its place.
    """
    from shockslate.solver import relations

    g = gamma
    target = pe_p0 * ae_astar

    def excess(m):
        return (1.0 / m) * (2.0 / (g + 1.0)) ** ((g + 1.0) / (2.0 * (g - 1.0))) \
            * (1.0 + 0.5 * (g - 1.0) * m * m) ** -0.5 - target

    lo, hi = 1e-6, 1.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if excess(mid) > 0.0 else (lo, mid)
    p02_p01 = pe_p0 / float(relations.p_p0(lo, g))
    lo, hi = 1.0, 10.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if float(relations.normal_shock(mid, g).p02_p01) > p02_p01 else (lo, mid)
    return float(relations.area_ratio(lo, g))


def test_normal_shock_held_by_the_back_pressure_settles_where_quasi_1d_theory_puts_it():
    # Gas from a reservoir (r < r*) flows out radially between two parallel discs (axisymmetric mode, walls at
    # x = 0 and x = h, aligned with the grid): the flow area 2 pi r h grows with r, so it chokes at r* and
    # expands supersonically, and an ambient edge at r_e = 3 r* holds a back pressure of 0.6 p0, between the
    # shock-at-exit and subsonic limits ([A] ch. 5), which a normal shock inside must satisfy. The flow is
    # exactly one-dimensional in r, so quasi-1D theory applies with A / A* = r / r*.
    from shockslate.solver import relations
    from shockslate.solver.conditions import Reservoir
    from shockslate.solver.kinds import CellKind

    h, r_star, r_e, p0, t0 = 0.02, 0.02, 0.06, 2.0e5, 300.0
    dom = Domain(0.0, h, 0.0, r_e, 20)
    mask = np.zeros(dom.shape, np.uint8)
    j_star = int(round(r_star / dom.dx_m))
    mask[:j_star, :] = CellKind.RESERVOIR
    cond = Conditions(reservoir=Reservoir(p0_pa=p0, t0_k=t0), ambient=Ambient(p_pa=0.6 * p0, t_k=t0))
    sim = Simulation(Setup(dom, mode="axisymmetric", edges=Edges(left="wall", right="wall", bottom="axis",
                                                                 top="ambient"), conditions=cond), mask)
    r = dom.y_centres_m()
    samples = []
    for k in range(10):
        sim.run_until(1.5e-3 + 1.5e-4 * (k + 1))  # settled after about 1 ms; sample the next 1.5 ms
        rho, u, v, p = (q.mean(axis=1) for q in sim.primitive())
        pf, rf = p[j_star:], r[j_star:]
        ks = int(np.argmax(np.diff(pf)))
        mid = 0.5 * (pf[ks - 1] + pf[ks + 2])  # the shock is where the pressure crosses halfway
        kk = ks - 1
        while pf[kk + 1] < mid:
            kk += 1
        r_s = rf[kk] + (mid - pf[kk]) / (pf[kk + 1] - pf[kk]) * (rf[kk + 1] - rf[kk])
        p_exit = 0.5 * (p[-1] + sim.W[3, -2, 2:-2].mean())  # on the edge face: last cell and ghost
        mdot = 2.0 * math.pi * r[j_star + 2] * h * rho[j_star + 2] * v[j_star + 2]
        samples.append((r_s, p_exit, mdot))
    r_s, p_exit, mdot = (np.array(c) for c in zip(*samples))
    assert np.ptp(r_s) < 0.01 * r_s.mean()  # settled: the shock stands still
    assert p_exit.mean() == pytest.approx(0.6 * p0, rel=0.005)  # [TH]: the outlet holds the ambient pressure
    ideal = relations.choked_mass_flow_kg_s(p0, t0, 2.0 * math.pi * r_star * h, 1.4, AIR.r_j_kg_k)
    assert mdot.mean() == pytest.approx(ideal, rel=0.02)  # choked at r* (Sutton and Biblarz ch. 3)
    theory = _shock_area_ratio_from_exit_pressure(p_exit.mean() / p0, r_e / r_star)
    assert r_s.mean() / r_star == pytest.approx(theory, rel=0.05)  # [A] ch. 5


def _sloped_nozzle(cells_per_throat: int, pb_p0: float):
    """A planar converging-diverging nozzle, its lower half (a wall on the symmetry line y = 0), walls drawn
    as a polygon and put inside the cells they cross (cut cells; solver/geometry.py wall_geometry).

    Throat half-height 10 mm with a circular arc of radius 20 mm, a 30 degree converging and an 8 degree
    diverging straight wall (neither aligned with the grid), exit half-height 20 mm (Ae / A* = 2), the exit
    plane on an ambient edge at pb_p0 times the reservoir pressure. Returns (sim, half_height_m(x), x_throat_m).
    """
    from shockslate.solver.conditions import Reservoir
    from shockslate.solver.geometry import wall_geometry
    from shockslate.solver.shapes import Polygon, Rectangle, Sketch

    hs, hc, he, rc, xt = 0.01, 0.02, 0.02, 0.02, 0.03
    conv, div = math.radians(30.0), math.radians(8.0)
    arc = [(xt + rc * math.sin(a), hs + rc - rc * math.cos(a)) for a in np.linspace(-conv, div, 41)]
    (xa0, ya0), (xa1, ya1) = arc[0], arc[-1]
    x_conv = xa0 - (hc - ya0) / math.tan(conv)
    x_exit = xa1 + (he - ya1) / math.tan(div)
    dx = hs / cells_per_throat
    nx = int(round(x_exit / dx))
    dom = Domain(0.0, nx * dx, 0.0, math.ceil(he / dx) * dx, nx)
    wall = Polygon(((-0.01, hc), (x_conv, hc), *arc, (x_exit, he), (x_exit + 0.01, he), (x_exit + 0.01, 0.04),
                    (-0.01, 0.04)), "wall")
    geo = wall_geometry(Sketch((wall, Rectangle((0.0, 0.0), (0.004, hc), "reservoir"))), dom)
    cond = Conditions(reservoir=Reservoir(p0_pa=2.0e5, t0_k=300.0), ambient=Ambient(p_pa=pb_p0 * 2.0e5, t_k=300.0))
    sim = Simulation(Setup(dom, edges=Edges(left="wall", right="ambient", bottom="wall", top="wall"), conditions=cond),
                     geo.mask, geo)

    def half_height_m(x):
        if x >= xa1:
            return min(ya1 + (x - xa1) * math.tan(div), he)
        if x >= xa0:
            return hs + rc - math.sqrt(rc * rc - (x - xt) ** 2)
        return min(ya0 + (xa0 - x) * math.tan(conv), hc)

    return sim, half_height_m, xt


def test_normal_shock_in_a_sloped_planar_nozzle_settles_where_quasi_1d_theory_puts_it():
    # [A] ch. 5: a back pressure between the shock-at-exit and the subsonic limits holds a normal shock in the
    # diverging section, at the area ratio that gives the measured exit pressure. Here 0.70 p0 in a nozzle of
    # Ae / A* = 2 puts it near A / A* = 1.51. The walls cross the cells at 8 and 30 degrees. Measured at 10 cells
    # per throat half-height: A_s / A* = 1.487 against 1.511 (1.6 % short), still from 2.5 ms on; the same walls
    # as a staircase of whole cells never let the shock settle (A_s / A* from 1.00 to 1.84 between 3.5 and 4 ms).
    p0 = 2.0e5
    sim, half_height_m, xt = _sloped_nozzle(10, 0.70)
    x = sim.domain.x_centres_m()
    vols = sim.cell_volumes_m3()
    gas_cols = vols.sum(axis=0)
    samples = []
    for k in range(5):
        sim.run_until(2.5e-3 + 2.5e-4 * k)  # the shock has stopped moving by about 2 ms (measured)
        p = sim.primitive()[3]
        pm = (p * vols).sum(axis=0) / gas_cols  # volume-mean pressure of each column
        it = int(np.argmin(np.abs(x - xt)))
        pf, xf = pm[it:], x[it:]
        ks = int(np.argmax(np.diff(pf)))  # the steepest rise downstream of the throat
        mid = 0.5 * (pf[ks - 1] + pf[ks + 2])  # the shock is where the pressure crosses halfway
        kk = ks - 1
        while pf[kk + 1] < mid:
            kk += 1
        x_s = xf[kk] + (mid - pf[kk]) / (pf[kk + 1] - pf[kk]) * (xf[kk + 1] - xf[kk])
        open_ghost = vols[:, -1] > 0.0
        p_exit = 0.5 * (pm[-1] + sim.W[3, 2:-2, -2][open_ghost].mean())  # on the exit face: last column and ghost
        samples.append((half_height_m(x_s) / 0.01, p_exit))
    a_s, p_exit = (np.array(c) for c in zip(*samples))
    assert np.ptp(a_s) < 0.005 * a_s.mean()  # settled: the shock stands still
    assert p_exit.mean() == pytest.approx(0.70 * p0, rel=0.005)  # [TH]: the outlet holds the back pressure
    theory = _shock_area_ratio_from_exit_pressure(p_exit.mean() / p0, 2.0)
    assert theory == pytest.approx(1.51, abs=0.01)
    assert a_s.mean() == pytest.approx(theory, rel=0.05)  # [A] ch. 5
    assert 1.2 < a_s.mean() < 1.9  # inside the diverging section, well clear of throat and exit
