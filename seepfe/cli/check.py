"""``seepfe check SECTION``: validate a section file, mesh it and print a summary."""

from __future__ import annotations

from .common import add_section_args, table


def register(sub) -> None:
    c = sub.add_parser("check", help="validate a section file and mesh it; print a summary")
    add_section_args(c, out=False)
    c.set_defaults(func=run)


def run(args) -> int:
    from ..mesh import make_mesh
    from ..section import load_section
    sec = load_section(args.section)
    m = make_mesh(sec, order=args.order)
    s = sec.spec
    print(f"{sec.source}: valid. {s.title}")
    for w in sec.warnings:
        print(f"warning: {w}")
    print(table("materials", ["name", "kx (m/s)", "ky (m/s)", "angle (deg)", "unit weight (kN/m3)"],
                [[n, f"{(x.k or x.kx):.3g}", f"{(x.k or x.ky):.3g}", f"{x.angle:g}",
                  "-" if x.unit_weight is None else f"{x.unit_weight:g}"] for n, x in s.materials.items()]))
    print(table("boundaries", ["name", "kind", "value"],
                [[b.name, b.kind, {"head": f"h = {b.head} m", "flux": f"q = {b.flux} m/s"}.get(b.kind, "h = y")]
                 for b in s.boundaries]))
    st = m.stats
    print(table("mesh", ["elements", "nodes", "order", "size (m)", "min angle (deg)", "worst quality", "time (s)"],
                [[st["elements"], st["nodes"], st["order"], f"{st['size_m']:.3g}", f"{st['min_angle_deg']:.1f}",
                  f"{st['worst_quality']:.3f}", f"{st['mesh_s']:.2f}"]]))
    return 0
