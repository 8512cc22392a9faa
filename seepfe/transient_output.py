"""Files and text of a transient solve (``seepfe solve`` on a section with a hydrograph).

Into an existing (atomic) output folder, besides what a steady solve writes for the governing moment (the moment
of the least FS: summary.json with its "transient" block, nodes.csv, elements.csv, result.vtu, checks_*.csv, the
phreatic line and flow lines, the input copy):

    history.csv                 one row per time step: stages, flows, volumes, storage, balance, least FS, exit
                                gradient, toe head (SI columns, then the file's units where they differ)
    times.csv                   one row per stored time: the checks of that moment
    fields/t_<time>.vtu         the field at each stored time (total head, pressure head, pore pressure, kr)
    fields.pvd                  the VTU files as one time series (ParaView and other VTK readers)
    pore_pressures/t_<time>.csv pore pressures on a grid over the riverside slope at each stored time, for a
                                slope-stability analysis (rapid drawdown: the end of a falling limb)
    phreatic_lines/t_<time>.csv the phreatic line (pressure head 0) at each stored time
    checks/t_<time>_<b>.csv     the exit checks along each exit surface at each stored time
    flood_*.png|svg             the figures of :mod:`seepfe.plot.hydrograph`
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .about import CAUTION
from .hydrograph import TIME_UNITS, time_label

__all__ = ["write_transient", "transient_text", "time_tag", "stored_rows", "pore_pressure_grid"]


def time_tag(t: float, unit: str) -> str:
    """A stored time as a file-name part that sorts in time order: 't_0011.500day'."""
    return f"t_{t / TIME_UNITS[unit]:08.3f}{time_label(unit)}"


def stored_rows(tres) -> list[dict]:
    """One dict per stored time: time, stages, least FS and where, exit gradient, toe head, flows, verdict (SI)."""
    out = []
    H = tres.history
    for t in tres.times:
        a = tres.analyse(t, hand=False)
        g = a.governing
        k = int(np.argmin(np.abs(H["time_s"] - t)))
        row = {"time_s": float(t)}
        row.update({f"stage_{n}_m": v for n, v in a.result.stages.items()})
        row.update({"fs": g["fs"], "fs_mode": g["mode"] or "", "fs_x_m": g["x_m"],
                    "exit_gradient_max": g["exit_gradient_max"], "toe_head_m": float(H["toe_head_m"][k]),
                    "verdict": g["verdict"]})
        row.update({f"flow_{n}_m3_s_per_m": q for n, q in a.result.flows.items()})
        out.append(row)
    return out


def pore_pressure_grid(tres, t: float):
    """Grid points over the riverside slope inside the section and the field there at stored time t (s): columns
    x_m, y_m, total_head_m, pressure_head_m, pore_pressure_kPa."""
    from .plot.hydrograph import drawdown_window
    sec = tres.section
    x0, x1, y0, y1 = drawdown_window(tres)
    ts = sec.spec.transient
    if ts is not None and ts.pore_pressure_grid is not None:
        s = ts.pore_pressure_grid.spacing
    else:
        s = max(y1 - y0, x1 - x0) / 60.0
    xs = np.arange(x0, x1 + 0.5 * s, s)
    ys = np.arange(y0, y1 + 0.5 * s, s)
    X, Y = np.meshgrid(xs, ys)
    P = np.column_stack([X.ravel(), Y.ravel()])
    r = tres.at(t)
    h = r.head(P)
    keep = np.isfinite(h)
    P, h = P[keep], h[keep]
    psi = h - P[:, 1]
    return {"x_m": P[:, 0], "y_m": P[:, 1], "total_head_m": h, "pressure_head_m": psi,
            "pore_pressure_kPa": sec.gamma_w * psi}


def _pvd(entries: list[tuple[float, str]]) -> str:
    rows = "\n".join(f'    <DataSet timestep="{t:.10g}" group="" part="0" file="{f}"/>' for t, f in entries)
    return ('<?xml version="1.0"?>\n<VTKFile type="Collection" version="0.1" byte_order="LittleEndian">\n'
            f"  <Collection>\n{rows}\n  </Collection>\n</VTKFile>\n")


def write_transient(tres, folder, figures: bool = True, dxf: bool = False) -> list[str]:
    """Write the files of a transient run (module docstring) into an existing folder; return the names written
    (``dxf``: the lines of the governing moment as DXF too, as ``seepfe solve --dxf``)."""
    import meshio
    from .analysis import analyse
    from .output import safe_name, write_analysis, write_csv
    from .units import display_columns
    folder = Path(folder)
    sec = tres.section
    units = sec.units
    a = analyse(tres)                          # the governing moment
    names = write_analysis(a, folder, dxf=dxf)
    write_csv(folder / "history.csv", display_columns(tres.history_columns(), units))
    names.append("history.csv")
    rows = stored_rows(tres)
    f = TIME_UNITS[tres.time_unit]
    cols = {"time_s": [r["time_s"] for r in rows],
            f"time_{time_label(tres.time_unit)}": [r["time_s"] / f for r in rows]}
    for key in rows[0]:
        if key in ("time_s", "fs_mode", "verdict"):
            continue
        cols[key] = [np.nan if r.get(key) is None else r[key] for r in rows]
    cols["verdict_fails"] = [1.0 if r["verdict"] == "fail" else 0.0 if r["verdict"] == "pass" else np.nan for r in rows]
    write_csv(folder / "times.csv", display_columns({k: np.asarray(v, float) for k, v in cols.items()}, units))
    names.append("times.csv")
    for sub in ("fields", "pore_pressures", "phreatic_lines", "checks"):
        (folder / sub).mkdir(exist_ok=True)
    m = tres.mesh
    ctype = "triangle" if m.order == 1 else "triangle6"
    pts3 = np.column_stack([m.points, np.zeros(m.n_nodes)])
    entries = []
    for t in tres.times:
        r = tres.at(t)
        tag = time_tag(t, tres.time_unit)
        kr = r.kr if r.kr is not None else np.ones(m.n_elements)
        meshio.Mesh(pts3, [(ctype, m.cells)],
                    point_data={"total_head_m": r.h, "pressure_head_m": r.pressure_head,
                                "pore_pressure_kPa": r.pore_pressure},
                    cell_data={"zone": [m.zone.astype(np.int32)], "relative_conductivity": [kr]}
                    ).write(folder / "fields" / f"{tag}.vtu")
        entries.append((float(t), f"fields/{tag}.vtu"))
        write_csv(folder / "pore_pressures" / f"{tag}.csv", display_columns(pore_pressure_grid(tres, t), units))
        line = r.phreatic_line()
        write_csv(folder / "phreatic_lines" / f"{tag}.csv", display_columns({"x_m": line[:, 0], "y_m": line[:, 1]},
                                                                            units))
        for bname, ex in tres.analyse(t, hand=False).exits.items():
            ex.to_csv(folder / "checks" / f"{tag}_{safe_name(bname)}.csv", units=units)
    (folder / "fields.pvd").write_text(_pvd(entries))
    names += ["fields/ (VTU per stored time)", "fields.pvd", "pore_pressures/, phreatic_lines/, checks/ (CSV per "
              "stored time)"]
    if figures:
        from .plot.save import save_figure
        for name, _caption, fig in _figures(tres):
            save_figure(fig, folder / safe_name(name))
            fig.clear()
            names.append(f"{name}.png|svg")
    return names


def _figures(tres):
    from .plot.hydrograph import transient_figures
    return transient_figures(tres)


def transient_text(tres, units=None) -> str:
    """What the command line prints for a transient run: the stored times, the moments that matter, volumes,
    balance and the solver, in the section file's units (time in the run's unit)."""
    from .text import table
    sec = tres.section
    u = units if units is not None else sec.units
    fL, LU = u.factor("length"), u.length
    fq, FL = u.factor("flow"), u.label("flow")
    fA = u.factor("area")
    f, tl = TIME_UNITS[tres.time_unit], time_label(tres.time_unit)
    rows = stored_rows(tres)
    stage_keys = [k for k in rows[0] if k.startswith("stage_")]
    flow_keys = [k for k in rows[0] if k.startswith("flow_")]

    def fmt(v, spec):
        return "-" if v is None or (isinstance(v, float) and not np.isfinite(v)) else format(v, spec)
    body = []
    for r in rows:
        body.append([fmt(r["time_s"] / f, ".4g")] + [fmt(r[k] / fL, ".2f") for k in stage_keys] +
                    [fmt(r["fs"], ".3f"), r["fs_mode"] or "-", fmt(None if r["fs_x_m"] is None else r["fs_x_m"] / fL,
                                                                   ".2f"),
                     fmt(r["exit_gradient_max"], ".3f"), fmt(r["toe_head_m"] / fL, ".3f")] +
                    [f"{r[k] / fq:+.3e}" for k in flow_keys] + [r["verdict"].upper()])
    head = ([f"time ({tl})"] + [f"{k[6:-2]} stage ({LU})" for k in stage_keys] +
            ["least FS", "mode", f"at x ({LU})", "largest exit gradient", f"toe head ({LU})"] +
            [f"{k[5:-len('_m3_s_per_m')]} flow ({FL})" for k in flow_keys] + ["verdict"])
    L = [table(f"{sec.title or sec.source}: the flood at the stored times (FS -, gradients m/m, flows + into the "
               "section)", head, body)]
    cr = tres.crest
    L.append(f"crest of the flood: t = {cr['time_s'] / f:.4g} {tl}, stage "
             + ", ".join(f"{n} {v / fL:.2f} {LU}" for n, v in cr["stages_m"].items()))
    lf = tres.least_fs
    if lf["fs"] is not None:
        lag = lf["lag_after_crest_s"] / f
        L.append(f"least FS over the flood: {lf['fs']:.3f} ({lf['mode']}) at x = {lf['x_m'] / fL:.2f} {LU} along "
                 f"'{lf['boundary']}', at t = {lf['time_s'] / f:.4g} {tl}, stage "
                 + ", ".join(f"{n} {v / fL:.2f} {LU}" for n, v in lf["stages_m"].items())
                 + f"; {abs(lag):.3g} {tl} {'after' if lag >= 0 else 'before'} the crest"
                 + (" (still falling at the end of the run: run longer)" if lf["at_end"] else ""))
    else:
        L.append("least FS over the flood: no check arose on the exit surfaces")
    pk = tres.peak_toe_head
    if pk["head_m"] is not None and tres.toe_point is not None:
        L.append(f"highest head under the landside toe (at x {tres.toe_point[0] / fL:.2f}, y {tres.toe_point[1] / fL:.2f}"
                 f" {LU}): {pk['head_m'] / fL:.3f} {LU} at t = {pk['time_s'] / f:.4g} {tl} "
                 f"({pk['lag_after_crest_s'] / f:+.3g} {tl} from the crest)")
    vol = tres.volumes()
    L.append("seepage volumes over the run (+ into the section): "
             + ", ".join(f"{n} {v / fA:+.4g} {u.label('area')} per {LU}" for n, v in vol.items()))
    b = tres.balance
    L.append(f"water balance: largest relative error of a step {b['largest_step_error']:.1e}; over the run "
             f"{b['run_error']:.1e} (storage change {b['storage_change_m3_per_m'] / fA:+.4g}, net inflow "
             f"{b['net_inflow_m3_per_m'] / fA:+.4g} {u.label('area')} per {LU})")
    sv = tres.solver_info
    L.append(f"solver: {sv['steps']} time steps ({sv['failed_steps_retried']} retried smaller) from "
             f"{sv['smallest_step_s'] / f:.3g} to {sv['largest_step_s'] / f:.3g} {tl}, {sv['newton_iterations']} "
             f"Newton iterations, {sv['factorizations']} factorisations; {sv['nodes']} nodes P{sv['order']}; "
             f"{sv['times_s']['total']:.1f} s")
    if tres.schedule.drawdown_ends.size:
        L.append("end of a falling limb (rapid drawdown; pore pressures written in pore_pressures/): t = "
                 + ", ".join(f"{t / f:.4g}" for t in tres.schedule.drawdown_ends) + f" {tl}")
    if not sv["converged"]:
        L.append("WARNING: some steps did not converge; the results after them are marked and must not be used")
    for n in tres.notes:
        L.append(f"note: {n}")
    L.append(f"CAUTION: {CAUTION}")
    return "\n".join(L)
