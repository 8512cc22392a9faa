"""Finished cases kept on disk, one small JSON per case, named by the hash of its resolved input.

``DIR/cases/<sha256>.json`` holds {"hash", "record"}.  Each file is written to a temporary name and
renamed, so a sweep killed at any moment leaves only whole files (stray ``*.tmp`` files are ignored
and cleaned).  This folder is filled while the sweep runs, by design: it is what makes a sweep
resumable.  The final tables and plots are written all at once elsewhere.

A cached record is used only if it still has the shape of a record (:func:`record_fault`): a file
altered by hand or by a fault of the disk, whose hash still matches, is solved again instead of
filling the table with nonsense.  The shape is defined in one place, :class:`seepfe.records.CaseRecord`
(the pydantic model of the record): every one of its keys must be present (a solved case writes them
all), the values must validate against it strictly, every number must be finite, the status must be
one a cached case can have (:data:`STATUSES`), and the record must answer its case (a head for every
probe point).  When the record format changes, change ``CaseRecord`` (and bump ``case.CASE_FORMAT``);
nothing here needs to change.
"""

from __future__ import annotations

import json
import math
import os
import re
from pathlib import Path
from typing import Any, Optional

from ..errors import SeepfeError

__all__ = ["CaseCache", "record_fault", "basic_fault", "STATUSES"]

#: statuses a cached record may carry (failed cases are never cached)
STATUSES = ("ok", "not converged")
#: largest case file read back, bytes (a record is a few kB to a few hundred kB)
MAX_CASE_BYTES = 16 * 1024 * 1024


def _non_finite(v: Any, where: str) -> Optional[str]:
    """Where a number in a JSON tree is not finite (iterative)."""
    stack = [(v, where)]
    while stack:
        node, at = stack.pop()
        if isinstance(node, dict):
            stack.extend((x, f"{at}.{k}") for k, x in node.items())
        elif isinstance(node, list):
            stack.extend((x, f"{at}[{i}]") for i, x in enumerate(node))
        elif isinstance(node, float) and not math.isfinite(node):
            return f"{at}: not a finite number"
    return None


def record_fault(record: Any, payload: Optional[dict] = None, extra: Optional[dict] = None) -> Optional[str]:
    """Why ``record`` is not a valid cached case record (None when it is); see the module docstring.

    ``extra`` ({key: type}) admits keys a worker function adds to the case record (each required and of
    that type), e.g. a reach station's report."""
    from pydantic import ValidationError

    from ..records import CaseRecord
    if not isinstance(record, dict):
        return "record: not an object"
    extra = extra or {}
    missing = [k for k in list(CaseRecord.model_fields) + list(extra) if k not in record]
    if missing:
        return f"record: missing '{missing[0]}'"
    for k, t in extra.items():
        if isinstance(record[k], bool) or not isinstance(record[k], t):
            return f"record.{k}: not {getattr(t, '__name__', t)}"
    try:
        CaseRecord.model_validate({k: v for k, v in record.items() if k not in extra}, strict=True)
    except ValidationError as e:
        err = e.errors(include_url=False)[0]
        return f"record.{'.'.join(str(x) for x in err['loc'])}: {err['msg']}"
    if record["status"] not in STATUSES:
        return f"record.status: not one of {', '.join(STATUSES)}"
    if record["governing"] is None:
        return "record.governing: missing"
    if record["nodes"] < 1 or record["balance_relative_error"] is None:
        return "record: no mesh or no balance"
    f = _non_finite(record, "record")
    if f:
        return f
    if payload is not None:
        if sorted(record["heads_m"]) != sorted(payload.get("points") or {}):
            return "record.heads_m: not the probe points of the case"
        names = payload.get("exit")
        if names is not None and not set(record["exit"]) <= set(names):
            return "record.exit: not the exit boundaries of the case"
    return None


def basic_fault(record: Any, payload: Optional[dict] = None) -> Optional[str]:
    """The least a cached record of any worker function must be: an object with a status a cached case can
    have and only finite numbers (see :func:`record_fault` for the sweep's case records)."""
    if not isinstance(record, dict):
        return "record: not an object"
    if record.get("status") not in STATUSES:
        return f"record.status: not one of {', '.join(STATUSES)}"
    return _non_finite(record, "record")


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

    def get(self, h: str, payload: Optional[dict] = None, validate=None) -> dict | None:
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
        why = (validate or record_fault)(doc["record"], payload)
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
