"""Geometry of a section: polygon checks, the tiling of zones, boundaries on the outline, and the
planar straight-line graph (points, segments, zone loops) that the mesher receives.

Every fault raises :class:`~seepfe.errors.SectionError` with a one-line message that names the zone
or boundary and where the fault is.  Coordinates are in m.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree
from shapely.geometry import LineString, MultiPolygon, Polygon
from shapely.ops import unary_union

from .errors import SectionError

__all__ = ["Graph", "clean_polygon", "check_tiling", "check_barriers", "build_graph", "fmt_xy"]


def fmt_xy(p) -> str:
    """Format a point for a message: ``(12.5, 3.0)``."""
    return f"({float(p[0]):.6g}, {float(p[1]):.6g})"


def clean_polygon(label: str, pts, tol: float) -> np.ndarray:
    """Return a polygon's vertices as an (n, 2) counter-clockwise array without a closing repeat.

    Raises SectionError if it has fewer than 3 distinct vertices, no area, or crosses itself.
    """
    p = np.asarray(pts, dtype=float)
    if p.ndim != 2 or len(p) < 3:
        raise SectionError(f"{label}: polygon needs at least 3 distinct points, got {len(p)}")
    # drop consecutive repeats, and the closing repeat
    keep = np.ones(len(p), bool)
    keep[1:] = np.linalg.norm(np.diff(p, axis=0), axis=1) > tol
    p = p[keep]
    if len(p) > 1 and np.linalg.norm(p[0] - p[-1]) <= tol:
        p = p[:-1]
    if len(p) < 3:
        raise SectionError(f"{label}: polygon needs at least 3 distinct points, got {len(p)}")
    area2 = np.sum(p[:, 0] * np.roll(p[:, 1], -1) - np.roll(p[:, 0], -1) * p[:, 1])
    scale = np.ptp(p, axis=0).max()
    if abs(area2) <= 2 * tol * scale:
        raise SectionError(f"{label}: polygon has zero area (its points lie on one line)")
    poly = Polygon(p)
    if not poly.is_valid:
        reason = shapely.is_valid_reason(poly)
        where = _reason_point(reason)
        what = "crosses itself" if "Self-intersection" in reason or "Ring" in reason else reason
        raise SectionError(f"{label}: polygon {what}" + (f" near {where}" if where else ""))
    if area2 < 0:
        p = p[::-1].copy()
    return p


def _reason_point(reason: str) -> str | None:
    if "[" in reason and "]" in reason:
        try:
            xy = [float(v) for v in reason[reason.index("[") + 1:reason.index("]")].split()][:2]
            return fmt_xy(xy)
        except ValueError:
            return None
    return None


def check_tiling(names: list[str], polys: list[np.ndarray], extent: float) -> Polygon:
    """Check that zones do not overlap and join into one piece without gaps; return the outline."""
    shp = [Polygon(p) for p in polys]
    area_tol = 1e-9 * extent * extent
    tree = shapely.STRtree(shp)
    left, right = tree.query(shp, predicate="intersects")
    for i, j in zip(left.tolist(), right.tolist()):
        if i < j:
            inter = shp[i].intersection(shp[j])
            if inter.area > area_tol:
                where = fmt_xy(inter.representative_point().coords[0])
                raise SectionError(f"zones '{names[i]}' and '{names[j]}' overlap by "
                                   f"{inter.area:.4g} m2 near {where}")
    union = unary_union(shp)
    if isinstance(union, MultiPolygon):
        parts = sorted(union.geoms, key=lambda g: g.area)
        small = parts[0]
        who = [names[i] for i, s in enumerate(shp) if s.representative_point().within(small)]
        what = (f"zone '{who[0]}' is" if len(who) == 1 else
                "zones " + ", ".join(f"'{w}'" for w in who[:4]) + (" ..." if len(who) > 4 else "") + " are")
        raise SectionError(f"{what} a disconnected piece: not joined along an edge to the rest of the section "
                           f"(near {fmt_xy(small.representative_point().coords[0])}); zones must tile one "
                           f"connected section")
    for ring in union.interiors:
        hole = Polygon(ring)
        if hole.area > area_tol:
            raise SectionError(f"gap between zones near {fmt_xy(hole.representative_point().coords[0])} "
                               f"({hole.area:.4g} m2): zones must tile the section")
    return union


@dataclass(frozen=True)
class Graph:
    """Planar straight-line graph of the section, what the mesher needs and nothing more.

    points: (P, 2) float, m. segments: (S, 2) int point indices. loops: per zone, signed segment
    indices (+s runs segments[s] forward, -(s+1) backward) in counter-clockwise order.
    outline: (S,) bool, segment on the outline. boundary: (S,) int index into the boundaries,
    -1 where none (no-flow or internal). barrier: (S,) int index into the barriers, -1 where none.
    embed: (S,) int zone index of a barrier segment that lies inside a zone (not on a zone edge) and
    is embedded in that zone's surface, -1 otherwise.  Barrier segments inside a zone belong to no loop.
    barrier_forward: (S,) bool, the barrier polyline runs along the segment from its first to its
    second point (so "left of the barrier" follows the polyline as the user drew it).
    """

    points: np.ndarray
    segments: np.ndarray
    loops: tuple
    outline: np.ndarray
    boundary: np.ndarray
    barrier: np.ndarray = field(default=None)
    embed: np.ndarray = field(default=None)
    barrier_forward: np.ndarray = field(default=None)


def _dist_to_segment(p: np.ndarray, a: np.ndarray, b: np.ndarray):
    """Distances of points p (n, 2) to segment ab and their parameters t along it."""
    d = b - a
    L2 = float(d @ d)
    t = ((p - a) @ d) / L2
    tc = np.clip(t, 0.0, 1.0)
    return np.linalg.norm(p - (a + tc[:, None] * d), axis=1), t


def _on_polyline(p: np.ndarray, line: np.ndarray, tol: float) -> np.ndarray:
    """Mask of points p (n, 2) within tol of the polyline (an R-tree of its segments: n log m, not n m)."""
    line = np.asarray(line, float)
    keep = np.linalg.norm(np.diff(line, axis=0), axis=1) > tol
    if not keep.any() or not len(p):
        return np.zeros(len(p), bool)
    segs = shapely.linestrings(np.stack([line[:-1][keep], line[1:][keep]], axis=1))
    idx = shapely.STRtree(segs).query(shapely.points(p), predicate="dwithin", distance=tol)
    hit = np.zeros(len(p), bool)
    hit[idx[0]] = True
    return hit


def _near_segments(tree: cKDTree, points: np.ndarray, A: np.ndarray, B: np.ndarray, tol: float):
    """Every (segment, point) pair with the point within tol of segment AB, and t along it.

    Candidates come from a KD-tree query of the ball around each segment (mid-point, half length + tol),
    so the cost grows with the pairs found, not with segments x points."""
    if not len(A):
        z = np.zeros(0, np.int64)
        return z, z, np.zeros(0), np.zeros(0)
    mid, rad = 0.5 * (A + B), 0.5 * np.linalg.norm(B - A, axis=1) + tol
    cand = tree.query_ball_point(mid, rad)
    n = np.fromiter((len(c) for c in cand), np.int64, len(cand))
    seg = np.repeat(np.arange(len(A)), n)
    pts = np.fromiter((i for c in cand for i in c), np.int64, int(n.sum()))
    d = B[seg] - A[seg]
    L2 = np.einsum("ij,ij->i", d, d)
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(L2 > 0, np.einsum("ij,ij->i", points[pts] - A[seg], d) / np.where(L2 > 0, L2, 1.0), 0.0)
    tc = np.clip(t, 0.0, 1.0)
    dist = np.linalg.norm(points[pts] - (A[seg] + tc[:, None] * d), axis=1)
    ok = dist <= tol
    return seg[ok], pts[ok], t[ok], np.sqrt(L2[seg[ok]])


def check_barriers(names: list[str], lines: list, outline: Polygon, tol: float) -> list[np.ndarray]:
    """Check barrier polylines; return them as (n, 2) arrays without repeated points, plus the points
    where they cross zone edges added later by :func:`build_graph`.

    A barrier must have length, must not cross or touch itself, must stay inside the section, may meet
    the outline only at its ends, and must not cross or touch another barrier.
    """
    out = []
    for name, raw in zip(names, lines):
        p = np.asarray(raw, dtype=float)
        keep = np.ones(len(p), bool)
        keep[1:] = np.linalg.norm(np.diff(p, axis=0), axis=1) > tol
        p = p[keep]
        if len(p) < 2:
            raise SectionError(f"barrier '{name}': polyline has zero length")
        line = LineString(p)
        if not line.is_simple:
            where = _self_crossing(p)
            raise SectionError(f"barrier '{name}': polyline crosses itself"
                               + (f" near {fmt_xy(where)}" if where is not None else ""))
        off = line.difference(outline.buffer(tol * 4))
        if off.length > tol * 10:
            c = off.geoms[0].coords[0] if hasattr(off, "geoms") else off.coords[0]
            raise SectionError(f"barrier '{name}': polyline leaves the section near {fmt_xy(c)}")
        touch = line.intersection(outline.boundary.buffer(tol * 4))
        ends = [shapely.Point(p[0]), shapely.Point(p[-1])]
        for piece in getattr(touch, "geoms", [touch]):
            if piece.is_empty:
                continue
            if min(piece.distance(e) for e in ends) > tol * 8:
                raise SectionError(f"barrier '{name}': touches the outline of the section near "
                                   f"{fmt_xy(piece.representative_point().coords[0])}; a barrier may meet "
                                   f"the outline only at its ends")
        out.append(p)
    shp = [LineString(p).buffer(tol * 2) for p in out]
    for i in range(len(out)):
        for j in range(i + 1, len(out)):
            if shp[i].intersects(shp[j]):
                c = shp[i].intersection(shp[j]).representative_point().coords[0]
                raise SectionError(f"barriers '{names[i]}' and '{names[j]}' cross or touch near {fmt_xy(c)}; "
                                   f"join them into one polyline or keep them apart")
    return out


def _self_crossing(p: np.ndarray):
    """A point where a polyline crosses or runs back over itself (an R-tree of its segments), or None."""
    segs = shapely.linestrings(np.stack([p[:-1], p[1:]], axis=1))
    i, j = shapely.STRtree(segs).query(segs, predicate="intersects")
    far = j > i + 1                               # consecutive segments share their vertex
    for a, b in zip(i[far].tolist(), j[far].tolist()):
        return shapely.intersection(segs[a], segs[b]).representative_point().coords[0]
    for a in i[j == i + 1].tolist():              # ... unless they run back over each other
        inter = shapely.intersection(segs[a], segs[a + 1])
        if inter.geom_type != "Point" and not inter.is_empty:
            return inter.representative_point().coords[0]
    return None


def _crossings(polys: list[np.ndarray], line: np.ndarray) -> np.ndarray:
    """Points where a barrier polyline crosses or touches zone edges (m), as an (n, 2) array."""
    edges = shapely.MultiLineString([np.vstack([p, p[:1]]) for p in polys])
    inter = LineString(line).intersection(edges)
    pts = []
    for g in getattr(inter, "geoms", [inter]):
        if g.is_empty:
            continue
        if g.geom_type == "Point":
            pts.append(g.coords[0])
        else:  # a run along a zone edge: its ends
            pts.extend(g.boundary.geoms[k].coords[0] for k in range(len(g.boundary.geoms)))
    return np.array(pts, dtype=float).reshape(-1, 2)


def build_graph(zone_names: list[str], polys: list[np.ndarray], outline: Polygon,
                bnames: list[str], blines: list[np.ndarray], tol: float,
                barriers: tuple = ()) -> Graph:
    """Join zone polygons into one conformal graph and map outline segments to boundaries.

    A vertex of one zone (or of a boundary polyline) that lies on another zone's edge is inserted
    into that edge, so T-junctions mesh conformally and boundaries begin and end at mesh nodes.
    barriers: (name, (n, 2) polyline) pairs already checked by :func:`check_barriers`; their segments
    join the graph, as zone edges where they coincide with one, else embedded in their zone.
    """
    # unique points, merged within tol
    xlines = [np.vstack([bl, _crossings(polys, bl)]) for _, bl in barriers]
    raw = np.vstack(polys + [bl for bl in blines] + xlines)
    pairs = cKDTree(raw).query_pairs(tol, output_type="ndarray")
    adj = coo_matrix((np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1])), shape=(len(raw), len(raw)))
    _, label = connected_components(adj, directed=False)
    _, first, inv = np.unique(label, return_index=True, return_inverse=True)
    points = raw[first]

    # check the boundaries lie on the outline
    ob = outline.boundary
    band = ob.buffer(tol * 4)
    for name, bl in zip(bnames, blines):
        line = LineString(bl)
        off = line.difference(band)
        if off.length > tol * 10:
            c = off.geoms[0].coords[0] if hasattr(off, "geoms") else off.coords[0]
            c = np.round(np.asarray(c), max(0, -int(np.floor(np.log10(tol * 100))))) + 0.0  # drop band noise
            raise SectionError(f"boundary '{name}': polyline leaves the outline of the section near "
                               f"{fmt_xy(c)}")

    # insert points lying on each zone edge (KD-tree candidates; no loop over edges or points)
    tree = cKDTree(points)
    sizes = [len(p) for p in polys]
    zone_of = np.repeat(np.arange(len(polys)), sizes)
    start = np.repeat(np.cumsum([0] + sizes[:-1]), sizes)
    ea = inv[:len(zone_of)]
    local = np.arange(len(zone_of)) - start
    eb = ea[start + (local + 1) % np.repeat(sizes, sizes)]
    A, B = points[ea], points[eb]
    seg, pts, t, L = _near_segments(tree, points, A, B, tol)
    ins = (t * L > tol) & ((1 - t) * L > tol) & (pts != ea[seg]) & (pts != eb[seg])
    seg, pts, t = seg[ins], pts[ins], t[ins]
    # the ring of every zone: each edge's start vertex (t = -1), then the points on it in order of t
    e_all = np.concatenate([np.arange(len(ea)), seg])
    t_all = np.concatenate([np.full(len(ea), -1.0), t])
    p_all = np.concatenate([ea, pts])
    o = np.lexsort((t_all, e_all))
    ring, ring_zone = p_all[o], zone_of[e_all[o]]
    nxt = np.empty_like(ring)
    ends = np.flatnonzero(np.diff(np.append(ring_zone, -1)) != 0)          # last entry of each zone
    firsts = np.concatenate([[0], ends[:-1] + 1])
    nxt[:-1] = ring[1:]
    nxt[ends] = ring[firsts]
    lo, hi = np.minimum(ring, nxt), np.maximum(ring, nxt)
    keys = lo.astype(np.int64) * len(points) + hi
    uk, first, inv_k, counts = np.unique(keys, return_index=True, return_inverse=True, return_counts=True)
    order_new = np.argsort(first, kind="stable")                    # segments numbered by first use
    rank = np.empty(len(uk), np.int64)
    rank[order_new] = np.arange(len(uk))
    sid = rank[inv_k]
    segs = [(int(a), int(b)) for a, b in zip(lo[first[order_new]], hi[first[order_new]])]
    key_to_seg: dict[tuple[int, int], int] = {k: i for i, k in enumerate(segs)}
    uses = counts[order_new]
    signed = np.where(ring == lo, sid, -(sid + 1))
    loops = [tuple(int(v) for v in signed[a:b + 1]) for a, b in zip(firsts, ends)]
    segments = np.array(segs, dtype=np.int64)
    outline_mask = np.array(uses) == 1

    # map outline segments to boundaries (both ends and the midpoint on the polyline)
    boundary = np.full(len(segments), -1, dtype=np.int64)
    a, b = points[segments[:, 0]], points[segments[:, 1]]
    mid = 0.5 * (a + b)
    for bi, (name, bl) in enumerate(zip(bnames, blines)):
        hit = (_on_polyline(a, bl, tol * 4) & _on_polyline(b, bl, tol * 4)
               & _on_polyline(mid, bl, tol * 4) & outline_mask)
        clash = hit & (boundary >= 0)
        if clash.any():
            s = int(np.flatnonzero(clash)[0])
            other = bnames[boundary[s]]
            raise SectionError(f"boundaries '{other}' and '{name}' both claim the outline edge from "
                               f"{fmt_xy(a[s])} to {fmt_xy(b[s])}")
        if not hit.any():
            raise SectionError(f"boundary '{name}': polyline covers no edge of the outline "
                               f"(it starts at {fmt_xy(bl[0])})")
        boundary[hit] = bi

    # barrier segments: split at every graph point on them; reuse zone edges, embed the rest
    barrier = np.full(len(segments), -1, dtype=np.int64)
    forward: dict[int, bool] = {}
    new_segs: list[tuple[int, int]] = []
    new_bar: list[int] = []
    for bi, (name, bl) in enumerate(barriers):
        bseg, bpts, bt, _ = _near_segments(tree, points, bl[:-1], bl[1:], tol)
        o = np.lexsort((bt, bseg))
        bseg, bpts = bseg[o], bpts[o]
        cut = np.searchsorted(bseg, np.arange(len(bl)))
        for k in range(len(bl) - 1):
            chain = bpts[cut[k]:cut[k + 1]]
            for p, q in zip(chain[:-1].tolist(), chain[1:].tolist()):
                key = (p, q) if p < q else (q, p)
                s = key_to_seg.get(key)
                if s is not None and s < len(segments):
                    if outline_mask[s]:
                        raise SectionError(f"barrier '{name}': runs along the outline of the section from "
                                           f"{fmt_xy(points[p])} to {fmt_xy(points[q])}; the outline is "
                                           f"no-flow already")
                    barrier[s] = bi
                    forward[s] = p == int(segments[s, 0])
                elif s is None:
                    forward[len(segments) + len(new_segs)] = p < q
                    key_to_seg[key] = len(segments) + len(new_segs)
                    new_segs.append(key)
                    new_bar.append(bi)
    embed = np.full(len(segments) + len(new_segs), -1, dtype=np.int64)
    if new_segs:
        ns = np.array(new_segs, dtype=np.int64)
        mid = 0.5 * (points[ns[:, 0]] + points[ns[:, 1]])
        zone_of = np.full(len(ns), -1, dtype=np.int64)
        for zi, poly in enumerate(polys):
            inside = shapely.contains_xy(Polygon(poly), mid[:, 0], mid[:, 1])
            zone_of[inside & (zone_of < 0)] = zi
        if (zone_of < 0).any():
            k = int(np.flatnonzero(zone_of < 0)[0])
            raise SectionError(f"barrier '{barriers[new_bar[k]][0]}': leaves the section near {fmt_xy(mid[k])}")
        embed[len(segments):] = zone_of
        segments = np.vstack([segments, ns])
        outline_mask = np.concatenate([outline_mask, np.zeros(len(ns), bool)])
        boundary = np.concatenate([boundary, np.full(len(ns), -1, dtype=np.int64)])
        barrier = np.concatenate([barrier, np.array(new_bar, dtype=np.int64)])
    fwd = np.zeros(len(segments), bool)
    for s_, f_ in forward.items():
        fwd[s_] = f_
    return Graph(points=points, segments=segments, loops=tuple(loops), outline=outline_mask,
                 boundary=boundary, barrier=barrier, embed=embed, barrier_forward=fwd)
