"""Write docs/section.schema.json, the JSON Schema of the section-file format, from seepfe.schema.

Run after changing seepfe/schema.py:  python scripts/write_schema.py
(tests/test_schema_file.py fails while the committed file is out of date; ``--check`` does the same
from the command line and exits 1.)
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TARGET = ROOT / "docs" / "section.schema.json"


def schema_text() -> str:
    """The schema as the exact text to commit (sorted, indented, trailing newline)."""
    sys.path.insert(0, str(ROOT))
    from seepfe.schema import SectionSpec

    s = SectionSpec.model_json_schema(mode="validation")
    s = {"$schema": "https://json-schema.org/draft/2020-12/schema",
         "$id": "https://seepfe.invalid/section.schema.json",
         "description": "Section file of seepfe (steady seepage through and under levee and dam sections). "
                        "Lengths m, y is elevation (up); conductivities m/s; unit weights kN/m3; "
                        "fluxes m/s positive into the section; angles degrees counter-clockwise from +x. "
                        "See docs/format.md.",
         **{k: v for k, v in s.items() if k != "description"}}
    return json.dumps(s, indent=2, sort_keys=True, ensure_ascii=False) + "\n"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--check", action="store_true", help="exit 1 if the committed file is out of date")
    args = ap.parse_args(argv)
    text = schema_text()
    if args.check:
        ok = TARGET.exists() and TARGET.read_text(encoding="utf-8") == text
        print(f"{TARGET.relative_to(ROOT)}: {'up to date' if ok else 'OUT OF DATE: run python scripts/write_schema.py'}")
        return 0 if ok else 1
    TARGET.write_text(text, encoding="utf-8")
    print(f"wrote {TARGET.relative_to(ROOT)} ({len(text)} characters)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
