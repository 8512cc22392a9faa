"""Hydrographs on head boundaries: stage against time, the schedule of a transient solve, sections at a time.

A head boundary may give ``"hydrograph": [[time, head], ...]`` with ``"time_unit": "hour"`` or ``"day"``
in place of ``"head"`` (docs/transient.md). The stage is linear between the points; two points at the
same time make a step (the stage takes the later value just after that time). Before the first point the
stage is the first head, after the last point the last head. ``"peak"`` scales the rise above the first
stage so that the highest point is that head; ``"duration"`` stretches the times (and ``output_times``) from the
first point so that the hydrograph lasts that long (both for sweeps).

Times inside seepfe are seconds from the hydrographs' common zero; heads are m (the file's length unit is
converted at load like every other length).

:func:`section_at` gives the :class:`~seepfe.section.Section` of one moment: every hydrograph boundary
carries ``head`` = its stage then and no hydrograph, so every steady tool (boundary conditions, checks,
hand methods, figures) reads it unchanged.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from .schema import TIME_UNITS

__all__ = ["Hydrograph", "hydrographs", "has_hydrograph", "section_at", "spec_at", "peak_spec", "Schedule",
           "schedule", "TIME_UNITS", "time_label"]


def time_label(unit: str) -> str:
    """Short label of a time unit for tables and axes: 'h' or 'day'."""
    return {"hour": "h", "day": "day"}.get(unit, unit)


@dataclass(frozen=True)
class Hydrograph:
    """Stage against time of one boundary, after ``peak`` and ``duration``: t (s), h (m), its time unit."""

    name: str
    t: np.ndarray
    h: np.ndarray
    unit: str
    output: np.ndarray          # the boundary's own output_times, s (empty: none given)

    @classmethod
    def of(cls, b) -> "Hydrograph":
        f = TIME_UNITS[b.time_unit]
        p = np.asarray(b.hydrograph, float)
        t, h = p[:, 0].copy(), p[:, 1].copy()
        out = np.asarray(b.output_times or [], float)
        if b.duration is not None:
            stretch = b.duration / (t[-1] - t[0])
            out = t[0] + (out - t[0]) * stretch             # the stored times move with the hydrograph
            t = t[0] + (t - t[0]) * stretch
        if b.peak is not None:
            h = h[0] + (h - h[0]) * ((b.peak - h[0]) / (h.max() - h[0]))
        out = out * f
        return cls(name=b.name, t=t * f, h=h, unit=b.time_unit, output=out)

    def stage(self, t) -> np.ndarray | float:
        """Stage (total head, m) at time(s) t (s): linear between points; at a step (two points at one time) the
        earlier value holds at that time and the later one just after it (a step solved to that time ends before
        the jump, the next one carries it)."""
        ts = np.atleast_1d(np.asarray(t, float))
        i = np.searchsorted(self.t, ts, side="left") - 1
        out = np.empty(len(ts))
        before, after = i < 0, i >= len(self.t) - 1
        out[before] = self.h[0]
        out[after] = self.h[-1]
        mid = ~before & ~after
        j = i[mid]
        w = (ts[mid] - self.t[j]) / (self.t[j + 1] - self.t[j])
        out[mid] = self.h[j] + w * (self.h[j + 1] - self.h[j])
        return out if np.ndim(t) else float(out[0])

    @property
    def crest(self) -> tuple[float, float]:
        """(time s, stage m) of the highest point; the first of equal highest points."""
        k = int(np.argmax(self.h))
        return float(self.t[k]), float(self.h[k])

    @property
    def steps(self) -> np.ndarray:
        """Times (s) where the stage jumps (two points at one time)."""
        return self.t[1:][np.diff(self.t) == 0]

    def falling_limb_ends(self) -> np.ndarray:
        """Times (s) where a falling limb ends: a point after a fall that is followed by a rise, a level stretch
        or the end (the moments of lowest stage after a drawdown: rapid-drawdown checks)."""
        d = np.diff(self.h)
        out = []
        for k in range(1, len(self.h)):
            if d[k - 1] < 0 and (k == len(self.h) - 1 or d[k] >= 0):
                out.append(self.t[k])
        return np.asarray(out, float)


def hydrographs(section) -> dict:
    """{boundary name: Hydrograph} of the section's hydrograph boundaries, in file order."""
    return {b.name: Hydrograph.of(b) for b in section.spec.boundaries if b.hydrograph is not None}


def has_hydrograph(section) -> bool:
    return any(b.hydrograph is not None for b in section.spec.boundaries)


def spec_at(spec, stages: dict):
    """A copy of a SectionSpec with the named boundaries at the given heads (m) and without hydrographs."""
    bs = []
    for b in spec.boundaries:
        if b.name in stages:
            b = b.model_copy(update={"head": float(stages[b.name]), "hydrograph": None, "time_unit": None,
                                     "output_times": None, "peak": None, "duration": None})
        bs.append(b)
    return spec.model_copy(update={"boundaries": bs, "transient": None})


def peak_spec(spec):
    """The spec with every hydrograph boundary at its highest stage (the load-time checks of water levels)."""
    return spec_at(spec, {b.name: float(Hydrograph.of(b).h.max()) for b in spec.boundaries
                          if b.hydrograph is not None})


def stages_at(section, t: float, hyd: dict | None = None) -> dict:
    """{boundary: stage (m)} at time t (s)."""
    hyd = hydrographs(section) if hyd is None else hyd
    return {n: float(g.stage(t)) for n, g in hyd.items()}


def section_at(section, t: float, hyd: dict | None = None):
    """The section at time t (s): each hydrograph boundary with ``head`` = its stage then (a steady section)."""
    return dataclasses.replace(section, spec=spec_at(section.spec, stages_at(section, t, hyd)))


@dataclass(frozen=True)
class Schedule:
    """When a transient solve starts and ends, what it stores and how it steps (all times in s).

    start, end : the solve runs from start to end.
    output : sorted stored times (the boundaries' output_times, or the hydrographs' points and crests; the start
        and end are always stored).
    marks : times a step must land on (stored times and every hydrograph point, so the stage is never cut short).
    jumps : times where a stage steps (the step size restarts from first_step after them).
    max_step, first_step : s.
    unit : the display time unit ("hour" or "day"); initial_water_table : m or None.
    """

    start: float
    end: float
    output: np.ndarray
    marks: np.ndarray
    jumps: np.ndarray
    max_step: float
    first_step: float
    unit: str
    crest: float
    drawdown_ends: np.ndarray
    initial_water_table: float | None


def schedule(section) -> Schedule:
    """The schedule of a section's transient solve (see :class:`Schedule`)."""
    from .errors import SectionError
    hyd = hydrographs(section)
    if not hyd:
        raise SectionError(f"{section.source}: no boundary has a 'hydrograph': nothing is transient")
    ts = section.spec.transient
    first = next(iter(hyd.values()))
    unit = (ts.time_unit if ts is not None and ts.time_unit else None) or first.unit
    f = TIME_UNITS[unit]
    start = min(float(g.t[0]) for g in hyd.values())
    last = max(float(g.t[-1]) for g in hyd.values())
    end = float(ts.end) * f if ts is not None and ts.end is not None else last
    if not end > start:
        raise SectionError(f"{section.source}: transient.end: {end / f:g} {unit} is not after the start of the "
                           f"hydrographs ({start / f:g} {unit})")
    given = [g.output for g in hyd.values() if len(g.output)]
    if given:
        out = np.concatenate(given)
    else:
        out = np.concatenate([np.concatenate([g.t, [g.crest[0]]]) for g in hyd.values()])
    late = out[out > end * (1 + 1e-12)]
    if given and len(late):
        raise SectionError(f"{section.source}: output_times: {late[0] / f:g} {unit} is after the end of the solve "
                           f"({end / f:g} {unit}); set transient.end or drop it")
    out = np.unique(np.concatenate([out[(out >= start) & (out <= end)], [start, end]]))
    marks = np.unique(np.concatenate([out] + [g.t[(g.t > start) & (g.t <= end)] for g in hyd.values()]))
    jumps = np.unique(np.concatenate([g.steps for g in hyd.values()] + [np.zeros(0)]))
    max_step = float(ts.max_step) * f if ts is not None and ts.max_step is not None else (end - start) / 100.0
    first_step = float(ts.first_step) * f if ts is not None and ts.first_step is not None else max_step / 50.0
    if first_step > max_step:
        raise SectionError(f"{section.source}: transient.first_step ({first_step / f:g} {unit}) is larger than "
                           f"max_step ({max_step / f:g} {unit})")
    crest_t = max(hyd.values(), key=lambda g: g.crest[1] - g.h[0]).crest[0]
    dd = np.unique(np.concatenate([g.falling_limb_ends() for g in hyd.values()] + [np.zeros(0)]))
    wt = ts.initial_water_table if ts is not None else None
    if not math.isfinite(max_step) or max_step <= 0:
        raise SectionError(f"{section.source}: transient: no positive time step")
    return Schedule(start=start, end=end, output=out, marks=marks, jumps=jumps, max_step=max_step,
                    first_step=first_step, unit=unit, crest=float(crest_t), drawdown_ends=dd[dd <= end],
                    initial_water_table=wt)
