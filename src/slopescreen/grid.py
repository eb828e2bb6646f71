"""Raster input and output: the only module that opens GeoTIFF files.

A :class:`Grid` carries everything a stage needs to know about the DEM grid:
shape, affine transform, CRS, cell size in metres and the valid mask. Every
product is written on that grid, tiled and compressed, float32 with a nodata
value, a band description, units and the screening caution in its metadata.
Writes go to a temporary name beside the target and are renamed when
complete, so a reader never sees half a file.

Grids of :data:`COG_MIN_SIDE` cells or more on their longer side are written
as Cloud-Optimized GeoTIFF (COG) with internal overviews: the tiles are
written one row at a time into an uncompressed tiled file, the overviews are
built on it (GDAL reads it by blocks), and GDAL's COG driver copies it, with
those overviews, into the compressed product. Memory stays bounded by GDAL's
block cache, held at :data:`WRITE_CACHE_MB` during the write, whatever the
grid's size (docs/performance.md, "GIS-ready rasters"). A class band may carry a colour table; its category names go into
a GDAL PAM sidecar (:func:`category_names_xml`), the only place GDAL's GeoTIFF
driver keeps them.
"""

from __future__ import annotations

import logging
import os
import warnings
from dataclasses import dataclass
from pathlib import Path
from xml.sax.saxutils import escape

import numpy as np
import rasterio
import rasterio.shutil
from rasterio.enums import Resampling
from rasterio.errors import RasterioIOError
from rasterio.crs import CRS
from rasterio.transform import Affine
from rasterio.windows import Window

from .errors import InputWarning, RasterError

log = logging.getLogger(__name__)

NODATA = np.float32(-9999.0)
"""Nodata value written in float32 products (NaN inside the package)."""

CODE_NODATA = 0
"""Nodata value of uint8 class bands (class 0 means 'no data')."""

BLOCK = 256
"""Tile size of every product; products are written one row of tiles at a time."""

DEFLATE_LEVEL = 1
"""Deflate level of the products. With the predictors (floating-point for float bands,
horizontal for class bands) level 1 makes files about 2 % larger than GDAL's default level 6
and writes them more than twice as fast (measured in benchmarks/bench_run.py; see
docs/performance.md); every GIS that reads deflate reads them."""

COUNT_NODATA = -1
"""Nodata value of int32 count bands (a count is never negative)."""

COG_MIN_SIDE = 2 * BLOCK
"""Grids this many cells or more on their longer side are written as COG with overviews
(at least one overview level then exists); smaller grids are one or two tiles across and
stay plain tiled GeoTIFFs."""

WRITE_CACHE_MB = 64
"""GDAL block cache (MB) while a product is written. The overviews and the COG copy read
every block of the intermediate file again; with GDAL's default cache (5 % of the RAM) its
blocks would stay resident, about 1.5 times the raster's size (measured in
benchmarks/bench_cog.py; docs/performance.md, "GIS-ready rasters")."""

OVERVIEW_RESAMPLING = ("average", "nearest")
"""How overviews may be computed: the mean of the valid cells (measured values) or one
cell's value (classes, ids, counts and flags, whose mean would be no class at all)."""

_FOOT = 0.3048
_US_SURVEY_FOOT = 1200.0 / 3937.0


@dataclass(frozen=True)
class Grid:
    """The DEM grid: geometry, CRS and valid mask.

    Attributes
    ----------
    shape : tuple of int
        (rows, cols).
    transform : affine.Affine
        Pixel-to-map transform of the DEM (north-up, not rotated).
    crs : rasterio.crs.CRS
        Projected CRS of the DEM.
    dx_m, dy_m : float
        Cell width and height in metres (positive).
    valid : numpy.ndarray of bool
        Cells with data. Everything outside it is nodata in every product.
    path : pathlib.Path
        The file the grid was read from.
    linear_unit_m : float
        Size of the CRS linear unit in metres (1 for metre CRSs).
    """

    shape: tuple
    transform: Affine
    crs: CRS
    dx_m: float
    dy_m: float
    valid: np.ndarray
    path: Path
    linear_unit_m: float = 1.0

    @property
    def cell_area_m2(self) -> float:
        """Plan area of one cell, m^2."""
        return self.dx_m * self.dy_m

    @classmethod
    def regular(cls, shape, *, west: float, north: float, cell_m: float, crs="EPSG:32633",
                valid=None) -> "Grid":
        """A north-up grid of square cells in a metre CRS, built in memory (no file).

        For notebooks, tests and examples; a run reads its grid from the DEM.

        Examples
        --------
        >>> g = Grid.regular((3, 4), west=0.0, north=30.0, cell_m=10.0)
        >>> g.shape, g.cell_area_m2, g.transform * (4, 3)
        ((3, 4), 100.0, (40.0, 0.0))
        """
        from rasterio.transform import from_origin

        shape = tuple(int(n) for n in shape)
        mask = np.ones(shape, dtype=bool) if valid is None else np.asarray(valid, dtype=bool)
        return cls(shape, from_origin(west, north, cell_m, cell_m), CRS.from_user_input(crs),
                   float(cell_m), float(cell_m), mask, Path("memory"))


def _linear_unit_in_metres(crs: CRS, path: Path) -> float:
    """Size in metres of the CRS linear unit; refuse geographic or unitless CRSs."""
    if crs is None:
        raise RasterError(f"{path.name}: CRS: the raster has no coordinate reference system; "
                          "assign its projected CRS (in metres or feet) before the run")
    if crs.is_geographic:
        raise RasterError(f"{path.name}: CRS: {crs.to_string()} is geographic (degrees); reproject "
                          "the DEM to a projected CRS in metres (for example the local UTM zone)")
    if not crs.is_projected:
        raise RasterError(f"{path.name}: CRS: {crs.to_string()} is not a projected CRS; "
                          "reproject the DEM to a projected CRS in metres")
    try:
        name, factor = crs.linear_units_factor
    except Exception:  # rasterio raises CRSError for CRSs without linear units
        raise RasterError(f"{path.name}: CRS: its linear unit is unknown; use a projected CRS "
                          "in metres or feet") from None
    if not factor or not np.isfinite(factor) or factor <= 0:
        raise RasterError(f"{path.name}: CRS: linear unit {name!r} has no size in metres")
    return float(factor)


def read_dem(path, *, vertical_unit_m: float | None = None) -> tuple[np.ndarray, Grid]:
    """Read a DEM GeoTIFF into float32 metres with NaN as nodata.

    Parameters
    ----------
    path : str or os.PathLike
        Single-band raster in a projected CRS (metre or foot linear unit).
    vertical_unit_m : float, optional
        Size of the elevation unit in metres. Default: the CRS linear unit
        (a DEM in a foot CRS is taken to hold elevations in the same feet).

    Returns
    -------
    z : numpy.ndarray of float32, shape (rows, cols)
        Elevations in metres; NaN where nodata.
    grid : Grid

    Raises
    ------
    RasterError
        Missing or unreadable file, geographic or missing CRS, rotated or
        sheared transform, grid smaller than 3x3, or no valid cell.
    """
    path = Path(path)
    if not path.is_file():
        raise RasterError(f"{path}: DEM file not found")
    try:
        with rasterio.open(path) as src:
            if src.count < 1:
                raise RasterError(f"{path.name}: holds no raster band")
            if src.count > 1:
                log.info("%s has %d bands; band 1 is used as the DEM", path.name, src.count)
            unit = _linear_unit_in_metres(src.crs, path)
            t = src.transform
            if t.b != 0 or t.d != 0:
                raise RasterError(f"{path.name}: transform: the grid is rotated or sheared; "
                                  "resample it to a north-up grid first")
            if t.a <= 0 or t.e >= 0:
                raise RasterError(f"{path.name}: transform: the grid is not north-up (pixel size "
                                  f"{t.a:g}, {t.e:g}); write it north-up (positive x step, negative y step)")
            if src.height < 3 or src.width < 3:
                raise RasterError(f"{path.name}: grid is {src.height}x{src.width} cells; at least 3x3 is needed")
            band = src.read(1, masked=True)
            crs, transform = src.crs, src.transform
    except RasterioIOError as exc:
        raise RasterError(f"{path.name}: cannot be read as a raster ({_short(exc)})") from None
    z = np.ma.filled(band.astype(np.float32), np.nan)
    z[~np.isfinite(z)] = np.nan
    sentinel = z < -1.0e30  # float32 lowest, a common undeclared nodata value
    if sentinel.any():
        warnings.warn(f"{path.name}: {int(sentinel.sum())} cells hold about -3.4e38 but no nodata value "
                      "is declared; they are taken as nodata (declare the nodata value in the file)",
                      InputWarning, stacklevel=2)
        z[sentinel] = np.nan
    valid = np.isfinite(z)
    if not valid.any():
        raise RasterError(f"{path.name}: every cell is nodata; nothing to compute")
    vunit = unit if vertical_unit_m is None else float(vertical_unit_m)
    low, high = float(np.nanmin(z)), float(np.nanmax(z))
    low_m, high_m = low * vunit, high * vunit
    if low_m < ELEVATION_RANGE_M[0] or high_m > ELEVATION_RANGE_M[1]:
        bad = low if low_m < ELEVATION_RANGE_M[0] else high
        raise RasterError(
            f"{path.name}: elevation {bad:g} (file units, {bad * vunit:g} m) lies outside the "
            f"plausible range {ELEVATION_RANGE_M[0]:,.0f} to {ELEVATION_RANGE_M[1]:,.0f} m: "
            "probably a nodata value the file does not declare; declare it in the file (for "
            "example gdal_edit.py -a_nodata VALUE dem.tif) or check dem_vertical_unit")
    if low_m < -500.0 or high_m > 9000.0:
        warnings.warn(f"{path.name}: elevations range from {low:g} to {high:g} (file units); "
                      "check the nodata value and the vertical unit", InputWarning, stacklevel=2)
    if vunit != 1.0:
        z *= np.float32(vunit)
    if abs(unit - 1.0) > 1e-12:
        log.info("%s: linear unit is %.6g m; cell sizes converted to metres", path.name, unit)
    grid = Grid(shape=z.shape, transform=transform, crs=crs, dx_m=abs(transform.a) * unit,
                dy_m=abs(transform.e) * unit, valid=valid, path=path, linear_unit_m=unit)
    return z, grid


ELEVATION_RANGE_M = (-1000.0, 10000.0)
"""Elevations outside this range (m) are refused: an undeclared nodata value, not ground."""

NO_CODE = -(2**31)
"""Code of the cells of a code raster that hold none (no unit can have it)."""


def read_codes(path, grid: Grid, *, name: str) -> np.ndarray:
    """Read an integer code raster (e.g. soil units) that must lie on the DEM grid.

    Parameters
    ----------
    path : path-like
        Single-band integer raster.
    grid : Grid
        The DEM grid it must match (shape, transform, CRS).
    name : str
        What the raster is, for messages (e.g. ``"soil map"``).

    Returns
    -------
    codes : numpy.ndarray of int64
        Codes (any sign); :data:`NO_CODE` where the raster is nodata.
    has_code : numpy.ndarray of bool
        True where the raster holds a code.

    Raises
    ------
    RasterError
        Unreadable, another grid or CRS, non-integer values, infinite values,
        or codes outside the 32-bit range (NaN in a float raster is taken as
        no code).
    """
    path = Path(path)
    try:
        with rasterio.open(path) as src:
            if (src.height, src.width) != grid.shape:
                raise RasterError(f"{path.name}: {name} grid is {src.height}x{src.width} but the DEM "
                                  f"{grid.path.name} is {grid.shape[0]}x{grid.shape[1]}; put both on one grid")
            if not np.allclose(tuple(src.transform)[:6], tuple(grid.transform)[:6], rtol=0,
                               atol=1e-6 * max(abs(grid.transform.a), 1e-9)):
                raise RasterError(f"{path.name}: {name} transform differs from the DEM "
                                  f"{grid.path.name}; put both on one grid")
            if src.crs is None or src.crs != grid.crs:
                raise RasterError(f"{path.name}: {name} CRS differs from the DEM {grid.path.name}; "
                                  "put both on one grid and CRS")
            band = src.read(1, masked=True)
    except RasterioIOError as exc:
        raise RasterError(f"{path.name}: cannot be read as a raster ({_short(exc)})") from None
    data = np.ma.filled(band.astype(np.float64), np.nan)
    if np.isinf(data).any():
        raise RasterError(f"{path.name}: {name} holds infinite values; it must hold whole-number "
                          "codes (declare the raster's nodata value for cells without one)")
    finite = np.isfinite(data)
    if np.any(finite & (data != np.round(data))):
        raise RasterError(f"{path.name}: {name} holds non-integer values; it must hold unit codes")
    if np.any(finite & ((data <= NO_CODE) | (data >= 2**31))):
        raise RasterError(f"{path.name}: {name} holds codes outside the 32-bit range "
                          f"({NO_CODE + 1} to {2**31 - 1})")
    codes = np.where(finite, data, NO_CODE).astype(np.int64)
    return codes, finite


def _short(exc) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text if len(text) < 160 else text[:157] + "..."


def overview_factors(shape, block: int = BLOCK) -> list[int]:
    """Decimation factors of the overviews of a grid: 2, 4, 8, ... until one tile holds it.

    The last level is the first whose longer side fits in one ``block``-cell
    tile (GDAL's COG driver stops at the same level for its own overviews).

    Examples
    --------
    >>> overview_factors((4000, 3000)), overview_factors((512, 100)), overview_factors((256, 256))
    ([2, 4, 8, 16], [2], [])
    """
    longer, factor, factors = max(int(n) for n in shape), 1, []
    while -(-longer // factor) > block:
        factor *= 2
        factors.append(factor)
    return factors


def write_raster(path, array, grid: Grid, *, description: str, units: str, caution: str,
                 tags: dict | None = None, classes=None, resampling: str | None = None) -> Path:
    """Write one product band on the DEM grid, atomically.

    float arrays are written as float32 with nodata :data:`NODATA` (NaN and
    cells outside ``grid.valid`` become nodata); uint8 arrays (class codes)
    are written as uint8 with nodata :data:`CODE_NODATA`, int32 arrays (counts)
    as int32 with nodata :data:`COUNT_NODATA`. A grid of :data:`COG_MIN_SIDE`
    cells or more on its longer side is written as a Cloud-Optimized GeoTIFF
    with the overviews of :func:`overview_factors`; a smaller one as a tiled
    GeoTIFF. Both are deflate-compressed with a predictor, and two writes of
    the same array give the same bytes.

    Parameters
    ----------
    path : path-like
        Target ``.tif``; the folder must exist.
    array : numpy.ndarray, shape ``grid.shape``
    grid : Grid
    description, units, caution : str
        Band description, units tag (e.g. ``"degrees"``, ``"m"``, ``"1"``) and
        the screening caution stored in the dataset metadata.
    tags : dict, optional
        Extra dataset metadata.
    classes : mapping, optional
        ``code -> (label, colour)`` of a uint8 class band: written as the
        band's colour table (:func:`colour_table`; ``colour`` a ``#rrggbb``
        string or None). The labels are kept in the dataset metadata by the
        caller's ``tags`` and in the sidecar of :func:`category_names_xml`.
    resampling : {"average", "nearest"}, optional
        How the overviews are computed. Default: ``"average"`` for float
        bands, ``"nearest"`` for uint8 and int32 bands.

    Returns
    -------
    pathlib.Path
        The written file.

    Raises
    ------
    ValueError
        Shape mismatch (rasterio would otherwise resample silently), a colour
        table on a band that is not uint8, or an unknown resampling.

    Examples
    --------
    >>> import tempfile, numpy as np, rasterio
    >>> g = Grid.regular((600, 300), west=0.0, north=6000.0, cell_m=10.0)
    >>> with tempfile.TemporaryDirectory() as d:
    ...     out = write_raster(f"{d}/p.tif", np.ones(g.shape, np.float32), g,
    ...                        description="ones", units="1", caution="screening only")
    ...     with rasterio.open(out) as src:
    ...         src.tags(ns="IMAGE_STRUCTURE")["LAYOUT"], src.overviews(1)
    ('COG', [2, 4])
    """
    path = Path(path)
    array = np.asarray(array)
    if array.shape != tuple(grid.shape):
        raise ValueError(f"{path.name}: array shape {array.shape} does not match grid {grid.shape}")
    if array.dtype == np.uint8:
        dtype, nodata, predictor = "uint8", CODE_NODATA, 2
    elif array.dtype == np.int32:
        dtype, nodata, predictor = "int32", COUNT_NODATA, 2
    else:
        dtype, nodata, predictor = "float32", float(NODATA), 3
    if classes and dtype != "uint8":
        raise ValueError(f"{path.name}: a colour table needs a uint8 class band, not {dtype}")
    resampling = resampling or ("average" if dtype == "float32" else "nearest")
    if resampling not in OVERVIEW_RESAMPLING:
        raise ValueError(f"{path.name}: overview resampling {resampling!r} is not one of "
                         f"{', '.join(OVERVIEW_RESAMPLING)}")
    factors = overview_factors(grid.shape) if max(grid.shape) >= COG_MIN_SIDE else []
    profile = {
        "driver": "GTiff", "height": grid.shape[0], "width": grid.shape[1], "count": 1,
        "dtype": dtype, "crs": grid.crs, "transform": grid.transform, "nodata": nodata,
        "tiled": True, "blockxsize": BLOCK, "blockysize": BLOCK, "BIGTIFF": "IF_SAFER",
    }
    if not factors:  # the product itself; a COG's tiles are compressed by the copy
        profile |= {"compress": "deflate", "zlevel": DEFLATE_LEVEL, "predictor": predictor,
                    "NUM_THREADS": "ALL_CPUS"}
    tmp = path.with_name(f".{path.name}.partial")
    tiles = path.with_name(f".{path.name}.tiles") if factors else tmp
    try:
        with warnings.catch_warnings(), rasterio.Env(GDAL_CACHEMAX=WRITE_CACHE_MB):
            # GDAL warns when the tile is larger than a small raster; harmless.
            warnings.simplefilter("ignore", rasterio.errors.NotGeoreferencedWarning)
            with rasterio.open(tiles, "w", **profile) as dst:
                if dst.shape != array.shape:
                    raise ValueError(f"{path.name}: writer shape {dst.shape} != data {array.shape}")
                for r0 in range(0, grid.shape[0], BLOCK):  # one row of tiles at a time
                    rows = slice(r0, min(r0 + BLOCK, grid.shape[0]))
                    dst.write(_encoded(array[rows], grid.valid[rows], dtype, nodata), 1,
                              window=Window(0, r0, grid.shape[1], rows.stop - r0))
                dst.set_band_description(1, description)
                dst.update_tags(1, units=units)
                dst.update_tags(CAUTION=caution, units=units, **(tags or {}))
                if classes:
                    dst.write_colormap(1, colour_table(classes))
                if factors:
                    dst.build_overviews(factors, Resampling[resampling])
                    dst.update_tags(OVERVIEW_RESAMPLING=resampling)
            if factors:
                rasterio.shutil.copy(
                    tiles, tmp, driver="COG", COMPRESS="DEFLATE", LEVEL=DEFLATE_LEVEL,
                    PREDICTOR="YES", BLOCKSIZE=BLOCK, BIGTIFF="IF_SAFER",
                    OVERVIEWS="FORCE_USE_EXISTING", NUM_THREADS="ALL_CPUS")
        os.replace(tmp, path)
    finally:
        for left in {tmp, tiles}:
            if left.exists():
                left.unlink()
    return path


def colour_table(classes) -> dict:
    """The GDAL colour table of ``code -> (label, colour)``: RGBA per code.

    A GeoTIFF colour table holds no transparency (TIFF palettes are RGB), so
    a class without a colour (None: not coloured on the maps) is white, the
    patch the maps' legends show for it; its SLD sidecar leaves it
    transparent, and the nodata code is transparent by the band's nodata.

    Examples
    --------
    >>> colour_table({0: ("nodata", None), 1: ("wet", "#24517f")})
    {0: (255, 255, 255, 255), 1: (36, 81, 127, 255)}
    """
    table = {}
    for code, (_label, colour) in sorted(classes.items()):
        code = int(code)
        if not 0 <= code <= 255:
            raise ValueError(f"class code {code} does not fit a uint8 band (0 to 255)")
        if colour is None:
            table[code] = (255, 255, 255, 255)
            continue
        text = str(colour).lstrip("#")
        if len(text) != 6:
            raise ValueError(f"class {code}: colour {colour!r} is not of the form #rrggbb")
        table[code] = (int(text[0:2], 16), int(text[2:4], 16), int(text[4:6], 16), 255)
    return table


def category_names_xml(classes) -> bytes:
    """GDAL PAM sidecar (``KEY.tif.aux.xml``) naming the categories of a class band.

    GDAL's GeoTIFF driver keeps a band's category names (what
    ``GDALGetRasterCategoryNames`` returns, and what GIS legends of paletted
    rasters show) only in this sidecar; entry ``i`` names value ``i``, codes
    without a class get an empty name.

    Examples
    --------
    >>> print(category_names_xml({0: ("nodata", None), 2: ("wet & weak", "#24517f")}).decode())
    <PAMDataset>
      <PAMRasterBand band="1">
        <CategoryNames>
          <Category>nodata</Category>
          <Category></Category>
          <Category>wet &amp; weak</Category>
        </CategoryNames>
      </PAMRasterBand>
    </PAMDataset>
    <BLANKLINE>
    """
    names = {int(code): label for code, (label, _colour) in classes.items()}
    lines = ["<PAMDataset>", '  <PAMRasterBand band="1">', "    <CategoryNames>"]
    lines += [f"      <Category>{escape(names.get(code, ''))}</Category>"
              for code in range(max(names) + 1)]
    lines += ["    </CategoryNames>", "  </PAMRasterBand>", "</PAMDataset>", ""]
    return "\n".join(lines).encode("utf-8")


def _encoded(block, valid, dtype, nodata):
    """One strip of a product with nodata set outside the valid cells (and at NaN)."""
    if dtype in ("uint8", "int32"):
        return np.where(valid, block, nodata).astype(dtype)
    data = block.astype(np.float32, copy=False)
    return np.where(valid & np.isfinite(data), data, np.float32(nodata)).astype(np.float32)


def read_back(path) -> tuple[np.ndarray, dict]:
    """Read band 1 of a product as float with NaN for nodata, and its tags.

    A convenience for tests and notebooks.
    """
    with rasterio.open(path) as src:
        band = src.read(1, masked=True)
        tags = src.tags()
        tags.update({f"band_{k}": v for k, v in src.tags(1).items()})
        tags["description"] = src.descriptions[0]
    return np.ma.filled(band.astype(np.float64), np.nan), tags


def warn_unusual_cells(grid: Grid) -> None:
    """Warn when cells are far from square (routing accuracy drops)."""
    ratio = max(grid.dx_m, grid.dy_m) / min(grid.dx_m, grid.dy_m)
    if ratio > 3:
        warnings.warn(f"{grid.path.name}: cells are {grid.dx_m:g} x {grid.dy_m:g} m (aspect {ratio:.1f}); "
                      "flow routing on strongly rectangular cells is less accurate", InputWarning,
                      stacklevel=2)
