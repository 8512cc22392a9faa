"""Remedial measures as parametric parts of a section, turned into zones and boundaries before meshing.

A section file may list ``"remedies": [...]``; :func:`apply` (called by :func:`seepfe.load_section`
after the parameters are resolved and the plain section is validated) cuts and adds zones so the
zones still tile, and moves the boundaries onto the new outline. What each measure becomes:

* ``cutoff_wall``: a vertical wall ``x`` (centre line), ``top`` (default: the top of the section at
  x), ``bottom``, ``thickness`` and ``material`` or ``k``: a zone of the wall material, the zones it
  crosses are cut around it. ``thickness`` 0 is an impervious sheet pile: an internal no-flow line
  (a ``barriers`` entry of the section; the mesh is split along it).
* ``landside_berm``: ``length``, ``thickness_toe``, ``thickness_end``, ``material``; placed on the
  landside ground from the landside toe (of the ``embankment`` zone, or ``toe_x``); its top runs
  straight from toe to end thickness above the ground; the wedge against the embankment slope is
  filled. A boundary that covered the ground under it (the landside seepage face) is carried over
  the berm surface.
* ``riverside_blanket``: ``length``, ``thickness``, ``material``; placed on the riverside ground from
  the riverside toe; the river boundary is carried over its surface.
* ``toe_drain``: a free-draining trench ``width`` x ``depth`` from ``x`` (default the landside toe)
  landward: the trench is cut from the section and its walls and bottom become a ``drain``
  boundary (h = y where water leaves, no inflow).
* ``relief_wells``: a line of wells (``spacing``, ``radius``, ``penetration`` into the pervious
  stratum, ``discharge_elevation``, optional ``well_loss``) as a two-dimensional equivalent line
  sink: an equipotential slot over the screen (the 2D line sink), joined to an outlet at the
  discharge elevation through a riser whose resistance equals the extra head of the well line over
  the line sink, Delta H = Q_w / (2 pi k W) ln(a / (2 pi r_w)) (Muskat's infinite line of wells;
  the well-line treatment of USACE EM 1110-2-1913). Its limits: see :data:`RELIEF_WELL_LIMITS` and
  docs/remedies.md.

Each fault is a one-line SectionError naming the remedy and the fault. Lengths m, k m/s.
"""

from __future__ import annotations

import difflib
import math
from typing import Annotated, Literal, Optional, Union

import numpy as np
from pydantic import AfterValidator, BaseModel, ConfigDict, Field, TypeAdapter, ValidationError
from shapely.geometry import LineString, Point, Polygon, box
from shapely.ops import linemerge, unary_union

from .conductivity import conductivity_tensor
from .errors import SectionError
from .schema import K_RANGE, Conductivity, Length, Name, PositiveLength, SectionSpec
from .units import Dim

__all__ = ["apply", "flows", "RELIEF_WELL_LIMITS", "CutoffWall", "LandsideBerm", "RiversideBlanket",
           "ToeDrain", "ReliefWells", "REMEDY_TYPES"]

RELIEF_WELL_LIMITS = (
    "relief wells are modelled by a two-dimensional equivalent (an equipotential line sink over the "
    "screen with the extra head of an infinite line of wells, Muskat / USACE EM 1110-2-1913): the head "
    "on the well line is the average along the line; midway between wells it is higher by "
    "Q_w ln(2) / (2 pi k W); it assumes equal wells in a long straight line in a uniform pervious "
    "stratum, spacing much larger than the radius, and flow converging on the screen over its length; "
    "end effects, well-to-well variation and partial-penetration factors from model studies are not "
    "represented")


def _nonneg(v: float) -> float:
    if not math.isfinite(v) or v < 0:
        raise ValueError(f"must be a finite number >= 0, got {v}")
    return v


NonNeg = Annotated[float, AfterValidator(_nonneg)]
NonNegLength = Annotated[NonNeg, Dim("length")]     # every number of a remedy is a length, or a k
_CFG = ConfigDict(extra="forbid", strict=True, frozen=True)
Side = Optional[Literal["left", "right"]]


class _Remedy(BaseModel):
    model_config = _CFG
    name: Optional[Name] = Field(
        None, description="name of the zone/boundary it makes (default: its type in words)")


class CutoffWall(_Remedy):
    """A vertical cutoff wall; thickness 0 is an impervious sheet pile (an internal no-flow line)."""

    type: Literal["cutoff_wall"]
    x: Length = Field(description="centre line of the wall, m")
    top: Optional[Length] = Field(None, description="top elevation, m (default: top of the section at x)")
    bottom: Length = Field(description="bottom (tip) elevation, m")
    thickness: NonNegLength = Field(description="m; 0 = impervious sheet pile")
    material: Optional[Name] = Field(None, description="material of the wall (a key of 'materials')")
    k: Optional[Conductivity] = Field(None, description="isotropic conductivity of the wall, m/s (instead of material)")
    mesh_size: Optional[PositiveLength] = Field(None, description="element size along the wall, m "
                                                                  "(default: thickness / 2, at most the mesh size)")


class _OnGround(_Remedy):
    embankment: Optional[Name] = Field(None, description="zone whose toe is used (default: zone 'embankment')")
    toe_x: Optional[Length] = Field(None, description="x of the toe, m (instead of the embankment zone)")
    landside: Side = Field(None, description="direction of the landside (default: away from the boundary "
                                             "with the highest head)")


class LandsideBerm(_OnGround):
    """A landside seepage berm on the ground from the landside toe."""

    type: Literal["landside_berm"]
    length: PositiveLength = Field(description="horizontal length from the toe, m")
    thickness_toe: PositiveLength = Field(description="thickness at the toe, m")
    thickness_end: NonNegLength = Field(description="thickness at the landside end, m")
    material: Name


class RiversideBlanket(_OnGround):
    """An impervious (or less pervious) blanket on the riverside ground from the riverside toe."""

    type: Literal["riverside_blanket"]
    length: PositiveLength = Field(description="horizontal length from the riverside toe, m")
    thickness: PositiveLength = Field(description="m")
    material: Name


class ToeDrain(_OnGround):
    """A free-draining trench at the landside toe: its perimeter becomes a drain boundary."""

    type: Literal["toe_drain"]
    x: Optional[Length] = Field(None, description="riverside edge of the trench, m (default: the landside toe)")
    width: PositiveLength = Field(description="m, measured landward")
    depth: PositiveLength = Field(description="below the ground, m")


class ReliefWells(_OnGround):
    """A line of relief wells, by its two-dimensional equivalent line sink."""

    type: Literal["relief_wells"]
    x: Optional[Length] = Field(None, description="x of the well line, m (default: the landside toe)")
    spacing: PositiveLength = Field(description="distance between wells along the levee, m")
    radius: PositiveLength = Field(description="effective well radius, m")
    penetration: PositiveLength = Field(description="screen length into the pervious stratum, m")
    screen_top: Optional[Length] = Field(None, description="elevation of the top of the screen, m "
                                                            "(default: top of the most pervious zone at x)")
    discharge_elevation: Length = Field(description="elevation of the well outlet, m")
    well_loss: NonNegLength = Field(0.0, description="entrance, screen and riser losses at design flow, m of head")


Remedy = Annotated[Union[CutoffWall, LandsideBerm, RiversideBlanket, ToeDrain, ReliefWells],
                   Field(discriminator="type")]
REMEDY_TYPES = {"cutoff_wall": CutoffWall, "landside_berm": LandsideBerm, "riverside_blanket": RiversideBlanket,
                "toe_drain": ToeDrain, "relief_wells": ReliefWells}
_ADAPTER = TypeAdapter(list[Remedy])
_DEFAULT_NAME = {"cutoff_wall": "cutoff wall", "landside_berm": "landside berm",
                 "riverside_blanket": "riverside blanket", "toe_drain": "toe drain", "relief_wells": "relief wells"}


# --------------------------------------------------------------------------- validation
def _who(raw: list, i: int) -> str:
    item = raw[i] if 0 <= i < len(raw) else None
    if isinstance(item, dict):
        n, t = item.get("name"), item.get("type")
        if isinstance(n, str):
            return f"remedy '{n}'"
        if isinstance(t, str):
            return f"remedies[{i}] ({t})"
    return f"remedies[{i}]"


def _format(e: ValidationError, raw: list) -> str:
    errs = e.errors(include_url=False)
    # a misspelt key also shows as a missing one: report the misspelling
    err = next((x for x in errs if x["type"] == "extra_forbidden"), errs[0])
    loc = list(err["loc"])
    i = loc.pop(0) if loc and isinstance(loc[0], int) else 0
    if loc and loc[0] in REMEDY_TYPES:
        loc.pop(0)
    who = _who(raw, i)
    t = err["type"]
    if t == "union_tag_invalid" or t == "union_tag_not_found":
        got = raw[i].get("type") if isinstance(raw[i], dict) else None
        near = difflib.get_close_matches(str(got), list(REMEDY_TYPES), n=1)
        hint = f" (did you mean '{near[0]}'?)" if near else f" (known: {', '.join(REMEDY_TYPES)})"
        msg = f"unknown remedy type {got!r}{hint}" if got is not None else \
            f"missing key 'type' (one of {', '.join(REMEDY_TYPES)})"
        return f"{who}: {msg}"
    if t == "extra_forbidden":
        model = REMEDY_TYPES.get(raw[i].get("type")) if isinstance(raw[i], dict) else None
        allowed = [f for f in (model.model_fields if model else [])]
        near = difflib.get_close_matches(str(loc[-1]), allowed, n=1, cutoff=0.5)
        hint = f" (did you mean '{near[0]}'?)" if near else f" (allowed: {', '.join(allowed)})"
        return f"{who}: unknown key '{loc[-1]}'{hint}"
    where = ".".join(str(x) for x in loc)
    if t == "missing":
        return f"{who}: missing key '{where}'"
    msg = str(err["msg"]).removeprefix("Value error, ")
    got = err.get("input")
    if t.endswith("_type") or t in ("literal_error", "float_parsing"):
        msg = msg.lower() + (f", got {got!r}" if isinstance(got, (int, float, str, bool)) else "")
    return f"{who}: {where + ': ' if where else ''}{msg}"


def validate(raw) -> list:
    """Validate the ``remedies`` list; return the remedy models."""
    if not isinstance(raw, list):
        raise SectionError(f"remedies: expected a list [...], got {type(raw).__name__}")
    try:
        return _ADAPTER.validate_python(raw)
    except ValidationError as e:
        raise SectionError(_format(e, raw)) from None


# --------------------------------------------------------------------------- geometry helpers
class _Geo:
    """The section's zones as shapely polygons, with the outline and a few queries."""

    def __init__(self, spec: SectionSpec):
        self.names = [z.name for z in spec.zones]
        self.materials = [z.material for z in spec.zones]
        self.polys = [Polygon(z.polygon).buffer(0) for z in spec.zones]
        self.outline = unary_union(self.polys)
        x0, y0, x1, y1 = self.outline.bounds
        self.bounds = (x0, y0, x1, y1)
        self.extent = max(x1 - x0, y1 - y0)
        self.tol = 1e-7 * self.extent

    def vertical(self, x: float) -> LineString:
        x0, y0, x1, y1 = self.bounds
        return LineString([(x, y0 - self.extent), (x, y1 + self.extent)])

    def ground(self, x: float, who: str) -> float:
        """Elevation of the top of the section at x, m."""
        inter = self.outline.intersection(self.vertical(x))
        if inter.is_empty:
            raise SectionError(f"{who}: x = {x:g} m is off the section (it spans x = {self.bounds[0]:g} "
                               f"to {self.bounds[2]:g} m)")
        return float(inter.bounds[3])

    def base(self, x: float) -> float:
        return float(self.outline.intersection(self.vertical(x)).bounds[1])

    def cut(self, region, who: str) -> None:
        """Remove region from every zone; split pieces become separate zones (holes are split)."""
        names, mats, polys = [], [], []
        for n, m, p in zip(self.names, self.materials, self.polys):
            rest = p.difference(region)
            pieces = [g for g in _parts(rest) if g.area > self.tol * self.extent]
            pieces.sort(key=lambda g: -g.area)
            for k, g in enumerate(pieces):
                names.append(n if k == 0 else _unique(n, set(self.names) | set(names)))
                mats.append(m)
                polys.append(g)
        self.names, self.materials, self.polys = names, mats, polys

    def add(self, name: str, material: str, region, who: str) -> list[str]:
        pieces = [g for g in _parts(region) if g.area > self.tol * self.extent]
        if not pieces:
            raise SectionError(f"{who}: it covers no part of the section")
        pieces.sort(key=lambda g: -g.area)
        made = []
        for k, g in enumerate(pieces):
            n = name if k == 0 else f"{name} ({k + 1})"
            n = _unique(n, self.names)
            self.names.append(n)
            self.materials.append(material)
            self.polys.append(g)
            made.append(n)
        return made

    def refresh(self):
        self.outline = unary_union(self.polys)


def _parts(geom) -> list[Polygon]:
    """Simple polygons (no holes) making up geom; a polygon with a hole is split through the hole."""
    if geom.is_empty:
        return []
    if isinstance(geom, Polygon):
        if not geom.interiors:
            return [geom]
        hx = Polygon(geom.interiors[0]).representative_point().x
        x0, y0, x1, y1 = geom.bounds
        out = []
        for half in (box(x0 - 1, y0 - 1, hx, y1 + 1), box(hx, y0 - 1, x1 + 1, y1 + 1)):
            out += _parts(geom.intersection(half))
        return out
    if hasattr(geom, "geoms"):
        return [p for g in geom.geoms for p in _parts(g)]
    return []


def _unique(name: str, taken) -> str:
    if name not in taken:
        return name
    k = 2
    while f"{name} ({k})" in taken:
        k += 1
    return f"{name} ({k})"


def _ring_segments(geom) -> list[tuple[np.ndarray, np.ndarray]]:
    rings = []
    for p in _parts(geom) if not isinstance(geom, (LineString,)) else []:
        rings.append(np.asarray(p.exterior.coords))
    if isinstance(geom, LineString):
        rings.append(np.asarray(geom.coords))
    return [(r[k], r[k + 1]) for r in rings for k in range(len(r) - 1)]


def _overlap(segs_a, segs_b, tol: float) -> list[tuple]:
    """Collinear overlaps of segments of A with segments of B, as (p, q) pieces lying on A."""
    out = []
    for a, b in segs_a:
        d = b - a
        L = float(np.hypot(*d))
        if L <= tol:
            continue
        u = d / L
        nrm = np.array([-u[1], u[0]])
        for c, e in segs_b:
            if abs((c - a) @ nrm) > tol or abs((e - a) @ nrm) > tol:
                continue
            t0, t1 = sorted(((c - a) @ u, (e - a) @ u))
            lo, hi = max(0.0, t0), min(L, t1)
            if hi - lo > tol:
                out.append((tuple(a + lo * u), tuple(a + hi * u)))
    return out


def _merge(pieces) -> list[list[list[float]]]:
    """Join segment pieces into polylines (longest first)."""
    if not pieces:
        return []
    merged = linemerge([LineString(p) for p in pieces])
    lines = list(merged.geoms) if hasattr(merged, "geoms") else [merged]
    lines.sort(key=lambda g: -g.length)
    return [[[float(x), float(y)] for x, y in g.coords] for g in lines]


def _landside_sign(spec: SectionSpec, geo: _Geo, r) -> float:
    """+1 if the landside lies towards +x."""
    if getattr(r, "landside", None):
        return 1.0 if r.landside == "right" else -1.0
    heads = [b for b in spec.boundaries if b.kind == "head"]
    if not heads:
        raise SectionError("give 'landside': \"left\" or \"right\" (no head boundary to tell the river side)")
    river = max(heads, key=lambda b: b.head if b.head is not None else max(p[1] for p in b.hydrograph))
    xr = float(np.mean(np.asarray(river.polyline)[:, 0]))
    emb = _embankment(spec, geo, r, required=False)
    xc = emb.centroid.x if emb is not None else 0.5 * (geo.bounds[0] + geo.bounds[2])
    return 1.0 if xr < xc else -1.0


def _embankment(spec, geo: _Geo, r, required=True):
    name = r.embankment or "embankment"
    for z in spec.zones:
        if z.name == name:
            return Polygon(z.polygon)
    if required:
        if r.embankment:
            near = difflib.get_close_matches(name, geo.names, n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else ""
            raise SectionError(f"no zone named '{name}'{hint}")
        raise SectionError("no zone named 'embankment' to find the toe: give 'embankment' (a zone name) "
                           "or 'toe_x' (m)")
    return None


def _toe(spec, geo: _Geo, r, s: float, landside: bool) -> tuple[float, float, Optional[Polygon]]:
    """(x, y) of the landside (or riverside) toe and the embankment polygon (None with toe_x)."""
    if r.toe_x is not None:
        return r.toe_x, None, None
    emb = _embankment(spec, geo, r)
    p = np.asarray(emb.exterior.coords)[:-1]
    key = s * p[:, 0] if landside else -s * p[:, 0]
    far = key.max()
    cand = p[np.abs(key - far) <= geo.tol * 10]
    i = int(np.argmin(cand[:, 1]))
    return float(cand[i, 0]), float(cand[i, 1]), emb


def _ground_profile(geo: _Geo, xa: float, xb: float, who: str) -> np.ndarray:
    """(n, 2) points of the top of the section from xa to xb (either order)."""
    ring = np.asarray(geo.outline.exterior.coords)
    lo, hi = min(xa, xb), max(xa, xb)
    xs = ring[(ring[:, 0] > lo + geo.tol) & (ring[:, 0] < hi - geo.tol), 0]
    xs = np.unique(np.concatenate([[xa, xb], xs]))
    if xb < xa:
        xs = xs[::-1]
    return np.array([[x, geo.ground(float(x), who)] for x in xs])


# --------------------------------------------------------------------------- the measures
def _material_for(r, data: dict, who: str, wall_k: Optional[float] = None) -> str:
    mats = data["materials"]
    if getattr(r, "material", None) is not None:
        if getattr(r, "k", None) is not None:
            raise SectionError(f"{who}: give either 'material' or 'k', not both")
        if r.material not in mats:
            near = difflib.get_close_matches(r.material, list(mats), n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else f" (known: {', '.join(mats)})"
            raise SectionError(f"{who}: no material named '{r.material}'{hint}")
        return r.material
    if wall_k is None:
        raise SectionError(f"{who}: give 'material' (a key of 'materials') or 'k' (m/s)")
    name = _unique(r.name or _DEFAULT_NAME[r.type], mats)
    mats[name] = {"description": f"made for {who}", "k": float(wall_k)}
    return name


def _refine_fits(spec, geo: _Geo, length: float, size: float, width: float, who: str, cause: str, fix: str):
    """Refuse, naming the remedy's own value, a refinement along a remedy that alone would make more
    triangles than mesh.max_elements (the estimate of seepfe.mesh.estimate_triangles for one polyline)."""
    S = spec.mesh.size or geo.extent / 60.0
    rs = min(size, S)
    n = 2 * length * (width / rs ** 2 + 4.0 * (1.0 / rs - 1.0 / S)) / (math.sqrt(3.0) / 4.0)
    if not n <= spec.mesh.max_elements:
        raise SectionError(f"{who}: {cause} needs elements of {rs:.3g} m along {length:.4g} m, about {n:.3g} "
                           f"triangles, more than mesh.max_elements = {spec.mesh.max_elements}; {fix}")


def _cutoff(r: CutoffWall, spec, geo: _Geo, data: dict, who: str, refine: list) -> dict:
    ground = geo.ground(r.x, who)
    base = geo.base(r.x)
    top = ground if r.top is None else r.top
    tol = geo.tol * 10
    if r.bottom < base - tol:
        raise SectionError(f"{who}: bottom {r.bottom:g} m is below the base of the section "
                           f"({base:g} m at x = {r.x:g} m)")
    if top > ground + tol and r.top is not None and r.thickness == 0:
        top = ground
    if not top > r.bottom + tol:
        raise SectionError(f"{who}: top {top:g} m must be above bottom {r.bottom:g} m")
    if top < base + tol:
        raise SectionError(f"{who}: top {top:g} m is below the base of the section ({base:g} m at x = {r.x:g} m)")
    bottom = max(r.bottom, base)
    name = r.name or "cutoff wall"
    if r.thickness == 0:
        if "barriers" not in SectionSpec.model_fields:
            raise SectionError(f"{who}: a zero-thickness sheet pile needs internal no-flow lines "
                               "('barriers'), which this version does not have; give a thickness > 0")
        if bottom <= base + tol:
            raise SectionError(f"{who}: a sheet pile (thickness 0) down to the base of the section cuts it in "
                               "two and stops all flow; end it above the base or give the wall a thickness and k")
        if r.material is not None or r.k is not None:
            raise SectionError(f"{who}: a sheet pile (thickness 0) is impervious; leave out 'material' and 'k'")
        data.setdefault("barriers", []).append({"name": _unique(name, [b.get("name") for b in data.get("barriers", [])]),
                                                "polyline": [[r.x, min(top, ground)], [r.x, bottom]]})
        return {"barrier": name, "top_m": min(top, ground), "bottom_m": bottom}
    if r.thickness <= 100 * geo.tol:
        raise SectionError(f"{who}: thickness {r.thickness:g} m is too thin to model as a zone of its own; give "
                           "thickness 0 for an impervious sheet pile (a no-flow line)")
    size = r.mesh_size or r.thickness / 2
    _refine_fits(spec, geo, top - bottom, size, max(size, r.thickness), who,
                 f"thickness {r.thickness:g} m" if r.mesh_size is None else f"mesh_size {size:g} m",
                 "model a thin wall as a sheet pile (thickness 0) or give a larger 'mesh_size'")
    mat = _material_for(r, data, who, r.k)
    h = 0.5 * r.thickness
    rect = box(r.x - h, bottom, r.x + h, top).intersection(geo.outline)
    if rect.area <= geo.tol * geo.extent:
        raise SectionError(f"{who}: the wall covers no part of the section")
    geo.cut(rect, who)
    zones = geo.add(name, mat, rect, who)
    refine.append({"polyline": [[r.x, top], [r.x, bottom]], "size": size, "width": max(size, r.thickness)})
    return {"zones": zones, "material": mat, "top_m": min(top, ground), "bottom_m": bottom,
            "full_depth": bool(bottom <= base + tol)}


def _surface_layer(r, spec, geo: _Geo, data: dict, who: str, landside: bool):
    """Polygon of a berm (landside) or blanket (riverside) resting on the ground from the toe."""
    s = _landside_sign(spec, geo, r)
    d = s if landside else -s
    xt, yt, emb = _toe(spec, geo, r, s, landside)
    L = r.length
    xe = xt + d * L
    if not (geo.bounds[0] - geo.tol <= xe <= geo.bounds[2] + geo.tol):
        raise SectionError(f"{who}: its end at x = {xe:g} m is off the section (it spans x = "
                           f"{geo.bounds[0]:g} to {geo.bounds[2]:g} m); shorten 'length'")
    t0, t1 = (r.thickness_toe, r.thickness_end) if landside else (r.thickness, r.thickness)
    prof = _ground_profile(geo, xt, xe, who)
    t = t0 + (t1 - t0) * np.abs(prof[:, 0] - xt) / L
    top = prof + np.column_stack([np.zeros(len(t)), t])
    x0, y0, x1, y1 = geo.bounds
    under = prof[::-1].tolist()                 # the ground under it, end back to toe
    if emb is not None:
        crest = float(emb.bounds[3])
        if top[0, 1] >= crest - geo.tol:
            raise SectionError(f"{who}: its top at the toe ({top[0, 1]:g} m) is not below the embankment "
                               f"crest ({crest:g} m)")
        # extend the top riverward at the toe level to fill the wedge against the slope
        xf = float(emb.centroid.x)
        pts = [[xf, top[0, 1]]] + top.tolist() + under + [[xf, prof[0, 1]]]
    else:
        pts = top.tolist() + under
    region = Polygon(pts).buffer(0).difference(geo.outline)
    probe = LineString([(xt + d * 0.5 * L, prof[0, 1] - geo.extent), (xt + d * 0.5 * L, y1 + geo.extent)])
    pieces = [g for g in _parts(region) if g.intersects(probe) and g.area > geo.tol * geo.extent]
    if not pieces:
        raise SectionError(f"{who}: it covers no part of the ground")
    return unary_union(pieces), (xt, xe, s)


def _toe_drain(r: ToeDrain, spec, geo: _Geo, who: str):
    s = _landside_sign(spec, geo, r)
    x = r.x if r.x is not None else _toe(spec, geo, r, s, True)[0]
    xe = x + s * r.width
    g = geo.ground(x, who)
    geo.ground(xe, who)
    lo = min(g, geo.ground(xe, who)) - r.depth
    base = min(geo.base(x), geo.base(xe))
    if lo <= base + geo.tol * 10:
        raise SectionError(f"{who}: the trench bottom ({lo:g} m) reaches the base of the section ({base:g} m); "
                           "make it shallower")
    trench = box(min(x, xe), lo, max(x, xe), geo.bounds[3] + geo.extent).intersection(geo.outline)
    return trench, (x, xe, lo)


def _aquifer(geo: _Geo, spec: SectionSpec, x: float, who: str):
    """The most pervious zone crossed by the vertical at x: (name, kx m/s, top m, thickness m)."""
    best = None
    v = geo.vertical(x)
    for n, m, p in zip(geo.names, geo.materials, geo.polys):
        seg = p.intersection(v)
        if seg.length <= geo.tol:
            continue
        k = float(conductivity_tensor(spec.materials[m])[0, 0]) if m in spec.materials else None
        if k is None:
            continue
        if best is None or k > best[1] * (1 + 1e-9):
            best = (n, k, float(seg.bounds[3]), float(seg.length))
    if best is None:
        raise SectionError(f"{who}: x = {x:g} m is off the section")
    return best


def _wells(r: ReliefWells, spec, geo: _Geo, data: dict, who: str, refine: list):
    s = _landside_sign(spec, geo, r)
    b = max(2 * r.radius, 0.02)                  # width of the slot and riser in the model, m
    # default: just landward of the landside toe (the riverside face of the model well at the toe)
    x = r.x if r.x is not None else _toe(spec, geo, r, s, True)[0] + s * b / 2
    ground = geo.ground(x, who)
    aq_name, k, aq_top, D = _aquifer(geo, spec, x, who)
    top = aq_top if r.screen_top is None else r.screen_top
    W = r.penetration
    bottom = top - W
    base = geo.base(x)
    if bottom < base - geo.tol * 10:
        raise SectionError(f"{who}: the screen bottom ({bottom:g} m) is below the base of the section "
                           f"({base:g} m at x = {x:g} m); reduce 'penetration'")
    if top > ground:
        raise SectionError(f"{who}: screen_top {top:g} m is above the ground ({ground:g} m at x = {x:g} m)")
    a, rw = r.spacing, r.radius
    if a <= 2 * math.pi * rw * 1.5:
        raise SectionError(f"{who}: spacing {a:g} m must be well above 2 pi x radius ({2 * math.pi * rw:.3g} m) "
                           "for the line-of-wells formula")
    y_out = r.discharge_elevation + r.well_loss
    if y_out <= top + geo.tol * 10:
        raise SectionError(f"{who}: discharge elevation + well loss ({y_out:g} m) must be above the top of the "
                           f"screen ({top:g} m)")
    reach = max(1000.0, 10 * geo.extent)
    if y_out > geo.bounds[3] + reach:
        raise SectionError(f"{who}: discharge elevation + well loss ({y_out:g} m) lies more than {reach:g} m above "
                           f"the section (top at {geo.bounds[3]:g} m); give elevations and heads in m")
    # extra head of the well line over the 2D line sink, per unit of flow per m of levee (s/m)
    R = a / (2 * math.pi * k * W) * math.log(a / (2 * math.pi * rw))
    kmin = min(float(np.min(np.linalg.eigvalsh(_tensor(m)))) for m in spec.materials.values())
    L_r = y_out - top
    name = r.name or "relief wells"
    mats = data["materials"]

    def weight_at(y):
        """The unit weight of the soil the device replaces at (x, y): the model devices weigh what the
        ground they stand in weighs, so the checks over them are those of that ground."""
        p = Point(x, y)
        for zn, mn, poly in zip(geo.names, geo.materials, geo.polys):
            if poly.buffer(geo.tol * 10).contains(p) and isinstance(mats.get(mn), dict):
                return {k_: mats[mn][k_] for k_ in ("unit_weight", "specific_gravity", "void_ratio")
                        if mats[mn].get(k_) is not None}
        return {}
    m_screen = _unique(f"{name} screen", mats)
    mats[m_screen] = {"description": f"equipotential slot of {who} (model device)",
                      "k": float(100 * k * max(1.0, W / b)), **weight_at(0.5 * (top + bottom))}
    ky_riser = L_r / (b * R)
    if not K_RANGE[0] <= ky_riser <= K_RANGE[1]:
        raise SectionError(f"{who}: the riser of the model well, from the screen top ({top:g} m) to discharge "
                           f"elevation + well loss ({y_out:g} m), would need a vertical conductivity of "
                           f"{ky_riser:.3g} m/s, outside the range of any material ({K_RANGE[0]:g} to {K_RANGE[1]:g} "
                           "m/s); check 'discharge_elevation', 'well_loss', 'spacing' and 'radius'")
    _refine_fits(spec, geo, y_out - bottom, b / 2, b, who,
                 f"a riser up to {y_out:g} m (discharge elevation + well loss)",
                 "check 'discharge_elevation' and 'well_loss'")
    m_riser = _unique(f"{name} riser", mats)
    mats[m_riser] = {"description": f"riser of {who}: vertical conductivity gives the line-of-wells "
                                    f"resistance (model device)",
                     "kx": float(kmin * 1e-2), "ky": float(ky_riser), "angle": 0.0,
                     **weight_at(0.5 * (top + min(y_out, ground)))}
    screen = box(x - b / 2, bottom, x + b / 2, top)
    riser = box(x - b / 2, top, x + b / 2, y_out)
    bore = box(x - b / 2, y_out, x + b / 2, geo.bounds[3] + geo.extent).intersection(geo.outline)
    geo.cut(unary_union([screen, riser, bore]), who)
    geo.add(f"{name} screen", m_screen, screen, who)
    geo.add(f"{name} riser", m_riser, riser, who)
    out_line = LineString([(x - b / 2, y_out), (x + b / 2, y_out)])
    # where the riser rises above the ground, the ground boundary keeps clear of its foot, so that
    # no water leaves the riser below its outlet
    keep_clear = box(x - 1.5 * b, ground - b, x + 1.5 * b, y_out) if y_out > ground else None
    size = b / 2
    refine.append({"polyline": [[x, bottom], [x, y_out]], "size": size, "width": b})
    info = {"x_m": x, "aquifer_zone": aq_name, "aquifer_kx_m_s": k, "aquifer_thickness_m": D,
            "screen_top_m": top, "screen_bottom_m": bottom, "penetration_ratio": W / D,
            "outlet_elevation_m": y_out, "resistance_s_per_m": R, "spacing_m": a, "radius_m": rw,
            "model_width_m": b, "limits": RELIEF_WELL_LIMITS}
    return out_line, keep_clear, info


def _tensor(m: dict | object):
    return conductivity_tensor(m)


# --------------------------------------------------------------------------- boundaries
def _reboundary(boundaries: list[dict], new_outline, tol: float, surfaces: list[tuple],
                new_bounds: list[dict], clear: list = (), parts: dict | None = None) -> list[dict]:
    """Move boundaries onto the new outline.

    Each old boundary keeps the parts of its polyline still on the outline; a boundary that lost
    ground to a surface measure (berm, blanket) is carried over that measure's exposed surface.
    Parts split apart become several boundaries (the longest keeps the name, the others 'name (2)').
    """
    ring = _ring_segments(new_outline)
    out: list[dict] = []
    taken = [b["name"] for b in boundaries] + [b["name"] for b in new_bounds]
    claimed_surfaces = set()
    for b in boundaries:
        line = np.asarray(b["polyline"], float)
        segs = [(line[k], line[k + 1]) for k in range(len(line) - 1)]
        kept = _overlap(ring, segs, tol)
        total = sum(float(np.hypot(*(q - p))) for p, q in segs)
        have = sum(math.dist(p, q) for p, q in kept)
        if total - have > 10 * tol:
            for si, (region, _) in enumerate(surfaces):
                if si in claimed_surfaces:
                    continue
                lost = LineString(line).intersection(region.buffer(10 * tol)).length
                if lost > 10 * tol:
                    kept += _overlap(ring, _ring_segments(region), tol)
                    claimed_surfaces.add(si)
        if clear:
            zone = unary_union(list(clear))
            trimmed = []
            for p, q in kept:
                rest = LineString([p, q]).difference(zone)
                for g in getattr(rest, "geoms", [rest]):
                    if not g.is_empty and g.length > tol:
                        c = list(g.coords)
                        trimmed += [(c[k], c[k + 1]) for k in range(len(c) - 1)]
            kept = trimmed
        lines = _merge(kept)
        if not lines:
            continue      # wholly covered or cut away: the boundary is gone
        for k, pl in enumerate(lines):
            nb = dict(b)
            nb["polyline"] = pl
            if k:
                nb["name"] = _unique(b["name"], taken)
                taken.append(nb["name"])
                if parts is not None:
                    parts.setdefault(b["name"], [b["name"]]).append(nb["name"])
            out.append(nb)
    return out + new_bounds


# --------------------------------------------------------------------------- entry points
def apply(spec: SectionSpec, data: dict, raw, label: str = "<dict>", notes: list | None = None,
          parts: dict | None = None) -> dict:
    """A new section dict with the remedies turned into zones, materials, boundaries and refinements.

    ``spec`` is the validated plain section, ``data`` its (resolved) dict, ``raw`` the ``remedies``
    list. ``notes``, when given, receives one dict per remedy: what it became (zones, elevations,
    model figures, and under ``"boundaries"`` the names of the boundaries it made). Raises
    SectionError (prefixed with label) naming the remedy and the fault. ``parts``, when given,
    receives {boundary name: [its pieces' names]} for each boundary a remedy split apart.
    """
    try:
        rems = validate(raw)
        return _apply(spec, data, rems, raw, notes, parts)
    except SectionError as e:
        raise SectionError(f"{label}: {e}") from None


def _apply(spec: SectionSpec, data: dict, rems: list, raw: list, notes: list | None = None,
           parts: dict | None = None) -> dict:
    import copy
    data = copy.deepcopy(data)
    geo = _Geo(spec)
    data.setdefault("mesh", {})
    refine = data["mesh"].setdefault("refine", [])
    surfaces: list[tuple] = []
    new_bounds: list[dict] = []
    names_used: list[str] = []
    clear: list = []
    for i, r in enumerate(rems):
        who = _who(raw, i)
        if r.name is None:
            r = r.model_copy(update={"name": _unique(_DEFAULT_NAME[r.type], names_used)})
        names_used.append(r.name)
        note = {"type": r.type, "name": r.name}
        if r.type == "cutoff_wall":
            note.update(_cutoff(r, spec, geo, data, who, refine))
        elif r.type in ("landside_berm", "riverside_blanket"):
            landside = r.type == "landside_berm"
            region, (xt, xe, s) = _surface_layer(r, spec, geo, data, who, landside)
            mat = _material_for(r, data, who)
            geo.add(r.name, mat, region, who)
            surfaces.append((region, r.name))
            note.update({"material": mat, "from_x_m": xt, "to_x_m": xe, "area_m2": float(region.area)})
            thick = min(r.thickness_toe, r.thickness_end or r.thickness_toe) if landside else r.thickness
            if data["mesh"].get("size") and thick < data["mesh"]["size"]:
                refine.append({"polyline": [[xt, geo.ground(xt, who)], [xe, geo.ground(xe, who)]],
                               "size": max(thick / 2, 1e-3), "width": thick})
        elif r.type == "toe_drain":
            trench, (x, xe, lo) = _toe_drain(r, spec, geo, who)
            geo.cut(trench, who)
            geo.refresh()
            segs = _overlap(_ring_segments(geo.outline), _ring_segments(trench), geo.tol)
            lines = _merge(segs)
            if len(lines) != 1:
                raise SectionError(f"{who}: the trench does not open onto the ground as one piece")
            bname = _unique(r.name, [b["name"] for b in data.get("boundaries", [])])
            new_bounds.append({"name": bname, "polyline": lines[0], "drain": True})
            note["boundaries"] = [bname]
            refine.append({"polyline": lines[0], "size": max(min(r.width, r.depth) / 2, 1e-3)})
            note.update({"from_x_m": x, "to_x_m": xe, "bottom_m": lo})
        elif r.type == "relief_wells":
            out_line, keep_clear, info = _wells(r, spec, geo, data, who, refine)
            note.update(info)
            if keep_clear is not None:
                clear.append(keep_clear)
            bname = _unique(r.name, [b["name"] for b in data.get("boundaries", [])])
            new_bounds.append({"name": bname, "polyline": [list(c) for c in out_line.coords], "seepage_face": True})
            note["boundaries"] = [bname]
        geo.refresh()
        if notes is not None:
            notes.append(note)
    data["zones"] = [{"name": n, "material": m,
                      "polygon": [[float(x), float(y)] for x, y in np.asarray(p.exterior.coords)[:-1]]}
                     for n, m, p in zip(geo.names, geo.materials, geo.polys)]
    data["boundaries"] = _reboundary(list(data.get("boundaries", [])), geo.outline, geo.tol * 4,
                                     surfaces, new_bounds, clear, parts)
    if not refine:
        data["mesh"].pop("refine")
    return data


def flows(notes, flows: dict) -> list[dict]:
    """The remedy notes of a section (``section.remedies``) with figures from a solve's boundary flows
    (m3/s per m, + into the section). For relief wells (per the line-of-wells model):
    ``flow_m3_s_per_m`` (into the well line, per m of levee), ``flow_per_well_m3_s`` Q_w = q a,
    ``line_head_m`` (outlet + Q_w / (2 pi k W) ln(a / (2 pi r_w))), ``midway_head_m`` (the line
    head + Q_w ln 2 / (2 pi k W), the highest head along the line, between wells), and ``limits``;
    for toe drains the flow they take in (negative: out of the section).
    """
    out = [dict(d) for d in notes]
    for d in out:
        if d["type"] == "relief_wells":
            q = -float(flows.get(d["name"], 0.0))
            Qw = q * d["spacing_m"]
            W = d["screen_top_m"] - d["screen_bottom_m"]
            line = d["outlet_elevation_m"] + q * d["resistance_s_per_m"] if q > 0 else None
            d.update({"flow_m3_s_per_m": q, "flow_per_well_m3_s": Qw, "line_head_m": line,
                      "midway_head_m": (line + Qw * math.log(2.0) / (2 * math.pi * d["aquifer_kx_m_s"] * W))
                      if line is not None else None})
        elif d["type"] == "toe_drain":
            d["flow_m3_s_per_m"] = float(flows.get(d["name"], 0.0))
    return out
