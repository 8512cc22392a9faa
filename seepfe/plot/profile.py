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

import numpy as np

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
                         fs_cap: float | None = None, units=None):
    """Two panels: exit gradients with critical and allowable lines; factors of safety.

    Parameters
    ----------
    profile : the object of ``result.exit_gradients(name)`` (see the module docstring).
    required_fs : the criterion used when the profile carries none (-), default 1.
    units : seepfe.units.Units of the distance axis and labels (default m).
    fs_cap : upper limit of the factor-of-safety axis (default: 2.5 x the largest criterion, at least 3).

    The shaded stretches are returned on the figure as ``fig.seepfe_failing`` [(from, to), m].
    """
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

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
    passes = _get(profile, ["passes"])
    if passes is not None:
        failing = ~np.asarray(passes, bool)[order]
    else:
        failing = np.isfinite(fs) & (fs < min(req_h, req_u))
    stretches = failing_stretches(d, failing)
    name = _get(profile, ["boundary", "name"], "")

    blue, orange, red, green = OKABE_ITO["blue"], OKABE_ITO["orange"], OKABE_ITO["vermillion"], OKABE_ITO["green"]
    shade = tint(red, 0.8)
    with style():
        rows = 3 if thick is not None else 2
        fig = Figure(figsize=(FIG_WIDTH_IN, 6.2 if rows == 3 else 5.2))
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        FigureCanvasAgg(fig)
        gs = fig.add_gridspec(rows, 1, height_ratios=[1.3, 1.0, 0.5][:rows], hspace=0.12, left=0.1, right=0.97,
                              top=0.92, bottom=0.24 if rows == 3 else 0.27)
        a1 = fig.add_subplot(gs[0])
        a2 = fig.add_subplot(gs[1], sharex=a1)
        a3 = fig.add_subplot(gs[2], sharex=a1) if rows == 3 else None
        panels = (a1, a2) + ((a3,) if a3 is not None else ())
        for a in panels:
            for s0, s1 in stretches:
                a.axvspan(s0, s1, color=shade, lw=0, zorder=0)
        handles = [Line2D([], [], color=blue, lw=1.6, label="vertical exit gradient at the surface")]
        a1.plot(d, i_s, color=blue, lw=1.6, zorder=4)
        if ib is not None:
            a1.plot(d, ib, color=orange, lw=1.5, ls=(0, (6, 2)), zorder=4)
            handles.append(Line2D([], [], color=orange, lw=1.5, ls=(0, (6, 2)),
                                  label="mean gradient across the top stratum"))
        tops = [np.nanmax(i_s)] + ([np.nanmax(ib)] if ib is not None else [])
        if ic is not None and np.isfinite(ic).any():
            a1.plot(d, ic, color=INK, lw=1.0, zorder=3)
            lab = (f"critical gradient i_c = {np.nanmax(ic):.2f}" if np.nanmax(ic) - np.nanmin(ic) < 1e-9
                   else "critical gradient i_c")
            handles.append(Line2D([], [], color=INK, lw=1.0, label=lab))
            tops.append(np.nanmax(ic))
        if allow is not None:
            a1.axhline(allow, color=INK, lw=0.9, ls=(0, (2, 2)), zorder=3)
            handles.append(Line2D([], [], color=INK, lw=0.9, ls=(0, (2, 2)),
                                  label=f"allowable gradient {allow:g}"))
            tops.append(allow)
        a1.set_ylabel("gradient (m/m)")
        top = np.nanmax(tops) * 1.15
        a1.set_ylim(min(0.0, float(np.nanmin(i_s)) * 1.1), top if np.isfinite(top) and top > 0 else 1.0)
        a1.tick_params(labelbottom=False)
        a1.set_title(title or (f"Exit gradients along '{name}'" if name else "Exit gradients"), pad=6)

        cap = fs_cap or max(2.5 * max(req_h, req_u), 3.0)
        shown = []
        if fsh is not None and fsu is not None:
            a2.plot(d, np.clip(fsh, 0, cap), color=blue, lw=1.6, zorder=4)
            handles.append(Line2D([], [], color=blue, lw=1.6, label="factor of safety against heave (lower panel)"))
            shown.append(fsh)
            if np.isfinite(fsu).any():
                a2.plot(d, np.clip(fsu, 0, cap), color=green, lw=1.5, ls=(0, (6, 2)), zorder=4)
                handles.append(Line2D([], [], color=green, lw=1.5, ls=(0, (6, 2)),
                                      label="factor of safety against uplift (lower panel)"))
                shown.append(fsu)
        else:
            a2.plot(d, np.clip(fs, 0, cap), color=blue, lw=1.6, zorder=4)
            handles.append(Line2D([], [], color=blue, lw=1.6, label="factor of safety (lower panel)"))
            shown.append(fs)
        reqs = {req_h: "heave"} if abs(req_h - req_u) < 1e-12 else {req_h: "heave", req_u: "uplift"}
        for r, what in reqs.items():
            a2.axhline(r, color=INK, lw=0.9, ls=(0, (2, 2)), zorder=3)
            lab = f"required {r:g}" if len(reqs) == 1 else f"required ({what}) {r:g}"
            a2.text(d[-1], r, lab + " ", ha="right", va="bottom", fontsize=7, color=INK)
        a2.set_ylim(0, cap)
        a2.set_ylabel("factor of safety (-)")
        from .base import length_axis
        last = a2
        if a3 is not None:
            a2.tick_params(labelbottom=False)
            a3.fill_between(d, 0, np.nan_to_num(thick, nan=0.0), color=tint(OKABE_ITO["orange"], 0.55), lw=0,
                            step=None, zorder=2)
            a3.plot(d, thick, color=OKABE_ITO["orange"], lw=1.0, zorder=3)
            a3.set_ylim(0, float(np.nanmax(thick)) * 1.25)
            a3.set_ylabel(f"top stratum\nthickness ({length_axis(a3.yaxis, units)})")
            a3.invert_yaxis()                     # drawn down from the surface, as in a section
            last = a3
        Lu = length_axis(last.xaxis, units)
        last.set_xlabel(f"distance from the landside toe ({Lu})")
        if any(np.any(np.nan_to_num(v, nan=0.0) > cap) for v in shown):
            a2.text(0.005, 0.97, f"values above {cap:g} drawn at {cap:g}", transform=a2.transAxes, ha="left",
                    va="top", fontsize=6.5, color=MUTED)
        a2.set_xlim(d[0], d[-1])
        for a in panels:
            a.grid(axis="y", color="#e6e6e6", lw=0.5, zorder=-1)
        fz = np.where(np.isfinite(fs), fs, np.inf)
        if np.isfinite(fz).any():
            k = int(np.argmin(fz))
            a2.plot([d[k]], [min(fs[k], cap)], marker="o", ms=4.5, color=red, zorder=5)
            fL = 1.0 if units is None else units.factor("length")
            a2.annotate(f"least {fs[k]:.2f} at {d[k] / fL:.1f} {Lu}", (d[k], min(fs[k], cap)), xytext=(6, -10),
                        textcoords="offset points", fontsize=7, color=red)
        if stretches:
            tot = sum(b - a for a, b in stretches)
            fL = 1.0 if units is None else units.factor("length")
            handles.append(Patch(color=shade, label=f"fails the criteria ({tot / fL:.1f} {Lu} in all)"))
        yl = 0.135 if a3 is not None else 0.165
        fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.1, yl), ncol=2, borderaxespad=0.0,
                   columnspacing=1.6)
        method = _get(profile, ["method"])
        if method:
            fig.text(0.1, yl + 0.01, f"gradients: {method}", ha="left", va="bottom", fontsize=6.5, color=MUTED)
    fig.seepfe_failing = stretches
    return fig
