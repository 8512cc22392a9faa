"""``seepfe report --pdf``: a real PDF from headless Chromium, or one clear line and no folder without it."""

import shutil

import pytest

from seepfe.cli import main

SECTION = {
    "title": "Invented sheet pile in sand (PDF test)",
    "materials": {"sand": {"k": 1e-5, "unit_weight": 20.0}},
    "zones": [{"name": "sand", "material": "sand", "polygon": [[-20, 0], [20, 0], [20, -10], [-20, -10]]}],
    "barriers": [{"name": "pile", "polyline": [[0, 0], [0, -5]]}],
    "boundaries": [{"name": "upstream", "polyline": [[-20, 0], [0, 0]], "head": 3.0},
                   {"name": "downstream", "polyline": [[0, 0], [20, 0]], "head": 0.0}],
    "mesh": {"size": 1.5, "order": 1},
}


def _write(tmp_path):
    import json
    p = tmp_path / "pile.json"
    p.write_text(json.dumps(SECTION))
    return p


@pytest.mark.skipif(not any(shutil.which(n) for n in ("chromium", "chromium-browser", "google-chrome")),
                    reason="headless Chromium is not installed (scripts/install.sh --test installs it, as CI does)")
def test_report_pdf_is_a_pdf(tmp_path):
    out = tmp_path / "rep"
    assert main(["report", str(_write(tmp_path)), "--out", str(out), "--pdf"]) == 0
    pdf = (out / "report.pdf").read_bytes()
    assert pdf.startswith(b"%PDF") and len(pdf) > 20_000


def test_report_pdf_without_chromium_is_one_line_and_no_folder(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(shutil, "which", lambda name: None)
    out = tmp_path / "rep"
    assert main(["report", str(_write(tmp_path)), "--out", str(out), "--pdf"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "Chromium" in err[0]
    assert not out.exists() and [p.name for p in tmp_path.iterdir()] == ["pile.json"]
