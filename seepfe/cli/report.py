"""``seepfe report SECTION --out DIR``: solve and write a one-file HTML report (plus its figures)."""

from __future__ import annotations

from .common import add_section_args


def register(sub) -> None:
    p = sub.add_parser("report", help="solve a section and write a self-contained HTML report to a folder")
    add_section_args(p)
    p.add_argument("--pdf", action="store_true", help="also print the report to report.pdf (headless Chromium)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..analysis import analyse
    from ..output import atomic_dir, write_analysis
    from ..report import write_pdf, write_report
    from ..solver import solve
    from .solve import finish
    res = solve(args.section, order=args.order)
    a = analyse(res)
    with atomic_dir(args.out) as tmp:
        written = write_analysis(a, tmp)
        html = write_report(a, tmp)
        if args.pdf:
            write_pdf(html, tmp / "report.pdf")
    return finish(a, args.out, "report.html (self-contained)" + (", report.pdf" if args.pdf else "")
                  + ", figures/ (PNG and SVG), " + ", ".join(written))
