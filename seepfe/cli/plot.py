"""``seepfe plot SECTION --out DIR``: solve and write every figure as PNG and SVG."""

from __future__ import annotations

from ..about import CAUTION
from .common import add_solve_args, check_out_dir, parser_for, read_first, solve_section


def register(sub) -> None:
    p = parser_for(sub, "plot", "solve a section and write its figures (PNG and SVG) to a folder",
                   "Solve a section and draw the section, total head, pore pressure (or pressure head), the "
                   "flow net and the exit-gradient profiles, as PNG and SVG, in the section file's units.",
                   "  seepfe plot sections/levee_blanket.json --out runs/figures\n"
                   "  seepfe plot sections/small_dam.json --out runs/dam --mesh --arrows")
    add_solve_args(p)
    p.add_argument("--mesh", action="store_true", help="also draw the mesh")
    p.add_argument("--arrows", action="store_true", help="also draw Darcy-velocity arrows")
    p.add_argument("--pressure", choices=("pore_pressure", "pressure_head"), default="pore_pressure",
                   help="second field figure: pore-water pressure (default) or pressure head")
    p.add_argument("--no-detail", dest="detail", action="store_false",
                   help="no closer views of long, flat sections")
    p.set_defaults(func=run)


def run(args) -> int:
    read_first(args.section)               # a file that is not JSON answers before the heavy imports
    check_out_dir(args.out)                # --out: refused before any solve
    run = solve_section(args)              # load first: a bad file answers before the heavy imports
    from ..analysis import analyse
    from ..output import atomic_dir, write_json
    from ..plot import figure_set, save_figure
    a = analyse(run)
    res = a.result                     # a hydrograph: the governing moment (least FS) of the run
    net = a.flow_net
    written = []
    with atomic_dir(args.out) as tmp:
        for item in figure_set(res, show_mesh=args.mesh, arrows=args.arrows, quantity=args.pressure,
                               detail=args.detail, analysis=a):
            save_figure(item.fig, tmp / item.name)
            written.append(item.name)
        if getattr(run, "is_transient", False):   # and the figures of the run (docs/transient.md)
            from ..plot.hydrograph import transient_figures
            for name, _caption, fig in transient_figures(run):
                save_figure(fig, tmp / name)
                written.append(name)
        write_json(tmp / "figures.json", {"figures": {n: [f"{n}.png", f"{n}.svg"] for n in written},
                                          "flow_net": net.as_dict(), "input_sha256": res.section.input_hash,
                                          "governing": a.governing, "caution": CAUTION})
    print(f"written: {args.out}/ ({len(written)} figures as PNG and SVG: {', '.join(written)})")
    sq = "" if net.squares else " (zones differ in k: channels of equal flow)"
    u = res.section.units
    fq = u.factor("flow")
    print(f"flow net: Nf = {net.n_channels:.2f}, Nd = {net.n_drops}{sq}; q = {net.q_total / fq:.4e} "
          f"{u.label('flow')} (solver {net.q_solver / fq:.4e})")
    g = a.governing
    from ..units import display_text
    print(f"verdict: {g['verdict'].upper()}: {display_text(g['why'], u)}")
    print(f"CAUTION: {CAUTION}")
    return 0 if run.solver_info.get("converged", True) else 3
