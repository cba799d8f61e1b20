"""Stations, probes and totals on flows whose figures follow from their definitions.

Mass flow = rho u A and thrust = (rho u^2 + p - p_amb) A for a uniform stream are the definitions
of the quantities (common practice, no source).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from shockslate.solver.conditions import Ambient, Conditions, Stream, held_primitive
from shockslate.solver.diagnostics import Station, read_probe, read_station, station_profile, totals
from shockslate.solver.domain import Domain
from shockslate.solver.kinds import CellKind
from shockslate.solver.simulation import Edges, Setup, Simulation


def _duct(mode: str, edge_top: str = "wall"):
    dom = Domain(0.0, 1.0, 0.0, 0.25, 80)
    bottom = "axis" if mode == "axisymmetric" else "wall"
    cond = Conditions(stream=Stream(mach=0.5, angle_deg=0.0, p_pa=2.0e5, t_k=300.0), ambient=Ambient(1.0e5, 300.0))
    sim = Simulation(Setup(domain=dom, mode=mode, edges=Edges("stream", "open", bottom, edge_top), conditions=cond))
    rho, u, v, p = held_primitive(sim.setup.gas, cond)[CellKind.STREAM]
    sim.set_primitive(rho, u, v, p)
    return sim, rho, u, p


@pytest.mark.parametrize("mode", ["planar", "axisymmetric"])
def test_uniform_stream_figures(mode):
    sim, rho, u, p = _duct(mode)
    sim.advance(5)
    h = sim.domain.ny * sim.domain.dx_m
    area = math.pi * h * h if mode == "axisymmetric" else h
    for x in (0.2, 0.5, 0.8):
        r = read_station(sim, Station((x, 0.0), (x, h)))
        assert r.mass_flow_kg_s == pytest.approx(rho * u * area, rel=1e-9)
        assert r.thrust_n == pytest.approx((rho * u * u + p - 1.0e5) * area, rel=1e-9)
        assert r.mean_mach == pytest.approx(0.5, rel=1e-9)
        assert r.mean_pressure_pa == pytest.approx(p, rel=1e-9)
        assert r.area_m2 == pytest.approx(area, rel=1e-9)
    # drawn downwards, the station's normal points to -x
    back = read_station(sim, Station((0.5, h), (0.5, 0.0)))
    assert back.mass_flow_kg_s == pytest.approx(-rho * u * area, rel=1e-9)


def test_probe_and_profile_and_totals():
    sim, rho, u, p = _duct("planar")
    probe = read_probe(sim, 0.31, 0.1)
    assert probe.p_pa == pytest.approx(p) and probe.mach == pytest.approx(0.5) and probe.kind == "fluid"
    assert probe.t_k == pytest.approx(300.0)
    prof = station_profile(sim, Station((0.5, 0.0), (0.5, 0.25)))
    assert np.allclose(prof["mach"], 0.5) and prof["s_m"][0] > 0.0
    tot = totals(sim)
    assert tot.mass_kg == pytest.approx(rho * 1.0 * sim.domain.ny * sim.domain.dx_m, rel=1e-12)
    with pytest.raises(ValueError, match="start_m and end_m must differ"):
        Station((0.1, 0.1), (0.1, 0.1))
