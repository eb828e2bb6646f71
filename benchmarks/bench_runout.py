"""Runout reach and corridor table speed on a generated fractal DEM.

Generates a seeded fractal DEM (spectral synthesis, as bench_routing.py; 10 m cells), fills it,
scatters ``--sources`` failure patches (seeded squares of 1-4 cells on a side) and times, in
this process:

* the reference: D8 flow accumulation of the same filled DEM
  (``slopescreen.routing.flow_accumulation(method="d8")``);
* runout: D8 receivers, sources (patch table), reach (paths, footprints, strips) and the
  LineStrings of ``runout_paths``;
* the corridor: a sinuous centreline of ``--line-km`` km cut into ``--segment-m`` segments
  with their strips, and the segment table for those sources.

Prints seconds per step, the ratio of runout to the reference, and the process's peak RSS.
Numba kernels are compiled on a small grid first (not timed).

Usage::

    python benchmarks/bench_runout.py --size 10000 --sources 100000 --line-km 100
"""

import argparse
import resource
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_routing import fractal_dem  # noqa: E402


def grid_of(z, cell):
    from rasterio.crs import CRS
    from rasterio.transform import from_origin

    from slopescreen.grid import Grid

    return Grid(z.shape, from_origin(500000.0, 6000000.0, cell, cell), CRS.from_epsg(32633),
                cell, cell, np.isfinite(z), Path("bench.tif"))


def source_mask(shape, n, seed):
    rng = np.random.default_rng(seed)
    mask = np.zeros(shape, dtype=bool)
    r = rng.integers(2, shape[0] - 6, n)
    c = rng.integers(2, shape[1] - 6, n)
    s = rng.integers(1, 5, n)
    for i in range(n):
        mask[r[i]:r[i] + s[i], c[i]:c[i] + s[i]] = True
    return mask


def sinuous_line(grid, km, seed):
    """A meandering line of about ``km`` km inside the grid (CRS metres)."""
    import shapely
    from shapely.ops import substring

    rows, cols = grid.shape
    x0, y0 = grid.transform * (0, 0)
    width = cols * grid.dx_m
    height = rows * grid.dy_m
    n = 20000
    t = np.linspace(0.0, 1.0, n)
    rng = np.random.default_rng(seed)
    turns = max(1.0, km * 1000.0 / width)
    x = x0 + 0.05 * width + 0.9 * width * (0.5 + 0.5 * np.sin(np.pi * turns * t + rng.uniform()))
    y = y0 - 0.05 * height - 0.9 * height * t
    line = shapely.LineString(np.column_stack([x, y]))
    scale = km * 1000.0 / line.length
    if scale < 1.0:
        line = substring(line, 0.0, km * 1000.0)
    return line


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=4000)
    ap.add_argument("--sources", type=int, default=20000)
    ap.add_argument("--line-km", type=float, default=100.0)
    ap.add_argument("--segment-m", type=float, default=100.0)
    ap.add_argument("--half-width-m", type=float, default=10.0)
    ap.add_argument("--cell", type=float, default=10.0)
    ap.add_argument("--seed", type=int, default=11)
    args = ap.parse_args(argv)

    from slopescreen._neighbours import pad_nan
    from slopescreen.corridor import build_segments, segment_rows
    from slopescreen.corridor.table import rows_csv
    from slopescreen.pipeline.corridor_stage import CorridorInputs
    from slopescreen.pipeline.runout_stage import path_lines
    from slopescreen.routing import flow_accumulation
    from slopescreen.runout import angle_of_reach_deg, d8_receivers, patch_sources, runout_reach
    from slopescreen.terrain import fill_depressions, slope_aspect

    def run(z, n_sources, line_km, timings):
        grid = grid_of(z, args.cell)
        t = time.perf_counter()
        flow_accumulation(z, args.cell, args.cell, method="d8")
        timings["reference: D8 flow accumulation"] = time.perf_counter() - t
        zp = pad_nan(z)
        _, aspect = slope_aspect(z, args.cell, args.cell)
        mask = source_mask(z.shape, n_sources, args.seed)
        line = sinuous_line(grid, line_km, args.seed)
        t = time.perf_counter()
        segments = build_segments(line, grid, segment_m=args.segment_m,
                                  half_width_m=args.half_width_m)
        timings["corridor: segments and strips"] = time.perf_counter() - t
        strips = CorridorInputs(line=line, segments=segments).strips()
        t = time.perf_counter()
        receivers = d8_receivers(zp, args.cell, args.cell)
        timings["runout: D8 receivers"] = time.perf_counter() - t
        t = time.perf_counter()
        ones = np.ones(z.shape, dtype=np.float32)
        sources = patch_sources(mask, z, ones, 0.9 * ones, aspect, dx=args.cell, dy=args.cell)
        timings["runout: sources"] = time.perf_counter() - t
        t = time.perf_counter()
        reach = runout_reach(zp, sources, angle_of_reach_deg(sources.volume_m3), dx=args.cell,
                             dy=args.cell, strips=strips, receivers=receivers)
        timings["runout: reach"] = time.perf_counter() - t
        t = time.perf_counter()
        lines = path_lines(sources, reach, grid)
        timings["runout: path lines"] = time.perf_counter() - t
        t = time.perf_counter()
        rows = segment_rows(segments, rain="bench", sources=sources, reach=reach,
                            factor_of_safety=0.9 * ones, cell_area_m2=args.cell ** 2,
                            failure_probability=None, recharge=None, grid=grid)
        rows_csv(rows)
        timings["corridor: table and csv"] = time.perf_counter() - t
        timings["line km"] = line.length / 1000.0
        return len(sources), len(lines), len(rows), int(reach.path_ptr[-1]), int(reach.pair_source.size)

    small = fill_depressions(fractal_dem(300, args.seed))
    run(small, 200, 2.0, {})                                   # compile the kernels
    t0 = time.perf_counter()
    z = fill_depressions(fractal_dem(args.size, args.seed, relief=args.size * args.cell * 0.08))
    print(f"DEM {args.size} x {args.size} = {z.size:.2e} cells at {args.cell:g} m, seed "
          f"{args.seed} (fractal, filled in {time.perf_counter() - t0:.1f} s)")
    timings = {}
    n, nl, nr, steps, pairs = run(z, args.sources, args.line_km, timings)
    ref = timings["reference: D8 flow accumulation"]
    km = timings.pop("line km")
    print(f"sources {n:,} (from {args.sources:,} seeded squares), path cells {steps:,}, "
          f"(source, segment) pairs {pairs:,}, lines {nl:,}, segments {nr:,} on a {km:.1f} km line")
    for k, v in timings.items():
        print(f"  {k:<36s} {v:8.2f} s   {v / ref:6.2f} x reference")
    runout = sum(v for k, v in timings.items() if k.startswith("runout"))
    corridor = sum(v for k, v in timings.items() if k.startswith("corridor"))
    print(f"runout total {runout:.2f} s ({runout / ref:.2f} x reference); corridor total "
          f"{corridor:.2f} s; peak RSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")


if __name__ == "__main__":
    main()
