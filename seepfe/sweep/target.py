"""Target search: the smallest (or largest) value of one parameter that meets a condition.

The condition is a bound on one result of a case (``fs >= 1.5``, ``exit_gradient_max <= 0.5``,
``head_toe_m <= 2``), or, by default for the factor of safety, the verdict itself: ``verdict = pass``
against the section's criteria, exactly as ``seepfe solve`` decides it.  The search brackets the change from "fails" to "meets" and shrinks the
bracket by a parallel multisection: each round solves ``w`` evenly spaced interior points at once
(``w`` = number of workers; ``w = 1`` is plain bisection), keeps the sub-interval where the outcome
changes, and stops when the bracket is no wider than the tolerance.  The returned value is the end
of the final bracket that meets the condition, so a direct solve there meets it; the true change lies
within the tolerance of it.  The result is assumed monotone in the parameter over the range; if the
solved points show more than one change the report says so.
"""

from __future__ import annotations

import math
from typing import Callable, Optional

import numpy as np

from ..errors import SeepfeError
from ..records import fs_value
from .case import from_json_float
from .spec import TargetSpec

__all__ = ["search", "quantity_of", "Stopped", "GOVERNING_QUANTITIES"]


class Stopped(Exception):
    """Raised when the runner's solve budget ran out before the search finished."""


#: quantities read from a record's governing block (table column -> governing key); "fs_min" is the old name of "fs"
GOVERNING_QUANTITIES = {"fs": "fs", "fs_min": "fs", "exit_gradient_max": "exit_gradient_max",
                        "top_stratum_thickness_m": "top_stratum_thickness_m",
                        "fails_within_m_of_toe": "fails_within_m_of_toe", "failing_length_m": "failing_length_m"}
#: quantities whose default condition (no at_least / at_most) is the verdict
VERDICT_QUANTITIES = ("verdict", "fs", "fs_min")


def quantity_of(record: dict, name: str) -> float:
    """A result of a case record by its table column name: fs (least FS; inf where no check arises, nan
    where it is not known), verdict (1 pass, 0 fail, nan not checked), exit_gradient_max,
    top_stratum_thickness_m, fails_within_m_of_toe, flow_<b>_m3_s_per_m, head_<point>_m."""
    g = record.get("governing") or {}
    if name == "verdict":
        return {"pass": 1.0, "fail": 0.0}.get(g.get("verdict"), math.nan)
    if name in GOVERNING_QUANTITIES:
        key = GOVERNING_QUANTITIES[name]
        return fs_value(g) if key == "fs" else from_json_float(g.get(key))
    if name.startswith("flow_") and name.endswith("_m3_s_per_m"):
        b = name[5:-11]
        if b in record.get("flows_m3_s_per_m", {}):
            return float(record["flows_m3_s_per_m"][b])
    if name.startswith("head_") and name.endswith("_m"):
        p = name[5:-2]
        if p in record.get("heads_m", {}):
            return from_json_float(record["heads_m"][p])
    known = ["verdict"] + list(GOVERNING_QUANTITIES) + \
        [f"flow_{b}_m3_s_per_m" for b in record.get("flows_m3_s_per_m", {})] + \
        [f"head_{p}_m" for p in record.get("heads_m", {})]
    raise SeepfeError(f"no result named '{name}' (known: {', '.join(known)})")


def search(t: TargetSpec, evaluate: Callable[[list[float]], list[Optional[dict]]], width: int,
           fs_required: float) -> dict:
    """Run one target search; ``evaluate(xs)`` returns the case records at the parameter values xs."""
    quantity = t.quantity or ("verdict" if t.at_least is None and t.at_most is None else "fs")
    if t.at_least is None and t.at_most is None:
        if quantity not in VERDICT_QUANTITIES:
            raise SeepfeError(f"target '{t.name or t.parameter}': give 'at_least' or 'at_most' for "
                              f"'{quantity}'")
        quantity, bound, sense = "verdict", 1.0, ">="     # the verdict of the section's criteria
    elif t.at_least is not None:
        bound, sense = t.at_least, ">="
    else:
        bound, sense = t.at_most, "<="
    history: list[tuple[float, float, bool]] = []
    warnings: list[str] = []

    def meets_at(xs: list[float]) -> list[bool]:
        recs = evaluate(xs)
        out = []
        for x, r in zip(xs, recs):
            if r is None:
                raise Stopped()
            st = r.get("status", "")
            if st.startswith("error"):
                raise SeepfeError(f"target '{t.name or t.parameter}' at {t.parameter} = {x:g}: {st[7:]}")
            if st != "ok":
                warnings.append(f"{t.parameter} = {x:g}: {st}")
            q = quantity_of(r, quantity)
            if math.isnan(q):
                why = (r.get("governing") or {}).get("why", "")
                raise SeepfeError(f"target '{t.name or t.parameter}' at {t.parameter} = {x:g}: "
                                  f"'{quantity}' is not known" + (f" ({why})" if why else ""))
            ok = q >= bound if sense == ">=" else q <= bound
            history.append((float(x), q, bool(ok)))
            out.append(ok)
        return out

    lo, hi = float(t.range[0]), float(t.range[1])
    m_lo, m_hi = meets_at([lo, hi])
    # 'smallest': fails at low, meets at high.  'largest': meets at low, fails at high.
    want_low, want_high = (False, True) if t.find == "smallest" else (True, False)
    cond = "verdict = pass" if quantity == "verdict" else f"{quantity} {sense} {bound:g}"
    base = {"name": t.name or t.parameter, "parameter": t.parameter, "find": t.find, "quantity": quantity,
            "condition": cond, "range": [lo, hi], "tolerance": t.tolerance}
    if (m_lo, m_hi) != (want_low, want_high):
        if t.find == "smallest" and m_lo:
            msg, val = "already met at the low end of the range", lo
        elif t.find == "largest" and m_hi:
            msg, val = "still met at the high end of the range", hi
        else:
            msg, val = "not met anywhere the range was tried; widen 'range'", math.nan
        return {**base, "status": msg, "value": val, "bracket": [lo, hi], "solves": len(history),
                "history": history, "warnings": warnings}
    a, b = lo, hi
    while b - a > t.tolerance:
        w = max(1, int(width))
        # fewest points that still reach the tolerance this round, at most w
        need = max(1, math.ceil((b - a) / t.tolerance) - 1)
        n = min(w, need)
        xs = list(a + (b - a) * np.arange(1, n + 1) / (n + 1))
        ms = meets_at(xs)
        pts = [a] + xs + [b]
        flags = [want_low] + ms + [want_high]
        changes = [j for j in range(len(flags) - 1) if flags[j] != flags[j + 1]]
        if len(changes) > 1:
            warnings.append(f"not monotone between {a:g} and {b:g}: the outcome changes {len(changes)} times; "
                            "the first change is kept")
        j = changes[0]
        if (pts[j], pts[j + 1]) == (a, b):
            # the bracket is a few floating-point steps wide and cannot shrink: stop (never loop forever)
            warnings.append(f"stopped at a bracket of {b - a:.3g} {t.parameter}: floating point cannot split it "
                            f"further (tolerance {t.tolerance:g})")
            break
        a, b = pts[j], pts[j + 1]
    value = b if t.find == "smallest" else a
    other = a if t.find == "smallest" else b
    return {**base, "status": "found", "value": value, "other_end": other, "bracket": [a, b],
            "solves": len(history), "history": history, "warnings": warnings}
