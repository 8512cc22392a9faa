"""The section figures: the section itself, head (or pressure) contours, the flow net, velocity arrows.

Each function returns a ``matplotlib.figure.Figure`` (no pyplot); save it with
:func:`seepfe.plot.save_figure`.  Fields are contoured with matplotlib's tri routines on the mesh's
linear sub-triangles (P1 or P2 alike), so a large mesh costs one vectorised call per layer.
"""

from __future__ import annotations

import warnings

import numpy as np

from ..flownet import flow_net, nice_step
from . import base
from .style import INK, MUTED, OKABE_ITO, field_cmap, style

__all__ = ["section_figure", "field_figure", "flow_net_figure", "velocity_figure", "contour_levels",
           "phreatic_lines", "FIELDS"]

#: quantity -> (name, SI unit, function of the result giving nodal values (SI), dimension)
FIELDS = {
    "total_head": ("total head", "m", lambda r: r.h, "length"),
    "pressure_head": ("pressure head", "m", lambda r: r.pressure_head, "length"),
    "pore_pressure": ("pore-water pressure", "kPa", lambda r: r.pore_pressure, "pressure"),
}


def contour_levels(vmin: float, vmax: float, target: int = 12) -> np.ndarray:
    """Round contour levels (steps of 1, 2, 2.5 or 5 x 10^n) strictly inside (vmin, vmax)."""
    span = vmax - vmin
    if not np.isfinite(span) or span <= 0:
        return np.array([])
    step = nice_step(span, target)
    first = np.ceil(vmin / step) * step
    lv = first + step * np.arange(int(np.floor((vmax - first) / step)) + 1)
    lv = np.round(lv, 12)
    eps = 1e-9 * span
    return lv[(lv > vmin + eps) & (lv < vmax - eps)]


def _decimals(step: float) -> int:
    return max(0, -int(np.floor(np.log10(step) + 1e-9))) + (1 if round(step / 10**np.floor(np.log10(step)), 6) == 2.5 else 0)


def phreatic_lines(result) -> list:
    """The phreatic surface (``result.phreatic_line()``) as a list of (n, 2) polylines, m; empty when no
    part of the section is above it."""
    pl = result.phreatic_line()
    return [pl] if len(pl) > 1 else []


def _phreatic(ax, result, label=True):
    from matplotlib.lines import Line2D
    lines = phreatic_lines(result)
    if not lines:
        return []
    from matplotlib.collections import LineCollection
    ax.add_collection(LineCollection(lines, colors=INK, linewidths=1.5, zorder=7))
    # the water-table mark (an inverted triangle) at the highest point of the line
    top = max(lines, key=lambda s: s[:, 1].max())
    i = int(np.argmax(top[:, 1]))
    ax.plot([top[i, 0]], [top[i, 1]], marker="v", ms=6, color=INK, zorder=8, markeredgewidth=0)
    return [Line2D([], [], color=INK, lw=1.5, marker="v", ms=5,
                   label="phreatic surface (pressure head = 0)")]


def saturated_pieces(line: np.ndarray, level: float, tol: float = 0.0) -> list:
    """The parts of an equipotential of head ``level`` (an (n, 2) polyline, m) where the soil is saturated:
    pressure head = level - y >= 0, cut exactly at y = level."""
    y = line[:, 1]
    wet = y <= level + tol
    if wet.all():
        return [line]
    edges = np.diff(np.concatenate([[0], wet.astype(int), [0]]))
    out = []
    for a, b in zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)):     # runs of wet points
        pts = line[a:b]
        if a > 0:
            pts = np.vstack([_cross(line[a - 1], line[a], level), pts])
        if b < len(line):
            pts = np.vstack([pts, _cross(line[b - 1], line[b], level)])
        if len(pts) > 1:
            out.append(pts)
    return out


def _cross(a, b, level):
    t = (level - a[1]) / (b[1] - a[1]) if b[1] != a[1] else 0.0
    return a + t * (b - a)


def _window(result, window):
    return window if window is not None else base.window_of(result.section)


def section_figure(section, mesh=None, window=None, title: str | None = None, show_mesh: bool = False,
                   exaggeration: float | None = None):
    """The section: zones filled by material (legend: name and k, m/s), boundaries by kind and value.

    Parameters
    ----------
    section : seepfe.Section
    mesh : seepfe.Mesh, optional
        Drawn when ``show_mesh`` is true.
    window : (x0, x1, y0, y1), optional
        Part of the section to draw, m (default: all of it).
    exaggeration : vertical exaggeration (default None: chosen for the window, :func:`base.exaggeration_for`).
    """
    win = window if window is not None else base.window_of(section)
    with style():
        fr = base.frame(win, title=title or section.title or "Section", units=section.units, exaggeration=exaggeration)
        ax = fr.ax
        colours = base.draw_zones(ax, section)
        wh = base.draw_water(ax, section, win)
        if show_mesh and mesh is not None:
            base.draw_mesh(ax, mesh, colour=INK, lw=0.2, zorder=2)
        base.draw_zone_edges(ax, section)
        bh = base.draw_boundaries(ax, section, window=win)
        if show_mesh and mesh is not None:
            from matplotlib.lines import Line2D
            bh.append(Line2D([], [], color=INK, lw=0.4,
                             label=f"mesh: {mesh.n_elements} P{mesh.order} triangles, {mesh.n_nodes} nodes"))
        fr.legend(base.material_handles(section, colours), ncol=2)
        fr.legend(bh + wh, ncol=3)
    return fr.fig


def field_figure(result, quantity: str = "total_head", window=None, title: str | None = None,
                 arrows: bool = False, n_levels: int = 18, show_phreatic: bool = True,
                 exaggeration: float | None = None):
    """Filled and labelled contours of a nodal field at round intervals, with the phreatic surface.

    Parameters
    ----------
    quantity : {"total_head", "pressure_head", "pore_pressure"}
    arrows : draw Darcy-velocity arrows on a sparse regular grid (linear scale, key in m/s).
    n_levels : about how many contour intervals across the range.

    The contour levels are returned on the figure as ``fig.seepfe_levels`` (for checks).
    """
    import matplotlib.colors as mcolors
    if quantity not in FIELDS:
        raise ValueError(f"unknown quantity '{quantity}' (use {', '.join(FIELDS)})")
    label, unit, get, dim = FIELDS[quantity]
    sec = result.section
    # contoured in the display unit (the file's), at round values of it
    v = np.asarray(get(result), float) / sec.units.factor(dim)
    unit = sec.units.label(dim)
    win = _window(result, window)
    vis = _visible(result.mesh.points, win)
    vmin, vmax = float(v[vis].min()), float(v[vis].max())
    lv = contour_levels(vmin, vmax, n_levels)
    step = float(lv[1] - lv[0]) if len(lv) > 1 else max(vmax - vmin, 1e-12)
    bounds = np.concatenate([[vmin], lv, [vmax]]) if vmax > vmin else np.array([vmin - 0.5, vmin + 0.5])
    with style():
        default = {"total_head": "Total head", "pressure_head": "Pressure head",
                   "pore_pressure": "Pore-water pressure"}[quantity]
        fr = base.frame(win, title=title or default, units=sec.units, exaggeration=exaggeration)
        ax = fr.ax
        tri = base.triangulation(result.mesh, win)
        cmap = field_cmap()
        norm = mcolors.BoundaryNorm(bounds, cmap.N)
        cf = ax.tricontourf(base.triangulation(result.mesh, win, corners=True), v, levels=bounds, cmap=cmap, norm=norm,
                            zorder=1)
        with warnings.catch_warnings():
            # matplotlib 3.8 cannot rasterize a contour set and says so; the SVG is then vector (larger, as good)
            warnings.filterwarnings("ignore", message="Rasterization of", category=UserWarning)
            cf.set_rasterized(True)
        handles = []
        if len(lv):
            cs = ax.tricontour(tri, v, levels=lv, colors=INK, linewidths=0.55, zorder=4)
            dec = _decimals(step)
            every = 1 if len(lv) <= 8 else 2          # label every other line when they are many
            ax.clabel(cs, levels=lv[::every], fmt=lambda x: f"{x:.{dec}f}", fontsize=6.5, inline=True,
                      inline_spacing=3)
        base.draw_zone_edges(ax, sec, colour="white", lw=0.8, zorder=3)
        bh = base.draw_boundaries(ax, sec, window=win)
        handles += base.draw_water(ax, sec, win)
        if show_phreatic:
            handles += _phreatic(ax, result)
        if arrows:
            handles += _arrows(ax, result, win)
        cb = fr.colorbar(cf, f"{label} ({unit}); contours every {step:g} {unit}")
        if len(bounds) > 9:
            cb.set_ticks(lv[:: int(np.ceil(len(lv) / 8))])
        fr.legend(bh + handles, ncol=3)
    fr.fig.seepfe_levels = lv
    fr.fig.seepfe_range = (vmin, vmax)
    fr.fig.seepfe_contours = {"lines": cs} if len(lv) else {}
    return fr.fig


def _visible(points, win):
    x0, x1, y0, y1 = win
    m = (points[:, 0] >= x0) & (points[:, 0] <= x1) & (points[:, 1] >= y0) & (points[:, 1] <= y1)
    return m if m.any() else np.ones(len(points), bool)


def _arrows(ax, result, win, columns: int = 28, key_at=(0.86, 1.035), key_coords="axes", color="white"):
    """Darcy velocity at the nodes of a regular grid over the window (one arrow per cell), m/s."""
    from matplotlib.lines import Line2D
    x0, x1, y0, y1 = win
    d = (x1 - x0) / columns
    xs = np.arange(x0 + d / 2, x1, d)
    ys = np.arange(y0 + d / 2, y1, d)
    X, Y = np.meshgrid(xs, ys)
    P = np.column_stack([X.ravel(), Y.ravel()])
    e, _ = result.locate(P)
    ok = e >= 0
    if not ok.any():
        return []
    u = result.section.units
    V = result.velocity[e[ok]] / u.factor("velocity")          # in the display unit (the file's)
    vu = u.label("velocity")
    sp = np.linalg.norm(V, axis=1)
    vmax = float(sp.max())
    if vmax <= 0:
        return []
    p10 = 10 ** np.floor(np.log10(vmax))
    ref = p10 * (5 if vmax / p10 >= 5 else 2 if vmax / p10 >= 2 else 1)     # a round key below the max
    q = ax.quiver(P[ok, 0], P[ok, 1], V[:, 0], V[:, 1], angles="xy", scale_units="xy",
                  scale=vmax / (0.9 * d), width=0.0022, headwidth=3.5, headlength=4, headaxislength=3.5,
                  color=color, edgecolor=INK, linewidth=0.3 if color == "white" else 0, zorder=9, minlength=0.05,
                  pivot="mid")
    ax.quiverkey(q, key_at[0], key_at[1], ref, f"{base.fmt_sci(ref)} {vu}", labelpos="E", coordinates=key_coords,
                 fontproperties={"size": 7}, color=INK)
    return [Line2D([], [], color=color, marker=r"$\rightarrow$", ms=9, mec=INK, mew=0.3 if color == "white" else 0,
                   lw=0, label=f"Darcy velocity, linear scale (largest {base.fmt_sci(vmax, 2)} {vu})")]


def flow_net_figure(result, window=None, title: str | None = None, n_drops: int | None = None,
                    net=None, show_phreatic: bool = True, exaggeration: float | None = None):
    """A flow net: equipotentials at Nd equal head drops and flow lines at equal flow from the
    stream function (:mod:`seepfe.flownet`), with Nf, Nd and the check q = k H Nf / Nd.

    The :class:`seepfe.flownet.FlowNet` drawn is returned on the figure as ``fig.seepfe_flow_net``, the
    contour sets as ``fig.seepfe_contours`` ({"equipotentials": ..., "flow_lines": ...}).

    Equipotentials are drawn only where the soil is saturated: on the equipotential of head H the pressure
    head is H - y, so each line is cut exactly where it rises above y = H (the phreatic surface, a dry
    face); nothing is drawn through the unsaturated zone.
    """
    sec = result.section
    net = net or flow_net(result, n_drops=n_drops)
    win = _window(result, window)
    with style():
        fr = base.frame(win, title=title or "Flow net", units=sec.units, exaggeration=exaggeration)
        ax = fr.ax
        colours = base.draw_zones(ax, sec, lighten=0.8)
        wh = base.draw_water(ax, sec, win)
        tri = base.triangulation(result.mesh, win)
        eq = net.equipotential_levels
        fl = net.flow_line_levels
        from matplotlib.lines import Line2D
        c_eq, c_fl = OKABE_ITO["vermillion"], OKABE_ITO["blue"]
        drawn = {}
        if len(eq):
            from matplotlib.collections import LineCollection
            cs = ax.tricontour(tri, result.h, levels=eq, colors=c_eq, linewidths=0.7, zorder=4)
            wet = []
            for lev, path in zip(cs.levels, cs.get_paths()):
                for seg in path.to_polygons(closed_only=False):
                    wet += saturated_pieces(np.asarray(seg), float(lev), sec.head_tol)
            cs.remove()                     # kept for its levels; the saturated pieces are drawn instead
            ax.add_collection(LineCollection(wet, colors=c_eq, linewidths=0.7, linestyles=[(0, (5, 2))], zorder=4))
            drawn["equipotentials"] = cs
        if len(fl):
            drawn["flow_lines"] = ax.tricontour(tri, net.psi, levels=fl, colors=c_fl, linewidths=0.9, zorder=5)
        base.draw_zone_edges(ax, sec, colour=MUTED, lw=0.6, zorder=3)
        bh = base.draw_boundaries(ax, sec, window=win)
        u = sec.units
        fq, fl_u = u.factor("flow"), u.label("flow").replace("3", "³")
        L_u = u.length
        hl = u.from_si(net.head_loss, "length")
        handles = [Line2D([], [], color=c_fl, lw=0.9, label=f"flow line (flow {base.fmt_sci(net.dpsi / fq, 2)} "
                          f"{fl_u} between lines)"),
                   Line2D([], [], color=c_eq, lw=0.7, ls=(0, (5, 2)),
                          label=f"equipotential (head drop {u.from_si(net.dh, 'length'):.3g} {L_u} between lines)")]
        if show_phreatic:
            handles += _phreatic(ax, result)
        fr.legend(handles + bh + wh, ncol=2)
        fr.legend(base.material_handles(sec, colours), ncol=2)
        if fr.exaggeration != 1.0:
            fr.text(f"Drawn with vertical exaggeration {fr.exaggeration:g}\u00d7: flow lines and equipotentials cross "
                    "at right angles and form squares only at true scale.", fontsize=7, color=MUTED)
        k_txt = base.fmt_sci(net.k_ref / u.factor("conductivity"), 2)
        if net.squares:
            txt = (f"Nf = {net.n_channels:.2f} flow channels,  Nd = {net.n_drops} head drops,  H = {hl:.3g} {L_u},  "
                   f"k = {k_txt} {u.conductivity} ({base.text(net.reference_material)})\n"
                   f"q = k H Nf / Nd = {base.fmt_sci(net.k_ref * net.head_loss * net.shape_factor / fq, 3)} {fl_u};  "
                   f"solver: {base.fmt_sci(net.q_solver / fq, 3)} {fl_u}")
        else:
            txt = (f"Nf = {net.n_channels:.2f} channels of equal flow,  Nd = {net.n_drops} head drops,  "
                   f"H = {hl:.3g} {L_u} (zones differ in k: channels of equal flow, not squares)\n"
                   f"q = Nf x flow per channel = {base.fmt_sci(net.q_total / fq, 3)} {fl_u};  "
                   f"solver: {base.fmt_sci(net.q_solver / fq, 3)} {fl_u}")
        fr.text(txt, fontsize=7.5, color=INK, linespacing=1.5)
    fr.fig.seepfe_flow_net = net
    fr.fig.seepfe_contours = drawn
    return fr.fig


def velocity_figure(result, window=None, title: str | None = None, columns: int = 32,
                    exaggeration: float | None = None):
    """Darcy-velocity arrows on a sparse regular grid over the section (linear scale, key in m/s),
    on the zones by material, with the phreatic surface."""
    sec = result.section
    win = _window(result, window)
    with style():
        fr = base.frame(win, title=title or "Darcy velocity", units=sec.units, exaggeration=exaggeration)
        ax = fr.ax
        colours = base.draw_zones(ax, sec, lighten=0.78)
        handles = base.draw_water(ax, sec, win)
        base.draw_zone_edges(ax, sec, colour=MUTED, lw=0.6, zorder=3)
        bh = base.draw_boundaries(ax, sec, window=win)
        handles += _phreatic(ax, result)
        kx, ky = fr._anchor(0.12)
        handles += _arrows(ax, result, win, columns=columns, key_at=(kx + 0.03, ky), key_coords="figure",
                           color=OKABE_ITO["blue"])
        fr.cursor_in -= 0.2
        fr.legend(handles + bh, ncol=2)
        fr.legend(base.material_handles(sec, colours), ncol=2)
    return fr.fig
