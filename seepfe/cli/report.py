"""``seepfe report SECTION --out DIR``: solve and write a self-contained report (plus its figures);
with ``--stages SWEEP``, a stage study of the section over the river stages of a sweep file."""

from __future__ import annotations

from .common import add_solve_args, check_out_dir, parser_for, read_first, solve_section


def register(sub) -> None:
    p = parser_for(sub, "report", "solve a section and write a report to sign and check (HTML, PDF); "
                                  "with --stages, a stage study",
                   "Solve a section and write everything `seepfe solve` writes, the figures (SVG) and one "
                   "self-contained report.html laid out for print (A4 or Letter, the title block of the file's "
                   "'project' block on every page), and report.pdf with --pdf. With --stages SWEEP: a stage "
                   "study, one report of the section over the river stages of the sweep file (its cases cached "
                   "in DIR/cases/, shared with `seepfe sweep ... --out DIR`). docs/report.md.",
                   "  seepfe report sections/levee_blanket.json --out runs/report\n"
                   "  seepfe report sections/levee_us.json --out runs/us-report --pdf --paper Letter\n"
                   "  seepfe report sections/levee_blanket.json --stages sections/levee_blanket.stages.json "
                   "--out runs/stages")
    add_solve_args(p)
    p.add_argument("--pdf", action="store_true", help="also print the report to report.pdf (headless Chromium)")
    p.add_argument("--paper", choices=("A4", "Letter"), default="A4", help="paper size of the printed report")
    p.add_argument("--exaggeration", type=float, default=None,
                   help="vertical exaggeration of the section figures (default: chosen for long flat sections; "
                        "1 = true scale)")
    p.add_argument("--format", default="svg", help="figure files besides the SVG embedded: svg, png, pdf, "
                                                   "comma-separated (PDF figures embed TrueType fonts)")
    p.add_argument("--mesh", action="store_true", help="also draw the mesh")
    p.add_argument("--arrows", action="store_true", help="also draw Darcy-velocity arrows")
    p.add_argument("--stages", metavar="SWEEP", default=None,
                   help="a stage study: a sweep file over the river stage (docs/report.md)")
    p.add_argument("--stage", default=None, help="with --stages: the key of the stage when the sweep varies more "
                                                 "than one")
    p.add_argument("--workers", type=int, default=None, help="with --stages: local worker processes")
    p.add_argument("--scheduler", default=None, help="with --stages: Dask scheduler address")
    p.set_defaults(func=run)


def _formats(text: str) -> tuple:
    from ..errors import SeepfeError
    fs = tuple(dict.fromkeys(f.strip().lower() for f in text.split(",") if f.strip()))
    bad = [f for f in fs if f not in ("svg", "png", "pdf")]
    if bad:
        raise SeepfeError(f"--format: unknown format '{bad[0]}' (use svg, png, pdf)")
    return fs


def run(args) -> int:
    read_first(args.section)               # a file that is not JSON answers before the heavy imports
    check_out_dir(args.out, sweep=args.stages is not None)     # --out: refused before any solve
    from ..errors import SeepfeError
    if args.exaggeration is not None and not (0 < args.exaggeration <= 100):
        raise SeepfeError(f"--exaggeration must be > 0 and <= 100, got {args.exaggeration:g}")
    formats = _formats(args.format)
    if args.stages is not None:
        return _stage_study(args)
    res = solve_section(args)              # load first: a bad file answers before the heavy imports
    from ..analysis import analyse
    from ..output import atomic_dir, write_analysis
    from ..report import write_pdf, write_report
    from .solve import finish
    a = analyse(res)
    with atomic_dir(args.out) as tmp:
        written = write_analysis(a, tmp, dxf=getattr(args, "dxf", False))
        html = write_report(a, tmp, show_mesh=args.mesh, arrows=args.arrows, formats=formats, paper=args.paper,
                            exaggeration=args.exaggeration)
        if getattr(res, "is_transient", False):   # the run's figures beside the report's (docs/transient.md)
            from ..plot.hydrograph import transient_figures
            from ..plot.save import save_figure
            for name, _caption, fig in transient_figures(res):
                save_figure(fig, tmp / "figures" / name, formats=formats)
                fig.clear()
        if args.pdf:
            write_pdf(html, tmp / "report.pdf")
    return finish(a, args.out, "report.html (self-contained)" + (", report.pdf" if args.pdf else "")
                  + f", figures/ ({', '.join(f.upper() for f in formats)}), " + ", ".join(written))


def _stage_study(args) -> int:
    from ..about import CAUTION
    from ..report.stages import write_stage_study
    solve = {k: v for k, v in (("order", args.order), ("linear", args.linear)) if v is not None}
    if args.size is not None:
        from ..section import _read
        from ..units import parse_units
        data, label = _read(args.section)
        solve["size"] = args.size * parse_units(data.get("units"), label).factor("length")
    out = write_stage_study(args.section, args.stages, args.out, stage=args.stage, workers=args.workers,
                            scheduler=args.scheduler, solve=solve or None, paper=args.paper, pdf=args.pdf,
                            exaggeration=args.exaggeration)
    print(out.summary)
    print(f"written: {out.html} (self-contained){', report.pdf' if args.pdf else ''}; the sweep's tables and "
          f"figures beside it; cases cached in {out.cases}/")
    print(f"CAUTION: {CAUTION}")
    return 0
