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

__all__ = ["with_values", "get_value", "infer_unit", "unit_suffix"]


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
        for part in key.split("."):
            node = _step(node, part, key)
        return node
    raise SectionError(f"'{key}': not a declared parameter of the section and not a dotted path")


#: unit of a value by the last part of its dotted path (SI, as the section file uses)
_LEAF_UNITS = {
    "head": "m", "k": "m/s", "kx": "m/s", "ky": "m/s", "flux": "m/s", "unit_weight": "kN/m3",
    "angle": "deg", "size": "m", "width": "m", "x": "m", "y": "m", "top": "m", "bottom": "m",
    "thickness": "m", "length": "m", "depth": "m", "spacing": "m", "penetration": "m", "elevation": "m",
    "thickness_toe": "m", "thickness_end": "m", "radius": "m", "d70": "m", "void_ratio": "-",
    "specific_gravity": "-", "order": "-",
}


def infer_unit(data: dict, key: str) -> str | None:
    """Unit of a key: the declared unit of a named parameter, else from the last part of a dotted path."""
    if "." not in key:
        params = data.get("parameters")
        if isinstance(params, dict) and isinstance(params.get(key), dict):
            u = params[key].get("unit")
            if isinstance(u, str):
                return u
        return None
    return _LEAF_UNITS.get(key.rsplit(".", 1)[-1])


def unit_suffix(unit: str) -> str:
    """Column suffix of a unit: 'm/s' -> 'm_s', 'kN/m3' -> 'kN_m3', '-' -> '1' (dimensionless)."""
    if unit in ("-", "", "1"):
        return "1"
    return unit.replace("/", "_").replace(" ", "_")
