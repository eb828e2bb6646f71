"""Command line: ``slopescreen run|check|demo``.

A thin layer: it parses arguments, calls the library and turns package errors
into exit status 2 with one line of text. Exit 0 on success, 2 on bad input,
1 on an internal fault (rerun with ``-v`` to see the traceback).
"""

from __future__ import annotations

import argparse
import logging
import sys
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
    loud.add_argument("-v", "--verbose", action="store_true", help="log each stage and show tracebacks")
    loud.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")
    r = sub.add_parser("run", help="run a scenario and write its products")
    r.add_argument("scenario", metavar="SCENARIO", help="scenario file (TOML)")
    c = sub.add_parser("check", help="validate a scenario and its inputs; compute nothing")
    c.add_argument("scenario", metavar="SCENARIO", help="scenario file (TOML)")
    d = sub.add_parser("demo", help="write the built-in demo inputs and run them")
    d.add_argument("folder", metavar="FOLDER", nargs="?", default="slopescreen-demo",
                   help="where to write the demo (default: ./slopescreen-demo)")
    return p


def _setup_logging(verbose: bool, quiet: bool) -> None:
    level = logging.INFO if verbose else (logging.ERROR if quiet else logging.WARNING)
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(logging.Formatter("%(levelname)s %(name)s: %(message)s"))
    root = logging.getLogger("slopescreen")
    root.handlers[:] = [handler]
    root.setLevel(level)


def _progress(quiet: bool):
    if quiet:
        return None

    def show(stage: str) -> None:
        print(f"  {stage} ...", file=sys.stderr, flush=True)

    return show


def _summary(result, quiet: bool) -> None:
    if quiet:
        return
    print(f"wrote {len(result.products)} products and manifest.json to {result.output}")
    total = sum(result.timings_s.values())
    print(f"done in {total:.1f} s. Screening result only: see the cautions in manifest.json.")


def main(argv=None) -> int:
    """Entry point of the ``slopescreen`` command. Returns the exit status."""
    args = _parser().parse_args(argv)
    _setup_logging(args.verbose, args.quiet)
    if args.quiet:
        warnings.simplefilter("ignore", InputWarning)
    else:
        warnings.simplefilter("always", InputWarning)
        warnings.showwarning = lambda msg, cat, *a, **k: print(f"warning: {msg}", file=sys.stderr)
    try:
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
        if args.command == "demo":
            from .demo import run_demo

            result = run_demo(args.folder, progress=_progress(args.quiet))
            _summary(result, args.quiet)
            return 0
    except InputError as exc:
        print(f"slopescreen: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("slopescreen: interrupted; no product was written", file=sys.stderr)
        return 130
    except Exception as exc:  # an internal fault: say so in one line, details with -v
        if args.verbose:
            log.exception("internal fault")
        first = str(exc).splitlines()[0] if str(exc) else ""
        print(f"slopescreen: internal fault: {type(exc).__name__}: {first} "
              "(rerun with -v for the traceback; please report it)", file=sys.stderr)
        return 1
    return 1  # pragma: no cover - argparse requires a command


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
