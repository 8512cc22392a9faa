"""Write an analysed result to a folder: summary.json, nodes.csv, elements.csv, checks_*.csv, result.vtu.

Everything is written into a temporary sibling folder that is renamed into place only when complete,
so a failed run never leaves a half-written output folder.
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import tempfile
from pathlib import Path

import numpy as np

from .errors import SeepfeError

__all__ = ["atomic_dir", "write_analysis", "write_result", "write_csv", "write_json", "safe_name"]


@contextlib.contextmanager
def atomic_dir(out: str | os.PathLike):
    """Yield a temporary folder; on success it replaces ``out`` (only if ``out`` is a seepfe folder or
    empty), on failure it is removed and ``out`` is left as it was."""
    out = Path(out)
    if out.exists():
        if not out.is_dir():
            raise SeepfeError(f"{out}: exists and is not a folder")
        if any(out.iterdir()) and not (out / "summary.json").exists() and not (out / ".seepfe").exists():
            raise SeepfeError(f"{out}: folder exists, is not empty and was not written by seepfe; "
                              "choose another --out")
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", dir=out.parent))
    try:
        tmp.chmod(0o777 & ~_umask())     # mkdtemp makes it 0700; an output folder follows the user's umask
        (tmp / ".seepfe").write_text("written by seepfe\n")
        yield tmp
        if out.exists():
            old = out.with_name(f".{out.name}.old-{os.getpid()}")
            out.rename(old)
            tmp.rename(out)
            shutil.rmtree(old, ignore_errors=True)
        else:
            tmp.rename(out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


def _umask() -> int:
    m = os.umask(0o022)
    os.umask(m)
    return m


def write_csv(path: Path, columns: dict[str, np.ndarray], fmt: str = "%.10g") -> None:
    """Write named columns (header names carry units) to a CSV file."""
    names = list(columns)
    data = np.column_stack([np.asarray(columns[n], float) for n in names])
    np.savetxt(path, data, delimiter=",", header=",".join(names), comments="", fmt=fmt)


def _json_default(o):
    if isinstance(o, np.generic):
        return o.item()
    if isinstance(o, np.ndarray):
        return o.tolist()
    raise TypeError(type(o).__name__)


def write_json(path: Path, data: dict) -> None:
    path.write_text(json.dumps(data, indent=2, default=_json_default, allow_nan=True) + "\n")


def safe_name(name: str) -> str:
    """A boundary name as a file-name part."""
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)


def write_analysis(analysis, folder: Path, dxf: bool = False) -> list[str]:
    """summary.json (``analysis.to_dict()``), the field files and one checks_<boundary>.csv per exit
    surface into an existing folder (and lines.dxf with ``dxf``); returns the names written."""
    folder = Path(folder)
    write_json(folder / "summary.json", analysis.to_dict())
    write_result(analysis.result, folder)
    names = ["summary.json", "nodes.csv", "elements.csv", "result.vtu"]
    for name, ex in analysis.exits.items():
        f = f"checks_{safe_name(name)}.csv"
        ex.to_csv(folder / f, units=analysis.result.section.units)
        names.append(f)
    from .export import copy_inputs, write_lines
    names += write_lines(analysis, folder, dxf=dxf)
    names += copy_inputs(folder, analysis.result.section)
    return names


def write_result(result, folder: Path, summary: dict | None = None) -> None:
    """Write the field files (nodes.csv, elements.csv, result.vtu) of a result into an existing folder,
    and summary.json when ``summary`` is given."""
    import meshio

    m = result.mesh
    if summary is not None:
        write_json(folder / "summary.json", summary)
    from .units import display_columns
    units = result.section.units          # SI columns, then the same in the file's units where they differ
    write_csv(folder / "nodes.csv", display_columns({
        "node": np.arange(m.n_nodes), "x_m": m.points[:, 0], "y_m": m.points[:, 1],
        "total_head_m": result.h, "pressure_head_m": result.pressure_head,
        "pore_pressure_kPa": result.pore_pressure}, units))
    g, v = result.element_gradient, result.velocity
    c = m.points[m.triangles].mean(axis=1)
    write_csv(folder / "elements.csv", display_columns({
        "element": np.arange(m.n_elements), "zone": m.zone, "xc_m": c[:, 0], "yc_m": c[:, 1],
        "dh_dx_m_per_m": g[:, 0], "dh_dy_m_per_m": g[:, 1], "vx_m_s": v[:, 0], "vy_m_s": v[:, 1]}, units))
    ctype = "triangle" if m.order == 1 else "triangle6"
    pts3 = np.column_stack([m.points, np.zeros(m.n_nodes)])
    mesh = meshio.Mesh(
        pts3, [(ctype, m.cells)],
        point_data={"total_head_m": result.h, "pressure_head_m": result.pressure_head,
                    "pore_pressure_kPa": result.pore_pressure},
        cell_data={"zone": [m.zone.astype(np.int32)],
                   "head_gradient_m_per_m": [np.column_stack([g, np.zeros(len(g))])],
                   "darcy_velocity_m_s": [np.column_stack([v, np.zeros(len(v))])]})
    mesh.write(folder / "result.vtu")
