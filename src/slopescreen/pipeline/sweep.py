"""The calibration sweep: which parameter values the mapped landslides support.

``slopescreen sweep SCENARIO --vary KEY=LOW:HIGH:N [--vary ...]`` computes
terrain and routing once, then for each point of the grid of one or two
parameters reruns only the per-cell stages (soil fields, soil cells, the
factor of safety of one rain case) and scores the factor of safety against
the mapped landslides on two halves of the inventory
(:func:`slopescreen.inventory.split.split_inventory`): the point is chosen on
one half, by the true skill statistic at FS = 1 (the AUC, which depends only
on ranks, breaks ties), and scored on the other. Scores on the choosing half
overstate skill; the held-out scores are the fair ones, and every output says
so.

It writes into its own folder (default: the scenario's output folder name
with ``-sweep``), committed as a whole: ``sweep.csv`` (every point, both
halves), ``sweep.png`` (a curve for one key, heat maps for two),
``sweep.html`` (the same, with the warning and the cautions),
``suggested.toml`` (the scenario with the chosen values; the user's file is
never changed) and ``manifest.json``.

docs/methods.md, "Agreement with mapped landslides" (calibration sweep).
"""

from __future__ import annotations

import copy
import csv
import hashlib
import html
import io
import itertools
import json
import os
import shutil
import time
import tomllib
import uuid
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import InputError
from ..report.cautions import CAUTIONS, SHORT

__all__ = ["SweepResult", "run_sweep", "OVERSTATE", "edge_text"]

OVERSTATE = ("Scores on the choosing half overstate skill: the values were picked to fit those "
             "landslides. Judge the choice by the held-out (test) half.")
"""The warning every sweep output carries."""

PATH_KEYS = (("dem",), ("soil", "map"), ("corridor", "centreline"), ("corridor", "culverts"),
             ("corridor", "engineered_ground"), ("inventory", "landslides"))
"""Keys of the scenario that hold paths (rewritten relative to the suggested scenario)."""

COLUMNS = ("point", "auc_choose", "auc_test", "success_area_choose", "success_area_test",
           "tss_choose", "tss_test", "tpr_choose", "tpr_test", "area_flagged_share")
"""Columns of ``sweep.csv`` after the swept keys."""


@dataclass(frozen=True)
class SweepResult:
    """What a sweep wrote, and its points."""

    output: Path
    keys: tuple
    rows: tuple
    best: dict
    rain: str
    split: str
    seconds_per_point: float
    best_at_edge: tuple = ()
    timings_s: dict = field(default_factory=dict)


def run_sweep(path, varies, *, rain: str | None = None, split: str = "blocks", seed: int = 0,
              block_m: float | None = None, output=None, progress=None) -> SweepResult:
    """Sweep one or two scenario numbers and score each point on held-out landslides.

    Parameters
    ----------
    path : str or os.PathLike
        Scenario file with ``[soil]``, ``[[rain]]`` and ``[inventory]``.
    varies : sequence of slopescreen.inventory.sweep_keys.Vary
        One or two keys with their ranges.
    rain : str, optional
        Rain case whose factor of safety is scored (default: the first).
    split : {"blocks", "random"}
        How the inventory is split (:func:`slopescreen.inventory.split.split_inventory`).
    seed : int
        Seed of the split.
    block_m : float, optional
        Block side of the spatial split, m.
    output : path-like, optional
        Folder of the sweep's files (default ``<scenario output>-sweep``).
    progress : callable, optional
        Called with a short text before each point.

    Returns
    -------
    SweepResult

    Raises
    ------
    InputError
        Bad input, found before any computation; nothing is written.
    """
    from ..inventory.split import split_inventory
    from ..inventory.sweep_keys import MAX_POINTS, set_value
    from ..scenario import load_scenario, scenario_from_data
    from .inputs import read_inputs

    path = Path(path)
    scenario = load_scenario(path)
    name = scenario.path.name
    data = tomllib.loads(scenario.path.read_text(encoding="utf-8"))
    if scenario.inventory is None:
        raise InputError(f"{name}: inventory: a sweep scores the map against mapped landslides; "
                         "add an [inventory] section")
    if scenario.soil is None:
        raise InputError(f"{name}: soil: a sweep needs [soil] and [[rain]] sections")
    varies = tuple(varies)
    if not 1 <= len(varies) <= 2:
        raise InputError(f"{name}: --vary: give one or two keys, got {len(varies)}")
    if len({v.key for v in varies}) != len(varies):
        raise InputError(f"{name}: --vary: the same key twice ({varies[0].key})")
    n_points = int(np.prod([v.n for v in varies]))
    if n_points > MAX_POINTS:
        raise InputError(f"{name}: --vary: {n_points} points; at most {MAX_POINTS}")
    cases = [c.name for c in scenario.rain]
    rain = cases[0] if rain is None else rain
    if rain not in cases:
        raise InputError(f"{name}: --rain: no rain case named {rain!r} (the cases: "
                         f"{', '.join(map(repr, cases))})")
    out = Path(output) if output is not None else scenario.output.with_name(
        scenario.output.name + "-sweep")
    out = out.resolve()
    _check_output(out, scenario)
    # every point is a valid scenario: checked before anything is computed
    points = []
    for values in itertools.product(*[v.values for v in varies]):
        d = data
        for v, x in zip(varies, values):
            d = set_value(d, v.key, x, scenario_name=name)
        points.append((tuple(float(x) for x in values), d,
                       scenario_from_data(d, scenario.path, sha256=scenario.sha256)))
    inputs = read_inputs(scenario)
    choose, test = split_inventory(inputs.inventory, inputs.grid, method=split, seed=seed,
                                   block_m=block_m)

    from .stability_stage import soil_cells_stage, soil_fields_stage, stability_stage
    from .terrain_stage import conditioning_stage, routing_stage, slope_stage

    timings: dict = {}
    start = time.perf_counter()
    conditioned = conditioning_stage(scenario, inputs)
    routing = routing_stage(scenario, inputs, conditioned)
    del conditioned
    slope = slope_stage(scenario, inputs)
    timings["terrain and routing"] = round(time.perf_counter() - start, 3)
    rows = []
    start = time.perf_counter()
    for i, (values, _d, s) in enumerate(points, start=1):
        if progress is not None:
            progress(f"point {i} of {len(points)}")
        fields = soil_fields_stage(s, inputs)
        cells = soil_cells_stage(s, inputs, fields, slope, routing)
        case = next(c for c in s.rain if c.name == rain)
        fs = stability_stage(s, inputs, cells, case=case).factor_of_safety
        del cells, fields
        row = {"point": i} | {v.key: x for v, x in zip(varies, values)}
        row |= _half_scores(fs, choose, "choose") | _half_scores(fs, test, "test")
        row["area_flagged_share"] = float(np.count_nonzero(fs < 1.0)      # NaN < 1 is False
                                          / max(1, np.count_nonzero(np.isfinite(fs))))
        rows.append(row)
        del fs
    per_point = (time.perf_counter() - start) / len(points)
    timings["points"] = round(time.perf_counter() - start, 3)
    best_i = max(range(len(rows)), key=lambda j: (_num(rows[j]["tss_choose"]),
                                                   _num(rows[j]["auc_choose"]), -j))
    best = rows[best_i]
    edge = [v.key for v in varies if best[v.key] in (float(v.values[0]), float(v.values[-1]))]
    meta = {"scenario": name, "rain": rain, "split": split, "seed": seed, "best_at_edge": edge,
            "block_m": block_m, "landslides_choose": choose.n_landslides,
            "landslides_test": test.n_landslides,
            "cells_choose": int(choose.positive_index.size),
            "cells_test": int(test.positive_index.size)}
    _write(out, scenario, data, points[best_i][1], varies, rows, best, meta, timings)
    return SweepResult(output=out, keys=tuple(v.key for v in varies), rows=tuple(rows),
                       best=best, rain=rain, split=split, seconds_per_point=per_point,
                       best_at_edge=tuple(edge),
                       timings_s=timings)


def _num(x) -> float:
    return -np.inf if x is None or x != x else float(x)


def _check_output(out: Path, scenario) -> None:
    name = scenario.path.name
    inputs = {p.resolve() for p in scenario.input_files()}
    if out in inputs or out.is_file():
        raise InputError(f"{name}: --output: {out.name} must be a folder, not an input or a file")
    from .guard import folder_problem

    folder_problem(out, f"{name}: --output")
    if out == scenario.output.resolve():
        raise InputError(f"{name}: --output: the sweep needs a folder of its own, not the run's "
                         f"output folder {out.name}")
    for p in inputs:
        if p.parent == out and p.name in ("sweep.csv", "sweep.png", "sweep.html",
                                          "suggested.toml", "manifest.json"):
            raise InputError(f"{name}: --output: a sweep file would overwrite the input "
                             f"{p.name}; choose another folder")


def _half_scores(fs: np.ndarray, half, tag: str) -> dict:
    from ..inventory.agreement import rank_agreement, threshold_agreement

    values = np.where(half.domain, fs, np.float32(np.nan))
    try:
        a = rank_agreement(values, half.positive_index, half.groups, higher_is_hazard=False,
                           n_boot=0)
        auc, success = float(a.auc), float(a.success_area)
    except ValueError:
        auc = success = None
    scored = np.isfinite(values)
    try:
        t = threshold_agreement(values < 1.0, half.positive_index,
                                half.landslide_cells, scored=scored)
    except ValueError:                  # no landslide cell of this half has a value
        t = {}
    return {f"auc_{tag}": auc, f"success_area_{tag}": success,
            f"tss_{tag}": _none(t.get("true_skill_statistic")),
            f"tpr_{tag}": _none(t.get("true_positive_rate"))}


def _none(x):
    return None if x is None or x != x else float(x)


def _suggested(scenario, data: dict, out: Path, varies, best: dict) -> str:
    """The scenario with the chosen values, its paths relative to the sweep folder."""
    from ..inventory.sweep_keys import toml_text

    d = copy.deepcopy(data)
    base = scenario.path.parent
    for keys in PATH_KEYS:
        node = d
        for k in keys[:-1]:
            node = node.get(k) if isinstance(node, dict) else None
        if isinstance(node, dict) and isinstance(node.get(keys[-1]), str):
            node[keys[-1]] = os.path.relpath(base / node[keys[-1]], out)
    d["output"] = os.path.relpath(scenario.output.with_name(scenario.output.name + "-suggested"),
                                  out)
    chosen = ", ".join(f"{v.key} = {best[v.key]:g}" for v in varies)
    header = (f"Suggested by slopescreen {__version__} sweep of {scenario.path.name}: {chosen}.\n"
              f"{OVERSTATE}\nComments of the original file are not kept; paths are relative "
              "to this file.\n" + SHORT)
    return toml_text(d, header=header)


def _csv_text(varies, rows, meta) -> bytes:
    buf = io.StringIO()
    buf.write(f"# {SHORT}\n# {OVERSTATE}\n")
    buf.write(f"# rain case: {meta['rain']}; split: {meta['split']} (seed {meta['seed']}); "
              f"landslides choose/test: {meta['landslides_choose']}/{meta['landslides_test']}\n")
    w = csv.writer(buf, lineterminator="\n")
    header = [v.key for v in varies] + list(COLUMNS)
    w.writerow(header)
    for r in rows:
        w.writerow(["" if r[k] is None else (f"{r[k]:.6g}" if isinstance(r[k], float) else r[k])
                    for k in header])
    return buf.getvalue().encode("utf-8")


def _plot(varies, rows, best, meta, title) -> bytes:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from ..report.maps import png_bytes

    fig = Figure(figsize=(9.6, 4.4), dpi=100, facecolor="white")
    FigureCanvasAgg(fig)
    if len(varies) == 1:
        ax = fig.add_axes((0.08, 0.22, 0.62, 0.62))
        x = [r[varies[0].key] for r in rows]
        for col, style, label in (("tss_choose", "-", "TSS at FS = 1, choosing half"),
                                  ("tss_test", "-", "TSS at FS = 1, test half"),
                                  ("auc_choose", "--", "AUC, choosing half"),
                                  ("auc_test", "--", "AUC, test half")):
            colour = "#8f2140" if col.endswith("choose") else "#24517f"
            ax.plot(x, [np.nan if r[col] is None else r[col] for r in rows], style,
                    color=colour, marker="o", markersize=3, linewidth=1.4, label=label)
        ax.axvline(best[varies[0].key], color="#777777", linewidth=0.8)
        ax.set_xlabel(varies[0].key, fontsize=8.5)
        ax.set_ylabel("score", fontsize=8.5)
        ax.legend(fontsize=7.5, frameon=False, loc="upper left", bbox_to_anchor=(1.01, 1.0))
        ax.grid(True, color="#eeeeee", linewidth=0.6)
        ax.tick_params(labelsize=7.5)
    else:
        xs, ys = varies[0].values, varies[1].values
        for k, (col, label) in enumerate((("tss_choose", "TSS at FS = 1, choosing half"),
                                          ("tss_test", "TSS at FS = 1, test half"))):
            ax = fig.add_axes((0.07 + 0.46 * k, 0.22, 0.34, 0.62))
            grid = np.array([np.nan if r[col] is None else r[col] for r in rows]).reshape(
                len(xs), len(ys))
            im = ax.pcolormesh(_edges(ys), _edges(xs), grid, cmap="viridis", shading="flat")
            ax.plot(best[varies[1].key], best[varies[0].key], "x", color="white", markersize=8)
            ax.set_xlabel(varies[1].key, fontsize=8)
            ax.set_ylabel(varies[0].key, fontsize=8)
            ax.set_title(label, fontsize=8.5)
            ax.tick_params(labelsize=7)
            fig.colorbar(im, ax=ax, fraction=0.05)
    fig.text(0.07, 0.93, "Calibration sweep", fontsize=11, fontweight="bold", parse_math=False)
    fig.text(0.30, 0.93, f"{title}: rain case “{meta['rain']}”", fontsize=8.5, color="#333333",
             parse_math=False)
    fig.text(0.07, 0.10, OVERSTATE, fontsize=7.5, color="#333333", parse_math=False, wrap=True)
    fig.text(0.07, 0.03, SHORT, fontsize=7, color="#8a1c1c", fontweight="bold",
             parse_math=False, wrap=True)
    return png_bytes(fig, title="Calibration sweep")


def _edges(v) -> np.ndarray:
    v = np.asarray(v, dtype=float)
    mid = (v[1:] + v[:-1]) / 2
    return np.concatenate([[v[0] - (mid[0] - v[0])], mid, [v[-1] + (v[-1] - mid[-1])]])


def _html(scenario, varies, rows, best, meta, png: bytes) -> bytes:
    import base64

    e = html.escape
    keys = [v.key for v in varies]
    chosen = ", ".join(f"{e(k)} = {best[k]:g}" for k in keys)

    def cell(x):
        return "—" if x is None else (f"{x:.3f}" if isinstance(x, float) else e(str(x)))

    head = "".join(f"<th>{e(h)}</th>" for h in keys + list(COLUMNS[1:]))
    body = "".join("<tr" + (' class="best"' if r is best else "") + ">" + "".join(
        f"<td>{cell(r[k])}</td>" for k in keys + list(COLUMNS[1:])) + "</tr>" for r in rows)
    cautions = "".join(f"<li>{e(c)}</li>" for c in CAUTIONS)
    text = f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>Calibration sweep: {e(scenario.title)}</title>
<style>body{{font-family:sans-serif;max-width:72rem;margin:1rem auto;padding:0 1rem;color:#1b1b1b}}
.warn{{border:2px solid #8a1c1c;background:#fbeeee;padding:.5rem 1rem;border-radius:6px}}
table{{border-collapse:collapse;font-size:.85rem}}td,th{{border:1px solid #ccc;padding:.2rem .4rem;text-align:right}}
tr.best td{{background:#eef4e6;font-weight:bold}}img{{max-width:100%}}</style></head><body>
<h1>Calibration sweep: {e(scenario.title)}</h1>
<p class="warn"><strong>{e(SHORT)}</strong></p>
<p class="warn"><strong>Over-fitting:</strong> {e(OVERSTATE)}</p>
<p>Rain case “{e(meta['rain'])}”: the factor of safety of each point is scored against the
mapped landslides of two halves of the inventory, split by {e(meta['split'])} (seed {meta['seed']}):
{meta['landslides_choose']} landslides ({meta['cells_choose']} cells) to choose on,
{meta['landslides_test']} ({meta['cells_test']} cells) to test on. The point is chosen by the true
skill statistic at FS = 1 on the choosing half (the AUC breaks ties; the AUC alone cannot see a
change that scales FS everywhere).</p>
<p><strong>Chosen:</strong> {chosen}: on the test half TSS {cell(best['tss_test'])},
AUC {cell(best['auc_test'])}; on the choosing half TSS {cell(best['tss_choose'])},
AUC {cell(best['auc_choose'])}. The scenario with these values is <code>suggested.toml</code>;
{e(scenario.path.name)} is unchanged.</p>
{_edge_html(meta["best_at_edge"])}
<img alt="Scores of every point of the sweep" src="data:image/png;base64,{base64.b64encode(png).decode()}">
<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>
<h2>Cautions</h2><ol>{cautions}</ol>
<p>slopescreen {e(__version__)}</p></body></html>
"""
    return text.encode("utf-8")


def edge_text(keys) -> str:
    """What to do when the chosen value lies at the end of its swept range."""
    return (f"The chosen {' and '.join(keys)} lies at the end of the swept range: the best value "
            "may lie outside it; widen the range before trusting the choice.")


def _edge_html(keys) -> str:
    return f"<p class=\"warn\">{html.escape(edge_text(keys))}</p>" if keys else ""


def _write(out: Path, scenario, data, best_data, varies, rows, best, meta, timings) -> None:
    png = _plot(varies, rows, best, meta, scenario.title)
    files = {"sweep.csv": _csv_text(varies, rows, meta), "sweep.png": png,
             "sweep.html": _html(scenario, varies, rows, best, meta, png),
             "suggested.toml": _suggested(scenario, best_data, out, varies, best).encode("utf-8")}
    kinds = {"sweep.csv": "csv", "sweep.png": "png", "sweep.html": "html",
             "suggested.toml": "toml"}
    manifest = {"tool": "slopescreen", "version": __version__, "command": "sweep",
                "scenario_sha256": scenario.sha256,
                "varied": [{"key": v.key, "low": v.low, "high": v.high, "n": v.n} for v in varies],
                "best": best, "warning": OVERSTATE, "cautions": list(CAUTIONS),
                "files": [{"path": p, "kind": kinds[p],
                           "sha256": hashlib.sha256(b).hexdigest()} for p, b in files.items()],
                "stage_seconds": timings} | meta
    from .commit import STAGING_PREFIX, output_lock, recover

    out.mkdir(parents=True, exist_ok=True)
    with output_lock(out, scenario.path.name):
        recover(out, protected={p.resolve() for p in scenario.input_files()})
        staging = out / f"{STAGING_PREFIX}{uuid.uuid4().hex[:8]}"
        staging.mkdir()
        try:
            for p, b in files.items():
                (staging / p).write_bytes(b)
            (staging / "manifest.json").write_text(json.dumps(manifest, indent=1) + "\n",
                                                   encoding="utf-8")
            for p in files:
                os.replace(staging / p, out / p)
            os.replace(staging / "manifest.json", out / "manifest.json")
        finally:
            shutil.rmtree(staging, ignore_errors=True)
