"""Plain-text tables for terminals, logs and files (no colour, so all read the same)."""

from __future__ import annotations

__all__ = ["table", "one_line"]


def one_line(s) -> str:
    """User text made safe for a one-line message: control characters (ESC, newlines, ...) shown escaped."""
    s = str(s)
    if s.isprintable():
        return s
    return "".join(ch if ch.isprintable() else ascii(ch)[1:-1] for ch in s)


def table(title: str, header: list[str], rows: list[list]) -> str:
    """A plain fixed-width table: the first column left-aligned, the others right-aligned."""
    rows = [[one_line(c) for c in r] for r in rows]
    w = [max(len(str(r[i])) for r in [header] + rows) for i in range(len(header))]
    line = "  ".join("-" * x for x in w)
    out = [one_line(title), "  ".join(h.ljust(x) for h, x in zip(header, w)), line]
    out += ["  ".join(str(c).rjust(x) if i else str(c).ljust(x) for i, (c, x) in enumerate(zip(r, w)))
            for r in rows]
    return "\n".join(out)
