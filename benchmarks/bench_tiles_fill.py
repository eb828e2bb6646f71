"""Time depression filling (and flat directions) across tiles against the whole-grid methods.

Builds the seeded fractal DEM of ``bench_fill.py`` (in a child process), then in one process
times :func:`slopescreen.terrain.fill_depressions` on the whole grid and
:func:`slopescreen.tiles.fill_tiled` (serial) at each tile size, checks that the results are
equal bit for bit, and prints seconds, the ratio, the size of the spill graph and the time of
each step (tile floods, graph, finishing). With ``--flats`` it also times
:func:`slopescreen.tiles.flat_directions_tiled` against
:func:`slopescreen.routing.drainage_over_flats` on the filled grid. Peak resident memory is
measured per method in a fresh child process (Linux VmHWM, reset after the warm-up).

Usage::

    python benchmarks/bench_tiles_fill.py [--size 4000] [--tiles 500 1000] [--repeat 2]
                                          [--flats] [--seed 1]
"""

import argparse
import os
import platform
import subprocess
import sys
import tempfile
import time

import numpy as np

from bench_fill import best_of, fractal_dem, peak_rss_mb  # same folder
from slopescreen.routing import drainage_over_flats
from slopescreen.terrain import fill_depressions
from slopescreen.tiles import (
    fill_tile,
    fill_tiled,
    finish_tile,
    flat_directions_tiled,
    spill_levels,
    tile_windows,
)


def steps(dem, tile_size):
    """The three steps of fill_tiled timed apart; returns seconds and the spill graph size."""
    rows_b, cols_b = tile_windows(dem.shape, tile_size)
    nr, nc = len(rows_b), len(cols_b)
    t0 = time.perf_counter()
    tiles = [fill_tile(np.ascontiguousarray(dem[r0:r1, c0:c1]),
                       (i == 0, i == nr - 1, j == 0, j == nc - 1))
             for i, (r0, r1) in enumerate(rows_b) for j, (c0, c1) in enumerate(cols_b)]
    t1 = time.perf_counter()
    spill = spill_levels([t.summary for t in tiles], nr, nc)
    t2 = time.perf_counter()
    for t, s in zip(tiles, spill):
        finish_tile(t, s)
    t3 = time.perf_counter()
    nodes = 1 + sum(t.summary.n_labels - 2 for t in tiles)
    passes = sum(t.summary.pass_z.size for t in tiles)
    boundary_pairs = 3 * ((nc - 1) * dem.shape[0] + (nr - 1) * dem.shape[1])
    perimeter = sum(2 * sum(t.summary.shape) for t in tiles)
    return (t1 - t0, t2 - t1, t3 - t2), nodes, passes, boundary_pairs, perimeter


def child_rss(path, method, tile_size):
    """Resident memory of a fresh process that loads the DEM and runs one method once (MB).

    Returns (resident after loading and warming up, peak during the method). The peak is
    Linux's VmHWM, reset after the warm-up (``/proc/self/clear_refs``), so that the memory
    of compiling or loading the kernels does not hide the method's own peak.
    """
    code = (
        "import numpy as np\n"
        "from slopescreen.terrain import fill_depressions\n"
        "from slopescreen.tiles import fill_tiled\n"
        "def status(key):\n"
        "    for line in open('/proc/self/status'):\n"
        "        if line.startswith(key):\n"
        "            return int(line.split()[1]) / 1024.0\n"
        "dem = np.load(%r)\n"
        "small = dem[:64, :64].copy(); fill_depressions(small); fill_tiled(small, 16)\n"
        "open('/proc/self/clear_refs', 'w').write('5')\n"
        "before = status('VmRSS')\n"
        "out = fill_depressions(dem) if %r == 'whole' else fill_tiled(dem, %d)\n"
        "print(before, status('VmHWM'))\n"
    ) % (path, method, tile_size)
    out = subprocess.run([sys.executable, "-c", code], check=True, capture_output=True,
                         text=True).stdout.split()
    return float(out[0]), float(out[1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=4000, help="rows = cols (default 4000)")
    ap.add_argument("--tiles", type=int, nargs="+", default=[500, 1000], help="tile sizes")
    ap.add_argument("--repeat", type=int, default=2, help="best of N")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--flats", action="store_true", help="also time the flat directions")
    args = ap.parse_args(argv)
    n = args.size
    print(f"python {platform.python_version()}, numpy {np.__version__}")
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "dem.npy")
        here = os.path.dirname(os.path.abspath(__file__))
        subprocess.run([sys.executable, os.path.join(here, "bench_fill.py"), "--size", str(n),
                        "--seed", str(args.seed), "--write-dem", path], check=True)
        dem = np.load(path)
        print(f"grid: {n} x {n} = {n * n:,} cells float32, seed {args.seed}")

        small = fractal_dem(64, 64, seed=0)
        fill_depressions(small)
        fill_tiled(small, 16)
        flat_directions_tiled(fill_depressions(small), 16)
        drainage_over_flats(small)

        t_whole, whole = best_of(lambda: fill_depressions(dem), args.repeat)
        print(f"whole-grid fill_depressions: {t_whole:.3f} s (best of {args.repeat})")
        b, a = child_rss(path, "whole", 0)
        print(f"  peak RSS (child): {b:.0f} MB loaded, {a:.0f} MB peak during the fill "
              f"(+{(a - b) * 2**20 / (n * n):.1f} B/cell, output included)")
        for ts in args.tiles:
            t_tiled, tiled = best_of(lambda: fill_tiled(dem, ts), args.repeat)
            equal = np.array_equal(tiled, whole)
            (s1, s2, s3), nodes, passes, pairs, perimeter = steps(dem, ts)
            print(f"fill_tiled, tiles of {ts}: {t_tiled:.3f} s (best of {args.repeat}), "
                  f"ratio tiled / whole {t_tiled / t_whole:.2f}; equal: {equal}")
            print(f"  steps: tile floods {s1:.3f} s, spill graph {s2:.3f} s, finishing "
                  f"{s3:.3f} s")
            print(f"  spill graph: {nodes:,} nodes (perimeter cells {perimeter:,}), "
                  f"{passes:,} passes inside tiles, {pairs:,} cell pairs across boundaries")
            b, a = child_rss(path, "tiled", ts)
            print(f"  peak RSS (child): {b:.0f} MB loaded, {a:.0f} MB peak during the fill "
                  f"(+{(a - b) * 2**20 / (n * n):.1f} B/cell, output included)")
            if not equal:
                raise SystemExit("results differ")
            del tiled
        if args.flats:
            t_fw, fw = best_of(lambda: drainage_over_flats(whole), args.repeat)
            print(f"whole-grid drainage_over_flats: {t_fw:.3f} s")
            for ts in args.tiles:
                t_ft, ft = best_of(lambda: flat_directions_tiled(whole, ts), args.repeat)
                print(f"flat_directions_tiled, tiles of {ts}: {t_ft:.3f} s, ratio "
                      f"{t_ft / t_fw:.2f}; equal: {np.array_equal(ft, fw)}")
        print(f"peak RSS of this process at the end: {peak_rss_mb():.0f} MB")


if __name__ == "__main__":
    main()
