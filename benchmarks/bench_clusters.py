"""Speed of the failure-cluster stage: failing-cluster map, least-stable (FS bound) map and
the exact size-resolved program (mixed-integer, per 40 x 40 window and area band).

Terrain: a crop of the seeded fractal DEM in benchmarks/_data (or a seeded synthetic surface
when it is absent), cell 5 m, slope and aspect by Horn; wetness rises with a smoothed
convergence proxy. Prints seconds, cells per second and the counts that matter.

    python benchmarks/bench_clusters.py                 # 1000 x 1000 failing map, 400 x 400 bound map
    python benchmarks/bench_clusters.py --bound-cells 1000
    python benchmarks/bench_clusters.py --only-size     # size-resolved program only
    python benchmarks/bench_clusters.py --only-probability   # cluster Monte Carlo only
"""

import argparse
import pathlib
import time

import numpy as np
from scipy import ndimage

from slopescreen.clusters import cluster_forces
from slopescreen.clusters.search import failing_set, fs_bound_map
from slopescreen.clusters.sizes import area_bands, candidate_windows, size_resolved_clusters
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
    ap.add_argument("--size-cells", type=int, default=400,
                    help="side of the grid the size-resolved candidates come from")
    ap.add_argument("--size-windows", type=int, default=8,
                    help="40 x 40 candidate windows (half around failing clusters, half the "
                         "least-stable bound-map windows)")
    ap.add_argument("--size-bands", type=int, default=3, help="area bands over 25..2500 m^2")
    ap.add_argument("--size-time-limit", type=float, default=10.0,
                    help="MILP time limit per window and band, s")
    ap.add_argument("--only-size", action="store_true", help="run the size-resolved part only")
    ap.add_argument("--only-probability", action="store_true",
                    help="run the cluster Monte Carlo (on the failing clusters) only")
    args = ap.parse_args()

    # warm-up: numba compilation
    s, a, w = terrain(64)
    failure_clusters(s, 1.2, w, dx=5.0, dy=5.0, aspect_deg=a, bound=True, **SOIL)
    if args.only_size:
        size_resolved(args)
        return

    if args.only_probability:
        # the clusters of the size-resolved part's grid, as in a whole run
        n = args.size_cells
        slope, aspect, wet = (v[:n, :n] for v in terrain(max(n, 64)))
        res = failure_clusters(slope, 1.2, wet, dx=5.0, dy=5.0, aspect_deg=aspect, bound=False,
                               **SOIL)
        probability(slope, aspect, wet, res.labels)
        return
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
    size_resolved(args)


def size_resolved(args):
    """Exact size-resolved program: seconds per 40 x 40 window and band, proven share."""
    n = args.size_cells
    slope, aspect, wet = terrain(max(n, 64))
    slope, aspect, wet = slope[:n, :n], aspect[:n, :n], wet[:n, :n]
    f = cluster_forces(slope, aspect, 1.2, wet, dx=5.0, dy=5.0, **SOIL)
    res = failure_clusters(slope, 1.2, wet, dx=5.0, dy=5.0, aspect_deg=aspect, bound=False,
                           **SOIL)
    _, windows, _ = fs_bound_map(f, window_cells=40, stride_cells=20)
    half = args.size_windows // 2
    around = candidate_windows(f.valid.shape, labels=res.labels, window_cells=40)
    # clusters spread over the grid: take every k-th so the windows do not all overlap
    step = max(1, len(around) // max(half, 1))
    picked = around[::step][:half]
    least = candidate_windows(f.valid.shape, windows=windows,
                              n_least=args.size_windows - len(picked) + 4)
    cands = picked + [w for w in least if w not in picked][:args.size_windows - len(picked)]
    bands = area_bands(25.0, 2500.0, 25.0, args.size_bands)
    # warm-up: numba kernels of the heuristic and cvxpy's first canonicalisation
    size_resolved_clusters(f, candidates=[(0, 12, 0, 12)], min_area_m2=25.0, max_area_m2=300.0,
                           bands=2, time_limit_s=2.0)
    # one call per window, timed from outside: the answers of a window are all kept (one call
    # over every window lists a cluster that answers a band in several windows once)
    per_window = []
    parts = []
    for w in cands:
        t0 = time.perf_counter()
        parts.append(size_resolved_clusters(f, candidates=[w], min_area_m2=25.0,
                                            max_area_m2=2500.0, bands=args.size_bands,
                                            time_limit_s=args.size_time_limit).table)
        per_window.append(time.perf_counter() - t0)
    per_window = np.array(per_window)
    total = float(per_window.sum())
    t = {k: np.concatenate([part[k] for part in parts]) for k in parts[0]}
    secs = t["seconds"]
    print(f"size-resolved program: {len(cands)} windows 40x40 ({len(picked)} around failing "
          f"clusters, {len(cands) - len(picked)} least-stable), bands (cells) {bands}, "
          f"time limit {args.size_time_limit:g} s per band; total {total:.1f} s")
    print(f"  per window (all bands): median {np.median(per_window):.2f} s, max "
          f"{per_window.max():.2f} s (target < 15 s median per 40x40 window)")
    for b in range(len(bands)):
        sel = t["band"] == b
        methods = {str(m): int((t["method"][sel] == m).sum()) for m in np.unique(t["method"][sel])}
        gaps = 1.0 - t["lower_bound"][sel] / t["fs"][sel]
        print(f"  band {b} {bands[b]} cells: median {np.median(secs[sel]):.2f} s, max "
              f"{secs[sel].max():.2f} s, proven {int(t['proven'][sel].sum())}/{int(sel.sum())}, "
              f"methods {methods}, worst bound gap {np.nanmax(gaps):.2%}, heuristic = final in "
              f"{int(np.sum(np.isclose(t['heuristic_fs'][sel], t['fs'][sel], rtol=1e-9)))}")
    stress(args.size_time_limit)
    probability(slope, aspect, wet, res.labels)


def stress(limit):
    """A window where nearly every cell fails (steep wet plane): the time limit must hold.

    HiGHS's root cut rounds do not look at the clock; the solver process is killed after the
    limit plus its grace, so the band's wall time stays near limit + grace.
    """
    from slopescreen.clusters._highs_process import _PROCESS, grace_s

    rows, cols = 40, 30
    slope = np.full((rows, cols), np.degrees(np.arctan(0.85)))
    aspect = np.full((rows, cols), 180.0)
    f = cluster_forces(slope, aspect, 1.0, 1.0, dx=5.0, dy=5.0, cohesion_kpa=2.0,
                       root_cohesion_kpa=1.0, lateral_root_cohesion_kpa=0.0, friction_deg=35.0,
                       unit_weight_kn_m3=18.0)
    kills = _PROCESS.kills
    t0 = time.perf_counter()
    out = size_resolved_clusters(f, candidates=[(0, rows, 0, cols)], min_area_m2=25.0,
                                 max_area_m2=2500.0, bands=1, time_limit_s=limit)
    dt = time.perf_counter() - t0
    t = out.table
    print(f"stress window {rows}x{cols} (FS < 1 on every cell): {dt:.1f} s for one band with a "
          f"{limit:g} s limit (limit + grace {limit + grace_s(limit):.1f} s); solver processes "
          f"killed {_PROCESS.kills - kills}; method {t['method'][0]}, FS {t['fs'][0]:.3f}, "
          f"lower bound {t['lower_bound'][0]:.3f}")


def probability(slope, aspect, wet, labels, samples=400):
    """Monte Carlo probability that each failing cluster fails: seconds for N samples.

    Three ways of getting the wetness per sample: held fixed (the reference), the steady
    M&D state and Iverson's storm head, each recomputed from the drawn parameters.
    """
    from slopescreen.clusters.probability import cluster_failure_probability
    from slopescreen.hydrology import SteadyRain, StormRain
    from slopescreen.parameters import lognormal, normal, uniform
    from slopescreen.probability import encode_table

    table = encode_table([{"depth_m": uniform(1.0, 1.4), "cohesion_kpa": normal(1.0, 0.3),
                           "root_cohesion_kpa": uniform(0.5, 1.5),
                           "friction_deg": normal(34.0, 2.0), "unit_weight_kn_m3": 18.5,
                           "conductivity_m_per_day": lognormal(2.0, 0.5),
                           "diffusivity_m2_per_s": 5e-5}])
    unit = np.zeros(labels.shape, dtype=np.int64)
    sca = np.full(labels.shape, 80.0)
    cases = {"fixed wetness": dict(wetness=wet),
             "steady rain": dict(rain=SteadyRain(60.0), sca_m=sca),
             "storm": dict(rain=StormRain(15.0, 12.0, 0.8)),
             # the pipeline's depth rule (docs/methods.md, "Storm response (Iverson 2000)")
             "storm, 20 depths": dict(rain=StormRain(15.0, 12.0, 0.8), n_depths=20,
                                      min_failure_depth_m=0.3),
             "storm, 20 depths, antecedent 2 mm/day": dict(
                 rain=StormRain(15.0, 12.0, antecedent_mm_per_day=2.0), sca_m=sca, n_depths=20,
                 min_failure_depth_m=0.3)}
    small = np.zeros(labels.shape, np.int32)
    small[:3, :3] = 1
    cells = int((labels > 0).sum())
    ref = None
    for name, extra in cases.items():
        kw = dict(lateral_root_cohesion_kpa=uniform(2.0, 6.0), dx=5.0, dy=5.0, samples=samples,
                  seed=7, **extra)
        cluster_failure_probability(small, slope, aspect, unit, table, **kw)  # compilation
        t0 = time.perf_counter()
        res = cluster_failure_probability(labels, slope, aspect, unit, table, **kw)
        dt = time.perf_counter() - t0
        ref = ref or dt
        print(f"cluster failure probability ({name}): {res.ids.size} clusters ({cells} cells) "
              f"x {samples} samples in {dt:.2f} s ({dt / ref:.2f}x fixed wetness); median P_f "
              f"{np.median(res.p_f):.2f}")


if __name__ == "__main__":
    main()
