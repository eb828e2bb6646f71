"""API behaviour of the size-resolved search: the checked solver wrapper, bands, candidates."""

import math

import cvxpy as cp
import numpy as np
import pytest

from slopescreen.clusters import cluster_forces, failure_clusters
from slopescreen.clusters._solve import solve_checked
from slopescreen.clusters.band import least_stable_in_band
from slopescreen.clusters.sizes import (
    SIZE_COLUMNS,
    area_bands,
    candidate_windows,
    size_resolved_clusters,
)
from slopescreen.errors import InputError, SolverError

SOIL = dict(cohesion_kpa=0.5, root_cohesion_kpa=0.5, lateral_root_cohesion_kpa=2.0,
            friction_deg=34.0, unit_weight_kn_m3=18.5)


def _forces(rows=12, cols=12, steep_deg=45.0, **soil):
    slope = np.full((rows, cols), 30.0)
    slope[3:8, 4:8] = steep_deg
    slope[0, 0] = np.nan
    return cluster_forces(slope, np.full((rows, cols), 180.0), 1.0, 0.6, dx=5.0, dy=5.0,
                          **(SOIL | soil))


def test_solver_wrapper_raises_on_infeasible_and_unbounded():
    x = cp.Variable(2)
    with pytest.raises(SolverError, match="infeasible"):
        solve_checked(cp.Problem(cp.Minimize(cp.sum(x)), [x >= 1, x <= 0]))
    with pytest.raises(SolverError, match="unbounded"):
        solve_checked(cp.Problem(cp.Minimize(cp.sum(x)), [x <= 0]))
    with pytest.raises(SolverError, match="minimisation"):
        solve_checked(cp.Problem(cp.Maximize(cp.sum(x)), [x <= 0]))


def test_solver_wrapper_reports_a_time_limit_stop():
    prob, x, a, b = _knapsack()
    out = solve_checked(prob, time_limit_s=0.3)
    assert out.status == "time_limit"
    assert out.dual_bound <= out.value   # a lower bound on the optimum
    xv = np.round(x.value)
    assert (a @ xv <= b).all() and prob.objective.value == pytest.approx(out.value)
    with pytest.raises(SolverError, match="time_limit_s"):
        solve_checked(prob, time_limit_s=-1.0)


def test_area_bands():
    assert area_bands(25.0, 2500.0, 25.0, 1) == [(1, 100)]
    bands = area_bands(25.0, 2500.0, 25.0, 3)
    cells = [k for lo, hi in bands for k in range(lo, hi + 1)]
    assert cells == list(range(1, 101))      # disjoint and complete
    assert area_bands(0.0, 60.0, 25.0, [(30.0, 60.0)]) == [(2, 2)]
    with pytest.raises(InputError, match="whole number"):
        area_bands(30.0, 40.0, 25.0)
    with pytest.raises(InputError, match="bands"):
        area_bands(25.0, 100.0, 25.0, 0)


def test_candidate_windows_from_clusters_and_bound_map():
    slope = np.full((30, 30), 28.0)
    slope[3:7, 3:6] = 47.0
    slope[20:25, 22:26] = 47.0
    kw = dict(dx=5.0, dy=5.0, aspect_deg=np.full((30, 30), 180.0), **SOIL)
    res = failure_clusters(slope, 1.0, 0.3, bound=False, **kw)
    assert res.labels.max() == 2
    wins = candidate_windows(res.labels.shape, labels=res.labels, window_cells=10)
    assert len(wins) == 2
    for i, (r0, r1, c0, c1) in enumerate(wins, start=1):
        assert r1 - r0 == 10 and c1 - c0 == 10 and 0 <= r0 and r1 <= 30 and c1 <= 30
        rr, cc = np.nonzero(res.labels == i)
        assert r0 <= rr.min() and rr.max() < r1 and c0 <= cc.min() and cc.max() < c1
    with pytest.raises(InputError, match="labels"):
        candidate_windows((30, 30), labels=np.zeros((3, 3), int))


def test_candidate_windows_in_priority_order_skip_covered_clusters():
    lab = np.zeros((60, 60), np.int32)
    lab[10:13, 10:13] = 1
    lab[14:16, 14:16] = 2          # inside the window of cluster 1
    lab[40:44, 45:49] = 3
    lab[50:52, 5:8] = 4
    wins = candidate_windows(lab.shape, labels=lab, window_cells=20, order=[3, 1, 2, 4],
                             max_clusters=2)
    assert len(wins) == 2
    assert wins[0][0] <= 40 and 44 <= wins[0][1] and wins[0][2] <= 45 and 49 <= wins[0][3]
    assert wins[1][0] <= 10 and 13 <= wins[1][1]        # cluster 1, then the limit
    every = candidate_windows(lab.shape, labels=lab, window_cells=20, order=[1, 2, 3, 4])
    assert len(every) == 3                              # cluster 2 is covered by 1's window


def test_band_without_any_set_and_bad_inputs():
    f = _forces()
    res = least_stable_in_band(f, (0, 3, 0, 3), min_area_m2=250.0, max_area_m2=500.0)
    assert res.method == "none" and math.isnan(res.fs) and not res.mask.any()
    with pytest.raises(InputError, match="time_limit_s"):
        least_stable_in_band(f, (0, 6, 0, 6), min_area_m2=25.0, max_area_m2=50.0,
                             time_limit_s=0.0)
    with pytest.raises(InputError, match="window"):
        least_stable_in_band(f, (0, 20, 0, 6), min_area_m2=25.0, max_area_m2=50.0)


def test_size_resolved_table_and_untouched_inputs():
    # lateral roots of 8 kPa keep every face submodular on the 40 degree block (phi' 34)
    f = _forces(steep_deg=40.0, lateral_root_cohesion_kpa=8.0)
    shape = f.valid.shape
    kw = dict(min_area_m2=50.0, max_area_m2=600.0, bands=2, time_limit_s=5.0)
    before = [a.copy() for a in (f.driving, f.resisting, f.face_resistance, f.face_thrust)]
    # the whole grid, a window inside it, a window that cuts the large band's cluster of the
    # whole grid, and the whole grid again
    windows = [(0, 12, 0, 12), (2, 10, 2, 10), (2, 7, 2, 10), (0, 12, 0, 12)]
    res = size_resolved_clusters(f, candidates=windows, **kw)
    for a, b in zip(before, (f.driving, f.resisting, f.face_resistance, f.face_thrust)):
        np.testing.assert_array_equal(a, b)
    assert tuple(res.table) == SIZE_COLUMNS
    # the listing rule of size_resolved_clusters' docstring, applied here to each window's own
    # answers (every window searched alone): a cluster that already answers a band for an
    # earlier window is left out; windows keep their order
    expected, seen = [], set()
    for ci, window in enumerate(windows[:3]):
        alone = size_resolved_clusters(f, candidates=[window], **kw)
        assert (alone.table["band"] == [0, 1]).all() and (alone.table["n_cells"] > 0).all()
        for i in range(2):
            mask = alone.grid_mask(i, shape)
            key = (i, mask.tobytes())
            if key not in seen:
                seen.add(key)
                expected.append((ci, i, mask, float(alone.table["fs"][i])))
    assert len(res.masks) == len(expected)
    for i, (ci, band, mask, fs) in enumerate(expected):
        assert res.table["candidate"][i] == ci and res.table["band"][i] == band
        np.testing.assert_array_equal(res.grid_mask(i, shape), mask)
        assert res.table["fs"][i] == pytest.approx(fs, rel=1e-12)
    # whatever the answers, a repeated window adds no row: each of its answers is one of the
    # first listing's
    assert 3 not in res.table["candidate"]
    # the instance exercises both branches of the rule: some later window's answer coincides
    # with an earlier one (6 answers of the 3 windows, fewer listed) and some does not (the
    # window of rows 2..6 holds only part of the whole grid's large-band cluster, rows 3..7)
    assert len(expected) < 6 and (np.asarray([e[0] for e in expected]) > 0).any()
    keys = {(int(b), res.grid_mask(i, shape).tobytes()) for i, b in enumerate(res.table["band"])}
    assert len(keys) == len(res.masks)     # no cluster twice in one band
    assert res.table["proven"].all()
    assert (res.table["area_m2"] == res.table["n_cells"] * 25.0).all()
    assert not any(res.grid_mask(i, shape)[0, 0] for i in range(len(res.masks)))  # nodata


def test_stage_with_size_resolved_search_and_probability():
    from slopescreen.parameters import normal
    from slopescreen.probability import encode_table

    slope = np.full((16, 16), 29.0)
    slope[4:9, 5:9] = 46.0
    aspect = np.full((16, 16), 180.0)
    unit = {"depth_m": 1.0, "cohesion_kpa": 0.5, "root_cohesion_kpa": normal(0.5, 0.2),
            "friction_deg": normal(34.0, 2.0), "unit_weight_kn_m3": 18.5,
            "conductivity_m_per_day": 2.0}
    unc = dict(unit_index=np.zeros((16, 16), int), table=encode_table([unit]),
               lateral_root_cohesion_kpa=2.0, samples=200, seed=4)
    res = failure_clusters(slope, 1.0, 0.3, dx=5.0, dy=5.0, aspect_deg=aspect,
                           bound_window_cells=8, bound_stride_cells=4, min_area_m2=50.0,
                           max_area_m2=500.0, size_resolved=True, size_bands=2,
                           size_time_limit_s=5.0, size_window_cells=10, size_n_least=2,
                           uncertainty=unc, **SOIL)
    assert res.labels.max() == 1
    p = res.table["probability"][0]
    assert 0.0 < p <= 1.0 and res.table["probability_se"][0] == pytest.approx(
        np.sqrt(p * (1 - p) / 200))
    sizes = res.size_resolved
    t = sizes.table
    # at most one row per window and band, each (band, cluster) once
    assert len(np.unique(t["candidate"])) >= 2 and len(t["fs"]) <= 2 * len(np.unique(
        t["candidate"]))
    assert len({(int(b), sizes.grid_mask(i, slope.shape).tobytes())
                for i, b in enumerate(t["band"])}) == len(t["fs"])
    found = t["n_cells"] > 0
    assert np.isfinite(t["probability"][found]).all()
    assert ((t["probability"][found] >= 0) & (t["probability"][found] <= 1)).all()
    # without the option the result keeps its former form
    plain = failure_clusters(slope, 1.0, 0.3, dx=5.0, dy=5.0, aspect_deg=aspect, bound=False,
                             **SOIL)
    assert plain.size_resolved is None and np.isnan(plain.table["probability"]).all()
    with pytest.raises(InputError, match="area range"):
        failure_clusters(slope, 1.0, 0.3, dx=5.0, dy=5.0, aspect_deg=aspect, bound=False,
                         size_resolved=True, **SOIL)


def _knapsack():
    # a random multidimensional knapsack that HiGHS needs seconds to prove (seeded)
    rng = np.random.default_rng(0)
    n, m = 70, 12
    a = rng.integers(20, 100, (m, n))
    b = a.sum(axis=1) // 2
    c = rng.integers(20, 100, n) + a.mean(0).round()
    x = cp.Variable(n, boolean=True)
    return cp.Problem(cp.Minimize(-c @ x), [a @ x <= b]), x, a, b


def test_solver_process_is_killed_past_its_limit_and_keeps_the_start(monkeypatch):
    # HiGHS does not look at the clock in every phase (its root cut rounds can overrun a
    # 3 s limit by 30 s); the wrapper kills the child process instead. Here the wait is cut
    # below HiGHS's own limit so that the kill path runs every time.
    from slopescreen.clusters import _highs_process

    prob, x, a, b = _knapsack()
    first = solve_checked(prob, time_limit_s=0.3)
    held = x.value.copy()
    kills = _highs_process._PROCESS.kills
    monkeypatch.setattr(_highs_process, "grace_s", lambda t: 0.05 - float(t))
    out = solve_checked(prob, time_limit_s=30.0, warm_start=True)
    assert _highs_process._PROCESS.kills == kills + 1
    assert out.status == "time_limit"
    assert out.dual_bound == -math.inf          # nothing proven by a killed solve
    assert out.value == pytest.approx(first.value)
    np.testing.assert_array_equal(x.value, held)  # the variables hold the start point
    with pytest.raises(SolverError, match="overran"):
        solve_checked(cp.Problem(prob.objective, prob.constraints), time_limit_s=30.0)
    monkeypatch.undo()
    again = solve_checked(prob, time_limit_s=0.3, warm_start=True)  # a fresh child answers
    assert again.value <= first.value + 1e-9 and (a @ np.round(x.value) <= b).all()


def test_solver_process_keeps_the_highs_banner_off_stdout(capfd):
    from slopescreen.clusters import _highs_process

    _highs_process._PROCESS.close()    # the banner is printed when a child starts
    x = cp.Variable(2, boolean=True)
    solve_checked(cp.Problem(cp.Minimize(x[0] - 2 * x[1]), [cp.sum(x) <= 1]))
    out, _ = capfd.readouterr()
    assert out == ""


def test_solver_process_is_told_where_numpy_and_highspy_live():
    # the child appends these folders to its path (never prepends: nothing may shadow the
    # standard library), so it imports the parent's numpy and highspy
    from pathlib import Path

    import highspy

    from slopescreen.clusters._highs_process import _package_folders

    folders = [Path(f) for f in _package_folders()]
    assert any((f / "numpy").is_dir() for f in folders)
    assert Path(highspy.__file__).resolve().parent.parent in [f.resolve() for f in folders]


def test_solver_process_is_stopped_when_the_wait_is_interrupted(monkeypatch):
    # Ctrl-C while HiGHS works in the child: the child is killed, not left solving alone
    import queue as queue_module

    from slopescreen.clusters import _highs_process

    prob, _, _, _ = _knapsack()
    solve_checked(prob, time_limit_s=0.3)            # a running child
    child = _highs_process._PROCESS._proc
    assert child is not None and child.poll() is None

    def interrupted(self, block=True, timeout=None):
        raise KeyboardInterrupt

    monkeypatch.setattr(queue_module.Queue, "get", interrupted)
    with pytest.raises(KeyboardInterrupt):
        solve_checked(prob, time_limit_s=30.0)
    monkeypatch.undo()
    assert child.poll() is not None                    # the child has ended
    assert solve_checked(prob, time_limit_s=0.3).status in ("optimal", "time_limit")
