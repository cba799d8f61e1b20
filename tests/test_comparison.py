"""The comparison run (server/comparison.py) as the runner keeps it beside the main run: it parts from the main
flow, follows its flow time, takes the main scenario's changes, restarts with it, and is checked against the
exact Riemann solver (solver/riemann.py, the method of Toro 2009, ch. 4) on the built-in shock tube."""
from __future__ import annotations

import numpy as np
import pytest

from shockslate.server.comparison import Comparison
from shockslate.server.errors import RequestError
from shockslate.server.hub import Hub
from shockslate.server.runner import Runner
from shockslate.server.session import Session
from shockslate.solver import scenario as scn
from shockslate.solver.riemann import star_state, wave_speeds

R_AIR = 8314.462618 / 28.965


def _tube() -> tuple[Session, Runner]:
    session = Session(scn.load_builtin("shock_tube_reflection"))
    return session, Runner(session, Hub())


def _compare(session: Session, runner: Runner, setting: str, value: float) -> Comparison:
    c = Comparison.build(session.scenario, setting, value, session.revision)
    c.start_from(session.sim)
    runner.comparison = c
    return c


def _run_to(session: Session, runner: Runner, t_s: float) -> None:
    session.run()
    while session.sim.time_s < t_s:
        adv = session.advance(10.0, max_steps=20)
        runner.follow_comparison(10.0)  # a generous budget: the comparison keeps up
        assert adv.divergence is None


def _shock_x(sim, p_half: float) -> float:
    """Where the pressure along the tube's middle row falls through p_half, last from the closed end."""
    p = sim.primitive()[3][sim.domain.ny // 2]
    x = sim.domain.x_centres_m()
    k = np.nonzero(p > p_half)[0][-1]
    return float(x[k] + (p[k] - p_half) / (p[k] - p[k + 1]) * (x[k + 1] - x[k]))


def test_both_shocks_run_at_their_exact_speeds():
    """Main run at 10 bar in the driver, comparison at 5 bar: each incident shock where the exact solution puts
    it at 0.8 ms (Toro 2009, ch. 4; air at 300 K on both sides, 1 bar driven gas, diaphragm at x = 0.4 m)."""
    session, runner = _tube()
    c = _compare(session, runner, "conditions.reservoir.p0_pa", 5.0e5)
    # the comparison parts from the main flow (a 10 bar driver); Reset flow starts both from their starting gas
    session.reset_flow()
    runner.follow_comparison(0.0)
    assert c.sim.time_s == session.sim.time_s == 0.0
    assert c.sim.primitive()[3][4, 10] == pytest.approx(5.0e5)  # its own 5 bar driver now
    _run_to(session, runner, 0.8e-3)
    dt = session.sim.time_s - c.sim.time_s
    assert 0.0 >= dt > -5e-6  # the comparison stands at the main run's instant (one of its steps past it at most)
    right = (1.0e5 / (R_AIR * 300.0), 0.0, 1.0e5)
    for sim, p4 in ((session.sim, 1.0e6), (c.sim, 5.0e5)):
        left = (p4 / (R_AIR * 300.0), 0.0, p4)
        w = wave_speeds(left, right, 1.4).right_head
        p_half = 0.5 * (right[2] + star_state(left, right, 1.4).p)
        x_exact = 0.4 + w * sim.time_s
        assert _shock_x(sim, p_half) == pytest.approx(x_exact, abs=2 * sim.domain.dx_m), (p4, w)
    # the two runs really differ: the weaker driver's shock is behind
    assert _shock_x(c.sim, 0.5 * (1e5 + star_state((5e5 / (R_AIR * 300), 0, 5e5), right, 1.4).p)) < \
        _shock_x(session.sim, 0.5 * (1e5 + star_state((1e6 / (R_AIR * 300), 0, 1e6), right, 1.4).p))


def test_it_parts_from_the_main_flow_and_takes_its_changes():
    session, runner = _tube()
    _run_to(session, runner, 0.2e-3)
    c = _compare(session, runner, "conditions.ambient.p_pa", 5.0e4)
    assert c.sim.time_s == session.sim.time_s and c.sim.steps == session.sim.steps
    np.testing.assert_array_equal(c.sim.primitive()[3][c.sim.mask == 0], session.sim.primitive()[3][session.sim.mask == 0])
    t_before = c.sim.time_s
    session.add_shape({"kind": "rectangle", "corner_a_m": [0.8, 0.0], "corner_b_m": [0.82, 0.01], "paints": "wall"})
    runner.follow_comparison(0.0)
    np.testing.assert_array_equal(c.sim.mask, session.sim.mask)  # the same wall in both
    assert c.sim.time_s >= t_before and c.scenario.conditions.ambient.p_pa == 5.0e4  # its flow and its setting kept
    assert "same change" in c.note
    steps = c.sim.steps
    runner.follow_comparison(0.0)  # no main progress: nothing to follow
    assert c.sim.steps == steps
    session.reset_flow()
    runner.follow_comparison(0.0)
    assert c.sim.time_s == 0.0 and c.sim.steps == 0 and "started again" in c.note
    assert runner.take_comparison_news()["active"] is True


def test_a_small_budget_keeps_the_cost_bounded():
    session, runner = _tube()
    c = _compare(session, runner, "conditions.reservoir.p0_pa", 8.0e5)
    session.run()
    session.advance(10.0, max_steps=50)
    runner.follow_comparison(0.0)  # no wall time to spare: one step at most
    assert c.sim.steps == 1 and c.behind_s > 0.0


def test_a_value_the_scenario_refuses_is_named():
    session, _ = _tube()
    with pytest.raises(RequestError) as err:
        Comparison.build(session.scenario, "conditions.ambient.p_pa", -5.0, session.revision)
    assert err.value.field == "value" and err.value.value == -5.0 and "ambient pressure" in err.value.message
    with pytest.raises(RequestError) as err:
        Comparison.build(session.scenario, "domain.nx", 10.0, session.revision)
    assert err.value.field == "setting"
