"""``seepfe solve SECTION --out DIR``: solve and write summary.json, CSV tables and a VTU file."""

from __future__ import annotations

from .common import add_solve_args, check_out_dir, parser_for, solve_section


def register(sub) -> None:
    s = parser_for(sub, "solve", "solve a section and write results to a folder",
                   "Solve a section for steady seepage; print flows, exit points, the underseepage checks and "
                   "the hand methods beside the FE; write summary.json (SI), CSV tables, the phreatic line, flow "
                   "lines and equipotentials (CSV, GeoJSON, DXF), result.vtu and a copy of the input.",
                   "  seepfe solve sections/levee_blanket.json --out runs/blanket\n"
                   "  seepfe solve sections/levee_us.json --out runs/us --order 1 --size 5   (size in ft here)")
    add_solve_args(s)
    s.set_defaults(func=run)


def run(args) -> int:
    check_out_dir(args.out)                # --out first: refused before any solve
    res = solve_section(args)              # load first: a bad file answers before the heavy imports
    from ..analysis import analyse
    from ..output import atomic_dir, write_analysis
    a = analyse(res)
    with atomic_dir(args.out) as tmp:
        written = write_analysis(a, tmp, dxf=getattr(args, 'dxf', False))
    return finish(a, args.out, ", ".join(written))


def finish(analysis, out, written: str) -> int:
    """Print the analysis and the files written; return the exit code (3: the solve did not converge)."""
    print(analysis.text())
    print(f"written: {out}/ ({written})")
    return 0 if analysis.result.solver_info.get("converged", True) else 3
