"""Finished cases kept on disk, one small JSON per case, named by the hash of its resolved input.

``DIR/cases/<sha256>.json`` holds {"hash", "record"}.  Each file is written to a temporary name and
renamed, so a sweep killed at any moment leaves only whole files (stray ``*.tmp`` files are ignored
and cleaned).  This folder is filled while the sweep runs, by design: it is what makes a sweep
resumable.  The final tables and plots are written all at once elsewhere.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

__all__ = ["CaseCache"]


class CaseCache:
    """Read and write finished case records under ``folder`` (created on first use)."""

    def __init__(self, folder: str | os.PathLike):
        self.folder = Path(folder)

    def _path(self, h: str) -> Path:
        return self.folder / f"{h}.json"

    def get(self, h: str) -> dict | None:
        """The record of case ``h``, or None if absent or unreadable (then it is solved again)."""
        try:
            doc = json.loads(self._path(h).read_text())
        except (OSError, ValueError):
            return None
        if not isinstance(doc, dict) or doc.get("hash") != h or not isinstance(doc.get("record"), dict):
            return None
        return doc["record"]

    def put(self, h: str, record: dict) -> None:
        self.folder.mkdir(parents=True, exist_ok=True)
        tmp = self.folder / f".{h}.{os.getpid()}.tmp"
        tmp.write_text(json.dumps({"hash": h, "record": record}, separators=(",", ":")))
        os.replace(tmp, self._path(h))

    def clean(self) -> None:
        """Remove temporary files left by a killed run."""
        if self.folder.is_dir():
            for p in self.folder.glob(".*.tmp"):
                p.unlink(missing_ok=True)

    def __len__(self) -> int:
        return sum(1 for _ in self.folder.glob("*.json")) if self.folder.is_dir() else 0
