"""Apply sweep values to a section dict: ``with_values(data, overrides)`` and friends.

A key is a declared parameter name (``"stage"``) or a dotted path into the section file
(``"materials.sand.kx"``, ``"boundaries.river.head"``; list items are addressed by their ``"name"``,
or by a plain index).  When :mod:`seepfe.params` is present its ``with_values`` is used, so named
parameters and expressions work; otherwise a minimal dotted-path setter below stands in.
"""

from __future__ import annotations

import copy
import difflib
import importlib
from typing import Any

from ..errors import SectionError

__all__ = ["with_values", "get_value", "infer_unit", "unit_suffix"]


def _params_module():
    try:
        return importlib.import_module("seepfe.params")
    except ImportError:
        return None


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


def _set_path(data: dict, path: str, value) -> None:
    parts = path.split(".")
    node: Any = data
    for part in parts[:-1]:
        node = _step(node, part, path)
    last = parts[-1]
    if isinstance(node, dict):
        # a new key is allowed only beside existing ones (e.g. 'k' -> the loader names a bad key)
        node[last] = value
    elif isinstance(node, list) and last.lstrip("-").isdigit() and -len(node) <= int(last) < len(node):
        node[int(last)] = value
    else:
        raise SectionError(f"'{path}': cannot set '{last}' here")


def _fallback_with_values(data: dict, overrides: dict) -> dict:
    out = copy.deepcopy(data)
    for key, value in overrides.items():
        if "." in key:
            _set_path(out, key, value)
        else:
            params = out.get("parameters")
            if not isinstance(params, dict) or key not in params:
                raise SectionError(f"'{key}': not a declared parameter of the section and not a dotted "
                                   "path (write e.g. 'boundaries.river.head')")
            if isinstance(params[key], dict):
                params[key]["value"] = value
            else:
                params[key] = value
    return out


def with_values(data: dict, overrides: dict, label: str = "<dict>") -> dict:
    """A deep copy of the section dict with ``overrides`` ({key: value}) applied.

    Uses :func:`seepfe.params.with_values` when that module exists.
    """
    mod = _params_module()
    if mod is not None and hasattr(mod, "with_values"):
        return mod.with_values(data, overrides, label)
    try:
        return _fallback_with_values(data, overrides)
    except SectionError as e:
        raise SectionError(f"{label}: {e}") from None


def get_value(data: dict, key: str):
    """The current value of a key (dotted path or declared parameter) in the section dict."""
    mod = _params_module()
    if mod is not None and hasattr(mod, "resolve"):
        if "." not in key and key in (data.get("parameters") or {}):
            return mod.parameter_values(data)[key]
        data = mod.resolve(data)         # expressions -> numbers, so the base value is a number
    if "." in key:
        node: Any = data
        for part in key.split("."):
            node = _step(node, part, key)
        return node
    params = data.get("parameters")
    if isinstance(params, dict) and key in params:
        v = params[key]
        return v.get("value", v.get("default")) if isinstance(v, dict) else v
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
