"""Speed of the rank agreement with mapped landslides on a 10^8-cell raster.

Builds a seeded float32 factor-of-safety-like field (lognormal, 1 % nodata) of
``--size`` x ``--size`` cells and an inventory of ``--landslides`` square landslides
of ``--cells`` cells each (10^5 cells in 1,000 landslides by default), lowered a little
so the map has skill. Times, in this process:

* ``rank_agreement`` (lower is hazard, ``--boot`` bootstrap replicates, best of
  ``--repeat``);
* the reference: ``numpy.sort`` of the same array (one run), the cost of any method that
  ranks the cells by sorting them.

Prints both times, their ratio, the AUC with its interval, and the peak resident memory
after building the field, after the agreement and after the sort. The kernel is compiled
(or loaded from numba's cache) on a small field first, not timed.

Usage::

    python benchmarks/bench_agreement.py                      # 10,000 x 10,000 cells
    python benchmarks/bench_agreement.py --size 4000 --boot 200
"""

import argparse
import math
import resource
import time

import numba
import numpy as np

from slopescreen.inventory.agreement import rank_agreement


def peak_rss_mb():
    # Linux reports ru_maxrss in KiB.
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def field_and_inventory(side, n_slides, cells_per_slide, seed):
    """A float32 FS-like field, the flat indices of the landslide cells and their ids."""
    rng = np.random.default_rng(seed)
    fs = np.empty((side, side), np.float32)
    for r in range(0, side, 500):          # in row blocks: no temporary of the grid's size
        block = fs[r:r + 500]
        rng.standard_normal(block.shape, dtype=np.float32, out=block)
        block *= np.float32(0.5)
        block += np.float32(0.4)
        np.exp(block, out=block)
        block[rng.random(block.shape, dtype=np.float32) < 0.01] = np.nan
    w = math.isqrt(cells_per_slide)
    h = cells_per_slide // w
    # one landslide per cell of a coarse lattice, so landslides never overlap
    lattice_r, lattice_c = side // (h + 1), side // (w + 1)
    pick = rng.choice(lattice_r * lattice_c, n_slides, replace=False)
    r0 = (pick // lattice_c) * (h + 1)
    c0 = (pick % lattice_c) * (w + 1)
    dr, dc = np.divmod(np.arange(h * w), w)
    index = ((r0[:, None] + dr) * side + (c0[:, None] + dc)).ravel().astype(np.int64)
    groups = np.repeat(np.arange(n_slides, dtype=np.int64), h * w)
    flat = fs.reshape(-1)
    flat[index] *= np.float32(0.8)         # failing ground: a lower factor of safety
    return fs, index, groups


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__,
                                 formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--size", type=int, default=10000, help="rows = cols (default 10000)")
    ap.add_argument("--landslides", type=int, default=1000)
    ap.add_argument("--cells", type=int, default=100, help="cells per landslide")
    ap.add_argument("--boot", type=int, default=1000, help="bootstrap replicates")
    ap.add_argument("--repeat", type=int, default=3, help="best of N for rank_agreement")
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    print(f"numpy {np.__version__}, numba {numba.__version__}, "
          f"numba threads {numba.get_num_threads()}")

    # warm-up: compile (or load from cache) the kernel for float32
    small, small_idx, small_groups = field_and_inventory(200, 20, 16, seed=0)
    rank_agreement(small, small_idx, small_groups, higher_is_hazard=False, n_boot=10)

    t0 = time.perf_counter()
    fs, index, groups = field_and_inventory(args.size, args.landslides, args.cells, args.seed)
    print(f"grid {args.size} x {args.size} = {fs.size:,} cells float32 "
          f"({fs.nbytes / 2**20:.0f} MB), {index.size:,} landslide cells in "
          f"{args.landslides:,} landslides (built in {time.perf_counter() - t0:.1f} s)")
    rss_field = peak_rss_mb()

    best = math.inf
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        a = rank_agreement(fs, index, groups, higher_is_hazard=False, n_boot=args.boot,
                           seed=args.seed)
        best = min(best, time.perf_counter() - t0)
    rss_agreement = peak_rss_mb()
    print(f"rank_agreement: {best:.3f} s (best of {args.repeat}), {fs.size / best / 1e6:.0f} "
          f"M cells/s; {args.boot} bootstrap replicates")
    print(f"  AUC {a.auc:.4f} (95 % bootstrap interval {a.auc_ci[0]:.4f} to {a.auc_ci[1]:.4f}; "
          f"bootstrap SE {a.auc_bootstrap_se:.4f}, DeLong SE {a.delong_se:.5f}), "
          f"success area {a.success_area:.4f}; {a.n_positive:,} positive and "
          f"{a.n_negative:,} negative cells")

    t0 = time.perf_counter()
    ordered = np.sort(fs, axis=None)
    t_sort = time.perf_counter() - t0
    del ordered
    print(f"numpy.sort of the same array: {t_sort:.3f} s")
    print(f"ratio sort_time / rank_agreement_time: {t_sort / best:.2f}")
    print(f"peak RSS: {rss_field:.0f} MB after building the field, {rss_agreement:.0f} MB after "
          f"rank_agreement (+{rss_agreement - rss_field:.0f} MB), {peak_rss_mb():.0f} MB after "
          f"the sort")


if __name__ == "__main__":
    main()
