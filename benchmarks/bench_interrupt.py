"""How soon Ctrl-C stops a whole run inside each global stage.

Usage::

    python benchmarks/bench_interrupt.py [--size 10000] [--seed 1] [--delay 2.0] [--work DIR]

What it measures and how
------------------------
Inputs
    The pit-rich DEM of ``bench_run.py --dem pits`` (``--size`` x ``--size`` cells, 2 m, the
    fictional Quellmarsh Fell) with its scenario plus ``[runout]`` and ``[corridor]`` (the road
    of ``bench_run.py``), written into the work folder (default
    ``benchmarks/_data/interrupt_<size>_s<seed>``).
Reference
    One whole ``slopescreen -v run`` in a child process, to its end: the seconds of each stage,
    from the run's own log lines (``stage NAME: start`` and ``stage NAME: S s``).
Interrupted runs
    For each global stage (conditioning: Priority-Flood filling and flats; routing:
    receivers and accumulation; the runout of the first rain case: D8 receivers and paths), a
    new ``slopescreen -v run`` into a fresh output folder; ``--delay`` seconds after the
    stage's start line, SIGINT is sent to the child, and the seconds from the signal to the
    child's exit are printed with its exit status (130 expected), beside the stage's
    uninterrupted seconds and their ratio. The output folder must then hold no product and no
    staging folder.

No timing is asserted; the figures go to docs/performance.md.
"""

import argparse
import queue
import shutil
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from bench_run import make_dem, write_inputs  # noqa: E402

STAGES = ("conditioning", "routing", "runout: autumn wet spell")


def _default_sigint():
    """In the child: Ctrl-C acts (a job started in the background by a shell ignores SIGINT,
    and a child would inherit that)."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def start(cli, scenario):
    proc = subprocess.Popen([str(cli), "-v", "run", str(scenario)], stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE, text=True, cwd=scenario.parent,
                            preexec_fn=_default_sigint)
    lines = queue.Queue()

    def read():
        for line in proc.stderr:
            lines.put((time.perf_counter(), line.rstrip("\n")))
        lines.put((time.perf_counter(), None))

    threading.Thread(target=read, daemon=True).start()
    return proc, lines


def reference(cli, scenario):
    """Seconds of every stage of one uninterrupted run."""
    shutil.rmtree(scenario.parent / "results", ignore_errors=True)
    proc, lines = start(cli, scenario)
    seconds = {}
    while (item := lines.get())[1] is not None:
        line = item[1]
        if " stage " in line and not line.endswith(": start"):
            name, _, value = line.split(" stage ", 1)[1].rpartition(": ")
            seconds[name] = float(value.split()[0])
    if proc.wait() != 0:
        raise SystemExit(f"the reference run failed with status {proc.returncode}")
    return seconds


def interrupted(cli, scenario, stage, delay):
    """Seconds from SIGINT to the exit, the exit status and what the output folder holds."""
    out = scenario.parent / "results"
    shutil.rmtree(out, ignore_errors=True)
    proc, lines = start(cli, scenario)
    while True:
        _, line = lines.get()
        if line is None:
            raise SystemExit(f"the run ended before stage {stage!r}")
        if line.endswith(f"stage {stage}: start"):
            break
    time.sleep(delay)
    sent = time.perf_counter()
    proc.send_signal(signal.SIGINT)
    status = proc.wait()
    took = time.perf_counter() - sent
    left = sorted(p.name for p in out.iterdir() if p.name != ".slopescreen.lock") if (
        out.exists()) else []
    return took, status, left


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--size", type=int, default=10000)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--delay", type=float, default=2.0)
    ap.add_argument("--work", type=Path)
    a = ap.parse_args(argv)
    work = a.work or HERE / "_data" / f"interrupt_{a.size}_s{a.seed}"
    cli = Path(sys.executable).with_name("slopescreen")
    dem, described = make_dem("pits", a.size, a.seed)
    scenario = write_inputs(work, dem, corridor=True)
    del dem
    print(f"DEM {a.size} x {a.size} = {a.size * a.size:,} cells ({described}); signal "
          f"{a.delay:g} s after the stage's start line")
    seconds = reference(cli, scenario)
    print("stage                       uninterrupted s   signal->exit s   ratio   status   left")
    for stage in STAGES:
        took, status, left = interrupted(cli, scenario, stage, a.delay)
        full = seconds.get(stage, float("nan"))
        print(f"{stage:<28}{full:>14.1f}{took:>17.2f}{took / full:>8.3f}{status:>9}   "
              f"{', '.join(left) or 'nothing'}")
    print(f"whole uninterrupted run: {sum(seconds.values()):.1f} s of stages")


if __name__ == "__main__":
    main()
