"""Bad section input: every fault gives one line naming the file, the item and what is wrong.

Each case starts from a small valid section, breaks one thing and checks the SectionError message
(common practice for input validation: the message names where and what, so an engineer can fix
the file without reading code).  The CLI cases check the exit code, the single stderr line and
that no output folder is left behind.
"""

from __future__ import annotations

import copy
import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

import seepfe
from seepfe.cli import main


def _valid() -> dict:
    """An invented two-zone levee on a foundation; meshes in well under a second."""
    return {
        "title": "Invented validation section",
        "materials": {"fill": {"k": 1e-7}, "sand": {"kx": 1e-4, "ky": 2.5e-5, "angle": 10.0}},
        "zones": [
            {"name": "embankment", "material": "fill", "polygon": [[-12, 0], [12, 0], [2, 4], [-2, 4]]},
            {"name": "foundation", "material": "sand", "polygon": [[-40, 0], [40, 0], [40, -10], [-40, -10]]},
        ],
        "boundaries": [
            {"name": "river", "polyline": [[-40, 0], [-12, 0], [-6, 2.4]], "head": 3.0},
            {"name": "landside", "polyline": [[12, 0], [40, 0]], "seepage_face": True},
        ],
        "mesh": {"size": 4.0, "order": 1},
    }


def _error(data) -> str:
    with pytest.raises(seepfe.SectionError) as ei:
        seepfe.load_section(data)
    msg = str(ei.value)
    assert "\n" not in msg, msg
    return msg


def _write(tmp_path: Path, name: str, content) -> Path:
    p = tmp_path / name
    if isinstance(content, bytes):
        p.write_bytes(content)
    else:
        p.write_text(content, encoding="utf-8")
    return p


def test_valid_section_loads_and_solves():
    r = seepfe.solve(_valid())
    assert r.balance["relative_error"] < 1e-8
    assert r.boundary_flow("river") > 0


# ------------------------------------------------------------------ file level
def test_not_json_names_file_line_and_column(tmp_path):
    p = _write(tmp_path, "broken.json", '{"title": "x",\n  "materials": {\n    "fill" {"k": 1e-7}\n')
    msg = _error(p)
    assert msg.startswith(f"{p}: not valid JSON at line 3, column 12"), msg


def test_not_utf8_names_line_and_column(tmp_path):
    p = _write(tmp_path, "latin1.json", '{\n  "title": "Stau\xdfe"\n}'.encode("latin-1"))
    msg = _error(p)
    assert msg.startswith(f"{p}: not UTF-8 text at line 2, column 17"), msg


def test_nan_literal_in_file_is_refused_with_position(tmp_path):
    d = json.dumps(_valid(), indent=1).replace('"k": 1e-07', '"k": NaN')
    assert "NaN" in d
    p = _write(tmp_path, "nan.json", d)
    msg = _error(p)
    line = d[:d.index("NaN")].count("\n") + 1
    assert msg.startswith(f"{p}: line {line}, column "), msg
    assert "'NaN' is not a number JSON allows" in msg


def test_infinity_literal_in_file_is_refused(tmp_path):
    d = json.dumps(_valid()).replace('"head": 3.0', '"head": -Infinity')
    msg = _error(_write(tmp_path, "inf.json", d))
    assert "'-Infinity' is not a number JSON allows" in msg


def test_top_level_not_an_object(tmp_path):
    msg = _error(_write(tmp_path, "list.json", "[1, 2]"))
    assert "list.json: the top level must be a JSON object" in msg


def test_missing_file():
    msg = _error("/nonexistent/section.json")
    assert msg.startswith("/nonexistent/section.json: cannot read the file")


def test_file_label_used_for_schema_errors(tmp_path):
    d = _valid()
    d["materials"]["fill"]["k"] = -1e-7
    msg = _error(_write(tmp_path, "neg.json", json.dumps(d)))
    assert msg.startswith(f"{tmp_path / 'neg.json'}: material 'fill'.k: must be > 0"), msg


# ------------------------------------------------------------------ keys
@pytest.mark.parametrize("where, key, near, expect", [
    ((), "boundary", "boundaries", "unknown key 'boundary' (did you mean 'boundaries'?)"),
    (("materials", "fill"), "kk", "k", "material 'fill': unknown key 'kk' (did you mean 'k'?)"),
    (("zones", 0), "materal", "material", "zone 'embankment': unknown key 'materal' (did you mean 'material'?)"),
    (("boundaries", 1), "seepageface", "seepage_face",
     "boundary 'landside': unknown key 'seepageface' (did you mean 'seepage_face'?)"),
    (("mesh",), "sise", "size", "mesh: unknown key 'sise' (did you mean 'size'?)"),
])
def test_unknown_key_suggests_the_near_one(where, key, near, expect):
    d = _valid()
    node = d
    for k in where:
        node = node[k]
    node[key] = 1.0
    msg = _error(d)
    assert msg == f"<dict>: {expect}", msg


def test_unknown_key_without_near_lists_allowed():
    d = _valid()
    d["materials"]["fill"]["porosity_xyz"] = 0.3
    msg = _error(d)
    assert "unknown key 'porosity_xyz'" in msg and "allowed:" in msg and "unit_weight" in msg


@pytest.mark.parametrize("path, key, expect", [
    ((), "zones", "<dict>: missing key 'zones'"),
    ((), "materials", "<dict>: missing key 'materials'"),
    (("zones", 1), "material", "<dict>: zone 'foundation': missing key 'material'"),
    (("zones", 0), "polygon", "<dict>: zone 'embankment': missing key 'polygon'"),
    (("boundaries", 0), "polyline", "<dict>: boundary 'river': missing key 'polyline'"),
])
def test_missing_key(path, key, expect):
    d = _valid()
    node = d
    for k in path:
        node = node[k]
    del node[key]
    assert _error(d) == expect


def test_undefined_material_suggests_near_name():
    d = _valid()
    d["zones"][1]["material"] = "snad"
    assert _error(d) == "<dict>: zone 'foundation': no material named 'snad' (did you mean 'sand'?)"


def test_wrong_type_says_what_was_expected():
    d = _valid()
    d["materials"]["fill"]["k"] = "1e-7"
    assert _error(d) == "<dict>: material 'fill'.k: expected a number, got \"1e-7\""


def test_point_with_three_coordinates():
    d = _valid()
    d["zones"][0]["polygon"][1] = [12, 0, 0]
    assert _error(d) == "<dict>: zone 'embankment'.polygon[1]: a point is [x, y] (two numbers, m), got [12, 0, 0]"


# ------------------------------------------------------------------ conductivity
@pytest.mark.parametrize("value, fault", [
    (0.0, "must be > 0, got 0.0"),
    (-1e-7, "must be > 0, got -1e-07"),
    (math.nan, "must be a finite number, got nan"),
    (math.inf, "must be a finite number, got inf"),
])
def test_conductivity_must_be_positive_and_finite(value, fault):
    d = _valid()
    d["materials"]["fill"]["k"] = value
    assert _error(d) == f"<dict>: material 'fill'.k: {fault}"
    d = _valid()
    d["materials"]["sand"]["ky"] = value
    assert _error(d) == f"<dict>: material 'sand'.ky: {fault}"


def test_kx_ky_given_with_k():
    d = _valid()
    d["materials"]["sand"]["k"] = 1e-4
    assert _error(d) == "<dict>: material 'sand': give either 'k' or 'kx' and 'ky', not both"


def test_kx_without_ky():
    d = _valid()
    del d["materials"]["sand"]["ky"]
    assert _error(d) == "<dict>: material 'sand': 'kx' and 'ky' go together: give both (m/s)"


def test_no_conductivity():
    d = _valid()
    d["materials"]["fill"] = {"unit_weight": 19.0}
    assert "material 'fill': missing conductivity" in _error(d)


# ------------------------------------------------------------------ polygons
def test_polygon_fewer_than_three_points():
    d = _valid()
    d["zones"][0]["polygon"] = [[-12, 0], [12, 0]]
    assert _error(d) == "<dict>: zone 'embankment': polygon needs at least 3 distinct points, got 2"


def test_polygon_repeated_points_count_once():
    d = _valid()
    d["zones"][0]["polygon"] = [[-12, 0], [12, 0], [12, 0], [-12, 0]]
    assert _error(d) == "<dict>: zone 'embankment': polygon needs at least 3 distinct points, got 2"


def test_polygon_zero_area():
    d = _valid()
    d["zones"][0]["polygon"] = [[-12, 0], [0, 0], [12, 0]]
    assert _error(d) == "<dict>: zone 'embankment': polygon has zero area (its points lie on one line)"


def test_polygon_crossing_itself_says_where():
    d = _valid()
    # bow tie: the top two vertices swapped; the edges from (12, 0) to (-2, 4) and from (2, 4) to
    # (-12, 0) cross at (0, 24/7) (by hand: x = 12 - 14t = 0 gives t = 6/7, y = 4t)
    d["zones"][0]["polygon"] = [[-12, 0], [12, 0], [-2, 4], [2, 4]]
    msg = _error(d)
    assert msg.startswith("<dict>: zone 'embankment': polygon crosses itself near ("), msg
    x, y = (float(v) for v in msg.split("near (")[1].rstrip(")").split(","))
    assert x == pytest.approx(0.0, abs=1e-9) and y == pytest.approx(24 / 7, abs=1e-5)


# ------------------------------------------------------------------ tiling
def test_overlapping_zones_give_area_and_where():
    d = _valid()
    # embankment pushed 1 m down into the foundation: overlap is the trapezoid between y = -1 and 0
    # of the shifted embankment (bottom 24 m, top at y=0 is 24 - 2*(10/4)*1 = 19 m): (24 + 19)/2 * 1
    d["zones"][0]["polygon"] = [[-12, -1], [12, -1], [2, 3], [-2, 3]]
    msg = _error(d)
    assert msg.startswith("<dict>: zones 'embankment' and 'foundation' overlap by 21.5 m2 near ("), msg
    x, y = (float(v) for v in msg.split("near (")[1].rstrip(")").split(","))
    assert -12 < x < 12 and -1 < y < 0


def test_gap_between_zones():
    d = _valid()
    d["zones"][1] = {"name": "foundation", "material": "sand",
                     "polygon": [[-40, 0], [40, 0], [40, -10], [-40, -10], [-40, -6], [10, -6], [10, -4], [-40, -4]]}
    d["zones"].append({"name": "lower", "material": "sand", "polygon": [[-40, -4], [0, -4], [0, -6], [-40, -6]]})
    # the strip 0 < x < 10, -6 < y < -4 is covered by nobody and enclosed: a 20 m2 gap
    msg = _error(d)
    assert msg.startswith("<dict>: gap between zones near ("), msg
    assert "(20 m2): zones must tile the section" in msg
    x, y = (float(v) for v in msg.split("near (")[1].split(")")[0].split(","))
    assert 0 < x < 10 and -6 < y < -4


def test_disconnected_piece_names_the_zone():
    d = _valid()
    d["zones"].append({"name": "island", "material": "fill", "polygon": [[60, 0], [70, 0], [65, 5]]})
    msg = _error(d)
    assert msg.startswith("<dict>: zone 'island' is a disconnected piece"), msg
    assert "near (65, " in msg


def test_zones_touching_only_at_a_corner_are_disconnected():
    d = _valid()
    d["zones"].append({"name": "corner", "material": "fill", "polygon": [[40, -10], [50, -10], [50, -20], [40, -20]]})
    msg = _error(d)
    assert "zone 'corner' is a disconnected piece" in msg


def test_duplicate_zone_names():
    d = _valid()
    d["zones"][1]["name"] = "embankment"
    assert "zone 'embankment' is defined 2 times" in _error(d)


# ------------------------------------------------------------------ boundaries
def test_boundary_off_the_outline():
    d = _valid()
    d["boundaries"][1]["polyline"] = [[12, -1], [40, -1]]
    assert _error(d) == ("<dict>: boundary 'landside': polyline leaves the outline of the section near "
                         "(12, -1)")


def test_boundary_partly_off_the_outline_says_where_it_leaves():
    d = _valid()
    d["boundaries"][1]["polyline"] = [[12, 0], [40, 0], [40, 5]]
    msg = _error(d)
    assert msg == "<dict>: boundary 'landside': polyline leaves the outline of the section near (40, 0)"


def test_two_boundaries_on_the_same_edge():
    d = _valid()
    d["boundaries"].append({"name": "toe drain", "polyline": [[20, 0], [40, 0]], "drain": True})
    msg = _error(d)
    assert msg.startswith("<dict>: boundaries 'landside' and 'toe drain' both claim the outline edge from ")


def test_no_head_boundary():
    d = _valid()
    d["boundaries"][0] = {"name": "river", "polyline": [[-40, 0], [-12, 0]], "flux": 1e-8}
    msg = _error(d)
    assert msg.startswith("<dict>: no boundary prescribes a 'head'"), msg
    assert "no unique solution" in msg


def test_boundary_with_two_kinds():
    d = _valid()
    d["boundaries"][0]["flux"] = 1e-8
    assert _error(d) == "<dict>: boundary 'river': give only one of 'head', 'flux'"


def test_boundary_with_no_kind():
    d = _valid()
    del d["boundaries"][0]["head"]
    assert _error(d) == ("<dict>: boundary 'river': give one of 'head', 'hydrograph', 'seepage_face', 'flux' or "
                         "'drain'")


# ------------------------------------------------------------------ mesh
def test_mesh_too_large_says_how_many_and_how_to_override():
    d = _valid()
    d["mesh"]["size"] = 0.02
    sec = seepfe.load_section(d)
    # area 80*10 + (24+4)/2*4 = 856 m2; equilateral triangles of side 0.02 m: 856 / (sqrt(3)/4 * 0.02^2)
    expected = 856 / (math.sqrt(3) / 4 * 0.02**2)
    with pytest.raises(seepfe.SectionError) as ei:
        seepfe.make_mesh(sec)
    msg = str(ei.value)
    assert f"about {expected:.3g} triangles" in msg
    assert "max_elements = 2000000" in msg
    assert "'mesh.max_elements'" in msg and "'mesh.size'" in msg
    # the stated override is a real key: the same mesh refused under a low limit meshes under a raised one
    d["mesh"]["size"] = 2.0
    d["mesh"]["max_elements"] = 100
    with pytest.raises(seepfe.SectionError, match="more than max_elements = 100;"):
        seepfe.make_mesh(seepfe.load_section(d))
    d["mesh"]["max_elements"] = 100_000
    assert seepfe.make_mesh(seepfe.load_section(d)).n_elements > 100


def test_mesh_limit_via_solve():
    d = _valid()
    d["mesh"]["max_elements"] = 50
    with pytest.raises(seepfe.SectionError, match=r"more than max_elements = 50"):
        seepfe.solve(d)


# ------------------------------------------------------------------ CLI
def _run_cli(args, cwd):
    """Run the ``seepfe`` command installed beside this interpreter (never another one on PATH), or the same
    entry point through this interpreter."""
    exe = Path(sys.executable).with_name("seepfe")
    cmd = [str(exe)] if exe.is_file() else [sys.executable, "-c", "import sys; from seepfe.cli import main; sys.exit(main())"]
    return subprocess.run([*cmd, *args], cwd=cwd, capture_output=True, text=True, timeout=120)


@pytest.mark.parametrize("content", [
    '{"title": "x", "materials": ',                                        # not JSON
    json.dumps({**_valid(), "boundary": []}),                              # unknown key
    json.dumps({**_valid(), "mesh": {"size": 4.0, "max_elements": 10}}),   # mesh too large (at solve)
])
def test_cli_solve_bad_file_one_line_no_traceback_no_folder(tmp_path, content):
    _write(tmp_path, "bad.json", content)
    p = _run_cli(["solve", "bad.json", "--out", "d"], tmp_path)
    assert p.returncode != 0
    lines = p.stderr.splitlines()
    assert len(lines) == 1, p.stderr
    assert lines[0].startswith("seepfe: error: bad.json: "), lines[0]
    assert "Traceback" not in p.stderr + p.stdout
    assert not (tmp_path / "d").exists()
    assert sorted(x.name for x in tmp_path.iterdir()) == ["bad.json"]     # no temporary folder left


def test_cli_in_process_check_bad_file(tmp_path, capsys):
    p = _write(tmp_path, "bad.json", json.dumps({**_valid(), "zones": []}))
    assert main(["check", str(p)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err == [f"seepfe: error: {p}: zones: needs at least 1 item(s), got 0"]


def test_cli_solve_good_file_writes_folder(tmp_path, capsys):
    p = _write(tmp_path, "good.json", json.dumps(_valid()))
    assert main(["solve", str(p), "--out", str(tmp_path / "d")]) == 0
    summary = json.loads((tmp_path / "d" / "summary.json").read_text())
    assert summary["balance"]["relative_error"] < 1e-8
    assert "CAUTION" in capsys.readouterr().out


def test_dict_input_is_not_mutated():
    d = _valid()
    before = copy.deepcopy(d)
    seepfe.load_section(d)
    assert d == before
