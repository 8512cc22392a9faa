"""The look of seepfe figures: one calm, colour-blind-safe style, applied in a context.

Colours come from the Okabe & Ito (2008) palette, which stays distinct under the common colour-vision
deficiencies; continuous fields use a softened ``viridis`` map (see :func:`field_cmap`).  Fonts are sized
for a figure printed at about 180 mm wide.  matplotlib is imported only inside functions, so a worker
process that only solves never pays for it.
"""

from __future__ import annotations

import contextlib

__all__ = ["OKABE_ITO", "INK", "MUTED", "KIND_COLOUR", "FIG_WIDTH_IN", "tint", "zone_colours", "style",
           "field_cmap"]

#: Okabe-Ito palette (name -> hex)
OKABE_ITO = {"orange": "#E69F00", "sky": "#56B4E9", "green": "#009E73", "yellow": "#F0E442",
             "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7", "black": "#000000"}
INK = "#2b2b2b"          # text, outlines
MUTED = "#7a7a7a"        # secondary lines
FIG_WIDTH_IN = 7.2       # about 180 mm: a full text width on A4 or letter paper

#: boundary kind -> line colour
KIND_COLOUR = {"head": OKABE_ITO["blue"], "seepage_face": OKABE_ITO["green"], "drain": OKABE_ITO["purple"],
               "flux": OKABE_ITO["orange"], "no_flow": INK}

_ZONE_ORDER = ["orange", "sky", "green", "yellow", "purple", "blue", "vermillion"]


def tint(hex_colour: str, amount: float) -> tuple:
    """Mix a colour with white: amount 0 keeps it, 1 gives white. Returns an RGB tuple."""
    h = hex_colour.lstrip("#")
    rgb = [int(h[i:i + 2], 16) / 255 for i in (0, 2, 4)]
    return tuple(c + (1 - c) * amount for c in rgb)


def zone_colours(materials: list[str], amount: float = 0.55) -> dict:
    """A light fill colour for each material name, in order of first appearance."""
    out = {}
    for i, m in enumerate(dict.fromkeys(materials)):
        base = OKABE_ITO[_ZONE_ORDER[i % len(_ZONE_ORDER)]]
        # after seven materials, repeat the hues lighter
        out[m] = tint(base, min(0.9, amount + 0.2 * (i // len(_ZONE_ORDER))))
    return out


def field_cmap():
    """The sequential map for heads and pressures: viridis (van der Walt & Smith 2015, designed to be
    perceptually uniform and readable with colour-vision deficiency) softened a quarter of the way to
    white, so that the contour lines and labels drawn over it stay legible."""
    import matplotlib
    import numpy as np
    from matplotlib.colors import ListedColormap
    base = matplotlib.colormaps["viridis"](np.linspace(0.0, 1.0, 256))[:, :3]
    return ListedColormap(base + (1.0 - base) * 0.25, name="seepfe_field")


@contextlib.contextmanager
def style():
    """Apply seepfe's rc settings inside a ``with`` block (print-size fonts).

    Figures are made with ``matplotlib.figure.Figure`` and rendered by the Agg (PNG) and SVG
    back ends directly; pyplot and its global state are never used.
    """
    import matplotlib
    rc = {
        "font.family": "DejaVu Sans", "font.size": 8.5, "axes.titlesize": 9.5, "axes.titleweight": "bold",
        "axes.titlelocation": "left", "axes.labelsize": 8.5, "axes.labelcolor": INK,
        "axes.edgecolor": MUTED, "axes.linewidth": 0.6, "axes.spines.top": False, "axes.spines.right": False,
        "xtick.color": INK, "ytick.color": INK, "xtick.labelsize": 7.5, "ytick.labelsize": 7.5,
        "xtick.direction": "out", "ytick.direction": "out", "xtick.major.size": 3, "ytick.major.size": 3,
        "xtick.major.width": 0.6, "ytick.major.width": 0.6,
        "legend.fontsize": 7.5, "legend.frameon": False, "legend.handlelength": 1.6,
        "figure.dpi": 100, "savefig.dpi": 200, "savefig.bbox": "tight", "savefig.pad_inches": 0.08,
        "savefig.facecolor": "white", "figure.facecolor": "white", "text.color": INK,
        "svg.fonttype": "none", "svg.hashsalt": "seepfe", "pdf.fonttype": 42, "ps.fonttype": 42, "path.simplify": True, "agg.path.chunksize": 20000,
        "lines.solid_capstyle": "round",
    }
    with matplotlib.rc_context(rc):
        yield
