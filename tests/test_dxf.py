"""DXF drawings: a section written as DXF reads back as the same section; a drawing made from scratch
(zones on layers named after materials, boundaries on layers named after boundaries) builds a section."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import seepfe
from seepfe.cli import main
from seepfe.dxf import read_drawing, write_section_dxf

ezdxf = pytest.importorskip("ezdxf")
ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize("name", ["levee_blanket.json", "small_dam.json", "levee_us.json"])
def test_round_trip_gives_the_same_section(tmp_path, name):
    src = ROOT / "sections" / name
    a = seepfe.load_section(src)
    write_section_dxf(a, tmp_path / "s.dxf")
    d = read_drawing({"drawing": "s.dxf", "template": str(src)}, tmp_path)
    b = seepfe.load_section(d)
    if a.units.is_si:
        assert b.spec == a.spec                  # bit for bit: DXF keeps doubles
    else:                                       # m -> ft -> m may move the last bit
        assert [(z.name, z.material) for z in b.spec.zones] == [(z.name, z.material) for z in a.spec.zones]
        for za, zb in zip(a.spec.zones, b.spec.zones):
            assert np.allclose(zb.polygon, za.polygon, rtol=1e-14, atol=1e-12)
        for xa, xb in zip(a.spec.boundaries, b.spec.boundaries):
            assert np.allclose(xb.polyline, xa.polyline, rtol=1e-14, atol=1e-12) and xa.kind == xb.kind
        assert b.spec.materials == a.spec.materials
    assert b.input_hash != "" and b.units == a.units


def test_round_trip_through_the_cli(tmp_path, capsys):
    src = ROOT / "sections" / "levee_blanket.json"
    assert main(["build", str(src), "--dxf", "--out", str(tmp_path / "levee.dxf")]) == 0
    (tmp_path / "levee.build.json").write_text(json.dumps({"drawing": "levee.dxf", "template": str(src)}))
    assert main(["build", str(tmp_path / "levee.build.json"), "--out", str(tmp_path / "levee.json")]) == 0
    assert seepfe.load_section(tmp_path / "levee.json").spec == seepfe.load_section(src).spec


def _drawing(path, insunits=6, extra=None):
    doc = ezdxf.new("R2010")
    doc.header["$INSUNITS"] = insunits
    msp = doc.modelspace()
    for layer in ("fill", "sand", "river", "landside", "notes"):
        doc.layers.add(layer)
    msp.add_lwpolyline([(-20, 0), (20, 0), (2, 6), (-2, 6)], close=True, dxfattribs={"layer": "fill"})
    msp.add_lwpolyline([(-100, 0), (-20, 0), (20, 0), (100, 0), (100, -20), (-100, -20)], close=True,
                       dxfattribs={"layer": "sand"})
    msp.add_lwpolyline([(-100, 0), (-20, 0), (-2, 6)], dxfattribs={"layer": "river"})
    msp.add_line((20, 0), (100, 0), dxfattribs={"layer": "landside"})
    msp.add_lwpolyline([(0, 10), (5, 10)], dxfattribs={"layer": "notes"})
    msp.add_text("levee", dxfattribs={"layer": "notes"})
    if extra:
        extra(msp)
    doc.saveas(str(path))


BUILD = {"drawing": "d.dxf",
         "materials": {"fill": {"k": 1e-7}, "sand": {"k": 1e-4}},
         "boundaries": {"river": {"head": 5.0, "dry_above_level": True}, "landside": {"seepage_face": True}}}


def test_a_drawing_from_scratch(tmp_path):
    _drawing(tmp_path / "d.dxf")
    notes = []
    d = read_drawing(BUILD, tmp_path, "b.json", notes)
    sec = seepfe.load_section(d)
    assert [(z.name, z.material) for z in sec.spec.zones] == [("fill", "fill"), ("sand", "sand")]
    assert sec.spec.boundaries[1].polyline == [[20.0, 0.0], [100.0, 0.0]]
    assert sec.outline.area == pytest.approx(200 * 20 + (40 + 4) / 2 * 6)
    assert any("notes" in n for n in notes) and any("TEXT" in n for n in notes)


def test_drawing_faults_get_one_line(tmp_path):
    _drawing(tmp_path / "d.dxf", insunits=2)                       # drawn in feet
    with pytest.raises(seepfe.SectionError, match="drawn in ft .* length unit is m"):
        read_drawing(BUILD, tmp_path, "b.json")
    assert read_drawing({**BUILD, "units": "US"}, tmp_path, "b.json")["units"] == "US"
    _drawing(tmp_path / "d.dxf", extra=lambda m: m.add_lwpolyline([(0, -5), (5, -5), (5, -8)], close=True,
                                                                  dxfattribs={"layer": "sant"}))
    with pytest.raises(seepfe.SectionError, match="layer 'sant', which names no zone and no material \\(did you mean 'sand'"):
        read_drawing(BUILD, tmp_path, "b.json")
    _drawing(tmp_path / "d.dxf", extra=lambda m: m.add_lwpolyline([(0, -5, 0.5), (5, -5, 0), (5, -8, 0)],
                                                                  format="xyb", close=True,
                                                                  dxfattribs={"layer": "sand"}))
    with pytest.raises(seepfe.SectionError, match="arc segments"):
        read_drawing(BUILD, tmp_path, "b.json")
    _drawing(tmp_path / "d.dxf")
    with pytest.raises(seepfe.SectionError, match="no polyline on layer 'toe' for boundary 'toe'"):
        read_drawing({**BUILD, "boundaries": {**BUILD["boundaries"], "toe": {"drain": True}}}, tmp_path, "b.json")
    (tmp_path / "bad.dxf").write_text("not a drawing")
    with pytest.raises(seepfe.SectionError, match="not a readable DXF"):
        read_drawing({**BUILD, "drawing": "bad.dxf"}, tmp_path, "b.json")
