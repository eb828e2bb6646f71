"""GeoTIFF input and output: CRS rules, units, nodata, atomic tiled writes."""

import numpy as np
import pytest
import rasterio
from rasterio.transform import Affine, from_origin

from conftest import tilted_plane, write_tif
from slopescreen.errors import RasterError
from slopescreen.grid import NODATA, read_back, read_codes, read_dem, write_raster


def test_read_metre_dem(tmp_path):
    z = tilted_plane()
    z[0, 0] = -9999.0
    z[1, 1] = np.nan
    path = write_tif(tmp_path / "d.tif", z)
    before = path.read_bytes()
    out, grid = read_dem(path)
    assert out.dtype == np.float32
    assert np.isnan(out[0, 0]) and np.isnan(out[1, 1])
    assert not grid.valid[0, 0] and grid.valid[2, 2]
    assert grid.dx_m == 5.0 and grid.dy_m == 5.0
    assert path.read_bytes() == before  # inputs are never modified


def test_rectangular_cells(tmp_path):
    t = Affine(2.0, 0, 500000.0, 0, -3.0, 5100000.0)
    _, grid = read_dem(write_tif(tmp_path / "d.tif", tilted_plane(), transform=t))
    assert (grid.dx_m, grid.dy_m) == (2.0, 3.0)


def test_foot_crs_converted(tmp_path):
    # EPSG:2227 (California zone 3) is in US survey feet (EPSG registry).
    z = np.full((5, 5), 1000.0, dtype=np.float32)
    t = from_origin(6000000.0, 2000000.0, 3.0, 3.0)
    out, grid = read_dem(write_tif(tmp_path / "d.tif", z, crs="EPSG:2227", transform=t))
    us_ft = 1200.0 / 3937.0  # definition of the US survey foot
    assert grid.dx_m == pytest.approx(3.0 * us_ft, rel=1e-9)
    assert out[2, 2] == pytest.approx(1000.0 * us_ft, rel=1e-6)
    # an explicit vertical unit overrides the CRS unit
    out_m, _ = read_dem(tmp_path / "d.tif", vertical_unit_m=1.0)
    assert out_m[2, 2] == pytest.approx(1000.0)


@pytest.mark.parametrize("crs", ["EPSG:4326", None])
def test_geographic_or_missing_crs_refused(tmp_path, crs):
    t = from_origin(10.0, 45.0, 0.0001, 0.0001)
    path = write_tif(tmp_path / "d.tif", tilted_plane(), crs=crs, transform=t)
    with pytest.raises(RasterError, match="CRS") as info:
        read_dem(path)
    assert "d.tif" in str(info.value)


def test_rotated_transform_refused(tmp_path):
    t = Affine(5.0, 0.5, 500000.0, 0.5, -5.0, 5100000.0)
    with pytest.raises(RasterError, match="rotated"):
        read_dem(write_tif(tmp_path / "d.tif", tilted_plane(), transform=t))


def test_all_nodata_refused(tmp_path):
    z = np.full((5, 5), -9999.0, dtype=np.float32)
    with pytest.raises(RasterError, match="every cell is nodata"):
        read_dem(write_tif(tmp_path / "d.tif", z))
    z[:] = np.nan
    with pytest.raises(RasterError, match="every cell is nodata"):
        read_dem(write_tif(tmp_path / "n.tif", z, nodata=None))


def test_too_small_refused(tmp_path):
    with pytest.raises(RasterError, match="3x3"):
        read_dem(write_tif(tmp_path / "d.tif", np.ones((2, 5), dtype=np.float32)))


def test_not_a_raster(tmp_path):
    p = tmp_path / "d.tif"
    p.write_text("this is not a GeoTIFF")
    with pytest.raises(RasterError, match="cannot be read as a raster"):
        read_dem(p)


def test_write_round_trip(tmp_path):
    z = tilted_plane()
    _, grid = read_dem(write_tif(tmp_path / "d.tif", z))
    values = np.linspace(0, 1, z.size, dtype=np.float32).reshape(z.shape)
    values[3, 3] = np.nan
    out = write_raster(tmp_path / "p.tif", values, grid, description="test band", units="1",
                       caution="screening only")
    back, tags = read_back(out)
    assert np.isnan(back[3, 3])
    np.testing.assert_array_equal(back[np.isfinite(back)], values[np.isfinite(back)])
    assert tags["CAUTION"] == "screening only" and tags["band_units"] == "1"
    assert tags["description"] == "test band"
    with rasterio.open(out) as src:
        assert src.nodata == float(NODATA) and src.dtypes[0] == "float32"
        assert src.profile["tiled"] and src.compression is not None
        assert src.crs == grid.crs and src.transform == grid.transform
    assert not list(tmp_path.glob(".*partial"))


def test_write_refuses_wrong_shape(tmp_path):
    _, grid = read_dem(write_tif(tmp_path / "d.tif", tilted_plane()))
    with pytest.raises(ValueError, match="shape"):
        write_raster(tmp_path / "p.tif", np.zeros((3, 3)), grid, description="x", units="1",
                     caution="c")
    assert not (tmp_path / "p.tif").exists()


def test_codes_on_another_grid_refused(tmp_path):
    _, grid = read_dem(write_tif(tmp_path / "d.tif", tilted_plane()))
    codes = write_tif(tmp_path / "soil.tif", np.ones((10, 10), dtype=np.int16), nodata=0)
    with pytest.raises(RasterError, match="soil.tif.*d.tif"):
        read_codes(codes, grid, name="soil map")
    codes = write_tif(tmp_path / "soil2.tif", np.ones(tilted_plane().shape, dtype=np.int16),
                      nodata=0, transform=from_origin(500001.0, 5100000.0, 5.0, 5.0))
    with pytest.raises(RasterError, match="transform"):
        read_codes(codes, grid, name="soil map")


def test_undeclared_float_sentinel_is_nodata(tmp_path):
    # -3.4028235e38 is the lowest float32 (IEEE 754), often left as undeclared nodata
    from slopescreen.errors import InputWarning

    z = tilted_plane()
    z[0, :] = np.finfo(np.float32).min
    path = write_tif(tmp_path / "d.tif", z, nodata=None)
    with pytest.warns(InputWarning, match="nodata"):
        out, grid = read_dem(path)
    assert not grid.valid[0].any() and grid.valid[1:].all()


def test_unusual_elevations_warn(tmp_path):
    from slopescreen.errors import InputWarning

    z = tilted_plane()
    z[5, 5] = -700.0  # below any land surface, but not impossible
    with pytest.warns(InputWarning, match="check the nodata value"):
        read_dem(write_tif(tmp_path / "d.tif", z, nodata=None))


@pytest.mark.parametrize("bad", [-9999.0, 1.0e30, 3.4e38])
def test_an_undeclared_nodata_value_is_refused_naming_the_file(tmp_path, bad):
    # found by fuzzing: such DEMs passed check and failed mid-run naming neither file nor key
    from slopescreen.errors import RasterError

    z = tilted_plane()
    z[5, 5] = bad
    with pytest.raises(RasterError, match=r"d\.tif: elevation .* outside the plausible range "
                                          r".*declare it in the file"):
        read_dem(write_tif(tmp_path / "d.tif", z, nodata=None))
