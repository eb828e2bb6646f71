"""Numba kernels of the force model (:mod:`slopescreen.clusters.forces`).

Per cell the basal forces, per face the earth-pressure forces; the same
helpers serve the force grids and the Monte Carlo re-evaluation of clusters
(:mod:`slopescreen.clusters.probability`), so both use one set of equations.
"""

import math

import numpy as np

from .._kernels.slope_stability import GAMMA_W, _fs_point, _rad
from .._numba import njit, njit_parallel, prange


@njit
def _sigma_v_integral(z, hw, gm, gs):
    """Integral over the face height of the effective vertical stress, kN/m.

    Water table h_w above the base (vertical); gamma_m above it, buoyant
    gamma_sat - gamma_w below it.
    """
    t = z - hw
    return 0.5 * gm * t * t + gm * t * hw + 0.5 * (gs - GAMMA_W) * hw * hw


@njit
def _positive_part_integral(a0, a1, length):
    """Integral over [0, length] of max(0, f) with f linear from a0 to a1."""
    if length <= 0.0:
        return 0.0
    if a0 >= 0.0 and a1 >= 0.0:
        return 0.5 * (a0 + a1) * length
    if a0 <= 0.0 and a1 <= 0.0:
        return 0.0
    hi = max(a0, a1)
    return 0.5 * hi * hi / abs(a1 - a0) * length


@njit
def _face_per_length(z, m, gm, gs, coh, root_lat, tan_phi, sin_phi, passive_fraction, jaky_full):
    """(toe resistance, head resistance, side resistance, active thrust) per metre of face, kN/m."""
    ka = (1.0 - sin_phi) / (1.0 + sin_phi)
    kp = (1.0 + sin_phi) / (1.0 - sin_phi)
    k0 = 1.0 - sin_phi
    if jaky_full:
        k0 = (1.0 - sin_phi) * (1.0 + 2.0 / 3.0 * sin_phi) / (1.0 + sin_phi)
    hw = m * z
    sv = _sigma_v_integral(z, hw, gm, gs)
    toe = passive_fraction * (kp * sv + 2.0 * coh * math.sqrt(kp) * z)
    head = root_lat * z
    side = (coh + root_lat) * z + k0 * tan_phi * sv
    t = z - hw
    s_t = gm * t
    s_z = s_t + (gs - GAMMA_W) * hw
    off = 2.0 * coh * math.sqrt(ka)
    thrust = (_positive_part_integral(-off, ka * s_t - off, t)
              + _positive_part_integral(ka * s_t - off, ka * s_z - off, hw))
    return toe, head, side, thrust


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
def _face_force(k, length, own, nb, has_nb, eta, jaky_full):
    """(W, H) of face k of a cell, kN.

    ``own`` and ``nb`` hold (z, wetness, gamma_m, gamma_sat, c', c_r lateral,
    phi' degrees, downslope east, downslope north) of the cell and of the
    cell across the face. Between two valid cells the face takes the mean of
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
        ve = own[7]
        vn = own[8]
    toe, head, side, thrust = _face_per_length(
        fz, fm, fgm, fgs, fc, fl, math.tan(fphi), math.sin(fphi), eta, jaky_full)
    cosang = (1.0, 0.0, -1.0, 0.0)[k] * ve + (0.0, 1.0, 0.0, -1.0)[k] * vn
    cp = max(cosang, 0.0)
    cm = max(-cosang, 0.0)
    w = length * (cp * cp * toe + cm * cm * head + (1.0 - cosang * cosang) * side)
    h = length * cm * cm * thrust
    return w, h


@njit_parallel
def _forces_kernel(slope, aspect, depth, wet, coh, root_b, root_l, phi, gm, gs, valid, dx, dy,
                   eta, jaky_full, driving, resisting, face_w, face_h, cell_fs, down):
    rows, cols = slope.shape
    area = dx * dy
    for r in prange(rows):
        own = np.empty(9)
        nb = np.empty(9)
        for c in range(cols):
            if not valid[r, c]:
                driving[r, c] = math.nan
                resisting[r, c] = math.nan
                cell_fs[r, c] = math.nan
                for k in range(4):
                    face_w[k, r, c] = math.nan
                    face_h[k, r, c] = math.nan
                continue
            d_i, r_i, fs_i = _basal_forces(slope[r, c], depth[r, c], wet[r, c], gm[r, c],
                                           gs[r, c], coh[r, c], root_b[r, c], phi[r, c], area)
            driving[r, c] = d_i
            resisting[r, c] = r_i
            cell_fs[r, c] = fs_i
            _cell_values(own, depth, wet, gm, gs, coh, root_l, phi, down, r, c)
            for k in range(4):
                rr = r + (0, -1, 0, 1)[k]
                cc = c + (1, 0, -1, 0)[k]
                length = dy if k % 2 == 0 else dx
                has_nb = 0 <= rr < rows and 0 <= cc < cols and valid[rr, cc]
                if has_nb:
                    _cell_values(nb, depth, wet, gm, gs, coh, root_l, phi, down, rr, cc)
                w, h = _face_force(k, length, own, nb, has_nb, eta, jaky_full)
                face_w[k, r, c] = w
                face_h[k, r, c] = h


@njit
def _cell_values(out, depth, wet, gm, gs, coh, root_l, phi, down, r, c):
    """Fill the 9 face inputs of :func:`_face_force` for cell (r, c) from grids."""
    out[0] = depth[r, c]
    out[1] = wet[r, c]
    out[2] = gm[r, c]
    out[3] = gs[r, c]
    out[4] = coh[r, c]
    out[5] = root_l[r, c]
    out[6] = phi[r, c]
    out[7] = down[0, r, c]
    out[8] = down[1, r, c]
