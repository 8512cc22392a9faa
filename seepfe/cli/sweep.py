"""``seepfe sweep SECTION SWEEP --out DIR``: many cases, target searches and fragility of one section.

Runs on all usable cores by default (``--workers N``), or on a Dask cluster (``--scheduler
tcp://host:port``).  Finished cases are cached under ``DIR/cases/`` so an interrupted sweep resumes
where it stopped; the table, plots and summaries go to ``DIR/results/`` all at once at the end.
"""

from __future__ import annotations

import math

from ..about import CAUTION
from .common import check_out_dir, parser_for, table


def register(sub) -> None:
    s = parser_for(sub, "sweep", "run a sweep file on a section: table of cases, target searches, "
                                 "fragility (resumable, parallel)",
                   "Solve many cases of one section from a sweep file: a table of cases, target searches and "
                   "fragility curves, on all cores or a Dask cluster; finished cases are cached, so a stopped "
                   "sweep resumes. Progress goes to stderr.",
                   "  seepfe sweep sections/levee_blanket.json sections/levee_blanket.sweep.json --out runs/sweep\n"
                   "  seepfe sweep levee.json plan.json --out runs/plan --order 1 --size 2 --max-solves 50")
    s.add_argument("section", help="section file (JSON)")
    s.add_argument("sweep", help="sweep file (JSON), see docs/sweeps.md")
    s.add_argument("--out", required=True, help="sweep folder: cases/ (cache) and results/ (final files)")
    s.add_argument("--workers", type=int, default=None, help="local worker processes (default: all cores; "
                   "1 = no pool)")
    s.add_argument("--scheduler", default=None, help="Dask scheduler address, e.g. tcp://10.0.0.5:8786 "
                   "(workers need seepfe installed)")
    s.add_argument("--max-solves", type=int, default=None,
                   help="solve at most this many new cases now; run again to continue")
    s.add_argument("--order", type=int, choices=(1, 2), default=None, help="element order for every case")
    s.add_argument("--size", type=float, default=None,
                   help="element size for every case, in the section file's length unit")
    s.add_argument("--linear", choices=("auto", "direct", "amg"), default=None,
                   help="linear solver for every case (default: the file's solver.linear)")
    s.add_argument("--no-plots", action="store_true", help="write the tables only")
    s.set_defaults(func=run)


def run(args) -> int:
    check_out_dir(args.out, sweep=True)
    from rich.progress import (BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn,
                               TimeRemainingColumn)

    from ..errors import SeepfeError
    from ..sweep import run_sweep
    if args.workers is not None and args.workers < 1:
        raise SeepfeError("--workers must be at least 1")
    import sys

    from rich.console import Console
    size = args.size
    if size is not None:
        if not (size > 0 and math.isfinite(size)):
            raise SeepfeError(f"--size must be a finite number > 0, got {size:g}")
        from ..section import _read
        from ..units import parse_units
        data, label = _read(args.section)
        size = size * parse_units(data.get("units"), label).factor("length")      # m, as run_sweep takes it
    solve = {k: v for k, v in (("order", args.order), ("size", size), ("linear", args.linear)) if v is not None}
    tasks: dict[str, int] = {}
    # progress goes to stderr (stdout carries only results); nothing at all under -q
    quiet = bool(getattr(args, "quiet", False))
    console = Console(file=sys.stderr, quiet=quiet)
    with Progress(TextColumn("{task.description}"), BarColumn(bar_width=24), MofNCompleteColumn(),
                  TimeElapsedColumn(), TextColumn("left"), TimeRemainingColumn(), transient=False,
                  console=console, disable=quiet) as bar:
        def progress(stage, done, total, cached):
            if stage not in tasks:
                # cached cases are counted as done before the clock starts, so the estimate is honest
                tasks[stage] = bar.add_task(stage[:28], total=total, completed=done)
            else:
                bar.update(tasks[stage], completed=done, total=total)
        rep = run_sweep(args.section, args.sweep, out=args.out, workers=args.workers, scheduler=args.scheduler,
                        progress=progress, max_solves=args.max_solves, solve=solve or None,
                        plots=not args.no_plots)
    print(f"cases: {rep.cases} ({rep.solved} solved now, {rep.cached} from the cache) on {rep.backend}, "
          f"{rep.wall_s:.1f} s")
    if not rep.complete:
        print(f"stopped after {rep.solved} new solves (--max-solves); run the same command again to finish. "
              f"Finished cases are kept in {args.out}/cases/.")
        return 4
    if rep.cases and rep.failed == rep.cases:
        from ..errors import SeepfeError
        first = next((r for r in rep.table if r["status"].startswith("error")), None)
        raise SeepfeError(f"every case of the sweep failed ({rep.cases} of {rep.cases})"
                          + (f"; first: case {first['case']}: {first['status']}" if first else "")
                          + f"; the table is in {rep.results_dir}/")
    if rep.table:
        bad = [r for r in rep.table if r["status"] != "ok"]
        fails = [r for r in rep.table if r["verdict"] == "fail"]
        unknown = [r for r in rep.table if r["verdict"] == "not checked"]
        fs = [r["fs"] for r in rep.table if not math.isnan(r["fs"])]
        line = f"table: {len(rep.table)} rows"
        if fs:
            line += f"; least FS from {min(fs):.3g} to {max(fs):.3g}"
        line += f"; verdict: {len(rep.table) - len(fails) - len(unknown)} pass, {len(fails)} fail"
        if unknown:
            line += f", {len(unknown)} not checked (first: case {unknown[0]['case']}: {unknown[0]['why']})"
        print(line)
        if bad:
            print(f"  {len(bad)} case(s) not ok, first: case {bad[0]['case']}: {bad[0]['status']}")
    if rep.targets:
        print(table("targets", ["name", "condition", "result", "tolerance", "solves", "status"],
                    [[t["name"], t["condition"],
                      "-" if math.isnan(t["value"]) else f"{t['parameter']} = {t['value']:.4g} {t['unit']}",
                      f"{t['tolerance']:g} {t['unit']}", t["solves"], t["status"]] for t in rep.targets]))
        for t in rep.targets:
            for w in t["warnings"]:
                print(f"  warning ({t['name']}): {w}")
    fr = rep.fragility
    if fr is not None:
        nk = sum(p.get("n_not_known", 0) for p in fr["probabilities"])
        if nk:
            print(f"  warning: {nk} realisation(s) gave no known FS (failed or not checked); the probabilities "
                  "below leave them out")
        print(table(f"fragility ({fr['samples']} {fr['sampling'].replace('_', ' ')} realisations, "
                    f"{int(round(fr['confidence'] * 100))}% {fr['interval'].replace('_', '-')} band)",
                    [f"stage ({fr['stage_unit']})", "P(FS < 1)", f"P(FS < {fr['criterion']:g})"],
                    [[f"{s:g}", f"{p['p_fs_below_1']:.2f} [{p['p_fs_below_1_low']:.2f}, {p['p_fs_below_1_high']:.2f}]",
                      f"{p['p_fs_below_criterion']:.2f} [{p['p_fs_below_criterion_low']:.2f}, "
                      f"{p['p_fs_below_criterion_high']:.2f}]"] for s, p in zip(fr["stages"], fr["probabilities"])]))
    if rep.fs_method:
        print(f"factor of safety: {rep.fs_method}")
    print(f"written: {rep.results_dir}/ ({', '.join(f for f in rep.files if not f.endswith('.svg'))}; SVG beside each PNG)")
    print(f"CAUTION: {CAUTION}")
    return 0
