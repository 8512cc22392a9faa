"""seepfe calibrate: the pinned file and API contract, the output folder, units, and one-line errors for bad input.

The verification against things outside the project (synthetic twins, blanket theory, finite differences)
is in tests/test_calibration_verify.py.
"""

import copy
import importlib.util
import json
from pathlib import Path

import numpy as np
import pytest

import seepfe
from seepfe.calibration import calibrate
from seepfe.cli import main
from seepfe.errors import SectionError
from seepfe.records import CalibrationRecord

ROOT = Path(__file__).resolve().parent.parent
SECTION = ROOT / "sections" / "levee_ditch.json"
OBS = ROOT / "sections" / "levee_ditch.observations.json"
COARSE = ["--order", "1", "--size", "8"]


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    out = tmp_path_factory.mktemp("cal") / "cal"
    import contextlib
    import io
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = main(["calibrate", str(SECTION), str(OBS), "--out", str(out)] + COARSE)
    return code, out, buf.getvalue()


def test_cli_writes_the_pinned_files(run):
    code, out, text = run
    assert code == 0
    cal = json.loads((out / "calibration.json").read_text())
    CalibrationRecord.model_validate(cal)
    # pinned: parameters {key: {value, low, high}}, residuals, identifiable (bool per key, with why)
    assert set(cal["parameters"]) == {"k_blanket", "k_sand"}
    for k, p in cal["parameters"].items():
        assert p["low"] < p["value"] < p["high"]
        assert isinstance(cal["identifiable"][k], bool) and cal["identifiable_why"][k]
    assert len(cal["residuals"]) == 13 and {r["kind"] for r in cal["residuals"]} == {"head", "flow"}
    for name in ("section.calibrated.json", "readings.csv", "parameters.csv", "checks.csv", "calibration.html",
                 "calibration_readings.png", "calibration_values.png", "calibration_objective.png",
                 "input/levee_ditch.json", "input/levee_ditch.observations.json"):
        assert (out / name).is_file(), name
    assert "licensed engineer" in text and "licensed engineer" in (out / "calibration.html").read_text()
    assert "k_blanket" in text and "design 'design flood'" in text


def test_calibrated_section_is_ready_for_design_runs(run):
    # the fitted values are written into the section file (its parameters here), and the checks reported
    # 'after' at the design stage are what a plain solve of that file at that stage gives
    _, out, _ = run
    cal = json.loads((out / "calibration.json").read_text())
    data = json.loads((out / "section.calibrated.json").read_text())
    for k, p in cal["parameters"].items():
        assert data["parameters"][k] == pytest.approx(p["value"], rel=1e-5)
    assert data["materials"]["sand"]["ky"] == "=k_sand / anisotropy"      # expressions kept
    design = next(c for c in cal["checks"] if c["kind"] == "design")
    data["parameters"]["stage"] = design["fixed"]["stage"]
    a = seepfe.analyse(seepfe.solve(data, order=1, size=8.0))
    assert a.governing["fs"] == pytest.approx(design["after"]["fs"], rel=1e-4)
    assert a.governing["verdict"] == design["after"]["verdict"]


def test_python_api_returns_the_content_of_calibration_json(run):
    _, out, _ = run
    cal = seepfe.calibrate(str(SECTION), str(OBS), order=1, size=8.0)
    on_disk = json.loads((out / "calibration.json").read_text())
    assert cal.to_dict() == on_disk
    assert cal["parameters"] == on_disk["parameters"] and dict(cal)["identifiable"] == on_disk["identifiable"]
    html = cal.html()
    assert html.startswith('<section id="calibration">') and "<img" in html


def test_a_second_run_replaces_the_folder_and_a_foreign_folder_is_refused(tmp_path, capsys):
    obs = json.loads(OBS.read_text())
    obs["events"] = obs["events"][:1]
    p = tmp_path / "o.json"
    p.write_text(json.dumps(obs))
    out = tmp_path / "cal"
    args = ["calibrate", str(SECTION), str(p), "--out", str(out), "--no-plots"] + COARSE
    assert main(args) == 0 and main(args) == 0
    assert sorted(x.name for x in tmp_path.iterdir()) == ["cal", "o.json"]
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep me")
    capsys.readouterr()
    assert main(["calibrate", str(SECTION), str(p), "--out", str(mine), "--no-plots"] + COARSE) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("seepfe: error:")
    assert (mine / "notes.txt").read_text() == "keep me" and sorted(x.name for x in mine.iterdir()) == ["notes.txt"]


def test_committed_calibration_schemas_are_up_to_date():
    # the committed text is what the newest pydantic writes (scripts/test_lowest.sh deselects this test)
    spec = importlib.util.spec_from_file_location("write_schema", ROOT / "scripts" / "write_schema.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    assert (ROOT / "docs" / "calibration.schema.json").read_text() == mod.calibration_schema_text(), \
        "run: python scripts/write_schema.py"
    assert (ROOT / "docs" / "observations.schema.json").read_text() == mod.observations_schema_text(), \
        "run: python scripts/write_schema.py"


def test_calibration_files_validate_against_the_committed_schemas(run):
    jsonschema = pytest.importorskip("jsonschema")
    _, out, _ = run
    jsonschema.validate(json.loads((out / "calibration.json").read_text()),
                        json.loads((ROOT / "docs" / "calibration.schema.json").read_text()))
    jsonschema.validate(json.loads(OBS.read_text()),
                        json.loads((ROOT / "docs" / "observations.schema.json").read_text()))


# ---------------------------------------------------------------------------- units
def test_observations_in_us_units_give_the_same_fit():
    # the same readings written in ft, ft/day and ft3/day per ft ("units": "US") as in m: the same SI values
    obs = json.loads(OBS.read_text())
    obs["events"] = obs["events"][:1]
    ft, ftd = 0.3048, 0.3048 / 86400
    us = copy.deepcopy(obs)
    us["units"] = "US"
    for h in us["events"][0]["heads"]:
        for k in ("x", "y", "head", "sigma"):
            h[k] = h[k] / ft
    for q in us["events"][0]["flows"]:
        q["value"], q["sigma"] = q["value"] / (ft * ftd), q["sigma"] / (ft * ftd)
    for k in us["fit"]:
        us["fit"][k] = {"min": obs["fit"][k]["min"] / ftd, "max": obs["fit"][k]["max"] / ftd}
    us["fixed"]["channel_level"] = 0.0
    us["events"][0]["fixed"]["stage"] = obs["events"][0]["fixed"]["stage"] / ft
    a = calibrate(SECTION, obs, order=1, size=8.0, checks=False)
    b = calibrate(SECTION, us, order=1, size=8.0, checks=False)
    for k in a["parameters"]:
        assert b["parameters"][k]["value"] == pytest.approx(a["parameters"][k]["value"], rel=1e-6)
        assert b["parameters"][k]["min"] == pytest.approx(a["parameters"][k]["min"], rel=1e-12)
    assert [r["observed"] for r in b["residuals"]] == pytest.approx([r["observed"] for r in a["residuals"]], rel=1e-12)


# ---------------------------------------------------------------------------- bad input: one line each
def _obs(**change):
    d = json.loads(OBS.read_text())
    d["events"] = d["events"][:1]
    for k, v in change.items():
        if v is None:
            d.pop(k, None)
        else:
            d[k] = v
    return d


def _heads(d):
    return d["events"][0]["heads"]


def _case(name):
    d = _obs()
    if name == "outside":
        _heads(d)[2]["x"] = 1000.0
        return d, ["events[0] 'flood peak'", "heads[2] 'PZ-3'", "(1000, -5) m lies outside the section"]
    if name == "unknown key":
        d["fit"]["k_blankit"] = d["fit"].pop("k_blanket")
        return d, ["fit 'k_blankit'", "did you mean 'k_blanket'"]
    if name == "unknown dotted key":
        d["fit"]["materials.sand.kz"] = {"min": 1e-6, "max": 1e-3}
        return d, ["fit 'materials.sand.kz'", "no key 'kz'"]
    if name == "bounds reversed":
        d["fit"]["k_sand"] = {"min": 1e-2, "max": 1e-6}
        return d, ["fit.k_sand", "bounds reversed", "min 0.01 is not below max 1e-06"]
    if name == "no readings":
        d["events"][0]["heads"] = []
        d["events"][0]["flows"] = []
        return d, ["no readings"]
    if name == "identical":
        for h in _heads(d):
            h["head"] = 1.25
        return d, ["events[0] 'flood peak'.heads", "all 6 readings are identical (1.25 m)"]
    if name == "fitted and fixed":
        d["fixed"]["k_sand"] = 1e-4
        return d, ["fit 'k_sand'", "also given in 'fixed'"]
    if name == "too few readings":
        d["events"][0]["heads"] = _heads(d)[:1]
        d["events"][0]["flows"] = []
        d["fit"]["anisotropy"] = {"min": 1, "max": 10}
        return d, ["values to fit from 1 reading"]
    if name == "unknown flow boundary":
        d["events"][0]["flows"][0]["boundary"] = "chanel"
        return d, ["flows", "no boundary or drain zone named 'chanel'", "did you mean 'channel'"]
    if name == "expression":
        d["fit"] = {"materials.sand.ky": {"min": 1e-6, "max": 1e-3}}
        return d, ["fit 'materials.sand.ky'", "expression"]
    if name == "negative sigma":
        _heads(d)[1]["sigma"] = -0.05
        return d, ["events[0] 'flood peak'.heads[1] 'PZ-2'.sigma", "must be > 0"]
    if name == "misspelt top-level key":
        d["head"] = d.pop("events")[0]["heads"]
        return d, ["unknown key 'head'"]
    if name == "log bound not positive":
        d["fit"]["k_sand"] = {"min": 0.0, "max": 1e-3}
        return d, ["fit 'k_sand'", "min must be > 0"]
    if name == "reference not fitted":
        d["reference"] = "anisotropy"
        return d, ["reference 'anisotropy'", "not a key of 'fit'"]
    if name == "bound where the section fails":
        d["fit"]["k_sand"] = {"min": 1e-6, "max": 50.0}
        return d, ["fit 'k_sand'", "at its max (50 m/s)", "outside the range of soils"]
    raise KeyError(name)


CASES = ["outside", "unknown key", "unknown dotted key", "bounds reversed", "no readings", "identical",
         "fitted and fixed", "too few readings", "unknown flow boundary", "expression", "negative sigma",
         "misspelt top-level key", "log bound not positive", "reference not fitted", "bound where the section fails"]


@pytest.mark.parametrize("name", CASES)
def test_bad_observations_give_one_line_naming_file_and_item(name, tmp_path):
    d, parts = _case(name)
    p = tmp_path / "flood.json"
    p.write_text(json.dumps(d))
    with pytest.raises(SectionError) as e:
        calibrate(SECTION, p, order=1, size=8.0, checks=False)
    msg = str(e.value)
    assert "\n" not in msg and msg.startswith(str(p)), msg
    for part in parts:
        assert part in msg, (part, msg)


def test_bad_input_on_the_command_line_is_one_line_and_writes_nothing(tmp_path, capsys):
    d, _ = _case("outside")
    p = tmp_path / "flood.json"
    p.write_text(json.dumps(d))
    out = tmp_path / "cal"
    assert main(["calibrate", str(SECTION), str(p), "--out", str(out)] + COARSE) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "outside the section" in err[0]
    assert not out.exists() and sorted(x.name for x in tmp_path.iterdir()) == ["flood.json"]
    (tmp_path / "bad.json").write_text('{"fit": {"k_sand": {"min": NaN, "max": 1}}}')
    assert main(["calibrate", str(SECTION), str(tmp_path / "bad.json"), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "bad.json" in err[0] and "NaN" in err[0]


def test_readings_no_steady_field_can_give_are_warned_about():
    d = _obs()
    _heads(d)[0]["head"] = 9.0             # above the river (5.2 m) that day
    cal = calibrate(SECTION, d, order=1, size=8.0, checks=False)
    assert any("PZ-1" in w and "above the highest head" in w for w in cal["warnings"])
    assert any("miss by more than 3 sigma" in w for w in cal["warnings"])


def test_example_observations_name_every_piezometer_inside_the_section():
    sec = seepfe.load_section(SECTION)
    d = json.loads(OBS.read_text())
    pts = np.array([[h["x"], h["y"]] for ev in d["events"] for h in ev["heads"]])
    import shapely
    assert shapely.contains_xy(sec.outline, pts[:, 0], pts[:, 1]).all()


def test_a_fit_stopped_early_says_so_and_exits_3(tmp_path, capsys):
    out = tmp_path / "cal"
    assert main(["calibrate", str(SECTION), str(OBS), "--out", str(out), "--no-plots", "--max-evaluations", "2"]
                + COARSE) == 3
    cal = json.loads((out / "calibration.json").read_text())
    assert cal["fit"]["status"] == "stopped" and any("before it converged" in w for w in cal["warnings"])


def test_a_value_pushed_onto_its_bound_gets_no_interval():
    # k_sand may not exceed 1e-4 m/s here, while the readings want about 2.3e-4: it rests on its bound, and the
    # record says the value is the bound's, not the data's
    d = _obs()
    d["fit"]["k_sand"] = {"min": 1e-6, "max": 1e-4}
    cal = calibrate(SECTION, d, order=1, size=8.0, checks=False)
    p = cal["parameters"]["k_sand"]
    assert p["at_bound"] == "max" and p["value"] == pytest.approx(1e-4, rel=1e-6)
    assert p["low"] is None and p["high"] is None and cal["identifiable"]["k_sand"] is False
    assert "rests on its upper bound" in cal["identifiable_why"]["k_sand"]


def test_an_event_with_a_flow_and_no_heads():
    d = _obs()
    d["events"].append({"name": "later", "fixed": {"stage": 4.0},
                        "flows": [{"boundary": "channel", "value": -4.3e-5, "sigma": 8e-6}]})
    cal = calibrate(SECTION, d, order=1, size=8.0, checks=False)
    assert [r["event"] for r in cal["residuals"]].count("later") == 1 and all(cal["identifiable"].values())
