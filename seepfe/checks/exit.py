"""Exit gradients, heave and uplift factors of safety along a named exit surface.

Along the boundary, at every mesh node on it and at an optional spacing, :func:`exit_gradients`
reports (units in brackets; upward and outward positive):

* ``gradient`` [m/m]: vertical exit gradient at the surface, -dh/dy, from nodal gradients recovered
  by superconvergent patch recovery (:mod:`seepfe.checks.recovery`) in the zone under the point and
  interpolated along each boundary edge with the edge's own shape functions;
* ``normal_gradient`` [m/m]: -dh/dn along the outward normal (for exits on slopes);
* ``blanket_gradient`` [m/m]: (head at the base of the top stratum - head at the surface) / thickness;
* ``i_critical`` [m/m]: (gamma_sat - gamma_w) / gamma_w of the soil at the surface, or (Gs - 1)/(1 + e);
* ``exit_gradient`` [m/m]: the gradient the criteria apply to: ``blanket_gradient`` where there is a
  top stratum (USACE practice), else the surface gradient;
* ``fs_heave`` = i_critical / exit_gradient where water leaves upward through a wet surface;
  ``fs_uplift`` = sum((gamma_sat - gamma_w) t) / (gamma_w h_excess), h_excess being the head at the
  base of the top stratum above the landside water level (or the ground surface); ``fs`` = the
  smaller of the two;
* ``passes`` against the section's ``checks.criteria``.

Missing values follow one rule: ``inf`` means the check does not arise there (no upward flow, a dry
surface, no top stratum, no excess head): nothing to heave or lift; ``nan`` means it arises but
cannot be computed (a material without a unit weight), and the governing values then say so
(verdict "not checked" unless a computed point already fails), never a silent pass.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import shapely
from shapely.geometry import LineString

from ..errors import SectionError
from . import recovery, strata

__all__ = ["ExitChecks", "exit_gradients", "default_boundaries", "infer_toe", "governing_of", "failing_stretches"]


@dataclass(eq=False)
class ExitChecks:
    """Checks along one exit surface; arrays are per check point, ordered along the boundary."""

    boundary: str
    x: np.ndarray                    # m
    y: np.ndarray                    # m
    s: np.ndarray                    # distance along the boundary, m
    distance_from_toe: np.ndarray    # m, positive away from the levee
    is_node: np.ndarray              # 1 at a mesh node, 0 at a spacing point
    zone: np.ndarray                 # zone index at the surface
    head: np.ndarray                 # total head at the surface, m
    gradient: np.ndarray             # vertical exit gradient at the surface, upward positive, m/m
    normal_gradient: np.ndarray      # gradient along the outward normal, outward positive, m/m
    blanket_gradient: np.ndarray     # average vertical gradient across the top stratum, m/m (nan: none)
    thickness: np.ndarray            # top-stratum thickness, m (nan: none)
    head_base: np.ndarray            # total head at the base of the top stratum, m
    h_excess: np.ndarray             # head at the base above the landside water / ground, m
    i_critical: np.ndarray           # m/m
    fs_heave: np.ndarray             # -
    fs_uplift: np.ndarray            # -
    fs: np.ndarray                   # governing (smaller) factor of safety, - (inf: no check arises, nan: unknown)
    passes: np.ndarray               # bool (False where a computed value fails the criteria)
    wet: np.ndarray                  # bool: the surface point is saturated (pressure head >= 0)
    criteria: dict
    toe_x: float
    toe_source: str
    method: str = recovery.METHOD
    top_stratum_method: str = ""
    notes: list = field(default_factory=list)
    missing: dict = field(default_factory=dict)     # zone name -> what it lacks, where a check needed it

    # ------------------------------------------------------------------ the vocabulary (DEVELOPERS.md)
    @property
    def surface_gradient(self) -> np.ndarray:
        """Vertical gradient at the ground surface, upward positive, m/m (the issue-3 ``gradient``)."""
        return self.gradient

    @property
    def top_stratum_gradient(self) -> np.ndarray:
        """Mean vertical gradient across the top stratum, m/m; nan where there is none (the issue-3
        ``blanket_gradient``)."""
        return self.blanket_gradient

    @property
    def exit_gradient(self) -> np.ndarray:
        """The gradient the criteria apply to: across the top stratum where one exists, else at the surface, m/m."""
        return np.where(np.isfinite(self.blanket_gradient), self.blanket_gradient, self.gradient)

    governing_gradient = exit_gradient

    @property
    def unknown(self) -> np.ndarray:
        """bool: a check arises at the point but cannot be computed (nan FS)."""
        return np.isnan(self.fs_heave) | np.isnan(self.fs_uplift)

    @property
    def governing(self) -> dict:
        """The governing values along this boundary (plain data, nan-free; see :func:`governing_of`)."""
        return governing_of(self)

    # ------------------------------------------------------------------ output
    def columns(self) -> dict:
        """Named columns with units (m, m/m; FS and flags -), for CSV. FS: inf = no check arises, nan = unknown."""
        return {"x_m": self.x, "y_m": self.y, "s_m": self.s, "distance_from_toe_m": self.distance_from_toe,
                "is_node": self.is_node, "zone": self.zone, "wet": self.wet.astype(float), "total_head_m": self.head,
                "surface_gradient_m_per_m": self.gradient, "normal_gradient_m_per_m": self.normal_gradient,
                "top_stratum_gradient_m_per_m": self.blanket_gradient, "exit_gradient_m_per_m": self.exit_gradient,
                "top_stratum_thickness_m": self.thickness, "head_base_m": self.head_base,
                "h_excess_m": self.h_excess, "i_critical_m_per_m": self.i_critical,
                "fs_heave": self.fs_heave, "fs_uplift": self.fs_uplift, "fs": self.fs,
                "passes": self.passes.astype(float)}

    def to_csv(self, path, units=None) -> None:
        """Write one row per check point; the header names carry units (gradients m/m, FS -). With
        ``units`` (seepfe.units.Units) other than SI, the lengths follow again in those units."""
        from ..csvfile import write_csv
        from ..units import display_columns
        write_csv(path, display_columns(self.columns(), units))

    def to_dict(self) -> dict:
        """Plain-data summary for summary.json (governing values, criteria, methods, notes)."""
        return {"boundary": self.boundary, "gradient_method": self.method,
                "top_stratum": self.top_stratum_method, "toe_x_m": self.toe_x, "toe_from": self.toe_source,
                "criteria": dict(self.criteria), "governing": self.governing, "notes": list(self.notes)}

    def __len__(self) -> int:
        return len(self.x)

    def __repr__(self) -> str:
        g = self.governing
        return (f"<ExitChecks '{self.boundary}': {len(self.x)} points, least FS "
                f"{g['fs'] if g['fs'] is not None else float('nan'):.3g}, {g['verdict']}>")


def _finite_or_none(d):
    if isinstance(d, dict):
        return {k: _finite_or_none(v) for k, v in d.items()}
    if isinstance(d, list):
        return [_finite_or_none(v) for v in d]
    if isinstance(d, (float, np.floating)):
        d = float(d)
        return d if math.isfinite(d) else None
    return d


def _where(ex: ExitChecks, i: int) -> str:
    return f"x = {ex.x[i]:.2f} m ({ex.distance_from_toe[i]:+.1f} m from the toe)"


def failing_stretches(ex: ExitChecks) -> list[tuple[float, float]]:
    """The stretches of an exit surface that fail the criteria, as (from, to) distances from the toe, m.

    One definition, used by the tables, summary.json and the figures alike: the check points are taken
    in their order along the boundary; each run of consecutive failing points is one stretch, extended
    half-way to the neighbouring passing points (each point stands for the surface half-way to its
    neighbours), and to the boundary's end where the run reaches it. Distances are horizontal, from
    the toe, positive away from the embankment (negative on the slope). The true ends lie within half
    a check-point spacing of these (``checks.spacing`` adds points).
    """
    n = len(ex.x)
    if n == 0:
        return []
    o = np.argsort(ex.s, kind="stable")
    d = np.asarray(ex.distance_from_toe, float)[o]
    f = ~np.asarray(ex.passes, bool)[o]
    if not f.any():
        return []
    mids = np.concatenate([[d[0]], 0.5 * (d[1:] + d[:-1]), [d[-1]]])
    edges = np.diff(np.concatenate([[0], f.astype(int), [0]]))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    out = [(float(min(mids[a], mids[b])), float(max(mids[a], mids[b]))) for a, b in zip(starts, ends)]
    return sorted(out)


def _mode(fs_heave: float, fs_uplift: float) -> str:
    """What governs at a point: "heave" or "uplift". Where the two agree to round-off (as they must, by
    algebra, across a single stratum with the water table at the surface: gamma' z / (gamma_w dh) both) the
    answer is "heave", so the label never flips between runs on the last bit."""
    return "heave" if fs_heave <= fs_uplift * (1.0 + 1e-9) else "uplift"


def governing_of(ex: ExitChecks) -> dict:
    """The governing values along one exit surface, with the verdict and why (plain data, no nan or inf).

    ``fs`` is the least factor of safety over the points where it could be computed, ``mode`` what
    governs there ("heave" or "uplift"); ``exit_gradient_max`` the largest exit gradient (the one the
    criteria apply to) where water leaves; ``surface_gradient_max`` and ``top_stratum_gradient_max``
    the largest of each; ``fails_within_m_of_toe`` the distance from the toe of the farthest failing
    end of the failing stretches (:func:`failing_stretches`), ``failing_length_m`` their total length and
``failing_stretches_m`` the stretches themselves. ``verdict`` is "fail" where a computed value fails the criteria, else "not checked" where a
    check arises that cannot be computed, else "pass"; ``why`` says which and where.
    """
    cr = ex.criteria
    n = len(ex.x)
    fs = np.asarray(ex.fs, float)
    fin = np.isfinite(fs)
    unknown = ex.unknown
    fail = ~ex.passes
    out = {"boundary": ex.boundary, "points": int(n), "failing_points": int(fail.sum()),
           "unknown_points": int(unknown.sum()), "fs": None, "mode": None, "x_m": None, "y_m": None,
           "distance_from_toe_m": None, "top_stratum_thickness_m": None}
    if fin.any():
        i = int(np.flatnonzero(fin)[np.argmin(fs[fin])])
        t = float(ex.thickness[i])
        out.update(fs=float(fs[i]), mode=_mode(ex.fs_heave[i], ex.fs_uplift[i]),
                   x_m=float(ex.x[i]), y_m=float(ex.y[i]), distance_from_toe_m=float(ex.distance_from_toe[i]),
                   top_stratum_thickness_m=t if math.isfinite(t) else None)
    ig = np.asarray(ex.exit_gradient, float)
    leaves = ~np.isinf(ex.fs_heave)          # water leaves upward there (a heave check arises)
    for key, arr, mask in (("exit_gradient", ig, leaves), ("surface_gradient", ex.gradient, leaves),
                           ("top_stratum_gradient", ex.blanket_gradient, np.ones(n, bool))):
        a = np.where(mask & np.isfinite(arr), arr, -np.inf)
        if n and np.isfinite(a).any():
            k = int(np.argmax(a))
            out[f"{key}_max"], out[f"{key}_x_m"] = float(a[k]), float(ex.x[k])
        else:
            out[f"{key}_max"], out[f"{key}_x_m"] = None, None
    stretches = failing_stretches(ex)
    out["fails_within_m_of_toe"] = max(b for a, b in stretches) if stretches else None
    out["failing_length_m"] = float(sum(b - a for a, b in stretches)) if stretches else None
    out["failing_stretches_m"] = [[a, b] for a, b in stretches]
    req = f"required {cr['fs_heave']:g} (heave), {cr['fs_uplift']:g} (uplift)"
    if fail.any():
        what = []
        if (ex.fs_heave[fail] < cr["fs_heave"]).any():
            what.append("heave")
        if (ex.fs_uplift[fail] < cr["fs_uplift"]).any():
            what.append("uplift")
        if (ig[fail] > cr["allowable_gradient"]).any():
            what.append(f"exit gradient above the allowable {cr['allowable_gradient']:g}")
        k = int(np.flatnonzero(fail)[np.argmax(ex.distance_from_toe[fail])])
        least = (f"least FS {out['fs']:.3g} ({out['mode']}) at {_where(ex, int(np.flatnonzero(fin)[np.argmin(fs[fin])]))}"
                 if fin.any() else "")
        out["verdict"] = "fail"
        out["why"] = (f"'{ex.boundary}' fails ({', '.join(what)}) at {out['failing_points']} of {n} check points, "
                      f"failing to {out['fails_within_m_of_toe']:+.1f} m from the toe (the farthest failing point "
                      f"x = {ex.x[k]:.2f} m); {least}; {req}").replace("; ;", ";")
        if unknown.any():
            zones = ", ".join(f"'{z}' ({w})" for z, w in ex.missing.items()) or "a zone"
            out["why"] += (f"; {int(unknown.sum())} more point(s) could not be checked: {zones}, so the least FS may "
                           "be lower still")
    elif unknown.any():
        zones = ", ".join(f"'{z}' ({w})" for z, w in ex.missing.items()) or "a zone"
        known = (f"; where it could be computed the least FS is {out['fs']:.3g} ({out['mode']}) at "
                 f"x = {out['x_m']:.2f} m" if out["fs"] is not None else "")
        out["verdict"] = "not checked"
        out["why"] = (f"{int(unknown.sum())} of {n} check points along '{ex.boundary}' need a factor of safety "
                      f"that cannot be computed: {zones}{known}")
    elif out["fs"] is None:
        out["verdict"] = "pass"
        out["why"] = (f"no water leaves upward through '{ex.boundary}' and no excess head lies under a top "
                      "stratum there: nothing to heave or lift")
    else:
        out["verdict"] = "pass"
        out["why"] = (f"least FS {out['fs']:.3g} ({out['mode']}) at x = {out['x_m']:.2f} m meets the {req}; "
                      f"largest exit gradient {out['exit_gradient_max']:.3g} within the allowable "
                      f"{cr['allowable_gradient']:g}" if out["exit_gradient_max"] is not None else
                      f"least FS {out['fs']:.3g} ({out['mode']}) at x = {out['x_m']:.2f} m meets the {req}")
    return out


def default_boundaries(section) -> list[str]:
    """The exit surfaces checked: the section's ``checks.boundaries`` when given; else every seepage
    face except the outlets that remedies make (relief-well outlets are model devices, not ground), plus
    the head boundaries at the lowest prescribed head when heads differ (a landside ground under
    tailwater). Drains are never exit surfaces: water leaves into filter material there. A boundary a
    remedy split apart (ground on both sides of a well) is checked in all its pieces."""
    if section.spec.checks.boundaries is not None:
        out = []
        for n in section.spec.checks.boundaries:
            out += [p for p in section.boundary_parts.get(n, [n]) if p not in out]
        return out
    made = {n for d in section.remedies for n in d.get("boundaries", ())}
    bs = section.spec.boundaries
    names = [b.name for b in bs if b.kind == "seepage_face" and b.name not in made]
    heads = [b.head for b in bs if b.kind == "head"]
    if len(set(heads)) > 1:
        lo = min(heads)
        names += [b.name for b in bs if b.kind == "head" and b.head == lo]
    return names


def infer_toe(section, line: np.ndarray) -> tuple[float, str]:
    """x of the landside (downstream) toe: ``checks.toe_x``; else, walking the boundary from its end
    nearer the crest, the foot of the slope it starts on (its first stretch steeper than 1V:10H: an
    embankment's landside slope, a dam's downstream face, however far the slope runs); else, where the
    boundary starts on level ground, that end."""
    c = section.spec.checks
    if c.toe_x is not None:
        return float(c.toe_x), "checks.toe_x"
    ring = np.asarray(section.outline.exterior.coords)
    top = ring[ring[:, 1] >= ring[:, 1].max() - section.length_tol]
    xc = float(top[:, 0].mean())
    ends = line[[0, -1], 0]
    i = int(np.argmin(np.abs(ends - xc)))
    pts = line if i == 0 else line[::-1]
    d = np.diff(pts, axis=0)
    steep = np.abs(d[:, 1]) > 0.1 * np.abs(d[:, 0])
    if steep[0]:
        k = int(np.argmin(steep)) if not steep.all() else len(steep)
        return float(pts[k, 0]), "inferred: foot of the slope the boundary starts on"
    return float(ends[i]), "inferred: the end of the boundary nearer the crest"


def _edge_elements(mesh, edges):
    """Element owning each outline edge, and the local index of its vertex opposite the edge."""
    tri = mesh.triangles
    n = mesh.n_vertices
    loc = np.stack([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]], axis=1).reshape(-1, 2)
    k = np.sort(loc, 1)
    key = k[:, 0].astype(np.int64) * n + k[:, 1]
    o = np.argsort(key)
    be = np.sort(edges[:, :2], 1)
    bk = be[:, 0].astype(np.int64) * n + be[:, 1]
    pos = np.searchsorted(key[o], bk)
    pos = np.clip(pos, 0, len(o) - 1)
    if not np.all(key[o][pos] == bk):
        raise ValueError("an outline edge has no element")
    j = o[pos]
    return j // 3, (j % 3 + 2) % 3


def exit_gradients(result, name: str, spacing: float | None = None, depth: float | None = None) -> ExitChecks:
    """Underseepage checks along the named boundary (see the module docstring for what is reported).

    Parameters
    ----------
    result : Result
    name : boundary name (any boundary on the outline: seepage face, ground surface, berm toe).
    spacing : extra check points every this many m (default: section ``checks.spacing``; nodes only).
    depth : depth of the top stratum base below the surface, m (default ``checks.top_stratum_depth``;
        otherwise found from the zones).
    """
    sec, mesh = result.section, result.mesh
    names = sec.boundary_names
    if name not in names:
        raise SectionError(f"{sec.source}: checks: {_unknown(name, names)}")
    c = sec.spec.checks
    spacing = spacing if spacing is not None else c.spacing
    depth = depth if depth is not None else c.top_stratum_depth
    bi = names.index(name)
    on = mesh.edge_boundary == bi
    edges = mesh.edges[on]
    if not len(edges):
        raise SectionError(f"{sec.source}: checks: boundary '{name}' claims no edge of the outline")
    P = mesh.points
    elem, opp = _edge_elements(mesh, edges)
    ezone = mesh.zone[elem]
    line = np.asarray(sec.boundary(name).polyline, float)
    ls = LineString(line)
    a, b = P[edges[:, 0]], P[edges[:, 1]]
    sa = shapely.line_locate_point(ls, shapely.points(a))
    sb = shapely.line_locate_point(ls, shapely.points(b))
    flip = sb < sa
    edges = edges.copy()
    edges[flip, 0], edges[flip, 1] = edges[flip, 1], edges[flip, 0].copy()
    sa, sb = np.minimum(sa, sb), np.maximum(sa, sb)
    o = np.argsort(sa)
    edges, elem, opp, ezone, sa, sb = edges[o], elem[o], opp[o], ezone[o], sa[o], sb[o]
    a, b = P[edges[:, 0]], P[edges[:, 1]]
    # outward normal: away from the vertex opposite the edge
    t = b - a
    L = np.linalg.norm(t, axis=1)
    nrm = np.stack([t[:, 1], -t[:, 0]], 1) / L[:, None]
    third = P[mesh.triangles[elem, opp]]
    nrm[np.einsum("ij,ij->i", nrm, third - a) > 0] *= -1

    # check points: each edge's start (and midpoint for P2), the last end, and spacing points
    order = mesh.order
    tpar = [np.zeros(len(edges))] + ([np.full(len(edges), 0.5)] if order == 2 else [])
    eidx = [np.arange(len(edges))] * len(tpar)
    tt = np.concatenate(tpar)
    ee = np.concatenate(eidx)
    node = np.ones(len(tt), bool)
    tt = np.append(tt, 1.0)
    ee = np.append(ee, len(edges) - 1)
    node = np.append(node, True)
    if spacing:
        if not (sb[-1] - sa[0]) / spacing <= 1_000_000:
            raise SectionError(f"{sec.source}: checks.spacing: {spacing:g} m would place more than a million check "
                               f"points along '{name}'; use a larger spacing")
        s_all = np.arange(sa[0], sb[-1] + 1e-12, spacing)
        ke = np.clip(np.searchsorted(sb, s_all), 0, len(edges) - 1)
        ts = np.clip((s_all - sa[ke]) / np.maximum(sb[ke] - sa[ke], 1e-300), 0, 1)
        tt = np.concatenate([tt, ts])
        ee = np.concatenate([ee, ke])
        node = np.concatenate([node, np.zeros(len(ts), bool)])
    s = sa[ee] + tt * (sb[ee] - sa[ee])
    o = np.lexsort((~node, s))
    tt, ee, node, s = tt[o], ee[o], node[o], s[o]
    keep = np.ones(len(s), bool)
    keep[1:] = np.abs(np.diff(s)) > 1e-9 * max(sec.extent, 1.0)
    tt, ee, node, s = tt[keep], ee[keep], node[keep], s[keep]
    xy = a[ee] + tt[:, None] * (b[ee] - a[ee])

    # recovered gradients at the edge ends (per edge: zone of the edge's element)
    qv = np.concatenate([edges[:, 0], edges[:, 1]])
    qz = np.concatenate([ezone, ezone])
    key = qv * (len(sec.polygons) + 1) + qz
    ukey, inv = np.unique(key, return_inverse=True)
    first = np.unique(inv, return_index=True)[1]
    patches = recovery.recover(mesh, result.h, qv[first], qz[first])
    gv = patches.at_vertex()
    ga, gb = gv[inv[: len(edges)]], gv[inv[len(edges):]]
    if order == 2:
        mid = P[edges[:, 2]]
        gm = 0.5 * (patches.evaluate(inv[: len(edges)], mid) + patches.evaluate(inv[len(edges):], mid))
        w0 = 2 * (tt - 0.5) * (tt - 1)
        w1 = 2 * tt * (tt - 0.5)
        wm = 4 * tt * (1 - tt)
        g = w0[:, None] * ga[ee] + w1[:, None] * gb[ee] + wm[:, None] * gm[ee]
        hs = w0 * result.h[edges[ee, 0]] + w1 * result.h[edges[ee, 1]] + wm * result.h[edges[ee, 2]]
    else:
        g = (1 - tt)[:, None] * ga[ee] + tt[:, None] * gb[ee]
        hs = (1 - tt) * result.h[edges[ee, 0]] + tt * result.h[edges[ee, 1]]
    gradient = -g[:, 1]
    normal_gradient = -np.einsum("ij,ij->i", g, nrm[ee])
    zone = ezone[ee]

    # top stratum
    x, y = xy[:, 0], xy[:, 1]
    cols = strata.columns(sec, x, y, depth=depth)
    z = cols.thickness
    has = np.isfinite(z) & (z > 0)
    gw = sec.gamma_w
    hb = np.full(len(x), np.nan)
    if has.any():
        nudge = 1e-6 * sec.extent
        hb[has] = result.head(np.stack([x[has], cols.base[has] + nudge], 1))
    blanket = np.where(has, (hb - hs) / np.where(has, z, 1.0), np.nan)
    lw = c.landside_water_level
    ref = np.maximum(y, lw) if lw is not None else y
    h_excess = hb - ref
    weight = strata.stratum_weight(sec, cols, len(x))
    # a surface point is wet where its pressure head is not below zero (within the head tolerance);
    # water can leave only there: above the exit point of a seepage face the surface is dry
    wet = (hs - y) >= -sec.head_tol
    ic_zone = np.array([strata.critical_gradient(sec.zone_material(k), gw) for k in range(len(sec.polygons))])
    ic = ic_zone[zone]
    # the gradient the criteria apply to: across the top stratum where there is one (USACE practice,
    # i = h0 / z), else the recovered gradient at the surface
    igov = np.where(np.isfinite(blanket), blanket, gradient)
    # water leaves upward where the gradient is above the round-off floor of the field (1e-6 of the mean
    # gradient across the section): a toe node shared with a drain reads 1e-12 of noise, not an exit
    floor = 1e-6 * float(np.ptp(result.h)) / max(sec.extent, 1e-300)
    up = wet & (igov > floor)
    with np.errstate(divide="ignore", invalid="ignore"):
        # inf: the check does not arise here; nan: it arises and cannot be computed (no unit weight)
        fs_heave = np.where(up, ic / np.where(up, igov, 1.0), np.inf)
        lifts = has & (h_excess > 0)
        fs_uplift = np.where(lifts, weight / (gw * np.where(lifts, h_excess, 1.0)), np.inf)
    fs = np.fmin(fs_heave, fs_uplift)
    cr = c.criteria
    ok_h = ~(fs_heave < cr.fs_heave)
    ok_u = ~(fs_uplift < cr.fs_uplift)
    ok_i = ~(up & (igov > cr.allowable_gradient))
    passes = ok_h & ok_u & ok_i
    missing = {}
    for k in np.unique(zone[up & np.isnan(ic)]):
        missing[sec.zone_names[k]] = "no unit_weight (or specific_gravity and void_ratio): no critical gradient"
    for k in np.unique(cols.zone[np.isin(cols.point, np.flatnonzero(lifts & np.isnan(weight)))]):
        if not np.isfinite(strata.saturated_unit_weight(sec.zone_material(k), gw)):
            missing.setdefault(sec.zone_names[k], "no unit_weight in the top stratum: no uplift weight")

    toe_x, toe_src = infer_toe(sec, line)
    direction = 1.0 if (line[:, 0].mean() - toe_x) >= 0 else -1.0
    notes = []
    for zname, what in missing.items():
        notes.append(f"zone '{zname}': {what}, where a check needs it; the verdict along '{name}' is "
                     "'not checked' unless a computed value fails")
    dist = direction * (x - toe_x)
    sideways = wet & (normal_gradient > floor) & ~(igov > floor)
    if sideways.any():
        k = np.flatnonzero(sideways)
        notes.append(f"water leaves '{name}' through a slope at x = {x[k].min():.2f} to {x[k].max():.2f} m (outward "
                     f"gradient up to {normal_gradient[k].max():.3g}) without rising through it: the heave and uplift "
                     "checks (vertical) do not cover sloughing of a slope face; check its stability with these pore "
                     "pressures")
    if not has.any():
        notes.append("no top stratum found under this boundary (the soil never turns markedly more pervious "
                     f"below the surface, contrast {c.contrast:g}): no uplift check")
    else:
        notes += _stratum_notes(sec, cols, has, z, x, dist, name)
    if len(gradient) and np.isfinite(gradient).any():
        k = int(np.nanargmax(gradient))
        local = 3.0 * float(L[ee[k]])
        end = 0 if (s[k] - s[0]) <= (s[-1] - s[k]) else -1
        if abs(s[k] - s[end]) <= local and _interior_angle(sec, xy[end], line) > 0.55 * math.pi:
            notes.append(f"the largest surface gradient ({gradient[k]:.3g} at x {x[k]:.4g} m) lies at an end of "
                         f"'{name}', where the boundary condition changes; the exact gradient there is singular "
                         "and this value grows as the mesh is refined: judge by the gradient across the top "
                         "stratum or by the values a little away from the end")
    tsm = (f"to the depth given ({depth:g} m)" if depth is not None else
           f"the zones named in checks.top_stratum ({', '.join(c.top_stratum)})" if c.top_stratum is not None else
           f"down to the first interface where the vertical k below is at least {c.contrast:g} times the series k "
           "of the layers above (interfaces under embankment or berm zones do not count)")
    crit = {"fs_heave": cr.fs_heave, "fs_uplift": cr.fs_uplift, "allowable_gradient": cr.allowable_gradient,
            "source": "USACE ETL 1110-2-569 (2005) / EM 1110-2-1913 (2000), values from memory, unless set in "
                      "the section file"}
    return ExitChecks(boundary=name, x=x, y=y, s=s - s[0], distance_from_toe=dist,
                      is_node=node.astype(np.int64), zone=zone, head=hs, gradient=gradient,
                      normal_gradient=normal_gradient, blanket_gradient=blanket, thickness=np.where(has, z, np.nan),
                      head_base=hb, h_excess=np.where(has, h_excess, np.nan), i_critical=ic, fs_heave=fs_heave,
                      fs_uplift=fs_uplift, fs=fs, passes=passes, wet=wet, criteria=crit, toe_x=toe_x,
                      toe_source=toe_src, top_stratum_method=tsm, notes=notes, missing=missing)


def _stratum_notes(sec, cols, has, z, x, dist, name) -> list[str]:
    """Warnings about the top stratum along a boundary: thin or wedge-shaped parts, layered columns."""
    out = []
    beyond = has & (dist >= 0)
    med = float(np.median(z[beyond] if beyond.any() else z[has]))
    thin = has & ((z < 0.5 * med) | (z < 0.3))
    if thin.any():
        k = np.flatnonzero(thin)
        zones = sorted({sec.zone_names[zz] for p in k for zz, tt, bb in zip(*cols.layers_of(int(p)))
                        if tt > cols.base[p] + 1e-9})
        out.append(f"the top stratum under '{name}' is thin or wedge-shaped at x = {x[k].min():.2f} to "
                   f"{x[k].max():.2f} m (down to {z[k].min():.3g} m, against {med:.3g} m beyond the toe; zone(s) "
                   f"{', '.join(repr(v) for v in zones)}): checks over it govern only if that is the ground; if it "
                   "is a modelling sliver, name the top stratum in checks.top_stratum")
    if cols.rivals is not None and (cols.rivals[has] > 0).any():
        k = np.flatnonzero(has & (cols.rivals > 0))
        out.append(f"under x = {x[k].min():.2f} to {x[k].max():.2f} m the soil turns more pervious more than once: "
                   "the shallowest interface passing the contrast was taken as the base of the top stratum, and a "
                   "deeper one is sharper still; name the zones in checks.top_stratum if that one is meant")
    return out


def _interior_angle(sec, p, line=None) -> float:
    """Interior angle of the outline at point p (radians); pi where p is not a vertex of the outline.

    Where a seepage face meets a no-flow boundary at an interior angle theta, the gradient behaves
    like r^(pi / (2 theta) - 1): singular for theta > pi / 2 (e.g. a levee toe on level ground),
    finite at a right-angled corner (the face of a cutoff).
    """
    if line is not None:
        # a barrier ending on the exit surface here: the angle between the surface and the barrier
        near_end = line[1] if np.linalg.norm(line[0] - p) <= np.linalg.norm(line[-1] - p) else line[-2]
        for b in getattr(sec.spec, "barriers", None) or []:
            bl = np.asarray(b.polyline, float)
            for tip, nxt in ((bl[0], bl[1]), (bl[-1], bl[-2])):
                if np.linalg.norm(tip - p) <= sec.length_tol:
                    u, w = near_end - p, nxt - p
                    return math.acos(np.clip(u @ w / (np.linalg.norm(u) * np.linalg.norm(w)), -1, 1))
    ring = np.asarray(sec.outline.exterior.coords)[:-1]
    if np.sum(ring[:, 0] * np.roll(ring[:, 1], -1) - np.roll(ring[:, 0], -1) * ring[:, 1]) < 0:
        ring = ring[::-1]                  # counter-clockwise: the section lies left of each edge
    d = np.linalg.norm(ring - p, axis=1)
    i = int(np.argmin(d))
    if d[i] > sec.length_tol:
        return math.pi
    a, v, b = ring[i - 1], ring[i], ring[(i + 1) % len(ring)]
    u, w = b - v, a - v
    ang = math.atan2(u[0] * w[1] - u[1] * w[0], u @ w)
    return ang % (2 * math.pi)


def _unknown(name, names):
    import difflib
    near = difflib.get_close_matches(name, names, n=1)
    return f"no boundary named '{name}'" + (f" (did you mean '{near[0]}'?)" if near else
                                            f" (known: {', '.join(names) or 'none'})")
