"""Ctrl-C and SIGTERM: a run stops within seconds, leaves nothing behind, results unchanged.

A compiled kernel does not see a signal: Python raises the KeyboardInterrupt
once the kernel returns. The long kernels are therefore called over blocks of
cells (or clusters); the blocks must not change a single bit of the results.
"""

import os
import queue
import re
import shutil
import signal
import subprocess
import sys
import threading
import time

import numba
import numpy as np
import pytest

from conftest import tilted_plane, write_tif
from slopescreen.cli import main
from slopescreen.clusters import ClusterUncertainty, cluster_failure_probability
from slopescreen.hydrology import SteadyRain, StormRain, storm_minimum
from slopescreen.parameters import lognormal, normal, uniform
from slopescreen.probability import encode_table, failure_probability

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals")

SCENARIO = """title = "interrupted"
dem = "dem.tif"
output = "out"

[soil.units.1]
depth_m = {{ uniform = [0.8, 1.6] }}
cohesion_kpa = 1.0
root_cohesion_kpa = {{ uniform = [2.0, 8.0] }}
friction_deg = {{ normal = [34.0, 2.0] }}
unit_weight_kn_m3 = 18.5
conductivity_m_per_day = 2.0

[[rain]]
name = "wet"
steady_mm_per_day = 40

[uncertainty]
samples = {samples}
"""

# 200 x 200 cells x 100 000 samples: the Monte Carlo stage alone takes about 35 s on 2 cores,
# far longer than the 10 s a signal may take to stop the run
LONG_SAMPLES = 100_000
SECONDS_TO_STOP = 10.0
LOG_LINE = re.compile(r"^(DEBUG|INFO|WARNING) slopescreen[\w.]*: ")


def _write_inputs(folder, samples):
    write_tif(folder / "dem.tif", tilted_plane(200, 200, gradient=0.7))  # 35 degrees
    (folder / "scenario.toml").write_text(SCENARIO.format(samples=samples), encoding="utf-8")


@pytest.fixture(scope="module")
def earlier_run(tmp_path_factory):
    """A finished run of the same scenario with few samples (it also compiles every kernel)."""
    folder = tmp_path_factory.mktemp("earlier")
    _write_inputs(folder, samples=20)
    assert main(["-q", "run", str(folder / "scenario.toml")]) == 0
    return folder


def _inputs(folder):
    return {name: (folder / name).read_bytes() for name in ("dem.tif", "scenario.toml")}


def _visible(out):
    return {p.name: p.read_bytes() for p in out.iterdir() if not p.name.startswith(".")}


def _start(scenario):
    """``slopescreen -v run`` in a child process, its stderr lines on a queue."""
    ignored = signal.getsignal(signal.SIGINT) is signal.SIG_IGN
    if ignored:  # a background job: the child would inherit "ignore Ctrl-C"
        signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        proc = subprocess.Popen([sys.executable, "-m", "slopescreen", "-v", "run", str(scenario)],
                                stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                                cwd=scenario.parent)
    finally:
        if ignored:
            signal.signal(signal.SIGINT, signal.SIG_IGN)
    lines = queue.Queue()

    def read():
        with proc.stderr:
            for line in proc.stderr:
                lines.put(line.rstrip("\n"))
        lines.put(None)

    threading.Thread(target=read, daemon=True).start()
    return proc, lines


def _wait_for(proc, lines, marker, timeout=120.0):
    """Read stderr up to the line holding ``marker``; return the lines read."""
    seen = []
    deadline = time.monotonic() + timeout
    while True:
        try:
            line = lines.get(timeout=max(0.1, deadline - time.monotonic()))
        except queue.Empty:
            proc.kill()
            pytest.fail(f"no line {marker!r} within {timeout:.0f} s:\n" + "\n".join(seen))
        if line is None:
            proc.wait()
            pytest.fail(f"the run ended (status {proc.returncode}) before {marker!r}:\n"
                        + "\n".join(seen))
        seen.append(line)
        if marker in line:
            return seen


def _signal_and_wait(proc, lines, signum):
    """Send ``signum``; return the seconds until the process ended and its stderr after that."""
    assert proc.poll() is None, "the run ended before the signal"
    sent = time.monotonic()
    proc.send_signal(signum)
    try:
        proc.wait(timeout=SECONDS_TO_STOP)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
        pytest.fail(f"the run was still running {SECONDS_TO_STOP:.0f} s after the signal")
    took = time.monotonic() - sent
    rest = []
    while (line := lines.get(timeout=10.0)) is not None:
        rest.append(line)
    return took, rest


def _assert_one_line(rest, expected):
    said = [line for line in rest if not LOG_LINE.match(line)]
    assert said == [expected], "\n".join(rest)


def _assert_nothing_left(out, visible_before):
    assert _visible(out) == visible_before  # no product, or the earlier run's, bit for bit
    hidden = {p.name for p in out.iterdir() if p.name.startswith(".")}
    assert not [name for name in hidden if not name.endswith(".lock")], hidden  # no staging


@pytest.mark.parametrize("signum, status, line", [
    (signal.SIGINT, 130, "slopescreen: interrupted; no product was written"),
    (signal.SIGTERM, 143, "slopescreen: terminated; no product was written"),
], ids=["ctrl-c", "sigterm"])
def test_a_signal_stops_the_monte_carlo_kernel_within_seconds(tmp_path, earlier_run, signum,
                                                               status, line):
    # the earlier run's products stay as they were; the signal lands inside the Monte Carlo
    # stage (its start is logged, its end never is)
    shutil.copytree(earlier_run, tmp_path, dirs_exist_ok=True)
    _write_inputs(tmp_path, samples=LONG_SAMPLES)
    inputs = _inputs(tmp_path)
    before = _visible(tmp_path / "out")
    assert "manifest.json" in before
    proc, lines = _start(tmp_path / "scenario.toml")
    _wait_for(proc, lines, "stage probability of failure: wet: start")
    time.sleep(1.0)  # inside the kernel by now (loaded from numba's cache)
    took, rest = _signal_and_wait(proc, lines, signum)
    assert proc.returncode == status, "\n".join(rest)
    assert took < SECONDS_TO_STOP
    _assert_one_line(rest, line)
    assert not any("stage probability of failure: wet:" in r for r in rest)  # it never ended
    _assert_nothing_left(tmp_path / "out", before)
    assert _inputs(tmp_path) == inputs


def test_sigterm_in_an_early_stage_leaves_nothing(tmp_path):
    _write_inputs(tmp_path, samples=LONG_SAMPLES)
    inputs = _inputs(tmp_path)
    proc, lines = _start(tmp_path / "scenario.toml")
    _wait_for(proc, lines, "stage conditioning: start")
    took, rest = _signal_and_wait(proc, lines, signal.SIGTERM)
    assert proc.returncode == 143, "\n".join(rest)
    _assert_one_line(rest, "slopescreen: terminated; no product was written")
    _assert_nothing_left(tmp_path / "out", {})
    assert _inputs(tmp_path) == inputs


def test_main_restores_the_sigterm_handler(plane_scenario, capsys):
    before = signal.getsignal(signal.SIGTERM)
    assert main(["-q", "check", str(plane_scenario)]) == 0
    assert signal.getsignal(signal.SIGTERM) is before
    # outside the main thread no handler can be set: main runs without one
    codes = []
    worker = threading.Thread(target=lambda: codes.append(main(["-q", "check",
                                                                str(plane_scenario)])))
    worker.start()
    worker.join()
    assert codes == [0] and signal.getsignal(signal.SIGTERM) is before


# --- the blocks do not change the results --------------------------------------------------

UNIT = {"depth_m": uniform(0.8, 1.6), "cohesion_kpa": 1.0, "root_cohesion_kpa": uniform(2.0, 8.0),
        "friction_deg": normal(34.0, 2.0), "unit_weight_kn_m3": 18.5,
        "conductivity_m_per_day": lognormal(2.0, 0.3), "diffusivity_m2_per_s": 5e-5}
OTHER = dict(UNIT, friction_deg=normal(30.0, 3.0), cohesion_kpa=uniform(0.5, 4.0))


@pytest.fixture
def two_threads():
    """Two numba threads (the least number of cells or clusters a call takes depends on it)."""
    before = numba.get_num_threads()
    numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
    yield
    numba.set_num_threads(before)


def _spy(monkeypatch, module, name):
    """Record the arguments of every call of a module's kernel."""
    kernel = getattr(module, name)
    calls = []

    def spy(*args):
        calls.append(args)
        return kernel(*args)

    monkeypatch.setattr(module, name, spy)
    return calls


def _soil_grid(shape=(37, 41), seed=5):
    rng = np.random.default_rng(seed)
    slope = rng.uniform(15.0, 48.0, shape)
    sca = rng.uniform(5.0, 400.0, shape)
    unit = rng.integers(0, 2, shape)
    unit[3, :] = -1
    slope[:, 7] = np.nan
    return slope, sca, unit


MONTE_CARLO_CASES = {
    "steady, cell": (SteadyRain(40.0), dict(samples=300, seed=7)),
    "steady, unit": (SteadyRain(25.0), dict(samples=257, seed=11, correlation="unit")),
    "storm": (StormRain(15.0, 8.0, 1.2), dict(samples=64, seed=3, n_depths=20,
                                               min_failure_depth_m=0.3)),
    "storm, antecedent, slope-normal": (
        StormRain(20.0, 4.0, None, antecedent_mm_per_day=5.0),
        dict(samples=50, seed=2, n_depths=5, depth_measured="slope_normal")),
}


@pytest.mark.parametrize("case", sorted(MONTE_CARLO_CASES))
def test_monte_carlo_in_blocks_matches_one_whole_range_call(monkeypatch, case):
    # the function as it was: one kernel call over every cell, 512 cells a task; against it,
    # blocks whose edges cut through those tasks
    from slopescreen.probability import monte_carlo

    rain, kw = MONTE_CARLO_CASES[case]
    slope, sca, unit = _soil_grid()
    table = encode_table([UNIT, OTHER])
    calls = _spy(monkeypatch, monte_carlo, "_failure_probability_kernel")
    monkeypatch.setattr(monte_carlo, "_call_size", lambda *a: (slope.size, monte_carlo._CHUNK))
    whole = failure_probability(slope, sca, unit, table, rain, **kw)
    assert [c[-5:-2] for c in calls] == [(0, slope.size, 512)]
    monkeypatch.undo()
    calls = _spy(monkeypatch, monte_carlo, "_failure_probability_kernel")
    monkeypatch.setattr(monte_carlo, "_call_size", lambda *a: (61, 17))  # 61 cells a call
    blocks = failure_probability(slope, sca, unit, table, rain, **kw)
    assert [c[-5:-3] for c in calls] == [(s, min(slope.size, s + 61))
                                         for s in range(0, slope.size, 61)]
    for a, b in zip(whole, blocks):
        assert np.array_equal(a, b, equal_nan=True)


def test_storm_minimum_in_blocks_matches_one_whole_range_call(monkeypatch):
    from slopescreen.hydrology import storm

    slope, _, _ = _soil_grid((97, 103), seed=3)
    depth = np.random.default_rng(4).uniform(0.8, 1.6, slope.shape)
    kw = dict(soil_depth_m=depth, water_table_depth_m=1.0, intensity_m_per_s=15 / 3.6e6,
              conductivity_m_per_s=2.0 / 86400, diffusivity_m2_per_s=5e-5, duration_s=8 * 3600.0,
              cohesion_kpa=1.0, root_cohesion_kpa=5.0, friction_deg=34.0, unit_weight_kn_m3=18.5,
              n_depths=20, min_failure_depth_m=0.3, contributing_area_m2=1000.0)
    calls = _spy(monkeypatch, storm, "_storm_minimum_kernel")
    monkeypatch.setattr(storm, "_CALL_DEPTHS", 10**12)
    whole = storm_minimum(slope, **kw)
    assert len(calls) == 1
    monkeypatch.setattr(storm, "_CALL_DEPTHS", 1)  # 4096 cells a call
    calls.clear()
    blocks = storm_minimum(slope, **kw)
    assert len(calls) == -(-slope.size // 4096)
    for a, b in zip(whole, blocks):
        assert np.array_equal(a, b, equal_nan=True)


@pytest.mark.parametrize("rain", [SteadyRain(40.0), StormRain(15.0, 8.0, 1.2)],
                         ids=["steady", "storm"])
def test_cluster_probability_in_blocks_matches_one_whole_range_call(monkeypatch, two_threads,
                                                                    rain):
    from slopescreen.clusters import probability

    rng = np.random.default_rng(8)
    m = 40
    slope = rng.uniform(25.0, 40.0, (m, m))
    aspect = rng.uniform(150.0, 210.0, (m, m))
    labels = np.zeros((m, m), np.int32)
    k = 0
    for i in range(1, m - 6, 5):
        for j in range(1, m - 6, 4):
            k += 1
            labels[i:i + 2 + (i * j) % 4, j:j + 1 + (i + j) % 3] = k
    unc = ClusterUncertainty(unit_index=rng.integers(0, 2, (m, m)),
                             table=encode_table([UNIT, OTHER]),
                             lateral_root_cohesion_kpa=uniform(1.0, 4.0), samples=60, seed=5,
                             rain=rain, sca_m=rng.uniform(20.0, 400.0, (m, m)), n_depths=20,
                             min_failure_depth_m=0.3)
    calls = _spy(monkeypatch, probability, "_cluster_fs_kernel")
    monkeypatch.setattr(probability, "_CALL_CELL_SAMPLES", 10**12)
    whole = cluster_failure_probability(labels, slope, aspect, dx=5.0, dy=5.0, uncertainty=unc,
                                        keep_samples=True)
    assert len(calls) == 1
    monkeypatch.setattr(probability, "_CALL_CELL_SAMPLES", 60 * 7)  # about 7 cells a call
    calls.clear()
    blocks = cluster_failure_probability(labels, slope, aspect, dx=5.0, dy=5.0,
                                         uncertainty=unc, keep_samples=True)
    assert len(calls) > 10
    assert np.array_equal(whole.fs_samples, blocks.fs_samples)
    assert np.array_equal(whole.p_f, blocks.p_f)


# ---------------------------------------------------------------------------------------------
# The global kernels (Priority-Flood filling, flats, receivers, accumulation, runout paths) run
# once over the whole grid; they run on a worker thread and poll a stop flag that the main
# thread sets when a signal's exception arrives (slopescreen._stoppable)
# ---------------------------------------------------------------------------------------------

ROWS = 400   # 160,000 cells: more steps than one poll interval (2^16) of every kernel


def _pitted_noise(rows=ROWS, seed=3):
    """Random relief: pits everywhere, so filling takes every cell through its queues."""
    return np.random.default_rng(seed).random((rows, rows)).astype(np.float32) * 10.0


@pytest.fixture
def flag_up(monkeypatch):
    """Every stoppable kernel starts with its stop flag already set."""
    from slopescreen import _stoppable

    monkeypatch.setattr(_stoppable, "new_flag", lambda: np.ones(1, dtype=np.uint8))


def test_a_set_flag_stops_the_fill_kernel(flag_up):
    from slopescreen.terrain import fill_depressions

    z = _pitted_noise()
    partial = fill_depressions(z)
    assert (partial < _full(fill_depressions, z)).any()     # pits left unfilled
    assert (partial >= z).all()                              # the input itself untouched


def _full(fn, *args, **kw):
    from slopescreen import _stoppable

    with pytest.MonkeyPatch.context() as m:
        m.setattr(_stoppable, "new_flag", lambda: np.zeros(1, dtype=np.uint8))
        return fn(*args, **kw)


def test_a_set_flag_stops_the_flats_kernel(flag_up):
    from slopescreen.routing import drainage_over_flats

    z = np.zeros((ROWS, ROWS), dtype=np.float32)
    z[ROWS // 2, 1] = -1.0                      # a pit by the west edge of a flat grid
    full = _full(drainage_over_flats, z)
    # every interior cell of the flat drains (Barnes et al. 2014); the edge cells are outlets
    assert (full != 255).sum() >= (ROWS - 2) ** 2 - 10
    assert (drainage_over_flats(z) != full).any()


def test_a_set_flag_stops_the_receiver_and_accumulation_kernels(flag_up):
    from slopescreen.routing import accumulation as A
    from slopescreen.routing.directions import _receiver_codes
    from slopescreen._neighbours import pad_nan

    zp = pad_nan(tilted_plane(ROWS, ROWS, gradient=0.4))
    codes = _receiver_codes(zp, 5.0, 5.0, 0, 1.1)[0]
    assert (codes == 255).all()                 # every row skipped
    # the accumulation alone, on the receivers of a run without the flag
    codes, frac, _, offsets, nb = _full(_receiver_codes, zp, 5.0, 5.0, 0, 1.1)
    flat = zp.reshape(-1)
    indeg = np.zeros(flat.size, dtype=np.uint8)
    acc = np.empty(flat.size, dtype=np.float64)
    A._indegree_kernel(flat, codes, frac, offsets, A._FACET_CARD, A._FACET_DIAG, 25.0, indeg,
                       acc)
    A._accumulate_kernel(flat, codes, frac, indeg.copy(), offsets, nb, A._FACET_CARD,
                         A._FACET_DIAG, 1.1, acc, np.ones(1, dtype=np.uint8))
    full = _full(A._route_padded, zp, 5.0, 5.0, 0, 1.1)[0].reshape(-1)
    done = acc == full
    assert done.sum() < 0.5 * np.isfinite(full).sum()   # stopped after one poll interval


def test_a_set_flag_stops_the_runout_kernel(flag_up):
    from slopescreen._neighbours import pad_nan
    from slopescreen.runout import patch_sources, runout_reach

    z = tilted_plane(60, 20, gradient=0.7).astype(np.float64)
    mask = np.zeros(z.shape, bool)
    mask[5, 10] = True
    sources = patch_sources(mask, z, np.ones(z.shape), np.full(z.shape, 0.8),
                            np.full(z.shape, 180.0), dx=5.0, dy=5.0)
    kw = dict(dx=5.0, dy=5.0, receivers=_full(_d8, z))
    assert _full(runout_reach, pad_nan(z), sources, [20.0], **kw).travel_m[0] > 0
    assert runout_reach(pad_nan(z), sources, [20.0], **kw).travel_m[0] == 0   # never started


def _d8(z):
    from slopescreen._neighbours import pad_nan
    from slopescreen.runout.reach import d8_receivers

    return d8_receivers(pad_nan(z), 5.0, 5.0)


def test_results_are_bit_identical_on_the_worker_thread():
    # the kernels run on a worker thread from the main thread, directly from any other
    from slopescreen.routing import flow_accumulation
    from slopescreen.terrain import fill_depressions

    z = _pitted_noise(200)
    on_main = fill_depressions(z), flow_accumulation(z, 5.0, 5.0).area_m2
    box = {}
    t = threading.Thread(target=lambda: box.update(r=(fill_depressions(z),
                                                        flow_accumulation(z, 5.0, 5.0).area_m2)))
    t.start()
    t.join()
    for a, b in zip(on_main, box["r"]):
        assert np.array_equal(a, b, equal_nan=True)


def test_ctrl_c_stops_priority_flood_midway():
    # Ctrl-C while the fill kernel runs on a 3000 x 3000 grid of pits (about 2 s of work on
    # two cores): KeyboardInterrupt comes while the kernel is mid-way (the surface is left
    # partly filled) and no kernel thread is left running
    from slopescreen.terrain import _fill_depressions_padded
    from slopescreen._neighbours import pad_nan

    z = _pitted_noise(3000)
    zp = pad_nan(z)
    old = signal.signal(signal.SIGINT, signal.default_int_handler)

    def send_when_started():
        deadline = time.monotonic() + 30.0
        while time.monotonic() < deadline:
            if any(t.name == "slopescreen-kernel" for t in threading.enumerate()):
                time.sleep(0.05)
                os.kill(os.getpid(), signal.SIGINT)
                return
            time.sleep(0.001)

    sender = threading.Thread(target=send_when_started)
    try:
        sender.start()
        with pytest.raises(KeyboardInterrupt):
            _fill_depressions_padded(zp)
            time.sleep(5.0)     # a kernel that does not stop: the signal lands here, and the
            #                     surface below is filled whole
    finally:
        sender.join()
        signal.signal(signal.SIGINT, old)
    for t in threading.enumerate():   # its kernel has returned: the thread ends at once
        if t.name == "slopescreen-kernel":
            t.join(timeout=2.0)
    assert not any(t.name == "slopescreen-kernel" for t in threading.enumerate())
    full = _fill_depressions_padded(pad_nan(z))
    assert (zp[1:-1, 1:-1] < full[1:-1, 1:-1]).any()     # stopped before the end
