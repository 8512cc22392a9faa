"""The printed page shared by every report: styles, the title block, numbers, tables, embedded figures.

A report is one self-contained HTML file (styles inline, figures embedded as SVG, no script, no external
link) laid out for print: ``@page`` sets the paper (A4 or Letter) and carries the title block in its
margins, so every printed page shows the project, the section, the document, revision and date, who
prepared and checked it, and "page N of M" (Chromium prints the margin boxes; so does
:func:`seepfe.report.write_pdf`). The first page also carries the full title block with blank lines to
sign where the section file's ``project`` block leaves a name out.
"""

from __future__ import annotations

import base64
import html
import math

from ..about import CAUTION

__all__ = ["e", "num", "table", "Raw", "PAPERS", "page", "title_block", "svg_figure", "css_string", "project_of"]

#: paper name -> CSS size
PAPERS = {"A4": "A4", "Letter": "letter"}
BLANK = "\u2002" * 14          # a blank to fill in by hand (printed with an underline)


def e(s) -> str:
    """Text made safe for HTML."""
    return html.escape(str(s), quote=True)


class Raw(str):
    """Trusted HTML (already escaped)."""


def num(v, fmt="{:.4g}") -> str:
    """A number for a table: '–' for none or nan, '∞' for inf."""
    if v is None:
        return "–"
    try:
        f = float(v)
    except (TypeError, ValueError):
        return e(v)
    if math.isnan(f):
        return "–"
    if math.isinf(f):
        return "∞" if f > 0 else "−∞"
    return fmt.format(f)


def table(header: list[str], rows: list[list], numeric: set[int] | None = None, cls: str = "",
          caption: str | None = None, id: str | None = None) -> str:
    """An HTML table; cells are escaped unless they are :class:`Raw`; ``numeric`` columns are right-aligned."""
    numeric = numeric or set()
    h = "".join(f"<th>{x if isinstance(x, Raw) else e(x)}</th>" for x in header)
    body = []
    for r in rows:
        cells = []
        for i, c in enumerate(r):
            raw = c if isinstance(c, Raw) else e(c)
            cells.append(f'<td class="n">{raw}</td>' if i in numeric else f"<td>{raw}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    cap = f"<caption>{e(caption)}</caption>" if caption else ""
    ident = f' id="{e(id)}"' if id else ""
    return f'<table class="{cls}"{ident}>{cap}<thead><tr>{h}</tr></thead><tbody>{"".join(body)}</tbody></table>'


def css_string(s: str) -> str:
    """A CSS string literal: quotes, backslashes and control characters escaped; newlines as line breaks."""
    out = []
    for ch in str(s):
        if ch == "\n":
            out.append("\\A ")
        elif ch in '"\\':
            out.append("\\" + ch)
        elif not ch.isprintable():
            out.append(" ")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def project_of(spec) -> dict:
    """The title-block fields of a section (or reach) spec: {key: text or None}."""
    p = getattr(spec, "project", None)
    keys = ("project", "document", "reach", "station", "datum", "prepared_by", "checked_by", "date", "revision")
    return {k: (getattr(p, k, None) if p is not None else None) for k in keys}


_CSS = """
@page{size:%(paper)s;margin:25mm 15mm 19mm 15mm;
 @top-left{content:%(tl)s;font:8pt "DejaVu Sans",Arial,sans-serif;color:#2b2b2b;white-space:pre;vertical-align:bottom;
  padding-bottom:2.5mm;border-bottom:.4pt solid #999}
 @top-right{content:%(tr)s;font:8pt "DejaVu Sans",Arial,sans-serif;color:#2b2b2b;white-space:pre;text-align:right;
  vertical-align:bottom;padding-bottom:2.5mm;border-bottom:.4pt solid #999}
 @bottom-left{content:%(bl)s;font:7pt "DejaVu Sans",Arial,sans-serif;color:#555;white-space:pre;vertical-align:top;
  padding-top:2mm;border-top:.4pt solid #999}
 @bottom-right{content:"Page " counter(page) " of " counter(pages);font:8pt "DejaVu Sans",Arial,sans-serif;
  color:#2b2b2b;vertical-align:top;padding-top:2mm;border-top:.4pt solid #999}}
body{font-family:"DejaVu Sans",Verdana,Arial,sans-serif;color:#2b2b2b;max-width:62rem;margin:1.5rem auto;
 padding:0 1.2rem;line-height:1.42;font-size:14px;background:#fff}
h1{font-size:1.4rem;margin:.2rem 0 .3rem}h2{font-size:1.12rem;margin:1.8rem 0 .5rem;padding-bottom:.2rem;
 border-bottom:1px solid #d8d8d8}h3{font-size:.98rem;margin:1.1rem 0 .35rem}
.meta{color:#555;font-size:.82rem}.meta code{font-size:.78rem;word-break:break-all}
.caution{border-left:4px solid #D55E00;background:#fbf1ea;padding:.5rem .8rem;margin:.8rem 0}
.gov{display:grid;grid-template-columns:repeat(auto-fit,minmax(12.5rem,1fr));gap:.5rem;margin:.6rem 0}
.gov div{border:1px solid #d8d8d8;border-radius:4px;padding:.45rem .65rem;break-inside:avoid}
.gov b{display:block;font-size:1.1rem}.gov span{color:#555;font-size:.8rem}
.fail{color:#B34A00;font-weight:bold}.pass{color:#006e50;font-weight:bold}.unknown{color:#7a5a00;font-weight:bold}
table{border-collapse:collapse;margin:.4rem 0 .9rem;font-size:.82rem;break-inside:auto}
caption{text-align:left;font-size:.8rem;color:#555;padding-bottom:.2rem;caption-side:top}
tr{break-inside:avoid}
th,td{border-bottom:1px solid #e2e2e2;padding:.22rem .55rem;text-align:left;vertical-align:top}
th{background:#f4f4f4;font-weight:600}td.n{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
table.tb{width:100%%;border:1px solid #555;margin:.5rem 0 1rem}table.tb td{border:1px solid #999;padding:.3rem .5rem;width:25%%}
table.tb td b{display:block;font-size:.68rem;color:#555;font-weight:normal;text-transform:uppercase;letter-spacing:.03em}
.blank{display:inline-block;min-width:9rem;border-bottom:1px solid #555}
figure{margin:.8rem 0 1.4rem;break-inside:avoid}figure img{max-width:100%%;height:auto;display:block}
figcaption{font-size:.82rem;color:#444;margin-top:.3rem}
.note{font-size:.82rem;color:#555}.small{font-size:.8rem}
ul.assume li{margin:.15rem 0}
details{margin:.5rem 0 1rem;border:1px solid #d8d8d8;border-radius:4px;padding:.3rem .6rem}
details pre{font-size:.72rem;white-space:pre-wrap;word-break:break-all}
.appendix{break-before:page}
a{color:#0b5c8f}
@media print{body{max-width:none;margin:0;padding:0;font-size:9.5pt}h2{break-after:avoid}h3{break-after:avoid}
 .gov{grid-template-columns:repeat(3,1fr)}a{color:inherit;text-decoration:none}}
"""


def _margin_texts(fields: dict, title: str, kind: str) -> tuple[str, str, str]:
    f = fields
    where = ", ".join(x for x in (f.get("reach"), f"station {f['station']}" if f.get("station") else None) if x)
    tl = "\n".join(x for x in (f.get("project") or "Project: ______________", where, title[:110]) if x)
    tr = "\n".join([kind,
                    f"Document {f.get('document') or '________'}   Rev. {f.get('revision') or '___'}",
                    f"Date {f.get('date') or '__________'}"])
    datum = f"   Datum: {f['datum']}" if f.get("datum") else ""
    bl = (f"Prepared by: {f.get('prepared_by') or '______________'}   Checked by: "
          f"{f.get('checked_by') or '______________'}{datum}\n"
          "Results support, and never replace, the judgement of a licensed engineer; local codes and agency "
          "criteria govern.")
    return tl, tr, bl


def title_block(fields: dict, title: str, kind: str, extra: list[tuple[str, str]] | None = None) -> str:
    """The full title block of the first page (a table of labelled cells; blanks to sign by hand)."""
    def cell(label, value):
        v = e(value) if value else f'<span class="blank">{BLANK}</span>'
        return f"<td><b>{e(label)}</b>{v}</td>"
    f = fields
    rows = [
        [("project", f.get("project")), ("document", f.get("document")), ("revision", f.get("revision")),
         ("date", f.get("date"))],
        [("reach", f.get("reach")), ("station", f.get("station")), ("vertical datum", f.get("datum")),
         ("report", kind)],
        [("prepared by", f.get("prepared_by")), ("signature", None), ("checked by", f.get("checked_by")),
         ("signature", None)],
    ]
    extra = list(extra or [])
    while extra:
        chunk, extra = extra[:4], extra[4:]
        rows.append(chunk + [("", "")] * (4 - len(chunk)))
    body = "".join("<tr>" + "".join(cell(lab, val) if lab else "<td></td>" for lab, val in r) + "</tr>" for r in rows)
    return f'<table class="tb" id="title-block"><tbody>{body}</tbody></table>'


def page(title: str, body: list[str], fields: dict, kind: str, paper: str = "A4", generator: str = "") -> str:
    """A whole HTML document: the print styles with the title block in every page's margins, then the body."""
    if paper not in PAPERS:
        raise ValueError(f"paper must be one of {', '.join(PAPERS)}, got {paper!r}")
    tl, tr, bl = _margin_texts(fields, title, kind)
    css = _CSS % {"paper": PAPERS[paper], "tl": css_string(tl), "tr": css_string(tr), "bl": css_string(bl)}
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{e(title)} – {e(kind)}"
            f"</title><meta name=\"generator\" content=\"{e(generator)}\"><style>{css}</style></head>"
            "<body>\n" + "\n".join(b for b in body if b) + "\n</body></html>\n")


def caution() -> str:
    return f'<p class="caution"><b>Caution.</b> {e(CAUTION)}</p>'


def svg_figure(svg: bytes, ident: str, number: int, caption: str) -> str:
    """A figure embedded as an SVG image (vector: sharp when printed)."""
    uri = "data:image/svg+xml;base64," + base64.b64encode(svg).decode("ascii")
    return (f'<figure id="fig-{e(ident)}"><img src="{uri}" alt="{e(caption)}">'
            f"<figcaption>Figure {number}. {e(caption)}.</figcaption></figure>")


def verdict_span(verdict: str) -> Raw:
    cls = {"pass": "pass", "fail": "fail"}.get(verdict, "unknown")
    return Raw(f'<span class="{cls}">{e(verdict)}</span>')
