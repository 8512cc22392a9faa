"""Apply sweep values to a section dict: ``with_values(data, overrides)`` and friends.

A key is a declared parameter name (``"stage"``) or a dotted path into the section file
(``"materials.sand.kx"``, ``"boundaries.river.head"``; list items are addressed by their ``"name"``,
or by a plain index); values are set by :func:`seepfe.params.with_values`, so named parameters and
expressions work.
"""

from __future__ import annotations

import difflib
from typing import Any

from .. import params
from ..errors import SectionError

__all__ = ["with_values", "get_value", "infer_unit", "unit_suffix", "key_dimension", "parameter_dimensions",
           "unit_and_factor"]


def _step(node: Any, part: str, path: str):
    """One step of a dotted path: dict key, list item by name, or list index."""
    if isinstance(node, dict):
        if part not in node:
            near = difflib.get_close_matches(part, [str(k) for k in node], n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else ""
            raise SectionError(f"'{path}': no key '{part}'{hint}")
        return node[part]
    if isinstance(node, list):
        for item in node:
            if isinstance(item, dict) and item.get("name") == part:
                return item
        if part.lstrip("-").isdigit() and -len(node) <= int(part) < len(node):
            return node[int(part)]
        names = [it.get("name") for it in node if isinstance(it, dict) and isinstance(it.get("name"), str)]
        near = difflib.get_close_matches(part, names, n=1)
        hint = f" (did you mean '{near[0]}'?)" if near else f" (known: {', '.join(names) or 'none'})"
        raise SectionError(f"'{path}': no item named '{part}'{hint}")
    raise SectionError(f"'{path}': '{part}' is inside a value, not an object or list")


def with_values(data: dict, overrides: dict, label: str = "<dict>") -> dict:
    """A deep copy of the section dict with ``overrides`` ({key: value}) applied (:func:`seepfe.params.with_values`)."""
    return params.with_values(data, overrides, label)


def get_value(data: dict, key: str):
    """The current value of a key (dotted path or declared parameter) in the section dict."""
    if "." not in key and key in (data.get("parameters") or {}):
        return params.parameter_values(data)[key]
    data = params.resolve(data)          # expressions -> numbers, so the base value is a number
    if "." in key:
        node: Any = data
        parts = key.split(".")
        for i, part in enumerate(parts):
            if (i == len(parts) - 1 and isinstance(node, dict) and part in ("peak", "duration")
                    and part not in node and isinstance(node.get("hydrograph"), list)):
                # a hydrograph's peak and duration as written (sweeps vary them, docs/transient.md)
                pts = [p for p in node["hydrograph"] if isinstance(p, list) and len(p) == 2]
                if pts:
                    return max(p[1] for p in pts) if part == "peak" else pts[-1][0] - pts[0][0]
            node = _step(node, part, key)
        return node
    raise SectionError(f"'{key}': not a declared parameter of the section and not a dotted path")


def key_dimension(data: dict, key: str) -> str | None:
    """Dimension of a key of the section file: 'length', 'conductivity', 'flux', 'unit_weight',
    'per_length', 'angle' or '-' (a number without one); None when it cannot be told.

    A dotted path is looked up in the schema's dimension markers (``seepfe.schema``, ``seepfe.remedies``);
    a parameter name takes the dimension of the fields it is used in (see :func:`parameter_dimensions`).
    """
    from .. import remedies as rem
    from ..schema import SectionSpec
    from ..units import dimension_of
    if "." not in key:
        return parameter_dimensions(data).get(key)
    steps = key.split(".")
    if steps[0] == "parameters" and len(steps) == 2:
        return parameter_dimensions(data).get(steps[1])
    if steps[0] == "remedies":
        return dimension_of(list[rem.Remedy], steps[1:], data.get("remedies"))
    return dimension_of(SectionSpec, steps, data)


def parameter_dimensions(data: dict) -> dict[str, str]:
    """{parameter: dimension} of the declared parameters whose dimension the file tells.

    A parameter used as a term of a sum (``"=stage"``, ``"=-3 - depth"``, ``"=max(a, b) + 1"``) in a field
    with a dimension has that dimension; a parameter defined as such a sum passes its dimension on to its
    terms. Names inside products, quotients and powers tell nothing. A parameter used with two
    different dimensions gets none.
    """
    from .. import params as P
    from .. import remedies as rem
    from ..schema import SectionSpec
    from ..units import walk
    params = data.get("parameters") if isinstance(data.get("parameters"), dict) else {}
    if not params:
        return {}
    found: dict[str, set] = {}

    def terms(text: str) -> list[str]:
        try:
            tree = P.parse(text)
        except Exception:
            return []
        out: list[str] = []

        def go(t):
            if t[0] == "name":
                out.append(t[1])
            elif t[0] == "neg":
                go(t[1])
            elif t[0] == "bin" and t[1] in "+-":
                go(t[2])
                go(t[3])
            elif t[0] == "call" and t[1] in ("min", "max", "abs"):
                for a in t[2]:
                    go(a)
        go(tree)
        return out

    def visit_expr(dim, text, path):
        for n in terms(text):
            found.setdefault(n, set()).add(dim.name)
        return text

    body = {k: v for k, v in data.items() if k not in ("parameters", "remedies")}
    walk(SectionSpec, body, lambda d, v, p: v, on_expr=visit_expr)
    if isinstance(data.get("remedies"), list):
        walk(list[rem.Remedy], data["remedies"], lambda d, v, p: v, on_expr=visit_expr)
    # pass dimensions down the parameters' own definitions until nothing changes
    for _ in range(len(params) + 1):
        changed = False
        for name, v in params.items():
            dims = found.get(name, set())
            if len(dims) != 1 or not (isinstance(v, str) and v.startswith("=")):
                continue
            for n in terms(v):
                if n != name and n in params and dims - found.get(n, set()):
                    found.setdefault(n, set()).update(dims)
                    changed = True
        if not changed:
            break
    return {n: next(iter(d)) for n, d in found.items() if n in params and len(d) == 1}


def infer_unit(data: dict, key: str, units=None) -> str | None:
    """Unit of a key as the file writes it (``units``: default the file's own ``"units"``): 'm', 'ft/day',
    '-', 'deg'; None when its dimension cannot be told."""
    from ..units import parse_units
    dim = key_dimension(data, key)
    if dim == "time":
        return _time_unit(data, key)              # a hydrograph's time: its own time_unit
    if dim is None:
        params = data.get("parameters")
        if "." not in key and isinstance(params, dict) and isinstance(params.get(key), dict):
            u = params[key].get("unit")
            if isinstance(u, str):
                return u
        return None
    if units is None:
        try:
            units = parse_units(data.get("units"))
        except SectionError:
            return None
    return units.label(dim)


#: the unit table's dimension a key's dimension is converted with
_BASE = {"length": "length", "head": "length", "conductivity": "conductivity", "flux": "conductivity",
         "unit_weight": "unit_weight", "pressure": "pressure"}


def unit_and_factor(data: dict, key: str, explicit: str | None, sweep_units, file_units,
                    label: str = "<sweep>") -> tuple[str | None, float]:
    """(unit the sweep's values of ``key`` are in, factor to the section file's units).

    ``explicit`` is an entry's own ``"unit"``: a unit of the table (``"cm/s"``) converts, any other
    text only labels (allowed only where the key has no convertible dimension).
    """
    from ..units import FACTORS, unit_dimension
    dim = key_dimension(data, key)
    base = _BASE.get(dim or "")
    if explicit is not None:
        udim = unit_dimension(explicit)
        if udim is None:
            if base is not None:
                raise SectionError(f"{label}: '{key}': unit '{explicit}' is not a unit of {base.replace('_', ' ')} "
                                   f"here (allowed: {', '.join(FACTORS[base])})")
            return explicit, 1.0
        if base is not None and udim != base:
            raise SectionError(f"{label}: '{key}': unit '{explicit}' is a unit of {udim.replace('_', ' ')}, but "
                               f"'{key}' is a {base.replace('_', ' ')} ({', '.join(FACTORS[base])})")
        return explicit, FACTORS[udim][explicit] / FACTORS[udim][getattr(file_units, udim)]
    if dim == "time" and explicit is None:
        return _time_unit(data, key), 1.0         # a hydrograph's time: in its own time_unit, never converted
    if dim is None:
        if sweep_units != file_units:
            raise SectionError(f"{label}: '{key}': cannot tell its dimension to convert it from the sweep's units; "
                               "add \"unit\" to its entry")
        return None, 1.0
    return sweep_units.label(dim), sweep_units.factor(dim) / file_units.factor(dim)


def unit_suffix(unit: str) -> str:
    """Column suffix of a unit: 'm/s' -> 'm_s', 'kN/m3' -> 'kN_m3', '-' -> '1' (dimensionless)."""
    if unit in ("-", "", "1"):
        return "1"
    return unit.replace("/", "_").replace(" ", "_").replace("*", "_")


def _time_unit(data: dict, key: str) -> str:
    """The time unit a hydrograph time is written in: the key's own boundary's 'time_unit', else the first
    hydrograph's ('hour' or 'day'), else '-'."""
    bs = [b for b in data.get("boundaries") or [] if isinstance(b, dict) and b.get("hydrograph") is not None]
    parts = key.split(".")
    if len(parts) > 1 and parts[0] == "boundaries":
        for b in bs:
            if b.get("name") == parts[1] and isinstance(b.get("time_unit"), str):
                return b["time_unit"]
    for b in bs:
        if isinstance(b.get("time_unit"), str):
            return b["time_unit"]
    return "-"
