"""Flow routing: defining properties on a real DEM and on hand-made cases.

The real DEM is the USGS 3-arc-second DEM of the Jacksboro fault area that
matplotlib ships (``jacksboro_fault_dem.npz``), depression-filled with
scikit-image's reconstruction by erosion seeded from the border (the
Priority-Flood result, Barnes et al. 2014).
"""

import math

import numpy as np
import pytest
from matplotlib import cbook
from skimage.morphology import reconstruction

from slopescreen.errors import InputError
from slopescreen.routing import (
    FlowResult,
    drainage_over_flats,
    flow_accumulation,
    specific_catchment_area,
)
from slopescreen.routing.links import _receivers

DROW = np.array([0, -1, -1, -1, 0, 1, 1, 1])
DCOL = np.array([1, 1, 0, -1, -1, -1, 0, 1])
METHODS = ("dinf", "mfd", "d8")


def fill(z):
    """Reconstruction by erosion seeded from the border and from nodata (= Priority-Flood)."""
    nan = np.isnan(z)
    mask = np.where(nan, np.nanmin(z) - 1.0, z)
    edge = np.zeros(z.shape, dtype=bool)
    edge[[0, -1], :] = True
    edge[:, [0, -1]] = True
    edge |= nan
    out = reconstruction(np.where(edge, mask, mask.max()), mask, method="erosion",
                         footprint=np.ones((3, 3)))
    out[nan] = np.nan
    return out


@pytest.fixture(scope="module")
def usgs_dem():
    data = cbook.get_sample_data("jacksboro_fault_dem.npz")  # an open NpzFile
    z = data["elevation"].astype(np.float64)
    # degrees to metres at the DEM's latitude (36.6 deg N), 111320 m per degree
    dy = float(data["dy"]) * 111320.0
    dx = float(data["dx"]) * 111320.0 * math.cos(math.radians(36.6))
    data.close()
    return fill(z), dx, dy


def on_data_edge(z):
    """Valid cells with a nodata or outside neighbour."""
    p = np.pad(np.isfinite(z), 1, constant_values=False)
    edge = np.zeros(z.shape, dtype=bool)
    for k in range(8):
        edge |= ~p[1 + DROW[k]:1 + DROW[k] + z.shape[0], 1 + DCOL[k]:1 + DCOL[k] + z.shape[1]]
    return edge & np.isfinite(z)


@pytest.mark.parametrize("method", METHODS)
def test_usgs_dem_conservation_and_receivers(usgs_dem, method):
    z, dx, dy = usgs_dem
    res = flow_accumulation(z, dx, dy, method=method)
    assert isinstance(res, FlowResult)
    n_valid = np.isfinite(z).sum()
    # conservation: everything leaves at the outlets (float64 accumulation)
    assert res.outflow_m2 == pytest.approx(n_valid * dx * dy, rel=1e-9)
    assert not res.undrained.any()
    assert res.area_m2.dtype == np.float64 and res.width_m.dtype == np.float32
    assert (res.area_m2 >= dx * dy * (1 - 1e-12)).all()
    donor, receiver, frac, outlet = _receivers(z, dx, dy, method)
    # every valid cell sends flow or is an outlet on the data edge
    sends = np.zeros(z.size, dtype=bool)
    sends[donor] = True
    sends = sends.reshape(z.shape)
    assert (sends | outlet).all()
    assert not (sends & outlet).any()
    assert (outlet <= on_data_edge(z)).all()
    # fractions are >= 0 and sum to 1 for every donor
    assert (frac >= 0).all()
    totals = np.bincount(donor, weights=frac, minlength=z.size)
    np.testing.assert_allclose(totals[sends.ravel()], 1.0, rtol=1e-6)
    # a receiver is never higher than its donor (equal only across a flat)
    zr, zd = z.ravel()[receiver], z.ravel()[donor]
    assert (zr <= zd).all()
    # widths lie within the documented bounds
    b = res.width_m
    lo, hi = dx * dy / math.hypot(dx, dy), dx * dy / (min(dx, dy) * math.cos(math.pi / 4))
    assert (b >= lo * (1 - 1e-6)).all() and (b <= hi * (1 + 1e-6)).all()
    sca = specific_catchment_area(z, dx, dy, method=method)
    assert sca.dtype == np.float32
    np.testing.assert_allclose(sca, res.area_m2 / res.width_m, rtol=1e-6)


def depression_dem():
    """A plane falling east with a deep bowl in it: filled, the bowl is one big flat."""
    rows, cols = 41, 51
    i, j = np.mgrid[0:rows, 0:cols]
    z = 100.0 - 0.5 * j + 0.02 * (i - 20) ** 2
    z -= 30.0 * np.exp(-(((i - 20) / 8.0) ** 2 + ((j - 22) / 8.0) ** 2))
    return fill(z), z


def test_filled_depression_drains_through_its_flat():
    filled, raw = depression_dem()
    flat = (filled > raw + 1e-9)  # the filled part of the bowl
    assert flat.sum() > 150
    dirs = drainage_over_flats(filled)
    donor, receiver, frac, outlet = _receivers(filled, 1.0, 1.0, "d8")
    nxt = np.full(filled.size, -1)
    nxt[donor] = receiver
    outlets = set(np.flatnonzero(outlet))
    # every flat cell reaches an outlet; paths never revisit a cell
    for start in np.flatnonzero(flat):
        seen, c = set(), start
        while c not in outlets:
            assert c not in seen
            seen.add(c)
            c = nxt[c]
            assert c >= 0
    # no two flat cells point at each other
    fi, fj = np.nonzero(dirs != 255)
    for i, j in zip(fi, fj):
        k = dirs[i, j]
        ni, nj = i + DROW[k], j + DCOL[k]
        assert not (dirs[ni, nj] != 255 and dirs[ni, nj] == (k + 4) % 8)
    # the whole flat drains through one spill cell: flow converges, so the
    # largest area on the flat's rim is at least the flat's own area
    for method in METHODS:
        res = flow_accumulation(filled, 1.0, 1.0, method=method)
        assert not res.undrained.any()
        assert res.outflow_m2 == pytest.approx(np.isfinite(filled).sum(), rel=1e-12)
        assert res.area_m2[flat].max() >= flat.sum()


def test_unfilled_depression_keeps_its_flow():
    # Routing does not fill: the bottom of a closed bowl is undrained and keeps its area.
    _, raw = depression_dem()
    res = flow_accumulation(raw, 1.0, 1.0, method="dinf")
    assert res.undrained.sum() >= 1
    kept = np.nansum(np.where(res.undrained, res.area_m2, 0.0))
    assert res.outflow_m2 + kept == pytest.approx(raw.size, rel=1e-12)
    assert kept > 100  # the bowl's catchment


def test_plane_cut_by_nodata_accumulates_from_its_first_row():
    # A plane falling south (row 0 north) below a nodata band along its divide.
    # Aligned with the grid, a = k * dy exactly (docs/methods.md, "Flow routing"), also with
    # rectangular cells; the first valid row is NOT an outlet. The grid is
    # wide enough that the side edges (which MFD flow cannot cross) cannot
    # reach the middle column within 16 rows.
    dx, dy = 2.0, 5.0
    rows, cols = 20, 41
    z = np.tile(100.0 - 0.3 * np.arange(rows)[:, None], (1, cols))
    z[:4] = np.nan
    for method in METHODS:
        res = flow_accumulation(z, dx, dy, method=method)
        k = np.arange(1, rows - 4 + 1)
        np.testing.assert_allclose(res.area_m2[4:, 20], k * dx * dy, rtol=1e-12)
        sca = specific_catchment_area(z, dx, dy, method=method)
        np.testing.assert_allclose(sca[4:, 20], k * dy, rtol=1e-6)
        assert np.isnan(sca[:4]).all() and np.isnan(res.area_m2[:4]).all()


def test_rectangular_cells_on_a_tilted_plane_conserve_and_scale():
    # Same relief sampled on 3 m x 7 m cells: area in m^2, conserved.
    rng = np.random.default_rng(4)
    z = fill(np.add.outer(np.linspace(50, 0, 30), np.linspace(0, 10, 25))
             + rng.normal(0, 0.5, (30, 25)))
    for method in METHODS:
        res = flow_accumulation(z, 3.0, 7.0, method=method)
        assert res.outflow_m2 == pytest.approx(z.size * 21.0, rel=1e-12)
        scaled = flow_accumulation(z, 6.0, 14.0, method=method)
        # doubling both cell sides multiplies areas by 4 and widths by 2
        np.testing.assert_allclose(scaled.area_m2, 4 * res.area_m2, rtol=1e-12)
        np.testing.assert_allclose(scaled.width_m, 2 * res.width_m, rtol=1e-6)


def test_nodata_hole_acts_as_data_edge():
    # A plane falling east with a 3 x 3 hole: the cell just upslope of the
    # hole has no lower valid neighbour and becomes an outlet; cells straight
    # downslope of the hole only collect from the hole's far side (D8).
    z = np.tile(np.linspace(20.0, 0.0, 15), (11, 1))
    z[4:7, 6:9] = np.nan
    res = flow_accumulation(z, 1.0, 1.0, method="d8")
    donor, receiver, frac, outlet = _receivers(z, 1.0, 1.0, "d8")
    assert outlet[5, 5]
    assert res.area_m2[5, 5] == pytest.approx(6.0)   # columns 0..5 of row 5
    assert res.area_m2[5, 9] == pytest.approx(1.0)   # just below the hole
    assert res.area_m2[5, 14] == pytest.approx(6.0)  # columns 9..14
    assert res.outflow_m2 == pytest.approx(np.isfinite(z).sum())
    valid = np.isfinite(z)
    same = flow_accumulation(np.where(valid, z, 0.0), 1.0, 1.0, method="d8", valid=valid)
    np.testing.assert_array_equal(same.area_m2, res.area_m2)


def test_unknown_method_and_bad_options():
    z = np.tile(np.arange(5.0, 0.0, -1.0), (4, 1))
    with pytest.raises(InputError, match="method") as info:
        specific_catchment_area(z, 1.0, 1.0, method="steepest")
    for name in METHODS:
        assert repr(name) in str(info.value)
    with pytest.raises(InputError, match="method"):
        flow_accumulation(z, 1.0, 1.0, method=None)
    with pytest.raises(InputError, match="mfd_exponent"):
        specific_catchment_area(z, 1.0, 1.0, method="mfd", mfd_exponent=0.0)
    with pytest.raises(InputError, match="mfd_exponent"):
        specific_catchment_area(z, 1.0, 1.0, method="mfd", mfd_exponent=float("nan"))
    with pytest.raises(InputError, match="dx"):
        specific_catchment_area(z, 0.0, 1.0)
    with pytest.raises(InputError):
        specific_catchment_area(np.full((4, 4), np.nan), 1.0, 1.0)
    with pytest.raises(InputError):
        specific_catchment_area(np.zeros((4, 4, 2)), 1.0, 1.0)


def test_input_not_modified_and_float32_accepted(usgs_dem):
    z, dx, dy = usgs_dem
    z = z[:120, :150].copy()
    z[50:53, 60:64] = np.nan
    valid = np.ones(z.shape, dtype=bool)
    valid[:, :2] = False
    z_before, valid_before = z.copy(), valid.copy()
    z32 = z.astype(np.float32)  # elevations are whole metres: exact in float32
    z32_before = z32.copy()
    for method in METHODS:
        a64 = specific_catchment_area(z, dx, dy, method=method, valid=valid)
        a32 = specific_catchment_area(z32, dx, dy, method=method, valid=valid)
        assert a32.dtype == np.float32
        np.testing.assert_allclose(a32, a64, rtol=1e-5, equal_nan=True)
        assert np.isnan(a64[:, :2]).all() and np.isnan(a64[50:53, 60:64]).all()
    np.testing.assert_array_equal(z, z_before)
    np.testing.assert_array_equal(z32, z32_before)
    np.testing.assert_array_equal(valid, valid_before)


def test_mfd_exponent_changes_dispersion():
    # Freeman (1991): a larger exponent concentrates flow toward the steepest
    # neighbour (the partition tends to D8 as p grows).
    rng = np.random.default_rng(0)
    z = fill(np.add.outer(np.linspace(30, 0, 25), np.zeros(25)) + rng.normal(0, 0.3, (25, 25)))
    low = flow_accumulation(z, 1.0, 1.0, method="mfd", mfd_exponent=1.0).area_m2
    high = flow_accumulation(z, 1.0, 1.0, method="mfd", mfd_exponent=8.0).area_m2
    # more concentrated flow: larger maximum, same total
    assert high.max() > low.max()


def test_dinf_falls_back_to_d8_next_to_nodata():
    # Tarboton (1997) facets need both neighbours valid. Here the only lower
    # neighbour of the centre is its north-east diagonal, whose two facets
    # are cut by nodata (north and east), so no facet descends and the cell
    # sends everything to the steepest valid lower neighbour (D8), with the
    # D8 width of a diagonal step, dx dy / hypot(dx, dy).
    z = np.full((5, 5), 9.0)
    z[2, 2] = 5.0
    z[1, 3] = 1.0
    z[1, 2] = z[2, 3] = np.nan
    dx, dy = 2.0, 3.0
    donor, receiver, frac, outlet = _receivers(z, dx, dy, "dinf")
    centre, ne = 2 * 5 + 2, 1 * 5 + 3
    assert list(receiver[donor == centre]) == [ne]
    assert frac[donor == centre][0] == 1.0
    res = flow_accumulation(z, dx, dy, method="dinf")
    assert res.width_m[2, 2] == pytest.approx(dx * dy / math.hypot(dx, dy), rel=1e-6)
    assert outlet[1, 3]
    assert res.outflow_m2 == pytest.approx(np.isfinite(z).sum() * dx * dy)
