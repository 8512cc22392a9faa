"""The phreatic line (pressure head = 0), the seepage faces and the drains of a result.

The phreatic line is contoured on the linear sub-triangles of the mesh (the P1 mesh itself, or four
sub-triangles per P2 element, which carry the nodal pressure heads linearly).  A node is wet where
psi > 0 (m) (or psi = 0 next to such a node); each sub-triangle with wet and dry corners holds one straight piece between the two edges
where psi changes sign (linear interpolation along the edge).  The pieces are chained into polylines
through their shared edges with a graph traversal (scipy.sparse.csgraph), with no Python loop over
elements; the line returned is the longest piece, ordered upstream (high) to downstream (low), since
h = y along it and the head falls in the direction of flow.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse import csgraph

from .drains import drain_zone_nodes

__all__ = ["phreatic_lines", "seepage_faces", "drain_flows", "summary"]


def phreatic_lines(mesh, psi: np.ndarray) -> list[np.ndarray]:
    """All psi = 0 polylines, (n, 2) arrays of x, y in m, longest first, each ordered high to low."""
    tri = mesh.linear_triangles()
    n = mesh.n_nodes
    # wet: psi > 0, and psi = 0 at a node that touches a wet sub-triangle (a seepage face or drain node
    # below the exit point); a psi = 0 outlet node with only dry neighbours (a drain beyond the reach of
    # the phreatic surface) stays dry, so the line does not run along it
    wet = psi > 0.0
    zero = psi == 0.0
    if zero.any():
        touch = np.zeros(n, bool)
        touch[tri[wet[tri].any(axis=1)].ravel()] = True
        wet |= zero & touch
    w = wet[tri]
    cut = (w.sum(axis=1) == 1) | (w.sum(axis=1) == 2)
    t = tri[cut]
    if len(t) == 0:
        return []
    loc = np.stack([t[:, [0, 1]], t[:, [1, 2]], t[:, [2, 0]]], axis=1)          # (T, 3, 2)
    crosses = wet[loc[..., 0]] != wet[loc[..., 1]]                              # two per triangle
    key = np.sort(loc, axis=2)
    k = key[..., 0].astype(np.int64) * n + key[..., 1]
    seg_keys = k[crosses].reshape(-1, 2)                                         # (T, 2) edge keys
    uniq, inv = np.unique(seg_keys, return_inverse=True)
    inv = inv.reshape(-1, 2)
    a, b = uniq // n, uniq % n
    pa, pb = psi[a], psi[b]
    den = pa - pb
    s = np.divide(pa, den, out=np.zeros_like(pa), where=den != 0.0)
    P = mesh.points[a] + s[:, None] * (mesh.points[b] - mesh.points[a])         # (V, 2) crossing points
    V = len(uniq)
    G = sp.coo_matrix((np.ones(len(inv)), (inv[:, 0], inv[:, 1])), shape=(V, V)).tocsr()
    G = ((G + G.T) > 0).astype(np.int8)
    deg = np.asarray(G.sum(axis=1)).ravel()
    ncomp, lab = csgraph.connected_components(G, directed=False)
    lines = []
    for c in range(ncomp):                       # few components (pieces of the contour)
        members = np.flatnonzero(lab == c)
        ends = members[deg[members] == 1]
        start = ends[0] if len(ends) else members[0]
        order, _ = csgraph.depth_first_order(G, start, directed=False, return_predecessors=True)
        line = P[order]
        keep = np.ones(len(line), bool)                   # drop repeats (crossings at psi = 0 nodes)
        keep[1:] = np.linalg.norm(np.diff(line, axis=0), axis=1) > 1e-9 * (1.0 + np.abs(line).max())
        line = line[keep]
        if len(ends) == 0 and len(line) > 2:
            line = np.vstack([line, line[:1]])
        if line[0, 1] < line[-1, 1] or (line[0, 1] == line[-1, 1] and line[0, 0] > line[-1, 0]):
            line = line[::-1]
        lines.append(line)
    lengths = [float(np.linalg.norm(np.diff(L, axis=0), axis=1).sum()) for L in lines]
    return [lines[i] for i in np.argsort(lengths)[::-1]]


def seepage_faces(result) -> dict:
    """For each seepage_face boundary (and each head boundary with dry_above_level): the exit point.

    Returns {name: {"exit_point_m": [x, y] or None, "length_m": L, "outflow_m3_s_per_m": q}} where the
    exit point is the highest node of the boundary where water leaves (h = y and outflow), the length is
    that of the boundary edges whose end nodes both carry h = y with outflow, and q >= 0 is the water
    leaving through that part (m3/s per m).
    """
    m, sec = result.mesh, result.section
    out = {}
    act = np.zeros(m.n_nodes, bool)
    if result.face_nodes is not None and len(result.face_nodes):
        act[result.face_nodes[result.face_active]] = True
    scale = max(np.abs(result.reactions).max(), 1e-300)
    for bi, b in enumerate(sec.spec.boundaries):
        if not (b.kind == "seepage_face" or (b.kind == "head" and b.dry_above_level)):
            continue
        on = m.edge_boundary == bi
        nodes = np.unique(m.edges[on])
        y = m.points[:, 1]
        if b.kind == "head":
            nodes = nodes[y[nodes] > b.head + sec.head_tol]
        leaving = nodes[act[nodes] & (result.reactions[nodes] < -1e-12 * scale)]
        ok = np.zeros(m.n_nodes, bool)
        ok[leaving] = True
        e = m.edges[on][:, :2]
        both = ok[e[:, 0]] & ok[e[:, 1]]
        L = float(np.linalg.norm(m.points[e[both, 1]] - m.points[e[both, 0]], axis=1).sum())
        if len(leaving):
            top = leaving[np.argmax(y[leaving])]
            exit_point = [float(m.points[top, 0]), float(m.points[top, 1])]
        else:
            exit_point = None
        out[b.name] = {"exit_point_m": exit_point, "length_m": L,
                       "outflow_m3_s_per_m": float(-result.reactions[leaving].sum())}
    return out


def drain_flows(result) -> dict:
    """{drain name: water the drain takes out, m3/s per m (>= 0)}, for drain boundaries and drain zones."""
    names = [b.name for b in result.section.spec.boundaries if b.kind == "drain"]
    names += list(drain_zone_nodes(result.section, result.mesh))
    return {n: -result.boundary_flow(n) for n in names}


def summary(result) -> dict:
    """Plain data for result.summary(): phreatic line ends, seepage faces, drains."""
    lines = result.phreatic_lines()
    d = {"seepage_faces": seepage_faces(result), "drain_outflow_m3_s_per_m": drain_flows(result)}
    if lines:
        L = lines[0]
        d["phreatic_line"] = {"points": int(len(L)), "upstream_end_m": L[0].tolist(),
                              "downstream_end_m": L[-1].tolist()}
    return d
