"""Failure clusters checked against outside references.

Handbook earth-pressure values (Rankine and Jaky, handbook formula evaluated), a block force
balance worked by hand, brute force over every subset of small grids, the Lovasz-extension LP
solved by cvxpy/HiGHS, and networkx minimum_cut on the same integer graph.
"""

import itertools
import math

import numpy as np
import pytest

from earth_pressure_oracle import inclined_rankine
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
def _hand_slab(theta, phi, gamma, gsat, z, m, c_base, c_lat, eta, dx, dy, nr, nc):
    """Block force balance of an nr x nc slab facing south, written out by hand.

    docs/methods.md, "Multi-cell failure clusters", with the inclined Rankine coefficients,
    water table h_w = m z.
    """
    t, p = math.radians(theta), math.radians(phi)
    hw = m * z
    col = gamma * (z - hw) + gsat * hw
    u = GW * hw * math.cos(t) ** 2
    area = nr * nc * dx * dy
    drive = col * area * math.sin(t)
    basal = (c_base + (col * math.cos(t) ** 2 - u) * math.tan(p)) * area / math.cos(t)
    s = math.sin(p)
    ka, kp = inclined_rankine(theta, phi)
    k0 = 1 - s
    # integral of the effective vertical stress over the face height
    dry = z - hw
    sv = gamma * dry ** 2 / 2 + gamma * dry * hw + (gsat - GW) * hw ** 2 / 2
    width = nc * dx          # toe and head faces run east-west
    length = nr * dy         # two side faces run north-south
    toe = eta * kp * sv * width
    head_roots = c_lat * z * width
    active = ka * sv * width  # c' = 0 on the faces: no tension zone
    sides = 2 * length * (c_lat * z + k0 * math.tan(p) * sv)
    return (basal + toe + head_roots + sides) / (drive + active)


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
    expect = _hand_slab(theta, 33.0, 17.0, 20.0, 1.3, m, 1.5, 6.0, 0.5, 4.0, 5.0, nr, nc)
    assert cluster_factor_of_safety(f, mask) == pytest.approx(expect, rel=1e-12)


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
    steps = [(0, 1), (-1, 0), (0, -1), (1, 0)]  # east, north, west, south
    for p in range(n):
        r, c = divmod(p, cols)
        for k, (dr, dc) in enumerate(steps):
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
    # Lovasz extension of g_1 written from the face terms: a pair term with
    # phi(1,0) = a, phi(0,1) = b extends to a max(x_i - x_j, 0) + b max(x_j - x_i, 0)
    for seed, (rows, cols) in ((11, (4, 4)), (12, (12, 12))):
        f = _instance(np.random.default_rng(seed), rows, cols, realistic=seed == 12)
        n = rows * cols
        t = f.face_resistance - f.face_thrust
        lin = (f.resisting - f.driving).ravel().copy()
        xv = cp.Variable(n)
        terms = []
        for r in range(rows):
            for c in range(cols):
                p = r * cols + c
                for k, (dr, dc) in enumerate([(0, 1), (-1, 0), (0, -1), (1, 0)]):
                    rr, cc = r + dr, c + dc
                    if not (0 <= rr < rows and 0 <= cc < cols):
                        lin[p] += t[k, r, c]
                    elif k in (0, 3):  # each interior face once, from its west/north cell
                        q = rr * cols + cc
                        a, b = t[k, r, c], t[(k + 2) % 4, rr, cc]
                        # = a (x_p - x_q) + (a + b) max(x_q - x_p, 0): convex when a + b >= 0
                        assert a + b >= 0
                        terms.append(a * (xv[p] - xv[q]) + (a + b) * cp.pos(xv[q] - xv[p]))
        prob = cp.Problem(cp.Minimize(lin @ xv + sum(terms)), [xv >= 0, xv <= 1])
        prob.solve(solver="HIGHS")
        assert prob.status == "optimal"
        unary, cap, _ = pair_terms(f, 1.0)
        scale = scale_for(float(magnitude(unary, cap).sum()))
        ui, ci = integer_terms(unary, cap, scale)
        mask, value = solve_window(ui, ci, f.valid, (0, rows, 0, cols))
        g_cut = 0.0
        if mask.any():
            num = f.resisting[mask].sum()
            den = f.driving[mask].sum()
            pad = np.pad(mask, 1)
            for k, (dr, dc) in enumerate([(0, 1), (-1, 0), (0, -1), (1, 0)]):
                nb = pad[1 + dr:1 + dr + rows, 1 + dc:1 + dc + cols]
                num += f.face_resistance[k][mask & ~nb].sum()
                den += f.face_thrust[k][mask & ~nb].sum()
            g_cut = num - den
        scale_tol = 1e-6 * float(np.abs(lin).sum())
        assert prob.value == pytest.approx(g_cut, abs=scale_tol)
        if seed == 11:
            _, bn, bd = _all_subsets(f)
            assert prob.value == pytest.approx(float((bn - bd).min()), abs=scale_tol)
        # a level set of the LP solution is itself optimal (tightness)
        level = (np.asarray(xv.value) > 0.5).reshape(rows, cols)
        if level.any():
            pad = np.pad(level, 1)
            num = f.resisting[level].sum()
            den = f.driving[level].sum()
            for k, (dr, dc) in enumerate([(0, 1), (-1, 0), (0, -1), (1, 0)]):
                nb = pad[1 + dr:1 + dr + rows, 1 + dc:1 + dc + cols]
                num += f.face_resistance[k][level & ~nb].sum()
                den += f.face_thrust[k][level & ~nb].sum()
            assert num - den == pytest.approx(prob.value, abs=scale_tol)


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


def test_nonsubmodular_faces_reported_and_bound_still_valid():
    # friction 8 degrees, no cohesion: eta K_p < K_a on head/toe faces (the submodularity
    # check of docs/methods.md, "Multi-cell failure clusters")
    # slope 6 degrees: FS near tan 8 / tan 6 = 1.33, where lam K_a > eta K_p as well
    f = cluster_forces(np.full((3, 4), 6.0), np.full((3, 4), 180.0), 1.0, 0.0, dx=5.0, dy=5.0,
                       cohesion_kpa=0.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
                       friction_deg=8.0, unit_weight_kn_m3=18.0, passive_fraction=0.5)
    east, south = nonsubmodular_faces(f, 1.0)
    assert south.all() and not east.any()   # head/toe faces fail, side faces pass
    s = math.sin(math.radians(8.0))
    ka, kp = (1 - s) / (1 + s), (1 + s) / (1 - s)
    assert 0.5 * kp < ka
    x, num, den = _all_subsets(f)
    fs_min = float((num[1:] / den[1:]).min())
    res = least_stable_in_window(f, (0, 3, 0, 4))
    assert res.modular_faces > 0
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


def test_regression_clusters_touching_a_modular_face_are_not_proven():
    # Once reported proven although the cut had replaced non-submodular faces by their modular
    # lower bound (with no passive resistance, eta = 0, head/toe faces fail the check of
    # docs/methods.md, "Multi-cell failure clusters"). Oracle: a plain loop over every face.
    rng = np.random.default_rng(2)
    slope = np.full((8, 10), 38.0) + rng.normal(0, 1, (8, 10))
    kw = dict(dx=5.0, dy=5.0, aspect_deg=np.full((8, 10), 180.0), cohesion_kpa=0.5,
              root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=1.0, friction_deg=35.0,
              unit_weight_kn_m3=18.5, bound=False)
    res = failure_clusters(slope, 1.2, 0.8, passive_fraction=0.0, **kw)
    f = cluster_forces(slope, kw["aspect_deg"], 1.2, 0.8, dx=5.0, dy=5.0, cohesion_kpa=0.5,
                       root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=1.0, friction_deg=35.0,
                       unit_weight_kn_m3=18.5, passive_fraction=0.0)
    east, south = nonsubmodular_faces(f, 1.0)
    assert res.modular_faces == int(east.sum() + south.sum()) > 0
    for i, cid in enumerate(res.table["id"]):
        inside = res.labels == cid
        touching = sum(1 for r in range(8) for c in range(9) if east[r, c] and (inside[r, c] or inside[r, c + 1]))
        touching += sum(1 for r in range(7) for c in range(10) if south[r, c] and (inside[r, c] or inside[r + 1, c]))
        assert res.table["modular_faces"][i] == touching
        assert bool(res.table["proven"][i]) == (touching == 0)
    assert not res.table["proven"].any()
    # with lateral roots strong enough at the head every face is submodular and the answer is
    # proven (slope beyond phi': no passive resistance at the toe, docs/methods.md)
    res = failure_clusters(slope, 1.2, 0.8, passive_fraction=0.5,
                           **(kw | dict(lateral_root_cohesion_kpa=8.0)))
    assert res.modular_faces == 0 and (res.table["modular_faces"] == 0).all()
    assert res.table["proven"].all() and len(res.table["id"]) > 0
