"""Figures of a calibration: readings against the computed values, fitted values against their bounds, the
objective during the fit. matplotlib Figure objects (no pyplot), the seepfe style and Okabe-Ito colours."""

from __future__ import annotations

import math

import numpy as np

__all__ = ["calibration_figures", "readings_figure", "values_figure", "objective_figure"]


def _fig(w, h, rows=1, **kw):
    from matplotlib.figure import Figure
    fig = Figure(figsize=(w, h), layout="constrained")
    axs = fig.subplots(rows, 1, squeeze=False, **kw)[:, 0]
    for ax in axs:
        ax.grid(True, color="#e3e3e3", linewidth=0.6)
        ax.set_axisbelow(True)
    return fig, axs


def calibration_figures(cal) -> list:
    from ..plot.save import FigureItem
    from ..plot.style import style
    with style():
        return [FigureItem("calibration_readings", "Readings and computed values at the start and after the fit "
                           "(bars: +- one sigma of each reading); below, the misfit in units of sigma",
                           readings_figure(cal)),
                FigureItem("calibration_values", "Fitted values within their bounds, with their 95 % intervals "
                           "(linearised), and the start", values_figure(cal)),
                FigureItem("calibration_objective", "The objective chi2 during the fit", objective_figure(cal))]


def readings_figure(cal):
    from ..plot.style import INK, MUTED, OKABE_ITO
    d, u = cal.to_dict(), cal.units
    rows = d["residuals"]
    heads = [r for r in rows if r["kind"] == "head"]
    fl = u.factor("length")
    fig, (ax, ax2) = _fig(7.2, 5.6, rows=2, height_ratios=[2.2, 1.0])
    events = list(dict.fromkeys(r["event"] for r in rows))
    many = len(events) > 1
    if heads:
        x = np.arange(len(heads))
        obs = np.array([r["observed"] for r in heads]) / fl
        sig = np.array([r["sigma"] for r in heads]) / fl
        c0 = np.array([r["computed_start"] for r in heads]) / fl
        c1 = np.array([r["computed"] for r in heads]) / fl
        ax.errorbar(x, obs, yerr=sig, fmt="s", ms=5, color=INK, mfc="white", ecolor=INK, elinewidth=1.0, capsize=3,
                    label="observed +- sigma", zorder=3)
        ax.plot(x - 0.18, c0, "o", ms=5, mfc="none", color=MUTED, label="computed, start values", zorder=2)
        ax.plot(x + 0.18, c1, "D", ms=5, color=OKABE_ITO["blue"], label="computed, fitted values", zorder=4)
        ax.set_xticks(x, [r["name"] for r in heads], rotation=0 if len(heads) <= 14 else 60, fontsize=7)
        ax.set_xlim(-0.6, len(heads) - 0.4)
        _separators(ax, heads, many)
        ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.09), ncol=3, fontsize=7)
    else:
        ax.text(0.5, 0.5, "no head readings", transform=ax.transAxes, ha="center", color=MUTED)
    ax.set_ylabel(f"total head ({u.length})")
    ax.set_title("Piezometer heads: observed and computed")
    # normalised residuals of every reading
    x = np.arange(len(rows))
    n1 = np.array([r["normalised"] for r in rows])
    n0 = np.array([(r["observed"] - r["computed_start"]) / r["sigma"] for r in rows])
    lim = 3.5
    if len(n1):
        lim = max(lim, float(np.nanmax(np.abs(n1))) * 1.15, min(float(np.nanmax(np.abs(n0))) * 1.15, 8.0))
    ax2.axhspan(-2, 2, color=OKABE_ITO["sky"], alpha=0.15, lw=0, label="within +- 2 sigma")
    ax2.axhline(0, color=MUTED, lw=0.8)
    ax2.plot(x, np.clip(n0, -lim, lim), "o", ms=4, mfc="none", color=MUTED, label="start values")
    ax2.bar(x, n1, width=0.5, color=[OKABE_ITO["blue"] if abs(v) <= 2 else OKABE_ITO["vermillion"] for v in n1],
            label="fitted values", zorder=3)
    off = np.abs(n0) > lim
    if off.any():
        for xo, v in zip(x[off], n0[off]):
            ax2.plot([xo], [np.sign(v) * lim * 0.96], "^" if v > 0 else "v", ms=5, color=MUTED)
    ax2.set_ylim(-lim, lim)
    ax2.set_xticks(x, [("q " if r["kind"] == "flow" else "") + r["name"] for r in rows],
                   rotation=0 if len(rows) <= 14 else 60, fontsize=7)
    ax2.set_xlim(-0.6, len(rows) - 0.4)
    _separators(ax2, rows, False)
    ax2.set_ylabel("(observed - computed) / sigma (-)")
    ax2.set_title("Misfit of every reading (heads and flows, q: a flow)")
    ax2.legend(loc="upper right", fontsize=7, ncol=3)
    return fig


def _separators(ax, rows, label: bool):
    """Dashed lines between events; with ``label``, each event's name above its group."""
    from ..plot.style import MUTED
    starts = [i for i, r in enumerate(rows) if i == 0 or r["event"] != rows[i - 1]["event"]]
    for s in starts[1:]:
        ax.axvline(s - 0.5, color="#bbbbbb", lw=0.8, ls="--")
    if label:
        for a, b in zip(starts, starts[1:] + [len(rows)]):
            ax.text((a + b - 1) / 2, 0.985, rows[a]["event"], transform=ax.get_xaxis_transform(), ha="center",
                    va="top", fontsize=7.5, color=MUTED)


def values_figure(cal):
    from ..plot.style import INK, MUTED, OKABE_ITO
    d = cal.to_dict()
    keys = {k.key: k for k in cal.fit_keys}
    items = list(d["parameters"].items())
    fig, (ax,) = _fig(7.2, 0.75 + 0.62 * len(items))
    for row, (key, p) in enumerate(items):
        y = len(items) - 1 - row
        k = keys[key]
        conv = 1.0 / k.si_factor

        def pos(v):
            if v is None:
                return None
            v = v * conv
            if k.scale == "log":
                return (math.log(max(v, 1e-300)) - math.log(k.lo)) / (math.log(k.hi) - math.log(k.lo))
            return (v - k.lo) / (k.hi - k.lo)
        ax.plot([0, 1], [y, y], color="#c8c8c8", lw=6, solid_capstyle="butt", zorder=1)
        if p["low"] is not None:
            a, b = pos(p["low"]), pos(p["high"])
            ax.plot([max(a, -0.08), min(b, 1.08)], [y, y], color=OKABE_ITO["blue"], lw=2.2, zorder=2,
                    label="95 % interval" if row == 0 or "95 % interval" not in _labels(ax) else None)
            for end, v in ((a, -0.08), (b, 1.08)):
                if (end < -0.08 and v < 0) or (end > 1.08 and v > 0):
                    ax.annotate("", xy=(v, y), xytext=(v * 0.9, y), arrowprops={"arrowstyle": "->",
                                                                               "color": OKABE_ITO["blue"]})
        ratio = d["scale"]["ratios"].get(f"{key} / {d['scale']['reference']}") if p["low"] is None else None
        if ratio is not None and ratio["low"] is not None:
            ref = d["parameters"][d["scale"]["reference"]]["value"]
            a, b = pos(ratio["low"] * ref), pos(ratio["high"] * ref)
            ax.plot([max(a, -0.08), min(b, 1.08)], [y, y], color=OKABE_ITO["blue"], lw=2.2, ls=(0, (1.5, 1)), zorder=2,
                    label="95 % interval of the ratio, at the held value"
                    if "95 % interval of the ratio, at the held value" not in _labels(ax) else None)
        s = pos(p["start"])
        ax.plot([min(max(s, -0.08), 1.08)], [y], "o", mfc="white", color=MUTED, ms=6, zorder=3,
                label="start" if "start" not in _labels(ax) else None)
        f = pos(p["value"])
        colour = OKABE_ITO["blue"] if d["identifiable"][key] else OKABE_ITO["vermillion"]
        if p["held"] or (ratio is not None and ratio["identifiable"]):
            colour = OKABE_ITO["orange"]
        ax.plot([f], [y], "D" if not p["held"] else "s", color=colour, ms=6, zorder=4,
                label=("fitted" if not p["held"] else "held") if ("fitted" if not p["held"] else "held")
                not in _labels(ax) else None)
        state = ("held: absolute value not determined" if p["held"] else
                 "ratio determined, absolute value not" if ratio is not None and ratio["identifiable"] else
                 "not identifiable" if not d["identifiable"][key] else "identifiable")
        ax.text(1.12, y, f"{p['value'] * conv:.3g} {k.file_unit}\n{state}", va="center", fontsize=7,
                color=INK if d["identifiable"][key] or colour == OKABE_ITO["orange"] else OKABE_ITO["vermillion"])
        ax.text(0, y + 0.28, f"{k.lo:.3g}", fontsize=6.5, color=MUTED, ha="center")
        ax.text(1, y + 0.28, f"{k.hi:.3g}", fontsize=6.5, color=MUTED, ha="center")
    ax.set_yticks(range(len(items)), [k for k, _ in items][::-1], fontsize=7.5)
    ax.set_ylim(-0.7, len(items) - 0.3)
    ax.set_xlim(-0.12, 1.55)
    ax.set_xticks([0, 0.5, 1], ["min", "middle\n(log scale for k)", "max"], fontsize=7)
    ax.grid(False)
    ax.set_title("Fitted values within their bounds (grey bar: min to max)")
    ax.legend(loc="upper center", fontsize=7, ncol=3, bbox_to_anchor=(0.5, -0.22 if len(items) < 3 else -0.1))
    return fig


def _labels(ax):
    return [h.get_label() for h in ax.get_lines()]


def objective_figure(cal):
    from ..plot.style import MUTED, OKABE_ITO
    f = cal["fit"]
    hist = np.array(f["history_chi2"], float)
    it = np.array(f["iterations_chi2"], float)
    fig, (ax,) = _fig(7.2, 3.2)
    n = np.arange(1, len(hist) + 1)
    ax.semilogy(n, hist, "o-", ms=3.5, lw=0.9, color=MUTED, label="every evaluation")
    # accepted iterations: the evaluations whose chi2 the Jacobian was taken at
    if len(it):
        idx = [int(np.flatnonzero(np.isclose(hist, c, rtol=1e-12, atol=0))[0]) + 1 for c in it
               if np.isclose(hist, c, rtol=1e-12, atol=0).any()]
        ax.semilogy(idx, hist[np.array(idx) - 1], "D", ms=5, color=OKABE_ITO["blue"], label="accepted steps")
    if f["dof"] and f["dof"] > 0:
        ax.axhline(f["dof"], color=OKABE_ITO["green"], ls="--", lw=1,
                   label=f"expected chi2 for a good fit (= dof = {f['dof']})")
    from matplotlib.ticker import LogFormatter
    ax.yaxis.set_major_formatter(LogFormatter(labelOnlyBase=False))
    ax.yaxis.set_minor_formatter(LogFormatter(labelOnlyBase=False, minor_thresholds=(2, 1)))
    ax.set_xlabel("forward evaluation (-)")
    ax.set_ylabel("chi2 = sum ((observed - computed) / sigma)^2 (-)")
    ax.set_title("Objective during the fit")
    ax.legend(loc="upper right", fontsize=7)
    return fig
