"""Speed of the stability stage: deterministic maps and Monte Carlo P(FS < 1).

Prints cells per second for steady wetness, factor of safety and critical
recharge on a synthetic grid, and samples x cells per second and peak memory
for the Monte Carlo, each with its ratio to a plain-numpy version of the same
computation run in this process on a smaller grid.

    python benchmarks/bench_stability.py                     # 2000 x 2000 grid, 10^6 MC cells
    python benchmarks/bench_stability.py --cells 10000000    # the 10^7-cell target
"""

import argparse
import math
import resource
import time

import numba
import numpy as np

from slopescreen.hydrology import SteadyRain, StormRain, steady_wetness
from slopescreen.parameters import normal, uniform
from slopescreen.probability import encode_table, failure_probability
from slopescreen.stability import critical_recharge, factor_of_safety

UNIT = {
    "depth_m": uniform(0.8, 1.6),
    "cohesion_kpa": 1.0,
    "root_cohesion_kpa": uniform(2.0, 8.0),
    "friction_deg": normal(34.0, 2.0),
    "unit_weight_kn_m3": 18.5,
    "conductivity_m_per_day": 2.0,
    "diffusivity_m2_per_s": 5e-5,
}
STRENGTH = dict(cohesion_kpa=1.0, root_cohesion_kpa=5.0, friction_deg=34.0, unit_weight_kn_m3=18.5)


def synthetic(n_cells, seed=0):
    """Slope (deg) and specific catchment area (m) of a rough synthetic terrain, float32.

    A square grid when n_cells is a square number, else one row of n_cells.
    """
    rng = np.random.default_rng(seed)
    side = math.isqrt(n_cells)
    shape = (side, side) if side * side == n_cells else (1, n_cells)
    y, x = np.indices(shape, dtype=np.float32) * np.float32(0.02)
    slope = 25 + 12 * np.sin(x) * np.cos(0.7 * y) + rng.normal(0, 5, shape)
    slope = np.clip(slope, 0, 70).astype(np.float32)
    sca = np.exp(rng.normal(3.5, 1.2, shape)).astype(np.float32)
    slope[rng.random(shape) < 0.01] = np.nan
    return slope, sca


def timed(fn, *args, **kwargs):
    t0 = time.perf_counter()
    out = fn(*args, **kwargs)
    return out, time.perf_counter() - t0


def numpy_fs(slope, sca, q_mm_day, k, z, c, phi, g):
    """Plain numpy wetness and FS, single unit weight.

    docs/methods.md, "Steady wetness" and "Infinite-slope factor of safety".
    """
    th = np.radians(np.asarray(slope, dtype=np.float64))
    sc = np.sin(th) * np.cos(th)
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.minimum(1.0, q_mm_day * 1e-3 * sca / (k * z * sc))
        return c / (g * z * sc) + (1 - w * 9.81 / g) * np.tan(np.radians(phi)) / np.tan(th)


def numpy_monte_carlo(slope, sca, samples, q_mm_day, rng):
    """Plain numpy reference of the same Monte Carlo (vectorised over samples, cell by cell)."""
    out = np.empty(slope.size)
    for i, (s, a) in enumerate(zip(slope.ravel(), sca.ravel())):
        z = rng.uniform(0.8, 1.6, samples)
        cr = rng.uniform(2.0, 8.0, samples)
        phi = np.clip(rng.normal(34.0, 2.0, samples), 0, 60)
        fs = numpy_fs(np.float64(s), a, q_mm_day, 2.0, z, 1.0 + cr, phi, 18.5)
        out[i] = np.mean(fs < 1)
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__,
                                 formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--size", type=int, default=2000, help="side of the deterministic grid")
    ap.add_argument("--cells", type=int, default=10**6, help="Monte Carlo cells")
    ap.add_argument("--samples", type=int, default=400)
    ap.add_argument("--storm-cells", type=int, default=10**5, help="Monte Carlo cells, storm case")
    args = ap.parse_args()
    print(f"numba threads: {numba.get_num_threads()}")

    # warm-up on a small grid: compile (or load from cache) every kernel
    s0, a0 = synthetic(400, seed=1)
    table = encode_table([UNIT])
    w0 = steady_wetness(a0, s0, recharge_mm_per_day=60.0, conductivity_m_per_day=2.0, depth_m=1.2)
    factor_of_safety(s0, 1.2, w0, **STRENGTH)
    critical_recharge(s0, a0, depth_m=1.2, conductivity_m_per_day=2.0, **STRENGTH)
    u0 = np.zeros(s0.shape, np.int16)
    for corr in ("cell", "unit"):
        failure_probability(s0, a0, u0, table, SteadyRain(60.0), samples=8, correlation=corr)
    failure_probability(s0, None, u0, table, StormRain(15.0, 8.0, 1.2), samples=8)

    # deterministic maps
    slope, sca = synthetic(args.size * args.size)
    n = slope.size
    w, t_w = timed(steady_wetness, sca, slope, recharge_mm_per_day=60.0,
                   conductivity_m_per_day=2.0, depth_m=1.2)
    _, t_fs = timed(factor_of_safety, slope, 1.2, w, **STRENGTH)
    _, t_qc = timed(critical_recharge, slope, sca, depth_m=1.2, conductivity_m_per_day=2.0,
                    **STRENGTH)
    side = 500
    ref_s, ref_a = slope[:side, :side], sca[:side, :side]
    _, t_ref = timed(numpy_fs, ref_s, ref_a, 60.0, 2.0, 1.2, 6.0, 34.0, 18.5)
    ref_rate = ref_s.size / t_ref
    print(f"\ndeterministic, {args.size}x{args.size} = {n:.3g} cells")
    timings = (("steady_wetness", t_w), ("factor_of_safety", t_fs), ("critical_recharge", t_qc))
    for name, t in timings:
        print(f"  {name:<18} {t:7.3f} s  {n / t / 1e6:8.1f} M cells/s")
    both = n / (t_w + t_fs)
    print(f"  wetness + FS       {both / 1e6:8.1f} M cells/s; plain numpy same work "
          f"{ref_rate / 1e6:.1f} M cells/s; ratio {both / ref_rate:.1f}")
    del slope, sca, w

    # Monte Carlo
    slope, sca = synthetic(args.cells, seed=2)
    unit = np.zeros(slope.shape, np.int16)
    print(f"\nMonte Carlo, steady rain, {slope.size:.3g} cells x {args.samples} samples")
    rates = {}
    for corr in ("cell", "unit"):
        (p, _), t = timed(failure_probability, slope, sca, unit, table, SteadyRain(60.0),
                          samples=args.samples, seed=7, correlation=corr)
        rates[corr] = slope.size * args.samples / t
        print(f"  correlation={corr:<5} {t:7.2f} s  {rates[corr] / 1e6:8.1f} M samples x cells/s  "
              f"mean P_f {np.nanmean(p):.4f}")
    sub = 2000
    _, t_np = timed(numpy_monte_carlo, slope.ravel()[:sub], sca.ravel()[:sub], args.samples, 60.0,
                    np.random.default_rng(0))
    np_rate = sub * args.samples / t_np
    print(f"  plain numpy reference {np_rate / 1e6:.2f} M samples x cells/s; "
          f"ratio (cell) {rates['cell'] / np_rate:.0f}")
    est = 1e7 * 400 / rates["cell"]
    print(f"  projected 10^7 cells x 400 samples (cell): {est:.0f} s")

    storm_slope, _ = synthetic(args.storm_cells, seed=3)
    storm_units = np.zeros(storm_slope.shape, np.int16)
    (ps, _), t = timed(failure_probability, storm_slope, None, storm_units, table,
                       StormRain(15.0, 8.0, 1.2), samples=args.samples, seed=7)
    print(f"\nMonte Carlo, storm (least FS over time at the soil base), "
          f"{storm_slope.size:.3g} cells x {args.samples} samples")
    print(f"  {t:7.2f} s  {storm_slope.size * args.samples / t / 1e6:8.2f} M samples x cells/s  "
          f"mean P_f {np.nanmean(ps):.4f}")
    # the pipeline's depth rule: 20 depths from 0.3 m to the base (docs/methods.md)
    (ps, _), t = timed(failure_probability, storm_slope, None, storm_units, table,
                       StormRain(15.0, 8.0, 1.2), samples=args.samples, seed=7,
                       n_depths=20, min_failure_depth_m=0.3)
    print(f"\nMonte Carlo, storm (least FS over time and 20 depths from 0.3 m to the base), "
          f"{storm_slope.size:.3g} cells x {args.samples} samples")
    print(f"  {t:7.2f} s  {storm_slope.size * args.samples / t / 1e6:8.2f} M samples x cells/s  "
          f"mean P_f {np.nanmean(ps):.4f}")

    # the same with each cell's initial water table from 2 mm/day of antecedent recharge
    storm_sca = synthetic(args.storm_cells, seed=3)[1]
    (ps, _), t = timed(failure_probability, storm_slope, storm_sca, storm_units, table,
                       StormRain(15.0, 8.0, antecedent_mm_per_day=2.0), samples=args.samples,
                       seed=7, n_depths=20, min_failure_depth_m=0.3)
    print(f"\nMonte Carlo, storm from an antecedent water table (2 mm/day), 20 depths, "
          f"{storm_slope.size:.3g} cells x {args.samples} samples")
    print(f"  {t:7.2f} s  {storm_slope.size * args.samples / t / 1e6:8.2f} M samples x cells/s  "
          f"mean P_f {np.nanmean(ps):.4f}")

    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"\npeak RSS {rss:.0f} MB")


if __name__ == "__main__":
    main()
