"""Load and validate a section file into an immutable :class:`Section`.

Two stages: the pydantic models of :mod:`seepfe.schema` check keys, types and ranges; then
:mod:`seepfe.geometry` checks polygons, the tiling and the boundaries.  Each fault becomes a
one-line :class:`~seepfe.errors.SectionError` naming the file, the item and what is wrong.
"""

from __future__ import annotations

import dataclasses
import difflib
import hashlib
import math
import json
import os
import types
import typing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from pydantic import BaseModel, ValidationError
from shapely.geometry import LineString, Polygon
from shapely.geometry import Point as ShapelyPoint

from .conductivity import conductivity_tensor
from .errors import SectionError
from .jsonin import json_type
from .schema import K_RANGE, BoundarySpec, MaterialSpec, SectionSpec
from .units import SI, Units

__all__ = ["Section", "load_section", "conductivity_tensor"]


@dataclass(frozen=True, eq=False)
class Section:
    """A validated section: the parsed spec plus the geometry the mesher and solver need.

    Build it with :func:`load_section`; do not construct it by hand.
    """

    spec: SectionSpec
    source: str
    data: dict = field(repr=False)
    input_hash: str
    polygons: tuple = field(repr=False)       # per zone, (n, 2) counter-clockwise vertices, m
    outline: Polygon = field(repr=False)
    extent: float = 0.0                       # largest side of the bounding box, m
    tol: float = 0.0                          # geometric tolerance, m
    graph: "geometry.Graph" = field(default=None, repr=False)   # seepfe.geometry.Graph
    remedies: tuple = field(default=(), repr=False)   # per remedy: what it became (seepfe.remedies.apply)
    boundary_parts: dict = field(default_factory=dict, repr=False)   # a boundary remedies split: its pieces
    units: Units = SI                         # the file's units (values above are SI); results are shown in them
    warnings: tuple = ()                      # things worth a look that are not errors (one line each)

    @property
    def title(self) -> str:
        return self.spec.title

    @property
    def zone_names(self) -> list[str]:
        return [z.name for z in self.spec.zones]

    @property
    def boundary_names(self) -> list[str]:
        return [b.name for b in self.spec.boundaries]

    def boundary(self, name: str) -> BoundarySpec:
        for b in self.spec.boundaries:
            if b.name == name:
                return b
        raise KeyError(_unknown("boundary", name, self.boundary_names))

    def zone_tensors(self) -> np.ndarray:
        """(Z, 2, 2) conductivity tensor of each zone, m/s."""
        return np.array([conductivity_tensor(self.spec.materials[z.material]) for z in self.spec.zones])

    def zone_material(self, zone_index: int) -> MaterialSpec:
        return self.spec.materials[self.spec.zones[zone_index].material]

    @property
    def length_tol(self) -> float:
        """Length tolerance, m: two points closer than this are one point, a point this close to a line
        lies on it (ten times the geometric tolerance ``tol``, itself 1e-7 of the extent)."""
        return 10.0 * self.tol

    @property
    def head_tol(self) -> float:
        """Head tolerance, m: a total head within this of an elevation equals it (h = y tests, water
        levels against the ground). Named apart from ``length_tol`` though equal today."""
        return 10.0 * self.tol

    @property
    def gamma_w(self) -> float:
        """Unit weight of water, kN/m3."""
        return self.spec.water.unit_weight

    def __repr__(self) -> str:
        s = self.spec
        return (f"Section({s.title!r}: {len(s.materials)} materials, {len(s.zones)} zones, "
                f"{len(s.boundaries)} boundaries, extent {self.extent:.4g} m)")


def _unknown(kind: str, name: str, known: list[str]) -> str:
    near = difflib.get_close_matches(name, known, n=1)
    hint = f" (did you mean '{near[0]}'?)" if near else f" (known: {', '.join(known) or 'none'})"
    return f"no {kind} named '{name}'{hint}"


def _read(path_or_dict) -> tuple[dict, str]:
    from .jsonin import check_tree, read_json
    if isinstance(path_or_dict, dict):
        try:
            check_tree(path_or_dict)
        except SectionError as e:
            raise SectionError(f"<dict>: {e}") from None
        return path_or_dict, "<dict>"
    if isinstance(path_or_dict, (str, os.PathLike)):
        label = str(Path(path_or_dict))
        data = read_json(path_or_dict, "section file")
        if not isinstance(data, dict):
            raise SectionError(f"{label}: the top level must be a JSON object {{...}}, got {json_type(data)}")
        return data, label
    raise SectionError(f"load_section takes a path or a dict, got {type(path_or_dict).__name__}")  # API misuse


def _label(data: Any, loc: tuple) -> str:
    """Human path of a pydantic error location: ``zone 'core'.polygon[2]``."""
    parts: list[str] = []
    node = data
    for i, key in enumerate(loc):
        coll = loc[i - 1] if i else None
        if isinstance(key, int) and coll in ("zones", "boundaries", "barriers") and isinstance(node, list) \
                and key < len(node) and isinstance(node[key], dict) and isinstance(node[key].get("name"), str):
            kind = {"zones": "zone", "boundaries": "boundary", "barriers": "barrier"}[coll]
            if parts and parts[-1] == coll:
                parts.pop()
            parts.append(f"{kind} '{node[key]['name']}'")
        elif coll == "materials" and parts and parts[-1] == "materials":
            parts[-1] = f"material '{key}'"
        elif isinstance(key, int):
            parts[-1:] = [f"{parts[-1] if parts else ''}[{key}]"]
        else:
            parts.append(str(key))
        try:
            node = node[key]
        except (KeyError, IndexError, TypeError):
            node = None
    return ".".join(parts)


def _allowed_keys(model: type[BaseModel], data: Any, loc: tuple) -> list[str]:
    """Keys the model allows at loc (for 'did you mean'); walks models, lists and dicts."""
    ann: Any = model
    for key in loc[:-1]:
        ann = _strip(ann)
        if isinstance(ann, type) and issubclass(ann, BaseModel):
            f = ann.model_fields.get(key) if isinstance(key, str) else None
            if f is None:
                return []
            ann = f.annotation
        elif typing.get_origin(ann) in (list, dict, tuple):
            ann = typing.get_args(ann)[-1]
        else:
            return []
    ann = _strip(ann)
    if isinstance(ann, type) and issubclass(ann, BaseModel):
        return list(ann.model_fields)
    return []


def _strip(ann):
    """Strip Annotated[...] and Optional[...] (not list/dict)."""
    for _ in range(8):
        if typing.get_origin(ann) is typing.Annotated:
            ann = typing.get_args(ann)[0]
        elif typing.get_origin(ann) in (typing.Union, types.UnionType):
            args = [a for a in typing.get_args(ann) if a is not type(None)]
            ann = args[0] if len(args) == 1 else ann
            if len(args) != 1:
                return ann
        else:
            return ann
    return ann


def _format_pydantic(e: ValidationError, data: dict, label: str) -> str:
    errs = e.errors(include_url=False)
    # an error inside a union/list element can repeat; show the first, count the rest
    err = errs[0]
    loc = tuple(x for x in err["loc"] if not (isinstance(x, str) and x.startswith(("function-", "constrained-"))))
    where = _label(data, loc)
    t = err["type"]
    if t == "extra_forbidden":
        key = str(loc[-1])
        where = _label(data, loc[:-1])
        allowed = _allowed_keys(SectionSpec, data, loc)
        near = difflib.get_close_matches(key, allowed, n=1, cutoff=0.5)
        hint = f" (did you mean '{near[0]}'?)" if near else (f" (allowed: {', '.join(allowed)})" if allowed else "")
        msg = f"unknown key '{key}'{hint}"
    elif t == "missing":
        where = _label(data, loc[:-1])
        msg = f"missing key '{loc[-1]}'"
    elif t in ("too_long", "too_short"):
        got = err.get("input")
        ctx = err.get("ctx", {})
        n = len(got) if isinstance(got, (list, dict)) else ctx.get("actual_length")
        is_point = (len(loc) >= 2 and isinstance(loc[-1], int) and loc[-2] in ("polygon", "polyline")) \
            or (bool(loc) and loc[-1] == "point")
        noun = "points" if loc and loc[-1] in ("polygon", "polyline") else "item(s)"
        if is_point:
            msg = f"a point is [x, y] (two numbers, m), got {json.dumps(got) if n is not None and n < 8 else f'{n} items'}"
        elif t == "too_short":
            msg = f"needs at least {ctx.get('min_length')} {noun}, got {n}"
        else:
            msg = f"allows at most {ctx.get('max_length')} {noun}, got {n}"
    elif t == "value_error":
        msg = str(err["msg"]).removeprefix("Value error, ")
    elif t in ("float_type", "int_type", "string_type", "bool_type", "list_type", "dict_type", "model_type",
               "float_parsing", "int_from_float", "literal_error", "model_attributes_type"):
        got = err.get("input")
        shown = _short(json.dumps(got)) if isinstance(got, (int, float, str, bool, type(None))) else json_type(got)
        want = {"float_type": "a number", "int_type": "a whole number", "string_type": "a string",
                "bool_type": "true or false", "list_type": "a list", "dict_type": "an object {...}",
                "model_type": "an object {...}", "model_attributes_type": "an object {...}",
                "int_from_float": "a whole number", "float_parsing": "a number"}.get(t)
        msg = (f"expected {want}, got {shown}" if want else str(err["msg"]).lower() + f", got {shown}")
    else:
        got = err.get("input")
        tail = f", got {_short(json.dumps(got))}" if isinstance(got, (int, float, str, bool)) else ""
        msg = str(err["msg"]).lower() + tail
    more = f" (and {len(errs) - 1} more)" if len(errs) > 1 else ""
    return f"{label}: {where + ': ' if where else ''}{msg}{more}"


def _short(text: str, limit: int = 60) -> str:
    """A value shown in a message, shortened when long (a 400-digit number, a pasted paragraph)."""
    return text if len(text) <= limit else f"{text[:40]}...{text[-10:]} ({len(text)} characters)"


def _hash(data: dict) -> str:
    canon = json.dumps(data, sort_keys=True, separators=(",", ":"), allow_nan=False, default=str)
    return hashlib.sha256(canon.encode()).hexdigest()


def load_section(path_or_dict) -> Section:
    """Read and validate a section from a JSON file path or an equivalent dict.

    Parameters
    ----------
    path_or_dict : str, os.PathLike or dict
        A section file (UTF-8 JSON) or the same content as a dict.

    Returns
    -------
    Section

    Raises
    ------
    SectionError
        On any fault, with one line naming the file, the item and what is wrong.
    """
    data, label = _read(path_or_dict)
    # parameters and '=' expressions first, then the file's units to SI, then remedial measures;
    # the original dict keeps the hash
    from . import params, remedies, units as units_mod
    units = units_mod.parse_units(data.get("units"), label)
    _check_schema_key(data, label)
    work = params.resolve(data, label)
    work.pop("units", None)
    work.pop("$schema", None)
    measures = work.pop("remedies", None)
    hints = units_mod.conductivity_hints(work.get("materials"), units)
    work = units_mod.to_si(SectionSpec, work, units, label)
    if measures is not None:
        measures = units_mod.to_si(list[remedies.Remedy], measures, units, label)
    try:
        spec = SectionSpec.model_validate(work)
    except ValidationError as e:
        raise SectionError(_format_pydantic(e, work, label)) from None
    notes: list = []
    parts: dict = {}
    if measures is not None:
        work = remedies.apply(spec, work, measures, label, notes, parts)
        try:
            spec = SectionSpec.model_validate(work)
        except ValidationError as e:
            raise SectionError(_format_pydantic(e, work, label) + " (after applying the remedies)") from None
    try:
        sec = _build(spec, data, label, tuple(notes), parts)
    except SectionError as e:
        raise SectionError(f"{label}: {e}") from None
    return dataclasses.replace(sec, units=units, warnings=tuple(hints))


def _check_schema_key(data: dict, label: str) -> None:
    """``"$schema"`` (where an editor finds the JSON Schema) is accepted and ignored; it must be a string."""
    v = data.get("$schema")
    if v is not None and not isinstance(v, str):
        raise SectionError(f"{label}: $schema: expected a string (the address of the JSON Schema), "
                           f"got {type(v).__name__}")


#: largest coordinate accepted, m (squares of coordinates must stay far from overflow)
MAX_COORDINATE = 1e9


def _check_coordinates(spec: SectionSpec) -> None:
    """Refuse coordinates so large that distances overflow (a unit slip, or a corrupted file)."""
    items = [(f"zone '{z.name}'", z.polygon) for z in spec.zones]
    items += [(f"boundary '{b.name}'", b.polyline) for b in spec.boundaries]
    items += [(f"barrier '{r.name}'", r.polyline) for r in getattr(spec, "barriers", None) or ()]
    items += [(f"mesh.refine[{i}]", r.polyline if r.polyline is not None else [r.point])
              for i, r in enumerate(spec.mesh.refine)]
    for what, pts in items:
        for x, y in pts:
            if max(abs(x), abs(y)) > MAX_COORDINATE:
                raise SectionError(f"{what}: point [{x:.6g}, {y:.6g}] is out of range: coordinates are m and "
                                   f"must lie within +-{MAX_COORDINATE:.0e} m")


def _ground_parts(line: np.ndarray, outline, tol: float) -> np.ndarray:
    """The segments (k, 2, 2) of a boundary polyline that face upward (outward normal with an upward
    component): the ground it covers, not an end face."""
    from shapely import contains_xy
    a, b = line[:-1], line[1:]
    t = b - a
    L = np.linalg.norm(t, axis=1)
    ok = L > 0
    n = np.stack([t[:, 1], -t[:, 0]], 1) / np.where(ok, L, 1.0)[:, None]
    mid = 0.5 * (a + b)
    eps = max(100 * tol, 1e-6)
    inside = contains_xy(outline, mid[:, 0] + eps * n[:, 0], mid[:, 1] + eps * n[:, 1])
    n[inside] *= -1                                  # point the normal out of the section
    up = ok & (n[:, 1] > 0.1)
    return np.stack([a[up], b[up]], 1)


def _check_water_levels(spec: SectionSpec, outline, blines: list, polys: list, tol: float) -> None:
    """Refuse water levels that steady seepage through the section cannot describe (docs/checks.md):

    * the highest head above the crest of the embankment it stands against (the top of the zones above
      the ground under the upstream water, where the upstream boundary runs up the slope of one of them,
      as on a riverside or upstream face): the section would be overtopped (an embankment not modelled,
      as in blanket theory's idealisation, is not checked);
    * the highest head at or below every point of its own boundary: no water stands on it, nothing enters;
    * no outlet below the highest head (no lower head, no seepage face, drain or outward flux reaching
      below it): nothing can flow, so any exit check would read noise.
    """
    heads = [(b, bl) for b, bl in zip(spec.boundaries, blines) if b.kind == "head"]
    up, up_line = max(heads, key=lambda t: t[0].head)
    H = float(up.head)
    ground = _ground_parts(up_line, outline, tol)
    if not len(ground):
        return             # an end face or an interior line (an idealised aquifer problem): no ground under water
    ground_up = float(ground[:, :, 1].min())
    from shapely.geometry import MultiLineString
    d = ground[:, 1] - ground[:, 0]
    slope = np.abs(d[:, 1]) > 0.1 * np.abs(d[:, 0])          # the water against a slope, not on a flat bed
    above = [p for p in polys if float(p[:, 1].min()) >= ground_up - tol]
    faced = []
    if slope.any():
        wet = MultiLineString([g.tolist() for g in ground[slope]])
        faced = [p for p in above if Polygon(p).exterior.buffer(tol).intersection(wet).length > 10 * tol]
    crest = max((float(p[:, 1].max()) for p in above), default=-math.inf)
    if faced and H > crest + tol:
        raise SectionError(f"boundary '{up.name}': head {H:g} m is above the crest of the section ({crest:g} m): the "
                           "section would be overtopped, and steady seepage does not describe overtopping; lower the "
                           "water level or raise the crest")
    if H <= ground_up + tol:
        raise SectionError(f"boundary '{up.name}': head {H:g} m is at or below the lowest point of the boundary "
                           f"({ground_up:g} m): no water stands on it, so nothing enters the section; give a water "
                           "level above the ground it covers")
    outlet = any(b.kind == "head" and b.head < H - tol for b, _ in heads) or \
        any(b.kind in ("seepage_face", "drain") and float(bl[:, 1].min()) < H - tol
            for b, bl in zip(spec.boundaries, blines)) or \
        any(b.kind == "flux" and b.flux < 0 for b in spec.boundaries) or \
        any(getattr(z, "drain", False) for z in spec.zones)
    if not outlet:
        raise SectionError(f"no outlet below the highest water level (boundary '{up.name}', head {H:g} m): no lower "
                           "head, no seepage face or drain below it, so nothing flows; name the exit surface "
                           "(a seepage face, a drain or a lower head)")


#: a head may lie at most this far outside the section's elevations, m: max(HEAD_MARGIN, 10 x extent)
HEAD_MARGIN = 1000.0
#: water's unit weight, kN/m3: fresh water 9.81, sea water about 10.05, dense brines about 12 (common practice)
WATER_UNIT_WEIGHT = (9.0, 12.0)
#: saturated unit weight of soils and rocks, kN/m3 (about 14 to 28; common practice)
SOIL_UNIT_WEIGHT_MAX = 30.0
#: specific gravity of soil solids and void ratio (-): minerals about 2.0 to 3.0, heavy ones up to 5;
#: peats reach void ratios of about 15 (common practice)
SPECIFIC_GRAVITY = (1.0, 5.0)
VOID_RATIO_MAX = 20.0
#: most check points the underseepage checks may place along the boundaries (checks.spacing)
MAX_CHECK_POINTS = 1_000_000


def _check_plausible(spec: SectionSpec, outline: Polygon, extent: float, tol: float) -> None:
    """Values that are valid numbers but nonsense for a section: one-line SectionErrors naming the item."""
    from .geometry import fmt_xy
    gw = spec.water.unit_weight
    if not WATER_UNIT_WEIGHT[0] <= gw <= WATER_UNIT_WEIGHT[1]:
        raise SectionError(f"water.unit_weight: {gw:g} kN/m3 is not water's ({WATER_UNIT_WEIGHT[0]:g} to "
                           f"{WATER_UNIT_WEIGHT[1]:g} kN/m3; fresh water 9.81); check the value and its units")
    for name, m in spec.materials.items():
        if m.unit_weight is not None and not gw < m.unit_weight <= SOIL_UNIT_WEIGHT_MAX:
            raise SectionError(f"material '{name}': unit_weight {m.unit_weight:g} kN/m3 is "
                               + (f"not more than water's ({gw:g} kN/m3): a saturated soil is heavier than water"
                                  if m.unit_weight <= gw else
                                  f"more than any soil or rock ({SOIL_UNIT_WEIGHT_MAX:g} kN/m3)")
                               + "; check the value and its units")
        if m.specific_gravity is not None and not SPECIFIC_GRAVITY[0] < m.specific_gravity <= SPECIFIC_GRAVITY[1]:
            raise SectionError(f"material '{name}': specific_gravity {m.specific_gravity:g} is outside "
                               f"{SPECIFIC_GRAVITY[0]:g} to {SPECIFIC_GRAVITY[1]:g} (soil solids are about 2.65)")
        if m.void_ratio is not None and not m.void_ratio <= VOID_RATIO_MAX:
            raise SectionError(f"material '{name}': void_ratio {m.void_ratio:g} is more than {VOID_RATIO_MAX:g}")
    x0, y0, x1, y1 = outline.bounds
    margin = max(HEAD_MARGIN, 10.0 * extent)

    def level(what: str, h: float) -> None:
        off = max(y0 - h, h - y1, 0.0)
        if off > margin:
            side = "above the top" if h > y1 else "below the base"
            raise SectionError(f"{what}: {h:.6g} m lies {off:.4g} m {side} of the section (y = {y0:.6g} to "
                               f"{y1:.6g} m); a head is a water level in m: check the value and its units")

    for b in spec.boundaries:
        if b.head is not None:
            level(f"boundary '{b.name}': head", b.head)
        if b.flux is not None and abs(b.flux) > K_RANGE[1]:
            raise SectionError(f"boundary '{b.name}': flux {b.flux:g} m/s is more than the conductivity of any soil "
                               f"({K_RANGE[1]:g} m/s); check the value and its units")
    c = spec.checks
    if c.landside_water_level is not None:
        level("checks.landside_water_level", c.landside_water_level)
    for key in ("toe_x", "riverside_toe_x"):
        v = getattr(c, key)
        if v is not None and not x0 - tol <= v <= x1 + tol:
            raise SectionError(f"checks.{key}: x = {v:.6g} m is off the section (it spans x = {x0:.6g} to "
                               f"{x1:.6g} m)")
    if c.cutoff is not None:
        for x, y in c.cutoff:
            if not (x0 - tol <= x <= x1 + tol and y0 - tol <= y <= y1 + tol):
                raise SectionError(f"checks.cutoff: point [{x:.6g}, {y:.6g}] is off the section (x = {x0:.6g} to "
                                   f"{x1:.6g} m, y = {y0:.6g} to {y1:.6g} m)")
    if c.spacing is not None:
        length = sum(LineString(b.polyline).length for b in spec.boundaries)
        if length / c.spacing > MAX_CHECK_POINTS:
            raise SectionError(f"checks.spacing: {c.spacing:g} m would place about {length / c.spacing:.3g} check "
                               f"points along the boundaries (at most {MAX_CHECK_POINTS:.0e}); use a larger spacing")
    grown = outline.buffer(tol * 10)
    for i, r in enumerate(spec.mesh.refine):
        geom = LineString(r.polyline) if r.polyline is not None else ShapelyPoint(r.point)
        if not grown.intersects(geom):
            where = fmt_xy(r.polyline[0] if r.polyline is not None else r.point)
            raise SectionError(f"mesh.refine[{i}]: the {'polyline' if r.polyline is not None else 'point'} "
                               f"(at {where}) lies outside the section; it would refine nothing")


def _build(spec: SectionSpec, data: dict, label: str, notes: tuple = (), parts: dict | None = None) -> Section:
    from . import geometry        # scipy and the geometry checks only once the file has passed its schema
    # names
    names = [z.name for z in spec.zones]
    for n in names:
        if names.count(n) > 1:
            raise SectionError(f"zone '{n}' is defined {names.count(n)} times; zone names must be unique")
    bnames = [b.name for b in spec.boundaries]
    for n in bnames:
        if bnames.count(n) > 1:
            raise SectionError(f"boundary '{n}' is defined {bnames.count(n)} times; boundary names must be unique")
    for z in spec.zones:
        if z.material not in spec.materials:
            raise SectionError(f"zone '{z.name}': " + _unknown("material", z.material, list(spec.materials)))
    c = spec.checks
    if c.top_stratum is not None and c.top_stratum_depth is not None:
        raise SectionError("checks: give 'top_stratum' (zone names) or 'top_stratum_depth', not both")
    for n in c.top_stratum or ():
        if n not in names:
            raise SectionError("checks.top_stratum: " + _unknown("zone", n, names))
    if not any(b.kind == "head" for b in spec.boundaries):
        raise SectionError("no boundary prescribes a 'head': the head field would have no unique solution; "
                           "add at least one boundary with \"head\": <m>")

    _check_coordinates(spec)
    allpts = np.array([p for z in spec.zones for p in z.polygon], dtype=float)
    extent = float(np.ptp(allpts, axis=0).max()) if len(allpts) > 1 else 0.0
    if not extent > 0:
        raise SectionError("the zones have no extent")
    tol = 1e-7 * extent
    polys = [geometry.clean_polygon(f"zone '{z.name}'", z.polygon, tol) for z in spec.zones]
    outline = geometry.check_tiling(names, polys, extent)
    _check_plausible(spec, outline, extent, tol)
    blines = []
    for b in spec.boundaries:
        bl = np.asarray(b.polyline, dtype=float)
        keep = np.ones(len(bl), bool)
        keep[1:] = np.linalg.norm(np.diff(bl, axis=0), axis=1) > tol
        bl = bl[keep]
        if len(bl) < 2:
            raise SectionError(f"boundary '{b.name}': polyline has zero length")
        blines.append(bl)
    rnames = [r.name for r in spec.barriers]
    for n in rnames:
        if rnames.count(n) > 1:
            raise SectionError(f"barrier '{n}' is defined {rnames.count(n)} times; barrier names must be unique")
    rlines = geometry.check_barriers(rnames, [r.polyline for r in spec.barriers], outline, tol)
    graph = geometry.build_graph(names, polys, outline, bnames, blines, tol,
                                 barriers=tuple(zip(rnames, rlines)))
    if spec.solver.phreatic != "off":     # idealised confined problems may hold any heads (docs/format.md)
        # a hydrograph is checked at its highest stage (overtopping, water on the ground, an outlet below it)
        from .hydrograph import peak_spec
        _check_water_levels(peak_spec(spec) if any(b.hydrograph is not None for b in spec.boundaries) else spec,
                            outline, blines, polys, 10 * tol)
    return Section(spec=spec, source=label, data=data, input_hash=_hash(data), polygons=tuple(polys),
                   outline=outline, extent=extent, tol=tol, graph=graph, remedies=notes, boundary_parts=dict(parts or {}))
