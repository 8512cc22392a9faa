"""Reports an engineer can sign and a reviewer can check: one section, a stage study, a reach study.

* :func:`build_report` / :func:`write_report`: one section (``seepfe report SECTION``);
* :func:`seepfe.report.stages.write_stage_study`: one section over a range of river stages
  (``seepfe report SECTION --stages SWEEP``);
* :func:`seepfe.report.reach.run_reach`: every section of a levee reach (``seepfe reach REACH``).

Each is one self-contained HTML file (styles inline, figures embedded as SVG, no script, no external
link) laid out for print on A4 or Letter with the title block on every page (:mod:`seepfe.report.page`),
and :func:`write_pdf` prints it with headless Chromium. docs/report.md describes them.

>>> from seepfe.report import write_report                        # doctest: +SKIP
>>> write_report(seepfe.analyse(result), "out/report")             # out/report/report.html + figures/
"""

from __future__ import annotations

from .pdf import write_pdf
from .single import SECTIONS, ReportContext, add_section, build_report, render_figures, write_report

__all__ = ["build_report", "write_report", "write_pdf", "render_figures", "SECTIONS", "add_section", "ReportContext"]
