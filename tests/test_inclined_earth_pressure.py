"""Earth pressures under an inclined ground surface (docs/methods.md, "Multi-cell failure clusters").

Oracles: the classical inclined Rankine formula for a cohesionless backfill, the
Mazindrani-Ganjali (1997) coefficient in its normalised paper form c / (gamma z) integrated by
scipy.integrate.quad, level Rankine at beta = 0, and a hand block balance of an inclined slab
whose margin is charged on the 16 directed cell pairs with Cauchy-Crofton weights (Boykov and
Kolmogorov 2003, from memory; force model of Milledge et al. 2014).
"""

import math

import numpy as np
import pytest
from scipy import integrate

from earth_pressure_oracle import inclined_rankine
from pair_oracle import STEPS, pair_geometry
from slopescreen.clusters import ClusterOptions, cluster_factor_of_safety, cluster_forces
from slopescreen.clusters.forces import face_pressures
from slopescreen.errors import InputError

GW = 9.81


def _mg_pressure(sv, c, beta_deg, phi_deg, sign):
    """Mazindrani and Ganjali (1997) in the paper's form: sigma = gamma z K' cos b with
    K' = 1/cos^2 phi {2 cos^2 b + 2 (c/gz) cos phi sin phi
                      -/+ sqrt[4 cos^2 b (cos^2 b - cos^2 phi) + 4 (c/gz)^2 cos^2 phi
                               + 8 (c/gz) cos^2 b sin phi cos phi]} - 1  (from memory),
    with gamma z replaced by the effective vertical stress sv (> 0)."""
    b, p = math.radians(beta_deg), math.radians(phi_deg)
    n = c / sv
    cb2, cp2 = math.cos(b) ** 2, math.cos(p) ** 2
    root = math.sqrt(4 * cb2 * (cb2 - cp2) + 4 * n * n * cp2
                     + 8 * n * cb2 * math.sin(p) * math.cos(p))
    k = (2 * cb2 + 2 * n * math.cos(p) * math.sin(p) + sign * root) / cp2 - 1
    return sv * k * math.cos(b)


def _sv(zeta, z, m, gm, gs):
    """Effective vertical stress at depth zeta below the surface, water table m z above the base."""
    t = z - m * z
    return gm * zeta if zeta <= t else gm * t + (gs - GW) * (zeta - t)


def _quad(f, z, m):
    t = z - m * z
    return sum(integrate.quad(f, a, b, epsabs=1e-12, epsrel=1e-12, limit=200)[0]
               for a, b in ((0.0, t), (t, z)) if b > a)


@pytest.mark.parametrize("beta", [0.0, 10.0, 20.0, 30.0, 34.0])
def test_cohesionless_limit_is_the_classical_inclined_rankine(beta):
    z, m, gm, gs, phi = 1.3, 0.4, 17.0, 20.0, 35.0
    f = face_pressures(z, m, cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0, friction_deg=phi,
                       unit_weight_kn_m3=gm, saturated_unit_weight_kn_m3=gs,
                       passive_fraction=1.0, ground_slope_deg=beta)
    ka, kp = inclined_rankine(beta, phi)
    dry, hw = z - m * z, m * z
    sv = gm * dry ** 2 / 2 + gm * dry * hw + (gs - GW) * hw ** 2 / 2   # integral of sigma'_v
    assert f["toe"] == pytest.approx(kp * sv, rel=1e-12)
    assert f["active"] == pytest.approx(ka * sv, rel=1e-12)


def test_quoted_coefficients_at_phi_35():
    # values quoted in the issue, here evaluated from the classical formula above: K_p 1.698 at
    # 30 deg and 1.131 at 34 deg against 3.690 level; K_p / K_a 13.6, 3.85, 1.86
    def k(beta):
        f = face_pressures(1.0, 0.0, cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
                           friction_deg=35.0, unit_weight_kn_m3=18.0, passive_fraction=1.0,
                           ground_slope_deg=beta)
        return f["toe"] / 9.0, f["toe"] / f["active"]   # 1/2 gamma z^2 = 9 kN/m
    assert k(0.0)[0] == pytest.approx(3.690172, abs=1e-6) and k(0.0)[1] == pytest.approx(
        13.6174, abs=1e-4)
    assert k(30.0)[0] == pytest.approx(1.69819, abs=1e-5) and k(30.0)[1] == pytest.approx(
        3.8451, abs=1e-4)
    assert k(34.0)[0] == pytest.approx(1.13079, abs=1e-5) and k(34.0)[1] == pytest.approx(
        1.8604, abs=1e-4)
    # 0.5 x level K_p = 1.845 exceeds the full inclined K_p at 30 and 34 deg
    assert 0.5 * k(0.0)[0] > k(30.0)[0] > k(34.0)[0]


@pytest.mark.parametrize("beta, c, m", [(0.0, 5.0, 0.0), (0.0, 3.0, 0.5), (25.0, 4.0, 0.3),
                                        (33.0, 2.0, 0.7), (40.0, 6.0, 0.0)])
def test_cohesive_pressures_match_the_paper_form_integrated_by_quad(beta, c, m):
    # at beta = 0 the paper form is level Rankine K_p s + 2 c sqrt(K_p) and K_a s - 2 c sqrt(K_a),
    # checked here too; beta 40 > phi 35 with c = 6 kPa: the Rankine state ends below a depth
    z, gm, gs, phi = 1.4, 18.0, 20.0, 35.0
    f = face_pressures(z, m, cohesion_kpa=c, lateral_root_cohesion_kpa=0.0, friction_deg=phi,
                       unit_weight_kn_m3=gm, saturated_unit_weight_kn_m3=gs,
                       passive_fraction=1.0, ground_slope_deg=beta)
    cb = math.cos(math.radians(beta))

    def defined(s):
        b, p = math.radians(beta), math.radians(phi)
        n = c / s
        return (4 * math.cos(b) ** 2 * (math.cos(b) ** 2 - math.cos(p) ** 2)
                + 4 * n * n * math.cos(p) ** 2
                + 8 * n * math.cos(b) ** 2 * math.sin(p) * math.cos(p)) >= 0

    def passive(zeta):
        s = max(_sv(zeta, z, m, gm, gs), 1e-12)
        return _mg_pressure(s, c, beta, phi, +1) if defined(s) else 0.0

    def active(zeta):
        s = max(_sv(zeta, z, m, gm, gs), 1e-12)
        return max(0.0, _mg_pressure(s, c, beta, phi, -1)) if defined(s) else s * cb

    assert f["toe"] == pytest.approx(_quad(passive, z, m), rel=1e-6)
    assert f["active"] == pytest.approx(_quad(active, z, m), rel=1e-6, abs=1e-9)
    if beta == 0.0:
        s_ = math.sin(math.radians(phi))
        ka, kp = (1 - s_) / (1 + s_), (1 + s_) / (1 - s_)
        level_p = _quad(lambda q: kp * _sv(q, z, m, gm, gs) + 2 * c * math.sqrt(kp), z, m)
        level_a = _quad(lambda q: max(0.0, ka * _sv(q, z, m, gm, gs) - 2 * c * math.sqrt(ka)),
                        z, m)
        assert f["toe"] == pytest.approx(level_p, rel=1e-9)
        assert f["active"] == pytest.approx(level_a, rel=1e-6, abs=1e-9)


def test_steeper_than_phi_no_passive_and_conjugate_active():
    # the conservative rule of docs/methods.md: beta > phi', c' = 0: no passive, K' = 1
    f = face_pressures(1.0, 0.0, cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
                       friction_deg=35.0, unit_weight_kn_m3=18.0, passive_fraction=1.0,
                       ground_slope_deg=40.0)
    assert f["toe"] == 0.0
    assert f["active"] == pytest.approx(9.0 * math.cos(math.radians(40.0)), rel=1e-12)
    # continuous at beta = phi' from below: K_a = K_p = cos phi' (classical formula)
    at = face_pressures(1.0, 0.0, cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
                        friction_deg=35.0, unit_weight_kn_m3=18.0, passive_fraction=1.0,
                        ground_slope_deg=35.0 - 1e-9)
    assert at["toe"] / 9.0 == pytest.approx(math.cos(math.radians(35.0)), rel=1e-3)
    assert at["active"] / 9.0 == pytest.approx(math.cos(math.radians(35.0)), rel=1e-3)


def _pair_charges(theta, phi, gamma, z, c_lat, eta, dx, dy):
    """Per step k, (W, H) of a pair on a dry cohesionless plane facing south, written out by hand.

    Per metre (inclined Rankine, closed form; thrusts parallel to the ground): toe eta K_p s,
    head c_lat z, side c_lat z + (1 - sin phi) tan phi s, active K_a s with s = gamma z^2 / 2;
    pair k with c = e_k . downslope: W = a_k [c+^2 toe + c-^2 head + (1 - c^2) side] and
    H = a_k c-^2 P_a (docs/methods.md, "Multi-cell failure clusters").
    """
    p = math.radians(phi)
    ka, kp = inclined_rankine(theta, phi)
    sv = gamma * z * z / 2
    toe, head = eta * kp * sv, c_lat * z
    side = c_lat * z + (1 - math.sin(p)) * math.tan(p) * sv
    out = []
    for ue, un, a_k in pair_geometry(dx, dy):
        c = -un                                # downslope (east, north) = (0, -1)
        cp, cm = max(c, 0.0), max(-c, 0.0)
        out.append((a_k * (cp * cp * toe + cm * cm * head + (1 - c * c) * side),
                    a_k * cm * cm * ka * sv))
    return out


def _partners(mask, nodata, k):
    """(off-grid, nodata, valid outside) counts of the pairs of step k leaving ``mask``."""
    rows, cols = mask.shape
    dr, dc = STEPS[k]
    rr, cc = np.nonzero(mask)
    r2, c2 = rr + dr, cc + dc
    on = (r2 >= 0) & (r2 < rows) & (c2 >= 0) & (c2 < cols)
    hole = np.zeros(rr.size, bool)
    hole[on] = nodata[r2[on], c2[on]]
    member = np.zeros(rr.size, bool)
    member[on] = mask[r2[on], c2[on]]
    return int((~on).sum()), int(hole.sum()), int((on & ~hole & ~member).sum())


def _hand_slab(theta, phi, gamma, z, c_lat, eta, dx, dy, mask, nodata, free):
    """Block balance of a dry cohesionless slab (cells of ``mask``) facing south on a plane at
    theta < phi, written out by hand: basal terms per cell, margin pair by pair; a pair towards
    nodata is free (W = H = 0) when ``free``, else charged like any other (uniform plane, so the
    cell's own values equal the pair mean). Returns FS and the partner counts per class."""
    t, p = math.radians(theta), math.radians(phi)
    area = int(mask.sum()) * dx * dy
    drive = gamma * z * area * math.sin(t)
    basal = gamma * z * math.cos(t) ** 2 * math.tan(p) * area / math.cos(t)
    margin = thrust = 0.0
    seen = np.zeros(3, int)
    for k, (w_k, h_k) in enumerate(_pair_charges(theta, phi, gamma, z, c_lat, eta, dx, dy)):
        off, hole, out = _partners(mask, nodata, k)
        seen += (off, hole, out)
        n = off + out + (0 if free else hole)
        margin += n * w_k
        thrust += n * h_k
    return (basal + margin) / (drive + thrust), seen


@pytest.mark.parametrize("rule", ["free", "charged"])
def test_slab_above_nodata_hand_balance(rule):
    # an inclined slab whose toe row borders nodata (a cut): free by default, so the pairs
    # into the cut give no passive resistance (nor side resistance on the oblique ones);
    # "charged" keeps them with the cell's own values. The same slab moved against the west
    # edge also has pairs off the grid, charged in both modes.
    rows, cols = 12, 10
    slope = np.full((rows, cols), 30.0)
    slope[8, :] = np.nan                    # the row below the slab's toe
    kw = dict(dx=4.0, dy=5.0, cohesion_kpa=0.0, root_cohesion_kpa=0.0,
              lateral_root_cohesion_kpa=4.0, friction_deg=36.0, unit_weight_kn_m3=18.0,
              passive_fraction=0.5)
    hand = (30.0, 36.0, 18.0, 1.2, 4.0, 0.5, 4.0, 5.0)
    f = cluster_forces(slope, np.full((rows, cols), 180.0), 1.2, 0.0, nodata_faces=rule, **kw)
    fs = {}
    for c0 in (2, 0):
        mask = np.zeros((rows, cols), bool)
        mask[3:8, c0:c0 + 4] = True
        expect, seen = _hand_slab(*hand, mask, np.isnan(slope), rule == "free")
        assert seen[1] > 0 and seen[2] > 0 and (seen[0] > 0) == (c0 == 0)
        fs[c0] = cluster_factor_of_safety(f, mask)
        assert fs[c0] == pytest.approx(expect, rel=1e-12)
    # the cut removes resistance only when free
    full, _ = _hand_slab(*hand, mask, np.zeros((rows, cols), bool), False)
    assert (fs[0] < full * (1 - 1e-3)) == (rule == "free")
    # a nodata row up-slope of the head: pair by pair over the grid, a pair into nodata is
    # free (no thrust, no root resistance) or charged; pairs off the grid or to valid cells
    # are charged
    hole = np.broadcast_to(np.arange(rows)[:, None] == 2, (rows, cols))
    g = cluster_forces(np.where(hole, np.nan, 30.0), np.full((rows, cols), 180.0), 1.2, 0.0,
                       nodata_faces=rule, **kw)
    charges = _pair_charges(*hand)
    # c = e_k . downslope is exactly 0 here on the east-west pairs, ~1e-16 in the model
    # (aspect 180 read through sin and cos): a rounding allowance far below any charge
    tol = 1e-12 * max(w_k for w_k, _ in charges)
    into_hole = 0
    for k, (dr, dc) in enumerate(STEPS):
        w = np.full((rows, cols), charges[k][0])
        h = np.full((rows, cols), charges[k][1])
        for r in range(rows):
            for c in range(cols):
                r2, c2 = r + dr, c + dc
                if 0 <= r2 < rows and 0 <= c2 < cols and hole[r2, c2] and rule == "free":
                    w[r, c] = h[r, c] = 0.0
                into_hole += int(0 <= r2 < rows and 0 <= c2 < cols and hole[r2, c2]
                                 and not hole[r, c])
        w[hole] = h[hole] = np.nan
        np.testing.assert_allclose(g.face_resistance[k], w, rtol=1e-12, atol=tol)
        np.testing.assert_allclose(g.face_thrust[k], h, rtol=1e-12, atol=tol)
    assert into_hole > 0
    # the head pairs (north) of the row below the hole: thrust only when charged
    assert (g.face_thrust[2, 3, :] > 0).all() == (rule == "charged")
    assert (g.face_resistance[2, 3, :] == 0).all() == (rule == "free")


def test_nodata_faces_rejected_when_unknown():
    with pytest.raises(InputError, match="nodata_faces"):
        ClusterOptions(nodata_faces="open")
    with pytest.raises(InputError, match="nodata_faces"):
        cluster_forces(np.full((3, 3), 30.0), np.full((3, 3), 180.0), 1.0, 0.0, dx=5.0, dy=5.0,
                       nodata_faces=True, cohesion_kpa=0.0, root_cohesion_kpa=0.0,
                       lateral_root_cohesion_kpa=0.0, friction_deg=35.0, unit_weight_kn_m3=18.0)
