"""The scheme's choices: one table per option (name, label, kernel id), and each name reaches its formula.

The limiter and flux checks call the kernel's own slope and face-flux functions with the id the table
gives a name, and compare with the published formula of that name.
"""
from __future__ import annotations

import math

import pytest

from shockslate.solver import kernels
from shockslate.solver.numerics import FLUXES, INTEGRATOR_CHOICES, INTEGRATORS, LIMITERS, ORDERS, Numerics
from shockslate.solver.scenario import NumericsModel, vocabulary


def test_every_limiter_name_reaches_its_formula():
    dl, dr = 1.0, 3.0  # left and right differences of one sign
    expected = {
        "minmod": min(dl, dr),  # minmod (Roe 1986, from memory): the smaller in magnitude
        "van_leer": 2.0 * dl * dr / (dl + dr),  # van Leer 1974: harmonic mean
        "mc": min(2.0 * dl, 2.0 * dr, 0.5 * (dl + dr)),  # van Leer 1977: monotonised central
        # van Leer away from shocks; the faces of cells in a shock arrive at _slope as minmod (kernels.shock_switch)
        "van_leer_shock_minmod": 2.0 * dl * dr / (dl + dr),
    }
    assert set(expected) == set(LIMITERS)
    for name, choice in LIMITERS.items():
        assert Numerics(order=2, limiter=name).limiter_id == choice.kernel_id
        assert kernels._slope(dl, dr, choice.kernel_id) == pytest.approx(expected[name]), name
        assert kernels._slope(dl, -dr, choice.kernel_id) == 0.0  # an extremum: no slope (all three TVD limiters)
    assert kernels._slope(dl, dr, Numerics(order=1, limiter="mc").limiter_id) == 0.0  # first order: no slope


def test_every_flux_name_reaches_its_formula():
    """A contact moving at u = 0.5 (equal u and p, density 1 | 0.5, gamma 1.4).

    HLLC restores the contact, so the mass flux is the upwind rho u (Toro 2009, sec. 10.4); HLL and
    Rusanov smear it: their mass fluxes follow the HLL formula with Davis speeds (Toro 2009, sec. 10.3 and
    10.5.1) and the Rusanov formula with the largest local signal speed (Toro 2009, sec. 10.5.1).
    """
    gamma, u, p, rl, rr = 1.4, 0.5, 1.0, 1.0, 0.5
    al, ar = math.sqrt(gamma * p / rl), math.sqrt(gamma * p / rr)
    fl, fr = rl * u, rr * u  # mass fluxes of the two states
    sl, sr = min(u - al, u - ar), max(u + al, u + ar)
    s = max(abs(u) + al, abs(u) + ar)
    expected = {
        "hllc": fl,
        "hll": (sr * fl - sl * fr + sl * sr * (rr - rl)) / (sr - sl),
        "rusanov": 0.5 * (fl + fr) - 0.5 * s * (rr - rl),
    }
    assert set(expected) == set(FLUXES)
    assert len({round(v, 9) for v in expected.values()}) == 3  # the case tells the three apart
    for name, choice in FLUXES.items():
        assert Numerics(flux=name).flux_id == choice.kernel_id
        mass = kernels._riemann_flux(rl, u, 0.0, p, rr, u, 0.0, p, gamma, choice.kernel_id)[0]
        assert mass == pytest.approx(expected[name], rel=1e-12), name


def test_tables_are_the_only_names():
    """The scenario model, the Numerics dataclass and the page's vocabulary list the same names."""
    voc = vocabulary()["choices"]
    for key, table in (("order", ORDERS), ("limiter", LIMITERS), ("flux", FLUXES), ("integrator", INTEGRATOR_CHOICES)):
        assert [c["name"] for c in voc[key]] == list(table)
        assert all(c["label"] for c in voc[key])
        for name in table:
            NumericsModel(**{key: name})
    assert list(INTEGRATOR_CHOICES) == list(INTEGRATORS)
    ids = [c.kernel_id for c in LIMITERS.values()]
    assert len(set(ids)) == len(ids) and kernels.LIM_FIRST_ORDER not in ids
    assert len({c.kernel_id for c in FLUXES.values()}) == len(FLUXES)
