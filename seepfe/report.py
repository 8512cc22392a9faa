"""A one-file HTML report of a solved section: inputs, figures, flows, checks, governing values.

The file is self-contained (figures embedded as base64 PNG, styles inline, no script, no external
link), so it can be mailed, archived or printed to PDF from any browser.  It carries the seepfe
version, the SHA-256 of the input and the caution (:data:`seepfe.result.CAUTION`).

>>> from seepfe.report import write_report                        # doctest: +SKIP
>>> write_report(result, "out/report")                             # out/report/report.html + figures
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
import logging
import math
from pathlib import Path

import numpy as np

from .errors import SeepfeError
from .about import CAUTION

__all__ = ["build_report", "write_report", "write_pdf"]

log = logging.getLogger("seepfe")

_CSS = """
body{font-family:"DejaVu Sans",Verdana,Arial,sans-serif;color:#2b2b2b;max-width:60rem;margin:1.5rem auto;
 padding:0 1.2rem;line-height:1.45;font-size:15px;background:#fff}
h1{font-size:1.45rem;margin:.2rem 0 .3rem}h2{font-size:1.15rem;margin:2rem 0 .6rem;padding-bottom:.2rem;
 border-bottom:1px solid #d8d8d8}h3{font-size:1rem;margin:1.2rem 0 .4rem}
.meta{color:#555;font-size:.85rem}.meta code{font-size:.8rem;word-break:break-all}
.caution{border-left:4px solid #D55E00;background:#fbf1ea;padding:.6rem .9rem;margin:1rem 0}
.gov{display:grid;grid-template-columns:repeat(auto-fit,minmax(13rem,1fr));gap:.6rem;margin:.6rem 0}
.gov div{border:1px solid #d8d8d8;border-radius:4px;padding:.5rem .7rem}
.gov b{display:block;font-size:1.15rem}.gov span{color:#555;font-size:.82rem}
.fail{color:#B34A00;font-weight:bold}.pass{color:#006e50;font-weight:bold}
table{border-collapse:collapse;margin:.4rem 0 1rem;font-size:.86rem}
th,td{border-bottom:1px solid #e2e2e2;padding:.25rem .6rem;text-align:left;vertical-align:top}
th{background:#f4f4f4;font-weight:600}td.n{text-align:right;font-variant-numeric:tabular-nums}
figure{margin:1rem 0 1.6rem;page-break-inside:avoid}figure img{max-width:100%;height:auto;display:block}
figcaption{font-size:.85rem;color:#444;margin-top:.3rem}
.note{font-size:.85rem;color:#555}
@media print{body{max-width:none;font-size:11pt}h2{page-break-after:avoid}}
"""


def _e(s) -> str:
    return html.escape(str(s), quote=True)


def _num(v, fmt="{:.4g}") -> str:
    if v is None:
        return "–"
    try:
        f = float(v)
    except (TypeError, ValueError):
        return _e(v)
    if math.isnan(f):
        return "–"
    if math.isinf(f):
        return "∞" if f > 0 else "−∞"
    return fmt.format(f)


def _table(header: list[str], rows: list[list], numeric: set[int] | None = None, cls: str = "") -> str:
    numeric = numeric or set()
    h = "".join(f"<th>{_e(x)}</th>" for x in header)
    body = []
    for r in rows:
        cells = []
        for i, c in enumerate(r):
            raw = c if isinstance(c, _Raw) else _e(c)
            cells.append(f'<td class="n">{raw}</td>' if i in numeric else f"<td>{raw}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f'<table class="{cls}"><thead><tr>{h}</tr></thead><tbody>{"".join(body)}</tbody></table>'


class _Raw(str):
    """Trusted HTML (already escaped)."""


def _png_data(fig, dpi: int = 150) -> tuple[str, bytes]:
    from .plot.style import style
    buf = io.BytesIO()
    with style():
        fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": None})
    data = buf.getvalue()
    return "data:image/png;base64," + base64.b64encode(data).decode("ascii"), data


def build_report(analysis, figures=None, *, show_mesh: bool = True, arrows: bool = True,
                 generated: str | None = None) -> str:
    """The report as one HTML string, from an :class:`seepfe.Analysis` (the verdict, the checks and the
    hand methods are the analysis's own; nothing is recomputed here).

    Parameters
    ----------
    analysis : seepfe.Analysis (a Result is analysed first)
    figures : iterable of :class:`seepfe.plot.FigureItem`, optional
        Default: the standard set (:func:`seepfe.plot.figure_set`), with the mesh and velocity arrows.
    generated : timestamp text (default: now, UTC).
    """
    from .about import __version__
    from .analysis import Analysis, analyse
    from .checks.methods import QUANTITIES
    from .plot import figure_set
    from .plot.base import boundary_label
    if not isinstance(analysis, Analysis):
        analysis = analyse(analysis)
    result = analysis.result
    sec, m = result.section, result.mesh
    spec = sec.spec
    net = analysis.flow_net
    profiles = analysis.exits
    summary = analysis.to_dict()
    gv = analysis.governing
    bal = result.balance
    qs = 0.5 * (bal["inflow_m3_s_per_m"] + bal["outflow_m3_s_per_m"])
    # shown in the section file's units (summary.json stays SI)
    from .units import display_text
    un = sec.units
    fq, FL = un.factor("flow"), un.label("flow").replace("3", "³")
    fL, LU = un.factor("length"), un.length
    fK, KU = un.factor("conductivity"), un.conductivity
    fW, WU = un.factor("unit_weight"), un.unit_weight.replace("3", "³")
    ln = lambda v: None if v is None else v / fL          # noqa: E731
    generated = generated or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    if figures is None:
        figures = figure_set(result, show_mesh=show_mesh, arrows=arrows, analysis=analysis)
    title = spec.title or sec.source
    P = []
    P.append(f"<h1>{_e(title)}</h1>")
    P.append(f'<p class="meta">Steady seepage by finite elements · seepfe {_e(__version__)} · input '
             f"<code>{_e(sec.source)}</code> · SHA-256 <code>{_e(sec.input_hash)}</code> · {_e(generated)}</p>")
    P.append(f'<p class="caution"><b>Caution.</b> {_e(CAUTION)}</p>')
    if not un.is_si:
        P.append(f'<p class="note">Shown in the section file\'s units: {_e(un.name)} (lengths {_e(LU)}, '
                 f"conductivities {_e(KU)}, flows {_e(FL)}, unit weights {_e(WU)}, pressures {_e(un.pressure)}); "
                 "summary.json and the *_m columns of the CSV files are SI.</p>")

    # governing values
    P.append("<h2>Governing values</h2>")
    cards = [(f"{_num(qs / fq, '{:.3e}')} {FL}",
              f"seepage through the section ({_num(qs * 86400.0, '{:.3g}')} m³/day per m)" if un.is_si
              else "seepage through the section"),
             (f"{_num(net.head_loss / fL, '{:.3f}')} {LU}", "total head loss H across the section")]
    if net.squares:
        cards.append((f"Nf / Nd = {net.n_channels:.2f} / {net.n_drops}",
                      f"flow net: q = k H Nf/Nd = {_num(net.k_ref * net.head_loss * net.shape_factor / fq, '{:.3e}')} "
                      f"{FL} with k = {_num(net.k_ref / fK, '{:.3g}')} {KU}"))
    else:
        cards.append((f"Nf = {net.n_channels:.0f}, Nd = {net.n_drops}",
                      "flow net: channels of equal flow (zones differ in k)"))
    cls = {"pass": "pass", "fail": "fail"}.get(gv["verdict"], "fail")
    verdict = f' <span class="{cls}">{_e(gv["verdict"])}</span>'
    if gv["fs"] is not None:
        where = (f" at {gv['distance_from_toe_m'] / fL:.1f} {LU} from the toe"
                 if gv.get("distance_from_toe_m") is not None else f" at x = {gv['x_m'] / fL:.1f} {LU}")
        cards.append((_Raw(f"{_num(gv['fs'], '{:.2f}')}{verdict}"),
                      f"least factor of safety ({gv['mode']}) along '{gv['boundary']}'{where}"))
    else:
        cards.append((_Raw(f"–{verdict}"), "least factor of safety: " + display_text(gv["why"], un)))
    if gv["exit_gradient_max"] is not None:
        cards.append((f"{_num(gv['exit_gradient_max'], '{:.3f}')} m/m",
                      f"largest exit gradient along '{gv['exit_gradient_boundary']}' at x = "
                      f"{gv['exit_gradient_x_m'] / fL:.1f} {LU}"))
    cards.append((f"{bal['relative_error']:.1e}", "relative flow-balance error (in − out) / in"))
    P.append('<div class="gov" id="governing">' + "".join(
        f"<div><b>{v if isinstance(v, _Raw) else _e(v)}</b><span>{_e(t)}</span></div>" for v, t in cards) + "</div>")
    P.append(f'<p id="verdict"><b>Verdict: <span class="{cls}">{_e(gv["verdict"])}</span>.</b> {_e(display_text(gv["why"], un))}</p>')
    if not profiles:
        P.append('<p class="note">No exit-gradient checks in this result (no seepage face to check, or the '
                 "checks are not available in this version).</p>")

    # inputs
    P.append("<h2>Inputs</h2><h3>Materials</h3>")
    rows = []
    for n, mt in spec.materials.items():
        kx = mt.k if mt.k is not None else mt.kx
        ky = mt.k if mt.k is not None else mt.ky
        rows.append([n, mt.description or "", _num(kx / fK, "{:.3g}"), _num(ky / fK, "{:.3g}"), _num(mt.angle, "{:g}"),
                     _num(None if mt.unit_weight is None else mt.unit_weight / fW, "{:.4g}")])
    P.append(_table(["material", "description", f"kx ({KU})", f"ky ({KU})", "angle of kx (°)", f"unit weight ({WU})"],
                    rows, {2, 3, 4, 5}))
    P.append("<h3>Zones</h3>")
    P.append(_table(["zone", "material", f"area ({LU}²)", "vertices"],
                    [[z.name, z.material, _num(abs(_area(p)) / fL ** 2, "{:.4g}"), len(p)]
                     for z, p in zip(spec.zones, sec.polygons)], {2, 3}))
    P.append("<h3>Boundaries</h3>")
    brow = []
    for b in spec.boundaries:
        line = np.asarray(b.polyline, float)
        L = float(np.linalg.norm(np.diff(line, axis=0), axis=1).sum())
        cond = {"seepage_face": "h = y where water leaves, no inflow", "drain": "h = y, outflow only"}.get(
            b.kind, boundary_label(b, un).split(": ", 1)[1])
        brow.append([b.name, b.kind.replace("_", " "), cond, _num(L / fL, "{:.4g}")])
    P.append(_table(["boundary", "kind", "condition", f"polyline length ({LU})"], brow, {3}))
    P.append('<p class="note">Outline edges not on any boundary carry no flow. Unit weight of water '
             f"{_num(sec.gamma_w / fW, '{:.4g}')} {WU}.</p>")
    st = m.stats
    P.append("<h3>Mesh</h3>")
    P.append(_table(["elements", "nodes", "order", f"element size ({LU})", "smallest angle (°)", "worst quality (-)"],
                    [[st.get("elements"), st.get("nodes"), f"P{st.get('order')}", _num(ln(st.get("size_m")), "{:.3g}"),
                      _num(st.get("min_angle_deg"), "{:.1f}"), _num(st.get("worst_quality"), "{:.3f}")]],
                    {0, 1, 3, 4, 5}))

    # figures
    P.append("<h2>Figures</h2>")
    for i, item in enumerate(figures, 1):
        png = getattr(item, "png", None)
        uri = ("data:image/png;base64," + base64.b64encode(png).decode("ascii")) if png else _png_data(item.fig)[0]
        _close(item.fig)
        P.append(f'<figure id="fig-{_e(item.name)}"><img src="{uri}" alt="{_e(item.caption)}">'
                 f"<figcaption>Figure {i}. {_e(item.caption)}.</figcaption></figure>")

    # flows
    P.append("<h2>Flows</h2>")
    if un.is_si:
        P.append(_table(["boundary", "kind", "flow (m³/s per m, + into the section)", "flow (m³/day per m)"],
                        [[b.name, b.kind.replace("_", " "), _num(result.boundary_flow(b.name), "{:+.4e}"),
                          _num(86400 * result.boundary_flow(b.name), "{:+.4g}")] for b in spec.boundaries], {2, 3}))
    else:
        P.append(_table(["boundary", "kind", f"flow ({FL}, + into the section)", "flow (m³/s per m)"],
                        [[b.name, b.kind.replace("_", " "), _num(result.boundary_flow(b.name) / fq, "{:+.4e}"),
                          _num(result.boundary_flow(b.name), "{:+.4e}")] for b in spec.boundaries], {2, 3}))
    bal = result.balance
    P.append(_table([f"inflow ({FL})", f"outflow ({FL})", f"net ({FL})", "relative error (-)"],
                    [[_num(bal["inflow_m3_s_per_m"] / fq, "{:.4e}"), _num(bal["outflow_m3_s_per_m"] / fq, "{:.4e}"),
                      _num(bal["net_m3_s_per_m"] / fq, "{:+.2e}"), _num(bal["relative_error"], "{:.1e}")]],
                    {0, 1, 2, 3}))
    fd = net.as_dict()
    P.append("<h3>Flow net</h3>")
    P.append(_table(["quantity", "value"], [
        ["flow channels Nf (-)", _num(fd["n_channels_Nf"], "{:.3f}")],
        ["equipotential drops Nd (-)", fd["n_drops_Nd"]],
        [f"head drop between equipotentials ({LU})", _num(fd["head_drop_m"] / fL, "{:.4g}")],
        [f"flow per channel ({FL})", _num(fd["flow_per_channel_m3_s_per_m"] / fq, "{:.4e}")],
        [f"reference k ({KU})", f"{_num(fd['k_ref_m_s'] / fK, '{:.3g}')} ({fd['reference_material']})"],
        ["net of squares", "yes" if net.squares else "no (zones differ in k: channels of equal flow)"],
        [f"q from the stream function ({FL})", _num(fd["q_stream_function_m3_s_per_m"] / fq, "{:.4e}")],
        [f"q from the boundary reactions ({FL})", _num(fd["q_solver_m3_s_per_m"] / fq, "{:.4e}")],
        ["stream-function misfit (-)", _num(fd["stream_function_misfit"], "{:.2e}")]], {1}))

    # checks
    if profiles:
        P.append("<h2>Exit-gradient, heave and uplift checks</h2>")
        rows = []
        for name, p in profiles.items():
            g = p.governing
            rows.append([name, g["points"], _num(g["exit_gradient_max"], "{:.3f}"),
                         _num(g["surface_gradient_max"], "{:.3f}"), _num(g["fs"], "{:.2f}"), g["mode"] or "–",
                         _num(ln(g["distance_from_toe_m"]), "{:.1f}"), _num(ln(g["top_stratum_thickness_m"]), "{:.2f}"),
                         _num(ln(g["fails_within_m_of_toe"]), "{:.1f}"),
                         _Raw(f'<span class="{"pass" if g["verdict"] == "pass" else "fail"}">{_e(g["verdict"])}</span>')])
        P.append(_table(["boundary", "points", "largest exit gradient (m/m)", "largest surface gradient (m/m)",
                         "least FS (-)", "governed by", f"at distance from toe ({LU})", f"top stratum ({LU})",
                         f"fails up to ({LU} from toe)", "verdict"], rows, {1, 2, 3, 4, 6, 7, 8}))
        crit = gv.get("criteria")
        if crit:
            P.append(_table(["criterion", "value"], [[k.replace("_", " "), v] for k, v in crit.items()], {}))
        notes = [n for p in profiles.values() for n in p.notes]
        for n in dict.fromkeys(notes + list(analysis.notes)):
            P.append(f'<p class="note">{_e(display_text(n, un))}</p>')

    # hand methods beside the finite elements
    hrows, na = [], []
    for mth in analysis.hand:
        if not mth.applies:
            na.append(f"{mth.title}: not applicable: {mth.why}")
            continue
        for q, unit, label in QUANTITIES[mth.method]:
            hv, fv = mth.values.get(q, (None, None))
            dim = {"m": "length", "m3/s per m": "flow"}.get(unit)
            if dim is not None and un.factor(dim) != 1.0:
                f = un.factor(dim)
                hv, fv, unit = (None if hv is None else hv / f), (None if fv is None else fv / f), un.label(dim)
            hrows.append([f"{mth.title}: {label} ({unit})", _num(hv), _num(fv), mth.why])
    if hrows or na:
        P.append("<h2>Hand methods beside the finite elements</h2>")
        if hrows:
            P.append(_table(["method: quantity", "hand method", "finite elements", "remark"], hrows, {1, 2}))
        for line in na:
            P.append(f'<p class="note">{_e(line)}</p>')

    # remedial measures
    for d in summary.get("remedies", []):
        P.append(f"<h3>Remedy '{_e(d.get('name', d['type']))}' ({_e(d['type'].replace('_', ' '))})</h3>")
        P.append(_table(["quantity", "value"],
                        [[k, _num(v, "{:.4g}")] for k, v in d.items() if isinstance(v, (int, float))
                         and not isinstance(v, bool)], {1}))
        if d.get("limits"):
            P.append(f'<p class="note">Limits: {_e(d["limits"])}</p>')

    # solver
    P.append("<h2>Solver</h2>")
    sv = dict(summary.get("solver", {}))
    times = sv.pop("times_s", {}) or {}
    srows = [[k.replace("_", " "), _e(v)] for k, v in sv.items() if not isinstance(v, (dict, list))]
    srows += [[f"time: {k} (s)", _num(v, "{:.3f}")] for k, v in times.items()]
    P.append(_table(["figure", "value"], srows, {1}))
    P.append(f'<p class="meta">seepfe {_e(__version__)} · input SHA-256 <code>{_e(sec.input_hash)}</code></p>')
    P.append(f'<p class="caution"><b>Caution.</b> {_e(CAUTION)}</p>')
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{_e(title)} – seepfe report"
            f"</title><meta name=\"generator\" content=\"seepfe {_e(__version__)}\"><style>{_CSS}</style></head>"
            "<body>\n" + "\n".join(P) + "\n</body></html>\n")


def _area(p) -> float:
    x, y = p[:, 0], p[:, 1]
    return 0.5 * float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y))


def _close(fig) -> None:
    fig.clear()


def write_report(analysis, folder, *, show_mesh: bool = True, arrows: bool = True, formats=("png", "svg")) -> Path:
    """Write ``report.html`` and every figure (PNG and SVG) into an existing folder; return the HTML path.

    ``analysis``: a :class:`seepfe.Analysis` (a Result is analysed first)."""
    from .analysis import Analysis, analyse
    from .plot import figure_set, save_figure
    if not isinstance(analysis, Analysis):
        analysis = analyse(analysis)
    folder = Path(folder)
    (folder / "figures").mkdir(exist_ok=True)
    items = []
    for item in figure_set(analysis.result, show_mesh=show_mesh, arrows=arrows, analysis=analysis):
        paths = save_figure(item.fig, folder / "figures" / item.name, formats=formats)
        item.png = next((p.read_bytes() for p in paths if p.suffix == ".png"), None)   # embed what was written
        _close(item.fig)
        items.append(item)
    text = build_report(analysis, figures=items)
    path = folder / "report.html"
    path.write_text(text, encoding="utf-8")
    return path


def write_pdf(html: Path, pdf: Path, timeout: float = 120.0) -> Path:
    """Print a report to PDF with headless Chromium (the browser must be installed; nothing is fetched).

    Raises SeepfeError when no Chromium is found or it fails, so the caller writes no PDF.
    """
    import shutil
    import subprocess
    import tempfile
    exe = next((shutil.which(n) for n in ("chromium", "chromium-browser", "google-chrome") if shutil.which(n)),
               None)
    if exe is None:
        raise SeepfeError("--pdf needs headless Chromium (Debian package 'chromium'); the HTML report is "
                          "self-contained and prints from any browser")
    with tempfile.TemporaryDirectory(prefix="seepfe-chromium-") as profile:
        cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
               "--disable-background-networking", "--disable-component-update", "--disable-sync",
               f"--user-data-dir={profile}", "--no-pdf-header-footer", f"--print-to-pdf={pdf}",
               Path(html).resolve().as_uri()]
        try:
            subprocess.run(cmd, check=True, capture_output=True, timeout=timeout)
        except (subprocess.SubprocessError, OSError) as e:
            raise SeepfeError(f"Chromium could not print the report to PDF ({type(e).__name__})") from None
    if not Path(pdf).exists() or Path(pdf).stat().st_size == 0:
        raise SeepfeError("Chromium wrote no PDF")
    return Path(pdf)
