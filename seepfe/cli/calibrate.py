"""``seepfe calibrate SECTION OBSERVATIONS --out DIR``: fit conductivities to readings from past events."""

from __future__ import annotations

from .common import _positive as positive
from .common import parser_for


def register(sub) -> None:
    s = parser_for(sub, "calibrate", "fit conductivities to piezometer readings (and measured flows) of past events",
                   "Back-analysis: fit the keys named under 'fit' in the observations file (conductivities in log "
                   "space) to its piezometer heads and measured flows by weighted least squares; print the fitted "
                   "values with approximate 95 % intervals, whether the readings determine each, the misfit of every "
                   "reading and the underseepage checks before and after at the observed and design events; write "
                   "calibration.json, section.calibrated.json (the section with the fitted values), CSV tables, "
                   "figures and calibration.html. See docs/calibration.md.",
                   "  seepfe calibrate sections/levee_ditch.json sections/levee_ditch.observations.json "
                   "--out runs/cal\n"
                   "  seepfe calibrate levee.json flood.json --out runs/cal --order 1 --size 2   (size in the "
                   "section's length unit)")
    s.add_argument("section", help="section file (JSON)")
    s.add_argument("observations", help="observations file (JSON): heads, flows, fixed, fit (docs/calibration.md)")
    s.add_argument("--out", required=True, help="output folder (replaced whole on success)")
    s.add_argument("--order", type=int, choices=(1, 2), default=None, help="element order (default: file, 2)")
    s.add_argument("--size", type=positive, default=None,
                   help="element size, in the section file's length unit (default: the file's mesh.size)")
    s.add_argument("--linear", choices=("auto", "direct", "amg"), default=None,
                   help="linear solver (default: the file's solver.linear, auto)")
    s.add_argument("--max-evaluations", type=int, default=200, help="stop the fit after this many evaluations")
    s.add_argument("--no-plots", action="store_true", help="write the tables and calibration.json only")
    s.set_defaults(func=run)


def run(args) -> int:
    from pathlib import Path

    from .common import check_out_dir
    check_out_dir(args.out)                    # --out first: refused before any work

    from ..calibration import calibrate, write_into
    from ..errors import SeepfeError
    from ..output import atomic_dir
    from ..section import load_section
    if args.max_evaluations < 1:
        raise SeepfeError("--max-evaluations must be at least 1")
    sec = load_section(args.section)
    size = None if args.size is None else args.size * sec.units.factor("length")
    # the folder is claimed first (a foreign folder is refused before the work), filled, then renamed into place
    with atomic_dir(args.out) as tmp:
        cal = calibrate(sec, args.observations, order=args.order, size=size, linear=args.linear,
                        max_evaluations=args.max_evaluations)
        written = write_into(cal, Path(tmp), plots=not args.no_plots)
    print(cal.text())
    print(f"written: {args.out}/ ({', '.join(n for n in written if not n.endswith('.svg'))}; SVG beside each PNG)")
    # 3, as for a solve that did not converge: the fit stopped before a minimum (--max-evaluations)
    return 0 if cal["fit"]["status"] == "converged" else 3
