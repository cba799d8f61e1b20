"""Numba kernels of settle mode: a time step per cell, the stage update that uses it, the residual.

Arrays are laid out as in solver/kernels.py (component-major, two ghost cells each side). The face
fluxes are the scheme's own (kernels.x_face_fluxes / y_face_fluxes); only the update differs: each
full gas cell advances by its own time step dt[jj, ii] instead of one step for all. In conservative
form a cell's steady state is where its flux balance vanishes, whatever step it takes, so the end
state is the one time-accurate stepping reaches; the way there is not a time history.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from .kernels import FLUID

_PARALLEL = dict(nogil=True, cache=True, error_model="numpy", parallel=True)


@njit(**_PARALLEL)
def local_time_steps(W, kind, cfl, inv_dx, gamma, dt, rate):
    """dt[jj, ii] = cfl / max over the cell and its four gas neighbours of (|u| + |v| + 2a) / dx.

    Local time stepping (Jameson, Schmidt and Turkel 1981) gives each cell the step its own wave
    speeds allow. Taking the neighbours' rates as well keeps a cell stable when a faster wave enters
    it through a face (common practice, no source for the exact form). Cells that are not gas get 0.
    `rate` is scratch of dt's shape: each gas cell's own rate, found once (one square root a cell),
    then the largest over the neighbours.
    """
    nyp = W.shape[1]
    nxp = W.shape[2]
    for jj in prange(nyp):
        for ii in range(nxp):
            r = W[0, jj, ii]
            p = W[3, jj, ii]
            c = math.sqrt(gamma * p / r) if (r > 0.0 and p > 0.0) else 0.0
            q = (abs(W[1, jj, ii]) + abs(W[2, jj, ii]) + 2.0 * c) * inv_dx
            rate[jj, ii] = q if kind[jj, ii] == FLUID else 0.0
    for jj in prange(nyp):
        for ii in range(nxp):
            dt[jj, ii] = 0.0
        if jj < 2 or jj >= nyp - 2:
            continue
        for ii in range(2, nxp - 2):
            if kind[jj, ii] != FLUID:
                continue
            m = max(max(rate[jj, ii], rate[jj + 1, ii]),
                    max(rate[jj - 1, ii], max(rate[jj, ii + 1], rate[jj, ii - 1])))
            dt[jj, ii] = cfl / m if m > 0.0 else 0.0


@njit(**_PARALLEL)
def update_stage_local(U, U0, W, Fx, Gy, kind, cut, a, b, dt, inv_dx, w_plus, w_minus, source,
                       gamma, rho_floor, p_floor, row_rate, row_floors, row_bad):
    """One SSP stage on full gas cells with a time step per cell: U <- a*U0 + b*(U + dt[cell]*L(U)).

    The same update as kernels.update_stage (same weights, floors and returned row figures) but for
    the per-cell dt array; cells flagged in `cut` are left to the cut-cell update.
    """
    ny = Fx.shape[1]
    nx = Gy.shape[2]
    gm1 = gamma - 1.0
    for j in prange(ny):
        jj = j + 2
        wp = w_plus[j]
        wm = w_minus[j]
        src = source[j]
        rate = 0.0
        floors = 0
        bad = 0
        for i in range(nx):
            ii = i + 2
            if kind[jj, ii] != FLUID or cut[jj, ii] != 0:
                continue
            h = dt[jj, ii]
            l0 = -((Fx[0, j, i + 1] - Fx[0, j, i]) + (wp * Gy[0, j + 1, i] - wm * Gy[0, j, i])) * inv_dx
            l1 = -((Fx[1, j, i + 1] - Fx[1, j, i]) + (wp * Gy[1, j + 1, i] - wm * Gy[1, j, i])) * inv_dx
            l2 = (-((Fx[2, j, i + 1] - Fx[2, j, i]) + (wp * Gy[2, j + 1, i] - wm * Gy[2, j, i])) * inv_dx
                  + src * W[3, jj, ii])
            l3 = -((Fx[3, j, i + 1] - Fx[3, j, i]) + (wp * Gy[3, j + 1, i] - wm * Gy[3, j, i])) * inv_dx
            n0 = a * U0[0, jj, ii] + b * (U[0, jj, ii] + h * l0)
            n1 = a * U0[1, jj, ii] + b * (U[1, jj, ii] + h * l1)
            n2 = a * U0[2, jj, ii] + b * (U[2, jj, ii] + h * l2)
            n3 = a * U0[3, jj, ii] + b * (U[3, jj, ii] + h * l3)
            if not (math.isfinite(n0) and math.isfinite(n1) and math.isfinite(n2) and math.isfinite(n3)):
                bad += 1
                U[0, jj, ii] = n0
                U[1, jj, ii] = n1
                U[2, jj, ii] = n2
                U[3, jj, ii] = n3
                continue
            if n0 < rho_floor:
                n0 = rho_floor
                n1 = 0.0
                n2 = 0.0
                floors += 1
            vx = n1 / n0
            vy = n2 / n0
            kin = 0.5 * n0 * (vx * vx + vy * vy)
            p = gm1 * (n3 - kin)
            if p < p_floor:
                p = p_floor
                n3 = p / gm1 + kin
                floors += 1
            U[0, jj, ii] = n0
            U[1, jj, ii] = n1
            U[2, jj, ii] = n2
            U[3, jj, ii] = n3
            W[0, jj, ii] = n0
            W[1, jj, ii] = vx
            W[2, jj, ii] = vy
            W[3, jj, ii] = p
            c = math.sqrt(gamma * p / n0)
            rate = max(rate, (abs(vx) + abs(vy) + 2.0 * c) * inv_dx)
        row_rate[j] = rate
        row_floors[j] = floors
        row_bad[j] = bad


@njit(**_PARALLEL)
def density_rates(U, U0, kind, dt, i_lo, i_hi):
    """(sum |drho|, sum |drho| / dt, sum rho) over the interior gas cells of columns i_lo <= i < i_hi
    (interior indices) with dt > 0: the change of the step just taken and its rate per cell."""
    nyp = U.shape[1]
    change = np.zeros(nyp)
    rate = np.zeros(nyp)
    total = np.zeros(nyp)
    for jj in prange(2, nyp - 2):
        c = 0.0
        q = 0.0
        t = 0.0
        for i in range(i_lo, i_hi):
            ii = i + 2
            h = dt[jj, ii]
            if kind[jj, ii] != FLUID or not (h > 0.0):
                continue
            d = abs(U[0, jj, ii] - U0[0, jj, ii])
            c += d
            q += d / h
            t += U[0, jj, ii]
        change[jj] = c
        rate[jj] = q
        total[jj] = t
    return change.sum(), rate.sum(), total.sum()
