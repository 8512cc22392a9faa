"""The hydrograph format (pinned keys, good and bad values, units), the transient API, the CLI and sweeps."""

from __future__ import annotations

import copy
import json
from pathlib import Path

import numpy as np
import pytest

import seepfe
from seepfe.cli import main

ROOT = Path(__file__).resolve().parent.parent


def _levee(size=6.0, **river):
    """The example levee (sections/levee_flood.json) on a coarse P1 mesh."""
    d = json.loads((ROOT / "sections" / "levee_flood.json").read_text())
    d["mesh"] = {"size": size, "order": 1, "refine": [{"polyline": [[-20, 0], [20, 0], [60, 0]], "size": 1.5}]}
    d["boundaries"][0].update(river)
    return d


@pytest.fixture(scope="module")
def run():
    return seepfe.solve(_levee())


# ------------------------------------------------------------------------------------------- format
@pytest.mark.parametrize("change, fragment", [
    (lambda b: b.pop("time_unit"), "needs 'time_unit'"),
    (lambda b: b.update(time_unit="week"), "time_unit"),
    (lambda b: b.update(head=3.0), "not both"),
    (lambda b: b.update(hydrograph=[[0, 1.0], [5, 2.0], [3, 3.0]]), "must not decrease"),
    (lambda b: b.update(hydrograph=[[0, 1.0], [2, 2.0], [2, 3.0], [2, 4.0]]), "a step takes two"),
    (lambda b: b.update(hydrograph=[[0, 1.0]]), "at least 2"),
    (lambda b: b.update(hydrograph=[[0, 1.0], [0, 2.0]]), "later than the first"),
    (lambda b: b.update(hydrograph=[[0, 1.0, 3.0], [2, 2.0]]), "allows at most 2"),
    (lambda b: b.update(hydrograph=[[0, 1.0], [2, "high"]]), "expected a number"),
    (lambda b: b.update(output_times=[-1.0]), "before the hydrograph starts"),
    (lambda b: b.update(peak=3.0, hydrograph=[[0, 2.0], [5, 1.0]]), "never rises"),
    (lambda b: b.update(duration=-2.0), "must be > 0"),
])
def test_bad_hydrographs_are_refused_in_one_line(tmp_path, capsys, change, fragment):
    d = _levee()
    change(d["boundaries"][0])
    with pytest.raises(seepfe.SectionError, match=fragment) as e:
        seepfe.load_section(d)
    assert "\n" not in str(e.value) and "river" in str(e.value)
    p = tmp_path / "x.json"
    p.write_text(json.dumps(d))
    assert main(["solve", str(p), "--out", str(tmp_path / "o")]) == 2
    assert not (tmp_path / "o").exists()
    assert capsys.readouterr().err.count("\n") == 1


@pytest.mark.parametrize("change, fragment", [
    (lambda d: d["materials"]["fill"].update(specific_storage=-1e-4), "must be > 0"),
    (lambda d: d["materials"]["fill"]["unsaturated"].update(theta_r=0.5), "below 'theta_s'"),
    (lambda d: d["boundaries"][1].update(time_unit="day"), "goes with 'hydrograph'"),
    (lambda d: d["boundaries"][0].update(output_times=[30.0]), "after the end of the solve"),
    (lambda d: d.update(transient={"first_step": 2, "max_step": 1}), "larger than max_step"),
    (lambda d: d.update(transient={"end": -1}), "not after the start"),
    (lambda d: d.update(transient={"pore_pressure_grid": {"x": [5, 1], "y": [0, 1], "spacing": 1}}), "smaller to the"),
])
def test_bad_transient_settings_are_refused(change, fragment):
    d = _levee()
    change(d)
    with pytest.raises(seepfe.SectionError, match=fragment):
        seepfe.solve(d)


def test_transient_settings_need_a_hydrograph():
    d = json.loads((ROOT / "sections" / "levee_blanket.json").read_text())
    d["transient"] = {"max_step": 1.0}
    with pytest.raises(seepfe.SectionError, match="need a boundary with a 'hydrograph'"):
        seepfe.load_section(d)


def test_a_hydrograph_above_the_crest_is_refused_at_load():
    # the load-time water-level checks read a hydrograph at its highest stage: overtopping is not seepage
    d = _levee(hydrograph=[[0, 1.0], [3, 7.0], [6, 1.0]], output_times=[0, 3])
    with pytest.raises(seepfe.SectionError, match="above the crest"):
        seepfe.load_section(d)


def test_hydrograph_heads_follow_the_files_length_unit_and_times_their_own():
    d = _levee(size=6.0)
    ft = 0.3048
    us = copy.deepcopy(d)
    us["units"] = {"length": "ft"}

    def conv(v):
        return v / ft
    for z in us["zones"]:
        z["polygon"] = [[conv(x), conv(y)] for x, y in z["polygon"]]
    for b in us["boundaries"]:
        b["polyline"] = [[conv(x), conv(y)] for x, y in b["polyline"]]
    us["boundaries"][0]["hydrograph"] = [[t, conv(h)] for t, h in d["boundaries"][0]["hydrograph"]]
    us["mesh"] = {"size": conv(6.0), "order": 1, "refine": [{"polyline": [[conv(-20), 0], [conv(20), 0], [conv(60), 0]],
                                                             "size": conv(1.5)}]}
    a, b = seepfe.load_section(d), seepfe.load_section(us)
    from seepfe.hydrograph import hydrographs
    ga, gb = hydrographs(a)["river"], hydrographs(b)["river"]
    assert np.allclose(ga.t, gb.t) and np.allclose(ga.h, gb.h)          # times not converted, heads in m
    assert ga.t[-1] == 14 * 86400.0
    s = json.loads((ROOT / "docs" / "section.schema.json").read_text())
    hp = s["$defs"]["BoundarySpec"]["properties"]["hydrograph"]
    text = json.dumps(hp)
    assert '"x-dimension": "time"' in text and '"x-dimension": "length"' in text


def test_peak_and_duration_scale_the_hydrograph():
    from seepfe.hydrograph import hydrographs
    g = hydrographs(seepfe.load_section(_levee(peak=6.0, duration=28.0)))["river"]
    assert g.h.max() == pytest.approx(6.0) and g.h[0] == pytest.approx(1.0)
    assert g.t[-1] == pytest.approx(28 * 86400.0)
    assert g.crest[0] == pytest.approx(14 * 86400.0)                  # the crest (day 7) moves with the stretch
    assert np.allclose(g.output, np.array([0, 3, 5, 7, 8, 9, 10, 11.5, 14]) * 2 * 86400.0)
    # a step: the earlier value at that time, the later one just after
    g2 = hydrographs(seepfe.load_section(_levee(hydrograph=[[0, 1.0], [2, 1.0], [2, 3.0], [5, 3.0]],
                                                output_times=[2])))["river"]
    assert g2.stage(2 * 86400.0) == 1.0 and g2.stage(2 * 86400.0 + 1) == 3.0 and g2.stage(-5.0) == 1.0


# ------------------------------------------------------------------------------------------- API
def test_the_pinned_api(run):
    # seepfe.solve dispatches on the hydrograph; times in s; at(t) gives the steady Result's queries
    assert isinstance(run.times, np.ndarray) and run.times[0] == 0.0 and run.times[-1] == 14 * 86400.0
    for day in (0, 3, 5, 7, 8, 9, 10, 11.5, 14):
        assert np.isclose(run.times, day * 86400.0).any()
    r = run.at(7 * 86400.0)
    assert isinstance(r, seepfe.Result) and r.stages == {"river": 5.0}
    h = r.head(np.array([[20.0, -3.0], [-100.0, -10.0]]))
    assert np.all(np.isfinite(h)) and h[1] > h[0]
    assert r.boundary_flow("river") > 0 > r.boundary_flow("landside")
    ex = r.exit_gradients("landside")
    assert len(ex.x) and np.nanmax(ex.exit_gradient) > 0
    with pytest.raises(KeyError, match="not a stored time"):
        run.at(7.3 * 86400.0)
    # the moment of the least FS is stored, and seepfe.analyse reads it (the governing moment)
    lf = run.least_fs
    assert np.isclose(run.times, lf["time_s"]).any()
    a = seepfe.analyse(run)
    assert a.governing["fs"] == pytest.approx(lf["fs"]) and a.result.time_s == lf["time_s"]
    assert lf["lag_after_crest_s"] == pytest.approx(lf["time_s"] - 7 * 86400.0)
    assert min(np.nanmin(run.history["fs"]), lf["fs"]) == lf["fs"]
    d = a.to_dict()
    from seepfe.records import Summary
    Summary.model_validate(d)
    assert d["transient"]["run"]["least_fs"]["fs"] == pytest.approx(lf["fs"])
    assert "steady closed forms" in " ".join(d["notes"])


def test_the_crest_is_not_where_the_toe_is_most_at_risk(run):
    # the blanket and the foundation store water: the toe head and the least FS lag the crest (days here)
    assert run.least_fs["lag_after_crest_s"] > 0.5 * 86400.0
    assert run.peak_toe_head["lag_after_crest_s"] > 0.5 * 86400.0
    # and the steady answer at the crest stage is the conservative one (lower FS)
    from seepfe.hydrograph import section_at
    steady = seepfe.analyse(seepfe.solve(section_at(run.section, 7 * 86400.0), mesh=run.mesh)).governing["fs"]
    assert steady < run.least_fs["fs"]


# ------------------------------------------------------------------------------------------- CLI and files
def test_cli_writes_the_transient_folder(tmp_path, capsys):
    p = tmp_path / "flood.json"
    p.write_text(json.dumps(_levee(size=8.0)))
    out = tmp_path / "out"
    assert main(["solve", str(p), "--out", str(out), "--no-figures"]) == 0
    text = capsys.readouterr().out
    assert "least FS over the flood" in text and "after the crest" in text and seepfe.CAUTION in text
    for f in ("summary.json", "history.csv", "times.csv", "fields.pvd", "nodes.csv", "checks_landside.csv"):
        assert (out / f).exists(), f
    vtus = sorted((out / "fields").glob("*.vtu"))
    grids = sorted((out / "pore_pressures").glob("*.csv"))
    assert len(vtus) == len(grids) >= 9
    assert len(sorted((out / "phreatic_lines").glob("*.csv"))) == len(vtus)
    assert len(sorted((out / "checks").glob("*_landside.csv"))) == len(vtus)
    hdr = grids[-1].read_text().splitlines()[0]
    assert hdr == "x_m,y_m,total_head_m,pressure_head_m,pore_pressure_kPa"
    hist = (out / "history.csv").read_text().splitlines()
    assert "time_day" in hist[0] and "fs" in hist[0].split(",") and len(hist) > 100
    import meshio
    m = meshio.read(vtus[0])
    assert "pore_pressure_kPa" in m.point_data
    s = json.loads((out / "summary.json").read_text())
    assert s["transient"]["run"]["balance"]["largest_step_error"] < 1e-6
    # --steady: the steady problem at the crest stage
    assert main(["solve", str(p), "--out", str(tmp_path / "crest"), "--steady"]) == 0
    crest = json.loads((tmp_path / "crest" / "summary.json").read_text())
    assert "transient" not in crest and crest["governing"]["fs"] < s["governing"]["fs"]


def test_cli_never_writes_into_a_folder_it_did_not_make(tmp_path, capsys):
    p = tmp_path / "flood.json"
    p.write_text(json.dumps(_levee(size=10.0)))
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep me")
    assert main(["solve", str(p), "--out", str(mine), "--no-figures"]) == 2
    assert (mine / "notes.txt").read_text() == "keep me" and len(list(mine.iterdir())) == 1
    capsys.readouterr()


def test_a_run_that_does_not_converge_is_marked_and_never_passes(monkeypatch, tmp_path, capsys):
    import seepfe.transient as tr
    monkeypatch.setattr(tr, "NEWTON_MAX", 1)
    monkeypatch.setattr(tr, "MIN_STEP_FRACTION", 0.5)
    d = _levee(size=10.0, hydrograph=[[0, 1.0], [1, 3.0]], output_times=[1])
    res = seepfe.solve(d)
    assert not res.solver_info["converged"] and res.solver_info["unconverged_steps"] > 0
    g = seepfe.analyse(res).governing
    assert g["verdict"] == "not checked" and "did not converge" in g["why"]
    p = tmp_path / "x.json"
    p.write_text(json.dumps(d))
    assert main(["solve", str(p), "--out", str(tmp_path / "o"), "--no-figures"]) == 3
    assert "did not converge" in capsys.readouterr().out


@pytest.mark.slow
def test_figures_of_a_transient_run(run, tmp_path):
    from seepfe.plot.hydrograph import transient_figures
    from seepfe.plot.save import save_figure
    names = []
    for name, caption, fig in transient_figures(run):
        save_figure(fig, tmp_path / name, formats=("png",))
        names.append(name)
        assert caption
    assert names[:3] == ["flood_history", "flood_flows", "flood_phreatic"]
    assert any(n.startswith("flood_pore_pressure_11_5") for n in names)      # the end of the falling limb
    assert all((tmp_path / f"{n}.png").stat().st_size > 20_000 for n in names)


# ------------------------------------------------------------------------------------------- sweeps
def test_sweep_keys_of_a_hydrograph():
    from seepfe.sweep.values import get_value, infer_unit, unit_and_factor
    from seepfe.units import SI
    d = _levee()
    assert get_value(d, "boundaries.river.peak") == 5.0
    assert get_value(d, "boundaries.river.duration") == 14.0
    assert infer_unit(d, "boundaries.river.peak") == "m"
    assert unit_and_factor(d, "boundaries.river.duration", None, SI, SI) == ("day", 1.0)
    from seepfe.sweep.spec import column_of
    assert column_of(d, "boundaries.river.duration", None, "<sweep>") == "boundaries.river.duration_day"
    assert column_of(d, "boundaries.river.hydrograph.3.1", None, "<sweep>") == "boundaries.river.hydrograph.3.1_m"


def test_sweep_case_record_of_a_hydrograph():
    from seepfe.records import CaseRecord
    from seepfe.sweep.case import run_case
    rec = run_case({"section": _levee(size=10.0), "solve": {"order": 1}, "points": {"toe": [20.0, -3.0]}})
    CaseRecord.model_validate(rec)
    tr = rec["transient"]
    assert rec["status"] == "ok" and tr["least_fs_time_s"] > tr["crest_time_s"]
    assert tr["least_fs"] == pytest.approx(rec["governing"]["fs"]) and tr["time_unit"] == "day"


def test_report_section_of_a_transient_run(run):
    from seepfe.report_transient import insert_section, transient_section
    frag = transient_section(run, figures=[])
    assert "least FS over the flood" in frag and "The stored times" in frag and seepfe.CAUTION in frag
    assert frag.count("<tr>") >= 1 + len(run.times)
    doc = "<html><body><h2>Checks</h2><p>x</p><h2>Solver</h2></body></html>"
    out = insert_section(doc, frag)
    assert out.index("<h2>Checks</h2>") < out.index(frag) < out.index("<h2>Solver</h2>")


@pytest.mark.slow
def test_report_and_plot_of_a_hydrograph_section(tmp_path, capsys):
    p = tmp_path / "flood.json"
    p.write_text(json.dumps(_levee(size=8.0)))
    assert main(["report", str(p), "--out", str(tmp_path / "r")]) == 0
    html = (tmp_path / "r" / "report.html").read_text()
    assert "4. The flood hydrograph: transient seepage" in html and "Transient two-dimensional flow" in html
    assert html.count("data:image/svg+xml;base64,") >= 10
    assert html.index("3. Inputs") < html.index("4. The flood hydrograph") < html.index("Appendix A")
    assert (tmp_path / "r" / "figures" / "flood_history.svg").exists()
    assert main(["plot", str(p), "--out", str(tmp_path / "p")]) == 0
    assert (tmp_path / "p" / "flood_phreatic.png").exists()
    g = json.loads((tmp_path / "p" / "figures.json").read_text())["governing"]
    assert g == json.loads((tmp_path / "r" / "summary.json").read_text())["governing"]
    capsys.readouterr()


def test_start_from_still_water():
    res = seepfe.solve(_levee(size=10.0, hydrograph=[[0, 1.0], [0.5, 2.0]], output_times=[0.5]) |
                       {"transient": {"initial_water_table": 0.5}})
    assert "still water at 0.5" in res.solver_info["initial"]["initial_state"]
    h0 = res.states[0].h
    free = np.setdiff1d(np.arange(len(h0)), res.states[0].fixed)
    assert np.allclose(h0[free], 0.5)
    assert res.balance["largest_step_error"] < 1e-6
