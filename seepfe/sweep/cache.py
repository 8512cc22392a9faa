"""Finished cases kept on disk, one small JSON per case, named by the hash of its resolved input.

``DIR/cases/<sha256>.json`` holds {"hash", "record"}.  Each file is written to a temporary name and
renamed, so a sweep killed at any moment leaves only whole files (stray ``*.tmp`` files are ignored
and cleaned).  This folder is filled while the sweep runs, by design: it is what makes a sweep
resumable.  The final tables and plots are written all at once elsewhere.

A cached record is used only if it still has the shape of a record (:data:`RECORD_SHAPE`, checked by
:func:`record_fault`): a file altered by hand or by a fault of the disk, whose hash still matches, is
solved again instead of filling the table with nonsense.  When the record format changes, change
:data:`RECORD_SHAPE` (and bump ``case.CASE_FORMAT``); nothing else here needs to change.
"""

from __future__ import annotations

import json
import math
import os
import re
from pathlib import Path
from typing import Any, Optional

from ..errors import SeepfeError

__all__ = ["CaseCache", "RECORD_SHAPE", "record_fault", "STATUSES"]

#: statuses a cached record may carry (failed cases are never cached)
STATUSES = ("ok", "not converged")
#: largest case file read back, bytes (a record is a few kB to a few hundred kB)
MAX_CASE_BYTES = 16 * 1024 * 1024

# Value kinds of RECORD_SHAPE:
#   "finite"   a finite number                  "count"   a whole number >= 1
#   "float?"   a finite number, None (nan) or "inf"/"-inf" (how case._jf writes them)
#   "text"     a string                          "status"  one of STATUSES
#   {"key": kind, ...}   an object with exactly these keys (all required)
#   ("map", kind)        an object of name -> kind (any names)
#   ("list", kind)       a list of kind
#: the shape of a case record (seepfe.sweep.case.run_case), the one place that defines it
RECORD_SHAPE: dict = {
    "status": "status",
    "flows_m3_s_per_m": ("map", "finite"),
    "heads_m": ("map", "float?"),
    "governing": {"exit_gradient_max": "float?", "exit_gradient_x_m": "float?", "exit_gradient_boundary": "text",
                  "fs_min": "float?", "fs_min_x_m": "float?", "fs_min_boundary": "text"},
    "exit": ("map", {"x_m": ("list", "finite"), "gradient": ("list", "float?"), "fs": ("list", "float?")}),
    "fs_method": "text",
    "warnings": ("list", "text"),
    "nodes": "count",
    "balance_relative_error": "finite",
    "time_s": "finite",
}


def _fault(v: Any, kind, where: str) -> Optional[str]:
    if isinstance(kind, dict):
        if not isinstance(v, dict):
            return f"{where}: not an object"
        missing = [k for k in kind if k not in v]
        if missing:
            return f"{where}: missing '{missing[0]}'"
        extra = [k for k in v if k not in kind]
        if extra:
            return f"{where}: unexpected '{extra[0]}'"
        for k, sub in kind.items():
            f = _fault(v[k], sub, f"{where}.{k}")
            if f:
                return f
        return None
    if isinstance(kind, tuple):
        what, sub = kind
        if what == "map":
            if not isinstance(v, dict):
                return f"{where}: not an object"
            for k, x in v.items():
                f = _fault(x, sub, f"{where}.{k}")
                if f:
                    return f
            return None
        if not isinstance(v, list):
            return f"{where}: not a list"
        for i, x in enumerate(v):
            f = _fault(x, sub, f"{where}[{i}]")
            if f:
                return f
        return None
    num = isinstance(v, (int, float)) and not isinstance(v, bool)
    if kind == "finite":
        return None if num and math.isfinite(v) else f"{where}: not a finite number"
    if kind == "float?":
        return None if (v is None or v in ("inf", "-inf") or (num and math.isfinite(v))) else \
            f"{where}: not a number, null or \"inf\""
    if kind == "count":
        return None if isinstance(v, int) and not isinstance(v, bool) and v >= 1 else f"{where}: not a count >= 1"
    if kind == "text":
        return None if isinstance(v, str) else f"{where}: not a string"
    if kind == "status":
        return None if v in STATUSES else f"{where}: not one of {', '.join(STATUSES)}"
    raise ValueError(f"unknown kind {kind!r} in RECORD_SHAPE")       # pragma: no cover


def record_fault(record: Any, payload: Optional[dict] = None) -> Optional[str]:
    """Why ``record`` is not a valid cached case record (None when it is).

    Checks :data:`RECORD_SHAPE` and, with the case ``payload``, that the record answers it: a head
    for every probe point, an exit profile for every exit boundary asked for."""
    f = _fault(record, RECORD_SHAPE, "record")
    if f or payload is None:
        return f
    pts = list((payload.get("points") or {}))
    if sorted(record["heads_m"]) != sorted(pts):
        return "record.heads_m: not the probe points of the case"
    names = payload.get("exit")
    if names is not None and sorted(record["exit"]) != sorted(names):
        return "record.exit: not the exit boundaries of the case"
    return None


def _no_constants(name: str):
    raise ValueError(f"{name} is not a number of a record")


class CaseCache:
    """Read and write finished case records under ``folder`` (created on first use)."""

    _TMP = re.compile(r"^\.[0-9a-f]{64}\.\d+\.tmp$")

    def __init__(self, folder: str | os.PathLike):
        self.folder = Path(folder)
        if self.folder.exists() and not self.folder.is_dir():
            raise SeepfeError(f"{self.folder}: the case cache must be a folder, and this is a file; move it away")
        #: hash -> why its cached record was refused (for the log and the tests)
        self.refused: dict[str, str] = {}

    def _path(self, h: str) -> Path:
        return self.folder / f"{h}.json"

    def check_writable(self, h: str) -> None:
        """Raise a one-line error now (before solving) if case ``h`` could not be stored."""
        p = self._path(h)
        if p.is_symlink() or (p.exists() and not p.is_file()):
            raise SeepfeError(f"{p}: something other than a file is where this case's cache file goes; "
                              "move it away and run again")

    def get(self, h: str, payload: Optional[dict] = None) -> dict | None:
        """The record of case ``h``, or None if absent, unreadable or not a valid record (then it is
        solved again)."""
        p = self._path(h)
        try:
            if not p.is_file() or p.stat().st_size > MAX_CASE_BYTES:
                return None
            doc = json.loads(p.read_text(encoding="utf-8"), parse_constant=_no_constants)
        except (OSError, ValueError, RecursionError):
            self.refused[h] = "unreadable"
            return None
        if not isinstance(doc, dict) or doc.get("hash") != h or not isinstance(doc.get("record"), dict):
            self.refused[h] = "not a case file of this hash"
            return None
        why = record_fault(doc["record"], payload)
        if why:
            self.refused[h] = why
            return None
        return doc["record"]

    def put(self, h: str, record: dict) -> None:
        tmp = self.folder / f".{h}.{os.getpid()}.tmp"
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            tmp.write_text(json.dumps({"hash": h, "record": record}, separators=(",", ":"), allow_nan=False))
            os.replace(tmp, self._path(h))
        except OSError as e:
            tmp.unlink(missing_ok=True) if tmp.is_file() else None
            raise SeepfeError(f"{self._path(h)}: cannot store the finished case ({e.strerror or e})") from None

    def clean(self) -> None:
        """Remove temporary files left by a killed run (only seepfe's own: ``.<sha256>.<pid>.tmp``)."""
        if self.folder.is_dir():
            for p in self.folder.glob(".*.tmp"):
                if self._TMP.match(p.name) and p.is_file() and not p.is_symlink():
                    p.unlink(missing_ok=True)

    def __len__(self) -> int:
        return sum(1 for _ in self.folder.glob("*.json")) if self.folder.is_dir() else 0
