"""Shared helpers of the CLI subcommands."""

from __future__ import annotations

import argparse
import logging

from ..text import table

__all__ = ["table", "add_section_args", "add_solve_args", "solve_section", "parser_for", "EXIT_CODES",
           "check_out_dir", "read_first"]

log = logging.getLogger("seepfe")

#: exit codes of every subcommand (README, ``seepfe --help``)
EXIT_CODES = """exit codes:
  0    done
  2    bad input or options: one line on stderr names the file, the item and the fault; nothing is written
  3    a solve did not converge: the best iterate is written and marked, and must not be used
  4    a sweep stopped early on --max-solves: finished cases are kept; run the same command to go on
  130  interrupted (Ctrl-C)
  143  stopped by SIGTERM (129: SIGHUP): temporary folders removed, sweep workers stopped"""


def parser_for(sub, name: str, help: str, description: str, examples: str):
    """A subcommand parser with a description, examples and the exit codes in its --help."""
    return sub.add_parser(name, help=help, description=description,
                          epilog="examples:\n" + examples.rstrip() + "\n\n" + EXIT_CODES,
                          formatter_class=argparse.RawDescriptionHelpFormatter)


def _positive(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not v > 0 or v == float("inf"):
        raise argparse.ArgumentTypeError(f"must be a finite number > 0, got {text}")
    return v


def read_first(path) -> None:
    """Read and parse a section file with the standard library alone, so that a file that is not JSON, too
    large or nested too deeply answers in its one line before numpy, pydantic and the rest are imported
    (load_section reads it again, which costs a millisecond for an ordinary section)."""
    from ..jsonin import read_json
    read_json(path, "section file")


def check_out_dir(path, sweep: bool = False) -> None:
    """Check ``--out`` before any long solve: not the current folder, replaceable (only a folder seepfe
    wrote, holding nothing else) or a sweep folder, and writable; one-line SeepfeError otherwise."""
    if sweep:
        from ..sweep.api import check_sweep_folder
        check_sweep_folder(path)
    else:
        from ..output import check_out
        check_out(path)


def add_section_args(p, out: bool = True) -> None:
    """SECTION, --out DIR (optional) and --order, --size of the mesh."""
    p.add_argument("section", help="section file (JSON)")
    if out:
        p.add_argument("--out", required=True, help="output folder, replaced whole on success; only an empty "
                       "folder or one seepfe wrote (holding nothing else) is replaced, anything else is refused")
    p.add_argument("--order", type=int, choices=(1, 2), default=None, help="element order (default: file, 2)")
    p.add_argument("--size", type=_positive, default=None,
                   help="element size, in the section file's length unit (default: the file's mesh.size)")


def add_solve_args(p, out: bool = True) -> None:
    """The arguments every solving subcommand shares: those of add_section_args and --linear."""
    add_section_args(p, out)
    p.add_argument("--linear", choices=("auto", "direct", "amg"), default=None,
                   help="linear solver (default: the file's solver.linear, auto)")
    if out:
        p.add_argument("--dxf", action="store_true",
                       help="also write the phreatic line, flow lines and equipotentials as lines.dxf (CAD)")


def solve_section(args):
    """Load the section, turn --size into m, solve; log the stages. Returns the Result."""
    from ..section import load_section
    sec = load_section(args.section)        # a bad file fails here, before the solver is imported
    from ..solver import solve
    log.info("loaded %s: %d materials, %d zones, %d boundaries (units %s)", sec.source, len(sec.spec.materials),
             len(sec.spec.zones), len(sec.spec.boundaries), sec.units.name)
    size = None if getattr(args, "size", None) is None else args.size * sec.units.factor("length")
    if getattr(args, "steady", False):
        # a hydrograph section solved steady at its crest stage (docs/transient.md)
        from ..hydrograph import has_hydrograph, schedule, section_at
        if has_hydrograph(sec):
            sec = section_at(sec, schedule(sec).crest)
            log.info("steady at the crest of the hydrograph")
    return solve(sec, order=args.order, size=size, linear=getattr(args, "linear", None))
