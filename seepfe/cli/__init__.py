"""Command line: ``seepfe SUBCOMMAND ...``, one module per subcommand.

Each subcommand module has ``register(subparsers)``, which adds its parser and sets ``func``.
``main(argv)`` returns an exit code and never raises for bad input: a seepfe error becomes one line
``seepfe: error: ...`` on stderr and exit code 2 (3 for a solve that did not converge).
"""

from __future__ import annotations

import argparse
import importlib
import logging
import sys

from ..about import __version__
from ..errors import SeepfeError
from ..about import CAUTION

__all__ = ["main", "build_parser", "SUBCOMMANDS"]

#: subcommand modules, in the order ``--help`` lists them
SUBCOMMANDS = ["build", "check", "solve", "sweep", "plot", "report"]


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="seepfe", description="Steady seepage through and under levee and dam "
                                "sections by finite elements. " + CAUTION)
    p.add_argument("--version", action="version", version=f"seepfe {__version__}")
    p.add_argument("-v", "--verbose", action="store_true", help="log progress to stderr")
    sub = p.add_subparsers(dest="command", required=True)
    for name in SUBCOMMANDS:
        importlib.import_module(f"{__name__}.{name}").register(sub)
    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING, format="seepfe: %(message)s")
    try:
        return args.func(args)
    except SeepfeError as e:
        print(f"seepfe: error: {e}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("seepfe: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
