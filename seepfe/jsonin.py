"""Reading the JSON input files (sections, sweeps) without surprises.

Every input file is read with a size cap (``/dev/zero`` or a wrong file never fills the memory), must
be UTF-8 (a UTF-16 file gets a hint), may not repeat a key in one object (JSON would keep the last one
silently), may not nest deeper than :data:`MAX_DEPTH`, and may hold no integer longer than
:data:`MAX_INT_DIGITS` digits and no NaN or Infinity.  Each fault is one line naming the file.
Dicts handed to the API get the same depth and number checks through :func:`check_tree`.
"""

from __future__ import annotations

import json
import math
import os
import re
from pathlib import Path
from typing import Any

from .errors import SectionError

__all__ = ["read_json", "read_text", "read_bytes", "check_tree", "MAX_INPUT_BYTES", "MAX_DEPTH", "MAX_INT_DIGITS",
           "json_type"]

#: largest input file read, bytes (a section with a 100,000-vertex polygon is about 4 MB)
MAX_INPUT_BYTES = 64 * 1024 * 1024
#: deepest nesting of objects and lists (real files nest about 6 deep)
MAX_DEPTH = 40
#: longest integer literal, digits (10**300 still converts to a float)
MAX_INT_DIGITS = 300


class _Fault(ValueError):
    """A fault found while parsing (the message is complete, without the file name)."""


def json_type(v: Any) -> str:
    """The JSON name of a Python value's type, for messages: null, true, a number, a string, a list, an object."""
    if v is None:
        return "null"
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return "a number"
    if isinstance(v, str):
        return "a string"
    if isinstance(v, (list, tuple)):
        return "a list"
    if isinstance(v, dict):
        return "an object"
    return type(v).__name__


def _pairs(pairs: list) -> dict:
    out: dict = {}
    for k, v in pairs:
        if k in out:
            keys = dict(pairs)
            name = keys.get("name")
            where = f" in the object named '{name}'" if isinstance(name, str) and k != "name" else ""
            raise _Fault(f"duplicate key '{k}'{where}: JSON would keep only the last one; give each key once")
        out[k] = v
    return out


def _int(s: str) -> int:
    if len(s.lstrip("-")) > MAX_INT_DIGITS:
        raise _Fault(f"a number with {len(s.lstrip('-'))} digits is out of range")
    return int(s)


def _constant(name: str):
    raise _Fault(f"'{name}' is not a number JSON allows; write a finite number")


def _where(text: str, pattern: str) -> str:
    blank = re.sub(r'"(?:\\.|[^"\\])*"', lambda m: " " * len(m.group()), text)
    m = re.search(pattern, blank)
    if not m:
        return ""
    line = text.count("\n", 0, m.start()) + 1
    col = m.start() - (text.rfind("\n", 0, m.start()) + 1) + 1
    return f"line {line}, column {col}: "


def _decode(raw: bytes, label: str) -> str:
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise SectionError(f"{label}: the file is UTF-16 text (it starts with a UTF-16 byte-order mark); "
                           "save it as UTF-8")
    head = raw[:200]
    if len(head) >= 4 and head.count(0) >= len(head) // 3:
        raise SectionError(f"{label}: the file looks like UTF-16 (or UTF-32) text without a byte-order mark "
                           "(every other byte is zero); save it as UTF-8")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        line = raw[:e.start].count(b"\n") + 1
        col = e.start - (raw.rfind(b"\n", 0, e.start) + 1) + 1
        raise SectionError(f"{label}: not UTF-8 text at line {line}, column {col} (byte 0x{raw[e.start]:02x}); "
                           "save the file as UTF-8") from None


def read_bytes(path: str | os.PathLike, what: str = "file", cap: int = MAX_INPUT_BYTES,
               label: str | None = None) -> bytes:
    """The bytes of one input file, read with a size cap (``/dev/zero`` or a wrong file never fills the
    memory); one-line SectionError starting with ``label`` (default: the path) on any fault."""
    p = Path(path)
    label = str(p) if label is None else label
    where = "" if label == str(p) else f"{p}: "
    if p.is_dir():
        raise SectionError(f"{label}: {where}is a folder; give the {what}")
    try:
        with open(p, "rb") as fh:
            raw = fh.read(cap + 1)
    except OSError as e:
        raise SectionError(f"{label}: {where}cannot read the file ({e.strerror or e})") from None
    if len(raw) > cap:
        raise SectionError(f"{label}: {where}larger than {cap // (1024 * 1024)} MiB; not a {what}")
    return raw


def read_text(path: str | os.PathLike, what: str = "file", cap: int = MAX_INPUT_BYTES,
              label: str | None = None) -> str:
    """The text of one UTF-8 input file (a UTF-16 file gets a hint), read with a size cap."""
    raw = read_bytes(path, what, cap, label)
    p = Path(path)
    lab = str(p) if label is None else (label if label == str(p) else f"{label}: {p}")
    return _decode(raw, lab)


def read_json(path: str | os.PathLike, what: str = "file", cap: int = MAX_INPUT_BYTES) -> Any:
    """Read, decode and parse one JSON input file; one-line SectionError (starting with the path) on any fault."""
    p = Path(path)
    label = str(p)
    raw = read_bytes(p, f"{what} (a JSON file)", cap)
    text = _decode(raw, label)
    try:
        data = json.loads(text, object_pairs_hook=_pairs, parse_int=_int, parse_constant=_constant)
    except json.JSONDecodeError as e:
        raise SectionError(f"{label}: not valid JSON at line {e.lineno}, column {e.colno}: {e.msg}") from None
    except _Fault as e:
        pos = ""
        if "is not a number JSON allows" in str(e):
            pos = _where(text, r"-?\b(?:NaN|Infinity)\b")
        elif "digits is out of range" in str(e):
            pos = _where(text, r"-?\d{%d,}" % (MAX_INT_DIGITS + 1))
        raise SectionError(f"{label}: {pos}{e}") from None
    except ValueError as e:              # int conversion limits and the like
        raise SectionError(f"{label}: {str(e).split(';')[0]}") from None
    except RecursionError:
        raise SectionError(f"{label}: nested too deeply (at most {MAX_DEPTH} levels of objects and lists)") from None
    try:
        check_tree(data)
    except SectionError as e:
        raise SectionError(f"{label}: {e}") from None
    return data


def check_tree(data: Any) -> None:
    """Refuse nesting deeper than MAX_DEPTH (a dict that holds itself included), integers longer than
    MAX_INT_DIGITS digits and non-finite numbers; iterative, so it never recurses."""
    stack = [(data, 0)]
    while stack:
        node, depth = stack.pop()
        if isinstance(node, (dict, list, tuple)):
            if depth >= MAX_DEPTH:
                raise SectionError(f"nested more than {MAX_DEPTH} levels deep (objects and lists); "
                                   "a section or sweep file nests about 6")
            stack.extend((v, depth + 1) for v in (node.values() if isinstance(node, dict) else node))
        elif isinstance(node, int) and not isinstance(node, bool):
            if abs(node) >= 10 ** MAX_INT_DIGITS:
                digits = int(node.bit_length() * math.log10(2)) + 1
                raise SectionError(f"a number with about {digits} digits is out of range")
        elif isinstance(node, float) and not math.isfinite(node):
            pass                         # the schema names the item (NaN and Infinity in dicts)
