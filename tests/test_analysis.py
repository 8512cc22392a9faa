"""One analysis layer: every command and the Python API reach the same governing values from one place.

The governing block (least FS, mode, where, top-stratum thickness, largest exit gradient, verdict,
why) of summary.json written by `seepfe solve` and `seepfe report`, of figures.json written by
`seepfe plot`, of a sweep case, and of `seepfe.analyse(result)` must be the same dict for the same
input: every file in sections/, a section with relief wells, one with a toe drain, and one whose
embankment has no unit weight. summary.json validates against docs/summary.schema.json with an
independent validator (jsonschema), and that file is the one the code generates.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest

import seepfe
from seepfe.cli import main
from seepfe.records import CaseRecord, Summary

ROOT = Path(__file__).resolve().parent.parent
SECTIONS = sorted(p for p in (ROOT / "sections").glob("*.json")
                  if not p.name.endswith((".sweep.json", ".build.json", ".stages.json", ".reach.json",
                                          ".observations.json")))


def _levee(remedies=(), fill_weight=True, size=2.0):
    """Invented levee on a clay blanket over sand (self-contained)."""
    fill = {"k": 1e-7, "unit_weight": 19.0} if fill_weight else {"k": 1e-7}
    return {"title": "invented levee for the analysis tests",
            "materials": {"fill": fill, "blanket": {"k": 1e-7, "unit_weight": 18.5},
                          "sand": {"kx": 1e-4, "ky": 2.5e-5, "unit_weight": 20.0, "d70": 3e-4}},
            "zones": [{"name": "embankment", "material": "fill", "polygon": [[-18, 0], [18, 0], [3, 5], [-3, 5]]},
                      {"name": "top stratum", "material": "blanket",
                       "polygon": [[-120, 0], [120, 0], [120, -2], [-120, -2]]},
                      {"name": "foundation", "material": "sand",
                       "polygon": [[-120, -2], [120, -2], [120, -18], [-120, -18]]}],
            "boundaries": [{"name": "river", "polyline": [[-120, 0], [-18, 0], [-6, 4]], "head": 4.0,
                            "dry_above_level": True},
                           {"name": "landside", "polyline": [[3, 5], [18, 0], [120, 0]], "seepage_face": True}],
            "remedies": list(remedies),
            "mesh": {"size": size, "order": 1}}


WELLS = {"type": "relief_wells", "x": 40.0, "spacing": 20.0, "radius": 0.15, "penetration": 8.0,
         "discharge_elevation": -0.2}
DRAIN = {"type": "toe_drain", "width": 3.0, "depth": 1.0}
CASES = {"wells": _levee([WELLS]), "toe drain": _levee([DRAIN]), "no fill unit weight": _levee(fill_weight=False)}


def _files(tmp_path):
    out = [(p.stem, p) for p in SECTIONS]
    for name, d in CASES.items():
        p = tmp_path / f"{name.replace(' ', '_')}.json"
        p.write_text(json.dumps(d))
        out.append((name, p))
    return out


def _sweep_governing(path, tmp, order=1):
    """The governing block of the one case of a sweep that changes nothing (river head as is)."""
    from seepfe.sweep import run_sweep
    from seepfe.sweep.values import get_value
    data = json.loads(Path(path).read_text())
    head_b = next(b for b in data["boundaries"] if "head" in b or "hydrograph" in b)
    key = f"boundaries.{head_b['name']}.{'head' if 'head' in head_b else 'peak'}"     # a hydrograph: its peak
    value = get_value(data, key)
    rep = run_sweep(path, {"vary": {key: [value]}}, out=tmp, workers=1, solve={"order": order}, plots=False)
    rec = json.loads(next((tmp / "cases").glob("*.json")).read_text())["record"]     # cache file: hash + record
    CaseRecord.model_validate(rec)
    row = rep.table[0]
    return rec["governing"], row


def _schema_validator():
    jsonschema = pytest.importorskip("jsonschema")
    schema = json.loads((ROOT / "docs" / "summary.schema.json").read_text())
    return jsonschema.Draft202012Validator(schema)


@pytest.mark.slow
def test_solve_sweep_and_api_agree_on_every_section(tmp_path, capsys):
    _agree(_files(tmp_path), tmp_path, capsys)


def test_solve_sweep_and_api_agree_on_wells_drain_and_missing_unit_weight(tmp_path, capsys):
    # the quick run: the three cases the analysis layer was built for (every example: the slow test above)
    _agree([f for f in _files(tmp_path) if not f[1].name.endswith(".json") or f[1].parent == tmp_path],
           tmp_path, capsys)


def _agree(files, tmp_path, capsys):
    v = _schema_validator()
    for name, path in files:
        out = tmp_path / f"solve_{path.stem}"
        code = main(["solve", str(path), "--out", str(out), "--order", "1"])
        printed = capsys.readouterr().out
        summary = json.loads((out / "summary.json").read_text())
        v.validate(summary)                                  # the published schema, independent validator
        Summary.model_validate(summary)
        api = seepfe.analyse(seepfe.solve(path, order=1))
        assert summary["governing"] == api.to_dict()["governing"], name
        gov = summary["governing"]
        sweep_gov, row = _sweep_governing(path, tmp_path / f"sweep_{path.stem}")
        assert sweep_gov == gov, name
        # the table's governing columns are the same values
        assert row["verdict"] == gov["verdict"] and row["why"] == gov["why"]
        assert (row["fs"] == gov["fs"]) or (gov["fs"] is None and row["fs"] != row["fs"])
        assert row["fs_boundary"] == (gov["boundary"] or "")
        # and the printed verdict is the same (its lengths in the section file's units)
        from seepfe.units import display_text
        why = display_text(gov["why"], api.result.section.units)
        assert f"verdict: {gov['verdict'].upper()}: {why}" in printed
        assert code == (0 if summary["solver"].get("converged", True) else 3)


@pytest.mark.slow
def test_report_and_plot_agree_with_solve(tmp_path, capsys):
    p = tmp_path / "wells.json"
    p.write_text(json.dumps(CASES["wells"]))
    main(["solve", str(p), "--out", str(tmp_path / "s"), "--order", "1"])
    main(["report", str(p), "--out", str(tmp_path / "r"), "--order", "1"])
    main(["plot", str(p), "--out", str(tmp_path / "p"), "--order", "1"])
    capsys.readouterr()
    g = json.loads((tmp_path / "s" / "summary.json").read_text())["governing"]
    assert json.loads((tmp_path / "r" / "summary.json").read_text())["governing"] == g
    assert json.loads((tmp_path / "p" / "figures.json").read_text())["governing"] == g
    html = (tmp_path / "r" / "report.html").read_text()
    import html as h
    assert h.escape(g["why"], quote=True) in html


def test_relief_wells_outlet_is_not_an_exit_surface():
    # the sweep once checked the wells' outlet line (a model device) and reported fs nan there
    a = seepfe.analyse(seepfe.solve(CASES["wells"]))
    assert "relief wells" in a.result.section.boundary_names
    assert "relief wells" not in a.boundaries and "landside" in a.boundaries
    assert a.governing["boundary"].startswith("landside") and a.governing["fs"] is not None


def test_missing_unit_weight_is_never_a_silent_pass():
    # the embankment slope below the exit point leaks upward: its heave FS needs the fill's unit weight
    a = seepfe.analyse(seepfe.solve(CASES["no fill unit weight"]))
    g = a.governing
    ex = a.exits["landside"]
    assert ex.unknown.any()
    assert "'embankment'" in g["why"] and "unit_weight" in g["why"]
    assert g["verdict"] in ("not checked", "fail")
    if g["verdict"] == "not checked":
        assert g["fs"] is None                               # never a number that looks complete
    # with the unit weight the same section is checked at every point
    b = seepfe.analyse(seepfe.solve(_levee()))
    assert not b.exits["landside"].unknown.any()
    assert b.governing["verdict"] in ("pass", "fail")


def test_unconverged_solve_is_not_checked():
    r = seepfe.solve(_levee(size=4.0))
    r.solver_info["converged"] = False                       # as an iteration that ran out would report
    g = seepfe.analyse(r).governing
    assert g["verdict"] == "not checked" and "did not converge" in g["why"]


def test_no_exit_surface_is_not_checked():
    d = _levee(size=4.0)
    d["checks"] = {"boundaries": []}                          # the engineer checks no surface
    g = seepfe.analyse(seepfe.solve(d)).governing
    assert g["verdict"] == "not checked" and "no exit surface" in g["why"]


@pytest.mark.parametrize("change, fragment", [
    (lambda d: d["boundaries"][0].update(head=6.0), "above the crest"),
    (lambda d: d["boundaries"][0].update(head=0.0), "no water stands on it"),
    (lambda d: d["boundaries"][0].update(head=-1.0), "no water stands on it"),
    (lambda d: d["boundaries"][1].update(polyline=[[3, 5], [4, 4.7]]), "no outlet"),
])
def test_impossible_water_levels_are_refused_before_solving(tmp_path, capsys, change, fragment):
    # overtopping (a stage above the crest) and a river below its own ground are not steady seepage
    # problems: a one-line error at load (exit 2, no folder), never a "pass" with FS 3e14
    d = _levee(size=4.0)
    change(d)
    with pytest.raises(seepfe.SectionError, match=fragment):
        seepfe.load_section(d)
    p = tmp_path / "x.json"
    p.write_text(json.dumps(d))
    assert main(["check", str(p)]) == 2
    assert main(["solve", str(p), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err
    assert fragment in err and err.count("\n") == 2 and not (tmp_path / "o").exists()


def test_str_of_a_result_runs_no_checks(monkeypatch):
    import seepfe.checks.exit as ce
    r = seepfe.solve(_levee(size=4.0))

    def boom(*a, **k):
        raise AssertionError("checks run behind print()")
    monkeypatch.setattr(ce, "exit_gradients", boom)
    text = str(r)
    assert "flows" in text and seepfe.CAUTION in text


def test_summary_schema_file_is_generated_from_the_code():
    import importlib.util
    spec = importlib.util.spec_from_file_location("write_schema", ROOT / "scripts" / "write_schema.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    committed = (ROOT / "docs" / "summary.schema.json").read_text(encoding="utf-8")
    assert committed == mod.summary_schema_text(), "run: python scripts/write_schema.py"
    s = json.loads(committed)
    gov = s["$defs"]["Governing"]["properties"]
    for key in ("fs", "mode", "boundary", "x_m", "top_stratum_thickness_m", "exit_gradient_max", "exit_gradient_x_m",
                "verdict", "why"):
        assert key in gov                                    # pinned keys
    rec = s["$defs"]["HandRecord"]["properties"]
    assert set(rec) == {"method", "quantity", "unit", "hand", "fe", "applies", "why"}


def test_schema_catches_drift():
    # a summary with a key the model does not know fails the published schema
    v = _schema_validator()
    d = seepfe.analyse(seepfe.solve(_levee(size=4.0))).to_dict()
    v.validate(d)
    bad = copy.deepcopy(d)
    bad["governing"]["least_fs"] = 1.0
    assert list(v.iter_errors(bad))
    bad = copy.deepcopy(d)
    bad["governing"]["verdict"] = "passes"
    assert list(v.iter_errors(bad))


def test_governing_mode_is_heave_where_heave_and_uplift_agree_to_round_off():
    # across a single stratum with the water table at the surface FS_heave = FS_uplift by algebra (both are
    # gamma' z / (gamma_w dh); common practice): the label must not flip on the last bit between runs, and a
    # real difference still names what governs
    from seepfe.checks.exit import _mode
    assert _mode(1.2345678901234, 1.2345678901234 * (1 - 1e-14)) == "heave"
    assert _mode(1.2345678901234 * (1 - 1e-14), 1.2345678901234) == "heave"
    assert _mode(1.30, 1.20) == "uplift"
    assert _mode(1.20, 1.30) == "heave"


def test_the_verdict_line_gives_the_failing_reach_of_the_table():
    # one definition of how far the failure reaches (checks.exit.failing_stretches): the text an engineer
    # reads in the verdict line says the same distance as the table's "fails within" column and summary.json
    import re
    from pathlib import Path
    demo = Path(__file__).parent.parent / "sections" / "levee_blanket.json"
    g = seepfe.analyse(seepfe.solve(str(demo), order=1, size=10.0)).governing
    assert g["verdict"] == "fail"
    m = re.search(r"failing to ([+-][0-9.]+) m from the toe", g["why"])
    assert m, g["why"]
    assert float(m.group(1)) == round(g["fails_within_m_of_toe"], 1)
