"""``seepfe reach REACH --out DIR``: every section of a levee reach, solved, checked and reported together."""

from __future__ import annotations

from .common import parser_for


def register(sub) -> None:
    p = parser_for(sub, "reach", "solve every section of a reach file and write a reach report (resumable, "
                                 "parallel)",
                   "Solve and check every section a reach file lists by station (and each at the reach's river "
                   "stages, if any), on all cores or a Dask cluster; finished stations are cached in DIR/cases/, "
                   "so a stopped run resumes. Writes DIR/results/: report.html (a table by station, FS and exit "
                   "gradient against station, failing stations marked), reach.csv, and each station's own report "
                   "under stations/. docs/report.md.",
                   "  seepfe reach sections/levee_reach.reach.json --out runs/reach\n"
                   "  seepfe reach reach.json --out runs/reach --workers 4 --pdf --paper Letter\n"
                   "  seepfe reach reach.json --out runs/reach --scheduler tcp://10.0.0.5:8786")
    p.add_argument("reach", help="reach file (JSON): stations and their section files")
    p.add_argument("--out", required=True, help="reach folder: cases/ (cache) and results/ (final files)")
    p.add_argument("--workers", type=int, default=None, help="local worker processes (default: all cores)")
    p.add_argument("--scheduler", default=None, help="Dask scheduler address (workers need seepfe installed)")
    p.add_argument("--max-solves", type=int, default=None, help="solve at most this many now; run again to go on")
    p.add_argument("--paper", choices=("A4", "Letter"), default="A4", help="paper size of the printed reports")
    p.add_argument("--pdf", action="store_true", help="also print the reach report to report.pdf")
    p.set_defaults(func=run)


def run(args) -> int:
    import sys

    from .common import check_out_dir
    check_out_dir(args.out, sweep=True)        # --out first: refused before any solve

    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    from ..about import CAUTION
    from ..errors import SeepfeError
    from ..report.reach import run_reach
    from .common import table
    if args.workers is not None and args.workers < 1:
        raise SeepfeError("--workers must be at least 1")
    quiet = bool(getattr(args, "quiet", False))
    tasks: dict = {}
    with Progress(TextColumn("{task.description}"), BarColumn(bar_width=24), MofNCompleteColumn(),
                  TimeElapsedColumn(), console=Console(file=sys.stderr, quiet=quiet), disable=quiet) as bar:
        def progress(stage, done, total, cached):
            if stage not in tasks:
                tasks[stage] = bar.add_task(stage, total=total, completed=done)
            else:
                bar.update(tasks[stage], completed=done, total=total)
        res = run_reach(args.reach, args.out, workers=args.workers, scheduler=args.scheduler,
                        max_solves=args.max_solves, paper=args.paper, progress=progress, pdf=args.pdf)
    if not res.complete:
        print(f"stopped after {res.solved} new solves (--max-solves); run the same command again to finish. "
              f"Finished stations are kept in {args.out}/cases/.")
        return 4
    print(table("reach: by station", ["station", "least FS", "mode", "largest exit gradient", "failing length (m)",
                                      "verdict"],
                [[r["station"], "-" if r["fs"] is None else f"{r['fs']:.2f}", r["fs_mode"] or "-",
                  "-" if r["exit_gradient_max"] is None else f"{r['exit_gradient_max']:.3f}",
                  "-" if r["failing_length_m"] is None else f"{r['failing_length_m']:.1f}", r["verdict"].upper()]
                 for r in res.rows]))
    print(f"stations: {len(res.rows)} ({res.solved} solved now, {res.cached} from the cache) on {res.backend}")
    print(f"written: {res.results}/ (report.html, reach.csv, reach.json, stations/<station>/report.html"
          f"{', report.pdf' if args.pdf else ''})")
    print(f"CAUTION: {CAUTION}")
    return 0
