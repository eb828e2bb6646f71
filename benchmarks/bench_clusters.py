"""Speed of the failure-cluster stage: failing-cluster map and least-stable (FS bound) map.

Terrain: a crop of the seeded fractal DEM in benchmarks/_data (or a seeded synthetic surface
when it is absent), cell 5 m, slope and aspect by Horn; wetness rises with a smoothed
convergence proxy. Prints seconds, cells per second and the counts that matter.

    python benchmarks/bench_clusters.py                 # 1000 x 1000 failing map, 400 x 400 bound map
    python benchmarks/bench_clusters.py --bound-cells 1000
"""

import argparse
import pathlib
import time

import numpy as np
from scipy import ndimage

from slopescreen.clusters import cluster_forces
from slopescreen.clusters.search import failing_set, fs_bound_map
from slopescreen.clusters.stage import failure_clusters
from slopescreen.terrain import slope_aspect

DATA = pathlib.Path(__file__).parent / "_data" / "fractal_10000_11.npy"
SOIL = dict(cohesion_kpa=1.0, root_cohesion_kpa=1.0, lateral_root_cohesion_kpa=4.0,
            friction_deg=34.0, unit_weight_kn_m3=18.5)


def terrain(n, seed=0):
    if DATA.exists():
        z = np.array(np.load(DATA, mmap_mode="r")[:n, :n], dtype=np.float64)
    else:
        rng = np.random.default_rng(seed)
        z = ndimage.gaussian_filter(rng.standard_normal((n, n)), 8) * 4000.0
    s0, _ = slope_aspect(z, 5.0, 5.0)
    # rescale the relief so that the median slope is 27 degrees (hillslopes)
    z = z * np.tan(np.radians(27.0)) / np.tan(np.radians(np.median(s0)))
    slope, aspect = slope_aspect(z, 5.0, 5.0)
    lap = ndimage.gaussian_filter(z, 4, order=0) - z
    wet = np.clip(0.5 + lap / (np.abs(lap).std() * 3 + 1e-9), 0.0, 1.0)
    return slope, aspect, wet


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--cells", type=int, default=1000, help="side of the failing-cluster grid")
    ap.add_argument("--bound-cells", type=int, default=400, help="side of the bound-map grid")
    args = ap.parse_args()

    # warm-up: numba compilation
    s, a, w = terrain(64)
    failure_clusters(s, 1.2, w, dx=5.0, dy=5.0, aspect_deg=a, bound=True, **SOIL)

    n = args.cells
    slope, aspect, wet = terrain(n)
    t0 = time.perf_counter()
    f = cluster_forces(slope, aspect, 1.2, wet, dx=5.0, dy=5.0, **SOIL)
    t1 = time.perf_counter()
    fs = failing_set(f)
    t2 = time.perf_counter()
    res = failure_clusters(slope, 1.2, wet, dx=5.0, dy=5.0, aspect_deg=aspect, bound=False,
                           **SOIL)
    t3 = time.perf_counter()
    cells = n * n
    print(f"failing-cluster map {n}x{n}: forces {t1 - t0:.2f} s, tiled cut {t2 - t1:.2f} s "
          f"({fs.n_cuts} cuts), full stage with table {t3 - t2:.2f} s "
          f"({cells / (t3 - t2):.3g} cells/s; target < 60 s)")
    print(f"  clusters {int(res.labels.max())}, cells in clusters {int((res.labels > 0).sum())}, "
          f"undecided {res.undecided_cells}, dropped {res.dropped}, modular faces "
          f"{res.modular_faces}, cell FS < 1: {int((f.cell_fs < 1).sum())}")

    nb = args.bound_cells
    fb = cluster_forces(slope[:nb, :nb], aspect[:nb, :nb], 1.2, wet[:nb, :nb], dx=5.0, dy=5.0,
                        **SOIL)
    t4 = time.perf_counter()
    bound, windows, extent = fs_bound_map(fb, window_cells=40, stride_cells=20)
    t5 = time.perf_counter()
    per = (t5 - t4) / max(len(windows), 1)
    cuts = np.array([w.n_cuts for w in windows])
    print(f"least-stable / bound map {nb}x{nb}: {t5 - t4:.2f} s, {len(windows)} windows 40x40 "
          f"(stride 20, extent {extent} cells), {per * 1e3:.1f} ms per window, cuts per window "
          f"median {np.median(cuts):.0f} max {cuts.max()}")
    scale = (1000 / nb) ** 2
    print(f"  extrapolated to 1000x1000: {(t5 - t4) * scale:.0f} s (target < 300 s); "
          f"bound >= 1 on {float(np.mean(bound[np.isfinite(bound)] >= 1)):.1%} of cells")


if __name__ == "__main__":
    main()
