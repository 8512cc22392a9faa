"""Shared helpers of the CLI subcommands."""

from __future__ import annotations

__all__ = ["table", "add_section_args"]


def table(title: str, header: list[str], rows: list[list]) -> str:
    """A plain fixed-width table (no colour, so logs, files and reports read the same)."""
    w = [max(len(str(r[i])) for r in [header] + rows) for i in range(len(header))]
    line = "  ".join("-" * x for x in w)
    out = [title, "  ".join(h.ljust(x) for h, x in zip(header, w)), line]
    out += ["  ".join(str(c).rjust(x) if i else str(c).ljust(x) for i, (c, x) in enumerate(zip(r, w)))
            for r in rows]
    return "\n".join(out)


def add_section_args(p, out: bool = True) -> None:
    """The arguments every solving subcommand shares: SECTION, --out DIR (optional), --order."""
    p.add_argument("section", help="section file (JSON)")
    if out:
        p.add_argument("--out", required=True, help="output folder (replaced whole on success)")
    p.add_argument("--order", type=int, choices=(1, 2), default=None, help="element order (default: file, 2)")
