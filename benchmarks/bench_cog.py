"""Writing one product as a COG with overviews against the plain tiled GeoTIFF.

Usage::

    python benchmarks/bench_cog.py [--size 4000] [--repeat 3] [--work DIR]

What it measures and how
------------------------
Product
    ``--size`` x ``--size`` float32 cells (a seeded random walk along rows, so it compresses
    like a smooth product rather than noise), 2 m cells in EPSG:32633, every cell valid.
Writes, in this process, each ``--repeat`` times (medians printed)
    * ``plain``: the tiled GeoTIFF written one row of tiles at a time, deflate level 1 with
      the floating-point predictor (what :func:`slopescreen.grid.write_raster` wrote before
      COGs, and still writes for grids below ``COG_MIN_SIDE``);
    * ``cog``: :func:`slopescreen.grid.write_raster` (uncompressed tiled file, overviews built
      on it, COG driver copy with the existing overviews);
    * ``gtiff copy``: the same but the last step is a GTiff copy with
      ``COPY_SRC_OVERVIEWS=YES`` instead of the COG driver;
    * ``cog, tiles compressed``: the intermediate file deflate-compressed as well (the tiles
      are then compressed twice);
    * ``cog driver builds``: the COG driver making the overviews itself from the plain
      tiled file.
Memory
    Each writer once more in a fresh child process (this script with ``--one NAME``): GDAL's
    block cache (``GDAL_CACHEMAX``, default 5 % of the RAM) stays allocated after a first
    write, so later writes in one process would look free. The child makes the same array,
    resets Linux's peak resident set (``VmHWM``, through ``/proc/self/clear_refs``) and reads
    it after the write; printed is the peak above the resident set before the write (the
    array already allocated), in MB (2**20 bytes).
Check
    Each file is read back at full resolution and compared with the array; LAYOUT and the
    overview factors are printed. No timing is asserted.
"""

import argparse
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import rasterio
import rasterio.shutil
from rasterio.enums import Resampling
from rasterio.windows import Window

from slopescreen.grid import BLOCK, DEFLATE_LEVEL, Grid, overview_factors, write_raster


def _rss(field: str) -> float:
    with open("/proc/self/status", encoding="ascii") as f:
        for line in f:
            if line.startswith(field):
                return int(line.split()[1]) / 1024.0
    raise RuntimeError(f"{field} not in /proc/self/status")


def _tiled(path, array, grid, *, compress: bool, overviews: bool):
    profile = {"driver": "GTiff", "height": grid.shape[0], "width": grid.shape[1], "count": 1,
               "dtype": "float32", "crs": grid.crs, "transform": grid.transform,
               "nodata": -9999.0, "tiled": True, "blockxsize": BLOCK, "blockysize": BLOCK,
               "BIGTIFF": "IF_SAFER"}
    if compress:
        profile |= {"compress": "deflate", "zlevel": DEFLATE_LEVEL, "predictor": 3,
                    "NUM_THREADS": "ALL_CPUS"}
    with rasterio.open(path, "w", **profile) as dst:
        for r0 in range(0, grid.shape[0], BLOCK):
            r1 = min(r0 + BLOCK, grid.shape[0])
            dst.write(array[r0:r1], 1, window=Window(0, r0, grid.shape[1], r1 - r0))
        if overviews:
            dst.build_overviews(overview_factors(grid.shape), Resampling.average)


_COG = {"COMPRESS": "DEFLATE", "LEVEL": DEFLATE_LEVEL, "PREDICTOR": "YES", "BLOCKSIZE": BLOCK,
        "BIGTIFF": "IF_SAFER", "NUM_THREADS": "ALL_CPUS"}


def plain(path, array, grid):
    _tiled(path, array, grid, compress=True, overviews=False)


def cog(path, array, grid):
    write_raster(path, array, grid, description="bench", units="1", caution="bench")


def gtiff_copy(path, array, grid):
    tiles = path.with_name("tiles.tif")
    _tiled(tiles, array, grid, compress=False, overviews=True)
    rasterio.shutil.copy(tiles, path, driver="GTiff", COPY_SRC_OVERVIEWS="YES", TILED="YES",
                         BLOCKXSIZE=BLOCK, BLOCKYSIZE=BLOCK, COMPRESS="DEFLATE",
                         ZLEVEL=DEFLATE_LEVEL, PREDICTOR=3, BIGTIFF="IF_SAFER",
                         NUM_THREADS="ALL_CPUS")
    tiles.unlink()


def cog_tiles_compressed(path, array, grid):
    tiles = path.with_name("tiles.tif")
    _tiled(tiles, array, grid, compress=True, overviews=True)
    rasterio.shutil.copy(tiles, path, driver="COG", OVERVIEWS="FORCE_USE_EXISTING", **_COG)
    tiles.unlink()


def cog_driver_builds(path, array, grid):
    tiles = path.with_name("tiles.tif")
    _tiled(tiles, array, grid, compress=True, overviews=False)
    rasterio.shutil.copy(tiles, path, driver="COG", RESAMPLING="AVERAGE", **_COG)
    tiles.unlink()


WRITERS = (("plain", plain), ("cog", cog), ("gtiff copy", gtiff_copy),
           ("cog, tiles compressed", cog_tiles_compressed),
           ("cog driver builds", cog_driver_builds))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=4000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--work", type=Path, default=None)
    ap.add_argument("--one", default=None, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    n = args.size
    rng = np.random.default_rng(1)
    array = np.cumsum(rng.normal(0.0, 0.05, size=(n, n)), axis=1, dtype=np.float64)
    array = (array + 10.0).astype(np.float32)
    grid = Grid.regular((n, n), west=500000.0, north=5100000.0 + 2.0 * n, cell_m=2.0)
    work = Path(args.work or tempfile.mkdtemp(prefix="bench_cog_"))
    work.mkdir(parents=True, exist_ok=True)
    if args.one is not None:
        base = _rss("VmRSS")
        with open("/proc/self/clear_refs", "w", encoding="ascii") as f:
            f.write("5")
        dict(WRITERS)[args.one](work / "one.tif", array, grid)
        print(_rss("VmHWM") - base)
        return 0
    print(f"{n} x {n} float32 = {n * n:,} cells ({array.nbytes / 2**20:.0f} MB in memory), "
          f"overviews {overview_factors(grid.shape)}; time: median of {args.repeat} in this "
          "process; peak: one write in a fresh child")
    figures = {}
    for name, fn in WRITERS:
        seconds = []
        for _ in range(args.repeat):
            path = work / "product.tif"
            if path.exists():
                path.unlink()
            start = time.perf_counter()
            fn(path, array, grid)
            seconds.append(time.perf_counter() - start)
        child = subprocess.run([sys.executable, __file__, "--size", str(n), "--work",
                                str(work / "child"), "--one", name],
                               capture_output=True, text=True, check=True)
        peak = float(child.stdout.split()[-1])
        with rasterio.open(path) as src:
            layout = src.tags(ns="IMAGE_STRUCTURE").get("LAYOUT", "-")
            levels = src.overviews(1)
            same = bool(np.array_equal(src.read(1), array))
        size = path.stat().st_size / 2**20
        figures[name] = (statistics.median(seconds), peak)
        s, m = figures[name]
        ref_s, ref_m = figures["plain"]
        print(f"  {name:24s} {s:6.2f} s ({s / ref_s:4.2f} x plain)  peak +{m:6.1f} MB "
              f"({m / ref_m:4.2f} x plain)  file {size:6.1f} MB  layout {layout:4s} "
              f"overviews {levels}  read back equal: {same}")
    if args.work is None:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
