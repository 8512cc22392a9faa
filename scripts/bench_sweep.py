"""Sweep throughput: time per case and scaling with workers, and the Dask path against the local pool.

    python scripts/bench_sweep.py [--cases 100] [--workers 1 2] [--no-dask]

A river-stage sweep of the demo levee (sections/levee_blanket.json) is run from an empty cache on
each backend: in-process (1 worker), the local process pool (each worker count), and a Dask
LocalCluster with as many single-threaded worker processes.  Ratios are against the in-process run of
the same session on the same machine; a single direct solve is timed first as the reference.
Timings on a shared machine vary: read the ratios, not the seconds.
"""

from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import seepfe  # noqa: E402
from seepfe.sweep import run_sweep  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=100)
    ap.add_argument("--workers", type=int, nargs="+", default=[1, 2])
    ap.add_argument("--size", type=float, default=None, help="element size, m (default: the file's)")
    ap.add_argument("--no-dask", action="store_true")
    a = ap.parse_args(argv)
    section = ROOT / "sections" / "levee_blanket.json"
    sweep = {"vary": {"boundaries.river.head": {"from": 1.0, "to": 6.0, "count": a.cases}}, "exit": ["landside"]}
    solve = {"size": a.size} if a.size else None
    t = time.perf_counter()
    r = seepfe.solve(section, size=a.size)
    t_one = time.perf_counter() - t
    print(f"demo levee: {r.mesh.n_nodes} nodes, P{r.mesh.order}; one direct solve {t_one:.2f} s "
          f"(no exit checks)")
    rows = []
    tmp = Path(tempfile.mkdtemp(prefix="bench_sweep."))
    try:
        def timed(label, workers, **kw):
            out = tmp / f"{label}-{workers}"
            t0 = time.perf_counter()
            rep = run_sweep(section, sweep, out=out, workers=workers, plots=False, solve=solve, **kw)
            wall = time.perf_counter() - t0
            assert rep.complete and rep.solved == a.cases
            rows.append({"backend": label, "workers": workers, "cases": a.cases, "wall_s": wall,
                         "s_per_case": wall / a.cases, "table": (out / "results" / "table.csv").read_text()})
            print(f"  {label:<12s} workers {workers}: {wall:7.2f} s, {wall / a.cases:.3f} s/case", flush=True)

        for w in a.workers:
            timed("serial" if w == 1 else "process", w)
        if not a.no_dask:
            from distributed import Client, LocalCluster
            for w in [w for w in a.workers if w > 1] or [1]:
                with LocalCluster(n_workers=w, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cl, Client(cl) as client:
                    client.run(lambda: __import__("seepfe.sweep"))      # warm the workers like the pool
                    timed("dask", w, scheduler=client)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    base = next(r for r in rows if r["workers"] == 1 and r["backend"] == "serial")
    same = all(r["table"] == base["table"] for r in rows)
    print()
    print(f"{'backend':<10} {'workers':>7} {'cases':>6} {'wall (s)':>9} {'s/case':>7} {'speed-up':>9} "
          f"{'vs pool':>8}")
    for r in rows:
        pool = next((p for p in rows if p["backend"] == "process" and p["workers"] == r["workers"]), None)
        vs = f"{r['wall_s'] / pool['wall_s']:.2f}" if (pool and r["backend"] == "dask") else "-"
        print(f"{r['backend']:<10} {r['workers']:>7} {r['cases']:>6} {r['wall_s']:>9.2f} {r['s_per_case']:>7.3f} "
              f"{base['wall_s'] / r['wall_s']:>9.2f} {vs:>8}")
    print(f"tables identical across backends: {same}")
    print(json.dumps({"one_solve_s": t_one, "runs": [{k: v for k, v in r.items() if k != "table"} for r in rows]}))
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
