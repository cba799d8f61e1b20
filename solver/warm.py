"""Compile (or load from the per-user cache) every solver kernel once, before anyone waits for a step.

numba compiles a kernel the first time it is called; a parallel kernel of this size takes several seconds, and
the whole set one to three minutes on a 2-core machine. Set-up (`shockslate warm`), the server at start and the
batch command before its clock starts call this, so nobody meets the compilation in the middle of a run.
"""
from __future__ import annotations

import time
from typing import Callable

from . import scenario as scn
from .fields import VIEWS, derived


#: The warm-up's stages in order: (name, what compiles, for the page and the console).
STAGES = (("geometry", "sketch to cells: cut-cell geometry, axisymmetric"),
          ("flux", "face fluxes and stage update, axisymmetric"),
          ("views", "derived views (Mach, pressure, ...)"),
          ("geometry_planar", "sketch to cells, planar"),
          ("flux_planar", "face fluxes and stage update, planar"),
          ("views_planar", "derived views, planar"))


def _warm_general_sweeps(sim) -> None:
    """The face sweeps for the limiters and fluxes the default scheme does not take (kernels.x_face_fluxes picks a
    kernel with the van Leer limiter fixed for the default): minmod with HLLC on the simulation's own arrays, whose
    fluxes the next step writes again."""
    from . import kernels
    from .numerics import FLUX_HLLC, LIM_MINMOD

    gamma = sim.setup.gas.gamma
    kernels.x_face_fluxes(sim.W, sim._wall_nx, sim._wall_ny, sim.Fx, gamma, LIM_MINMOD, FLUX_HLLC, sim._hll_x)
    kernels.y_face_fluxes(sim.W, sim._wall_nx, sim._wall_ny, sim.Gy, gamma, LIM_MINMOD, FLUX_HLLC, sim._hll_y)
    sim._fluxes_step = -1  # Fx and Gy no longer hold the last step's fluxes


def warm_kernels(progress: Callable[[int, int, str, str], None] | None = None) -> float:
    """Build the default scenario and a planar one at a tiny resolution through the same path every run takes,
    step each twice and draw every view; returns the seconds taken. progress(done, total, stage, label) is
    called before each stage (STAGES), so a page and a console can say what is compiling."""
    start = time.perf_counter()
    stages = iter(enumerate(STAGES))

    def next_stage() -> None:
        k, (name, label) = next(stages)
        if progress is not None:
            progress(k, len(STAGES), name, label)

    for name in (scn.DEFAULT_SCENARIO, "shock_tube_reflection"):
        next_stage()
        sim = scn.build_simulation(scn.load_builtin(name), nx=32)
        next_stage()
        sim.step()
        sim.step()
        _warm_general_sweeps(sim)
        next_stage()
        rho, u, v, p = sim.primitive()
        for view in VIEWS:
            derived(view, sim.setup.gas, rho, u, v, p, sim.domain.dx_m, sim.mask)
    return time.perf_counter() - start
