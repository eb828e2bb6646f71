"""Horn slope and aspect checked against outside references.

Oracles: analytic planes and a cone (geometry), the identity between Horn's
operator and numpy.gradient smoothed by 1-2-1 weights (algebra on the Horn
1981 stencil), a plain-numpy weighted least-squares plane fit (numpy.linalg.lstsq)
for cells with missing neighbours (Horn's stencil is that fit with weights
4-2-1 on a full window), and the USGS DEM shipped with matplotlib
(jacksboro_fault_dem.npz).
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
    """Plain-numpy reference: Horn's stencil where all eight neighbours have values, else the
    weighted least-squares plane (weights 4 centre, 2 edge, 1 corner) through the cells of the
    3x3 window that have values, solved by numpy.linalg.lstsq (minimum-norm gradient when the
    cells with values lie on one line)."""
    z = np.asarray(z, dtype=np.float64)
    rows, cols = z.shape
    p = np.pad(z, 1, constant_values=np.nan)
    dzdx = np.full(z.shape, np.nan)
    dzdy = np.full(z.shape, np.nan)
    offsets = [(dr, dc) for dr in (-1, 0, 1) for dc in (-1, 0, 1)]
    weight = {(0, 0): 4.0, (-1, 0): 2.0, (1, 0): 2.0, (0, -1): 2.0, (0, 1): 2.0}
    for r in range(rows):
        for c in range(cols):
            if np.isnan(z[r, c]):
                continue
            win = p[r:r + 3, c:c + 3]
            if np.isfinite(win).all():
                a, b, cc, d, _e, f, g, h, i = win.reshape(-1)
                dzdx[r, c] = ((cc + 2 * f + i) - (a + 2 * d + g)) / (8 * dx)
                dzdy[r, c] = ((a + 2 * b + cc) - (g + 2 * h + i)) / (8 * dy)
                continue
            rows_a, rhs = [], []
            for dr, dc in offsets:
                v = win[1 + dr, 1 + dc]
                if np.isfinite(v):
                    w = np.sqrt(weight.get((dr, dc), 1.0))
                    rows_a.append([w, w * dc, w * -dr])      # x east, y north (row 0 is north)
                    rhs.append(w * v)
            A, y = np.array(rows_a), np.array(rhs)
            centred = A[:, 1:] - A[:, :1] * (A[:, :1].T @ A[:, 1:]) / (A[:, 0] @ A[:, 0])
            yc = y - A[:, 0] * (A[:, 0] @ y) / (A[:, 0] @ A[:, 0])
            grad = np.linalg.lstsq(centred, yc, rcond=1e-9)[0]
            dzdx[r, c], dzdy[r, c] = grad[0] / dx, grad[1] / dy
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
def test_regression_plane_edges_and_corners_have_the_true_slope(dx, dy):
    # Once a false stable ring: neighbours outside the grid took the centre value, so a
    # 35-degree plane read 19.3 degrees on a west edge and 15.5 at a corner. Analytic: on a
    # plane every edge and corner cell has the plane's slope and aspect.
    a, b = 0.3, -0.5
    z = plane(a, b, (8, 10), dx, dy)
    s, asp = slope_aspect(z, dx, dy)
    np.testing.assert_allclose(s, analytic_slope(a, b), atol=1e-4)
    assert angle_diff(asp, analytic_aspect(a, b)).max() < 1e-4
    ref_s, ref_a = horn_numpy(z, dx, dy)
    np.testing.assert_allclose(s, ref_s, atol=1e-4)


@pytest.mark.parametrize("azimuth", [0.0, 22.5, 90.0, 145.0, 200.0, 315.0])
def test_masked_plane_every_edge_corner_and_hole_cell_within_half_a_degree(azimuth):
    # Analytic: a 35-degree plane clipped by a ragged polygon (a rasterised irregular
    # outline), with round holes, and cut by the grid edges.
    rows, cols, dx, dy = 70, 80, 5.0, 4.0
    g = np.tan(np.radians(35.0))
    t = np.radians(azimuth)
    y, x = np.mgrid[0:rows, 0:cols]
    east, north = x * dx, (rows - 1 - y) * dy
    z = 500.0 - g * (east * np.sin(t) + north * np.cos(t))      # falls toward the azimuth
    angle = np.arctan2(y - rows / 2, x - cols / 2)
    radius = np.hypot((y - rows / 2) * 1.1, x - cols / 2)
    outline = 30 + 4 * np.sin(5 * angle) + 2 * np.cos(11 * angle + 1.0)
    keep = (radius < outline) | (x < 3) | (y > rows - 3)         # ragged inside, grid edges too
    for cy, cx, cr in ((30, 30, 3.5), (45, 55, 2.5), (20, 50, 4.0)):
        keep &= np.hypot(y - cy, x - cx) > cr
    zz = np.where(keep, z, np.nan)
    s, asp = slope_aspect(zz, dx, dy)
    valid = keep
    pad = np.pad(valid, 1)
    edge = valid & ~(pad[:-2, :-2] & pad[:-2, 1:-1] & pad[:-2, 2:] & pad[1:-1, :-2]
                     & pad[1:-1, 2:] & pad[2:, :-2] & pad[2:, 1:-1] & pad[2:, 2:])
    assert edge.sum() > 300                                       # edges, corners, hole rims
    assert np.abs(s[valid] - 35.0).max() < 0.5
    assert angle_diff(asp[valid], azimuth).max() < 0.5


def test_cells_on_one_line_get_the_gradient_along_it():
    # Minimum-norm plane through collinear points (numpy.linalg.lstsq): a one-cell-wide
    # north-south strip of a plane z = a x + b y knows only dz/dy = b.
    a, b = 0.4, -0.3
    z = plane(a, b, (7, 7), 2.0, 2.0)
    strip = np.full_like(z, np.nan)
    strip[:, 3] = z[:, 3]
    s, asp = slope_aspect(strip, 2.0, 2.0)
    np.testing.assert_allclose(s[:, 3], analytic_slope(0.0, b), atol=1e-4)
    ref_s, _ = horn_numpy(strip, 2.0, 2.0)
    np.testing.assert_allclose(s[:, 3], ref_s[:, 3], atol=1e-4)


def test_flat_has_zero_slope_and_no_aspect():
    # Analytic: a horizontal plane has slope 0 and no facing direction.
    s, asp = slope_aspect(np.full((5, 6), 12.5, dtype=np.float32), 1.0, 1.0)
    np.testing.assert_array_equal(s, 0.0)
    assert np.isnan(asp).all()


# --------------------------------------------------------------------------
# Nodata
# --------------------------------------------------------------------------


def test_nan_cells_stay_nan_and_their_neighbours_fit_a_plane():
    # Oracle: the plain-numpy weighted least-squares plane of horn_numpy, on seeded
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
    # A valid cell with no valid neighbour: no gradient can be estimated, so 0.
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
