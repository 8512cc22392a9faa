"""``seepfe plot SECTION --out DIR``: solve and write every figure as PNG and SVG."""

from __future__ import annotations

from ..about import CAUTION
from .common import add_section_args


def register(sub) -> None:
    p = sub.add_parser("plot", help="solve a section and write its figures (PNG and SVG) to a folder")
    add_section_args(p)
    p.add_argument("--mesh", action="store_true", help="also draw the mesh")
    p.add_argument("--arrows", action="store_true", help="also draw Darcy-velocity arrows")
    p.add_argument("--pressure", choices=("pore_pressure", "pressure_head"), default="pore_pressure",
                   help="second field figure: pore-water pressure (kPa, default) or pressure head (m)")
    p.add_argument("--no-detail", dest="detail", action="store_false",
                   help="no closer views of long, flat sections")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..analysis import analyse
    from ..output import atomic_dir, write_json
    from ..plot import figure_set, save_figure
    from ..solver import solve
    res = solve(args.section, order=args.order)
    a = analyse(res)
    net = a.flow_net
    written = []
    with atomic_dir(args.out) as tmp:
        for item in figure_set(res, show_mesh=args.mesh, arrows=args.arrows, quantity=args.pressure,
                               detail=args.detail, analysis=a):
            save_figure(item.fig, tmp / item.name)
            written.append(item.name)
        write_json(tmp / "figures.json", {"figures": {n: [f"{n}.png", f"{n}.svg"] for n in written},
                                          "flow_net": net.as_dict(), "input_sha256": res.section.input_hash,
                                          "governing": a.governing, "caution": CAUTION})
    print(f"written: {args.out}/ ({len(written)} figures as PNG and SVG: {', '.join(written)})")
    sq = "" if net.squares else " (zones differ in k: channels of equal flow)"
    print(f"flow net: Nf = {net.n_channels:.2f}, Nd = {net.n_drops}{sq}; q = {net.q_total:.4e} m3/s per m "
          f"(solver {net.q_solver:.4e})")
    g = a.governing
    print(f"verdict: {g['verdict'].upper()}: {g['why']}")
    print(f"CAUTION: {CAUTION}")
    return 0 if res.solver_info.get("converged", True) else 3
