"""``seepfe report SECTION --out DIR``: solve and write a one-file HTML report (plus its figures)."""

from __future__ import annotations

from .common import add_solve_args, parser_for, solve_section


def register(sub) -> None:
    p = parser_for(sub, "report", "solve a section and write a self-contained HTML report to a folder",
                   "Solve a section and write everything `seepfe solve` writes, the figures, and one "
                   "self-contained report.html (and report.pdf with --pdf), in the section file's units.",
                   "  seepfe report sections/levee_blanket.json --out runs/report\n"
                   "  seepfe report sections/levee_us.json --out runs/us-report --pdf")
    add_solve_args(p)
    p.add_argument("--pdf", action="store_true", help="also print the report to report.pdf (headless Chromium)")
    p.set_defaults(func=run)


def run(args) -> int:
    res = solve_section(args)              # load first: a bad file answers before the heavy imports
    from ..analysis import analyse
    from ..output import atomic_dir, write_analysis
    from ..report import write_pdf, write_report
    from .solve import finish
    a = analyse(res)
    with atomic_dir(args.out) as tmp:
        written = write_analysis(a, tmp, dxf=getattr(args, 'dxf', False))
        html = write_report(a, tmp)
        if args.pdf:
            write_pdf(html, tmp / "report.pdf")
    return finish(a, args.out, "report.html (self-contained)" + (", report.pdf" if args.pdf else "")
                  + ", figures/ (PNG and SVG), " + ", ".join(written))
