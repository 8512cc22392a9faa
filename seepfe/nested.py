"""Nested coarse levels of a mesh and the prolongation of nodal values from a coarse level to a fine one.

Large meshes are made by 4-way splits of a coarser gmsh mesh (:func:`seepfe.mesh.split_triangles`), so
they are nested: every element of the split mesh lies inside one element of the mesh before the split.
Two coarsenings are recovered from the arrays of a :class:`seepfe.mesh.Mesh` alone (no re-meshing):

* ``split``: undo the last 4-way split.  ``split_triangles`` writes the children of the parent triangles
  in four blocks (corner 0, corner 1, corner 2, centre) and the halves of the outline edges in two blocks,
  so the parent triangles and edges are read back from those blocks.  For P2 the parent's six nodes are
  the vertices of the split mesh (its three corners and the three split points of its edges).
* ``p1``: a P2 mesh read as P1 on the same triangles (its vertices only).

In both cases the coarse nodes are the first nodes of the fine mesh (vertices come first in seepfe
meshes), so restriction by injection is ``h[:n_coarse]``, and the prolongation evaluates the coarse
element's own shape functions at the fine nodes it contains (exact for fields the coarse space carries).
Every structural assumption is checked; when one fails there is no coarser level (``None``).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import scipy.sparse as sp

from . import fem
from .mesh import Mesh

__all__ = ["coarser", "hierarchy"]

# reference coordinates, in the parent triangle, of the corners of the four children of a split
_CHILD_CORNERS = np.array([
    [[0.0, 0.0], [0.5, 0.0], [0.0, 0.5]],      # corner 0: v0, m01, m20
    [[0.5, 0.0], [1.0, 0.0], [0.5, 0.5]],      # corner 1: m01, v1, m12
    [[0.0, 0.5], [0.5, 0.5], [0.0, 1.0]],      # corner 2: m20, m12, v2
    [[0.5, 0.0], [0.5, 0.5], [0.0, 0.5]],      # centre: m01, m12, m20
])
_REF = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]])


def _local_ref(corners: np.ndarray, order: int) -> np.ndarray:
    """Reference coordinates of the local nodes (corners, then P2 midpoints 01, 12, 20)."""
    if order == 1:
        return corners
    mids = 0.5 * (corners + corners[[1, 2, 0]])
    return np.vstack([corners, mids])


def _prolongation(fine_cells, parent, xi_per_cell, coarse_cells, coarse_order, n_fine, n_coarse):
    """P (n_fine, n_coarse): each fine node takes the coarse shape functions of a parent at its position.

    fine_cells (E, nl); parent (E,) coarse cell of each fine cell; xi_per_cell (E, nl, 2) reference
    coordinates of the fine local nodes in the parent.  A node shared by several fine cells takes the row
    of the first one (the coarse field is continuous, so all agree)."""
    nodes = fine_cells.ravel()
    first = np.unique(nodes, return_index=True)[1]
    if len(first) != n_fine:
        return None
    node = nodes[first]
    cell = np.repeat(np.arange(len(fine_cells)), fine_cells.shape[1])[first]
    xi = xi_per_cell.reshape(-1, 2)[first]
    W = fem.shape(coarse_order, xi)                               # (n_fine, nloc_coarse)
    W[np.abs(W) < 1e-14] = 0.0
    cols = coarse_cells[parent[cell]]
    P = sp.csr_matrix((W.ravel(), (np.repeat(node, W.shape[1]), cols.ravel())), shape=(n_fine, n_coarse))
    P.eliminate_zeros()
    return P


def _split_parent(mesh: Mesh):
    """Undo the last 4-way split; (coarse mesh, P) or None when the mesh is not split."""
    T = mesh.cells[:, :3]
    E = len(T)
    if E == 0 or E % 4 or mesh.stats.get("splits", 0) < 1:
        return None
    Ec = E // 4
    b0, b1, b2, b3 = T[:Ec], T[Ec:2 * Ec], T[2 * Ec:3 * Ec], T[3 * Ec:]
    v0, v1, v2 = b0[:, 0], b1[:, 1], b2[:, 2]
    m01, m12, m20 = b3[:, 0], b3[:, 1], b3[:, 2]
    ok = (np.array_equal(b0[:, 1], m01) and np.array_equal(b0[:, 2], m20) and np.array_equal(b1[:, 0], m01)
          and np.array_equal(b1[:, 2], m12) and np.array_equal(b2[:, 0], m20) and np.array_equal(b2[:, 1], m12)
          and all(np.array_equal(mesh.zone[:Ec], mesh.zone[k * Ec:(k + 1) * Ec]) for k in (1, 2, 3)))
    if not ok:
        return None
    nc = int(max(v0.max(), v1.max(), v2.max())) + 1               # parent vertices come first
    nv = mesh.n_vertices if mesh.order == 2 else mesh.n_nodes
    if min(m01.min(), m12.min(), m20.min()) < nc or nc >= nv:
        return None
    p = mesh.points
    for m, a, b in ((m01, v0, v1), (m12, v1, v2), (m20, v2, v0)):
        if not np.allclose(p[m], 0.5 * (p[a] + p[b]), rtol=0.0, atol=1e-9 * (1.0 + np.abs(p).max())):
            return None
    # outline edges: first halves (a, m) of all parent edges, then the second halves (m, b)
    e, eb = mesh.edges, mesh.edge_boundary
    B = len(e)
    if B % 2:
        return None
    Bc = B // 2
    e1, e2 = e[:Bc], e[Bc:]
    if not (np.array_equal(e1[:, 1], e2[:, 0]) and np.array_equal(eb[:Bc], eb[Bc:])):
        return None
    if mesh.order == 2:
        cells = np.stack([v0, v1, v2, m01, m12, m20], axis=1)
        edges = np.stack([e1[:, 0], e2[:, 1], e1[:, 1]], axis=1)
        n_coarse, n_vert = nv, nc
    else:
        cells = np.stack([v0, v1, v2], axis=1)
        edges = np.stack([e1[:, 0], e2[:, 1]], axis=1)
        n_coarse, n_vert = nc, nc
    if edges.max(initial=0) >= n_coarse:
        return None
    stats = dict(mesh.stats, splits=int(mesh.stats["splits"]) - 1, nodes=n_coarse, elements=Ec)
    coarse = replace(mesh, points=p[:n_coarse], cells=cells, zone=mesh.zone[:Ec].copy(), edges=edges,
                     edge_boundary=eb[:Bc].copy(), n_vertices=n_vert, stats=stats,
                     barrier_edges=np.zeros((0, 2), np.int64), barrier_edges_other=np.zeros((0, 2), np.int64),
                     barrier_index=np.zeros(0, np.int64))
    nl = mesh.cells.shape[1]
    xi = np.concatenate([np.broadcast_to(_local_ref(_CHILD_CORNERS[k], mesh.order), (Ec, nl, 2)) for k in range(4)])
    parent = np.tile(np.arange(Ec), 4)
    P = _prolongation(mesh.cells, parent, xi, cells, mesh.order, mesh.n_nodes, n_coarse)
    return None if P is None else (coarse, P)


def _p1_of(mesh: Mesh):
    """A P2 mesh read as P1 on the same triangles; (coarse mesh, P) or None."""
    if mesh.order != 2:
        return None
    nv = mesh.n_vertices
    T = mesh.cells[:, :3]
    if T.max() >= nv or mesh.edges[:, :2].max(initial=0) >= nv:
        return None
    stats = dict(mesh.stats, order=1, nodes=nv)
    coarse = replace(mesh, points=mesh.points[:nv], cells=T.copy(), edges=mesh.edges[:, :2].copy(), order=1,
                     stats=stats, barrier_edges=np.zeros((0, 2), np.int64),
                     barrier_edges_other=np.zeros((0, 2), np.int64), barrier_index=np.zeros(0, np.int64))
    E = len(T)
    xi = np.broadcast_to(_local_ref(_REF, 2), (E, 6, 2))
    P = _prolongation(mesh.cells, np.arange(E), xi, T, 1, mesh.n_nodes, nv)
    return None if P is None else (coarse, P)


def coarser(mesh: Mesh):
    """The next coarser nested level: (coarse Mesh, P) with P (n_fine, n_coarse) sparse, or None.

    P2 meshes first drop one split (P2 on the parent triangles), then, when no split is left, become P1
    on the same triangles; P1 meshes drop splits."""
    out = _split_parent(mesh)
    if out is None and mesh.order == 2:
        out = _p1_of(mesh)
    return out


def hierarchy(mesh: Mesh, min_nodes: int = 1500, max_levels: int = 4):
    """[(mesh, P_from_next_coarser or None)], fine first; coarse levels stop above min_nodes nodes."""
    levels = [(mesh, None)]
    m = mesh
    while len(levels) < max_levels:
        out = coarser(m)
        if out is None or out[0].n_nodes < min_nodes:
            break
        levels[-1] = (m, out[1])
        m = out[0]
        levels.append((m, None))
    return levels
