"""Orientation-invariant margin faces: directed neighbourhood weights (research prototype).

Conventions
-----------
* Map vectors are (east, north). Grid steps (drow, dcol): row grows southward.
* Directions k = 0..7 follow slopescreen/_neighbours.py (CCW from east, even = axis,
  odd = diagonal). The 16-neighbourhood appends the knight moves k = 8..15, CCW from
  atan(1/2) = 26.57 deg (opposite of k >= 8 is 8 + (k - 8 + 4) % 8).
* delta = downslope direction as a map angle, radians CCW from east
  (delta = 90 deg - aspect, aspect clockwise from north).
* An edge weight a_k (kN) is charged when cell i is in S and i + e_k is not.
  For a straight margin with outward unit normal n the charge per metre is
      rho(n) = sum_k a_k (e_k . n)_+ / (dx dy).
"""

import numpy as np
from scipy.optimize import linprog, nnls

DROW8 = np.array([0, -1, -1, -1, 0, 1, 1, 1])
DCOL8 = np.array([1, 1, 0, -1, -1, -1, 0, 1])
# knight moves, CCW from 26.57 deg: (dcol, dnorth)
_KN = [(2, 1), (1, 2), (-1, 2), (-2, 1), (-2, -1), (-1, -2), (1, -2), (2, -1)]
DROW16 = np.concatenate([DROW8, [-n for _, n in _KN]])
DCOL16 = np.concatenate([DCOL8, [c for c, _ in _KN]])


def steps(nb):
    """(drow, dcol) of the nb-neighbourhood (4, 8 or 16)."""
    if nb == 4:
        return DROW8[0::2].copy(), DCOL8[0::2].copy()
    if nb == 8:
        return DROW8.copy(), DCOL8.copy()
    if nb == 16:
        return DROW16.copy(), DCOL16.copy()
    raise ValueError(nb)


def opposite(nb):
    """Index of the opposite direction of each k."""
    n = {4: 4, 8: 8, 16: 8}[nb]
    base = [(k + n // 2) % n for k in range(n)]
    if nb == 16:
        base += [8 + (k + 4) % 8 for k in range(8)]
    return np.array(base)


def vectors(nb, dx=1.0, dy=1.0):
    """Edge vectors e_k (east, north) in metres, shape (nb, 2)."""
    drow, dcol = steps(nb)
    return np.stack([dcol * dx, -drow * dy], axis=1).astype(float)


def angle_weights(E):
    """Angular spacing dphi_k (half the angle between the two adjacent directions)."""
    phi = np.arctan2(E[:, 1], E[:, 0]) % (2 * np.pi)
    order = np.argsort(phi)
    ps = phi[order]
    nxt = np.roll(ps, -1)
    nxt[-1] += 2 * np.pi
    prv = np.roll(ps, 1)
    prv[0] -= 2 * np.pi
    d = np.empty_like(phi)
    d[order] = 0.5 * (nxt - prv)
    return phi, d


def normals(npts=3600):
    psi = (np.arange(npts) + 0.5) * 2 * np.pi / npts
    return psi


def basis(psi, E, dx=1.0, dy=1.0):
    """M[i, k]: charge per metre of a unit weight on edge k, normal angle psi_i."""
    n = np.stack([np.cos(psi), np.sin(psi)], axis=1)
    return np.maximum(n @ E.T, 0.0) / (dx * dy)


def target(psi, toe, head, side, delta):
    c = np.cos(psi - delta)
    cp = np.maximum(c, 0.0)
    cm = np.maximum(-c, 0.0)
    return cp * cp * toe + cm * cm * head + (1.0 - c * c) * side


# ----------------------------------------------------------------------------- fits
def fit_four(toe, head, side, delta, dx=1.0, dy=1.0):
    """Today's 4-neighbour rule: a_k = L_k r(theta_k) on the four axis faces."""
    E = vectors(4, dx, dy)
    theta = np.arctan2(E[:, 1], E[:, 0])
    length = np.array([dy, dx, dy, dx])
    return length * target(theta, toe, head, side, delta)


def fit_cc(nb, toe, head, side, delta, dx=1.0, dy=1.0):
    """Cauchy-Crofton style: a_k = r(phi_k) dphi_k dx dy / (2 |e_k|) (smooths r)."""
    E = vectors(nb, dx, dy)
    phi, dphi = angle_weights(E)
    le = np.hypot(E[:, 0], E[:, 1])
    return target(phi, toe, head, side, delta) * dphi * dx * dy / (2.0 * le)


def fit_sharp(nb, toe, head, side, delta, dx=1.0, dy=1.0, beta=1.0, clip=True):
    """Moment-matched ("sharpened") Cauchy-Crofton closed form.

    Edge density w(phi) = 1/2 [side - A + 3 A c^2] + (beta/pi) (toe - head) c,
    c = cos(phi - delta), A = (toe + head)/2 - side, a_k = dphi_k w(phi_k) dx dy / |e_k|.
    Reproduces modes 0 and 2 of r exactly in the continuum (the cos_+ kernel divides
    mode 2 by 3, hence the factor 3), and the odd part as beta (toe - head)/2 c
    (exact toe and head for beta = 1). Clipped at 0.
    """
    E = vectors(nb, dx, dy)
    phi, dphi = angle_weights(E)
    le = np.hypot(E[:, 0], E[:, 1])
    c = np.cos(phi - delta)
    A = 0.5 * (toe + head) - side
    w = 0.5 * (side - A + 3.0 * A * c * c) + beta / np.pi * (toe - head) * c
    a = dphi * w * dx * dy / le
    return np.maximum(a, 0.0) if clip else a


_PSI_FIT = normals(720)


def fit_nnls_rel(nb, toe, head, side, delta, dx=1.0, dy=1.0, psi=_PSI_FIT):
    """NNLS on the relative residual (M a - r) / r over dense normals."""
    E = vectors(nb, dx, dy)
    M = basis(psi, E, dx, dy)
    r = target(psi, toe, head, side, delta)
    wgt = 1.0 / np.maximum(r, 1e-3 * r.max())
    a, _ = nnls(M * wgt[:, None], r * wgt)
    return a


def fit_minimax(nb, toe, head, side, delta, dx=1.0, dy=1.0, psi=_PSI_FIT):
    """min_a max_i |(M a - r)_i| / r_i, a >= 0 (linear program)."""
    E = vectors(nb, dx, dy)
    M = basis(psi, E, dx, dy)
    r = target(psi, toe, head, side, delta)
    rr = np.maximum(r, 1e-3 * r.max())
    n = M.shape[1]
    # variables [a (n), t]; M a - r <= t r ; -(M a - r) <= t r
    A_ub = np.block([[M, -rr[:, None]], [-M, -rr[:, None]]])
    b_ub = np.concatenate([r, -r])
    cost = np.zeros(n + 1)
    cost[-1] = 1.0
    res = linprog(cost, A_ub=A_ub, b_ub=b_ub, bounds=[(0, None)] * (n + 1), method="highs")
    return res.x[:n]


def basis_tables(nb, delta, dx=1.0, dy=1.0, psi=_PSI_FIT):
    """Per-basis NNLS (absolute L2): weights T (c+^2), H (c-^2), S (1 - c^2).

    The weights of any (toe, head, side, thrust) are then the linear combination
    a = toe T + head H + side S, thrust weights thrust H (all >= 0).
    """
    E = vectors(nb, dx, dy)
    M = basis(psi, E, dx, dy)
    c = np.cos(psi - delta)
    out = []
    for f in (np.maximum(c, 0) ** 2, np.maximum(-c, 0) ** 2, 1 - c * c):
        a, _ = nnls(M, f)
        out.append(a)
    return np.array(out)


def fit_basis(nb, toe, head, side, delta, dx=1.0, dy=1.0):
    T, H, S = basis_tables(nb, delta, dx, dy)
    return toe * T + head * H + side * S


def floor_error(toe, head, side, delta, psi=_PSI_FIT):
    """Least max relative error of ANY translation-invariant directed pairwise scheme.

    rho(n) - rho(-n) = n . sum_k a_k e_k / (dx dy) is linear in n for every
    neighbourhood, so the odd part of rho is n . V. Best case: even part exact,
    V chosen by a linear program. Returns (max rel. error, V along delta in
    units of (toe - head)/2).
    """
    r = target(psi, toe, head, side, delta)
    c = np.cos(psi - delta)
    s = np.sin(psi - delta)
    r_o = 0.5 * (toe - head) * c * np.abs(c)
    # rho = r_e + v1 c + v2 s ; err = (v1 c + v2 s - r_o)/r
    rr = np.maximum(r, 1e-3 * r.max())
    G = np.stack([c, s], axis=1)
    A_ub = np.block([[G, -rr[:, None]], [-G, -rr[:, None]]])
    b_ub = np.concatenate([r_o, -r_o])
    res = linprog([0, 0, 1], A_ub=A_ub, b_ub=b_ub,
                  bounds=[(None, None), (None, None), (0, None)], method="highs")
    v1 = res.x[0]
    scale = 0.5 * (toe - head) if toe != head else 1.0
    return res.x[2], v1 / scale


# ----------------------------------------------------------------------------- errors
_PSI_EVAL = normals(7200)


def charge(a, nb, dx=1.0, dy=1.0, psi=_PSI_EVAL):
    return basis(psi, vectors(nb, dx, dy), dx, dy) @ a


def errors(a, nb, toe, head, side, delta, dx=1.0, dy=1.0, psi=_PSI_EVAL):
    """(max, rms) relative error of rho vs r, and (max, rms) of the even parts."""
    rho = charge(a, nb, dx, dy, psi)
    r = target(psi, toe, head, side, delta)
    rel = rho / r - 1.0
    half = len(psi) // 2
    rho_e = 0.5 * (rho + np.roll(rho, -half))
    r_e = 0.5 * (r + np.roll(r, -half))
    rel_e = rho_e / r_e - 1.0
    return (np.abs(rel).max(), np.sqrt(np.mean(rel ** 2)),
            np.abs(rel_e).max(), np.sqrt(np.mean(rel_e ** 2)))


# ----------------------------------------------------------------------------- slabs
def rect_mask(n, W, L, delta, off=(0.0, 0.0), dx=1.0, dy=1.0):
    """Cells whose centres lie inside a W x L rectangle (L along delta), centre at
    the grid centre + off (metres east, north)."""
    r, c = np.mgrid[0:n, 0:n]
    x = (c + 0.5 - n / 2) * dx - off[0]
    y = -(r + 0.5 - n / 2) * dy - off[1]
    d = np.array([np.cos(delta), np.sin(delta)])
    along = x * d[0] + y * d[1]
    across = -x * d[1] + y * d[0]
    return (np.abs(along) < L / 2) & (np.abs(across) < W / 2)


def margin_counts(mask, nb):
    """Number of (i in S, i + e_k not in S) pairs per direction k."""
    drow, dcol = steps(nb)
    p = 3
    pad = np.zeros((mask.shape[0] + 2 * p, mask.shape[1] + 2 * p), bool)
    pad[p:-p, p:-p] = mask
    out = np.zeros(len(drow))
    for k, (dr, dc) in enumerate(zip(drow, dcol)):
        nbm = pad[p + dr:p + dr + mask.shape[0], p + dc:p + dc + mask.shape[1]]
        out[k] = np.count_nonzero(mask & ~nbm)
    return out


def slab_fs(mask, nb, a_res, a_thr, R_cell, D_cell):
    cnt = margin_counts(mask, nb)
    n = mask.sum()
    return (n * R_cell + cnt @ a_res) / (n * D_cell + cnt @ a_thr)


# ----------------------------------------------------------------------------- even-part fits
def pair_index(nb):
    """Indices j of one direction of each opposite pair (j < opposite(j))."""
    opp = opposite(nb)
    return np.array([k for k in range(nb) if k < opp[k]])


def even_basis(psi, E, dx=1.0, dy=1.0):
    """Me[i, k] = |e_k . n_i| / (2 dx dy): even charge per metre of a unit pair sum."""
    n = np.stack([np.cos(psi), np.sin(psi)], axis=1)
    return np.abs(n @ E.T) / (2.0 * dx * dy)


_PSI_HALF = (np.arange(360) + 0.5) * np.pi / 360


def fit_even_nnls(nb, m, side, delta, dx=1.0, dy=1.0, psi=_PSI_HALF):
    """Pair sums s_j >= 0 (kN) fitting r_e = m c^2 + side (1 - c^2) in relative L2."""
    E = vectors(nb, dx, dy)
    j = pair_index(nb)
    Me = even_basis(psi, E[j], dx, dy)
    c = np.cos(psi - delta)
    re = m * c * c + side * (1 - c * c)
    wgt = 1.0 / np.maximum(re, 1e-3 * re.max())
    s, _ = nnls(Me * wgt[:, None], re * wgt)
    return s


def fit_even_minimax(nb, m, side, delta, dx=1.0, dy=1.0, psi=_PSI_HALF):
    E = vectors(nb, dx, dy)
    j = pair_index(nb)
    Me = even_basis(psi, E[j], dx, dy)
    c = np.cos(psi - delta)
    re = m * c * c + side * (1 - c * c)
    rr = np.maximum(re, 1e-3 * re.max())
    n = len(j)
    A_ub = np.block([[Me, -rr[:, None]], [-Me, -rr[:, None]]])
    res = linprog(np.r_[np.zeros(n), 1.0], A_ub=A_ub, b_ub=np.r_[re, -re],
                  bounds=[(0, None)] * (n + 1), method="highs")
    return res.x[:n]


Q_SET = np.geomspace(0.2, 3.0, 15)


def linear_table(nb, delta, dx=1.0, dy=1.0, qset=Q_SET, psi=_PSI_HALF):
    """Pair sums P_j, Q_j >= 0 (kN per kN/m) of the linear scheme at downslope angle delta.

    s_j = m P_j + side Q_j (m = (toe + head)/2) minimises, by one linear program, the
    largest relative error of the even charge against m c^2 + side (1 - c^2) over
    every ratio q = m / side in qset.
    """
    E = vectors(nb, dx, dy)
    j = pair_index(nb)
    Me = even_basis(psi, E[j], dx, dy)
    c2 = np.cos(psi - delta) ** 2
    n = len(j)
    rows, rhs = [], []
    for q in qset:
        re = q * c2 + (1 - c2)
        blk = np.hstack([q * Me, Me])
        rows.append(np.hstack([blk, -re[:, None]]))
        rhs.append(re)
        rows.append(np.hstack([-blk, -re[:, None]]))
        rhs.append(-re)
    res = linprog(np.r_[np.zeros(2 * n), 1.0], A_ub=np.vstack(rows), b_ub=np.concatenate(rhs),
                  bounds=[(0, None)] * (2 * n + 1), method="highs")
    return res.x[:n], res.x[n:2 * n], res.x[-1]


def directed_from_pairs(nb, P, Q, delta, dx=1.0, dy=1.0):
    """Directed basis weights (T, H, S), each shape (nb,), from pair sums P, Q.

    The toe share m P of pair j goes to the edge whose outward direction faces downslope
    (c_k > 0), the head share to the opposite edge, half each when c_k = 0; the side
    share Q is split evenly. Then a = toe T + head H + side S, thrust weights thrust H.
    """
    E = vectors(nb, dx, dy)
    opp = opposite(nb)
    j = pair_index(nb)
    T = np.zeros(nb)
    H = np.zeros(nb)
    S = np.zeros(nb)
    d = np.array([np.cos(delta), np.sin(delta)])
    for i, k in enumerate(j):
        ck = E[k] @ d / np.hypot(*E[k])
        ko = opp[k]
        half = 0.5 * P[i]
        if abs(ck) < 1e-12:
            T[k] = T[ko] = H[k] = H[ko] = 0.5 * half
        elif ck > 0:
            T[k], H[ko] = half, half
        else:
            T[ko], H[k] = half, half
        S[k] = S[ko] = 0.5 * Q[i]
    return T, H, S


def fit_linear(nb, toe, head, side, delta, dx=1.0, dy=1.0, table=None):
    """(resistance weights, thrust weights per unit thrust) of the linear scheme."""
    P, Q, _ = table if table is not None else linear_table(nb, delta, dx, dy)
    T, H, S = directed_from_pairs(nb, P, Q, delta, dx, dy)
    return toe * T + head * H + side * S, H


def fit_even_directed(nb, toe, head, side, delta, dx=1.0, dy=1.0, how="nnls"):
    """Per-case even fit (NNLS or minimax on r_e) with the same directed split."""
    m = 0.5 * (toe + head)
    fit = fit_even_nnls if how == "nnls" else fit_even_minimax
    s = fit(nb, m, side, delta, dx, dy)
    # s = m P + side Q with the toe/head share: split s in the proportion of the target
    # at the pair's own direction (c_j^2 m : (1 - c_j^2) side)
    E = vectors(nb, dx, dy)
    j = pair_index(nb)
    d = np.array([np.cos(delta), np.sin(delta)])
    cj2 = ((E[j] @ d) / np.hypot(E[j, 0], E[j, 1])) ** 2
    share = m * cj2 / np.maximum(m * cj2 + side * (1 - cj2), 1e-300)
    P = s * share / max(m, 1e-300)
    Q = s * (1 - share) / max(side, 1e-300)
    T, H, S = directed_from_pairs(nb, P, Q, delta, dx, dy)
    return toe * T + head * H + side * S


def big_vectors(rad=6, dx=1.0, dy=1.0):
    from math import gcd
    v = [(i, j) for i in range(-rad, rad + 1) for j in range(-rad, rad + 1)
         if (i, j) != (0, 0) and gcd(abs(i), abs(j)) == 1]
    return np.array([(i * dx, j * dy) for i, j in v], float)


def floor_minimax(toe, head, side, delta, psi=_PSI_FIT, rad=6):
    """Least max relative error of the full per-metre charge for a large neighbourhood."""
    E = big_vectors(rad)
    M = basis(psi, E)
    r = target(psi, toe, head, side, delta)
    rr = np.maximum(r, 1e-3 * r.max())
    n = M.shape[1]
    A_ub = np.block([[M, -rr[:, None]], [-M, -rr[:, None]]])
    res = linprog(np.r_[np.zeros(n), 1.0], A_ub=A_ub, b_ub=np.r_[r, -r],
                  bounds=[(0, None)] * (n + 1), method="highs")
    return res.x[-1]


def odd_beta(a, nb, toe, head, delta, dx=1.0, dy=1.0):
    """Odd part of rho as beta (toe - head)/2 (n . d): returns (beta, transverse part)."""
    E = vectors(nb, dx, dy)
    V = 0.5 * (a @ E) / (dx * dy)
    d = np.array([np.cos(delta), np.sin(delta)])
    dp = np.array([-d[1], d[0]])
    sc = 0.5 * (toe - head)
    return V @ d / sc, V @ dp / sc


def floor_even(m, side, delta, psi=_PSI_HALF, rad=6):
    """Least max relative error of the EVEN charge for a large neighbourhood (nonneg pairs):
    the distance of r_e from the support functions of centrally symmetric convex sets."""
    E = big_vectors(rad)
    E = E[(E[:, 1] > 0) | ((E[:, 1] == 0) & (E[:, 0] > 0))]
    Me = even_basis(psi, E)
    c = np.cos(psi - delta)
    re = m * c * c + side * (1 - c * c)
    rr = np.maximum(re, 1e-3 * re.max())
    n = Me.shape[1]
    A_ub = np.block([[Me, -rr[:, None]], [-Me, -rr[:, None]]])
    res = linprog(np.r_[np.zeros(n), 1.0], A_ub=A_ub, b_ub=np.r_[re, -re],
                  bounds=[(0, None)] * (n + 1), method="highs")
    return res.x[-1]


def linear_table_signed(nb, delta, dx=1.0, dy=1.0, qfit=np.geomspace(0.5, 2.0, 9), q_hi=2.0,
                        psi=_PSI_HALF):
    """Linear scheme s_j = m P_j + side Q_j with P signed, Q >= 0 and q_hi P + Q >= 0
    (so s_j >= 0, and g's pair sums are >= 0, for every q_lambda in [0, q_hi]);
    minimax relative even error over q in qfit."""
    E = vectors(nb, dx, dy)
    j = pair_index(nb)
    Me = even_basis(psi, E[j], dx, dy)
    c2 = np.cos(psi - delta) ** 2
    n = len(j)
    rows, rhs = [], []
    for q in qfit:
        re = q * c2 + (1 - c2)
        blk = np.hstack([q * Me, Me])
        rows.append(np.hstack([blk, -re[:, None]]))
        rhs.append(re)
        rows.append(np.hstack([-blk, -re[:, None]]))
        rhs.append(-re)
    # -(q_hi P + Q) <= 0
    rows.append(np.hstack([-q_hi * np.eye(n), -np.eye(n), np.zeros((n, 1))]))
    rhs.append(np.zeros(n))
    bounds = [(None, None)] * n + [(0, None)] * n + [(0, None)]
    res = linprog(np.r_[np.zeros(2 * n), 1.0], A_ub=np.vstack(rows), b_ub=np.concatenate(rhs),
                  bounds=bounds, method="highs")
    return res.x[:n], res.x[n:2 * n], res.x[-1]


def fit_two_stage(nb, toe, head, side, delta, dx=1.0, dy=1.0, psi=_PSI_FIT, absolute=False):
    """Stage 1: pair sums s_j >= 0 by NNLS on the even part r_e (relative, or absolute
    when ``absolute``); stage 2: directed split a_k, a_k' in [0, s_j], a_k + a_k' = s_j,
    by bounded least squares on the full residual (same weighting)."""
    from scipy.optimize import lsq_linear
    E = vectors(nb, dx, dy)
    opp = opposite(nb)
    j = pair_index(nb)
    half_psi = psi[psi < np.pi]
    Me = even_basis(half_psi, E[j], dx, dy)
    c = np.cos(half_psi - delta)
    re = 0.5 * (toe + head) * c * c + side * (1 - c * c)
    we = np.ones_like(re) if absolute else 1.0 / np.maximum(re, 1e-3 * re.max())
    s, _ = nnls(Me * we[:, None], re * we)
    # a_k = x_i, a_k' = s_i - x_i  -> rho = M[:, j] x + M[:, opp j] (s - x)
    M = basis(psi, E, dx, dy)
    r = target(psi, toe, head, side, delta)
    w = np.ones_like(r) if absolute else 1.0 / np.maximum(r, 1e-3 * r.max())
    A = (M[:, j] - M[:, opp[j]]) * w[:, None]
    b = (r - M[:, opp[j]] @ s) * w
    if np.all(s <= 0):
        x = np.zeros_like(s)
    else:
        ub = np.maximum(s, 1e-300)
        x = lsq_linear(A, b, bounds=(np.zeros_like(s), ub)).x
    a = np.zeros(nb)
    a[j] = x
    a[opp[j]] = s - x
    return np.maximum(a, 0.0)


def fit_convex_cc(nb, toe, head, side, delta, dx=1.0, dy=1.0, beta=1.0):
    """Closed form "convex Cauchy-Crofton" (recommended).

    Even density  e(phi) = 1/2 [r0 + kappa r2 cos 2(phi - delta)],  r0 = side + A/2, r2 = A/2,
    A = (toe + head)/2 - side, kappa = min(3, (2 side + A)/|A|): kappa = 3 reproduces modes 0 and 2
    of r exactly (the cos_+ kernel divides mode 2 by 3); a smaller kappa is the largest
    anisotropy whose density stays >= 0, i.e. whose charge is a convex (cut-representable)
    function. Odd density o(phi) = (beta/pi)(toe - head) cos(phi - delta), limited per
    opposite pair to |o| <= e so that the pair sums (even part) are kept exactly.
    a_k = dphi_k (e + o)(phi_k) dx dy / |e_k|.
    """
    E = vectors(nb, dx, dy)
    phi, dphi = angle_weights(E)
    le = np.hypot(E[:, 0], E[:, 1])
    x = phi - delta
    A = 0.5 * (toe + head) - side
    r0 = side + 0.5 * A
    kappa = 3.0 if abs(A) < 1e-300 else min(3.0, max(0.0, (2.0 * side + A) / abs(A)))
    e = 0.5 * (r0 + kappa * 0.5 * A * np.cos(2 * x))
    e = np.maximum(e, 0.0)
    o = beta / np.pi * (toe - head) * np.cos(x)
    o = np.clip(o, -e, e)
    return dphi * (e + o) * dx * dy / le
