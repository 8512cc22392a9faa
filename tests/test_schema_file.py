"""docs/section.schema.json is generated from seepfe.schema and must match it; example sections
validate against it with an independent JSON Schema validator where one is installed."""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def _writer():
    spec = importlib.util.spec_from_file_location("write_schema", ROOT / "scripts" / "write_schema.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_committed_schema_is_up_to_date():
    committed = (ROOT / "docs" / "section.schema.json").read_text(encoding="utf-8")
    assert committed == _writer().schema_text(), "run: python scripts/write_schema.py"


def test_committed_sweep_schema_is_up_to_date():
    committed = (ROOT / "docs" / "sweep.schema.json").read_text(encoding="utf-8")
    assert committed == _writer().sweep_schema_text(), "run: python scripts/write_schema.py"


def test_schema_names_the_core_keys_and_units():
    s = json.loads((ROOT / "docs" / "section.schema.json").read_text(encoding="utf-8"))
    assert s["additionalProperties"] is False
    assert {"materials", "zones"} <= set(s["required"])
    mat = s["$defs"]["MaterialSpec"]["properties"]
    for key in ("k", "kx", "ky", "angle", "unit_weight"):
        assert key in mat
    assert "m/s" in mat["k"]["description"] and "cm/s" in mat["k"]["description"]
    # k > 0 is visible to editors (exclusive minimum on the number branch); its dimension too. The
    # upper end of the range depends on the file's units, so the loader checks it, not the schema.
    assert {"exclusiveMinimum": 0, "type": "number", "x-dimension": "conductivity"} in mat["k"]["anyOf"]
    assert {"SI", "US"} <= set(s["properties"]["units"]["anyOf"][0]["enum"])
    assert "$schema" in s["properties"]
    bnd = s["$defs"]["BoundarySpec"]["properties"]
    for key in ("name", "polyline", "head", "seepage_face", "flux"):
        assert key in bnd


def _section_files():
    """Example section files (other JSON files in sections/, such as sweep plans, have no 'zones')."""
    return [p for p in sorted((ROOT / "sections").glob("*.json"))
            if "zones" in json.loads(p.read_text(encoding="utf-8"))]


@pytest.mark.parametrize("path", _section_files(), ids=lambda p: p.name)
def test_example_sections_pass_the_schema(path):
    jsonschema = pytest.importorskip("jsonschema")
    s = json.loads((ROOT / "docs" / "section.schema.json").read_text(encoding="utf-8"))
    data = json.loads(path.read_text(encoding="utf-8"))
    assert not sorted(set(data) - set(s["properties"]))
    jsonschema.validate(data, s)


def _sweep_files():
    return [p for p in sorted((ROOT / "sections").glob("*.sweep.json"))]


@pytest.mark.parametrize("path", _sweep_files(), ids=lambda p: p.name)
def test_example_sweeps_pass_the_sweep_schema(path):
    jsonschema = pytest.importorskip("jsonschema")
    s = json.loads((ROOT / "docs" / "sweep.schema.json").read_text(encoding="utf-8"))
    jsonschema.validate(json.loads(path.read_text(encoding="utf-8")), s)
    bad = {**json.loads(path.read_text(encoding="utf-8")), "units": "metric"}
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, s)


def test_schema_rejects_an_unknown_key():
    jsonschema = pytest.importorskip("jsonschema")
    s = json.loads((ROOT / "docs" / "section.schema.json").read_text(encoding="utf-8"))
    data = json.loads((ROOT / "sections" / "levee_blanket.json").read_text(encoding="utf-8"))
    data["materials"]["fill"]["kk"] = 1.0
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(data, s)
