"""The wave (x-t) diagram's history: its bounds, and the shock path it shows against the exact Riemann solution.

The built-in shock_tube_reflection scenario is run by the real session; the history samples pressure along
the tube's axis every two steps, and the incident shock's path in it is fitted by a straight line. Its slope is
the shock speed, checked against the exact Riemann solver (solver/riemann.py, the method of Toro 2009, ch. 4).
"""
from __future__ import annotations

import base64

import numpy as np
import pytest

from shockslate.server.session import Session
from shockslate.server.wave_history import MAX_SAMPLES, WaveHistory, WaveLine, sample_points
from shockslate.solver import scenario as scn
from shockslate.solver.riemann import wave_speeds


def _tube_session() -> Session:
    return Session(scn.load_builtin("shock_tube_reflection"))


def test_shock_path_slope_matches_the_exact_shock_speed():
    session = _tube_session()
    sc = session.scenario
    d = sc.domain
    y_mid = 0.5 * (d.y_min_m + d.y_max_m)
    history = WaveHistory(every_steps=2)
    history.set_line(WaveLine((d.x_min_m, y_mid), (d.x_max_m, y_mid), "pressure"))
    history.record(session.sim)
    session.run()
    while session.sim.time_s < 0.9e-3:  # before the shock reaches the end wall (at about 1.08 ms)
        session.advance(10.0, max_steps=history.every_steps)
        history.record(session.sim)
    t, s_m, p = history.arrays()
    assert p.shape == (len(t), s_m.size) and s_m.size == 400  # one point per cell of the 400-cell tube

    # Exact solution of the diaphragm problem: driver at 10 bar, driven gas at 1 bar, both air at 300 K.
    r = sc.gas.molar_mass_kg_kmol and (8314.462618 / sc.gas.molar_mass_kg_kmol)
    left = (sc.conditions.reservoir.p0_pa / (r * sc.conditions.reservoir.t0_k), 0.0, sc.conditions.reservoir.p0_pa)
    right = (sc.conditions.ambient.p_pa / (r * sc.conditions.ambient.t_k), 0.0, sc.conditions.ambient.p_pa)
    exact = wave_speeds(left, right, sc.gas.gamma)
    assert exact.right_is_shock
    # The shock front in each row: the last point, from the closed end backwards, where the pressure rises
    # above the mean of the undisturbed and the shocked pressure (the star pressure of the exact solution).
    from shockslate.solver.riemann import star_state

    p_half = 0.5 * (right[2] + star_state(left, right, sc.gas.gamma).p)
    x = d.x_min_m + s_m
    use = t > 0.2e-3  # past the first few cells, where the front forms
    fronts = []
    for row in p[use]:
        above = np.nonzero(row > p_half)[0]
        k = above[-1]
        # the crossing between sample k and k+1, linearly interpolated
        f = (row[k] - p_half) / (row[k] - row[k + 1])
        fronts.append(x[k] + f * (x[k + 1] - x[k]))
    slope, _ = np.polyfit(t[use], np.array(fronts), 1)
    # Toro 2009, ch. 4 (exact Riemann solver, solver/riemann.py): shock speed of this problem, about 555 m/s.
    print(f"shock path slope {slope:.2f} m/s, exact shock speed {exact.right_head:.2f} m/s, ratio {slope / exact.right_head:.5f}")
    assert slope == pytest.approx(exact.right_head, rel=0.02), (slope, exact.right_head)


def test_rows_are_bounded_and_start_again_when_the_flow_does():
    session = _tube_session()
    history = WaveHistory(max_rows=5, every_steps=1)
    history.set_line(WaveLine((0.0, 0.01), (1.0, 0.01), "mach"))
    session.run()
    for _ in range(8):
        session.advance(10.0, max_steps=1)
        assert history.record(session.sim)
    assert len(history) == 5  # the bound: the oldest three were dropped
    assert not history.record(session.sim)  # the same step twice adds nothing
    msg = history.message()
    assert msg["rows"] == 5 and msg["samples"] == 400
    values = np.frombuffer(base64.b64decode(msg["values_f32"]), "<f4").reshape(5, 400)
    assert np.all(np.isfinite(values)) and values.max() > 0.0  # gas moves behind the diaphragm
    newer = history.message(after_steps=msg["steps"][2])
    assert newer["steps"] == msg["steps"][3:]
    gen = history.generation
    session.reset_flow()
    assert history.record(session.sim)  # an earlier step: a new generation, one row
    assert history.generation == gen + 1 and len(history) == 1


def test_samples_are_bounded_and_refuse_unknown_fields():
    session = _tube_session()
    fine = session.sim.domain.with_nx(2000)
    s_m, j, i = sample_points(WaveLine((0.0, 0.01), (1.0, 0.01)), fine)
    assert s_m.size == MAX_SAMPLES and i.min() >= 0 and i.max() < 2000
    with pytest.raises(ValueError, match="vorticity"):
        WaveHistory().set_line(WaveLine((0.0, 0.01), (1.0, 0.01), "vorticity"))
