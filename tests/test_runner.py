"""The runner's bursts (server/runner.py) with a real session and hub, no event loop: a flow held while it is
rebuilt on a new grid is not read again for pictures or status (nothing in it changes), and both come again once
the new grid is swapped in. Common practice (no work for an unchanged state), no single source."""
from __future__ import annotations

from shockslate.server import session as session_module
from shockslate.server.hub import Hub
from shockslate.server.runner import Runner
from shockslate.server.session import Session
from shockslate.solver import scenario as scn

from scenario_docs import duct_doc


class Counted:
    """Counts the calls of a real callable."""

    def __init__(self, fn):
        self.fn = fn
        self.calls = 0

    def __call__(self, *args, **kwargs):
        self.calls += 1
        return self.fn(*args, **kwargs)


def test_a_held_flow_is_not_read_again_for_its_pictures_or_status(monkeypatch):
    session = Session(scn.parse_scenario(duct_doc()))
    hub = Hub()
    hub.new_client(websocket=None)  # a tab: frames and statuses are wanted
    runner = Runner(session, hub, status_interval_s=0.0, snapshot_interval_s=0.0, status_share=None)  # due each burst
    session.run()
    snapshots, statuses = Counted(session.snapshot), Counted(runner._status_now)
    monkeypatch.setattr(session, "snapshot", snapshots)
    monkeypatch.setattr(runner, "_status_now", statuses)
    advanced, _, status = runner._burst()
    assert advanced.steps > 0 and snapshots.calls >= 1 and statuses.calls == 1 and status is runner.last_status
    monkeypatch.setattr(session_module, "HOLD_STEP_S", 0.0)  # every running flow counts as slow: it is held
    plan = session.plan_rebuild(nx=96)
    assert session.holding
    pictures, reads = snapshots.calls, statuses.calls
    for _ in range(3):
        advanced, _, status = runner._burst()
        assert advanced.steps == 0 and status is runner.last_status  # the last status again, to every tab
    assert (snapshots.calls, statuses.calls) == (pictures, reads)
    session.build_rebuild(plan)
    session.finish_rebuild(plan)
    advanced, _, status = runner._burst()
    assert advanced.steps > 0 and snapshots.calls > pictures and statuses.calls == reads + 1
    assert status["nx"] == 96 and hub.snapshot.domain.nx == 96
