"""seepfe build: section files from a ground line, boring logs and water levels."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from shapely.geometry import Point, Polygon

import seepfe
from seepfe.build import build_section, format_section, read_build
from seepfe.cli import main
from seepfe.mesh import make_mesh

ROOT = Path(__file__).resolve().parent.parent
BUILDS = sorted((ROOT / "sections").glob("*.build.json"))


@pytest.mark.parametrize("path", BUILDS, ids=lambda p: p.stem)
def test_committed_example_is_what_its_build_file_builds(path):
    b, base, label = read_build(path)
    built = format_section(build_section(b, base, label))
    target = path.with_name(path.name.replace(".build.json", ".json"))
    assert target.read_text(encoding="utf-8") == built, f"run: seepfe build {path.name} --out {target.name} --force"


@pytest.mark.parametrize("path", BUILDS, ids=lambda p: p.stem)
def test_examples_pass_check(path, capsys):
    target = path.with_name(path.name.replace(".build.json", ".json"))
    assert main(["check", str(target), "--order", "1"]) == 0
    assert "valid" in capsys.readouterr().out


def _simple(**over):
    """Flat ground at 0 from -100 to 100; two borings; a levee 4 high, crest 4 wide, slopes 2:1."""
    b = {"title": "t",
         "ground": [[-100, 0], [100, 0]],
         "borings": [{"name": "B1", "station": -50, "bottoms": {"clay": -2, "sand": -10}},
                     {"name": "B2", "station": 50, "bottoms": {"clay": -6, "sand": -10}}],
         "strata": [{"name": "clay", "material": "clay"}, {"name": "sand", "material": "sand"}],
         "materials": {"fill": {"k": 1e-7}, "clay": {"k": 1e-8}, "sand": {"k": 1e-4}},
         "embankment": {"material": "fill", "crest_elevation": 4, "crest_width": 4, "riverside_slope": 2,
                        "landside_slope": 2},
         "bottom": -10, "water": {"river": 3, "landside": None}}
    b.update(over)
    return b


def _zone_at(d, x, y):
    hits = [z["name"] for z in d["zones"] if Polygon(z["polygon"]).buffer(1e-9).contains(Point(x, y))]
    return hits


def test_strata_are_linear_between_borings_and_flat_beyond():
    d = build_section(_simple())
    # clay bottom: -2 at B1, -6 at B2 -> -4 midway, -3 at x = -25; -2 left of B1, -6 right of B2
    for x, zb in ((0, -4), (-25, -3), (-90, -2), (90, -6)):
        assert _zone_at(d, x, zb + 0.01) == ["clay"] and _zone_at(d, x, zb - 0.01) == ["sand"], x
    emb = next(z for z in d["zones"] if z["name"] == "embankment")
    # toes at +-(2 + 2 * 4) = +-10 on the ground; trapezoid area (4 + 20) / 2 * 4 = 48
    assert Polygon(emb["polygon"]).area == pytest.approx(48.0)
    assert d["checks"]["toe_x"] == 10 and d["checks"]["riverside_toe_x"] == -10
    # the zones tile the model: 200 x 10 foundation + the embankment
    assert sum(Polygon(z["polygon"]).area for z in d["zones"]) == pytest.approx(2000 + 48)
    sec = seepfe.load_section(d)
    assert sec.outline.area == pytest.approx(2048)
    assert [b.kind for b in sec.spec.boundaries] == ["head", "seepage_face"]


def test_depths_are_measured_from_the_ground_at_the_boring():
    b = _simple(ground=[[-100, 2], [0, 0], [100, 0]],
                borings=[{"name": "B1", "station": -50, "depths": {"clay": 3}},
                         {"name": "B2", "station": 50, "depths": {"clay": 6}}])
    d = build_section(b)
    # ground at B1 is 1 -> clay bottom -2; at B2 0 -> -6
    assert _zone_at(d, -50, -1.99) == ["clay"] and _zone_at(d, -50, -2.01) == ["sand"]


def test_a_layer_pinching_out_between_borings_splits_into_pieces():
    # a borrow pit (ground down to -3 at x = -60) cuts through the clay, whose bottom runs at -2 there
    b = _simple(ground=[[-100, 0], [-70, 0], [-60, -3], [-50, 0], [100, 0]],
                borings=[{"name": "B1", "station": -80, "bottoms": {"clay": -2}},
                         {"name": "B2", "station": 80, "bottoms": {"clay": -2}}])
    d = build_section(b)
    clay = [z for z in d["zones"] if z["material"] == "clay"]
    assert sorted(z["name"] for z in clay) == ["clay 1", "clay 2"]
    # the pit's floor is in sand; the clay ends where the pit's sides cross -2: x = -70 + 10 * 2/3, -50 - 10 * 2/3
    assert _zone_at(d, -60, -3.1) == ["sand"] and _zone_at(d, -60, -2.9) == []
    x1, x2 = -70 + 20 / 3, -50 - 20 / 3
    c1 = Polygon(next(z["polygon"] for z in clay if z["name"] == "clay 1"))
    assert c1.bounds[2] == pytest.approx(x1, abs=1e-6)
    c2 = Polygon(next(z["polygon"] for z in clay if z["name"] == "clay 2"))
    assert c2.bounds[0] == pytest.approx(x2, abs=1e-6)
    # areas: clay 1 = 30 x 2 + triangle 20/3 x 2 / 2; the model still tiles exactly
    assert c1.area == pytest.approx(60 + 20 / 3, rel=1e-6)
    total = 200 * 10 + 48 - 0.5 * 20 * 3
    assert sum(Polygon(z["polygon"]).area for z in d["zones"]) == pytest.approx(total, rel=1e-9)
    sec = seepfe.load_section(d)
    assert make_mesh(sec, order=1, size=5.0).n_elements > 0


def test_a_layer_missing_from_a_boring_pinches_out_towards_it():
    b = _simple(strata=[{"name": "clay", "material": "clay"}, {"name": "silt", "material": "clay"},
                        {"name": "sand", "material": "sand"}],
                borings=[{"name": "B1", "station": -50, "bottoms": {"clay": -2, "silt": -4}},
                         {"name": "B2", "station": 50, "bottoms": {"clay": -2}}])
    d = build_section(b)
    silt = Polygon(next(z["polygon"] for z in d["zones"] if z["name"] == "silt"))
    # 2 thick at B1 and left of it, 0 at B2: 50 x 2 + 100 x 2 / 2
    assert silt.area == pytest.approx(200.0)
    seepfe.load_section(d)


@pytest.mark.parametrize("change,match", [
    ({"borings": [{"name": "B1", "station": 0, "bottoms": {"caly": -2}}]}, "no stratum named 'caly' \\(did you mean 'clay'"),
    ({"extent": [-150, 100]}, "goes beyond the ground line"),
    ({"bottom": -5}, "is not below the top of the last stratum"),
    ({"water": {"river": 4.5}}, "overtopped"),
    ({"embankment": {"material": "fil", "crest_elevation": 4, "crest_width": 4, "riverside_slope": 2,
                     "landside_slope": 2}}, "no material named 'fil' \\(did you mean 'fill'"),
    ({"ground": [[-100, 0], [0, 1], [0, 2], [100, 0]]}, "stations must increase"),
    ({"borings": [{"name": "B1", "station": 0, "bottoms": {"clay": 2}}]}, "is above the ground"),
    ({"strata": [{"name": "clay", "material": "clay"}, {"name": "sand", "material": "sandd"}]}, "did you mean 'sand'"),
])
def test_bad_build_files_get_one_line(change, match):
    with pytest.raises(seepfe.SectionError, match=match) as e:
        build_section(_simple(**change), label="b.json")
    assert "\n" not in str(e.value) and str(e.value).startswith("b.json: ")


def test_cli_build_writes_an_editable_file_and_never_overwrites(tmp_path, capsys):
    src = ROOT / "sections" / "levee_us.build.json"
    out = tmp_path / "levee.json"
    assert main(["build", str(src), "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "written:" in text and "units US" in text
    d = json.loads(out.read_text())
    assert d["units"] == "US" and d["boundaries"][0]["name"] == "river"
    out.write_text(out.read_text().replace("Invented", "Edited"))
    assert main(["build", str(src), "--out", str(out)]) == 2
    assert "does not overwrite" in capsys.readouterr().err
    assert "Edited" in out.read_text()
    assert main(["build", str(src), "--out", str(out), "--force"]) == 0
    assert "Edited" not in out.read_text()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["levee.json"]


def test_borings_csv_by_depth_and_elevation_read_the_same(tmp_path):
    (tmp_path / "g.csv").write_text("station,elevation\n-100,0\n100,0\n")
    (tmp_path / "e.csv").write_text("boring,station,stratum,bottom\nB1,-50,clay,-2\nB2,50,clay,-6\n")
    (tmp_path / "d.csv").write_text("# depths\nboring,station,stratum,depth\nB1,-50,clay,2\nB2,50,clay,6\n")
    b = _simple(ground="g.csv", borings="e.csv")
    a = build_section(b, tmp_path)
    c = build_section({**b, "borings": "d.csv"}, tmp_path)
    assert a == c
    (tmp_path / "x.csv").write_text("boring,station,stratum,bottom\nB1,-50,clay,abc\n")
    with pytest.raises(seepfe.SectionError, match="x.csv line 2: station and elevation must be numbers"):
        build_section({**b, "borings": "x.csv"}, tmp_path, "b.json")
