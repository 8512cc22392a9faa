"""The hand methods applied to a solved section, beside the finite elements.

:func:`hand_methods` takes a result and its exit checks and returns one
:class:`~seepfe.checks.methods.HandMethod` per method, with the inputs a checker needs to redo it,
or, where the section does not meet the method's assumptions, the reason and no number. The closed
forms themselves are in :mod:`seepfe.checks.handmethods`.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from shapely.geometry import LineString, Point

from . import handmethods as hm
from . import strata
from .exit import ExitChecks
from .methods import HandMethod, not_applicable

__all__ = ["hand_methods", "find_cutoffs", "contact_path"]

CUTOFF_ASPECT = 0.1      # a zone is a thin cutoff when its width / length is below this
CUTOFF_CONTRAST = 100.0  # ... and its conductivity is this many times below its neighbours'


# ---------------------------------------------------------------------------- geometry helpers
def _top_envelope(section, xs):
    """Highest outline elevation above each x (nan outside), m."""
    y0, y1 = section.outline.bounds[1] - 1, section.outline.bounds[3] + 1
    lines = shapely.linestrings(np.stack([np.stack([xs, np.full(len(xs), y1)], 1),
                                          np.stack([xs, np.full(len(xs), y0)], 1)], 1))
    inter = shapely.intersection(lines, section.outline)
    b = shapely.bounds(inter)
    return b[:, 3]


def contact_path(section, up: str, exit_name: str):
    """No-flow outline path from boundary ``up`` to boundary ``exit_name`` (m), or None if they are not
    joined by one run of outline without another boundary."""
    g = section.graph
    segs = np.flatnonzero(g.outline)
    # chain the outline segments of the planar graph (split at every boundary end) into one ring
    nbr: dict = {}
    for s_ in segs.tolist():
        a, b = (int(v) for v in g.segments[s_])
        nbr.setdefault(a, []).append((s_, b))
        nbr.setdefault(b, []).append((s_, a))
    p0 = int(g.segments[segs[0]][0])
    ring_pts, ring_seg, prev_seg, cur = [p0], [], -1, p0
    for _ in range(len(segs)):
        s_, nxt = next((s2, q) for s2, q in nbr[cur] if s2 != prev_seg)
        ring_seg.append(s_)
        prev_seg, cur = s_, nxt
        if cur == p0:
            break
        ring_pts.append(cur)
    ring = g.points[np.array(ring_pts)]
    n = len(ring)
    lab = g.boundary[np.array(ring_seg)]
    names = section.boundary_names
    iu, ie = names.index(up), names.index(exit_name)
    if not (lab == iu).any() or not (lab == ie).any():
        return None
    start = int(np.flatnonzero(lab >= 0)[0])
    order = [(start + k) % n for k in range(n)]
    runs, cur = [], []
    for k in order + [order[0]]:
        if lab[k] < 0:
            cur.append(k)
        else:
            if cur:
                runs.append((prev, cur, lab[k]))
            cur = []
            prev = lab[k]
    best = None
    for before, segs, after in runs:
        if {before, after} == {iu, ie}:
            pts = np.array([ring[segs[0]]] + [ring[(s + 1) % n] for s in segs])
            if before == ie:
                pts = pts[::-1]
            length = float(np.linalg.norm(np.diff(pts, axis=0), axis=1).sum())
            if best is None or length < best[0]:
                best = (length, pts)      # the shorter way round: not the model's far sides and base
    return None if best is None else best[1]


def _simplify(path, tol):
    keep = [0]
    for i in range(1, len(path) - 1):
        a, b, c = path[keep[-1]], path[i], path[i + 1]
        cross = (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])
        if abs(cross) > tol * max(np.linalg.norm(c - a), 1e-300):
            keep.append(i)
    keep.append(len(path) - 1)
    return path[keep]


def find_cutoffs(section) -> list[dict]:
    """Cutoffs: the section's 'checks.cutoff', its barriers (zero-thickness impervious lines), and thin
    zones far less pervious than their neighbours."""
    out = []
    c = section.spec.checks
    if c.cutoff is not None:
        (x0, y0), (x1, y1) = c.cutoff
        out.append({"source": "checks.cutoff", "x_m": 0.5 * (x0 + x1), "top_m": max(y0, y1),
                    "tip_m": min(y0, y1), "thickness_m": 0.0})
    for b in getattr(section.spec, "barriers", None) or []:
        pl = np.asarray(b.polyline, float)
        out.append({"source": f"barrier '{b.name}'", "x_m": float(pl[np.argmin(pl[:, 1]), 0]),
                    "top_m": float(pl[:, 1].max()), "tip_m": float(pl[:, 1].min()), "thickness_m": 0.0})
    K = section.zone_tensors()
    kmax = np.linalg.eigvalsh(K)[:, -1]
    polys = [shapely.Polygon(p) for p in section.polygons]
    for zi, p in enumerate(polys):
        r = shapely.minimum_rotated_rectangle(p)
        xy = np.asarray(r.exterior.coords)[:4]
        e = np.linalg.norm(np.diff(np.vstack([xy, xy[:1]]), axis=0), axis=1)
        w, L = e.min(), e.max()
        if L <= 0 or w / L > CUTOFF_ASPECT:
            continue
        nb = [j for j, q in enumerate(polys) if j != zi and p.buffer(section.length_tol).intersects(q)]
        if not nb or kmax[zi] * CUTOFF_CONTRAST > min(kmax[j] for j in nb):
            continue
        x0, y0, x1, y1 = p.bounds
        if (y1 - y0) < (x1 - x0):
            continue                       # a horizontal thin layer is a blanket, not a cutoff
        out.append({"source": f"zone '{section.zone_names[zi]}' (thin, very low k)", "x_m": 0.5 * (x0 + x1),
                    "top_m": y1, "tip_m": y0, "thickness_m": x1 - x0})
    return out


def _notch_cutoff(path, tol):
    """A cutoff cut into the outline: the path ends down a face, across a tip, up a face."""
    if len(path) < 4:
        return None
    a, b, c, d = path[-4], path[-3], path[-2], path[-1]
    vert = lambda p, q: abs(p[0] - q[0]) <= tol and abs(p[1] - q[1]) > tol
    if vert(a, b) and b[1] < a[1] and abs(b[1] - c[1]) <= tol and vert(c, d) and d[1] > c[1]:
        return {"source": "cutoff cut into the outline", "x_m": 0.5 * (b[0] + c[0]), "top_m": float(d[1]),
                "tip_m": float(b[1]), "thickness_m": float(abs(c[0] - b[0]))}
    return None


# ---------------------------------------------------------------------------- the driver
def hand_methods(result, exits: dict) -> tuple[list[HandMethod], list[dict]]:
    """The hand methods beside the FE on the first checked exit surface, and the cutoffs found.

    Returns ([HandMethod per method], [cutoff dicts]).
    """
    sec = result.section
    names = list(exits)
    if not names:
        why = "no exit surface is checked (no seepage face; name one in checks.boundaries)"
        return [not_applicable(m, why) for m in ("blanket_theory", "lane", "khosla", "terzaghi_prism", "sellmeijer")], []
    heads = [b for b in sec.spec.boundaries if b.kind == "head"]
    up = max(heads, key=lambda b: b.head)
    ex = exits[names[0]]
    exb = sec.boundary(names[0])
    land_level = _landside_level(sec, ex, exb)
    H = up.head - land_level
    tol = sec.length_tol
    path = contact_path(sec, up.name, names[0])
    if path is not None:
        path = _simplify(path, tol)
    cutoffs = find_cutoffs(sec)
    notch = _notch_cutoff(path, tol) if path is not None else None
    if notch:
        cutoffs.append(notch)
    blanket = _blanket(result, ex, up, H, land_level)
    out = [_as_method("blanket_theory", blanket, {"h0_m": ("h0_m", "h0_m"), "top_stratum_gradient": ("i0", "i0"),
                                                    "fs_uplift": ("fs", "fs"),
                                                    "q_m3_s_per_m": ("q_m3_s_per_m", "q_m3_s_per_m")}),
           _as_method("lane", _lane(sec, path, H, cutoffs, tol, up), {"weighted_creep_ratio": ("ratio", None)}),
           _as_method("khosla", _khosla(result, ex, path, H, cutoffs, tol),
                      {"exit_gradient": ("exit_gradient", "fe_exit_gradient")}),
           _as_method("terzaghi_prism", _terzaghi(result, ex, cutoffs, land_level, exb), {"fs_heave": ("fs", None)}),
           _as_method("sellmeijer", _sellmeijer(sec, blanket, H),
                      {"critical_head_m": ("H_c_m", None), "critical_head_ratio": ("ratio", None)})]
    return out, cutoffs


def _as_method(method: str, d: dict, value_map: dict) -> HandMethod:
    """A HandMethod from the plain dict a method function returns."""
    if not d.get("applicable"):
        return not_applicable(method, d.get("reason", ""))
    fe = d.get("fe") or {}
    values = {}
    for q, (hk, fk) in value_map.items():
        hand = d.get(hk)
        if method == "terzaghi_prism":
            prisms = d.get("prisms") or [{}]
            hand = min((p.get("fs", math.inf) for p in prisms), default=None)
        fv = fe.get(fk) if isinstance(fe, dict) and fk in fe else (d.get(fk) if fk else None)
        values[q] = (hand, fv)
    skip = {"applicable", "compare", "remark", "notes", "assumptions", "fe", "prisms", "table"}
    inputs = {k: {"value": v, "unit": _unit_of(k), "meaning": k} for k, v in d.items()
              if k not in skip and isinstance(v, (int, float, str)) and not isinstance(v, bool)}
    return HandMethod(method, True, d.get("remark", ""), values=values, inputs=inputs,
                      assumptions=d.get("assumptions", ""), details={k: d[k] for k in ("prisms", "table") if k in d},
                      notes=list(d.get("notes", [])))


def _unit_of(key: str) -> str:
    for suf, unit in (("_m3_s_per_m", "m3/s per m"), ("_m_s", "m/s"), ("_per_m", "1/m"), ("_m2", "m2"),
                      ("_kN_per_m", "kN/m"), ("_m", "m")):
        if key.endswith(suf):
            return unit
    return "-"


def _landside_level(sec, ex: ExitChecks, exb) -> float:
    if exb.kind == "head":
        return float(exb.head)
    lw = sec.spec.checks.landside_water_level
    i = int(np.argmin(np.abs(ex.distance_from_toe)))
    g = float(ex.y[i])
    return max(g, lw) if lw is not None else g


def _na(reason: str) -> dict:
    return {"applicable": False, "reason": reason}


def _column_props(sec, x, y, contrast):
    """Top stratum and substratum under (x, y): thickness, equivalent k, buoyant weight."""
    cols = strata.columns(sec, np.array([x]), np.array([y]), contrast=contrast, depth=sec.spec.checks.top_stratum_depth)
    z, top, bot = cols.layers_of(0)
    if not np.isfinite(cols.base[0]):
        return None
    K = sec.zone_tensors()
    base = cols.base[0]
    t_top = np.clip(top - np.maximum(bot, base), 0, None)
    t_sub = np.clip(np.minimum(top, base) - bot, 0, None)
    ts = t_top[t_top > 0]
    zb = float(ts.sum())
    kb = zb / float(np.sum(ts / K[z[t_top > 0], 1, 1]))
    d = float(t_sub.sum())
    if d <= 0:
        return {"zb": zb, "kb": kb, "d": 0.0}
    ks = t_sub > 0
    kf = float(np.sum(K[z[ks], 0, 0] * t_sub[ks]) / d)
    kv_sub_min = float(K[z[ks], 1, 1].min())
    gw = sec.gamma_w
    w = float(strata.stratum_weight(sec, cols, 1)[0])
    return {"zb": zb, "kb": kb, "d": d, "kf": kf, "kv_sub_min": kv_sub_min, "gamma_b": w / zb if zb > 0 else float("nan"),
            "sub_zones": [int(k) for k in z[ks]], "base": float(base)}


def _blanket(result, ex: ExitChecks, up, H, land_level) -> dict:
    sec = result.section
    c = sec.spec.checks
    xt = ex.toe_x
    sgn = 1.0 if np.nanmean(ex.distance_from_toe) >= 0 else -1.0
    x0, ymin, x1, ymax = sec.outline.bounds
    eps = 1e-3 * sec.extent
    yt = float(_top_envelope(sec, np.array([xt + sgn * eps]))[0])
    if H <= 0:
        return _na(f"the river head ({up.head:g} m) is not above the landside level ({land_level:g} m)")
    if not np.isfinite(yt):
        return _na(f"no ground surface just landside of the toe (x = {xt:.4g} m); set checks.toe_x")
    land = _column_props(sec, xt + sgn * eps, yt, c.contrast)
    if land is None:
        return _na("no landside top stratum at the toe (no layer markedly less pervious than the one below)")
    if land["d"] <= 0:
        return _na("no pervious substratum below the landside top stratum")
    if land["kf"] < c.contrast * land["kb"] or land["kv_sub_min"] < c.contrast * land["kb"]:
        return _na(f"the substratum is not markedly more pervious than the top stratum (ratio {land['kf'] / land['kb']:.3g} "
                   f"< {c.contrast:g}); the theory's vertical-flow blanket over horizontal-flow aquifer does not hold")
    # riverside toe
    if c.riverside_toe_x is not None:
        xr, src = float(c.riverside_toe_x), "checks.riverside_toe_x"
    else:
        xs = np.linspace(x0, x1, 4001)
        yt_all = _top_envelope(sec, xs)
        ring = np.asarray(sec.outline.exterior.coords)
        xc = float(ring[ring[:, 1] >= ring[:, 1].max() - sec.length_tol, 0].mean())
        side = (xs - xc) * sgn < 0
        low = side & (yt_all <= yt + 1e-3 * max(ymax - yt, 1e-9))
        if not low.any():
            return _na("cannot find the riverside toe (set checks.riverside_toe_x)")
        j = np.flatnonzero(low)
        xr = float(xs[j[np.argmin(np.abs(xs[j] - xc))]])
        near = np.abs(ring[:, 0] - xr) <= 2.5 * (xs[1] - xs[0])
        if near.any():                       # snap to the outline vertex the grid found
            xr = float(ring[near, 0][np.argmin(np.abs(ring[near, 0] - xr))])
        src = "inferred: where the top surface comes down to the landside toe level"
    L2 = abs(xt - xr)
    yr = float(_top_envelope(sec, np.array([xr - sgn * eps]))[0])
    river = _column_props(sec, xr - sgn * eps, yr, c.contrast)
    # lengths to the section ends; the far end is 'blocked' (no-flow side) unless the blanket stops
    land_edge = x1 if sgn > 0 else x0
    river_edge = x0 if sgn > 0 else x1

    def extent(xa, xb):
        xs_ = np.linspace(xa, xb, 41)[1:]
        ys_ = _top_envelope(sec, xs_)
        cols = strata.columns(sec, xs_, ys_, contrast=c.contrast, depth=c.top_stratum_depth)
        gone = ~np.isfinite(cols.thickness)
        if gone.any():
            return abs(xs_[np.argmax(gone)] - xa), "open"
        return abs(xb - xa), "blocked"

    L3, end3 = extent(xt, land_edge)
    notes = []
    if river is None or river["d"] <= 0:
        L1, end1, zbr, kbr, d_r = 0.0, "none", 0.0, 0.0, land["d"]
    else:
        L1, end1 = extent(xr, river_edge)
        zbr, kbr, d_r = river["zb"], river["kb"], river["d"]
    if abs(d_r - land["d"]) > 0.2 * land["d"]:
        return _na(f"the substratum thickness changes under the levee ({d_r:.3g} m riverside, {land['d']:.3g} m "
                   "landside); the theory takes it uniform")
    d = land["d"] if end1 == "none" else 0.5 * (land["d"] + d_r)
    kf = land["kf"] if end1 == "none" else 0.5 * (land["kf"] + river["kf"])
    bt = hm.blanket_theory(H, d, kf, zb_land=land["zb"], kb_land=land["kb"], L3=L3, end3=end3, L2=L2,
                           zb_river=zbr, kb_river=kbr, L1=L1, end1=end1, gamma_buoyant_land=land["gamma_b"],
                           gamma_w=sec.gamma_w)
    # FE values beside it
    h_fe = float(result.head([[xt + sgn * 1e-6 * sec.extent, land["base"] + 1e-6 * sec.extent]])[0]) - land_level
    q_fe = float(result.boundary_flow(up.name))
    i_fe = h_fe / land["zb"]
    fs_fe = bt.get("i_critical", float("nan")) / i_fe if i_fe > 0 else math.inf
    emb = [sec.zone_names[z] for z in range(len(sec.polygons))
           if sec.zone_tensors()[z, 1, 1] > land["kb"] and shapely.Polygon(sec.polygons[z]).centroid.y > yt]
    if emb:
        notes.append(f"zone(s) {', '.join(emb)} above the ground are more pervious than the top stratum; the theory "
                     "takes the levee impervious")
    out = {"applicable": True, "riverside_toe_x_m": xr, "riverside_toe_from": src, "landside_toe_x_m": xt,
           "L1_m": L1, "riverside_end": end1, "L2_m": L2, "L3_m": L3, "landside_end": end3,
           "zb_land_m": land["zb"], "kb_land_m_s": land["kb"], "zb_river_m": zbr, "kb_river_m_s": kbr,
           "d_m": d, "kf_m_s": kf, "landside_level_m": land_level, **bt,
           "fe": {"h0_m": h_fe, "i0": i_fe, "q_m3_s_per_m": q_fe, "fs": fs_fe},
           "assumptions": "vertical flow in the top stratum, horizontal flow in a substratum of uniform thickness "
                          "and conductivity, impervious levee, 1D (Dupuit) heads in the substratum",
           "notes": notes,
           "compare": [("residual head at toe h0 (m)", bt["h0_m"], h_fe),
                       ("gradient at toe h0/z (m/m)", bt["i0"], i_fe),
                       ("FS uplift at toe (-)", bt.get("fs"), fs_fe),
                       ("seepage q (m3/s per m)", bt["q_m3_s_per_m"], q_fe)],
           "remark": f"x1 {bt['x1_m']:.4g} m, x3 {bt['x3_m']:.4g} m"
                     + ("; the theory leaves out the section's remedies (wells, cutoffs): it describes the "
                        "section without them" if sec.data.get("remedies") else "")}
    out["d70_m"] = _d70(sec, land.get("sub_zones", []))
    return out


def _d70(sec, zones):
    for z in zones[:1]:
        m = sec.zone_material(z)
        if m.d70 is not None:
            return float(m.d70)
    return None


def _lane(sec, path, H, cutoffs, tol, up=None) -> dict:
    if path is None:
        return _na("no single no-flow contact path joins the upstream head boundary and the exit surface")
    if up is not None and up.head is not None and path[:, 1].max() > up.head + tol:
        return _na("the path between the upstream water and the exit runs above the upstream water level "
                   "(over a crest), not along the underside of a structure")
    ends = max(path[0][1], path[-1][1])
    if path[:, 1].max() > ends + tol:
        return _na("the path between the upstream water and the exit runs over an exposed surface of the section "
                   "(an embankment modelled as soil), not along the underside of a structure")
    extra = 0.0
    pl = LineString(path)
    for cu in cutoffs:
        near = 10 * tol + cu["thickness_m"]
        on_path = pl.distance(Point(cu["x_m"], cu["tip_m"])) <= near      # the path already runs round it
        if not on_path and pl.distance(Point(cu["x_m"], cu["top_m"])) <= near:
            extra += 2 * (cu["top_m"] - cu["tip_m"])
    r = hm.lane_creep(path.tolist(), H, extra)
    return {"applicable": True, **r, "table": "Lane (1935) safe weighted creep ratios, from memory: "
            + ", ".join(f"{k} {v}" for k, v in hm.LANE_RATIOS.items()),
            "compare": [("weighted creep ratio C_w (-)", r["ratio"], None)],
            "remark": "compare with Lane's table for the foundation soil (docs/checks.md)"}


def _khosla(result, ex, path, H, cutoffs, tol) -> dict:
    sec = result.section
    if path is None:
        return _na("no single no-flow contact path (floor) joins the upstream head boundary and the exit surface")
    y0 = path[0][1]
    notch = _notch_cutoff(path, tol)
    floor = path[:-3] if notch else path
    if np.abs(floor[:, 1] - y0).max() > tol or abs(path[-1][1] - y0) > tol:
        return _na("the contact path is not one horizontal floor with a cutoff at its downstream end")
    if notch:
        d = notch["top_m"] - notch["tip_m"]
        b = abs(path[-1][0] - path[0][0])
        xcut = path[-1][0]
    else:
        cand = [cu for cu in cutoffs if abs(cu["top_m"] - y0) <= tol + 1e-9 and
                abs(cu["x_m"] - path[-1][0]) <= cu["thickness_m"] / 2 + 10 * tol]
        if not cand:
            return _na("no cutoff at the downstream end of the floor (Khosla's floor without a cutoff has an "
                       "infinite exit gradient)")
        cu = cand[0]
        d = cu["top_m"] - cu["tip_m"]
        b = abs(path[-1][0] - path[0][0])
        xcut = path[-1][0]
    # deep, homogeneous, isotropic foundation
    K = sec.zone_tensors()
    below = [z for z in range(len(sec.polygons)) if shapely.Polygon(sec.polygons[z]).bounds[3] <= y0 + tol
             and not any(cu["source"].startswith(f"zone '{sec.zone_names[z]}'") for cu in cutoffs)]
    mats = {sec.spec.zones[z].material for z in below}
    if len(mats) != 1:
        return _na("the foundation under the floor is not one homogeneous material")
    Kf = K[below[0]]
    if abs(Kf[0, 0] - Kf[1, 1]) > 1e-9 * Kf[0, 0] or abs(Kf[0, 1]) > 1e-9 * Kf[0, 0]:
        return _na("the foundation is anisotropic; Khosla's solution is for an isotropic soil")
    T = y0 - sec.outline.bounds[1]
    if T < 3.0 * max(b, d):
        return _na(f"the foundation depth ({T:.3g} m) is less than 3 times the larger of the floor length and the "
                   "cutoff depth; Khosla's solution takes it infinitely deep")
    r = hm.khosla_exit_gradient(H, b, d)
    i = int(np.argmin(np.abs(ex.x - xcut) + np.abs(ex.y - y0)))
    fe = float(ex.gradient[i])
    return {"applicable": True, **r, "fe_exit_gradient": fe, "fe_at_x_m": float(ex.x[i]),
            "compare": [("exit gradient at the cutoff (m/m)", r["exit_gradient"], fe)],
            "remark": f"alpha = b/d = {r['alpha']:.3g}"}


def _terzaghi(result, ex, cutoffs, land_level, exb) -> dict:
    sec = result.section
    if not cutoffs:
        return _na("no cutoff or sheet pile in the section (a barrier, a thin very-low-k zone, or checks.cutoff)")
    out = {"applicable": True, "prisms": [], "compare": []}
    gw = sec.gamma_w
    sgn = 1.0 if np.nanmean(ex.x) >= np.mean([cu["x_m"] for cu in cutoffs]) else -1.0
    for cu in cutoffs:
        face = cu["x_m"] + sgn * cu["thickness_m"] / 2
        i = int(np.argmin(np.abs(ex.x - face)))
        if abs(float(ex.x[i]) - face) > 0.5 * cu["thickness_m"] + max(sec.length_tol, 0.05 * (float(ex.y[i]) - cu["tip_m"])):
            continue          # the exit surface does not meet this cutoff's downstream face
        yg = float(ex.y[i])
        d = yg - cu["tip_m"]
        if d <= 0:
            continue
        xs = face + sgn * np.linspace(1e-6 * sec.extent, d / 2, 41)   # just off the face: the downstream side
        ys = np.full(len(xs), cu["tip_m"])
        hh = result.head(np.stack([xs, ys], 1))
        if np.isnan(hh).any():
            continue
        tail = float(exb.head) if exb.kind == "head" else max(yg, land_level)
        h_a = float(np.mean(hh - tail))
        e, _ = result.locate([[face + sgn * d / 4, cu["tip_m"] + d / 2]])
        gb = strata.saturated_unit_weight(sec.zone_material(int(result.mesh.zone[e[0]])), gw) - gw if e[0] >= 0 else float("nan")
        t = hm.terzaghi_heave(d, h_a, gb, gw)
        t.update({"cutoff": cu["source"], "x_face_m": face})
        out["prisms"].append(t)
        out["compare"].append((f"FS heave of prism at x {face:.3g} (-)", None, t["fs"]))
    if not out["prisms"]:
        return _na("no cutoff has its downstream face at the exit surface (Terzaghi's prism stands on a free "
                   "exit surface beside the cutoff)")
    out["remark"] = "h_a from the FE heads on the prism base"
    return out


def _sellmeijer(sec, blanket: dict, H: float) -> dict:
    if not blanket.get("applicable"):
        return _na("needs the blanket-over-aquifer geometry (blanket theory not applicable: "
                   + blanket.get("reason", "") + ")")
    d70 = blanket.get("d70_m")
    if d70 is None:
        return _na("the pervious layer under the top stratum gives no d70")
    L = blanket["x1_m"] + blanket["L2_m"]
    D = blanket["d_m"]
    if D / L >= 0.95:
        return _na(f"D/L = {D / L:.3g}: the geometry factor of the rule holds for D/L well below 1")
    r = hm.sellmeijer_2011(L, D, d70, blanket["kf_m_s"], sec.gamma_w)
    dh = H - 0.3 * blanket["zb_land_m"]
    r.update({"applicable": True, "H_m": H, "H_reduced_m": dh,
              "ratio": r["H_c_m"] / dh if dh > 0 else math.inf,
              "seepage_length": "x1 (effective riverside entrance length) + levee base width",
              "reduction": "H - 0.3 d_top (Dutch practice, from memory)",
              "compare": [("critical head H_c (m)", r["H_c_m"], None), ("H - 0.3 d (m)", dh, None),
                          ("H_c / (H - 0.3 d) (-)", r["H_c_m"] / dh if dh > 0 else math.inf, None)],
              "remark": "coefficients of Sellmeijer et al. (2011), from memory"})
    if not (1.5e-4 <= d70 <= 4.5e-4):
        r["notes"] = [f"d70 = {d70:.3g} m lies outside the range of the rule's calibration tests (about 0.15 to "
                      "0.43 mm, from memory)"]
    return r
