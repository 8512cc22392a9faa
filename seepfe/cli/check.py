"""``seepfe check SECTION``: validate a section file, mesh it and print a summary."""

from __future__ import annotations

from .common import add_section_args, parser_for, read_first, table


def register(sub) -> None:
    c = parser_for(sub, "check", "validate a section file and mesh it; print a summary",
                   "Validate a section file (keys, units, geometry, tiling, boundaries), mesh it and print "
                   "its materials, boundaries and mesh quality in the file's units. Writes nothing.",
                   "  seepfe check sections/levee_blanket.json\n"
                   "  seepfe check sections/levee_us.json --order 1 --size 10")
    add_section_args(c, out=False)
    c.set_defaults(func=run)


def run(args) -> int:
    read_first(args.section)               # a file that is not JSON answers before the heavy imports
    from ..mesh import make_mesh
    from ..section import load_section
    sec = load_section(args.section)
    u = sec.units
    m = make_mesh(sec, order=args.order, size=None if args.size is None else args.size * u.factor("length"))
    s = sec.spec
    print(f"{sec.source}: valid. {s.title}" + ("" if u.is_si else f" (units {u.name})"))
    for w in sec.warnings:
        print(f"warning: {w}")
    K, fK, W, fW, L, fL = u.conductivity, u.factor("conductivity"), u.unit_weight, u.factor("unit_weight"), \
        u.length, u.factor("length")
    print(table("materials", ["name", f"kx ({K})", f"ky ({K})", "angle (deg)", f"unit weight ({W})"],
                [[n, f"{(x.k or x.kx) / fK:.3g}", f"{(x.k or x.ky) / fK:.3g}", f"{x.angle:g}",
                  "-" if x.unit_weight is None else f"{x.unit_weight / fW:.4g}"] for n, x in s.materials.items()]))
    print(table("boundaries", ["name", "kind", "value"],
                [[b.name, b.kind, {"head": f"h = {b.head / fL:.6g} {L}" if b.head is not None else
                                   (f"hydrograph, {len(b.hydrograph)} points over {b.hydrograph[-1][0] - b.hydrograph[0][0]:g} "
                                    f"{b.time_unit}(s), {min(p[1] for p in b.hydrograph) / fL:.4g} to "
                                    f"{max(p[1] for p in b.hydrograph) / fL:.4g} {L}" if b.hydrograph is not None else ""),
                                   "flux": f"q = {u.from_si(b.flux or 0.0, 'flux'):.4g} {u.label('flux')}"}
                  .get(b.kind, "h = y")] for b in s.boundaries]))
    st = m.stats
    print(table("mesh", ["elements", "nodes", "order", f"size ({L})", "min angle (deg)", "worst quality", "time (s)"],
                [[st["elements"], st["nodes"], st["order"], f"{st['size_m'] / fL:.3g}", f"{st['min_angle_deg']:.1f}",
                  f"{st['worst_quality']:.3f}", f"{st['mesh_s']:.2f}"]]))
    return 0
