"""How loading a section scales with the number of polygon vertices (issue 15: it was quadratic).

An invented 40 m x 5 m ground block whose top follows y = 0.1 sin(x) with N vertices is loaded
(validation, tiling, the planar graph handed to the mesher) at several N.  Printed: the load time, its
ratio to the smallest N's load in the same process, and the exponent p of t ~ N^p between successive
sizes (1 is linear; the old every-point-against-every-edge matching gave about 2).  ``--mesh`` also
meshes (gmsh), which is what ``seepfe check`` does next; the mesh follows every vertex, so gmsh's
time grows with N too.

    python3 scripts/bench_geometry.py                 # N = 2500, 10000, 20000, 100000
    python3 scripts/bench_geometry.py --sizes 2500 20000 --mesh
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import seepfe  # noqa: E402


def section(n: int) -> dict:
    x = np.linspace(-20.0, 20.0, n)
    top = np.column_stack([x, 0.1 * np.sin(x)]).tolist()
    return {"title": f"invented block, {n} vertices on top", "materials": {"s": {"k": 1e-5}},
            "zones": [{"name": "g", "material": "s", "polygon": [[20.0, -5.0], [-20.0, -5.0]] + top}],
            "boundaries": [{"name": "left", "polyline": [[-20.0, -5.0], top[0]], "head": 1.0},
                           {"name": "right", "polyline": [[20.0, -5.0], top[-1]], "head": 0.0}],
            "mesh": {"size": 2.0, "order": 1}}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--sizes", type=int, nargs="+", default=[2500, 10000, 20000, 100000])
    ap.add_argument("--mesh", action="store_true", help="also mesh (what seepfe check does after loading)")
    a = ap.parse_args()
    rows, t0, prev = [], None, None
    seepfe.load_section(section(100))          # imports and first-call costs, outside the timings
    for n in a.sizes:
        d = section(n)
        t = time.perf_counter()
        sec = seepfe.load_section(d)
        load = time.perf_counter() - t
        mesh = math.nan
        if a.mesh:
            t = time.perf_counter()
            m = seepfe.make_mesh(sec, order=1)
            mesh = time.perf_counter() - t
        t0 = t0 or load
        p = "-" if prev is None else f"{math.log(load / prev[1]) / math.log(n / prev[0]):.2f}"
        rows.append((n, load, load / t0, p, mesh, m.n_elements if a.mesh else 0))
        prev = (n, load)
        print(f"N = {n:>7}: load {load:7.3f} s  (x{load / t0:6.1f} the first, exponent {p})"
              + (f"; mesh {mesh:7.2f} s, {m.n_elements} triangles" if a.mesh else ""), flush=True)


if __name__ == "__main__":
    main()
