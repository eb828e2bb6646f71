"""Cluster margins that do not depend on the grid (docs/methods.md, "Multi-cell failure clusters").

The margin forces act on 16 cell pairs with Cauchy-Crofton weights (Boykov and Kolmogorov 2003,
from memory): a straight margin is charged close to its continuum value l r(n) per metre
whatever its angle to the grid. Checked against the continuum block balance of a rectangle
(Milledge et al. 2014 force model: base, toe, head, two sides) and across rotations of the
same slab on the same plane. Under the former 4-face rule a slope-aligned 4 x 16 slab on a
uniform 34 degree slope had FS 0.823 at aspect 180 and 0.877 at 225 (a 6.6 % spread).
"""

import math

import numpy as np
import pytest

from slopescreen.clusters import cluster_factor_of_safety, cluster_forces, face_pressures
from pair_oracle import STEPS
from slopescreen.clusters._faces import face_geometry

SLOPE = 34.0
SOILS = {
    # c' only (no lateral roots): toe and sides resist, the head carries the active thrust
    "cohesive": dict(cohesion_kpa=2.0, root_cohesion_kpa=0.0, lateral_root_cohesion_kpa=0.0,
                     friction_deg=33.0, unit_weight_kn_m3=18.0),
    # cohesionless with lateral roots: head and sides resist
    "rooted": dict(cohesion_kpa=0.0, root_cohesion_kpa=1.0, lateral_root_cohesion_kpa=2.0,
                   friction_deg=36.0, unit_weight_kn_m3=18.0),
}


def _slab(n, rot_deg, width_m, length_m, offset):
    """Cells whose centres fall in a width x length rectangle, long side along the downslope.

    Downslope points at aspect 180 + rot (clockwise from north); 1 m cells; the rectangle is
    centred at the grid centre shifted by ``offset`` (cells).
    """
    a = math.radians(180.0 + rot_deg)
    down = np.array([math.sin(a), math.cos(a)])  # east, north
    across = np.array([-down[1], down[0]])
    c = (n - 1) / 2.0
    rr, cc = np.mgrid[0:n, 0:n]
    x = cc - c - offset[0]
    y = -(rr - c) - offset[1]
    along = x * down[0] + y * down[1]
    side = x * across[0] + y * across[1]
    return (np.abs(along) <= length_m / 2) & (np.abs(side) <= width_m / 2)


def _fs(soil, rot_deg, width_m, length_m, offset, n=40):
    shape = (n, n)
    f = cluster_forces(np.full(shape, SLOPE), np.full(shape, (180.0 + rot_deg) % 360.0), 1.0,
                       0.0, dx=1.0, dy=1.0, **soil)
    return cluster_factor_of_safety(f, _slab(n, rot_deg, width_m, length_m, offset))


def _continuum_fs(soil, width_m, length_m):
    """FS of the exact rectangle: base, toe and head of width W, two sides of length L (kN)."""
    t = math.radians(SLOPE)
    g = soil["unit_weight_kn_m3"]
    area = width_m * length_m
    # infinite-slope base per plan area (dry, z = 1 m): Milledge et al. (2014), eq. of the base
    resist = (soil["cohesion_kpa"] + soil["root_cohesion_kpa"]
              + g * math.cos(t) ** 2 * math.tan(math.radians(soil["friction_deg"]))) / math.cos(t)
    drive = g * math.sin(t)
    p = face_pressures(1.0, 0.0, cohesion_kpa=soil["cohesion_kpa"],
                       lateral_root_cohesion_kpa=soil["lateral_root_cohesion_kpa"],
                       friction_deg=soil["friction_deg"], unit_weight_kn_m3=g,
                       ground_slope_deg=SLOPE)
    num = area * resist + width_m * (p["toe"] + p["head"]) + 2.0 * length_m * p["side"]
    den = area * drive + width_m * p["active"]
    return num / den


OFFSETS = [(ox, oy) for ox in (-0.4, -0.2, 0.0, 0.2, 0.4) for oy in (-0.4, -0.2, 0.0, 0.2, 0.4)]


@pytest.mark.parametrize("soil", sorted(SOILS))
@pytest.mark.parametrize("width_m, length_m", [(4.0, 16.0), (2.0, 24.0)])
def test_slope_aligned_slab_fs_does_not_depend_on_the_grid_angle(soil, width_m, length_m):
    # the same slab on the same plane, rotated 0, 22.5 and 45 degrees against the grid: FS
    # within 3 % (issue requirement), each the mean over 25 sub-cell positions so that the
    # raster's area error (a 4 x 16 slab rasterises to 58-70 cells at 45 degrees) averages out
    means = [np.mean([_fs(SOILS[soil], rot, width_m, length_m, o) for o in OFFSETS])
             for rot in (0.0, 22.5, 45.0)]
    assert max(means) / min(means) - 1.0 < 0.03, means


def test_slab_fs_close_to_the_continuum_block_balance():
    # the axis-aligned slab against the exact rectangle balance (hand formula above); the
    # Cauchy-Crofton quadrature counts corners short and smooths the toe/head/side contrast,
    # so the raster FS sits a few per cent under the continuum value
    soil = SOILS["cohesive"]
    for width_m, length_m in ((4.0, 16.0), (8.0, 24.0)):
        exact = _continuum_fs(soil, width_m, length_m)
        got = np.mean([_fs(soil, 0.0, width_m, length_m, o) for o in OFFSETS])
        assert got == pytest.approx(exact, rel=0.05), (width_m, length_m, got, exact)
        assert got <= exact * 1.005


@pytest.mark.parametrize("angle_deg", [0.0, 22.5, 45.0, 63.43])
def test_uniform_margin_charge_per_metre_is_isotropic(angle_deg):
    # a half-plane of cells on one side of a straight line at angle_deg: pairs crossing it,
    # counted on the raster with their weights, charge r = 1 per metre for a uniform r (the
    # Cauchy-Crofton property; 16 directions leave a ripple of about 1.4 %)
    ue, un, factor = face_geometry(1.0, 1.0)
    n = 400
    rr, cc = np.mgrid[0:n, 0:n]
    a = math.radians(angle_deg)
    normal = np.array([math.cos(a), math.sin(a)])  # outward normal (east, north)
    s = (cc - n / 2) * normal[0] + (-(rr - n / 2)) * normal[1]
    inside = s < 0
    core = slice(100, 300)
    total = 0.0
    for k, (dr, dc) in enumerate(STEPS):
        across = np.zeros_like(inside)
        across[max(0, -dr):n - max(0, dr), max(0, -dc):n - max(0, dc)] = ~inside[
            max(0, dr):n - max(0, -dr), max(0, dc):n - max(0, -dc)]
        total += factor[k] * float((inside & across)[core, core].sum())
    # the margin's length inside the 200 x 200 core window
    length = 200.0 / max(abs(math.cos(a)), abs(math.sin(a)))
    assert total / length == pytest.approx(1.0, abs=0.016)


def test_each_pair_family_obeys_the_polyomino_perimeter_bound():
    # brute force over every subset of a 4 x 5 grid: for each family of two pair directions
    # that the size-resolved program's perimeter cut uses (sides, diagonals, two pairs of
    # knight moves), the pairs with both cells in a set of k cells number at most
    # 2k - ceil(2 sqrt(k)) (Harary and Harborth 1976 for the sides, from memory; the same
    # bound in the lattice the two steps span for the others)
    families = {"sides": [(0, 1), (-1, 0)], "diagonals": [(-1, 1), (-1, -1)],
                "knights a": [(-1, 2), (-2, -1)], "knights b": [(-2, 1), (-1, -2)]}
    rows, cols = 4, 5
    n = rows * cols
    x = ((np.arange(2 ** n, dtype=np.int64)[:, None] >> np.arange(n)) & 1).astype(bool)
    k = x.sum(axis=1)
    limit = 2 * k - np.ceil(2 * np.sqrt(k) - 1e-12).astype(np.int64)
    tight = {}
    for name, steps in families.items():
        inner = np.zeros(len(x), dtype=np.int64)
        for dr, dc in steps:
            for r in range(rows):
                for c in range(cols):
                    rr, cc = r + dr, c + dc
                    if 0 <= rr < rows and 0 <= cc < cols:
                        inner += x[:, r * cols + c] & x[:, rr * cols + cc]
        nonempty = k > 0
        assert (inner[nonempty] <= limit[nonempty]).all(), name
        tight[name] = int(np.sum(inner[nonempty] == limit[nonempty]))
    # the bound is reached (it is the best of its form) for every family
    assert all(v > 0 for v in tight.values()), tight
