"""The one CSV writer of seepfe: every CSV file it writes goes through :func:`write_table`.

Numbers are written as numbers (nan, inf and -inf spelt so).  A text cell that a spreadsheet would
read as a formula (starting with ``=``, ``+``, ``-``, ``@``, a tab, a carriage return or a newline) is
written with a leading apostrophe, so a spreadsheet shows it as text and never evaluates it: a
boundary named ``=HYPERLINK(...)`` or ``+cmd`` lands in a sweep table as harmless text.
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path
from typing import Iterable, Sequence

import numpy as np

__all__ = ["write_table", "write_csv", "csv_cell"]

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r", "\n")


def csv_cell(v, fmt: str = "%.10g") -> str:
    """One CSV cell: numbers as numbers (nan, inf, -inf spelt so), True/False as yes/no, and text that a
    spreadsheet would read as a formula prefixed with an apostrophe (shown as text)."""
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return fmt % v
    s = "" if v is None else str(v)
    return "'" + s if s.startswith(_FORMULA_START) else s


def write_table(path: Path, header: Sequence[str], rows: Iterable[Sequence] | np.ndarray,
                fmt: str = "%.10g") -> None:
    """Write a CSV file: the header (names carry units) and rows of cells (see :func:`csv_cell`).

    The one CSV writer of seepfe.  ``rows`` may be a 2-D float array (written fast, every cell a number)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([csv_cell(h) for h in header])
    if isinstance(rows, np.ndarray):
        if rows.size:
            _write_numbers(buf, np.asarray(rows, float).reshape(len(rows), -1), fmt)
    else:
        for r in rows:
            w.writerow([csv_cell(c, fmt) for c in r])
    Path(path).write_text(buf.getvalue(), encoding="utf-8")


def _write_numbers(buf, a: np.ndarray, fmt: str, chunk: int = 50_000) -> None:
    """Rows of numbers, one C-level %-format per block of rows (several times faster than np.savetxt, which
    formats row by row in Python); nan, inf and -inf come out spelt so, as from savetxt."""
    line = ",".join([fmt] * a.shape[1]) + "\n"
    for i in range(0, len(a), chunk):
        block = a[i:i + chunk]
        buf.write((line * len(block)) % tuple(block.ravel().tolist()))


def write_csv(path: Path, columns: dict[str, np.ndarray], fmt: str = "%.10g") -> None:
    """Write named numeric columns (header names carry units) to a CSV file."""
    names = list(columns)
    data = np.column_stack([np.asarray(columns[n], float) for n in names]) if names else np.zeros((0, 0))
    write_table(path, names, data, fmt)


