"""GIS-ready products: COG layout with overviews, colour tables, category names, SLD sidecars.

A run on a grid of 40 x 520 cells (longer side at least ``COG_MIN_SIDE``) whose slope grows
from west to east, so that every critical-recharge class occurs. The references are outside
the package:

* GDAL reading the files back through rasterio: the ``IMAGE_STRUCTURE`` metadata domain
  (``LAYOUT=COG`` is what GDAL's GeoTIFF driver reports for a file laid out as its COG driver
  lays it out; GDAL's COG validation script, ``validate_cloud_optimized_geotiff.py``, checks
  the same things: tiles, overviews, their order) and ``ds.overviews(1)``;
* GDAL's own ``GDALGetRasterCategoryNames``, called on the libgdal that rasterio loaded;
* the definition of GDAL's overview resampling (``AVERAGE``: the mean of the valid cells of
  each block; ``NEAREST``: one cell of the block);
* the standard library's XML parser for the SLD documents, and matplotlib's colour parsing
  and colour maps (what draws the report's maps);
* ``hashlib`` for the manifest's checksums.
"""

import ctypes
import hashlib
import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import rasterio
from matplotlib.colors import to_hex, to_rgb

from conftest import write_tif
from slopescreen import products
from slopescreen.cli import main
from slopescreen.grid import (
    COG_MIN_SIDE, CODE_NODATA, COUNT_NODATA, NODATA, Grid, overview_factors, write_raster,
)
from slopescreen.pipeline import staging
from slopescreen.report.cautions import SHORT
from slopescreen.report.styles import FS_BANDS, fs_band
from slopescreen.stability import CLASS_LABELS

SLD = "{http://www.opengis.net/sld}"
ROWS, COLS, CELL = 40, 520, 5.0

SCENARIO = """title = "gis"
dem = "dem.tif"
output = "out"

[soil]
[soil.units.1]
label = "colluvium"
depth_m = 1.0
cohesion_kpa = 3.0
friction_deg = { normal = [35.0, 2.0] }
unit_weight_kn_m3 = 18.0
conductivity_m_per_day = 2.0

[[rain]]
name = "wet season"
steady_mm_per_day = 40
"""


def dem():
    """Planes falling southward, the gradient growing from 0.02 in the west to 1.6 in the east."""
    gradient = np.linspace(0.02, 1.6, COLS)[None, :]
    rows = np.arange(ROWS)[:, None]
    return (800.0 - gradient * CELL * rows).astype(np.float32)


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("gis")
    write_tif(folder / "dem.tif", dem(), transform=rasterio.transform.from_origin(
        500000.0, 5100000.0, CELL, CELL))
    (folder / "s.toml").write_text(SCENARIO, encoding="utf-8")
    computed = {}
    real = staging.write_raster

    def recording(path, array, grid, **kw):
        computed[path.name] = (np.array(array, copy=True), grid)
        return real(path, array, grid, **kw)

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(staging, "write_raster", recording)
        assert main(["-q", "run", str(folder / "s.toml")]) == 0
    out = folder / "out"
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    return out, manifest, computed


def entries(manifest, kind):
    return [p for p in manifest["products"] if p["kind"] == kind]


def test_the_grid_is_large_enough_for_cog():
    assert max(ROWS, COLS) >= COG_MIN_SIDE
    assert overview_factors((ROWS, COLS)) == [2, 4]


def test_every_raster_is_a_cog_with_overviews_holding_the_computed_values(run):
    out, manifest, computed = run
    rasters = entries(manifest, "raster")
    assert {p["key"] for p in rasters} >= {"slope", "specific_catchment_area", "critical_recharge",
                                           "critical_recharge_class", "wetness",
                                           "factor_of_safety", "failure_probability"}
    assert {p["path"] for p in rasters} == set(computed)
    for p in rasters:
        entry = products.spec(p["key"])
        with rasterio.open(out / p["path"]) as src:
            structure = src.tags(ns="IMAGE_STRUCTURE")
            # GDAL: LAYOUT=COG, tiled 256 x 256, overviews present (the COG validation checks)
            assert structure["LAYOUT"] == "COG", p["path"]
            assert structure["COMPRESSION"] == "DEFLATE"
            assert structure["PREDICTOR"] == ("3" if entry.dtype == "float32" else "2")
            assert src.block_shapes == [(256, 256)]
            assert src.overviews(1) == [2, 4]
            assert src.descriptions[0] and src.tags(1)["units"] == entry.units
            assert src.tags()["CAUTION"] == SHORT
            assert src.tags()["OVERVIEW_RESAMPLING"] == entry.overview_resampling
            values = src.read(1)                       # full resolution
            nodata = src.nodata
        array, grid = computed[p["path"]]
        fill = {"float32": float(NODATA), "uint8": CODE_NODATA, "int32": COUNT_NODATA}[entry.dtype]
        assert nodata == fill
        keep = grid.valid & (np.isfinite(array) if array.dtype.kind == "f" else True)
        expected = np.where(keep, array, fill).astype(entry.dtype)
        assert values.dtype == np.dtype(entry.dtype)
        np.testing.assert_array_equal(values, expected, err_msg=p["path"])


def test_overviews_average_floats_and_copy_a_cell_of_classes(run):
    out, manifest, _ = run
    path = {p["key"]: out / p["path"] for p in entries(manifest, "raster")}
    with rasterio.open(path["slope"]) as src:
        full = src.read(1, masked=True).astype(np.float64).filled(np.nan)
        half = src.read(1, out_shape=(ROWS // 2, COLS // 2), masked=True)
    # GDAL AVERAGE: the mean of the valid cells of each 2 x 2 block
    blocks = full.reshape(ROWS // 2, 2, COLS // 2, 2)
    count = np.isfinite(blocks).sum(axis=(1, 3))
    total = np.nansum(blocks, axis=(1, 3))
    mean = np.divide(total, count, out=np.full(total.shape, np.nan), where=count > 0)
    np.testing.assert_allclose(half.filled(np.nan), mean, rtol=1e-6, equal_nan=True)
    with rasterio.open(path["critical_recharge_class"]) as src:
        full = src.read(1)
        half = src.read(1, out_shape=(ROWS // 2, COLS // 2))
    # GDAL NEAREST: each overview cell is one cell of its block, never a mean of classes
    picked = np.zeros(half.shape, dtype=bool)
    for i in (0, 1):
        for j in (0, 1):
            picked |= half == full[i::2, j::2]
    assert picked.all()
    assert set(np.unique(full)) == {1, 2, 3}             # every class occurs in the run


def test_the_class_raster_carries_the_colour_table_of_the_maps(run):
    out, manifest, _ = run
    [p] = [e for e in entries(manifest, "raster") if e["key"] == "critical_recharge_class"]
    with rasterio.open(out / p["path"]) as src:
        table = src.colormap(1)
    classes = products.spec("critical_recharge_class").classes
    assert {c: label for c, (label, _) in classes.items()} == CLASS_LABELS
    for code, (_label, colour) in classes.items():
        rgb = (255, 255, 255) if colour is None else tuple(round(255 * v) for v in to_rgb(colour))
        assert table[code][:3] == rgb, code
    # fails even when dry: the colour the maps give it (the lowest FS band)
    assert table[1][:3] == tuple(round(255 * v) for v in to_rgb(FS_BANDS[0][2]))


def _gdal():
    """The libgdal this process loaded through rasterio (read from /proc/self/maps)."""
    with open("/proc/self/maps", encoding="utf-8") as maps:
        paths = {line.split()[-1] for line in maps if "libgdal" in line.rsplit("/", 1)[-1]}
    assert paths, "rasterio's libgdal is not loaded"
    lib = ctypes.CDLL(sorted(paths)[0])
    lib.GDALOpenEx.restype = ctypes.c_void_p
    lib.GDALOpenEx.argtypes = [ctypes.c_char_p, ctypes.c_uint, ctypes.c_void_p, ctypes.c_void_p,
                               ctypes.c_void_p]
    lib.GDALGetRasterBand.restype = ctypes.c_void_p
    lib.GDALGetRasterBand.argtypes = [ctypes.c_void_p, ctypes.c_int]
    lib.GDALGetRasterCategoryNames.restype = ctypes.POINTER(ctypes.c_char_p)
    lib.GDALGetRasterCategoryNames.argtypes = [ctypes.c_void_p]
    lib.GDALGetGeoTransform.argtypes = [ctypes.c_void_p, ctypes.POINTER(ctypes.c_double)]
    lib.GDALClose.argtypes = [ctypes.c_void_p]
    lib.GDALAllRegister()
    return lib


def test_gdal_reads_the_category_names(run):
    out, manifest, _ = run
    [p] = [e for e in entries(manifest, "raster") if e["key"] == "critical_recharge_class"]
    [pam] = [e for e in entries(manifest, "pam") if e["key"] == "critical_recharge_class"]
    assert pam["path"] == p["path"] + ".aux.xml"
    lib = _gdal()
    ds = lib.GDALOpenEx(str(out / p["path"]).encode(), 0x02, None, None, None)  # GDAL_OF_RASTER
    assert ds
    try:
        # as a GIS opens a layer: the geotransform first (GDAL's GeoTIFF driver reads the
        # PAM sidecar on the first such request, not on GetCategoryNames alone)
        assert lib.GDALGetGeoTransform(ds, (ctypes.c_double * 6)()) == 0
        names = lib.GDALGetRasterCategoryNames(lib.GDALGetRasterBand(ds, 1))
        got = []
        while names and names[len(got)] is not None:
            got.append(names[len(got)].decode("utf-8"))
    finally:
        lib.GDALClose(ds)
    assert got == [CLASS_LABELS[c] for c in sorted(CLASS_LABELS)]


def _sld(path):
    root = ET.parse(path).getroot()
    assert root.tag == f"{SLD}StyledLayerDescriptor" and root.get("version") == "1.0.0"
    cmap = root.find(f".//{SLD}RasterSymbolizer/{SLD}ColorMap")
    return root, cmap, list(cmap.iter(f"{SLD}ColorMapEntry"))


def test_every_styled_raster_has_an_sld_with_the_labels_and_colours_of_its_style(run):
    out, manifest, _ = run
    slds = {(p["key"], p["rain"]): p for p in entries(manifest, "sld")}
    styled = [p for p in entries(manifest, "raster")
              if products.spec(p["key"]).style is not None or products.spec(p["key"]).classes]
    assert {(p["key"], p["rain"]) for p in styled} == set(slds)
    for p in styled:
        entry, side = products.spec(p["key"]), slds[(p["key"], p["rain"])]
        assert side["path"] == p["path"][:-len(".tif")] + ".sld"
        root, cmap, items = _sld(out / side["path"])
        assert root.findtext(f".//{SLD}NamedLayer/{SLD}Name") == side["path"][:-len(".sld")]
        assert root.findtext(f".//{SLD}UserStyle/{SLD}Abstract") == SHORT
        assert "licensed geotechnical engineers" in SHORT
        labels = [e.get("label") for e in items]
        if entry.classes:
            assert cmap.get("type") == "values"
            assert labels == [CLASS_LABELS[c] for c in sorted(CLASS_LABELS)]
            for e in items:
                label, colour = entry.classes[int(e.get("quantity"))]
                assert float(e.get("opacity")) == (0.0 if colour is None else 1.0)
                if colour is not None:
                    assert e.get("color") == to_hex(colour)
        elif entry.style.kind == "bands":
            assert cmap.get("type") == "intervals"
            for _upper, label, _colour in FS_BANDS:
                assert " ".join(label.split()) in labels
        else:
            assert cmap.get("type") == "ramp"
            style = entry.style
            assert root.findtext(f".//{SLD}Rule/{SLD}Title") == " ".join(style.label.split())
            coloured = [e for e in items if float(e.get("opacity")) > 0]
            quantities = [float(e.get("quantity")) for e in coloured]
            assert quantities == sorted(quantities) and len(quantities) >= 6
            assert quantities[-1] == pytest.approx(style.vmax)
            if style.log:     # log ramps: stops evenly spaced in log10
                steps = np.diff(np.log10(quantities[1 if style.transparent_below else 0:]))
                np.testing.assert_allclose(steps, steps[0], rtol=2e-3)
            cmap_, norm = style.cmap(), style.norm()   # matplotlib, as the maps draw it
            for e, q in zip(coloured, quantities):
                assert e.get("color") == to_hex(cmap_(norm(q))), (p["path"], q)


def test_sld_intervals_put_each_value_in_its_fs_band(run):
    out, manifest, _ = run
    [side] = [p for p in entries(manifest, "sld") if p["key"] == "factor_of_safety"]
    _, cmap, items = _sld(out / side["path"])
    bounds = [(float(e.get("quantity")), e.get("label")) for e in items]
    for fs in (0.2, 0.999, 1.0, 1.29, 1.3, 1.49, 1.5, 99.0):
        # SLD intervals: a value takes the first entry whose quantity lies above it
        label = next(lab for q, lab in bounds if fs < q)
        assert label == " ".join(FS_BANDS[fs_band([fs])[0]][1].split()), fs
    assert next(lab for q, lab in bounds if float(NODATA) < q) == "nodata"


def test_the_manifest_lists_every_file_with_its_sha256(run):
    out, manifest, _ = run
    listed = {p["path"] for p in manifest["products"]}
    on_disk = {f.name for f in out.iterdir() if not f.name.startswith(".")} - {"manifest.json"}
    assert listed == on_disk
    hashes = manifest["product_sha256"]
    for p in entries(manifest, "sld") + entries(manifest, "pam"):
        assert hashes[p["path"]] == hashlib.sha256((out / p["path"]).read_bytes()).hexdigest()
        assert p["units"] == products.spec(p["key"]).units


def test_a_small_grid_stays_a_plain_tiled_geotiff_with_its_colour_table(tmp_path):
    grid = Grid.regular((30, 40), west=500000.0, north=5100000.0, cell_m=5.0)
    codes = np.tile(np.array([1, 2, 3], dtype=np.uint8), (30, 14))[:, :40]
    classes = products.spec("critical_recharge_class").classes
    write_raster(tmp_path / "c.tif", codes, grid, description="c", units="class", caution=SHORT,
                 classes=classes)
    with rasterio.open(tmp_path / "c.tif") as src:
        assert src.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") != "COG"
        assert src.overviews(1) == [] and src.block_shapes == [(256, 256)]
        assert src.colormap(1)[1][:3] == tuple(round(255 * v) for v in to_rgb(FS_BANDS[0][2]))
        np.testing.assert_array_equal(src.read(1), codes)
    assert sorted(f.name for f in tmp_path.iterdir()) == ["c.tif"]   # no temporary left


def test_write_raster_refuses_a_colour_table_on_a_float_band(tmp_path):
    grid = Grid.regular((3, 3), west=0.0, north=30.0, cell_m=10.0)
    with pytest.raises(ValueError, match="uint8"):
        write_raster(tmp_path / "f.tif", np.zeros((3, 3), np.float32), grid, description="f",
                     units="1", caution="c", classes={1: ("one", "#000000")})
    with pytest.raises(ValueError, match="resampling"):
        write_raster(tmp_path / "f.tif", np.zeros((3, 3), np.float32), grid, description="f",
                     units="1", caution="c", resampling="cubic")
