"""Figures of a transient solve under a hydrograph: time histories, flows and volumes, the phreatic surface at
the stored times, and pore pressures in the riverside slope at the end of a falling limb.

Each function returns a matplotlib ``Figure`` (Agg, no pyplot). Time is shown in the run's display unit (hour or
day), lengths and flows in the section file's units; factors of safety and gradients have none.
"""

from __future__ import annotations


import numpy as np

from . import base
from .style import INK, MUTED, OKABE_ITO

__all__ = ["history_figure", "flows_figure", "phreatic_figure", "pore_pressure_figure", "transient_figures",
           "drawdown_window"]


def _fig(nrows: int, height_in: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from .style import FIG_WIDTH_IN
    fig = Figure(figsize=(FIG_WIDTH_IN, height_in))
    FigureCanvasAgg(fig)
    axes = fig.subplots(nrows, 1, sharex=True, gridspec_kw={"hspace": 0.16})
    return fig, np.atleast_1d(axes)


def _tu(tres):
    from ..hydrograph import TIME_UNITS, time_label
    return TIME_UNITS[tres.time_unit], time_label(tres.time_unit)


def _mark_crest(ax, tres, f, label=False):
    """The crest of the flood (dashed grey) and the moment of the least FS (dotted vermillion)."""
    tc = tres.schedule.crest / f
    ax.axvline(tc, color=MUTED, lw=0.8, ls=(0, (4, 3)), zorder=1)
    lf = tres.least_fs
    if lf["time_s"] is not None:
        ax.axvline(lf["time_s"] / f, color=OKABE_ITO["vermillion"], lw=0.7, ls=(0, (1, 2)), zorder=1)
    if label:
        ax.annotate("crest", (tc, 0.0), xycoords=("data", "axes fraction"), xytext=(3, 3),
                    textcoords="offset points", ha="left", va="bottom", fontsize=7, color=MUTED)
        if lf["time_s"] is not None:
            ax.annotate("least FS", (lf["time_s"] / f, 0.0), xycoords=("data", "axes fraction"), xytext=(3, 3),
                        textcoords="offset points", ha="left", va="bottom", fontsize=7,
                        color=OKABE_ITO["vermillion"])


def _title(text: str, width: int = 80) -> str:
    import textwrap
    return "\n".join(textwrap.wrap(text, width))


def _legend(ax):
    ax.legend(loc="best", framealpha=0.85, facecolor="white", edgecolor="none")


def _pad(ax, lo_zero=False):
    y0, y1 = ax.get_ylim()
    d = 0.08 * (y1 - y0)
    ax.set_ylim(0 if lo_zero else y0 - d, y1 + d)


def history_figure(tres):
    """Stage, least FS, largest exit gradient and toe head against time, the crest and the least FS marked."""
    from ..hydrograph import hydrographs
    H = tres.history
    sec = tres.section
    u = sec.units
    fL, LU = u.factor("length"), u.length
    f, tl = _tu(tres)
    t = H["time_s"] / f
    fig, ax = _fig(4, 7.4)
    # stage(s)
    cols = [OKABE_ITO["blue"], OKABE_ITO["sky"], OKABE_ITO["purple"], OKABE_ITO["orange"]]
    for i, (name, g) in enumerate(hydrographs(sec).items()):
        ax[0].plot(t, H[f"stage_{name}_m"] / fL, color=cols[i % len(cols)], lw=1.6, label=f"{name} (stage)")
        k = (g.t >= tres.schedule.start) & (g.t <= tres.schedule.end)
        ax[0].plot(g.t[k] / f, g.h[k] / fL, "o", ms=3, color=cols[i % len(cols)], mfc="white", mew=0.8)
    ax[0].set_ylabel(f"stage ({LU})")
    _pad(ax[0])
    _legend(ax[0])
    ax[0].set_title(_title(f"{sec.title or sec.source}: the flood against time"), loc="left")
    _mark_crest(ax[0], tres, f, label=True)
    # least FS
    fs = np.where(np.isfinite(H["fs"]), H["fs"], np.nan)
    ax[1].plot(t, fs, color=OKABE_ITO["vermillion"], lw=1.6, label="least FS over the exit surfaces")
    crit = sec.spec.checks.criteria
    req = max(crit.fs_heave, crit.fs_uplift)
    ax[1].axhline(req, color=INK, lw=0.8, ls=(0, (1, 2)), label=f"required {req:g}")
    lf = tres.least_fs
    if lf["fs"] is not None:
        ax[1].plot([lf["time_s"] / f], [lf["fs"]], "o", ms=5, color=OKABE_ITO["vermillion"], mfc="white", mew=1.2)
        lag = lf["lag_after_crest_s"] / f
        ax[1].annotate(f"least FS {lf['fs']:.2f} at {lf['time_s'] / f:.3g} {tl}\n"
                       f"{abs(lag):.2g} {tl} {'after' if lag >= 0 else 'before'} the crest",
                       (lf["time_s"] / f, lf["fs"]), xytext=(8, 10), textcoords="offset points", fontsize=7,
                       bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="none", alpha=0.85))
    top = np.nanmax(fs) if np.isfinite(fs).any() else req * 2
    ax[1].set_ylim(0, max(min(top, 4 * req), req) * 1.15)
    ax[1].set_ylabel("least FS (-)")
    _legend(ax[1])
    _mark_crest(ax[1], tres, f)
    # exit gradient
    ax[2].plot(t, H["exit_gradient_max"], color=OKABE_ITO["green"], lw=1.6, label="largest exit gradient")
    ax[2].axhline(crit.allowable_gradient, color=INK, lw=0.8, ls=(0, (1, 2)),
                  label=f"allowable {crit.allowable_gradient:g}")
    ax[2].set_ylabel("exit gradient (m/m)")
    _pad(ax[2], lo_zero=True)
    _legend(ax[2])
    _mark_crest(ax[2], tres, f)
    # toe head
    tp = tres.toe_point
    lab = ("head at the toe" if tp is None else
           f"head at ({tp[0] / fL:.3g}, {tp[1] / fL:.3g}) {LU}, under the landside toe")
    ax[3].plot(t, H["toe_head_m"] / fL, color=OKABE_ITO["orange"], lw=1.6, label=lab)
    pk = tres.peak_toe_head
    if pk["head_m"] is not None:
        ax[3].plot([pk["time_s"] / f], [pk["head_m"] / fL], "o", ms=5, color=OKABE_ITO["orange"], mfc="white",
                   mew=1.2)
    ax[3].set_ylabel(f"total head ({LU})")
    _pad(ax[3])
    _legend(ax[3])
    _mark_crest(ax[3], tres, f)
    ax[3].set_xlabel(f"time ({tl})")
    ax[3].set_xlim(t[0], t[-1])
    for a in ax:
        a.grid(True, lw=0.3, color="#e0e0e0")
    return fig


def flows_figure(tres):
    """Flow through each boundary (file's flow unit) and the cumulative volumes against time."""
    H = tres.history
    u = tres.section.units
    fq, FL = u.factor("flow"), u.label("flow")
    fA, AL = u.factor("area"), u.label("area")
    f, tl = _tu(tres)
    t = H["time_s"] / f
    fig, ax = _fig(2, 4.8)
    names = [k[len("flow_"):-len("_m3_s_per_m")] for k in H if k.startswith("flow_")]
    cols = [OKABE_ITO[c] for c in ("blue", "green", "purple", "orange", "vermillion", "sky")]
    for i, n in enumerate(names):
        ax[0].plot(t, H[f"flow_{n}_m3_s_per_m"] / fq, color=cols[i % len(cols)], lw=1.5, label=n)
        ax[1].plot(t, H[f"volume_{n}_m3_per_m"] / fA, color=cols[i % len(cols)], lw=1.5, label=n)
    ax[1].plot(t, H["storage_m3_per_m"] / fA, color=INK, lw=1.0, ls=(0, (4, 2)), label="water stored (change)")
    ax[0].axhline(0, color=MUTED, lw=0.5)
    ax[1].axhline(0, color=MUTED, lw=0.5)
    ax[0].set_ylabel(f"flow ({FL}, + in)")
    ax[1].set_ylabel(f"volume ({AL} per {u.length}, + in)")
    ax[0].set_title(_title(f"{tres.section.title or tres.section.source}: seepage through the boundaries"), loc="left")
    _legend(ax[0])
    _legend(ax[1])
    for a in ax:
        _mark_crest(a, tres, f)
        a.grid(True, lw=0.3, color="#e0e0e0")
    ax[1].set_xlabel(f"time ({tl})")
    ax[1].set_xlim(t[0], t[-1])
    b = tres.balance
    fig.text(0.02, -0.01, f"water balance: the largest error of a step is {b['largest_step_error']:.1e} of its flow; "
             f"over the run {b['run_error']:.1e}", fontsize=7, color=MUTED, ha="left", va="top")
    return fig


def _window(tres):
    """The embankment and a little of the ground under it (where the phreatic surface moves): the zones narrower
    than a quarter of the section, widened by half their height; the whole section when there are none."""
    sec = tres.section
    x0, y0, x1, y1 = sec.outline.bounds
    narrow = [p for p in sec.polygons if np.ptp(p[:, 0]) < 0.25 * (x1 - x0)]
    if not narrow:
        return base.window_of(sec)
    a = min(p[:, 0].min() for p in narrow)
    b = max(p[:, 0].max() for p in narrow)
    lo = min(p[:, 1].min() for p in narrow)
    hi = max(p[:, 1].max() for p in narrow)
    h = max(hi - lo, 1e-9)
    return (max(a - 0.5 * h, x0 - 0.02 * h), min(b + 0.5 * h, x1 + 0.02 * h), max(lo - 0.6 * h, y0 - 0.02 * h),
            hi + 0.3 * h)


def phreatic_figure(tres, times=None):
    """The section with the phreatic line (pressure head 0) and the river level at stored times, coloured by time."""
    import matplotlib
    from matplotlib.colors import Normalize
    from matplotlib.lines import Line2D
    from ..hydrograph import hydrographs
    sec = tres.section
    u = sec.units
    f, tl = _tu(tres)
    ts = tres.times if times is None else np.asarray(times, float)
    win = _window(tres)
    fr = base.frame(win, title=f"{sec.title or sec.source}: phreatic surface at the stored times", units=u)
    ax = fr.ax
    colours = base.draw_zones(ax, sec, lighten=0.72)
    base.draw_zone_edges(ax, sec, colour=MUTED, lw=0.5)
    cmap = matplotlib.colormaps["viridis"]
    norm = Normalize(vmin=ts.min() / f, vmax=max(ts.max() / f, ts.min() / f + 1e-9))
    hyd = hydrographs(sec)
    for t in ts:
        r = tres.at(t)
        c = cmap(norm(t / f))
        for line in r.phreatic_lines():
            ax.plot(line[:, 0], line[:, 1], color=c, lw=1.3, zorder=8)
        for name, g in hyd.items():
            pl = np.asarray(sec.boundary(name).polyline, float)
            st = g.stage(t)
            # the water level drawn over the part of the boundary it covers
            wet = pl[pl[:, 1] <= st + sec.head_tol]
            if len(wet):
                lo, hi = wet[:, 0].min(), wet[:, 0].max()
                seg = _level_extent(pl, st, lo, hi)
                ax.plot(seg, [st, st], color=c, lw=1.0, ls=(0, (3, 1.5)), zorder=7)
    base.draw_boundaries(ax, sec, labels=False, window=win)
    sm = matplotlib.cm.ScalarMappable(norm=norm, cmap=cmap)
    fr.colorbar(sm, f"time ({tl})")
    handles = [Line2D([], [], color=MUTED, lw=1.3, label="phreatic line (pressure head 0)"),
               Line2D([], [], color=MUTED, lw=1.0, ls=(0, (3, 1.5)), label="river level")]
    handles += base.material_handles(sec, colours)
    fr.legend(handles, ncol=2)
    marks = ", ".join(f"{t / f:.3g}" for t in ts)
    fr.text(f"stored times ({tl}): {marks}", fontsize=7, color=MUTED)
    return fr.fig


def _level_extent(pl, stage, lo, hi):
    """x extent of a horizontal water line at ``stage`` over a boundary polyline: from its far end to where the
    stage meets the slope."""
    xs = [lo, hi]
    a, b = pl[:-1], pl[1:]
    for p, q in zip(a, b):
        if (p[1] - stage) * (q[1] - stage) < 0:
            w = (stage - p[1]) / (q[1] - p[1])
            xs.append(p[0] + w * (q[0] - p[0]))
    return [min(xs), max(xs)]


def drawdown_window(tres):
    """(x0, x1, y0, y1), m: the riverside half of the embankment and the ground under it to the depth of its
    height (``transient.pore_pressure_grid`` overrides it); the section's bounding box when no slope is found."""
    sec = tres.section
    ts = sec.spec.transient
    if ts is not None and ts.pore_pressure_grid is not None:
        g = ts.pore_pressure_grid
        return (g.x[0], g.x[1], g.y[0], g.y[1])
    from ..hydrograph import hydrographs
    x0, y0, x1, y1 = sec.outline.bounds
    name = next(iter(hydrographs(sec)))
    pl = np.asarray(sec.boundary(name).polyline, float)
    d = np.diff(pl, axis=0)
    steep = np.abs(d[:, 1]) > 0.1 * np.abs(d[:, 0])
    if not steep.any():
        return (x0, x1, y0, y1)
    seg = np.concatenate([pl[:-1][steep], pl[1:][steep]])
    ylo, yhi = seg[:, 1].min(), seg[:, 1].max()
    H = max(yhi - ylo, 1e-9)
    toe = seg[np.argmin(seg[:, 1]), 0]
    ring = np.asarray(sec.outline.exterior.coords)
    top = ring[ring[:, 1] >= ring[:, 1].max() - sec.length_tol]
    crest = float(top[:, 0].mean())
    a, b = (toe - H, crest) if toe < crest else (crest, toe + H)
    return (max(a, x0), min(b, x1), max(ylo - H, y0), min(yhi + 0.0, y1))


def pore_pressure_figure(tres, t, window=None):
    """Pore pressure (file's pressure unit) in the riverside slope at stored time t (s), with the phreatic line."""
    import matplotlib
    from matplotlib.colors import TwoSlopeNorm
    from .style import field_cmap
    sec = tres.section
    u = sec.units
    f, tl = _tu(tres)
    r = tres.at(t)
    x0, x1, y0, y1 = window or drawdown_window(tres)
    pad = 0.05 * max(x1 - x0, y1 - y0)
    win = (x0 - pad, x1 + pad, y0 - pad, y1 + 2 * pad)
    st = ", ".join(f"{n} {v / u.factor('length'):.2f} {u.length}" for n, v in r.stages.items())
    fr = base.frame(win, title=f"{sec.title or sec.source}: pore pressure at t = {t / f:.3g} {tl} ({st})", units=u)
    ax = fr.ax
    tri = base.triangulation(r.mesh)
    pp = r.pore_pressure / u.factor("pressure")
    inside = (r.mesh.points[:, 0] >= win[0]) & (r.mesh.points[:, 0] <= win[1]) & \
             (r.mesh.points[:, 1] >= win[2]) & (r.mesh.points[:, 1] <= win[3])
    lo, hi = float(pp[inside].min()), float(pp[inside].max())
    if lo < 0 < hi:
        norm = TwoSlopeNorm(vcenter=0.0, vmin=lo, vmax=hi)
        cmap = matplotlib.colormaps["RdBu"]
    else:
        norm, cmap = matplotlib.colors.Normalize(vmin=lo, vmax=max(hi, lo + 1e-9)), field_cmap()
    cf = ax.tricontourf(tri, pp, levels=16, cmap=cmap, norm=norm, zorder=1)
    cs = ax.tricontour(tri, pp, levels=cf.levels, colors=INK, linewidths=0.3, alpha=0.5, zorder=2)
    del cs
    base.draw_zone_edges(ax, sec, colour=INK, lw=0.5)
    for line in r.phreatic_lines():
        ax.plot(line[:, 0], line[:, 1], color=INK, lw=1.6, zorder=8)
    for n, v in r.stages.items():
        pl = np.asarray(sec.boundary(n).polyline, float)
        wet = pl[pl[:, 1] <= v + sec.head_tol]
        if len(wet):
            seg = _level_extent(pl, v, wet[:, 0].min(), wet[:, 0].max())
            ax.plot(seg, [v, v], color=OKABE_ITO["blue"], lw=1.4, zorder=8)
    ax.add_patch(matplotlib.patches.Rectangle((x0, y0), x1 - x0, y1 - y0, fill=False, ec=OKABE_ITO["orange"],
                                              lw=0.9, ls=(0, (4, 2)), zorder=9))
    fr.colorbar(cf, f"pore-water pressure ({u.pressure}); negative: suction above the phreatic line")
    from matplotlib.lines import Line2D
    fr.legend([Line2D([], [], color=INK, lw=1.6, label="phreatic line"),
               Line2D([], [], color=OKABE_ITO["blue"], lw=1.4, label="river level"),
               Line2D([], [], color=OKABE_ITO["orange"], lw=0.9, ls=(0, (4, 2)),
                      label="grid written for a stability analysis")], ncol=3)
    return fr.fig


def transient_figures(tres):
    """The standard figures of a transient run as (name, caption, figure), one at a time."""
    f, tl = _tu(tres)
    yield ("flood_history", "Stage, least factor of safety, largest exit gradient and the head under the landside toe "
           "against time; the dashed line marks the crest of the flood.", history_figure(tres))
    yield ("flood_flows", "Flow through each boundary and the cumulative volumes against time.", flows_figure(tres))
    yield ("flood_phreatic", "The phreatic surface and the river level at the stored times.", phreatic_figure(tres))
    ends = tres.schedule.drawdown_ends
    for t in ends:
        if np.any(np.abs(tres.times - t) <= 1e-9 * max(tres.schedule.end, 1.0)):
            yield (f"flood_pore_pressure_{t / f:.4g}{tl}".replace(".", "_"),
                   f"Pore pressure in the riverside slope at the end of a falling limb (t = {t / f:.3g} {tl}): the "
                   "input of a rapid-drawdown stability check.", pore_pressure_figure(tres, t))
