"""Benchmark of the transient solve (issue 14): a 100-step flood hydrograph on the demo levee, in steady-solve
equivalents measured in the same process.

    python scripts/bench_transient.py            # sections/levee_blanket.json (about 9e3 P2 nodes)
    python scripts/bench_transient.py --repeat 1 --section sections/levee_flood.json

The reference is ``seepfe.solve`` of the steady problem at the crest stage on the same mesh (meshing excluded); the
transient runs use that mesh too (every time is the best of --repeat runs), with 100 equal steps (first_step = max_step = duration /
100, the hydrograph's points on multiples of the step). Three transient runs:

* unconfined, time history of the exit checks at every step (what ``seepfe solve`` does);
* unconfined, exit checks at the stored times only (``history=False``);
* confined (``"solver": {"phreatic": "off"}``, the whole section saturated): a linear step, one LDL^T factorisation
  per distinct (step, prescribed set), reused.

The target of the issue: the 100-step run within 20 steady-solve equivalents.
"""

from __future__ import annotations

import argparse
import copy
import json
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

#: the flood (days, m): points on multiples of 0.14 day, the step of 100 steps over 14 days
FLOOD = [[0.0, 2.0], [2.8, 2.6], [5.6, 4.5], [7.0, 5.0], [8.4, 4.3], [11.2, 2.2], [14.0, 2.0]]


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--section", default=str(ROOT / "sections" / "levee_blanket.json"))
    ap.add_argument("--repeat", type=int, default=2, help="best of this many runs (reference and transient runs)")
    ap.add_argument("--steps", type=int, default=100)
    args = ap.parse_args(argv)
    import seepfe
    from seepfe.hydrograph import section_at
    from seepfe.transient import solve_transient
    data = json.loads(Path(args.section).read_text())
    river = next(b for b in data["boundaries"] if "head" in b or "hydrograph" in b)
    for k in ("head", "hydrograph", "output_times", "peak", "duration"):
        river.pop(k, None)
    river["hydrograph"] = FLOOD
    river["time_unit"] = "day"
    step = FLOOD[-1][0] / args.steps
    data["transient"] = {"max_step": step, "first_step": step}
    sec = seepfe.load_section(data)
    mesh = seepfe.make_mesh(sec)
    crest = section_at(sec, 7.0 * 86400.0)
    ref = []
    for _ in range(max(1, args.repeat)):
        t0 = time.perf_counter()
        r = seepfe.solve(crest, mesh=mesh)
        ref.append(time.perf_counter() - t0)
    t_ref = min(ref)
    print(f"{sec.title}\nmesh: {mesh.n_nodes} nodes, P{mesh.order}; steady solve at the crest stage "
          f"(reference, best of {len(ref)}): {t_ref:.3f} s ({r.solver_info['factorizations']} factorisations)")
    rows = []

    def bench(label, s, history):
        best = None
        for _ in range(max(1, args.repeat)):          # best of --repeat, as the reference
            t0 = time.perf_counter()
            res = solve_transient(s, mesh=mesh, history=history)
            dt = time.perf_counter() - t0
            best = dt if best is None else min(best, dt)
        dt = best
        i = res.solver_info
        rows.append([label, f"{dt:.2f}", f"{dt / t_ref:.1f}", str(i["steps"]), str(i["newton_iterations"]),
                     str(i["krylov_iterations"]), str(i["factorizations"]),
                     f"{i['factorizations_linear']} / {i['distinct_linear_keys']}",
                     f"{i['times_s']['history']:.2f}", f"{res.balance['largest_step_error']:.1e}"])
        return res

    res = bench("unconfined, exit checks every step", sec, True)
    bench("unconfined, checks at stored times", sec, False)
    conf = copy.deepcopy(data)
    conf.setdefault("solver", {})["phreatic"] = "off"
    bench("confined (phreatic off)", seepfe.load_section(conf), True)
    head = ["run", "time (s)", "steady-solve equivalents", "steps", "Newton iterations", "GMRES iterations",
            "factorisations", "linear factorisations / distinct (step, set)", "history (s)", "largest balance error"]
    from seepfe.text import table
    print(table("transient runs on the same mesh (times include the initial steady state)", head, rows))
    lf = res.least_fs
    print(f"least FS {lf['fs']:.3f} at {lf['time_s'] / 86400:.3g} day, {lf['lag_after_crest_s'] / 86400:.3g} day after "
          f"the crest; target: within 20 steady-solve equivalents")
    return 0


if __name__ == "__main__":
    sys.exit(main())
