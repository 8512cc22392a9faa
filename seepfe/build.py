"""Write a section file from the engineer's own tables: a ground line, boring logs and water levels.

A *build file* (JSON, ``docs/build.md``) names the pieces::

    {"title": "...", "units": "US",
     "ground": "ground.csv",                  station, elevation (or [[station, elevation], ...])
     "borings": "borings.csv",                boring, station, stratum, bottom | depth
     "strata": [{"name": "blanket", "material": "clay"}, {"name": "sand", "material": "sand"}],
     "materials": {...},                      as in a section file
     "embankment": {"material": "fill", "crest_elevation": 420, "crest_width": 12, "crest_station": 0,
                    "riverside_slope": 3, "landside_slope": 3}     (or "polyline": [[x, y], ...])
     "extent": [-800, 900], "bottom": 300,   model from station to station, down to this elevation
     "water": {"river": 415.0, "landside": null},
     "riverside": "left"}

What it does: strata bottoms are taken at each boring (an elevation, or a depth below the ground at
the boring), interpolated linearly in station between borings and held flat beyond the outermost
ones, clipped so that no layer rises above the ground or above the layer over it (a stratum a boring
does not list has no thickness there: it pinches out). The last stratum reaches down to the model's
bottom. Each stratum becomes one zone per stretch where it has thickness; the embankment sits on the
ground between its toes. The river boundary covers the riverside ground and slope (dry above the
river level), the landside one the landside slope and ground (a seepage face, or a head where a
landside water level is given), and a mesh refinement follows the ground from the landside toe. The
result is an ordinary section file, which the engineer can read, edit and check.

All numbers are in the build file's units and are written in them; the section gets the same ``units``.
"""

from __future__ import annotations

import csv
import difflib
import json
import math
import os
from pathlib import Path
from typing import Any, Optional

import numpy as np

from .errors import SectionError
from .units import parse_units

__all__ = ["build_section", "read_build", "format_section", "read_ground", "read_borings"]

ROUND = 6          # decimals written (the file's length unit); far finer than any survey


# --------------------------------------------------------------------------- reading
def read_build(path) -> tuple[dict, Path, str]:
    """(build dict, folder that relative paths start from, label) of a build file."""
    from .jsonin import read_json
    p = Path(path)
    data = read_json(p, "build file")          # size cap, UTF-8, duplicate keys and nesting checked
    if not isinstance(data, dict):
        raise SectionError(f"{p}: the top level must be a JSON object {{...}}")
    return data, p.parent, str(p)


def _rows(path: Path, label: str) -> tuple[list[str] | None, list[tuple[int, list[str]]]]:
    """(header or None, [(line number, cells)]) of a CSV file; '#' starts a comment line."""
    from .jsonin import read_text
    text = read_text(path, "CSV file", label=label)        # size cap, UTF-8 (with a UTF-16 hint)
    lines = [(i + 1, ln) for i, ln in enumerate(text.splitlines()) if ln.strip() and not ln.lstrip().startswith("#")]
    rows = [(n, [c.strip() for c in cells]) for (n, _), cells in zip(lines, csv.reader(ln for _, ln in lines))]
    if not rows:
        raise SectionError(f"{label}: {path}: no rows")
    head = rows[0][1]
    if any(_num(c) is None for c in head if c):
        return [h.lower() for h in head], rows[1:]
    return None, rows


def _num(s: str) -> Optional[float]:
    try:
        v = float(s)
    except ValueError:
        return None
    return v if math.isfinite(v) else None


def read_ground(src, base: Path, label: str) -> np.ndarray:
    """(n, 2) station, elevation of the ground line, stations increasing."""
    if isinstance(src, list):
        where = "ground"
        try:
            pts = np.array([[float(a), float(b)] for a, b in src])
        except (TypeError, ValueError):
            raise SectionError(f"{label}: ground: expected [[station, elevation], ...] or a CSV file name") from None
    elif isinstance(src, str):
        path = base / src
        where = str(src)
        head, rows = _rows(path, label)
        ix, iy = 0, 1
        if head is not None:
            ix = _column(head, ("station", "x", "chainage", "offset"), label, where)
            iy = _column(head, ("elevation", "y", "z", "ground"), label, where)
        pts = []
        for n, cells in rows:
            if len(cells) <= max(ix, iy):
                raise SectionError(f"{label}: {where} line {n}: expected station and elevation, got {','.join(cells)}")
            x, y = _num(cells[ix]), _num(cells[iy])
            if x is None or y is None:
                raise SectionError(f"{label}: {where} line {n}: not a number: {','.join(cells)}")
            pts.append([x, y])
        pts = np.array(pts)
    else:
        raise SectionError(f"{label}: ground: expected a CSV file name or [[station, elevation], ...]")
    if len(pts) < 2:
        raise SectionError(f"{label}: {where}: the ground line needs at least 2 points")
    if not np.all(np.isfinite(pts)):
        raise SectionError(f"{label}: {where}: every number must be finite")
    d = np.diff(pts[:, 0])
    if np.any(d <= 0):
        i = int(np.argmax(d <= 0))
        raise SectionError(f"{label}: {where}: stations must increase; {pts[i + 1, 0]:g} follows {pts[i, 0]:g}")
    return pts


def _column(head: list[str], names: tuple, label: str, where: str) -> int:
    for n in names:
        for i, h in enumerate(head):
            if h == n or h.split("_")[0] == n or h.split(" ")[0] == n:
                return i
    raise SectionError(f"{label}: {where}: no column named {' or '.join(repr(n) for n in names[:2])} "
                       f"(header: {', '.join(head)})")


def read_borings(src, base: Path, label: str) -> list[dict]:
    """Borings as [{"name", "station", "bottoms": {stratum: (value, "elevation" | "depth")}}]."""
    out: dict[str, dict] = {}
    if isinstance(src, list):
        for i, b in enumerate(src):
            if not isinstance(b, dict) or not isinstance(b.get("station"), (int, float)) \
                    or not isinstance(b.get("bottoms", b.get("depths")), dict):
                raise SectionError(f"{label}: borings[{i}]: expected {{\"name\": ..., \"station\": ..., "
                                   "\"bottoms\": {stratum: elevation}}} (or \"depths\")")
            kind = "elevation" if "bottoms" in b else "depth"
            vals = b.get("bottoms", b.get("depths"))
            name = str(b.get("name", f"boring {i + 1}"))
            out[name] = {"name": name, "station": float(b["station"]),
                         "bottoms": {str(k): (float(v), kind) for k, v in vals.items()}}
        return list(out.values())
    if not isinstance(src, str):
        raise SectionError(f"{label}: borings: expected a CSV file name or a list of borings")
    where = str(src)
    head, rows = _rows(base / src, label)
    if head is None:
        raise SectionError(f"{label}: {where}: needs a header: boring, station, stratum, bottom (or depth)")
    ib = _column(head, ("boring", "name", "id"), label, where)
    ix = _column(head, ("station", "x"), label, where)
    isx = _column(head, ("stratum", "layer"), label, where)
    kinds = [(i, "depth") for i, h in enumerate(head) if h.startswith("depth") or h == "bottom_depth"]
    kinds += [(i, "elevation") for i, h in enumerate(head)
              if h in ("bottom", "bottom_elevation", "elevation") or h.startswith("bottom_elev")]
    if len(kinds) != 1:
        raise SectionError(f"{label}: {where}: give one column 'bottom' (elevation of the layer's bottom) or "
                           f"'depth' (of the layer's bottom below the ground at the boring); header: {', '.join(head)}")
    iv, kind = kinds[0]
    for n, cells in rows:
        if len(cells) <= max(ib, ix, isx, iv):
            raise SectionError(f"{label}: {where} line {n}: expected {len(head)} columns, got {len(cells)}")
        x, v = _num(cells[ix]), _num(cells[iv])
        if x is None or v is None:
            raise SectionError(f"{label}: {where} line {n}: station and {kind} must be numbers: {','.join(cells)}")
        b = out.setdefault(cells[ib], {"name": cells[ib], "station": x, "bottoms": {}})
        if b["station"] != x:
            raise SectionError(f"{label}: {where} line {n}: boring '{cells[ib]}' is at station {b['station']:g}, "
                               f"not {x:g}")
        if cells[isx] in b["bottoms"]:
            raise SectionError(f"{label}: {where} line {n}: boring '{cells[ib]}' lists '{cells[isx]}' twice")
        b["bottoms"][cells[isx]] = (v, kind)
    return list(out.values())


# --------------------------------------------------------------------------- geometry
def _interp(line: np.ndarray, x: np.ndarray) -> np.ndarray:
    return np.interp(x, line[:, 0], line[:, 1])


def _strata_lines(ground: np.ndarray, borings: list[dict], strata: list[str], label: str) -> np.ndarray:
    """(len(strata) - 1, B) elevation of each stratum's bottom at each boring (clipped: never above the
    ground or the layer above); the last stratum has no bottom line (it reaches the model's bottom)."""
    known = set(strata)
    for b in borings:
        for s in b["bottoms"]:
            if s not in known:
                near = difflib.get_close_matches(s, strata, n=1)
                hint = f" (did you mean '{near[0]}'?)" if near else f" (strata: {', '.join(strata)})"
                raise SectionError(f"{label}: boring '{b['name']}': no stratum named '{s}'{hint}")
    Z = np.empty((max(len(strata) - 1, 0), len(borings)))
    for j, b in enumerate(borings):
        top = float(_interp(ground, np.array([b["station"]]))[0])
        prev = top
        for i, s in enumerate(strata[:-1]):
            if s in b["bottoms"]:
                v, kind = b["bottoms"][s]
                z = top - v if kind == "depth" else v
                if kind == "depth" and v < 0:
                    raise SectionError(f"{label}: boring '{b['name']}': depth of '{s}' is negative ({v:g})")
                if z > prev + 1e-9 * max(1.0, abs(prev)):
                    above = "the ground" if i == 0 or prev == top else "the bottom of the layer above"
                    raise SectionError(f"{label}: boring '{b['name']}': the bottom of '{s}' ({z:g}) is above "
                                       f"{above} ({prev:g})")
                prev = min(z, prev)
            Z[i, j] = prev          # a stratum the boring does not list has no thickness there
    return Z


def _crossings(x: np.ndarray, a: np.ndarray, b: np.ndarray) -> list[float]:
    """Stations strictly inside segments where the piecewise-linear a - b changes sign."""
    d = a - b
    out = []
    for k in np.nonzero(d[:-1] * d[1:] < 0)[0]:
        t = d[k] / (d[k] - d[k + 1])
        out.append(float(x[k] + t * (x[k + 1] - x[k])))
    return out


def _runs(thick: np.ndarray, eps: float) -> list[tuple[int, int]]:
    """Index ranges [i0, i1] of maximal stretches with thickness > eps between grid points."""
    seg = (thick[:-1] > eps) | (thick[1:] > eps)
    runs, i = [], 0
    n = len(seg)
    while i < n:
        if seg[i]:
            j = i
            while j + 1 < n and seg[j + 1]:
                j += 1
            runs.append((i, j + 1))
            i = j + 1
        else:
            i += 1
    return runs


def _r(v: float) -> float:
    r = round(float(v), ROUND)
    return 0.0 if r == 0 else r


def _ring(top: list, bottom: list) -> list:
    """Polygon vertices: along the top left to right, back along the bottom; repeated points dropped."""
    pts = [[_r(x), _r(y)] for x, y in top] + [[_r(x), _r(y)] for x, y in reversed(bottom)]
    out = []
    for p in pts:
        if not out or p != out[-1]:
            out.append(p)
    if len(out) > 1 and out[0] == out[-1]:
        out.pop()
    return out


def _collinear_free(pts: list) -> list:
    """Drop vertices that lie on the straight line between their neighbours (keeps the file short)."""
    if len(pts) < 4:
        return pts
    keep = []
    n = len(pts)
    for i in range(n):
        a, b, c = np.array(pts[i - 1]), np.array(pts[i]), np.array(pts[(i + 1) % n])
        cross = (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])
        if abs(cross) > 1e-12 * max(1.0, np.abs(np.r_[a, b, c]).max()) ** 2:
            keep.append(pts[i])
    return keep if len(keep) >= 3 else pts


def _embankment(spec: dict, ground: np.ndarray, riverside: str, label: str):
    """(polygon [[x, y], ...] above the ground, riverside toe x, landside toe x, crest riverside corner,
    crest landside corner); toes on the ground."""
    from shapely.geometry import LineString, Polygon
    if "polyline" in spec:
        line = np.asarray(spec["polyline"], float)
        if line.ndim != 2 or line.shape[1] != 2 or len(line) < 3:
            raise SectionError(f"{label}: embankment.polyline: expected at least 3 points [[x, y], ...]")
        if line[0, 0] > line[-1, 0]:
            line = line[::-1]
    else:
        need = ("crest_elevation", "crest_width", "riverside_slope", "landside_slope")
        for k in need:
            v = spec.get(k)
            if not isinstance(v, (int, float)) or isinstance(v, bool) or not math.isfinite(v):
                raise SectionError(f"{label}: embankment.{k}: expected a number")
        zc, w = float(spec["crest_elevation"]), float(spec["crest_width"])
        xc = float(spec.get("crest_station", 0.0))
        sr, sl = float(spec["riverside_slope"]), float(spec["landside_slope"])
        if w < 0 or sr <= 0 or sl <= 0:
            raise SectionError(f"{label}: embankment: crest_width >= 0 and slopes (horizontal per 1 vertical) > 0")
        s_left, s_right = (sr, sl) if riverside == "left" else (sl, sr)
        depth = zc - float(ground[:, 1].min()) + 1.0
        line = np.array([[xc - w / 2 - s_left * depth, zc - depth], [xc - w / 2, zc], [xc + w / 2, zc],
                         [xc + w / 2 + s_right * depth, zc - depth]])
    g = LineString(ground)
    crest = line[1:-1] if "polyline" not in spec else line
    if np.any(_interp(ground, crest[:, 0]) >= crest[:, 1]):
        raise SectionError(f"{label}: embankment: its crest is not above the ground")
    # the part of the embankment outline above the ground: cut where it meets the ground line
    lo = float(min(ground[:, 1].min(), line[:, 1].min())) - 1.0
    below = Polygon(np.vstack([ground, [[ground[-1, 0], lo - 1e6], [ground[0, 0], lo - 1e6]]])[::-1])
    body = Polygon(np.vstack([line, [[line[-1, 0], lo - 1e6], [line[0, 0], lo - 1e6]]]))
    if not body.is_valid:
        raise SectionError(f"{label}: embankment: its outline crosses itself")
    piece = body.difference(below)
    if piece.is_empty:
        raise SectionError(f"{label}: embankment: it does not rise above the ground")
    if piece.geom_type != "Polygon":
        piece = max(piece.geoms, key=lambda p: p.area)
    # toes: where the embankment outline meets the ground
    hits = LineString(line).intersection(g)
    xs = sorted({round(p.x, 12) for p in getattr(hits, "geoms", [hits]) if p.geom_type == "Point"})
    if len(xs) < 2:
        raise SectionError(f"{label}: embankment: its slopes do not reach the ground within the ground line")
    x_left, x_right = xs[0], xs[-1]
    # the embankment outline between the toes (on the slopes), then the ground back
    top = [[x_left, float(_interp(ground, np.array([x_left]))[0])]]
    top += [list(p) for p in line if x_left < p[0] < x_right]
    top += [[x_right, float(_interp(ground, np.array([x_right]))[0])]]
    inner = ground[(ground[:, 0] > x_left) & (ground[:, 0] < x_right)]
    bottom = [top[0]] + [list(p) for p in inner] + [top[-1]]
    if riverside == "left":
        return top, bottom, x_left, x_right
    return top, bottom, x_right, x_left


def build_section(build: dict, base: Path | str = ".", label: str = "<build>") -> dict:
    """The section dict (file units) described by a build dict. One-line SectionError on any fault."""
    base = Path(base)
    known = {"title", "units", "ground", "borings", "strata", "materials", "embankment", "extent", "bottom",
             "water", "riverside", "mesh", "checks", "$schema", "description"}
    for k in build:
        if k not in known:
            near = difflib.get_close_matches(k, sorted(known), n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else ""
            raise SectionError(f"{label}: unknown key '{k}'{hint}")
    for k in ("ground", "borings", "strata", "materials", "water"):
        if k not in build:
            raise SectionError(f"{label}: missing key '{k}'")
    units = parse_units(build.get("units"), label)
    riverside = build.get("riverside", "left")
    if riverside not in ("left", "right"):
        raise SectionError(f"{label}: riverside: \"left\" or \"right\" (the side of lower or higher stations), "
                           f"got {json.dumps(riverside)}")
    ground = read_ground(build["ground"], base, label)
    borings = read_borings(build["borings"], base, label)
    if not borings:
        raise SectionError(f"{label}: borings: none given")
    strata_raw = build["strata"]
    if not isinstance(strata_raw, list) or not strata_raw:
        raise SectionError(f"{label}: strata: expected a list, top to bottom, of {{\"name\": ..., \"material\": ...}}")
    materials = build["materials"]
    if not isinstance(materials, dict) or not materials:
        raise SectionError(f"{label}: materials: expected an object of materials, as in a section file")
    strata, smat = [], {}
    for i, s in enumerate(strata_raw):
        if not isinstance(s, dict) or not isinstance(s.get("name"), str) or not isinstance(s.get("material"), str):
            raise SectionError(f"{label}: strata[{i}]: expected {{\"name\": ..., \"material\": ...}}")
        if s["name"] in smat:
            raise SectionError(f"{label}: strata: '{s['name']}' is listed twice")
        _material(s["material"], materials, f"{label}: stratum '{s['name']}'")
        strata.append(s["name"])
        smat[s["name"]] = s["material"]

    # extent and bottom
    ext = build.get("extent", [float(ground[0, 0]), float(ground[-1, 0])])
    if not (isinstance(ext, list) and len(ext) == 2 and all(isinstance(v, (int, float)) for v in ext)
            and ext[0] < ext[1]):
        raise SectionError(f"{label}: extent: expected [first station, last station] with first < last")
    x0, x1 = float(ext[0]), float(ext[1])
    if x0 < ground[0, 0] - 1e-9 or x1 > ground[-1, 0] + 1e-9:
        raise SectionError(f"{label}: extent {x0:g} to {x1:g} goes beyond the ground line "
                           f"({ground[0, 0]:g} to {ground[-1, 0]:g}); extend the ground survey or narrow the extent")
    Zb = _strata_lines(ground, borings, strata, label)
    bstations = np.array([b["station"] for b in borings])
    order = np.argsort(bstations)
    bstations, Zb = bstations[order], Zb[:, order]
    if len(np.unique(bstations)) != len(bstations):
        raise SectionError(f"{label}: borings: two borings at the same station")
    default_bottom = float(Zb.min()) if Zb.size else float(ground[:, 1].min())
    zbase = build.get("bottom")
    if zbase is None:
        raise SectionError(f"{label}: missing key 'bottom': the elevation of the model's base (the last stratum "
                           f"'{strata[-1]}' reaches down to it; the deepest layer bottom logged is {default_bottom:g})")
    if not isinstance(zbase, (int, float)) or isinstance(zbase, bool) or not math.isfinite(zbase):
        raise SectionError(f"{label}: bottom: expected a number (an elevation)")
    zbase = float(zbase)

    # embankment (optional: a section without one is a foundation with water on it)
    emb = build.get("embankment")
    if emb is not None and not isinstance(emb, dict):
        raise SectionError(f"{label}: embankment: expected an object")
    if emb is not None:
        _material(emb.get("material"), materials, f"{label}: embankment")
        etop, ebot, toe_r, toe_l = _embankment(emb, ground, riverside, label)
        if not (x0 < min(toe_r, toe_l) and max(toe_r, toe_l) < x1):
            raise SectionError(f"{label}: extent {x0:g} to {x1:g} must reach beyond both toes "
                               f"({min(toe_r, toe_l):g}, {max(toe_r, toe_l):g})")
    # station grid: ground points, borings, toes, extent, and the crossings of layer lines
    X = np.unique(np.r_[ground[:, 0], bstations, x0, x1, ([toe_r, toe_l] if emb is not None else [])])
    X = X[(X >= x0) & (X <= x1)]

    def lines_on(X):
        G = _interp(ground, X)
        L = [G]
        for i in range(len(strata) - 1):
            raw = np.interp(X, bstations, Zb[i])        # flat beyond the outermost borings
            L.append(np.minimum(raw, L[-1]))
        return L
    for i in range(1, len(strata)):
        L = lines_on(X)
        raw = np.interp(X, bstations, Zb[i - 1])
        extra = _crossings(X, raw, L[i - 1])
        if extra:
            X = np.unique(np.r_[X, extra])
    L = lines_on(X)
    if np.any(L[-1] <= zbase) or (len(L) == 1 and np.any(L[0] <= zbase)):
        k = int(np.argmax(L[-1] <= zbase))
        raise SectionError(f"{label}: bottom {zbase:g} is not below the top of the last stratum '{strata[-1]}' "
                           f"(at station {X[k]:g} it is at {L[-1][k]:g}); give a lower 'bottom'")
    L.append(np.full_like(X, zbase))
    span = max(x1 - x0, float(np.ptp(np.r_[L[0], zbase])))
    eps = 1e-9 * span

    zones = []
    if emb is not None:
        poly = _collinear_free(_ring(etop, ebot))
        zones.append({"name": emb.get("name", "embankment"), "material": emb["material"], "polygon": poly})
    for i, s in enumerate(strata):
        top, bot = L[i], L[i + 1]
        runs = _runs(top - bot, eps)
        for n, (a, b) in enumerate(runs):
            pts_top = list(zip(X[a:b + 1], top[a:b + 1]))
            pts_bot = list(zip(X[a:b + 1], bot[a:b + 1]))
            poly = _collinear_free(_ring(pts_top, pts_bot))
            name = s if len(runs) == 1 else f"{s} {n + 1}"
            zones.append({"name": name, "material": smat[s], "polygon": poly})

    # boundaries on the outline
    water = build["water"]
    if not isinstance(water, dict) or not isinstance(water.get("river"), (int, float)) or isinstance(water.get("river"), bool):
        raise SectionError(f"{label}: water: expected {{\"river\": elevation, \"landside\": elevation or null}}")
    river = float(water["river"])
    land = water.get("landside")
    if land is not None and (not isinstance(land, (int, float)) or isinstance(land, bool)):
        raise SectionError(f"{label}: water.landside: an elevation, or null for a seepage face on the landside")
    for k in water:
        if k not in ("river", "landside"):
            raise SectionError(f"{label}: water: unknown key '{k}' (allowed: river, landside)")
    G = L[0]
    gpts = [[_r(x), _r(y)] for x, y in zip(X, G)]
    if emb is not None:
        toe_lo, toe_hi = min(toe_r, toe_l), max(toe_r, toe_l)
        ys = [y for _, y in etop]
        if max(ys) <= river:
            raise SectionError(f"{label}: water.river {river:g} is at or above the crest ({max(ys):g}): "
                               "the section is overtopped")
        # the slopes run from each toe up to the first (last) highest point; the crest between is no-flow
        top_i = [i for i, y in enumerate(ys) if y >= max(ys) - 1e-9 * max(1.0, abs(max(ys)))]
        slope_l = [[_r(x), _r(y)] for x, y in etop[1:top_i[0] + 1]]
        slope_r = [[_r(x), _r(y)] for x, y in etop[top_i[-1]:-1]]
        left_ground = [p for p in gpts if p[0] <= _r(toe_lo)]
        right_ground = [p for p in gpts if p[0] >= _r(toe_hi)]
        left = left_ground + [p for p in slope_l if p != left_ground[-1]]
        right = [p for p in slope_r if p != right_ground[0]] + right_ground
        riv_line, land_line = (left, right) if riverside == "left" else (right[::-1], left[::-1])
    else:
        riv_line = land_line = None
        raise SectionError(f"{label}: embankment: missing (a levee or dam); for a plain foundation write the "
                           "section file by hand")
    boundaries = [{"name": "river", "polyline": riv_line, "head": river, "dry_above_level": True}]
    if land is None:
        boundaries.append({"name": "landside", "polyline": land_line, "seepage_face": True})
    else:
        boundaries.append({"name": "landside", "polyline": land_line, "head": float(land), "dry_above_level": True})

    # mesh: the file's own, or a size from the extent and a refinement along the ground from the landside toe
    mesh = build.get("mesh")
    if mesh is None:
        size = _nice(span / 120)
        fine = _nice(size / 6)
        reach = min(abs(toe_l - toe_r) * 2.0, abs((x1 if toe_l > toe_r else x0) - toe_l))
        sgn = 1.0 if toe_l > toe_r else -1.0
        along = [p for p in gpts if 0 <= sgn * (p[0] - _r(toe_l)) <= reach]
        end = toe_l + sgn * reach
        along = sorted(along + [[_r(end), _r(float(_interp(ground, np.array([end]))[0]))]], key=lambda p: sgn * p[0])
        dedup = []
        for p in along:
            if not dedup or p != dedup[-1]:
                dedup.append(p)
        mesh = {"size": size, "refine": [{"polyline": dedup, "size": fine, "width": _nice(4 * fine)}]}
    checks = dict(build.get("checks") or {})
    checks.setdefault("toe_x", _r(toe_l))
    checks.setdefault("riverside_toe_x", _r(toe_r))
    if land is not None:
        checks.setdefault("landside_water_level", float(land))

    out: dict[str, Any] = {"title": build.get("title", "")}
    if build.get("units") is not None:
        out["units"] = build["units"]
    used = {z["material"] for z in zones}
    out["materials"] = {k: v for k, v in materials.items() if k in used}
    out["zones"] = zones
    out["boundaries"] = boundaries
    out["mesh"] = mesh
    out["checks"] = checks
    del units
    return out


def _material(name, materials: dict, who: str) -> None:
    if not isinstance(name, str):
        raise SectionError(f"{who}: give its 'material' (a key of 'materials')")
    if name not in materials:
        near = difflib.get_close_matches(name, list(materials), n=1)
        hint = f" (did you mean '{near[0]}'?)" if near else f" (known: {', '.join(materials)})"
        raise SectionError(f"{who}: no material named '{name}'{hint}")


def _nice(v: float) -> float:
    """A round number near v (1, 2 or 5 x 10^k)."""
    if v <= 0:
        return v
    e = math.floor(math.log10(v))
    m = v / 10 ** e
    m = 1 if m < 1.5 else 2 if m < 3.5 else 5 if m < 7.5 else 10
    return float(f"{m * 10 ** e:.6g}")


# --------------------------------------------------------------------------- writing
def format_section(d: dict) -> str:
    """A section dict as readable JSON: one material, zone or boundary a line where it fits, points inline."""
    def inline(v) -> str:
        return json.dumps(v, ensure_ascii=False, separators=(", ", ": "))

    def block(v, ind: int) -> str:
        pad = "  " * ind
        if isinstance(v, dict):
            if not v:
                return "{}"
            s = inline(v)
            if len(s) + len(pad) <= 110 and ind >= 1:
                return s
            items = [f'{pad}  {json.dumps(k, ensure_ascii=False)}: {block(x, ind + 1)}' for k, x in v.items()]
            return "{\n" + ",\n".join(items) + f"\n{pad}}}"
        if isinstance(v, list):
            s = inline(v)
            if len(s) + len(pad) <= 110 or all(isinstance(x, list) and all(isinstance(y, (int, float)) for y in x)
                                               for x in v):
                return s
            return "[\n" + ",\n".join(f"{pad}  {block(x, ind + 1)}" for x in v) + f"\n{pad}]"
        return inline(v)
    return block(d, 0) + "\n"


def write_file(path, text: str, force: bool = False) -> None:
    """Write text to path atomically (a temporary sibling renamed into place); never replaces an existing
    file unless ``force`` (a built section may have been edited since)."""
    p = Path(path)
    if p.exists() and not force:
        raise SectionError(f"{p}: exists; seepfe does not overwrite a file that may hold your edits "
                           "(choose another --out, or add --force)")
    if p.exists() and p.is_dir():
        raise SectionError(f"{p}: is a folder")
    if not p.parent.exists():
        raise SectionError(f"{p.parent}: no such folder")
    tmp = p.with_name(f".{p.name}.{os.getpid()}.tmp")
    try:
        tmp.write_text(text, encoding="utf-8")
        os.replace(tmp, p)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
