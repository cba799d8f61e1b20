"""The benchmark's baseline: the same scheme written as plain vectorised NumPy.

Planar, reflecting walls on all four edges, MUSCL (van Leer limiter) on primitive variables,
HLLC with Davis wave speeds and HLL on the faces across strong shocks (the solver's shock switch,
set once a step), SSP-RK2, CFL time step - the configuration `shockslate bench` times. It allocates temporaries per expression, as idiomatic NumPy does; that is the point of
the comparison. It is checked against the numba solver in tests/test_benchmark.py.
"""
from __future__ import annotations

import numpy as np

G = 2  # ghost cells


def _van_leer(dl: np.ndarray, dr: np.ndarray) -> np.ndarray:
    prod = dl * dr
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(prod > 0.0, 2.0 * prod / (dl + dr), 0.0)
    return s


#: The solver's threshold (solver.kernels.SHOCK_PRESSURE_RATIO).
SHOCK_PRESSURE_RATIO = 1.5


def _shock_switch(w: np.ndarray, ratio: float = SHOCK_PRESSURE_RATIO) -> tuple[np.ndarray, np.ndarray]:
    """(hll_x, hll_y) flags on the interior cells (ny, nx), as solver.kernels.shock_switch: a compressive
    five-cell pressure jump along x marks the cell's y-faces, along y its x-faces; cells outside count as
    the centre cell."""
    p, u, v = w[3], w[1], w[2]

    def window(q, axis):
        pad = [(0, 0), (0, 0)]
        pad[axis] = (2, 2)
        qp = np.pad(q, pad, constant_values=np.nan)
        n = q.shape[axis]
        parts = [np.take(qp, np.arange(k, k + n), axis=axis) for k in range(5)]
        return [np.where(np.isnan(a), q, a) for a in parts]

    px, py = window(p, 1), window(p, 0)
    ux, vy = window(u, 1), window(v, 0)
    jump_x = (np.max(px, axis=0) > ratio * np.min(px, axis=0)) & (ux[4] < ux[0])
    jump_y = (np.max(py, axis=0) > ratio * np.min(py, axis=0)) & (vy[4] < vy[0])
    return jump_y, jump_x


def _hll(rl, ul, vl, pl, rr, ur, vr, pr, gamma):
    gm1 = gamma - 1.0
    al = np.sqrt(gamma * pl / rl)
    ar = np.sqrt(gamma * pr / rr)
    el = pl / gm1 + 0.5 * rl * (ul * ul + vl * vl)
    er = pr / gm1 + 0.5 * rr * (ur * ur + vr * vr)
    fl = (rl * ul, rl * ul * ul + pl, rl * ul * vl, ul * (el + pl))
    fr = (rr * ur, rr * ur * ur + pr, rr * ur * vr, ur * (er + pr))
    slm = np.minimum(np.minimum(ul - al, ur - ar), 0.0)
    srp = np.maximum(np.maximum(ul + al, ur + ar), 0.0)
    inv = 1.0 / (srp - slm)
    sls = slm * srp
    jump = (rr - rl, fr[0] - fl[0], rr * vr - rl * vl, er - el)
    return [(srp * fl[k] - slm * fr[k] + sls * jump[k]) * inv for k in range(4)]


def _hllc(rl, ul, vl, pl, rr, ur, vr, pr, gamma):
    gm1 = gamma - 1.0
    al = np.sqrt(gamma * pl / rl)
    ar = np.sqrt(gamma * pr / rr)
    el = pl / gm1 + 0.5 * rl * (ul * ul + vl * vl)
    er = pr / gm1 + 0.5 * rr * (ur * ur + vr * vr)
    fl = (rl * ul, rl * ul * ul + pl, rl * ul * vl, ul * (el + pl))
    fr = (rr * ur, rr * ur * ur + pr, rr * ur * vr, ur * (er + pr))
    sl = np.minimum(ul - al, ur - ar)
    sr = np.maximum(ul + al, ur + ar)
    dl = rl * (sl - ul)
    dr = rr * (sr - ur)
    ss = (pr - pl + ul * dl - ur * dr) / (dl - dr)
    cl = dl / (sl - ss)
    cr = dr / (sr - ss)
    usl = (cl, cl * ss, cl * vl, cl * (el / rl + (ss - ul) * (ss + pl / dl)))
    usr = (cr, cr * ss, cr * vr, cr * (er / rr + (ss - ur) * (ss + pr / dr)))
    ul_ = (rl, rl * ul, rl * vl, el)
    ur_ = (rr, rr * ur, rr * vr, er)
    out = []
    for k in range(4):
        fsl = fl[k] + sl * (usl[k] - ul_[k])
        fsr = fr[k] + sr * (usr[k] - ur_[k])
        out.append(np.where(sl >= 0.0, fl[k], np.where(ss >= 0.0, fsl, np.where(sr <= 0.0, fr[k], fsr))))
    return out


def _mirror_ghosts(w: np.ndarray) -> None:
    """Reflecting walls on every edge: ghosts mirror the interior, normal velocity negated."""
    w[:, :, :G] = w[:, :, 2 * G - 1:G - 1:-1]
    w[1, :, :G] *= -1.0
    w[:, :, -G:] = w[:, :, -G - 1:-2 * G - 1:-1]
    w[1, :, -G:] *= -1.0
    w[:, :G, :] = w[:, 2 * G - 1:G - 1:-1, :]
    w[2, :G, :] *= -1.0
    w[:, -G:, :] = w[:, -G - 1:-2 * G - 1:-1, :]
    w[2, -G:, :] *= -1.0


def _primitive(u: np.ndarray, gamma: float) -> np.ndarray:
    rho = u[0]
    vx = u[1] / rho
    vy = u[2] / rho
    p = (gamma - 1.0) * (u[3] - 0.5 * rho * (vx * vx + vy * vy))
    return np.stack([rho, vx, vy, p])


def _residual(u: np.ndarray, gamma: float, dx: float, switch: tuple[np.ndarray, np.ndarray]) -> np.ndarray:
    w = _primitive(u, gamma)
    _mirror_ghosts(w)
    res = np.zeros_like(u)
    hx = np.pad(switch[0], G)  # padded like the arrays, zero in the ghosts
    hy = np.pad(switch[1], G)
    # x faces between columns G-1 .. nx+G-1 of the interior rows
    rows = slice(G, -G)
    wa, wb, wc, wd = (w[:, rows, k:w.shape[2] - 3 + k] for k in range(4))
    left = wb + 0.5 * _van_leer(wb - wa, wc - wb)
    right = wc - 0.5 * _van_leer(wc - wb, wd - wc)
    f = _hllc(left[0], left[1], left[2], left[3], right[0], right[1], right[2], right[3], gamma)
    fh = _hll(left[0], left[1], left[2], left[3], right[0], right[1], right[2], right[3], gamma)
    on = hx[rows, 1:-2] | hx[rows, 2:-1]
    f = [np.where(on, fh[k], f[k]) for k in range(4)]
    for k in range(4):
        res[k, rows, G:-G] -= (f[k][:, 1:] - f[k][:, :-1]) / dx
    # y faces: normal velocity is v
    cols = slice(G, -G)
    wa, wb, wc, wd = (w[:, k:w.shape[1] - 3 + k, cols] for k in range(4))
    left = wb + 0.5 * _van_leer(wb - wa, wc - wb)
    right = wc - 0.5 * _van_leer(wc - wb, wd - wc)
    g = _hllc(left[0], left[2], left[1], left[3], right[0], right[2], right[1], right[3], gamma)
    gh = _hll(left[0], left[2], left[1], left[3], right[0], right[2], right[1], right[3], gamma)
    on = hy[1:-2, cols] | hy[2:-1, cols]
    g = [np.where(on, gh[k], g[k]) for k in range(4)]
    g = [g[0], g[2], g[1], g[3]]
    for k in range(4):
        res[k, G:-G, cols] -= (g[k][1:, :] - g[k][:-1, :]) / dx
    return res


class NumpyBox:
    """A closed box of gas advanced by the NumPy scheme; U is (4, ny + 4, nx + 4) like the solver's."""

    def __init__(self, rho, u, v, p, dx_m: float, gamma: float = 1.4, cfl: float = 0.4):
        ny, nx = rho.shape
        self.gamma, self.dx, self.cfl = gamma, dx_m, cfl
        self.U = np.ones((4, ny + 2 * G, nx + 2 * G))
        e = p / (gamma - 1.0) + 0.5 * rho * (u * u + v * v)
        for k, q in enumerate((rho, rho * u, rho * v, e)):
            self.U[k, G:-G, G:-G] = q
        self.time_s = 0.0

    def dt(self) -> float:
        w = _primitive(self.U[:, G:-G, G:-G], self.gamma)
        c = np.sqrt(self.gamma * w[3] / w[0])
        return self.cfl * self.dx / float(np.max(np.abs(w[1]) + np.abs(w[2]) + 2.0 * c))

    def step(self) -> float:
        dt = self.dt()
        u0 = self.U.copy()
        switch = _shock_switch(_primitive(u0[:, G:-G, G:-G], self.gamma))
        u1 = u0 + dt * _residual(u0, self.gamma, self.dx, switch)
        self.U = 0.5 * u0 + 0.5 * (u1 + dt * _residual(u1, self.gamma, self.dx, switch))
        self.time_s += dt
        return dt

    def primitive(self):
        return tuple(_primitive(self.U, self.gamma)[:, G:-G, G:-G])
