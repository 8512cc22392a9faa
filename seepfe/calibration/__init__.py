"""Back-analysis: fit conductivities (and other numeric keys) of a section to readings from past events.

>>> import seepfe
>>> cal = seepfe.calibrate("sections/levee_ditch.json", "sections/levee_ditch.observations.json")  # doctest: +SKIP
>>> cal["parameters"]["k_blanket"]["value"], cal["identifiable"]["k_blanket"]                      # doctest: +SKIP
>>> seepfe.calibration.write_calibration(cal, "runs/calibration")                                 # doctest: +SKIP

``seepfe.calibrate`` (:func:`~seepfe.calibration.fit.calibrate`) returns a :class:`Calibration`, a mapping
with the content of ``calibration.json``; :func:`write_calibration` writes the output folder. See
docs/calibration.md. Results support, and never replace, the judgement of a licensed engineer.
"""

from __future__ import annotations

from pathlib import Path

from .fit import CALIBRATION_FORMAT, calibrate
from .observations import load_observations
from .result import Calibration

__all__ = ["calibrate", "Calibration", "write_calibration", "write_into", "load_observations", "CALIBRATION_FORMAT",
           "report_section"]


def report_section(cal, figures=None) -> str:
    """The calibration as an HTML ``<section>`` for a report (see :mod:`seepfe.calibration.report`)."""
    from .report import report_section as _rs
    return _rs(cal, figures)


def write_calibration(cal: Calibration, out, *, plots: bool = True) -> list[str]:
    """Write the output folder whole (``seepfe.output.atomic_dir``): calibration.json, section.calibrated.json,
    readings.csv, parameters.csv, checks.csv, the figures (PNG and SVG), calibration.html, input/.
    Returns the names written."""
    from ..output import atomic_dir
    with atomic_dir(out) as tmp:
        return write_into(cal, Path(tmp), plots=plots)


def write_into(cal: Calibration, tmp: Path, *, plots: bool = True) -> list[str]:
    """The files of :func:`write_calibration` into an existing (temporary) folder; returns the names."""
    import json

    from ..output import write_json
    from ..sweep.report import write_table
    names = []
    write_json(tmp / "calibration.json", cal.to_dict())
    (tmp / "section.calibrated.json").write_text(json.dumps(cal.section_data, indent=2, ensure_ascii=False) + "\n",
                                                  encoding="utf-8")
    names += ["calibration.json", "section.calibrated.json"]
    d = cal.to_dict()
    write_table(tmp / "readings.csv", ["event", "kind", "name", "x_m", "y_m", "observed", "sigma",
                                       "computed_start", "computed", "residual", "normalised", "unit"],
                [{**r, "x_m": r["x_m"] if r["x_m"] is not None else "",
                  "y_m": r["y_m"] if r["y_m"] is not None else ""} for r in d["residuals"]])
    write_table(tmp / "parameters.csv", ["key", "value", "low", "high", "unit", "start", "min", "max", "scale",
                                         "held", "at_bound", "identifiable", "why"],
                [{"key": k, **{c: ("" if v is None else v) for c, v in p.items()},
                  "identifiable": d["identifiable"][k], "why": d["identifiable_why"][k]}
                 for k, p in d["parameters"].items()])
    rows = []
    for c in d["checks"]:
        for when in ("before", "after"):
            g = c[when]
            rows.append({"case": c["case"], "kind": c["kind"], "values": when,
                         "fs": "" if g["fs"] is None else g["fs"], "mode": g["mode"] or "",
                         "boundary": g["boundary"] or "", "x_m": "" if g["x_m"] is None else g["x_m"],
                         "exit_gradient_max": "" if g["exit_gradient_max"] is None else g["exit_gradient_max"],
                         "verdict": g["verdict"], "why": g["why"]})
    write_table(tmp / "checks.csv", ["case", "kind", "values", "fs", "mode", "boundary", "x_m",
                                     "exit_gradient_max", "verdict", "why"], rows)
    names += ["readings.csv", "parameters.csv", "checks.csv"]
    figs = cal.figures() if plots else []
    if plots:
        from ..plot.save import save_figure
        for item in figs:
            save_figure(item.fig, tmp / item.name)
            item.png = (tmp / f"{item.name}.png").read_bytes()      # the page embeds it, not drawn again
            names += [f"{item.name}.png", f"{item.name}.svg"]
    from .report import report_page
    (tmp / "calibration.html").write_text(report_page(cal, figs), encoding="utf-8")
    names.append("calibration.html")
    inp = tmp / "input"
    inp.mkdir()
    obs = cal.observations
    src = Path(d["section"])
    sec_name = src.name if src.is_file() else "section.json"
    if src.is_file():
        (inp / sec_name).write_bytes(src.read_bytes())
    else:
        (inp / sec_name).write_text(json.dumps(cal.source_data, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    obs_src = Path(obs.label)
    obs_name = obs_src.name if obs_src.is_file() else "observations.json"
    if obs_name == sec_name:
        obs_name = "observations_" + obs_name
    if obs_src.is_file():
        (inp / obs_name).write_bytes(obs_src.read_bytes())
    else:
        (inp / obs_name).write_text(json.dumps(obs.data, indent=2) + "\n", encoding="utf-8")
    names += [f"input/{n}" for n in sorted(p.name for p in inp.iterdir())]
    return names
