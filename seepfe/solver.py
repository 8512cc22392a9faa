"""Assemble and solve a section: boundary conditions, the seepage-face iteration, the result.

Conditions on nodes (from the outline edges each boundary claims):

* ``head``: h = H on every node of the boundary.  With ``dry_above_level`` only nodes at or below
  the water level (y <= H) get h = H; those above it (a riverside slope above the river) act as a
  seepage face: water may leave there, never enter.
* ``seepage_face`` and ``drain``: h = y where water leaves; no flow where it would enter.  Found by
  iteration until the set of outflow nodes no longer changes.
* ``flux``: a prescribed normal inflow q (m/s), as consistent nodal loads.
* everything else on the outline: no flow.

Flows are consistent nodal reactions r = A h - f (m3/s per m, positive into the section), summed
over each boundary's nodes; a node shared by two reacting boundaries is split evenly between them.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass

import numpy as np

from . import drains, fem, linsolve, unsaturated
from .errors import SolverError
from .mesh import Mesh, make_mesh
from .result import Result
from .section import Section, load_section

__all__ = ["solve", "Conditions", "conditions"]

log = logging.getLogger("seepfe")


@dataclass(frozen=True)
class Conditions:
    """Node sets and values of the boundary conditions.

    head_nodes, head_values : prescribed heads (m).
    face_nodes : nodes that may become h = y outflow points (seepage faces, drains, head boundaries
        above their water level); face_start : their state at the first pass (True = h = y).
    load : (N,) consistent nodal inflow from flux boundaries, m3/s per m.
    """

    head_nodes: np.ndarray
    head_values: np.ndarray
    face_nodes: np.ndarray
    face_start: np.ndarray
    load: np.ndarray


def conditions(section: Section, mesh: Mesh) -> Conditions:
    """Turn the section's boundaries into node sets on this mesh."""
    n = mesh.n_nodes
    y = mesh.points[:, 1]
    tol = section.tol * 10
    head = np.full(n, np.nan)
    face = np.zeros(n, bool)
    start = np.zeros(n, bool)
    load = np.zeros(n)
    for bi, b in enumerate(section.spec.boundaries):
        on = mesh.edge_boundary == bi
        nodes = np.unique(mesh.edges[on])
        if b.kind == "head":
            dry = (y[nodes] > b.head + tol) if b.dry_above_level else np.zeros(len(nodes), bool)
            below, above = nodes[~dry], nodes[dry]
            head[below] = b.head
            face[above] = True            # start free: dry slope above the water
        elif b.kind in ("seepage_face", "drain"):
            face[nodes] = True
            start[nodes] = True
        elif b.kind == "flux":
            load += fem.edge_load(mesh.points, mesh.edges[on], np.full(on.sum(), b.flux), n)
    for dn in drains.drain_zone_nodes(section, mesh).values():   # drain zones: h = y, outflow only
        face[dn] = True
        start[dn] = True
    hn = np.flatnonzero(np.isfinite(head))
    face &= ~np.isfinite(head)            # a prescribed head wins at shared corners
    fn = np.flatnonzero(face)
    if len(hn) == 0:
        raise SolverError(f"{section.source}: no mesh node carries a prescribed head "
                          "(every head boundary lies above its own water level)")
    return Conditions(head_nodes=hn, head_values=head[hn], face_nodes=fn, face_start=start[fn], load=load)


def _solve_fixed(A, load, fixed, values, method, tol, cache):
    """Solve A h = load with h[fixed] = values; reuse the factorisation when the fixed set repeats."""
    n = A.shape[0]
    free = np.ones(n, bool)
    free[fixed] = False
    key = fixed.tobytes()
    h = np.zeros(n)
    h[fixed] = values
    fi = np.flatnonzero(free)
    t0 = time.perf_counter()
    if cache.get("key") != key:
        Aff = A[fi][:, fi]
        Afd = A[fi][:, fixed]
        cache.update(key=key, solver=linsolve.factorize(Aff.tocsr(), method, tol), Afd=Afd)
        cache["factor_s"] = cache.get("factor_s", 0.0) + time.perf_counter() - t0
        cache["factorizations"] = cache.get("factorizations", 0) + 1
    b = load[fi] - cache["Afd"] @ values
    t1 = time.perf_counter()
    h[fi] = cache["solver"].solve(b)
    cache["solve_s"] = cache.get("solve_s", 0.0) + time.perf_counter() - t1
    return h


def solve(section, *, order: int | None = None, size: float | None = None, mesh: Mesh | None = None,
          linear: str | None = None) -> Result:
    """Mesh, assemble and solve a section for the steady head field.

    Parameters
    ----------
    section : Section, dict or path
        A validated section (or anything :func:`seepfe.load_section` takes).
    order : {1, 2}, optional
        Element order (default: the section's ``mesh.order``, 2).
    size : float, optional
        Element size in m (default: the section's ``mesh.size`` or extent / 60).
    mesh : Mesh, optional
        A ready mesh of this section (skips meshing).
    linear : {"auto", "direct", "amg"}, optional
        Linear solver (default: the section's ``solver.linear``).

    Returns
    -------
    Result
        Heads, gradients, velocities, boundary flows and solver figures.
    """
    if not isinstance(section, Section):
        section = load_section(section)
    t0 = time.perf_counter()
    if mesh is None:
        mesh = make_mesh(section, order=order, size=size)
    t1 = time.perf_counter()
    log.info("mesh: %d P%d triangles, %d nodes (%.2f s)", mesh.n_elements, mesh.order, mesh.n_nodes, t1 - t0)
    sspec = section.spec.solver
    method = linear or sspec.linear
    Kz = section.zone_tensors()
    Ke = fem.element_matrices(mesh.points, mesh.cells, Kz[mesh.zone], mesh.order)
    A = fem.assemble(mesh.cells, Ke, mesh.n_nodes)
    t2 = time.perf_counter()
    bc = conditions(section, mesh)
    y = mesh.points[:, 1]
    face_fixed = bc.face_start.copy()
    cache: dict = {}
    rtol = 1e-9
    htol = 10 * section.tol
    converged = False
    history = []
    it = 0
    start = None
    if sspec.phreatic == "auto" and sspec.nonlinear == "newton":
        # a nested (split) mesh: the first saturated solve on its coarsest level; partly dry there, the
        # unconfined solve starts from it and the saturated solve of this mesh is not needed
        start = unsaturated.saturated_start(section, mesh, method, sspec.tolerance)
        if start is not None:
            cache = start[3]
    for it in range(1, 0 if start is not None else sspec.max_iterations + 1):
        fixed = np.concatenate([bc.head_nodes, bc.face_nodes[face_fixed]])
        values = np.concatenate([bc.head_values, y[bc.face_nodes[face_fixed]]])
        order_ = np.argsort(fixed)
        h = _solve_fixed(A, bc.load, fixed[order_], values[order_], method, sspec.tolerance, cache)
        if it == 1 and sspec.phreatic == "auto" and unsaturated.is_partly_dry(mesh, h, 10 * section.tol):
            break          # partly dry: the faces are iterated inside the unconfined solve below
        if len(bc.face_nodes) == 0:
            converged = True
            break
        r = A @ h - bc.load
        scale = max(np.abs(r[bc.head_nodes]).max(), 1e-300)
        rf = r[bc.face_nodes]
        release = face_fixed & (rf > rtol * scale)          # inflow at an outflow point
        catch = ~face_fixed & (h[bc.face_nodes] > y[bc.face_nodes] + htol)  # head above ground, no outlet
        history.append(int(face_fixed.sum()))
        log.info("seepage-face pass %d: %d of %d face nodes held at h = y", it, int(face_fixed.sum()),
                 len(bc.face_nodes))
        if not release.any() and not catch.any():
            converged = True
            break
        face_fixed = (face_fixed & ~release) | catch
    unconf = None
    if start is not None or (sspec.phreatic == "auto" and unsaturated.is_partly_dry(mesh, h, 10 * section.tol)):
        # part of the section lies above the phreatic surface: saturated-unsaturated solve (issue 4)
        unconf = unsaturated.solve_unconfined(
            section, mesh, Ke, bc, None if start is not None else h, face_fixed, method=sspec.nonlinear,
            linear=method, tol=sspec.tolerance, max_iterations=sspec.max_iterations, start=start)
        h, A, fixed, face_fixed = unconf.h, unconf.matrix, unconf.fixed, unconf.face_active
        converged = unconf.converged     # the active set of the faces is iterated inside it
    t3 = time.perf_counter()
    log.info("solved: %d unknowns, %s (%.2f s)", A.shape[0] - len(fixed),
             "converged" if converged else "NOT converged", t3 - t2)
    reactions = A @ h - bc.load
    solver = cache["solver"]
    info = {
        "linear_solver": solver.method, "backend": solver.backend, "unknowns": int(A.shape[0] - len(fixed)),
        "nonzeros": int(A.nnz), "seepage_face_passes": it, "factorizations": cache.get("factorizations", 0),
        "converged": bool(converged),
        "times_s": {"mesh": round(t1 - t0, 4), "assemble": round(t2 - t1, 4),
                    "factor": round(cache.get("factor_s", 0.0), 4), "solve": round(t3 - t2, 4)},
    }
    if solver.method == "amg":
        info["amg_iterations"] = int(solver.iterations)
    if unconf is not None:
        info["unconfined"] = unconf.info
    if not converged and unconf is None:
        log.warning("seepage-face iteration did not settle in %d passes", it)
    return Result(section=section, mesh=mesh, h=h, reactions=reactions, load=bc.load,
                  fixed=np.sort(fixed), solver_info=info, matrix=A,
                  element_K=Kz[mesh.zone] if unconf is None else Kz[mesh.zone] * unconf.kr[:, None, None],
                  kr=None if unconf is None else unconf.kr,
                  face_nodes=bc.face_nodes, face_active=face_fixed.copy())
