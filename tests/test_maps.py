"""Maps: hillshade, factor-of-safety bands, colours, scale bar, north arrow and the rendered PNG.

Outside references: Lambert's cosine law on planes (the shade is the dot product of the
unit surface normal and the unit light vector, handbook geometry); matplotlib's own
LightSource hillshade on the USGS DEM that matplotlib ships (reference library);
CIELAB lightness computed by scikit-image (reference library); the screening bands of
common practice (FS below 1, 1-1.3, 1.3-1.5, 1.5 and above); the 1-2-5 series of
cartographic scale bars; exact geometry for cluster outlines.
"""

import io
import math

import numpy as np
import pytest
from matplotlib import cbook
from matplotlib.colors import LightSource, to_rgb
from PIL import Image
from rasterio.crs import CRS
from rasterio.transform import from_origin

from slopescreen.errors import InputError
from slopescreen.grid import Grid
from slopescreen.report import maps
from slopescreen.report.map_layers import _outline_segments
from slopescreen.report.cautions import SHORT


def plane(rows, cols, cell, gx, gy):
    """z = gx * east + gy * north on a grid with row 0 north (metres)."""
    east = np.arange(cols) * cell
    north = -np.arange(rows) * cell
    return (gx * east[None, :] + gy * north[:, None] + 100.0).astype(np.float64)


def lambert(gx, gy, azimuth_deg, altitude_deg):
    """Unit normal of z = gx x + gy y dotted with the unit vector toward the light."""
    n = np.array([-gx, -gy, 1.0]) / math.sqrt(gx * gx + gy * gy + 1.0)
    az, alt = math.radians(azimuth_deg), math.radians(altitude_deg)
    light = np.array([math.sin(az) * math.cos(alt), math.cos(az) * math.cos(alt), math.sin(alt)])
    return max(0.0, float(n @ light))


@pytest.mark.parametrize("gx, gy", [(0.0, 0.0), (0.5, 0.0), (0.0, -0.7), (0.3, 0.4), (-0.8, 0.25),
                                    (1.5, -1.0)])
@pytest.mark.parametrize("azimuth, altitude", [(315.0, 45.0), (90.0, 30.0), (200.0, 60.0)])
def test_hillshade_plane_matches_lambert(gx, gy, azimuth, altitude):
    z = plane(7, 9, 5.0, gx, gy)
    shade = maps.hillshade(z, 5.0, 5.0, azimuth_deg=azimuth, altitude_deg=altitude)
    assert shade.dtype == np.float32
    # interior cells (Horn's differences are exact on planes; handbook Lambert law)
    np.testing.assert_allclose(shade[1:-1, 1:-1], lambert(gx, gy, azimuth, altitude), atol=2e-6)


def test_hillshade_flat_is_sine_of_altitude():
    # flat ground: cos(zenith) = sin(altitude), whatever the azimuth
    for alt in (10.0, 45.0, 90.0):
        s = maps.hillshade(np.zeros((5, 5)), 2.0, 2.0, altitude_deg=alt)
        np.testing.assert_allclose(s, math.sin(math.radians(alt)), atol=1e-6)


def test_hillshade_agrees_with_matplotlib_lightsource_on_usgs_dem():
    # reference library: matplotlib.colors.LightSource.hillshade (central differences,
    # contrast-stretched) on the USGS Jacksboro DEM; we compare the pattern (correlation)
    data = cbook.get_sample_data("jacksboro_fault_dem.npz")
    z = data["elevation"].astype(np.float64)
    dy = float(data["dy"]) * 111320.0
    dx = float(data["dx"]) * 111320.0 * math.cos(math.radians(36.6))
    ref = LightSource(azdeg=315, altdeg=45).hillshade(z, vert_exag=1, dx=dx, dy=dy, fraction=1.0)
    ours = maps.hillshade(z, dx, dy).astype(np.float64)
    inner = (slice(2, -2), slice(2, -2))
    r = np.corrcoef(ours[inner].ravel(), ref[inner].ravel())[0, 1]
    assert r > 0.99, r


def test_hillshade_keeps_nodata_and_input():
    z = plane(6, 6, 3.0, 0.2, 0.1).astype(np.float32)
    z[2, 3] = np.nan
    before = z.copy()
    s = maps.hillshade(z, 3.0, 3.0)
    assert np.isnan(s[2, 3]) and np.isfinite(s[0, 0])
    np.testing.assert_array_equal(z, before)  # input never modified
    assert np.nanmin(s) >= 0.0 and np.nanmax(s) <= 1.0


@pytest.mark.parametrize("kw", [dict(altitude_deg=0.0), dict(altitude_deg=95.0),
                                dict(azimuth_deg=float("nan"))])
def test_hillshade_rejects_bad_light(kw):
    with pytest.raises(InputError):
        maps.hillshade(np.zeros((4, 4)), 1.0, 1.0, **kw)


def test_fs_bands_of_common_practice():
    # bands of common screening practice: < 1, 1-1.3, 1.3-1.5, >= 1.5; a lower bound belongs to its band
    fs = [0.0, 0.999, 1.0, 1.2999, 1.3, 1.4999, 1.5, 100.0, np.nan]
    assert maps.fs_band(fs).tolist() == [0, 0, 1, 1, 2, 2, 3, 3, -1]
    assert [b[0] for b in maps.FS_BANDS] == [1.0, 1.3, 1.5, math.inf]


def _lightness(hex_colours):
    from skimage.color import rgb2lab

    rgb = np.array([[to_rgb(c) for c in hex_colours]])
    return rgb2lab(rgb)[0, :, 0]


def test_fs_band_colours_separate_in_lightness():
    # CIELAB L* (scikit-image): the coloured bands must be ordered dark (unstable) to light,
    # at least 15 L* apart, so the order survives colour-vision deficiency and greyscale print
    colours = [c for _, _, c in maps.FS_BANDS if c is not None]
    L = _lightness(colours)
    assert np.all(np.diff(L) >= 15.0), L


@pytest.mark.parametrize("key", sorted(k for k, s in maps.STYLES.items()
                                        if s.kind not in ("bands", "bound")))
def test_ramps_are_monotonic_in_lightness(key):
    style = maps.STYLES[key]
    cmap = style.cmap()
    rgb = cmap(np.linspace(0.0, 1.0, 64))[:, :3]
    from skimage.color import rgb2lab

    L = rgb2lab(rgb[None, :, :])[0, :, 0]
    step = np.diff(L)
    assert np.all(step < 0) or np.all(step > 0), key
    assert abs(L[-1] - L[0]) > 60.0


@pytest.mark.parametrize("value, expected", [(560.0, 500.0), (1999.0, 1000.0), (7.3, 5.0),
                                             (2.0, 2.0), (0.34, 0.2), (10_000.0, 10_000.0)])
def test_nice_length_follows_1_2_5(value, expected):
    assert maps.nice_length(value) == pytest.approx(expected)


def test_nice_length_rejects_nonpositive():
    with pytest.raises(InputError):
        maps.nice_length(0.0)


def _grid(rows=40, cols=60, cell=5.0, crs="EPSG:32633"):
    return Grid(shape=(rows, cols), transform=from_origin(500000.0, 5100000.0, cell, cell),
                crs=CRS.from_string(crs), dx_m=cell, dy_m=cell, valid=np.ones((rows, cols), bool),
                path=None)


def test_scale_bar_length_in_metres_and_feet():
    from matplotlib.figure import Figure

    for unit_m in (1.0, 0.3048):
        frame = maps.MapFrame((0.0, 3000.0, 0.0, 2000.0), linear_unit_m=unit_m)
        ax = Figure().add_subplot()
        length_m, segs = maps.add_scale_bar(ax, frame)
        # 22 % of the ground width, rounded down to the 1-2-5 series
        assert length_m == maps.nice_length(0.22 * 3000.0 * unit_m)
        drawn = sum(s.get_width() for s in segs)          # CRS units
        assert drawn * unit_m == pytest.approx(length_m)


def _png(fig):
    return Image.open(io.BytesIO(maps.png_bytes(fig))).convert("RGB")


def _pixel(fig, img, x, y):
    px, py = fig.map_ax.transData.transform((x, y))
    return np.array(img.getpixel((int(round(px)), int(round(img.height - py))))) / 255.0


def test_fs_map_pixels_show_the_band_colour_over_the_hillshade():
    grid = _grid()
    frame = maps.MapFrame.from_grid(grid)
    fs = np.full(grid.shape, 2.0)
    fs[:, :30] = 0.8                                        # west half unstable
    flat = np.zeros(grid.shape)
    shade = maps.hillshade(flat, 5.0, 5.0)                   # sin(45 deg) everywhere
    fig = maps.map_figure(fs, "factor_of_safety", frame=frame, shade=shade, title="FS",
                          rain_text="test case")
    img = _png(fig)
    grey = 0.35 + 0.65 * math.sin(math.radians(45.0))       # displayed hillshade
    band = np.array(to_rgb(maps.FS_BANDS[0][2]))
    expected_west = 0.88 * band + 0.12 * grey                 # alpha-blended band colour
    x0, _, y0, _ = frame.extent
    west = _pixel(fig, img, x0 + 60.0, y0 + 100.0)
    east = _pixel(fig, img, x0 + 240.0, y0 + 100.0)
    np.testing.assert_allclose(west, expected_west, atol=0.02)
    np.testing.assert_allclose(east, grey, atol=0.02)         # stable band is not coloured


def test_map_carries_legend_scale_north_crs_rain_and_caution():
    grid = _grid()
    fig = maps.map_figure(np.full(grid.shape, 0.3), "failure_probability",
                          frame=maps.MapFrame.from_grid(grid), title="P", rain_text="wet season")
    texts = [t.get_text() for t in fig.texts] + [t.get_text() for t in fig.map_ax.texts]
    joined = "\n".join(texts)
    assert "N" in texts                                      # north arrow
    assert any(t.endswith(" m") or t.endswith(" km") for t in texts)   # scale bar label
    assert "EPSG:32633" in joined and "UTM zone 33N" in joined
    assert "Rain case: wet season" in joined
    assert " ".join(SHORT.split()) in " ".join(joined.split())
    labels = [ax.get_ylabel() for ax in fig.axes]
    assert any("P(FS < 1)" in lab for lab in labels)         # colour bar with units


def test_user_text_is_drawn_literally():
    # titles with dollar signs must not be parsed as mathtext (regression: a title with two
    # dollar signs would otherwise render as math or fail to draw)
    grid = _grid()
    title = "Cost $5 and $x$ <script>alert('x')</script> & \"q\""
    fig = maps.map_figure(np.ones(grid.shape), "slope", frame=maps.MapFrame.from_grid(grid),
                          title=title, subtitle=title, rain_text=title)
    img = _png(fig)
    assert img.width > 500
    assert title in [t.get_text() for t in fig.texts]


def test_cluster_outlines_trace_the_perimeter():
    # exact geometry: one 2 x 3 cluster of 5 m cells has a 2 * (10 + 15) = 50 m perimeter,
    # and two touching clusters share their common edge once
    lab = np.zeros((6, 7), dtype=int)
    lab[1:3, 2:5] = 1
    segs = _outline_segments(lab, (0.0, 35.0, 0.0, 30.0))
    length = np.hypot(*(segs[:, 1] - segs[:, 0]).T).sum()
    assert length == pytest.approx(50.0)
    lab[3:5, 2:5] = 2                                        # a second cluster below, touching
    segs = _outline_segments(lab, (0.0, 35.0, 0.0, 30.0))
    length = np.hypot(*(segs[:, 1] - segs[:, 0]).T).sum()
    assert length == pytest.approx(50.0 + 50.0 - 15.0)


def test_recharge_map_marks_classes_and_rain_rates():
    grid = _grid()
    q = np.full(grid.shape, 20.0, dtype=np.float32)
    cls = np.full(grid.shape, 2, dtype=np.int16)
    q[:5], cls[:5] = np.nan, 1
    q[-5:], cls[-5:] = np.nan, 3
    fig = maps.map_figure(q, "critical_recharge", frame=maps.MapFrame.from_grid(grid), classes=cls,
                          rates=[("wet season", 12.0), ("dry spell", 3.0)], rain_text="none")
    legend_texts = [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    # the classes are the scenario's steady cases, wettest last (no fixed decade bins)
    assert "fails under dry spell (up to 3)" in legend_texts
    assert "fails under wet season (3-12), not dry spell" in legend_texts
    assert any(t.startswith("more than twice the wettest case") for t in legend_texts)
    assert any("fails even when dry" in t for t in legend_texts)
    assert any("stable even when saturated" in t for t in legend_texts)
    _png(fig)


def test_map_rejects_unknown_key_and_shape_mismatch():
    frame = maps.MapFrame((0.0, 1.0, 0.0, 1.0))
    with pytest.raises(InputError):
        maps.map_figure(np.ones((3, 3)), "no_such_product", frame=frame)
    with pytest.raises(InputError):
        maps.map_figure(np.ones((3, 3)), "slope", frame=frame, shade=np.ones((4, 4)))


def test_product_maps_decimate_large_grids_and_decode():
    rows, cols = 60, 90
    grid = _grid(rows, cols)
    z = plane(rows, cols, 5.0, 0.1, 0.3)
    fs = np.linspace(0.5, 2.0, rows * cols).reshape(rows, cols).astype(np.float32)
    fs[0, 0] = np.nan                                        # a cell with no value
    entries = [{"key": "factor_of_safety", "rain": "a", "path": "fs.tif", "kind": "raster", "units": "1"},
               {"key": "storm_flags", "rain": "a", "path": "f.tif", "kind": "raster", "units": "bit flags"}]
    seen = []

    def read(entry):
        seen.append(entry["path"])
        return fs

    out = maps.product_maps(entries, read, z=z, grid=grid, title="t", rain_texts={"a": "case a"},
                            max_pixels=40)
    assert [e["key"] for e, _ in out] == ["factor_of_safety"]     # only products with a style
    assert maps.display_step((rows, cols), 40) == 3
    img = Image.open(io.BytesIO(out[0][1]))
    img.verify()
    assert seen == ["fs.tif"]


def test_png_carries_the_caution_in_its_metadata():
    # PNG tEXt "Disclaimer" keyword (PNG specification): the caution travels with the file
    grid = _grid()
    fig = maps.map_figure(np.full(grid.shape, 1.2), "factor_of_safety", frame=maps.MapFrame.from_grid(grid))
    img = Image.open(io.BytesIO(maps.png_bytes(fig, title="FS: wet")))
    assert img.info["Disclaimer"] == SHORT and img.info["Title"] == "FS: wet"


def test_corridor_line_is_drawn_on_top():
    grid = _grid()
    frame = maps.MapFrame.from_grid(grid)
    x0, x1, y0, y1 = frame.extent
    fs = np.full(grid.shape, 0.5)                            # all unstable: dark wine below the line
    yline = (y0 + y1) / 2
    fig = maps.map_figure(fs, "factor_of_safety", frame=frame,
                          lines=[{"x": np.array([x0, x1]), "y": np.array([yline, yline]),
                                  "label": "road centreline"}])
    img = _png(fig)
    on_line = _pixel(fig, img, (x0 + x1) / 2, yline)
    np.testing.assert_allclose(on_line, np.array(to_rgb("#1b1b1b")), atol=0.03)
    legend = [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    assert "road centreline" in legend


def test_product_maps_draw_the_given_lines_on_every_map():
    # the same product with and without a centreline: the line's colour appears on the map
    grid = _grid()
    frame = maps.MapFrame.from_grid(grid)
    x0, x1, y0, y1 = frame.extent
    fs = np.full(grid.shape, 0.5, dtype=np.float32)
    entry = {"key": "factor_of_safety", "rain": "wet", "path": "fs.tif", "kind": "raster",
             "units": "1"}
    line = {"x": np.array([x0, x1]), "y": np.array([(y0 + y1) / 2] * 2), "label": "centreline",
            "colour": "#1b1b1b", "width": 2.0}
    z = np.zeros(grid.shape, dtype=np.float32)
    plain = maps.product_maps([entry], lambda e: fs, z=z, grid=grid)[0][1]
    drawn = maps.product_maps([entry], lambda e: fs, z=z, grid=grid, lines=[line])[0][1]
    dark = [np.sum(np.all(np.asarray(Image.open(io.BytesIO(png)).convert("RGB")) <= 40, axis=2))
            for png in (plain, drawn)]
    assert dark[1] > dark[0] + 100
