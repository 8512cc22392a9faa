"""Write the JSON Schemas in docs/ from the code: section.schema.json (the section-file format, from
seepfe.schema, seepfe.remedies and seepfe.units), sweep.schema.json (sweep files, from seepfe.sweep.spec),
summary.schema.json (summary.json, from seepfe.records), observations.schema.json (observations files of
seepfe calibrate, from seepfe.calibration.observations) and calibration.schema.json (calibration.json, from
seepfe.records).

Run after changing those models:  python scripts/write_schema.py
(tests/test_schema_file.py fails while a committed file is out of date; ``--check`` does the same
from the command line and exits 1.)
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TARGET = ROOT / "docs" / "section.schema.json"
SUMMARY = ROOT / "docs" / "summary.schema.json"
SWEEP_TARGET = ROOT / "docs" / "sweep.schema.json"
CALIBRATION = ROOT / "docs" / "calibration.schema.json"
OBSERVATIONS = ROOT / "docs" / "observations.schema.json"
_SCHEMA_KEY = {"title": "$schema", "type": "string",
               "description": "address of this JSON Schema, for editors that check the file as you type; "
                              "ignored by seepfe"}


def summary_schema_text() -> str:
    """The schema of summary.json as the exact text to commit."""
    sys.path.insert(0, str(ROOT))
    from seepfe.records import summary_schema
    s = summary_schema()
    s["description"] = ("summary.json written by seepfe solve, report and seepfe.analyse(result).to_dict(): the "
                        "flows, the exit checks, the governing values and verdict, the hand methods. SI units "
                        "(see 'units'); null where a value could not be computed, with the reason beside it.")
    return json.dumps(s, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def calibration_schema_text() -> str:
    """The schema of calibration.json (seepfe calibrate) as the exact text to commit."""
    sys.path.insert(0, str(ROOT))
    from seepfe.records import calibration_schema
    s = calibration_schema()
    s["description"] = ("calibration.json written by seepfe calibrate and seepfe.calibrate(...).to_dict(): the fitted "
                        "values with approximate 95 % intervals, whether the readings determine each, the residuals, "
                        "and the checks before and after. SI units; null where a value is not determined, with the "
                        "reason beside it. See docs/calibration.md.")
    return json.dumps(s, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def observations_schema_text() -> str:
    """The schema of an observations file (seepfe calibrate) as the exact text to commit."""
    sys.path.insert(0, str(ROOT))
    from seepfe.calibration.observations import ObservationsSpec
    from seepfe.units import json_schema as units_schema
    s = ObservationsSpec.model_json_schema(mode="validation", by_alias=True)
    s["properties"]["units"] = units_schema()
    s["properties"]["units"]["description"] = (
        "units of the file's numbers (default: the section file's units): x, y, head and sigma of a head in the "
        "length unit, a flow in length x conductivity per length of section, min/max and fixed values in their "
        "key's unit")
    s["properties"]["$schema"] = dict(_SCHEMA_KEY)
    s = {"$schema": "https://json-schema.org/draft/2020-12/schema",
         "$id": "https://seepfe.invalid/observations.schema.json",
         "description": "Observations file of seepfe calibrate: piezometer heads and measured flows of past events, "
                        "the values of those events, and the keys to fit with their bounds (docs/calibration.md).",
         **{k: v for k, v in s.items() if k != "description"}}
    return json.dumps(s, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def schema_text() -> str:
    """The schema as the exact text to commit (sorted, indented, trailing newline)."""
    sys.path.insert(0, str(ROOT))
    from seepfe.schema import SectionSpec

    from pydantic import TypeAdapter

    from seepfe.remedies import Remedy

    s = SectionSpec.model_json_schema(mode="validation")
    # keys the loader resolves before the model sees the file: named parameters and remedial measures
    rem = TypeAdapter(list[Remedy]).json_schema(mode="validation", ref_template="#/$defs/{model}")
    s.setdefault("$defs", {}).update(rem.pop("$defs", {}))
    s["properties"]["remedies"] = {**rem, "title": "Remedies",
                                   "description": "remedial measures turned into zones and boundaries "
                                                  "before meshing (docs/remedies.md)"}
    s["properties"]["parameters"] = {
        "title": "Parameters", "type": "object",
        "description": "named values usable wherever a number goes, as an expression string '=name * 2' "
                       "(docs/format.md)",
        "additionalProperties": {"anyOf": [{"type": "number"}, {"$ref": "#/$defs/Expression"}]}}
    s["$defs"]["Expression"] = {"type": "string", "pattern": "^=",
                                "description": "an expression of declared parameters, e.g. '=stage + 0.5'"}
    from seepfe.units import json_schema as units_schema
    s["properties"]["units"] = units_schema()
    s["properties"]["$schema"] = dict(_SCHEMA_KEY)
    s = _describe_dimensions(s)
    s = _numbers_take_expressions(s)
    s = {"$schema": "https://json-schema.org/draft/2020-12/schema",
         "$id": "https://seepfe.invalid/section.schema.json",
         "description": "Section file of seepfe (steady seepage through and under levee and dam sections). "
                        "Lengths m, y is elevation (up); conductivities m/s; unit weights kN/m3; "
                        "fluxes m/s positive into the section; angles degrees counter-clockwise from +x; "
                        "or the units named by 'units' (each number's dimension is its 'x-dimension'). "
                        "See docs/format.md.",
         **{k: v for k, v in s.items() if k != "description"}}
    return json.dumps(s, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def sweep_schema_text() -> str:
    """The sweep-file schema as the exact text to commit."""
    sys.path.insert(0, str(ROOT))
    from seepfe.sweep.spec import SweepSpec
    from seepfe.units import json_schema as units_schema

    s = SweepSpec.model_json_schema(mode="validation", by_alias=True)
    s["properties"]["units"] = units_schema()
    s["properties"]["units"]["description"] = (
        "units of the sweep's numbers (default: the section file's units): values of keys, points, "
        "element size, search ranges and medians; converted to the section file's units before they "
        "are applied")
    s["properties"]["$schema"] = dict(_SCHEMA_KEY)
    s = _describe_dimensions(s)
    s = {"$schema": "https://json-schema.org/draft/2020-12/schema",
         "$id": "https://seepfe.invalid/sweep.schema.json",
         "description": "Sweep file of seepfe: cases, target searches and fragility of one section "
                        "(docs/sweeps.md). Numbers are in the sweep's 'units', by default the section file's.",
         **{k: v for k, v in s.items() if k != "description"}}
    return json.dumps(s, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def _dims(node) -> set:
    """x-dimension values inside a property schema (not through $ref)."""
    if isinstance(node, dict):
        out = {node["x-dimension"]} if "x-dimension" in node else set()
        for k, v in node.items():
            if k != "x-dimension":
                out |= _dims(v)
        return out
    if isinstance(node, list):
        return set().union(*(_dims(v) for v in node)) if node else set()
    return set()


def _describe_dimensions(node):
    """Append the unit choices to the description of every property with one dimension."""
    from seepfe.units import describe
    if isinstance(node, dict):
        out = {k: _describe_dimensions(v) for k, v in node.items()}
        props = out.get("properties")
        if isinstance(props, dict):
            for name, p in props.items():
                d = _dims(p)
                if len(d) == 1 and isinstance(p, dict):
                    extra = describe(next(iter(d)))
                    if extra:
                        p["description"] = (p.get("description") or name) + extra
        return out
    if isinstance(node, list):
        return [_describe_dimensions(v) for v in node]
    return node


def _numbers_take_expressions(node, in_any_of=False):
    """Wherever the schema asks for a number, also accept an expression string ('=...')."""
    expr = {"$ref": "#/$defs/Expression"}
    if isinstance(node, dict):
        out = {k: (_numbers_take_expressions(v, k == "anyOf") if k == "anyOf"
                   else _numbers_take_expressions(v)) for k, v in node.items()}
        if "anyOf" in out and any(isinstance(b, dict) and b.get("type") in ("number", "integer")
                                  for b in out["anyOf"]):
            out["anyOf"] = out["anyOf"] + [expr]
        elif out.get("type") in ("number", "integer") and not in_any_of:
            return {"anyOf": [out, expr]}
        return out
    if isinstance(node, list):
        return [_numbers_take_expressions(v, in_any_of) for v in node]
    return node


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--check", action="store_true", help="exit 1 if the committed file is out of date")
    args = ap.parse_args(argv)
    bad = 0
    for target, text in ((TARGET, schema_text()), (SWEEP_TARGET, sweep_schema_text()),
                         (SUMMARY, summary_schema_text()), (CALIBRATION, calibration_schema_text()),
                         (OBSERVATIONS, observations_schema_text())):
        if args.check:
            ok = target.exists() and target.read_text(encoding="utf-8") == text
            print(f"{target.relative_to(ROOT)}: {'up to date' if ok else 'OUT OF DATE: run python scripts/write_schema.py'}")
            bad += not ok
        else:
            target.write_text(text, encoding="utf-8")
            print(f"wrote {target.relative_to(ROOT)} ({len(text)} characters)")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
