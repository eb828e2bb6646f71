"""Failure clusters checked against outside references.

Handbook earth-pressure values (Rankine and Jaky, handbook formula evaluated), a block force
balance worked by hand, brute force over every subset of small grids, the Lovasz-extension LP
solved by cvxpy/HiGHS, and networkx minimum_cut on the same integer graph.

The margin forces act on 16 directed cell pairs (the 8 neighbours and the 8 knight moves)
with Cauchy-Crofton weights (Boykov and Kolmogorov 2003, from memory; docs/methods.md,
"Multi-cell failure clusters"). The steps, their opposites and the weights are written out
below, not imported, so that the brute force and the hand balance stay independent of the
code under test.
"""

import itertools
import math

import numpy as np
import pytest

from earth_pressure_oracle import inclined_rankine
from pair_oracle import HALF_STEPS, STEPS, cc_factors, opposite
from slopescreen.clusters import (
    cluster_factor_of_safety,
    cluster_forces,
    earth_pressure_coefficients,
    face_pressures,
    failure_clusters,
    fs_bound_map,
    least_stable_in_window,
    nonsubmodular_faces,
)
from slopescreen.clusters.cut import (
    _graph_kernel,
    integer_terms,
    magnitude,
    pair_terms,
    scale_for,
    solve_window,
)
from slopescreen.clusters.search import failing_set
from slopescreen.stability import factor_of_safety

GW = 9.81

def _shifted_out(mask, dr, dc):
    """Cells of ``mask`` whose partner (r + dr, c + dc) is outside the mask or off the grid."""
    rows, cols = mask.shape
    pad = np.pad(mask, 2)
    return mask & ~pad[2 + dr:2 + dr + rows, 2 + dc:2 + dc + cols]


def _margin_sums(forces, mask):
    """(B, H): W and H summed over the margin pairs of ``mask``, over the literal steps."""
    b = h = 0.0
    for k, (dr, dc) in enumerate(STEPS):
        out = _shifted_out(mask, dr, dc)
        b += float(forces.face_resistance[k][out].sum())
        h += float(forces.face_thrust[k][out].sum())
    return b, h


def test_step_list_and_factors_by_hand():
    # the literal steps: 16 distinct, each with its opposite, on the 5 x 5 stencil
    assert len(set(STEPS)) == 16 and all(max(abs(dr), abs(dc)) <= 2 for dr, dc in STEPS)
    for k, (dr, dc) in enumerate(STEPS):
        assert STEPS[opposite(k)] == (-dr, -dc)
    assert sorted(HALF_STEPS + tuple(opposite(k) for k in HALF_STEPS)) == list(range(16))
    # square cells: dphi = atan(1/2) on the axes, atan(3/4)/2 on the diagonals, pi/8 on the
    # knight moves (26.57, 18.43 and 22.5 degrees; angles between the steps, by hand)
    a = cc_factors(1.0, 1.0)
    assert a[0] == pytest.approx(math.atan(0.5) / 2.0, rel=1e-12)
    assert a[1] == pytest.approx(math.atan(0.75) / 2.0 / (2.0 * math.sqrt(2.0)), rel=1e-12)
    assert a[8] == pytest.approx(math.pi / 8.0 / (2.0 * math.sqrt(5.0)), rel=1e-12)
    # the dphi sum to 2 pi on any cell shape
    for dx, dy in ((1.0, 1.0), (4.0, 5.0), (10.0, 3.0)):
        dphi = [2.0 * f * math.hypot(dc * dx, dr * dy) / (dx * dy)
                for f, (dr, dc) in zip(cc_factors(dx, dy), STEPS)]
        assert sum(dphi) == pytest.approx(2.0 * math.pi, rel=1e-12)
    # a lone cell's pairs add up to 2 atan(1/2) + atan(3/4)/sqrt 2 + pi/(2 sqrt 5) = 2.0848 dx,
    # not its perimeter 4 dx: corners are counted short (docs/methods.md, "What it costs")
    lone = 2.0 * math.atan(0.5) + math.atan(0.75) / math.sqrt(2.0) + math.pi / (2 * math.sqrt(5))
    assert sum(cc_factors(1.0, 1.0)) == pytest.approx(lone, rel=1e-12)
    assert lone == pytest.approx(2.0848, abs=1e-4)
    # the forces carry these weights: a lone flat cell (no downslope direction, c = 0) has
    # W = a_k side towards every partner (docs/methods.md, "Multi-cell failure clusters")
    kw = dict(cohesion_kpa=1.0, lateral_root_cohesion_kpa=2.0, friction_deg=30.0,
              unit_weight_kn_m3=18.0)
    f = cluster_forces(np.zeros((5, 5)), np.full((5, 5), 180.0), 1.0, 0.0, dx=4.0, dy=5.0,
                       root_cohesion_kpa=0.0, **kw)
    side = (1.0 + 2.0) * 1.0 + (1 - 0.5) * math.tan(math.radians(30.0)) * 18.0 / 2.0
    assert np.allclose(f.face_resistance[:, 2, 2], np.array(cc_factors(4.0, 5.0)) * side,
                       rtol=1e-12)
    assert not f.face_thrust[:, 2, 2].any()


# --------------------------------------------------------------------------- handbook values
@pytest.mark.parametrize("phi, ka, kp, k0, k0j", [
    # Rankine and Jaky coefficients (handbook formula evaluated)
    (25.0, 0.405859, 2.463913, 0.577382, 0.520207),
    (30.0, 1.0 / 3.0, 3.0, 0.5, 0.444444),
    (35.0, 0.270990, 3.690172, 0.426424, 0.374612),
])
def test_rankine_jaky_handbook(phi, ka, kp, k0, k0j):
    got = earth_pressure_coefficients(phi)
    assert np.allclose(got, (ka, kp, k0, k0j), atol=2e-6)


def test_face_forces_handbook():
    # handbook formula evaluated: phi 30, gamma 18, z 1 m: P_a = 3.0, P_0 = 4.5, P_p = 27.0 kN/m
    f = face_pressures(1.0, 0.0, cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
                       friction_deg=30.0, unit_weight_kn_m3=18.0, passive_fraction=1.0)
    assert f["active"] == pytest.approx(3.0, rel=1e-12)
    assert f["toe"] == pytest.approx(27.0, rel=1e-12)
    # side = K0 tan(phi) * 1/2 gamma z^2 with K0 = 0.5 (P_0 = 4.5 kN/m)
    assert f["side"] == pytest.approx(4.5 * math.tan(math.radians(30.0)), rel=1e-12)
    # with c' = 5 kPa: z_c = 0.96225 m, sigma_a(1 m) = 0.22650 kPa, sigma_p(1 m) = 71.3205 kPa
    # (handbook formula evaluated); P_a = triangle below z_c, P_p = 27 + 2 c sqrt(Kp) z
    fc = face_pressures(1.0, 0.0, cohesion_kpa=5.0, lateral_root_cohesion_kpa=0.0,
                        friction_deg=30.0, unit_weight_kn_m3=18.0, passive_fraction=1.0)
    assert fc["active"] == pytest.approx(0.5 * 0.22650 * (1.0 - 0.96225), rel=2e-4)
    assert fc["toe"] == pytest.approx(0.5 * (71.3205 + 2 * 5 * math.sqrt(3.0)), rel=1e-5)
    half = face_pressures(1.0, 0.0, cohesion_kpa=5.0, lateral_root_cohesion_kpa=0.0,
                          friction_deg=30.0, unit_weight_kn_m3=18.0, passive_fraction=0.5)
    assert half["toe"] == pytest.approx(0.5 * fc["toe"], rel=1e-12)


# --------------------------------------------------------------------------- slab by hand
def _per_metre(theta, phi, gamma, gsat, z, m, c_lat, eta):
    """(toe, head, side, active) per metre of margin, kN/m, worked by hand.

    Force model of Milledge et al. (2014) as in docs/methods.md, "Multi-cell failure
    clusters": passive toe, root-only head, at-rest sides (K0 = 1 - sin phi'), active thrust
    at the head, with the inclined Rankine coefficients and c' = 0 on the faces (no tension
    zone), water table h_w = m z.
    """
    p = math.radians(phi)
    hw = m * z
    ka, kp = inclined_rankine(theta, phi)
    # integral of the effective vertical stress over the face height
    dry = z - hw
    sv = gamma * dry ** 2 / 2 + gamma * dry * hw + (gsat - GW) * hw ** 2 / 2
    k0 = 1 - math.sin(p)
    return eta * kp * sv, c_lat * z, c_lat * z + k0 * math.tan(p) * sv, ka * sv


def _basal(theta, phi, gamma, gsat, z, m, c_base, area):
    """(driving, basal resistance) of a plan area, kN: the infinite-slope base."""
    t, p = math.radians(theta), math.radians(phi)
    hw = m * z
    col = gamma * (z - hw) + gsat * hw
    u = GW * hw * math.cos(t) ** 2
    drive = col * area * math.sin(t)
    basal = (c_base + (col * math.cos(t) ** 2 - u) * math.tan(p)) * area / math.cos(t)
    return drive, basal


def _hand_slab(theta, phi, gamma, gsat, z, m, c_base, c_lat, eta, dx, dy, nr, nc):
    """Block force balance of an nr x nc slab facing south, margins on the 16 cell pairs.

    The base as in docs/methods.md; the margin charged pair by pair with the Cauchy-Crofton
    weights (Boykov and Kolmogorov 2003, from memory): for step e_k = (dr, dc), the cells of
    the rectangle whose partner lies outside it number nr nc - (nr - |dr|)(nc - |dc|); each
    carries a_k [c+^2 toe + c-^2 head + (1 - c^2) side] and a_k c-^2 P_a, with c the cosine
    between e_k and the downslope direction (south) and the per-metre terms of Milledge et al.
    (2014) (docs/methods.md, "Multi-cell failure clusters").
    """
    drive, basal = _basal(theta, phi, gamma, gsat, z, m, c_base, nr * nc * dx * dy)
    toe, head, side, active = _per_metre(theta, phi, gamma, gsat, z, m, c_lat, eta)
    b = h = 0.0
    for a, (dr, dc) in zip(cc_factors(dx, dy), STEPS):
        count = nr * nc - max(nr - abs(dr), 0) * max(nc - abs(dc), 0)
        # unit step (east, north) = (dc dx, -dr dy) / |e|; downslope (0, -1)
        c = dr * dy / math.hypot(dc * dx, dr * dy)
        cp, cm = max(c, 0.0), max(-c, 0.0)
        b += count * a * (cp * cp * toe + cm * cm * head + (1 - c * c) * side)
        h += count * a * cm * cm * active
    return (basal + b) / (drive + h)


def _rectangle_balance(theta, phi, gamma, gsat, z, m, c_base, c_lat, eta, dx, dy, nr, nc):
    """The same slab as an exact rectangle: toe and head of width nc dx, two sides nr dy long."""
    drive, basal = _basal(theta, phi, gamma, gsat, z, m, c_base, nr * nc * dx * dy)
    toe, head, side, active = _per_metre(theta, phi, gamma, gsat, z, m, c_lat, eta)
    width, length = nc * dx, nr * dy
    return (basal + width * (toe + head) + 2 * length * side) / (drive + width * active)


@pytest.mark.parametrize("theta", [30.0, 38.0])   # below and beyond phi' = 33
@pytest.mark.parametrize("m", [0.0, 0.6])
def test_rectangular_slab_matches_hand_balance(m, theta):
    rows, cols, nr, nc = 12, 10, 5, 4
    slope = np.full((rows, cols), theta)
    kw = dict(dx=4.0, dy=5.0, cohesion_kpa=0.0, root_cohesion_kpa=1.5,
              lateral_root_cohesion_kpa=6.0, friction_deg=33.0, unit_weight_kn_m3=17.0,
              saturated_unit_weight_kn_m3=20.0, passive_fraction=0.5)
    f = cluster_forces(slope, np.full((rows, cols), 180.0), 1.3, m, **kw)
    mask = np.zeros((rows, cols), bool)
    mask[3:3 + nr, 2:2 + nc] = True
    # the hand per-metre terms are those of face_pressures (the handbook-checked helper above)
    fp = face_pressures(1.3, m, cohesion_kpa=0.0, lateral_root_cohesion_kpa=6.0,
                        friction_deg=33.0, unit_weight_kn_m3=17.0,
                        saturated_unit_weight_kn_m3=20.0, passive_fraction=0.5,
                        ground_slope_deg=theta)
    hand = _per_metre(theta, 33.0, 17.0, 20.0, 1.3, m, 6.0, 0.5)
    assert np.allclose([fp["toe"], fp["head"], fp["side"], fp["active"]], hand, rtol=1e-12)
    # the closed-form pair count of _hand_slab, recounted on the raster
    for dr, dc in STEPS:
        assert int(_shifted_out(mask, dr, dc).sum()) == nr * nc - (nr - abs(dr)) * (nc - abs(dc))
    expect = _hand_slab(theta, 33.0, 17.0, 20.0, 1.3, m, 1.5, 6.0, 0.5, 4.0, 5.0, nr, nc)
    got = cluster_factor_of_safety(f, mask)
    assert got == pytest.approx(expect, rel=1e-12)
    # against the exact rectangle (the continuum block balance): the pairs count the corners
    # short, so this small slab sits 2-5 % under it (docs/methods.md, "What it costs")
    exact = _rectangle_balance(theta, 33.0, 17.0, 20.0, 1.3, m, 1.5, 6.0, 0.5, 4.0, 5.0, nr, nc)
    assert 0.95 * exact < got < exact


def test_long_slab_margin_charge_tends_to_its_length():
    # Cauchy-Crofton property (Boykov and Kolmogorov 2003, from memory): a straight margin of
    # length l with a uniform per-metre resistance r is charged close to l r whatever the
    # cell shape. On flat ground there is no downslope direction, so c = 0 on every pair and
    # r = side everywhere (by hand: (c' + c_r,lat) z + (1 - sin phi') tan phi' gamma z^2 / 2).
    dx, dy = 4.0, 5.0
    kw = dict(cohesion_kpa=1.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=2.0,
              friction_deg=30.0, unit_weight_kn_m3=18.0)
    side = (1.0 + 2.0) * 1.0 + (1 - 0.5) * math.tan(math.radians(30.0)) * 18.0 / 2.0
    charge = {}
    for along in ("rows", "cols"):
        for n in (50, 200):
            shape = (n + 8, 8) if along == "rows" else (8, n + 8)
            f = cluster_forces(np.zeros(shape), np.full(shape, 180.0), 1.0, 0.0, dx=dx, dy=dy,
                               **kw)
            mask = np.zeros(shape, bool)
            if along == "rows":
                mask[4:4 + n, 2:6] = True      # 4 cells wide, n cells long (north-south)
                perimeter = 2 * (n * dy + 4 * dx)
            else:
                mask[2:6, 4:4 + n] = True      # 4 cells high, n cells long (east-west)
                perimeter = 2 * (n * dx + 4 * dy)
            b, h = _margin_sums(f, mask)
            assert h == 0.0
            charge[along, n] = b
            # the whole margin, short ends and corners included: within a few per cent
            assert b / (perimeter * side) == pytest.approx(1.0, abs=0.04)
        # the long sides alone (the difference removes ends and corners): within 2 %, the
        # quadrature ripple of 16 directions
        extra = 2 * 150 * (dy if along == "rows" else dx)
        per_metre = (charge[along, 200] - charge[along, 50]) / extra
        assert per_metre == pytest.approx(side, rel=0.02)


def test_slab_fs_tends_to_infinite_slope():
    # infinite-slope FS from the stability module
    # (docs/methods.md, "Infinite-slope factor of safety")
    kw = dict(cohesion_kpa=0.5, root_cohesion_kpa=0.0, friction_deg=34.0,
              unit_weight_kn_m3=18.0)
    fs_inf = float(factor_of_safety(40.0, 1.0, 0.7, **kw))
    gaps = []
    for n in (4, 16, 64):
        f = cluster_forces(np.full((n + 2, n + 2), 40.0), np.full((n + 2, n + 2), 180.0), 1.0,
                           0.7, dx=5.0, dy=5.0, lateral_root_cohesion_kpa=3.0,
                           passive_fraction=0.5, **kw)
        mask = np.zeros((n + 2, n + 2), bool)
        mask[1:-1, 1:-1] = True
        gaps.append(cluster_factor_of_safety(f, mask) - fs_inf)
    assert all(g > 0 for g in gaps)           # margins add strength
    # perimeter / area ~ 1/n: each fourfold growth cuts the gap about fourfold
    assert 3.0 < gaps[0] / gaps[1] < 4.5 and 3.0 < gaps[1] / gaps[2] < 4.5
    assert gaps[2] < 0.02 * fs_inf


# --------------------------------------------------------------------------- brute force
def _instance(rng, rows, cols, *, realistic=True, phi=None):
    if realistic:
        # a hollow: steeper and wetter down the middle, facing roughly south
        c = np.arange(cols) - (cols - 1) / 2
        slope = 29 + 14 * np.exp(-(c[None, :] ** 2) / 2) + rng.normal(0, 2, (rows, cols))
        aspect = 180 + 15 * np.sign(c)[None, :] + rng.normal(0, 5, (rows, cols))
        wet = np.clip(0.1 + 0.9 * np.exp(-(c[None, :] ** 2)) + 0 * slope, 0, 1)
        depth = 1.0 + 0.3 * rng.random((rows, cols))
        # lateral roots of 8 kPa keep the head faces submodular on this hollow steeper than
        # phi' (asserted by n_mod == 0 where exactness is tested)
        kw = dict(cohesion_kpa=0.5, root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=8.0,
                  friction_deg=phi if phi is not None else 33.0, unit_weight_kn_m3=18.5)
    else:
        slope = rng.uniform(15, 50, (rows, cols))
        aspect = rng.uniform(0, 360, (rows, cols))
        wet = rng.random((rows, cols))
        depth = rng.uniform(0.5, 2.0, (rows, cols))
        kw = dict(cohesion_kpa=rng.uniform(0, 3, (rows, cols)),
                  root_cohesion_kpa=rng.uniform(0, 2, (rows, cols)),
                  lateral_root_cohesion_kpa=rng.uniform(8, 14, (rows, cols)),
                  friction_deg=phi if phi is not None else rng.uniform(28, 40, (rows, cols)),
                  unit_weight_kn_m3=rng.uniform(16, 20, (rows, cols)))
    return cluster_forces(slope, aspect % 360, depth, wet, dx=5.0, dy=5.0, passive_fraction=0.5,
                          **kw)


def _all_subsets(forces):
    """Numerator, denominator of FS for every subset of the grid (plain numpy, no graph)."""
    rows, cols = forces.valid.shape
    n = rows * cols
    bits = (np.arange(2 ** n, dtype=np.int64)[:, None] >> np.arange(n)) & 1
    x = bits.astype(bool)
    num = x @ forces.resisting.ravel()
    den = x @ forces.driving.ravel()
    for p in range(n):
        r, c = divmod(p, cols)
        for k, (dr, dc) in enumerate(STEPS):  # the 16 literal steps
            rr, cc = r + dr, c + dc
            outside = np.zeros(len(x), bool) if 0 <= rr < rows and 0 <= cc < cols else None
            margin = x[:, p] & (~x[:, rr * cols + cc] if outside is not None else True)
            num = num + margin * forces.face_resistance[k, r, c]
            den = den + margin * forces.face_thrust[k, r, c]
    return x, num, den


CASES = [(3, 4, True, 1), (4, 4, True, 2), (4, 4, False, 3), (4, 5, True, 4), (4, 5, False, 5)]


@pytest.mark.parametrize("rows, cols, realistic, seed", CASES)
def test_cut_and_dinkelbach_match_brute_force(rows, cols, realistic, seed):
    f = _instance(np.random.default_rng(seed), rows, cols, realistic=realistic)
    x, num, den = _all_subsets(f)
    # brute force: minimum of g_1 = num - den and the least minimiser (intersection of minimisers)
    g = num - den
    gmin = g.min()
    tol = 1e-7 * np.abs(num).max()
    least = np.logical_and.reduce(x[g <= gmin + tol], axis=0).reshape(rows, cols)
    unary, cap, n_mod = pair_terms(f, 1.0)
    assert n_mod == 0
    scale = scale_for(float(magnitude(unary, cap).sum()))
    ui, ci = integer_terms(unary, cap, scale)
    mask, value = solve_window(ui, ci, f.valid, (0, rows, 0, cols))
    g_cut = 0.0 if not mask.any() else float(g[np.flatnonzero(
        (x == mask.ravel()).all(axis=1))[0]])
    assert g_cut == pytest.approx(gmin, abs=tol)
    assert np.array_equal(mask, least)
    # Dinkelbach: exact least FS over every non-empty subset
    fs = np.where(den[1:] > 0, num[1:] / np.where(den[1:] > 0, den[1:], 1), 100.0)
    fs_min = min(float(fs.min()), 100.0)
    res = least_stable_in_window(f, (0, rows, 0, cols))
    assert res.least_fs == pytest.approx(fs_min, rel=1e-9)
    assert res.bound <= fs_min and res.bound >= fs_min * (1 - 1e-4)


def test_lp_relaxation_in_cvxpy_equals_cut_and_brute_force():
    cp = pytest.importorskip("cvxpy")
    # Lovasz extension of g_1 written from the pair terms: a pair term with
    # phi(1,0) = a, phi(0,1) = b extends to a max(x_i - x_j, 0) + b max(x_j - x_i, 0)
    # (Lovasz 1983, from memory), over the 16 literal steps
    for seed, (rows, cols) in ((11, (4, 4)), (12, (12, 12))):
        f = _instance(np.random.default_rng(seed), rows, cols, realistic=seed == 12)
        n = rows * cols
        t = f.face_resistance - f.face_thrust
        lin = (f.resisting - f.driving).ravel().copy()
        xv = cp.Variable(n)
        ps, qs, aa, bb = [], [], [], []
        for r in range(rows):
            for c in range(cols):
                p = r * cols + c
                for k, (dr, dc) in enumerate(STEPS):
                    rr, cc = r + dr, c + dc
                    if not (0 <= rr < rows and 0 <= cc < cols):
                        lin[p] += t[k, r, c]
                    elif k in HALF_STEPS:  # each interior pair once
                        ps.append(p)
                        qs.append(rr * cols + cc)
                        aa.append(t[k, r, c])
                        bb.append(t[opposite(k), rr, cc])
        ps, qs, aa, bb = (np.array(v) for v in (ps, qs, aa, bb))
        # every interior pair on the 16 steps, once: 8 directions of (rows - |dr|)(cols - |dc|)
        assert len(ps) == sum((rows - abs(STEPS[k][0])) * (cols - abs(STEPS[k][1]))
                              for k in HALF_STEPS)
        # = a (x_p - x_q) + (a + b) max(x_q - x_p, 0): convex when a + b >= 0
        assert (aa + bb >= 0).all()
        pairs = aa @ (xv[ps] - xv[qs]) + (aa + bb) @ cp.pos(xv[qs] - xv[ps])
        prob = cp.Problem(cp.Minimize(lin @ xv + pairs), [xv >= 0, xv <= 1])
        prob.solve(solver="HIGHS")
        assert prob.status == "optimal"
        unary, cap, _ = pair_terms(f, 1.0)
        scale = scale_for(float(magnitude(unary, cap).sum()))
        ui, ci = integer_terms(unary, cap, scale)
        mask, value = solve_window(ui, ci, f.valid, (0, rows, 0, cols))
        g_cut = 0.0
        if mask.any():
            b, h = _margin_sums(f, mask)
            g_cut = f.resisting[mask].sum() + b - f.driving[mask].sum() - h
        scale_tol = 1e-6 * float(np.abs(lin).sum())
        assert prob.value == pytest.approx(g_cut, abs=scale_tol)
        if seed == 11:
            _, bn, bd = _all_subsets(f)
            assert prob.value == pytest.approx(float((bn - bd).min()), abs=scale_tol)
        # a level set of the LP solution is itself optimal (tightness)
        level = (np.asarray(xv.value) > 0.5).reshape(rows, cols)
        if level.any():
            b, h = _margin_sums(f, level)
            g_level = f.resisting[level].sum() + b - f.driving[level].sum() - h
            assert g_level == pytest.approx(prob.value, abs=scale_tol)


def test_networkx_minimum_cut_equals_scipy():
    nx = pytest.importorskip("networkx")
    for seed in range(4):
        f = _instance(np.random.default_rng(100 + seed), 10, 9, realistic=seed % 2 == 0)
        unary, cap, _ = pair_terms(f, 1.0)
        scale = scale_for(float(magnitude(unary, cap).sum()))
        ui, ci = integer_terms(unary, cap, scale)
        rows, cols = f.valid.shape
        indptr, indices, data, index, un = _graph_kernel(
            ui, ci, f.valid, 0, rows, 0, cols, np.zeros((1, 1), bool), False)
        n = int(index.max()) + 1
        graph = nx.DiGraph()
        for u in range(n + 2):
            for j in range(indptr[u], indptr[u + 1]):
                graph.add_edge(u, int(indices[j]), capacity=int(data[j]))
        cut_value, (side_s, _) = nx.minimum_cut(graph, n, n + 1)
        mask, value = solve_window(ui, ci, f.valid, (0, rows, 0, cols))
        neg = -int(un[un < 0].sum())
        assert cut_value - neg == value
        # networkx's source side reaches the same least minimiser
        nx_mask = np.zeros(n + 2, bool)
        nx_mask[list(side_s)] = True
        assert np.array_equal(nx_mask[index], mask)


# --------------------------------------------------------------------------- properties
def test_reported_clusters_fail_when_recomputed_and_tiles_are_exact():
    rng = np.random.default_rng(7)
    rows, cols = 40, 44
    # rough south-facing hillside with three steep wet hollows, one across a tile border
    slope = np.clip(31 + 3 * rng.standard_normal((rows, cols)), 5, 60)
    aspect = (180 + 20 * rng.standard_normal((rows, cols))) % 360
    wet = np.full((rows, cols), 0.3)
    for r, c in ((5, 6), (18, 25), (30, 9)):
        slope[r:r + 6, c:c + 4] += 14
        wet[r - 2:r + 8, c - 1:c + 5] = 1.0
    kw = dict(dx=5.0, dy=5.0, aspect_deg=aspect, cohesion_kpa=0.5, root_cohesion_kpa=0.5,
              lateral_root_cohesion_kpa=2.0, friction_deg=35.0, unit_weight_kn_m3=18.5)
    res = failure_clusters(slope, 1.2, wet, tile_cells=10, halo_cells=4, bound_window_cells=16,
                           bound_stride_cells=6, **kw)
    f = cluster_forces(slope, aspect, 1.2, wet, dx=5.0, dy=5.0, cohesion_kpa=0.5,
                       root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=2.0, friction_deg=35.0,
                       unit_weight_kn_m3=18.5)
    n = int(res.labels.max())
    assert n >= 2
    for i in range(1, n + 1):
        assert cluster_factor_of_safety(f, res.labels == i) < 1.0
        assert res.table["fs"][i - 1] < 1.0
        lb = res.table["lower_bound"][i - 1]
        assert np.isnan(lb) or lb <= res.table["fs"][i - 1]
    assert np.isfinite(res.table["lower_bound"]).any()
    # the same grid in one window: the tiled answer equals the global least minimiser
    whole = failing_set(f, tile_cells=1000, halo_cells=0)
    # the same scale sigma: every run minimises the same integer function
    tiled = failing_set(f, tile_cells=10, halo_cells=4, scale=whole.scale)
    assert np.array_equal(whole.lower, whole.upper)
    assert np.array_equal(tiled.lower, tiled.upper) and np.array_equal(tiled.lower, whole.lower)
    # without halo and without re-solving, tiles leave cells undecided; the bracket still holds
    rough = failing_set(f, tile_cells=10, halo_cells=0, max_rounds=0, scale=whole.scale)
    assert (rough.upper & ~rough.lower).any()
    assert (rough.lower <= whole.lower).all() and (whole.lower <= rough.upper).all()
    resolved = failing_set(f, tile_cells=10, halo_cells=0, scale=whole.scale)
    assert np.array_equal(resolved.lower, whole.lower)


def _pair_check_by_hand(shape, dx, dy, per_metre, lam):
    """Expected nonsubmodular_faces on a uniform south-facing grid, from first principles.

    For the pair of cells i and j = i + e_k the two directed terms W - lam H add up to
    a_k [c^2 (toe + head - lam P_a) + 2 (1 - c^2) side] (c the cosine between e_k and the
    downslope direction; docs/methods.md, "Multi-cell failure clusters"); a_k > 0, so the
    pair fails the submodularity check iff the bracket is negative. Indexed like the code's
    output: [j, r, c] for the pair of (r, c) and (r, c) + e_HALF[j], False off the grid.
    """
    toe, head, side, active = per_metre
    rows, cols = shape
    out = np.zeros((len(HALF_STEPS), rows, cols), bool)
    for j, k in enumerate(HALF_STEPS):
        dr, dc = STEPS[k]
        c2 = (dr * dy) ** 2 / ((dc * dx) ** 2 + (dr * dy) ** 2)
        fails = c2 * (toe + head - lam * active) + 2 * (1 - c2) * side < 0
        for r in range(rows):
            for c in range(cols):
                out[j, r, c] = fails and 0 <= r + dr < rows and 0 <= c + dc < cols
    return out


def test_nonsubmodular_faces_reported_and_bound_still_valid():
    # friction 8 degrees, no cohesion, no roots on a 6 degree slope: eta K_p < K_a (inclined
    # Rankine, the oracle), so pairs along the slope fail the submodularity check of
    # docs/methods.md, "Multi-cell failure clusters"; FS near tan 8 / tan 6 = 1.33, where
    # lam K_a > eta K_p as well
    f = cluster_forces(np.full((3, 4), 6.0), np.full((3, 4), 180.0), 1.0, 0.0, dx=5.0, dy=5.0,
                       cohesion_kpa=0.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
                       friction_deg=8.0, unit_weight_kn_m3=18.0, passive_fraction=0.5)
    ka, kp = inclined_rankine(6.0, 8.0)
    assert 0.5 * kp < ka
    # per metre by hand: dry, z = 1 m, so the stress integral is gamma z^2 / 2 = 9 kN/m
    sv = 18.0 / 2.0
    s = math.sin(math.radians(8.0))
    per_metre = (0.5 * kp * sv, 0.0, (1 - s) * math.tan(math.radians(8.0)) * sv, ka * sv)
    got = nonsubmodular_faces(f, 1.0)
    expect = _pair_check_by_hand((3, 4), 5.0, 5.0, per_metre, 1.0)
    assert got.shape == (8, 3, 4)
    assert np.array_equal(got, expect)
    # which directions fail at lam = 1 (from the bracket above with these numbers): the
    # north-south pairs (c^2 = 1) and the steep knight moves (c^2 = 0.8) fail; east-west
    # (c^2 = 0), the diagonals (c^2 = 0.5) and the shallow knight moves (c^2 = 0.2) keep
    # enough side resistance. On 3 x 4 cells: 2 x 4 north-south pairs, 1 x 3 per steep knight.
    fail_dirs = [k for j, k in enumerate(HALF_STEPS) if expect[j].any()]
    assert fail_dirs == [2, 9, 10]
    assert int(got.sum()) == 8 + 3 + 3
    assert pair_terms(f, 1.0)[2] == 14
    x, num, den = _all_subsets(f)
    fs_min = float((num[1:] / den[1:]).min())
    res = least_stable_in_window(f, (0, 3, 0, 4))
    # the search starts at the least lone-cell FS, its largest lam (Dinkelbach lowers lam), so
    # its most modular pairs in one cut are those failing at that lam
    lone = x.sum(axis=1) == 1
    lam0 = float((num[lone] / den[lone]).min())
    assert res.modular_faces == int(_pair_check_by_hand((3, 4), 5.0, 5.0, per_metre, lam0).sum())
    assert res.modular_faces > 14
    assert res.bound <= fs_min + 1e-12


def test_bound_map_holds_for_every_small_cluster():
    f = _instance(np.random.default_rng(21), 9, 9, realistic=True)
    bound, windows, extent = fs_bound_map(f, window_cells=5, stride_cells=3)
    assert extent == 2
    rows, cols = f.valid.shape
    # every subset of every 2 x 2 box (the guaranteed extent)
    for r0, c0 in itertools.product(range(rows - 1), range(cols - 1)):
        cells = [(r0 + a, c0 + b) for a in range(2) for b in range(2)]
        for k in range(1, 16):
            mask = np.zeros((rows, cols), bool)
            for j, cell in enumerate(cells):
                if k >> j & 1:
                    mask[cell] = True
            fs = cluster_factor_of_safety(f, mask)
            assert (bound[mask] <= fs * (1 + 1e-7)).all()
    assert all(w.bound <= w.least_fs for w in windows)


def test_regression_merged_window_not_left_undecided_by_one_ulp():
    # Once left cells undecided: the merged window of the re-solve rounds was skipped as "too
    # large for the scale" when its sum exceeded 2**30 / scale by 1 ulp (1445.183344717675 vs
    # 1445.1833447176748), the scale having been made from that very sum. Reference: the least
    # minimiser of the whole grid in one window (itself checked by brute force above).
    rng = np.random.default_rng(5)
    for trial in range(80):
        rows, cols = int(rng.integers(3, 6)), int(rng.integers(3, 7))
        f = _instance(rng, rows, cols, realistic=bool(trial % 2))
        whole = failing_set(f, tile_cells=1000, halo_cells=0)
        tiled = failing_set(f, tile_cells=2, halo_cells=0, scale=whole.scale)
        assert not (tiled.upper & ~tiled.lower).any(), trial
        assert np.array_equal(tiled.lower, whole.lower), trial


def _pair_check_from_face_pressures(slope, wet, lat, eta, dx, dy, lam=1.0, **soil):
    """Expected nonsubmodular_faces on a south-facing grid with varying slope, wetness, roots.

    Each pair takes the mean of its two cells' properties (docs/methods.md, "Multi-cell
    failure clusters"); its per-metre terms come from face_pressures (checked against the
    handbook above) and its check is the bracket of _pair_check_by_hand. Every cell faces
    south, so the mean downslope direction is south and c = dr dy / |e_k|.
    """
    rows, cols = slope.shape
    out = np.zeros((len(HALF_STEPS), rows, cols), bool)
    for j, k in enumerate(HALF_STEPS):
        dr, dc = STEPS[k]
        c2 = (dr * dy) ** 2 / ((dc * dx) ** 2 + (dr * dy) ** 2)
        for r in range(max(0, -dr), rows - max(0, dr)):
            for c in range(max(0, -dc), cols - max(0, dc)):
                q = (r + dr, c + dc)
                fp = face_pressures(soil["depth_m"], 0.5 * (wet[r, c] + wet[q]),
                                    cohesion_kpa=soil["cohesion_kpa"],
                                    lateral_root_cohesion_kpa=0.5 * (lat[r, c] + lat[q]),
                                    friction_deg=soil["friction_deg"],
                                    unit_weight_kn_m3=soil["unit_weight_kn_m3"],
                                    passive_fraction=eta,
                                    ground_slope_deg=0.5 * (slope[r, c] + slope[q]))
                out[j, r, c] = (c2 * (fp["toe"] + fp["head"] - lam * fp["active"])
                                + 2 * (1 - c2) * fp["side"]) < 0
    return out


def _touching(bad, inside):
    """Modular pairs with either cell in ``inside``: a plain loop over every pair."""
    rows, cols = inside.shape
    n = 0
    for j, k in enumerate(HALF_STEPS):
        dr, dc = STEPS[k]
        for r in range(rows):
            for c in range(cols):
                if bad[j, r, c]:
                    assert 0 <= r + dr < rows and 0 <= c + dc < cols
                    n += bool(inside[r, c] or inside[r + dr, c + dc])
    return n


def test_regression_clusters_touching_a_modular_face_are_not_proven():
    # Once reported proven although the cut had replaced non-submodular faces by their modular
    # lower bound (with no passive resistance, eta = 0, pairs along the slope fail the check of
    # docs/methods.md, "Multi-cell failure clusters"). Oracle: a plain loop over every pair.
    rng = np.random.default_rng(2)
    slope = np.full((8, 10), 38.0) + rng.normal(0, 1, (8, 10))
    soil = dict(cohesion_kpa=0.5, friction_deg=35.0, unit_weight_kn_m3=18.5)
    kw = dict(dx=5.0, dy=5.0, aspect_deg=np.full((8, 10), 180.0), root_cohesion_kpa=0.5,
              lateral_root_cohesion_kpa=1.0, bound=False, **soil)
    res = failure_clusters(slope, 1.2, 0.8, passive_fraction=0.0, **kw)
    f = cluster_forces(slope, kw["aspect_deg"], 1.2, 0.8, dx=5.0, dy=5.0, root_cohesion_kpa=0.5,
                       lateral_root_cohesion_kpa=1.0, passive_fraction=0.0, **soil)
    bad = nonsubmodular_faces(f, 1.0)
    expect = _pair_check_from_face_pressures(slope, np.full((8, 10), 0.8),
                                             np.full((8, 10), 1.0), 0.0, 5.0, 5.0,
                                             depth_m=1.2, **soil)
    assert np.array_equal(bad, expect)
    # beyond phi' with weak roots: every north-south pair (c^2 = 1, 7 x 10 of them) and every
    # steep knight pair (c^2 = 0.8, 6 x 9 per direction) fails; the others do not
    assert [k for j, k in enumerate(HALF_STEPS) if expect[j].any()] == [2, 9, 10]
    assert res.modular_faces == int(bad.sum()) == 70 + 54 + 54
    for i, cid in enumerate(res.table["id"]):
        touching = _touching(bad, res.labels == cid)
        assert res.table["modular_faces"][i] == touching
        assert bool(res.table["proven"][i]) == (touching == 0)
    assert not res.table["proven"].any()
    # with lateral roots strong enough at the head every pair is submodular and the answer is
    # proven (slope beyond phi': no passive resistance at the toe, docs/methods.md)
    res = failure_clusters(slope, 1.2, 0.8, passive_fraction=0.5,
                           **(kw | dict(lateral_root_cohesion_kpa=8.0)))
    assert res.modular_faces == 0 and (res.table["modular_faces"] == 0).all()
    assert res.table["proven"].all() and len(res.table["id"]) > 0


def test_regression_modular_pairs_unprove_only_the_clusters_they_touch():
    # Two wet hollows beyond phi' on a drier 20 degree hillside, eta = 0: strong lateral roots
    # (8 kPa) on the western half keep every pair there submodular, weak roots (1 kPa) on the
    # eastern half do not. The western cluster touches no modular pair and stays proven, the
    # eastern one is not proven; each cluster counts only the modular pairs touching it.
    rng = np.random.default_rng(2)
    rows, cols = 10, 18
    slope = np.full((rows, cols), 20.0) + rng.normal(0, 1, (rows, cols))
    wet = np.full((rows, cols), 0.1)
    for c0 in (1, 12):
        slope[2:8, c0:c0 + 5] = 38.0 + rng.normal(0, 1, (6, 5))
        wet[2:8, c0:c0 + 5] = 0.8
    lat = np.where(np.arange(cols)[None, :] < 9, 8.0, 1.0) + np.zeros((rows, 1))
    soil = dict(cohesion_kpa=0.5, friction_deg=35.0, unit_weight_kn_m3=18.5)
    aspect = np.full((rows, cols), 180.0)
    res = failure_clusters(slope, 1.2, wet, dx=5.0, dy=5.0, aspect_deg=aspect,
                           root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=lat,
                           passive_fraction=0.0, bound=False, **soil)
    f = cluster_forces(slope, aspect, 1.2, wet, dx=5.0, dy=5.0, root_cohesion_kpa=0.5,
                       lateral_root_cohesion_kpa=lat, passive_fraction=0.0, **soil)
    bad = nonsubmodular_faces(f, 1.0)
    expect = _pair_check_from_face_pressures(slope, wet, lat, 0.0, 5.0, 5.0, depth_m=1.2,
                                             **soil)
    assert np.array_equal(bad, expect)
    assert not bad[:, :, :7].any() and bad.any()
    assert res.modular_faces == int(bad.sum())
    assert len(res.table["id"]) == 2
    for i, cid in enumerate(res.table["id"]):
        inside = res.labels == cid
        assert cluster_factor_of_safety(f, inside) < 1.0
        touching = _touching(bad, inside)
        assert res.table["modular_faces"][i] == touching
        assert bool(res.table["proven"][i]) == (touching == 0)
    west = res.labels[4, 3]
    east = res.labels[4, 14]
    assert west != east and west > 0 and east > 0
    assert res.table["proven"][list(res.table["id"]).index(west)]
    east_row = list(res.table["id"]).index(east)
    assert not res.table["proven"][east_row]
    assert 0 < res.table["modular_faces"][east_row] < res.modular_faces
