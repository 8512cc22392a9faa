"""A stage study: one section over a range of river stages, as one report.

``seepfe report SECTION --stages SWEEP --out DIR`` runs the sweep file (which varies the river stage,
and may carry a target search and a fragility block) with :func:`seepfe.sweep.run_sweep` in the sweep
folder ``DIR`` (its ``cases/`` cache is shared with ``seepfe sweep SECTION SWEEP --out DIR``, so cases
already solved are read, not solved again), then writes ``DIR/results/report.html``:

* the governing values per stage (least FS, mode, where, largest exit gradient, failing length, seepage,
  verdict), each what ``seepfe solve`` prints for that stage;
* FS and exit gradient against stage, failing stages marked;
* the stage at first failure: the sweep's target search on the stage key, or, when the sweep file has
  none, one added here (the largest stage that still passes, to a tolerance of a quarter of the stage
  step);
* the fragility curve when the sweep file asks for one.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import SeepfeError
from .page import Raw, caution, e, num, page, project_of, svg_figure, table, title_block, verdict_span

__all__ = ["write_stage_study", "StageStudy", "stage_figure"]


@dataclass
class StageStudy:
    html: Path
    cases: Path
    summary: str
    report: object


def _load(sweep) -> tuple[dict, str]:
    if isinstance(sweep, dict):
        return json.loads(json.dumps(sweep)), "<dict>"
    from ..jsonin import read_json
    p = Path(sweep)
    return read_json(p, "sweep file"), str(p)      # size cap, UTF-8, duplicate keys, nesting checked


def _stage_values(spec_vary, key, data, label):
    from ..sweep.spec import RangeSpec
    v = spec_vary[key]
    r = RangeSpec(values=list(v)) if isinstance(v, list) else RangeSpec.model_validate(v)
    return np.asarray(r.array(), float)


def write_stage_study(section, sweep, out, *, stage: str | None = None, workers=None, scheduler=None,
                      solve: dict | None = None, paper: str = "A4", pdf: bool = False,
                      exaggeration: float | None = None, progress=None) -> StageStudy:
    """Run the sweep (cached in ``out/cases``) and write the stage-study report ``out/results/report.html``."""
    from ..section import load_section
    from ..sweep import run_sweep
    from ..sweep.spec import load_sweep
    sec = load_section(section)
    data, slabel = _load(sweep)
    spec, _ = load_sweep(data)
    keys = list(spec.vary)
    if stage is None:
        if len(keys) != 1:
            raise SeepfeError(f"{slabel}: a stage study varies one key (the river stage); this sweep varies "
                              f"{len(keys)} ({', '.join(keys) or 'none'}): name the stage with --stage")
        stage = keys[0]
    if stage not in spec.vary:
        raise SeepfeError(f"{slabel}: vary: no key '{stage}' (varied: {', '.join(keys) or 'none'})")
    stages = _stage_values(spec.vary, stage, data, slabel)
    if len(stages) < 2:
        raise SeepfeError(f"{slabel}: vary.{stage}: a stage study needs at least two stages")
    added = False
    if not any(t.parameter == stage for t in spec.targets):
        step = float(np.min(np.diff(np.sort(stages)))) if len(stages) > 1 else 0.1
        data.setdefault("targets", []).append(
            {"name": "stage at first failure", "parameter": stage, "range": [float(stages.min()), float(stages.max())],
             "find": "largest", "tolerance": max(step / 4.0, 1e-6 * (abs(stages.max()) + 1.0))})
        added = True
    rep = run_sweep(sec.source if sec.source != "<dict>" else sec.data, data, out=out, workers=workers,
                    scheduler=scheduler, solve=solve, progress=progress)
    if not rep.complete:
        raise SeepfeError("the stage study stopped before every case was solved; run it again")
    rows = [r for r in rep.table if r["varied"] == stage]
    col = next(c for c in rep.columns[2:] if c.startswith(stage + "_"))       # the key with its unit
    rows.sort(key=lambda r: r[col])
    target = next((t for t in rep.targets if t["parameter"] == stage), None)
    html = build_stage_report(sec, stage, col, rows, rep, target, added, paper=paper, exaggeration=exaggeration,
                              sweep_label=slabel)
    res_dir = Path(out) / "results"
    tmp = res_dir / ".report.html.tmp"
    tmp.write_text(html, encoding="utf-8")
    tmp.replace(res_dir / "report.html")
    if pdf:
        from .pdf import write_pdf
        write_pdf(res_dir / "report.html", res_dir / "report.pdf")
    from ..output import add_to_manifest
    add_to_manifest(res_dir, "report.html", *(["report.pdf"] if pdf else []))   # replaceable with results/
    first = _first_failure_text(target, col)
    fails = [r for r in rows if r["verdict"] == "fail"]
    summary = (f"stage study: {len(rows)} stages of {stage}, {len(fails)} fail; {first}")
    return StageStudy(res_dir / "report.html", Path(out) / "cases", summary, rep)


def _first_failure_text(t, col) -> str:
    if t is None:
        return "no stage search"
    if t["status"] == "found":
        return (f"stage at first failure: passes up to {t['value']:.4g} {t['unit']}, fails at {t['other_end']:.4g} "
                f"{t['unit']} (within {t['tolerance']:.3g} {t['unit']})")
    return f"stage at first failure: {t['status']}"


def stage_figure(stage_label: str, x: np.ndarray, fs: np.ndarray, ig: np.ndarray, verdicts: list, fs_required: float,
                 allowable: float | None, first: float | None, title: str, unit_text: str = "m"):
    """Least FS and largest exit gradient against river stage (two panels), failing stages marked."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    from ..plot.style import FIG_WIDTH_IN, INK, OKABE_ITO, style
    with style():
        fig = Figure(figsize=(FIG_WIDTH_IN, 4.9), layout="constrained")
        FigureCanvasAgg(fig)
        a1, a2 = fig.subplots(2, 1, sharex=True)
        fail = np.array([v == "fail" for v in verdicts])
        fsp = np.where(np.isfinite(fs), fs, np.nan)
        a1.plot(x, fsp, color=OKABE_ITO["green"], lw=1.6, marker="o", ms=3.5, zorder=4)
        a1.plot(x[fail], fsp[fail], ls="none", marker="o", ms=6, mfc="none", mec=OKABE_ITO["vermillion"], mew=1.4,
                zorder=5)
        a1.axhline(fs_required, color=INK, lw=0.8, ls=(0, (1, 1.5)))
        a1.text(x[-1], fs_required, f"required {fs_required:g} ", ha="right", va="bottom", fontsize=6.8)
        a1.set_ylabel("least FS (-)")
        top = np.nanmax(fsp) if np.isfinite(fsp).any() else 2 * fs_required
        a1.set_ylim(0, min(max(1.15 * top, 1.3 * fs_required), 4 * fs_required))
        a2.plot(x, ig, color=OKABE_ITO["blue"], lw=1.6, marker="s", ms=3.2, zorder=4)
        a2.plot(x[fail], ig[fail], ls="none", marker="s", ms=6, mfc="none", mec=OKABE_ITO["vermillion"], mew=1.4,
                zorder=5)
        if allowable is not None:
            a2.axhline(allowable, color=INK, lw=0.8, ls=(0, (1, 1.5)))
            a2.text(x[-1], allowable, f"allowable {allowable:g} ", ha="right", va="bottom", fontsize=6.8)
        a2.set_ylabel("largest exit gradient (m/m)")
        a2.set_ylim(0, None)
        a2.set_xlabel(stage_label)
        handles = [Line2D([], [], color=OKABE_ITO["green"], lw=1.6, marker="o", ms=3.5, label="least FS (upper)"),
                   Line2D([], [], color=OKABE_ITO["blue"], lw=1.6, marker="s", ms=3.2,
                          label="largest exit gradient (lower)"),
                   Line2D([], [], ls="none", marker="o", ms=6, mfc="none", mec=OKABE_ITO["vermillion"], mew=1.4,
                          label="stage that fails the criteria")]
        if first is not None:
            for a in (a1, a2):
                a.axvline(first, color=OKABE_ITO["vermillion"], lw=1.0, ls=(0, (5, 2)))
            handles.append(Line2D([], [], color=OKABE_ITO["vermillion"], lw=1.0, ls=(0, (5, 2)),
                                  label=f"stage at first failure {first:.4g} {unit_text}"))
        for a in (a1, a2):
            a.grid(color="#e6e6e6", lw=0.5)
        a1.set_title(title, pad=6)
        fig.legend(handles=handles, loc="outside lower left", ncol=2)
    return fig


def _svg(fig) -> bytes:
    import io

    from ..plot.style import style
    with style():
        buf = io.BytesIO()
        fig.savefig(buf, format="svg", metadata={"Date": None})
    return buf.getvalue()


def build_stage_report(sec, stage, col, rows, rep, target, added, *, paper="A4", exaggeration=None,
                       sweep_label="", generated=None) -> str:
    from ..about import __version__
    from ..plot import section_figure
    from ..plot.base import sides
    u = sec.units
    fL, LU = u.factor("length"), u.length
    fq, FL = u.factor("flow"), u.label("flow").replace("3", "³")
    sd = sides(sec)
    unit = col.rsplit("_", 1)[-1] if "_" in col else ""
    unit_text = {"m": "m", "ft": "ft"}.get(unit, unit)
    generated = generated or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    title = (sec.spec.title or sec.source)
    P = [f"<h1>{e(title)}: stage study</h1>",
         title_block(project_of(sec.spec), title, "Stage study of one section",
                     [("stage", stage), ("stages", str(len(rows))), ("seepfe", __version__),
                      ("input SHA-256", sec.input_hash[:16] + "…")]),
         f'<p class="meta">The section at each river stage of <code>{e(sweep_label)}</code>, solved and checked '
         f"as <code>seepfe solve</code> would · seepfe {e(__version__)} · {e(generated)}</p>", caution()]
    # the stage at first failure
    P.append('<h2 id="results">1. Results</h2>')
    first = None
    if target is not None and target["status"] == "found":
        first = 0.5 * (target["value"] + target["other_end"])
        P.append(f'<p id="first-failure"><b>Stage at first failure:</b> the section passes up to {stage} = '
                 f"{target['value']:.4g} {e(target['unit'])} and fails at {target['other_end']:.4g} "
                 f"{e(target['unit'])} (the change lies between them; {target['solves']} solves, tolerance "
                 f"{target['tolerance']:.3g} {e(target['unit'])}). "
                 + ("Searched here (the sweep file has no search on the stage)." if added else
                    f"From the sweep file's target '{e(target['name'])}'.") + "</p>")
    elif target is not None:
        P.append(f'<p id="first-failure"><b>Stage at first failure:</b> {e(target["status"])} (range '
                 f"{target['range'][0]:g} to {target['range'][1]:g} {e(target['unit'])}).</p>")
    for w in (target or {}).get("warnings", []):
        P.append(f'<p class="note">Search: {e(w)}</p>')
    trows = []
    for r in rows:
        q = [v for k, v in r.items() if k.startswith("flow_") and isinstance(v, float) and v > 0 and math.isfinite(v)]
        fw = r.get("failing_length_m")
        trows.append([num(r[col], "{:.4g}"), num(r["fs"], "{:.2f}"), r["fs_mode"] or "–",
                      num(None if not math.isfinite(r["fs_x_m"]) else r["fs_x_m"] / fL, "{:.1f}"),
                      num(r["exit_gradient_max"], "{:.3f}"),
                      num(None if fw is None or not math.isfinite(fw) else fw / fL, "{:.1f}"),
                      num(sum(q) / fq if q else None, "{:.3e}"), verdict_span(r["verdict"]),
                      r["status"] if r["status"] != "ok" else ""])
    P.append(table([f"{stage} ({unit_text})", "least FS (-)", "mode", f"at x ({LU})", "largest exit gradient (m/m)",
                    f"failing length ({LU})", f"seepage in ({FL})", "verdict", "status"], trows, {0, 1, 3, 4, 5, 6},
                   caption="governing values per stage (each as seepfe solve prints it)", id="stage-table"))
    x = np.array([r[col] for r in rows], float)
    fs = np.array([r["fs"] for r in rows], float)
    ig = np.array([r["exit_gradient_max"] for r in rows], float)
    crit = sec.spec.checks.criteria
    figs = []
    f1 = stage_figure(f"{stage} ({unit_text})", x, fs, ig, [r["verdict"] for r in rows], rep.fs_required,
                      crit.allowable_gradient, first, "Least FS and largest exit gradient against river stage",
                      unit_text)
    figs.append(("stage_curves", "Least factor of safety and largest exit gradient against the river stage; "
                 "failing stages circled, the stage at first failure dashed", _svg(f1)))
    fr = rep.fragility
    if fr is not None:
        P.append('<h3 id="fragility">Fragility</h3>')
        P.append(table([f"stage ({fr['stage_unit']})", "realisations", "P(FS < 1)", f"P(FS < {fr['criterion']:g})"],
                       [[num(s, "{:.4g}"), p.get("n"),
                         f"{p['p_fs_below_1']:.2f} [{p['p_fs_below_1_low']:.2f}, {p['p_fs_below_1_high']:.2f}]",
                         f"{p['p_fs_below_criterion']:.2f} [{p['p_fs_below_criterion_low']:.2f}, "
                         f"{p['p_fs_below_criterion_high']:.2f}]"] for s, p in zip(fr["stages"], fr["probabilities"])],
                       {0, 1}, caption=f"{fr['samples']} {fr['sampling'].replace('_', ' ')} realisations of the "
                                       f"conductivities of {', '.join(fr['materials'])}; "
                                       f"{int(round(fr['confidence'] * 100))}% {fr['interval'].replace('_', '-')} "
                                       "bands (sampling error only)", id="fragility-table"))
        figs.append(("fragility", "Fragility: probability of FS below 1 and below the criterion against stage",
                     _fragility_svg(fr)))
    # assumptions
    P.append('<h2 id="assumptions">2. Assumptions</h2><ul class="assume" id="assumptions-list">')
    items = [f"Steady two-dimensional seepage at each stage (a stage held long enough for steady flow; the stage "
             f"is the total head on the boundary the key names: <code>{e(stage)}</code>); per {e(LU)} of {e(sd['structure'])}.",
             f"Each stage is solved and checked exactly as <code>seepfe solve</code> does for the section file with "
             f"that value: {e(rep.fs_method)}.",
             f"Criteria: FS against heave ≥ {crit.fs_heave:g}, uplift ≥ {crit.fs_uplift:g}, exit gradient ≤ "
             f"{crit.allowable_gradient:g}" + (f"; the sweep's required FS {rep.fs_required:g}" if rep.fs_required else "")
             + ". Local codes and agency criteria govern.",
             "The stage at first failure assumes the verdict changes once over the range (monotone); the search "
             "says so when the solved stages show more than one change.",
             f"Solved on {e(rep.backend)}: {rep.cases} cases ({rep.solved} solved now, {rep.cached} from the cache "
             f"in cases/)."]
    if fr is not None:
        items.append("Fragility: lognormal conductivities (median and coefficient of variation as in the sweep file), "
                     "every realisation solved at every stage; the bands describe sampling error only.")
    P += [f"<li>{x}</li>" for x in items] + ["</ul>"]
    # figures
    sf = section_figure(sec, title=(sec.spec.title or "Section") + ": the section at the file's stage",
                        exaggeration=exaggeration)
    figs.insert(0, ("section", "The section as the file draws it (its own stage)", _svg(sf)))
    P.append('<h2 class="appendix" id="figures">Appendix A. Figures</h2>')
    for i, (name, cap, svg) in enumerate(figs, 1):
        P.append(svg_figure(svg, name, i, cap))
    P.append('<p class="note">The sweep\'s own tables and figures (table.csv, sweep.json, vs_*.svg, profiles_*.svg) '
             "are beside this file.</p>" + caution())
    return page(title + " – stage study", P, project_of(sec.spec), "Stage study of one section", paper,
                f"seepfe {__version__}")


def _fragility_svg(fr) -> bytes:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from ..plot.style import FIG_WIDTH_IN, OKABE_ITO, style
    with style():
        fig = Figure(figsize=(FIG_WIDTH_IN, 3.6), layout="constrained")
        FigureCanvasAgg(fig)
        ax = fig.subplots()
        st = np.asarray(fr["stages"], float)
        for tag, lab, colr, mk in (("below_criterion", f"P(FS < {fr['criterion']:g})", OKABE_ITO["blue"], "o"),
                                   ("below_1", "P(FS < 1)", OKABE_ITO["vermillion"], "s")):
            p = np.array([r[f"p_fs_{tag}"] for r in fr["probabilities"]])
            lo = np.array([r[f"p_fs_{tag}_low"] for r in fr["probabilities"]])
            hi = np.array([r[f"p_fs_{tag}_high"] for r in fr["probabilities"]])
            ax.fill_between(st, lo, hi, color=colr, alpha=0.15, lw=0)
            ax.plot(st, p, color=colr, lw=1.6, marker=mk, ms=3.5, label=lab)
        ax.set_ylim(-0.02, 1.02)
        ax.set_xlabel(f"river stage, {fr['stage']} ({fr['stage_unit']})")
        ax.set_ylabel("probability (-)")
        ax.grid(color="#e6e6e6", lw=0.5)
        ax.legend(loc="upper left", title=f"bands: {int(round(fr['confidence'] * 100))}% "
                                          f"{fr['interval'].replace('_', '-')}, n = {fr['samples']}")
        ax.set_title("Fragility against river stage", pad=6)
    return _svg(fig)


_ = Raw
