"""``seepfe solve SECTION --out DIR``: solve and write summary.json, CSV tables and a VTU file."""

from __future__ import annotations

from .common import add_solve_args, check_out_dir, parser_for, read_first, solve_section


def register(sub) -> None:
    s = parser_for(sub, "solve", "solve a section and write results to a folder",
                   "Solve a section for steady seepage; print flows, exit points, the underseepage checks and "
                   "the hand methods beside the FE; write summary.json (SI), CSV tables, the phreatic line, flow "
                   "lines and equipotentials (CSV, GeoJSON, DXF), result.vtu and a copy of the input. A section "
                   "with a flood hydrograph on a head boundary is solved through time (docs/transient.md): the "
                   "stored times, the least FS over the flood and when, the time histories (history.csv and "
                   "figures), a VTU per stored time and pore pressures on a grid over the riverside slope.",
                   "  seepfe solve sections/levee_blanket.json --out runs/blanket\n"
                   "  seepfe solve sections/levee_us.json --out runs/us --order 1 --size 5   (size in ft here)\n"
                   "  seepfe solve sections/levee_flood.json --out runs/flood          (through the hydrograph)\n"
                   "  seepfe solve sections/levee_flood.json --out runs/crest --steady (steady, at the crest stage)")
    add_solve_args(s)
    s.add_argument("--steady", action="store_true",
                   help="a section with a hydrograph: solve the steady problem at the crest stage instead")
    s.add_argument("--no-figures", dest="figures", action="store_false",
                   help="a section with a hydrograph: write no figures")
    s.set_defaults(func=run)


def run(args) -> int:
    read_first(args.section)               # a file that is not JSON answers before the heavy imports
    check_out_dir(args.out)                # --out: refused before any solve
    res = solve_section(args)              # load first: a bad file answers before the heavy imports
    from ..analysis import analyse
    from ..output import atomic_dir, write_analysis
    if getattr(res, "is_transient", False):
        return run_transient(args, res)
    a = analyse(res)
    with atomic_dir(args.out) as tmp:
        written = write_analysis(a, tmp, dxf=getattr(args, 'dxf', False))
    return finish(a, args.out, ", ".join(written))


def finish(analysis, out, written: str) -> int:
    """Print the analysis and the files written; return the exit code (3: the solve did not converge)."""
    print(analysis.text())
    print(f"written: {out}/ ({written})")
    return 0 if analysis.result.solver_info.get("converged", True) else 3


def run_transient(args, res) -> int:
    """Write and print a transient run (a section with a hydrograph); exit 3 when a step did not converge."""
    from ..analysis import analyse
    from ..hydrograph import TIME_UNITS, time_label
    from ..output import atomic_dir
    from ..transient_output import transient_text, write_transient
    with atomic_dir(args.out) as tmp:
        written = write_transient(res, tmp, figures=getattr(args, "figures", True), dxf=getattr(args, "dxf", False))
    print(transient_text(res))
    a = analyse(res)
    t = a.result.time_s / TIME_UNITS[res.time_unit]
    print(f"\nthe governing moment (least FS), t = {t:.4g} {time_label(res.time_unit)}:")
    print(a.text())
    print(f"written: {args.out}/ ({', '.join(written)})")
    return 0 if res.solver_info.get("converged", True) else 3
