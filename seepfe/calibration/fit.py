"""Back-analysis: fit conductivities (and any numeric key) of a section to readings from past events.

Weighted nonlinear least squares: minimise chi2 = sum(((computed - observed) / sigma)^2) over the fitted
values within their bounds, with scipy's trust-region reflective method (``least_squares(method="trf")``),
conductivities as ln k. The sensitivities come from :class:`~seepfe.calibration.model.ForwardModel`
(back-substitution with the forward factorisation where the solve is confined, finite differences
otherwise).

Uncertainty (linearised at the optimum; Bard 1974, Nonlinear Parameter Estimation, ch. 7; Seber and
Wild 1989, Nonlinear Regression, sec. 2.1): the covariance of the fitted coordinates is
``C = (J^T J)^-1`` with J the Jacobian of the weighted residuals (the readings' sigmas are taken as stated).
When the misfit is larger than those sigmas explain (chi2 above its 95 % point for the degrees of freedom)
C is multiplied by chi2 / dof and the interval uses Student's t, and the record says so. A 95 % interval is
``theta +- q sqrt(C_jj)`` mapped back (a factor x/÷ exp(q sd) for a conductivity). A value on its bound is
held there for the covariance of the others and gets no interval.

Heads alone fix only ratios of conductivities: multiplying every conductivity by one factor multiplies the
conductance matrix by it and leaves every head unchanged (the relative conductivity of the unsaturated zone
depends on the pressure head only, and the outflow points' rule is scale-free), while flows scale with it.
So when no flow is measured and no boundary prescribes a flux, and the fitted keys can scale every
conductivity together, one of them (the ``reference``) is held at its section value, the others are fitted
as ratios to it, and their absolute values are reported as not determined.
"""

from __future__ import annotations

import logging
import math
from typing import Optional

import numpy as np

from ..about import CAUTION, __version__
from ..errors import SectionError
from .model import ForwardModel
from .observations import load_observations

__all__ = ["calibrate", "CALIBRATION_FORMAT"]

log = logging.getLogger("seepfe")

from ..records import CALIBRATION_FORMAT  # noqa: E402  (the format id lives with the model of the file)
#: a conductivity whose 95 % interval spans more than this factor either way is reported as not identifiable
IDENTIFIABLE_FACTOR = 10.0
#: a linear key whose 95 % half-width exceeds this fraction of its bounds' range is not identifiable
IDENTIFIABLE_FRACTION = 0.5
#: correlation above which two fitted values are reported as not separated by the data
CORRELATION_WARN = 0.95


def _read_section(section):
    from ..section import Section, _read, load_section
    if isinstance(section, Section):
        return section.data, section.source, section
    data, label = _read(section)
    sec = load_section(section)
    return data, label, sec


def calibrate(section, observations, *, order: Optional[int] = None, size: Optional[float] = None,
              linear: Optional[str] = None, max_evaluations: int = 200, checks: bool = True):
    """Fit the keys named in the observations file to its readings; the checks at the fitted values.

    Parameters
    ----------
    section : path, dict or Section
        The section file (its parameters, expressions and units are kept; the fitted values are written in).
    observations : path or dict
        The observations file (:mod:`seepfe.calibration.observations`).
    order, size, linear : the mesh and linear solver (default: the section's own; size in m).
    max_evaluations : stop the fit after this many forward evaluations.
    checks : run the underseepage checks before and after at each event and the design event (default True).

    Returns
    -------
    Calibration
        A mapping with the content of ``calibration.json`` (``cal["parameters"]``, ``cal.to_dict()``), plus the
        calibrated section dict (``cal.section_data``), the checks before and after (``cal.analyses``),
        ``cal.text()``, ``cal.figures()`` and ``cal.html()``.

    Raises
    ------
    SectionError
        Bad input, in one line naming the file and the item.
    """
    from scipy.optimize import least_squares

    from .result import Calibration
    data, label, base = _read_section(section)
    obs = load_observations(observations, data, label, base.units)
    keys = obs.fit
    warnings: list[str] = []
    notes: list[str] = []

    # ---- start values inside the bounds; the section loads at every bound
    start = {}
    for k in keys:
        v = min(max(k.start, k.lo), k.hi)
        if v != k.start:
            notes.append(f"{k.key}: the section's value {k.start:.4g} {k.file_unit} lies outside the bounds; the fit "
                         f"starts at {v:.4g}")
        start[k.key] = v
    probe = ForwardModel(data, label, obs, keys, order=order, size=size, linear=linear)
    for k in keys:
        for which, v in (("min", k.lo), ("max", k.hi)):
            try:
                probe.section(obs.events[0].fixed, {**start, k.key: v})
            except SectionError as e:
                raise SectionError(f"{obs.label}: fit '{k.key}': at its {which} ({v:.4g} {k.file_unit}) the section "
                                   f"does not load: {str(e).removeprefix(label + ': ')}") from None
    sections0 = [probe.section(ev.fixed, start, f" (event '{ev.name}')") for ev in obs.events]
    _check_points(obs, sections0)
    warnings += _check_readings(obs, sections0)

    # ---- can heads tell the level of the conductivities?
    scale = _scale_analysis(probe, obs, sections0, start)
    held: dict = {}
    free_keys = list(keys)
    if obs.reference is not None and scale["mode"] != "ratio":
        notes.append(f"reference '{obs.reference}' not used: {scale['why']}" if scale["mode"] == "determined" else
                     f"reference '{obs.reference}' not used: the fitted keys do not scale every conductivity together, "
                     "so the conductivities held at their section values fix the level")
    if scale["mode"] == "ratio":
        ref = scale["reference"]
        held[ref] = start[ref]
        free_keys = [k for k in keys if k.key != ref]
        if not free_keys:
            raise SectionError(f"{obs.label}: fit: heads do not depend on '{ref}' alone (scaling every conductivity "
                               "leaves every head unchanged) and no flow was measured, so nothing can be fitted; add a "
                               "measured flow ('flows') or fit a second conductivity")
    if obs.n_readings < len(free_keys):
        raise SectionError(f"{obs.label}: {len(free_keys)} values to fit from {obs.n_readings} reading(s): at most "
                           f"{obs.n_readings} can be determined; move some keys of 'fit' to 'fixed' or add readings")

    # ---- the fit
    model = ForwardModel(data, label, obs, free_keys, held, order=order, size=size, linear=linear)
    model._meshes = probe._meshes
    theta0 = np.array([k.to_theta(start[k.key]) for k in free_keys], float)
    lo = np.array([k.to_theta(k.lo) for k in free_keys], float)
    hi = np.array([k.to_theta(k.hi) for k in free_keys], float)
    theta0 = np.clip(theta0, lo + 1e-9 * (hi - lo), hi - 1e-9 * (hi - lo))
    x_scale = np.array([1.0 if k.scale == "log" else (k.hi - k.lo) / 10 for k in free_keys])
    start_eval = model.evaluate(theta0)
    chi2_start = start_eval.chi2
    accepted = []

    def jac(t):
        accepted.append(model.evaluate(t).chi2)
        return model.jacobian(t)

    log.info("calibration: %d readings, %d values to fit (%s)", obs.n_readings, len(free_keys),
             ", ".join(k.key for k in free_keys))
    sol = least_squares(model.residual, theta0, jac=jac, bounds=(lo, hi), method="trf", x_scale=x_scale,
                        ftol=1e-10, xtol=1e-10, gtol=1e-10, max_nfev=max_evaluations)
    theta = sol.x
    best = model.evaluate(theta)
    J = model.jacobian(theta)
    if sol.status == 0:
        warnings.append(f"the fit stopped after {max_evaluations} evaluations before it converged; the values are the "
                        "best found, not a minimum")

    # ---- uncertainty
    unc = _uncertainty(J, best.residual, theta, lo, hi, free_keys, sol.active_mask)
    if unc["inflation"] > 1.0:
        warnings.append(f"the misfit (chi2 {unc['chi2']:.3g} for {unc['dof']} degrees of freedom) is larger than the "
                        f"stated reading uncertainties explain (P = {unc['p_value']:.2g}): the intervals are widened "
                        "by "
                        f"{math.sqrt(unc['inflation']):.3g}; look at the largest residuals, the sigmas and the model")
    elif unc["dof"] == 0:
        notes.append("as many readings as fitted values: the fit passes through the readings and the misfit cannot be "
                     "checked; the intervals rest on the stated sigmas alone")
    values = model.values(theta)
    parameters, identifiable, why, ratios = _parameters(keys, free_keys, values, start, unc, scale, held)
    for (a, b), rho in unc["high_correlations"]:
        what = "ratio" if rho > 0 else "product"
        warnings.append(f"the readings hardly separate {a} and {b} (correlation {rho:+.2f}): their {what} is "
                        "determined better than either alone")
    for w in unc["weak"]:
        names = " and ".join(w["coefficients"])
        spread = "unbounded" if not math.isfinite(w["factor"]) else f"x/÷ {w['factor']:.3g}"
        warnings.append(f"the readings cannot tell {names} apart: moving them together as {w['text']} changes the "
                        f"readings too little to see (95 % interval of that combination: {spread}); fix one of them "
                        "(move it to 'fixed') or add readings sensitive to it")
    if scale["mode"] in ("ratio", "held"):
        warnings.append(scale["why"])

    # ---- residuals
    residuals = []
    obs_all, sig_all = model.observed, model.sigma
    comp_all = np.concatenate([np.concatenate([h, q]) for h, q in best.computed])
    comp0 = np.concatenate([np.concatenate([h, q]) for h, q in start_eval.computed])
    i = 0
    for ev in obs.events:
        for j, n in enumerate(ev.head_names):
            residuals.append({"event": ev.name, "kind": "head", "name": n, "x_m": float(ev.points[j, 0]),
                              "y_m": float(ev.points[j, 1]), "unit": "m", **_row(obs_all[i], comp_all[i], sig_all[i],
                                                                                   comp0[i])})
            i += 1
        for n in ev.flow_boundaries:
            residuals.append({"event": ev.name, "kind": "flow", "name": n, "x_m": None, "y_m": None,
                              "unit": "m3/s per m (+ into the section)",
                              **_row(obs_all[i], comp_all[i], sig_all[i], comp0[i])})
            i += 1
    big = [r for r in residuals if abs(r["normalised"]) > 3]
    if big:
        worst = max(big, key=lambda r: abs(r["normalised"]))
        warnings.append(f"{len(big)} reading(s) miss by more than 3 sigma after the fit, worst {worst['kind']} "
                        f"'{worst['name']}' ({worst['event']}) by {worst['normalised']:+.1f} sigma: a reading, its "
                        "position, or the model (layers, boundaries) may be wrong there")

    # ---- the calibrated section file and the checks
    section_data = _calibrated_section(data, values, obs)
    analyses, check_rows = _checks(model, obs, values, scale) if checks else ({}, [])
    fit_info = {
        "method": "Weighted nonlinear least squares, trust-region reflective (scipy.optimize.least_squares)",
        "coordinates": {k.key: k.scale for k in free_keys},
        "sensitivities": sorted(model.sensitivity_methods) or ["none"],
        "status": "converged" if sol.status > 0 else "stopped",
        "message": str(sol.message),
        "evaluations": int(sol.nfev), "iterations": len(accepted), "solves": int(model.solves + probe.solves),
        "chi2_start": float(chi2_start), "chi2": unc["chi2"], "dof": unc["dof"],
        "reduced_chi2": unc["chi2"] / unc["dof"] if unc["dof"] > 0 else None,
        "p_value": unc["p_value"], "interval_factor": math.sqrt(unc["inflation"]), "quantile": unc["quantile"],
        "history_chi2": [float(c) for c in model.history], "iterations_chi2": [float(c) for c in accepted],
        "mesh": {k: v for k, v in best.results[0].mesh.stats.items() if not k.endswith("_s")},
    }
    record = {
        "format": CALIBRATION_FORMAT, "seepfe_version": __version__,
        "title": obs.spec.title or f"calibration of {base.title or label}",
        "section": label, "section_sha256": base.input_hash, "observations": obs.label,
        "observations_sha256": obs.sha256,
        "units": {"length": "m", "head": "m", "flow": "m3/s per m (+ into the section)", "conductivity": "m/s"},
        "display_units": base.units.as_dict(),
        "parameters": parameters, "identifiable": identifiable, "identifiable_why": why,
        "correlations": {"keys": [k.key for k in free_keys], "matrix": unc["correlation"]},
        "scale": {"determined": scale["mode"] == "determined", "mode": scale["mode"], "why": scale["why"],
                  "reference": scale.get("reference"), "held": scale.get("held", []), "ratios": ratios},
        "residuals": residuals,
        "events": [{"name": ev.name, "fixed": ev.fixed, "heads": len(ev.heads), "flows": len(ev.flows)}
                   for ev in obs.events],
        "design": None if obs.design is None else {"name": obs.design_name, "fixed": obs.design},
        "fit": fit_info, "checks": check_rows, "warnings": warnings, "notes": notes, "caution": CAUTION,
    }
    return Calibration(_clean(record), section_data=section_data, analyses=analyses, keys=keys, obs=obs,
                       units=base.units, best=best, start=start_eval, source_data=data)


def _row(o, c, s, c0) -> dict:
    return {"observed": float(o), "computed": float(c), "sigma": float(s), "residual": float(o - c),
            "normalised": float((o - c) / s), "computed_start": float(c0)}


# ---------------------------------------------------------------------------- input checks
def _check_points(obs, sections) -> None:
    import shapely
    for ev, sec in zip(obs.events, sections):
        if not len(ev.points):
            continue
        grown = sec.outline.buffer(sec.length_tol)
        ok = shapely.covers(grown, shapely.points(ev.points))
        if not ok.all():
            i = int(np.flatnonzero(~ok)[0])
            x, y = ev.points[i] / obs.units.factor("length")
            raise SectionError(f"{obs.label}: {ev.where}heads[{i}] '{ev.head_names[i]}': the point "
                               f"({x:.6g}, {y:.6g}) {obs.units.length} lies outside the section")


def _check_readings(obs, sections) -> list[str]:
    """Warnings for readings no conductivities can reproduce (outside the range of the event's heads)."""
    out = []
    for ev, sec in zip(obs.events, sections):
        heads = [b.head for b in sec.spec.boundaries if b.head is not None]
        if not heads or not len(ev.heads):
            continue
        top = max(heads)
        tol = sec.head_tol
        for n, h, s in zip(ev.head_names, ev.heads, ev.head_sigma):
            if h > top + 2 * s + tol:
                out.append(f"piezometer '{n}' ({ev.name}) reads {h:.3f} m, above the highest head of the event "
                           f"({top:.3f} m): steady seepage cannot reproduce it (a perched or artesian source, or a "
                           "wrong stage in 'fixed'?)")
        for n, p, h, s in zip(ev.head_names, ev.points, ev.heads, ev.head_sigma):
            if h < p[1] - 2 * s - tol:
                out.append(f"piezometer '{n}' ({ev.name}) reads {h:.3f} m, below its tip ({p[1]:.3f} m): a standpipe "
                           "cannot read below its tip; check the tip elevation")
    return out


# ---------------------------------------------------------------------------- scale of the conductivities
def _scale_analysis(model, obs, sections, start) -> dict:
    """Whether heads can tell the level of the conductivities, and what to hold if not."""
    has_flows = any(len(ev.flows) for ev in obs.events)
    flux = [b.name for sec in sections for b in sec.spec.boundaries if b.kind == "flux" and b.flux != 0]
    if has_flows:
        return {"mode": "determined", "why": "a measured flow fixes the level of the conductivities"}
    if flux:
        return {"mode": "determined", "why": f"boundary '{flux[0]}' prescribes a flux, which fixes the level of the "
                                             "conductivities"}
    sec = sections[0]
    ev = obs.events[0]
    keys = model.keys
    theta = np.array([k.to_theta(start[k.key]) for k in keys], float)
    model.values_shown = start
    dKz = model.zone_tensor_derivatives(theta, ev, sec)
    Kz = sec.zone_tensors()
    relevant = [i for i, z in enumerate(sec.spec.zones) if not z.drain]
    w = np.array([1.0 / np.abs(Kz[i]).max() for i in relevant])
    target = (Kz[relevant] * w[:, None, None]).ravel()
    cols = [j for j, d in enumerate(dKz) if d is not None]
    why_ratio = ("heads alone fix only ratios of conductivities (scaling every k leaves every head unchanged) and no "
                 "flow was measured")
    v = np.zeros(len(keys))
    resid = 1.0
    if cols:
        M = np.column_stack([(dKz[j][relevant] * w[:, None, None]).ravel() for j in cols])
        sol, *_ = np.linalg.lstsq(M, target, rcond=None)
        resid = float(np.linalg.norm(M @ sol - target) / max(np.linalg.norm(target), 1e-300))
        v[cols] = sol
    if resid < 1e-6:
        cand = [j for j in range(len(keys)) if abs(v[j]) > 1e-6]
        if obs.reference is not None:
            r = next(j for j, k in enumerate(keys) if k.key == obs.reference)
            if abs(v[r]) <= 1e-6:
                raise SectionError(f"{obs.label}: reference '{obs.reference}': holding it does not fix the level of "
                                   "the conductivities (it is not a conductivity that scales with the others); name a "
                                   f"fitted conductivity ({', '.join(keys[j].key for j in cand)})")
        else:
            r = cand[0]
        ref = keys[r]
        ratio_keys = [keys[j].key for j in cand if j != r and abs(v[j] / v[r] - 1.0) < 1e-3
                      and keys[j].scale == "log" and ref.scale == "log"]
        unit = ref.file_unit
        return {"mode": "ratio", "reference": ref.key, "direction": {keys[j].key: float(v[j] / v[r]) for j in cand},
                "ratio_keys": ratio_keys, "scaled": [keys[j].key for j in cand],
                "why": f"{why_ratio}: the absolute conductivities are not determined. '{ref.key}' is held at its "
                       f"section value ({start[ref.key]:.4g} {unit}) and the others are fitted as ratios to it; the "
                       "ratios are determined, the absolute values only as well as that held value. Measure a flow (a "
                       "toe drain, relief wells, a ditch) to fix the level"}
    # the fitted keys cannot scale everything: the level rests on the materials held at their section values
    zmat = [z.material for z in sec.spec.zones]
    moving = set()
    for d in dKz:
        if d is not None:
            moving |= {zmat[i] for i in range(len(zmat)) if np.abs(d[i]).max() > 0}
    held = sorted({zmat[i] for i in relevant} - moving)
    mats = sec.spec.materials
    from ..conductivity import conductivity_tensor
    shown = ", ".join(f"{m} (k {float(np.sqrt(np.linalg.det(conductivity_tensor(mats[m])))):.3g} m/s)" for m in held)
    return {"mode": "held", "held": held,
            "why": f"{why_ratio}: the fitted values are relative to the conductivities held at their section values "
                   f"({shown or 'none'}); they are only as good as those held values"}


# ---------------------------------------------------------------------------- uncertainty
def _uncertainty(J, r, theta, lo, hi, keys, active) -> dict:
    from scipy import stats
    m, n = J.shape
    chi2 = float(r @ r)
    span = hi - lo
    at = np.zeros(n, int)
    for j in range(n):
        if active[j] != 0 or theta[j] <= lo[j] + 1e-6 * span[j] and _pushes(J[:, j], r, -1) or \
                theta[j] >= hi[j] - 1e-6 * span[j] and _pushes(J[:, j], r, +1):
            at[j] = -1 if theta[j] - lo[j] < hi[j] - theta[j] else 1
    inner = np.flatnonzero(at == 0)
    dof = m - len(inner)
    p = float(stats.chi2.sf(chi2, dof)) if dof > 0 else None
    inflation, q = 1.0, float(stats.norm.ppf(0.975))
    if dof > 0 and p < 0.05:
        inflation = chi2 / dof
        q = float(stats.t.ppf(0.975, dof))
    sd = np.full(n, np.nan)
    C = np.full((n, n), np.nan)
    weak = []
    if len(inner):
        Ji = J[:, inner]
        U, S, Vt = np.linalg.svd(Ji, full_matrices=False)
        tol = (S.max() if len(S) else 0.0) * 1e-9
        inv = np.where(S > tol, 1.0 / np.where(S > tol, S, 1.0) ** 2, np.inf)
        V = Vt.T
        with np.errstate(invalid="ignore"):
            Ci = (V * np.where(np.isfinite(inv), inv, 0.0)) @ V.T * inflation
        dead = ~np.isfinite(inv)
        for a, ia in enumerate(inner):
            infinite = bool(dead.any() and np.any(np.abs(V[a, dead]) > 1e-6))
            sd[ia] = math.inf if infinite else math.sqrt(max(Ci[a, a], 0.0))
            for b, ib in enumerate(inner):
                C[ia, ib] = Ci[a, b]
        # weak directions: combinations of log-values with a 95 % interval wider than x/÷ 10
        for s_i, inv_i, vec in zip(S, inv, V.T):
            sdir = math.inf if not np.isfinite(inv_i) else math.sqrt(inv_i * inflation)
            big = np.abs(vec) > 0.2
            if big.sum() >= 2 and q * sdir > math.log(IDENTIFIABLE_FACTOR):
                vec = vec / vec[np.argmax(np.abs(vec))]
                terms = [f"{keys[inner[a]].key}^{vec[a]:+.2f}" for a in range(len(vec)) if abs(vec[a]) > 0.2]
                weak.append({"coefficients": {keys[inner[a]].key: float(vec[a]) for a in range(len(vec))
                                              if abs(vec[a]) > 0.2},
                             "text": " x ".join(terms),
                             "factor": math.exp(q * sdir) if math.isfinite(sdir) else math.inf})
    corr = [[None] * n for _ in range(n)]
    high = []
    for a in range(n):
        for b in range(n):
            if np.isfinite(sd[a]) and np.isfinite(sd[b]) and sd[a] > 0 and sd[b] > 0:
                corr[a][b] = float(np.clip(C[a, b] / (sd[a] * sd[b]), -1, 1))
                if b > a and abs(corr[a][b]) >= CORRELATION_WARN:
                    high.append(((keys[a].key, keys[b].key), corr[a][b]))
            elif a == b:
                corr[a][b] = 1.0
    return {"chi2": chi2, "dof": dof, "p_value": p, "inflation": inflation, "quantile": q, "sd": sd, "at": at,
            "correlation": corr, "high_correlations": high, "weak": weak, "theta": theta}


def _pushes(col, r, side) -> bool:
    """Whether lowering chi2 needs moving the value past its bound on ``side`` (-1 lower, +1 upper)."""
    g = float(col @ r)          # d(chi2/2)/dtheta
    return g * side < 0


def _parameters(keys, free_keys, values, start, unc, scale, held) -> tuple:
    q = unc["quantile"]
    index = {k.key: i for i, k in enumerate(free_keys)}
    params, ident, why, ratios = {}, {}, {}, {}
    ratio_mode = scale["mode"] == "ratio"
    scaled = set(scale.get("scaled", []))
    ref = scale.get("reference")
    for k in keys:
        v = values[k.key]
        si = k.si_factor
        rec = {"value": v * si, "low": None, "high": None, "unit": k.si_unit, "start": start[k.key] * si,
               "min": k.lo * si, "max": k.hi * si, "scale": k.scale, "at_bound": None, "held": k.key in held,
               "file_unit": k.file_unit, "value_file_units": v}
        ok, text = True, ""
        j = index.get(k.key)
        sd = unc["sd"][j] if j is not None else math.nan
        t = unc["theta"][j] if j is not None else math.nan
        if j is not None and unc["at"][j] != 0:
            side = "lower" if unc["at"][j] < 0 else "upper"
            rec["at_bound"] = "min" if unc["at"][j] < 0 else "max"
            ok = False
            bound = k.lo if side == "lower" else k.hi
            text = (f"rests on its {side} bound ({bound:.4g} {k.file_unit}): the readings push it further, so the "
                    "value is the bound's, not the data's; widen the bound if the soil allows, or check the readings")
        elif j is not None and not math.isfinite(sd):
            ok = False
            text = "the readings carry no information on it (alone or only together with other fitted values)"
        elif j is not None:
            lo_t, hi_t = t - q * sd, t + q * sd
            if k.scale == "log":
                rec["low"], rec["high"] = math.exp(lo_t) * si, math.exp(hi_t) * si
                fac = math.exp(q * sd)
                ok = fac <= IDENTIFIABLE_FACTOR
                text = (f"95 % interval x/÷ {fac:.3g}" if ok else
                        f"95 % interval spans x/÷ {fac:.3g}: the readings hardly constrain it")
            else:
                rec["low"], rec["high"] = lo_t * si, hi_t * si
                ok = q * sd <= IDENTIFIABLE_FRACTION * (k.hi - k.lo)
                text = (f"95 % interval +- {q * sd:.3g} {k.file_unit}" if ok else
                        f"95 % interval +- {q * sd:.3g} {k.file_unit}, wider than half its bounds: the readings hardly "
                        "constrain it")
        if ratio_mode and k.key in scaled:
            # the absolute value is not determined by heads: never an interval for it
            if k.key == ref:
                text = (f"held at its section value: {scale['why'].split(':')[0]}; the absolute value is not "
                        "determined")
            else:
                r = ratios_entry = None
                if k.key in scale["ratio_keys"] and j is not None:
                    rv = values[k.key] / values[ref]
                    r = {"value": rv, "low": None, "high": None, "identifiable": ok, "why": text}
                    if rec["low"] is not None:
                        r["low"], r["high"] = rec["low"] / si / values[ref], rec["high"] / si / values[ref]
                    ratios[f"{k.key} / {ref}"] = r
                    ratios_entry = f"; the ratio to '{ref}' is {rv:.4g} ({text})"
                text = ("absolute value not determined: heads alone fix only ratios of conductivities and no flow was "
                        f"measured; the value shown holds '{ref}' at its section value" + (ratios_entry or ""))
            rec["low"] = rec["high"] = None
            ok = False
        elif scale["mode"] == "held" and k.dim == "conductivity" and ok:
            text += "; relative to the conductivities held at their section values (heads alone fix only ratios)"
        if j is not None:
            row = unc["correlation"][j]
            hi_c = [f"{free_keys[b].key} ({row[b]:+.2f})" for b in range(len(free_keys))
                    if b != j and row[b] is not None and abs(row[b]) >= CORRELATION_WARN]
            if hi_c:
                text += "; strongly correlated with " + ", ".join(hi_c)
        params[k.key] = rec
        ident[k.key] = bool(ok)
        why[k.key] = text
    return params, ident, why, ratios


# ---------------------------------------------------------------------------- outputs
def _calibrated_section(data: dict, values: dict, obs) -> dict:
    from ..params import with_values
    rounded = {k: float(f"{v:.6g}") for k, v in values.items()}
    out = with_values(data, rounded, obs.label)
    title = out.get("title") or ""
    from pathlib import Path
    src = Path(obs.label).name if not obs.label.startswith("<") else "observations"
    out["title"] = (title + " " if title else "") + f"(calibrated to {src})"
    return out


def _checks(model, obs, values, scale) -> tuple[dict, list]:
    """The usual checks at each observed event and the design event, before and after calibration."""
    from ..analysis import analyse
    from ..solver import solve
    cases = [(ev.name, "event", ev.fixed) for ev in obs.events]
    if obs.design is not None:
        cases.append((obs.design_name, "design", obs.design))
    analyses, rows = {}, []
    for name, kind, fixed in cases:
        pair = {}
        for when, vals in (("before", {}), ("after", values)):
            sec = model.section(fixed, vals, f" ({kind} '{name}')")
            r = solve(sec, mesh=model.mesh_for(sec), linear=model.linear)
            pair[when] = analyse(r)
        analyses[name] = pair
        row = {"case": name, "kind": kind, "fixed": fixed}
        for when, a in pair.items():
            g = a.governing
            row[when] = {"fs": g["fs"], "mode": g["mode"], "boundary": g["boundary"], "x_m": g["x_m"],
                         "exit_gradient_max": g["exit_gradient_max"], "verdict": g["verdict"], "why": g["why"],
                         "flows_m3_s_per_m": a.result.flows,
                         "flows_determined": when == "before" or scale["mode"] == "determined"}
        rows.append(row)
    return analyses, rows


def _clean(d):
    """numpy scalars to Python numbers; nan and inf to None (JSON has neither)."""
    if isinstance(d, dict):
        return {str(k): _clean(v) for k, v in d.items()}
    if isinstance(d, (list, tuple)):
        return [_clean(v) for v in d]
    if isinstance(d, np.ndarray):
        return _clean(d.tolist())
    if isinstance(d, np.generic):
        d = d.item()
    if isinstance(d, float) and not math.isfinite(d):
        return None
    return d
