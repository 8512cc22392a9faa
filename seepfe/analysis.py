"""One post-processing stage after the solve: every verdict seepfe prints comes from here.

>>> import seepfe
>>> result = seepfe.solve("sections/levee_blanket.json")              # doctest: +SKIP
>>> a = seepfe.analyse(result)                                         # doctest: +SKIP
>>> a.governing["fs"], a.governing["verdict"], a.governing["why"]      # doctest: +SKIP
>>> print(a.text())                                                    # what `seepfe solve` prints
>>> a.to_dict()                                                        # summary.json

:func:`analyse` decides, once per solve and in one place, for every command (solve, report, plot,
sweep) and the Python API:

* which boundaries are exit surfaces (``checks.boundaries`` if given, else
  :func:`seepfe.checks.default_boundaries`);
* the exit checks along each (:func:`seepfe.checks.exit_gradients`) and their governing values,
  with one rule for the least FS and one for values that cannot be computed
  (:func:`seepfe.checks.exit.governing_of`: never a silent pass);
* the verdict over all exit surfaces and why;
* the hand methods beside the FE (:mod:`seepfe.checks.hand`), the cutoffs they found;
* the phreatic surface and its exits, the remedies' figures (from the notes ``load_section`` kept),
  and the flow net (computed on first use and kept here).

:meth:`Analysis.to_dict` is summary.json (schema: ``docs/summary.schema.json``, model
:class:`seepfe.records.Summary`); :meth:`Analysis.record` is a sweep case, a projection of it;
:meth:`Analysis.text` is what the command line prints. Results support, and never replace, the
judgement of a licensed engineer; local codes and agency criteria govern.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from . import phreatic, remedies
from .about import CAUTION, __version__
from .checks.exit import ExitChecks, _finite_or_none, default_boundaries, exit_gradients
from .checks.hand import hand_methods
from .checks.methods import QUANTITIES, HandMethod
from .errors import SectionError
from .records import SUMMARY_FORMAT, UNITS
from .units import SI
from .text import one_line, table

__all__ = ["analyse", "Analysis", "CAUTION"]

def analyse(result, boundaries: list[str] | None = None, hand: bool = True) -> "Analysis":
    """Post-process a solve: exit checks, governing values and verdict, hand methods, phreatic surface.

    Parameters
    ----------
    result : seepfe.Result (a :class:`seepfe.transient.TransientResult` is analysed at the moment of its least FS)
    boundaries : exit surfaces to check (default: the section's ``checks.boundaries``, else every
        seepage face that is ground, plus the head boundaries at the lowest head when heads differ).
    hand : apply the hand methods beside the FE (False: the exit checks and verdict only, as the time history
        of a transient solve reads them at every step).

    Returns
    -------
    Analysis

    Raises
    ------
    SectionError
        A boundary named that the section does not have.
    """
    if getattr(result, "is_transient", False):
        # a transient run (issue 14): the moment of its least FS governs (any other moment: result.analyse(t))
        return result.analyse(result.governing_time, boundaries=boundaries, hand=hand)
    sec = result.section
    if boundaries is None:
        names = default_boundaries(sec)
        rule = ("checks.boundaries" if sec.spec.checks.boundaries is not None else
                "default: every seepage face that is ground (not a remedy's outlet), and the head boundaries at "
                "the lowest head when heads differ")
    else:
        names, rule = list(boundaries), "given to analyse()"
    for n in names:
        if n not in sec.boundary_names:
            import difflib
            near = difflib.get_close_matches(n, sec.boundary_names, n=1)
            hint = f" (did you mean '{near[0]}'?)" if near else f" (known: {', '.join(sec.boundary_names)})"
            raise SectionError(f"{sec.source}: checks.boundaries: no boundary named '{one_line(n)}'{hint}")
    import logging
    logging.getLogger("seepfe").info("checks along %s", ", ".join(repr(n) for n in names) or "no exit surface")
    exits = {n: exit_gradients(result, n) for n in names}
    hand, cutoffs = hand_methods(result, exits) if hand else ([], [])
    return Analysis(result=result, boundaries=names, rule=rule, exits=exits, hand=hand, cutoffs=cutoffs)


@dataclass(eq=False)
class Analysis:
    """Everything computed from one solve that a verdict rests on. Build it with :func:`analyse`."""

    result: object
    boundaries: list
    rule: str
    exits: dict                               # boundary name -> ExitChecks
    hand: list                                # [HandMethod]
    cutoffs: list = field(default_factory=list)

    # ------------------------------------------------------------------ governing values
    @cached_property
    def governing(self) -> dict:
        """The values an engineer signs, over every checked exit surface (plain data, keys in
        :class:`seepfe.records.Governing`)."""
        return _governing(self.exits, self.result)

    @property
    def verdict(self) -> str:
        """"pass", "fail" or "not checked"."""
        return self.governing["verdict"]

    def exit_checks(self, name: str) -> ExitChecks:
        """The exit checks along one checked boundary."""
        if name not in self.exits:
            raise KeyError(f"'{name}' is not a checked exit surface (checked: {', '.join(self.exits) or 'none'})")
        return self.exits[name]

    def hand_method(self, method: str) -> HandMethod:
        """The hand method of that id (``blanket_theory``, ``lane``, ``khosla``, ``terzaghi_prism``,
        ``sellmeijer``, ``kozeny``, ``casagrande``)."""
        for m in self.hand:
            if m.method == method:
                return m
        raise KeyError(f"no hand method '{method}' (known: {', '.join(m.method for m in self.hand)})")

    # ------------------------------------------------------------------ things kept here, computed once
    @cached_property
    def stream_function(self):
        from .flownet import stream_function
        return stream_function(self.result)

    @cached_property
    def flow_net(self):
        """The flow net (:class:`seepfe.flownet.FlowNet`) drawn in the figures."""
        from .flownet import flow_net
        return flow_net(self.result, stream=self.stream_function)

    @cached_property
    def phreatic(self) -> dict:
        """Phreatic line ends, seepage faces (exit points, wet lengths, outflow), drain outflows."""
        return phreatic.summary(self.result)

    @cached_property
    def remedies(self) -> list[dict]:
        """Per remedy: what it became (kept from load_section) and its figures from this solve."""
        return remedies.flows(self.result.section.remedies, self.result.flows)

    @cached_property
    def notes(self) -> list[str]:
        """Notes about the checks as a whole (per-surface notes are in each ExitChecks)."""
        out = []
        if not self.exits:
            out.append("no exit surface is checked (no seepage face that is ground; name one in checks.boundaries)")
        if not self.result.solver_info.get("converged", True):
            out.append("the solve did not converge: the field is the best iterate and must not be used")
        if callable(getattr(self.result, "transient_summary", None)) and self.hand:
            out.append("a moment of a transient solve: the hand methods are steady closed forms at this moment's "
                       "water levels, not the transient answer")
        return out

    @cached_property
    def accuracy(self) -> dict:
        """How accurate the numbers are: the discretisation error of the seepage quantity and of the
        governing exit values, estimated from two coarser meshes (:func:`seepfe.accuracy.estimate`,
        Richardson with the observed order where it can be found). Values at a singular corner (the
        surface gradient at a toe) do not converge and are excluded, with the reason."""
        from .accuracy import estimate
        names = list(self.boundaries)
        excluded = {"surface_gradient_max": "the surface gradient at a toe or cutoff tip is singular: it grows as "
                                            "the mesh is refined and has no discretisation error to estimate"}
        g = self.governing
        if g["fs"] is not None and g["top_stratum_thickness_m"] is None and g["mode"] == "heave":
            excluded["fs"] = ("the least FS rests on a surface gradient (no top stratum there), which may be "
                              "singular: judge it by the values a little away from the toe")

        def quantities(r):
            bal = r.balance
            out = {"q_m3_s_per_m": 0.5 * (bal["inflow_m3_s_per_m"] + bal["outflow_m3_s_per_m"])}
            try:
                exits = {n: exit_gradients(r, n) for n in names}
            except Exception:                     # a coarse mesh too coarse for a boundary: no exit values
                return out
            gv = _governing(exits, r)
            if gv["fs"] is not None and "fs" not in excluded:
                out["fs"] = gv["fs"]
            tg = [ex.governing["top_stratum_gradient_max"] for ex in exits.values()]
            tg = [v for v in tg if v is not None]
            if tg:
                out["top_stratum_gradient_max"] = max(tg)
            return out

        if not self.result.solver_info.get("converged", True):
            return {"estimates": {}, "excluded": {"all": "the solve did not converge"}}
        est = estimate(self.result, quantities)
        return {"estimates": est, "excluded": excluded,
                "method": "two coarser meshes (the nested parents where the mesh was split, else re-meshed at 2x "
                          "and 4x every size); Richardson extrapolation with the observed order (Celik et al. 2008)"}

    # ------------------------------------------------------------------ outputs
    def to_dict(self, accuracy: bool = True) -> dict:
        """summary.json: plain data, SI units (validates against :class:`seepfe.records.Summary`).
        ``accuracy``: include the discretisation-error estimates (two coarser solves; a sweep case leaves
        them out)."""
        r = self.result
        sec = r.section
        d = {
            "format": SUMMARY_FORMAT,
            "seepfe_version": __version__,
            "title": sec.title or "",
            "source": sec.source,
            "input_sha256": sec.input_hash,
            "units": dict(UNITS),
            "display_units": sec.units.as_dict(),
            "flows_m3_s_per_m": r.flows,
            "balance": r.balance,
            "head_range_m": [float(r.h.min()), float(r.h.max())],
            "mesh": dict(r.mesh.stats),
            "solver": dict(r.solver_info),
            "phreatic": self.phreatic,
            "exit_boundaries": {"names": list(self.boundaries), "rule": self.rule},
            "exits": {k: v.to_dict() for k, v in self.exits.items()},
            "governing": self.governing,
            "hand_methods": [rec for m in self.hand for rec in m.records()],
            "hand_method_details": [m.to_dict() for m in self.hand],
            "cutoffs": self.cutoffs,
            "remedies": self.remedies,
            "notes": self.notes,
            "caution": CAUTION,
        }
        if accuracy:
            d["accuracy"] = self.accuracy
        from .export import provenance
        d["provenance"] = provenance()
        if callable(getattr(r, "transient_summary", None)):
            d["transient"] = r.transient_summary()          # a moment of a transient run (issue 14)
        return _finite_or_none(_plain(d))

    def record(self, points: dict | None = None, warnings: list | None = None, time_s: float = 0.0) -> dict:
        """A sweep case record (:class:`seepfe.records.CaseRecord`): a projection of :meth:`to_dict`,
        with the heads at named points {name: [x, y]} (m) and the exit profiles."""
        d = self.to_dict(accuracy=False)
        r = self.result
        pts = points or {}
        heads = r.head(np.array(list(pts.values()), float).reshape(-1, 2)) if pts else []
        prof = {}
        for n, ex in self.exits.items():
            prof[n] = {"x_m": [float(v) for v in ex.x],
                       "exit_gradient": [_json_float(v) for v in ex.exit_gradient],
                       "fs": [_json_float(v, inf="inf") for v in ex.fs]}
        return {"status": "ok" if r.solver_info.get("converged", True) else "not converged",
                "flows_m3_s_per_m": d["flows_m3_s_per_m"],
                "heads_m": {k: _json_float(v) for k, v in zip(pts, heads)},
                "governing": d["governing"], "hand_methods": d["hand_methods"], "exit": prof,
                "warnings": list(warnings or []), "nodes": int(r.mesh.n_nodes),
                "balance_relative_error": _json_float(r.balance["relative_error"]), "time_s": float(time_s),
                "transient": None}                     # a case under a hydrograph: its moments (sweep/case.py)

    def text(self, units=None) -> str:
        """What the command line prints: flows, seepage faces, remedies, the checks, the verdict and the
        hand methods beside the FE, and the caution; in ``units`` (seepfe.units.Units, default: the
        section file's units)."""
        from .units import display_text
        r = self.result
        sec = r.section
        u = units if units is not None else sec.units
        fq, FL, Lf, LU = u.factor("flow"), u.label("flow"), u.factor("length"), u.length
        d = self.to_dict()
        kinds = {b.name: b.kind.replace("_", " ") for b in sec.spec.boundaries}
        L = [table(f"{sec.title or sec.source}: flows ({FL}, + into the section)",
                   ["boundary", "kind", f"flow ({FL})"],
                   [[n, kinds.get(n, "drain zone"), f"{q / fq:+.4e}"] for n, q in r.flows.items()])]
        bal = d["balance"]
        L.append(f"balance: in {bal['inflow_m3_s_per_m'] / fq:.4e}, out {bal['outflow_m3_s_per_m'] / fq:.4e} {FL}, "
                 f"relative error {bal['relative_error']:.1e}")
        st, sv = d["mesh"], d["solver"]
        L.append(f"mesh: {st['elements']} P{st['order']} triangles, {st['nodes']} nodes; solver: "
                 f"{sv.get('backend', '?')}, {sv.get('unknowns', '?')} unknowns, "
                 f"{sv.get('seepage_face_passes', '?')} pass(es)")
        faces = self.phreatic.get("seepage_faces", {})
        wet = [[n, f"({f['exit_point_m'][0] / Lf:.2f}, {f['exit_point_m'][1] / Lf:.2f})", f"{f['length_m'] / Lf:.2f}",
                f"{-f['outflow_m3_s_per_m'] / fq:+.4e}"] for n, f in faces.items() if f.get("exit_point_m")]
        if wet:
            L.append(table("seepage faces (where the phreatic surface meets the outline)",
                           ["boundary", f"exit point x, y ({LU})", f"wet length ({LU})", f"flow ({FL})"], wet))
        for rd in self.remedies:
            what = ", ".join(_shown(k, v, u) for k, v in rd.items()
                             if isinstance(v, float) and k.endswith(("_m", "_m3_s", "_m3_s_per_m")))
            L.append(f"remedy '{one_line(rd.get('name', rd['type']))}' ({rd['type']}): {what}")
            if rd.get("limits"):
                L.append(f"  limits: {rd['limits']}")
        if not sv.get("converged", True):
            L.append("WARNING: the solve did not converge; the results written are the best iterate and must not "
                     "be used (see solver in summary.json)")
        if self.exits:
            rows = []
            ln = lambda v, fmt: _f(None if v is None else v / Lf, fmt)      # noqa: E731
            for n, ex in self.exits.items():
                g = ex.governing
                rows.append([n, _f(g["fs"], ".2f"), g["mode"] or "-", ln(g["x_m"], ".2f"),
                             ln(g["top_stratum_thickness_m"], ".2f"),
                             f"{_f(g['exit_gradient_max'], '.3f')} at x {ln(g['exit_gradient_x_m'], '.2f')}"
                             if g["exit_gradient_max"] is not None else "-",
                             _f(g["surface_gradient_max"], ".3f"),
                             ln(g["fails_within_m_of_toe"], ".1f"), g["verdict"].upper()])
            L.append(table(f"underseepage checks (least FS -, gradients m/m, x, thickness and distances {LU})",
                           ["boundary", "least FS", "mode", f"at x ({LU})", f"top stratum ({LU})",
                            "largest exit gradient", "largest surface gradient", f"fails within ({LU} of toe)",
                            "verdict"], rows))
        g = self.governing
        L.append(f"verdict: {g['verdict'].upper()}: {display_text(g['why'], u)}")
        rows, na = [], []
        for m in self.hand:
            if not m.applies:
                na.append(f"  {m.title}: not applicable: {m.why}")
                continue
            for q, unit, label in QUANTITIES[m.method]:
                hand, fe = m.values.get(q, (None, None))
                dim = {"m": "length", "m3/s per m": "flow"}.get(unit)
                if dim is not None:
                    f = u.factor(dim)
                    hand, fe, unit = (None if hand is None else hand / f), (None if fe is None else fe / f), u.label(dim)
                rows.append([f"{m.title}: {label}", _f(hand, ".4g"), _f(fe, ".4g"), unit])
        if rows:
            L.append(table("hand methods beside the FE", ["method: quantity", "hand", "FE", "unit"], rows))
            for m in self.hand:                   # what a checker needs to redo each by hand
                if m.applies and m.inputs:
                    L.append(f"  {m.title}: inputs: " + "; ".join(_input_text(k, v, u) for k, v in m.inputs.items()
                                                                  if v["value"] is not None))
        L += na
        acc = self.accuracy.get("estimates", {})
        if acc:
            lab = {"q_m3_s_per_m": "seepage q", "fs": "least FS", "top_stratum_gradient_max": "top-stratum gradient"}
            parts = [f"{lab.get(k, k)} {100 * v['relative']:.2g} %" for k, v in acc.items()
                     if v.get("relative") is not None]
            if parts:
                L.append("accuracy (estimated discretisation error, from two coarser meshes): " + ", ".join(parts)
                         + "; the surface gradient at a toe is singular and has none")
        for w in sec.warnings:
            L.append(f"warning: {w}")
        for note in self.notes + [n for ex in self.exits.values() for n in ex.notes] + \
                [n for m in self.hand for n in m.notes]:
            L.append(f"note: {display_text(note, u)}")
        if u != SI:
            L.append(f"units: {u.name} (summary.json and the *_m columns of the CSV files are SI)")
        L.append(f"CAUTION: {CAUTION}")
        return "\n".join(L)

    def __repr__(self) -> str:
        g = self.governing
        return f"<Analysis {self.result.section.title!r}: least FS {_f(g['fs'], '.3g')}, {g['verdict']}>"


# ---------------------------------------------------------------------------- helpers
def _governing(exits: dict, result) -> dict:
    per = {n: ex.governing for n, ex in exits.items()}
    out = {"fs": None, "mode": None, "boundary": None, "x_m": None, "distance_from_toe_m": None,
           "top_stratum_thickness_m": None, "exit_gradient_max": None, "exit_gradient_x_m": None,
           "exit_gradient_boundary": None, "fails_within_m_of_toe": None, "failing_length_m": None, "verdict": "not checked", "why": "",
           "criteria": None}
    if exits:
        out["criteria"] = dict(next(iter(exits.values())).criteria)
    known = [(g["fs"], n) for n, g in per.items() if g["fs"] is not None]
    if known:
        _, n = min(known)
        g = per[n]
        out.update(fs=g["fs"], mode=g["mode"], boundary=n, x_m=g["x_m"], distance_from_toe_m=g["distance_from_toe_m"],
                   top_stratum_thickness_m=g["top_stratum_thickness_m"])
    grads = [(g["exit_gradient_max"], n) for n, g in per.items() if g["exit_gradient_max"] is not None]
    if grads:
        v, n = max(grads)
        out.update(exit_gradient_max=v, exit_gradient_x_m=per[n]["exit_gradient_x_m"], exit_gradient_boundary=n)
    fails = [n for n, g in per.items() if g["verdict"] == "fail"]
    unknown = [n for n, g in per.items() if g["verdict"] == "not checked"]
    if fails:
        out["fails_within_m_of_toe"] = max(per[n]["fails_within_m_of_toe"] for n in fails)
        out["failing_length_m"] = sum(per[n]["failing_length_m"] or 0.0 for n in fails)
    if not result.solver_info.get("converged", True):
        out["verdict"] = "not checked"
        out["why"] = ("the solve did not converge: the field is not a solution, so no verdict can rest on it "
                      "(see solver in summary.json)")
    elif not exits:
        out["why"] = "no exit surface is checked (no seepage face that is ground; name one in checks.boundaries)"
    elif fails:
        out["verdict"] = "fail"
        out["why"] = " | ".join(per[n]["why"] for n in fails)
    elif unknown:
        out["verdict"] = "not checked"
        out["why"] = " | ".join(per[n]["why"] for n in unknown)
    else:
        out["verdict"] = "pass"
        out["why"] = per[out["boundary"]]["why"] if out["boundary"] else " | ".join(g["why"] for g in per.values())
    return out


def _input_text(name: str, v: dict, u) -> str:
    """'L1 200 m' / 'riverside_end open' for the inputs line of a hand method, in the display units."""
    val, unit = v["value"], v.get("unit", "")
    if isinstance(val, str):
        return f"{name} {val}"
    dim = {"m": "length", "m/s": "conductivity", "m3/s per m": "flow", "kN/m3": "unit_weight"}.get(unit)
    if dim is not None and u is not None:
        f = u.factor(dim)
        return f"{name.removesuffix('_m').removesuffix('_m_s').removesuffix('_kN_m3')} {val / f:.4g} {u.label(dim)}"
    return f"{name} {val:.4g}" + (f" {unit}" if unit and unit != "-" else "")


def _shown(key: str, v: float, u) -> str:
    """'length_m 40' in SI; 'length 131.2 ft' in other units."""
    for end, dim in (("_m3_s_per_m", "flow"), ("_m3_s", "discharge"), ("_m", "length")):
        if key.endswith(end):
            if u.factor(dim) == 1.0:
                return f"{key} {v:.4g}"
            return f"{key[: -len(end)]} {v / u.factor(dim):.4g} {u.label(dim)}"
    return f"{key} {v:.4g}"


def _f(v, fmt: str) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "-"
    return format(v, fmt)


def _json_float(v, inf=None):
    v = float(v)
    if math.isnan(v):
        return None
    if math.isinf(v):
        return inf if v > 0 else None
    return v


def _plain(d):
    """numpy scalars and arrays to Python numbers and lists."""
    if isinstance(d, dict):
        return {str(k): _plain(v) for k, v in d.items()}
    if isinstance(d, (list, tuple)):
        return [_plain(v) for v in d]
    if isinstance(d, np.ndarray):
        return _plain(d.tolist())
    if isinstance(d, np.generic):
        return d.item()
    return d
