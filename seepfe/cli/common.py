"""Shared helpers of the CLI subcommands."""

from __future__ import annotations

from ..text import table

__all__ = ["table", "add_section_args"]


def add_section_args(p, out: bool = True) -> None:
    """The arguments every solving subcommand shares: SECTION, --out DIR (optional), --order."""
    p.add_argument("section", help="section file (JSON)")
    if out:
        p.add_argument("--out", required=True, help="output folder (replaced whole on success)")
    p.add_argument("--order", type=int, choices=(1, 2), default=None, help="element order (default: file, 2)")
