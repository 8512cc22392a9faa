"""A reach study: every section of a levee reach, solved and checked, in one report.

A *reach file* (JSON, docs/report.md) lists section files by station, optionally with river stages::

    {"title": "Invented reach 2, stations 3+900 to 4+400",
     "project": {"project": "...", "reach": "Reach 2", "datum": "local datum, m"},
     "stations": [{"station": "3+900", "section": "reach_3900.json"},
                  {"station": "4+150", "section": "reach_4150.json"},
                  {"station": "4+400", "section": "reach_4400.json"}],
     "stages": {"key": "boundaries.river.head", "values": [3.0, 4.0, 5.0]},
     "solve": {"order": 2}}

``seepfe reach REACH --out DIR`` solves every station (and each at every stage) on all cores or a Dask
cluster through the sweep's runner and its cache (``DIR/cases/``: a stopped run resumes), and writes
``DIR/results/`` all at once: ``report.html`` (the reach report), ``reach.csv`` (one row per station),
``stations/<station>/report.html`` and ``summary.json`` (each station's own report, linked from the
reach report) and the figures. Every number is what ``seepfe solve`` gives for that section.
"""

from __future__ import annotations

import datetime as _dt
import json
import re
from pathlib import Path
from typing import Annotated, Optional, Union

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError

from ..errors import SeepfeError
from ..schema import ProjectSpec
from .page import Raw, caution, e, num, page, project_of, svg_figure, table, title_block, verdict_span

__all__ = ["ReachSpec", "load_reach", "run_reach", "ReachResult", "station_value", "run_station", "MARKER"]

MARKER = ".seepfe-reach"
_CFG = ConfigDict(extra="forbid", frozen=True)


class StationSpec(BaseModel):
    model_config = _CFG
    station: Union[Annotated[str, Field(min_length=1, max_length=40)], float] = Field(
        description="station (chainage), '4+150' (= 4150 in the section files' length unit) or a number")
    section: Annotated[str, Field(min_length=1)] = Field(description="section file, relative to the reach file")


class StagesSpec(BaseModel):
    model_config = _CFG
    key: str = Field(description="the key of the river stage in every section file (a dotted path or a parameter)")
    values: Annotated[list[float], Field(min_length=1, max_length=200)] = Field(
        description="river stages, in each section file's length unit")


class SolveSpec(BaseModel):
    model_config = _CFG
    order: Optional[int] = Field(None, ge=1, le=2)
    size: Optional[float] = Field(None, gt=0, description="element size, in each section file's length unit")


class ReachSpec(BaseModel):
    """A whole reach file."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)
    schema_: Optional[str] = Field(None, alias="$schema")
    title: str = ""
    project: Optional[ProjectSpec] = None
    stations: Annotated[list[StationSpec], Field(min_length=1, max_length=2000)]
    stages: Optional[StagesSpec] = None
    solve: SolveSpec = Field(default_factory=SolveSpec)


def station_value(s) -> float:
    """'4+150' -> 4150.0, '4+150.5' -> 4150.5, 12.5 -> 12.5 (a station's position along the reach)."""
    if isinstance(s, (int, float)):
        return float(s)
    m = re.fullmatch(r"\s*(-?\d+)\+(\d+(?:\.\d*)?)\s*", str(s))
    if m:
        a, b = m.group(1), m.group(2)
        v = abs(int(a)) * 10 ** len(b.split(".")[0]) + float(b)
        return -v if a.startswith("-") else v
    try:
        return float(s)
    except ValueError:
        raise ValueError(f"station '{s}' is neither '4+150' nor a number") from None


def load_reach(path) -> tuple[ReachSpec, Path, str]:
    from ..jsonin import read_json
    p = Path(path)
    data = read_json(p, "reach file")                  # size cap, UTF-8, duplicate keys, nesting checked
    try:
        spec = ReachSpec.model_validate(data)
    except ValidationError as x:
        err = x.errors()[0]
        where = ".".join(str(v) for v in err["loc"]) or "(top)"
        raise SeepfeError(f"{p}: {where}: {err['msg']}") from None
    seen = set()
    for k, st in enumerate(spec.stations):
        try:
            v = station_value(st.station)
        except ValueError as x:
            raise SeepfeError(f"{p}: stations.{k}: {x}") from None
        if v in seen:
            raise SeepfeError(f"{p}: stations.{k}: station '{st.station}' is listed twice")
        seen.add(v)
        f = p.parent / st.section
        if not f.is_file():
            raise SeepfeError(f"{p}: stations.{k}: no section file '{st.section}' (looked for {f})")
    return spec, p.parent, str(p)


def station_fault(record, payload=None):
    """Why a cached station record may not be reused (None when it may): a case record plus the station's report."""
    from ..sweep.cache import record_fault
    return record_fault(record, None, extra={"report_html": str, "summary_json": str, "seepage_m3_s_per_m": float})


def run_station(payload: dict) -> dict:
    """A worker's job for one station: solve, analyse, the case record, and the station's own report (HTML
    and summary.json as text, so it travels back from a cluster too)."""
    from ..sweep.case import record_case
    return record_case(payload, _station_report)


def _station_report(a, res, rec: dict, payload: dict) -> None:
    from .single import build_report
    rep = payload.get("report") or {}
    rec["report_html"] = build_report(a, paper=rep.get("paper", "A4"))
    rec["summary_json"] = json.dumps(a.to_dict(), indent=1)
    bal = res.balance
    rec["seepage_m3_s_per_m"] = 0.5 * (bal["inflow_m3_s_per_m"] + bal["outflow_m3_s_per_m"])


class ReachResult(BaseModel):
    model_config = ConfigDict(arbitrary_types_allowed=True)
    results: Path
    rows: list
    solved: int
    cached: int
    complete: bool
    backend: str


def _slug(s) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", str(s)).strip("_") or "station"


def run_reach(reach, out, *, workers=None, scheduler=None, max_solves=None, paper: str = "A4",
              progress=None, pdf: bool = False) -> ReachResult:
    """Solve every station of a reach file (resumable through ``out/cases``) and write ``out/results``."""
    from ..output import atomic_dir
    from ..section import _read
    from ..sweep.api import _locked, _prepare_out
    from ..sweep.runner import Runner
    from ..sweep.values import with_values
    from ..units import parse_units
    spec, base, label = load_reach(reach)
    out = Path(out)
    _prepare_out(out)
    with _locked(out):                     # one run per folder: a second is refused with one line
        (out / MARKER).write_text("seepfe reach folder: cases/ is the resumable cache, results/ the final files\n")
        stations = sorted(spec.stations, key=lambda s: station_value(s.station))
        datas = []
        for st in stations:
            data, slabel = _read(base / st.section)
            u = parse_units(data.get("units"), slabel)
            size = None if spec.solve.size is None else spec.solve.size * u.factor("length")
            opts = {k: v for k, v in (("order", spec.solve.order), ("size", size)) if v is not None}
            datas.append((st, data, slabel, opts))
        main = [{"section": d, "solve": o, "report": {"paper": paper}} for _, d, _, o in datas]
        stage_pl = []
        if spec.stages is not None:
            for st, d, slabel, o in datas:
                for v in spec.stages.values:
                    try:
                        stage_pl.append({"section": with_values(d, {spec.stages.key: float(v)}, slabel), "solve": o,
                                         "points": {}, "exit": None})
                    except SeepfeError as x:
                        raise SeepfeError(f"{label}: stages: {x}") from None
        solved = cached = 0
        with Runner(cache_dir=out / "cases", workers=workers, scheduler=scheduler, max_solves=max_solves,
                    func=run_station, validate=station_fault) as r1:
            recs = r1.run(main, (lambda d, n, c: progress("stations", d, n, c)) if progress else None)
            solved, cached = r1.solved, r1.cached
            backend = r1.backend
        srecs = []
        if stage_pl and all(x is not None for x in recs):
            with Runner(cache_dir=out / "cases", workers=workers, scheduler=scheduler,
                        max_solves=None if max_solves is None else max(0, max_solves - solved)) as r2:
                srecs = r2.run(stage_pl, (lambda d, n, c: progress("stages", d, n, c)) if progress else None)
                solved, cached = solved + r2.solved, cached + r2.cached
        complete = all(x is not None for x in recs) and all(x is not None for x in srecs)
        res_dir = out / "results"
        if not complete:
            return ReachResult(results=res_dir, rows=[], solved=solved, cached=cached, complete=False, backend=backend)
        from ..section import load_section
        rows = []
        nst = len(spec.stages.values) if spec.stages is not None else 0
        for i, ((st, d, slabel, o), rec) in enumerate(zip(datas, recs)):
            sec = load_section(d) if not rec.get("status", "").startswith("error") else None
            g = rec.get("governing") or {}
            row = {"station": str(st.station), "station_value": station_value(st.station), "section": st.section,
                   "title": (sec.spec.title if sec else ""), "status": rec.get("status", ""),
                   "fs": g.get("fs"), "fs_mode": g.get("mode"), "exit_gradient_max": g.get("exit_gradient_max"),
                   "failing_length_m": g.get("failing_length_m"),
                   "fails_within_m_of_toe": g.get("fails_within_m_of_toe"),
                   "seepage_m3_s_per_m": rec.get("seepage_m3_s_per_m"), "verdict": g.get("verdict", "not checked"),
                   "why": g.get("why", rec.get("status", "")), "units": sec.units if sec else None,
                   "slug": _slug(st.station), "rec": rec}
            if nst:
                row["stages"] = [(float(v), (sr.get("governing") or {})) for v, sr in
                                 zip(spec.stages.values, srecs[i * nst:(i + 1) * nst])]
            rows.append(row)
        with atomic_dir(res_dir) as tmp:
            (tmp / "stations").mkdir()
            for row in rows:
                rec = row["rec"]
                if "report_html" in rec:
                    sd = tmp / "stations" / row["slug"]
                    sd.mkdir()
                    (sd / "report.html").write_text(rec["report_html"], encoding="utf-8")
                    (sd / "summary.json").write_text(rec["summary_json"] + "\n", encoding="utf-8")
            _write_csv(tmp / "reach.csv", rows, spec)
            html = build_reach_report(spec, label, rows, paper=paper, backend=backend, solved=solved, cached=cached)
            (tmp / "report.html").write_text(html, encoding="utf-8")
            from ..output import write_json
            write_json(tmp / "reach.json", {"reach_file": label, "stations": [r["station"] for r in rows],
                                            "solved_this_run": solved, "from_cache": cached, "backend": backend,
                                            "caution": _caution()})
            if pdf:
                from .pdf import write_pdf
                write_pdf(tmp / "report.html", tmp / "report.pdf")
        kept = [{k: v for k, v in r.items() if k not in ("rec", "units")} for r in rows]
        return ReachResult(results=res_dir, rows=kept,
                           solved=solved, cached=cached, complete=True, backend=backend)


def _caution():
    from ..about import CAUTION
    return CAUTION


def _write_csv(path, rows, spec) -> None:
    cols = ["station", "station_value", "section", "status", "fs", "fs_mode", "exit_gradient_max", "failing_length_m",
            "fails_within_m_of_toe", "seepage_m3_s_per_m", "verdict", "why"]
    if spec.stages is not None:
        cols += [f"fs_at_stage_{v:g}" for v in spec.stages.values]
    from ..csvfile import write_table          # seepfe's one CSV writer: formula-like text neutralised

    def cells(r):
        vals = [r.get(c) for c in cols[:12]]
        if spec.stages is not None:
            vals += [g.get("fs") for _, g in r["stages"]]
        return vals
    write_table(path, cols, (cells(r) for r in rows))


def _figure_vs_station(rows, fs_required, allowable, title, unit):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    from ..plot.style import FIG_WIDTH_IN, INK, OKABE_ITO, style
    x = np.array([r["station_value"] for r in rows], float)
    fs = np.array([np.nan if r["fs"] is None else r["fs"] for r in rows], float)
    ig = np.array([np.nan if r["exit_gradient_max"] is None else r["exit_gradient_max"] for r in rows], float)
    fail = np.array([r["verdict"] == "fail" for r in rows])
    with style():
        fig = Figure(figsize=(FIG_WIDTH_IN, 4.6), layout="constrained")
        FigureCanvasAgg(fig)
        a1, a2 = fig.subplots(2, 1, sharex=True)
        red = OKABE_ITO["vermillion"]
        for a, y, colr, mk in ((a1, fs, OKABE_ITO["green"], "o"), (a2, ig, OKABE_ITO["blue"], "s")):
            a.plot(x, y, color=colr, lw=1.4, marker=mk, ms=4, zorder=4)
            a.plot(x[fail], y[fail], ls="none", marker=mk, ms=8, mfc="none", mec=red, mew=1.5, zorder=5)
            a.grid(color="#e6e6e6", lw=0.5)
            for xi in x[fail]:
                a.axvline(xi, color=red, lw=0.6, alpha=0.5, zorder=1)
        a1.axhline(fs_required, color=INK, lw=0.8, ls=(0, (1, 1.5)))
        a1.text(x[-1], fs_required, f"required {fs_required:g} ", ha="right", va="bottom", fontsize=6.8)
        a1.set_ylim(0, None)
        a1.set_ylabel("least FS (-)")
        if allowable is not None:
            a2.axhline(allowable, color=INK, lw=0.8, ls=(0, (1, 1.5)))
            a2.text(x[-1], allowable, f"allowable {allowable:g} ", ha="right", va="bottom", fontsize=6.8)
        a2.set_ylim(0, None)
        a2.set_ylabel("largest exit gradient (m/m)")
        a2.set_xticks(x, [r["station"] for r in rows])
        a2.set_xlabel(f"station ({unit})")
        a1.set_title(title, pad=6)
        fig.legend(handles=[Line2D([], [], color=OKABE_ITO["green"], lw=1.4, marker="o", ms=4, label="least FS (upper)"),
                            Line2D([], [], color=OKABE_ITO["blue"], lw=1.4, marker="s", ms=4,
                                   label="largest exit gradient (lower)"),
                            Line2D([], [], ls="none", marker="o", ms=8, mfc="none", mec=red, mew=1.5,
                                   label="station that fails the criteria")], loc="outside lower left", ncol=3)
    from .stages import _svg
    return _svg(fig)


def build_reach_report(spec, label, rows, *, paper="A4", backend="", solved=0, cached=0, generated=None) -> str:
    from ..about import __version__
    generated = generated or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    title = spec.title or Path(label).stem
    fields = project_of(spec)
    nfail = sum(r["verdict"] == "fail" for r in rows)
    nunk = sum(r["verdict"] not in ("pass", "fail") for r in rows)
    P = [f"<h1>{e(title)}: reach study</h1>",
         title_block(fields, title, "Reach study", [("stations", str(len(rows))), ("seepfe", __version__)]),
         f'<p class="meta">Every section of <code>{e(label)}</code>, solved and checked as <code>seepfe solve</code> '
         f"would · seepfe {e(__version__)} · {e(generated)}</p>", caution(),
         '<h2 id="results">1. Results</h2>',
         f'<p id="reach-verdict"><b>{len(rows)} stations: {len(rows) - nfail - nunk} pass, {nfail} fail'
         + (f", {nunk} not checked" if nunk else "") + ".</b> " + (
             "Failing: " + ", ".join(e(r["station"]) for r in rows if r["verdict"] == "fail") + "." if nfail else "")
         + "</p>"]
    trows = []
    for r in rows:
        u = r["units"]
        fL = u.factor("length") if u else 1.0
        LU = u.length if u else "m"
        fq = u.factor("flow") if u else 1.0
        FL = (u.label("flow") if u else "m3/s per m").replace("3", "³")
        link = Raw(f'<a href="stations/{e(r["slug"])}/report.html">{e(r["station"])}</a>')
        fw = r["failing_length_m"]
        trows.append([link, r["section"], num(r["fs"], "{:.2f}"), r["fs_mode"] or "–",
                      num(r["exit_gradient_max"], "{:.3f}"),
                      f"{num(None if fw is None else fw / fL, '{:.1f}')} {LU}" if fw is not None else "–",
                      f"{num(None if r['seepage_m3_s_per_m'] is None else r['seepage_m3_s_per_m'] / fq, '{:.3e}')} {FL}",
                      verdict_span(r["verdict"])])
    P.append(table(["station", "section file", "least FS (-)", "mode", "largest exit gradient (m/m)", "failing length",
                    "seepage quantity", "verdict"], trows, {2, 4, 5, 6}, caption="by station (each station's own "
                   "report is linked from its station)", id="reach-table"))
    if spec.stages is not None:
        vals = spec.stages.values
        srows = []
        for r in rows:
            first = next((v for v, g in r["stages"] if g.get("verdict") == "fail"), None)
            srows.append([r["station"]] + [Raw(f"{num(g.get('fs'), '{:.2f}')} {verdict_span(g.get('verdict', '?'))}")
                                           for _, g in r["stages"]] + [num(first, "{:g}")])
        P.append(table(["station"] + [f"FS at {v:g}" for v in vals] + ["lowest failing stage"], srows,
                       set(range(1, len(vals) + 2)), caption=f"least FS and verdict at each river stage "
                                                             f"({spec.stages.key}, each section file's length unit)",
                       id="reach-stages"))
    for r in rows:
        if r["status"] != "ok":
            P.append(f'<p class="note">Station {e(r["station"])}: {e(r["status"])}</p>')
    # assumptions
    crits = sorted({(rr["rec"].get("governing") or {}).get("criteria") and json.dumps(
        (rr["rec"].get("governing") or {}).get("criteria"), sort_keys=True) or "" for rr in rows} - {""})
    P.append('<h2 id="assumptions">2. Assumptions</h2><ul class="assume" id="assumptions-list">')
    items = ["Each station is a two-dimensional section, solved for steady seepage per unit length of levee as "
             "its own file says (its own report lists its boundary conditions, materials, top stratum, criteria "
             "and hand methods); the reach is judged station by station, with no flow along the levee between them.",
             "Each station's least FS, mode, exit gradient, failing length and verdict are those of "
             "<code>seepfe solve</code> on its file (seepfe.analyse, against that file's checks.criteria).",
             "Seepage quantity: the mean of the inflow and outflow of the section per unit length.",
             f"Solved on {e(backend)}: {solved} solved now, {cached} from the cache (cases/)."]
    for c in crits:
        d = json.loads(c)
        items.append(f"Criteria in use: FS heave ≥ {d['fs_heave']:g}, uplift ≥ {d['fs_uplift']:g}, exit gradient ≤ "
                     f"{d['allowable_gradient']:g} ({e(d['source'])}); local codes and agency criteria govern.")
    P += [f"<li>{x}</li>" for x in items] + ["</ul>"]
    fs_req = max((rr["rec"].get("governing") or {}).get("criteria", {}).get("fs_heave", 1.6) for rr in rows)
    allow = min((rr["rec"].get("governing") or {}).get("criteria", {}).get("allowable_gradient", 0.5) for rr in rows)
    u0 = next((r["units"] for r in rows if r["units"] is not None), None)
    svg = _figure_vs_station(rows, fs_req, allow, "Least FS and largest exit gradient along the reach",
                             u0.length if u0 else "m")
    P.append('<h2 class="appendix" id="figures">Appendix A. Figures</h2>')
    P.append(svg_figure(svg, "reach", 1, "Least factor of safety and largest exit gradient against station; "
                                         "failing stations circled"))
    P.append(caution())
    return page(title + " – reach study", P, fields, "Reach study", paper, f"seepfe {__version__}")
