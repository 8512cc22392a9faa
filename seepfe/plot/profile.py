"""The exit-gradient profile along a named boundary, and its factor of safety.

Drawn from the object that ``result.exit_gradients(name)`` returns (:class:`seepfe.checks.exit.ExitChecks`);
attributes read (duck-typed, so a stand-in object works too):

* required: ``x`` (m), ``gradient`` (vertical exit gradient at the surface, m/m), ``fs`` (-);
* optional: ``distance_from_toe`` (m; default x - x[0]), ``blanket_gradient`` (mean gradient across
  the top stratum, m/m), ``i_critical`` (m/m, number or array), ``fs_heave`` and ``fs_uplift`` (-),
  ``criteria`` (dict with ``fs_heave``, ``fs_uplift``, ``allowable_gradient``), ``passes`` (bool
  array), ``boundary``, ``method``.

Top panel: the gradients against distance from the landside toe, the critical gradient and the
allowable gradient, the stretch that fails the criteria shaded.  Bottom panel: the factors of
safety (heave, uplift) against the required ones, same shading.
"""

from __future__ import annotations

import math

import numpy as np

from .base import text
from .style import FIG_WIDTH_IN, INK, MUTED, OKABE_ITO, style, tint

__all__ = ["exit_gradient_figure", "failing_stretches"]


def _get(obj, names, default=None):
    for n in names:
        v = getattr(obj, n, None)
        if v is not None:
            return v
    return default


def failing_stretches(d: np.ndarray, failing: np.ndarray) -> list[tuple[float, float]]:
    """Intervals (from, to) of distance where ``failing`` holds, extended half-way to the neighbours."""
    d = np.asarray(d, float)
    f = np.asarray(failing, bool)
    if not f.any():
        return []
    mids = np.concatenate([[d[0]], 0.5 * (d[1:] + d[:-1]), [d[-1]]])
    edges = np.diff(np.concatenate([[0], f.astype(int), [0]]))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    return [(float(mids[a]), float(mids[b])) for a, b in zip(starts, ends)]


def _arr(v, n, order):
    if v is None:
        return None
    v = np.asarray(v, float)
    return np.broadcast_to(v, (n,)).copy() if v.ndim == 0 else v[order]


def exit_gradient_figure(profile, title: str | None = None, required_fs: float | None = None,
                         fs_cap: float | None = None, units=None, toe: str = "landside toe"):
    """Two panels (three with a top stratum): exit gradients; factors of safety; top-stratum thickness.

    Parameters
    ----------
    profile : the object of ``result.exit_gradients(name)`` (see the module docstring).
    required_fs : the criterion used when the profile carries none (-), default 1.
    units : seepfe.units.Units of the distance axis and labels (default m).
    fs_cap : upper limit of the factor-of-safety axis (default: 2.5 x the largest criterion, at least 3).
    toe : what the distance is measured from ("landside toe"; "downstream toe" for a dam).

    The gradient axis is scaled to the gradient the criteria apply to (across the top stratum where there
    is one), the critical and the allowable gradient; the surface gradient's singular spike at an end
    of the surface (a toe) is clipped at the top of the axis and marked with its value.  The shaded
    stretches are :func:`seepfe.checks.exit.failing_stretches` (the same as the tables), returned on the
    figure as ``fig.seepfe_failing`` [(from, to), m].
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    from .base import length_axis

    x = np.asarray(profile.x, float)
    n = len(x)
    d = np.asarray(_get(profile, ["distance_from_toe", "distance"], x - x[0]), float)
    order = np.argsort(d, kind="stable")
    d = d[order]
    i_s = _arr(profile.gradient, n, order)
    ib = _arr(_get(profile, ["blanket_gradient"]), n, order)
    if ib is not None and not np.isfinite(ib).any():
        ib = None
    fs = _arr(profile.fs, n, order)
    fsh = _arr(_get(profile, ["fs_heave"]), n, order)
    fsu = _arr(_get(profile, ["fs_uplift"]), n, order)
    thick = _arr(_get(profile, ["thickness"]), n, order)
    if thick is not None and not np.isfinite(thick).any():
        thick = None
    ic = _arr(_get(profile, ["i_critical", "critical_gradient"]), n, order)
    crit = dict(_get(profile, ["criteria"], {}) or {})
    req_h = crit.get("fs_heave") or required_fs or 1.0
    req_u = crit.get("fs_uplift") or required_fs or 1.0
    allow = crit.get("allowable_gradient")
    if hasattr(profile, "s") and hasattr(profile, "passes") and hasattr(profile, "toe_x"):
        from ..checks.exit import failing_stretches as _stretches
        stretches = _stretches(profile)                    # the one definition (tables, summary.json)
    else:
        passes = _get(profile, ["passes"])
        failing = ~np.asarray(passes, bool)[order] if passes is not None else np.isfinite(fs) & (fs < min(req_h, req_u))
        stretches = failing_stretches(d, failing)
    name = _get(profile, ["boundary", "name"], "")
    fL = 1.0 if units is None else units.factor("length")

    blue, sky, red, green, purple = (OKABE_ITO["blue"], OKABE_ITO["sky"], OKABE_ITO["vermillion"], OKABE_ITO["green"],
                                     OKABE_ITO["purple"])
    shade = tint(red, 0.8)
    with style():
        rows = 3 if thick is not None else 2
        # fixed margins in inches (no layout engine: it would lay the figure out again at every save);
        # the legend's band below the x label is sized from the number of entries (two columns)
        n_leg = 4 + (ib is not None) + (fsu is not None and np.isfinite(fsu).any()) + bool(stretches)
        legend_in = 0.2 + 0.155 * math.ceil(n_leg / 2)
        panels_in = 4.6 if rows == 3 else 3.8
        top_in, xlab_in = 0.35, 0.5
        H = top_in + panels_in + xlab_in + legend_in
        fig = Figure(figsize=(FIG_WIDTH_IN, H))
        FigureCanvasAgg(fig)
        gs = fig.add_gridspec(rows, 1, height_ratios=[1.3, 1.0, 0.5][:rows], hspace=0.12, left=0.72 / FIG_WIDTH_IN,
                              right=1 - 0.15 / FIG_WIDTH_IN, top=1 - top_in / H, bottom=(xlab_in + legend_in) / H)
        a1 = fig.add_subplot(gs[0])
        a2 = fig.add_subplot(gs[1], sharex=a1)
        a3 = fig.add_subplot(gs[2], sharex=a1) if rows == 3 else None
        panels = (a1, a2) + ((a3,) if a3 is not None else ())
        for a in panels:
            for s0, s1 in stretches:
                a.axvspan(s0, s1, color=shade, lw=0, zorder=0)
        handles = []
        # the gradient the criteria apply to sets the scale; the surface gradient is drawn under it
        ig = np.where(np.isfinite(ib), ib, i_s) if ib is not None else i_s
        if ib is not None:
            a1.plot(d, ib, color=blue, lw=1.7, zorder=5)
            handles.append(Line2D([], [], color=blue, lw=1.7, label="mean gradient across the top stratum "
                                                                     "(the exit gradient checked)"))
            a1.plot(d, i_s, color=sky, lw=1.0, ls=(0, (4, 2)), zorder=4)
            handles.append(Line2D([], [], color=sky, lw=1.0, ls=(0, (4, 2)),
                                  label="vertical gradient at the surface"))
        else:
            a1.plot(d, i_s, color=blue, lw=1.7, zorder=5)
            handles.append(Line2D([], [], color=blue, lw=1.7,
                                  label="vertical gradient at the surface (the exit gradient checked)"))
        # the scale: the checked gradient away from the surface's ends (where the surface gradient is
        # singular), the critical and the allowable gradient
        inner = np.ones(n, bool)
        if ib is None and n > 6:
            inner[:2] = inner[-2:] = False
        tops = [float(np.nanmax(np.where(inner, ig, np.nan)))] if np.isfinite(ig[inner]).any() else []
        labels_at = []
        if ic is not None and np.isfinite(ic).any():
            a1.plot(d, ic, color=INK, lw=0.9, zorder=3)
            tops.append(float(np.nanmax(ic)))
            lab = (f"critical gradient {np.nanmax(ic):.2f}" if np.nanmax(ic) - np.nanmin(ic) < 1e-9
                   else "critical gradient")
            labels_at.append((float(np.nanmax(ic)), lab))
        if allow is not None:
            a1.axhline(allow, color=INK, lw=0.8, ls=(0, (1, 1.5)), zorder=3)
            tops.append(allow)
            labels_at.append((float(allow), f"allowable {allow:g}"))
        top = 1.25 * max([t for t in tops if np.isfinite(t)] or [1.0])
        lo = min(0.0, float(np.nanmin(np.where(np.isfinite(ig), ig, 0.0))) * 1.1)
        a1.set_ylim(lo, top)
        _inline_labels(a1, d[-1], labels_at, top - lo)
        over = np.isfinite(i_s) & (i_s > top)
        if over.any():
            k = int(np.nanargmax(np.where(over, i_s, -np.inf)))
            a1.plot([d[k]], [top], marker="^", ms=5.5, color=sky, mec=INK, mew=0.5, zorder=6, clip_on=False)
            a1.annotate(f"surface gradient {i_s[k]:.2f} at {d[k] / fL:.1f} {units.length if units else 'm'}: "
                        "off scale (singular at the end of the surface; grows as the mesh is refined)",
                        (d[k], top), xytext=(7, -3), textcoords="offset points", ha="left", va="top", fontsize=6.5,
                        color=INK, zorder=7, bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.85))
        a1.set_ylabel("gradient (m/m)")
        a1.tick_params(labelbottom=False)
        a1.set_title(text(title or (f"Exit gradients along '{name}'" if name else "Exit gradients")), pad=6)

        cap = fs_cap or max(2.5 * max(req_h, req_u), 3.0)
        shown = []
        if fsh is not None and fsu is not None:
            a2.plot(d, np.clip(fsh, 0, cap), color=green, lw=1.6, zorder=4)
            handles.append(Line2D([], [], color=green, lw=1.6, label="FS against heave (middle panel)"))
            shown.append(fsh)
            if np.isfinite(fsu).any():
                a2.plot(d, np.clip(fsu, 0, cap), color=purple, lw=1.5, ls=(0, (6, 1.5, 1.5, 1.5)), zorder=4)
                handles.append(Line2D([], [], color=purple, lw=1.5, ls=(0, (6, 1.5, 1.5, 1.5)),
                                      label="FS against uplift (middle panel)"))
                shown.append(fsu)
        else:
            a2.plot(d, np.clip(fs, 0, cap), color=green, lw=1.6, zorder=4)
            handles.append(Line2D([], [], color=green, lw=1.6, label="factor of safety (middle panel)"))
            shown.append(fs)
        reqs = {req_h: "heave"} if abs(req_h - req_u) < 1e-12 else {req_h: "heave", req_u: "uplift"}
        for r, what in reqs.items():
            a2.axhline(r, color=INK, lw=0.8, ls=(0, (1, 1.5)), zorder=3)
        _inline_labels(a2, d[-1], [(r, f"required {r:g}" if len(reqs) == 1 else f"required ({w}) {r:g}")
                                   for r, w in reqs.items()], cap)
        a2.set_ylim(0, cap)
        a2.set_ylabel("factor of safety (-)")
        last = a2
        if a3 is not None:
            a2.tick_params(labelbottom=False)
            a3.fill_between(d, 0, np.nan_to_num(thick, nan=0.0), color=tint(OKABE_ITO["orange"], 0.55), lw=0,
                            zorder=2)
            a3.plot(d, thick, color=OKABE_ITO["orange"], lw=1.0, zorder=3)
            a3.set_ylim(0, float(np.nanmax(thick)) * 1.25)
            a3.set_ylabel(f"top stratum\nthickness ({length_axis(a3.yaxis, units)})")
            a3.invert_yaxis()                     # drawn down from the surface, as in a section
            last = a3
        Lu = length_axis(last.xaxis, units)
        last.set_xlabel(f"distance from the {toe} ({Lu}), + away from the embankment")
        if any(np.any(np.nan_to_num(v, nan=0.0) > cap) for v in shown):
            # above the panel's top edge, right-aligned: clear of the curves capped along that edge
            a2.text(0.995, 1.01, f"values above {cap:g} drawn at {cap:g}", transform=a2.transAxes, ha="right",
                    va="bottom", fontsize=6.5, color=MUTED)
        a2.set_xlim(d[0], d[-1])
        for a in panels:
            a.grid(axis="y", color="#e6e6e6", lw=0.5, zorder=-1)
        fz = np.where(np.isfinite(fs), fs, np.inf)
        if np.isfinite(fz).any():
            k = int(np.argmin(fz))
            a2.plot([d[k]], [min(fs[k], cap)], marker="o", ms=4.5, color=red, zorder=5)
            a2.annotate(f"least {fs[k]:.2f} at {d[k] / fL:.1f} {Lu}", (d[k], min(fs[k], cap)), xytext=(6, -10),
                        textcoords="offset points", fontsize=7, color=red)
        if stretches:
            tot = sum(b - a for a, b in stretches)
            where = "; ".join(f"{a / fL:.1f} to {b / fL:.1f}" for a, b in stretches[:3])
            more = f" and {len(stretches) - 3} more" if len(stretches) > 3 else ""
            handles.append(Patch(color=shade, label=f"fails the criteria: {where}{more} {Lu} from the toe, "
                                                    f"{tot / fL:.1f} {Lu} in all"))
        method = _get(profile, ["method"])
        fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.72 / FIG_WIDTH_IN, legend_in / H), ncol=2,
                   borderaxespad=0.0, columnspacing=1.6, title=f"gradients: {method}" if method else None,
                   title_fontsize=6.5, alignment="left")
    fig.seepfe_failing = stretches
    return fig


def _inline_labels(ax, x_right, items, span) -> None:
    """Labels of horizontal reference lines at the right end, moved apart so they never overlap."""
    placed: list[float] = []
    gap = 0.07 * span
    for y, text in sorted(items):
        yy = y
        for p in placed:
            if abs(yy - p) < gap:
                yy = p + gap
        placed.append(yy)
        ax.text(x_right, yy, text + " ", ha="right", va="bottom", fontsize=6.8, color=INK, zorder=6,
                bbox=dict(boxstyle="round,pad=0.1", fc="white", ec="none", alpha=0.8))
