"""Sections to and from DXF drawings (ezdxf), and result lines as DXF.

Reading (``docs/dxf.md``): every **closed** polyline (LWPOLYLINE, or a 2D POLYLINE) is a zone; its
layer names the zone (a zone of the template or of the build file's ``zones``) or a material (then
the zone is named after the layer, numbered when the layer holds several). Every **open** polyline
(or LINE) on a layer named after a boundary of the build file (or the template) is that boundary's
polyline; on a layer named after a barrier, that barrier. Arcs (bulges), splines and blocks are not
read: flatten them to straight segments in the drawing. Other layers are ignored and listed.

Writing: each zone as a closed LWPOLYLINE on a layer named after the zone, each boundary and barrier
as an open LWPOLYLINE on a layer of its name, in the section file's length unit (``$INSUNITS``).
"""

from __future__ import annotations

import difflib
import re
from pathlib import Path
from typing import Any

from .errors import SectionError

__all__ = ["read_drawing", "write_section_dxf", "write_lines_dxf", "layer_name", "INSUNITS"]

#: DXF $INSUNITS codes of the length units seepfe knows (DXF reference: 1 inches, 2 feet, 6 meters)
INSUNITS = {"ft": 2, "m": 6}
_BAD = re.compile(r'[<>/\\":;?*|=`,]')


def layer_name(name: str) -> str:
    """A name as a DXF layer name (characters DXF forbids in layer names become '_')."""
    return _BAD.sub("_", name).strip() or "_"


def _ezdxf():
    try:
        import ezdxf
    except ImportError:                                    # pragma: no cover - a declared dependency
        raise SectionError("reading and writing DXF needs the ezdxf package: pip install ezdxf") from None
    return ezdxf


# --------------------------------------------------------------------------- writing
def _new_doc(length_unit: str):
    ezdxf = _ezdxf()
    doc = ezdxf.new("R2010", setup=False)
    doc.header["$INSUNITS"] = INSUNITS.get(length_unit, 0)
    doc.header["$MEASUREMENT"] = 1 if length_unit == "m" else 0
    return doc


def _layer(doc, name: str, color: int = 7) -> str:
    ln = layer_name(name)
    if ln not in doc.layers:
        doc.layers.add(ln, color=color)
    return ln


def write_section_dxf(section, path) -> None:
    """The zones, boundaries and barriers of a loaded section as a DXF drawing, in the file's length unit."""
    u = section.units
    f = 1.0 / u.factor("length")
    doc = _new_doc(u.length)
    msp = doc.modelspace()
    names = [layer_name(z.name) for z in section.spec.zones] + [layer_name(b.name) for b in section.spec.boundaries] \
        + [layer_name(b.name) for b in section.spec.barriers]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise SectionError(f"{section.source}: zones, boundaries and barriers need distinct names to become DXF "
                           f"layers; '{dup[0]}' is used twice")
    for i, z in enumerate(section.spec.zones):
        ln = _layer(doc, z.name, color=1 + i % 6)
        msp.add_lwpolyline([(x * f, y * f) for x, y in z.polygon], format="xy", close=True, dxfattribs={"layer": ln})
    for b in section.spec.boundaries:
        ln = _layer(doc, b.name, color=5)
        msp.add_lwpolyline([(x * f, y * f) for x, y in b.polyline], format="xy", close=False,
                           dxfattribs={"layer": ln})
    for b in section.spec.barriers:
        ln = _layer(doc, b.name, color=8)
        msp.add_lwpolyline([(x * f, y * f) for x, y in b.polyline], format="xy", close=False,
                           dxfattribs={"layer": ln})
    _save(doc, path)


def write_lines_dxf(path, layers: dict[str, list], length_unit: str = "m") -> None:
    """Polylines by layer (``{"phreatic line": [array (n, 2), ...], ...}``) as a DXF drawing."""
    doc = _new_doc(length_unit)
    msp = doc.modelspace()
    for i, (name, lines) in enumerate(layers.items()):
        ln = _layer(doc, name, color=1 + i % 6)
        for pts in lines:
            if len(pts) >= 2:
                msp.add_lwpolyline([(float(x), float(y)) for x, y in pts], format="xy", dxfattribs={"layer": ln})
    _save(doc, path)


def _save(doc, path) -> None:
    try:
        doc.saveas(str(path))
    except OSError as e:
        raise SectionError(f"{path}: cannot write the drawing ({e.strerror or e})") from None


# --------------------------------------------------------------------------- reading
def _entities(path: Path, label: str) -> tuple[list[tuple[str, bool, list]], int, list[str]]:
    """[(layer, closed, [[x, y], ...])], $INSUNITS, [skipped entity kinds by layer]."""
    ezdxf = _ezdxf()
    if not path.is_file():
        raise SectionError(f"{label}: cannot read {path} ({'not a regular file' if path.exists() else 'no such file'})")
    from .jsonin import MAX_INPUT_BYTES
    if path.stat().st_size > 4 * MAX_INPUT_BYTES:
        raise SectionError(f"{label}: {path}: larger than {4 * MAX_INPUT_BYTES // (1024 * 1024)} MiB; not a section "
                           "drawing")
    try:
        doc = ezdxf.readfile(str(path))
    except Exception as e:        # ezdxf raises several kinds on a damaged or foreign file
        why = str(e).replace(str(path), "").replace("File ''", "it").strip()
        raise SectionError(f"{label}: {path}: not a readable DXF file ({why or type(e).__name__})") from None
    out, skipped = [], []
    for e in doc.modelspace():
        kind = e.dxftype()
        layer = e.dxf.layer
        if kind == "LWPOLYLINE":
            pts = [(x, y, b) for x, y, b in e.get_points("xyb")]
            closed = bool(e.closed)
        elif kind == "POLYLINE" and not (e.is_3d_polyline or e.is_poly_face_mesh or e.is_polygon_mesh):
            pts = [(v.dxf.location[0], v.dxf.location[1], v.dxf.get("bulge", 0.0)) for v in e.vertices]
            closed = bool(e.is_closed)
        elif kind == "LINE":
            pts = [(e.dxf.start[0], e.dxf.start[1], 0.0), (e.dxf.end[0], e.dxf.end[1], 0.0)]
            closed = False
        else:
            skipped.append(f"{kind} on '{layer}'")
            continue
        if any(abs(b) > 1e-12 for _, _, b in (pts if closed else pts[:-1])):
            raise SectionError(f"{label}: {path}: a polyline on layer '{layer}' has arc segments (bulges); "
                               "flatten them to straight segments in the drawing")
        xy = [[float(x), float(y)] for x, y, _ in pts]
        if closed and len(xy) > 1 and xy[0] == xy[-1]:
            xy.pop()
        out.append((layer, closed, xy))
    return out, int(doc.header.get("$INSUNITS", 0)), skipped


def read_drawing(build: dict, base: Path | str = ".", label: str = "<build>", notes: list | None = None) -> dict:
    """The section dict described by a build dict with a ``"drawing"`` (a DXF file).

    Keys besides ``drawing``: ``template`` (a section file whose materials, zone materials, boundary
    conditions, barriers, mesh, water, solver, checks, title and units are used; its parameters and
    remedies are not, the drawing holds the geometry), and any of ``title``, ``units``,
    ``materials``, ``zones`` ({zone or layer: material}), ``boundaries`` ({name: {"head": ...} or
    {"seepage_face": true} ...}), ``barriers`` ([names]), ``mesh``, ``water``, ``solver``, ``checks``,
    which override the template's. ``notes`` (a list) receives one line per layer or entity left out.
    """
    from .section import _read
    from .units import parse_units
    base = Path(base)
    known = {"drawing", "template", "title", "units", "materials", "zones", "boundaries", "barriers", "mesh",
             "water", "solver", "checks", "$schema", "description"}
    for k in build:
        if k not in known:
            near = difflib.get_close_matches(k, sorted(known), n=1)
            raise SectionError(f"{label}: unknown key '{k}'" + (f" (did you mean '{near[0]}'?)" if near else ""))
    tpl: dict[str, Any] = {}
    if build.get("template") is not None:
        if not isinstance(build["template"], str):
            raise SectionError(f"{label}: template: expected the name of a section file")
        tpl, _ = _read(base / build["template"])
        from . import params
        tpl = params.resolve(tpl, str(base / build["template"]))
    g = lambda k, d=None: build.get(k, tpl.get(k, d))            # noqa: E731
    units = parse_units(g("units"), label)
    materials = g("materials")
    if not isinstance(materials, dict) or not materials:
        raise SectionError(f"{label}: materials: give them (as in a section file) or a 'template' section file")
    zone_mat: dict[str, str] = {z["name"]: z["material"] for z in tpl.get("zones", [])
                                if isinstance(z, dict) and isinstance(z.get("name"), str)}
    drains = {z["name"] for z in tpl.get("zones", []) if isinstance(z, dict) and z.get("drain")}
    zone_mat.update(build.get("zones") or {})
    bconds: dict[str, dict] = {b["name"]: {k: v for k, v in b.items() if k not in ("name", "polyline")}
                               for b in tpl.get("boundaries", []) if isinstance(b, dict) and "name" in b}
    bconds.update(build.get("boundaries") or {})
    barriers = [b["name"] for b in tpl.get("barriers", []) if isinstance(b, dict) and "name" in b]
    barriers += [b for b in build.get("barriers") or [] if b not in barriers]
    if not isinstance(build.get("drawing"), str):
        raise SectionError(f"{label}: drawing: expected the name of a DXF file")
    path = base / build["drawing"]
    ents, insunits, skipped = _entities(path, label)
    want = INSUNITS.get(units.length)
    if insunits not in (0, want):
        code = {v: k for k, v in INSUNITS.items()}.get(insunits, f"code {insunits}")
        raise SectionError(f"{label}: {build['drawing']} is drawn in {code} ($INSUNITS) but the section's length "
                           f"unit is {units.length}; set \"units\" to match the drawing")

    by_layer = {layer_name(n): n for n in list(zone_mat) + list(bconds) + barriers}
    mat_layer = {layer_name(m): m for m in materials}
    zones, lines, ignored = [], {}, []
    counts: dict[str, int] = {}
    for layer, closed, _ in ents:
        if closed:
            counts[layer] = counts.get(layer, 0) + 1
    seen: dict[str, int] = {}
    for layer, closed, xy in ents:
        if closed:
            name = by_layer.get(layer)
            if name is not None and name in zone_mat:
                mat = zone_mat[name]
            elif layer in mat_layer:
                mat = mat_layer[layer]
                name = layer
            else:
                near = difflib.get_close_matches(layer, list(mat_layer) + list(zone_mat), n=1)
                hint = f" (did you mean '{near[0]}'?)" if near else ""
                raise SectionError(f"{label}: {build['drawing']}: a closed polyline on layer '{layer}', which names "
                                   f"no zone and no material{hint}")
            if counts[layer] > 1:
                seen[layer] = seen.get(layer, 0) + 1
                name = f"{name} {seen[layer]}"
            z = {"name": name, "material": mat, "polygon": xy}
            if name in drains:
                z["drain"] = True
            zones.append(z)
        else:
            name = by_layer.get(layer)
            if name is None or (name not in bconds and name not in barriers):
                ignored.append(layer)
                continue
            if name in lines:
                raise SectionError(f"{label}: {build['drawing']}: layer '{layer}' holds more than one open polyline; "
                                   "draw each boundary as one polyline")
            lines[name] = xy
    if not zones:
        raise SectionError(f"{label}: {build['drawing']}: no closed polylines: draw each zone as a closed polyline "
                           "on a layer named after its zone or material")
    missing = [n for n in bconds if n not in lines]
    if missing:
        raise SectionError(f"{label}: {build['drawing']}: no polyline on layer '{layer_name(missing[0])}' for boundary "
                           f"'{missing[0]}'")
    out: dict[str, Any] = {"title": g("title", "")}
    if g("units") is not None:
        out["units"] = g("units")
    used = {z["material"] for z in zones}
    out["materials"] = {k: v for k, v in materials.items() if k in used}
    out["zones"] = zones
    out["boundaries"] = [{"name": n, "polyline": lines[n], **c} for n, c in bconds.items()]
    bars = [{"name": n, "polyline": lines[n]} for n in barriers if n in lines]
    if bars:
        out["barriers"] = bars
    for k in ("mesh", "water", "solver", "checks"):
        if g(k) is not None:
            out[k] = g(k)
    if notes is not None:
        if ignored:
            notes.append(f"{build['drawing']}: open polylines on layers that name no boundary or barrier were left out: "
                         f"{', '.join(sorted(set(ignored)))}")
        if skipped:
            notes.append(f"{build['drawing']}: entities other than polylines and lines were left out: "
                         f"{', '.join(sorted(set(skipped))[:8])}")
    return out
