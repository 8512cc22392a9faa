"""Triangular meshes of a section: gmsh for the coarse mesh, numpy for splitting and P2 nodes.

gmsh is driven through its Python API, headless and single-threaded (so the same input gives the
same mesh), and finalised after every call, so no state leaks between solves and meshing works in
worker processes.  The zones arrive as one conformal planar graph (:mod:`seepfe.geometry`), so
shared edges are shared curves and the mesh is conformal across zones by construction.

Large meshes are made coarse and split: each split turns every triangle into four similar ones,
which keeps the quality of the coarse mesh and is far faster than meshing fine in gmsh.
"""

from __future__ import annotations

import logging
import math
import time
from dataclasses import dataclass, field

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from .errors import MeshError, SectionError
from .section import Section

__all__ = ["Mesh", "make_mesh", "estimate_triangles", "split_triangles", "add_midpoints", "split_barriers"]

log = logging.getLogger("seepfe")

#: a coarse gmsh mesh above this many triangles is made by splitting a coarser one instead
SPLIT_ABOVE = 30_000
#: smallest angle below which the mesh is reported as holding slivers, degrees
SLIVER_DEG = 1.0
#: triangles the mesher makes beside each side of an outline or zone edge much shorter than the element
#: size (the mesh must follow every vertex); measured: 7.2 at edges 1/125 and 7.3 at 1/1000 of the size
#: (a wavy ground line of many vertices makes more: 17 a side, so the estimate is low by up to 2.5x there)
_PER_SHORT_EDGE = 7.2
#: estimated triangles forced by short edges above which a section is refused unless its file sets
#: mesh.max_elements: gmsh then takes minutes (a 40 m wavy ground line of 10,000 vertices, estimate 7.2e4,
#: made 1.7e5 triangles and checks in 7 s; of 100,000 vertices it gave no answer in 20 minutes)
FORCED_MAX = 200_000
_EQ = math.sqrt(3.0) / 4.0      # area of the equilateral triangle of unit side


@dataclass(frozen=True, eq=False)
class Mesh:
    """Geometry and tags only; materials and boundary values are joined at assembly time.

    Attributes
    ----------
    points : (N, 2) float
        Node coordinates, m. Vertices first, then (order 2) edge midpoints.
    cells : (E, 3) or (E, 6) int
        Counter-clockwise vertices, then (order 2) midpoints of edges 01, 12, 20.
    zone : (E,) int
        Zone index of each element (into ``section.spec.zones``).
    edges : (B, 2) or (B, 3) int
        Outline edges: end nodes, then (order 2) the midpoint node.
    edge_boundary : (B,) int
        Index of the boundary each outline edge belongs to (into ``section.spec.boundaries``); -1 = no-flow.
    order : int
        1 (linear) or 2 (quadratic) triangles.
    barrier_edges, barrier_edges_other : (K, 2) or (K, 3) int
        Mesh edges along the barriers (ends, then the P2 midpoint), one row per edge, running the way
        the barrier polyline is drawn: the node copies on the left of that direction, and the copies
        of the same points on the right.
        Nodes on a barrier are doubled (except at a free tip), so the head may jump across it:
        ``h[barrier_edges] - h[barrier_edges_other]`` is the head difference across the barrier, m.
    barrier_index : (K,) int
        Index of the barrier of each barrier edge (into ``section.spec.barriers``).
    """

    points: np.ndarray
    cells: np.ndarray
    zone: np.ndarray
    edges: np.ndarray
    edge_boundary: np.ndarray
    order: int
    n_vertices: int
    stats: dict = field(default_factory=dict)
    barrier_edges: np.ndarray = field(default_factory=lambda: np.zeros((0, 2), np.int64))
    barrier_edges_other: np.ndarray = field(default_factory=lambda: np.zeros((0, 2), np.int64))
    barrier_index: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))

    @property
    def n_nodes(self) -> int:
        return len(self.points)

    @property
    def n_elements(self) -> int:
        return len(self.cells)

    @property
    def triangles(self) -> np.ndarray:
        """(E, 3) corner nodes."""
        return self.cells[:, :3]

    def boundary_nodes(self, b: int) -> np.ndarray:
        """Sorted unique nodes on the edges of boundary index b."""
        return np.unique(self.edges[self.edge_boundary == b])

    def linear_triangles(self) -> np.ndarray:
        """(E*k, 3) sub-triangles using every node: the mesh itself for P1, 4 per element for P2.

        For plotting and contouring, which want piecewise-linear data on all nodes.
        """
        if self.order == 1:
            return self.cells
        c = self.cells
        return np.concatenate([c[:, [0, 3, 5]], c[:, [3, 1, 4]], c[:, [5, 4, 2]], c[:, [3, 4, 5]]])


def default_size(section: Section) -> float:
    return section.spec.mesh.size or section.extent / 60.0


def estimate_triangles(section: Section, size: float | None = None) -> float:
    """Rough count of triangles the mesh spec will make (area over triangle area, plus refinement bands)."""
    m = section.spec.mesh
    S = size or default_size(section)
    n = section.outline.area / (_EQ * S * S)
    for r in m.refine:
        rs = min(r.size, S)
        w = r.width or rs
        slope = 0.25
        if r.polyline is not None:
            L = float(np.sum(np.linalg.norm(np.diff(np.asarray(r.polyline), axis=0), axis=1)))
            band = 2 * L * (w / rs**2 + (1.0 / slope) * (1.0 / rs - 1.0 / S))
            n += band / _EQ
        else:
            n += (math.pi * w * w / rs**2 + 2 * math.pi / slope**2 * math.log(S / rs)) / _EQ
    return n


def short_edge_triangles(section: Section, size: float | None = None) -> tuple[float, int, float]:
    """Triangles forced by edges of the zones much shorter than the element size (the mesh follows every
    vertex of a polygon): (estimated triangles, number of such edge sides, shortest edge in m)."""
    g = section.graph
    S = size or default_size(section)
    L = np.linalg.norm(g.points[g.segments[:, 1]] - g.points[g.segments[:, 0]], axis=1)
    sides = np.where(g.outline, 1, 2)
    short = L < 0.25 * S
    n = int(sides[short].sum())
    return _PER_SHORT_EDGE * n, n, float(L.min()) if len(L) else 0.0


def _angles(points: np.ndarray, tri: np.ndarray) -> np.ndarray:
    """(E,) smallest angle of each P1 triangle, degrees."""
    p = points[tri]
    e = np.stack([p[:, 1] - p[:, 0], p[:, 2] - p[:, 1], p[:, 0] - p[:, 2]], axis=1)
    L = np.linalg.norm(e, axis=2)
    a, b, c = L[:, 0], L[:, 1], L[:, 2]
    with np.errstate(invalid="ignore", divide="ignore"):
        cosang = np.stack([-(e[:, 0] * e[:, 2]).sum(1) / (a * c), -(e[:, 0] * e[:, 1]).sum(1) / (a * b),
                           -(e[:, 1] * e[:, 2]).sum(1) / (b * c)], axis=1)
    return np.nan_to_num(np.degrees(np.arccos(np.clip(cosang, -1, 1))), nan=0.0).min(axis=1)


def mesh_quality(points: np.ndarray, tri: np.ndarray) -> tuple[float, float]:
    """Smallest angle (degrees) and worst radius ratio 2 r_in / r_circ (1 = equilateral) of P1 triangles."""
    p = points[tri]
    e = np.stack([p[:, 1] - p[:, 0], p[:, 2] - p[:, 1], p[:, 0] - p[:, 2]], axis=1)
    L = np.linalg.norm(e, axis=2)
    area = 0.5 * np.abs(e[:, 0, 0] * e[:, 2, 1] - e[:, 0, 1] * e[:, 2, 0])
    a, b, c = L[:, 0], L[:, 1], L[:, 2]
    with np.errstate(invalid="ignore", divide="ignore"):   # a degenerate triangle counts as 0 deg, quality 0
        q = np.nan_to_num(16.0 * area**2 / (a * b * c * (a + b + c)), nan=0.0)  # = 2 r_in / R
        cosang = np.stack([-(e[:, 0] * e[:, 2]).sum(1) / (a * c), -(e[:, 0] * e[:, 1]).sum(1) / (a * b),
                           -(e[:, 1] * e[:, 2]).sum(1) / (b * c)], axis=1)
    ang = np.nan_to_num(np.degrees(np.arccos(np.clip(cosang, -1, 1))), nan=0.0)
    return float(ang.min()), float(q.min())


def _edge_index(tri: np.ndarray, n_nodes: int):
    """Unique undirected edges of triangles and the (E, 3) edge id of local edges 01, 12, 20."""
    loc = np.stack([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]], axis=1).reshape(-1, 2)
    key = np.sort(loc, axis=1)
    k = key[:, 0].astype(np.int64) * n_nodes + key[:, 1]
    uniq, inv = np.unique(k, return_inverse=True)
    edges = np.stack([uniq // n_nodes, uniq % n_nodes], axis=1)
    return edges, inv.reshape(-1, 3), uniq


def _lookup_edges(uniq_keys: np.ndarray, pairs: np.ndarray, n_nodes: int) -> np.ndarray:
    s = np.sort(pairs, axis=1)
    return np.searchsorted(uniq_keys, s[:, 0].astype(np.int64) * n_nodes + s[:, 1])


def split_triangles(points, tri, zone, bedges, btag):
    """Split every triangle into 4 by its edge midpoints (vectorised). Boundary edges split with them."""
    n = len(points)
    edges, t2e, keys = _edge_index(tri, n)
    mid = n + np.arange(len(edges))
    pts = np.vstack([points, 0.5 * (points[edges[:, 0]] + points[edges[:, 1]])])
    m01, m12, m20 = mid[t2e[:, 0]], mid[t2e[:, 1]], mid[t2e[:, 2]]
    v0, v1, v2 = tri[:, 0], tri[:, 1], tri[:, 2]
    new = np.concatenate([np.stack([v0, m01, m20], 1), np.stack([m01, v1, m12], 1),
                          np.stack([m20, m12, v2], 1), np.stack([m01, m12, m20], 1)])
    bm = mid[_lookup_edges(keys, bedges, n)]
    nb = np.concatenate([np.stack([bedges[:, 0], bm], 1), np.stack([bm, bedges[:, 1]], 1)])
    return pts, new, np.tile(zone, 4), nb, np.tile(btag, 2)


def add_midpoints(points, tri, bedges):
    """P2 nodes: append edge midpoints; return points, (E, 6) cells, (B, 3) boundary edges."""
    n = len(points)
    edges, t2e, keys = _edge_index(tri, n)
    mid = n + np.arange(len(edges))
    pts = np.vstack([points, 0.5 * (points[edges[:, 0]] + points[edges[:, 1]])])
    cells = np.concatenate([tri, mid[t2e]], axis=1)
    bm = mid[_lookup_edges(keys, bedges, n)]
    return pts, cells, np.concatenate([bedges, bm[:, None]], axis=1)


def split_barriers(points, tri, bedges, redges):
    """Double the nodes along barrier edges so no element couples across a barrier (vectorised).

    Around each node on a barrier, the triangles touching it are grouped into fans that stay connected
    when crossing any edge except a barrier edge; every fan after the first gets a copy of the node.
    A free tip (a barrier end inside the section) has one fan and keeps a single node.

    Parameters: points (N, 2); tri (E, 3) counter-clockwise; bedges (B, 2) outline edges; redges (K, 2)
    barrier edges (node pairs of the mesh before doubling).

    Returns points (N', 2), tri (E, 3), bedges (B, 2) renumbered, and left, right (K, 2): each barrier
    edge as the node copies on the left of its direction redges[:, 0] -> redges[:, 1] and on its right.
    """
    n, E = len(points), len(tri)
    if len(redges) == 0:
        return points, tri, bedges, redges.reshape(0, 2), redges.reshape(0, 2)
    ca, cb = np.array([0, 1, 2]), np.array([1, 2, 0])
    ea, eb = tri[:, ca].ravel(), tri[:, cb].ravel()                 # local edges, flat index 3 e + l
    key = np.minimum(ea, eb).astype(np.int64) * n + np.maximum(ea, eb)
    order = np.argsort(key, kind="stable")
    ks = key[order]
    rkey = np.unique(np.minimum(redges[:, 0], redges[:, 1]).astype(np.int64) * n
                     + np.maximum(redges[:, 0], redges[:, 1]))
    on_bar = np.zeros(n, bool)
    on_bar[redges.ravel()] = True
    inc_mask = on_bar[tri]
    inc_id = np.full((E, 3), -1, dtype=np.int64)
    M = int(inc_mask.sum())
    inc_id[inc_mask] = np.arange(M)
    # interior edges not on a barrier join the fans of their two end nodes
    pair = np.flatnonzero(ks[1:] == ks[:-1])
    pair = pair[~np.isin(ks[pair], rkey)]
    i, j = order[pair], order[pair + 1]
    ei, li, ej, lj = i // 3, i % 3, j // 3, j % 3
    rows, cols = [], []
    for end in (0, 1):  # the two end nodes of each shared edge
        node = np.where(end == 0, ea[i], eb[i])
        ci = np.where(end == 0, ca[li], cb[li])
        cj = np.where(tri[ej, ca[lj]] == node, ca[lj], cb[lj])
        keep = on_bar[node]
        rows.append(inc_id[ei[keep], ci[keep]])
        cols.append(inc_id[ej[keep], cj[keep]])
    r, c = np.concatenate(rows), np.concatenate(cols)
    adj = coo_matrix((np.ones(len(r)), (r, c)), shape=(M, M))
    ncomp, lab = connected_components(adj, directed=False)
    comp_node = np.empty(ncomp, dtype=np.int64)
    comp_node[lab] = tri[inc_mask]
    corder = np.lexsort((np.arange(ncomp), comp_node))
    first = np.ones(ncomp, bool)
    first[1:] = comp_node[corder][1:] != comp_node[corder][:-1]
    new_id = np.empty(ncomp, dtype=np.int64)
    new_id[corder[first]] = comp_node[corder[first]]
    extra = corder[~first]
    new_id[extra] = n + np.arange(len(extra))
    pts = np.vstack([points, points[comp_node[extra]]])
    tri2 = tri.copy()
    tri2[inc_mask] = new_id[lab]

    def owners(edges, count):
        k = np.minimum(edges[:, 0], edges[:, 1]).astype(np.int64) * n + np.maximum(edges[:, 0], edges[:, 1])
        pos = np.searchsorted(ks, k)
        cnt = np.searchsorted(ks, k, side="right") - pos
        if np.any(cnt != count):
            raise MeshError(f"barrier split: {int(np.sum(cnt != count))} edge(s) are not shared by "
                            f"{count} triangle(s) as expected")
        return pos

    def renumber(edges, flat):
        e, l = flat // 3, flat % 3
        a_at_ca = tri[e, ca[l]] == edges[:, 0]
        c0 = np.where(a_at_ca, ca[l], cb[l])
        c1 = np.where(a_at_ca, cb[l], ca[l])
        return np.stack([tri2[e, c0], tri2[e, c1]], axis=1), a_at_ca

    pos = owners(bedges, 1)
    bedges2, _ = renumber(bedges, order[pos])
    pos = owners(redges, 2)
    s0, fwd0 = renumber(redges, order[pos])
    s1, _ = renumber(redges, order[pos + 1])
    # a counter-clockwise triangle lies on the left of its edges as they run corner l -> l + 1
    left = np.where(fwd0[:, None], s0, s1)
    right = np.where(fwd0[:, None], s1, s0)
    return pts, tri2, bedges2, left, right


def _check_pieces(section: Section, pts, tri, bedges, btag, left, ltag):
    """After splitting along barriers: every piece of the mesh must touch a head boundary."""
    if len(left) == 0:
        return
    n = len(pts)
    r = np.concatenate([tri[:, 0], tri[:, 1], tri[:, 2]])
    c = np.concatenate([tri[:, 1], tri[:, 2], tri[:, 0]])
    ncomp, lab = connected_components(coo_matrix((np.ones(len(r)), (r, c)), shape=(n, n)), directed=False)
    if ncomp == 1:
        return
    heads = [i for i, b in enumerate(section.spec.boundaries) if b.kind == "head"]
    fed = np.zeros(ncomp, bool)
    fed[lab[bedges[np.isin(btag, heads)].ravel()]] = True
    used = np.zeros(ncomp, bool)
    used[lab[tri.ravel()]] = True
    bad = np.flatnonzero(used & ~fed)
    if len(bad):
        piece = bad[0]
        nodes = np.flatnonzero(lab == piece)
        where = pts[nodes].mean(axis=0)
        k = np.flatnonzero(np.isin(left[:, 0], nodes))
        name = section.spec.barriers[int(ltag[k[0]])].name if len(k) else "?"
        from .geometry import fmt_xy
        raise SectionError(f"{section.source}: barrier '{name}' cuts off part of the section (around "
                           f"{fmt_xy(where)}) from every head boundary; its heads would have no unique solution")


#: Debian/Ubuntu packages of the system libraries the gmsh wheel links (scripts/install.sh installs the same)
GMSH_SYSTEM_PACKAGES = ("libglu1-mesa libgl1 libxrender1 libxcursor1 libxfixes3 libxext6 libxft2 libfontconfig1 "
                        "libxinerama1 libx11-6 libgomp1")


def load_gmsh():
    """Import gmsh; a missing system library it links becomes one line naming the packages to install."""
    try:
        import gmsh
    except OSError as e:           # ctypes could not load libgmsh or a library it links
        import re
        lib = re.search(r"(lib[\w.+-]+\.so[\w.]*)", str(e))
        what = f"the system library {lib.group(1)}" if lib else f"its shared library ({e})"
        raise MeshError(f"gmsh cannot load {what}; install the system packages it needs: apt-get install "
                        f"{GMSH_SYSTEM_PACKAGES} (Debian/Ubuntu names; the same libraries elsewhere), or run "
                        "scripts/install.sh") from None
    except ImportError as e:
        if getattr(e, "name", None) == "gmsh" or "gmsh" in str(e):
            raise MeshError("gmsh is not installed: pip install gmsh (or run scripts/install.sh)") from None
        raise
    return gmsh


def _signal_handlers() -> dict:
    """Python's signal handlers, to put back after gmsh: gmsh resets SIGTERM, SIGHUP and SIGPIPE to the
    system default when it starts, so a later SIGTERM would kill the process without its cleanup (the
    removal of a temporary folder, stopping the sweep workers) and a closed pipe would kill it silently
    instead of raising an error (a sweep worker killed by the out-of-memory killer)."""
    import signal
    out = {}
    for sig in signal.valid_signals():
        try:
            h = signal.getsignal(sig)
        except (ValueError, OSError):
            continue
        if h is not None:
            out[sig] = h
    return out


def _restore_signal_handlers(handlers: dict) -> None:
    import signal
    for sig, h in handlers.items():
        try:
            if signal.getsignal(sig) is h:
                signal.signal(sig, h)          # installs the handler at the C level again
        except (ValueError, OSError, RuntimeError):   # not the main thread, or a signal that cannot be set
            pass


def _gmsh_mesh(section: Section, size: float, scale: float):
    """Coarse P1 mesh from gmsh at sizes multiplied by scale. Returns points, tri, zone, bedges, btag."""
    gmsh = load_gmsh()

    g = section.graph
    spec = section.spec.mesh
    S = size * scale
    handlers = _signal_handlers()
    gmsh.initialize(readConfigFiles=False, interruptible=False)
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.option.setNumber("General.Verbosity", 1)
        gmsh.option.setNumber("General.NumThreads", 1)
        gmsh.model.add("section")
        geo = gmsh.model.geo
        for i, (x, y) in enumerate(g.points):
            geo.addPoint(float(x), float(y), 0.0, S, i + 1)
        for s, (a, b) in enumerate(g.segments):
            geo.addLine(int(a) + 1, int(b) + 1, s + 1)
        surfaces = []
        for zi, loop in enumerate(g.loops):
            tags = [s + 1 if s >= 0 else s for s in loop]  # -(s+1) already means reversed segment s
            cl = geo.addCurveLoop(tags, zi + 1)
            surfaces.append(geo.addPlaneSurface([cl], zi + 1))
        # refinement: free points sampled along each polyline feed distance/threshold fields
        thresholds = []
        ptag = len(g.points) + 1
        for r in spec.refine:
            rs = min(r.size * scale, S)
            line = np.asarray(r.polyline if r.polyline is not None else [r.point], float)
            samples = [line[:1]]
            for a, b in zip(line[:-1], line[1:]):
                L = float(np.linalg.norm(b - a))
                k = max(1, min(20000, int(math.ceil(L / (0.5 * rs)))))
                t = np.linspace(0, 1, k + 1)[1:, None]
                samples.append(a + t * (b - a))
            sp = np.vstack(samples)
            tags = list(range(ptag, ptag + len(sp)))
            for t_, (x, y) in zip(tags, sp):
                geo.addPoint(float(x), float(y), 0.0, S, t_)
            ptag += len(sp)
            fd = gmsh.model.mesh.field.add("Distance")
            gmsh.model.mesh.field.setNumbers(fd, "PointsList", tags)
            ft = gmsh.model.mesh.field.add("Threshold")
            w = (r.width or r.size) * scale
            gmsh.model.mesh.field.setNumber(ft, "InField", fd)
            gmsh.model.mesh.field.setNumber(ft, "SizeMin", rs)
            gmsh.model.mesh.field.setNumber(ft, "SizeMax", S)
            gmsh.model.mesh.field.setNumber(ft, "DistMin", w)
            gmsh.model.mesh.field.setNumber(ft, "DistMax", w + 4.0 * (S - rs))
            thresholds.append(ft)
        geo.synchronize()
        emb = g.embed if g.embed is not None else np.zeros(0, np.int64)
        for zi in np.unique(emb[emb >= 0]):
            gmsh.model.mesh.embed(1, [int(s) + 1 for s in np.flatnonzero(emb == zi)], 2, int(zi) + 1)
        if thresholds:
            fm = gmsh.model.mesh.field.add("Min")
            gmsh.model.mesh.field.setNumbers(fm, "FieldsList", thresholds)
            gmsh.model.mesh.field.setAsBackgroundMesh(fm)
            gmsh.option.setNumber("Mesh.MeshSizeExtendFromBoundary", 0)
        gmsh.option.setNumber("Mesh.MeshSizeMax", S)
        gmsh.option.setNumber("Mesh.Algorithm", 6)
        try:
            gmsh.model.mesh.generate(2)
        except Exception as e:  # gmsh raises a bare Exception with its last error
            raise MeshError(f"{section.source}: gmsh could not mesh the section: {e}") from None
        tags, xyz, _ = gmsh.model.mesh.getNodes()
        order = np.argsort(tags)
        tags, xyz = tags[order], xyz.reshape(-1, 3)[order, :2]
        tri_l, zone_l = [], []
        for zi, st in enumerate(surfaces):
            et, _, en = gmsh.model.mesh.getElements(2, st)
            if not len(et) or not len(en[0]):
                raise MeshError(f"{section.source}: zone '{section.zone_names[zi]}' got no triangles; "
                                f"its polygon may be too thin for mesh size {S:.3g} m")
            t = np.asarray(en[0]).reshape(-1, 3)
            tri_l.append(t)
            zone_l.append(np.full(len(t), zi))
        be_l, bt_l = [], []
        for s in np.flatnonzero(g.outline):
            et, _, en = gmsh.model.mesh.getElements(1, int(s) + 1)
            e = np.asarray(en[0]).reshape(-1, 2)
            be_l.append(e)
            bt_l.append(np.full(len(e), g.boundary[s]))
        bar = g.barrier if g.barrier is not None else np.zeros(0, np.int64)
        re_l, rt_l, rd_l = [np.zeros((0, 2), np.uint64)], [np.zeros(0, np.int64)], [np.zeros((0, 2))]
        for s in np.flatnonzero(bar >= 0):
            et, _, en = gmsh.model.mesh.getElements(1, int(s) + 1)
            e = np.asarray(en[0]).reshape(-1, 2)
            re_l.append(e)
            rt_l.append(np.full(len(e), bar[s]))
            a, b = g.points[g.segments[s]]
            rd_l.append(np.tile(b - a if g.barrier_forward[s] else a - b, (len(e), 1)))
    finally:
        gmsh.finalize()
        _restore_signal_handlers(handlers)
    tri = np.searchsorted(tags, np.concatenate(tri_l))
    bedges = np.searchsorted(tags, np.concatenate(be_l))
    redges = np.searchsorted(tags, np.concatenate(re_l))
    zone = np.concatenate(zone_l)
    # keep only nodes used by triangles (drops the free refinement points)
    used = np.unique(tri)
    remap = np.full(len(tags), -1)
    remap[used] = np.arange(len(used))
    pts = xyz[used]
    tri, bedges, redges = remap[tri], remap[bedges], remap[redges]
    # counter-clockwise
    p = pts[tri]
    a2 = ((p[:, 1, 0] - p[:, 0, 0]) * (p[:, 2, 1] - p[:, 0, 1])
          - (p[:, 2, 0] - p[:, 0, 0]) * (p[:, 1, 1] - p[:, 0, 1]))
    tri[a2 < 0] = tri[a2 < 0][:, [0, 2, 1]]
    # barrier edges run the way the barrier polyline was drawn
    back = np.einsum("ij,ij->i", pts[redges[:, 1]] - pts[redges[:, 0]], np.concatenate(rd_l)) < 0
    redges[back] = redges[back][:, ::-1]
    return pts, tri, zone, bedges, np.concatenate(bt_l), redges, np.concatenate(rt_l)


def make_mesh(section: Section, order: int | None = None, size: float | None = None,
              split: int | None = None, scale: float = 1.0) -> Mesh:
    """Mesh a validated section.

    Parameters
    ----------
    section : Section
    order : {1, 2}, optional
        Element order; default from the section's ``mesh.order`` (2).
    size : float, optional
        Element size in m; default from ``mesh.size`` or extent / 60.
    split : int, optional
        Number of 4-way splits after a coarser gmsh mesh; default chosen from the estimated count.
    scale : float
        Multiplies every element size, the global one and those of the refinements (coarser or finer
        versions of the same mesh spec: :mod:`seepfe.accuracy`).

    Raises
    ------
    SectionError
        If the estimated number of triangles exceeds ``mesh.max_elements``.
    """
    ms = section.spec.mesh
    order = order or ms.order
    S = size or default_size(section)
    try:
        est = estimate_triangles(section, S) / scale**2
    except (ZeroDivisionError, OverflowError):     # sizes so small that their squares underflow
        est = math.inf
    if not est <= ms.max_elements:
        raise SectionError(f"{section.source}: mesh: size {S:.4g} m (with its refinements) would make "
                           f"about {est:.3g} triangles, more than max_elements = {ms.max_elements}; "
                           f"use a larger 'mesh.size' or raise 'mesh.max_elements'")
    forced, n_short, shortest = short_edge_triangles(section, S)
    if forced > 0.5 * est and forced > 20_000:
        msg = (f"{section.source}: mesh: the zone polygons have {n_short} edges (counted on each side) shorter than "
               f"a quarter of the element size {S:.3g} m, the shortest {shortest:.3g} m; the mesh follows every "
               f"vertex: about {est + forced:.3g} triangles")
        if not est + forced <= ms.max_elements:
            raise SectionError(msg + f", more than max_elements = {ms.max_elements}; simplify the polygons "
                               "(fewer vertices) or raise 'mesh.max_elements'")
        if forced > FORCED_MAX and "max_elements" not in ms.model_fields_set:
            raise SectionError(msg + " (meshing them takes minutes); simplify the polygons (fewer vertices), or, "
                               "to mesh them as drawn, set 'mesh.max_elements' in the file")
        log.warning("%s; simplify the polygons (fewer vertices) for a faster mesh", msg)
    if split is None:
        split = ms.split
    if split is None:
        split = 0
        while est / 4**split > SPLIT_ABOVE and split < 3:
            split += 1
    t0 = time.perf_counter()
    pts, tri, zone, be, bt, re, rt = _gmsh_mesh(section, S, 2.0**split * scale)
    t1 = time.perf_counter()
    if len(re):
        # barriers: double their nodes now, so splitting and P2 midpoints follow on each side;
        # their edges ride along with the outline edges, tagged -2 - 2 i (left) and -3 - 2 i (right)
        pts, tri, be, left, right = split_barriers(pts, tri, be, re)
        _check_pieces(section, pts, tri, be, bt, left, rt)
        be = np.vstack([be, left, right])
        bt = np.concatenate([bt, -2 - 2 * rt, -3 - 2 * rt])
    for _ in range(split):
        pts, tri, zone, be, bt = split_triangles(pts, tri, zone, be, bt)
    min_angle, worst_q = mesh_quality(pts, tri)
    if not min_angle >= SLIVER_DEG:
        ang = _angles(pts, tri)
        k = int(np.argmin(ang))
        from .geometry import fmt_xy
        log.warning("%s: mesh: slivers: the smallest angle is %.2g deg (%d triangles below %g deg), in zone '%s' "
                    "near %s; gradients there are unreliable: look for vertices almost on another zone's edge, "
                    "or a thin wedge, there", section.source, ang[k], int(np.sum(ang < SLIVER_DEG)), SLIVER_DEG,
                    section.zone_names[int(zone[k])], fmt_xy(pts[tri[k]].mean(axis=0)))
    nv = len(pts)
    if order == 2:
        pts, cells, be = add_midpoints(pts, tri, be)
    else:
        cells = tri
    code = -2 - bt
    is_l, is_r = (code >= 0) & (code % 2 == 0), (code >= 0) & (code % 2 == 1)
    bar_l, bar_r, bar_i = be[is_l], be[is_r], code[is_l] // 2
    be, bt = be[bt >= -1], bt[bt >= -1]
    t2 = time.perf_counter()
    stats = {"nodes": int(len(pts)), "vertices": int(nv), "elements": int(len(cells)), "order": int(order),
             "size_m": float(S * scale), "scale": float(scale), "splits": int(split), "min_angle_deg": round(min_angle, 3),
             "worst_quality": round(worst_q, 4), "gmsh_s": round(t1 - t0, 4), "mesh_s": round(t2 - t0, 4)}
    return Mesh(points=pts, cells=cells.astype(np.int64), zone=zone.astype(np.int64),
                edges=be.astype(np.int64), edge_boundary=bt.astype(np.int64), order=order,
                n_vertices=nv, stats=stats, barrier_edges=bar_l.astype(np.int64),
                barrier_edges_other=bar_r.astype(np.int64), barrier_index=bar_i.astype(np.int64))
