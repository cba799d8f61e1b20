"""Every built-in scenario places its probes and stations where there is gas to measure (issue 'the first hour':
a built-in probe sat inside a wall and read nothing). Checked on the cells each scenario runs on by default."""
from __future__ import annotations

import numpy as np
import pytest

from shockslate.solver.kinds import CellKind
from shockslate.solver.scenario import build_simulation, builtin_names, load_builtin


@pytest.mark.parametrize("name", builtin_names())
def test_no_built_in_probe_or_station_lies_inside_a_wall(name):
    s = load_builtin(name)
    sim = build_simulation(s)
    dom = sim.domain
    for probe in s.probes:
        j, i = dom.cell_index(probe.x_m, probe.y_m)
        assert sim.mask[j, i] != CellKind.WALL, f"{name}: probe {probe.name!r} is inside a wall"
    for station in s.stations:
        (x0, y0), (x1, y1) = station.start_m, station.end_m
        t = np.linspace(0.0, 1.0, 201)
        cells = [dom.cell_index(x0 + f * (x1 - x0), y0 + f * (y1 - y0)) for f in t]
        gas = np.mean([sim.mask[j, i] != CellKind.WALL for j, i in cells])
        # nozzle stations reach a little into the wall on purpose (so the whole gas column counts)
        assert gas > 0.5, f"{name}: station {station.name!r} crosses gas over only {100 * gas:.0f} % of its length"
