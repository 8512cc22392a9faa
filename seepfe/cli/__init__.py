"""Command line: ``seepfe SUBCOMMAND ...``, one module per subcommand.

Each subcommand module has ``register(subparsers)``, which adds its parser and sets ``func``.
``main(argv)`` returns an exit code and never raises for bad input: a seepfe error becomes one line
``seepfe: error: ...`` on stderr and exit code 2 (3 for a solve that did not converge, 4 for a sweep
stopped early, 130 when interrupted; :data:`seepfe.cli.common.EXIT_CODES`). Results go to stdout;
``-v`` logs the stages to stderr, ``-q`` prints nothing but errors; progress bars go to stderr.
Text from the input (names, titles, keys) is printed so it cannot break that line (control characters
escaped). SIGTERM and SIGHUP stop a run the way Ctrl-C does: temporary folders are removed and sweep
workers stopped; the exit code is 128 + the signal number.
"""

from __future__ import annotations

import argparse
import contextlib
import importlib
import io
import logging
import signal
import sys
import threading
import warnings

from ..about import __version__
from ..errors import SeepfeError
from ..about import CAUTION

__all__ = ["main", "build_parser", "SUBCOMMANDS"]

#: subcommand modules, in the order ``--help`` lists them
SUBCOMMANDS = ["build", "check", "solve", "sweep", "calibrate", "plot", "report", "reach"]


def build_parser() -> argparse.ArgumentParser:
    from .common import EXIT_CODES
    p = argparse.ArgumentParser(prog="seepfe", description="Steady seepage through and under levee and dam "
                                "sections by finite elements. " + CAUTION,
                                epilog="examples:\n  seepfe build sections/levee_borings.build.json --out levee.json\n"
                                       "  seepfe check levee.json\n  seepfe solve levee.json --out runs/levee\n"
                                       "  seepfe report levee.json --out runs/levee-report\n"
                                       "  seepfe SUBCOMMAND --help   (what each does, its options and examples)\n\n"
                                       + EXIT_CODES,
                                formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--version", action="version", version=f"seepfe {__version__}")
    talk = p.add_mutually_exclusive_group()
    talk.add_argument("-v", "--verbose", action="store_true",
                      help="log the stages (mesh, solve iterations, checks, figures) to stderr")
    talk.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    sub = p.add_subparsers(dest="command", required=True)
    for name in SUBCOMMANDS:
        importlib.import_module(f"{__name__}.{name}").register(sub)
    return p


class _Signalled(BaseException):
    """A termination signal, raised in the main thread so that cleanup (finally blocks) runs."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _raise_signal(signum, frame):
    raise _Signalled(signum)


@contextlib.contextmanager
def _signals_stop_cleanly():
    """SIGTERM/SIGHUP raise in the main thread while the command runs (the old handlers come back after)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    old = {}
    for name in ("SIGTERM", "SIGHUP"):
        sig = getattr(signal, name, None)
        if sig is not None:
            old[sig] = signal.signal(sig, _raise_signal)
    try:
        yield
    finally:
        for sig, h in old.items():
            signal.signal(sig, h)


def _warning_line(message, category, filename, lineno, file=None, line=None):
    """A library warning that slipped through, as one line on stderr (never source lines)."""
    from ..text import one_line
    print(f"seepfe: warning: {one_line(str(message))} ({category.__name__})", file=sys.stderr)


def main(argv=None) -> int:
    from ..text import one_line
    parser = build_parser()
    args = parser.parse_args(argv)
    level = logging.INFO if args.verbose else logging.ERROR if args.quiet else logging.WARNING
    lg = logging.getLogger("seepfe")
    handler = logging.StreamHandler(sys.stderr)            # the stderr of this call (tests swap it)
    handler.setFormatter(logging.Formatter("seepfe: %(message)s"))
    old = (lg.level, lg.propagate, list(lg.handlers))
    lg.handlers[:] = [handler]
    lg.setLevel(level)
    lg.propagate = False
    old_show = warnings.showwarning
    warnings.showwarning = _warning_line
    try:
        quiet = contextlib.redirect_stdout(io.StringIO()) if args.quiet else contextlib.nullcontext()
        with _signals_stop_cleanly(), quiet:
            return args.func(args)
    except SeepfeError as e:
        print(f"seepfe: error: {one_line(str(e))}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("seepfe: interrupted", file=sys.stderr)
        return 130
    except _Signalled as e:
        print(f"seepfe: stopped by {signal.Signals(e.signum).name}; nothing half-written was kept", file=sys.stderr)
        return 128 + e.signum
    finally:
        lg.setLevel(old[0])
        lg.propagate = old[1]
        lg.handlers[:] = old[2]
        warnings.showwarning = old_show


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
