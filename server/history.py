"""Time histories of the probes and stations, kept by the server so that a tab opened later sees them too.

The runner records every status it computes (a few per second, also with no tab connected while
the scenario has probes or stations). Each history is bounded (`LIMIT` samples, the oldest dropped)
and starts again when the flow goes back in time (reset, a new mode, a loaded scenario). Recording
happens in the solver's thread and the `history` message is built on the event loop, so one small
lock guards the samples.
"""
from __future__ import annotations

import collections
import threading
from typing import Any

#: Samples kept per probe or station (about 8 minutes at 4 per second).
LIMIT = 2000
#: Numbers in one `history` message at most (about 2 MB of JSON): with many probes and stations every
#: k-th sample is sent (the newest always), so the message stays far below a tab's send queue limit.
MAX_MESSAGE_VALUES = 200_000
PROBE_KEYS = ("p_pa", "rho_kg_m3", "t_k", "u_m_s", "v_m_s", "mach")
STATION_KEYS = ("mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa")


class FlowHistory:
    def __init__(self, limit: int = LIMIT):
        self.limit = limit
        self._lock = threading.Lock()
        self._last_time_s = -1.0
        self._last_steps = -1
        self._probes: dict[str, collections.deque] = {}
        self._stations: dict[str, collections.deque] = {}

    def clear(self) -> None:
        with self._lock:
            self._probes.clear()
            self._stations.clear()
            self._last_time_s, self._last_steps = -1.0, -1

    def record(self, status: dict) -> None:
        """Add one sample per probe and station of a status; a repeat of the same instant adds nothing."""
        t, steps = status.get("time_s"), status.get("steps")
        if not isinstance(t, (int, float)) or not isinstance(steps, int):
            return
        with self._lock:
            if t < self._last_time_s or steps < self._last_steps:  # the flow started again
                self._probes.clear()
                self._stations.clear()
            elif steps == self._last_steps:
                return
            self._last_time_s, self._last_steps = t, steps
            for store, items, keys in ((self._probes, status.get("probes") or [], PROBE_KEYS),
                                       (self._stations, status.get("stations") or [], STATION_KEYS)):
                names = {item["name"] for item in items}
                for gone in [n for n in store if n not in names]:  # removed from the scenario
                    del store[gone]
                for item in items:
                    samples = store.setdefault(item["name"], collections.deque(maxlen=self.limit))
                    samples.append((t, *(item.get(k) for k in keys)))

    def message(self) -> dict:
        """The `history` message: per probe and station, columns of equal length, oldest first."""
        with self._lock:
            values = sum(len(v) * (1 + len(PROBE_KEYS)) for v in self._probes.values()) + \
                sum(len(v) * (1 + len(STATION_KEYS)) for v in self._stations.values())
            every = max(1, -(-values // MAX_MESSAGE_VALUES))  # ceiling division
            return {"type": "history", "limit": self.limit, "every": every,
                    "probes": {name: _columns(s, PROBE_KEYS, every) for name, s in self._probes.items()},
                    "stations": {name: _columns(s, STATION_KEYS, every) for name, s in self._stations.items()}}


def _columns(samples: collections.deque, keys: tuple[str, ...], every: int = 1) -> dict[str, list[Any]]:
    rows = list(samples)
    if every > 1:  # every k-th sample, counted back from the newest so that it is always sent
        rows = rows[::-1][::every][::-1]
    out: dict[str, list[Any]] = {"time_s": [r[0] for r in rows]}
    for k, key in enumerate(keys, start=1):
        out[key] = [r[k] for r in rows]
    return out
