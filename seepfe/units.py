"""Units of a section or sweep file: one table of exact factors, parsing of ``"units"``, conversion to SI.

seepfe computes in SI (m, s, m/s, kN/m3, kPa). A file may state other units with a top-level
``"units"`` key: a preset, ``"SI"`` (the default) or ``"US"`` (ft, ft/day, pcf, psf), or an object
with any of ``"length"``, ``"conductivity"``, ``"unit_weight"`` and ``"pressure"`` (keys left out stay
SI). Each number of the file has a *dimension*, declared once beside its schema field by a
:class:`Dim` marker (``seepfe.schema``, ``seepfe.remedies``); :func:`to_si` walks the data along the
pydantic models and multiplies every dimensioned number by its factor, once, after parameters and
sweep values are applied (so expressions and sweeps work in the file's units). The same markers
label the JSON Schema (``x-dimension``) and tell a sweep which unit a varied key is in.

Factors are exact by definition: 1 ft = 0.3048 m (international foot, 1959); 1 lbf = 0.45359237 kg x
9.80665 m/s2 (international pound and standard gravity); 1 day = 86400 s. They are kept as fractions
and turned into floats once.
"""

from __future__ import annotations

import difflib
import math
import re
import typing
import types
from dataclasses import dataclass
from fractions import Fraction
from typing import Any, Optional

from .errors import SectionError

__all__ = ["Dim", "Dims", "Units", "FACTORS", "PRESETS", "DIMENSIONS", "parse_units", "to_si", "dimension_of",
           "SI", "US", "K_RANGE", "unit_dimension", "conductivity_hints", "json_schema", "describe", "column_suffix", "display_columns", "display_text"]

_FT = Fraction(3048, 10000)                                  # m, exact (international foot)
_LBF = Fraction(45359237, 10 ** 8) * Fraction(980665, 10 ** 5)  # N, exact (pound-force)
_DAY = 86400

#: the one table of exact factors: value in SI = value in the unit x factor
EXACT: dict[str, dict[str, Fraction]] = {
    "length": {"m": Fraction(1), "ft": _FT},
    "conductivity": {"m/s": Fraction(1), "cm/s": Fraction(1, 100), "m/day": Fraction(1, _DAY),
                     "ft/day": _FT / _DAY, "ft/min": _FT / 60},
    "unit_weight": {"kN/m3": Fraction(1), "pcf": _LBF / _FT ** 3 / 1000},
    "pressure": {"kPa": Fraction(1), "psf": _LBF / _FT ** 2 / 1000},
}
FACTORS: dict[str, dict[str, float]] = {d: {u: float(f) for u, f in t.items()} for d, t in EXACT.items()}
#: the keys of a ``"units"`` object, in order
DIMENSIONS = tuple(EXACT)
PRESETS = {"SI": {"length": "m", "conductivity": "m/s", "unit_weight": "kN/m3", "pressure": "kPa"},
           "US": {"length": "ft", "conductivity": "ft/day", "unit_weight": "pcf", "pressure": "psf"}}

#: conductivities outside this range (m/s) are not soils or rocks and only break the arithmetic
#: (clean gravel is about 1 m/s, intact rock about 1e-13 m/s; common practice)
K_RANGE = (1e-20, 10.0)


@dataclass(frozen=True)
class Dim:
    """Marker of a number's dimension, put in ``Annotated[...]`` beside a schema field.

    ``name`` is a key of :data:`DIMENSIONS` or a derived one: ``"per_length"`` (1/m, e.g. van
    Genuchten's alpha), ``"flux"`` (m/s, a Darcy flux: converted with the conductivity unit).
    ``k_range`` marks a conductivity that must lie within :data:`K_RANGE`.
    """

    name: str
    k_range: bool = False

    def __get_pydantic_json_schema__(self, core_schema, handler):
        js = handler(core_schema)
        if isinstance(js, dict) and js.get("type") in ("number", "integer"):
            js["x-dimension"] = self.name
        return js


@dataclass(frozen=True)
class Dims:
    """Marker of the dimensions of a fixed-length list, by position (a hydrograph point [time, head] is
    ``Dims(("time", "length"))``). Each item is converted as a number with that :class:`Dim`; the JSON
    Schema lists them as ``prefixItems`` with their ``x-dimension``.

    ``"time"`` is not a dimension of the file's ``"units"``: such numbers are kept as written, in the unit
    their own object names (a hydrograph's ``time_unit``)."""

    names: tuple

    def __get_pydantic_json_schema__(self, core_schema, handler):
        js = handler(core_schema)
        if isinstance(js, dict) and js.get("type") == "array":
            item = js.get("items") if isinstance(js.get("items"), dict) else {"type": "number"}
            js["prefixItems"] = [{**item, "x-dimension": n} for n in self.names]
        return js


@dataclass(frozen=True)
class Units:
    """The units a file is written in (and results are shown in). Default: SI."""

    length: str = "m"
    conductivity: str = "m/s"
    unit_weight: str = "kN/m3"
    pressure: str = "kPa"

    # ----------------------------------------------------------------- factors
    def factor(self, dim: str) -> float:
        """SI value = file value x factor(dim)."""
        if dim in ("length", "head"):
            return FACTORS["length"][self.length]
        if dim in ("conductivity", "flux", "velocity"):
            return FACTORS["conductivity"][self.conductivity]
        if dim == "per_length":
            return 1.0 / FACTORS["length"][self.length]
        if dim == "area":
            return FACTORS["length"][self.length] ** 2
        if dim == "flow":           # per length of section: length x velocity
            return FACTORS["length"][self.length] * FACTORS["conductivity"][self.conductivity]
        if dim == "discharge":      # volume per time: length^2 x velocity
            return FACTORS["length"][self.length] ** 2 * FACTORS["conductivity"][self.conductivity]
        if dim in FACTORS:
            return FACTORS[dim][getattr(self, dim)]
        return 1.0                  # dimensionless, angle

    def label(self, dim: str) -> str:
        """The unit of a dimension as written in tables and axes: 'm', 'ft/day', 'ft3/day per ft'."""
        if dim in ("length", "head"):
            return self.length
        if dim in ("conductivity", "flux", "velocity"):
            return self.conductivity
        if dim == "per_length":
            return f"1/{self.length}"
        if dim == "area":
            return f"{self.length}2"
        if dim in ("flow", "discharge"):
            num, _, per = self.conductivity.partition("/")
            if num == self.length:
                return f"{self.length}3/{per}" + (f" per {self.length}" if dim == "flow" else "")
            return f"{self.length}*{self.conductivity}" if dim == "flow" else f"{self.length}2*{self.conductivity}"
        if dim in FACTORS:
            return getattr(self, dim)
        return "deg" if dim == "angle" else "-"

    def to_si(self, value, dim: str):
        return value * self.factor(dim)

    def from_si(self, value, dim: str):
        return value / self.factor(dim)

    @property
    def is_si(self) -> bool:
        return self == SI

    @property
    def name(self) -> str:
        """'SI', 'US' or the object form as text."""
        for n, p in PRESETS.items():
            if self.as_dict() == p:
                return n
        return ", ".join(f"{k} {v}" for k, v in self.as_dict().items())

    def as_dict(self) -> dict:
        return {d: getattr(self, d) for d in DIMENSIONS}


SI = Units()
US = Units(**PRESETS["US"])


def unit_dimension(unit: str) -> Optional[str]:
    """The dimension a unit name belongs to ('ft' -> 'length'), None if not in the table."""
    for d, t in FACTORS.items():
        if unit in t:
            return d
    return None


def parse_units(raw: Any, label: str = "<dict>") -> Units:
    """The :class:`Units` of a file's ``"units"`` value (None: SI). One-line SectionError on a fault."""
    if raw is None:
        return SI
    if isinstance(raw, str):
        key = raw.strip()
        for n in PRESETS:
            if key.upper() == n:
                return Units(**PRESETS[n])
        raise SectionError(f"{label}: units: unknown preset {raw!r} (use \"SI\" or \"US\", or an object such as "
                           "{\"length\": \"ft\", \"conductivity\": \"cm/s\"})")
    if not isinstance(raw, dict):
        raise SectionError(f"{label}: units: expected \"SI\", \"US\" or an object {{\"length\": ...}}, "
                           f"got {type(raw).__name__}")
    out = {}
    for k, v in raw.items():
        if k not in EXACT:
            near = difflib.get_close_matches(str(k), DIMENSIONS, n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else f" (allowed: {', '.join(DIMENSIONS)})"
            raise SectionError(f"{label}: units: unknown key '{k}'{hint}")
        if not isinstance(v, str) or v not in EXACT[k]:
            near = difflib.get_close_matches(str(v), list(EXACT[k]), n=1)
            hint = f"did you mean '{near[0]}'? " if near and near[0] != v else ""
            raise SectionError(f"{label}: units.{k}: unknown unit {json_str(v)} ({hint}allowed: "
                               f"{', '.join(EXACT[k])})")
        out[k] = v
    return Units(**out)


def json_schema() -> dict:
    """JSON Schema of a ``"units"`` value, from the factor table."""
    return {
        "title": "Units",
        "description": "units the file's numbers are written in: \"SI\" (default: m, m/s, kN/m3, kPa), "
                       "\"US\" (ft, ft/day, pcf, psf) or an object naming some of them (the rest stay SI); "
                       "values are converted to SI once, after parameters and sweep values are applied",
        "anyOf": [{"enum": list(PRESETS)},
                  {"type": "object", "additionalProperties": False,
                   "properties": {d: {"enum": list(t)} for d, t in EXACT.items()}}]}


def describe(dim: str) -> str:
    """' [length: m, or ft by "units"]' for a JSON Schema description."""
    if dim in ("length", "head"):
        choices = list(EXACT["length"])
    elif dim in ("conductivity", "flux"):
        choices = list(EXACT["conductivity"])
    elif dim == "per_length":
        choices = [f"1/{u}" for u in EXACT["length"]]
    elif dim in EXACT:
        choices = list(EXACT[dim])
    else:
        return ""
    word = {"flux": "conductivity unit", "per_length": "per length unit"}.get(dim, f"{dim.replace('_', ' ')} unit")
    return f" [the file's {word}: {choices[0]} by default; {', '.join(choices[1:])} by \"units\"]"


#: SI column-name endings and their dimensions (gradients 'm_per_m' have none), longest first
_COLUMN_DIMS = [("_m_per_m", None), ("_m3_s_per_m", "flow"), ("_kN_m3", "unit_weight"), ("_m_s", "velocity"),
                ("_kPa", "pressure"), ("_m", "length")]


def display_columns(columns: dict, units: "Units") -> dict:
    """The SI columns (names carry units: 'x_m', 'pore_pressure_kPa', 'vx_m_s') followed, where ``units``
    differ from SI, by the same values in those units ('x_ft', 'pore_pressure_psf', 'vx_ft_day')."""
    out = dict(columns)
    if units is None or units == SI:
        return out
    for name, v in columns.items():
        for end, dim in _COLUMN_DIMS:
            if name.endswith(end):
                if dim is not None and units.factor(dim) != 1.0:
                    new = name[: -len(end)] + "_" + column_suffix(units.label(dim))
                    if new not in out:
                        import numpy as np
                        out[new] = np.asarray(v, float) / units.factor(dim)
                break
    return out


_LEN_TEXT = re.compile(r"(?<![\w.])([+-]?\d+(?:\.(\d+))?) m(?![\w/³3])")


def display_text(text: str, units: "Units") -> str:
    """A message written in m with its lengths ('x = 274.32 m', '+256.2 m from the toe') in the display
    length unit, to the same number of decimals. Other units in the text are left as they are."""
    if units is None or units.length == "m":
        return text
    f = units.factor("length")

    def sub(m):
        dec = max(len(m.group(2) or ""), 1)
        v = float(m.group(1)) / f
        sign = "+" if m.group(1).startswith("+") and v >= 0 else ""
        return f"{sign}{v:.{dec}f} {units.length}"
    return _LEN_TEXT.sub(sub, text)


def column_suffix(unit: str) -> str:
    """A unit as the end of a CSV column name: 'ft' -> 'ft', 'ft/day' -> 'ft_day', 'ft3/day per ft' ->
    'ft3_day_per_ft', 'kN/m3' -> 'kN_m3', '-' -> '1'."""
    if unit in ("-", "", "1"):
        return "1"
    return re.sub(r"[^A-Za-z0-9]+", "_", unit).strip("_")


def json_str(v) -> str:
    import json
    try:
        return json.dumps(v)
    except (TypeError, ValueError):
        return repr(v)


# --------------------------------------------------------------------------- walking the models
def _strip(ann):
    """(bare annotation, list of metadata) with Annotated layers removed."""
    meta: list = []
    while typing.get_origin(ann) is typing.Annotated:
        args = typing.get_args(ann)
        ann, meta = args[0], meta + list(args[1:])
    return ann, meta


def _dim_in(meta) -> Optional[Dim]:
    for m in meta:
        if isinstance(m, Dim):
            return m
    return None


def _dims_in(meta) -> Optional[Dims]:
    for m in meta:
        if isinstance(m, Dims):
            return m
    return None


def _is_model(ann) -> bool:
    from pydantic import BaseModel
    return isinstance(ann, type) and issubclass(ann, BaseModel)


def _union_args(ann):
    if typing.get_origin(ann) in (typing.Union, types.UnionType):
        return [a for a in typing.get_args(ann) if a is not type(None)]
    return None


def _pick_model(args, node):
    """Of a union of models, the one whose literal 'type' matches the node (discriminated unions)."""
    models = [a for a in (_strip(x)[0] for x in args) if _is_model(a)]
    if len(models) == 1:
        return models[0]
    if isinstance(node, dict):
        for m in models:
            f = m.model_fields.get("type")
            if f is not None and node.get("type") in (typing.get_args(f.annotation) or ()):
                return m
    return None


def walk(ann, node, visit, path=(), on_expr=None):
    """Call ``visit(dim, value, path)`` on every dimensioned number of ``node`` and rebuild it with
    the values returned. ``ann`` is a pydantic model or an annotation; unknown parts are kept.
    ``on_expr(dim, text, path)``, if given, does the same for '=' expressions in dimensioned places."""
    ann, meta = _strip(ann)
    d = _dim_in(meta)
    if d is not None and isinstance(node, (int, float)) and not isinstance(node, bool):
        return visit(d, node, path)
    if d is not None and on_expr is not None and isinstance(node, str) and node.startswith("="):
        return on_expr(d, node, path)
    ds = _dims_in(meta)
    if ds is not None and isinstance(node, list):
        # positional dimensions ([time, head]): each item as a number of its own dimension
        return [walk(typing.Annotated[Any, Dim(ds.names[i])], v, visit, path + (i,), on_expr)
                if i < len(ds.names) else v for i, v in enumerate(node)]
    args = _union_args(ann)
    if args is not None:
        if len(args) == 1:
            return walk(args[0], node, visit, path, on_expr)
        m = _pick_model(args, node)
        if m is not None:
            return walk(m, node, visit, path, on_expr)
        for a in args:                       # e.g. list[float] | RangeSpec: the branch that fits the node
            b, _ = _strip(a)
            if (typing.get_origin(b) is list and isinstance(node, list)) or (_is_model(b) and isinstance(node, dict)):
                return walk(a, node, visit, path, on_expr)
        return node
    origin = typing.get_origin(ann)
    if origin is list and isinstance(node, list):
        (item,) = typing.get_args(ann) or (Any,)
        return [walk(item, v, visit, path + (i,), on_expr) for i, v in enumerate(node)]
    if origin is dict and isinstance(node, dict):
        item = typing.get_args(ann)[-1]
        return {k: walk(item, v, visit, path + (k,), on_expr) for k, v in node.items()}
    if _is_model(ann) and isinstance(node, dict):
        out = {}
        fields = ann.model_fields
        by_alias = {f.alias: n for n, f in fields.items() if f.alias}
        for k, v in node.items():
            name = k if k in fields else by_alias.get(k)
            if name is None:
                out[k] = v
                continue
            f = fields[name]
            fd = _dim_in(f.metadata)
            a = typing.Annotated[f.annotation, fd] if fd is not None else f.annotation
            out[k] = walk(a, v, visit, path + (k,), on_expr)
        return out
    return node


def dimension_of(model, steps: list[str], data: Any = None) -> Optional[str]:
    """The dimension of the number at a dotted path (``['materials', 'sand', 'kx']``) by the models.

    List items may be given by name or index; ``data`` (the file's dict) picks the model of a
    discriminated union (remedies). None where the path is unknown or dimensionless.
    """
    ann: Any = model
    node = data
    for step in steps:
        ann, meta = _strip(ann)
        ds = _dims_in(meta)
        if ds is not None and re.fullmatch(r"\d+", step) and int(step) < len(ds.names):
            ann = typing.Annotated[float, Dim(ds.names[int(step)])]      # positional: [time, head]
            node = None
            continue
        args = _union_args(ann)
        if args is not None:
            m = _pick_model(args, node) if len(args) > 1 else None
            ann = m if m is not None else (args[0] if len(args) == 1 else None)
            if ann is None:
                return None
            ann, meta = _strip(ann)
        origin = typing.get_origin(ann)
        if origin is list:
            ann = (typing.get_args(ann) or (Any,))[0]
            node = _item(node, step)
        elif origin is dict:
            ann = typing.get_args(ann)[-1]
            node = node.get(step) if isinstance(node, dict) else None
        elif _is_model(ann):
            f = ann.model_fields.get(step)
            if f is None:
                return None
            fd = _dim_in(f.metadata)
            ann = typing.Annotated[f.annotation, fd] if fd is not None else f.annotation
            node = node.get(step) if isinstance(node, dict) else None
        else:
            return None
    ann, meta = _strip(ann)
    d = _dim_in(meta)
    if d is None:
        args = _union_args(ann)
        if args is not None and len(args) == 1:
            ann, meta = _strip(args[0])
            d = _dim_in(meta)
    if d is not None:
        return d.name
    if ann in (int, float) or typing.get_origin(ann) is typing.Literal and all(
            isinstance(a, (int, float)) and not isinstance(a, bool) for a in typing.get_args(ann)):
        return "-"
    return None


def _item(node, step):
    if not isinstance(node, list):
        return None
    for it in node:
        if isinstance(it, dict) and it.get("name") == step:
            return it
    if re.fullmatch(r"-?\d+", step) and -len(node) <= int(step) < len(node):
        return node[int(step)]
    return None


# --------------------------------------------------------------------------- conversion
def to_si(model, data: dict, units: Units, label: str = "<dict>") -> dict:
    """A copy of ``data`` (resolved: numbers only) with every dimensioned number in SI.

    Conductivities marked ``k_range`` are checked against :data:`K_RANGE` here, in the file's unit,
    with a hint when the value looks typed in another conductivity unit.
    """
    def visit(d: Dim, v, path):
        si = float(v) * units.factor(d.name)
        if d.k_range and math.isfinite(si) and si > 0 and not K_RANGE[0] <= si <= K_RANGE[1]:
            lo, hi = (units.from_si(x, "conductivity") for x in K_RANGE)
            cu = units.conductivity
            msg = (f"{_where(data, path)}: {v:g} {cu} is outside the range of soils and rocks "
                   f"({lo:.3g} to {hi:.3g} {cu})")
            raise SectionError(f"{label}: {msg}{_magnitude_hint(v, units)}")
        return si
    if units.is_si:
        # nothing to convert (numbers are kept as written); the range check still runs
        def check(d, v, path):
            visit(d, v, path)
            return v
        return walk(model, data, check)
    return walk(model, data, visit)


def _where(data, path) -> str:
    """'material 'sand'.kx', 'zone 'core'.polygon[2][1]', 'remedies[0].k' from a walk path."""
    out: list[str] = []
    node = data
    for i, p in enumerate(path):
        prev = path[i - 1] if i else None
        if prev == "materials" and out and out[-1] == "materials":
            out[-1] = f"material '{p}'"
        elif isinstance(p, int) and prev in ("zones", "boundaries", "barriers", "remedies") and isinstance(node, list) \
                and isinstance(node[p], dict) and isinstance(node[p].get("name"), str):
            kind = {"zones": "zone", "boundaries": "boundary", "barriers": "barrier", "remedies": "remedy"}[prev]
            out[-1] = f"{kind} '{node[p]['name']}'"
        elif isinstance(p, int):
            out[-1:] = [f"{out[-1] if out else ''}[{p}]"]
        else:
            out.append(str(p))
        try:
            node = node[p]
        except (KeyError, IndexError, TypeError):
            node = None
    return ".".join(out)


#: typical conductivity of a soil named in a material's description, m/s (order of magnitude; common
#: practice, the classic ranges of Casagrande and Fadum (1940) as reproduced in Terzaghi, Peck and Mesri
#: (1996), Soil Mechanics in Engineering Practice, Table 4.3 / Fig. 4.4, from memory). Widened by a
#: factor of 100 on each side before anything is said: they only catch a slip of units, never judge a soil.
SOIL_K = [
    (("gravel",), (1e-4, 1.0)),
    (("sand",), (1e-7, 1e-2)),
    (("silt", "loess"), (1e-9, 1e-5)),
    (("clay",), (1e-12, 1e-7)),
]
_WIDEN = 100.0


def _soil_range(description: str) -> Optional[tuple[str, tuple[float, float]]]:
    """The soil word of a description and its widened k range (the last-named main soil wins:
    'silty sand' is a sand, 'sandy lean clay' a clay)."""
    text = description.lower()
    best = None
    for words, (lo, hi) in SOIL_K:
        for w in words:
            for m in re.finditer(rf"\b{w}\b", text):
                if best is None or m.start() > best[0]:
                    best = (m.start(), w, (lo / _WIDEN, hi * _WIDEN))
    return None if best is None else (best[1], best[2])


def _magnitude_hint(v: float, units: Units) -> str:
    """' (looks like cm/s: ...)' when the value read in another conductivity unit is a soil's."""
    for u in ("cm/s", "m/s", "ft/day", "m/day", "ft/min"):
        if u == units.conductivity:
            continue
        si = v * FACTORS["conductivity"][u]
        if 1e-12 <= si <= 1.0:
            return (f"; if the value is in {u}, say so with \"units\": {{\"conductivity\": \"{u}\"}} "
                    f"(values are read in {units.conductivity})")
    return ""


_UNIT_WORD = re.compile(r"(cm\s*/\s*s(?:ec)?|m\s*/\s*s(?:ec)?|ft\s*/\s*d(?:ay)?|m\s*/\s*d(?:ay)?|ft\s*/\s*min)\b",
                        re.IGNORECASE)
_CANON = {"cm/s": "cm/s", "cm/sec": "cm/s", "m/s": "m/s", "m/sec": "m/s", "ft/d": "ft/day", "ft/day": "ft/day",
          "m/d": "m/day", "m/day": "m/day", "ft/min": "ft/min"}


def conductivity_hints(materials: dict, units: Units) -> list[str]:
    """Warnings for conductivities that look typed in another unit than the file's.

    ``materials`` are the file's materials (values in the file's units, after parameters). Two signs:
    the description names a conductivity unit other than the file's, or it names a soil whose usual k
    the value misses by far while the value read in cm/s (or m/s) fits it.
    """
    out = []
    if not isinstance(materials, dict):
        return out                       # not an object: the schema says so, with the item
    for name, m in materials.items():
        if not isinstance(m, dict):
            continue
        desc = m.get("description") if isinstance(m.get("description"), str) else ""
        ks = [(key, m[key]) for key in ("k", "kx", "ky")
              if isinstance(m.get(key), (int, float)) and not isinstance(m.get(key), bool) and m[key] > 0]
        if not ks or not desc:
            continue
        cu = units.conductivity
        named = {_CANON.get(re.sub(r"\s+", "", x.lower()), "") for x in _UNIT_WORD.findall(desc)} - {""}
        if named and cu not in named:
            other = sorted(named)[0]
            out.append(f"material '{name}': its description mentions {other} but its {ks[0][0]} = {ks[0][1]:g} is "
                       f"read in {cu} (the file's conductivity unit); if the value is in {other}, "
                       f"add \"units\": {{\"conductivity\": \"{other}\"}}")
            continue
        soil = _soil_range(desc)
        if soil is None:
            continue
        word, (lo, hi) = soil
        for key, v in ks:
            si = v * units.factor("conductivity")
            if lo <= si <= hi:
                continue
            for u in ("cm/s", "m/s", "ft/day"):
                if u != cu and lo <= v * FACTORS["conductivity"][u] <= hi:
                    out.append(f"material '{name}': {key} = {v:g} {cu} is far from any {word} "
                               f"(about {lo * _WIDEN:.0e} to {hi / _WIDEN:.0e} m/s); it fits a {word} read in {u}: "
                               f"was it typed in {u}? (then add \"units\": {{\"conductivity\": \"{u}\"}})")
                    break
            break
    return out
