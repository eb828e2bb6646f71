"""Horn slope and aspect checked against outside references.

Oracles: analytic planes and a cone (geometry), the identity between Horn's
operator and numpy.gradient smoothed by 1-2-1 weights (algebra on the Horn
1981 stencil), a plain-numpy implementation of the stencil with the
"missing neighbour takes the centre value" rule, and the USGS DEM shipped
with matplotlib (jacksboro_fault_dem.npz).
"""

import numpy as np
import pytest
from matplotlib import cbook
from scipy import ndimage

from slopescreen.errors import InputError
from slopescreen.terrain import slope_aspect


def plane(a, b, shape, dx, dy):
    """z = a*x + b*y with x east, y north (row 0 is north), metres."""
    rows, cols = shape
    x = np.arange(cols)[None, :] * dx
    y = (rows - 1 - np.arange(rows))[:, None] * dy
    return a * x + b * y + 250.0


def analytic_slope(a, b):
    # Gradient magnitude of a plane: tan(slope) = hypot(a, b).
    return np.degrees(np.arctan(np.hypot(a, b)))


def analytic_aspect(a, b):
    # Downslope direction is -grad z = (-a, -b) (east, north); azimuth
    # clockwise from north is atan2(east, north).
    return np.degrees(np.arctan2(-a, -b)) % 360.0


def horn_numpy(z, dx, dy):
    """Plain-numpy Horn (1981) stencil; missing neighbours take the centre value."""
    z = np.asarray(z, dtype=np.float64)
    rows, cols = z.shape
    p = np.pad(z, 1, constant_values=np.nan)

    def nb(dr, dc):
        v = p[1 + dr : 1 + dr + rows, 1 + dc : 1 + dc + cols]
        return np.where(np.isnan(v), z, v)

    a, b, c = nb(-1, -1), nb(-1, 0), nb(-1, 1)
    d, f = nb(0, -1), nb(0, 1)
    g, h, i = nb(1, -1), nb(1, 0), nb(1, 1)
    dzdx = ((c + 2 * f + i) - (a + 2 * d + g)) / (8 * dx)
    dzdy = ((a + 2 * b + c) - (g + 2 * h + i)) / (8 * dy)
    slope = np.degrees(np.arctan(np.hypot(dzdx, dzdy)))
    with np.errstate(invalid="ignore"):
        aspect = np.where(
            (dzdx == 0) & (dzdy == 0), np.nan, np.degrees(np.arctan2(-dzdx, -dzdy)) % 360.0
        )
    return slope, aspect


def angle_diff(a, b):
    return np.abs((np.asarray(a, dtype=np.float64) - b + 180.0) % 360.0 - 180.0)


def jacksboro_metres():
    with cbook.get_sample_data("jacksboro_fault_dem.npz") as data:
        z = np.asarray(data["elevation"]).astype(np.float64)
        dx_deg = float(data["dx"])
        dy_deg = float(data["dy"])
    # Degrees to metres near 36.6 N (brief's convention; 111320 m per degree
    # of latitude is a handbook figure).
    dy = dy_deg * 111320.0
    dx = dx_deg * 111320.0 * np.cos(np.radians(36.6))
    return z, dx, dy


# --------------------------------------------------------------------------
# Planes
# --------------------------------------------------------------------------


@pytest.mark.parametrize(
    "a, b, facing",
    [
        (-0.3, 0.0, 90.0),  # falls eastward: faces east
        (0.0, -0.7, 0.0),  # falls northward: faces north
        (0.4, 0.4, 225.0),  # rises to the north-east: faces south-west
        (0.25, -1.3, None),
        (-2.0, 0.9, None),
    ],
)
@pytest.mark.parametrize("dx, dy", [(10.0, 10.0), (10.0, 4.0), (2.5, 30.0)])
def test_plane_interior_is_exact(a, b, facing, dx, dy):
    # Analytic: slope = atan(hypot(a, b)); aspect = azimuth of -grad z.
    z = plane(a, b, (9, 12), dx, dy)
    s, asp = slope_aspect(z, dx, dy)
    assert s.dtype == np.float32 and asp.dtype == np.float32
    inner = (slice(1, -1), slice(1, -1))
    np.testing.assert_allclose(s[inner], analytic_slope(a, b), atol=1e-4)
    assert angle_diff(asp[inner], analytic_aspect(a, b)).max() < 1e-4
    if facing is not None:
        assert angle_diff(asp[inner], facing).max() < 1e-4


@pytest.mark.parametrize("dx, dy", [(10.0, 10.0), (10.0, 4.0)])
def test_plane_edges_follow_replicate_rule(dx, dy):
    # Analytic, worked by hand from the stencil with a missing neighbour
    # replaced by the centre value: on a west or east edge cell (not a
    # corner) dz/dx halves and dz/dy keeps 3/4; on a north or south edge
    # dz/dy halves and dz/dx keeps 3/4. The edge slope is therefore lower
    # than the plane's.
    a, b = 0.3, -0.5
    z = plane(a, b, (8, 10), dx, dy)
    s, asp = slope_aspect(z, dx, dy)
    west_east = analytic_slope(a / 2, 3 * b / 4)
    north_south = analytic_slope(3 * a / 4, b / 2)
    np.testing.assert_allclose(s[1:-1, 0], west_east, atol=1e-4)
    np.testing.assert_allclose(s[1:-1, -1], west_east, atol=1e-4)
    np.testing.assert_allclose(s[0, 1:-1], north_south, atol=1e-4)
    np.testing.assert_allclose(s[-1, 1:-1], north_south, atol=1e-4)
    assert angle_diff(asp[1:-1, 0], analytic_aspect(a / 2, 3 * b / 4)).max() < 1e-4
    assert angle_diff(asp[0, 1:-1], analytic_aspect(3 * a / 4, b / 2)).max() < 1e-4
    assert (s[1:-1, 0] < analytic_slope(a, b)).all()
    # Corners and every other cell: the plain-numpy stencil with the same rule.
    ref_s, ref_a = horn_numpy(z, dx, dy)
    np.testing.assert_allclose(s, ref_s, atol=1e-4)
    assert angle_diff(asp, ref_a).max() < 1e-4


def test_flat_has_zero_slope_and_no_aspect():
    # Analytic: a horizontal plane has slope 0 and no facing direction.
    s, asp = slope_aspect(np.full((5, 6), 12.5, dtype=np.float32), 1.0, 1.0)
    np.testing.assert_array_equal(s, 0.0)
    assert np.isnan(asp).all()


# --------------------------------------------------------------------------
# Nodata
# --------------------------------------------------------------------------


def test_nan_cells_stay_nan_and_neighbours_use_centre():
    # Oracle: plain-numpy stencil with the same replicate rule, on seeded
    # random terrain with holes.
    rng = np.random.default_rng(8)
    z = rng.uniform(0.0, 20.0, (20, 25))
    holes = rng.random(z.shape) < 0.1
    z[holes] = np.nan
    s, asp = slope_aspect(z, 5.0, 7.0)
    assert np.isnan(s[holes]).all() and np.isnan(asp[holes]).all()
    assert np.isfinite(s[~holes]).all()
    ref_s, ref_a = horn_numpy(z, 5.0, 7.0)
    np.testing.assert_allclose(s[~holes], ref_s[~holes], atol=1e-4)
    finite = ~holes & np.isfinite(ref_a)
    assert angle_diff(asp[finite], ref_a[finite]).max() < 1e-3
    # Same through the valid mask.
    z_full = np.where(holes, 1e6, z)
    s2, asp2 = slope_aspect(z_full, 5.0, 7.0, valid=~holes)
    np.testing.assert_array_equal(s2, s)
    np.testing.assert_array_equal(asp2, asp)


def test_isolated_cell_has_zero_slope():
    # Replicate rule: a valid cell with no valid neighbour sees a flat window.
    z = np.full((3, 3), np.nan)
    z[1, 1] = 4.0
    s, asp = slope_aspect(z, 1.0, 1.0)
    assert s[1, 1] == 0.0 and np.isnan(asp[1, 1])


# --------------------------------------------------------------------------
# Cone
# --------------------------------------------------------------------------


def test_cone_slope_is_45_degrees_away_from_apex():
    # Analytic: z = -r has |grad z| = 1 everywhere but the apex, so slope is
    # 45 deg and the cell faces away from the apex. Horn's differences carry
    # a second-order truncation error from the cone's curvature (1/r), so the
    # error must fall about fourfold when the distance doubles (our own
    # refinement study gave 0.071 deg at r >= 10 cells, 0.018 at r >= 20).
    dx, dy = 2.0, 3.0
    rows, cols = 121, 161
    x = (np.arange(cols)[None, :] - 80) * dx
    y = (60 - np.arange(rows)[:, None]) * dy
    r = np.hypot(x, y)
    s, asp = slope_aspect(-r, dx, dy)
    inner = np.zeros(r.shape, dtype=bool)
    inner[1:-1, 1:-1] = True
    h = max(dx, dy)
    err10 = np.abs(s[inner & (r >= 10 * h)] - 45.0).max()
    err20 = np.abs(s[inner & (r >= 20 * h)] - 45.0).max()
    assert err10 < 0.1
    assert err20 < 0.025
    assert 3.0 < err10 / err20 < 5.0
    away = np.degrees(np.arctan2(x, y)) % 360.0
    assert angle_diff(asp[inner & (r >= 10 * h)], away[inner & (r >= 10 * h)]).max() < 0.1
    # By symmetry the apex has zero gradient (exactly) and no aspect; cells
    # on the axes face exactly N, E, S, W.
    assert s[60, 80] == 0.0 and np.isnan(asp[60, 80])
    assert asp[30, 80] == 0.0 and asp[60, 120] == 90.0
    assert asp[90, 80] == 180.0 and asp[60, 40] == 270.0


# --------------------------------------------------------------------------
# USGS DEM against numpy.gradient
# --------------------------------------------------------------------------


def test_jacksboro_horn_is_smoothed_numpy_gradient():
    # Algebra on the Horn (1981) stencil: Horn's dz/dx is the central
    # difference (numpy.gradient) averaged over the rows above, at and below
    # with weights 1-2-1, and likewise for dz/dy across columns. So in the
    # interior Horn equals numpy.gradient smoothed by scipy.ndimage with
    # [1, 2, 1] / 4, to rounding.
    z, dx, dy = jacksboro_metres()
    s, asp = slope_aspect(z, dx, dy)
    gx = np.gradient(z, dx, axis=1)
    gy = -np.gradient(z, dy, axis=0)  # y is north, rows run south
    w = np.array([1.0, 2.0, 1.0]) / 4.0
    hx = ndimage.correlate1d(gx, w, axis=0)
    hy = ndimage.correlate1d(gy, w, axis=1)
    ref = np.degrees(np.arctan(np.hypot(hx, hy)))
    inner = (slice(2, -2), slice(2, -2))
    np.testing.assert_allclose(s[inner], ref[inner], atol=1e-4)
    ref_asp = np.degrees(np.arctan2(-hx, -hy)) % 360.0
    steep = np.zeros(z.shape, dtype=bool)
    steep[inner] = s[inner] > 0.5
    assert angle_diff(asp[steep], ref_asp[steep]).max() < 1e-3


def test_jacksboro_horn_close_to_plain_gradient():
    # Sanity oracle: slope from unsmoothed numpy.gradient. Horn smooths
    # across the difference direction, so cell values differ on rough
    # ground, but the two maps must agree closely overall: a strong
    # correlation, a small median difference, and a slightly lower mean
    # (smoothing never raises the mean gradient magnitude much).
    z, dx, dy = jacksboro_metres()
    s, _ = slope_aspect(z, dx, dy)
    gy, gx = np.gradient(z, dy, dx)
    plain = np.degrees(np.arctan(np.hypot(gx, gy)))
    inner = (slice(1, -1), slice(1, -1))
    a, b = s[inner].astype(np.float64).ravel(), plain[inner].ravel()
    assert np.corrcoef(a, b)[0, 1] > 0.95
    assert np.median(np.abs(a - b)) < 1.0
    assert a.mean() <= b.mean() + 0.05
    assert 1.0 < a.mean() < 45.0  # a hilly DEM, not a flat or a wall


# --------------------------------------------------------------------------
# Input handling
# --------------------------------------------------------------------------


@pytest.mark.parametrize(
    "z, dx, dy",
    [
        (np.zeros((4, 4)), 0.0, 1.0),
        (np.zeros((4, 4)), 1.0, -2.0),
        (np.zeros((4, 4)), np.nan, 1.0),
        (np.zeros((4, 4)), 1.0, np.inf),
        (np.zeros((4, 4)), "ten", 1.0),
        (np.full((4, 4), np.nan), 1.0, 1.0),
        (np.zeros((2, 5)), 1.0, 1.0),
        (np.zeros((3, 3, 3)), 1.0, 1.0),
        (np.array([[0.0, 1, 2], [1, np.inf, 1], [2, 1, 0]]), 1.0, 1.0),
    ],
)
def test_bad_input_raises(z, dx, dy):
    with pytest.raises(InputError):
        slope_aspect(z, dx, dy)
