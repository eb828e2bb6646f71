"""Numba kernels of the force model (:mod:`slopescreen.clusters.forces`).

Per cell the basal forces, per face the earth-pressure forces; the same
helpers serve the force grids and the Monte Carlo re-evaluation of clusters
(:mod:`slopescreen.clusters.probability`), so both use one set of equations.
"""

import math

import numpy as np

from .._kernels.slope_stability import GAMMA_W, _fs_point, _rad
from .._numba import njit, njit_parallel, prange
from ._faces import FACE_DCOL, FACE_DROW, N_FACES


@njit
def _sigma_v_integral(z, hw, gm, gs):
    """Integral over the face height of the effective vertical stress, kN/m.

    Water table h_w above the base (vertical); gamma_m above it, buoyant
    gamma_sat - gamma_w below it.
    """
    t = z - hw
    return 0.5 * gm * t * t + gm * t * hw + 0.5 * (gs - GAMMA_W) * hw * hw


# 8-point Gauss-Legendre nodes and weights on [-1, 1]
_GL_X = np.array([-0.9602898564975363, -0.7966664774136267, -0.5255324099163290,
                  -0.1834346424956498, 0.1834346424956498, 0.5255324099163290,
                  0.7966664774136267, 0.9602898564975363])
_GL_W = np.array([0.1012285362903763, 0.2223810344533745, 0.3137066458778873,
                  0.3626837833783620, 0.3626837833783620, 0.3137066458778873,
                  0.2223810344533745, 0.1012285362903763])


@njit
def _inclined_pressures(sv, coh, cos_b, sin_phi, cos_phi):
    """(active, passive) earth pressure at effective vertical stress ``sv``, kPa.

    Rankine state under a ground surface inclined at beta, cohesive form of
    Mazindrani and Ganjali (1997), on a vertical plane, acting parallel to the
    ground surface: sigma = cos(beta) [...] with gamma z replaced by sv.
    The active pressure is clipped at 0 (tension crack). Where the
    discriminant is negative (no Rankine state: beta > phi' at this stress)
    the passive pressure is 0 and the active is the conjugate stress
    sv cos(beta) (K' = 1), docs/methods.md, "Multi-cell failure clusters".
    """
    c2b = cos_b * cos_b
    c2p = cos_phi * cos_phi
    disc = (4.0 * sv * sv * c2b * (c2b - c2p) + 4.0 * coh * coh * c2p
            + 8.0 * coh * sv * c2b * sin_phi * cos_phi)
    if disc < 0.0:
        return sv * cos_b, 0.0
    a = 2.0 * sv * c2b + 2.0 * coh * sin_phi * cos_phi
    root = math.sqrt(disc)
    act = cos_b * ((a - root) / c2p - sv)
    pas = cos_b * ((a + root) / c2p - sv)
    return max(act, 0.0), pas


@njit
def _stress_breaks(coh, cos_b, sin_phi, cos_phi):
    """(tension-crack stress, end of the Rankine state) in sv, kPa (inf when none).

    The active pressure of :func:`_inclined_pressures` is zero at
    sv = 2 c' (1 + sin phi') / cos phi' whatever beta; the discriminant turns
    negative beyond its positive root when beta > phi'.
    """
    s_crack = 2.0 * coh * (1.0 + sin_phi) / cos_phi
    c2b = cos_b * cos_b
    c2p = cos_phi * cos_phi
    qa = 4.0 * c2b * (c2b - c2p)
    if qa >= 0.0:
        return s_crack, math.inf
    qb = 8.0 * coh * c2b * sin_phi * cos_phi
    qc = 4.0 * coh * coh * c2p
    return s_crack, (-qb - math.sqrt(qb * qb - 4.0 * qa * qc)) / (2.0 * qa)


@njit
def _layer_thrusts(s0, s1, length, coh, cos_b, sin_phi, cos_phi, breaks):
    """Integrals over a layer of height ``length`` (sv linear from s0 to s1) of (active, passive), kN/m."""
    if length <= 0.0:
        return 0.0, 0.0
    if s1 - s0 <= 1e-12 * max(1.0, abs(s1)):
        act, pas = _inclined_pressures(0.5 * (s0 + s1), coh, cos_b, sin_phi, cos_phi)
        return act * length, pas * length
    pts = np.empty(4)
    pts[0] = s0
    n = 1
    for b in breaks:
        if s0 < b < s1:
            pts[n] = b
            n += 1
    pts[n] = s1
    if n == 3 and pts[1] > pts[2]:
        pts[1], pts[2] = pts[2], pts[1]
    act = 0.0
    pas = 0.0
    for i in range(n):
        half = 0.5 * (pts[i + 1] - pts[i])
        mid = 0.5 * (pts[i + 1] + pts[i])
        for g in range(8):
            a, p = _inclined_pressures(mid + half * _GL_X[g], coh, cos_b, sin_phi, cos_phi)
            act += _GL_W[g] * half * a
            pas += _GL_W[g] * half * p
    scale = length / (s1 - s0)
    return act * scale, pas * scale


@njit
def _face_per_length(z, m, gm, gs, coh, root_lat, tan_phi, sin_phi, passive_fraction, jaky_full,
                     slope_deg):
    """(toe resistance, head resistance, side resistance, active thrust) per metre of face, kN/m.

    Toe and active thrusts act parallel to the ground surface (slope_deg).
    """
    k0 = 1.0 - sin_phi
    if jaky_full:
        k0 = (1.0 - sin_phi) * (1.0 + 2.0 / 3.0 * sin_phi) / (1.0 + sin_phi)
    hw = m * z
    sv = _sigma_v_integral(z, hw, gm, gs)
    head = root_lat * z
    side = (coh + root_lat) * z + k0 * tan_phi * sv
    t = z - hw
    s_t = gm * t
    s_z = s_t + (gs - GAMMA_W) * hw
    cos_b = math.cos(_rad(slope_deg))
    cos_phi = math.sqrt(max(0.0, 1.0 - sin_phi * sin_phi))
    breaks = _stress_breaks(coh, cos_b, sin_phi, cos_phi)
    a1, p1 = _layer_thrusts(0.0, s_t, t, coh, cos_b, sin_phi, cos_phi, breaks)
    a2, p2 = _layer_thrusts(s_t, s_z, hw, coh, cos_b, sin_phi, cos_phi, breaks)
    return passive_fraction * (p1 + p2), head, side, a1 + a2


@njit
def _basal_forces(slope_deg, z, wet, gm, gs, coh, root_b, phi_deg, area):
    """(D_i, R_i, lone-cell FS) of one cell, kN (the infinite-slope FS on a plan area)."""
    th = _rad(slope_deg)
    st = math.sin(th)
    ct = math.cos(th)
    hw = wet * z
    col = gm * (z - hw) + gs * hw
    u = GAMMA_W * hw * ct * ct
    tphi = math.tan(_rad(phi_deg))
    cb = coh + root_b
    driving = col * area * st
    resisting = max(0.0, cb + (col * ct * ct - u) * tphi) * area / ct
    return driving, resisting, _fs_point(cb, tphi, st, ct, col, u)


@njit
def _face_force(ue, un, factor, own, nb, has_nb, eta, jaky_full):
    """(W, H) of the pair of a cell towards the cell across step (ue, un), kN.

    (ue, un) is the unit step direction and ``factor`` its Cauchy-Crofton
    weight (:func:`slopescreen.clusters._faces.face_geometry`), m.

    ``own`` and ``nb`` hold (z, wetness, gamma_m, gamma_sat, c', c_r lateral,
    phi' degrees, downslope east, downslope north, slope degrees) of the cell and of the
    cell across the face, then the slope in degrees (index 9). Between two valid cells the face takes the mean of
    their properties and the normalised sum of their downslope vectors; with
    no valid neighbour (nodata, grid edge) it takes the cell's own values.
    """
    if has_nb:
        fz = 0.5 * (own[0] + nb[0])
        fm = 0.5 * (own[1] + nb[1])
        fgm = 0.5 * (own[2] + nb[2])
        fgs = 0.5 * (own[3] + nb[3])
        fc = 0.5 * (own[4] + nb[4])
        fl = 0.5 * (own[5] + nb[5])
        fphi = _rad(0.5 * (own[6] + nb[6]))
        fslope = 0.5 * (own[9] + nb[9])
        ve = own[7] + nb[7]
        vn = own[8] + nb[8]
        norm = math.sqrt(ve * ve + vn * vn)
        if norm > 1e-9:
            ve /= norm
            vn /= norm
        else:
            ve = 0.0
            vn = 0.0
    else:
        fz = own[0]
        fm = own[1]
        fgm = own[2]
        fgs = own[3]
        fc = own[4]
        fl = own[5]
        fphi = _rad(own[6])
        fslope = own[9]
        ve = own[7]
        vn = own[8]
    toe, head, side, thrust = _face_per_length(
        fz, fm, fgm, fgs, fc, fl, math.tan(fphi), math.sin(fphi), eta, jaky_full, fslope)
    cosang = ue * ve + un * vn
    cp = max(cosang, 0.0)
    cm = max(-cosang, 0.0)
    w = factor * (cp * cp * toe + cm * cm * head + (1.0 - cosang * cosang) * side)
    h = factor * cm * cm * thrust
    return w, h


@njit_parallel
def _forces_kernel(slope, aspect, depth, wet, coh, root_b, root_l, phi, gm, gs, valid, dx, dy,
                   geometry, eta, jaky_full, free_nodata, driving, resisting, face_w, face_h,
                   cell_fs, down):
    rows, cols = slope.shape
    area = dx * dy
    for r in prange(rows):
        own = np.empty(10)
        nb = np.empty(10)
        for c in range(cols):
            if not valid[r, c]:
                driving[r, c] = math.nan
                resisting[r, c] = math.nan
                cell_fs[r, c] = math.nan
                for k in range(N_FACES):
                    face_w[k, r, c] = math.nan
                    face_h[k, r, c] = math.nan
                continue
            d_i, r_i, fs_i = _basal_forces(slope[r, c], depth[r, c], wet[r, c], gm[r, c],
                                           gs[r, c], coh[r, c], root_b[r, c], phi[r, c], area)
            driving[r, c] = d_i
            resisting[r, c] = r_i
            cell_fs[r, c] = fs_i
            _cell_values(own, slope, depth, wet, gm, gs, coh, root_l, phi, down, r, c)
            for k in range(N_FACES):
                rr = r + FACE_DROW[k]
                cc = c + FACE_DCOL[k]
                inside = 0 <= rr < rows and 0 <= cc < cols
                has_nb = inside and valid[rr, cc]
                if inside and not has_nb and free_nodata:
                    face_w[k, r, c] = 0.0  # a free face: nothing across it resists or pushes
                    face_h[k, r, c] = 0.0
                    continue
                if has_nb:
                    _cell_values(nb, slope, depth, wet, gm, gs, coh, root_l, phi, down, rr, cc)
                w, h = _face_force(geometry[0, k], geometry[1, k], geometry[2, k], own, nb,
                                   has_nb, eta, jaky_full)
                face_w[k, r, c] = w
                face_h[k, r, c] = h


@njit
def _cell_values(out, slope, depth, wet, gm, gs, coh, root_l, phi, down, r, c):
    """Fill the 10 face inputs of :func:`_face_force` for cell (r, c) from grids."""
    out[0] = depth[r, c]
    out[1] = wet[r, c]
    out[2] = gm[r, c]
    out[3] = gs[r, c]
    out[4] = coh[r, c]
    out[5] = root_l[r, c]
    out[6] = phi[r, c]
    out[7] = down[0, r, c]
    out[8] = down[1, r, c]
    out[9] = slope[r, c]
