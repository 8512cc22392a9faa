"""Building blocks shared by the section figures: the frame, zones, boundaries, mesh, legends.

Every drawing here is vectorised (one collection per layer); nothing loops over elements.
Coordinates are in m; the section is always drawn at equal scale (1 m across = 1 m up).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .style import FIG_WIDTH_IN, INK, KIND_COLOUR, MUTED, OKABE_ITO, tint, zone_colours

__all__ = ["Frame", "frame", "draw_zones", "draw_zone_edges", "draw_boundaries", "draw_mesh",
           "material_handles", "fmt_k", "fmt_sci", "window_of", "detail_window", "triangulation",
           "contour_pieces", "boundary_label", "length_axis", "draw_water", "exaggeration_for", "structure_kind",
           "sides"]

_LEFT, _RIGHT, _TOP, _XLAB = 0.72, 0.18, 0.42, 0.44       # inches


@dataclass
class Frame:
    """A figure with one equal-scale section axes; legends, colour bars and notes are stacked below
    it, each measured, so nothing overlaps whatever its length (the saved image is cropped tight)."""

    fig: object
    ax: object
    width_in: float
    height_in: float
    ax_box: tuple            # left, bottom, width, height in inches
    cursor_in: float         # where the next item below the axes starts, inches from the bottom
    exaggeration: float = 1.0

    def _renderer(self):
        return self.fig.canvas.get_renderer()

    def _height_in(self, artist) -> float:
        return artist.get_window_extent(self._renderer()).height / self.fig.dpi

    def _anchor(self, gap_in):
        if not getattr(self, "_started", False):      # labels drawn under the section push the stack down
            self._started = True
            r = self._renderer()
            lows = [t.get_window_extent(r).y0 / self.fig.dpi for t in self.ax.texts if t.get_visible()]
            self.cursor_in = min([self.cursor_in] + [v - 0.05 for v in lows])
        return (self.ax_box[0] / self.width_in, (self.cursor_in - gap_in) / self.height_in)

    def legend(self, handles, ncol: int = 2, gap_in: float = 0.06, **kw):
        """A legend below what is already stacked."""
        if not handles:
            return None
        leg = self.fig.legend(handles=handles, loc="upper left", bbox_to_anchor=self._anchor(gap_in), ncol=ncol,
                              borderaxespad=0.0, columnspacing=1.6, handletextpad=0.6, **kw)
        self.cursor_in -= gap_in + self._height_in(leg)
        return leg

    def text(self, s: str, gap_in: float = 0.08, **kw):
        """A note below what is already stacked."""
        t = self.fig.text(*self._anchor(gap_in), s, ha="left", va="top", **kw)
        self.cursor_in -= gap_in + self._height_in(t)
        return t

    def colorbar(self, mappable, label: str, width_in: float | None = None, gap_in: float = 0.1):
        """A horizontal colour bar below what is already stacked."""
        w = min(self.ax_box[2], 4.2) if width_in is None else width_in
        h = 0.11
        x, y = self._anchor(gap_in)
        cax = self.fig.add_axes([x, y - h / self.height_in,
                                 w / self.width_in, h / self.height_in])
        cb = self.fig.colorbar(mappable, cax=cax, orientation="horizontal", spacing="proportional")
        cb.set_label(label)
        cb.outline.set_linewidth(0.4)
        cb.ax.tick_params(labelsize=6.5, length=2)
        # the bar, its tick labels (6.5 pt) and its label (8.5 pt) below it: measured once, not re-laid out
        self.cursor_in = y * self.height_in - h - (2 + 6.5 * 1.25 + 4 + 8.5 * 1.25) / 72.0
        return cb


def window_of(section, pad: float = 0.04) -> tuple:
    """The drawing window (x0, x1, y0, y1) of the whole section with a margin, m: a little to each side
    and below, more above (for the labels of the boundaries)."""
    x0, y0, x1, y1 = section.outline.bounds
    W, H = x1 - x0, y1 - y0
    return (x0 - pad * 0.5 * W, x1 + pad * 0.5 * W, y0 - 0.05 * H, y1 + 0.3 * H)


def detail_window(section, max_ratio: float = 4.5):
    """A closer window on the part of a long, flat section where the structure is, or None when the
    whole section already reads well (width / height <= max_ratio).

    The window spans every zone that rises above the ground at the section's ends (the embankment or
    dam, berms, drains on it), every zone narrower than a quarter of the section (cutoffs, drains,
    filters) and every barrier (sheet piles, cutoff walls), widened by the section's depth on each
    side, at the section's full height: it contains what its labels name.
    """
    x0, y0, x1, y1 = section.outline.bounds
    W, Hs = x1 - x0, y1 - y0
    if W / max(Hs, 1e-300) <= max_ratio:
        return None
    ring = np.asarray(section.outline.exterior.coords)
    tol = section.length_tol
    ground = max(ring[np.abs(ring[:, 0] - x0) <= tol, 1].max(), ring[np.abs(ring[:, 0] - x1) <= tol, 1].max())
    parts = [p for p in section.polygons if p[:, 1].max() > ground + tol or np.ptp(p[:, 0]) < 0.25 * W]
    parts += [np.asarray(b.polyline, float) for b in (getattr(section.spec, "barriers", None) or [])]
    if not parts:
        return None
    a = min(p[:, 0].min() for p in parts) - Hs
    b = max(p[:, 0].max() for p in parts) + Hs
    a, b = max(a, x0), min(b, x1)
    if b - a > 0.8 * W:
        return None
    return (a, b, y0 - 0.04 * Hs, y1 + 0.16 * Hs)


def exaggeration_for(window, max_ratio: float = 3.2) -> float:
    """The vertical exaggeration that keeps a window no wider than ``max_ratio`` times its drawn height:
    1 where it already is, else the smallest of 2, 2.5, 4, 5, 8, 10, 15, 20, 25, 40, 50, 100 that does."""
    x0, x1, y0, y1 = window
    r = (x1 - x0) / max(y1 - y0, 1e-300)
    if r <= max_ratio:
        return 1.0
    for ve in (2, 2.5, 4, 5, 8, 10, 15, 20, 25, 40, 50, 100):
        if r / ve <= max_ratio:
            return float(ve)
    return 100.0


def structure_kind(section) -> tuple[str, str]:
    """("levee" or "dam", how it was decided): ``project.structure`` when the file says; else "dam" where the
    title or a boundary's name uses the words of a dam (dam, reservoir, upstream, downstream), else "levee"."""
    proj = getattr(section.spec, "project", None)
    if proj is not None and getattr(proj, "structure", None):
        return proj.structure, "project.structure"
    import re
    words = " ".join([section.spec.title or ""] + [b.name for b in section.spec.boundaries]).lower()
    if re.search(r"\b(dam|dams|reservoir|upstream|downstream)\b", words):
        return "dam", "the words of the title and boundary names (set project.structure to say)"
    return "levee", "the default (set project.structure to say)"


def sides(section) -> dict:
    """The words for the two sides: {"wet": "riverside"/"upstream", "dry": "landside"/"downstream",
    "toe": "landside toe"/"downstream toe", "structure": "levee"/"dam"}."""
    kind, _ = structure_kind(section)
    if kind == "dam":
        return {"wet": "upstream", "dry": "downstream", "toe": "downstream toe", "structure": "dam"}
    return {"wet": "riverside", "dry": "landside", "toe": "landside toe", "structure": "levee"}


def length_axis(axis, units=None) -> str:
    """Ticks of an axis drawn in m at round values of the display length unit; returns the unit's name.

    The figure keeps SI coordinates; only the tick positions and their labels follow ``units``.
    """
    if units is None or units.length == "m":
        return "m"
    from matplotlib.ticker import FuncFormatter, MaxNLocator
    f = units.factor("length")

    class _Scaled(MaxNLocator):
        def tick_values(self, vmin, vmax):
            return np.asarray(super().tick_values(vmin / f, vmax / f)) * f

    axis.set_major_locator(_Scaled(nbins="auto", steps=[1, 2, 2.5, 5, 10]))
    axis.set_major_formatter(FuncFormatter(lambda v, pos: f"{round(v / f, 9):g}"))
    return units.length


def frame(window, max_height_in: float = 6.5, title: str | None = None, units=None,
          exaggeration: float | None = 1.0) -> Frame:
    """A figure whose section axes has exactly the aspect of the window (no wasted space).

    Parameters
    ----------
    window : (x0, x1, y0, y1) in m.
    title : the figure title, drawn at the top left.
    units : seepfe.units.Units the axes are labelled in (default m).
    exaggeration : vertical exaggeration (1: true scale; None: :func:`exaggeration_for` the window).
        Anything but 1 is stated at the top right of the drawing.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    x0, x1, y0, y1 = window
    ve = exaggeration_for(window) if exaggeration is None else float(exaggeration)
    aw = FIG_WIDTH_IN - _LEFT - _RIGHT
    ah = aw * ve * (y1 - y0) / (x1 - x0)
    if ah > max_height_in:
        ah = max_height_in
        aw = ah * (x1 - x0) / (ve * (y1 - y0))
    if title:
        title = text(title)
    if title and len(title) > 70:
        import textwrap
        title = "\n".join(textwrap.wrap(title, 70))
    nlines = title.count("\n") + 1 if title else 0
    top = (_TOP + 0.22 * (nlines - 1)) if title else 0.12
    H = top + ah + _XLAB
    W = max(FIG_WIDTH_IN, _LEFT + aw + _RIGHT)
    fig = Figure(figsize=(W, H))
    FigureCanvasAgg(fig)
    ax = fig.add_axes([_LEFT / W, _XLAB / H, aw / W, ah / H])
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    ax.set_aspect(ve, adjustable="box")
    u = length_axis(ax.xaxis, units)
    length_axis(ax.yaxis, units)
    ax.set_xlabel(f"distance x ({u})")
    ax.set_ylabel(f"elevation y ({u})")
    if title:
        ax.set_title(title, pad=12)
    if ve != 1.0:
        ax.text(1.0, 1.0, f"vertical exaggeration {ve:g}\u00d7", transform=ax.transAxes, ha="right", va="bottom",
                fontsize=7, color=INK, fontweight="bold")
    fr = Frame(fig, ax, W, H, (_LEFT, _XLAB, aw, ah), 0.0)
    fr.exaggeration = ve
    # the stack starts under the x-axis label: the tick labels and the label fill the _XLAB band
    fr.cursor_in = 0.0
    return fr


def text(s) -> str:
    """User text (a title or a name) as matplotlib shows it literally: '$' escaped, so '$x$' in a name is
    neither typeset as mathematics nor (unbalanced, '$\\frac{a$') an error when the figure is drawn."""
    return str(s).replace("$", r"\$")


_SUP = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def fmt_sci(v: float, digits: int = 1) -> str:
    """A number in scientific notation with Unicode superscripts: 2.5e-05 -> '2.5×10⁻⁵'.

    Plain text (no mathtext): fast to lay out; names beside it go through :func:`text`."""
    if not math.isfinite(v):
        return str(v)
    if v == 0:
        return "0"
    e = int(math.floor(math.log10(abs(v))))
    m = v / 10**e
    if round(m, digits) >= 10:
        m, e = m / 10, e + 1
    if e in (-1, 0, 1, 2):
        return f"{v:.{max(digits + 1, e + 1)}g}" if e >= 0 else f"{v:.{digits + 1}g}"
    return f"{m:.{digits}f}\u00d710{str(e).translate(_SUP)}"


def fmt_k(mat, units=None) -> str:
    """Conductivity of a material for a legend, m/s (or the display unit of ``units``)."""
    f, u = (1.0, "m/s") if units is None else (units.factor("conductivity"), units.conductivity)
    if mat.k is not None:
        return f"k = {fmt_sci(mat.k / f)} {u}"
    s = f"kx = {fmt_sci(mat.kx / f)}, ky = {fmt_sci(mat.ky / f)} {u}"
    if mat.angle:
        s += f", kx at {mat.angle:g}°"
    return s


def draw_zones(ax, section, lighten: float = 0.55, zorder: float = 0):
    """Fill each zone with its material's colour; return {material: colour}."""
    from matplotlib.collections import PolyCollection
    mats = [z.material for z in section.spec.zones]
    colours = zone_colours(mats, lighten)
    pc = PolyCollection([p for p in section.polygons], facecolors=[colours[m] for m in mats],
                        edgecolors="none", zorder=zorder)
    ax.add_collection(pc)
    return colours


def draw_zone_edges(ax, section, colour=INK, lw: float = 0.6, zorder: float = 3):
    """Zone outlines, and any zero-thickness barriers (section key ``barriers``) as heavy dark lines."""
    from matplotlib.collections import LineCollection, PolyCollection
    ax.add_collection(PolyCollection([p for p in section.polygons], facecolors="none", edgecolors=colour,
                                     linewidths=lw, zorder=zorder))
    bars = getattr(section.spec, "barriers", None) or []
    if bars:
        ax.add_collection(LineCollection([np.asarray(b.polyline, float) for b in bars], colors=INK,
                                         linewidths=2.2, zorder=zorder + 3.5, capstyle="butt"))
        for b in bars:
            p = np.asarray(b.polyline, float)
            k = int(np.argmin(p[:, 1]))
            ax.annotate(text(b.name), p[k], xytext=(4, -4), textcoords="offset points", fontsize=6.5, color=INK,
                        ha="left", va="top", zorder=zorder + 4, annotation_clip=True,
                        bbox=dict(boxstyle="round,pad=0.12", fc="white", ec="none", alpha=0.8))


def material_handles(section, colours: dict) -> list:
    """Legend patches: one per material, naming it and its conductivity."""
    from matplotlib.patches import Patch
    out = []
    for name in dict.fromkeys(z.material for z in section.spec.zones):
        mat = section.spec.materials[name]
        out.append(Patch(facecolor=colours[name], edgecolor=INK, linewidth=0.5,
                         label=f"{text(name)}: {fmt_k(mat, section.units)}"))
    return out


def boundary_label(b, units=None) -> str:
    """'river: head 4.50 m', 'landside: seepage face', ... (values in the display units of ``units``)."""
    from ..units import SI
    u = units or SI
    name = text(b.name)
    if b.kind == "head" and b.head is None:        # a hydrograph (docs/transient.md): its highest stage
        s = f"{name}: hydrograph, crest {u.from_si(max(p[1] for p in b.hydrograph), 'length'):.2f} {u.length}"
        return s + " (dry above)" if b.dry_above_level else s
    if b.kind == "head":
        s = f"{name}: head {u.from_si(b.head, 'length'):.2f} {u.length}"
        return s + " (dry above)" if b.dry_above_level else s
    if b.kind == "flux":
        return f"{name}: inflow {fmt_sci(u.from_si(b.flux, 'flux'))} {u.label('flux')}"
    return f"{name}: {'seepage face' if b.kind == 'seepage_face' else 'drain'}"


def draw_boundaries(ax, section, labels: bool = True, window=None, zorder: float = 6):
    """Draw each boundary along its polyline in the colour of its kind, labelled with kind and value.

    The label sits at the middle of the longest visible segment, pushed out of the section along the
    segment's normal.  Returns the legend handles (one per kind present).
    """
    from matplotlib.lines import Line2D
    from shapely.geometry import Point
    x0, x1, y0, y1 = window or ax.get_xlim() + ax.get_ylim()
    kinds = {}
    placed: list = []
    for b in section.spec.boundaries:
        line = np.asarray(b.polyline, float)
        col = KIND_COLOUR[b.kind]
        ax.plot(line[:, 0], line[:, 1], color=col, lw=2.6, zorder=zorder, solid_capstyle="butt")
        kinds.setdefault(b.kind, col)
        if not labels:
            continue
        seg = _visible_segments(line, (x0, x1, y0, y1))
        if not seg:
            continue
        # the longest visible segment, measured as drawn (vertical exaggeration included)
        ve = ax.get_aspect() if isinstance(ax.get_aspect(), float) else 1.0
        L = [math.hypot(q[0] - p[0], ve * (q[1] - p[1])) for p, q in seg]
        i = int(np.argmax(L))
        pa, pb = np.asarray(seg[i][0]), np.asarray(seg[i][1])
        mid = 0.5 * (pa + pb)
        t = np.array([pb[0] - pa[0], ve * (pb[1] - pa[1])]) / L[i]
        n = np.array([-t[1], t[0]])
        eps = 1e-3 * section.extent
        if section.outline.contains(Point(*(mid + eps * np.array([n[0], n[1] / ve])))):
            n = -n
        off = 9.0
        ha = "center" if abs(n[0]) < 0.5 else ("left" if n[0] > 0 else "right")
        va = "center" if abs(n[1]) < 0.5 else ("bottom" if n[1] > 0 else "top")
        ann = ax.annotate(boundary_label(b, section.units), mid, xytext=(off * n[0], off * n[1]), textcoords="offset points",
                          ha=ha, va=va, fontsize=7, color=col, zorder=zorder + 1, annotation_clip=True,
                          bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.85))
        _keep_clear(ax, ann, n, placed)
    names = {"head": "prescribed head", "seepage_face": "seepage face", "drain": "drain", "flux": "inflow"}
    return [Line2D([], [], color=c, lw=2.6, label=names[k]) for k, c in kinds.items()]


def _visible_segments(line, window) -> list:
    """The straight pieces of a polyline inside the window, clipped exactly (shapely)."""
    from shapely.geometry import LineString, box
    x0, x1, y0, y1 = window
    g = LineString(line).intersection(box(x0, y0, x1, y1))
    pieces = getattr(g, "geoms", [g])
    out = []
    for p in pieces:
        if p.is_empty or p.geom_type != "LineString":
            continue
        c = np.asarray(p.coords)
        out += [(c[k], c[k + 1]) for k in range(len(c) - 1) if np.any(c[k + 1] != c[k])]
    return out


def draw_water(ax, section, window=None, zorder: float = 1.5) -> list:
    """The water standing on each head boundary: a pale fill from the ground up to the level, the level
    line with the water-level mark (an inverted triangle); also ``checks.landside_water_level``.
    Returns a legend handle when any water is drawn."""
    from matplotlib.collections import LineCollection, PolyCollection
    from matplotlib.lines import Line2D
    from shapely.geometry import Polygon, box
    x0, x1, y0, y1 = window or (ax.get_xlim() + ax.get_ylim())
    col = KIND_COLOUR["head"]
    fills, levels, marks = [], [], []
    tol = section.length_tol
    items = [(np.asarray(b.polyline, float), float(b.head)) for b in section.spec.boundaries
             if b.kind == "head" and b.head is not None]          # a hydrograph has no one level
    lw = section.spec.checks.landside_water_level
    if lw is not None:
        items += [(np.asarray(b.polyline, float), float(lw)) for b in section.spec.boundaries
                  if b.kind == "seepage_face"]
    for line, h in items:
        if not (line[:, 1] < h - tol).any():
            continue
        top = max(h, line[:, 1].max()) + 1.0
        # the region between the ground line and the level: above the outline, below the level
        area = Polygon(np.vstack([line, [[line[-1, 0], top], [line[0, 0], top]]])) if line[0, 0] != line[-1, 0] else None
        if area is None or not area.is_valid:
            continue
        wet = area.intersection(box(line[:, 0].min(), line[:, 1].min() - 1.0, line[:, 0].max(), h)).difference(
            section.outline).intersection(box(x0, y0, x1, y1))
        for g in getattr(wet, "geoms", [wet]):
            if g.is_empty or g.geom_type != "Polygon" or g.area <= tol * tol:
                continue
            fills.append(np.asarray(g.exterior.coords))
            gx0, _, gx1, _ = g.bounds
            levels.append([[gx0, h], [gx1, h]])
            # the mark near the end of the water nearer the middle of the drawing (clear of the label)
            mid = 0.5 * (x0 + x1)
            marks.append((gx1 - 0.1 * (gx1 - gx0) if abs(gx1 - mid) < abs(gx0 - mid) else gx0 + 0.1 * (gx1 - gx0), h))
    if not fills:
        return []
    # pale blue with level hatching, so water never reads as a zone's fill
    ax.add_collection(PolyCollection(fills, facecolors=tint(OKABE_ITO["blue"], 0.88), edgecolors=tint(col, 0.55),
                                     linewidths=0.0, hatch="--", zorder=zorder))
    ax.add_collection(LineCollection(levels, colors=col, linewidths=1.0, zorder=zorder + 0.1))
    mx, my = np.asarray(marks).T
    ax.plot(mx, my, ls="none", marker="v", ms=6, mfc="white", mec=col, mew=1.0, zorder=zorder + 4.6)
    return [Line2D([], [], color=col, lw=1.0, marker="v", ms=5, mfc="white", mec=col, label="water level (water hatched)")]


def _keep_clear(ax, ann, n, placed: list, step: float = 11.0, tries: int = 6) -> None:
    """Move a label further out along the boundary normal n until it overlaps no label placed before."""
    try:
        r = ax.figure.canvas.get_renderer()
    except AttributeError:          # a canvas without a renderer: leave the label where it is
        return
    bb = ann.get_window_extent(r)
    for k in range(tries):
        if not any(bb.overlaps(p) for p in placed):
            break
        dx, dy = ann.xyann
        ann.xyann = (dx + step * n[0], dy + step * (n[1] if abs(n[1]) >= 0.5 else 1.0))
        bb = ann.get_window_extent(r)
    placed.append(bb)


import weakref

_TRI_CACHE: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def triangulation(mesh, window=None, corners: bool = False):
    """matplotlib Triangulation on every node (P2: four linear sub-triangles per element); with a window
    (x0, x1, y0, y1), the triangles wholly outside it are masked (not contoured: a closer view costs less).
    ``corners``: the elements' corner triangles only (P2: a quarter of the triangles), for filled colour
    bands, where the difference cannot be seen and the contouring costs a quarter."""
    from matplotlib.tri import Triangulation
    key = (None if window is None else tuple(float(v) for v in window), bool(corners))
    cache = _TRI_CACHE.setdefault(mesh, {})            # kept while the mesh lives (weak reference)
    if key in cache:
        return cache[key]                               # its C++ edges and neighbours are built once
    t = mesh.cells[:, :3] if corners else mesh.linear_triangles()
    tri = Triangulation(mesh.points[:, 0], mesh.points[:, 1], t)
    cache[key] = tri
    if window is not None:
        x0, x1, y0, y1 = window
        X, Y = mesh.points[t, 0], mesh.points[t, 1]
        out = (X.max(1) < x0) | (X.min(1) > x1) | (Y.max(1) < y0) | (Y.min(1) > y1)
        if out.any() and not out.all():
            tri.set_mask(out)
    return tri


def draw_mesh(ax, mesh, colour=MUTED, lw: float = 0.25, zorder: float = 2):
    """The element edges (straight sides of the elements), as one line collection."""
    from matplotlib.collections import LineCollection
    t = mesh.triangles
    e = np.concatenate([t[:, [0, 1]], t[:, [1, 2]], t[:, [2, 0]]])
    e = np.unique(np.sort(e, axis=1), axis=0)
    lc = LineCollection(mesh.points[e], colors=colour, linewidths=lw, zorder=zorder,
                        rasterized=len(e) > 60_000)
    ax.add_collection(lc)
    return lc


def contour_pieces(cs) -> list:
    """The polylines ((n, 2) arrays, m) of a contour set, all levels together."""
    out = []
    for p in cs.get_paths():
        for seg in p.to_polygons(closed_only=False):
            if len(seg) > 1:
                out.append(np.asarray(seg))
    return out
