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
