"""The benchmark's bare kernel: the product's scheme with nothing else, as fast as numba makes it here.

Planar, reflecting walls on all four edges as mirrored ghost cells, MUSCL (van Leer limiter) on primitive
variables, HLLC with Davis wave speeds and HLL on the faces across strong shocks (the solver's shock switch, set
once a step), SSP-RK2, CFL time step: the configuration `shockslate bench` times, with
no cell kinds, wall orientations, held cells, hand-back or run-time choice of limiter and flux. It is the yardstick
for `product_over_bare`: how much the product's generality costs. It is written the way
shared measurements found fastest (inlined helpers, branch-free HLLC, 1-D row views, inner loops along the
contiguous x axis in both sweeps, work arrays allocated once, numpy error model) and is checked equal to the
NumPy baseline, and so to the product, in tests/test_benchmark.py.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from shockslate.solver.kernels import SHOCK_PRESSURE_RATIO

G = 2  # ghost cells
_INLINE = dict(nogil=True, cache=True, error_model="numpy", inline="always")
_PARALLEL = dict(nogil=True, cache=True, error_model="numpy", parallel=True)


@njit(**_INLINE)
def _van_leer(dl, dr):
    prod = dl * dr
    return 2.0 * prod / (dl + dr) if prod > 0.0 else 0.0


@njit(**_INLINE)
def _hllc(rl, ul, vl, pl, rr, ur, vr, pr, gamma):
    """HLLC flux normal to a face (u normal, v tangential), Davis wave speeds; region picked without early exits."""
    gm1 = gamma - 1.0
    al = math.sqrt(gamma * pl / rl)
    ar = math.sqrt(gamma * pr / rr)
    el = pl / gm1 + 0.5 * rl * (ul * ul + vl * vl)
    er = pr / gm1 + 0.5 * rr * (ur * ur + vr * vr)
    sl = min(ul - al, ur - ar)
    sr = max(ul + al, ur + ar)
    dl = rl * (sl - ul)
    dr = rr * (sr - ur)
    ss = (pr - pl + ul * dl - ur * dr) / (dl - dr)
    left = ss >= 0.0
    # the side of the contact the face sees, and its outer wave
    r = rl if left else rr
    u = ul if left else ur
    v = vl if left else vr
    p = pl if left else pr
    e = el if left else er
    s = sl if left else sr
    d = dl if left else dr
    c = d / (s - ss)
    f0 = r * u
    f1 = r * u * u + p
    f2 = r * u * v
    f3 = u * (e + p)
    outside = (sl >= 0.0) if left else (sr <= 0.0)
    w = 0.0 if outside else s
    f0 += w * (c - r)
    f1 += w * (c * ss - r * u)
    f2 += w * (c * v - r * v)
    f3 += w * (c * (e / r + (ss - u) * (ss + p / d)) - e)
    return f0, f1, f2, f3


@njit(**_INLINE)
def _hll(rl, ul, vl, pl, rr, ur, vr, pr, gamma):
    """HLL flux with Davis wave speeds (Harten, Lax and van Leer 1983)."""
    gm1 = gamma - 1.0
    al = math.sqrt(gamma * pl / rl)
    ar = math.sqrt(gamma * pr / rr)
    el = pl / gm1 + 0.5 * rl * (ul * ul + vl * vl)
    er = pr / gm1 + 0.5 * rr * (ur * ur + vr * vr)
    slm = min(min(ul - al, ur - ar), 0.0)
    srp = max(max(ul + al, ur + ar), 0.0)
    inv = 1.0 / (srp - slm)
    sls = slm * srp
    f0 = (srp * rl * ul - slm * rr * ur + sls * (rr - rl)) * inv
    f1 = (srp * (rl * ul * ul + pl) - slm * (rr * ur * ur + pr) + sls * (rr * ur - rl * ul)) * inv
    f2 = (srp * rl * ul * vl - slm * rr * ur * vr + sls * (rr * vr - rl * vl)) * inv
    f3 = (srp * ul * (el + pl) - slm * ur * (er + pr) + sls * (er - el)) * inv
    return f0, f1, f2, f3


@njit(**_INLINE)
def _flux(rl, ul, vl, pl, rr, ur, vr, pr, gamma, hll):
    if hll:
        return _hll(rl, ul, vl, pl, rr, ur, vr, pr, gamma)
    return _hllc(rl, ul, vl, pl, rr, ur, vr, pr, gamma)


@njit(**_PARALLEL)
def _shock_switch(W, hll_x, hll_y, ratio):
    """As the solver's shock switch on a box with no walls inside: a compressive five-cell pressure jump along x
    marks a cell's y-faces (hll_y), along y its x-faces (hll_x); cells beyond the box count as the centre cell."""
    nyp, nxp = W.shape[1], W.shape[2]
    p, u, v = W[3], W[1], W[2]
    for jj in prange(nyp):
        for ii in range(nxp):
            hll_x[jj, ii] = 0
            hll_y[jj, ii] = 0
        if jj < G or jj >= nyp - G:
            continue
        for ii in range(G, nxp - G):
            pc = p[jj, ii]
            lo = pc
            hi = pc
            for di in range(-2, 3):
                i2 = ii + di
                q = p[jj, i2] if G <= i2 < nxp - G else pc
                lo = min(lo, q)
                hi = max(hi, q)
            ul = u[jj, ii - 2] if ii - 2 >= G else u[jj, ii]
            uh = u[jj, ii + 2] if ii + 2 < nxp - G else u[jj, ii]
            if hi > ratio * lo and uh < ul:
                hll_y[jj, ii] = 1
            lo = pc
            hi = pc
            for dj in range(-2, 3):
                j2 = jj + dj
                q = p[j2, ii] if G <= j2 < nyp - G else pc
                lo = min(lo, q)
                hi = max(hi, q)
            vl = v[jj - 2, ii] if jj - 2 >= G else v[jj, ii]
            vh = v[jj + 2, ii] if jj + 2 < nyp - G else v[jj, ii]
            if hi > ratio * lo and vh < vl:
                hll_x[jj, ii] = 1


@njit(**_PARALLEL)
def _primitive_and_ghosts(U, W, gamma):
    """W from U on the interior, then mirrored ghosts (normal velocity negated) on all four edges."""
    nyp, nxp = U.shape[1], U.shape[2]
    gm1 = gamma - 1.0
    for j in prange(G, nyp - G):
        u0, u1, u2, u3 = U[0, j], U[1, j], U[2, j], U[3, j]
        w0, w1, w2, w3 = W[0, j], W[1, j], W[2, j], W[3, j]
        for i in range(G, nxp - G):
            r = u0[i]
            vx = u1[i] / r
            vy = u2[i] / r
            w0[i] = r
            w1[i] = vx
            w2[i] = vy
            w3[i] = gm1 * (u3[i] - 0.5 * r * (vx * vx + vy * vy))
        for g in range(G):
            for k in range(4):
                sign = -1.0 if k == 1 else 1.0
                W[k, j, G - 1 - g] = sign * W[k, j, G + g]
                W[k, j, nxp - G + g] = sign * W[k, j, nxp - G - 1 - g]
    for g in range(G):
        for k in range(4):
            sign = -1.0 if k == 2 else 1.0
            for i in range(nxp):
                W[k, G - 1 - g, i] = sign * W[k, G + g, i]
                W[k, nyp - G + g, i] = sign * W[k, nyp - G - 1 - g, i]


@njit(**_PARALLEL)
def _x_fluxes(W, F, gamma, hll_x):
    ny, nf = F.shape[1], F.shape[2]
    for j in prange(ny):
        jj = j + G
        r, u, v, p = W[0, jj], W[1, jj], W[2, jj], W[3, jj]
        sw = hll_x[jj]
        f0, f1, f2, f3 = F[0, j], F[1, j], F[2, j], F[3, j]
        for f in range(nf):
            a, b, c, d = f, f + 1, f + 2, f + 3  # face f lies between padded cells f + 1 and f + 2
            rl = r[b] + 0.5 * _van_leer(r[b] - r[a], r[c] - r[b])
            ul = u[b] + 0.5 * _van_leer(u[b] - u[a], u[c] - u[b])
            vl = v[b] + 0.5 * _van_leer(v[b] - v[a], v[c] - v[b])
            pl = p[b] + 0.5 * _van_leer(p[b] - p[a], p[c] - p[b])
            rr = r[c] - 0.5 * _van_leer(r[c] - r[b], r[d] - r[c])
            ur = u[c] - 0.5 * _van_leer(u[c] - u[b], u[d] - u[c])
            vr = v[c] - 0.5 * _van_leer(v[c] - v[b], v[d] - v[c])
            pr = p[c] - 0.5 * _van_leer(p[c] - p[b], p[d] - p[c])
            m0, m1, m2, m3 = _flux(rl, ul, vl, pl, rr, ur, vr, pr, gamma, sw[b] != 0 or sw[c] != 0)
            f0[f] = m0
            f1[f] = m1
            f2[f] = m2
            f3[f] = m3


@njit(**_PARALLEL)
def _y_fluxes(W, H, gamma, hll_y):
    nf, nx = H.shape[1], H.shape[2]
    for f in prange(nf):
        sb, sc = hll_y[f + 1], hll_y[f + 2]
        ra, rb, rc, rd = W[0, f], W[0, f + 1], W[0, f + 2], W[0, f + 3]
        ua, ub, uc, ud = W[1, f], W[1, f + 1], W[1, f + 2], W[1, f + 3]
        va, vb, vc, vd = W[2, f], W[2, f + 1], W[2, f + 2], W[2, f + 3]
        pa, pb, pc, pd = W[3, f], W[3, f + 1], W[3, f + 2], W[3, f + 3]
        h0, h1, h2, h3 = H[0, f], H[1, f], H[2, f], H[3, f]
        for i in range(nx):
            k = i + G
            rl = rb[k] + 0.5 * _van_leer(rb[k] - ra[k], rc[k] - rb[k])
            ul = ub[k] + 0.5 * _van_leer(ub[k] - ua[k], uc[k] - ub[k])
            vl = vb[k] + 0.5 * _van_leer(vb[k] - va[k], vc[k] - vb[k])
            pl = pb[k] + 0.5 * _van_leer(pb[k] - pa[k], pc[k] - pb[k])
            rr = rc[k] - 0.5 * _van_leer(rc[k] - rb[k], rd[k] - rc[k])
            ur = uc[k] - 0.5 * _van_leer(uc[k] - ub[k], ud[k] - uc[k])
            vr = vc[k] - 0.5 * _van_leer(vc[k] - vb[k], vd[k] - vc[k])
            pr = pc[k] - 0.5 * _van_leer(pc[k] - pb[k], pd[k] - pc[k])
            m0, mn, mt, m3 = _flux(rl, vl, ul, pl, rr, vr, ur, pr, gamma,  # v is normal to a y-face
                                   sb[k] != 0 or sc[k] != 0)
            h0[i] = m0
            h1[i] = mt
            h2[i] = mn
            h3[i] = m3


@njit(**_PARALLEL)
def _update(U, U0, F, H, a, b, dt, inv_dx, gamma, row_rate):
    """U <- a*U0 + b*(U + dt*L(U)) on the interior, and each row's largest (|u| + |v| + 2c) / dx."""
    ny, nx = F.shape[1], H.shape[2]
    gm1 = gamma - 1.0
    for j in prange(ny):
        jj = j + G
        q0, q1, q2, q3 = U[0, jj], U[1, jj], U[2, jj], U[3, jj]
        s0, s1, s2, s3 = U0[0, jj], U0[1, jj], U0[2, jj], U0[3, jj]
        f0, f1, f2, f3 = F[0, j], F[1, j], F[2, j], F[3, j]
        hm0, hm1, hm2, hm3 = H[0, j], H[1, j], H[2, j], H[3, j]
        hp0, hp1, hp2, hp3 = H[0, j + 1], H[1, j + 1], H[2, j + 1], H[3, j + 1]
        rate = 0.0
        for i in range(nx):
            ii = i + G
            n0 = a * s0[ii] + b * (q0[ii] - dt * inv_dx * ((f0[i + 1] - f0[i]) + (hp0[i] - hm0[i])))
            n1 = a * s1[ii] + b * (q1[ii] - dt * inv_dx * ((f1[i + 1] - f1[i]) + (hp1[i] - hm1[i])))
            n2 = a * s2[ii] + b * (q2[ii] - dt * inv_dx * ((f2[i + 1] - f2[i]) + (hp2[i] - hm2[i])))
            n3 = a * s3[ii] + b * (q3[ii] - dt * inv_dx * ((f3[i + 1] - f3[i]) + (hp3[i] - hm3[i])))
            q0[ii] = n0
            q1[ii] = n1
            q2[ii] = n2
            q3[ii] = n3
            vx = n1 / n0
            vy = n2 / n0
            p = gm1 * (n3 - 0.5 * n0 * (vx * vx + vy * vy))
            rate = max(rate, (abs(vx) + abs(vy) + 2.0 * math.sqrt(gamma * p / n0)) * inv_dx)
        row_rate[j] = rate


class BareBox:
    """A closed box of gas advanced by the bare kernel; U is (4, ny + 4, nx + 4) like the solver's."""

    def __init__(self, rho, u, v, p, dx_m: float, gamma: float = 1.4, cfl: float = 0.4,
                 shock_ratio: float = SHOCK_PRESSURE_RATIO):
        ny, nx = rho.shape
        self.gamma, self.dx, self.cfl = gamma, dx_m, cfl
        self.U = np.ones((4, ny + 2 * G, nx + 2 * G))
        e = p / (gamma - 1.0) + 0.5 * rho * (u * u + v * v)
        for k, q in enumerate((rho, rho * u, rho * v, e)):
            self.U[k, G:-G, G:-G] = q
        self.U0 = self.U.copy()
        self.W = np.ones_like(self.U)
        self.F = np.zeros((4, ny, nx + 1))
        self.H = np.zeros((4, ny + 1, nx))
        self.row_rate = np.zeros(ny)
        self.hll_x = np.zeros(self.U.shape[1:], np.uint8)
        self.hll_y = np.zeros(self.U.shape[1:], np.uint8)
        self.shock_ratio = shock_ratio
        c = np.sqrt(gamma * p / rho)
        self.rate = float(np.max(np.abs(u) + np.abs(v) + 2.0 * c)) / dx_m
        self.time_s = 0.0

    def step(self) -> float:
        dt = self.cfl / self.rate
        self.U0[:] = self.U
        for stage, (a, b) in enumerate(((0.0, 1.0), (0.5, 0.5))):  # SSP-RK2 (Shu and Osher 1988)
            _primitive_and_ghosts(self.U, self.W, self.gamma)
            if stage == 0:  # the switch is set once a step, from the step's start
                _shock_switch(self.W, self.hll_x, self.hll_y, self.shock_ratio)
            _x_fluxes(self.W, self.F, self.gamma, self.hll_x)
            _y_fluxes(self.W, self.H, self.gamma, self.hll_y)
            _update(self.U, self.U0, self.F, self.H, a, b, dt, 1.0 / self.dx, self.gamma, self.row_rate)
        self.rate = float(self.row_rate.max())
        self.time_s += dt
        return dt

    def primitive(self):
        _primitive_and_ghosts(self.U, self.W, self.gamma)
        return tuple(self.W[k, G:-G, G:-G].copy() for k in range(4))
