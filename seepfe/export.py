"""Results out to other tools: the phreatic line, flow lines and equipotentials as CSV, GeoJSON and DXF;
the input files beside the results; the versions a run depends on.

* :func:`result_lines` (analysis) -> the lines, in m.
* :func:`write_lines` (analysis, folder) -> ``phreatic_line.csv``, ``flow_lines.csv``,
  ``equipotentials.csv`` (SI columns, plus the same in the file's units when they differ),
  ``lines.geojson`` and ``lines.dxf`` (coordinates in the section file's length unit, so they
  overlay the engineer's drawing; GeoJSON's coordinates here are section coordinates, station and
  elevation, not longitude and latitude).
* :func:`copy_inputs` (folder, section, more files) -> ``input/``: the files as read.
* :func:`provenance` -> the versions of seepfe, gmsh, numpy, scipy and Python (the same section file
  meshes identically only within one gmsh version).

The lines are contoured on the linear sub-triangles of the mesh (:func:`seepfe.phreatic.phreatic_lines`),
with no Python loop over elements: the phreatic line at pressure head 0, the equipotentials at the flow
net's heads, the flow lines at its stream-function values (:mod:`seepfe.flownet`).
"""

from __future__ import annotations

import hashlib
import json
import platform
import sys
from pathlib import Path

import numpy as np

from .about import CAUTION, __version__

__all__ = ["result_lines", "write_lines", "copy_inputs", "provenance", "LINE_FILES"]

LINE_FILES = ["phreatic_line.csv", "flow_lines.csv", "equipotentials.csv", "lines.geojson"]


def provenance() -> dict:
    """Versions of what a result depends on: {"seepfe", "gmsh", "numpy", "scipy", "python"} (strings).

    gmsh's version is read from the loaded module when it is loaded, else from the installed
    package's metadata (no need to load the mesher to ask). A mesh is reproducible only within one
    gmsh version.
    """
    import scipy
    out = {"seepfe": __version__, "gmsh": _version("gmsh"), "numpy": np.__version__, "scipy": scipy.__version__,
           "python": platform.python_version()}
    return out


def _version(name: str) -> str:
    mod = sys.modules.get(name)
    if mod is not None and isinstance(getattr(mod, "__version__", None), str):
        return mod.__version__
    try:
        from importlib.metadata import PackageNotFoundError, version
        return version(name)
    except PackageNotFoundError:
        return "not installed"


# --------------------------------------------------------------------------- lines
def _isolines(mesh, field: np.ndarray, level: float) -> list[np.ndarray]:
    from .phreatic import phreatic_lines
    return phreatic_lines(mesh, np.asarray(field, float) - level)


def result_lines(analysis) -> dict:
    """{"phreatic_line": [...], "flow_lines": [...], "equipotentials": [...]}; each item
    {"value": float, "points": (n, 2) array in m}. Values: pressure head 0 (m); stream function from
    its minimum (m3/s per m); total head (m)."""
    r = analysis.result
    net = analysis.flow_net
    out = {"phreatic_line": [{"value": 0.0, "points": p} for p in r.phreatic_lines() if len(p) >= 2],
           "flow_lines": [], "equipotentials": []}
    for v in net.flow_line_levels:
        out["flow_lines"] += [{"value": float(v), "points": p} for p in _isolines(r.mesh, net.psi, v) if len(p) >= 2]
    for v in net.equipotential_levels:
        out["equipotentials"] += [{"value": float(v), "points": p} for p in _isolines(r.mesh, r.h, v) if len(p) >= 2]
    return out


_VALUE = {"phreatic_line": ("pressure_head_m", "length"),
          "flow_lines": ("flow_from_lowest_m3_s_per_m", "flow"),
          "equipotentials": ("total_head_m", "length")}


def _write_csv(path: Path, columns: dict) -> None:
    """Named columns (names carry units) as CSV, through seepfe's one CSV writer (seepfe.csvfile)."""
    from .csvfile import write_csv
    write_csv(path, columns)


def _csv(path: Path, items: list, value_col: str, dim: str, units) -> None:
    from .units import SI, display_columns
    rows = [(i, it["value"], it["points"]) for i, it in enumerate(items)]
    pts = np.vstack([p for _, _, p in rows]) if rows else np.empty((0, 2))
    line = np.concatenate([np.full(len(p), i) for i, _, p in rows]) if rows else np.empty(0)
    val = np.concatenate([np.full(len(p), v) for _, v, p in rows]) if rows else np.empty(0)
    cols = {"line": line, value_col: val, "x_m": pts[:, 0], "y_m": pts[:, 1]}
    _write_csv(path, display_columns(cols, units if units is not None else SI))


def write_lines(analysis, folder, units=None, dxf: bool = False) -> list[str]:
    """The phreatic line, flow lines and equipotentials as CSV and GeoJSON (and DXF with ``dxf``: about a
    second more, for a CAD drawing) into an existing folder; returns the names written. ``units``: the
    file's (default: the section's)."""
    folder = Path(folder)
    units = units if units is not None else analysis.result.section.units
    lines = result_lines(analysis)
    for kind, fname in (("phreatic_line", "phreatic_line.csv"), ("flow_lines", "flow_lines.csv"),
                        ("equipotentials", "equipotentials.csv")):
        col, dim = _VALUE[kind]
        _csv(folder / fname, lines[kind], col, dim, units)
    L = units.factor("length")
    feats = []
    for kind, items in lines.items():
        col, dim = _VALUE[kind]
        for i, it in enumerate(items):
            feats.append({"type": "Feature",
                          "properties": {"kind": kind, "line": i, col: it["value"],
                                         **({f"value_{units.label(dim)}": it["value"] / units.factor(dim)}
                                            if units.factor(dim) != 1.0 else {})},
                          "geometry": {"type": "LineString",
                                       "coordinates": np.round(np.asarray(it["points"], dtype=float) / L, 6).tolist()}})
    net = analysis.flow_net
    gj = {"type": "FeatureCollection",
          "title": analysis.result.section.title,
          "coordinates": f"section coordinates (station x, elevation y) in {units.length}, not geographic",
          "length_unit": units.length, "input_sha256": analysis.result.section.input_hash,
          "flow_net": {"head_drop_m": net.dh, "flow_per_channel_m3_s_per_m": net.dpsi},
          "caution": CAUTION, "features": feats}
    (folder / "lines.geojson").write_text(json.dumps(gj, indent=1) + "\n", encoding="utf-8")
    if not dxf:
        return list(LINE_FILES)
    from .dxf import write_lines_dxf
    write_lines_dxf(folder / "lines.dxf", {"phreatic line": [it["points"] / L for it in lines["phreatic_line"]],
                                           "flow lines": [it["points"] / L for it in lines["flow_lines"]],
                                           "equipotentials": [it["points"] / L for it in lines["equipotentials"]]},
                    units.length)
    return list(LINE_FILES) + ["lines.dxf"]


# --------------------------------------------------------------------------- inputs
def input_bytes(section) -> tuple[str, bytes]:
    """The section file as read: (file name, bytes). Byte for byte when the file still has the content the
    run was made with; otherwise (changed since, or given as a dict) the data the run used, as JSON."""
    from .jsonin import MAX_INPUT_BYTES
    from .section import _hash
    src = Path(section.source)
    name = src.name if section.source not in ("<dict>", "") and src.suffix else "section.json"
    try:
        if src.is_file() and src.stat().st_size <= MAX_INPUT_BYTES:
            raw = src.read_bytes()
            if _hash(json.loads(raw.decode("utf-8-sig"))) == section.input_hash:
                return name, raw
    except (OSError, ValueError):
        pass
    return name, (json.dumps(section.data, indent=2, ensure_ascii=False) + "\n").encode("utf-8")


def copy_inputs(folder, section, more: dict | None = None) -> list[str]:
    """Copy the section file (and ``more``: {name in input/: path or dict}) into ``folder/input/`` as read;
    returns the names written (relative to folder).

    The section file is copied byte for byte when its content still has the hash the run was made with;
    otherwise (changed since, or given as a dict) the data the run used is written as JSON.
    """
    folder = Path(folder)
    (folder / "input").mkdir(exist_ok=True)
    written = []
    name, raw = input_bytes(section)
    (folder / "input" / name).write_bytes(raw)
    written.append(f"input/{name}")
    for n, v in (more or {}).items():
        if isinstance(v, dict):
            data = (json.dumps(v, indent=2, ensure_ascii=False) + "\n").encode("utf-8")
        else:
            from .jsonin import read_bytes
            data = read_bytes(v, "copy of an input file")
        (folder / "input" / n).write_bytes(data)
        written.append(f"input/{n}")
    digest = {w: hashlib.sha256((folder / w).read_bytes()).hexdigest() for w in written}
    (folder / "input" / "sha256.txt").write_text("".join(f"{h}  {Path(w).name}\n" for w, h in digest.items()))
    return written + ["input/sha256.txt"]
