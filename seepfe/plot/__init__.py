"""Figures of a solved section: the section, head and pressure contours, the flow net, velocity
arrows and exit-gradient profiles; :func:`save_figure` writes PNG and SVG.

>>> from seepfe import plot                                  # doctest: +SKIP
>>> fig = plot.flow_net_figure(result)                       # doctest: +SKIP
>>> plot.save_figure(fig, "out/flownet")                     # out/flownet.png, out/flownet.svg

matplotlib is imported only when a figure is made (Agg and SVG back ends, never pyplot), so a solve
in a worker process does not load it.  What each figure shows: docs/figures.md.
"""

from __future__ import annotations

from .figures import FIELDS, contour_levels, field_figure, flow_net_figure, phreatic_lines, section_figure, velocity_figure
from .profile import exit_gradient_figure
from .save import figure_plan, figure_set, save_figure

__all__ = ["section_figure", "field_figure", "flow_net_figure", "velocity_figure", "exit_gradient_figure", "contour_levels",
           "phreatic_lines", "save_figure", "figure_set", "figure_plan", "FIELDS"]
