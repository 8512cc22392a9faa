"""Boundary conditions on the nodes of a mesh, and the active-set rule of the outflow-only points.

Shared by the confined solve (:mod:`seepfe.solver`) and the unconfined one (:mod:`seepfe.unsaturated`),
so neither imports the other.

Conditions on nodes (from the outline edges each boundary claims):

* ``head``: h = H on every node of the boundary.  With ``dry_above_level`` only nodes at or below
  the water level (y <= H) get h = H; those above it (a riverside slope above the river) act as a
  seepage face: water may leave there, never enter.
* ``seepage_face`` and ``drain`` boundaries, and every node of a drain zone: h = y where water leaves;
  no flow where it would enter (outflow-only points, a complementarity condition).
* ``flux``: a prescribed normal inflow q (m/s), as consistent nodal loads.
* everything else on the outline: no flow.

The outflow-only points are updated as an active set (:func:`update_active`): a point held at h = y
that takes water in is released; a free point whose head rises above its elevation is caught.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from . import drains, fem, linsolve
from .errors import SolverError

__all__ = ["Conditions", "conditions", "update_active", "fixed_set", "solve_fixed", "RELEASE_TOL"]

#: an outflow point is released when its reaction is an inflow above this fraction of the largest
#: reaction at a prescribed head
RELEASE_TOL = 1e-9


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


def conditions(section, mesh) -> Conditions:
    """Turn the section's boundaries into node sets on this mesh."""
    n = mesh.n_nodes
    y = mesh.points[:, 1]
    tol = section.head_tol            # a node above the water level by more than this is dry
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


def fixed_set(bc: Conditions, face: np.ndarray, y: np.ndarray):
    """Sorted prescribed nodes and their heads (m) with the outflow points in state ``face`` (True = h = y)."""
    fixed = np.concatenate([bc.head_nodes, bc.face_nodes[face]])
    values = np.concatenate([bc.head_values, y[bc.face_nodes[face]]])
    o = np.argsort(fixed)
    return fixed[o], values[o]


def update_active(bc: Conditions, face: np.ndarray, reactions: np.ndarray, h: np.ndarray, y: np.ndarray,
                  htol: float):
    """The active-set rule of the outflow-only points.

    face : current state of ``bc.face_nodes`` (True = held at h = y); reactions : (N,) nodal inflow
    A h - f, m3/s per m; h : (N,) heads, m; htol : head tolerance, m.

    Returns (new state, release, catch): release = held points that take water in (reaction an inflow
    above RELEASE_TOL x the largest reaction at a prescribed head); catch = free points whose head is
    above their elevation by more than htol.
    """
    fn = bc.face_nodes
    if len(fn) == 0:
        e = np.zeros(0, bool)
        return face.copy(), e, e
    scale = max(float(np.abs(reactions[bc.head_nodes]).max()), 1e-300)
    release = face & (reactions[fn] > RELEASE_TOL * scale)
    catch = ~face & (h[fn] > y[fn] + htol)
    return (face & ~release) | catch, release, catch


def solve_fixed(A, load, fixed, values, method, tol, cache):
    """Solve A h = load with h[fixed] = values (sorted); reuse the factorisation while the fixed set repeats.

    ``cache`` (a dict) keeps the factorisation and accumulates ``factor_s``, ``solve_s`` and
    ``factorizations``."""
    n = A.shape[0]
    free = np.ones(n, bool)
    free[fixed] = False
    key = fixed.tobytes()
    h = np.zeros(n)
    h[fixed] = values
    fi = np.flatnonzero(free)
    if cache.get("key") != key:
        t0 = time.perf_counter()
        Af = A[fi]
        Aff = Af[:, fi]
        Afd = Af[:, fixed]
        cache.update(key=key, solver=linsolve.factorize(Aff.tocsr(), method, tol), Afd=Afd)
        cache["factor_s"] = cache.get("factor_s", 0.0) + time.perf_counter() - t0
        cache["factorizations"] = cache.get("factorizations", 0) + 1
    b = load[fi] - cache["Afd"] @ values
    t1 = time.perf_counter()
    h[fi] = cache["solver"].solve(b)
    cache["solve_s"] = cache.get("solve_s", 0.0) + time.perf_counter() - t1
    return h
