"""The transient section of the HTML report: a flood hydrograph run (docs/transient.md).

:func:`transient_section` returns one HTML fragment (a heading, the moments that matter, the table of the
stored times, the water balance, the figures embedded as base64 PNG, the notes); the report calls it for a run
under a hydrograph and places it where it wants. :func:`insert_section` puts a fragment into a finished report
before its solver section (or before the end of its body). Self-contained: it uses only the report's CSS classes
(``table``, ``figure``, ``figcaption``, ``.note``, ``.gov``), no script, no external link; figures as SVG.
:func:`report_section` is the form :mod:`seepfe.report.single` registers (after its inputs section).

Results support, and never replace, the judgement of a licensed engineer; local codes and agency criteria govern.
"""

from __future__ import annotations

import base64
import html
import io
import math
from pathlib import Path

from .about import CAUTION

__all__ = ["transient_section", "report_section", "insert_section"]


def _e(s) -> str:
    return html.escape(str(s), quote=True)


def _n(v, fmt="{:.4g}") -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "–"
    return fmt.format(v)


def _table(header, rows, numeric=()) -> str:
    h = "".join(f"<th>{_e(x)}</th>" for x in header)
    body = "".join("<tr>" + "".join(f'<td class="n">{_e(c)}</td>' if i in numeric else f"<td>{_e(c)}</td>"
                                    for i, c in enumerate(r)) + "</tr>" for r in rows)
    return f"<table><thead><tr>{h}</tr></thead><tbody>{body}</tbody></table>"


def _svg(fig) -> str:
    """The figure embedded as SVG (vector: sharp when printed), as the report embeds its own."""
    from .plot.style import style
    buf = io.BytesIO()
    with style():
        fig.savefig(buf, format="svg", metadata={"Date": None})
    fig.clear()
    return "data:image/svg+xml;base64," + base64.b64encode(buf.getvalue()).decode("ascii")


def transient_section(run, figures=None, folder=None, heading: str = "Flood hydrograph: transient seepage",
                      ident: str = "transient") -> str:
    """The report section of a transient run as an HTML fragment.

    Parameters
    ----------
    run : seepfe.transient.TransientResult
    figures : iterable of (name, caption, matplotlib Figure), optional (default: the figures of
        :func:`seepfe.plot.hydrograph.transient_figures`).
    folder : where to write each figure as SVG and PNG too (``folder/<name>.svg|png``), optional.
    heading, ident : the section's heading and its HTML id.
    """
    from .hydrograph import TIME_UNITS, time_label
    from .transient_output import stored_rows
    sec = run.section
    u = sec.units
    fL, LU = u.factor("length"), u.length
    fq, FL = u.factor("flow"), u.label("flow")
    fA = u.factor("area")
    f, tl = TIME_UNITS[run.time_unit], time_label(run.time_unit)
    P = [f'<h2 id="{_e(ident)}">{_e(heading)}</h2>']
    lf, pk, cr = run.least_fs, run.peak_toe_head, run.crest
    cards = [("crest of the flood", f"t = {_n(cr['time_s'] / f)} {tl}",
              ", ".join(f"{n} {v / fL:.2f} {LU}" for n, v in cr["stages_m"].items()))]
    if lf["fs"] is not None:
        lag = lf["lag_after_crest_s"] / f
        cards.append(("least FS over the flood", f"{lf['fs']:.2f} ({lf['mode']})",
                      f"t = {lf['time_s'] / f:.3g} {tl}, {abs(lag):.2g} {tl} {'after' if lag >= 0 else 'before'} "
                      f"the crest; x = {lf['x_m'] / fL:.2f} {LU} along '{lf['boundary']}'"
                      + (" (still falling at the end of the run)" if lf["at_end"] else "")))
    if pk["head_m"] is not None and run.toe_point is not None:
        cards.append(("highest head under the landside toe", f"{pk['head_m'] / fL:.2f} {LU}",
                      f"t = {pk['time_s'] / f:.3g} {tl} ({pk['lag_after_crest_s'] / f:+.2g} {tl} from the crest), at "
                      f"({run.toe_point[0] / fL:.2f}, {run.toe_point[1] / fL:.2f}) {LU}"))
    P.append('<div class="gov">' + "".join(f"<div><span>{_e(a)}</span><b>{_e(b)}</b><span>{_e(c)}</span></div>"
                                          for a, b, c in cards) + "</div>")
    P.append(f'<p class="note">The checks of every step are those of the steady analysis applied to the field of '
             f'that moment, along the exit surfaces {", ".join(repr(n) for n in run.exit_boundaries) or "(none)"}; '
             f"the verdict and the tables above this section are those of the moment of the least FS.</p>")
    rows = stored_rows(run)
    sk = [k for k in rows[0] if k.startswith("stage_")]
    qk = [k for k in rows[0] if k.startswith("flow_")]
    body = []
    for r in rows:
        body.append([_n(r["time_s"] / f)] + [_n(r[k] / fL, "{:.2f}") for k in sk] +
                    [_n(r["fs"], "{:.2f}"), r["fs_mode"] or "–",
                     _n(None if r["fs_x_m"] is None else r["fs_x_m"] / fL, "{:.2f}"),
                     _n(r["exit_gradient_max"], "{:.3f}"), _n(r["toe_head_m"] / fL, "{:.2f}")] +
                    [_n(r[k] / fq, "{:+.3e}") for k in qk] + [r["verdict"]])
    head = ([f"time ({tl})"] + [f"{k[6:-2]} stage ({LU})" for k in sk] +
            ["least FS", "mode", f"at x ({LU})", "largest exit gradient (m/m)", f"toe head ({LU})"] +
            [f"{k[5:-len('_m3_s_per_m')]} flow ({FL})" for k in qk] + ["verdict"])
    P.append("<h3>The stored times</h3>")
    P.append(_table(head, body, numeric=set(range(len(head) - 1)) - {len(sk) + 2}))
    vol = run.volumes()
    b = run.balance
    P.append("<h3>Volumes and water balance</h3>")
    P.append(_table(["quantity", "value"],
                    [[f"volume through '{n}' ({u.label('area')} per {LU}, + into the section)", f"{v / fA:+.4g}"]
                     for n, v in vol.items()] +
                    [[f"water stored at the end, relative to the start ({u.label('area')} per {LU})",
                      f"{b['storage_change_m3_per_m'] / fA:+.4g}"],
                     ["largest balance error of a step (relative)", f"{b['largest_step_error']:.1e}"],
                     ["balance error over the run (relative)", f"{b['run_error']:.1e}"]], numeric={1}))
    sv = run.solver_info
    P.append(f'<p class="note">{sv["steps"]} time steps from {sv["smallest_step_s"] / f:.3g} to '
             f'{sv["largest_step_s"] / f:.3g} {tl} ({sv["failed_steps_retried"]} retried smaller), '
             f'{sv["newton_iterations"]} Newton iterations, {sv["factorizations"]} factorisations; mixed form of '
             f"Richards' equation, backward Euler (Celia, Bouloutas and Zarba 1990).</p>")
    if run.schedule.drawdown_ends.size:
        P.append(f'<p class="note">End of a falling limb (rapid drawdown): t = '
                 f'{", ".join(f"{t / f:.3g}" for t in run.schedule.drawdown_ends)} {tl}; the pore pressures of every '
                 "stored time are written on a grid over the riverside slope (pore_pressures/) for a stability "
                 "analysis.</p>")
    if figures is None:
        from .plot.hydrograph import transient_figures
        figures = transient_figures(run)
    for name, caption, fig in figures:
        if folder is not None:
            from .plot.save import save_figure
            save_figure(fig, Path(folder) / name, formats=("svg", "png"))
        P.append(f'<figure id="fig-{_e(name)}"><img src="{_svg(fig)}" alt="{_e(caption)}">'
                 f"<figcaption>{_e(caption)}</figcaption></figure>")
    for note in run.notes:
        P.append(f'<p class="note">Note: {_e(note)}</p>')
    if not sv.get("converged", True):
        P.append('<p class="fail">The run did not converge at every step: its results must not be used.</p>')
    P.append(f'<p class="note">{_e(CAUTION)}</p>')
    return "\n".join(P)


def report_section(ctx) -> str:
    """The section as the single-section report registers it (:func:`seepfe.report.add_section`): empty unless the
    report is of a moment of a transient run; the figures go beside the report's own (``ctx.figures_folder`` when
    the report sets one)."""
    run = getattr(ctx.result, "run", None)
    if run is None:
        return ""
    return transient_section(run, folder=getattr(ctx, "figures_folder", None),
                             heading="4. The flood hydrograph: transient seepage")


def insert_section(report_html: str, fragment: str) -> str:
    """The report with ``fragment`` placed before its solver section (else before the end of its body)."""
    for mark in ("<h2>Solver</h2>", "</body>"):
        i = report_html.rfind(mark)
        if i >= 0:
            return report_html[:i] + fragment + "\n" + report_html[i:]
    return report_html + fragment
