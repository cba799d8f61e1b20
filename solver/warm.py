"""Compile (or load from the per-user cache) every solver kernel once, before anyone waits for a step.

numba compiles a kernel the first time it is called; a parallel kernel of this size takes several seconds, and
the whole set one to three minutes on a 2-core machine. Set-up (`shockslate warm`), the server at start and the
batch command before its clock starts call this, so nobody meets the compilation in the middle of a run.
"""
from __future__ import annotations

import time

from . import scenario as scn
from .fields import VIEWS, derived


def warm_kernels() -> float:
    """Build the default scenario and a planar one at a tiny resolution through the same path every run takes,
    step each twice and draw every view; returns the seconds taken."""
    start = time.perf_counter()
    for name in (scn.DEFAULT_SCENARIO, "shock_tube_reflection"):
        sim = scn.build_simulation(scn.load_builtin(name), nx=32)
        sim.step()
        sim.step()
        rho, u, v, p = sim.primitive()
        for view in VIEWS:
            derived(view, sim.setup.gas, rho, u, v, p, sim.domain.dx_m, sim.mask)
    return time.perf_counter() - start
