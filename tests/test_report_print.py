"""The reports as a reviewer receives them: printed by headless Chromium to PDF, each page read back.

For the report of one section, a stage study and a reach study: the title block (project, station,
document, revision, prepared by / checked by) and "page N of M" on every printed page, the paper size
asked for, the assumptions and the tables; the failing length the same in the table and the figure.
"""

import json
import shutil
from pathlib import Path

import pytest

import seepfe
from seepfe.report import build_report, write_pdf

pypdf = pytest.importorskip("pypdf", reason="pypdf reads the printed pages back (pip install '.[test]')")
CHROMIUM = any(shutil.which(n) for n in ("chromium", "chromium-browser", "google-chrome"))
needs_chromium = pytest.mark.skipif(not CHROMIUM, reason="headless Chromium is not installed "
                                    "(scripts/install.sh --test installs it, as CI does)")
ROOT = Path(__file__).parent.parent

LEVEE = {
    "title": "Invented small levee for the print test",
    "project": {"project": "Invented print-test project", "reach": "Reach 9 (invented)", "station": "1+250",
                "document": "CALC-0042", "revision": "B", "prepared_by": "A. Preparer", "datum": "local datum, m"},
    "materials": {"fill": {"k": 1e-7, "unit_weight": 19.0}, "blanket": {"k": 1e-7, "unit_weight": 18.0},
                  "sand": {"k": 5e-5, "unit_weight": 20.0}},
    "zones": [{"name": "embankment", "material": "fill", "polygon": [[-12, 0], [12, 0], [2, 4], [-2, 4]]},
              {"name": "top stratum", "material": "blanket", "polygon": [[-80, 0], [80, 0], [80, -1.5], [-80, -1.5]]},
              {"name": "foundation", "material": "sand", "polygon": [[-80, -1.5], [80, -1.5], [80, -12], [-80, -12]]}],
    "boundaries": [{"name": "river", "polyline": [[-80, 0], [-12, 0], [-6, 2.4]], "head": 3.4},
                   {"name": "landside", "polyline": [[12, 0], [80, 0]], "seepage_face": True}],
    "mesh": {"size": 2.0, "order": 1},
}


def _pages(pdf: Path) -> list[str]:
    lig = str.maketrans({"\ufb01": "fi", "\ufb02": "fl", "\ufb00": "ff"})     # the font's ligatures, as letters
    return [" ".join((p.extract_text() or "").translate(lig).split()) for p in pypdf.PdfReader(str(pdf)).pages]


@pytest.fixture(scope="module")
def analysis():
    return seepfe.analyse(seepfe.solve(LEVEE))


def test_title_block_fields_are_in_the_html(analysis):
    html = build_report(analysis)
    for v in ("Invented print-test project", "Reach 9 (invented)", "1+250", "CALC-0042", "A. Preparer"):
        assert v in html
    assert "@page" in html and "counter(pages)" in html and "size:A4" in html
    assert "size:letter" in build_report(analysis, figures=[], paper="Letter")
    # a name that would end the CSS string cannot break the margin boxes
    from seepfe.report.page import css_string
    assert css_string('a"b\\c\nd') == '"a\\"b\\\\c\\A d"'


@pytest.mark.slow
@needs_chromium
def test_single_section_report_prints_with_the_title_block_on_every_page(analysis, tmp_path):
    html = tmp_path / "report.html"
    html.write_text(build_report(analysis, paper="Letter"), encoding="utf-8")
    pdf = write_pdf(html, tmp_path / "report.pdf")
    reader = pypdf.PdfReader(str(pdf))
    w, h = float(reader.pages[0].mediabox.width), float(reader.pages[0].mediabox.height)
    assert (round(w), round(h)) == (612, 792)                       # Letter, as asked
    pages = _pages(pdf)
    assert len(pages) >= 3
    for i, text in enumerate(pages, 1):
        assert "Invented print-test project" in text and "1+250" in text and "CALC-0042" in text
        assert "Rev. B" in text and "Prepared by: A. Preparer" in text and "Checked by:" in text
        assert f"Page {i} of {len(pages)}" in text
    whole = " ".join(pages)
    # results first, then assumptions, inputs, and the figures in an appendix
    order = [whole.index(s) for s in ("1. Results", "2. Assumptions", "3. Inputs", "Appendix A. Figures",
                                      "Appendix B. The input file")]
    assert order == sorted(order)
    # assumptions written from what was solved: the boundary conditions with positions, the no-flow ends,
    # the top stratum and the criteria with their source
    assert "total head 3.400 m" in whole and "left end x = -80.00 m" in whole and "base y = -12.00 m" in whole
    assert "Top stratum used by the checks" in whole and "ETL 1110-2-569" in whole
    # the hand method's inputs, so a checker can redo it
    assert "inputs to redo it by hand" in whole and "landside top-stratum thickness at the toe" in whole


def test_failing_length_is_one_number_in_table_summary_and_figure(analysis):
    from seepfe.plot import exit_gradient_figure
    ex = analysis.exits["landside"]
    g = ex.governing
    assert g["verdict"] == "fail" and g["failing_length_m"] > 0
    fig = exit_gradient_figure(ex)
    shaded = sum(b - a for a, b in fig.seepfe_failing)
    assert shaded == pytest.approx(g["failing_length_m"], abs=1e-9)
    assert g["fails_within_m_of_toe"] == pytest.approx(max(b for a, b in fig.seepfe_failing))
    assert analysis.governing["failing_length_m"] == pytest.approx(g["failing_length_m"])
    html = build_report(analysis, figures=[])
    assert f"{g['failing_length_m']:.1f}" in html
    legend = [t.get_text() for leg in fig.legends for t in leg.get_texts()]
    assert any(f"{g['failing_length_m']:.1f} m in all" in t for t in legend)


@needs_chromium
@pytest.mark.slow
def test_stage_study_prints_with_table_first_failure_and_title_block(tmp_path):
    from seepfe.report.stages import write_stage_study
    sweep = {"vary": {"boundaries.river.head": {"values": [2.0, 3.0, 4.0]}}, "exit": ["landside"]}
    st = write_stage_study(LEVEE, sweep, tmp_path / "stages", workers=1, pdf=True)
    pages = _pages(st.html.with_suffix(".pdf"))
    for i, text in enumerate(pages, 1):
        assert "Invented print-test project" in text and f"Page {i} of {len(pages)}" in text
        assert "Stage study of one section" in text
    whole = " ".join(pages)
    assert "Stage at first failure" in whole and "2. Assumptions" in whole
    rows = [r for r in st.report.table]
    assert len(rows) == 3
    # the table says what seepfe solve says at each stage
    for r in rows:
        d = json.loads(json.dumps(LEVEE))
        d["boundaries"][0]["head"] = r["boundaries.river.head_m"]
        g = seepfe.analyse(seepfe.solve(d)).governing
        assert r["verdict"] == g["verdict"] and r["fs"] == pytest.approx(g["fs"], rel=1e-9)
        assert f"{g['fs']:.2f}" in whole
    # run again: every case comes from the cache
    st2 = write_stage_study(LEVEE, sweep, tmp_path / "stages", workers=1)
    assert st2.report.solved == 0 and st2.report.cached > 0


@needs_chromium
@pytest.mark.slow
def test_reach_study_prints_table_by_station_and_links_each_station(tmp_path):
    from seepfe.report.reach import run_reach
    reach = json.loads((ROOT / "sections" / "levee_reach.reach.json").read_text())
    reach["solve"] = {"order": 1, "size": 6.0}
    for s in reach["stations"]:
        shutil.copy(ROOT / "sections" / s["section"], tmp_path / s["section"])
    (tmp_path / "r.reach.json").write_text(json.dumps(reach))
    res = run_reach(tmp_path / "r.reach.json", tmp_path / "out", workers=1, pdf=True)
    assert res.complete and [r["station"] for r in res.rows] == ["3+900", "4+150", "4+400"]
    pages = _pages(res.results / "report.pdf")
    for i, text in enumerate(pages, 1):
        assert "Invented river levee evaluation" in text and f"Page {i} of {len(pages)}" in text
    whole = " ".join(pages)
    assert "2. Assumptions" in whole and "lowest failing stage" in whole
    html = (res.results / "report.html").read_text()
    for r in res.rows:
        assert (res.results / "stations" / r["slug"] / "report.html").is_file()
        assert f'href="stations/{r["slug"]}/report.html"' in html
        # each row is what seepfe solve gives for that station's file at the same mesh
        summ = json.loads((res.results / "stations" / r["slug"] / "summary.json").read_text())
        assert summ["governing"]["verdict"] == r["verdict"]
        assert r["verdict"] in whole
    assert {r["verdict"] for r in res.rows} == {"pass", "fail"}
    again = run_reach(tmp_path / "r.reach.json", tmp_path / "out", workers=1)
    assert again.solved == 0 and again.cached == 12                  # resumable: all from the cache


def test_reach_file_errors_are_one_line(tmp_path):
    from seepfe.errors import SeepfeError
    from seepfe.report.reach import load_reach, station_value
    assert station_value("4+150") == 4150.0 and station_value("0+075.5") == 75.5 and station_value(12) == 12.0
    p = tmp_path / "r.reach.json"
    p.write_text(json.dumps({"stations": [{"station": "1+000", "section": "missing.json"}]}))
    with pytest.raises(SeepfeError, match="stations.0: no section file 'missing.json'"):
        load_reach(p)
    p.write_text(json.dumps({"stations": [{"station": "1+000", "sectoin": "a.json"}]}))
    with pytest.raises(SeepfeError, match="stations.0"):
        load_reach(p)
