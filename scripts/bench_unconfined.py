"""Cost of the unconfined (phreatic-surface) solve against one linear solve of the same mesh.

Runs the demo sections/small_dam.json at about 1e5 nodes (P2): meshes once, then times
(a) one linear solve: assembly of the saturated matrix, factorisation and solve with the final set of
    prescribed nodes, and
(b) the unconfined solve: seepfe.solve on the same mesh (saturated passes, then the Newton iteration),
and prints the iterations, factorisations, times (s) and the ratio (b) / (a) in linear-solve
equivalents.  Both are measured in this process, one after the other.

    python scripts/bench_unconfined.py [--size 0.24] [--repeat 1]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import seepfe
from seepfe import fem, linsolve


def one_linear_solve(section, mesh, fixed, values):
    t0 = time.perf_counter()
    Ke = fem.element_matrices(mesh.points, mesh.cells, section.zone_tensors()[mesh.zone], mesh.order)
    A = fem.assemble(mesh.cells, Ke, mesh.n_nodes)
    free = np.setdiff1d(np.arange(mesh.n_nodes), fixed)
    s = linsolve.factorize(A[free][:, free].tocsr(), "direct")
    s.solve(-(A[free][:, fixed] @ values))
    return time.perf_counter() - t0


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--section", default="sections/small_dam.json")
    ap.add_argument("--size", type=float, default=0.24, help="element size, m")
    ap.add_argument("--repeat", type=int, default=1)
    a = ap.parse_args()
    sec = seepfe.load_section(a.section)
    t0 = time.perf_counter()
    mesh = seepfe.make_mesh(sec, size=a.size)
    print(f"{a.section}: {mesh.n_nodes} nodes, {mesh.n_elements} P{mesh.order} elements "
          f"(meshed in {time.perf_counter() - t0:.2f} s)")
    rows = []
    for _ in range(a.repeat):
        t1 = time.perf_counter()
        r = seepfe.solve(sec, mesh=mesh, linear="direct")
        t_unc = time.perf_counter() - t1
        t_lin = one_linear_solve(sec, mesh, r.fixed, r.h[r.fixed])
        rows.append((t_unc, t_lin))
    t_unc, t_lin = np.median(np.array(rows), axis=0)
    u = r.solver_info["unconfined"]
    print(f"converged: {u['converged']}, iterations: {u['iterations']}, factorizations (Newton): "
          f"{u['factorizations']}, chord steps: {u['chord_steps']}, continuation stages: "
          f"{u['continuation_stages']}, saturated passes before: {r.solver_info['seepage_face_passes']}")
    print(f"krylov iterations (GMRES, old LU as preconditioner): {u.get('krylov_iterations', 0)}")
    for lv in u.get("levels", []):
        print(f"  level P{lv['order']} {lv['nodes']} nodes: {lv['iterations']} iterations, "
              f"{lv['factorizations']} factorisations, {lv['time_s']:.2f} s")
    print(f"relative flow residual: {u['relative_residual']:.2e}, balance: {r.balance['relative_error']:.2e}; "
          f"stop: {u.get('stop_reason', '')}")
    print(f"one linear solve (assemble + factorise + solve): {t_lin:.2f} s")
    print(f"unconfined solve (seepfe.solve on the same mesh): {t_unc:.2f} s "
          f"(Newton part {u['times_s']['total']:.2f} s, of which factorisations {u['times_s']['factor']:.2f} s)")
    print(f"ratio: {t_unc / t_lin:.1f} linear-solve equivalents (aim < 10)")
    print(f"drain outflow (m3/s per m): {r.drain_flows()}")


if __name__ == "__main__":
    main()
