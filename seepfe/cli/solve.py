"""``seepfe solve SECTION --out DIR``: solve and write summary.json, CSV tables and a VTU file."""

from __future__ import annotations

from ..result import CAUTION
from .common import add_section_args, table


def register(sub) -> None:
    s = sub.add_parser("solve", help="solve a section and write results to a folder")
    add_section_args(s)
    s.add_argument("--linear", choices=("auto", "direct", "amg"), default=None, help="linear solver")
    s.set_defaults(func=run)


def run(args) -> int:
    from ..output import atomic_dir
    from ..solver import solve
    res = solve(args.section, order=args.order, linear=args.linear)
    with atomic_dir(args.out) as tmp:
        summary, checks = write_solution(res, tmp)
    return print_solution(res, summary, checks, args.out, "summary.json, nodes.csv, elements.csv, result.vtu")


def write_solution(res, folder):
    """Checks, summary.json (with the checks), nodal/element CSV, VTU and checks_<boundary>.csv into folder."""
    from ..checks.report import run_checks
    from ..output import write_result
    summary = res.summary()
    checks = run_checks(res)
    summary["checks"] = checks.to_dict()
    write_result(res, folder, summary)
    for name, ex in checks.exits.items():
        ex.to_csv(folder / f"checks_{_safe(name)}.csv")
    return summary, checks


def print_solution(res, summary, checks, out, written: str) -> int:
    """Print flows, balance, seepage faces, remedies, checks and hand methods; return the exit code."""
    sv = summary["solver"]
    kinds = {b.name: b.kind for b in res.section.spec.boundaries}
    print(table(f"{res.section.title or res.section.source}: flows (m3/s per m, + into the section)",
                ["boundary", "kind", "flow (m3/s per m)"],
                [[n, kinds.get(n, "drain zone"), f"{q:+.4e}"] for n, q in res.flows.items()]))
    bal = summary["balance"]
    print(f"balance: in {bal['inflow_m3_s_per_m']:.4e}, out {bal['outflow_m3_s_per_m']:.4e} m3/s per m, "
          f"relative error {bal['relative_error']:.1e}")
    print(f"mesh: {summary['mesh']['elements']} P{summary['mesh']['order']} triangles, "
          f"{summary['mesh']['nodes']} nodes; solver: {sv['backend']}, {sv['unknowns']} unknowns, "
          f"{sv['seepage_face_passes']} pass(es)")
    faces = summary.get("phreatic", {}).get("seepage_faces", {})
    wet = [[n, f"({f['exit_point_m'][0]:.2f}, {f['exit_point_m'][1]:.2f})", f"{f['length_m']:.2f}",
            f"{-f['outflow_m3_s_per_m']:+.4e}"] for n, f in faces.items() if f.get("exit_point_m")]
    if wet:
        print(table("seepage faces (where the phreatic surface meets the outline)",
                    ["boundary", "exit point x, y (m)", "wet length (m)", "flow (m3/s per m)"], wet))
    for d in summary.get("remedies", []):
        what = ", ".join(f"{k} {v:.4g}" for k, v in d.items()
                         if isinstance(v, float) and k.endswith(("_m", "_m3_s", "_m3_s_per_m")))
        print(f"remedy '{d.get('name', d['type'])}' ({d['type']}): {what}")
        if d.get("limits"):
            print(f"  limits: {d['limits']}")
    if not sv.get("converged", True):
        print("WARNING: the solve did not converge; the results written are the best iterate and must not be "
              "used (see solver in summary.json)")
    if checks.exits:
        print(table("underseepage checks (governing values; FS -, gradients m/m, x and distances m)",
                    ["boundary", "least FS", "at x (m)", "largest surface gradient", "largest top-stratum gradient",
                     "fails within (m of toe)", "criteria"], checks.governing_rows()))
        rows = checks.hand_rows()
        if rows:
            print(table("hand methods beside the FE", ["method: quantity", "hand", "FE", "remark"], rows))
        for line in checks.not_applicable():
            print(f"  {line}")
    for note in checks.notes + [n for ex in checks.exits.values() for n in ex.notes]:
        print(f"note: {note}")
    extra = "".join(f", checks_{_safe(n)}.csv" for n in checks.exits)
    print(f"written: {out}/ ({written}{extra})")
    print(f"CAUTION: {CAUTION}")
    return 0 if sv.get("converged", True) else 3


def _safe(name: str) -> str:
    """A boundary name as a file-name part."""
    return "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in name)
