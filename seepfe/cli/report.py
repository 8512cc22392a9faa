"""``seepfe report SECTION --out DIR``: solve and write a one-file HTML report (plus its figures)."""

from __future__ import annotations

from ..result import CAUTION


def register(sub) -> None:
    p = sub.add_parser("report", help="solve a section and write a self-contained HTML report to a folder")
    p.add_argument("section", help="section file (JSON)")
    p.add_argument("--out", required=True, help="output folder (replaced whole on success)")
    p.add_argument("--order", type=int, choices=(1, 2), default=None, help="element order (default: file, 2)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..output import atomic_dir, write_result
    from ..report import write_report
    from ..solver import solve
    res = solve(args.section, order=args.order)
    with atomic_dir(args.out) as tmp:
        write_result(res, tmp)
        write_report(res, tmp)
    print(f"written: {args.out}/report.html (self-contained), figures/ (PNG and SVG), summary.json, CSV, VTU")
    print(f"CAUTION: {CAUTION}")
    return 0 if res.solver_info.get("converged", True) else 3
