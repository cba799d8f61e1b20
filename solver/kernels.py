"""Numba kernels of the finite-volume scheme: face fluxes, the stage update, edge fill.

Arrays are component-major and padded by two ghost cells on every side:
  U, U0, W : (4, ny + 4, nx + 4) conserved (rho, rho u, rho v, E) / primitive (rho, u, v, p)
  kind     : (ny + 4, nx + 4) uint8 cell kinds (solver.kinds.CellKind)
  wall_nx, wall_ny : (ny + 4, nx + 4) unit normal of each wall cell, (0, 0) elsewhere
  Fx       : (4, ny, nx + 1) x-face fluxes; face f lies left of interior cell f
  Gy       : (4, ny + 1, nx) y-face fluxes; face f lies below interior cell row f
Inner loops run along the contiguous x axis in both sweeps, on 1-D row views, so LLVM can
vectorise them; helpers are inlined and branch-free where it matters (see PERFORMANCE_NOTES).
Wall neighbours are replaced by the mirror state of the cell being reconstructed, and a face
with a wall on either side carries only the pressure flux: mass, tangential momentum and energy
flux through it are exactly zero, so a closed box conserves mass and energy to round-off.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from . import face_paths

FLUID = 0
WALL = 1
RESERVOIR = 2
AMBIENT = 4
OPEN = 5

# limiter and flux ids: one table in numerics.py names them
from .numerics import (FLUX_HLL, FLUX_HLLC, FLUX_RUSANOV, LIM_FIRST_ORDER, LIM_MC, LIM_MINMOD,  # noqa: E402
                       LIM_VAN_LEER, LIM_VAN_LEER_SHOCK_MINMOD)

_INLINE = dict(nogil=True, cache=True, error_model="numpy", inline="always")
_PARALLEL = dict(nogil=True, cache=True, error_model="numpy", parallel=True)
_SERIAL = dict(nogil=True, cache=True, error_model="numpy")


@njit(**_INLINE)
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


@njit(**_INLINE)
def _side_fluxes(rl, ul, vl, pl, rr, ur, vr, pr, gamma):
    """The sound speeds, total energies and physical fluxes of the two sides of a face:
    (al, ar, el, er, fl0, fl1, fl2, fl3, fr0, fr1, fr2, fr3)."""
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
    return al, ar, el, er, fl0, fl1, fl2, fl3, fr0, fr1, fr2, fr3


@njit(**_INLINE)
def _hll(rl, vl, el, fl0, fl1, fl2, fl3, rr, vr, er, fr0, fr1, fr2, fr3, sl, sr):
    """The HLL flux (Harten, Lax and van Leer 1983; Toro 2009, sec. 10.3) from the sides' states and fluxes
    and the wave speeds sl, sr."""
    slm = min(sl, 0.0)
    srp = max(sr, 0.0)
    inv = 1.0 / (srp - slm)
    sls = slm * srp
    return ((srp * fl0 - slm * fr0 + sls * (rr - rl)) * inv,
            (srp * fl1 - slm * fr1 + sls * (fr0 - fl0)) * inv,
            (srp * fl2 - slm * fr2 + sls * (rr * vr - rl * vl)) * inv,
            (srp * fl3 - slm * fr3 + sls * (er - el)) * inv)


@njit(**_INLINE)
def _hllc(rl, ul, vl, pl, el, fl0, fl1, fl2, fl3, rr, ur, vr, pr, er, fr0, fr1, fr2, fr3, sl, sr):
    """The HLLC flux (Toro, Spruce and Speares 1994; Toro 2009, sec. 10.4). Only the star state on the side of
    the contact the face sees is formed (the side's values picked first, without branches): the same operations
    as forming both and picking one, at half the cost."""
    dl = rl * (sl - ul)
    dr = rr * (sr - ur)
    ss = (pr - pl + ul * dl - ur * dr) / (dl - dr)
    star_left = ss >= 0.0
    r = rl if star_left else rr
    u = ul if star_left else ur
    v = vl if star_left else vr
    p = pl if star_left else pr
    e = el if star_left else er
    s = sl if star_left else sr
    d = dl if star_left else dr
    g0 = fl0 if star_left else fr0
    g1 = fl1 if star_left else fr1
    g2 = fl2 if star_left else fr2
    g3 = fl3 if star_left else fr3
    c = d / (s - ss)
    es = c * (e / r + (ss - u) * (ss + p / d))
    fs0 = g0 + s * (c - r)
    fs1 = g1 + s * (c * ss - g0)
    fs2 = g2 + s * (c * v - r * v)
    fs3 = g3 + s * (es - e)
    left = sl >= 0.0
    outer_right = sr <= 0.0 and not star_left
    f0 = fl0 if left else (fr0 if outer_right else fs0)
    f1 = fl1 if left else (fr1 if outer_right else fs1)
    f2 = fl2 if left else (fr2 if outer_right else fs2)
    f3 = fl3 if left else (fr3 if outer_right else fs3)
    return f0, f1, f2, f3


@njit(**_INLINE)
def _riemann_flux(rl, ul, vl, pl, rr, ur, vr, pr, gamma, flux):
    """Numerical flux normal to a face; u is the normal and v the tangential velocity."""
    al, ar, el, er, fl0, fl1, fl2, fl3, fr0, fr1, fr2, fr3 = _side_fluxes(rl, ul, vl, pl, rr, ur, vr, pr, gamma)
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
        return _hll(rl, vl, el, fl0, fl1, fl2, fl3, rr, vr, er, fr0, fr1, fr2, fr3, sl, sr)
    return _hllc(rl, ul, vl, pl, el, fl0, fl1, fl2, fl3, rr, ur, vr, pr, er, fr0, fr1, fr2, fr3, sl, sr)


@njit(**_SERIAL)
def _reflect(n, t, mn, mt):
    """Velocity (n, t) reflected about a wall whose unit normal is (mn, mt)."""
    d = 2.0 * (n * mn + t * mt)
    return n - d * mn, t - d * mt


@njit(**_INLINE)
def _mirrored_stencils(ra, rb, rc, rd, na, nb, nc, nd, ta, tb, tc, td, pa, pb, pc, pd,
                       mna, mta, mnb, mtb, mnc, mtc, mnd, mtd):
    """The stencils of cells b and c with their wall neighbours replaced by the mirror image of b / c (see _face):
    a, c seen from b, then b, d seen from c, each as (rho, n, t, p)."""
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
    return (ra_b, na_b, ta_b, pa_b, rc_b, nc_b, tc_b, pc_b, rb_c, nb_c, tb_c, pb_c, rd_c, nd_c, td_c, pd_c)


@njit(**_INLINE)
def _face_states(rl, nl, tl, pl, rr, nr, tr, pr, rb, nb, tb, pb, rc, nc, tc, pc, mnb, mtb, mnc, mtc):
    """The two states the Riemann problem of a face sees, from its reconstructed ones: first order where
    reconstruction left a non-positive density or pressure, the mirror image of the other side where a wall is."""
    wb = mnb * mnb + mtb * mtb > 0.5
    wc = mnc * mnc + mtc * mtc > 0.5
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
    return rl2, nl2, tl2, pl2, rr2, nr2, tr2, pr2


@njit(**_INLINE)
def _wall_face_flux(f0, f1, f2, f3, mnb, mtb, mnc, mtc):
    """A face with a wall on both sides carries nothing, one whose wall normal is the face normal pressure only."""
    wb = mnb * mnb + mtb * mtb > 0.5
    wc = mnc * mnc + mtc * mtc > 0.5
    aligned = (wb and abs(mnb) == 1.0) or (wc and abs(mnc) == 1.0)
    both = wb and wc
    f0 = 0.0 if (aligned or both) else f0
    f1 = 0.0 if both else f1
    f2 = 0.0 if (aligned or both) else f2
    f3 = 0.0 if (aligned or both) else f3
    return f0, f1, f2, f3


@njit(**_INLINE)
def _face(ra, rb, rc, rd, na, nb, nc, nd, ta, tb, tc, td, pa, pb, pc, pd,
          mna, mta, mnb, mtb, mnc, mtc, mnd, mtd, gamma, limiter, flux):
    """Flux through the face between cells b and c of the stencil a | b || c | d.

    n is the velocity normal to the face, t the tangential one; (mn, mt) is the unit normal of a
    wall cell in the same frame and (0, 0) for any other cell. A wall cell stands for the mirror image of the gas beside it,
    reflected about the wall's own orientation (so a staircase of cells behaves like the inclined
    wall it approximates). Where the wall normal is the face normal, the face carries pressure
    only, and mass and energy are conserved to round-off.
    """
    (ra_b, na_b, ta_b, pa_b, rc_b, nc_b, tc_b, pc_b,
     rb_c, nb_c, tb_c, pb_c, rd_c, nd_c, td_c, pd_c) = _mirrored_stencils(
        ra, rb, rc, rd, na, nb, nc, nd, ta, tb, tc, td, pa, pb, pc, pd, mna, mta, mnb, mtb, mnc, mtc, mnd, mtd)

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

    rl2, nl2, tl2, pl2, rr2, nr2, tr2, pr2 = _face_states(rl, nl, tl, pl, rr, nr, tr, pr, rb, nb, tb, pb,
                                                          rc, nc, tc, pc, mnb, mtb, mnc, mtc)
    f0, f1, f2, f3 = _riemann_flux(rl2, nl2, tl2, pl2, rr2, nr2, tr2, pr2, gamma, flux)
    return _wall_face_flux(f0, f1, f2, f3, mnb, mtb, mnc, mtc)


@njit(**_INLINE)
def _van_leer(dl, dr):
    """_slope's van Leer arm, for the kernels with the limiter fixed."""
    prod = dl * dr
    return 2.0 * prod / (dl + dr) if prod > 0.0 else 0.0


@njit(**_INLINE)
def _minmod(dl, dr):
    """_slope's minmod arm, for the kernels with the limiter fixed."""
    prod = dl * dr
    return (dl if abs(dl) < abs(dr) else dr) if prod > 0.0 else 0.0


@njit(**_INLINE)
def _hllc_or_hll(rl, ul, vl, pl, rr, ur, vr, pr, gamma, hll):
    """_riemann_flux's HLLC or (hll True) HLL flux, both formed and one picked without a branch (the same
    operations as _riemann_flux, so the same numbers), so that a face loop choosing per face still vectorises."""
    al, ar, el, er, fl0, fl1, fl2, fl3, fr0, fr1, fr2, fr3 = _side_fluxes(rl, ul, vl, pl, rr, ur, vr, pr, gamma)
    sl = min(ul - al, ur - ar)
    sr = max(ul + al, ur + ar)
    h0, h1, h2, h3 = _hll(rl, vl, el, fl0, fl1, fl2, fl3, rr, vr, er, fr0, fr1, fr2, fr3, sl, sr)
    f0, f1, f2, f3 = _hllc(rl, ul, vl, pl, el, fl0, fl1, fl2, fl3, rr, ur, vr, pr, er, fr0, fr1, fr2, fr3, sl, sr)
    return (h0 if hll else f0, h1 if hll else f1, h2 if hll else f2, h3 if hll else f3)


@njit(**_INLINE)
def _face_van_leer(ra, rb, rc, rd, na, nb, nc, nd, ta, tb, tc, td, pa, pb, pc, pd,
                   mna, mta, mnb, mtb, mnc, mtc, mnd, mtd, gamma, shock_face, hll):
    """_face for the van Leer limiters (van_leer, van_leer_shock_minmod) and HLLC / HLL: the same numbers, with
    the per-face choices (minmod for n and p on a shock face, HLL) made by selection, not by branches."""
    (ra_b, na_b, ta_b, pa_b, rc_b, nc_b, tc_b, pc_b,
     rb_c, nb_c, tb_c, pb_c, rd_c, nd_c, td_c, pd_c) = _mirrored_stencils(
        ra, rb, rc, rd, na, nb, nc, nd, ta, tb, tc, td, pa, pb, pc, pd, mna, mta, mnb, mtb, mnc, mtc, mnd, mtd)
    rl = rb + 0.5 * _van_leer(rb - ra_b, rc_b - rb)
    tl = tb + 0.5 * _van_leer(tb - ta_b, tc_b - tb)
    rr = rc - 0.5 * _van_leer(rc - rb_c, rd_c - rc)
    tr = tc - 0.5 * _van_leer(tc - tb_c, td_c - tc)
    dnl, dnr = nb - na_b, nc_b - nb
    dpl, dpr = pb - pa_b, pc_b - pb
    nl = nb + 0.5 * (_minmod(dnl, dnr) if shock_face else _van_leer(dnl, dnr))
    pl = pb + 0.5 * (_minmod(dpl, dpr) if shock_face else _van_leer(dpl, dpr))
    dnl, dnr = nc - nb_c, nd_c - nc
    dpl, dpr = pc - pb_c, pd_c - pc
    nr = nc - 0.5 * (_minmod(dnl, dnr) if shock_face else _van_leer(dnl, dnr))
    pr = pc - 0.5 * (_minmod(dpl, dpr) if shock_face else _van_leer(dpl, dpr))
    rl2, nl2, tl2, pl2, rr2, nr2, tr2, pr2 = _face_states(rl, nl, tl, pl, rr, nr, tr, pr, rb, nb, tb, pb,
                                                          rc, nc, tc, pc, mnb, mtb, mnc, mtc)
    f0, f1, f2, f3 = _hllc_or_hll(rl2, nl2, tl2, pl2, rr2, nr2, tr2, pr2, gamma, hll)
    return _wall_face_flux(f0, f1, f2, f3, mnb, mtb, mnc, mtc)


@njit(**_INLINE)
def _y_stencil_rows(W, wall_nx, wall_ny, f):
    """Row views of the four cell rows in the stencils of y-face row f (density, u, v, p, then the wall normals'
    x and y components, each for rows f .. f + 3), taken before the face loop so that it vectorises
    (module docstring)."""
    return (W[0, f], W[0, f + 1], W[0, f + 2], W[0, f + 3], W[1, f], W[1, f + 1], W[1, f + 2], W[1, f + 3],
            W[2, f], W[2, f + 1], W[2, f + 2], W[2, f + 3], W[3, f], W[3, f + 1], W[3, f + 2], W[3, f + 3],
            wall_nx[f], wall_nx[f + 1], wall_nx[f + 2], wall_nx[f + 3],
            wall_ny[f], wall_ny[f + 1], wall_ny[f + 2], wall_ny[f + 3])


@njit(**_PARALLEL)
def _x_face_fluxes_any(W, wall_nx, wall_ny, Fx, gamma, limiter, flux, hll_x):
    """Fluxes through every x-face of the interior rows, for any limiter and flux (x_face_fluxes).

    hll_x (padded, uint8) marks cells whose x-faces take the HLL flux instead of `flux` (bit MARK_HLL) or the
    minmod limiter instead of `limiter` (bit MARK_MINMOD; see `shock_switch`); a face switches when either cell
    beside it is marked.
    """
    ny = Fx.shape[1]
    nfaces = Fx.shape[2]
    for j in prange(ny):
        jj = j + 2
        r, u, v, p = W[0, jj], W[1, jj], W[2, jj], W[3, jj]
        mx, my, sw = wall_nx[jj], wall_ny[jj], hll_x[jj]
        f0, f1, f2, f3 = Fx[0, j], Fx[1, j], Fx[2, j], Fx[3, j]
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


@njit(**_PARALLEL)
def _y_face_fluxes_any(W, wall_nx, wall_ny, Gy, gamma, limiter, flux, hll_y):
    """Fluxes through every y-face of the interior columns, any limiter and flux; the inner loop stays along x.

    hll_y (padded, uint8) marks cells whose y-faces take the HLL flux or minmod (see `shock_switch`).
    """
    nfaces = Gy.shape[1]
    nx = Gy.shape[2]
    for f in prange(nfaces):
        (ra, rb, rc, rd, ua, ub, uc, ud, va, vb, vc, vd, pa, pb, pc, pd,
         xa, xb, xc, xd, ya, yb, yc, yd) = _y_stencil_rows(W, wall_nx, wall_ny, f)
        sb = hll_y[f + 1]
        sc = hll_y[f + 2]
        g0, g1, g2, g3 = Gy[0, f], Gy[1, f], Gy[2, f], Gy[3, f]
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


@njit(**_PARALLEL)
def _x_face_fluxes_van_leer(W, wall_nx, wall_ny, Fx, gamma, all_hll, hll_x, mid_plain):
    """_x_face_fluxes_any for the van Leer limiters with HLLC (all_hll False) or HLL (True), branch-free. A row
    whose faces 2 .. nx - 2 have no wall cell in their stencils (mid_plain, face_paths; a closed box's side walls
    touch only the two faces at each end) runs all its faces without the wall normals, then the two at each end
    again with them (a loop that starts anywhere but 0 did not vectorise: face_paths)."""
    ny = Fx.shape[1]
    nfaces = Fx.shape[2]
    for j in prange(ny):
        jj = j + 2
        r, u, v, p = W[0, jj], W[1, jj], W[2, jj], W[3, jj]
        mx, my, sw = wall_nx[jj], wall_ny[jj], hll_x[jj]
        f0, f1, f2, f3 = Fx[0, j], Fx[1, j], Fx[2, j], Fx[3, j]
        if mid_plain[j]:
            for f in range(nfaces):
                a = f
                b = f + 1
                c = f + 2
                d = f + 3
                mk = sw[b] | sw[c]
                shock_face = (mk & MARK_MINMOD) != 0
                hll = all_hll or (mk & MARK_HLL) != 0
                m0, m1, m2, m3 = _face_van_leer(r[a], r[b], r[c], r[d], u[a], u[b], u[c], u[d],
                                                v[a], v[b], v[c], v[d], p[a], p[b], p[c], p[d],
                                                0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, gamma, shock_face, hll)
                f0[f] = m0
                f1[f] = m1
                f2[f] = m2
                f3[f] = m3
            for f in (0, 1, nfaces - 2, nfaces - 1):
                a = f
                b = f + 1
                c = f + 2
                d = f + 3
                mk = sw[b] | sw[c]
                shock_face = (mk & MARK_MINMOD) != 0
                hll = all_hll or (mk & MARK_HLL) != 0
                m0, m1, m2, m3 = _face_van_leer(r[a], r[b], r[c], r[d], u[a], u[b], u[c], u[d],
                                                v[a], v[b], v[c], v[d], p[a], p[b], p[c], p[d],
                                                mx[a], my[a], mx[b], my[b], mx[c], my[c],
                                                mx[d], my[d], gamma, shock_face, hll)
                f0[f] = m0
                f1[f] = m1
                f2[f] = m2
                f3[f] = m3
        else:  # every face through the general stencil, in one loop from face 0 (so that it vectorises)
            for f in range(nfaces):
                a = f
                b = f + 1
                c = f + 2
                d = f + 3
                mk = sw[b] | sw[c]
                shock_face = (mk & MARK_MINMOD) != 0
                hll = all_hll or (mk & MARK_HLL) != 0
                m0, m1, m2, m3 = _face_van_leer(r[a], r[b], r[c], r[d], u[a], u[b], u[c], u[d],
                                                v[a], v[b], v[c], v[d], p[a], p[b], p[c], p[d],
                                                mx[a], my[a], mx[b], my[b], mx[c], my[c],
                                                mx[d], my[d], gamma, shock_face, hll)
                f0[f] = m0
                f1[f] = m1
                f2[f] = m2
                f3[f] = m3


@njit(**_PARALLEL)
def _y_face_fluxes_van_leer(W, wall_nx, wall_ny, Gy, gamma, all_hll, hll_y, row_plain):
    """_y_face_fluxes_any for the van Leer limiters with HLLC or HLL, branch-free; a face row with no wall cell in
    any face's stencil (row_plain, face_paths) skips the wall normals (eight rows of them)."""
    nfaces = Gy.shape[1]
    nx = Gy.shape[2]
    for f in prange(nfaces):
        (ra, rb, rc, rd, ua, ub, uc, ud, va, vb, vc, vd, pa, pb, pc, pd,
         xa, xb, xc, xd, ya, yb, yc, yd) = _y_stencil_rows(W, wall_nx, wall_ny, f)
        sb = hll_y[f + 1]
        sc = hll_y[f + 2]
        g0, g1, g2, g3 = Gy[0, f], Gy[1, f], Gy[2, f], Gy[3, f]
        if row_plain[f]:
            for i in range(nx):
                ii = i + 2
                mk = sb[ii] | sc[ii]
                shock_face = (mk & MARK_MINMOD) != 0
                hll = all_hll or (mk & MARK_HLL) != 0
                m0, mn, mt, m3 = _face_van_leer(ra[ii], rb[ii], rc[ii], rd[ii], va[ii], vb[ii], vc[ii], vd[ii],
                                                ua[ii], ub[ii], uc[ii], ud[ii], pa[ii], pb[ii], pc[ii], pd[ii],
                                                0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, gamma, shock_face, hll)
                g0[i] = m0
                g1[i] = mt
                g2[i] = mn
                g3[i] = m3
        else:
            for i in range(nx):
                ii = i + 2
                mk = sb[ii] | sc[ii]
                shock_face = (mk & MARK_MINMOD) != 0
                hll = all_hll or (mk & MARK_HLL) != 0
                m0, mn, mt, m3 = _face_van_leer(ra[ii], rb[ii], rc[ii], rd[ii], va[ii], vb[ii], vc[ii], vd[ii],
                                                ua[ii], ub[ii], uc[ii], ud[ii], pa[ii], pb[ii], pc[ii], pd[ii],
                                                ya[ii], xa[ii], yb[ii], xb[ii],
                                                yc[ii], xc[ii], yd[ii], xd[ii], gamma, shock_face, hll)
                g0[i] = m0
                g1[i] = mt
                g2[i] = mn
                g3[i] = m3


def uses_van_leer_sweeps(limiter: int, flux: int) -> bool:
    """True when the face sweeps take the kernels with the van Leer limiter fixed (_x/_y_face_fluxes_van_leer):
    limiter van_leer or van_leer_shock_minmod with HLLC or HLL, the default and the benchmark's scheme."""
    return limiter in (LIM_VAN_LEER, LIM_VAN_LEER_SHOCK_MINMOD) and flux in (FLUX_HLLC, FLUX_HLL)


def x_face_fluxes(W, wall_nx, wall_ny, Fx, gamma, limiter, flux, hll_x, paths=None):
    """Fluxes through every x-face of the interior rows.

    hll_x (padded, uint8) marks cells whose x-faces take the HLL flux instead of `flux` (bit MARK_HLL) or the
    minmod limiter instead of `limiter` (bit MARK_MINMOD; see `shock_switch`); a face switches when either cell
    beside it is marked. The van Leer limiters with HLLC or HLL run a kernel with the limiter fixed (the per-face
    choices by selection, so its loop vectorises), which runs rows far from walls (paths, face_paths.build of these
    wall normals; built here when not given) without reading the wall normals; every other pair runs the general
    kernel.
    The same numbers either way (tests/test_face_paths.py).
    """
    if uses_van_leer_sweeps(limiter, flux):
        fp = face_paths.build(wall_nx, wall_ny) if paths is None else paths
        _x_face_fluxes_van_leer(W, wall_nx, wall_ny, Fx, gamma, flux == FLUX_HLL, hll_x, fp.x_rows_mid_plain)
    else:
        _x_face_fluxes_any(W, wall_nx, wall_ny, Fx, gamma, limiter, flux, hll_x)


def y_face_fluxes(W, wall_nx, wall_ny, Gy, gamma, limiter, flux, hll_y, paths=None):
    """Fluxes through every y-face of the interior columns (hll_y as hll_x in x_face_fluxes); kernels chosen as
    there. The van Leer kernel takes the face rows with no wall near them (paths, face_paths.build of these wall
    normals; built here when not given) without reading the wall normals."""
    if uses_van_leer_sweeps(limiter, flux):
        fp = face_paths.build(wall_nx, wall_ny) if paths is None else paths
        _y_face_fluxes_van_leer(W, wall_nx, wall_ny, Gy, gamma, flux == FLUX_HLL, hll_y, fp.y_rows_plain)
    else:
        _y_face_fluxes_any(W, wall_nx, wall_ny, Gy, gamma, limiter, flux, hll_y)


#: A stencil of five cells whose largest pressure is more than this times its smallest, and
#: whose gas is compressed along it, holds a strong shock (about Mach 1.2 and up); common
#: practice, no source for the exact value.
SHOCK_PRESSURE_RATIO = 1.5


#: The limiter id of a face of a cell marked MARK_MINMOD (never a user's choice).
LIM_SHOCK_FACE = 15
#: Bits of the shock marks (hll_x, hll_y): the faces take HLL; the faces take the minmod limiter.
MARK_HLL, MARK_MINMOD = 1, 2
#: Slow shocks (MARK_MINMOD, see _slow_along), as fractions of the larger sound speed at the stencil ends: a
#: shock moving slower than SLOW_SHOCK_FRACTION against the grid, whose five cells' density changes summed without
#: their signs stay under SLOW_SHOCK_CHURN, and whose steady mass balance along the axis (the gas sliding along a
#: standing shock) stays under SLOW_SHOCK_SLIDE. Measured (tests/test_blunt_bodies.py docstring): the left shock
#: of Toro's Test 5 runs at 0.061 and stays van Leer's; the bow shock of a sphere at Mach 3 needs the marks within
#: the slide 0.1 (0.05 left it ringing). Common practice, no source for the values.
SLOW_SHOCK_FRACTION = 0.04
SLOW_SHOCK_CHURN = 0.08
SLOW_SHOCK_SLIDE = 0.1


@njit(**_INLINE)
def _slow_along(rho, rho_prev, u, v, p, kind, j0, i0, dj, di, gamma, dx_over_dt, slow):
    """Whether a shock across the five cells from (j0, i0) in steps of (dj, di) is a slow shock: one that lies
    nearly across this axis and moves along it slower than `slow` times the larger sound speed c at the ends.

    - Lies across the axis: the steady mass balance between the ends, (m_b - m_a) / (rho_b - rho_a) with m the
      mass flux along the axis (Rankine-Hugoniot), is under SLOW_SHOCK_SLIDE c. For a standing shock that is the
      gas sliding along it, seen along the axis.
    - Moves slowly: a front rho(x - S t) changes the mass of the cells it lies in at the rate -S times its
      density jump, so |S| = |sum of the cells' density change| dx / dt / |rho_b - rho_a|, with the change since
      the previous step (rho_prev, dx_over_dt). That holds whatever turns the gas sideways, and waves of either
      sign in the five cells (the sum of the absolute changes over SLOW_SHOCK_CHURN c) do not count as one slow
      front. Without a previous step (dx_over_dt 0) only the first test applies.

    An end that is not gas makes the shock slow (held against a wall)."""
    ja, ia, jb, ib = j0 - 2 * dj, i0 - 2 * di, j0 + 2 * dj, i0 + 2 * di
    if kind[ja, ia] != FLUID or kind[jb, ib] != FLUID:
        return True
    ra, rb = rho[ja, ia], rho[jb, ib]
    c = max(math.sqrt(gamma * p[ja, ia] / ra), math.sqrt(gamma * p[jb, ib] / rb))
    jump = c * abs(rb - ra)
    slide = rb * (u[jb, ib] * di + v[jb, ib] * dj) - ra * (u[ja, ia] * di + v[ja, ia] * dj)
    if abs(slide) >= SLOW_SHOCK_SLIDE * jump:
        return False
    if dx_over_dt <= 0.0:
        return True
    change = 0.0
    churn = 0.0
    for k in range(-2, 3):
        jk, ik = j0 + k * dj, i0 + k * di
        if kind[jk, ik] == FLUID:
            d = rho[jk, ik] - rho_prev[jk, ik]
            change += d
            churn += abs(d)
    return abs(change) * dx_over_dt < slow * jump and churn * dx_over_dt < SLOW_SHOCK_CHURN * jump


@njit(**_INLINE)
def _shocks_at(p, u, v, kind, jj, ii, ratio):
    """(a shock along x, a shock along y) at gas cell (jj, ii): a five-cell pressure jump above `ratio` with the
    gas compressed along it, only gas cells counting in a stencil."""
    pc = p[jj, ii]
    lo = pc
    hi = pc
    for di in range(-2, 3):
        q = p[jj, ii + di] if kind[jj, ii + di] == FLUID else pc
        lo = min(lo, q)
        hi = max(hi, q)
    ul = u[jj, ii - 2] if kind[jj, ii - 2] == FLUID else u[jj, ii]
    uh = u[jj, ii + 2] if kind[jj, ii + 2] == FLUID else u[jj, ii]
    shock_x = hi > ratio * lo and uh < ul
    lo = pc
    hi = pc
    for dj in range(-2, 3):
        q = p[jj + dj, ii] if kind[jj + dj, ii] == FLUID else pc
        lo = min(lo, q)
        hi = max(hi, q)
    vl = v[jj - 2, ii] if kind[jj - 2, ii] == FLUID else v[jj, ii]
    vh = v[jj + 2, ii] if kind[jj + 2, ii] == FLUID else v[jj, ii]
    return shock_x, hi > ratio * lo and vh < vl


@njit(**_INLINE)
def _mark_cell(hx, hy, ii, shock_x, shock_y, hll, mm, rho, prev, u, v, p, kind, jj, gamma, scale, slow):
    """Cell ii's marks in its rows of hll_x and hll_y from the shocks found along x and y."""
    m = 0
    if mm != 0 and (
            (shock_x and _slow_along(rho, prev, u, v, p, kind, jj, ii, 0, 1, gamma, scale, slow))
            or (shock_y and _slow_along(rho, prev, u, v, p, kind, jj, ii, 1, 0, gamma, scale, slow))):
        m = mm
    hy[ii] = (hll if shock_x else 0) | m
    hx[ii] = (hll if shock_y else 0) | m


def switch_rows_plain(kind: np.ndarray) -> np.ndarray:
    """One byte a padded row for shock_switch: 1 where the row and the two on each side hold gas from the third
    column to the third last, so that the stencils of its cells 4 .. nxp - 5 hold gas only."""
    nyp = kind.shape[0]
    gas = (kind[:, 2:-2] == FLUID).all(axis=1)
    out = np.zeros(nyp, np.uint8)
    for jj in range(2, nyp - 2):
        out[jj] = gas[jj - 2:jj + 3].all()
    return out


@njit(**_PARALLEL)
def shock_switch(W, kind, hll_x, hll_y, ratio, marks=MARK_HLL, gamma=1.4, rho_prev=None, dx_over_dt=0.0,
                 slow=SLOW_SHOCK_FRACTION, rows_plain=None):
    """Mark where HLLC gives way to HLL: the faces transverse to a strong shock.

    HLLC resolves contacts and shear exactly, which leaves no dissipation along a shock front
    and lets a perturbation of a strong shock grow (the carbuncle and odd-even decoupling,
    Quirk 1994). The common remedy keeps HLLC everywhere except on the faces that run across
    a shock front, where HLL damps it (a rotated-hybrid in spirit, Nishikawa and Kitamura 2008).
    A cell with a compressive pressure jump along x (five cells, ratio above `ratio`) has its
    y-faces switched (hll_y), and one with a jump along y its x-faces (hll_x). A one-dimensional
    shock tube keeps pure HLLC. Only gas cells count in a stencil.

    With MARK_MINMOD in `marks` (the limiter `van_leer_shock_minmod`), a cell in a slow shock along either axis
    (_slow_along: one lying nearly across the axis and moving slower against the grid than `slow` times the
    sound speed, told from rho_prev, the density at the previous step's start, with dx_over_dt its cell size
    over its time step, 0 or rho_prev None when there is none: standing shocks, such as a bow shock or a shock
    held in a nozzle) has pressure and normal velocity limited by minmod on all four faces (LIM_SHOCK_FACE).
    Van Leer's compressive slopes inside a captured standing shock leave a total-pressure loss and a stagnation
    region that never stops ringing (measured in tests/test_blunt_bodies.py; post-shock oscillations of slowly
    moving shocks, Arora and Roe 1997). Shocks that run through the grid keep van Leer,
    which captures them sharper (the shock-tube problems), and so do density and tangential velocity and every
    face away from shocks, so contacts stay sharp.

    rows_plain (switch_rows_plain of the kinds, one byte a padded row), when given, lets the rows whose stencils
    hold gas only take the cells from the fourth to the fourth last without reading a kind.
    """
    hll = marks & MARK_HLL
    mm = marks & MARK_MINMOD
    if rho_prev is None:
        prev = W[0]
        scale = 0.0
    else:
        prev = rho_prev
        scale = dx_over_dt
    nyp = W.shape[1]
    nxp = W.shape[2]
    rho = W[0]
    p = W[3]
    u = W[1]
    v = W[2]
    if rows_plain is None:
        plain_rows = np.zeros(nyp, np.uint8)
    else:
        plain_rows = rows_plain
    for jj in prange(nyp):
        hx = hll_x[jj]
        hy = hll_y[jj]
        for ii in range(nxp):
            hx[ii] = 0
            hy[ii] = 0
        if jj < 2 or jj >= nyp - 2:
            continue
        # cells [a, b) of a plain row need no kind; the rest (all of the row when it is not plain) do
        a, b = (4, nxp - 4) if plain_rows[jj] != 0 else (nxp - 2, nxp - 2)
        k = kind[jj]
        for ii in range(2, a):
            if k[ii] == FLUID:
                sx, sy = _shocks_at(p, u, v, kind, jj, ii, ratio)
                _mark_cell(hx, hy, ii, sx, sy, hll, mm, rho, prev, u, v, p, kind, jj, gamma, scale, slow)
        pm2, pm1, pr, pp1, pp2 = p[jj - 2], p[jj - 1], p[jj], p[jj + 1], p[jj + 2]
        ur, vm2, vp2 = u[jj], v[jj - 2], v[jj + 2]
        for ii in range(a, b):
            lo = min(min(pr[ii - 2], pr[ii - 1]), min(min(pr[ii], pr[ii + 1]), pr[ii + 2]))
            hi = max(max(pr[ii - 2], pr[ii - 1]), max(max(pr[ii], pr[ii + 1]), pr[ii + 2]))
            sx = hi > ratio * lo and ur[ii + 2] < ur[ii - 2]
            lo = min(min(pm2[ii], pm1[ii]), min(min(pr[ii], pp1[ii]), pp2[ii]))
            hi = max(max(pm2[ii], pm1[ii]), max(max(pr[ii], pp1[ii]), pp2[ii]))
            sy = hi > ratio * lo and vp2[ii] < vm2[ii]
            _mark_cell(hx, hy, ii, sx, sy, hll, mm, rho, prev, u, v, p, kind, jj, gamma, scale, slow)
        for ii in range(b, nxp - 2):
            if k[ii] == FLUID:
                sx, sy = _shocks_at(p, u, v, kind, jj, ii, ratio)
                _mark_cell(hx, hy, ii, sx, sy, hll, mm, rho, prev, u, v, p, kind, jj, gamma, scale, slow)


@njit(**_INLINE)
def floored_state(n0, n1, n2, n3, gamma, rho_floor, p_floor):
    """A new conserved state with density and pressure floored, its velocity and pressure and the number of
    floors applied (0 to 2)."""
    gm1 = gamma - 1.0
    floors = 0
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
    return n0, n1, n2, n3, vx, vy, p, floors


@njit(**_INLINE)
def wave_speed(rho, vx, vy, p, gamma):
    """|u| + |v| + 2a, the wave speed the time step is set by."""
    return abs(vx) + abs(vy) + 2.0 * math.sqrt(gamma * p / rho)


@njit(**_INLINE)
def floored_primitive(n0, n1, n2, n3, gamma, rho_floor, p_floor):
    """floored_state and the state's wave_speed (for the time step).

    One definition for the full cells (update_stage) and the cut cells (cut_cells.update_cut_cells).
    """
    n0, n1, n2, n3, vx, vy, p, floors = floored_state(n0, n1, n2, n3, gamma, rho_floor, p_floor)
    return n0, n1, n2, n3, vx, vy, p, wave_speed(n0, vx, vy, p, gamma), floors


@njit(**_PARALLEL)
def update_stage(U, U0, W, Fx, Gy, kind, cut, a, b, dt, inv_dx, w_plus, w_minus, source,
                 gamma, rho_floor, p_floor, row_rate, row_floors, row_bad, want_rate=True):
    """One SSP stage on full fluid cells: U <- a*U0 + b*(U + dt*L(U)); refresh W.

    Cells flagged in `cut` (walls cross them, or they are merged with such a cell) are left to
    cut_cells.update_cut_cells.

    w_plus / w_minus weight the upper / lower y-face fluxes and `source` multiplies the cell
    pressure in the y-momentum equation: 1, 1, 0 in planar mode; r_face / r_cell and 1 / r_cell
    in axisymmetric mode (per-radian volumes). Also returns, per row, the largest
    (|u| + |v| + 2a) / dx for the next time step, the number of floored cells and of cells
    holding a non-finite value. Only the last stage's wave rate sets the next time step: the others pass
    want_rate=False, skip the square root and leave row_rate at 0.
    """
    ny = Fx.shape[1]
    nx = Gy.shape[2]
    for j in prange(ny):
        jj = j + 2
        k = kind[jj]
        ct = cut[jj]
        u0 = U[0, jj]
        u1 = U[1, jj]
        u2 = U[2, jj]
        u3 = U[3, jj]
        s0 = U0[0, jj]
        s1 = U0[1, jj]
        s2 = U0[2, jj]
        s3 = U0[3, jj]
        w0 = W[0, jj]
        w1 = W[1, jj]
        w2 = W[2, jj]
        w3 = W[3, jj]
        fx0 = Fx[0, j]
        fx1 = Fx[1, j]
        fx2 = Fx[2, j]
        fx3 = Fx[3, j]
        gm0 = Gy[0, j]
        gm1_ = Gy[1, j]
        gm2 = Gy[2, j]
        gm3 = Gy[3, j]
        gp0 = Gy[0, j + 1]
        gp1 = Gy[1, j + 1]
        gp2 = Gy[2, j + 1]
        gp3 = Gy[3, j + 1]
        wp = w_plus[j]
        wm = w_minus[j]
        src = source[j]
        rate = 0.0
        floors = 0
        bad = 0
        for i in range(nx):
            ii = i + 2
            if k[ii] != FLUID or ct[ii] != 0:
                continue
            l0 = -((fx0[i + 1] - fx0[i]) + (wp * gp0[i] - wm * gm0[i])) * inv_dx
            l1 = -((fx1[i + 1] - fx1[i]) + (wp * gp1[i] - wm * gm1_[i])) * inv_dx
            l2 = -((fx2[i + 1] - fx2[i]) + (wp * gp2[i] - wm * gm2[i])) * inv_dx + src * w3[ii]
            l3 = -((fx3[i + 1] - fx3[i]) + (wp * gp3[i] - wm * gm3[i])) * inv_dx
            n0 = a * s0[ii] + b * (u0[ii] + dt * l0)
            n1 = a * s1[ii] + b * (u1[ii] + dt * l1)
            n2 = a * s2[ii] + b * (u2[ii] + dt * l2)
            n3 = a * s3[ii] + b * (u3[ii] + dt * l3)
            if not (math.isfinite(n0) and math.isfinite(n1) and math.isfinite(n2) and math.isfinite(n3)):
                bad += 1
                u0[ii] = n0
                u1[ii] = n1
                u2[ii] = n2
                u3[ii] = n3
                continue
            n0, n1, n2, n3, vx, vy, p, fl = floored_state(n0, n1, n2, n3, gamma, rho_floor, p_floor)
            floors += fl
            u0[ii] = n0
            u1[ii] = n1
            u2[ii] = n2
            u3[ii] = n3
            w0[ii] = n0
            w1[ii] = vx
            w2[ii] = vy
            w3[ii] = p
            if want_rate:
                rate = max(rate, wave_speed(n0, vx, vy, p, gamma) * inv_dx)
        row_rate[j] = rate
        row_floors[j] = floors
        row_bad[j] = bad


@njit(**_INLINE)
def _border_cell(n, jj, nxp, nyp):
    """Column of the n-th border cell of padded row jj: every column in the ghost rows, the two ghost columns
    a side elsewhere (the edge fills visit only these, not the whole array)."""
    edge_row = jj < 2 or jj >= nyp - 2
    return n if (edge_row or n < 2) else nxp - 4 + n


@njit(**_SERIAL)
def fill_open_edges(U, W, kind):
    """Zero-gradient outflow: open ghost cells copy the nearest interior cell."""
    nyp = kind.shape[0]
    nxp = kind.shape[1]
    for jj in range(nyp):
        for n in range(nxp if (jj < 2 or jj >= nyp - 2) else 4):
            ii = _border_cell(n, jj, nxp, nyp)
            if kind[jj, ii] != OPEN:
                continue
            sj = min(max(jj, 2), nyp - 3)
            si = min(max(ii, 2), nxp - 3)
            for c in range(4):
                U[c, jj, ii] = U[c, sj, si]
                W[c, jj, ii] = W[c, sj, si]


@njit(**_SERIAL)
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
        for n in range(nxp if (jj < 2 or jj >= nyp - 2) else 4):
            ii = _border_cell(n, jj, nxp, nyp)
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


@njit(**_PARALLEL)
def copy_state(src, dst):
    """dst[:] = src, in parallel rows (the step-start copy is on the hot path)."""
    nc, nyp, nxp = src.shape
    for j in prange(nyp):
        for c in range(nc):
            s = src[c, j]
            d = dst[c, j]
            for i in range(nxp):
                d[i] = s[i]


@njit(**_PARALLEL)
def primitive_from_conserved(U, W, gamma):
    """W = (rho, u, v, p) from U = (rho, rho u, rho v, E) over the whole padded array."""
    nyp = U.shape[1]
    nxp = U.shape[2]
    gm1 = gamma - 1.0
    for j in prange(nyp):
        for i in range(nxp):
            r = U[0, j, i]
            vx = U[1, j, i] / r
            vy = U[2, j, i] / r
            W[0, j, i] = r
            W[1, j, i] = vx
            W[2, j, i] = vy
            W[3, j, i] = gm1 * (U[3, j, i] - 0.5 * r * (vx * vx + vy * vy))



@njit(**_SERIAL)
def feed_reservoir_edge(U, W, kind, cells_j, cells_i, rho0, p0, gamma, relax=1.0):
    """Reservoir cells that touch fluid take the stagnation state expanded isentropically to the
    mean velocity of their fluid neighbours (speed capped at sonic).

    A reservoir held at rest would feed the flow through an unsteady expansion, which loses
    total pressure; this keeps p0 and T0 the stagnation state of the gas that leaves it
    (the usual total-pressure, total-temperature inflow treatment).

    relax < 1 moves each feed cell only that fraction of the way to this state (a partially
    non-reflecting inflow, Poinsot and Lele 1992: relax towards the held state instead of
    imposing it). A feed cell that follows the gas beside it at once holds its pressure and
    reflects every sound wave back into the chamber; one that changes slowly lets the waves
    leave through the face's Riemann problem, and the steady state is the same.
    """
    gm1 = gamma - 1.0
    a0sq = gamma * p0 / rho0
    qsq_max = 2.0 * a0sq / (gamma + 1.0)
    nyp = W.shape[1]
    nxp = W.shape[2]
    for n in range(cells_j.shape[0]):
        jj = cells_j[n]
        ii = cells_i[n]
        su = 0.0
        sv = 0.0
        cnt = 0
        for d in range(4):
            dj = 0 if d < 2 else (1 if d == 2 else -1)
            di = (1 if d == 0 else -1) if d < 2 else 0
            j2 = jj + dj
            i2 = ii + di
            if 0 <= j2 < nyp and 0 <= i2 < nxp and kind[j2, i2] == FLUID:
                su += W[1, j2, i2]
                sv += W[2, j2, i2]
                cnt += 1
        if cnt == 0:
            continue
        u = su / cnt
        v = sv / cnt
        qsq = u * u + v * v
        if qsq > qsq_max:
            scale = math.sqrt(qsq_max / qsq)
            u *= scale
            v *= scale
            qsq = qsq_max
        t_ratio = 1.0 - 0.5 * gm1 * qsq / a0sq
        rho = rho0 * t_ratio ** (1.0 / gm1)
        p = p0 * t_ratio ** (gamma / gm1)
        if relax < 1.0:
            rho = W[0, jj, ii] + relax * (rho - W[0, jj, ii])
            u = W[1, jj, ii] + relax * (u - W[1, jj, ii])
            v = W[2, jj, ii] + relax * (v - W[2, jj, ii])
            p = W[3, jj, ii] + relax * (p - W[3, jj, ii])
            qsq = u * u + v * v
        W[0, jj, ii] = rho
        W[1, jj, ii] = u
        W[2, jj, ii] = v
        W[3, jj, ii] = p
        U[0, jj, ii] = rho
        U[1, jj, ii] = rho * u
        U[2, jj, ii] = rho * v
        U[3, jj, ii] = p / gm1 + 0.5 * rho * qsq
