"""``seepfe solve SECTION --out DIR``: solve and write summary.json, CSV tables and a VTU file."""

from __future__ import annotations

from .common import add_section_args


def register(sub) -> None:
    s = sub.add_parser("solve", help="solve a section and write results to a folder")
    add_section_args(s)
    s.add_argument("--linear", choices=("auto", "direct", "amg"), default=None, help="linear solver")
    s.set_defaults(func=run)


def run(args) -> int:
    from ..analysis import analyse
    from ..output import atomic_dir, write_analysis
    from ..solver import solve
    res = solve(args.section, order=args.order, linear=args.linear)
    a = analyse(res)
    with atomic_dir(args.out) as tmp:
        written = write_analysis(a, tmp)
    return finish(a, args.out, ", ".join(written))


def finish(analysis, out, written: str) -> int:
    """Print the analysis and the files written; return the exit code (3: the solve did not converge)."""
    print(analysis.text())
    print(f"written: {out}/ ({written})")
    return 0 if analysis.result.solver_info.get("converged", True) else 3
