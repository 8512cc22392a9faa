#!/usr/bin/env bash
# Run the test suite with every run-time dependency at the lower bound pyproject.toml declares, in a
# throwaway virtual environment (the system packages come from scripts/install.sh, run first).
#   bash scripts/test_lowest.sh            quick tests (what CI runs)
#   bash scripts/test_lowest.sh -m slow    any pytest arguments
set -euo pipefail
export PIP_ROOT_USER_ACTION=ignore PIP_DISABLE_PIP_VERSION_CHECK=1
cd "$(dirname "$0")/.."
PY=${PYTHON:-python3}
VENV=${LOWEST_VENV:-$(mktemp -d)/venv}
"$PY" -m venv "$VENV"
"$PY" scripts/lowest_versions.py > "$VENV/constraints.txt"
echo "lowest declared versions: $(tr '\n' ' ' < "$VENV/constraints.txt")"
"$VENV/bin/python" -m pip install -q -c "$VENV/constraints.txt" -e ".[test]"
"$VENV/bin/python" -c "import gmsh, numpy, scipy, seepfe; print('installed: gmsh', gmsh.__version__, 'numpy', numpy.__version__, 'scipy', scipy.__version__)"
# the committed JSON Schemas are the text the newest pydantic writes; older ones word a few keys differently
"$VENV/bin/python" -m pytest -q -p no:cacheprovider -W ignore::DeprecationWarning \
  --deselect tests/test_schema_file.py::test_committed_schema_is_up_to_date \
  --deselect tests/test_schema_file.py::test_committed_sweep_schema_is_up_to_date \
  --deselect tests/test_analysis.py::test_summary_schema_file_is_generated_from_the_code \
  --deselect tests/test_calibration.py::test_committed_calibration_schemas_are_up_to_date "$@"
