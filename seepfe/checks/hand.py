"""The hand methods applied to a solved section, beside the finite elements.

:func:`hand_methods` takes a result and its exit checks and returns one
:class:`~seepfe.checks.methods.HandMethod` per method: the values, the inputs a checker needs to redo
them by hand, the assumptions, or, where the section as drawn does not meet the method's
assumptions, the reason and no number. The closed forms are in :mod:`seepfe.checks.handmethods`;
docs/checks.md states each method's source and limits.

What is read from the section, never from a demo:

* the structure-soil contact (Lane, Khosla) is the no-flow outline between the upstream water and
  the exit surface, with the sheet piles and cutoffs attached to it; the model's truncation
  boundaries (its vertical ends and its base) are never part of it;
* blanket theory's end conditions come from the boundary conditions and the geometry at both ends:
  a blanket that stops with the substratum open to water, or a substratum whose end face carries a
  head, is *open*; a no-flow end is *blocked* (the finite elements see the same), or effectively
  *semi-infinite* where it lies beyond 3/c; a cutoff or a remedy that the theory does not describe
  makes it not applicable;
* Kozeny and Casagrande apply to a homogeneous embankment on an impervious base, with a horizontal
  drain (Kozeny) or a seepage face on the downstream slope (Casagrande).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import shapely
from shapely.geometry import LineString, Point

from . import handmethods as hm
from . import strata
from .exit import ExitChecks
from .methods import HandMethod, not_applicable

__all__ = ["hand_methods", "find_cutoffs", "floor_path"]

CUTOFF_ASPECT = 0.1      # a zone is a thin cutoff when its width / length is below this
CUTOFF_CONTRAST = 100.0  # ... and its conductivity is this many times below its neighbours'
SEMI_INFINITE_CL = 3.0   # a no-flow end beyond 3/c changes tanh(cL) by less than 0.5 %: semi-infinite


# ---------------------------------------------------------------------------- the driver
@dataclass
class _Setting:
    """What the hand methods share for one section."""

    result: object
    sec: object
    up: object                  # the upstream head boundary (highest head)
    exit: str                   # the first checked exit surface
    ex: ExitChecks
    exb: object
    land_level: float           # landside (tailwater) level, m
    H: float                    # net head, m
    path: np.ndarray | None     # structure-soil contact from the upstream water to the exit, or None
    path_why: str               # why there is none
    attached: list = field(default_factory=list)   # barriers / cutoffs hanging from the path
    cutoffs: list = field(default_factory=list)

    @property
    def tol(self) -> float:
        return self.sec.length_tol


def hand_methods(result, exits: dict) -> tuple[list[HandMethod], list[dict]]:
    """The hand methods beside the FE on the first checked exit surface, and the cutoffs found.

    Returns ([HandMethod per method], [cutoff dicts]).
    """
    if not exits:
        why = "no exit surface is checked (no seepage face; name one in checks.boundaries)"
        return [not_applicable(m, why) for m in ("blanket_theory", "lane", "khosla", "terzaghi_prism", "sellmeijer",
                                                 "kozeny", "casagrande")], []
    st = _setting(result, exits)
    blanket = _blanket(st)
    out = [blanket, _lane(st), _khosla(st), _terzaghi(st), _sellmeijer(st, blanket), _kozeny(st), _casagrande(st)]
    return out, st.cutoffs


def _setting(result, exits) -> _Setting:
    sec = result.section
    name = next(iter(exits))
    ex, exb = exits[name], sec.boundary(name)
    up = max((b for b in sec.spec.boundaries if b.kind == "head"), key=lambda b: b.head)
    land = _landside_level(sec, ex, exb)
    path, why = floor_path(sec, up.name, name)
    st = _Setting(result, sec, up, name, ex, exb, land, float(up.head) - land, path, why)
    st.cutoffs = find_cutoffs(sec)
    if path is not None:
        notch = _notch_cutoff(path, st.tol)
        if notch:
            st.cutoffs.append(notch)
        st.attached = _attached(st)
    return st


def _landside_level(sec, ex: ExitChecks, exb) -> float:
    """The landside (tailwater) level: the exit's head, or checks.landside_water_level, or the ground at the toe."""
    if exb.kind == "head":
        return float(exb.head)
    lw = sec.spec.checks.landside_water_level
    i = int(np.argmin(np.abs(ex.distance_from_toe)))
    g = float(ex.y[i])
    return max(g, lw) if lw is not None else g


# ---------------------------------------------------------------------------- geometry
def _ring(sec):
    """The outline as a closed chain: points (n, 2) and the boundary index of segment k (pts[k] ->
    pts[k+1]), -1 for no-flow."""
    g = sec.graph
    segs = np.flatnonzero(g.outline)
    nbr: dict = {}
    for s_ in segs.tolist():
        a, b = (int(v) for v in g.segments[s_])
        nbr.setdefault(a, []).append((s_, b))
        nbr.setdefault(b, []).append((s_, a))
    p0 = int(g.segments[segs[0]][0])
    ring_pts, ring_seg, prev, cur = [p0], [], -1, p0
    for _ in range(len(segs)):
        s_, nxt = next((s2, q) for s2, q in nbr[cur] if s2 != prev)
        ring_seg.append(s_)
        prev, cur = s_, nxt
        if cur == p0:
            break
        ring_pts.append(cur)
    return g.points[np.array(ring_pts)], g.boundary[np.array(ring_seg)]


def _truncation(sec, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Segments on the model's truncation: its vertical ends (x = min or max) and its base (y = min)."""
    x0, y0, x1, _ = sec.outline.bounds
    t = sec.length_tol
    on_x0 = (np.abs(a[:, 0] - x0) <= t) & (np.abs(b[:, 0] - x0) <= t)
    on_x1 = (np.abs(a[:, 0] - x1) <= t) & (np.abs(b[:, 0] - x1) <= t)
    on_y0 = (np.abs(a[:, 1] - y0) <= t) & (np.abs(b[:, 1] - y0) <= t)
    return on_x0 | on_x1 | on_y0


def floor_path(sec, up: str, exit_name: str) -> tuple[np.ndarray | None, str]:
    """The structure-soil contact from boundary ``up`` to boundary ``exit_name``: the no-flow outline
    between them (a floor, the faces of a cutoff cut into the outline), (n, 2) points in m from the
    upstream end; one point where the two boundaries meet (a sheet pile standing there carries the
    path). The model's truncation boundaries are never part of it. Returns (path, "") or (None, why).
    """
    pts, lab = _ring(sec)
    n = len(pts)
    names = sec.boundary_names
    iu, ie = names.index(up), names.index(exit_name)
    if not (lab >= 0).any():
        return None, "the outline carries no boundary"
    start = int(np.flatnonzero(lab >= 0)[0])
    runs, cur, prev = [], [], int(lab[start])
    for k in [(start + j) % n for j in range(1, n + 1)]:
        if lab[k] < 0:
            cur.append(k)
        else:
            runs.append((prev, cur, int(lab[k]), k))
            cur, prev = [], int(lab[k])
    best, why = None, ""
    for before, segs, after, k_after in runs:
        if {before, after} != {iu, ie}:
            continue
        if not segs:
            p = pts[k_after][None, :]                      # the boundaries meet at one point
        else:
            idx = np.array(segs)
            if _truncation(sec, pts[idx], pts[(idx + 1) % n]).any():
                why = (f"'{up}' and '{exit_name}' are joined only round the model's ends or base (its truncation "
                       "boundaries): no structure lies between them")
                continue
            p = np.vstack([pts[idx[0]]] + [pts[(i + 1) % n] for i in segs])
            if before == ie:
                p = p[::-1]
        L = float(np.linalg.norm(np.diff(p, axis=0), axis=1).sum()) if len(p) > 1 else 0.0
        if best is None or L < best[0]:
            best = (L, _simplify(p, sec.length_tol) if len(p) > 2 else p)
    if best is None:
        return None, why or f"no run of no-flow outline joins '{up}' and '{exit_name}' directly"
    return best[1], ""


def _simplify(path, tol):
    keep = [0]
    for i in range(1, len(path) - 1):
        a, b, c = path[keep[-1]], path[i], path[i + 1]
        cross = (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])
        if abs(cross) > tol * max(np.linalg.norm(c - a), 1e-300):
            keep.append(i)
    keep.append(len(path) - 1)
    return path[keep]


def _top_envelope(section, xs):
    """Highest outline elevation above each x (nan outside), m."""
    y0, y1 = section.outline.bounds[1] - 1, section.outline.bounds[3] + 1
    lines = shapely.linestrings(np.stack([np.stack([xs, np.full(len(xs), y1)], 1),
                                          np.stack([xs, np.full(len(xs), y0)], 1)], 1))
    b = shapely.bounds(shapely.intersection(lines, section.outline))
    return b[:, 3]


def find_cutoffs(section) -> list[dict]:
    """Cutoffs: the section's 'checks.cutoff', its barriers (zero-thickness impervious lines), and thin
    zones far less pervious than the most pervious zone they touch (the soil they cut off). Each: source,
    x_m, top_m, tip_m, thickness_m."""
    out = []
    c = section.spec.checks
    if c.cutoff is not None:
        (x0, y0), (x1, y1) = c.cutoff
        out.append({"source": "checks.cutoff", "x_m": 0.5 * (x0 + x1), "top_m": max(y0, y1),
                    "tip_m": min(y0, y1), "thickness_m": 0.0})
    for b in section.spec.barriers:
        pl = np.asarray(b.polyline, float)
        out.append({"source": f"barrier '{b.name}'", "x_m": float(pl[np.argmin(pl[:, 1]), 0]),
                    "top_m": float(pl[:, 1].max()), "tip_m": float(pl[:, 1].min()), "thickness_m": 0.0,
                    "polyline": pl.tolist()})
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
        if not nb or kmax[zi] * CUTOFF_CONTRAST > max(kmax[j] for j in nb):
            continue
        x0, y0, x1, y1 = p.bounds
        if (y1 - y0) < (x1 - x0):
            continue                       # a horizontal thin layer is a blanket, not a cutoff
        out.append({"source": f"zone '{section.zone_names[zi]}' (thin, very low k)", "x_m": 0.5 * (x0 + x1),
                    "top_m": y1, "tip_m": y0, "thickness_m": x1 - x0})
    return out


def _notch_cutoff(path, tol):
    """A cutoff cut into the outline at the downstream end of the path: down a face, across a tip, up a face."""
    if len(path) < 4:
        return None
    a, b, c, d = path[-4], path[-3], path[-2], path[-1]
    vert = lambda p, q: abs(p[0] - q[0]) <= tol and abs(p[1] - q[1]) > tol
    if vert(a, b) and b[1] < a[1] and abs(b[1] - c[1]) <= tol and vert(c, d) and d[1] > c[1]:
        return {"source": "cutoff cut into the outline", "x_m": 0.5 * (b[0] + c[0]), "top_m": float(d[1]),
                "tip_m": float(b[1]), "thickness_m": float(abs(c[0] - b[0])), "notch": True}
    return None


def _attached(st: _Setting) -> list[dict]:
    """Cutoffs hanging from the contact path (their top on it) and not already part of it."""
    geom = LineString(st.path) if len(st.path) > 1 else Point(st.path[0])
    out = []
    for cu in st.cutoffs:
        if cu.get("notch"):
            continue
        near = 10 * st.tol + cu["thickness_m"]
        if geom.distance(Point(cu["x_m"], cu["top_m"])) <= near and geom.distance(Point(cu["x_m"], cu["tip_m"])) > near:
            out.append(cu)
    return out


def _foundation_zone(st: _Setting, x: float, y: float) -> int | None:
    """The zone just below a point (the soil a structure stands on)."""
    d = 1e-4 * st.sec.extent
    for dx in (0.0, d, -d):
        p = Point(x + dx, y - d)
        for zi, poly in enumerate(st.sec.polygons):
            if shapely.Polygon(poly).contains(p):
                return zi
    return None


# ---------------------------------------------------------------------------- Lane
def _lane(st: _Setting) -> HandMethod:
    sec = st.sec
    if st.path is None:
        return not_applicable("lane", "no structure-soil contact between the upstream water and the exit: " + st.path_why)
    path = st.path
    if path[:, 1].max() > st.up.head + st.tol:
        return not_applicable("lane", "the path between the upstream water and the exit runs above the upstream water "
                                      "level (over a crest), not along the underside of a structure")
    ends = max(path[0][1], path[-1][1])
    if path[:, 1].max() > ends + st.tol:
        return not_applicable("lane", "the path between the upstream water and the exit runs over an exposed surface "
                                      "(an embankment modelled as soil), not along the underside of a structure")
    if st.H <= 0:
        return not_applicable("lane", f"no head difference across the structure (H = {st.H:.3g} m)")
    extra, used = 0.0, []
    for cu in st.attached:
        pl = np.asarray(cu.get("polyline") or [[cu["x_m"], cu["top_m"]], [cu["x_m"], cu["tip_m"]]], float)
        seg = np.abs(np.diff(pl, axis=0))
        lv = float(np.sum(np.hypot(seg[:, 0], seg[:, 1])[seg[:, 1] > seg[:, 0]]))
        lh = float(np.sum(np.hypot(seg[:, 0], seg[:, 1])[seg[:, 1] <= seg[:, 0]]))
        extra += 2.0 * (lv + lh / 3.0)                  # down one face and up the other (Lane 1935)
        used.append(f"{cu['source']} ({cu['top_m'] - cu['tip_m']:.3g} m deep)")
    r = hm.lane_creep(path.tolist(), st.H, extra)
    m = HandMethod("lane", True, "contact of the structure with the soil from the upstream water to the exit"
                   + (", with " + ", ".join(used) if used else ""),
                   values={"weighted_creep_ratio": (r["ratio"], None)},
                   assumptions="Lane (1935): weighted creep length L_w = sum(vertical and steeper than 45 deg) + "
                               "sum(flatter) / 3 along the contact of the structure with the soil, both faces of "
                               "each cutoff; safe when L_w / H is at least the ratio of Lane's table for the soil")
    m.add_input("H_m", st.H, "m", f"head difference: upstream water {st.up.head:g} m - landside level {st.land_level:g} m")
    m.add_input("vertical_m", r["vertical_m"], "m", "creep along contacts steeper than 45 degrees (cutoff faces twice)")
    m.add_input("horizontal_m", r["horizontal_m"], "m", "creep along flatter contacts")
    m.add_input("weighted_m", r["weighted_m"], "m", "L_w = vertical + horizontal / 3")
    m.details["path_m"] = path.tolist()
    zi = _foundation_zone(st, float(path[:, 0].mean()), float(path[:, 1].min()))
    cls = sec.zone_material(zi).soil_class if zi is not None else None
    if cls is not None:
        safe = hm.LANE_RATIOS[cls]
        m.add_input("safe_ratio", safe, "-", f"Lane's safe weighted creep ratio for {cls} (Lane 1935, from memory)")
        verdict = "meets" if r["ratio"] >= safe else "is BELOW"
        m.notes.append(f"Lane: weighted creep ratio {r['ratio']:.3g} {verdict} the safe ratio {safe:g} for {cls} "
                       f"(zone '{sec.zone_names[zi]}')" + ("" if r["ratio"] >= safe else
                                                          ": the creep path is too short by Lane's rule"))
    else:
        m.notes.append("Lane: give the foundation material a 'soil_class' (e.g. \"medium sand\") to compare the creep "
                       "ratio with Lane's safe ratio")
    return m


# ---------------------------------------------------------------------------- Khosla
def _khosla(st: _Setting) -> HandMethod:
    sec, result = st.sec, st.result
    if st.path is None:
        return not_applicable("khosla", "no floor between the upstream water and the exit: " + st.path_why)
    path, tol = st.path, st.tol
    notch = _notch_cutoff(path, tol)
    floor = path[:-3] if notch else path
    y0 = float(path[0][1])
    if np.abs(floor[:, 1] - y0).max() > tol or abs(path[-1][1] - y0) > tol:
        return not_applicable("khosla", "the contact path is not one horizontal floor with a cutoff at its downstream end")
    xcut = float(path[-1][0])
    b = abs(float(path[-1][0] - path[0][0]))
    if notch:
        d, b = notch["top_m"] - notch["tip_m"], abs(float(floor[-1][0] - floor[0][0])) + notch["thickness_m"]
        ups = []
    else:
        down = [cu for cu in st.attached if abs(cu["x_m"] - xcut) <= cu["thickness_m"] / 2 + 10 * tol
                and abs(cu["top_m"] - y0) <= tol]
        if not down:
            return not_applicable("khosla", "no cutoff at the downstream end of the floor (Khosla's floor without a "
                                            "cutoff has an infinite exit gradient)")
        d = down[0]["top_m"] - down[0]["tip_m"]
        ups = [cu for cu in st.attached if cu is not down[0]]
    K = sec.zone_tensors()
    below = [z for z in range(len(sec.polygons)) if shapely.Polygon(sec.polygons[z]).bounds[3] <= y0 + tol
             and not any(cu["source"].startswith(f"zone '{sec.zone_names[z]}'") for cu in st.cutoffs)]
    mats = {sec.spec.zones[z].material for z in below}
    if len(mats) != 1:
        return not_applicable("khosla", "the foundation under the floor is not one homogeneous material")
    Kf = K[below[0]]
    if abs(Kf[0, 0] - Kf[1, 1]) > 1e-9 * Kf[0, 0] or abs(Kf[0, 1]) > 1e-9 * Kf[0, 0]:
        return not_applicable("khosla", "the foundation is anisotropic; Khosla's solution is for an isotropic soil")
    T = y0 - sec.outline.bounds[1]
    if T < 3.0 * max(b, d):
        return not_applicable("khosla", f"the foundation depth ({T:.3g} m) is less than 3 times the larger of the floor "
                                        "length and the cutoff depth; Khosla's solution takes it infinitely deep")
    r = hm.khosla_exit_gradient(st.H, b, d)
    ex = st.ex
    i = int(np.argmin(np.abs(ex.x - xcut) + np.abs(ex.y - y0)))
    fe = float(ex.gradient[i])
    kp = hm.khosla_pressures(b, d)
    # Khosla's correction of the junction pressure for the interference of the other cutoffs on the floor:
    # C = 19 sqrt(D / b') (d + D) / b per cent of H, subtracted downstream of them (from memory)
    corr = sum(hm.khosla_interference(cu["top_m"] - cu["tip_m"], d, abs(cu["x_m"] - xcut), b) for cu in ups
               if abs(cu["x_m"] - xcut) > 10 * tol)
    phi_e = kp["phi_e"] - corr
    d_s = 1e-6 * sec.extent
    xin = xcut - math.copysign(d_s, float(path[-1][0] - path[0][0]) or 1.0)
    h_e = float(result.head([[xin, y0 - d_s]])[0]) - st.land_level
    h_d = float(result.head([[xcut, y0 - d + d_s]])[0] if not notch else
                result.head([[notch["x_m"], notch["tip_m"] - d_s]])[0]) - st.land_level
    m = HandMethod("khosla", True, f"floor {b:.3g} m long with a {d:.3g} m cutoff at its downstream end"
                   + (f" and {len(ups)} more cutoff(s) upstream" if ups else ""),
                   values={"exit_gradient": (r["exit_gradient"], fe),
                           "residual_head_e_m": (phi_e * st.H, h_e),
                           "residual_head_d_m": (None if ups else kp["phi_d"] * st.H, h_d)},
                   assumptions="Khosla, Bose and Taylor (1936): a thin floor of length b with a vertical cutoff of "
                               "depth d at its downstream end on an infinitely deep, homogeneous, isotropic foundation; "
                               "G_E = H / (d pi sqrt(lambda)), lambda = (1 + sqrt(1 + (b/d)^2)) / 2; residual heads at "
                               "the junction E and the tip D: phi_E = arccos((lambda - 2) / lambda) / pi, "
                               "phi_D = arccos((lambda - 1) / lambda) / pi of H")
    m.add_input("H_m", st.H, "m", "head difference across the floor")
    m.add_input("b_m", b, "m", "floor length")
    m.add_input("d_m", d, "m", "depth of the downstream cutoff")
    m.add_input("alpha", r["alpha"], "-", "b / d")
    m.add_input("lambda", r["lambda"], "-", "(1 + sqrt(1 + alpha^2)) / 2")
    m.add_input("foundation_depth_m", T, "m", "depth of the foundation below the floor")
    m.add_input("phi_e", kp["phi_e"], "-", "residual head at E as a fraction of H, before corrections")
    m.add_input("interference", corr, "-", "correction of phi_E for the other cutoffs on the floor")
    m.add_input("phi_d", kp["phi_d"], "-", "residual head at D as a fraction of H")
    if ups:
        m.notes.append("Khosla: with cutoffs upstream the exit gradient formula still takes only the downstream "
                       "cutoff; it then errs high (the safe side). The tip head D is not given: the interference "
                       "corrections cover the junction E only.")
    m.details["fe_at_x_m"] = float(ex.x[i])
    return m


# ---------------------------------------------------------------------------- Terzaghi
def _terzaghi(st: _Setting) -> HandMethod:
    sec, result, ex = st.sec, st.result, st.ex
    if not st.cutoffs:
        return not_applicable("terzaghi_prism", "no cutoff or sheet pile in the section (a barrier, a thin very-low-k "
                                                "zone, or checks.cutoff)")
    gw = sec.gamma_w
    prisms = []
    sgn = 1.0 if np.nanmean(ex.x) >= np.mean([cu["x_m"] for cu in st.cutoffs]) else -1.0
    for cu in st.cutoffs:
        face = cu["x_m"] + sgn * cu["thickness_m"] / 2
        i = int(np.argmin(np.abs(ex.x - face)))
        if abs(float(ex.x[i]) - face) > 0.5 * cu["thickness_m"] + max(st.tol, 0.05 * (float(ex.y[i]) - cu["tip_m"])):
            continue          # the exit surface does not meet this cutoff's downstream face
        yg = float(ex.y[i])
        d = yg - cu["tip_m"]
        if d <= 0:
            continue
        xs = face + sgn * np.linspace(1e-6 * sec.extent, d / 2, 41)   # just off the face: the downstream side
        hh = result.head(np.stack([xs, np.full(len(xs), cu["tip_m"])], 1))
        if np.isnan(hh).any():
            continue
        tail = float(st.exb.head) if st.exb.kind == "head" else max(yg, st.land_level)
        h_a = float(np.mean(hh - tail))
        e, _ = result.locate([[face + sgn * d / 4, cu["tip_m"] + d / 2]])
        gb = (strata.saturated_unit_weight(sec.zone_material(int(result.mesh.zone[e[0]])), gw) - gw
              if e[0] >= 0 else float("nan"))
        t = hm.terzaghi_heave(d, h_a, gb, gw)
        t.update({"cutoff": cu["source"], "x_face_m": face, "gamma_buoyant_kN_m3": gb})
        prisms.append(t)
    if not prisms:
        return not_applicable("terzaghi_prism", "no cutoff has its downstream face at the exit surface (Terzaghi's prism "
                                                "stands on a free exit surface beside the cutoff)")
    worst = min(prisms, key=lambda p: p["fs"])
    fe_heave = float(np.nanmin(np.where(np.abs(ex.x - worst["x_face_m"]) <= worst["d_m"] / 2, ex.fs_heave, np.inf)))
    m = HandMethod("terzaghi_prism", True, f"the prism beside {worst['cutoff']}",
                   values={"fs_heave": (worst["fs"], fe_heave if math.isfinite(fe_heave) else None)},
                   assumptions="Terzaghi (1943): a soil prism d deep and d/2 wide beside the downstream face of a cutoff "
                               "of penetration d heaves when the excess water force on its base exceeds its buoyant "
                               "weight: FS = gamma' d / (gamma_w h_a), h_a the mean excess head on the base (here from "
                               "the FE heads); the FE column is the least point FS against heave within d/2 of the face",
                   details={"prisms": prisms})
    m.add_input("d_m", worst["d_m"], "m", "penetration below the downstream surface")
    m.add_input("h_a_m", worst["h_a_m"], "m", "mean excess head on the prism base (FE heads)")
    m.add_input("gamma_buoyant_kN_m3", worst["gamma_buoyant_kN_m3"], "kN/m3", "buoyant unit weight of the prism")
    m.add_input("gamma_w_kN_m3", gw, "kN/m3", "unit weight of water")
    return m


# ---------------------------------------------------------------------------- blanket theory
def _column_props(sec, x, y):
    """Top stratum and substratum under (x, y): thickness, equivalent k, buoyant weight, zones."""
    cols = strata.columns(sec, np.array([x]), np.array([y]))
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
    out = {"zb": zb, "kb": kb, "d": d, "base": float(base), "bottom": float(bot.min()) if len(bot) else float(base),
           "top_zones": [int(k) for k in z[t_top > 0]]}
    if d <= 0:
        return out
    ks = t_sub > 0
    out.update(kf=float(np.sum(K[z[ks], 0, 0] * t_sub[ks]) / d), kv_sub_min=float(K[z[ks], 1, 1].min()),
               sub_zones=[int(k) for k in z[ks]])
    w = float(strata.stratum_weight(sec, cols, 1)[0])
    out["gamma_b"] = w / zb if zb > 0 else float("nan")
    return out


def _end_condition(st: _Setting, x_from: float, direction: float, top_sub: float, bot_sub: float, c: float,
                   water_side: str, r_toe: float) -> tuple[float, str, str]:
    """Length and condition of a blanket beyond a toe: (L m, 'open' | 'blocked' | 'semi-infinite', why).

    Walks the ground from ``x_from`` in ``direction``: where the top stratum ends over the substratum,
    or its resistance to vertical flow (sum t / k_v) falls below a tenth of ``r_toe`` (that at the toe: a
    pit, a ditch, a thin spot), the substratum is open to water at that distance; where the blanket
    reaches the model's end, the end face over the substratum decides:
    a head boundary there opens it, a no-flow end blocks it (the FE sees the same), and a no-flow end
    beyond 3/c acts as semi-infinite.
    """
    sec = st.sec
    x0, _, x1, _ = sec.outline.bounds
    edge = x1 if direction > 0 else x0
    xs = np.linspace(x_from, edge, 401)[1:]
    ys = _top_envelope(sec, xs)
    cols = strata.columns(sec, xs, ys)
    gone = ~np.isfinite(cols.thickness)
    if gone.any():
        L = abs(float(xs[np.argmax(gone)]) - x_from)
        return L, "open", f"the top stratum ends {L:.4g} m from the toe, where the substratum meets the surface"
    R = _resistance(sec, cols, len(xs))
    thin = R < 0.1 * r_toe
    if thin.any():
        k = int(np.argmax(thin))
        L = abs(float(xs[k]) - x_from)
        return L, "open", (f"the top stratum's resistance falls below a tenth of that at the toe {L:.4g} m out (x = "
                           f"{xs[k]:.4g} m: a pit, a ditch or a thin spot), taken as open there")
    lo, hi = float(np.nanmin(np.r_[R, r_toe])), float(np.nanmax(np.r_[R, r_toe]))
    if lo < 0.5 * hi:
        k = int(np.nanargmin(R))
        raise _NotUniform(f"the {water_side} top stratum is not uniform: its resistance to vertical flow (thickness / "
                          f"k) varies by a factor {hi / lo:.2g}, least at x = {xs[k]:.4g} m (a ditch, a pit, a "
                          "thinning); the theory takes one uniform blanket")
    L = abs(edge - x_from)
    pts, lab = _ring(sec)
    a, b = pts, np.roll(pts, -1, axis=0)
    t = sec.length_tol
    on = (np.abs(a[:, 0] - edge) <= t) & (np.abs(b[:, 0] - edge) <= t)
    lo, hi = np.minimum(a[:, 1], b[:, 1]), np.maximum(a[:, 1], b[:, 1])
    face = on & (hi > bot_sub + t) & (lo < top_sub - t)
    heads = [sec.spec.boundaries[i] for i in set(lab[face].tolist()) if i >= 0]
    heads = [bd for bd in heads if bd.kind == "head"]
    if heads:
        return L, "open", (f"the substratum's end face at x = {edge:.4g} m carries the head of boundary "
                           f"'{heads[0].name}' ({heads[0].head:g} m)")
    if c * L >= SEMI_INFINITE_CL:
        return L, "semi-infinite", (f"the blanket runs {L:.4g} m to the model's no-flow end, beyond 3/c = "
                                    f"{SEMI_INFINITE_CL / c:.4g} m: effectively unbounded")
    return L, "blocked", (f"the blanket runs {L:.4g} m to the model's no-flow end at x = {edge:.4g} m, within 3/c = "
                          f"{SEMI_INFINITE_CL / c:.4g} m: the substratum is closed there in the model (and here); if "
                          f"the real blanket runs on, lengthen the model on the {water_side} side")


class _NotUniform(Exception):
    """A blanket whose resistance varies too much along its length for the theory."""


def _resistance(sec, cols, n: int) -> np.ndarray:
    """(n,) resistance of the top stratum to vertical flow, sum(t / k_v), s; nan where there is none."""
    kv = sec.zone_tensors()[:, 1, 1]
    base = cols.base[cols.point]
    t = np.clip(cols.top - np.maximum(cols.bottom, base), 0.0, None)
    t = np.where(np.isfinite(base), t, 0.0)
    R = np.zeros(n)
    np.add.at(R, cols.point, t / kv[cols.zone])
    R[~np.isfinite(cols.base)] = np.nan
    return R


def _riverside_toe(st: _Setting, sgn: float, yt: float) -> tuple[float | None, str]:
    sec = st.sec
    c = sec.spec.checks
    if c.riverside_toe_x is not None:
        return float(c.riverside_toe_x), "checks.riverside_toe_x"
    x0, _, x1, ymax = sec.outline.bounds
    xs = np.linspace(x0, x1, 4001)
    yt_all = _top_envelope(sec, xs)
    ring = np.asarray(sec.outline.exterior.coords)
    xc = float(ring[ring[:, 1] >= ring[:, 1].max() - sec.length_tol, 0].mean())
    side = (xs - xc) * sgn < 0
    low = side & (yt_all <= yt + 1e-3 * max(ymax - yt, 1e-9))
    if not low.any():
        return None, ""
    j = np.flatnonzero(low)
    xr = float(xs[j[np.argmin(np.abs(xs[j] - xc))]])
    near = np.abs(ring[:, 0] - xr) <= 2.5 * (xs[1] - xs[0])
    if near.any():                       # snap to the outline vertex the grid found
        xr = float(ring[near, 0][np.argmin(np.abs(ring[near, 0] - xr))])
    return xr, "inferred: where the top surface comes down to the landside toe level"


def _blanket(st: _Setting) -> HandMethod:
    sec, result, ex = st.sec, st.result, st.ex
    c = sec.spec.checks
    xt = ex.toe_x
    sgn = 1.0 if np.nanmean(ex.distance_from_toe) >= 0 else -1.0
    eps = 1e-3 * sec.extent
    yt = float(_top_envelope(sec, np.array([xt + sgn * eps]))[0])
    H = st.H
    if H <= 0:
        return not_applicable("blanket_theory", f"the river head ({st.up.head:g} m) is not above the landside level "
                                                f"({st.land_level:g} m)")
    if not np.isfinite(yt):
        return not_applicable("blanket_theory", f"no ground surface just landside of the toe (x = {xt:.4g} m); set "
                                                "checks.toe_x")
    land = _column_props(sec, xt + sgn * eps, yt)
    if land is None:
        return not_applicable("blanket_theory", "no landside top stratum at the toe (the soil never turns markedly more "
                                                "pervious below the surface)")
    if land["d"] <= 0:
        return not_applicable("blanket_theory", "no pervious substratum below the landside top stratum")
    if land["kf"] < c.contrast * land["kb"] or land["kv_sub_min"] < c.contrast * land["kb"]:
        return not_applicable("blanket_theory", f"the substratum is not markedly more pervious than the top stratum "
                                                f"(ratio {land['kf'] / land['kb']:.3g} < {c.contrast:g}); the theory's "
                                                "vertical flow in the blanket over horizontal flow in the aquifer does "
                                                "not hold")
    xr, src = _riverside_toe(st, sgn, yt)
    if xr is None:
        return not_applicable("blanket_theory", "cannot find the riverside toe (set checks.riverside_toe_x)")
    top_sub, bot_sub = land["base"], land["bottom"]
    # a cutoff or a remedy the theory has no term for: say so rather than print a number for another section
    lo, hi = min(xr, xt) - 10 * st.tol, max(xr, xt) + 10 * st.tol
    for cu in st.cutoffs:
        if (lo <= cu["x_m"] <= hi or cu["source"] == "checks.cutoff") and cu["tip_m"] < top_sub - st.tol:
            pen = min(top_sub, cu["top_m"]) - max(cu["tip_m"], bot_sub)
            full = cu["tip_m"] <= bot_sub + st.tol
            return not_applicable("blanket_theory", (
                f"{cu['source']} {'closes' if full else f'penetrates {pen:.3g} m of the {top_sub - bot_sub:.3g} m of'} the "
                "substratum under the levee; EM 1110-2-1913 App. B has no term for a cutoff, so its values would "
                "describe another section (the FE includes it)"))
    other = [d for d in sec.remedies if d["type"] in ("relief_wells", "toe_drain", "landside_berm")]
    if other:
        kinds = ", ".join(sorted({d["type"].replace("_", " ") for d in other}))
        return not_applicable("blanket_theory", f"the section has remedies the closed form here leaves out ({kinds}); "
                                                "its values would describe the section without them (the FE includes "
                                                "them)")
    L2 = abs(xt - xr)
    yr = float(_top_envelope(sec, np.array([xr - sgn * eps]))[0])
    river = _column_props(sec, xr - sgn * eps, yr)
    if river is not None and river["d"] > 0 and abs(river["d"] - land["d"]) > 0.2 * land["d"]:
        return not_applicable("blanket_theory", f"the substratum thickness changes under the levee ({river['d']:.3g} m "
                                                f"riverside, {land['d']:.3g} m landside); the theory takes it uniform")
    has_river_blanket = river is not None and river["d"] > 0 and river.get("kf") is not None
    d = 0.5 * (land["d"] + river["d"]) if has_river_blanket else land["d"]
    kf = 0.5 * (land["kf"] + river["kf"]) if has_river_blanket else land["kf"]
    c3 = math.sqrt(land["kb"] / (kf * land["zb"] * d))
    try:
        L3, end3, why3 = _end_condition(st, xt, sgn, top_sub, bot_sub, c3, "landside", land["zb"] / land["kb"])
        if has_river_blanket:
            c1 = math.sqrt(river["kb"] / (kf * river["zb"] * d))
            L1, end1, why1 = _end_condition(st, xr, -sgn, river["base"], river["bottom"], c1, "riverside",
                                            river["zb"] / river["kb"])
            zbr, kbr = river["zb"], river["kb"]
        else:
            L1, end1, why1, zbr, kbr = 0.0, "none", "no riverside top stratum: the river meets the substratum at the toe", 0.0, 0.0
    except _NotUniform as e:
        return not_applicable("blanket_theory", str(e))
    bt = hm.blanket_theory(H, d, kf, zb_land=land["zb"], kb_land=land["kb"], L3=L3, end3=end3, L2=L2, zb_river=zbr,
                           kb_river=kbr, L1=L1, end1=end1, gamma_buoyant_land=land.get("gamma_b"), gamma_w=sec.gamma_w)
    # the FE values beside it, at the same point; q: all that enters at the river's head (its bed and any
    # channel or end face carrying it)
    h_fe = float(result.head([[xt + sgn * 1e-6 * sec.extent, land["base"] + 1e-6 * sec.extent]])[0]) - st.land_level
    q_fe = float(sum(result.boundary_flow(b.name) for b in sec.spec.boundaries
                     if b.kind == "head" and abs(b.head - st.up.head) <= sec.head_tol))
    i_fe = h_fe / land["zb"]
    ic = bt.get("i_critical", float("nan"))
    fs_fe = ic / i_fe if i_fe > 0 else math.inf
    notes = []
    subk = [float(sec.zone_tensors()[z_, 1, 1]) for z_ in land.get("sub_zones", [])]
    if subk and max(subk) >= c.contrast * min(subk):
        names = ", ".join(dict.fromkeys(sec.zone_names[z_] for z_ in land["sub_zones"]))
        notes.append(f"blanket theory: the substratum is layered ({names}; vertical k {min(subk):.2g} to "
                     f"{max(subk):.2g} m/s): the theory neglects the head lost across it (Dupuit), so its toe head "
                     "can differ from the FE's; the FE describes the layers")
    emb = [sec.zone_names[z] for z in range(len(sec.polygons))
           if sec.zone_tensors()[z, 1, 1] > land["kb"] and shapely.Polygon(sec.polygons[z]).centroid.y > yt]
    if emb:
        notes.append(f"blanket theory takes the levee impervious; zone(s) {', '.join(emb)} above the ground are more "
                     "pervious than the top stratum")
    m = HandMethod("blanket_theory", True,
                   f"landside end {end3} ({why3}); riverside end {end1} ({why1})",
                   values={"h0_m": (bt["h0_m"], h_fe), "top_stratum_gradient": (bt["i0"], i_fe),
                           "fs_uplift": (bt.get("fs"), fs_fe if math.isfinite(ic) else None),
                           "q_m3_s_per_m": (bt["q_m3_s_per_m"], q_fe)},
                   assumptions="USACE EM 1110-2-1913 (2000) App. B: vertical flow in the top stratum, horizontal flow in "
                               "a substratum of uniform thickness d and conductivity kf, an impervious levee; effective "
                               "lengths x = 1/c (semi-infinite), tanh(cL)/c (open end), 1/(c tanh(cL)) (blocked end), "
                               "c = sqrt(kb / (kf zb d)); h0 = H x3 / (x1 + L2 + x3), q = kf H d / (x1 + L2 + x3)",
                   notes=notes)
    add = m.add_input
    add("H_m", H, "m", f"net head: river {st.up.head:g} m - landside level {st.land_level:g} m")
    add("riverside_toe_x_m", xr, "m", f"riverside toe ({src})")
    add("landside_toe_x_m", xt, "m", f"landside toe ({ex.toe_source})")
    add("L1_m", L1, "m", "riverside blanket length beyond the riverside toe")
    add("riverside_end", end1, "", why1)
    add("L2_m", L2, "m", "base width of the levee, toe to toe")
    add("L3_m", L3, "m", "landside blanket length beyond the landside toe")
    add("landside_end", end3, "", why3)
    add("zb_land_m", land["zb"], "m", "landside top-stratum thickness at the toe, z_b")
    add("kb_land_m_s", land["kb"], "m/s", "landside top-stratum vertical k (series mean)")
    add("zb_river_m", zbr, "m", "riverside top-stratum thickness")
    add("kb_river_m_s", kbr, "m/s", "riverside top-stratum vertical k")
    add("d_m", d, "m", "substratum thickness")
    add("kf_m_s", kf, "m/s", "substratum horizontal k (thickness-weighted)")
    add("c1_per_m", bt["c1_per_m"], "1/m", "riverside leakage factor")
    add("c3_per_m", bt["c3_per_m"], "1/m", "landside leakage factor")
    add("x1_m", bt["x1_m"], "m", "effective riverside length")
    add("x3_m", bt["x3_m"], "m", "effective landside length")
    add("gamma_buoyant_kN_m3", land.get("gamma_b"), "kN/m3", "buoyant unit weight of the landside top stratum")
    add("i_critical", ic, "m/m", "critical gradient gamma' / gamma_w of the top stratum")
    add("landside_level_m", st.land_level, "m", "landside water level (or ground) the heads are measured from")
    m.details["d70_m"] = _d70(sec, land.get("sub_zones", []))
    return m


def _d70(sec, zones):
    for z in zones[:1]:
        mt = sec.zone_material(z)
        if mt.d70 is not None:
            return float(mt.d70)
    return None


# ---------------------------------------------------------------------------- Sellmeijer
def _sellmeijer(st: _Setting, blanket: HandMethod) -> HandMethod:
    if not blanket.applies:
        return not_applicable("sellmeijer", "needs the blanket-over-aquifer geometry (blanket theory does not apply: "
                                            + blanket.why + ")")
    d70 = blanket.details.get("d70_m")
    if d70 is None:
        return not_applicable("sellmeijer", "the pervious layer under the top stratum gives no d70")
    inp = {k: v["value"] for k, v in blanket.inputs.items()}
    L = inp["x1_m"] + inp["L2_m"]
    D = inp["d_m"]
    if D / L >= 0.95:
        return not_applicable("sellmeijer", f"D/L = {D / L:.3g}: the geometry factor of the rule holds for D/L well below 1")
    r = hm.sellmeijer_2011(L, D, d70, inp["kf_m_s"])
    dh = st.H - 0.3 * inp["zb_land_m"]
    ratio = r["H_c_m"] / dh if dh > 0 else math.inf
    m = HandMethod("sellmeijer", True, "seepage length x1 (effective riverside entrance) + levee base width",
                   values={"critical_head_m": (r["H_c_m"], None), "critical_head_ratio": (ratio, None)},
                   assumptions="Sellmeijer et al. (2011): critical head H_c = F_R F_S F_G L for backward erosion piping "
                               "under a blanket, compared with the head reduced by 0.3 d_top (Dutch practice, from memory); "
                               "coefficients in seepfe.checks.handmethods.SELLMEIJER")
    meaning = {"L_m": ("m", "seepage length: effective riverside entrance x1 + levee base width"),
               "D_m": ("m", "thickness of the pervious substratum"),
               "d70_m": ("m", "d70 of the substratum's top layer"),
               "k_m_s": ("m/s", "horizontal conductivity of the substratum, k_f"),
               "kappa_m2": ("m2", "intrinsic permeability nu k / g (water at about 10 degC)"),
               "F_R": ("-", "resistance factor eta (gamma_p'/gamma_w) tan(theta), with gamma_p'/gamma_w = 1.65"),
               "F_S": ("-", "scale factor d70_m / (kappa L)^(1/3) (d70 / d70_m)^0.4"),
               "F_G": ("-", "geometry factor 0.91 (D/L)^(0.28 / ((D/L)^2.8 - 1) + 0.04)")}
    for k, (unit, what) in meaning.items():
        m.add_input(k, r[k], unit, what)
    m.add_input("H_reduced_m", dh, "m", "H - 0.3 d_top")
    if not (1.5e-4 <= d70 <= 4.5e-4):
        m.notes.append(f"Sellmeijer: d70 = {d70:.3g} m lies outside the range of the rule's calibration tests (about "
                       "0.15 to 0.43 mm, from memory)")
    return m


# ---------------------------------------------------------------------------- homogeneous dams
@dataclass
class _Dam:
    k: float                    # sqrt(kx ky), m/s
    scale: float                # x_t = x * scale, sqrt(ky / kx)
    base: float                 # base elevation, m
    h: float                    # reservoir head above the base, m
    x_heel: float               # upstream toe, m
    x_wet: float                # where the reservoir meets the upstream face, m
    sgn: float                  # +1 when downstream is +x
    zones: list


def _dam(st: _Setting) -> tuple[_Dam | None, str]:
    """The homogeneous embankment on an impervious base that Kozeny and Casagrande describe, or why not."""
    sec = st.sec
    up = np.asarray(st.up.polyline, float)
    base = float(up[:, 1].min())
    drains = [i for i, z in enumerate(sec.spec.zones) if z.drain]
    above = [i for i, p in enumerate(sec.polygons) if float(p[:, 1].min()) >= base - st.tol and i not in drains]
    below = [i for i, p in enumerate(sec.polygons) if float(p[:, 1].min()) < base - st.tol and i not in drains]
    if not above:
        return None, "no embankment above the reservoir bed"
    mats = {sec.spec.zones[i].material for i in above}
    if len(mats) != 1:
        return None, f"the embankment is zoned ({', '.join(sorted(mats))}); the closed forms are for a homogeneous one"
    K = sec.zone_tensors()
    Ke = K[above[0]]
    if abs(Ke[0, 1]) > 1e-9 * Ke[0, 0]:
        return None, "the embankment's principal directions are inclined; the transformed section needs them horizontal"
    kx, ky = float(Ke[0, 0]), float(Ke[1, 1])
    kb = max((float(np.linalg.eigvalsh(K[i])[-1]) for i in below), default=0.0)
    if kb > math.sqrt(kx * ky) / sec.spec.checks.contrast:
        names = ", ".join(sec.zone_names[i] for i in below)
        return None, (f"the foundation ({names}) is not markedly less pervious than the embankment; the closed forms "
                      "take an impervious base")
    if st.H <= 0 or st.up.head <= base:
        return None, "no reservoir above the base"
    h = float(st.up.head) - base
    # upstream face: where the reservoir level meets it (exactly, on the outline), and the heel
    x0, y0, x1, y1 = sec.outline.bounds
    ring = np.asarray(sec.outline.exterior.coords)
    crest_x = float(ring[ring[:, 1] >= y1 - st.tol, 0].mean())
    sgn = 1.0 if float(up[:, 0].mean()) < crest_x else -1.0
    cut = sec.outline.exterior.intersection(LineString([(x0 - 1, st.up.head), (x1 + 1, st.up.head)]))
    xs = [g.x for g in getattr(cut, "geoms", [cut]) if hasattr(g, "x") and (g.x - crest_x) * sgn < 0]
    on_base = up[np.abs(up[:, 1] - base) <= st.tol, 0]
    if not xs or not len(on_base):
        return None, "cannot find the upstream face between the reservoir bed and the crest"
    x_wet = max(xs) if sgn > 0 else min(xs)
    x_heel = float(on_base.max() if sgn > 0 else on_base.min())
    return _Dam(math.sqrt(kx * ky), math.sqrt(ky / kx), base, h, x_heel, x_wet, sgn, above), ""


def _dam_inputs(m: HandMethod, dm: _Dam, d_t: float, note: str) -> None:
    m.add_input("h_m", dm.h, "m", "reservoir head above the base")
    m.add_input("k_m_s", dm.k, "m/s", "sqrt(kx ky) of the embankment (transformed section)")
    m.add_input("x_scale", dm.scale, "-", "horizontal distances scaled by sqrt(ky / kx) (transformed section)")
    m.add_input("m_m", abs(dm.x_wet - dm.x_heel), "m", "horizontal projection of the wetted upstream face")
    m.add_input("d_m", d_t, "m", note)


def _kozeny(st: _Setting) -> HandMethod:
    sec, result = st.sec, st.result
    dm, why = _dam(st)
    if dm is None:
        return not_applicable("kozeny", why)
    # the drain: its upstream end on the base (a drain boundary or a drain zone)
    ends = []
    for b in sec.spec.boundaries:
        if b.kind == "drain":
            pl = np.asarray(b.polyline, float)
            on = pl[np.abs(pl[:, 1] - dm.base) <= 10 * st.tol]
            if len(on):
                ends.append((b.name, float(on[:, 0].min() if dm.sgn > 0 else on[:, 0].max())))
    for i, z in enumerate(sec.spec.zones):
        if z.drain:
            p = sec.polygons[i]
            on = p[np.abs(p[:, 1] - dm.base) <= 10 * st.tol]
            if len(on):
                ends.append((z.name, float(on[:, 0].min() if dm.sgn > 0 else on[:, 0].max())))
    if not ends:
        return not_applicable("kozeny", "no drain on the base downstream (Kozeny's parabola has its focus at the "
                                        "upstream end of a horizontal drain)")
    name, xf = min(ends, key=lambda t: t[1] * dm.sgn)
    # Casagrande's entrance correction: the parabola passes 0.3 m upstream of where the water meets the face
    xa = dm.x_wet - dm.sgn * 0.3 * abs(dm.x_wet - dm.x_heel)
    d_t = abs(xf - xa) * dm.scale
    r = hm.kozeny_drain(dm.h, d_t, dm.k)
    q_fe = -float(result.boundary_flow(name)) if name in result.flows else None
    pl = result.phreatic_line()
    y_fe = None
    if len(pl) > 1:
        near = np.abs(pl[:, 0] - xf)
        k = int(np.argmin(near))
        if near[k] <= 0.05 * dm.h + sec.length_tol:
            y_fe = float(pl[k, 1] - dm.base)
    m = HandMethod("kozeny", True, f"homogeneous embankment on an impervious base, drain '{name}' from x = {xf:.4g} m",
                   values={"q_m3_s_per_m": (r["q_m3_s_per_m"], q_fe), "phreatic_height_m": (r["y0_m"], y_fe)},
                   assumptions="Kozeny (1931): the phreatic line of a homogeneous section on an impervious base draining "
                               "to a horizontal drain is a parabola with its focus at the drain's upstream end, "
                               "y^2 = y0^2 + 2 y0 x, y0 = sqrt(d^2 + h^2) - d, q = k y0; d measured from the point 0.3 m "
                               "upstream of where the reservoir meets the face (Casagrande's entrance correction, "
                               "from memory); anisotropic soil in the transformed section")
    _dam_inputs(m, dm, d_t, "horizontal distance (transformed) from the 0.3 m point to the drain's upstream end")
    m.add_input("x_focus_m", xf, "m", "upstream end of the drain on the base (the parabola's focus)")
    return m


def _casagrande(st: _Setting) -> HandMethod:
    sec, result = st.sec, st.result
    dm, why = _dam(st)
    if dm is None:
        return not_applicable("casagrande", why)
    if any(b.kind == "drain" for b in sec.spec.boundaries) or any(z.drain for z in sec.spec.zones):
        return not_applicable("casagrande", "the section has a drain: the phreatic surface does not exit on the slope "
                                            "(see Kozeny)")
    if st.exb.kind != "seepage_face":
        return not_applicable("casagrande", f"the exit surface '{st.exit}' is not a seepage face on the downstream slope")
    line = np.asarray(st.exb.polyline, float)
    seg = np.diff(line, axis=0)
    steep = np.abs(seg[:, 1]) > 0.1 * np.abs(seg[:, 0])
    if not steep.any():
        return not_applicable("casagrande", f"'{st.exit}' has no sloping part (Casagrande's exit lies on the slope)")
    s = seg[np.argmax(np.where(steep, np.hypot(seg[:, 0], seg[:, 1]), 0))]
    beta = math.atan2(abs(s[1]), abs(s[0]) * dm.scale)           # slope angle in the transformed section
    toe_pts = line[np.abs(line[:, 1] - dm.base) <= 10 * st.tol]
    if not len(toe_pts):
        return not_applicable("casagrande", "the downstream slope does not reach the base (a tailwater or a berm): not "
                                            "Casagrande's section")
    x_toe = float(toe_pts[:, 0].max() if dm.sgn > 0 else toe_pts[:, 0].min())
    if math.degrees(beta) > 30.0 + 1e-9:
        return not_applicable("casagrande", f"the downstream slope is {math.degrees(beta):.3g} deg (transformed); "
                                            "Casagrande's closed form holds up to 30 deg (steeper slopes need his chart)")
    xa = dm.x_wet - dm.sgn * 0.3 * abs(dm.x_wet - dm.x_heel)
    d_t = abs(x_toe - xa) * dm.scale
    r = hm.casagrande_exit(dm.h, d_t, beta, dm.k)
    if r is None:
        return not_applicable("casagrande", "d^2 < h^2 cot^2(beta): the slope is too steep for the section's length "
                                            "(Casagrande's form has no root)")
    faces = result.seepage_faces() if hasattr(result, "seepage_faces") else {}
    f = faces.get(st.exit) or {}
    a_fe = None
    if f.get("exit_point_m"):
        ex, ey = f["exit_point_m"]
        a_fe = float(math.hypot((ex - x_toe) * dm.scale, ey - dm.base))
    q_fe = float(f["outflow_m3_s_per_m"]) if f else None
    m = HandMethod("casagrande", True, f"homogeneous embankment on an impervious base, exit on '{st.exit}'",
                   values={"exit_length_m": (r["a_m"], a_fe), "q_m3_s_per_m": (r["q_m3_s_per_m"], q_fe)},
                   assumptions="Casagrande (1937): the phreatic line of a homogeneous dam on an impervious base without a "
                               "drain leaves the downstream slope (angle beta <= 30 deg) a distance a from the toe, "
                               "a = sqrt(d^2 + h^2) - sqrt(d^2 - h^2 cot^2 beta), q = k a sin^2 beta; d from the 0.3 m "
                               "point to the toe (from memory); anisotropic soil in the transformed section")
    _dam_inputs(m, dm, d_t, "horizontal distance (transformed) from the 0.3 m point to the downstream toe")
    m.add_input("beta_deg", math.degrees(beta), "deg", "downstream slope angle (transformed section)")
    m.add_input("x_toe_m", x_toe, "m", "downstream toe")
    return m
