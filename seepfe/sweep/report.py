"""Tables and plots of a sweep: CSV writer and matplotlib (Agg) figures, PNG and SVG.

Style: quiet grey grid, no top/right spines, the Okabe-Ito colour-blind-safe palette for lines
(Okabe, M. and Ito, K. (2008), Color Universal Design) and the cividis map for ordered families.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

__all__ = ["write_table", "plot_vs_parameter", "plot_profiles", "plot_fragility", "plot_target", "OKABE_ITO"]

OKABE_ITO = ["#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9", "#F0E442", "#000000"]   # as plot.style


def _fmt(v) -> str:
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return f"{v:.10g}"
    return str(v)


def write_table(path: Path, columns: list[str], rows: list[dict]) -> None:
    """Write rows (dicts) as CSV with the given header (names carry units), through seepfe's one CSV
    writer (numbers stay numbers; text a spreadsheet would read as a formula is neutralised)."""
    from ..csvfile import write_table as _write
    _write(path, columns, ([r.get(c, "") for c in columns] for r in rows))


def _tex(s) -> str:
    """User text (titles, keys, names) shown literally by matplotlib: '$' escaped (never mathematics)."""
    return str(s).replace("$", r"\$")


def _figure(w=7.0, h=4.0, rows=1, cols=1):
    """A figure in seepfe's style (seepfe.plot.style: fonts, colours, line widths), as wide as the others."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from ..plot.style import FIG_WIDTH_IN, style
    with style():
        fig = Figure(figsize=(FIG_WIDTH_IN, h * FIG_WIDTH_IN / w), dpi=100, layout="constrained")
        FigureCanvasAgg(fig)
        axs = _axes(fig, rows, cols)
    return fig, axs


def _axes(fig, rows, cols):
    axs = fig.subplots(rows, cols, squeeze=False)
    for ax in axs.flat:
        ax.grid(True, color="#e6e6e6", linewidth=0.5)
        ax.set_axisbelow(True)
        for s in ("top", "right"):
            ax.spines[s].set_visible(False)
        ax.tick_params(labelsize=8)
    return axs


def _save(fig, stem: Path) -> list[str]:
    from ..plot.style import style
    stem.parent.mkdir(parents=True, exist_ok=True)
    out = []
    for t in fig.texts:                                  # titles at the left, bold, as in the section figures
        t.set_horizontalalignment("left")
        t.set_x(0.01)
        t.set_fontweight("bold")
    with style():
        for ext in ("png", "svg"):
            p = stem.parent / f"{stem.name}.{ext}"      # names hold dots (dotted keys): append, never replace
            fig.savefig(p, metadata={"Software": None} if ext == "png" else {"Date": None})
            out.append(p.name)
    return out


def _label(col: str) -> str:
    """'boundaries.river.head_m' -> 'boundaries.river.head (m)'; 'fs' -> 'least FS at the exit (-)'."""
    names = {"exit_gradient_max": "largest exit gradient (m/m)", "fs": "least FS at the exit (-)",
             "fs_min": "least FS at the exit (-)", "verdict": "verdict (1 pass, 0 fail)",
             "peak_toe_head_m": "peak head under the landside toe (m)"}
    for stem, words in (("least_fs_time_", "time of the least FS"), ("lag_after_crest_", "lag of the least FS "
                                                                      "behind the crest"),
                        ("peak_toe_head_time_", "time of the peak toe head")):
        if col.startswith(stem):
            return f"{words} ({col[len(stem):]})"
    if col in names:
        return names[col]
    if col.startswith("flow_") and col.endswith("_m3_s_per_m"):
        return f"flow at {col[5:-11]} (m3/s per m, + in)"
    if col.startswith("head_") and col.endswith("_m"):
        return f"total head at {col[5:-2]} (m)"
    for suf, unit in (("_m_s", "m/s"), ("_kN_m3", "kN/m3"), ("_deg", "deg"), ("_m", "m"), ("_1", "-")):
        if col.endswith(suf):
            return f"{col[:-len(suf)]} ({unit})"
    return col


def plot_vs_parameter(folder: Path, key: str, pcol: str, rows: list[dict], results: list[str],
                      others: list[str], fs_required: float, title: str) -> list[str]:
    """One figure per varied parameter: a panel per governing result against that parameter."""
    n = len(results)
    cols = 2 if n > 1 else 1
    nr = math.ceil(n / cols)
    fig, axs = _figure(7.5, 2.6 * nr + 0.6, nr, cols)
    # families: rows that share the values of the other varied parameters
    fam: dict[tuple, list[dict]] = {}
    for r in rows:
        fam.setdefault(tuple(_fmt(r.get(o)) for o in others), []).append(r)
    many = len(fam) > len(OKABE_ITO)
    for k, res in enumerate(results):
        ax = axs.flat[k]
        for j, (tag, rr) in enumerate(fam.items()):
            rr = sorted(rr, key=lambda r: r[pcol])
            x = np.array([r[pcol] for r in rr], float)
            y = np.array([r.get(res, math.nan) for r in rr], float)
            y = np.where(np.isinf(y), np.nan, y)
            lab = _tex(", ".join(f"{_label(o).split(' (')[0]} = {t}" for o, t in zip(others, tag))) if others else None
            if many:
                ax.plot(x, y, color="#888888", lw=0.8, marker=".", ms=3)
            else:
                ax.plot(x, y, color=OKABE_ITO[j], lw=1.4, marker="o", ms=3.5, label=lab if k == 0 else None)
        if res == "fs":
            ax.axhline(fs_required, color="#D55E00", lw=1, ls="--")
            ax.text(0.99, fs_required, f" required {fs_required:g}", transform=ax.get_yaxis_transform(),
                    ha="right", va="bottom", fontsize=7, color="#D55E00")
        if key.endswith((".k", ".kx", ".ky")) and np.all(np.array([r[pcol] for r in rows], float) > 0):
            ax.set_xscale("log")
        ax.set_xlabel(_tex(_label(pcol)), fontsize=8)
        ax.set_ylabel(_tex(_label(res)), fontsize=8)
    for ax in list(axs.flat)[n:]:
        ax.set_visible(False)
    if others and not many:
        fig.legend(loc="outside lower center", fontsize=7, frameon=False, ncols=min(3, len(fam)))
    fig.suptitle(_tex(f"{title}\nresults against {key}"), fontsize=9)
    return _save(fig, folder / f"vs_{_safe(key)}")


def _safe(s: str) -> str:
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in s)


def plot_profiles(folder: Path, boundary: str, cases: list[tuple[float, dict]], fs_required: float,
                  title: str, colour_label: str, stem: str, log: bool = False) -> list[str]:
    """Exit gradient and FS along one exit boundary, one line per case, overlaid, coloured by a value."""
    from matplotlib import colormaps
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import LogNorm, Normalize
    fig, axs = _figure(7.5, 5.4, 2, 1)
    cmap = colormaps["cividis"]
    vals = np.array([v for v, _ in cases], float)
    lo, hi = float(np.nanmin(vals)), float(np.nanmax(vals))
    if hi <= lo:
        hi = lo + 1.0
    norm = LogNorm(lo, hi) if log and lo > 0 else Normalize(lo, hi)
    fsmax = 0.0
    for v, prof in cases:
        x = np.asarray(prof["x_m"], float)
        i = np.array([math.nan if g is None else float(g) for g in prof["exit_gradient"]])
        fs = np.array([math.nan if f is None else float(f) for f in prof["fs"]])
        fs[np.isinf(fs)] = np.nan
        o = np.argsort(x, kind="stable")
        c = cmap(norm(v))
        axs[0, 0].plot(x[o], i[o], color=c, lw=0.9)
        axs[1, 0].plot(x[o], fs[o], color=c, lw=0.9)
        if np.isfinite(fs).any():
            fsmax = max(fsmax, float(np.nanmax(fs)))
    axs[1, 0].axhline(fs_required, color="#D55E00", lw=1, ls="--")
    axs[1, 0].text(0.99, fs_required, f"required {fs_required:g}", transform=axs[1, 0].get_yaxis_transform(),
                   ha="right", va="bottom", fontsize=7, color="#D55E00")
    axs[1, 0].set_ylim(0, min(max(fsmax, 1.2 * fs_required), 4 * fs_required))
    axs[0, 0].set_ylabel("exit gradient (m/m)", fontsize=8)
    axs[1, 0].set_ylabel("FS against heave/uplift (-)", fontsize=8)
    axs[1, 0].set_xlabel(_tex(f"x along '{boundary}' (m)"), fontsize=8)
    cb = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=axs[:, 0], shrink=0.8)
    cb.set_label(_tex(colour_label), fontsize=8)
    cb.ax.tick_params(labelsize=7)
    fig.suptitle(_tex(f"{title}\nexit gradient profiles at '{boundary}', {len(cases)} cases"), fontsize=9)
    return _save(fig, folder / f"profiles_{_safe(boundary)}{stem}")


def plot_fragility(folder: Path, stage_label: str, stages: np.ndarray, probs: list[dict], criterion: float,
                   interval_name: str, confidence: float, n: int, title: str) -> list[str]:
    fig, axs = _figure(7.0, 4.2)
    ax = axs[0, 0]
    for tag, lab, col in (("below_criterion", f"P(FS < {criterion:g})", OKABE_ITO[0]),
                          ("below_1", "P(FS < 1)", OKABE_ITO[3])):
        p = np.array([r[f"p_fs_{tag}"] for r in probs])
        lo = np.array([r[f"p_fs_{tag}_low"] for r in probs])
        hi = np.array([r[f"p_fs_{tag}_high"] for r in probs])
        ax.fill_between(stages, lo, hi, color=col, alpha=0.18, lw=0, step=None)
        ax.plot(stages, p, color=col, lw=1.6, marker="o", ms=3.5, label=lab)
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel(_tex(stage_label), fontsize=8)
    ax.set_ylabel("probability (-)", fontsize=8)
    ax.legend(fontsize=8, frameon=False, loc="upper left",
              title=f"bands: {int(round(confidence * 100))}% {interval_name}, n = {n}", title_fontsize=7)
    fig.suptitle(_tex(f"{title}\nfragility against river stage"), fontsize=9)
    return _save(fig, folder / "fragility")


def plot_target(folder: Path, res: dict, xlabel: str, ylabel: str, bound: float) -> list[str]:
    fig, axs = _figure(6.0, 3.6)
    ax = axs[0, 0]
    h = sorted(res["history"])
    x = np.array([a for a, _, _ in h])
    y = np.array([b for _, b, _ in h])
    ok = np.array([c for _, _, c in h])
    ax.plot(x, y, color="#888888", lw=0.8)
    ax.scatter(x[ok], y[ok], color=OKABE_ITO[2], s=18, label="meets", zorder=3)
    ax.scatter(x[~ok], y[~ok], color=OKABE_ITO[3], s=18, marker="x", label="fails", zorder=3)
    ax.axhline(bound, color="#555555", lw=0.8, ls="--")
    if res.get("status") == "found":
        ax.axvline(res["value"], color=OKABE_ITO[0], lw=1)
        ax.text(res["value"], 0.02, f" {res['value']:.4g} (tolerance {res['tolerance']:g})",
                transform=ax.get_xaxis_transform(), fontsize=7, color=OKABE_ITO[0])
    ax.set_xlabel(_tex(xlabel), fontsize=8)
    ax.set_ylabel(_tex(ylabel), fontsize=8)
    ax.legend(fontsize=7, frameon=False)
    fig.suptitle(_tex(f"target '{res['name']}': {res['condition']}, {res['find']} {res['parameter']}"), fontsize=9)
    return _save(fig, folder / f"target_{_safe(res['name'])}")
