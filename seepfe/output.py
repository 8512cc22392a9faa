"""Write an analysed result to a folder: summary.json, nodes.csv, elements.csv, checks_*.csv, result.vtu;
and the one CSV writer.

Output folders (``atomic_dir``)
    Everything is written into a temporary sibling folder that is renamed into place only when
    complete, so a failed run never leaves a half-written output folder.  The finished folder holds a
    manifest, ``.seepfe``: every file seepfe wrote there, with its size and sha256.  An existing
    ``--out`` folder is replaced only when it is empty, or when its manifest lists every entry in it
    and each listed file is still what seepfe wrote.  Anything else (a folder seepfe did not write, a
    file added or edited by hand, the section file itself) is refused with one line naming the first
    such entry, and nothing is deleted.  There is deliberately no option to replace a folder anyway:
    move the files out, or choose another ``--out``.

    Temporary and replaced folders are named ``.<name>.seepfe-tmp-<host>-<pid>-<token>`` and
    ``.<name>.seepfe-old-<host>-<pid>-<token>``; a run killed outright (SIGKILL, power loss) leaves
    one behind, and the next run into the same folder removes those whose process is gone.  Folders
    are made with ``os.mkdir`` and so follow the user's umask (a checking engineer can open them).

CSV
    Every CSV file goes through :mod:`seepfe.csvfile` (re-exported here as ``write_csv`` and
    ``write_table``): numbers stay numbers, text a spreadsheet would read as a formula is neutralised.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import secrets
import shutil
import socket
import stat
from pathlib import Path

import numpy as np

from .csvfile import csv_cell, write_csv, write_table
from .errors import SeepfeError
from .text import one_line

__all__ = ["atomic_dir", "add_to_manifest", "check_out", "check_replaceable", "write_analysis", "write_result",
           "write_csv", "write_table", "csv_cell", "write_json", "safe_name", "MANIFEST"]

#: manifest of a folder seepfe wrote (JSON: the files and their sha256)
MANIFEST = ".seepfe"
_TMP, _OLD = "seepfe-tmp", "seepfe-old"
_HOST = hashlib.sha256(socket.gethostname().encode("utf-8", "replace")).hexdigest()[:8]
#: manifests larger than this are not a seepfe manifest
_MANIFEST_CAP = 32 * 1024 * 1024


# ---------------------------------------------------------------------------- output folders
def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _entries(folder: Path) -> tuple[list[str], list[str], list[str]]:
    """(files, folders, others) under folder, as '/'-joined relative paths; symlinks and special files
    are 'others' (seepfe never writes them)."""
    files, dirs, others = [], [], []
    for root, dnames, fnames in os.walk(folder, followlinks=False):
        rel = Path(root).relative_to(folder)
        for d in list(dnames):
            p = Path(root) / d
            r = (rel / d).as_posix()
            if p.is_symlink():
                others.append(r)
                dnames.remove(d)
            else:
                dirs.append(r)
        for f in fnames:
            p = Path(root) / f
            r = (rel / f).as_posix()
            st = os.lstat(p)
            (files if stat.S_ISREG(st.st_mode) else others).append(r)
    return sorted(files), sorted(dirs), sorted(others)


def _write_manifest(folder: Path) -> None:
    from .about import __version__
    files, dirs, _ = _entries(folder)
    listed = {f: {"bytes": (folder / f).stat().st_size, "sha256": _sha256(folder / f)}
              for f in files if f != MANIFEST}
    doc = {"written_by": "seepfe", "seepfe_version": __version__,
           "note": "the files seepfe wrote in this folder; seepfe replaces the folder only while it holds "
                   "exactly these (unchanged) and nothing else",
           "folders": dirs, "files": listed}
    (folder / MANIFEST).write_text(json.dumps(doc, indent=1) + "\n", encoding="utf-8")


def add_to_manifest(folder: str | os.PathLike, *names: str) -> None:
    """List files seepfe has just added to a finished folder (``names`` relative to it) in its manifest, so
    the next run may replace the folder with them (a report written beside a sweep's results, say)."""
    folder = Path(folder)
    doc = _read_manifest(folder)
    if doc is None:
        return
    for n in names:
        p = folder / n
        if p.is_file() and not p.is_symlink():
            doc["files"][Path(n).as_posix()] = {"bytes": p.stat().st_size, "sha256": _sha256(p)}
    (folder / MANIFEST).write_text(json.dumps(doc, indent=1) + "\n", encoding="utf-8")


def _read_manifest(folder: Path) -> dict | None:
    p = folder / MANIFEST
    try:
        if not p.is_file() or p.is_symlink() or p.stat().st_size > _MANIFEST_CAP:
            return None
        doc = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not (isinstance(doc, dict) and doc.get("written_by") == "seepfe" and isinstance(doc.get("files"), dict)
            and isinstance(doc.get("folders", []), list)):
        return None
    return doc


def _is_cwd_or_above(path: Path) -> bool:
    try:
        here = Path.cwd().resolve()
    except OSError:
        return False
    p = path.resolve()
    return p == here or p in here.parents


def check_replaceable(out: str | os.PathLike, what: str = "--out") -> None:
    """Raise a one-line SeepfeError unless ``out`` may be replaced whole: it does not exist, is an empty
    folder, or is a folder seepfe wrote that holds only the files seepfe wrote there, unchanged."""
    out = Path(out)
    if str(out) in ("", "."):
        out = Path.cwd()
    if _is_cwd_or_above(out):
        raise SeepfeError(f"{out}: {what} is the current folder or holds it; give a new folder for the results")
    if out.is_symlink():
        raise SeepfeError(f"{out}: {what} is a symbolic link; give the folder itself or another {what}")
    if not out.exists():
        return
    if not out.is_dir():
        raise SeepfeError(f"{out}: {what} exists and is a file, not a folder; choose another {what}")
    try:
        files, dirs, others = _entries(out)
    except OSError as e:
        raise SeepfeError(f"{out}: cannot list the folder ({e.strerror or e})") from None
    if not files and not dirs and not others:
        return
    doc = _read_manifest(out)
    if doc is None:
        try:
            legacy = (out / MANIFEST).is_file() and (out / MANIFEST).stat().st_size < 100 and \
                (out / MANIFEST).read_text(errors="replace").startswith("written by seepfe")
        except OSError:
            legacy = False
        first = one_line(next(iter([r for r in others + files + dirs if r != MANIFEST]), MANIFEST))
        why = ("was written by an earlier seepfe that kept no list of its files (delete it yourself if it holds "
               "nothing of yours)" if legacy else f"was not written by seepfe (it holds '{first}')")
        raise SeepfeError(f"{out}: {what} exists and {why}; nothing was deleted: move your files out or "
                          f"choose another {what}")
    listed, folders = doc["files"], set(doc.get("folders", []))
    for r in others:
        raise SeepfeError(f"{out}: {what} holds '{one_line(r)}', which seepfe did not write; nothing was deleted: "
                          f"move it out or choose another {what}")
    for r in files:
        if r == MANIFEST:
            continue
        meta = listed.get(r)
        if not isinstance(meta, dict):
            raise SeepfeError(f"{out}: {what} holds '{one_line(r)}', which seepfe did not write; nothing was "
                              f"deleted: move it out or choose another {what}")
        p = out / r
        try:
            same = p.stat().st_size == meta.get("bytes") and _sha256(p) == meta.get("sha256")
        except OSError:
            same = False
        if not same:
            raise SeepfeError(f"{out}: '{one_line(r)}' in {what} was changed since seepfe wrote it; nothing was "
                              f"deleted: move it out or choose another {what}")
    for r in dirs:
        if r not in folders:
            raise SeepfeError(f"{out}: {what} holds the folder '{one_line(r)}', which seepfe did not make; "
                              f"nothing was deleted: move it out or choose another {what}")


def _probe_writable(folder: Path, what: str) -> None:
    """Raise a one-line SeepfeError unless a folder can be made in ``folder`` (or its nearest existing parent)."""
    p = folder
    while not p.exists() and not p.is_symlink() and p != p.parent:
        p = p.parent
    if not p.is_dir():
        raise SeepfeError(f"{folder}: cannot make {what} there: '{p}' is a file, not a folder")
    probe = p / f".seepfe-probe-{os.getpid()}-{secrets.token_hex(4)}"
    try:
        os.mkdir(probe)
        os.rmdir(probe)
    except OSError as e:
        raise SeepfeError(f"{folder}: cannot write {what} there ({e.strerror or e} in '{p}')") from None


def check_out(out: str | os.PathLike, what: str = "--out") -> None:
    """Everything that can be known about a results folder before a long solve: it is not the current
    folder, it may be replaced, and it can be written.  One-line SeepfeError otherwise.  (A sweep folder:
    :func:`seepfe.sweep.api.check_sweep_folder`.)"""
    out = Path(out)
    if not str(out).strip():
        raise SeepfeError(f"{what}: empty folder name")
    check_replaceable(out, what)
    _probe_writable(out.absolute().parent, what)


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OSError):
        return True
    return True


def _clean_stale(parent: Path, name: str) -> None:
    """Remove temporary and replaced folders of ``name`` left by seepfe runs that were killed outright
    (their process is gone; same host only; each holds a seepfe marker)."""
    try:
        entries = list(parent.iterdir())
    except OSError:
        return
    for p in entries:
        n = p.name
        for tag in (_TMP, _OLD):
            head = f".{name}.{tag}-{_HOST}-"
            if not n.startswith(head):
                continue
            pid = n[len(head):].split("-", 1)[0]
            if not pid.isdigit() or _pid_alive(int(pid)) or p.is_symlink() or not p.is_dir():
                continue
            if (p / MANIFEST).is_file():
                shutil.rmtree(p, ignore_errors=True)


def _sibling(parent: Path, name: str, tag: str) -> Path:
    return parent / f".{name}.{tag}-{_HOST}-{os.getpid()}-{secrets.token_hex(4)}"


@contextlib.contextmanager
def atomic_dir(out: str | os.PathLike):
    """Yield a temporary folder; on success it replaces ``out`` (only an empty folder, or one seepfe wrote
    holding nothing else: see the module docstring), on failure it is removed and ``out`` is left as it was."""
    out = Path(out)
    check_replaceable(out)
    out = out.absolute()
    parent = out.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)      # os.mkdir: the user's umask applies
    except OSError as e:
        raise SeepfeError(f"{out}: cannot make the folder ({e.strerror or e})") from None
    _clean_stale(parent, out.name)
    tmp = _sibling(parent, out.name, _TMP)
    try:
        os.mkdir(tmp)
    except OSError as e:
        raise SeepfeError(f"{out}: cannot write beside it ({e.strerror or e})") from None
    try:
        (tmp / MANIFEST).write_text('{"written_by": "seepfe", "partial": true, "files": {}}\n')
        yield tmp
        _write_manifest(tmp)
        if out.exists() or out.is_symlink():
            check_replaceable(out)                      # again: a file may have been added meanwhile
            old = _sibling(parent, out.name, _OLD)
            out.rename(old)
            try:
                tmp.rename(out)
            except BaseException:
                old.rename(out)
                raise
            shutil.rmtree(old, ignore_errors=True)
        else:
            tmp.rename(out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


# ---------------------------------------------------------------------------- JSON, result files
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
