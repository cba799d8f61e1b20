"""Ambient edges as a characteristic pressure boundary (solver/kernels.py fill_pressure_edges).

Sources:
  [TH] K. W. Thompson, J. Comput. Phys. 68 (1987) 1-24 and 89 (1990) 439-461; T. J. Poinsot,
       S. K. Lele, J. Comput. Phys. 101 (1992) 104-129: characteristic boundary conditions (a
       subsonic outlet fixes one incoming quantity, the static pressure; a supersonic outlet none).
  [A]  J. D. Anderson, Modern Compressible Flow, 3rd ed., McGraw-Hill 2003, ch. 5 (a uniform
       stream in a constant-area duct stays uniform: nothing in it changes the state).
"""
from __future__ import annotations

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
