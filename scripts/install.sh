#!/usr/bin/env bash
# Install seepfe and everything it needs on a fresh Debian/Ubuntu machine (or any machine with Python >= 3.10).
#   bash scripts/install.sh           the package and its run-time dependencies
#   bash scripts/install.sh --test    also the test tools (pytest, hypothesis, scikit-fem, dask) and chromium
# System packages: the gmsh wheel links X11 and OpenGL client libraries (no X server or display is needed);
# they are installed with apt-get where missing and where we are root. Chromium renders the HTML report in
# one test.
set -euo pipefail
export PIP_ROOT_USER_ACTION=ignore
cd "$(dirname "$0")/.."
want_test=0
[ "${1:-}" = "--test" ] && want_test=1

PY=${PYTHON:-python3}
GMSH_LIBS="libglu1-mesa libgl1 libxrender1 libxcursor1 libxfixes3 libxext6 libxft2 libfontconfig1 libxinerama1 libx11-6 libgomp1"
missing=""
if command -v dpkg >/dev/null 2>&1; then
  for p in $GMSH_LIBS; do dpkg -s "$p" >/dev/null 2>&1 || missing="$missing $p"; done
  if [ "$want_test" = 1 ] && ! command -v chromium >/dev/null 2>&1; then missing="$missing chromium"; fi
fi
if [ -n "$missing" ]; then
  if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
    echo "installing system packages:$missing"
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends $missing >/dev/null
  else
    echo "warning: please install these system packages:$missing" >&2
  fi
fi

# a Python managed by the system (PEP 668) refuses pip installs outside a virtual environment
if [ -z "${VIRTUAL_ENV:-}" ] && "$PY" -c 'import sys, sysconfig, os; sys.exit(0 if os.path.exists(os.path.join(sysconfig.get_path("stdlib"), "EXTERNALLY-MANAGED")) else 1)'; then
  echo "error: $PY is managed by the system; make a virtual environment first:" >&2
  echo "  python3 -m venv .venv && . .venv/bin/activate && bash scripts/install.sh $*" >&2
  exit 1
fi

extras=""
[ "$want_test" = 1 ] && extras="[test,cluster]"
"$PY" -m pip install -q --disable-pip-version-check -e ".${extras}"
"$PY" -c "import gmsh, seepfe; print('seepfe', seepfe.__version__, 'with gmsh', gmsh.__version__, 'is installed')"
