"""The report of one section: results first, then what they rest on, then the figures and the input.

Built on :func:`seepfe.analyse` only: the verdict, the checks, the failing stretches, the hand methods,
the phreatic surface and the flow net are the analysis's own; nothing is recomputed here.

The report is a list of *sections*, each a function ``f(ctx) -> str`` (HTML, or "" to leave it out)
registered in :data:`SECTIONS` in print order. A new kind of result adds its section with
:func:`add_section` (``after=`` an existing id) without touching the others.
"""

from __future__ import annotations

import datetime as _dt
import json
import logging
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ..about import CAUTION
from .page import Raw, caution, e, num, page, project_of, svg_figure, table, title_block, verdict_span

__all__ = ["ReportContext", "SECTIONS", "add_section", "build_report", "render_figures", "input_text"]

log = logging.getLogger("seepfe")


@dataclass
class ReportContext:
    """What every section function reads: the analysis, the figures drawn, and display helpers."""

    analysis: object
    figures: list = field(default_factory=list)          # [FigureItem with .svg]
    generated: str = ""
    paper: str = "A4"
    numbers: dict = field(default_factory=dict)          # figure name -> figure number

    def __post_init__(self):
        from ..plot.base import sides, structure_kind
        r = self.analysis.result
        self.result, self.sec = r, r.section
        self.spec = self.sec.spec
        self.u = self.sec.units
        self.fL, self.LU = self.u.factor("length"), self.u.length
        self.fq, self.FL = self.u.factor("flow"), self.u.label("flow").replace("3", "³")
        self.fK, self.KU = self.u.factor("conductivity"), self.u.conductivity
        self.fW, self.WU = self.u.factor("unit_weight"), self.u.unit_weight.replace("3", "³")
        self.sides = sides(self.sec)
        self.kind, self.kind_from = structure_kind(self.sec)
        self.gv = self.analysis.governing
        for i, f in enumerate(self.figures, 1):
            self.numbers[f.name] = i

    # display helpers (the section file's units; summary.json stays SI)
    def L(self, v, fmt="{:.2f}") -> str:
        return num(None if v is None else v / self.fL, fmt)

    def text(self, s: str) -> str:
        from ..units import display_text
        return display_text(s, self.u)

    def fig_ref(self, name: str) -> str:
        n = self.numbers.get(name)
        return f"figure {n}" if n else ""


SectionFn = Callable[[ReportContext], str]
#: the report's sections in print order: (id, function)
SECTIONS: list[tuple[str, SectionFn]] = []


def add_section(ident: str, fn: SectionFn, after: str | None = None) -> None:
    """Register a report section (``fn(ctx) -> html``), at the end or right after the section ``after``."""
    ids = [i for i, _ in SECTIONS]
    if ident in ids:
        SECTIONS[ids.index(ident)] = (ident, fn)
        return
    pos = ids.index(after) + 1 if after in ids else len(SECTIONS)
    SECTIONS.insert(pos, (ident, fn))


def _section(ident: str):
    def deco(fn):
        add_section(ident, fn)
        return fn
    return deco


# ============================================================================ sections, in print order
@_section("title")
def _title(c: ReportContext) -> str:
    from ..about import __version__
    title = c.spec.title or c.sec.source
    extra = [("structure", f"{c.kind} ({c.kind_from})"), ("units", c.u.name),
             ("seepfe", __version__), ("input SHA-256", c.sec.input_hash[:16] + "…")]
    return (f"<h1>{e(title)}</h1>" + title_block(project_of(c.spec), title, "Seepage analysis of one section", extra)
            + f'<p class="meta">Steady seepage by finite elements · seepfe {e(__version__)} · input '
              f"<code>{e(c.sec.source)}</code> · SHA-256 <code>{e(c.sec.input_hash)}</code> · {e(c.generated)}</p>"
            + caution())


@_section("results")
def _results(c: ReportContext) -> str:
    a, gv, r = c.analysis, c.gv, c.result
    bal = r.balance
    net = a.flow_net
    qs = 0.5 * (bal["inflow_m3_s_per_m"] + bal["outflow_m3_s_per_m"])
    cards = [(f"{num(qs / c.fq, '{:.3e}')} {c.FL}", "seepage through the section"
              + (f" ({num(qs * 86400.0, '{:.3g}')} m³/day per m)" if c.u.is_si else "")),
             (f"{num(net.head_loss / c.fL, '{:.3f}')} {c.LU}", "total head loss H across the section")]
    if gv["fs"] is not None:
        where = (f" at {gv['distance_from_toe_m'] / c.fL:+.1f} {c.LU} from the {c.sides['toe']}"
                 if gv.get("distance_from_toe_m") is not None else f" at x = {gv['x_m'] / c.fL:.1f} {c.LU}")
        cards.append((Raw(f"{num(gv['fs'], '{:.2f}')} {verdict_span(gv['verdict'])}"),
                      f"least factor of safety ({gv['mode']}) along '{gv['boundary']}'{where}"))
    else:
        cards.append((Raw(f"– {verdict_span(gv['verdict'])}"), "least factor of safety: " + c.text(gv["why"])))
    if gv["exit_gradient_max"] is not None:
        cards.append((f"{num(gv['exit_gradient_max'], '{:.3f}')} m/m",
                      f"largest exit gradient along '{gv['exit_gradient_boundary']}' at x = "
                      f"{gv['exit_gradient_x_m'] / c.fL:.1f} {c.LU}"))
    if gv.get("failing_length_m"):
        cards.append((f"{gv['failing_length_m'] / c.fL:.1f} {c.LU}",
                      f"failing length (out to {gv['fails_within_m_of_toe'] / c.fL:.1f} {c.LU} from the "
                      f"{c.sides['toe']})"))
    ph = a.phreatic.get("phreatic_line")
    if ph:
        p = ph["downstream_end_m"]
        cards.append((f"x {p[0] / c.fL:.2f}, y {p[1] / c.fL:.2f} {c.LU}",
                      "phreatic surface: where it leaves the section (exit point)"))
    cards.append((f"{bal['relative_error']:.1e}", "relative flow-balance error (in − out) / in"))
    P = ["<h2 id=\"results\">1. Results</h2>",
         '<div class="gov" id="governing">' + "".join(
             f"<div><b>{v if isinstance(v, Raw) else e(v)}</b><span>{e(t)}</span></div>" for v, t in cards) + "</div>",
         f'<p id="verdict"><b>Verdict: {verdict_span(gv["verdict"])}.</b> {e(c.text(gv["why"]))}</p>']
    return "\n".join(P)


@_section("checks")
def _checks(c: ReportContext) -> str:
    a = c.analysis
    P = ["<h3 id=\"checks\">Exit gradients, heave and uplift</h3>"]
    if not a.exits:
        P.append('<p class="note">No exit surface is checked: ' + e(" ".join(a.notes)) + "</p>")
        return "\n".join(P)
    rows = []
    for name, ex in a.exits.items():
        g = ex.governing
        st = "; ".join(f"{x0 / c.fL:+.1f} to {x1 / c.fL:+.1f}" for x0, x1 in g.get("failing_stretches_m") or []) or "–"
        rows.append([name, g["points"], num(g["exit_gradient_max"], "{:.3f}"), num(g["surface_gradient_max"], "{:.3f}"),
                     num(g["fs"], "{:.2f}"), g["mode"] or "–", c.L(g["distance_from_toe_m"], "{:+.1f}"),
                     c.L(g["top_stratum_thickness_m"]), st, c.L(g.get("failing_length_m"), "{:.1f}"),
                     verdict_span(g["verdict"])])
    LU = c.LU
    P.append(table(["exit surface", "check points", "largest exit gradient (m/m)", "largest surface gradient (m/m)",
                    "least FS (-)", "governed by", f"at, from the toe ({LU})", f"top stratum there ({LU})",
                    f"failing stretches, from the toe ({LU})", f"failing length ({LU})", "verdict"], rows,
                   {1, 2, 3, 4, 6, 7, 9}, id="checks-table"))
    fig = c.fig_ref(next((f.name for f in c.figures if f.name.startswith("exit_gradient")), ""))
    P.append('<p class="note">Failing stretches: each run of check points that fails the criteria, extended half-way '
             "to the neighbouring points that pass, as horizontal distance from the toe (+ away from the embankment, "
             f"− on its slope); the failing length is their sum. The same stretches are shaded in {fig or 'the figures'}."
             " The exit gradient is the mean gradient across the top stratum where there is one, else the vertical "
             "gradient at the surface; FS heave = critical gradient / exit gradient, FS uplift = buoyant weight of "
             "the top stratum / excess water pressure under it.</p>")
    crit = c.gv.get("criteria")
    if crit:
        P.append(table(["criterion", "value"], [["required FS against heave (-)", num(crit["fs_heave"], "{:g}")],
                                                 ["required FS against uplift (-)", num(crit["fs_uplift"], "{:g}")],
                                                 ["allowable exit gradient (m/m)", num(crit["allowable_gradient"], "{:g}")],
                                                 ["source", crit["source"]]], {1}, caption="criteria"))
    notes = [n for ex in a.exits.values() for n in ex.notes] + list(a.notes)
    for n in dict.fromkeys(notes):
        P.append(f'<p class="note">{e(c.text(n))}</p>')
    return "\n".join(P)


@_section("hand")
def _hand(c: ReportContext) -> str:
    from ..checks.methods import QUANTITIES
    a, u = c.analysis, c.u
    rows, na, detail = [], [], []
    for m in a.hand:
        if not m.applies:
            na.append([m.title, m.why])
            continue
        for q, unit, label in QUANTITIES[m.method]:
            hv, fv = m.values.get(q, (None, None))
            hv, fv, unit = _shown(hv, fv, unit, u)
            rows.append([m.title, f"{label} ({unit})", num(hv), num(fv)])
        irows = []
        for name, d in m.inputs.items():
            v, unit = d.get("value"), d.get("unit", "")
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                v, _, unit = _shown(v, None, unit, u)
                v = num(v, "{:.5g}")
            irows.append([name, v if v is not None else "–", unit or "-", d.get("meaning", "")])
        block = [f'<h4 class="small">{e(m.title)}: inputs to redo it by hand</h4>',
                 f'<p class="note">Applied to: {e(c.text(m.why))}.</p>']
        if irows:
            block.append(table(["input", "value", "unit", "meaning"], irows, {1}))
        if m.assumptions:
            block.append(f'<p class="note">Assumptions: {e(m.assumptions)}</p>')
        for n in m.notes:
            block.append(f'<p class="note">Note: {e(c.text(n))}</p>')
        detail.append("\n".join(block))
    P = ['<h3 id="hand">Hand methods beside the finite elements</h3>']
    if rows:
        P.append(table(["method", "quantity", "hand method", "finite elements"], rows, {2, 3}, id="hand-table"))
    else:
        P.append('<p class="note">No hand method applies to this section as drawn (reasons below).</p>')
    P += detail
    if na:
        P.append(table(["method", "does not apply because"], [[t, c.text(w)] for t, w in na], caption="not applicable",
                       id="hand-not-applicable"))
    return "\n".join(P)


def _shown(hv, fv, unit, u):
    dim = {"m": "length", "m3/s per m": "flow", "m/s": "conductivity", "kN/m3": "unit_weight"}.get(unit)
    if dim is None or u.factor(dim) == 1.0:
        return hv, fv, unit.replace("3", "³") if unit else unit
    f = u.factor(dim)
    return ((None if hv is None else hv / f), (None if fv is None else fv / f), u.label(dim).replace("3", "³"))


@_section("flows")
def _flows(c: ReportContext) -> str:
    r, a = c.result, c.analysis
    kinds = {b.name: b.kind.replace("_", " ") for b in c.spec.boundaries}
    P = ['<h3 id="flows">Flows and the flow net</h3>',
         table(["boundary", "kind", f"flow ({c.FL}, + into the section)"],
               [[n, kinds.get(n, "drain zone"), num(q / c.fq, "{:+.4e}")] for n, q in r.flows.items()], {2})]
    bal = r.balance
    P.append(table([f"inflow ({c.FL})", f"outflow ({c.FL})", f"net ({c.FL})", "relative error (-)"],
                   [[num(bal["inflow_m3_s_per_m"] / c.fq, "{:.4e}"), num(bal["outflow_m3_s_per_m"] / c.fq, "{:.4e}"),
                     num(bal["net_m3_s_per_m"] / c.fq, "{:+.2e}"), num(bal["relative_error"], "{:.1e}")]],
                   {0, 1, 2, 3}, caption="balance"))
    net = a.flow_net
    fd = net.as_dict()
    P.append(table(["flow net", "value"], [
        ["flow channels Nf (-)", num(fd["n_channels_Nf"], "{:.3f}")],
        ["equipotential drops Nd (-)", fd["n_drops_Nd"]],
        [f"head drop between equipotentials ({c.LU})", num(fd["head_drop_m"] / c.fL, "{:.4g}")],
        [f"flow per channel ({c.FL})", num(fd["flow_per_channel_m3_s_per_m"] / c.fq, "{:.4e}")],
        [f"reference k ({c.KU})", f"{num(fd['k_ref_m_s'] / c.fK, '{:.3g}')} ({fd['reference_material']})"],
        ["net of squares", "yes" if net.squares else "no (zones differ in k: channels of equal flow)"],
        [f"q from the stream function ({c.FL})", num(fd["q_stream_function_m3_s_per_m"] / c.fq, "{:.4e}")],
        [f"q from the boundary reactions ({c.FL})", num(fd["q_solver_m3_s_per_m"] / c.fq, "{:.4e}")]], {1}))
    return "\n".join(P)


@_section("phreatic")
def _phreatic(c: ReportContext) -> str:
    ph = c.analysis.phreatic
    rows = []
    line = ph.get("phreatic_line")
    if line:
        for what, key in (("enters (upstream end)", "upstream_end_m"), ("leaves (exit point)", "downstream_end_m")):
            p = line[key]
            rows.append(["phreatic surface", what, f"{p[0] / c.fL:.2f}", f"{p[1] / c.fL:.2f}", "–", "–"])
    for n, f in ph.get("seepage_faces", {}).items():
        if f.get("exit_point_m"):
            p = f["exit_point_m"]
            rows.append([f"seepage face '{n}'", "highest wet point", f"{p[0] / c.fL:.2f}", f"{p[1] / c.fL:.2f}",
                         f"{f['length_m'] / c.fL:.2f}", num(-f["outflow_m3_s_per_m"] / c.fq, "{:+.3e}")])
    for n, q in ph.get("drain_outflow_m3_s_per_m", {}).items():
        rows.append([f"drain '{n}'", "outflow", "–", "–", "–", num(q / c.fq, "{:+.3e}")])
    if not rows:
        return ('<h3 id="phreatic">Phreatic surface</h3><p class="note">The section is saturated throughout '
                "(no phreatic surface inside it).</p>")
    return ('<h3 id="phreatic">Phreatic surface and exit points</h3>'
            + table(["where", "what", f"x ({c.LU})", f"y ({c.LU})", f"wet length ({c.LU})", f"outflow ({c.FL})"],
                    rows, {2, 3, 4, 5}, id="phreatic-table"))


@_section("assumptions")
def _assumptions(c: ReportContext) -> str:
    return '<h2 id="assumptions">2. Assumptions</h2>\n<ul class="assume" id="assumptions-list">' + "".join(
        f"<li>{x}</li>" for x in assumptions(c)) + "</ul>"


def assumptions(c: ReportContext) -> list[str]:
    """The assumptions of this run, written from what was solved (HTML items)."""
    r, sec, spec, a = c.result, c.sec, c.spec, c.analysis
    sv = r.solver_info
    run = getattr(r, "run", None)              # a moment of a transient run (docs/transient.md)
    flow = ("Steady two-dimensional Darcy flow" if run is None else
            "Transient two-dimensional flow under the hydrograph (mixed form of Richards' equation: specific storage "
            "below the phreatic surface, the retention curve above it, rigid soil; section 4); the results are those "
            f"of the moment of the least FS, t = {r.time_s / 3600:.4g} h")
    out = [f"{flow} in the vertical plane of the section, per {e(c.LU)} of "
           f"{e(c.kind)} length (flows in {e(c.FL)}); no flow along the {e(c.kind)}"
           + (", no transient storage. " if run is None else ". ") +
           f"Elevations and heads in {e(c.LU)}" + (f", vertical datum: {e(project_of(spec)['datum'])}."
                                                   if project_of(spec)["datum"] else ", on the datum of the section file.")]
    # boundary conditions with their positions
    items = []
    for b in spec.boundaries:
        line = np.asarray(b.polyline, float)
        pos = (f"from ({line[0, 0] / c.fL:.4g}, {line[0, 1] / c.fL:.4g}) to ({line[-1, 0] / c.fL:.4g}, "
               f"{line[-1, 1] / c.fL:.4g}) {c.LU}")
        if b.kind == "head":
            what = f"total head {b.head / c.fL:.3f} {c.LU}" + (" below its level, a seepage face above it"
                                                            if b.dry_above_level else "")
        elif b.kind == "seepage_face":
            what = "seepage face: head = elevation where water leaves, no flow where it would enter"
        elif b.kind == "drain":
            what = "drain at atmospheric pressure: outflow only"
        else:
            what = f"prescribed inflow {c.u.from_si(b.flux, 'flux'):.4g} {c.u.label('flux')}"
        items.append(f"<b>{e(b.name)}</b>: {e(what)}, {e(pos)}")
    out.append("Boundary conditions: " + "; ".join(items) + ".")
    nf = no_flow_pieces(sec)
    if nf:
        out.append("No flow across the rest of the outline (the model's ends and base are placed far enough not to "
                   "matter, or are real impervious boundaries): " + "; ".join(e(c.text(p)) for p in nf) + ".")
    bars = list(getattr(spec, "barriers", None) or [])
    if bars:
        out.append("Zero-thickness impervious barriers (no flow across; the head may jump): " + "; ".join(
            f"<b>{e(b.name)}</b> from ({b.polyline[0][0] / c.fL:.4g}, {b.polyline[0][1] / c.fL:.4g}) to "
            f"({b.polyline[-1][0] / c.fL:.4g}, {b.polyline[-1][1] / c.fL:.4g}) {e(c.LU)}" for b in bars) + ".")
    drains = [z.name for z in spec.zones if z.drain]
    if drains:
        out.append("Drain zones at atmospheric pressure (take water out, never put it in): "
                   + ", ".join(f"<b>{e(d)}</b>" for d in drains) + ".")
    # conductivity
    out.append("Saturated conductivities as listed under Inputs, anisotropic where kx and ky differ (kx along the "
               "angle given), uniform within each zone.")
    # the unsaturated model
    un = sv.get("unconfined")
    if un:
        kr = un.get("kr_model", {})
        vg = kr.get("van_genuchten_zones") or []
        txt = ("Part of the section is above the phreatic surface: saturated-unsaturated flow was solved "
               f"({e(un.get('method', ''))} iteration, {un.get('iterations', '?')} iterations, "
               f"{'converged' if un.get('converged') else 'NOT converged'}). Above the phreatic surface the soil "
               f"conducts with a relative conductivity kr = kr_min + (1 − kr_min) exp(ψ / δ), kr_min = "
               f"{kr.get('kr_min', 1e-6):g}, δ = {kr.get('delta_factor', 0.25):g} × the element size (a steep "
               "transition: the free surface is as sharp as the mesh carries)")
        if vg:
            txt += "; van Genuchten–Mualem retention in " + ", ".join(e(z) for z in vg)
        out.append(txt + ". The phreatic surface is the contour of zero pressure head.")
    elif spec.solver.phreatic == "off":
        out.append("The whole section was treated as saturated (solver.phreatic = off): heads below the ground are "
                   "not a phreatic surface.")
    else:
        out.append("The whole section is saturated (confined flow); no unsaturated model was needed.")
    # top stratum, toe
    for name, ex in a.exits.items():
        t = np.asarray(ex.thickness, float)
        tt = (f"; its thickness under the checked surface ranges {np.nanmin(t) / c.fL:.2f} to {np.nanmax(t) / c.fL:.2f} "
              f"{c.LU}" if np.isfinite(t).any() else "; none was found, so there is no uplift check")
        out.append(f"Exit surface <b>{e(name)}</b> ({e(a.rule)}): toe at x = {ex.toe_x / c.fL:.2f} {e(c.LU)} "
                   f"({e(ex.toe_source)}). Top stratum used by the checks: {e(c.text(ex.top_stratum_method))}{e(tt)}. "
                   f"Gradients: {e(ex.method)}.")
    crit = c.gv.get("criteria")
    if crit:
        out.append(f"Criteria: FS against heave ≥ {crit['fs_heave']:g}, against uplift ≥ {crit['fs_uplift']:g}, exit "
                   f"gradient ≤ {crit['allowable_gradient']:g}; source: {e(crit['source'])}. Unit weight of water "
                   f"{sec.gamma_w / c.fW:.4g} {e(c.WU)}. Local codes and agency criteria govern.")
    na = [m for m in a.hand if not m.applies]
    if na:
        out.append("Hand methods that do not apply to this section as drawn: " + "; ".join(
            f"{e(m.title)}: {e(c.text(m.why))}" for m in na) + ".")
    st = r.mesh.stats
    out.append(f"Discretisation: {st.get('elements')} P{st.get('order')} triangles, {st.get('nodes')} nodes, element "
               f"size {num(None if st.get('size_m') is None else st['size_m'] / c.fL, '{:.3g}')} {e(c.LU)}; the "
               "surface gradient exactly at a toe is singular and grows with refinement (the checks rely on the "
               "gradient across the top stratum).")
    for w in sec.warnings:
        out.append(f"Warning from the input: {e(c.text(w))}")
    return out


def no_flow_pieces(sec) -> list[str]:
    """The parts of the outline that no boundary covers (no flow), described by position (m, in words)."""
    from shapely.geometry import LineString
    from shapely.ops import unary_union
    ring = LineString(np.asarray(sec.outline.exterior.coords))
    lines = [LineString(np.asarray(b.polyline, float)) for b in sec.spec.boundaries]
    covered = unary_union([ln.buffer(sec.length_tol) for ln in lines]) if lines else None
    rest = ring.difference(covered) if covered is not None else ring
    from shapely.ops import linemerge
    if rest.geom_type == "MultiLineString":
        rest = linemerge(rest)
    x0, y0, x1, y1 = sec.outline.bounds
    tol = sec.length_tol
    out = []
    for g in getattr(rest, "geoms", [rest]):
        if g.is_empty or g.length <= 2 * tol:
            continue
        c = np.asarray(g.coords)
        # split into straight runs (the outline's vertices are few: a loop over them is cheap)
        runs, cur = [], [c[0], c[1]]
        for p in c[2:]:
            d0, d1 = cur[-1] - cur[-2], p - cur[-1]
            if abs(d0[0] * d1[1] - d0[1] * d1[0]) <= tol * max(np.hypot(*d0), np.hypot(*d1)):
                cur.append(p)
            else:
                runs.append(np.asarray(cur))
                cur = [cur[-1], p]
        runs.append(np.asarray(cur))
        for r in runs:
            if np.hypot(*(r[-1] - r[0])) <= 2 * tol:
                continue
            if np.ptp(r[:, 0]) <= tol:
                side = ("left end" if abs(r[0, 0] - x0) <= tol else "right end" if abs(r[0, 0] - x1) <= tol
                        else "vertical face")
                out.append(f"{side} x = {r[0, 0]:.2f} m, from y = {r[:, 1].min():.2f} m to {r[:, 1].max():.2f} m")
            elif np.ptp(r[:, 1]) <= tol:
                side = "base" if abs(r[0, 1] - y0) <= tol else "level edge"
                out.append(f"{side} y = {r[0, 1]:.2f} m, from x = {r[:, 0].min():.2f} m to {r[:, 0].max():.2f} m")
            else:
                out.append(f"from ({r[0, 0]:.2f} m, {r[0, 1]:.2f} m) to ({r[-1, 0]:.2f} m, {r[-1, 1]:.2f} m)")
    return out


@_section("inputs")
def _inputs(c: ReportContext) -> str:
    spec, sec = c.spec, c.sec
    P = ['<h2 id="inputs">3. Inputs</h2>']
    rows = []
    for n, mt in spec.materials.items():
        kx = mt.k if mt.k is not None else mt.kx
        ky = mt.k if mt.k is not None else mt.ky
        rows.append([n, mt.description or "", num(kx / c.fK, "{:.3g}"), num(ky / c.fK, "{:.3g}"), num(mt.angle, "{:g}"),
                     num(None if mt.unit_weight is None else mt.unit_weight / c.fW, "{:.4g}"),
                     "van Genuchten α {:.3g}, n {:.3g}".format(mt.unsaturated.alpha * c.fL, mt.unsaturated.n)
                     if mt.unsaturated else "–"])
    P.append(table(["material", "description", f"kx ({c.KU})", f"ky ({c.KU})", "angle of kx (°)",
                    f"unit weight ({c.WU})", f"unsaturated (α in 1/{c.LU})"], rows, {2, 3, 4, 5}, caption="materials",
                   id="materials-table"))
    P.append(table(["zone", "material", f"area ({c.LU}²)", "vertices", "drain"],
                   [[z.name, z.material, num(abs(_area(p)) / c.fL ** 2, "{:.4g}"), len(p), "yes" if z.drain else ""]
                    for z, p in zip(spec.zones, sec.polygons)], {2, 3}, caption="zones"))
    for rd in c.analysis.remedies:
        items = [[k, num(v, "{:.4g}")] for k, v in rd.items() if isinstance(v, (int, float)) and not isinstance(v, bool)]
        P.append(table(["quantity (SI)", "value"], items, {1},
                       caption=f"remedy '{rd.get('name', rd['type'])}' ({rd['type'].replace('_', ' ')})"))
        if rd.get("limits"):
            P.append(f'<p class="note">Limits: {e(rd["limits"])}</p>')
    return "\n".join(P)


def _area(p) -> float:
    x, y = p[:, 0], p[:, 1]
    return 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))


@_section("solver")
def _solver(c: ReportContext) -> str:
    sv = dict(c.result.solver_info)
    times = sv.pop("times_s", {}) or {}
    rows = [[k.replace("_", " "), str(v)] for k, v in sv.items() if not isinstance(v, (dict, list))]
    rows += [[f"time: {k} (s)", num(v, "{:.3f}")] for k, v in times.items()]
    st = c.result.mesh.stats
    mesh = table(["elements", "nodes", "order", f"element size ({c.LU})", "smallest angle (°)", "worst quality (-)"],
                 [[st.get("elements"), st.get("nodes"), f"P{st.get('order')}", c.L(st.get("size_m"), "{:.3g}"),
                   num(st.get("min_angle_deg"), "{:.1f}"), num(st.get("worst_quality"), "{:.3f}")]],
                 {0, 1, 3, 4, 5}, caption="mesh")
    return '<h3 id="solver">Mesh and solver</h3>' + mesh + table(["solver", "value"], rows, {1})


@_section("figures")
def _figures(c: ReportContext) -> str:
    if not c.figures:
        return ""
    P = ['<h2 class="appendix" id="figures">Appendix A. Figures</h2>']
    for i, f in enumerate(c.figures, 1):
        P.append(svg_figure(f.svg, f.name, i, f.caption))
    return "\n".join(P)


@_section("input")
def _input(c: ReportContext) -> str:
    import base64
    name, raw = input_text(c.sec)
    text = raw.decode("utf-8", errors="replace")
    uri = "data:application/json;base64," + base64.b64encode(raw).decode("ascii")
    return ('<h2 class="appendix" id="input">Appendix B. The input file</h2>'
            f'<p class="note">The section file as it was read ({len(raw)} bytes, SHA-256 of its content '
            f"<code>{e(c.sec.input_hash)}</code>): with seepfe {e(_version())} it reproduces this report. "
            f'<a download="{e(name)}" href="{uri}">Save it as {e(name)}</a>.</p>'
            f'<details id="input-file"><summary>{e(name)} (click to open)</summary><pre>{e(text)}</pre></details>'
            + caution())


def _version() -> str:
    from ..about import __version__
    return __version__


def input_text(sec) -> tuple[str, bytes]:
    """The section file as read: its name and bytes (byte for byte where it is unchanged since the run)."""
    from ..export import input_bytes
    return input_bytes(sec)


# ============================================================================ building
def render_figures(analysis, *, show_mesh: bool = False, arrows: bool = False, exaggeration: float | None = None,
                   formats=("svg",), folder=None, workers: int | None = None) -> list:
    """Draw the standard figures of the analysis once each; keep the SVG (embedded in the report) and write
    the ``formats`` asked for into ``folder`` (if given). Returns the FigureItems with ``.svg`` set.

    ``workers``: processes that draw (default :func:`figure_workers`: 2 where the machine has two free cores
    and can fork, else 1). With 2, a forked copy of this process draws every other figure while this one
    draws the rest (each figure is independent; the files and SVG bytes are the same as drawn in turn).
    Should the copy fail, its figures are drawn here.
    """
    from ..plot import figure_plan
    from ..plot.save import FigureItem
    plan = figure_plan(analysis.result, show_mesh=show_mesh, arrows=arrows, analysis=analysis,
                       exaggeration=exaggeration, pressure_whole=False)

    def one(i: int) -> bytes:
        import io
        from ..plot.style import style
        name, _, draw = plan[i]
        log.info("figure %d of %d: %s", i + 1, len(plan), name)
        fig = draw()
        with style():
            buf = io.BytesIO()
            fig.savefig(buf, format="svg", metadata={"Date": None})
            svg = buf.getvalue()
            if folder is not None:
                for f in formats:
                    p = folder / f"{name}.{f}"
                    if f == "svg":
                        p.write_bytes(svg)
                    else:
                        fig.savefig(p, format=f, dpi=200, metadata={"Software": None} if f == "png" else
                                    {"CreationDate": None} if f == "pdf" else {})
        fig.clear()
        return svg

    n_workers = figure_workers() if workers is None else max(1, int(workers))
    svgs = _draw_forked(one, len(plan)) if n_workers > 1 and len(plan) >= 4 else [one(i) for i in range(len(plan))]
    items = []
    for (name, caption, _), svg in zip(plan, svgs):
        item = FigureItem(name, caption, None)
        item.svg = svg
        items.append(item)
    return items


def figure_workers() -> int:
    """Processes that draw a report's figures: 2 on a machine with at least two usable cores that can fork
    (Linux), else 1; the environment variable ``SEEPFE_FIGURE_WORKERS=1`` keeps it to one."""
    import os
    import sys
    env = os.environ.get("SEEPFE_FIGURE_WORKERS", "").strip()
    if env == "1" or not sys.platform.startswith("linux") or not hasattr(os, "fork"):
        return 1
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    return 2 if cores >= 2 else 1


def _draw_forked(one, n: int) -> list:
    """[one(i) for i in range(n)], the odd i drawn by a forked copy of this process (results back through a
    pipe), the even ones here; whatever the copy did not deliver is drawn here."""
    import os
    import pickle
    import signal
    import warnings
    theirs = list(range(1, n, 2))
    r, w = os.pipe()
    with warnings.catch_warnings():
        # Python >= 3.12 warns that forking a process with threads (here the BLAS pool, idle) may deadlock the
        # child; the copy only draws with matplotlib and leaves by os._exit, and BLAS re-arms its pool at fork
        warnings.filterwarnings("ignore", message=r".*use of fork\(\) may lead to deadlocks", category=DeprecationWarning)
        pid = os.fork()
    if pid == 0:                                   # the copy: draw, send, and leave without any clean-up
        code = 1
        try:
            os.close(r)
            data = pickle.dumps([one(i) for i in theirs])
            with os.fdopen(w, "wb") as f:
                f.write(data)
            code = 0
        except BaseException:                      # noqa: BLE001 - the parent draws what is missing
            pass
        finally:
            os._exit(code)
    os.close(w)
    out: list = [None] * n
    try:
        for i in range(0, n, 2):
            out[i] = one(i)
        f, r = os.fdopen(r, "rb"), None
        with f:
            data = f.read()
        _, status = os.waitpid(pid, 0)
        pid = None
        got = pickle.loads(data) if status == 0 and data else None
        if isinstance(got, list) and len(got) == len(theirs):
            for i, svg in zip(theirs, got):
                out[i] = svg
    finally:
        if r is not None:
            os.close(r)
        if pid is not None:                        # this side failed: stop the copy and reap it
            try:
                os.kill(pid, signal.SIGKILL)
                os.waitpid(pid, 0)
            except OSError:
                pass
    for i in theirs:
        if out[i] is None:
            out[i] = one(i)
    return out


def build_report(analysis, figures=None, *, show_mesh: bool = False, arrows: bool = False, generated: str | None = None,
                 paper: str = "A4", exaggeration: float | None = None, sections=None) -> str:
    """The report of one section as one HTML string, from an :class:`seepfe.Analysis` (a Result is analysed
    first). ``figures``: FigureItems with ``.svg`` (default: :func:`render_figures`); ``sections``: ids of
    :data:`SECTIONS` to include (default all)."""
    from ..about import __version__
    from ..analysis import Analysis, analyse
    if not isinstance(analysis, Analysis):
        analysis = analyse(analysis)
    if figures is None:
        figures = render_figures(analysis, show_mesh=show_mesh, arrows=arrows, exaggeration=exaggeration)
    for f in figures:
        if getattr(f, "svg", None) is None and getattr(f, "fig", None) is not None:
            import io
            from ..plot.style import style
            with style():
                buf = io.BytesIO()
                f.fig.savefig(buf, format="svg", metadata={"Date": None})
            f.svg = buf.getvalue()
    generated = generated or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    ctx = ReportContext(analysis, list(figures), generated, paper)
    body = []
    for ident, fn in SECTIONS:
        if sections is not None and ident not in sections:
            continue
        body.append(fn(ctx))
    title = ctx.spec.title or ctx.sec.source
    return page(title, body, project_of(ctx.spec), "Seepage analysis of one section", paper,
                f"seepfe {__version__}")


def write_report(analysis, folder, *, show_mesh: bool = False, arrows: bool = False, formats=("svg",),
                 paper: str = "A4", exaggeration: float | None = None) -> "Path":
    """Write ``report.html`` and its figures (``figures/*.svg``, and PNG or PDF if in ``formats``) into an
    existing folder; return the HTML path."""
    from pathlib import Path
    from ..analysis import Analysis, analyse
    if not isinstance(analysis, Analysis):
        analysis = analyse(analysis)
    folder = Path(folder)
    (folder / "figures").mkdir(exist_ok=True)
    items = render_figures(analysis, show_mesh=show_mesh, arrows=arrows, exaggeration=exaggeration,
                           formats=tuple(dict.fromkeys(("svg",) + tuple(formats))), folder=folder / "figures")
    text = build_report(analysis, figures=items, paper=paper)
    path = folder / "report.html"
    path.write_text(text, encoding="utf-8")
    return path


def summary_json(analysis) -> str:
    return json.dumps(analysis.to_dict(), indent=1)


_ = CAUTION


def _transient(c: ReportContext) -> str:
    """A moment of a transient run (docs/transient.md): the run's own section (seepfe.report_transient)."""
    if getattr(c.result, "run", None) is None:
        return ""
    import importlib
    return importlib.import_module("seepfe.report_transient").report_section(c)


add_section("transient", _transient, after="inputs")
