"""Print a report to PDF with headless Chromium: the paper and the title block come from the report's own
``@page`` rules (A4 or Letter, the title block in every page's margins, "page N of M")."""

from __future__ import annotations

from pathlib import Path

from ..errors import SeepfeError

__all__ = ["write_pdf", "chromium"]


def chromium() -> str | None:
    """The path of a Chromium (or Chrome) executable, or None."""
    import shutil
    return next((shutil.which(n) for n in ("chromium", "chromium-browser", "google-chrome") if shutil.which(n)), None)


def write_pdf(html: Path, pdf: Path, timeout: float = 120.0) -> Path:
    """Print a report to PDF with headless Chromium (the browser must be installed; nothing is fetched).

    Raises SeepfeError when no Chromium is found or it fails, so the caller writes no PDF.
    """
    import subprocess
    import tempfile
    exe = chromium()
    if exe is None:
        raise SeepfeError("--pdf needs headless Chromium (Debian package 'chromium'); the HTML report is "
                          "self-contained and prints from any browser")
    with tempfile.TemporaryDirectory(prefix="seepfe-chromium-") as profile:
        cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
               "--disable-background-networking", "--disable-component-update", "--disable-sync",
               "--disable-dev-shm-usage", f"--user-data-dir={profile}", "--no-pdf-header-footer",
               f"--print-to-pdf={pdf}", Path(html).resolve().as_uri()]
        try:
            subprocess.run(cmd, check=True, capture_output=True, timeout=timeout)
        except (subprocess.SubprocessError, OSError) as e:
            raise SeepfeError(f"Chromium could not print the report to PDF ({type(e).__name__})") from None
    if not Path(pdf).exists() or Path(pdf).stat().st_size == 0:
        raise SeepfeError("Chromium wrote no PDF")
    return Path(pdf)
