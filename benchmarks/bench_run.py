"""Whole-run benchmark: wall time and peak memory of one ``slopescreen run``.

Usage::

    python benchmarks/bench_run.py [--size 4000] [--dem fractal|pits] [--seed 1]
                                   [--repeat 1] [--work DIR] [--json PATH]

What it measures and how
------------------------
DEM
    ``--size`` x ``--size`` cells, float32 metres, 2 m cells in EPSG:32633, written as a
    GeoTIFF into the work folder (default ``benchmarks/_data/run_<dem>_<size>_s<seed>``). The
    place, Quellmarsh Fell, and its coordinates are fictional. ``--dem fractal``: a seeded
    spectral-synthesis surface (power spectrum proportional to k**-3.35, relief 300 m from
    the lowest to the highest cell, no pits carved; with seed 1 at 4000 x 4000 about 40 % of
    the cells lie in closed depressions; the share moves with the seed and the size).
    ``--dem pits``: the pit-rich surface of ``bench_fill.py`` (k**-2.5, relief 400 m, 2000
    pits per million cells). The depression share printed is the share of cells that
    :func:`slopescreen.terrain.fill_depressions` raises, checked equal to the reference fill.
Scenario
    ``scenario.toml`` beside the DEM: one soil unit with fixed values (no Monte Carlo), one
    steady rain case, D-infinity routing, no optional sections.
Whole run
    ``slopescreen run scenario.toml -q`` (the console script of this interpreter's
    environment) in a child process. It runs once first to fill the numba cache (printed,
    not counted), then ``--repeat`` times; the output folder is deleted before each run, so
    every run writes into a fresh one. Wall clock from spawn to exit. A thread sums VmRSS
    (``/proc/<pid>/status``) over the child and all its descendants (found through
    ``/proc/<pid>/task/*/children``) every 20 ms and keeps the peak. Cross-checks: the
    child's ``ru_maxrss`` from ``os.wait4`` and ``getrusage(RUSAGE_CHILDREN).ru_maxrss`` (a
    running maximum over every child waited for so far, the warm-up run included). Medians
    over the timed runs are printed, with ``stage_seconds`` of ``manifest.json``, each stage's
    share of the wall time and wall / (slope + conditioning + routing).
Reference fill
    ``skimage.morphology.reconstruction(seed, dem, method="erosion")`` in this process on the
    same DEM array, the seed equal to the DEM on the border and to its maximum inside
    (``bench_fill.skimage_fill``, seed built inside the timing); printed as wall / reference.
Terrain and routing only
    This script in ``--terrain-only SCENARIO`` mode, a child process sampled the same way: it
    reads the inputs and runs the run's own terrain stages (``conditioning_stage``,
    ``routing_stage``, ``slope_stage`` of ``slopescreen.pipeline.terrain_stage``), letting the
    filled DEM go after routing as the run does. The whole run's peak is printed over this
    one (target: at most 1.10).

Peak memory is printed in MB (2**20 bytes) and in bytes per DEM cell. No timing is asserted.
"""

import argparse
import glob
import json
import os
import resource
import shutil
import statistics
import sys
import threading
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
CELL_M = 2.0
CRS = "EPSG:32633"
ORIGIN = (431_000.0, 5_182_000.0)  # west, north edge of the fictional Quellmarsh Fell, m
FRACTAL = dict(beta=3.35, relief=300.0)
METHOD = "dinf"
TERRAIN_STAGES = ("slope", "conditioning", "routing")
SCENARIO = f"""\
# Benchmark scenario for Quellmarsh Fell, a fictional upland (generated terrain).
title = "Quellmarsh Fell whole-run benchmark"
dem = "dem.tif"
output = "results"

[routing]
method = "{METHOD}"

[soil.units.1]
label = "stony colluvium"
depth_m = 1.2
cohesion_kpa = 1.5
root_cohesion_kpa = 3.0
friction_deg = 34.0
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 2.0

[[rain]]
name = "autumn wet spell"
steady_mm_per_day = 40
"""


def make_dem(kind, size, seed):
    """The benchmark DEM (float32, metres) and a one-line description of it."""
    from bench_fill import fractal_dem

    if kind == "fractal":
        dem = fractal_dem(size, size, seed=seed, pits_per_mcell=0, **FRACTAL)
        return dem, (f"spectral synthesis, power ~ k^-{FRACTAL['beta']}, relief "
                     f"{FRACTAL['relief']:g} m, no pits")
    return fractal_dem(size, size, seed=seed), ("bench_fill.fractal_dem defaults (k^-2.5, "
                                                "relief 400 m, 2000 pits/Mcell)")


CORRIDOR = """
[runout]

[corridor]
centreline = "road.geojson"
segment_m = 100
half_width_m = 10
"""


def write_road(work, dem):
    """A meandering road across the DEM, east to west, in the DEM's CRS (GeoJSON)."""
    rows, cols = dem.shape
    t = np.linspace(0.0, 1.0, 2000)
    x = ORIGIN[0] + CELL_M * cols * (0.02 + 0.96 * t)
    y = ORIGIN[1] - CELL_M * rows * (0.5 + 0.3 * np.sin(6.0 * np.pi * t))
    doc = {"type": "FeatureCollection",
           "crs": {"type": "name", "properties": {"name": "urn:ogc:def:crs:EPSG::32633"}},
           "features": [{"type": "Feature", "properties": {"name": "benchmark road"},
                         "geometry": {"type": "LineString",
                                      "coordinates": np.column_stack([x, y]).round(2).tolist()}}]}
    (work / "road.geojson").write_text(json.dumps(doc))


def write_inputs(work, dem, corridor=False):
    """Write ``dem.tif`` and ``scenario.toml`` into ``work``; return the scenario path.

    ``corridor`` adds a road and the ``[runout]`` and ``[corridor]`` sections."""
    import rasterio
    from rasterio.transform import from_origin

    work.mkdir(parents=True, exist_ok=True)
    profile = dict(driver="GTiff", width=dem.shape[1], height=dem.shape[0], count=1,
                   dtype="float32", crs=CRS, nodata=-9999.0,
                   transform=from_origin(*ORIGIN, CELL_M, CELL_M))
    with rasterio.open(work / "dem.tif", "w", **profile) as dst:
        dst.write(dem, 1)
    scenario = work / "scenario.toml"
    scenario.write_text(SCENARIO + (CORRIDOR if corridor else ""))
    if corridor:
        write_road(work, dem)
    return scenario


def tree_rss_bytes(pid):
    """Sum of VmRSS over ``pid`` and all its descendants (0 for a process already gone)."""
    total, todo = 0, [pid]
    while todo:
        p = todo.pop()
        try:
            with open(f"/proc/{p}/status") as f:
                total += next((int(line.split()[1]) * 1024 for line in f
                               if line.startswith("VmRSS:")), 0)
            for children in glob.glob(f"/proc/{p}/task/*/children"):
                with open(children) as f:
                    todo.extend(int(c) for c in f.read().split())
        except (FileNotFoundError, ProcessLookupError):
            pass  # ended between two reads
    return total


def run_sampled(argv, period_s=0.02):
    """Run ``argv`` to its end; wall seconds and peak RSS (sampled tree, ru_maxrss) in bytes."""
    peak, samples, done = 0, 0, threading.Event()
    t0 = time.perf_counter()
    pid = os.posix_spawn(argv[0], argv, os.environ)

    def sample():
        nonlocal peak, samples
        while not done.is_set():
            peak = max(peak, tree_rss_bytes(pid))
            samples += 1
            done.wait(period_s)

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    _, status, usage = os.wait4(pid, 0)
    wall = time.perf_counter() - t0
    done.set()
    sampler.join()
    if os.waitstatus_to_exitcode(status) != 0:
        raise SystemExit(f"{' '.join(map(str, argv))}: exit status "
                         f"{os.waitstatus_to_exitcode(status)}")
    return {"wall_s": wall, "peak_bytes": peak, "samples": samples,
            "ru_maxrss_bytes": usage.ru_maxrss * 1024,
            "children_maxrss_bytes": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024}


def whole_run(cli, scenario):
    """One timed ``slopescreen run`` into a fresh output folder, with its stage seconds."""
    shutil.rmtree(scenario.parent / "results", ignore_errors=True)
    out = run_sampled([str(cli), "run", str(scenario), "-q"])
    manifest = json.loads((scenario.parent / "results" / "manifest.json").read_text())
    return out | {"stage_seconds": manifest["stage_seconds"]}


def terrain_only(scenario_path):
    """Helper mode: the run's own terrain stages (conditioning, routing, slope) and nothing else."""
    from slopescreen.pipeline.inputs import read_inputs
    from slopescreen.pipeline.terrain_stage import conditioning_stage, routing_stage, slope_stage
    from slopescreen.scenario import load_scenario

    scenario = load_scenario(scenario_path)
    inputs = read_inputs(scenario)
    conditioned = conditioning_stage(scenario, inputs)
    routing = routing_stage(scenario, inputs, conditioned)
    del conditioned  # as the run does: the filled DEM goes after routing
    return routing, slope_stage(scenario, inputs)


def reference_fill(dem):
    """``bench_fill.skimage_fill`` of ``dem`` (border seed, erosion): the result and its seconds."""
    from bench_fill import skimage_fill

    t0 = time.perf_counter()
    filled = skimage_fill(dem)
    return filled, time.perf_counter() - t0


def median_run(runs):
    """Median over runs of every figure, stage seconds per stage."""
    keys = ("wall_s", "peak_bytes", "ru_maxrss_bytes", "children_maxrss_bytes", "samples")
    out = {k: statistics.median(r[k] for r in runs) for k in keys}
    out["stage_seconds"] = {name: statistics.median(r["stage_seconds"][name] for r in runs)
                            for name in runs[0]["stage_seconds"]}
    return out


def mb(nbytes):
    return nbytes / 2**20


def report(f):
    """Print the figures of :func:`main` as a compact block."""
    cells, run, ter = f["cells"], f["run"], f["terrain_only"]
    print(f"{f['dem']} DEM {f['size']} x {f['size']} = {cells:,} cells, {CELL_M:g} m, {CRS}, "
          f"seed {f['seed']}: {f['dem_description']}")
    print(f"  depression share {f['depression_share']:.1%} (cells raised by fill_depressions; "
          f"equal to the reference fill: {f['fills_equal']})")
    print(f"  warm-up run (fills the numba cache, not counted): {f['warmup']['wall_s']:.1f} s")
    walls = ", ".join(f"{w:.1f}" for w in f["walls_s"])
    print(f"whole run, median of {len(f['walls_s'])} ({walls} s): wall {run['wall_s']:.1f} s")
    for name, s in run["stage_seconds"].items():
        print(f"  {name:<32} {s:7.2f} s {s / run['wall_s']:6.1%}")
    rest = run["wall_s"] - sum(run["stage_seconds"].values())
    print(f"  {'outside stages (start, imports)':<32} {rest:7.2f} s {rest / run['wall_s']:6.1%}")
    print(f"  wall / (slope + conditioning + routing) = {f['wall_over_terrain_stages']:.2f}")
    print(f"reference fill (skimage {f['skimage']} reconstruction by erosion, this process): "
          f"{f['reference_fill_s']:.1f} s; wall / reference = {f['wall_over_reference']:.2f}")
    for label, r in (("whole run", run), ("terrain+routing", ter)):
        print(f"peak RSS {label:<15} {mb(r['peak_bytes']):7,.0f} MB = "
              f"{r['peak_bytes'] / cells:5.1f} B/cell (tree, {r['samples']:.0f} samples); "
              f"ru_maxrss {mb(r['ru_maxrss_bytes']):,.0f} MB, RUSAGE_CHILDREN "
              f"{mb(r['children_maxrss_bytes']):,.0f} MB")
    print(f"  terrain+routing only: wall {ter['wall_s']:.1f} s; whole-run peak / "
          f"terrain+routing peak = {f['peak_ratio']:.3f} (target <= 1.10)")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=4000, help="rows = cols (default 4000)")
    ap.add_argument("--dem", choices=("fractal", "pits"), default="fractal")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=1, help="timed runs after the warm-up")
    ap.add_argument("--work", type=Path, help="work folder (default under benchmarks/_data)")
    ap.add_argument("--json", type=Path, metavar="PATH", help="also write the figures here")
    ap.add_argument("--corridor", action="store_true",
                    help="add a road with [runout] and [corridor] (issue 11 stages)")
    ap.add_argument("--terrain-only", type=Path, metavar="SCENARIO",
                    help="helper mode: run only the terrain stages of SCENARIO and exit")
    args = ap.parse_args(argv)
    if args.terrain_only:
        terrain_only(args.terrain_only)
        return

    import skimage

    from slopescreen.terrain import fill_depressions

    tag = "_corridor" if args.corridor else ""
    work = args.work or HERE / "_data" / f"run_{args.dem}_{args.size}_s{args.seed}{tag}"
    dem, description = make_dem(args.dem, args.size, args.seed)
    scenario = write_inputs(work, dem, corridor=args.corridor)
    cli = Path(sys.executable).parent / "slopescreen"

    warmup = whole_run(cli, scenario)
    runs = [whole_run(cli, scenario) for _ in range(args.repeat)]
    terrain = run_sampled([sys.executable, str(Path(__file__).resolve()), "--terrain-only",
                           str(scenario)])
    run = median_run(runs)

    reference, reference_s = reference_fill(dem)
    filled = fill_depressions(dem)
    terrain_s = sum(run["stage_seconds"][k] for k in TERRAIN_STAGES)
    figures = {
        "dem": args.dem, "size": args.size, "seed": args.seed, "cells": dem.size,
        "cell_m": CELL_M, "crs": CRS, "dem_description": description,
        "depression_share": float(np.mean(filled > dem)),
        "fills_equal": bool(np.array_equal(reference.astype(np.float32), filled)),
        "warmup": warmup, "walls_s": [r["wall_s"] for r in runs], "run": run,
        "wall_over_terrain_stages": run["wall_s"] / terrain_s,
        "skimage": skimage.__version__, "reference_fill_s": reference_s,
        "wall_over_reference": run["wall_s"] / reference_s,
        "terrain_only": terrain, "peak_ratio": run["peak_bytes"] / terrain["peak_bytes"],
    }
    report(figures)
    if args.json:
        args.json.write_text(json.dumps(figures, indent=2) + "\n")


if __name__ == "__main__":
    main()
