"""Soil columns under surface points and the landside top stratum.

A vertical line is dropped from each surface point through the zone polygons (shapely, vectorised
over the points, one call per zone); the intervals it crosses, sorted from the top, are the column.

The top stratum is what an engineer calls it: the low-permeability layer(s) at the surface over the
pervious substratum. Its base is found, at each point, in this order:

1. ``checks.top_stratum`` (zone names): the base of the deepest of those zones in the column (with
   everything above it, an embankment's fill included);
2. ``checks.top_stratum_depth``: that depth below the surface;
3. otherwise the first interface, going down, where the column turns markedly more pervious: the
   vertical conductivity below is at least ``contrast`` times the equivalent vertical conductivity
   of everything above (thickness / sum(t / k_v), layers in series). An interface under a zone built
   on the ground (an embankment, a berm: :func:`embankment_zones`) does not count, so a sliver of
   embankment fill over a clay blanket over sand is taken with the blanket, never alone.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

__all__ = ["Columns", "columns", "saturated_unit_weight", "critical_gradient", "embankment_zones"]


def saturated_unit_weight(m, gamma_w: float) -> float:
    """Saturated unit weight of a material, kN/m3: ``unit_weight``, else gamma_w (Gs + e) / (1 + e); nan if neither."""
    if m.unit_weight is not None:
        return float(m.unit_weight)
    if m.specific_gravity is not None and m.void_ratio is not None:
        return gamma_w * (m.specific_gravity + m.void_ratio) / (1.0 + m.void_ratio)
    return float("nan")


def critical_gradient(m, gamma_w: float) -> float:
    """Critical (heave) gradient i_c of a material, m/m.

    i_c = (gamma_sat - gamma_w) / gamma_w from ``unit_weight``; else (Gs - 1) / (1 + e) from
    ``specific_gravity`` and ``void_ratio`` (Terzaghi; both forms are the buoyant over the water unit
    weight); nan when the material gives neither.
    """
    if m.unit_weight is not None:
        return (float(m.unit_weight) - gamma_w) / gamma_w
    if m.specific_gravity is not None and m.void_ratio is not None:
        return (m.specific_gravity - 1.0) / (1.0 + m.void_ratio)
    return float("nan")


@dataclass(frozen=True)
class Columns:
    """Layers under n surface points, flattened and sorted by point then from the top.

    point : (L,) index of the surface point; zone : (L,) zone index; top, bottom : (L,) elevations, m.
    base : (n,) elevation of the base of the top stratum, m (nan: none); thickness : (n,) m (nan: none);
    n_top : (n,) number of layers (from the top) in the top stratum; how : (n,) 'names', 'depth',
    'contrast' or ''; rivals : (n,) number of deeper interfaces whose drop is sharper again by the
    contrast (layered columns: the choice is worth a look).
    """

    point: np.ndarray
    zone: np.ndarray
    top: np.ndarray
    bottom: np.ndarray
    base: np.ndarray
    thickness: np.ndarray
    n_top: np.ndarray
    how: np.ndarray
    rivals: np.ndarray = None

    def layers_of(self, i: int):
        """(zone, top, bottom) arrays of point i, from the top."""
        s = self.point == i
        return self.zone[s], self.top[s], self.bottom[s]


def columns(section, x: np.ndarray, y: np.ndarray, contrast: float | None = None,
            depth: float | None = None, names: list[str] | None = None) -> Columns:
    """Drop a vertical from each surface point (x, y) and find the layers and the top stratum.

    Parameters
    ----------
    section : Section
    x, y : (n,) surface points, m.
    contrast : ratio of vertical conductivities that makes the substratum 'markedly more pervious' (-)
        (default ``checks.contrast``).
    depth : depth of the base of the top stratum below each point, m (default ``checks.top_stratum_depth``).
    names : zones that make up the top stratum (default ``checks.top_stratum``).
    """
    c = section.spec.checks
    contrast = c.contrast if contrast is None else contrast
    depth = c.top_stratum_depth if depth is None else depth
    names = getattr(c, "top_stratum", None) if names is None else names
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    # the same geometry asked again (a transient run checks its exit surfaces at every time step): kept
    held = (section.polygons, section.spec.zones, section.spec.materials)
    key = (float(contrast), depth, tuple(names) if names is not None else None, x.tobytes(), y.tobytes())
    for h_, k_, cols in _KEPT:
        if all(a is b for a, b in zip(h_, held)) and k_ == key:
            return cols
    cols = _columns(section, x, y, contrast, depth, names)
    for v in vars(cols).values():
        if isinstance(v, np.ndarray):
            v.flags.writeable = False            # shared by later calls: never changed in place
    _KEPT.append((held, key, cols))              # held strongly: their identities are never reused while kept
    del _KEPT[:-4]
    return cols


#: the last few (geometry, points, settings) and their columns
_KEPT: list = []


def _columns(section, x, y, contrast, depth, names) -> Columns:
    n = len(x)
    ymin = section.outline.bounds[1]
    tol = max(section.length_tol, 1e-9)
    # the vertical is dropped a hair to the right of x, so that a point on a vertical zone edge (a
    # cutoff's face, a drain's side) sees one column, not both zones at once
    dx = 1e-6 * section.extent
    xv = np.where(x + dx < section.outline.bounds[2], x + dx, x - dx)
    lines = shapely.linestrings(np.stack([np.stack([xv, y + tol], 1), np.stack([xv, np.full(n, ymin - 1.0)], 1)], 1))
    pts, zs, tops, bots = [], [], [], []
    for zi, poly in enumerate(section.polygons):
        inter = shapely.intersection(lines, shapely.Polygon(poly))
        parts, idx = shapely.get_parts(inter, return_index=True)
        if not len(parts):
            continue
        bb = shapely.bounds(parts)                     # xmin, ymin, xmax, ymax
        L = bb[:, 3] - bb[:, 1]
        keep = L > tol
        pts.append(idx[keep])
        zs.append(np.full(keep.sum(), zi))
        tops.append(np.minimum(bb[keep, 3], y[idx[keep]]))
        bots.append(bb[keep, 1])
    point = np.concatenate(pts) if pts else np.zeros(0, np.int64)
    zone = np.concatenate(zs) if zs else np.zeros(0, np.int64)
    top = np.concatenate(tops) if tops else np.zeros(0)
    bottom = np.concatenate(bots) if bots else np.zeros(0)
    o = np.lexsort((-top, point))
    point, zone, top, bottom = point[o], zone[o], top[o], bottom[o]
    base = np.full(n, np.nan)
    n_top = np.zeros(n, np.int64)
    rivals = np.zeros(n, np.int64)
    how = np.full(n, "", dtype=object)
    # layer j and j + 1 are one column without a gap
    nxt = np.zeros(len(point), bool)
    nxt[:-1] = (point[1:] == point[:-1]) & (np.abs(bottom[:-1] - top[1:]) <= 10 * tol)
    if names is not None:
        idx = [section.zone_names.index(nm) for nm in names if nm in section.zone_names]
        if len(point):
            first = np.r_[True, point[1:] != point[:-1]]
            newrun = first | ~np.r_[False, nxt[:-1]]           # a point's first layer, or after a gap
            run = np.cumsum(newrun)
            run_first = run[np.flatnonzero(first)][np.cumsum(first) - 1]
            ok = np.isin(zone, idx) & (run == run_first)       # in the named zones, no gap from the surface
            cand = np.flatnonzero(ok)
            if len(cand):
                pc = point[cand]
                j = cand[np.r_[pc[1:] != pc[:-1], True]]        # the deepest such layer of each point
                pu = point[j]
                base[pu] = bottom[j]
                n_top[pu] = j - np.searchsorted(point, pu) + 1
                how[pu] = "names"
    elif depth is not None:
        base = y - depth
        colbot = np.full(n, np.inf)
        np.minimum.at(colbot, point, bottom)
        ok = base > colbot + tol
        base[~ok] = np.nan
        n_top = np.bincount(point[top > base[point] + tol], minlength=n) if len(point) else n_top
        how[ok] = "depth"
    elif len(point):
        kv = section.zone_tensors()[:, 1, 1]
        k = kv[zone]
        t = top - bottom
        first = np.r_[True, point[1:] != point[:-1]]
        start = np.flatnonzero(first)
        grp = np.cumsum(first) - 1
        ct, cr = np.cumsum(t), np.cumsum(t / k)
        cum_t = ct - (ct - t)[start][grp]
        cum_r = cr - (cr - t / k)[start][grp]
        with np.errstate(divide="ignore", invalid="ignore"):   # no thickness above (a vertical face): no contrast
            keq = np.where(cum_r > 0, cum_t / np.where(cum_r > 0, cum_r, 1.0), np.inf)
        ratio = np.zeros(len(point))
        ratio[:-1] = np.where(nxt[:-1], k[1:] / keq[:-1], 0.0)
        # an embankment or berm zone (built on the ground) never ends the top stratum on its own: a sliver
        # of fill over the blanket is taken with the blanket under it
        emb = np.isin(zone, embankment_zones(section))
        cand = np.flatnonzero(nxt & (ratio >= contrast) & ~emb)
        if len(cand):
            pc = point[cand]                           # candidates come sorted by point, then from the top
            head = np.r_[True, pc[1:] != pc[:-1]]
            j = cand[head]                             # the shallowest interface of each point
            pu = point[j]
            base[pu] = bottom[j]
            n_top[pu] = j - np.searchsorted(point, pu) + 1
            how[pu] = "contrast"
            # rivals: a deeper interface with a drop sharper again by the contrast (a layered column worth a look)
            first = np.repeat(ratio[j], np.diff(np.r_[np.flatnonzero(head), len(cand)]))
            # (only where the first drop is itself modest, under contrast^2: a 20x clay/silt step over sand)
            sharper = (ratio[cand] >= contrast * first) & (first < contrast * contrast)
            rivals[pu] = np.bincount(pc[sharper], minlength=n)[pu]
    thickness = y - base
    thickness[~np.isfinite(base)] = np.nan
    return Columns(point=point, zone=zone, top=top, bottom=bottom, base=base, thickness=thickness,
                   n_top=n_top, how=how, rivals=rivals)


def embankment_zones(section) -> list[int]:
    """Zones built on the ground (an embankment, a berm): those that reach neither end of the model (natural
    strata run to at least one) and lie wholly above the natural ground, taken as the lower of the
    top-surface elevations at the model's two ends (untouched by the works)."""
    x0, y0, x1, y1 = section.outline.bounds
    eps = 1e-6 * section.extent
    xs = np.array([x0 + eps, x1 - eps])
    lines = shapely.linestrings(np.stack([np.stack([xs, np.full(2, y1 + 1.0)], 1),
                                          np.stack([xs, np.full(2, y0 - 1.0)], 1)], 1))
    ends = shapely.bounds(shapely.intersection(lines, section.outline))[:, 3]
    if not np.isfinite(ends).all():
        return []
    ground = float(ends.min())
    t = section.length_tol
    return [i for i, p in enumerate(section.polygons) if float(p[:, 1].min()) >= ground - t
            and float(p[:, 0].min()) > x0 + t and float(p[:, 0].max()) < x1 - t]


def stratum_weight(section, cols: Columns, n: int) -> np.ndarray:
    """(n,) buoyant weight of the top stratum per unit plan area, sum (gamma_sat - gamma_w) t, kPa; nan if unknown."""
    gw = section.gamma_w
    gs = np.array([saturated_unit_weight(section.zone_material(z), gw) for z in range(len(section.polygons))])
    base = cols.base[cols.point]
    t = np.clip(np.minimum(cols.top, np.inf) - np.maximum(cols.bottom, base), 0.0, None)
    t = np.where(np.isfinite(base), t, 0.0)
    w = np.zeros(n)
    contrib = np.where(t > 0, (gs[cols.zone] - gw) * t, 0.0)
    np.add.at(w, cols.point, contrib)
    w[~np.isfinite(cols.base)] = np.nan
    return w
