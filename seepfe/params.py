"""Named parameters and a small, safe expression language for section files.

A section file may declare numbers by name and use them wherever a number goes::

    "parameters": {"stage": 4.5, "cutoff_depth": 12.0, "wall_bottom": "=-2 - cutoff_depth"},
    "boundaries": [{"name": "river", "polyline": [[-150, 0], [-21, 0]], "head": "=stage"}],
    "zones": [{"name": "wall", "material": "grout", "polygon": [[0, 0], [0.6, 0], [0.6, "=wall_bottom"], [0, "=wall_bottom"]]}]

A string that starts with ``=`` is an expression. The language is numbers, declared parameter
names, ``+ - * / **``, unary minus and plus, parentheses and the functions ``min``, ``max``,
``abs`` and ``sqrt``. It is parsed here by a recursive-descent parser and evaluated on floats; it is
never handed to Python's ``eval``. Parameters may use other parameters (no cycles). The free-text
keys ``title`` and ``description`` and the ``project`` block (the report's title block) are never read as expressions.

API for sweeps and searches:

* :func:`resolve` (data) -> a new dict with every expression replaced by its value (a whole number
  as an int, so it also fills a count) and the ``parameters`` key removed; the input is not changed.
* :func:`with_values` (data, overrides) -> a deep copy of the *unresolved* data with overrides
  applied. A key is a declared parameter name (``"stage"``) or a dotted path into the file
  (``"materials.sand.kx"``, ``"boundaries.river.head"``, ``"zones.core.polygon.2.1"``): list items
  are addressed by their ``name`` or by index.

Every fault is a one-line :class:`~seepfe.errors.SectionError` naming the item and the fault.
"""

from __future__ import annotations

import copy
import difflib
import math
import re
from typing import Any

from .errors import SectionError
from .jsonin import json_type

__all__ = ["resolve", "with_values", "parameter_values", "evaluate", "parse", "FUNCTIONS",
           "FREE_TEXT_KEYS"]

#: the only functions an expression may call: name -> (min args, max args or None)
FUNCTIONS = {"min": (1, None), "max": (1, None), "abs": (1, 1), "sqrt": (1, 1)}
#: keys whose string values are free text, never expressions
FREE_TEXT_KEYS = frozenset({"title", "description", "project"})   # "project": the title block, all text
MAX_LENGTH = 400        # characters in one expression
MAX_DEPTH = 50          # nesting of parentheses / unary operators

_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_NUMBER = re.compile(r"(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
_PARAM_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")


class _ExprError(Exception):
    """Fault in one expression; col is the 1-based column in the whole string (with the '=')."""

    def __init__(self, msg: str, col: int | None = None):
        super().__init__(msg)
        self.msg, self.col = msg, col


# --------------------------------------------------------------------------- tokenizer and parser
def _tokens(text: str, base: int):
    """Yield (kind, value, col). kind: num, name, op, end. base: column offset of text[0] (1-based)."""
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        col = base + i
        if c in " \t":
            i += 1
            continue
        if not c.isascii() or not c.isprintable():
            raise _ExprError(f"unexpected character {c!r} (expressions are plain ASCII: digits 0-9, names, "
                             "+ - * / **, parentheses)", col)
        m = _NUMBER.match(text, i)
        if m and (c in "0123456789" or c == "."):
            yield "num", float(m.group()), col
            i = m.end()
            continue
        m = _NAME.match(text, i)
        if m:
            yield "name", m.group(), col
            i = m.end()
            continue
        if text.startswith("**", i):
            yield "op", "**", col
            i += 2
            continue
        if c in "+-*/(),":
            yield "op", c, col
            i += 1
            continue
        if c == "^":
            raise _ExprError("'^' is not an operator here; write '**' for a power", col)
        if c == ".":
            raise _ExprError("attribute access ('.') is not allowed", col)
        if c in "[]{}":
            raise _ExprError(f"'{c}' is not allowed (only numbers, names, + - * / **, parentheses "
                             "and min, max, abs, sqrt)", col)
        raise _ExprError(f"unexpected character {c!r}", col)
    yield "end", None, base + n


class _Parser:
    """Recursive descent over the grammar::

        expr   := term (('+' | '-') term)*
        term   := unary (('*' | '/') unary)*
        unary  := ('-' | '+') unary | power
        power  := atom ('**' unary)?            (right-associative; -2**2 = -4 as in algebra)
        atom   := number | name | func '(' expr (',' expr)* ')' | '(' expr ')'

    Produces a tree of tuples: ('num', v), ('name', s, col), ('neg', t), ('bin', op, a, b, col),
    ('call', f, [args], col).
    """

    def __init__(self, text: str, base: int):
        self.toks = _tokens(text, base)       # lazy: a fault is reported where the parser meets it
        self.next = next(self.toks)
        self.depth = 0

    def peek(self):
        return self.next

    def take(self):
        t = self.next
        if t[0] != "end":
            self.next = next(self.toks)
        return t

    def expect(self, op: str):
        k, v, col = self.take()
        if k != "op" or v != op:
            raise _ExprError(f"expected '{op}', found {_show(k, v)}", col)

    def parse(self):
        if self.peek()[0] == "end":
            raise _ExprError("empty expression after '='", self.peek()[2])
        t = self.expr()
        k, v, col = self.peek()
        if k != "end":
            raise _ExprError(f"unexpected {_show(k, v)}", col)
        return t

    def _deeper(self, col):
        self.depth += 1
        if self.depth > MAX_DEPTH:
            raise _ExprError(f"nested more than {MAX_DEPTH} deep", col)

    def expr(self):
        t = self.term()
        while self.peek()[0] == "op" and self.peek()[1] in "+-":
            _, op, col = self.take()
            t = ("bin", op, t, self.term(), col)
        return t

    def term(self):
        t = self.unary()
        while self.peek()[0] == "op" and self.peek()[1] in ("*", "/"):
            _, op, col = self.take()
            t = ("bin", op, t, self.unary(), col)
        return t

    def unary(self):
        k, v, col = self.peek()
        if k == "op" and v in "+-":
            self.take()
            self._deeper(col)
            inner = self.unary()
            self.depth -= 1
            return ("neg", inner) if v == "-" else inner
        return self.power()

    def power(self):
        base = self.atom()
        k, v, col = self.peek()
        if k == "op" and v == "**":
            self.take()
            self._deeper(col)
            exp = self.unary()
            self.depth -= 1
            return ("bin", "**", base, exp, col)
        return base

    def atom(self):
        k, v, col = self.take()
        if k == "num":
            return ("num", v)
        if k == "name":
            nk, nv, ncol = self.peek()
            if nk == "op" and nv == "(":
                if v not in FUNCTIONS:
                    near = difflib.get_close_matches(v, list(FUNCTIONS), n=1)
                    hint = f"did you mean '{near[0]}'? " if near else ""
                    raise _ExprError(f"unknown function '{v}' ({hint}allowed: {', '.join(FUNCTIONS)})", col)
                self.take()
                self._deeper(ncol)
                args = [self.expr()]
                while self.peek()[0] == "op" and self.peek()[1] == ",":
                    self.take()
                    args.append(self.expr())
                self.expect(")")
                self.depth -= 1
                lo, hi = FUNCTIONS[v]
                if len(args) < lo or (hi is not None and len(args) > hi):
                    want = f"{lo}" if lo == hi else f"at least {lo}"
                    raise _ExprError(f"{v}() takes {want} argument{'s' if (hi or 2) > 1 else ''}, "
                                     f"got {len(args)}", col)
                return ("call", v, args, col)
            if v in FUNCTIONS:
                raise _ExprError(f"'{v}' is a function; call it as {v}(...)", col)
            return ("name", v, col)
        if k == "op" and v == "(":
            self._deeper(col)
            t = self.expr()
            self.expect(")")
            self.depth -= 1
            return t
        if k == "end":
            raise _ExprError("expression ends too early", col)
        raise _ExprError(f"unexpected {_show(k, v)}", col)


def _show(kind, value) -> str:
    if kind == "end":
        return "end of expression"
    if kind == "num":
        return f"number {value:g}"
    if kind == "name":
        return f"name '{value}'"
    return f"'{value}'"


def _split(text: str) -> tuple[str, int]:
    """The expression after the leading '=', and the 1-based column of its first character."""
    if not text.startswith("="):
        raise _ExprError("an expression starts with '='", 1)
    if len(text) > MAX_LENGTH:
        raise _ExprError(f"longer than {MAX_LENGTH} characters", MAX_LENGTH)
    return text[1:], 2


def parse(text: str):
    """Parse an expression string (with its leading '=') into a tree; raise SectionError on a fault."""
    try:
        body, base = _split(text)
        return _Parser(body, base).parse()
    except _ExprError as e:
        raise SectionError(_describe(text, e)) from None


def _names(tree) -> list[tuple[str, int]]:
    kind = tree[0]
    if kind == "name":
        return [(tree[1], tree[2])]
    if kind == "neg":
        return _names(tree[1])
    if kind == "bin":
        return _names(tree[2]) + _names(tree[3])
    if kind == "call":
        return [n for a in tree[2] for n in _names(a)]
    return []


def _eval(tree, env: dict[str, float]) -> float:
    kind = tree[0]
    if kind == "num":
        return tree[1]
    if kind == "name":
        return env[tree[1]]
    if kind == "neg":
        return -_eval(tree[1], env)
    if kind == "call":
        f, args, col = tree[1], [_eval(a, env) for a in tree[2]], tree[3]
        if f == "min":
            return min(args)
        if f == "max":
            return max(args)
        if f == "abs":
            return abs(args[0])
        if args[0] < 0:
            raise _ExprError(f"sqrt of a negative number ({args[0]:g})", col)
        return math.sqrt(args[0])
    op, a, b, col = tree[1], _eval(tree[2], env), _eval(tree[3], env), tree[4]
    try:
        if op == "+":
            r = a + b
        elif op == "-":
            r = a - b
        elif op == "*":
            r = a * b
        elif op == "/":
            if b == 0:
                raise _ExprError("division by zero", col)
            r = a / b
        else:
            if a == 0 and b < 0:
                raise _ExprError("division by zero (0 to a negative power)", col)
            if a < 0 and b != int(b):
                raise _ExprError(f"negative number {a:g} to the non-integer power {b:g}", col)
            r = a ** b
    except OverflowError:
        raise _ExprError("result too large", col) from None
    if isinstance(r, complex) or not math.isfinite(r):
        raise _ExprError("result is not a finite number", col)
    return float(r)


def _describe(text: str, e: _ExprError) -> str:
    where = f" at column {e.col}" if e.col is not None else ""
    shown = text if len(text) <= 60 else text[:40] + "..." + text[-12:]
    return f"expression {shown!r}: {e.msg}{where}"


def evaluate(text: str, values: dict[str, float] | None = None) -> float:
    """Value of one expression string (with its leading '=') given parameter values.

    >>> evaluate("=-2 - max(depth, 3) / 2", {"depth": 10})
    -7.0
    """
    values = values or {}
    tree = parse(text)
    for name, col in _names(tree):
        if name not in values:
            raise SectionError(_describe(text, _ExprError(_unknown_param(name, values), col)))
    try:
        return _eval(tree, values)
    except _ExprError as e:
        raise SectionError(_describe(text, e)) from None


def _unknown_param(name: str, known) -> str:
    known = sorted(known)
    near = difflib.get_close_matches(name, known, n=1, cutoff=0.5)
    hint = f"did you mean '{near[0]}'?" if near else f"declared: {', '.join(known) or 'none'}"
    return f"unknown parameter '{name}' ({hint})"


def _is_expr(v) -> bool:
    return isinstance(v, str) and v.startswith("=")


# --------------------------------------------------------------------------- parameters
def parameter_values(data: dict, label: str = "<dict>") -> dict[str, float]:
    """The value of every declared parameter (m, m/s, ... as the file uses them), in a dict."""
    params = data.get("parameters", {})
    if params is None:
        return {}
    if not isinstance(params, dict):
        raise SectionError(f"{label}: parameters: expected an object {{\"name\": number, ...}}, "
                           f"got {type(params).__name__}")
    trees: dict[str, Any] = {}
    for name, v in params.items():
        if not _PARAM_NAME.match(name):
            raise SectionError(f"{label}: parameters: '{name}' is not a valid parameter name "
                               "(letters, digits and '_', not starting with a digit)")
        if name in FUNCTIONS:
            raise SectionError(f"{label}: parameters: '{name}' is the name of a function; choose another name")
        if isinstance(v, bool) or not isinstance(v, (int, float, str)):
            raise SectionError(f"{label}: parameter '{name}': expected a number or an '=' expression, "
                               f"got {json_type(v)}")
        if isinstance(v, str):
            if not _is_expr(v):
                raise SectionError(f"{label}: parameter '{name}': expected a number or an '=' expression, "
                                   f"got {v!r}")
            try:
                trees[name] = parse(v)
            except SectionError as e:
                raise SectionError(f"{label}: parameter '{name}': {e}") from None
        elif not math.isfinite(float(v)):
            raise SectionError(f"{label}: parameter '{name}': must be a finite number, got {v}")
    out: dict[str, float] = {}
    for k, v in params.items():
        if k not in trees:
            try:
                out[k] = float(v)
            except OverflowError:
                raise SectionError(f"{label}: parameter '{k}': the number is too large") from None
    # dependency order: an iterative depth-first walk (chains of any length), with cycle detection
    state: dict[str, int] = {}            # 1 = on the current path, 2 = done
    for root in trees:
        if root in out:
            continue
        path: list[str] = [root]
        deps = {root: iter(_names(trees[root]))}
        state[root] = 1
        while path:
            name = path[-1]
            step = next(deps[name], None)
            if step is not None:
                dep, col = step
                if dep not in params:
                    raise SectionError(f"{label}: parameter '{name}': "
                                       + _describe(params[name], _ExprError(
                                           _unknown_param(dep, [k for k in params if k != name]), col)))
                if dep in out or dep not in trees:
                    continue
                if state.get(dep) == 1:
                    cyc = path[path.index(dep):] + [dep]
                    shown = cyc if len(cyc) <= 12 else cyc[:5] + ["..."] + cyc[-5:]
                    raise SectionError(f"{label}: parameters: circular definition {' -> '.join(shown)}")
                state[dep] = 1
                path.append(dep)
                deps[dep] = iter(_names(trees[dep]))
                continue
            try:
                out[name] = _eval(trees[name], out)
            except _ExprError as e:
                raise SectionError(f"{label}: parameter '{name}': {_describe(params[name], e)}") from None
            state[name] = 2
            path.pop()
    return {k: out[k] for k in params}


def json_bool(v: bool) -> str:
    return "true" if v else "false"


def _item_label(path: list) -> str:
    """Human label of a location in the file: zone 'core'.polygon[2][1]."""
    return ".".join(str(p) for p in path) if path else "top level"


def resolve(data: dict, label: str = "<dict>") -> dict:
    """A new dict with every ``=`` expression replaced by its float value and ``parameters`` removed.

    The input is not modified. Raises SectionError naming the item on any fault.
    """
    if not isinstance(data, dict):
        raise SectionError(f"{label}: the top level must be an object {{...}}, got {json_type(data)}")
    values = parameter_values(data, label)

    def walk(node, path: list):
        if isinstance(node, dict):
            return {k: (v if k in FREE_TEXT_KEYS else walk(v, path + [_step(node, k)])) for k, v in node.items()}
        if isinstance(node, list):
            return [walk(v, path + [_step_list(node, i)]) for i, v in enumerate(node)]
        if _is_expr(node):
            try:
                v = evaluate(node, values)
                # a whole number stays whole, so '=n' also fills a count (mesh.max_elements, mesh.order)
                return int(v) if v.is_integer() and abs(v) < 2.0 ** 53 else v
            except SectionError as e:
                raise SectionError(f"{label}: {_item_label(path)}: {e}") from None
        return node

    out = {k: (v if k in FREE_TEXT_KEYS else walk(v, [k])) for k, v in data.items() if k != "parameters"}
    return out


def _step(node: dict, key: str) -> str:
    return str(key)


def _step_list(node: list, i: int) -> str:
    item = node[i]
    if isinstance(item, dict) and isinstance(item.get("name"), str):
        return f"'{item['name']}'"
    return str(i)


# --------------------------------------------------------------------------- overrides
def with_values(data: dict, overrides: dict[str, Any], label: str = "<dict>") -> dict:
    """A deep copy of a section dict with overrides applied (expressions are kept, not resolved).

    Parameters
    ----------
    data : dict
        A section as read from its file (may hold ``parameters`` and ``=`` expressions).
    overrides : dict
        ``{key: value}``. A key without a dot that names a declared parameter sets that parameter.
        Otherwise the key is a dotted path: dict keys by name, list items by their ``name`` (zones,
        boundaries, remedies, ...) or by a 0-based index, e.g. ``"materials.sand.kx"``,
        ``"boundaries.river.head"``, ``"zones.core.polygon.2.1"``. The value may be a number, an
        ``=`` expression or any JSON value. Only existing keys can be set, except a new key in a
        dict that is an object of the file (e.g. ``"materials.sand.k"`` may be added).

    Raises
    ------
    SectionError
        On a path that does not exist, naming the step that failed (with a 'did you mean').

    >>> d = {"parameters": {"stage": 4.0}, "boundaries": [{"name": "river", "head": "=stage"}]}
    >>> with_values(d, {"stage": 5.5, "boundaries.river.head": "=stage + 1"})["boundaries"][0]["head"]
    '=stage + 1'
    """
    if not isinstance(data, dict):
        raise SectionError(f"{label}: with_values takes a section dict, got {json_type(data)}")
    out = copy.deepcopy(data)
    params = out.get("parameters") if isinstance(out.get("parameters"), dict) else {}
    for key, value in overrides.items():
        if not isinstance(key, str) or not key:
            raise SectionError(f"{label}: override key {key!r}: expected a parameter name or a dotted path")
        value = copy.deepcopy(value)
        if "." not in key and key in params:
            params[key] = value
            continue
        steps = key.split(".")
        if len(steps) == 1 and key not in out:
            known = sorted(params)
            near = difflib.get_close_matches(key, known + list(out), n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else (
                f" (declared parameters: {', '.join(known)})" if known else " (no parameters are declared)")
            raise SectionError(f"{label}: override '{key}': no parameter or top-level key of that name{hint}")
        node: Any = out
        for depth, step in enumerate(steps):
            last = depth == len(steps) - 1
            where = ".".join(steps[:depth]) or "top level"
            if isinstance(node, dict):
                if step not in node and not (last and depth > 0):
                    near = difflib.get_close_matches(step, [str(k) for k in node], n=1)
                    hint = f" (did you mean '{near[0]}'?)" if near else f" (keys: {', '.join(map(str, node)) or 'none'})"
                    raise SectionError(f"{label}: override '{key}': no key '{step}' in {where}{hint}")
                if last:
                    node[step] = value
                else:
                    node = node[step]
            elif isinstance(node, list):
                idx = _list_index(node, step)
                if idx is None:
                    names = [it["name"] for it in node if isinstance(it, dict) and isinstance(it.get("name"), str)]
                    near = difflib.get_close_matches(step, names, n=1)
                    hint = (f" (did you mean '{near[0]}'?)" if near else
                            f" (names: {', '.join(names)})" if names else f" (indices 0 to {len(node) - 1})")
                    raise SectionError(f"{label}: override '{key}': {where} has no item '{step}'{hint}")
                if last:
                    node[idx] = value
                else:
                    node = node[idx]
            else:
                raise SectionError(f"{label}: override '{key}': {where} is a value ({node!r}), "
                                   f"it has no '{step}' inside")
    return out


def _list_index(node: list, step: str) -> int | None:
    for i, it in enumerate(node):
        if isinstance(it, dict) and it.get("name") == step:
            return i
    if re.fullmatch(r"-?\d+", step):
        i = int(step)
        if -len(node) <= i < len(node):
            return i % len(node)
    return None
