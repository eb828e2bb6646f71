"""The built-in demo: a fictional valley of our own, generated deterministically.

*Verrow valley* does not exist. It is a west-to-east valley about 2.2 km
long and 1.5 km across, cut into a dissected upland:

* two valley sides rising to ridge crests that run inside the grid, with the
  ground falling away again beyond them toward the neighbouring valleys;
* convergent hollows every ~110-170 m down both sides, a larger tributary
  valley on each side, and spurs between them;
* a narrow floodplain with a meandering stream incised into it;
* a forest road along the north-facing (south) valley side, benched into the
  slope with a cut slope above it and a short fill below it where it crosses
  hollows;
* three soils (colluvium in hollows and on footslopes, thin residual soil on
  spurs and upper slopes, alluvium on the floodplain) under forest or in
  clear-cut harvest units, mapped as five soil units because root cohesion
  differs between forest and clear-cut;
* a steady wet-season case and a storm case;
* a small inventory of mapped landslides in hollows (GeoJSON polygons) and the
  road centreline (GeoJSON line) for the corridor stage.

Everything comes from fixed seeds, so every run sees the same valley. The
parameter values are screening values in the ranges of common practice
(methods reference, typical screening ranges), not values of any site.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError
from .scenario import load_scenario

__all__ = ["DEMO_CRS", "DEMO_ORIGIN", "DEMO_SCENARIO", "Valley", "build_valley", "valley_dem",
           "write_demo_inputs", "run_demo"]

DEMO_CRS = "EPSG:32633"
"""Projected CRS of the demo (metres). The coordinates are fictional."""

DEMO_ORIGIN = (512_000.0, 5_103_000.0)
"""Map coordinates of the demo's north-west corner (fictional)."""

DEMO_SEED = 20261201
"""Seed of every random choice in the demo terrain."""

SOIL_UNITS = {
    1: "colluvium under forest",
    2: "colluvium, clear-cut",
    3: "residual soil under forest",
    4: "residual soil, clear-cut",
    5: "alluvium (floodplain meadow)",
}
"""Codes of the demo soil map."""


def _fractal_noise(shape, rng, beta=3.0):
    """Gaussian random field with a power-law spectrum, unit standard deviation."""
    ky = np.fft.fftfreq(shape[0])[:, None]
    kx = np.fft.rfftfreq(shape[1])[None, :]
    k = np.hypot(kx, ky)
    k[0, 0] = np.inf
    amp = k ** (-beta / 2.0)
    phase = rng.uniform(0, 2 * np.pi, amp.shape)
    noise = np.fft.irfft2(amp * np.exp(1j * phase), s=shape)
    return (noise - noise.mean()) / noise.std()


def _smooth_field(shape, rng, length_cells):
    """Smooth random field (Gaussian-filtered white noise), unit standard deviation."""
    from scipy import ndimage

    f = ndimage.gaussian_filter(rng.standard_normal(shape), length_cells, mode="wrap")
    return (f - f.mean()) / f.std()


def _s_curve(u):
    """0 at u = 0, 1 at u = 1, steepest at u = 1/2 (a hillside from toe to crest)."""
    return 0.5 * (1.0 - np.cos(np.pi * np.clip(u, 0.0, 1.0)))


@dataclass
class Valley:
    """The generated demo valley and its map layers (arrays on the demo grid).

    Attributes
    ----------
    z : numpy.ndarray of float32
        Elevations, m (row 0 north).
    soil : numpy.ndarray of uint8
        Soil-unit codes (:data:`SOIL_UNITS`).
    cell_m : float
        Cell size, m.
    road : numpy.ndarray, shape (n, 2)
        Road centreline vertices (x east, y south) in metres from the
        north-west corner.
    landslides : list of numpy.ndarray, shape (m, 2)
        Closed rings of the mapped landslides, same coordinates.
    cleared : numpy.ndarray of bool
        Clear-cut ground (harvest units and the road clearing).
    """

    z: np.ndarray
    soil: np.ndarray
    cell_m: float
    road: np.ndarray
    landslides: list = field(default_factory=list)
    cleared: np.ndarray | None = None


def build_valley(rows=380, cols=560, cell_m=4.0, seed=DEMO_SEED) -> Valley:
    """Generate the fictional Verrow valley.

    Parameters
    ----------
    rows, cols : int
        Grid size; row 0 is north.
    cell_m : float
        Square cell size, m.
    seed : int
        Seed of the roughness, hollow placement, harvest units and inventory.

    Returns
    -------
    Valley
    """
    from scipy import ndimage

    rng = np.random.default_rng(seed)
    width_m, height_m = cols * cell_m, rows * cell_m
    x = (np.arange(cols) + 0.5) * cell_m            # eastward, m
    y = (np.arange(rows) + 0.5) * cell_m            # southward, m
    X, Y = np.meshgrid(x, y)

    # stream line and the distance of every cell from it, per valley side
    def stream_y(xx):
        return (0.53 * height_m + 38.0 * np.sin(2 * np.pi * xx / 1500.0 + 0.7)
                + 12.0 * np.sin(2 * np.pi * xx / 430.0 + 1.3))

    yc = stream_y(X)
    north = Y < yc
    d = np.abs(Y - yc)
    plain = 28.0                                    # floodplain half-width, m
    crest = np.where(north, 0.38 * height_m + 45.0 * np.sin(2 * np.pi * X / 900.0),
                     0.36 * height_m + 35.0 * np.cos(2 * np.pi * X / 1100.0))
    relief = np.where(north, 250.0, 290.0) + 25.0 * np.sin(2 * np.pi * X / 1700.0 + 0.4)
    u = (d - plain) / (crest - plain)               # 0 at the valley toe, 1 at the crest
    floor = 205.0 - 0.022 * X + 0.015 * np.minimum(d, plain)
    beyond = np.clip(u - 1.0, 0.0, None) * (crest - plain) / 420.0
    z = floor + relief * _s_curve(u) - 150.0 * _s_curve(beyond)

    # tributary valleys: one on each side, graded to the main valley floor
    for side, xt, depth, half in ((True, 0.27 * width_m, 30.0, 80.0), (False, 0.66 * width_m, 38.0, 90.0)):
        on = north if side else ~north
        wander = xt + 35.0 * np.sin(2 * np.pi * d / 650.0)
        above_floor = relief * _s_curve(u)
        a, b = depth * np.clip((0.92 - u) / 0.3, 0.0, 1.0), 0.6 * above_floor
        cut = -5.0 * np.logaddexp(-a / 5.0, -b / 5.0)                 # soft minimum of a and b
        cut = np.clip(cut, 0.0, None)
        z -= on * cut * np.exp(-((X - wander) / (half * (0.55 + 0.5 * np.clip(u, 0, 1)))) ** 2)

    # convergent hollows down both sides; remember their axes for the inventory
    hollows = []
    for side in (True, False):
        on = north if side else ~north
        xc = rng.uniform(20.0, 80.0)
        while xc < width_m - 20.0:
            depth = rng.uniform(3.5, 8.0)
            half = rng.uniform(16.0, 26.0)
            bend = rng.uniform(-45.0, 45.0)
            axis = xc + bend * np.sin(np.pi * np.clip(u, 0, 1))
            width = half * (0.7 + 0.9 * np.clip(u, 0.0, 1.0))      # broad hollow heads
            top = rng.uniform(0.75, 0.97)                           # where the hollow head starts
            along = np.sin(np.pi * np.clip((u - 0.05) / (top - 0.05), 0.0, 1.0)) ** 0.6
            z -= on * depth * along * np.exp(-((X - axis) / width) ** 2)
            hollows.append((side, xc, bend, depth))
            xc += rng.uniform(110.0, 170.0)

    # roughness, then the stream channel incised into the floodplain
    swell = _smooth_field(z.shape, rng, 35.0) * np.clip(u / 0.2, 0.0, 1.0)
    z += 7.0 * swell + 1.3 * _fractal_noise(z.shape, rng, beta=3.2) + 0.12 * _fractal_noise(z.shape, rng, beta=2.0)
    z -= 1.8 * np.exp(-((Y - yc) / 5.0) ** 2)

    # forest road benched into the south (north-facing) side
    road_x = np.arange(0.0, width_m + cell_m, 10.0)
    road_y = stream_y(road_x) + plain + 95.0 + 12.0 * np.sin(2 * np.pi * road_x / 700.0)
    road_y_cells = stream_y(X) + plain + 95.0 + 12.0 * np.sin(2 * np.pi * X / 700.0)
    rr = np.clip(np.round(road_y_cells / cell_m - 0.5).astype(int), 0, rows - 1)
    natural_on_line = z[rr[0], np.arange(cols)]
    grade = ndimage.gaussian_filter1d(natural_on_line.astype(np.float64), 20.0 / cell_m, mode="nearest")
    z_road = grade[None, :] - 1.5
    s = Y - road_y_cells                            # offset from the centreline, + uphill (south)
    half_road = 3.5
    bench = np.abs(s) <= half_road
    cut = s > half_road
    fill_t = -s - half_road
    fill = (fill_t > 0.0) & (fill_t < 16.0)
    z = np.where(bench, z_road, z)
    z = np.where(cut, np.minimum(z, z_road + (s - half_road) * 1.0), z)   # 45-degree cut slope
    blend = np.clip(1.0 - (fill_t - 8.0) / 8.0, 0.0, 1.0)
    filled = np.maximum(z, z_road - fill_t / 1.5)                          # 1.5:1 fill slope
    z = np.where(fill, blend * filled + (1.0 - blend) * z, z)
    road = np.column_stack([road_x, road_y])

    # soils: alluvium on the floodplain, colluvium in hollows and on footslopes, residual elsewhere
    smooth = ndimage.gaussian_filter(z.astype(np.float64), 3.0)
    curvature = ndimage.laplace(smooth) / cell_m ** 2
    alluvium = (d < plain + 6.0) & (u < 0.05)
    colluvium = (curvature > 0.0015) | (u < 0.22)
    # clear-cut harvest units (irregular blocks) and the road clearing
    blocks = _smooth_field(z.shape, rng, 30.0)
    units = ((north & (X > 0.50 * width_m) & (X < 0.92 * width_m) & (u > 0.12) & (u < 0.95))
             | (~north & (X > 0.08 * width_m) & (X < 0.42 * width_m) & (u > 0.18) & (u < 0.85)))
    cleared = (units & (blocks > -0.6)) | (np.abs(s) < 12.0)
    soil = np.where(colluvium, np.where(cleared, 2, 1), np.where(cleared, 4, 3))
    soil = np.where(alluvium, 5, soil).astype(np.uint8)

    # mapped landslides: scars in hollows at mid-slope, most of them in clear-cuts
    landslides = []
    order = rng.permutation(len(hollows))
    for i in order:
        side, xc, bend, depth = hollows[i]
        if depth < 5.0 or len(landslides) >= 9:
            continue
        uu = rng.uniform(0.35, 0.65)
        xi = xc + bend * math.sin(math.pi * uu)
        ci = int(np.clip(xi / cell_m, 0, cols - 1))
        col_crest = crest[:, ci]
        col_yc = yc[0, ci]
        cr = float(col_crest[0] if side else col_crest[-1])
        dist = plain + uu * (cr - plain)
        yi = col_yc - dist if side else col_yc + dist
        ri = int(np.clip(yi / cell_m, 0, rows - 1))
        if not cleared[ri, ci] and rng.uniform() < 0.6:
            continue
        length = rng.uniform(35.0, 70.0)
        wide = rng.uniform(14.0, 24.0)
        t = np.linspace(0.0, 2 * np.pi, 17)
        ring = np.column_stack([xi + 0.5 * wide * np.sin(t), yi + 0.5 * length * np.cos(t)])
        landslides.append(ring)
    return Valley(z=z.astype(np.float32), soil=soil, cell_m=cell_m, road=road,
                  landslides=landslides, cleared=cleared)


def valley_dem(rows=380, cols=560, cell_m=4.0, seed=DEMO_SEED):
    """Elevations (m, float32, row 0 north) of the fictional Verrow valley."""
    return build_valley(rows, cols, cell_m, seed).z


def _to_map(points, cell_m):
    """Metres from the north-west corner (x east, y south) to demo map coordinates."""
    del cell_m
    p = np.asarray(points, dtype=np.float64)
    return np.column_stack([DEMO_ORIGIN[0] + p[:, 0], DEMO_ORIGIN[1] - p[:, 1]])


def _geojson(features, name):
    """A GeoJSON FeatureCollection in the demo CRS (named with the 2008 ``crs`` member)."""
    epsg = DEMO_CRS.split(":")[1]
    return {"type": "FeatureCollection", "name": name,
            "crs": {"type": "name", "properties": {"name": f"urn:ogc:def:crs:EPSG::{epsg}"}},
            "features": features}


def write_demo_inputs(folder) -> Path:
    """Write the demo DEM, soil map, road, inventory and scenario into ``folder``.

    Returns
    -------
    pathlib.Path
        The scenario file.
    """
    import rasterio
    from rasterio.transform import from_origin

    folder = Path(folder)
    probe = folder
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    if not probe.is_dir():
        raise InputError(f"{folder}: demo: {probe.name} is a file, not a folder; name a folder "
                         "for the demo (it is created if absent)")
    folder.mkdir(parents=True, exist_ok=True)
    valley = build_valley()
    z = valley.z
    cell = valley.cell_m
    profile = {
        "driver": "GTiff", "height": z.shape[0], "width": z.shape[1], "count": 1,
        "dtype": "float32", "crs": DEMO_CRS, "nodata": -9999.0,
        "transform": from_origin(DEMO_ORIGIN[0], DEMO_ORIGIN[1], cell, cell),
        "tiled": True, "blockxsize": 256, "blockysize": 256, "compress": "deflate",
    }
    with rasterio.open(folder / "verrow_dem.tif", "w", **profile) as dst:
        dst.write(z, 1)
        dst.update_tags(SOURCE="slopescreen demo: fictional Verrow valley, generated terrain")
    with rasterio.open(folder / "verrow_soils.tif", "w", **(profile | {"dtype": "uint8", "nodata": 0})) as dst:
        dst.write(valley.soil, 1)
        dst.update_tags(SOURCE="slopescreen demo: soil units of the fictional Verrow valley",
                        **{f"UNIT_{k}": v for k, v in SOIL_UNITS.items()})
    road = _to_map(valley.road, cell)
    (folder / "verrow_road.geojson").write_text(json.dumps(_geojson([{
        "type": "Feature", "properties": {"name": "Verrow valley forest road (fictional)"},
        "geometry": {"type": "LineString", "coordinates": np.round(road, 2).tolist()}}],
        "verrow_road"), indent=1) + "\n", encoding="utf-8")
    slides = []
    for i, ring in enumerate(valley.landslides, start=1):
        coords = np.round(_to_map(ring, cell), 2)
        coords[-1] = coords[0]
        slides.append({"type": "Feature", "properties": {"id": i, "type": "shallow landslide scar"},
                       "geometry": {"type": "Polygon", "coordinates": [coords.tolist()]}})
    (folder / "verrow_landslides.geojson").write_text(
        json.dumps(_geojson(slides, "verrow_landslides"), indent=1) + "\n", encoding="utf-8")
    scenario = folder / "verrow.toml"
    scenario.write_text(DEMO_SCENARIO, encoding="utf-8")
    return scenario


DEMO_SCENARIO = """\
# slopescreen demo: the fictional Verrow valley (generated terrain, not a real place).
# `slopescreen demo FOLDER` writes this file with the inputs it names and runs it.
# Soil and rain values are screening values in the usual ranges, not site data.
# Forest and clear-cut ground are separate soil units because root cohesion differs.
title = "Verrow valley demo"
dem = "verrow_dem.tif"
dem_date = 2023-08-15                # when the lidar was flown (before the landslides)
output = "results"

[routing]
method = "dinf"

[soil]
map = "verrow_soils.tif"

[soil.units.1]
label = "colluvium under forest"
depth_m = { uniform = [1.0, 2.0] }
cohesion_kpa = { uniform = [0.5, 2.5] }
root_cohesion_kpa = { uniform = [3.0, 9.0] }
lateral_root_cohesion_kpa = { uniform = [10.0, 30.0] }
friction_deg = { normal = [34.0, 2.0] }
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 5.0
diffusivity_m2_per_s = 2.0e-4

[soil.units.2]
label = "colluvium, clear-cut"
depth_m = { uniform = [1.0, 2.0] }
cohesion_kpa = { uniform = [0.5, 2.5] }
root_cohesion_kpa = { uniform = [0.5, 2.5] }
lateral_root_cohesion_kpa = { uniform = [1.0, 6.0] }
friction_deg = { normal = [34.0, 2.0] }
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 5.0
diffusivity_m2_per_s = 2.0e-4

[soil.units.3]
label = "residual soil under forest"
depth_m = { uniform = [0.5, 1.0] }
cohesion_kpa = { uniform = [2.0, 5.0] }
root_cohesion_kpa = { uniform = [3.0, 9.0] }
lateral_root_cohesion_kpa = { uniform = [10.0, 30.0] }
friction_deg = { normal = [37.0, 2.0] }
unit_weight_kn_m3 = 19.0
conductivity_m_per_day = 3.0
diffusivity_m2_per_s = 1.0e-4

[soil.units.4]
label = "residual soil, clear-cut"
depth_m = { uniform = [0.5, 1.0] }
cohesion_kpa = { uniform = [1.5, 4.0] }
root_cohesion_kpa = { uniform = [0.5, 2.5] }
lateral_root_cohesion_kpa = { uniform = [1.0, 6.0] }
friction_deg = { normal = [37.0, 2.0] }
unit_weight_kn_m3 = 19.0
conductivity_m_per_day = 3.0
diffusivity_m2_per_s = 1.0e-4

[soil.units.5]
label = "alluvium (floodplain meadow)"
depth_m = 2.0
cohesion_kpa = 0.0
root_cohesion_kpa = 1.0
friction_deg = { normal = [32.0, 2.0] }
unit_weight_kn_m3 = 19.0
conductivity_m_per_day = 10.0
diffusivity_m2_per_s = 1.0e-3

[[rain]]
name = "wet season"
steady_mm_per_day = 6

[[rain]]
name = "design storm"
storm_mm_per_h = 30
duration_h = 8
antecedent_mm_per_day = 2

[uncertainty]
samples = 300
seed = 7

[clusters]
min_area_m2 = 100
max_area_m2 = 5000
# least-stable connected cluster per area band, around the 5 least stable
# failing clusters; size_bands = 3 splits the range (slower: see docs)
size_windows = 5
size_bands = 1

[runout]
# angle of reach from each source's volume (the default relation); or fix it:
# angle_of_reach_deg = 22

[corridor]
centreline = "verrow_road.geojson"
segment_m = 100
half_width_m = 8

[inventory]
# scars mapped after the January storms; the polygons hold no deposits, so every cell is scored
landslides = "verrow_landslides.geojson"
type_field = "type"
types = ["shallow landslide scar"]
score_part = "whole"
date = 2024-01-20
"""


def run_demo(folder="slopescreen-demo", *, progress=None):
    """Write the demo inputs into ``folder`` and run them.

    Parameters
    ----------
    folder : path-like
        Where to write the inputs; the products go to ``folder/results``.
    progress : callable, optional
        Passed to :func:`slopescreen.pipeline.run`.

    Returns
    -------
    slopescreen.pipeline.RunResult
    """
    from .pipeline import run

    scenario_path = write_demo_inputs(folder)
    return run(load_scenario(scenario_path), progress=progress)
