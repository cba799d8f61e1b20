"""The benchmark's NumPy baseline must run the same scheme as the solver, or its ratio means nothing."""
from __future__ import annotations

import numpy as np

from shockslate.bench.solver_bench import _baseline_module, blast_initial, build_box


def test_numpy_baseline_matches_the_solver():
    # Same scheme, same data: the two agree to round-off (common practice, no source).
    nx, ny = 48, 24
    sim = build_box(nx, ny)
    box = _baseline_module().NumpyBox(*blast_initial(nx, ny), dx_m=2.0 / nx)
    for _ in range(15):
        dt_solver = sim.step()
        dt_numpy = box.step()
        assert dt_solver == np.float64(dt_numpy) or abs(dt_solver - dt_numpy) < 1e-12 * dt_solver
    for a, b in zip(sim.primitive(), box.primitive()):
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9 * np.abs(b).max())
    assert np.abs(sim.primitive()[1]).max() > 1.0  # the flow has moved


def test_bare_kernel_matches_the_solver():
    # The yardstick of product_over_bare must be the same scheme, or the ratio means nothing: same data,
    # same steps, agreement to round-off (common practice, no source).
    from shockslate.bench.bare_kernel import BareBox

    nx, ny = 48, 24
    sim = build_box(nx, ny)
    bare = BareBox(*blast_initial(nx, ny), dx_m=2.0 / nx)
    for _ in range(15):
        dt_solver = sim.step()
        dt_bare = bare.step()
        assert abs(dt_solver - dt_bare) <= 1e-12 * dt_solver
    for a, b in zip(sim.primitive(), bare.primitive()):
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-9 * np.abs(b).max())
    assert np.abs(bare.primitive()[1]).max() > 1.0  # the flow has moved


def test_settle_speedup_figures_on_a_small_duct():
    # `settle_speedup` of `shockslate bench --json` comes from measure_settle: both runs reach the same criterion
    # and end in the same steady state (the 0.5 % on mass flow and thrust); no timing is asserted.
    import math

    import numba

    from shockslate.bench.solver_bench import GOALS, measure_settle
    from shockslate.solver.scenario import parse_scenario

    from test_settle import duct_doc

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        fig = measure_settle(parse_scenario(duct_doc(80)), tolerance=1e-3, cap=1000.0)
    finally:
        numba.set_num_threads(before)
    assert GOALS["settle_speedup"] == 5.0
    assert fig["settle_settled"] and fig["time_accurate_settled"] and not fig["capped"]
    assert math.isfinite(fig["settle_speedup"]) and fig["settle_speedup"] > 0.0
    assert fig["coarse_levels"][0]["nx"] == 40 and fig["nx"] == 80
    assert fig["mass_flow_kg_s"]["largest_difference_fraction"] < 0.005
    assert fig["thrust_n"]["largest_difference_fraction"] < 0.005
    assert fig["settle_steps"] < fig["time_accurate_steps"]


def test_streaming_slowdown_compares_each_phase_with_the_phases_around_it():
    # bench --serve's slowdown figure: with the machine's speed drifting steadily (here 2 % a phase) and the tab
    # costing 5 %, each ratio to the mean of the phases just before and after is 0.95 exactly, where the ratio to
    # the phase before alone would read 0.969 (the drift taken for a gain). Common practice for interleaved
    # measurements, no source.
    from shockslate.bench.serve_bench import sandwich_ratios

    speed = [20.0 * (1.0 + 0.02 * k) for k in range(9)]  # phases A0 C0 A1 C1 ... A4
    alone, streaming = speed[0::2], [0.95 * s for s in speed[1::2]]
    ratios = sandwich_ratios(alone, streaming)
    assert len(ratios) == 4
    assert all(abs(r - 0.95) < 1e-12 for r in ratios)
    assert streaming[0] / alone[0] > 0.968  # what comparing with the phase before only would say
