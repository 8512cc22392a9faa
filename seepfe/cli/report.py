"""``seepfe report SECTION --out DIR``: solve and write a one-file HTML report (plus its figures)."""

from __future__ import annotations



def register(sub) -> None:
    p = sub.add_parser("report", help="solve a section and write a self-contained HTML report to a folder")
    p.add_argument("section", help="section file (JSON)")
    p.add_argument("--out", required=True, help="output folder (replaced whole on success)")
    p.add_argument("--order", type=int, choices=(1, 2), default=None, help="element order (default: file, 2)")
    p.add_argument("--pdf", action="store_true", help="also print the report to report.pdf (headless Chromium)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..output import atomic_dir
    from ..report import write_pdf, write_report
    from ..solver import solve
    from .solve import print_solution, write_solution
    res = solve(args.section, order=args.order)
    with atomic_dir(args.out) as tmp:
        summary, checks = write_solution(res, tmp)
        html = write_report(res, tmp, checks=checks)
        if args.pdf:
            write_pdf(html, tmp / "report.pdf")
    return print_solution(res, summary, checks, args.out,
                          "report.html (self-contained)" + (", report.pdf" if args.pdf else "")
                          + ", figures/ (PNG and SVG), summary.json, nodes.csv, elements.csv, result.vtu")
