"""Time depression filling against scikit-image's reconstruction by erosion.

Builds a seeded fractal DEM by spectral synthesis (power-law spectrum),
carves random pits into it so that there is real filling to do, then times
:func:`slopescreen.terrain.fill_depressions` and
``skimage.morphology.reconstruction(seed, mask, method="erosion")`` on the
same array in the same process, checks that both results are equal, and
prints seconds, cells per second, their ratio and peak resident memory.

The DEM is built in a child process and handed over as a temporary .npy
file, so that the FFT's working arrays do not count toward the peak
resident memory of the measuring process.

Usage::

    python benchmarks/bench_fill.py [--size 4000] [--repeat 3]
                                    [--repeat-skimage 1] [--beta 2.5] [--seed 1]
                                    [--skip-skimage] [--epsilon]
"""

import argparse
import os
import platform
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np

from slopescreen.terrain import _fill_depressions_padded, fill_depressions


def fractal_dem(rows, cols, *, beta=2.5, relief=400.0, seed=1, pits_per_mcell=2000):
    """Seeded fractal surface with random pits, float32 metres.

    The spectrum falls as ``k**-beta`` (power), i.e. amplitudes as
    ``k**(-beta/2)``; ``pits_per_mcell`` pits per million cells, each a
    small bowl up to 5 cells across and up to 2 % of the relief deep.
    """
    from scipy import fft

    rng = np.random.default_rng(seed)
    noise = rng.standard_normal((rows, cols), dtype=np.float32)
    spec = fft.rfft2(noise)  # complex64 for float32 input
    del noise
    ky = np.fft.fftfreq(rows).astype(np.float32)[:, None]
    kx = np.fft.rfftfreq(cols).astype(np.float32)[None, :]
    for r0 in range(0, rows, 1024):  # filter in row blocks: no full-size k array
        k = np.sqrt(ky[r0 : r0 + 1024] ** 2 + kx**2)
        k[k == 0] = np.inf  # drop the mean
        spec[r0 : r0 + 1024] *= k ** np.float32(-beta / 2.0)
    dem = fft.irfft2(spec, s=(rows, cols)).astype(np.float32, copy=False)
    del spec
    dem -= dem.min()
    dem *= np.float32(relief / dem.max())
    npits = int(pits_per_mcell * rows * cols / 1e6)
    pr = rng.integers(3, rows - 3, npits)
    pc = rng.integers(3, cols - 3, npits)
    depth = rng.uniform(0.0, 0.02 * relief, npits).astype(np.float32)
    radius = rng.integers(0, 3, npits)
    for r, c, d, rad in zip(pr, pc, depth, radius):
        win = dem[r - rad : r + rad + 1, c - rad : c + rad + 1]
        win -= d
    return dem


def skimage_fill(dem):
    """Border-seeded reconstruction by erosion (8-connected)."""
    from skimage.morphology import reconstruction

    seed = np.full(dem.shape, dem.max(), dtype=dem.dtype)
    seed[0, :] = dem[0, :]
    seed[-1, :] = dem[-1, :]
    seed[:, 0] = dem[:, 0]
    seed[:, -1] = dem[:, -1]
    return reconstruction(seed, dem, method="erosion", footprint=np.ones((3, 3), dtype=bool))


def peak_rss_mb():
    # Linux reports ru_maxrss in KiB.
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def best_of(fn, repeat):
    best = np.inf
    out = None
    for _ in range(repeat):
        out = None
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=4000, help="rows = cols (default 4000)")
    ap.add_argument("--repeat", type=int, default=3, help="best of N for slopescreen")
    ap.add_argument("--repeat-skimage", type=int, default=1, help="best of N for scikit-image")
    ap.add_argument("--beta", type=float, default=2.5, help="spectral exponent")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--epsilon", action="store_true", help="also time the epsilon variant")
    ap.add_argument("--skip-skimage", action="store_true", help="time slopescreen only")
    ap.add_argument("--write-dem", metavar="PATH", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)

    n = args.size
    if args.write_dem:  # child process: build the DEM and exit
        np.save(args.write_dem, fractal_dem(n, n, beta=args.beta, seed=args.seed))
        return

    print(f"python {platform.python_version()}, numpy {np.__version__}")
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "dem.npy")
        subprocess.run(
            [sys.executable, __file__, "--size", str(n), "--beta", str(args.beta),
             "--seed", str(args.seed), "--write-dem", path],
            check=True,
        )
        dem = np.load(path)
    print(f"grid: {n} x {n} = {n * n:,} cells float32, beta {args.beta}, seed {args.seed} "
          f"(built in {time.perf_counter() - t0:.1f} s)")

    # Warm-up: compile (or load cached) kernels on a small grid.
    small = fractal_dem(64, 64, seed=0)
    fill_depressions(small)
    fill_depressions(small, epsilon=True)
    rss_before = peak_rss_mb()

    t_ours, ours = best_of(lambda: fill_depressions(dem), args.repeat)
    rss_after = peak_rss_mb()
    raised = int(np.count_nonzero(ours > dem))
    print(f"slopescreen fill_depressions: {t_ours:.3f} s (best of {args.repeat}), "
          f"{n * n / t_ours / 1e6:.1f} Mcells/s; cells raised: {raised:,} "
          f"({100.0 * raised / (n * n):.2f} %)")
    print(f"  peak RSS: {rss_before:.0f} MB after loading the DEM ({dem.nbytes / 2**20:.0f} MB) "
          f"and warming up, {rss_after:.0f} MB after filling: "
          f"+{(rss_after - rss_before) * 2**20 / (n * n):.1f} bytes per cell for fill_depressions "
          f"(input kept, output new)")

    zp = np.full((n + 2, n + 2), np.nan, dtype=np.float32)
    zp[1:-1, 1:-1] = dem
    t0 = time.perf_counter()
    _, heap_count = _fill_depressions_padded(zp, return_heap_count=True)
    t_padded = time.perf_counter() - t0
    print(f"  padded in-place path: {t_padded:.3f} s; cells through the heap: {heap_count:,} "
          f"({100.0 * heap_count / (n * n):.1f} %), the rest through the pit queue")
    assert np.array_equal(zp[1:-1, 1:-1], ours)
    del zp

    if args.epsilon:
        t_eps, eps = best_of(lambda: fill_depressions(dem, epsilon=True), args.repeat)
        assert (eps >= ours).all()
        print(f"slopescreen fill_depressions(epsilon=True): {t_eps:.3f} s, "
              f"{n * n / t_eps / 1e6:.1f} Mcells/s")
        del eps

    if args.skip_skimage:
        return
    import skimage

    t_ref, ref = best_of(lambda: skimage_fill(dem), args.repeat_skimage)
    equal = np.array_equal(ref.astype(np.float32), ours)
    print(f"scikit-image {skimage.__version__} reconstruction(erosion): {t_ref:.3f} s "
          f"(best of {args.repeat_skimage}), {n * n / t_ref / 1e6:.2f} Mcells/s")
    print(f"results equal: {equal}")
    print(f"ratio skimage_time / slopescreen_time: {t_ref / t_ours:.1f}x")
    print(f"peak RSS at end (includes scikit-image): {peak_rss_mb():.0f} MB")
    if not equal:
        raise SystemExit("results differ")


if __name__ == "__main__":
    main()
