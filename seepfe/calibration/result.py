"""The result of a calibration: calibration.json as a mapping, plus what the figures, text and report need."""

from __future__ import annotations

import copy
import math
from collections.abc import Mapping

from ..about import CAUTION

__all__ = ["Calibration"]


class Calibration(Mapping):
    """What :func:`seepfe.calibrate` returns: a read-only mapping with the content of ``calibration.json``.

    ``cal["parameters"]["materials.blanket.k"]["value"]`` (SI), ``cal["identifiable"]``, ``cal["residuals"]``,
    ``cal.to_dict()`` (a deep copy, what is written). Also: ``section_data`` (the section dict with the fitted
    values written in), ``analyses`` ({case: {"before": Analysis, "after": Analysis}}), :meth:`text`,
    :meth:`figures`, :meth:`html` (a report section).
    """

    def __init__(self, record: dict, *, section_data: dict, analyses: dict, keys, obs, units, best, start,
                 source_data: dict | None = None):
        self._d = record
        self.section_data = section_data
        self.source_data = source_data if source_data is not None else {}
        self.analyses = analyses
        self.fit_keys = keys
        self.observations = obs
        self.units = units
        self.best = best
        self.start = start

    # mapping
    def __getitem__(self, k):
        return self._d[k]

    def __iter__(self):
        return iter(self._d)

    def __len__(self):
        return len(self._d)

    def to_dict(self) -> dict:
        """calibration.json (plain data, SI)."""
        return copy.deepcopy(self._d)

    def __repr__(self) -> str:
        f = self._d["fit"]
        return (f"<Calibration {self._d['title']!r}: {len(self._d['parameters'])} keys, chi2 {f['chi2']:.3g} for "
                f"{f['dof']} dof, scale {self._d['scale']['mode']}>")

    # ------------------------------------------------------------------ text
    def text(self) -> str:
        """What ``seepfe calibrate`` prints: the fit, the values with their intervals, the readings, the checks."""
        from ..text import table
        from ..units import display_text
        d, u = self._d, self.units
        f = d["fit"]
        nh = sum(p["held"] for p in d["parameters"].values())
        L = [f"{d['title']}: {sum(e['heads'] + e['flows'] for e in d['events'])} readings in {len(d['events'])} "
             f"event(s); {len(d['parameters']) - nh} of {len(d['parameters'])} key(s) of 'fit' fitted"
             + (f", {nh} held (see the warning)" if nh else "")]
        red = f" (reduced {f['reduced_chi2']:.3g})" if f["reduced_chi2"] is not None else ""
        L.append(f"fit: {f['status']} after {f['evaluations']} evaluations, {f['iterations']} iterations; chi2 "
                 f"{f['chi2_start']:.4g} -> {f['chi2']:.4g} for {f['dof']} degrees of freedom{red}; sensitivities by "
                 f"{' and '.join(f['sensitivities'])}")
        rows = []
        si = {k.key: k.si_factor for k in self.fit_keys}
        for key, p in d["parameters"].items():
            fu = p["file_unit"]
            conv = 1.0 / si[key]
            show = lambda v: "-" if v is None else f"{v * conv:.4g}"       # noqa: E731
            iv = "not determined" if p["low"] is None else f"{show(p['low'])} to {show(p['high'])}"
            state = ("held" if p["held"] else f"at {p['at_bound']}" if p["at_bound"] else "fitted")
            rows.append([key, show(p["value"]), iv, fu, f"{show(p['min'])} to {show(p['max'])}", state,
                         "yes" if d["identifiable"][key] else "NO"])
        L.append(table("fitted values (95 % intervals, linearised; units of the section file)",
                       ["key", "value", "95 % interval", "unit", "bounds", "state", "identifiable"], rows))
        for key in d["parameters"]:
            L.append(f"  {key}: {d['identifiable_why'][key]}")
        if d["scale"]["ratios"]:
            L.append(table(f"ratios to the held '{d['scale']['reference']}' (what heads determine)",
                           ["ratio", "value", "95 % interval", "identifiable"],
                           [[k, f"{r['value']:.4g}", "-" if r["low"] is None else f"{r['low']:.4g} to {r['high']:.4g}",
                             "yes" if r["identifiable"] else "NO"] for k, r in d["scale"]["ratios"].items()]))
        fl, LU = u.factor("length"), u.length
        fq, FL = u.factor("flow"), u.label("flow")
        rows = []
        for r in d["residuals"]:
            fac = fl if r["kind"] == "head" else fq
            fmt = ".3f" if r["kind"] == "head" else ".4g"
            rows.append([r["event"], f"{r['kind']} {r['name']}", format(r["observed"] / fac, fmt),
                         format(r["computed_start"] / fac, fmt), format(r["computed"] / fac, fmt),
                         format(r["sigma"] / fac, fmt), f"{r['normalised']:+.2f}"])
        L.append(table(f"readings (heads {LU}, flows {FL}, + into the section)",
                       ["event", "reading", "observed", "start", "fitted", "sigma", "(obs - fit)/sigma"], rows))
        rows = []
        for c in d["checks"]:
            b, a = c["before"], c["after"]
            fs = lambda g: "-" if g["fs"] is None else f"{g['fs']:.2f}"      # noqa: E731
            ig = lambda g: "-" if g["exit_gradient_max"] is None else f"{g['exit_gradient_max']:.3f}"  # noqa: E731
            rows.append([f"{c['kind']} '{c['case']}'", fs(b), ig(b), b["verdict"].upper(), fs(a), ig(a),
                         a["verdict"].upper()])
        if rows:
            L.append(table("underseepage checks before and after calibration (least FS -, exit gradient m/m)",
                           ["case", "FS before", "i before", "verdict before", "FS after", "i after", "verdict after"],
                           rows))
        if d["design"] is None:
            L.append("note: no design event stated ('design' in the observations file): checks at the observed "
                     "event(s) only")
        if d["scale"]["mode"] == "ratio":
            L.append("note: the flows at the calibrated values are not determined (they scale with the held "
                     "conductivity); the heads, gradients and factors of safety are")
        for w in d["warnings"]:
            L.append(f"WARNING: {display_text(w, u)}")
        for n in d["notes"]:
            L.append(f"note: {display_text(n, u)}")
        L.append(f"CAUTION: {CAUTION}")
        return "\n".join(L)

    # ------------------------------------------------------------------ figures and report
    def figures(self):
        """The calibration figures as :class:`seepfe.plot.FigureItem` (readings, values against bounds,
        objective)."""
        from .figures import calibration_figures
        return calibration_figures(self)

    def html(self, figures=None) -> str:
        """An HTML section (``<section>...</section>``) for a report: tables and the figures, embedded."""
        from .report import report_section
        return report_section(self, figures)

    def _fmt(self, v, fmt=".4g") -> str:
        return "-" if v is None or (isinstance(v, float) and not math.isfinite(v)) else format(v, fmt)
