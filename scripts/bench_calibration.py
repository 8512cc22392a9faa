"""Cost of the calibration's sensitivities: one back-substitution per key with the forward factorisation
against forward finite differences (one whole solve per key), as a ratio measured in the same process.

    python3 scripts/bench_calibration.py [--order 2] [--repeat 3]

Prints, for the example levee_ditch (two events, three keys), the time of one forward evaluation, of the
Jacobian by back-substitution and of the Jacobian by finite differences, and their ratios.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))


def main(argv=None) -> int:
    import numpy as np

    from seepfe.calibration.model import ForwardModel
    from seepfe.calibration.observations import load_observations
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--order", type=int, default=2, choices=(1, 2))
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    data = json.loads((ROOT / "sections" / "levee_ditch.json").read_text())
    obs_d = json.loads((ROOT / "sections" / "levee_ditch.observations.json").read_text())
    obs_d["fit"]["anisotropy"] = {"min": 0.5, "max": 50.0}
    obs = load_observations(obs_d, data)
    model = ForwardModel(data, "levee_ditch", obs, obs.fit, order=args.order)
    theta = np.log([4e-7, 1.5e-4, 3.0])
    model.evaluate(theta)                                   # mesh, imports
    rows = []
    for _ in range(args.repeat):
        model._cache.clear()
        t0 = time.perf_counter()
        base = model.evaluate(theta)
        t1 = time.perf_counter()
        model.jacobian(theta)
        t2 = time.perf_counter()
        for i in range(len(obs.events)):
            for j in range(len(theta)):
                model._finite_difference(theta, j, i, base, "confined")
        t3 = time.perf_counter()
        rows.append((t1 - t0, t2 - t1, t3 - t2))
    f, d, fd = (min(r[k] for r in rows) for k in range(3))
    n = base.results[0].mesh.n_nodes
    print(f"levee_ditch, P{args.order}, {n} nodes, 2 events, 3 keys (best of {args.repeat})")
    print(f"  forward evaluation (2 solves)              {f:8.3f} s")
    print(f"  Jacobian by back-substitution              {d:8.3f} s   {d / f:6.2f} x forward")
    print(f"  Jacobian by finite differences (6 solves)  {fd:8.3f} s   {fd / f:6.2f} x forward")
    print(f"  finite differences / back-substitution     {fd / d:8.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
