"""Tiled flow accumulation against the whole-grid accumulation, in one process.

Builds the seeded fractal DEM of bench_routing.py, fills it with
slopescreen.terrain.fill_depressions, computes the receivers once, then for
D8 and D-infinity times the whole-grid accumulation (``_route_padded``, which
recomputes its receivers; the receiver pass alone is timed too and
subtracted) and the serial tiled accumulation at each tile size (its three
steps timed apart). Prints seconds, the ratio tiled / whole-grid
accumulation, peak RSS, the size of the perimeter system, the non-zeros of
the tile maps per perimeter cell and the largest relative difference from
the whole grid.

Usage::

    python benchmarks/bench_tiles_accumulation.py --size 4000 --tiles 500 1000
"""

import argparse
import os
import resource
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from bench_routing import fractal_dem  # noqa: E402


def peak_rss_mb():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=2000, help="grid is size x size cells")
    ap.add_argument("--cell", type=float, default=10.0, help="cell size, m")
    ap.add_argument("--seed", type=int, default=42)
    ap.add_argument("--tiles", type=int, nargs="+", default=[500, 1000])
    ap.add_argument("--methods", nargs="+", default=["d8", "dinf"])
    args = ap.parse_args(argv)

    import numba

    from slopescreen._neighbours import pad_nan, unpad
    from slopescreen.routing.accumulation import _route_padded
    from slopescreen.routing.directions import _receiver_codes
    from slopescreen.terrain import fill_depressions
    from slopescreen.tiles import (
        accumulate_tiled,
        finish_tile_accumulation,
        solve_perimeter,
        tile_flow_map,
        tile_windows,
    )

    code_of = {"dinf": 0, "d8": 2}
    cell = args.cell
    small = fill_depressions(fractal_dem(64, 1))
    for method in args.methods:                       # warm-up: compile or load the caches
        zp = pad_nan(small)
        codes, frac, *_ = _receiver_codes(zp, cell, cell, code_of[method], 1.1)
        _route_padded(zp, cell, cell, code_of[method], 1.1)
        accumulate_tiled(codes, frac if method == "dinf" else None, small.shape, 20, method,
                         cell, cell)

    t0 = time.perf_counter()
    z = fill_depressions(fractal_dem(args.size, args.seed))
    print(f"grid {args.size} x {args.size} = {z.size / 1e6:.1f} Mcells, cell {cell} m, seed "
          f"{args.seed}; filled in {time.perf_counter() - t0:.1f} s; numba threads "
          f"{numba.get_num_threads()}, cpus {os.cpu_count()}; peak RSS {peak_rss_mb():.0f} MB")
    zp = pad_nan(z)
    ok = np.isfinite(z)
    rows, cols = z.shape
    for method in args.methods:
        mc = code_of[method]
        t0 = time.perf_counter()
        codes, frac, *_ = _receiver_codes(zp, cell, cell, mc, 1.1)
        t_recv = time.perf_counter() - t0
        t0 = time.perf_counter()
        acc, _, _ = _route_padded(zp, cell, cell, mc, 1.1)
        t_whole = time.perf_counter() - t0
        t_acc = t_whole - t_recv
        ref = np.ascontiguousarray(unpad(acc))
        del acc
        print(f"{method:4s} whole grid: _route_padded {t_whole:6.2f} s, of which receivers "
              f"{t_recv:5.2f} s: accumulation {t_acc:5.2f} s; peak RSS {peak_rss_mb():.0f} MB")
        c2 = codes.reshape(zp.shape)[1:-1, 1:-1]
        f2 = frac.reshape(zp.shape)[1:-1, 1:-1] if method == "dinf" else None
        for size in args.tiles:
            wins = tile_windows((rows, cols), size)
            t0 = time.perf_counter()
            maps = [tile_flow_map(c2[a:b, c:d], None if f2 is None else f2[a:b, c:d],
                                  ok[a:b, c:d], (a, c), (rows, cols), cell, cell, method)
                    for a, b, c, d in wins]
            t1 = time.perf_counter()
            inflows = solve_perimeter(maps)
            t2 = time.perf_counter()
            area = np.empty((rows, cols))
            for (a, b, c, d), add in zip(wins, inflows):
                area[a:b, c:d] = finish_tile_accumulation(
                    c2[a:b, c:d], None if f2 is None else f2[a:b, c:d], ok[a:b, c:d], add,
                    cell, cell, method)
            t3 = time.perf_counter()
            diff = float(np.nanmax(np.abs(area / ref - 1.0)))
            same = bool(np.array_equal(area, ref, equal_nan=True))
            perim = sum(m.n_perimeter for m in maps)
            links = sum(m.link_to.size for m in maps)
            nnz = sum(m.map_out.size for m in maps)
            cols_used = sum(int((np.diff(m.map_ptr) > 0).sum()) for m in maps)
            per_col = max(int(np.diff(m.map_ptr).max()) for m in maps)
            arena = max(m.arena_entries for m in maps)
            work = max(m.work_bytes for m in maps)
            edges = links + nnz
            system_mb = (2 * perim * 8 + edges * (8 + 8 + 8)) / 2**20
            total = t3 - t0
            print(f"     tiles {size:5d} ({len(wins)} tiles): maps {t1 - t0:6.2f} s, solve "
                  f"{t2 - t1:5.2f} s, finish {t3 - t2:6.2f} s, total {total:6.2f} s = "
                  f"{total / t_acc:4.2f}x the whole-grid accumulation; peak RSS "
                  f"{peak_rss_mb():.0f} MB")
            print(f"       perimeter system: {perim:,} perimeter cells ({2 * perim:,} nodes), "
                  f"{links:,} cross-tile links, {nnz:,} map entries = "
                  f"{nnz / perim:.2f} per perimeter cell ({nnz / max(cols_used, 1):.2f} per "
                  f"non-empty column, largest column {per_col}); {edges:,} edges, about "
                  f"{system_mb:.1f} MB")
            print(f"       per tile: largest arena {arena:,} entries "
                  f"({arena / (size * size):.2f} per cell), working memory {work / 2**20:.0f} MB"
                  f" ({work / (size * size):.1f} B/cell); max |tiled/whole - 1| = {diff:.1e}, "
                  f"bit-identical {same}")
            del maps, inflows, area


if __name__ == "__main__":
    main()
