"""``run_sweep``: cases, target searches and fragility of one section, written to one folder.

Folder layout (``out``)::

    out/.seepfe-sweep      marker: this folder belongs to a sweep; locked while a sweep runs into it
    out/cases/<hash>.json  one finished case each (the resumable cache; filled while the sweep runs)
    out/results/           the final files, written all at once when everything is solved:
        table.csv, sweep.json, vs_<key>.png|svg, profiles_<boundary>.png|svg,
        targets.csv, target_<name>.png|svg, fragility.csv, fragility_samples.csv, fragility.png|svg

``results/`` is replaced whole on success (never half-written); ``cases/`` is the one exception by
design: it holds whatever finished, so an interrupted sweep loses nothing and a rerun solves only the
cases whose resolved input changed.

One sweep at a time: a second sweep into a folder that a running sweep holds is refused with one
line (an advisory ``flock`` on the marker, released by the system when the process ends however it
ends, so a killed sweep never leaves a stale lock).
"""

from __future__ import annotations

import contextlib
import math
import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Optional

import numpy as np
from shapely.geometry import Point

from ..about import CAUTION
from ..errors import SeepfeError
from ..records import UNITS
from ..section import load_section
from .case import case_hash, from_json_float
from .fragility import material_overrides, probabilities, sample_conductivities
from .runner import Runner
from .spec import SweepSpec, expand_cases, load_sweep, sweep_units, to_file_units
from .target import Stopped, quantity_of, search
from .values import unit_and_factor, unit_suffix, with_values

__all__ = ["run_sweep", "SweepReport", "MARKER"]

MARKER = ".seepfe-sweep"
#: the table's governing columns <- the keys of the record's governing block (summary.json's "governing")
GOVERNING = {"fs": "fs", "fs_mode": "mode", "fs_boundary": "boundary", "fs_x_m": "x_m",
             "top_stratum_thickness_m": "top_stratum_thickness_m", "exit_gradient_max": "exit_gradient_max",
             "exit_gradient_x_m": "exit_gradient_x_m", "exit_gradient_boundary": "exit_gradient_boundary",
             "fails_within_m_of_toe": "fails_within_m_of_toe", "failing_length_m": "failing_length_m", "verdict": "verdict", "why": "why"}
_TEXT = ("fs_mode", "fs_boundary", "exit_gradient_boundary", "verdict", "why")
#: the table's columns of a case under a hydrograph (issue 14) <- the keys of the record's "transient" block
TRANSIENT = {"least_fs_time_s": "least_fs_time_s", "lag_after_crest_s": "lag_after_crest_s",
             "peak_toe_head_m": "peak_toe_head_m", "peak_toe_head_time_s": "peak_toe_head_time_s"}


@dataclass
class SweepReport:
    """What a sweep produced.  ``complete`` is False when a solve budget stopped it early."""

    complete: bool
    columns: list = field(default_factory=list)
    table: list = field(default_factory=list)
    targets: list = field(default_factory=list)
    fragility: Optional[dict] = None
    solved: int = 0
    cached: int = 0
    cases: int = 0
    backend: str = ""
    fs_method: str = ""
    fs_required: float = math.nan
    results_dir: Optional[Path] = None
    files: list = field(default_factory=list)
    wall_s: float = 0.0
    warnings: list = field(default_factory=list)
    failed: int = 0            # cases that ended in an error (counted once each)


def check_sweep_folder(out: Path) -> None:
    """One-line SeepfeError unless ``out`` can be a sweep folder: absent, empty, or a sweep folder whose
    ``results/`` seepfe may replace and whose ``cases/`` is a folder; and writable.  Nothing is written."""
    from ..output import _probe_writable, check_replaceable
    out = Path(out)
    if out.exists() or out.is_symlink():
        if not out.is_dir():
            raise SeepfeError(f"{out}: exists and is not a folder; choose another --out")
        if any(out.iterdir()) and not (out / MARKER).is_file():
            raise SeepfeError(f"{out}: folder exists, is not empty and is not a seepfe sweep folder; "
                              "nothing was changed: choose another --out")
        check_replaceable(out / "results", what="the sweep's results/ folder")
        cases = out / "cases"
        if cases.exists() and not cases.is_dir():
            raise SeepfeError(f"{cases}: the case cache must be a folder, and this is a file; move it away")
        _probe_writable(out, "the sweep folder")
    else:
        _probe_writable(out.absolute().parent, "the sweep folder")


def _prepare_out(out: Path) -> None:
    check_sweep_folder(out)
    try:
        out.mkdir(parents=True, exist_ok=True)
        if not (out / MARKER).is_file():
            (out / MARKER).write_text("seepfe sweep folder: cases/ is the resumable cache, results/ the final files\n")
    except OSError as e:
        raise SeepfeError(f"{out}: cannot write the sweep folder ({e.strerror or e})") from None


@contextlib.contextmanager
def _locked(out: Path):
    """Hold the sweep folder for this process: a second sweep into it is refused with one line."""
    try:
        import fcntl
    except ImportError:                   # pragma: no cover - not POSIX: no lock
        yield
        return
    fh = open(out / MARKER, "a")
    try:
        try:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            raise SeepfeError(f"{out}: another seepfe sweep is writing to this folder now; wait for it to finish "
                              "or choose another --out") from None
        yield
    finally:
        fh.close()                        # closing the file releases the lock


def _transient_columns(recs: list, rows: list) -> list[str]:
    """The transient columns of the table (cases under a hydrograph): SI, then the times again in the
    hydrograph's unit (hour or day); the rows get the latter added. [] when no case has a hydrograph."""
    units = [r["transient"].get("time_unit") for r in recs if r and r.get("transient")]
    if not units:
        return []
    from ..hydrograph import TIME_UNITS, time_label
    u = units[0]
    extra = []
    for col in ("least_fs_time_s", "lag_after_crest_s", "peak_toe_head_time_s"):
        new = f"{col[:-2]}_{time_label(u)}"
        extra.append(new)
        for r in rows:
            r[new] = r.get(col, math.nan) / TIME_UNITS[u]
    for r in rows:
        for col in TRANSIENT:
            r.setdefault(col, math.nan)
    return list(TRANSIENT) + extra


def _row(index, varied, params: dict, columns: dict, rec: dict, h: str, fs_required: float,
         flow_names: list, point_names: list) -> dict:
    r = {"case": index, "varied": varied}
    for k, col in columns.items():
        r[col] = float(params.get(k, math.nan))
    r["status"] = rec.get("status", "")
    fl = rec.get("flows_m3_s_per_m", {})
    for b in flow_names:
        r[f"flow_{b}_m3_s_per_m"] = float(fl.get(b, math.nan))
    hd = rec.get("heads_m", {})
    for p in point_names:
        r[f"head_{p}_m"] = from_json_float(hd.get(p))
    g = rec.get("governing") or {}
    for col, key in GOVERNING.items():
        v = g.get(key)
        r[col] = (v if v is not None else "") if col in _TEXT else from_json_float(v)
    if not g:
        r["verdict"], r["why"] = "not checked", rec.get("status", "")
    tr = rec.get("transient")
    if tr is not None:
        for col, key in TRANSIENT.items():
            r[col] = from_json_float(tr.get(key))
    r["fs_required"] = fs_required
    r["nodes"] = rec.get("nodes", 0)
    r["hash"] = h[:16]
    return r


def run_sweep(section, sweep, out=None, *, workers: Optional[int] = None, scheduler=None,
              progress: Optional[Callable[[str, int, int, int], None]] = None,
              max_solves: Optional[int] = None, solve: Optional[dict] = None, plots: bool = True,
              runner: Optional[Runner] = None) -> SweepReport:
    """Run the sweep file ``sweep`` on the section ``section``.

    Parameters
    ----------
    section : path or dict of the section file.
    sweep : path or dict of the sweep file (see ``docs/sweeps.md``).
    out : folder for the case cache and the results (None: keep nothing on disk).
    workers : local processes (default: all usable cores; 1 = in this process).
    scheduler : Dask scheduler address ``tcp://host:port`` or a ``distributed.Client``.
    progress : ``progress(stage, done, total, cached)``; stage is "cases", "target <name>" or "fragility".
    max_solves : solve at most this many new cases, then stop (``complete`` is False; run again to go on).
    solve : solve options overriding the sweep file's ``solve`` block (order, size, linear).
    """
    t0 = time.perf_counter()
    sec = load_section(section)
    data, label = sec.data, sec.source
    spec, slabel = load_sweep(sweep)
    fu = sec.units
    su = sweep_units(spec, fu, slabel)
    # the sweep's element size and probe points in SI (solve options given in Python are SI already)
    sopts = {k: v for k, v in spec.solve.model_dump().items() if v is not None}
    if "size" in sopts:
        sopts["size"] = su.to_si(sopts["size"], "length")
    sopts = {**sopts, **{k: v for k, v in (solve or {}).items() if v is not None}}
    if spec.exit is not None:
        for nm in spec.exit:
            if nm not in sec.boundary_names:
                raise SeepfeError(f"{slabel}: exit: no boundary named '{nm}' in {label} "
                                  f"(known: {', '.join(sec.boundary_names)})")
    points = {k: [su.to_si(float(v[0]), "length"), su.to_si(float(v[1]), "length")] for k, v in spec.points.items()}
    for k, p in points.items():
        if not sec.outline.buffer(sec.length_tol).contains(Point(p)):
            v = spec.points[k]
            raise SeepfeError(f"{slabel}: points.{k}: ({v[0]:g}, {v[1]:g}) {su.length} is outside the section")
    crit = sec.spec.checks.criteria
    fs_required = spec.criterion.fs if spec.criterion.fs is not None else max(crit.fs_heave, crit.fs_uplift)
    criteria = None if spec.criterion.fs is None else {"fs_heave": spec.criterion.fs, "fs_uplift": spec.criterion.fs}
    out = Path(out) if out is not None else None
    with contextlib.ExitStack() as stack:
        if out is not None:
            _prepare_out(out)
            stack.enter_context(_locked(out))
        return _run(sec=sec, data=data, label=label, spec=spec, slabel=slabel, sopts=sopts, points=points,
                    fs_required=fs_required, criteria=criteria, out=out, workers=workers, scheduler=scheduler,
                    progress=progress, max_solves=max_solves, plots=plots, runner=runner, t0=t0, fu=fu, su=su,
                    sweep=sweep)


def _run(*, sec, data, label, spec, slabel, sopts, points, fs_required, criteria, out, workers, scheduler, progress,
         max_solves, plots, runner, t0, fu, su, sweep) -> SweepReport:
    """The body of :func:`run_sweep`, with the sweep folder prepared and held."""
    own = runner is None
    if own:
        runner = Runner(cache_dir=(out / "cases") if out is not None else None, workers=workers,
                        scheduler=scheduler, max_solves=max_solves)
    rep = SweepReport(complete=True, backend=runner.backend, fs_required=fs_required)
    failed: set = set()

    def payload(section_dict: dict) -> dict:
        if criteria is not None:       # the sweep's criterion is the cases' criteria: one verdict
            section_dict = dict(section_dict)
            checks = dict(section_dict.get("checks") or {})
            checks["criteria"] = {**(checks.get("criteria") or {}), **criteria}
            section_dict["checks"] = checks
        return {"section": section_dict, "solve": sopts, "points": points, "exit": spec.exit}

    offsets: dict[str, tuple[int, int]] = {}

    def run(stage: str, payloads: list[dict]) -> list:
        od, on = offsets.get(stage, (0, 0))
        seen = {}
        cb = None
        if progress:
            def cb(d, n, c):
                seen["n"] = n
                progress(stage, od + d, on + n, c)
        recs = runner.run(payloads, cb)
        offsets[stage] = (od + seen.get("n", 0), on + seen.get("n", 0))
        rep.solved += runner.solved
        rep.cached += runner.cached
        hashes = [case_hash(p) for p in payloads]
        rep.cases += len(set(hashes))
        failed.update(h for h, r in zip(hashes, recs) if r is not None and r.get("status", "").startswith("error"))
        return recs

    try:
        # ------------------------------------------------------------ table
        table_rows, columns, flow_names, point_names = [], {}, [], list(points)
        profiles: dict[str, list] = {}
        if spec.vary:
            cases, columns = expand_cases(spec, data, slabel)
            pls = [payload(c.section) for c in cases]
            recs = run("cases", pls)
            if any(r is None for r in recs):
                raise Stopped()
            for r in recs:
                for b in r.get("flows_m3_s_per_m", {}):
                    if b not in flow_names:
                        flow_names.append(b)
            for c, p, r in zip(cases, pls, recs):
                table_rows.append(_row(c.index, c.varied, c.params, columns, r, case_hash(p), fs_required,
                                       flow_names, point_names))
                for b, prof in (r.get("exit") or {}).items():
                    if c.varied == "grid":
                        profiles.setdefault((b, ""), []).append((float(c.index), prof))
                    else:
                        profiles.setdefault((b, c.varied), []).append((c.params[c.varied], prof))
        tcols = _transient_columns(recs, table_rows) if spec.vary else []
        rep.columns = (["case", "varied"] + list(columns.values()) + ["status"]
                       + [f"flow_{b}_m3_s_per_m" for b in flow_names] + [f"head_{p}_m" for p in point_names]
                       + list(GOVERNING) + tcols + ["fs_required", "nodes", "hash"]) if spec.vary else []
        rep.table = table_rows

        # ------------------------------------------------------------ targets
        width = runner.workers if scheduler is None and runner.scheduler is None else max(2, workers or 2)
        fixed = to_file_units(data, spec.fixed, su, slabel)
        for t in spec.targets:
            tname = t.name or t.parameter
            try:
                unit, tf = unit_and_factor(data, t.parameter, t.unit, su, fu, slabel)
                tfixed = to_file_units(data, t.fixed, su, slabel)
            except SeepfeError as e:
                raise SeepfeError(f"{e} (target '{tname}')") from None
            if unit is None:
                raise SeepfeError(f"{slabel}: target '{tname}': cannot tell the unit of '{t.parameter}'; "
                                  "add \"unit\"")

            def evaluate(xs, t=t, tname=tname, tf=tf, tfixed=tfixed):
                pls = []
                for x in xs:
                    try:
                        pls.append(payload(with_values(data, {**fixed, **tfixed, t.parameter: float(x) * tf},
                                                       label)))
                    except SeepfeError as e:
                        raise SeepfeError(f"{slabel}: target '{tname}': {e}") from None
                recs = run(f"target {tname}", pls)
                return recs

            res = search(t, evaluate, width, fs_required)
            res["unit"] = unit
            rep.targets.append(res)

        # ------------------------------------------------------------ fragility
        if spec.fragility is not None:
            fr = spec.fragility
            crit = fr.criterion if fr.criterion is not None else fs_required
            kf = su.factor("conductivity") / fu.factor("conductivity")
            mats, K = sample_conductivities(fr, data, slabel, median_factor=kf)     # K in the file's unit
            stages = fr.stages.array()
            sunit, sf = unit_and_factor(data, fr.stage, fr.stages.unit, su, fu, slabel)
            ffixed = to_file_units(data, fr.fixed, su, slabel)
            if sunit is None:
                raise SeepfeError(f"{slabel}: fragility.stages: cannot tell the unit of '{fr.stage}'; add \"unit\"")
            pls = []
            for s in range(len(K)):
                kov = {}
                for j, m in enumerate(mats):
                    kov.update(material_overrides(data, m, K[s, j]))
                for st in stages:
                    try:
                        d = with_values(data, {**fixed, **ffixed, **kov, fr.stage: float(st) * sf}, label)
                    except SeepfeError as e:
                        raise SeepfeError(f"{slabel}: fragility: {e}") from None
                    pls.append(payload(d))
            recs = run("fragility", pls)
            if any(r is None for r in recs):
                raise Stopped()
            Q = np.full((len(K), len(stages)), math.nan)
            errors = 0
            for idx, r in enumerate(recs):
                if r.get("status", "").startswith("error"):
                    errors += 1
                    continue
                Q[idx // len(stages), idx % len(stages)] = quantity_of(r, fr.quantity)
            probs = probabilities(Q, crit, fr.confidence, fr.interval)
            rep.fragility = {"stage": fr.stage, "stage_unit": sunit, "stages": stages.tolist(),
                             "materials": mats, "k_m_s": (K * fu.factor("conductivity")).tolist(),
                             "k_unit": fu.conductivity, "k": K.tolist(), "quantity": fr.quantity, "values": Q,
                             "criterion": crit, "probabilities": probs, "samples": fr.samples,
                             "sampling": fr.sampling, "seed": fr.seed, "interval": fr.interval,
                             "confidence": fr.confidence, "failed_cases": errors}
    except Stopped:
        rep.complete = False
    except BaseException:
        if own:                            # an error or a signal: stop the workers now, not after their solves
            runner.close(abort=True)
            own = False
        raise
    finally:
        if own:
            runner.close()
    rep.failed = len(failed)
    rep.fs_method = ("least FS and verdict of each case by seepfe.analyse against the section's checks.criteria "
                     "(what seepfe solve prints for the same input)")
    rep.wall_s = time.perf_counter() - t0
    if rep.complete and out is not None:
        _write(rep, out, spec, slabel, sec, sopts, points, columns if spec.vary else {}, profiles, plots, sweep)
    return rep


def _with_display_columns(columns: list, rows: list, units) -> tuple[list, list]:
    """The table's SI result columns again in the section file's units, appended (the rows are copied)."""
    from ..units import display_columns
    if units.is_si or not rows:
        return columns, rows
    numeric = {c: np.array([r.get(c) for r in rows], float) for c in columns
               if c not in ("case",) and all(isinstance(r.get(c), (int, float)) and not isinstance(r.get(c), bool)
                                             for r in rows)}
    extra = {k: v for k, v in display_columns(numeric, units).items() if k not in numeric}
    if not extra:
        return columns, rows
    out = [{**r, **{k: float(v[i]) for k, v in extra.items()}} for i, r in enumerate(rows)]
    return columns + list(extra), out


def _write(rep: SweepReport, out: Path, spec: SweepSpec, slabel: str, sec, sopts, points, columns, profiles,
           plots: bool, sweep_src=None) -> None:
    from ..about import __version__
    from ..output import atomic_dir, write_json
    from . import report
    title = spec.title or sec.title or sec.source
    files: list[str] = []
    with atomic_dir(out / "results") as tmp:
        if rep.table:
            cols, rows = _with_display_columns(rep.columns, rep.table, sec.units)
            report.write_table(tmp / "table.csv", cols, rows)
            files.append("table.csv")
            if plots:
                results = [c for c in rep.columns if c.startswith(("flow_", "head_"))]
                if any(not math.isnan(r["exit_gradient_max"]) for r in rep.table):
                    results += ["exit_gradient_max", "fs"]
                results += [c for c in rep.columns if c.startswith(("least_fs_time_", "lag_after_crest_",
                                                                     "peak_toe_head_m"))
                            and not c.endswith("_s")]
                for key, col in (columns.items() if results else ()):      # nothing solved: no figure
                    rows = [r for r in rep.table if r["varied"] in (key, "grid")]
                    others = [c for k, c in columns.items() if k != key] if spec.mode == "grid" else []
                    files += report.plot_vs_parameter(tmp, key, col, rows, results, others, rep.fs_required, title)
                for (b, key), cs in profiles.items():
                    if key:
                        files += report.plot_profiles(tmp, b, cs, rep.fs_required, title, report._label(columns[key]),
                                                      f"_{report._safe(key)}", key.endswith((".k", ".kx", ".ky")))
                    else:
                        files += report.plot_profiles(tmp, b, cs, rep.fs_required, title, "case (table order)", "")
        if rep.targets:
            tcols = ["name", "parameter", "unit", "find", "condition", "status", "value", "other_end",
                     "tolerance", "solves", "warnings"]
            trows = [{**t, "other_end": t.get("other_end", math.nan), "warnings": " | ".join(t["warnings"])}
                     for t in rep.targets]
            report.write_table(tmp / "targets.csv", tcols, trows)
            files.append("targets.csv")
            if plots:
                for t in rep.targets:
                    files += report.plot_target(tmp, t, f"{t['parameter']} ({t['unit']})",
                                                report._label(t["quantity"]),
                                                1.0 if t["quantity"] == "verdict" else
                                                float(t["condition"].split()[-1]))
        fr = rep.fragility
        if fr is not None:
            scol = f"stage_{unit_suffix(fr['stage_unit'])}"
            rows = [{scol: s, **p} for s, p in zip(fr["stages"], fr["probabilities"])]
            cols = [scol, "n"] + [c for c in fr["probabilities"][0] if c != "n"]
            report.write_table(tmp / "fragility.csv", cols, rows)
            srows = []
            kcols = [f"k_{m}_m_s" for m in fr["materials"]]
            if fr["k_unit"] != "m/s":           # also in the section file's unit
                kcols += [f"k_{m}_{unit_suffix(fr['k_unit'])}" for m in fr["materials"]]
            for s, (ks, kf) in enumerate(zip(fr["k_m_s"], fr["k"])):
                kv = list(ks) + (list(kf) if fr["k_unit"] != "m/s" else [])
                for j, st in enumerate(fr["stages"]):
                    srows.append({"sample": s, **dict(zip(kcols, kv)), scol: st, fr["quantity"]: fr["values"][s, j]})
            report.write_table(tmp / "fragility_samples.csv", ["sample"] + kcols + [scol, fr["quantity"]], srows)
            files += ["fragility.csv", "fragility_samples.csv"]
            if plots:
                files += report.plot_fragility(tmp, f"river stage, {fr['stage']} ({fr['stage_unit']})",
                                               np.asarray(fr["stages"]), fr["probabilities"], fr["criterion"],
                                               {"wilson": "Wilson score", "clopper_pearson": "Clopper-Pearson"}
                                               [fr["interval"]], fr["confidence"], fr["samples"], title)
        meta = {
            "seepfe_version": __version__, "title": title, "section": sec.source,
            "section_sha256": sec.input_hash, "sweep_file": slabel, "mode": spec.mode,
            "vary": {k: {"column": c} for k, c in columns.items()}, "fixed": spec.fixed, "solve": sopts,
            "points_m": points,
            "exit_boundaries": spec.exit if spec.exit is not None else "the section's (checks.boundaries, else the "
                                                                      "default rule of seepfe.analyse)",
            "fs_required": rep.fs_required, "fs_method": rep.fs_method,
            "units": dict(UNITS),
            "file_units": {"sweep": sweep_units(spec, sec.units, slabel).as_dict(), "section": sec.units.as_dict(),
                           "note": "the parameter columns are in the sweep's units, as their names say; "
                                   "results are SI"},
            "cases": rep.cases, "solved_this_run": rep.solved, "from_cache": rep.cached, "backend": rep.backend,
            "wall_s": round(rep.wall_s, 3),
            "targets": [{k: v for k, v in t.items()} for t in rep.targets],
            "fragility": None if fr is None else {k: v for k, v in fr.items() if k != "values"},
            "files": files, "caution": CAUTION,
            "note": "cases/ beside this folder caches every finished case by the sha256 of its resolved input; "
                    "delete it to force a full rerun.",
        }
        from ..export import copy_inputs
        sname = Path(sweep_src).name if isinstance(sweep_src, (str, os.PathLike)) else "sweep.json"
        meta["files"] += copy_inputs(tmp, sec, {sname: sweep_src if sweep_src is not None else {}})
        write_json(tmp / "sweep.json", meta)
        files.append("sweep.json")
    rep.results_dir = out / "results"
    rep.files = files
