"""The calibration as a report section (HTML fragment) and as a one-file HTML page.

:func:`report_section` returns ``<section id="calibration">...</section>`` with the tables and the figures
embedded (base64 PNG), self-contained, so the section report (:mod:`seepfe.report`) or any page can include it.
"""

from __future__ import annotations

import base64
import html

from ..about import CAUTION

__all__ = ["report_section", "report_page"]


def _e(s) -> str:
    return html.escape(str(s), quote=True)


def _n(v, fmt=".4g") -> str:
    return "–" if v is None else format(v, fmt)


def _table(header, rows) -> str:
    h = "".join(f"<th>{_e(x)}</th>" for x in header)
    b = "".join("<tr>" + "".join(f"<td>{_e(c)}</td>" for c in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{h}</tr></thead><tbody>{b}</tbody></table>"


def report_section(cal, figures=None) -> str:
    """The calibration as an HTML ``<section>`` (headings h2/h3, tables, embedded figures)."""
    from ..plot.style import style
    d = cal.to_dict()
    u = cal.units
    keys = {k.key: k for k in cal.fit_keys}
    f = d["fit"]
    P = ['<section id="calibration">', "<h2>Calibration to observed readings</h2>"]
    P.append(f"<p>{_e(d['title'])}: section <code>{_e(d['section'])}</code>, readings <code>{_e(d['observations'])}"
             f"</code>. {_e(f['method'])}; sensitivities by {_e(' and '.join(f['sensitivities']))}. chi2 "
             f"{f['chi2_start']:.4g} at the start, {f['chi2']:.4g} after the fit for {f['dof']} degrees of freedom "
             f"({_e(f['status'])}, {f['evaluations']} evaluations).</p>")
    for w in d["warnings"]:
        P.append(f'<p class="caution">{_e(w)}</p>')
    rows = []
    for key, p in d["parameters"].items():
        conv = 1.0 / keys[key].si_factor
        iv = "not determined" if p["low"] is None else f"{p['low'] * conv:.4g} to {p['high'] * conv:.4g}"
        rows.append([key, f"{p['value'] * conv:.4g}", iv, p["file_unit"],
                     f"{p['min'] * conv:.4g} to {p['max'] * conv:.4g}", "yes" if d["identifiable"][key] else "no",
                     d["identifiable_why"][key]])
    P.append("<h3>Fitted values</h3>" + _table(["key", "value", "95 % interval", "unit", "bounds", "identifiable",
                                                 "why"], rows))
    if d["scale"]["ratios"]:
        P.append("<h3>Ratios the heads determine</h3>" + _table(
            ["ratio", "value", "95 % interval", "identifiable"],
            [[k, f"{r['value']:.4g}", "–" if r["low"] is None else f"{r['low']:.4g} to {r['high']:.4g}",
              "yes" if r["identifiable"] else "no"] for k, r in d["scale"]["ratios"].items()]))
    fl, fq = u.factor("length"), u.factor("flow")
    rows = []
    for r in d["residuals"]:
        fac = fl if r["kind"] == "head" else fq
        rows.append([r["event"], r["kind"], r["name"], f"{r['observed'] / fac:.4g}", f"{r['sigma'] / fac:.3g}",
                     f"{r['computed_start'] / fac:.4g}", f"{r['computed'] / fac:.4g}", f"{r['normalised']:+.2f}"])
    P.append(f"<h3>Readings</h3><p>Heads in {_e(u.length)}, flows in {_e(u.label('flow'))} (+ into the section).</p>"
             + _table(["event", "kind", "reading", "observed", "sigma", "computed, start", "computed, fitted",
                       "(obs − fit)/sigma"], rows))
    rows = []
    for c in d["checks"]:
        b, a = c["before"], c["after"]
        rows.append([f"{c['kind']}: {c['case']}", _n(b["fs"], ".2f"), _n(b["exit_gradient_max"], ".3f"), b["verdict"],
                     _n(a["fs"], ".2f"), _n(a["exit_gradient_max"], ".3f"), a["verdict"]])
    if rows:
        P.append("<h3>Underseepage checks before and after calibration</h3>" + _table(
            ["case", "least FS before", "exit gradient before (m/m)", "verdict before", "least FS after",
             "exit gradient after (m/m)", "verdict after"], rows))
    figs = figures if figures is not None else cal.figures()
    import io
    for i, item in enumerate(figs, 1):
        png = getattr(item, "png", None)
        if png is None:
            buf = io.BytesIO()
            with style():
                item.fig.savefig(buf, format="png", dpi=150, metadata={"Software": None})
            png = buf.getvalue()
        uri = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
        P.append(f'<figure><img src="{uri}" alt="{_e(item.caption)}"><figcaption>Calibration figure {i}. '
                 f"{_e(item.caption)}.</figcaption></figure>")
    for n in d["notes"]:
        P.append(f'<p class="note">{_e(n)}</p>')
    P.append(f'<p class="caution">{_e(CAUTION)}</p></section>')
    return "\n".join(P)


def report_page(cal, figures=None, paper: str = "A4") -> str:
    """A one-file HTML page holding :func:`report_section` (no script, no external link), laid out for print
    like the section report (:func:`seepfe.report.page.page`: the title block in every page's margins)."""
    from ..report.page import page, project_of, title_block
    d = cal.to_dict()
    kind = "Calibration to observed readings"
    fields = project_of(cal.best.results[0].section.spec)      # the section file's project block, if any
    extra = [("section", d["section"]), ("observations", d["observations"]), ("seepfe", d["seepfe_version"]),
             ("section SHA-256", d["section_sha256"][:16] + "…")]
    head = f"<h1>{_e(d['title'])}</h1>" + title_block(fields, d["title"], kind, extra)
    return page(d["title"], [head, report_section(cal, figures)], fields, kind, paper, f"seepfe {d['seepfe_version']}")
