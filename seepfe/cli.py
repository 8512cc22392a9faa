"""Command line: ``seepfe check SECTION`` and ``seepfe solve SECTION --out DIR``.

``main(argv)`` returns an exit code and never raises for bad input: a seepfe error becomes one line
``seepfe: error: ...`` on stderr and exit code 2 (3 for a solve that did not converge).
"""

from __future__ import annotations

import argparse
import logging
import sys

from . import __version__
from .errors import SeepfeError
from .result import CAUTION

__all__ = ["main"]


def _table(title: str, header: list[str], rows: list[list[str]]) -> str:
    """A plain fixed-width table (no colour, so logs and reports read the same)."""
    w = [max(len(str(r[i])) for r in [header] + rows) for i in range(len(header))]
    line = "  ".join("-" * x for x in w)
    out = [title, "  ".join(h.ljust(x) for h, x in zip(header, w)), line]
    out += ["  ".join(str(c).rjust(x) if i else str(c).ljust(x) for i, (c, x) in enumerate(zip(r, w)))
            for r in rows]
    return "\n".join(out)


def cmd_check(args) -> int:
    from .mesh import make_mesh
    from .section import load_section
    sec = load_section(args.section)
    m = make_mesh(sec, order=args.order)
    s = sec.spec
    print(f"{sec.source}: valid. {s.title}")
    print(_table("materials", ["name", "kx (m/s)", "ky (m/s)", "angle (deg)", "unit weight (kN/m3)"],
                 [[n, f"{(x.k or x.kx):.3g}", f"{(x.k or x.ky):.3g}", f"{x.angle:g}",
                   "-" if x.unit_weight is None else f"{x.unit_weight:g}"] for n, x in s.materials.items()]))
    print(_table("boundaries", ["name", "kind", "value"],
                 [[b.name, b.kind, {"head": f"h = {b.head} m", "flux": f"q = {b.flux} m/s"}.get(b.kind, "h = y")]
                  for b in s.boundaries]))
    st = m.stats
    print(_table("mesh", ["elements", "nodes", "order", "size (m)", "min angle (deg)", "worst quality", "time (s)"],
                 [[st["elements"], st["nodes"], st["order"], f"{st['size_m']:.3g}", f"{st['min_angle_deg']:.1f}",
                   f"{st['worst_quality']:.3f}", f"{st['mesh_s']:.2f}"]]))
    return 0


def cmd_solve(args) -> int:
    from .output import atomic_dir, write_result
    from .solver import solve
    res = solve(args.section, order=args.order, linear=args.linear)
    summary = res.summary()
    with atomic_dir(args.out) as tmp:
        write_result(res, tmp, summary)
    print(_table(f"{res.section.title or res.section.source}: flows (m3/s per m, + into the section)",
                 ["boundary", "kind", "flow (m3/s per m)"],
                 [[b.name, b.kind, f"{res.boundary_flow(b.name):+.4e}"] for b in res.section.spec.boundaries]))
    bal = summary["balance"]
    sv = summary["solver"]
    print(f"balance: in {bal['inflow_m3_s_per_m']:.4e}, out {bal['outflow_m3_s_per_m']:.4e} m3/s per m, "
          f"relative error {bal['relative_error']:.1e}")
    print(f"mesh: {summary['mesh']['elements']} P{summary['mesh']['order']} triangles, "
          f"{summary['mesh']['nodes']} nodes; solver: {sv['backend']}, {sv['unknowns']} unknowns, "
          f"{sv['seepage_face_passes']} pass(es)")
    print(f"written: {args.out}/ (summary.json, nodes.csv, elements.csv, result.vtu)")
    print(f"CAUTION: {CAUTION}")
    return 0 if sv.get("converged", True) else 3


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="seepfe", description="Steady seepage through and under levee and dam "
                                "sections by finite elements. " + CAUTION)
    p.add_argument("--version", action="version", version=f"seepfe {__version__}")
    p.add_argument("-v", "--verbose", action="store_true", help="log progress to stderr")
    sub = p.add_subparsers(dest="command", required=True)
    c = sub.add_parser("check", help="validate a section file and mesh it; print a summary")
    c.add_argument("section")
    c.add_argument("--order", type=int, choices=(1, 2), default=None)
    c.set_defaults(func=cmd_check)
    s = sub.add_parser("solve", help="solve a section and write results to a folder")
    s.add_argument("section")
    s.add_argument("--out", required=True, help="output folder (replaced whole on success)")
    s.add_argument("--order", type=int, choices=(1, 2), default=None, help="element order (default: file, 2)")
    s.add_argument("--linear", choices=("auto", "direct", "amg"), default=None, help="linear solver")
    s.set_defaults(func=cmd_solve)
    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING, format="seepfe: %(message)s")
    try:
        return args.func(args)
    except SeepfeError as e:
        print(f"seepfe: error: {e}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("seepfe: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
