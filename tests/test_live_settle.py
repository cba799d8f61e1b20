"""The page's settle mode with grid sequencing: the same coarse-grid-first sequence as `shockslate run --until
steady --settle`, a step at a time in the live session, with a real uvicorn server and real websockets.

Grid sequencing as published (Blazek, Computational Fluid Dynamics: Principles and Applications, ch. 9: settle on
a coarser grid, carry the flow over to the fine grid, settle there). What is checked here is that the live session
runs exactly that sequence (bit for bit what solver/settle.settle_coarse hands to the fine grid), shows the
coarse grid meanwhile, says which level it is on, and never changes the user's sketch or resolution.
"""
from __future__ import annotations

import json

import numpy as np
import pytest

from shockslate.server.frames import decode_frame
from shockslate.server.session import Session
from shockslate.solver import scenario as scn
from shockslate.solver import settle

from test_live_changes import LiveServer, _messages, _replies, _until

#: The built-in sea-level nozzle at 96 cells across: one coarse grid of 48 (settle.coarse_nx keeps >= 40).
FINE_NX, COARSE_NX = 96, 48


def nozzle_doc(nx: int = FINE_NX) -> dict:
    doc = scn.scenario_to_dict(scn.load_builtin("nozzle_sea_level"))
    doc["domain"]["nx"] = nx
    return doc


def _step_to_handover(session: Session, limit: int = settle.COARSE_MAX_STEPS + 10) -> int:
    """Single settle steps until the flow is on the user's grid; the number taken."""
    for k in range(1, limit + 1):
        session.step(1)
        if session.settle_grid()["level"] == 2:
            return k
    raise AssertionError("the coarse grid never handed over")


def test_live_settle_runs_the_batch_grid_sequence_and_keeps_the_users_grid():
    s = scn.parse_scenario(nozzle_doc())
    session = Session(s)
    document = json.dumps(session.document(), sort_keys=True)
    fine = session.sim
    start = [q.copy() for q in fine.primitive()]
    session.set_settle(True)
    assert session.settle_grid()["levels"] is None  # begins with the next settle step
    session.step(1)
    grid = session.settle_grid()
    assert (grid["level"], grid["levels"], grid["nx"], grid["fine_nx"]) == (1, 2, COARSE_NX, FINE_NX)
    assert session.snapshot().domain.nx == COARSE_NX  # the picture shows the coarse grid
    assert session.sim is fine and fine.steps == 0  # the user's grid is untouched meanwhile
    assert all(np.array_equal(a, b) for a, b in zip(fine.primitive(), start))
    taken = _step_to_handover(session)
    assert session.sim is fine and session.snapshot().domain.nx == FINE_NX
    grid = session.settle_grid()
    assert (grid["level"], grid["levels"], grid["nx"], grid["ny"]) == (2, 2, FINE_NX, fine.domain.ny)
    assert json.dumps(session.document(), sort_keys=True) == document  # sketch and resolution as they were

    # the same sequence as `shockslate run --until steady --settle` (solver/batch.py): settle_coarse on a fresh
    # fine grid hands over the very same flow, after the same number of coarse steps
    batch_fine = scn.build_simulation(s)
    levels = settle.settle_coarse(lambda n: scn.build_simulation(s, n), batch_fine,
                                  x_max_m=settle.interior_end_m(scn.station_by_role(s, "exit")))
    assert [lv.nx for lv in levels] == [COARSE_NX] and levels[0].steps == 1 + taken  # the step before the loop
    assert levels[0].reason in ("settled", "stalled")
    for mine, batch in zip(fine.primitive(), batch_fine.primitive()):
        assert np.array_equal(mine, batch)
    steps = fine.steps
    session.step(3)  # then local time steps on the user's grid
    assert fine.steps == steps + 3 and session.settle_grid()["level"] == 2


def test_a_change_on_a_coarse_grid_begins_the_sequence_again_and_settle_off_keeps_the_flow():
    session = Session(scn.parse_scenario(nozzle_doc()))
    session.set_settle(True)
    session.step(5)
    first = session._sequence
    assert first.sim.steps == 5 and session.settle_grid()["level"] == 1
    session.set_numerics(cfl=0.3)  # a change while on the coarse grid: its coarse grids are stale
    session.step(1)
    assert session._sequence is not first and session._sequence.sim.steps == 1
    session.set_settle(False)  # off: time-accurate steps on the user's grid, from its own (untouched) flow
    assert session.settle_grid() is None and session.snapshot().domain.nx == FINE_NX
    assert session.sim.steps == 0
    session.step(2)
    assert session.sim.steps == 2
    session.set_settle(True)  # on again: a new sequence from the coarsest grid
    session.step(1)
    assert session._sequence is not first and session.settle_grid()["level"] == 1


def test_a_grid_too_small_to_coarsen_settles_on_its_own_grid():
    session = Session(scn.parse_scenario(nozzle_doc(2 * settle.MIN_COARSE_NX - 2)))  # half would be under 40
    session.set_settle(True)
    session.step(2)
    grid = session.settle_grid()
    assert (grid["level"], grid["levels"], grid["nx"]) == (1, 1, 2 * settle.MIN_COARSE_NX - 2)
    assert session.sim.steps == 2


@pytest.fixture
def live_nozzle(tmp_path):
    server = LiveServer(tmp_path, doc=nozzle_doc())
    try:
        yield server
    finally:
        server.stop()


def test_settle_through_a_real_server_shows_each_grid_level_then_the_users_grid(live_nozzle):
    live = live_nozzle
    with live.tab() as tab:
        tab.send(json.dumps({"type": "settle", "on": True, "id": "s"}))
        reply = _replies(_messages(tab, lambda got: _replies(got, "s"), "the settle reply"), "s")[0]
        assert reply["settle"] is True and reply["settle_grid"]["fine_nx"] == FINE_NX
        widths: list[int] = []  # every frame's width, in order

        def frames_in(got) -> list:
            widths.extend(decode_frame(m)[0].width for m in got if isinstance(m, bytes))
            return got

        tab.send(json.dumps({"type": "step", "count": 1, "id": "one"}))  # one settle step: the coarse grid
        got = frames_in(_messages(tab, lambda got: _replies(got, "one") and any(
            isinstance(m, bytes) and decode_frame(m)[0].width == COARSE_NX for m in got), "a coarse frame"))
        one = _replies(got, "one")[0]
        coarse = one["settle_grid"]
        # the flow figures are the coarse grid's, as the frames are: its first step, its cells, its stations
        assert one["steps"] == 1 and one["cells"] == COARSE_NX * coarse["ny"] and one["nx"] == FINE_NX
        assert [st["name"] for st in one["stations"]] == [st["name"] for st in nozzle_doc()["stations"]]
        tab.send(json.dumps({"type": "run", "id": "r"}))

        def on_fine_grid(got) -> bool:
            fine = [m for m in got if isinstance(m, dict) and m.get("type") == "status"
                    and (m.get("settle_grid") or {}).get("level") == 2]
            return bool(fine) and any(isinstance(m, bytes) and decode_frame(m)[0].width == FINE_NX
                                      for m in got[got.index(fine[0]):])

        frames_in(_messages(tab, on_fine_grid, "the flow to reach the user's grid"))
        tab.send(json.dumps({"type": "pause", "id": "p"}))
        got = _messages(tab, lambda got: _replies(got, "p"), "the pause reply")
        status = _replies(got, "p")[0]
        assert status["settle"] is True and status["nx"] == FINE_NX
        assert status["settle_grid"]["level"] == 2
        tab.send(json.dumps({"type": "get_scenario", "id": "g"}))
        doc = _replies(_messages(tab, lambda got: _replies(got, "g"), "the scenario"), "g")[0]
    # the coarse grid was shown and named, then the user's grid; the user's resolution and sketch never changed
    assert (coarse["level"], coarse["levels"], coarse["nx"], coarse["fine_nx"]) == (1, 2, COARSE_NX, FINE_NX)
    assert COARSE_NX in widths  # coarse frames were sent, and the user's grid's frames after them
    assert max(k for k, w in enumerate(widths) if w == COARSE_NX) < len(widths) - 1 and widths[-1] == FINE_NX
    scenario = doc["scenario"]
    assert scenario["domain"]["nx"] == FINE_NX
    assert scenario["sketch"] == nozzle_doc()["sketch"]
    _until(lambda: not live.parts.session.running, "the pause")


# ----------------------------------------------------------------------------- the page (real Chromium)

from test_page import browser, page, server_url  # noqa: E402,F401  (the page tests' real server and Chromium)


def test_page_names_the_grid_level_and_keeps_the_end_state_notice(page):
    nx = page.evaluate("window.shockslate.scenario.domain.nx")
    page.click("#settle-mode")
    page.evaluate("window.shockslate.send('run')")
    page.wait_for_function("/Grid level [0-9] of [0-9]/.test(document.querySelector('#settle-grid').textContent)",
                           timeout=120_000)
    text = page.locator("#settle-notice").inner_text()
    assert "end state" in text and "not the true time history" in text and "pseudo time" in text  # kept
    assert f"your grid of {nx} × " in text
    levels = len(settle.coarse_nx(nx, settle.DEFAULT_LEVELS))  # 3 at the built-in's 320 cells: 80, 160, 320
    page.wait_for_function(f"/Grid level {levels} of {levels}: your grid/"
                           ".test(document.querySelector('#settle-grid').textContent)",
                           timeout=120_000)  # then the user's own grid, named as such
    assert page.evaluate("window.shockslate.scenario.domain.nx") == nx  # the resolution stays the user's
    page.evaluate("window.shockslate.send('pause')")
    page.click("#settle-mode")  # off again: no notice, no level
    page.locator("#settle-notice").wait_for(state="hidden", timeout=60_000)
