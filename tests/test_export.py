"""Results out: phreatic line, flow lines and equipotentials as CSV, GeoJSON and DXF; input copies; provenance."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import seepfe
from seepfe.analysis import analyse
from seepfe.cli import main
from seepfe.export import provenance, result_lines, write_lines

ROOT = Path(__file__).resolve().parent.parent

# a confined strip 10 m long and 2 m thick, heads 12 m and 10 m at its ends (no flow top and bottom)
STRIP = {"title": "strip", "materials": {"s": {"k": 1e-4}},
         "zones": [{"name": "s", "material": "s", "polygon": [[0, 0], [10, 0], [10, 2], [0, 2]]}],
         "boundaries": [{"name": "in", "polyline": [[0, 0], [0, 2]], "head": 12.0},
                        {"name": "out", "polyline": [[10, 0], [10, 2]], "head": 10.0}],
         "solver": {"phreatic": "off"}, "mesh": {"size": 0.5, "order": 1}}


def test_lines_of_a_strip_follow_darcy():
    # Darcy (1856): in a uniform confined strip the head falls linearly, h = h1 - (h1 - h2) x / L, so the
    # equipotential at h is the vertical x = L (h1 - h) / (h1 - h2); the flow is uniform, so the flow line
    # carrying psi of the total q runs horizontally at y = D psi / q (or D (1 - psi / q), by orientation).
    a = analyse(seepfe.solve(STRIP))
    lines = result_lines(a)
    assert lines["equipotentials"] and lines["flow_lines"]
    for it in lines["equipotentials"]:
        x_expected = 10 * (12 - it["value"]) / 2
        assert np.allclose(it["points"][:, 0], x_expected, atol=1e-9)
        assert np.ptp(it["points"][:, 1]) == pytest.approx(2.0)
    q = a.flow_net.q_total
    for it in lines["flow_lines"]:
        y = it["points"][:, 1]
        assert np.ptp(y) < 1e-9
        assert min(abs(y[0] - 2 * it["value"] / q), abs(y[0] - 2 * (1 - it["value"] / q))) < 1e-9
        assert np.ptp(it["points"][:, 0]) == pytest.approx(10.0)
    assert lines["phreatic_line"] == []             # all saturated: no phreatic line


def test_phreatic_line_has_zero_pressure_and_files_are_consistent(tmp_path):
    sec = seepfe.load_section(ROOT / "sections" / "levee_us.json")
    res = seepfe.solve(sec, order=1, size=10.0)
    a = analyse(res)
    files = write_lines(a, tmp_path, dxf=True)
    assert sorted(files) == sorted(p.name for p in tmp_path.iterdir())
    ph = np.genfromtxt(tmp_path / "phreatic_line.csv", delimiter=",", names=True)
    p = res.interpolate(res.pressure_head, np.column_stack([ph["x_m"], ph["y_m"]]))
    assert np.abs(p[1:-1]).max() < 1e-6             # (its ends lie on the outline, where 10 digits may fall outside)
    assert np.allclose(ph["x_ft"] * 0.3048, ph["x_m"]) and np.allclose(ph["y_ft"] * 0.3048, ph["y_m"])
    eq = np.genfromtxt(tmp_path / "equipotentials.csv", delimiter=",", names=True)
    h = res.interpolate(res.h, np.column_stack([eq["x_m"], eq["y_m"]]))
    inside = np.isfinite(h)
    assert inside.mean() > 0.8 and np.allclose(h[inside], eq["total_head_m"][inside], atol=1e-6)
    assert np.allclose(eq["total_head_ft"] * 0.3048, eq["total_head_m"])
    gj = json.loads((tmp_path / "lines.geojson").read_text())
    assert gj["type"] == "FeatureCollection" and gj["length_unit"] == "ft"
    kinds = {f["properties"]["kind"] for f in gj["features"]}
    assert kinds == {"phreatic_line", "flow_lines", "equipotentials"}
    first = next(f for f in gj["features"] if f["properties"]["kind"] == "phreatic_line")
    assert first["geometry"]["coordinates"][0] == pytest.approx([ph["x_ft"][0], ph["y_ft"][0]], abs=1e-6)
    ezdxf = pytest.importorskip("ezdxf")
    doc = ezdxf.readfile(str(tmp_path / "lines.dxf"))
    layers = {e.dxf.layer for e in doc.modelspace()}
    assert layers == {"phreatic line", "flow lines", "equipotentials"}
    assert doc.header["$INSUNITS"] == 2


def test_solve_copies_the_input_and_writes_the_lines(tmp_path, capsys):
    src = ROOT / "sections" / "levee_blanket.json"
    out = tmp_path / "o"
    assert main(["solve", str(src), "--out", str(out), "--order", "1", "--dxf"]) == 0
    assert (out / "input" / "levee_blanket.json").read_bytes() == src.read_bytes()
    for f in ("phreatic_line.csv", "flow_lines.csv", "equipotentials.csv", "lines.geojson", "lines.dxf"):
        assert (out / f).stat().st_size > 0
    assert "x_ft" not in (out / "phreatic_line.csv").read_text().splitlines()[0]      # SI file: SI columns only


def test_provenance_names_the_versions():
    import gmsh
    import numpy
    import scipy
    p = provenance()
    assert p == {**p, "seepfe": seepfe.__version__, "gmsh": gmsh.__version__, "numpy": numpy.__version__,
                 "scipy": scipy.__version__}
    assert all(isinstance(v, str) and v for v in p.values())
