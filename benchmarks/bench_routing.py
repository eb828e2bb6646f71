"""Flow routing speed and memory on a synthetic fractal DEM.

Builds a seeded fractal surface by spectral synthesis (numpy FFT, power
spectrum ~ k^-beta), fills it (slopescreen.terrain.fill_depressions when
available, else scikit-image's reconstruction by erosion, the same surface),
then, for each routing method, times ``flow_accumulation`` and
``specific_catchment_area`` in a fresh child process (after a warm-up on a
small grid) and prints seconds, cells per second and peak resident memory.

Usage::

    python benchmarks/bench_routing.py --size 2000
    python benchmarks/bench_routing.py --size 4000 --methods dinf d8
"""

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np


def fractal_dem(n, seed, beta=2.6, relief=400.0):
    """Seeded n x n fractal surface (float32, metres) with power spectrum ~ k^-beta."""
    rng = np.random.default_rng(seed)
    ky = np.fft.fftfreq(n)[:, None]
    kx = np.fft.rfftfreq(n)[None, :]
    k = np.hypot(ky, kx)
    k[0, 0] = 1.0
    amplitude = k ** (-beta / 2.0)
    amplitude[0, 0] = 0.0
    phase = rng.uniform(0.0, 2.0 * np.pi, amplitude.shape)
    z = np.fft.irfft2(amplitude * np.exp(1j * phase), s=(n, n))
    z -= z.min()
    z *= relief / z.max()
    return z.astype(np.float32)


def fill(z):
    try:
        from slopescreen.terrain import fill_depressions
    except ImportError:
        fill_depressions = None
    if fill_depressions is not None:
        return fill_depressions(z), "slopescreen.terrain.fill_depressions"
    from skimage.morphology import reconstruction

    seed = np.full_like(z, z.max())
    seed[[0, -1], :] = z[[0, -1], :]
    seed[:, [0, -1]] = z[:, [0, -1]]
    out = reconstruction(seed, z, method="erosion", footprint=np.ones((3, 3)))
    return out.astype(z.dtype), "skimage reconstruction by erosion"


def peak_rss_mb():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def child(method, path, cell, repeat):
    import tracemalloc

    from slopescreen.routing import flow_accumulation, specific_catchment_area

    small = fill(fractal_dem(64, 1))[0]
    flow_accumulation(small, cell, cell, method=method)  # warm-up: compile or load cache
    specific_catchment_area(small, cell, cell, method=method)
    z = np.load(path)
    n = z.size
    # Working memory of one call: every large array is allocated by numpy,
    # which reports to tracemalloc (the kernels allocate only small stacks).
    working = {}
    tracemalloc.start()
    for name, fn in (("sca", specific_catchment_area), ("flow", flow_accumulation)):
        tracemalloc.reset_peak()
        before = tracemalloc.get_traced_memory()[0]
        out = fn(z, cell, cell, method=method)
        working[name] = (tracemalloc.get_traced_memory()[1] - before) / n
        if name == "flow":
            outflow, undrained = out.outflow_m2, int(out.undrained.sum())
        del out
    tracemalloc.stop()
    timings = {"sca": [], "flow": []}
    for _ in range(repeat):
        for name, fn in (("sca", specific_catchment_area), ("flow", flow_accumulation)):
            t0 = time.perf_counter()
            out = fn(z, cell, cell, method=method)
            timings[name].append(time.perf_counter() - t0)
            del out
    t_flow, t_sca = min(timings["flow"]), min(timings["sca"])
    total = n * cell * cell
    print(f"{method:5s} specific_catchment_area {t_sca:7.2f} s {n / t_sca / 1e6:6.2f} Mcells/s,"
          f" working memory {working['sca']:5.1f} B/cell"
          f" | flow_accumulation {t_flow:7.2f} s {n / t_flow / 1e6:6.2f} Mcells/s,"
          f" {working['flow']:5.1f} B/cell"
          f" | peak RSS {peak_rss_mb():6.0f} MB (input DEM {z.nbytes / 2**20:.0f} MB)"
          f" | outflow/area - 1 = {outflow / total - 1:+.1e}, undrained {undrained}")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=2000, help="grid is size x size cells")
    ap.add_argument("--cell", type=float, default=10.0, help="cell size, m")
    ap.add_argument("--seed", type=int, default=42)
    ap.add_argument("--repeat", type=int, default=1, help="best of N timings")
    ap.add_argument("--methods", nargs="+", default=["dinf", "mfd", "d8"])
    ap.add_argument("--child", help=argparse.SUPPRESS)
    ap.add_argument("--dem", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        child(args.child, args.dem, args.cell, args.repeat)
        return
    import numba

    t0 = time.perf_counter()
    z = fractal_dem(args.size, args.seed)
    t1 = time.perf_counter()
    filled, how = fill(z)
    t2 = time.perf_counter()
    print(f"grid {args.size} x {args.size} = {z.size / 1e6:.1f} Mcells, cell {args.cell} m, "
          f"seed {args.seed}; numba threads {numba.get_num_threads()}, cpus {os.cpu_count()}")
    print(f"DEM synthesis {t1 - t0:.1f} s; filled with {how} in {t2 - t1:.1f} s; "
          f"raised cells {(filled > z).mean() * 100:.1f} %")
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "dem.npy")
        np.save(path, filled)
        del z, filled
        for method in args.methods:
            subprocess.run([sys.executable, os.path.abspath(__file__), "--child", method,
                            "--dem", path, "--cell", str(args.cell),
                            "--repeat", str(args.repeat)], check=True)


if __name__ == "__main__":
    main()
