"""Terrain and routing on a full lidar tile: wall time, cells per second, peak memory.

Usage::

    python benchmarks/bench_pipeline.py --size 10000 [--methods dinf,mfd,d8]

A seeded synthetic DEM (a power-law random field generated at a quarter of the
resolution, interpolated with cubic splines, plus centimetre-scale noise that
makes many small pits) is built in a child process and stored as .npy in
``benchmarks/_data`` so that its generation does not count toward the peak
memory of the measured process. The measured process then loads it, warms the
kernels up on a small grid and times, for each routing method, the stages of
a run: Horn slope of the original DEM, Priority-Flood filling, drainage over
flats, routing and accumulation to specific catchment area. Peak resident
memory (``ru_maxrss``) is reported in bytes per cell; it includes the DEM
itself, the Python interpreter and the compiled kernels.
"""

import argparse
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

DATA = Path(__file__).resolve().parent / "_data"


def make_dem(size: int, seed: int = 11) -> Path:
    """Write the synthetic DEM (float32, metres) and return its path."""
    DATA.mkdir(exist_ok=True)
    path = DATA / f"fractal_{size}_{seed}.npy"
    if path.exists():
        return path
    code = f"""
import numpy as np
from scipy import ndimage
rng = np.random.default_rng({seed})
n = max({size} // 4, 64)
ky = np.fft.fftfreq(n)[:, None]; kx = np.fft.rfftfreq(n)[None, :]
k = np.hypot(kx, ky); k[0, 0] = np.inf
spec = k ** -1.4 * np.exp(2j * np.pi * rng.random(k.shape))
coarse = np.fft.irfft2(spec, s=(n, n)); del spec, k
coarse = (coarse - coarse.mean()) / coarse.std() * 60.0
z = ndimage.zoom(coarse.astype(np.float32), {size} / n, order=3, output=np.float32)[:{size}, :{size}]
del coarse
z += rng.uniform(-0.05, 0.05, z.shape).astype(np.float32)
z += np.float32(500.0)
np.save({str(path)!r}, z)
"""
    subprocess.run([sys.executable, "-c", code], check=True)
    return path


def peak_rss_bytes() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def stability_share(slope, sca, terrain_s) -> None:
    """Time the deterministic stability products on the same tile (one soil unit, scalars)."""
    from slopescreen.hydrology import steady_wetness
    from slopescreen.stability import critical_recharge, factor_of_safety

    soil = dict(cohesion_kpa=2.0, root_cohesion_kpa=3.0, friction_deg=35.0, unit_weight_kn_m3=18.5)
    small = (slice(0, 50), slice(0, 50))  # warm-up compiles the kernels
    w = steady_wetness(sca[small], slope[small], recharge_mm_per_day=60.0,
                       conductivity_m_per_day=2.0, depth_m=1.2)
    factor_of_safety(slope[small], 1.2, w, **soil)
    critical_recharge(slope[small], sca[small], depth_m=1.2, conductivity_m_per_day=2.0, **soil)
    t0 = time.perf_counter()
    w = steady_wetness(sca, slope, recharge_mm_per_day=60.0, conductivity_m_per_day=2.0, depth_m=1.2)
    t1 = time.perf_counter()
    fs = factor_of_safety(slope, 1.2, w, **soil)
    t2 = time.perf_counter()
    q, klass = critical_recharge(slope, sca, depth_m=1.2, conductivity_m_per_day=2.0, **soil)
    t3 = time.perf_counter()
    det = t3 - t0
    print(f"  stability: wetness {t1 - t0:5.1f} s | FS {t2 - t1:5.1f} s | critical recharge "
          f"{t3 - t2:5.1f} s | total {det:5.1f} s = {100 * det / terrain_s:4.1f} % of terrain+routing"
          f" (target < 10 %) | peak RSS {peak_rss_bytes() / 2**30:5.2f} GiB")
    del w, fs, q, klass


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=10_000)
    ap.add_argument("--methods", default="dinf")
    ap.add_argument("--cell", type=float, default=1.0, help="cell size, m")
    ap.add_argument("--stability", action="store_true",
                    help="also time steady wetness, factor of safety and critical recharge "
                         "(first method only) and print their share of the terrain stage")
    args = ap.parse_args()

    path = make_dem(args.size)
    from slopescreen.routing import specific_catchment_area
    from slopescreen.terrain import fill_depressions, slope_aspect

    # warm-up: compile every kernel on a small grid so compilation is not timed
    small = np.load(path, mmap_mode="r")[:200, :200].astype(np.float32)
    slope_aspect(small, 1.0, 1.0)
    for m in args.methods.split(","):
        specific_catchment_area(fill_depressions(small), 1.0, 1.0, method=m)
    del small
    base = peak_rss_bytes()

    z = np.load(path)
    cells = z.size
    print(f"grid {z.shape[0]} x {z.shape[1]} = {cells:,} cells, float32 DEM "
          f"({z.nbytes / cells:.0f} B/cell); process peak before the run {base / 2**20:,.0f} MiB")
    for method in args.methods.split(","):
        t0 = time.perf_counter()
        slope, _aspect = slope_aspect(z, args.cell, args.cell)
        del _aspect
        t1 = time.perf_counter()
        filled = fill_depressions(z)
        t2 = time.perf_counter()
        sca = specific_catchment_area(filled, args.cell, args.cell, method=method)
        t3 = time.perf_counter()
        del filled
        total = t3 - t0
        print(f"[{method}] slope {t1 - t0:6.1f} s | fill {t2 - t1:6.1f} s | routing+SCA {t3 - t2:6.1f} s"
              f" | total {total:6.1f} s | {cells / total / 1e6:5.2f} M cells/s"
              f" | peak RSS {peak_rss_bytes() / 2**30:5.2f} GiB = {peak_rss_bytes() / cells:5.1f} B/cell")
        assert np.isfinite(sca).all()
        if args.stability and method == args.methods.split(",")[0]:
            stability_share(slope, sca, total)
        del slope, sca
    print("targets (issue 2): total <= 90 s and <= 40 B/cell at 10,000 x 10,000")


if __name__ == "__main__":
    main()
