"""Probe and station histories kept by the server (server/history.py): bounded, restarted with the flow, thinned
for one message. Wiring checks; the values are whatever the status carried."""
from __future__ import annotations

from shockslate.server import history
from shockslate.server.history import FlowHistory


def status(t: float, steps: int, probes=("P1",), stations=("S1",)) -> dict:
    return {"time_s": t, "steps": steps,
            "probes": [{"name": n, "p_pa": 1e5 + steps, "rho_kg_m3": 1.2, "t_k": 300.0, "u_m_s": 1.0, "v_m_s": None,
                        "mach": 0.1} for n in probes],
            "stations": [{"name": n, "mass_flow_kg_s": 2.0, "thrust_n": 3.0, "mean_mach": 0.5,
                          "mean_pressure_pa": 1e5} for n in stations]}


def test_bounded_oldest_dropped_and_repeats_ignored():
    h = FlowHistory(limit=5)
    for k in range(8):
        h.record(status(k * 1e-3, k))
        h.record(status(k * 1e-3, k))  # the same instant again (a repeated paused status)
    msg = h.message()
    assert msg["type"] == "history" and msg["every"] == 1
    assert msg["probes"]["P1"]["time_s"] == [0.003, 0.004, 0.005, 0.006, 0.007]
    assert msg["probes"]["P1"]["p_pa"] == [1e5 + k for k in range(3, 8)] and msg["probes"]["P1"]["v_m_s"] == [None] * 5
    assert msg["stations"]["S1"]["mass_flow_kg_s"] == [2.0] * 5


def test_a_flow_that_starts_again_starts_the_history_again_and_removed_items_go():
    h = FlowHistory()
    for k in range(4):
        h.record(status(k * 1e-3, k))
    h.record(status(0.0, 0, probes=("P2",)))  # reset: time and steps went back
    msg = h.message()
    assert list(msg["probes"]) == ["P2"] and msg["probes"]["P2"]["time_s"] == [0.0]


def test_a_large_history_is_thinned_for_one_message_keeping_the_newest(monkeypatch):
    monkeypatch.setattr(history, "MAX_MESSAGE_VALUES", 700)
    h = FlowHistory(limit=1000)
    for k in range(200):
        h.record(status(k * 1e-3, k))  # 200 samples x (7 probe + 5 station columns) = 2400 values
    msg = h.message()
    assert msg["every"] == 4
    t = msg["probes"]["P1"]["time_s"]
    assert t[-1] == 0.199 and len(t) == 50 and len(msg["stations"]["S1"]["thrust_n"]) == 50
