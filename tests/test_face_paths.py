"""The face kernels as changed for speed (HLLC forming one star state, the edge fills over the border only, the wave
rate in the last stage only, the van Leer limiters with HLLC or HLL in sweeps of their own that choose per face by
selection and skip the wall normals on face rows far from walls), bit for bit against the kernels as they were
before; and solver/face_paths.py's runs of faces beside walls.

The reference below is a verbatim copy of the earlier kernels (kernels._slope, _riemann_flux, _reflect, _face,
x_face_fluxes, y_face_fluxes, fill_open_edges, fill_pressure_edges), compiled serial and uncached: every face
through the general stencil, both HLLC star states formed, the edge fills visiting the whole array. The new paths
must give the same numbers exactly (np.array_equal), for every limiter and flux, with both shock-mark bits, on a
grid with drawn walls (cut cells), held cells (reservoir, ambient and open edges) and shocks. Bit-identity to the
earlier kernels is the check (common practice for a pure speed change, no outside source needed: the scheme's
own validation against Toro and others lives in test_riemann, test_numerics and test_shock_switch).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from numba import njit

from shockslate.solver import cut_cells, face_paths, kernels
from shockslate.solver.domain import Domain
from shockslate.solver.kernels import LIM_SHOCK_FACE, MARK_HLL, MARK_MINMOD  # noqa: F401 (read by the reference)
from shockslate.solver.numerics import (FLUX_HLL, FLUX_HLLC, FLUX_RUSANOV, FLUXES, LIM_FIRST_ORDER, LIM_MC,
                                        LIM_MINMOD, LIM_VAN_LEER, LIM_VAN_LEER_SHOCK_MINMOD, LIMITERS)
from shockslate.solver.scenario import build_simulation, load_builtin
from shockslate.solver.simulation import Edges, Setup, Simulation

OPEN = kernels.OPEN
FLUID = kernels.FLUID
AMBIENT = kernels.AMBIENT
_REF_INLINE = dict(error_model="numpy", inline="always")
_REF = dict(error_model="numpy")

# ------------------------------------------------------------------ the earlier kernels, verbatim (serial)
@njit(**_REF_INLINE)
def _slope(dl, dr, limiter):
    """Limited slope from the left and right differences (MUSCL)."""
    if limiter == LIM_FIRST_ORDER:
        return 0.0
    prod = dl * dr
    if limiter == LIM_MINMOD:
        return (dl if abs(dl) < abs(dr) else dr) if prod > 0.0 else 0.0
    if limiter == LIM_VAN_LEER or limiter == LIM_VAN_LEER_SHOCK_MINMOD:  # the latter's shock faces: LIM_SHOCK_FACE
        return 2.0 * prod / (dl + dr) if prod > 0.0 else 0.0
    # monotonised central (van Leer 1977)
    m = min(2.0 * abs(dl), 2.0 * abs(dr), 0.5 * abs(dl + dr))
    return math.copysign(m, dl) if prod > 0.0 else 0.0


@njit(**_REF_INLINE)
def _riemann_flux(rl, ul, vl, pl, rr, ur, vr, pr, gamma, flux):
    """Numerical flux normal to a face; u is the normal and v the tangential velocity."""
    gm1 = gamma - 1.0
    al = math.sqrt(gamma * pl / rl)
    ar = math.sqrt(gamma * pr / rr)
    el = pl / gm1 + 0.5 * rl * (ul * ul + vl * vl)
    er = pr / gm1 + 0.5 * rr * (ur * ur + vr * vr)
    fl0 = rl * ul
    fl1 = fl0 * ul + pl
    fl2 = fl0 * vl
    fl3 = ul * (el + pl)
    fr0 = rr * ur
    fr1 = fr0 * ur + pr
    fr2 = fr0 * vr
    fr3 = ur * (er + pr)
    if flux == FLUX_RUSANOV:
        s = max(abs(ul) + al, abs(ur) + ar)
        return (0.5 * (fl0 + fr0) - 0.5 * s * (rr - rl),
                0.5 * (fl1 + fr1) - 0.5 * s * (fr0 - fl0),
                0.5 * (fl2 + fr2) - 0.5 * s * (rr * vr - rl * vl),
                0.5 * (fl3 + fr3) - 0.5 * s * (er - el))
    # Davis wave-speed estimates (Toro 2009, sec. 10.5.1)
    sl = min(ul - al, ur - ar)
    sr = max(ul + al, ur + ar)
    if flux == FLUX_HLL:
        slm = min(sl, 0.0)
        srp = max(sr, 0.0)
        inv = 1.0 / (srp - slm)
        sls = slm * srp
        return ((srp * fl0 - slm * fr0 + sls * (rr - rl)) * inv,
                (srp * fl1 - slm * fr1 + sls * (fr0 - fl0)) * inv,
                (srp * fl2 - slm * fr2 + sls * (rr * vr - rl * vl)) * inv,
                (srp * fl3 - slm * fr3 + sls * (er - el)) * inv)
    # HLLC (Toro, Spruce and Speares 1994; Toro 2009, sec. 10.4)
    dl = rl * (sl - ul)
    dr = rr * (sr - ur)
    ss = (pr - pl + ul * dl - ur * dr) / (dl - dr)
    cl = dl / (sl - ss)
    cr = dr / (sr - ss)
    esl = cl * (el / rl + (ss - ul) * (ss + pl / dl))
    esr = cr * (er / rr + (ss - ur) * (ss + pr / dr))
    fsl0 = fl0 + sl * (cl - rl)
    fsl1 = fl1 + sl * (cl * ss - fl0)
    fsl2 = fl2 + sl * (cl * vl - rl * vl)
    fsl3 = fl3 + sl * (esl - el)
    fsr0 = fr0 + sr * (cr - rr)
    fsr1 = fr1 + sr * (cr * ss - fr0)
    fsr2 = fr2 + sr * (cr * vr - rr * vr)
    fsr3 = fr3 + sr * (esr - er)
    left = sl >= 0.0
    star_left = ss >= 0.0
    right = sr <= 0.0
    f0 = fl0 if left else (fsl0 if star_left else (fr0 if right else fsr0))
    f1 = fl1 if left else (fsl1 if star_left else (fr1 if right else fsr1))
    f2 = fl2 if left else (fsl2 if star_left else (fr2 if right else fsr2))
    f3 = fl3 if left else (fsl3 if star_left else (fr3 if right else fsr3))
    return f0, f1, f2, f3


@njit(**_REF)
def _reflect(n, t, mn, mt):
    """Velocity (n, t) reflected about a wall whose unit normal is (mn, mt)."""
    d = 2.0 * (n * mn + t * mt)
    return n - d * mn, t - d * mt


@njit(**_REF_INLINE)
def _face(ra, rb, rc, rd, na, nb, nc, nd, ta, tb, tc, td, pa, pb, pc, pd,
          mna, mta, mnb, mtb, mnc, mtc, mnd, mtd, gamma, limiter, flux):
    """Flux through the face between cells b and c of the stencil a | b || c | d.

    n is the velocity normal to the face, t the tangential one; (mn, mt) is the unit normal of a
    wall cell in the same frame and (0, 0) for any other cell. A wall cell stands for the mirror image of the gas beside it,
    reflected about the wall's own orientation (so a staircase of cells behaves like the inclined
    wall it approximates). Where the wall normal is the face normal, the face carries pressure
    only, and mass and energy are conserved to round-off.
    """
    wa = mna * mna + mta * mta > 0.5
    wb = mnb * mnb + mtb * mtb > 0.5
    wc = mnc * mnc + mtc * mtc > 0.5
    wd = mnd * mnd + mtd * mtd > 0.5
    # stencil of cell b, its wall neighbours replaced by b's mirror image
    rna, rta = _reflect(nb, tb, mna, mta)
    rnc, rtc = _reflect(nb, tb, mnc, mtc)
    ra_b = rb if wa else ra
    na_b = rna if wa else na
    ta_b = rta if wa else ta
    pa_b = pb if wa else pa
    rc_b = rb if wc else rc
    nc_b = rnc if wc else nc
    tc_b = rtc if wc else tc
    pc_b = pb if wc else pc
    # stencil of cell c
    rnb, rtb = _reflect(nc, tc, mnb, mtb)
    rnd, rtd = _reflect(nc, tc, mnd, mtd)
    rb_c = rc if wb else rb
    nb_c = rnb if wb else nb
    tb_c = rtb if wb else tb
    pb_c = pc if wb else pb
    rd_c = rc if wd else rd
    nd_c = rnd if wd else nd
    td_c = rtd if wd else td
    pd_c = pc if wd else pd

    # a face in a shock (LIM_SHOCK_FACE) limits pressure and normal velocity by minmod, density and the tangential
    # velocity (what contacts and shear layers carry) by van Leer
    shock_face = limiter == LIM_SHOCK_FACE
    lim_rt = LIM_VAN_LEER if shock_face else limiter
    lim_np = LIM_MINMOD if shock_face else limiter
    rl = rb + 0.5 * _slope(rb - ra_b, rc_b - rb, lim_rt)
    nl = nb + 0.5 * _slope(nb - na_b, nc_b - nb, lim_np)
    tl = tb + 0.5 * _slope(tb - ta_b, tc_b - tb, lim_rt)
    pl = pb + 0.5 * _slope(pb - pa_b, pc_b - pb, lim_np)
    rr = rc - 0.5 * _slope(rc - rb_c, rd_c - rc, lim_rt)
    nr = nc - 0.5 * _slope(nc - nb_c, nd_c - nc, lim_np)
    tr = tc - 0.5 * _slope(tc - tb_c, td_c - tc, lim_rt)
    pr = pc - 0.5 * _slope(pc - pb_c, pd_c - pc, lim_np)

    # positivity: fall back to first order at this face
    bad = (rl <= 0.0) or (pl <= 0.0) or (rr <= 0.0) or (pr <= 0.0)
    rl = rb if bad else rl
    nl = nb if bad else nl
    tl = tb if bad else tl
    pl = pb if bad else pl
    rr = rc if bad else rr
    nr = nc if bad else nr
    tr = tc if bad else tr
    pr = pc if bad else pr

    # a wall on one side shows the mirror image of the other side
    mnl, mtl = _reflect(nr, tr, mnb, mtb)
    mnr, mtr = _reflect(nl, tl, mnc, mtc)
    rl2 = rr if wb else rl
    nl2 = mnl if wb else nl
    tl2 = mtl if wb else tl
    pl2 = pr if wb else pl
    rr2 = rl if wc else rr
    nr2 = mnr if wc else nr
    tr2 = mtr if wc else tr
    pr2 = pl if wc else pr

    f0, f1, f2, f3 = _riemann_flux(rl2, nl2, tl2, pl2, rr2, nr2, tr2, pr2, gamma, flux)
    aligned = (wb and abs(mnb) == 1.0) or (wc and abs(mnc) == 1.0)
    both = wb and wc
    f0 = 0.0 if (aligned or both) else f0
    f1 = 0.0 if both else f1
    f2 = 0.0 if (aligned or both) else f2
    f3 = 0.0 if (aligned or both) else f3
    return f0, f1, f2, f3


@njit(**_REF)
def x_face_fluxes(W, wall_nx, wall_ny, Fx, gamma, limiter, flux, hll_x):
    """Fluxes through every x-face of the interior rows.

    hll_x (padded, uint8) marks cells whose x-faces take the HLL flux instead of `flux` (bit MARK_HLL) or the
    minmod limiter instead of `limiter` (bit MARK_MINMOD; see `shock_switch`); a face switches when either cell
    beside it is marked.
    """
    ny = Fx.shape[1]
    nfaces = Fx.shape[2]
    for j in range(ny):
        jj = j + 2
        r = W[0, jj]
        u = W[1, jj]
        v = W[2, jj]
        p = W[3, jj]
        mx = wall_nx[jj]
        my = wall_ny[jj]
        sw = hll_x[jj]
        f0 = Fx[0, j]
        f1 = Fx[1, j]
        f2 = Fx[2, j]
        f3 = Fx[3, j]
        for f in range(nfaces):
            a = f
            b = f + 1
            c = f + 2
            d = f + 3
            mk = sw[b] | sw[c]
            fid = FLUX_HLL if (mk & MARK_HLL) else flux
            lim = LIM_SHOCK_FACE if (mk & MARK_MINMOD) else limiter
            m0, m1, m2, m3 = _face(r[a], r[b], r[c], r[d], u[a], u[b], u[c], u[d],
                                   v[a], v[b], v[c], v[d], p[a], p[b], p[c], p[d],
                                   mx[a], my[a], mx[b], my[b], mx[c], my[c],
                                   mx[d], my[d], gamma, lim, fid)
            f0[f] = m0
            f1[f] = m1
            f2[f] = m2
            f3[f] = m3


@njit(**_REF)
def y_face_fluxes(W, wall_nx, wall_ny, Gy, gamma, limiter, flux, hll_y):
    """Fluxes through every y-face of the interior columns; the inner loop stays along x.

    hll_y (padded, uint8) marks cells whose y-faces take the HLL flux or minmod (see `shock_switch`).
    """
    nfaces = Gy.shape[1]
    nx = Gy.shape[2]
    for f in range(nfaces):
        ra = W[0, f]
        rb = W[0, f + 1]
        rc = W[0, f + 2]
        rd = W[0, f + 3]
        ua = W[1, f]
        ub = W[1, f + 1]
        uc = W[1, f + 2]
        ud = W[1, f + 3]
        va = W[2, f]
        vb = W[2, f + 1]
        vc = W[2, f + 2]
        vd = W[2, f + 3]
        pa = W[3, f]
        pb = W[3, f + 1]
        pc = W[3, f + 2]
        pd = W[3, f + 3]
        xa = wall_nx[f]
        xb = wall_nx[f + 1]
        xc = wall_nx[f + 2]
        xd = wall_nx[f + 3]
        ya = wall_ny[f]
        yb = wall_ny[f + 1]
        yc = wall_ny[f + 2]
        yd = wall_ny[f + 3]
        sb = hll_y[f + 1]
        sc = hll_y[f + 2]
        g0 = Gy[0, f]
        g1 = Gy[1, f]
        g2 = Gy[2, f]
        g3 = Gy[3, f]
        for i in range(nx):
            ii = i + 2
            mk = sb[ii] | sc[ii]
            fid = FLUX_HLL if (mk & MARK_HLL) else flux
            lim = LIM_SHOCK_FACE if (mk & MARK_MINMOD) else limiter
            m0, mn, mt, m3 = _face(ra[ii], rb[ii], rc[ii], rd[ii], va[ii], vb[ii], vc[ii], vd[ii],
                                   ua[ii], ub[ii], uc[ii], ud[ii], pa[ii], pb[ii], pc[ii], pd[ii],
                                   ya[ii], xa[ii], yb[ii], xb[ii],
                                   yc[ii], xc[ii], yd[ii], xd[ii], gamma, lim, fid)
            g0[i] = m0
            g1[i] = mt
            g2[i] = mn
            g3[i] = m3


@njit(**_REF)
def fill_open_edges(U, W, kind):
    """Zero-gradient outflow: open ghost cells copy the nearest interior cell."""
    nyp = kind.shape[0]
    nxp = kind.shape[1]
    for jj in range(nyp):
        for ii in range(nxp):
            if 2 <= jj < nyp - 2 and 2 <= ii < nxp - 2:
                continue
            if kind[jj, ii] != OPEN:
                continue
            sj = min(max(jj, 2), nyp - 3)
            si = min(max(ii, 2), nxp - 3)
            for c in range(4):
                U[c, jj, ii] = U[c, sj, si]
                W[c, jj, ii] = W[c, sj, si]


@njit(**_REF)
def fill_pressure_edges(U, W, kind, rho_amb, p_amb, gamma):
    """Ambient edges as a characteristic pressure boundary (Thompson 1987; Poinsot and Lele 1992).

    Each ambient ghost cell on the domain edge takes a boundary state built from the nearest
    interior cell and the ambient state, by the sign of the outward normal velocity un and the
    sound speed a inside:
      supersonic outflow (un >= a): everything from inside;
      subsonic outflow (0 <= un < a): the ambient static pressure, with the entropy and the
        outgoing Riemann invariant un + 2a/(gamma - 1) from inside (tangential velocity too);
      inflow (un < 0): the ambient state taken as a stagnation state (p_amb, rho_amb), expanded
        isentropically to the inside static pressure (at most p_amb), entering along the normal.
    A uniform subsonic stream at the ambient pressure therefore leaves without a reflection,
    where a ghost held at rest would stagnate it. Painted ambient cells inside the domain and
    ghost cells beside a non-gas cell keep the held state.
    """
    nyp = kind.shape[0]
    nxp = kind.shape[1]
    gm1 = gamma - 1.0
    a0sq = gamma * p_amb / rho_amb
    for jj in range(nyp):
        for ii in range(nxp):
            if 2 <= jj < nyp - 2 and 2 <= ii < nxp - 2:
                continue
            if kind[jj, ii] != AMBIENT:
                continue
            sj = min(max(jj, 2), nyp - 3)
            si = min(max(ii, 2), nxp - 3)
            if kind[sj, si] != FLUID:
                continue
            if ii < 2:
                ex, ey = -1.0, 0.0
            elif ii >= nxp - 2:
                ex, ey = 1.0, 0.0
            elif jj < 2:
                ex, ey = 0.0, -1.0
            else:
                ex, ey = 0.0, 1.0
            r = W[0, sj, si]
            u = W[1, sj, si]
            v = W[2, sj, si]
            p = W[3, sj, si]
            if not (r > 0.0 and p > 0.0):
                continue
            a = math.sqrt(gamma * p / r)
            un = u * ex + v * ey
            ut = -u * ey + v * ex
            if un >= a:
                rb, unb, utb, pb = r, un, ut, p
            elif un >= 0.0:
                pb = p_amb
                rb = r * (pb / p) ** (1.0 / gamma)
                ab = math.sqrt(gamma * pb / rb)
                unb = un + 2.0 * (a - ab) / gm1
                utb = ut
            else:
                pb = min(p, p_amb)
                rb = rho_amb * (pb / p_amb) ** (1.0 / gamma)
                absq = gamma * pb / rb
                unb = -math.sqrt(max(2.0 * (a0sq - absq) / gm1, 0.0))
                utb = 0.0
            ub = unb * ex - utb * ey
            vb = unb * ey + utb * ex
            W[0, jj, ii] = rb
            W[1, jj, ii] = ub
            W[2, jj, ii] = vb
            W[3, jj, ii] = pb
            U[0, jj, ii] = rb
            U[1, jj, ii] = rb * ub
            U[2, jj, ii] = rb * vb
            U[3, jj, ii] = pb / gm1 + 0.5 * rb * (ub * ub + vb * vb)


# ---------------------------------------------------------------------------------------------- the checks
PAIRS = [(lim.kernel_id, fx.kernel_id) for lim in LIMITERS.values() for fx in FLUXES.values()]
PAIRS += [(LIM_FIRST_ORDER, fx.kernel_id) for fx in FLUXES.values()]


@pytest.fixture(scope="module")
def nozzle():
    """A nozzle starting up (axisymmetric, drawn walls with cut cells, a reservoir, ambient and open edges), run
    until its starting shock is inside: every kind of face the sweeps meet."""
    sim = build_simulation(load_builtin("nozzle_start_up"), nx=120)
    sim.advance(60)
    return sim


def _reference_fluxes(sim, lim, flux, hll_x, hll_y):
    Fx = np.full_like(sim.Fx, np.nan)
    Gy = np.full_like(sim.Gy, np.nan)
    gamma = sim.setup.gas.gamma
    x_face_fluxes(sim.W, sim._wall_nx, sim._wall_ny, Fx, gamma, lim, flux, hll_x)
    y_face_fluxes(sim.W, sim._wall_nx, sim._wall_ny, Gy, gamma, lim, flux, hll_y)
    return Fx, Gy


def _new_fluxes(sim, lim, flux, hll_x, hll_y):
    Fx = np.full_like(sim.Fx, np.nan)
    Gy = np.full_like(sim.Gy, np.nan)
    kernels.x_face_fluxes(sim.W, sim._wall_nx, sim._wall_ny, Fx, sim.setup.gas.gamma, lim, flux, hll_x,
                          sim._face_paths)
    kernels.y_face_fluxes(sim.W, sim._wall_nx, sim._wall_ny, Gy, sim.setup.gas.gamma, lim, flux, hll_y,
                          sim._face_paths)
    return Fx, Gy


def test_the_nozzle_holds_every_kind_of_face(nozzle):
    # The comparisons below mean something only if the grid has both paths, cut cells, held cells and shocks.
    paths = nozzle._face_paths
    assert paths.y_rows_plain.any() and not paths.y_rows_plain.all()
    assert paths.x_rows_mid_plain.any() and not paths.x_rows_mid_plain.all()
    assert paths.x_plain.any() and not paths.x_plain.all()
    assert paths.y_plain.any() and not paths.y_plain.all()
    assert 0.0 < paths.general_face_share < 0.5
    assert nozzle._cut_cells.groups > 0
    assert (nozzle.mask == kernels.RESERVOIR).any()
    hx, hy = np.zeros_like(nozzle._hll_x), np.zeros_like(nozzle._hll_y)
    kernels.shock_switch(nozzle.W, nozzle.kind, hx, hy, kernels.SHOCK_PRESSURE_RATIO, MARK_HLL | MARK_MINMOD)
    for marks in (hx, hy):
        assert (marks & MARK_HLL).any() and (marks & MARK_MINMOD).any()


@pytest.mark.parametrize("lim,flux", PAIRS)
def test_face_fluxes_bit_identical_for_every_limiter_and_flux(nozzle, lim, flux):
    rng = np.random.default_rng(lim * 10 + flux)
    hx, hy = np.zeros_like(nozzle._hll_x), np.zeros_like(nozzle._hll_y)
    kernels.shock_switch(nozzle.W, nozzle.kind, hx, hy, kernels.SHOCK_PRESSURE_RATIO, MARK_HLL | MARK_MINMOD)
    # the marks of the flow's shocks, none at all, and marks scattered over every kind of face (walls, cut cells)
    scattered = [rng.integers(0, 4, hx.shape).astype(np.uint8) * (rng.random(hx.shape) < 0.2) for _ in range(2)]
    for mx, my in ((hx, hy), (np.zeros_like(hx), np.zeros_like(hy)), scattered):
        ref = _reference_fluxes(nozzle, lim, flux, mx, my)
        new = _new_fluxes(nozzle, lim, flux, mx, my)
        for a, b in zip(ref, new):
            assert np.isfinite(a).all()
            assert np.array_equal(a, b)


@pytest.mark.parametrize("flux", [FLUX_HLLC, FLUX_HLL, FLUX_RUSANOV])
def test_riemann_flux_bit_identical_on_every_wave_pattern(flux):
    # Subsonic, supersonic both ways, strong jumps, near-vacuum and stationary contacts: every region of HLLC.
    rng = np.random.default_rng(7)
    n = 20000
    rl, rr = 10.0 ** rng.uniform(-3, 1, n), 10.0 ** rng.uniform(-3, 1, n)
    pl, pr = 10.0 ** rng.uniform(2, 7, n), 10.0 ** rng.uniform(2, 7, n)
    ul, ur = rng.uniform(-3000, 3000, n), rng.uniform(-3000, 3000, n)
    vl, vr = rng.uniform(-500, 500, n), rng.uniform(-500, 500, n)
    ur[:1000] = ul[:1000]
    pr[:1000] = pl[:1000]
    a = _all_fluxes(_ref_riemann, rl, ul, vl, pl, rr, ur, vr, pr, flux)
    b = _all_fluxes(_new_riemann, rl, ul, vl, pl, rr, ur, vr, pr, flux)
    assert np.isfinite(a).all()
    assert np.array_equal(a, b)
    sl = np.minimum(ul - np.sqrt(1.4 * pl / rl), ur - np.sqrt(1.4 * pr / rr))
    sr = np.maximum(ul + np.sqrt(1.4 * pl / rl), ur + np.sqrt(1.4 * pr / rr))
    assert (sl >= 0).sum() > 100 and (sr <= 0).sum() > 100 and ((sl < 0) & (sr > 0)).sum() > 100


@njit(**_REF)
def _ref_riemann(rl, ul, vl, pl, rr, ur, vr, pr, flux, out):
    for k in range(rl.size):
        out[:, k] = _riemann_flux(rl[k], ul[k], vl[k], pl[k], rr[k], ur[k], vr[k], pr[k], 1.4, flux)


@njit(**_REF)
def _new_riemann(rl, ul, vl, pl, rr, ur, vr, pr, flux, out):
    for k in range(rl.size):
        out[:, k] = kernels._riemann_flux(rl[k], ul[k], vl[k], pl[k], rr[k], ur[k], vr[k], pr[k], 1.4, flux)


def _all_fluxes(kernel, *args):
    out = np.zeros((4, args[0].size))
    kernel(*args, out)
    return out


@pytest.mark.parametrize("limiter", ["van_leer", "van_leer_shock_minmod"])
def test_steps_bit_identical_to_the_reference_sweeps(limiter):
    # Whole steps (shock marks, reservoir feed, cut cells, update, edge fills) with the new kernels against the
    # same steps with every face through the reference kernels.
    doc = load_builtin("nozzle_start_up")
    doc = doc.model_copy(update={"numerics": doc.numerics.model_copy(update={"limiter": limiter})})
    new, old = build_simulation(doc, nx=80), build_simulation(doc, nx=80)

    def reference_stage_fluxes(res, gamma, lim, flux, feed_relax=1.0):
        kernels.feed_reservoir_edge(old.U, old.W, old.kind, old._feed_j, old._feed_i, res[0], res[3], gamma,
                                    feed_relax)
        x_face_fluxes(old.W, old._wall_nx, old._wall_ny, old.Fx, gamma, lim, flux, old._hll_x)
        y_face_fluxes(old.W, old._wall_nx, old._wall_ny, old.Gy, gamma, lim, flux, old._hll_y)
        cut_cells.reconstruct(old._cut_cells, old.W, old.kind, old.Fx, old.Gy, old._hll_x, old._hll_y, gamma, lim,
                              flux)

    old.stage_fluxes = reference_stage_fluxes
    for _ in range(60):
        assert new.step() == old.step()
    assert np.array_equal(new.U, old.U) and np.array_equal(new.W, old.W)
    assert (new._hll_x != 0).any() and (new._hll_y != 0).any()  # the marks of the starting shock took part


def test_the_next_time_step_is_set_by_the_state_after_the_step(nozzle):
    # Only the last stage computes the wave rate: it must be the largest (|u| + |v| + 2a) / dx of the gas after
    # the step (held cells' rate below it here), the quantity the time step is defined by.
    sim = build_simulation(load_builtin("nozzle_start_up"), nx=80)
    sim.advance(5)
    fluid = sim.kind == kernels.FLUID
    r, u, v, p = (sim.W[c][fluid] for c in range(4))
    rate = np.max((np.abs(u) + np.abs(v) + 2.0 * np.sqrt(sim.setup.gas.gamma * p / r)) * (1.0 / sim.domain.dx_m))
    assert sim._rate == max(rate, sim._held_rate)
    assert sim.dt_s == sim.setup.numerics.cfl / sim._rate


@pytest.mark.parametrize("edges", [Edges("open", "ambient", "ambient", "open"), Edges("ambient", "open", "wall",
                                                                                       "ambient")])
def test_edge_fills_bit_identical(edges):
    # The fills visit only the border cells now; on a random state they write exactly what the whole-array
    # reference writes, for open and ambient edges, inflow, subsonic and supersonic outflow alike.
    sim = Simulation(Setup(domain=Domain(0.0, 1.0, 0.0, 0.5, 30), edges=edges))
    rng = np.random.default_rng(3)
    shape = sim.domain.shape
    sim.set_primitive(rng.uniform(0.5, 2.0, shape), rng.uniform(-700, 700, shape), rng.uniform(-700, 700, shape),
                      rng.uniform(3e4, 3e5, shape))
    U_new, W_new = sim.U.copy(), sim.W.copy()
    U_ref, W_ref = sim.U.copy(), sim.W.copy()
    for U, W in ((U_new, W_new), (U_ref, W_ref)):  # a ghost band that differs from what the fill writes
        U[:, :2] = U[:, -2:] = W[:, :2] = W[:, -2:] = -1.0
        U[:, :, :2] = U[:, :, -2:] = W[:, :, :2] = W[:, :, -2:] = -1.0
    amb = sim._held_prim[kernels.AMBIENT]
    gamma = sim.setup.gas.gamma
    kernels.fill_open_edges(U_new, W_new, sim.kind)
    kernels.fill_pressure_edges(U_new, W_new, sim.kind, amb[0], amb[3], gamma)
    fill_open_edges(U_ref, W_ref, sim.kind)
    fill_pressure_edges(U_ref, W_ref, sim.kind, amb[0], amb[3], gamma)
    assert np.array_equal(U_new, U_ref) and np.array_equal(W_new, W_ref)
    assert (W_new[:, 5, :2] != -1.0).all() and (W_new[:, 5, -2:] != -1.0).all()  # both side bands were written


def test_face_runs_of_a_closed_box():
    # A box of walls, 12 x 6 cells: the two faces nearest each wall read a ghost wall cell (stencils of four
    # cells), every other face none; counted by hand.
    nx, ny = 12, 6
    sim = Simulation(Setup(domain=Domain(0.0, 1.0, 0.0, 0.5, nx), edges=Edges("wall", "wall", "wall", "wall")))
    paths = sim._face_paths
    assert paths.general_x_faces == 4 * ny and paths.general_y_faces == 4 * nx
    assert paths.faces == ny * (nx + 1) + (ny + 1) * nx
    row = slice(paths.x_ptr[2], paths.x_ptr[3])  # an x-face row: wall-side, plain, wall-side
    assert list(zip(paths.x_lo[row], paths.x_hi[row], paths.x_plain[row])) == [(0, 2, 0), (2, nx - 1, 1),
                                                                                (nx - 1, nx + 1, 0)]
    assert list(paths.y_plain[paths.y_ptr[0]:paths.y_ptr[1]]) == [0]  # the bottom face row reads the ghost walls
    assert list(paths.y_plain[paths.y_ptr[3]:paths.y_ptr[4]]) == [1]
    # face rows 0, 1 and ny - 1, ny read a ghost row of walls; the y sweep skips the wall normals on the others
    assert list(paths.y_rows_plain) == [0, 0] + [1] * (ny - 3) + [0, 0]
    assert list(paths.x_rows_mid_plain) == [1] * ny  # the side walls touch only faces 0, 1 and nx - 1, nx
