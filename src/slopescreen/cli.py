"""Command line: ``slopescreen run|check|demo|sweep``.

A thin layer: it parses arguments, calls the library and turns package errors
into exit status 2 with one line of text. Exit 0 on success, 2 on bad input,
1 on an internal fault (rerun with ``-v`` to see the traceback).
"""

from __future__ import annotations

import argparse
import logging
import os
import signal
import sys
import threading
import warnings

from . import __version__
from .errors import InputError, InputWarning

log = logging.getLogger("slopescreen")


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="slopescreen",
        description="Screen hillslopes for rainfall-triggered shallow landslides.",
        epilog="Screening results only; decisions rest with licensed geotechnical engineers or "
               "engineering geologists, official warnings and local codes.")
    p.add_argument("--version", action="version", version=f"slopescreen {__version__}")
    loud = p.add_mutually_exclusive_group()
    loud.add_argument("-v", "--verbose", action="store_true",
                      help="log each stage with its time, and show tracebacks")
    loud.add_argument("-q", "--quiet", action="store_true",
                      help="print nothing but errors (no progress bar)")
    # the same two flags after the command too (slopescreen run -q x.toml); SUPPRESS keeps
    # a flag given before the command when it is not repeated after it
    common = argparse.ArgumentParser(add_help=False, argument_default=argparse.SUPPRESS)
    after = common.add_mutually_exclusive_group()
    after.add_argument("-v", "--verbose", action="store_true", help="as before the command")
    after.add_argument("-q", "--quiet", action="store_true", help="as before the command")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")
    r = sub.add_parser("run", help="run a scenario and write its products", parents=[common])
    r.add_argument("scenario", metavar="SCENARIO", help="scenario file (TOML)")
    c = sub.add_parser("check", help="validate a scenario and its inputs; compute nothing",
                       parents=[common])
    c.add_argument("scenario", metavar="SCENARIO", help="scenario file (TOML)")
    w = sub.add_parser("sweep", parents=[common],
                       help="score one or two parameters against the mapped landslides "
                            "(calibration on held-out landslides)")
    w.add_argument("scenario", metavar="SCENARIO", help="scenario file (TOML) with [inventory]")
    w.add_argument("--vary", metavar="KEY=LOW:HIGH:N", action="append", required=True,
                   help="a number of the scenario's [soil] or [[rain]] and its range, e.g. "
                        "soil.units.1.friction_deg=30:38:5 (give one or two)")
    w.add_argument("--rain", metavar="NAME", help="rain case scored (default: the first)")
    w.add_argument("--split", choices=("blocks", "random"), default="blocks",
                   help="split the landslides by spatial blocks (default) or at random")
    w.add_argument("--block-m", type=float, metavar="M",
                   help="block side of the spatial split, m (default: a quarter of the DEM)")
    w.add_argument("--seed", type=int, default=0, help="seed of the split (default 0)")
    w.add_argument("--output", metavar="FOLDER",
                   help="folder of the sweep's files (default: the scenario's output + -sweep)")
    d = sub.add_parser("demo", help="write the built-in demo inputs and run them", parents=[common])
    d.add_argument("folder", metavar="FOLDER", nargs="?", default="slopescreen-demo",
                   help="where to write the demo (default: ./slopescreen-demo)")
    return p


def _write_line(text: str) -> None:
    """Print one line on stderr without breaking a progress bar that is showing."""
    from tqdm import tqdm

    tqdm.write(text, file=sys.stderr)


class _BarSafeHandler(logging.Handler):
    """Log records on stderr, written around the progress bar."""

    def emit(self, record):
        try:
            _write_line(self.format(record))
        except Exception:  # pragma: no cover - logging must never raise
            self.handleError(record)


def _setup_logging(verbose: bool, quiet: bool) -> None:
    level = logging.INFO if verbose else (logging.ERROR if quiet else logging.WARNING)
    handler = _BarSafeHandler()
    handler.setFormatter(logging.Formatter("%(levelname)s %(name)s: %(message)s"))
    root = logging.getLogger("slopescreen")
    root.handlers[:] = [handler]
    root.setLevel(level)


class StageProgress:
    """Progress over the stages of a run, on stderr.

    On a terminal it is a bar (tqdm) named after the running stage, its
    elapsed time ticking while a long stage computes; elsewhere (a log file,
    a pipe) it is one line per stage. Nothing is printed before
    :meth:`begin`, which the pipeline calls only once the inputs have been
    read, so a bad-input run still prints its one error line only.

    Parameters
    ----------
    stream : file-like, optional
        Where to write (default: ``sys.stderr`` at the time of writing).
    bar : bool, optional
        Force the bar on or off; default: a bar when ``stream`` is a terminal.
    tick_s : float
        Refresh interval of the bar's clock, seconds.
    """

    def __init__(self, stream=None, *, bar=None, tick_s=0.5):
        self._stream = stream
        self._bar_wanted = bar
        self._tick_s = tick_s
        self._bar = None
        self._names: list[str] = []
        self._started = 0
        self._stop = threading.Event()
        self._ticker = None

    @property
    def stream(self):
        return self._stream if self._stream is not None else sys.stderr

    def output(self, folder) -> None:
        """Say where the run writes (its first line; called once the inputs are checked)."""
        print(f"slopescreen: writing into {folder}", file=self.stream, flush=True)

    def begin(self, names) -> None:
        """Start showing progress over the planned stage names."""
        self._names = list(names)
        self._started = 0
        use_bar = self._bar_wanted
        if use_bar is None:
            use_bar = bool(getattr(self.stream, "isatty", lambda: False)())
        if use_bar:
            from tqdm import tqdm

            self._bar = tqdm(total=len(self._names), file=self.stream, unit="stage", leave=True,
                             dynamic_ncols=True, desc="starting",
                             bar_format="{desc:<42.42} {bar} {n_fmt}/{total_fmt} stages [{elapsed}]")
            self._stop.clear()
            self._ticker = threading.Thread(target=self._tick, daemon=True)
            self._ticker.start()

    def _tick(self) -> None:
        while not self._stop.wait(self._tick_s):
            bar = self._bar
            if bar is not None:
                bar.refresh()

    def __call__(self, name: str) -> None:
        """A stage starts."""
        self._started += 1
        total = max(len(self._names), self._started)
        if self._bar is not None:
            if self._bar.total < total:
                self._bar.total = total
            self._bar.n = self._started - 1
            self._bar.set_description_str(name, refresh=True)
        elif self._names:
            print(f"  [{self._started}/{total}] {name}", file=self.stream, flush=True)
        else:  # no plan was given: plain lines
            print(f"  {name} ...", file=self.stream, flush=True)

    def end(self) -> None:
        """The run finished (or failed): stop the clock and close the bar."""
        self._stop.set()
        if self._ticker is not None:
            self._ticker.join()
            self._ticker = None
        if self._bar is not None:
            if self._started >= len(self._names):
                self._bar.n = self._bar.total
                self._bar.set_description_str("done", refresh=False)
            self._bar.close()
            self._bar = None


def _progress(quiet: bool):
    return None if quiet else StageProgress()


def _summary(result, quiet: bool) -> None:
    if quiet:
        return
    print(f"wrote {len(result.products)} products and manifest.json to {result.output}")
    report = result.output / "report.html"
    if report.is_file():
        print(f"open the report: {report}")
    total = sum(result.timings_s.values())
    print(f"done in {total:.1f} s. Screening result only: read the cautions in the report.")


def _sweep(args) -> int:
    from .inventory.sweep_keys import parse_vary
    from .pipeline.sweep import OVERSTATE, edge_text, run_sweep

    name = os.path.basename(args.scenario)
    try:
        varies = [parse_vary(text) for text in args.vary]
    except InputError as exc:
        raise InputError(f"{name}: {exc}") from None
    if args.block_m is not None and not args.block_m > 0:
        raise InputError(f"{name}: --block-m: must be > 0, got {args.block_m:g}")
    say = None if args.quiet else (lambda text: _write_line(f"sweep: {text}"))
    result = run_sweep(args.scenario, varies, rain=args.rain, split=args.split, seed=args.seed,
                       block_m=args.block_m, output=args.output, progress=say)
    if not args.quiet:
        best = result.best
        chosen = ", ".join(f"{k} = {best[k]:g}" for k in result.keys)

        def num(x):
            return "n/a" if x is None else f"{x:.3f}"

        print(f"chosen on the choosing half: {chosen} (TSS {num(best['tss_choose'])}, AUC "
              f"{num(best['auc_choose'])}); on the held-out half: TSS {num(best['tss_test'])}, "
              f"AUC {num(best['auc_test'])}")
        print(OVERSTATE)
        if result.best_at_edge:
            print(edge_text(result.best_at_edge))
        print(f"wrote sweep.csv, sweep.png, sweep.html and suggested.toml to {result.output} "
              f"({len(result.rows)} points, {result.seconds_per_point:.2f} s a point)")
    return 0


class _Terminated(KeyboardInterrupt):
    """SIGTERM, raised like Ctrl-C so that every clean-up of the run happens."""


def _raise_terminated(signum, frame):
    signal.signal(signal.SIGTERM, signal.SIG_IGN)  # a second one must not cut the clean-up short
    raise _Terminated


def _catch_sigterm():
    """Make SIGTERM raise :class:`_Terminated`; return the handler to restore (None: unchanged).

    Only the main thread can set a handler (and only it is interrupted).
    """
    if threading.current_thread() is not threading.main_thread():
        return None
    previous = signal.signal(signal.SIGTERM, _raise_terminated)
    return signal.SIG_DFL if previous is None else previous  # None: set outside Python


def main(argv=None) -> int:
    """Entry point of the ``slopescreen`` command. Returns the exit status.

    For the duration of the command SIGTERM is handled like Ctrl-C (every
    clean-up runs, nothing half-written is left): exit status 143, and 130
    for Ctrl-C, with one line on stderr.
    """
    args = _parser().parse_args(argv)
    _setup_logging(args.verbose, args.quiet)
    if args.quiet:
        warnings.simplefilter("ignore", InputWarning)
    else:
        warnings.simplefilter("always", InputWarning)
        warnings.showwarning = lambda msg, cat, *a, **k: _write_line(f"warning: {msg}")
    previous = None
    try:
        previous = _catch_sigterm()
        from . import pipeline
        from .scenario import load_scenario

        if args.command == "check":
            scenario = load_scenario(args.scenario)
            inputs = pipeline.check(scenario)
            if not args.quiet:
                g = inputs.grid
                print(f"{scenario.path.name}: OK - DEM {g.shape[0]}x{g.shape[1]} cells of "
                      f"{g.dx_m:g} x {g.dy_m:g} m, {int(g.valid.sum())} valid; "
                      f"{len(scenario.rain)} rain case(s); nothing was computed")
            return 0
        if args.command == "run":
            scenario = load_scenario(args.scenario)
            result = pipeline.run(scenario, progress=_progress(args.quiet))
            _summary(result, args.quiet)
            return 0
        if args.command == "sweep":
            return _sweep(args)
        if args.command == "demo":
            from .demo import run_demo

            result = run_demo(args.folder, progress=_progress(args.quiet))
            _summary(result, args.quiet)
            return 0
    except InputError as exc:
        print(f"slopescreen: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as exc:               # Ctrl-C, or SIGTERM (_Terminated)
        what = "terminated" if isinstance(exc, _Terminated) else "interrupted"
        if getattr(exc, "committed", False):
            print(f"slopescreen: {what} after the run was committed: its products are complete",
                  file=sys.stderr)
        else:
            print(f"slopescreen: {what}; no product was written", file=sys.stderr)
        return 143 if isinstance(exc, _Terminated) else 130
    except Exception as exc:  # an internal fault: say so in one line, details with -v
        if args.verbose:
            log.exception("internal fault")
        first = str(exc).splitlines()[0] if str(exc) else ""
        print(f"slopescreen: internal fault: {type(exc).__name__}: {first} "
              "(rerun with -v for the traceback; please report it)", file=sys.stderr)
        return 1
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
    return 1  # pragma: no cover - argparse requires a command


def console_main() -> None:
    """The ``slopescreen`` console script: :func:`main`, then the end of the process.

    Once every product is committed, the output streams are flushed and the
    solver child is closed, the process ends at once with :func:`os._exit`
    instead of leaving through the interpreter's teardown of its modules,
    which after numba's compiled kernels takes 0.2-0.4 s of every run and
    does no work the command needs (docs/performance.md). Calling
    :func:`main` from Python keeps the interpreter running as usual.
    """
    status = main()
    _end_process(status)


def _end_process(status: int) -> None:
    solver = sys.modules.get("slopescreen.clusters._highs_process")
    if solver is not None:
        solver._PROCESS.close()
    logging.shutdown()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):  # a closed pipe: nothing more can be said
            pass
    os._exit(status)


if __name__ == "__main__":  # pragma: no cover
    console_main()
