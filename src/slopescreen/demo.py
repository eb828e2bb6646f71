"""The built-in demo: a fictional valley of our own, generated deterministically.

*Verrow valley* does not exist. It is a west-to-east valley a little over
2 km long, cut into a dissected upland: steep valley sides with convergent
hollows every ~120 m, a stream along the floor, fractal roughness, and a
gentle fall toward the east. Everything is generated here from a fixed seed,
so every demo run sees the same terrain.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import rasterio
from rasterio.transform import from_origin

from .scenario import load_scenario

DEMO_CRS = "EPSG:32633"
"""Projected CRS of the demo (metres). The coordinates are fictional."""

DEMO_ORIGIN = (512_000.0, 5_103_000.0)
"""Map coordinates of the demo's north-west corner (fictional)."""


def _fractal_noise(shape, rng, beta=3.0):
    """Gaussian random field with a power-law spectrum, unit standard deviation."""
    ky = np.fft.fftfreq(shape[0])[:, None]
    kx = np.fft.rfftfreq(shape[1])[None, :]
    k = np.hypot(kx, ky)
    k[0, 0] = np.inf
    amp = k ** (-beta / 2.0)
    phase = rng.uniform(0, 2 * np.pi, amp.shape)
    field = np.fft.irfft2(amp * np.exp(1j * phase), s=shape)
    return (field - field.mean()) / field.std()


def valley_dem(rows=400, cols=560, cell_m=4.0, seed=20261201):
    """Elevations (m) of the fictional Verrow valley.

    Parameters
    ----------
    rows, cols : int
        Grid size; row 0 is north.
    cell_m : float
        Square cell size, metres.
    seed : int
        Seed of the roughness and hollow placement.

    Returns
    -------
    numpy.ndarray of float32, shape (rows, cols)
    """
    rng = np.random.default_rng(seed)
    y = (np.arange(rows) + 0.5) * cell_m            # southward distance from the north edge
    x = (np.arange(cols) + 0.5) * cell_m            # eastward distance
    X, Y = np.meshgrid(x, y)
    width = rows * cell_m
    # stream line meanders gently about the valley's centre line
    yc = 0.5 * width + 0.06 * width * np.sin(2 * np.pi * X / (0.9 * cols * cell_m) + 0.7)
    d = np.abs(Y - yc)                              # distance from the stream, m
    relief = 0.42 * width
    side = relief * np.tanh(d / (0.45 * width)) ** 1.35
    floor = 180.0 - 0.035 * X                       # valley floor falls ~3.5 % to the east
    z = floor + side
    # convergent hollows on both valley sides: troughs that deepen upslope
    spacing = 120.0
    n = int(cols * cell_m / spacing) + 2
    for north_side in (True, False):
        centres = (np.arange(n) + rng.uniform(0.2, 0.8, n)) * spacing
        for xc in centres:
            depth = rng.uniform(4.0, 9.0)
            half_width = rng.uniform(18.0, 32.0)
            on_side = (Y < yc) if north_side else (Y > yc)
            fade = np.clip((d - 25.0) / 120.0, 0.0, 1.0) * np.clip((0.5 * width - d) / 60.0, 0.0, 1.0)
            z -= depth * np.exp(-((X - xc) / half_width) ** 2) * fade * on_side
    z += 1.2 * _fractal_noise(z.shape, rng)
    return z.astype(np.float32)


def soil_units_map(z, cell_m=4.0):
    """Soil-unit codes of the demo: 1 colluvium in hollows and on the lower slopes,
    2 thin residual soil on the upper slopes and spurs.

    A cell is colluvium when it lies below the valley's mid-height or in a
    hollow (smoothed curvature is concave).
    """
    from scipy import ndimage

    smooth = ndimage.gaussian_filter(z.astype(np.float64), 4.0)
    curvature = ndimage.laplace(smooth) / cell_m**2
    low = z < np.percentile(z, 45)
    hollow = curvature > 0.002
    return np.where(low | hollow, 1, 2).astype(np.uint8)


def write_demo_inputs(folder) -> Path:
    """Write the demo DEM and scenario into ``folder``; return the scenario path."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    cell = 4.0
    z = valley_dem(cell_m=cell)
    profile = {
        "driver": "GTiff", "height": z.shape[0], "width": z.shape[1], "count": 1,
        "dtype": "float32", "crs": DEMO_CRS, "nodata": -9999.0,
        "transform": from_origin(DEMO_ORIGIN[0], DEMO_ORIGIN[1], cell, cell),
        "tiled": True, "blockxsize": 256, "blockysize": 256, "compress": "deflate",
    }
    with rasterio.open(folder / "verrow_dem.tif", "w", **profile) as dst:
        dst.write(z, 1)
        dst.update_tags(SOURCE="slopescreen demo: fictional Verrow valley, generated terrain")
    codes = soil_units_map(z, cell)
    with rasterio.open(folder / "verrow_soils.tif", "w", **(profile | {"dtype": "uint8", "nodata": 0})) as dst:
        dst.write(codes, 1)
        dst.update_tags(SOURCE="slopescreen demo: soil units of the fictional Verrow valley")
    scenario = folder / "verrow.toml"
    scenario.write_text(DEMO_SCENARIO, encoding="utf-8")
    return scenario


DEMO_SCENARIO = """\
# slopescreen demo: the fictional Verrow valley (generated terrain, not a real place)
title = "Verrow valley demo"
dem = "verrow_dem.tif"
output = "results"

[routing]
method = "dinf"

[soil]
map = "verrow_soils.tif"

[soil.units.1]
label = "colluvium (hollows, lower slopes)"
depth_m = { uniform = [1.0, 2.0] }
cohesion_kpa = 1.0
root_cohesion_kpa = { uniform = [1.0, 6.0] }
friction_deg = { normal = [35.0, 2.5] }
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 2.0
diffusivity_m2_per_s = 5.0e-5

[soil.units.2]
label = "thin residual soil (upper slopes, spurs)"
depth_m = { uniform = [0.5, 1.0] }
cohesion_kpa = 2.0
root_cohesion_kpa = { uniform = [3.0, 10.0] }
friction_deg = { normal = [38.0, 2.0] }
unit_weight_kn_m3 = 19.0
conductivity_m_per_day = 4.0
diffusivity_m2_per_s = 1.0e-4

[[rain]]
name = "wet season"
steady_mm_per_day = 60

[[rain]]
name = "forecast storm"
storm_mm_per_h = 15
duration_h = 8
water_table_depth_m = 1.2

[uncertainty]
samples = 400
seed = 7
"""


def run_demo(folder="slopescreen-demo", *, progress=None):
    """Write the demo inputs into ``folder`` and run them.

    Returns
    -------
    slopescreen.pipeline.RunResult
    """
    from .pipeline import run

    scenario_path = write_demo_inputs(folder)
    return run(load_scenario(scenario_path), progress=progress)
