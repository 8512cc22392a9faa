"""Soil columns under surface points and the landside top stratum.

A vertical line is dropped from each surface point through the zone polygons (shapely, vectorised
over the points, one call per zone); the intervals it crosses, sorted from the top, are the column.
The top stratum is everything from the surface down to the base of the first layer that is
markedly less pervious (vertical conductivity at least ``contrast`` times smaller) than the layer
directly below it, or down to a depth the user gives.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

__all__ = ["Columns", "columns", "saturated_unit_weight", "critical_gradient"]


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
    n_top : (n,) number of layers (from the top) in the top stratum; how : (n,) 'zones', 'depth' or ''.
    """

    point: np.ndarray
    zone: np.ndarray
    top: np.ndarray
    bottom: np.ndarray
    base: np.ndarray
    thickness: np.ndarray
    n_top: np.ndarray
    how: np.ndarray

    def layers_of(self, i: int):
        """(zone, top, bottom) arrays of point i, from the top."""
        s = self.point == i
        return self.zone[s], self.top[s], self.bottom[s]


def columns(section, x: np.ndarray, y: np.ndarray, contrast: float = 10.0,
            depth: float | None = None) -> Columns:
    """Drop a vertical from each surface point (x, y) and find the layers and the top stratum.

    Parameters
    ----------
    section : Section
    x, y : (n,) surface points, m.
    contrast : ratio of vertical conductivities that makes a layer 'markedly less pervious' (-).
    depth : optional depth of the base of the top stratum below each point, m (overrides the search).
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    n = len(x)
    ymin = section.outline.bounds[1]
    tol = max(section.length_tol, 1e-9)
    lines = shapely.linestrings(np.stack([np.stack([x, y + tol], 1), np.stack([x, np.full(n, ymin - 1.0)], 1)], 1))
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
    how = np.full(n, "", dtype=object)
    if depth is not None:
        base = y - depth
        colbot = np.full(n, np.inf)
        np.minimum.at(colbot, point, bottom)
        ok = base > colbot + tol
        base[~ok] = np.nan
        n_top = np.bincount(point[top > base[point] + tol], minlength=n) if len(point) else n_top
        how[ok] = "depth"
    else:
        kv = section.zone_tensors()[:, 1, 1]
        k = kv[zone]
        nxt = np.zeros(len(point), bool)
        nxt[:-1] = (point[1:] == point[:-1]) & (np.abs(bottom[:-1] - top[1:]) <= 10 * tol)
        ratio = np.ones(len(point))
        ratio[:-1] = np.where(nxt[:-1], k[1:] / k[:-1], 1.0)
        cand = np.flatnonzero(nxt & (ratio >= contrast))
        if len(cand):
            pu, first = np.unique(point[cand], return_index=True)
            j = cand[first]
            base[pu] = bottom[j]
            start = np.searchsorted(point, pu)
            n_top[pu] = j - start + 1
            how[pu] = "zones"
    thickness = y - base
    thickness[~np.isfinite(base)] = np.nan
    return Columns(point=point, zone=zone, top=top, bottom=bottom, base=base, thickness=thickness,
                   n_top=n_top, how=how)


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
