"""The HTML report: it parses, embeds every figure, carries the governing values, the version, the
input hash and the caution; the CLI writes it atomically; headless Chromium renders it with every
image decoded.

The flow figure in the report is checked against the solver's own discharge (a consistency check of
the stream function, see test_plots.py for the published solutions).
"""

import base64
import json
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

import seepfe
from seepfe.cli import main
from seepfe.report import write_report

# a small invented levee on a clay top stratum over sand, with a landside seepage face (coarse mesh)
LEVEE = {
    "title": "Invented small levee for the report test",
    "materials": {"fill": {"k": 1e-7, "unit_weight": 19.0},
                  "blanket": {"k": 1e-7, "unit_weight": 18.0},
                  "sand": {"k": 5e-5, "unit_weight": 20.0}},
    "zones": [{"name": "embankment", "material": "fill", "polygon": [[-12, 0], [12, 0], [2, 4], [-2, 4]]},
              {"name": "top stratum", "material": "blanket", "polygon": [[-60, 0], [60, 0], [60, -1.5], [-60, -1.5]]},
              {"name": "foundation", "material": "sand", "polygon": [[-60, -1.5], [60, -1.5], [60, -12], [-60, -12]]}],
    "boundaries": [{"name": "river", "polyline": [[-60, 0], [-12, 0], [-6, 2.4]], "head": 3.0},
                   {"name": "landside", "polyline": [[12, 0], [60, 0]], "seepage_face": True}],
    "mesh": {"size": 2.0, "order": 1},
}


class _Doc(HTMLParser):
    def __init__(self):
        super().__init__()
        self.imgs, self.text, self.tags = [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag == "img":
            self.imgs.append(dict(attrs))
        if tag in ("script", "link", "iframe"):
            raise AssertionError(f"the report must be self-contained: found <{tag}>")

    def handle_data(self, data):
        self.text.append(data)


@pytest.fixture(scope="module")
def result():
    return seepfe.solve(LEVEE)


@pytest.fixture(scope="module")
def report_dir(result, tmp_path_factory):
    d = tmp_path_factory.mktemp("report")
    write_report(result, d)
    return d


def test_report_parses_and_embeds_every_figure(report_dir):
    html = (report_dir / "report.html").read_text(encoding="utf-8")
    doc = _Doc()
    doc.feed(html)
    doc.close()
    svgs = sorted((report_dir / "figures").glob("*.svg"))
    assert len(svgs) >= 6
    assert len(doc.imgs) == len(svgs)
    embedded = set()
    for im in doc.imgs:
        src = im["src"]
        assert src.startswith("data:image/svg+xml;base64,")        # vector: sharp when printed
        data = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert b"<svg" in data[:600]
        assert im.get("alt")
        embedded.add(data)
    assert embedded == {p.read_bytes() for p in svgs}               # every figure written is in the report
    assert not re.search(r"(src|href)=\"(?!data:|#)", html)         # no external resource


def test_report_has_governing_values_version_hash_and_caution(result, report_dir):
    html = (report_dir / "report.html").read_text(encoding="utf-8")
    text = " ".join(_text(html).split())
    assert seepfe.CAUTION in text
    assert result.section.input_hash in text
    assert f"seepfe {seepfe.__version__}" in text
    gov = seepfe.analyse(result).governing
    bal = result.balance
    q = 0.5 * (bal["inflow_m3_s_per_m"] + bal["outflow_m3_s_per_m"])
    assert q == pytest.approx(result.balance["inflow_m3_s_per_m"], rel=1e-3)
    assert f"{q:.3e}" in text
    # the least factor of safety shown is the one the checks give, with the verdict and why
    assert gov["fs"] is not None
    fs = np.asarray(result.exit_gradients("landside").fs, float)
    assert gov["fs"] == pytest.approx(np.nanmin(fs[np.isfinite(fs)]))
    assert f"{gov['fs']:.2f}" in text
    assert f"Verdict: {gov['verdict']} ." in text and gov["why"] in text
    assert "exit_gradient_landside.svg" in {p.name for p in (report_dir / "figures").iterdir()}
    # inputs: every material with its k, every boundary, the mesh size
    for name in ("fill", "blanket", "sand", "river", "landside"):
        assert name in text
    assert "5e-05" in text and str(result.mesh.stats["elements"]) in text
    # the flow table carries the solver's reactions
    assert f"{result.boundary_flow('river'):+.4e}" in text


def _text(html):
    doc = _Doc()
    doc.feed(html)
    return " ".join(doc.text)


@pytest.mark.slow
def test_cli_report_and_plot_write_atomically(tmp_path, capsys):
    sec = tmp_path / "levee.json"
    sec.write_text(json.dumps(LEVEE))
    out = tmp_path / "plots"
    assert main(["plot", str(sec), "--out", str(out), "--arrows"]) == 0
    figs = json.loads((out / "figures.json").read_text())["figures"]
    for name, files in figs.items():
        for f in files:
            assert (out / f).stat().st_size > 1000
    assert {"section", "total_head", "flownet", "velocity"} <= set(figs)
    printed = capsys.readouterr().out
    assert "CAUTION" in printed and "Nf =" in printed
    # bad input: one line, exit code 2, no folder left behind
    bad = dict(LEVEE, materials={"fill": {"k": -1.0}})
    sec.write_text(json.dumps(bad))
    out2 = tmp_path / "never"
    assert main(["report", str(sec), "--out", str(out2)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("seepfe: error:")
    assert not out2.exists() and not list(tmp_path.glob(".never*"))


CHECK_SCRIPT = """<script>
window.__errors = [];
window.addEventListener('error', function (e) { window.__errors.push(String(e.message || e.type)); }, true);
window.addEventListener('load', function () {
  var imgs = Array.prototype.slice.call(document.images);
  var ok = imgs.filter(function (i) { return i.complete && i.naturalWidth > 0 && i.naturalHeight > 0; });
  var flag = document.createElement('div');
  flag.id = 'seepfe-render-check';
  flag.setAttribute('data-images', String(imgs.length));
  flag.setAttribute('data-decoded', String(ok.length));
  flag.setAttribute('data-errors', String(window.__errors.length));
  flag.setAttribute('data-width', String(document.documentElement.scrollWidth));
  document.body.appendChild(flag);
});
</script>"""


def _chromium():
    for name in ("chromium", "chromium-browser", "google-chrome"):
        p = shutil.which(name)
        if p:
            return p
    return None


@pytest.mark.skipif(_chromium() is None, reason="headless Chromium is not installed (Debian package "
                    "'chromium'; scripts/install.sh --test installs it, as .ci/run does)")
def test_report_renders_in_headless_chromium(report_dir, tmp_path):
    html = (report_dir / "report.html").read_text(encoding="utf-8")
    n_img = html.count("<img ")
    # a test copy with a tiny script that records whether every image decoded
    copy = tmp_path / "report_check.html"
    copy.write_text(html.replace("</head>", CHECK_SCRIPT + "</head>", 1), encoding="utf-8")
    cmd = [_chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           "--disable-dev-shm-usage", f"--user-data-dir={tmp_path / 'profile'}", "--virtual-time-budget=10000",
           "--dump-dom", copy.as_uri()]
    run = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr[-2000:]
    m = re.search(r'<div id="seepfe-render-check"([^>]*)>', run.stdout)
    assert m, "the page did not finish loading:\n" + run.stderr[-2000:]
    attrs = dict(re.findall(r'data-([a-z]+)="([^"]*)"', m.group(1)))
    assert int(attrs["images"]) == n_img > 0
    assert int(attrs["decoded"]) == n_img              # every embedded PNG decodes
    assert int(attrs["errors"]) == 0                   # no script or resource error
    assert seepfe.CAUTION in run.stdout


# ------------------------------------------------------------------ figures drawn by two processes
def test_figures_drawn_by_two_processes_are_the_figures_drawn_in_turn(result, tmp_path):
    # the report's figures are independent: a forked copy draws every other one; the SVG bytes (embedded in
    # the report) and the files written must be exactly those of drawing them one after the other
    from seepfe.report.single import render_figures
    a = seepfe.analyse(result)
    (tmp_path / "one").mkdir()
    (tmp_path / "two").mkdir()
    one = render_figures(a, workers=1, folder=tmp_path / "one", formats=("svg",))
    two = render_figures(a, workers=2, folder=tmp_path / "two", formats=("svg",))
    assert [i.name for i in one] == [i.name for i in two] and len(one) >= 4
    assert all(x.svg == y.svg for x, y in zip(one, two))
    assert sorted(p.name for p in (tmp_path / "one").iterdir()) == sorted(p.name for p in (tmp_path / "two").iterdir())
    for p in (tmp_path / "one").iterdir():
        assert p.read_bytes() == (tmp_path / "two" / p.name).read_bytes(), p.name


def test_forked_drawing_falls_back_and_never_leaves_a_process_behind():
    import os
    from seepfe.report.single import _draw_forked
    parent = os.getpid()
    assert _draw_forked(lambda i: bytes([i]), 7) == [bytes([i]) for i in range(7)]

    def fails_in_the_copy(i):
        if os.getpid() != parent:
            raise RuntimeError("the copy fails")
        return bytes([i])
    assert _draw_forked(fails_in_the_copy, 6) == [bytes([i]) for i in range(6)]     # drawn here instead

    def fails_here(i):
        if os.getpid() == parent and i == 2:
            raise ValueError("this side fails")
        return bytes([i])
    def children() -> set:
        # this process's children, zombies included, from /proc (other tests may have their own)
        return {c for t in Path(f"/proc/{os.getpid()}/task").iterdir()
                for c in (t / "children").read_text().split()}
    before = children()
    with pytest.raises(ValueError):
        _draw_forked(fails_here, 6)
    assert children() <= before                    # the copy was stopped and reaped: none left behind
