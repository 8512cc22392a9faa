"""Write figures as PNG and SVG, and the standard set of figures of a result."""

from __future__ import annotations

import logging
from dataclasses import dataclass
from pathlib import Path

from . import base

__all__ = ["save_figure", "figure_set", "figure_plan", "FigureItem"]

log = logging.getLogger("seepfe")


def save_figure(fig, stem, formats=("png", "svg"), dpi: int = 200) -> list[Path]:
    """Save a figure as ``stem.png`` and ``stem.svg`` (or the given formats: png, svg, pdf); return the paths.
    PDF figures embed their fonts as TrueType (Type 42), not Type 3."""
    from .style import style
    stem = Path(stem)
    out = []
    with style():
        for f in formats:
            p = stem.with_suffix("." + f)
            fig.savefig(p, format=f, dpi=dpi, metadata={"Software": None} if f == "png" else
                        {"CreationDate": None} if f == "pdf" else {"Date": None})
            out.append(p)
    return out


@dataclass
class FigureItem:
    """One figure of the standard set: file stem, caption, and the figure."""

    name: str
    caption: str
    fig: object
    png: bytes | None = None      # the PNG once written (the report embeds it instead of rendering again)


def figure_set(result, show_mesh: bool = False, arrows: bool = False, quantity: str = "pore_pressure",
               detail: bool = True, net=None, analysis=None, exaggeration: float | None = None,
               pressure_whole: bool = True):
    """Yield the standard figures of a result (as :class:`FigureItem`, one at a time to keep memory low).
    The plan (names, captions, how to draw) is :func:`figure_plan`, with the same arguments.
    """
    plan = figure_plan(result, show_mesh=show_mesh, arrows=arrows, quantity=quantity, detail=detail, net=net,
                       analysis=analysis, exaggeration=exaggeration, pressure_whole=pressure_whole)
    for i, (fname, caption, draw) in enumerate(plan, 1):
        log.info("figure %d of %d: %s", i, len(plan), fname)
        yield FigureItem(fname, caption, draw())


def figure_plan(result, show_mesh: bool = False, arrows: bool = False, quantity: str = "pore_pressure",
                detail: bool = True, net=None, analysis=None, exaggeration: float | None = None,
                pressure_whole: bool = True) -> list:
    """The standard figures of a result as a plan: a list of (file stem, caption, draw), ``draw()`` making the
    figure; nothing is drawn here.

    section, mesh (if asked), total head, ``quantity`` (pressure head or pore pressure), flow net,
    velocity arrows (if asked),
    each again on a closer window when the section is long and flat, and one exit-gradient profile
    per exit surface the analysis checked (``analysis``: :func:`seepfe.analyse` of the result, made here
    when not given). ``exaggeration``: vertical exaggeration of the whole-section views (default: chosen for
    long flat sections, :func:`seepfe.plot.base.exaggeration_for`); closer views are chosen alike.
    ``pressure_whole=False`` draws the pressure only in the closer view where there is one (the report's set).
    """
    from ..analysis import analyse
    from .figures import field_figure, flow_net_figure, section_figure, velocity_figure
    from .profile import exit_gradient_figure
    sec = result.section
    analysis = analysis if analysis is not None else analyse(result)
    net = net or analysis.flow_net
    windows = [("", None)]
    dw = base.detail_window(sec) if detail else None
    if dw is not None:
        windows.append(("_detail", dw))
    # the plan first (name, caption, how to draw), so the log can say "figure i of N"; drawn one at a time
    plan = []
    lab = {"pore_pressure": "Pore-water pressure", "pressure_head": "Pressure head"}[quantity]
    ve = {"": exaggeration, "_detail": exaggeration}
    toe = base.sides(sec)["toe"]
    for suffix, win in windows:
        what = " (closer view)" if suffix else ""
        x = ve[suffix]
        plan.append(("section" + suffix, "The section: zones by material, boundaries by kind and value" + what,
                     lambda win=win, what=what, x=x: section_figure(sec, result.mesh, window=win,
                                                               title=(sec.title or "Section") + what,
                                                               exaggeration=x)))
        if show_mesh:
            plan.append(("mesh" + suffix, "The finite-element mesh" + what,
                         lambda win=win, what=what, x=x: section_figure(sec, result.mesh, window=win, show_mesh=True,
                                                                   title="Mesh" + what, exaggeration=x)))
        plan.append(("total_head" + suffix, "Total head, contours at round intervals, with the phreatic surface" + what,
                     lambda win=win, what=what, x=x: field_figure(result, "total_head", window=win,
                                                             title="Total head" + what, exaggeration=x)))
        if suffix or pressure_whole or len(windows) == 1:
            plan.append((quantity + suffix, lab + what,
                         lambda win=win, what=what, x=x: field_figure(result, quantity, window=win, title=lab + what,
                                                                      exaggeration=x)))
        plan.append(("flownet" + suffix, "Flow net: equipotentials and flow lines of equal flow" + what,
                     lambda win=win, what=what, x=x: flow_net_figure(result, window=win, net=net, title="Flow net" + what,
                                                                exaggeration=x)))
        if arrows:
            plan.append(("velocity" + suffix, "Darcy velocity arrows (linear scale)" + what,
                         lambda win=win, what=what, x=x: velocity_figure(result, window=win, title="Darcy velocity" + what,
                                                                exaggeration=x)))
    for name, prof in analysis.exits.items():
        if len(prof.x) < 2:
            continue
        safe = "".join(c if c.isalnum() or c in "-_" else "_" for c in name)
        plan.append((f"exit_gradient_{safe}", f"Exit gradients and factor of safety along '{name}'",
                     lambda prof=prof, name=name: exit_gradient_figure(prof, title=f"Exit gradients along '{name}'",
                                                                       units=sec.units, toe=toe)))
    return plan
