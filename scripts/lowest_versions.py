"""Print pip constraints that pin every run-time dependency of pyproject.toml to its declared lower bound.

    python scripts/lowest_versions.py > constraints.txt
    pip install -c constraints.txt -e ".[test]"

Used by scripts/test_lowest.sh (and CI) to check that the lower bounds we declare really work.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def lower_bounds(text: str) -> dict[str, str]:
    """{name: version} of every 'name>=version' in [project] dependencies."""
    m = re.search(r"^dependencies\s*=\s*\[(.*?)^\]", text, flags=re.S | re.M)
    if not m:
        raise SystemExit("pyproject.toml: no [project] dependencies list")
    out = {}
    for req in re.findall(r'"([^"]+)"', m.group(1)):
        b = re.match(r"^\s*([A-Za-z0-9_.-]+)(\[[^\]]*\])?\s*>=\s*([0-9][0-9A-Za-z.]*)", req)
        if b:
            out[b.group(1)] = b.group(3)
    return out


def main() -> int:
    for name, v in lower_bounds((ROOT / "pyproject.toml").read_text(encoding="utf-8")).items():
        print(f"{name}=={v}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
