"""Speed of scoring the maps against mapped landslides, and of one calibration-sweep point.

Part 1, in this process, on ``--size`` x ``--size`` cells (10^8 by default): seeded float32
fields of the factor of safety and the probability of failure for two rain cases, a critical
recharge with its class band, two soil units (west and east halves) and an inventory of
``--landslides`` square landslides of ``--cells`` cells. Times the inventory stage functions
a run calls (``inventory_recharge_stage`` once, ``inventory_case_stage`` per rain case: FS
and P_f, per unit as well), against the reference: ``numpy.sort`` of one field.

Part 2, whole processes (``--sweep-size`` x ``--sweep-size`` cells of the whole-run benchmark's
fractal DEM, ``bench_run.py``): ``slopescreen run`` of a scenario with an inventory, and
``slopescreen sweep`` of the same scenario over ``--points`` friction values. Prints the
run's per-cell stages (soil units, soil cells, stability of the scored case), the sweep's
seconds per point, and their ratio, with each process's wall time and peak RSS.

Usage::

    python benchmarks/bench_inventory.py                         # 10^8 cells; sweep on 2000^2
    python benchmarks/bench_inventory.py --size 4000 --sweep-size 1000
"""

import argparse
import json
import math
import resource
import shutil
import sys
import time
from pathlib import Path
from types import SimpleNamespace

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))


def peak_rss_mb():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def fields(side, seed):
    """FS (two cases), P_f (two cases), critical recharge and its class, soil codes."""
    rng = np.random.default_rng(seed)
    out = {k: np.empty((side, side), np.float32) for k in ("fs1", "fs2", "pf1", "pf2", "q")}
    cls = np.empty((side, side), np.uint8)
    for r in range(0, side, 500):              # in row blocks: no float64 grid temporaries
        s = slice(r, r + 500)
        g = rng.standard_normal((min(500, side - r), side), dtype=np.float32)
        out["fs1"][s] = np.exp(np.float32(0.4) + np.float32(0.5) * g)
        out["fs2"][s] = out["fs1"][s] * np.float32(0.9)
        out["pf1"][s] = 1.0 / (1.0 + np.exp(np.float32(3.0) * (out["fs1"][s] - 1)))
        out["pf2"][s] = 1.0 / (1.0 + np.exp(np.float32(3.0) * (out["fs2"][s] - 1)))
        out["q"][s] = np.float32(20.0) * out["fs1"][s]
        cls[s] = np.where(out["fs1"][s] < 0.5, 1, np.where(out["fs1"][s] > 3.5, 3, 2))
    codes = np.ones((side, side), np.int32)
    codes[:, side // 2:] = 2
    return out, cls, codes


def inventory(side, n, cells, seed):
    from slopescreen.inventory.landslides import InventoryCells

    rng = np.random.default_rng(seed)
    w = math.isqrt(cells)
    h = cells // w
    lat_r, lat_c = side // (h + 1), side // (w + 1)
    pick = rng.choice(lat_r * lat_c, n, replace=False)
    r0, c0 = (pick // lat_c) * (h + 1), (pick % lat_c) * (w + 1)
    dr, dc = np.divmod(np.arange(h * w), w)
    per = [((r0[i] + dr) * side + c0[i] + dc).astype(np.int64) for i in range(n)]
    flat = np.concatenate(per)
    order = np.argsort(flat)
    groups = np.repeat(np.arange(n, dtype=np.int64), h * w)[order]
    return InventoryCells(tuple(per), flat[order], groups, (), "polygons", n, n, 0, flat.size,
                          "whole")


def part_scores(args):
    from slopescreen.pipeline.inventory_stage import inventory_case_stage, inventory_recharge_stage

    side = args.size
    small = fields(64, 1)
    f, cls, codes = fields(side, args.seed)
    inv = inventory(side, args.landslides, args.cells, args.seed)
    print(f"part 1: {side} x {side} = {side * side:,} cells, {inv.n_landslides:,} landslides of "
          f"{args.cells} cells, 2 soil units, 2 rain cases; peak RSS after the fields "
          f"{peak_rss_mb():,.0f} MB")
    units = {1: SimpleNamespace(label="west"), 2: SimpleNamespace(label="east")}
    scenario = SimpleNamespace(soil=SimpleNamespace(units=units))
    valid = np.ones((side, side), bool)

    def inputs_of(inv_, codes_, valid_):
        return SimpleNamespace(inventory=inv_, soil_codes=codes_, grid=SimpleNamespace(valid=valid_))

    # compile (or load the cache) on a small field first
    sinv = inventory(64, 12, 4, 2)
    sin = inputs_of(sinv, small[2], np.ones((64, 64), bool))
    inventory_recharge_stage(scenario, sin, SimpleNamespace(q_cr_mm_per_day=small[0]["q"],
                                                            stability_class=small[1]))
    inventory_case_stage(scenario, sin, SimpleNamespace(factor_of_safety=small[0]["fs1"]),
                         SimpleNamespace(p_f=small[0]["pf1"]), case=SimpleNamespace(name="a"))
    inputs = inputs_of(inv, codes, valid)
    t0 = time.perf_counter()
    inventory_recharge_stage(scenario, inputs, SimpleNamespace(q_cr_mm_per_day=f["q"],
                                                               stability_class=cls))
    t_recharge = time.perf_counter() - t0
    times = []
    for k in ("1", "2"):
        t0 = time.perf_counter()
        inventory_case_stage(scenario, inputs, SimpleNamespace(factor_of_safety=f["fs" + k]),
                             SimpleNamespace(p_f=f["pf" + k]), case=SimpleNamespace(name=k))
        times.append(time.perf_counter() - t0)
    total = t_recharge + sum(times)
    t0 = time.perf_counter()
    np.sort(f["fs1"], axis=None)
    t_sort = time.perf_counter() - t0
    print(f"  critical recharge (whole grid and 2 units)   {t_recharge:7.2f} s")
    for k, t in zip(("1", "2"), times):
        print(f"  rain case {k}: FS and P_f (whole and 2 units) {t:7.2f} s")
    print(f"  all scores (5 products, 15 scorings)          {total:7.2f} s  (target < 30 s)")
    print(f"  reference: numpy.sort of one field            {t_sort:7.2f} s  "
          f"scores / sort = {total / t_sort:.2f}")
    print(f"  peak RSS {peak_rss_mb():,.0f} MB")
    del f, cls, codes


SWEEP_INVENTORY = """
[inventory]
landslides = "slides.geojson"
score_part = "whole"
"""


def part_sweep(args):
    from bench_run import CELL_M, ORIGIN, make_dem, run_sampled, write_inputs

    work = HERE / "_data" / f"inventory_{args.sweep_size}"
    shutil.rmtree(work, ignore_errors=True)
    dem, text = make_dem("fractal", args.sweep_size, args.seed)
    scenario = write_inputs(work, dem)
    scenario.write_text(scenario.read_text() + SWEEP_INVENTORY)
    rng = np.random.default_rng(args.seed)
    rows, cols = dem.shape
    r = rng.integers(2, rows - 8, 300)
    c = rng.integers(2, cols - 8, 300)
    feats = []
    for i in range(300):
        x0, y0 = ORIGIN[0] + c[i] * CELL_M, ORIGIN[1] - r[i] * CELL_M
        ring = [[x0, y0], [x0 + 6 * CELL_M, y0], [x0 + 6 * CELL_M, y0 - 6 * CELL_M],
                [x0, y0 - 6 * CELL_M], [x0, y0]]
        feats.append({"type": "Feature", "properties": {"id": i + 1},
                      "geometry": {"type": "Polygon", "coordinates": [ring]}})
    (work / "slides.geojson").write_text(json.dumps(
        {"type": "FeatureCollection", "features": feats,
         "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32633"}}}))
    cli = Path(sys.executable).with_name("slopescreen")
    print(f"part 2: {rows} x {cols} cells ({text}), 300 landslides of 36 cells")
    run_sampled([str(cli), "run", str(scenario), "-q"])           # warm-up: numba cache
    shutil.rmtree(work / "results", ignore_errors=True)
    run = run_sampled([str(cli), "run", str(scenario), "-q"])
    st = json.loads((work / "results" / "manifest.json").read_text())["stage_seconds"]
    case_stages = sum(v for k, v in st.items() if k in ("soil units", "soil cells")
                      or k.startswith("stability:") or k.startswith("inventory: autumn"))
    all_cell = sum(v for k, v in st.items() if k in ("soil units", "soil cells",
                                                     "critical recharge")
                   or k.startswith(("stability:", "inventory", "figures:")))
    sweep = run_sampled([str(cli), "sweep", str(scenario), "--vary",
                         f"soil.units.1.friction_deg=30:38:{args.points}", "-q"])
    sm = json.loads((work / "results-sweep" / "manifest.json").read_text())
    per_point = sm["stage_seconds"]["points"] / args.points
    print(f"  run: wall {run['wall_s']:.1f} s, peak {run['peak_bytes'] / 2**20:,.0f} MB; "
          f"per-cell stages of the rain case (soil units + soil cells + stability + its "
          f"inventory scores) {case_stages:.2f} s; all per-cell stages {all_cell:.2f} s")
    print(f"  sweep of {args.points} points: wall {sweep['wall_s']:.1f} s, peak "
          f"{sweep['peak_bytes'] / 2**20:,.0f} MB; terrain and routing "
          f"{sm['stage_seconds']['terrain and routing']:.2f} s once, {per_point:.2f} s a point")
    print(f"  sweep point / per-cell stages of the rain case in the run = "
          f"{per_point / case_stages:.2f}")
    print(f"  sweep point / all per-cell stages of the run (also critical recharge and its "
          f"scores, figures) = {per_point / all_cell:.2f}")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=10000)
    ap.add_argument("--landslides", type=int, default=1000)
    ap.add_argument("--cells", type=int, default=100)
    ap.add_argument("--sweep-size", type=int, default=2000)
    ap.add_argument("--points", type=int, default=5)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--skip-scores", action="store_true")
    args = ap.parse_args(argv)
    if not args.skip_scores:
        part_scores(args)
    part_sweep(args)


if __name__ == "__main__":
    main()
