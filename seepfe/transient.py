"""Transient seepage under a flood hydrograph: the mixed form of Richards' equation, backward Euler, Newton.

The equation (docs/transient.md) is, with total head h (m), pressure head psi = h - y and the stored water
W(psi) of :mod:`seepfe.storage` (specific storage below the phreatic surface, the retention curve above):

    d W(psi) / dt = div( kr(psi) K grad h )

Discretised as in Celia, Bouloutas and Zarba (1990), Water Resour. Res. 26(7), 1483-1496: the mixed form
(the storage change is W(psi^{n+1}) - W(psi^n), not C dpsi), backward Euler in time and a lumped storage,
so the discrete water balance closes at every step to the nonlinear residual whatever the step:

    R(h) = [S(h) - S(h^n)] / dt + K(h) h - f = 0      at the unknown nodes,

S the nodal stored water, K(h) = sum_e kr_e(h) K_e with the relative conductivity of the steady unconfined
solve (:mod:`seepfe.unsaturated`). Newton's method with a backtracking line search solves each step; the
Jacobian dS/dh / dt + K(h) + (kr term) is reused as the preconditioner of GMRES across iterations and steps.
Where every element is saturated with every pressure head >= 0 (a confined section, or
``"solver": {"phreatic": "off"}``) the step is linear: one symmetric positive-definite factorisation per
distinct (time step, set of prescribed nodes) is kept and reused.

Boundary conditions at each step are those of the steady solver (:mod:`seepfe.bcs`) at the stages of that
moment: a hydrograph boundary holds its stage at t^{n+1}; with ``dry_above_level`` its part above the water is
an outflow-only point (water may leave the slope as the river falls: rapid drawdown); seepage faces and drains
are outflow-only points updated as an active set inside the Newton iteration.

Time steps adapt to the nonlinear iteration: a step that converges in at most GROW_BELOW iterations lets the next
grow by GROW (up to max_step), one that needs SHRINK_ABOVE or more shrinks it, one that fails is retried with
CUT of its size. Steps land on every hydrograph point and stored time.

:func:`solve_transient` returns a :class:`TransientResult`: ``times`` (s), ``at(t)`` (a :class:`TimeResult`, a
steady :class:`~seepfe.result.Result` of that moment with the same queries), the time histories and the
summary.
"""

from __future__ import annotations

import contextlib
import logging
import math
import time
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from . import bcs, fem, hydrograph, linsolve
from .about import CAUTION
from .errors import SolverError
from .hydrograph import TIME_UNITS, section_at, time_label
from .mesh import Mesh, make_mesh
from .result import Result
from .section import Section, load_section
from .storage import StorageModel
from .unsaturated import KrModel, _System, _gmres, _lu

__all__ = ["solve_transient", "TransientResult", "TimeResult", "GROW", "CUT"]

log = logging.getLogger("seepfe")

#: step control: grow by GROW after a step of at most GROW_BELOW Newton iterations, shrink by SHRINK after one of
#: SHRINK_ABOVE or more, retry with CUT x the step after a failure; at most NEWTON_MAX iterations a step
GROW, GROW_BELOW, SHRINK, SHRINK_ABOVE, CUT, NEWTON_MAX = 1.5, 3, 0.7, 7, 0.3, 14
#: a step that fails at MIN_STEP_FRACTION x first_step is accepted as it stands and marked not converged
MIN_STEP_FRACTION = 1e-3
#: Newton stopping rule (as the steady unconfined solve, docs/unconfined.md): relative residual <= RTOL, or
#: <= max(FLOW_TOL, round-off floor) <= FLOOR_MAX with the next correction (weighted by kr) below HTOL x head range
RTOL, FLOW_TOL, FLOOR_MAX, HTOL, FLOOR_C = 1e-9, 1e-7, 1e-6, 1e-6, 4.0
EPS = float(np.finfo(float).eps)
#: GMRES with a kept preconditioner: relative tolerance, refresh it after more than KRYLOV_REFRESH iterations
KRYLOV_RTOL, KRYLOV_REFRESH, KRYLOV_MAX = 1e-4, 6, 30
#: a fresh symmetric preconditioner that needs more GMRES iterations than this gives way to the LU of the Jacobian
SPD_GIVE_UP = 15
LINE_SEARCH_CUTS = 6
#: factorisations of the linear (saturated) step kept at once, by (step, prescribed set)
CACHE_SIZE = 8


# ---------------------------------------------------------------------------------------------- results
@dataclass(eq=False)
class TimeResult(Result):
    """The field at one stored time of a transient solve: a :class:`~seepfe.result.Result` of the section at
    that moment (each hydrograph boundary at its stage), with the same queries (``head(points)``,
    ``boundary_flow(name)``, ``exit_gradients(name)``, ``phreatic_line()``, ...) and :func:`seepfe.analyse`.

    Flows are the boundary flows at that moment (m3/s per m, + into the section); they no longer sum to zero:
    ``storage_rate`` (N,) is the rate at which each node's stored water grows (m3/s per m) and ``balance``
    compares the net inflow with its total.
    """

    time_s: float = 0.0
    stages: dict = field(default_factory=dict)
    storage_rate: np.ndarray = field(default=None, repr=False)
    time_unit: str = "hour"
    run: object = field(default=None, repr=False)          # the TransientResult this moment belongs to

    def transient_summary(self) -> dict:
        """Plain data: this moment (s, the stages in m) and the summary of its run (summary.json's "transient")."""
        return {"time_s": self.time_s, "stages_m": dict(self.stages),
                "run": self.run.summary() if self.run is not None else None}

    @cached_property
    def balance(self) -> dict:
        """Net inflow through the boundaries against the rate of storage change (m3/s per m); relative error."""
        f = np.array(list(self._flows.values()) or [0.0])
        inflow, outflow = float(f[f > 0].sum()), float(-f[f < 0].sum())
        net = float(f.sum())
        ds = float(self.storage_rate.sum()) if self.storage_rate is not None else 0.0
        return {"inflow_m3_s_per_m": inflow, "outflow_m3_s_per_m": outflow, "net_m3_s_per_m": net,
                "storage_rate_m3_s_per_m": ds,
                "relative_error": abs(net - ds) / max(inflow, outflow, abs(ds), 1e-300)}

    @property
    def time_in_unit(self) -> float:
        return self.time_s / TIME_UNITS[self.time_unit]

    def __repr__(self) -> str:
        return (f"<TimeResult {self.section.title!r} at t = {self.time_in_unit:g} {time_label(self.time_unit)}: "
                f"balance {self.balance['relative_error']:.1e}>")


_GEOMETRY = ("_jac", "_locator", "_outline")


def _share_geometry(res, other):
    """Give a TimeResult the cached geometry (Jacobians, element locator, outline) of another of the same run."""
    if other is not None:
        for k in _GEOMETRY:
            if k not in res.__dict__ and k in other.__dict__:
                res.__dict__[k] = other.__dict__[k]
    return res


@dataclass
class _State:
    t: float
    h: np.ndarray
    reactions: np.ndarray
    fixed: np.ndarray
    face_nodes: np.ndarray
    face_active: np.ndarray
    kr: np.ndarray | None
    storage_rate: np.ndarray
    converged: bool


@dataclass(eq=False)
class TransientResult:
    """A transient solve: stored fields, time histories and the moments that matter.

    Attributes
    ----------
    section, mesh : the inputs (the section with its hydrographs).
    schedule : :class:`seepfe.hydrograph.Schedule` (start, end, stored times, steps, display unit).
    times : (n,) stored times, s: the schedule's output times and the moment of the least FS.
    history : dict of (m,) arrays, one entry per accepted step (and the start): ``time_s``, ``dt_s``,
        ``stage_<boundary>_m``, ``flow_<boundary>_m3_s_per_m``, ``volume_<boundary>_m3_per_m`` (cumulative,
        + into the section), ``storage_m3_per_m`` (water stored, relative to the start), ``balance_error``
        (relative), ``fs`` (least FS over the exit surfaces, inf where no check arises), ``exit_gradient_max``
        (m/m), ``toe_head_m``, ``newton_iterations``, ``converged``.
    solver_info : figures of the solve (steps, iterations, factorisations, times, convergence).
    exit_boundaries : the exit surfaces checked at every step (decided once, at the highest stages).
    notes : defaults taken and things worth knowing.
    """

    section: Section
    mesh: Mesh
    schedule: object
    history: dict
    solver_info: dict
    exit_boundaries: list
    notes: list
    states: list = field(repr=False, default_factory=list)
    toe_point: tuple | None = None
    storage: object = field(default=None, repr=False)
    _cache: dict = field(default_factory=dict, repr=False)

    is_transient = True

    @property
    def governing_time(self) -> float:
        """The stored time that governs: the moment of the least FS (else the end of the run)."""
        lf = self.least_fs
        return float(lf["time_s"]) if lf["time_s"] is not None else float(self.states[-1].t)

    @property
    def times(self) -> np.ndarray:
        """(n,) stored times, s."""
        return np.array([s.t for s in self.states])

    @property
    def time_unit(self) -> str:
        return self.schedule.unit

    def _index(self, t: float) -> int:
        ts = self.times
        tol = 1e-9 * max(self.schedule.end - self.schedule.start, 1.0)
        k = int(np.argmin(np.abs(ts - t)))
        if abs(ts[k] - t) > tol:
            f = TIME_UNITS[self.time_unit]
            shown = ", ".join(f"{v / f:g}" for v in ts)
            raise KeyError(f"t = {t:g} s is not a stored time (stored, {time_label(self.time_unit)}: {shown}); "
                           "add it to the hydrograph's output_times")
        return k

    def at(self, t: float) -> TimeResult:
        """The field at stored time t (s) as a :class:`TimeResult`."""
        k = self._index(float(t))
        if k not in self._cache:
            s = self.states[k]
            sec = section_at(self.section, s.t, self._hyd)
            Kz = self.section.zone_tensors()[self.mesh.zone]
            info = dict(self.solver_info, converged=bool(s.converged and self.solver_info["converged"]),
                        backend="transient (Newton-GMRES, LDL^T / LU)", unknowns=int(self.mesh.n_nodes - len(s.fixed)),
                        seepage_face_passes="inside Newton", time_s=float(s.t))
            self._cache[k] = TimeResult(
                section=sec, mesh=self.mesh, h=s.h, reactions=s.reactions, load=self._load_at(sec), fixed=s.fixed,
                element_K=Kz if s.kr is None else Kz * s.kr[:, None, None], solver_info=info, matrix=None,
                face_nodes=s.face_nodes, face_active=s.face_active, kr=s.kr, time_s=s.t,
                stages=hydrograph.stages_at(self.section, s.t, self._hyd), storage_rate=s.storage_rate,
                time_unit=self.time_unit, run=self)
            _share_geometry(self._cache[k], next((v for v in self._cache.values() if "_jac" in v.__dict__), None))
        return self._cache[k]

    def _load_at(self, sec):
        return bcs.conditions(sec, self.mesh).load

    @cached_property
    def _hyd(self):
        return hydrograph.hydrographs(self.section)

    def analyse(self, t: float, boundaries: list[str] | None = None, hand: bool = True):
        """:func:`seepfe.analyse` of the field at stored time t (s), along the exit surfaces of the whole run
        (decided once, at the highest stages) unless ``boundaries`` names others."""
        from .analysis import analyse
        return analyse(self.at(t), self.exit_boundaries if boundaries is None else boundaries, hand=hand)

    # --------------------------------------------------------------------------------------- moments
    @property
    def crest(self) -> dict:
        """The flood crest: time (s) and stage (m) of the highest point of the hydrograph that rises most."""
        t = self.schedule.crest
        return {"time_s": t, "stages_m": hydrograph.stages_at(self.section, t, self._hyd)}

    @property
    def least_fs(self) -> dict:
        """The least FS over the run: its value, time (s), the stages then (m), the lag behind the crest (s),
        the boundary, mode and x where it occurs, and whether it was still falling at the end of the run."""
        H = self.history
        fs = H["fs"]
        ok = np.isfinite(fs)
        out = {"fs": None, "time_s": None, "stages_m": None, "lag_after_crest_s": None, "boundary": None,
               "mode": None, "x_m": None, "at_end": False}
        if not ok.any():
            return out
        k = int(np.flatnonzero(ok)[np.argmin(fs[ok])])
        t = float(H["time_s"][k])
        out.update(fs=float(fs[k]), time_s=t, stages_m=hydrograph.stages_at(self.section, t, self._hyd),
                   lag_after_crest_s=t - self.schedule.crest, boundary=H["fs_boundary"][k] or None,
                   mode=H["fs_mode"][k] or None, x_m=float(H["fs_x_m"][k]) if np.isfinite(H["fs_x_m"][k]) else None,
                   at_end=bool(k == len(fs) - 1))
        return out

    @property
    def peak_toe_head(self) -> dict:
        """Highest head at the toe point (m), its time (s) and the lag behind the crest (s)."""
        th = self.history["toe_head_m"]
        if not np.isfinite(th).any():
            return {"head_m": None, "time_s": None, "lag_after_crest_s": None}
        k = int(np.nanargmax(th))
        t = float(self.history["time_s"][k])
        return {"head_m": float(th[k]), "time_s": t, "lag_after_crest_s": t - self.schedule.crest}

    def volumes(self) -> dict:
        """Cumulative flow volume through each boundary over the run, m3 per m (+ into the section)."""
        return {k[len("volume_"):-len("_m3_per_m")]: float(v[-1]) for k, v in self.history.items()
                if k.startswith("volume_")}

    @property
    def balance(self) -> dict:
        """The water balance over the steps: largest relative error of a step, and over the whole run."""
        H = self.history
        err = H["balance_error"][1:]
        vol = sum(self.volumes().values())
        ds = float(H["storage_m3_per_m"][-1] - H["storage_m3_per_m"][0])
        gross = sum(abs(v) for v in self.volumes().values())
        return {"largest_step_error": float(np.max(err)) if len(err) else 0.0,
                "storage_change_m3_per_m": ds, "net_inflow_m3_per_m": vol,
                "run_error": abs(vol - ds) / max(gross, abs(ds), 1e-300)}

    def summary(self) -> dict:
        """Plain data of the run (SI): schedule, stored times, the moments that matter, volumes, balance, solver."""
        from .analysis import _plain, _finite_or_none
        sc = self.schedule
        d = {
            "format": "seepfe-transient/1",
            "title": self.section.title or "",
            "source": self.section.source,
            "input_sha256": self.section.input_hash,
            "time_unit_shown": sc.unit,
            "start_s": sc.start, "end_s": sc.end,
            "stored_times_s": [float(t) for t in self.times],
            "drawdown_ends_s": [float(t) for t in sc.drawdown_ends],
            "crest": self.crest,
            "least_fs": self.least_fs,
            "peak_toe_head": self.peak_toe_head,
            "toe_point_m": list(self.toe_point) if self.toe_point is not None else None,
            "volumes_m3_per_m": self.volumes(),
            "balance": self.balance,
            "exit_boundaries": list(self.exit_boundaries),
            "storage": self.storage.describe() if self.storage is not None else {},
            "solver": self.solver_info,
            "notes": list(self.notes),
            "caution": CAUTION,
        }
        return _finite_or_none(_plain(d))

    def history_columns(self) -> dict:
        """The time history as named columns (units in the names) for CSV."""
        f = TIME_UNITS[self.time_unit]
        H = self.history
        cols = {"time_s": H["time_s"], f"time_{time_label(self.time_unit)}": H["time_s"] / f}
        for k, v in H.items():
            if k in ("time_s", "fs_boundary", "fs_mode"):
                continue
            cols[k] = np.asarray(v, float)
        return cols

    def __repr__(self) -> str:
        lf = self.least_fs
        f = TIME_UNITS[self.time_unit]
        fs = "-" if lf["fs"] is None else f"{lf['fs']:.3g} at {lf['time_s'] / f:g} {time_label(self.time_unit)}"
        return (f"<TransientResult {self.section.title!r}: {len(self.history['time_s']) - 1} steps, "
                f"{len(self.states)} stored times, least FS {fs}>")


# ---------------------------------------------------------------------------------------------- the solve
_steady_solve = None


def register_steady(fn) -> None:
    """Called by :mod:`seepfe.solver` with its ``solve`` (the initial state), so this module never imports it."""
    global _steady_solve
    _steady_solve = fn


def _steady():
    if _steady_solve is None:
        import importlib
        importlib.import_module("seepfe.solver")        # registers itself
    return _steady_solve


def solve_transient(section, *, order: int | None = None, size: float | None = None, mesh: Mesh | None = None,
                    linear: str | None = None, history: bool = True, initial_head=None) -> TransientResult:
    """Solve a section with a hydrograph through time (see the module docstring).

    Parameters
    ----------
    section : Section, dict or path with at least one hydrograph boundary.
    order, size, mesh, linear : as :func:`seepfe.solve`.
    history : evaluate the exit checks (least FS, exit gradient) at every step (False: at the stored times only).
    initial_head : the state at the start, overriding the section's: a number (still water at that elevation, m),
        an (N,) array of nodal total heads (m) on ``mesh``, or a function of the (N, 2) node coordinates (m)
        returning them (default: the section's ``transient.initial_water_table``, else the steady solution at
        the first stages).

    Returns
    -------
    TransientResult
    """
    if not isinstance(section, Section):
        section = load_section(section)
    sched = hydrograph.schedule(section)
    hyd = hydrograph.hydrographs(section)
    sspec = section.spec.solver
    method = linear or sspec.linear
    notes: list[str] = []
    if sspec.accuracy:
        notes.append("solver.accuracy is not applied to a transient solve: the mesh is used as specified")
    t_start = time.perf_counter()
    if mesh is None:
        mesh = make_mesh(section, order=order, size=size)
    t_mesh = time.perf_counter()
    confined = sspec.phreatic == "off"
    y = mesh.points[:, 1]
    n = mesh.n_nodes
    # exit surfaces: decided once, at the highest stages (the same surfaces at every step)
    from .checks.exit import default_boundaries
    import dataclasses
    peak = dataclasses.replace(section, spec=hydrograph.peak_spec(section.spec))
    exit_names = default_boundaries(peak)
    for b in section.spec.boundaries:
        if b.hydrograph is not None and not b.dry_above_level:
            lo = float(hyd[b.name].h.min())
            if float(np.asarray(b.polyline)[:, 1].max()) > lo + section.head_tol:
                notes.append(f"boundary '{b.name}': its hydrograph falls to {lo:g} m, below parts of the boundary, "
                             "which then hold that head as a suction; add \"dry_above_level\": true to let them "
                             "drain as a seepage face")
    # ---- initial state
    sec0 = section_at(section, sched.start, hyd)
    if initial_head is not None:
        if callable(initial_head):
            h = np.asarray(initial_head(mesh.points), float).reshape(-1)
        elif np.ndim(initial_head) == 0:
            h = np.full(n, float(initial_head))
        else:
            h = np.asarray(initial_head, float).reshape(-1)
        if h.shape != (n,) or not np.all(np.isfinite(h)):
            raise SolverError(f"{section.source}: initial_head: expected {n} finite nodal heads (m), got shape "
                              f"{h.shape}")
        active = np.zeros(n, bool)
        init_info = {"initial_state": "given heads", "converged": True, "factorizations": 0, "time_s": 0.0}
    elif sched.initial_water_table is None:
        steady = _steady()(sec0, mesh=mesh, linear=linear, accuracy=0)
        h = steady.h.copy()
        active = np.zeros(n, bool)
        active[steady.face_nodes[steady.face_active]] = True
        init_info = {"initial_state": "steady at the first stages", "converged": steady.solver_info["converged"],
                     "factorizations": steady.solver_info["factorizations"],
                     "time_s": steady.solver_info["times_s"]["solve"] + steady.solver_info["times_s"]["assemble"]}
        if not steady.solver_info["converged"]:
            notes.append("the steady solve of the initial state did not converge: the run starts from its best iterate")
    else:
        h = np.full(n, float(sched.initial_water_table))
        active = np.zeros(n, bool)
        init_info = {"initial_state": f"still water at {sched.initial_water_table:g} m", "converged": True,
                     "factorizations": 0, "time_s": 0.0}
    Kz = section.zone_tensors()
    Ke = fem.element_matrices(mesh.points, mesh.cells, Kz[mesh.zone], mesh.order)
    model = KrModel.build(section, mesh)
    sysm = _System(mesh, Ke, model)
    store = StorageModel.build(section, mesh, confined)
    notes += store.notes
    stepper = _Stepper(section, mesh, sysm, store, method, sspec.tolerance, confined)
    bc0 = bcs.conditions(sec0, mesh)
    if initial_head is not None or sched.initial_water_table is not None:
        fixed0, vals0 = bcs.fixed_set(bc0, bc0.face_start, y)
        h[fixed0] = vals0
        active[bc0.face_nodes[bc0.face_start]] = True
    S_old, _ = store.water(h - y, capacity=False)
    kr0 = None if confined else sysm.kr(h, derivative=False)[0]
    A0 = sysm.assemble(np.ones(mesh.n_elements) if kr0 is None else kr0)
    r0 = A0 @ h - bc0.load
    fixed0 = np.sort(np.concatenate([bc0.head_nodes, bc0.face_nodes[active[bc0.face_nodes]]]))
    r0_free = np.ones(n, bool)
    r0_free[fixed0] = False
    r0[r0_free] = 0.0             # the start: a solution (steady) or a still state; its reactions only where held
    stepper.q_ref = max(0.5 * float(np.abs(r0[fixed0]).sum()), 1e-300)
    # ---- post-processing at each step: the history
    tracker = _History(section, mesh, hyd, exit_names, history, store, sched)
    state0 = _State(t=sched.start, h=h.copy(), reactions=r0, fixed=fixed0, face_nodes=bc0.face_nodes,
                    face_active=active[bc0.face_nodes].copy(), kr=kr0, storage_rate=np.zeros(n), converged=True)
    states = [state0]
    tracker.record(state0, S_old, dt=0.0, iterations=0, store_result=None)
    out_times = sched.output
    marks = sched.marks
    jumps = sched.jumps
    t = sched.start
    dt = sched.first_step
    span = sched.end - sched.start
    tiny = 1e-9 * span
    steps = failed_steps = unconverged_steps = 0
    h_prev, dt_prev = None, 0.0
    stopped = None
    t_loop = time.perf_counter()
    threads = contextlib.ExitStack()
    threads.enter_context(linsolve.one_thread())       # small dense work (GMRES) runs best on one BLAS thread
    try:
        while t < sched.end - tiny:
            nxt = marks[marks > t + tiny]
            mark = float(nxt[0]) if len(nxt) else sched.end
            dt = min(dt, sched.max_step)
            rem = mark - t
            if rem <= dt * (1 + 1e-9):
                dt = rem
            elif rem < 2 * dt:
                dt = 0.5 * rem
            t1 = t + dt if abs(t + dt - mark) > tiny else mark
            sec1 = section_at(section, t1, hyd)
            bc = bcs.conditions(sec1, mesh)
            face = np.where(active[bc.face_nodes], True, False)
            # predictor: the heads extrapolated linearly from the last two steps (not across a jump of a stage)
            guess = None
            if h_prev is not None and dt_prev > 0:
                guess = h + ((t1 - t) / dt_prev) * (h - h_prev)
            out = stepper.step(h, S_old, bc, face, t1 - t, guess)
            if not out.converged and guess is not None:
                out = stepper.step(h, S_old, bc, face, t1 - t)
            if not out.converged and (t1 - t) > MIN_STEP_FRACTION * sched.first_step:
                failed_steps += 1
                dt = max(CUT * (t1 - t), MIN_STEP_FRACTION * sched.first_step * 0.999)
                log.info("transient step to t = %.6g s did not converge (%s); retried with dt = %.3g s", t1, out.reason, dt)
                continue
            if not out.converged:
                unconverged_steps += 1
                stopped = (t1, out.reason)
                log.warning("transient step to t = %.6g s did not converge at the smallest step (%s): the run stops "
                            "there; its best iterate is stored, marked not converged", t1, out.reason)
            steps += 1
            dt_used = t1 - t
            t = t1
            h_prev, dt_prev = h, dt_used
            h = out.h
            active[:] = False
            active[bc.face_nodes[out.face]] = True
            st = _State(t=t, h=h.copy(), reactions=out.r, fixed=out.fixed, face_nodes=bc.face_nodes,
                        face_active=out.face.copy(), kr=out.kr, storage_rate=(out.S - S_old) / dt_used,
                        converged=out.converged)
            stored = bool(np.any(np.abs(out_times - t) <= tiny)) or not out.converged
            tracker.record(st, out.S, dt=dt_used, iterations=out.iterations, store_result=stored)
            if stored:
                states.append(st)
                log.info("t = %.6g %s stored (%d steps, %d Newton iterations so far)", t / TIME_UNITS[sched.unit],
                         time_label(sched.unit), steps, stepper.stats["newton_iterations"])
            if not out.converged:
                break
            S_old = out.S
            # next step size, driven by the nonlinear iteration
            if np.any(np.abs(jumps - t) <= tiny):
                dt = sched.first_step                 # a stage jumps now: start small again
                h_prev = None
            elif out.iterations <= GROW_BELOW:
                dt = dt_used * GROW
            elif out.iterations >= SHRINK_ABOVE:
                dt = dt_used * SHRINK
            else:
                dt = dt_used
    finally:
        threads.close()
    t_end = time.perf_counter()
    # the moment of the least FS is stored too
    worst = tracker.worst_state
    if worst is not None and not any(abs(s.t - worst.t) <= tiny for s in states):
        states.append(worst)
        states.sort(key=lambda s: s.t)
    converged = unconverged_steps == 0 and init_info["converged"]
    H = tracker.arrays()
    info = {
        "method": "mixed-form Richards equation, backward Euler, Newton (Celia, Bouloutas and Zarba 1990)",
        "confined": bool(confined), "steps": steps, "failed_steps_retried": failed_steps,
        "unconverged_steps": unconverged_steps, "converged": bool(converged),
        "newton_iterations": stepper.stats["newton_iterations"],
        "linear_steps": stepper.stats["linear_steps"],
        "factorizations": stepper.stats["factorizations"] + init_info["factorizations"],
        "factorizations_linear": stepper.stats["factorizations_linear"],
        "factorizations_preconditioner": stepper.stats["factorizations_preconditioner"],
        "distinct_linear_keys": len(stepper.keys_seen),
        "krylov_iterations": stepper.stats["krylov_iterations"],
        "active_set_changes": stepper.stats["active_set_changes"],
        "initial": init_info,
        "nodes": int(n), "order": int(mesh.order), "unknowns_max": int(n - len(bc0.head_nodes)),
        "first_step_s": sched.first_step, "max_step_s": sched.max_step,
        "smallest_step_s": float(np.min(H["dt_s"][1:])) if steps else 0.0,
        "largest_step_s": float(np.max(H["dt_s"][1:])) if steps else 0.0,
        "times_s": {"mesh": round(t_mesh - t_start, 4), "initial": round(t_loop - t_mesh, 4),
                    "steps": round(t_end - t_loop - tracker.time_s, 4), "history": round(tracker.time_s, 4),
                    "factor": round(stepper.stats["factor_s"], 4), "total": round(t_end - t_start, 4)},
    }
    if stopped is not None:
        f = TIME_UNITS[sched.unit]
        notes.append(f"the run stopped at t = {stopped[0] / f:.4g} {time_label(sched.unit)}: a step did not converge at "
                     f"the smallest step ({stopped[1]}); the field there is the best iterate, marked not converged, "
                     "and must not be used; later stored times are missing. To change: a smaller "
                     "transient.first_step and max_step, a coarser local mesh, or a less abrupt hydrograph")
    log.info("transient: %d steps (%d retried), %d Newton iterations, %d factorisations, %.2f s", steps,
             failed_steps, info["newton_iterations"], info["factorizations"], t_end - t_start)
    return TransientResult(section=section, mesh=mesh, schedule=sched, history=H,
                           solver_info=info, exit_boundaries=exit_names, notes=notes, states=states,
                           toe_point=tracker.toe_point, storage=store)


# ---------------------------------------------------------------------------------------------- one step
@dataclass
class _StepOut:
    h: np.ndarray
    face: np.ndarray
    r: np.ndarray
    S: np.ndarray
    kr: np.ndarray | None
    fixed: np.ndarray
    converged: bool
    iterations: int
    reason: str = ""


class _Stepper:
    """Newton's method for one backward-Euler step of the mixed form, with the outflow active set."""

    def __init__(self, section, mesh, sysm, store, method, tol, confined):
        self.section, self.mesh, self.sysm, self.store = section, mesh, sysm, store
        self.method, self.tol, self.confined = method, tol, confined
        self.y = mesh.points[:, 1]
        self.n = mesh.n_nodes
        self.htol = section.head_tol
        self.A1 = sysm.assemble(np.ones(mesh.n_elements))            # saturated K, kr = 1
        self.lin_cache: dict = {}
        self.keys_seen: set = set()
        self.pc = None
        self.pc_kind = "spd"
        self._pc_solver = None
        self._upper = None
        self._fresh = False
        self.q_ref = 1e-300
        self.stats = {"newton_iterations": 0, "linear_steps": 0, "factorizations": 0, "factorizations_linear": 0,
                      "factorizations_preconditioner": 0,
                      "krylov_iterations": 0, "active_set_changes": 0, "factor_s": 0.0}

    def _eval(self, h, S_old, dt, load, derivative=True):
        """kr, dkr, K(h), S, C and the residual R(h) at every node."""
        if self.confined:
            kr_e, dkr, A = None, None, self.A1
        else:
            kr_e, dkr = self.sysm.kr(h, derivative=derivative)
            A = self.A1 if self.sysm.partly_dry == 0 else self.sysm.assemble(kr_e)
        S, C = self.store.water(h - self.y)
        r = (S - S_old) / dt + A @ h - load
        return kr_e, dkr, A, S, C, r

    def _linear_solver(self, dt, fixed, C):
        """The cached factorisation of (K + diag(C) / dt) on the free nodes for this step and prescribed set."""
        key = (float(f"{dt:.10e}"), fixed.tobytes())       # steps equal to 1e-10 share one factorisation
        self.keys_seen.add(key)
        hit = self.lin_cache.get(key)
        if hit is None:
            t0 = time.perf_counter()
            free = np.ones(self.n, bool)
            free[fixed] = False
            fi = np.flatnonzero(free)
            J = self.A1 + sp.diags(C / dt, format="csr")
            Jf = J[fi][:, fi].tocsr()
            hit = (fi, linsolve.factorize(Jf, self.method, self.tol))
            if len(self.lin_cache) >= CACHE_SIZE:
                self.lin_cache.pop(next(iter(self.lin_cache)))
            self.lin_cache[key] = hit
            self.stats["factorizations"] += 1
            self.stats["factorizations_linear"] += 1
            self.stats["factor_s"] += time.perf_counter() - t0
        return hit

    def step(self, h_old, S_old, bc, face, dt, guess=None) -> _StepOut:
        """One step of size dt (s) from heads h_old (stored water S_old) with the conditions bc at its end; Newton
        starts from ``guess`` (default h_old)."""
        y, n = self.y, self.n
        face = face.copy()
        h = (h_old if guess is None else guess).copy()
        dH = max(float(np.ptp(np.concatenate([bc.head_values, y[bc.face_nodes]]))), self.htol)
        best = None
        reason = "iteration limit"
        it = 0
        pending = None
        for it in range(1, NEWTON_MAX + 1):
            fixed, values = bcs.fixed_set(bc, face, y)
            h[fixed] = values
            free_mask = np.ones(n, bool)
            free_mask[fixed] = False
            if pending is not None:
                kr_e, dkr, A, S, C, r = pending          # the accepted trial of the line search, evaluated there
                pending = None
            else:
                kr_e, dkr, A, S, C, r = self._eval(h, S_old, dt, bc.load)
            new_face, release, catch = bcs.update_active(bc, face, r, h, y, self.htol)
            changed = bool(release.any() or catch.any())
            if changed and it < NEWTON_MAX - 2:
                self.stats["active_set_changes"] += 1
                face = new_face
                fixed, values = bcs.fixed_set(bc, face, y)
                h[fixed] = values
                free_mask[:] = True
                free_mask[fixed] = False
                kr_e, dkr, A, S, C, r = self._eval(h, S_old, dt, bc.load)
            q = max(0.5 * float(np.abs(r[fixed]).sum()) + 0.5 * float(np.abs(bc.load).sum()),
                    float(np.abs(S - S_old).sum()) / dt, 1e-6 * self.q_ref, 1e-300)
            rel = float(np.abs(r[free_mask]).sum()) / q
            floor = FLOOR_C * EPS * float((self.sysm.matrix(np.abs(A.data)) @ np.abs(h))[free_mask].sum()) / q
            if best is None or rel < best[0]:
                best = (rel, h.copy(), face.copy(), r, S, kr_e, fixed)
            if not changed and rel <= RTOL and it > 1:
                return self._out(h, face, r, S, kr_e, fixed, True, it - 1)
            linear = self.confined or (self.sysm.partly_dry == 0 and float((h - y)[free_mask].min()) >= 0.0)
            if linear:
                fi, solver = self._linear_solver(dt, fixed, C)
                dh = np.zeros(n)
                dh[fi] = solver.solve(-r[fi])
                self.stats["linear_steps"] += 1
            else:
                J = self.sysm.jacobian(A, h, dkr)
                J.data[self.sysm.diag] += C / dt
                J = self.sysm.pinned(J, free_mask)
                b = -r
                b[fixed] = 0.0
                dh = self._newton_direction(J, b, A, C, dt, free_mask)
            # converged on a small residual when the next correction moves no head that carries flow
            if not changed and rel <= max(FLOW_TOL, floor) <= FLOOR_MAX:
                w = np.ones(n) if kr_e is None else np.zeros(n)
                if kr_e is not None:
                    np.maximum.at(w, self.mesh.cells.ravel(), np.repeat(kr_e, self.mesh.cells.shape[1]))
                if float(np.abs(w * dh).max()) <= HTOL * dH:
                    return self._out(h, face, r, S, kr_e, fixed, True, it - 1)
            self.stats["newton_iterations"] += 1
            dh = np.clip(dh, -dH, dH)
            dh[fixed] = 0.0                               # prescribed heads stay exactly as set
            if linear:
                h = h + dh
                continue
            # backtracking line search on the 1-norm of the residual at the unknown nodes
            rn = float(np.abs(r[free_mask]).sum())
            ok, ht, pending = self._line_search(h, dh, rn, S_old, dt, bc.load, free_mask)
            if not ok and not self._fresh:
                self.pc = None                        # the direction of an old preconditioner failed: a fresh one
                dh = np.clip(self._newton_direction(J, b, A, C, dt, free_mask), -dH, dH)
                dh[fixed] = 0.0
                ok, ht, pending = self._line_search(h, dh, rn, S_old, dt, bc.load, free_mask)
            if not ok:
                reason = "line search failed"
                break
            h = ht
        rel, h, face, r, S, kr_e, fixed = best
        return self._out(h, face, r, S, kr_e, fixed, False, it, f"{reason}; relative residual {rel:.1e}")

    def _line_search(self, h, dh, rn, S_old, dt, load, free_mask):
        """Backtracking (halving) on the 1-norm of the residual at the unknown nodes (Armijo); returns (accepted,
        heads, their evaluation) so the next Newton iteration starts from it."""
        tstep = 1.0
        for _ in range(LINE_SEARCH_CUTS + 1):
            ht = h + tstep * dh
            ev = self._eval(ht, S_old, dt, load)
            if float(np.abs(ev[5][free_mask]).sum()) <= (1.0 - 1e-4 * tstep) * rn:
                return True, ht, ev
            tstep *= 0.5
        return False, h, None

    def _newton_direction(self, J, b, A, C, dt, free_mask):
        """GMRES on the Newton system with a kept preconditioner (across iterations and steps while it serves):
        the LDL^T of the symmetric positive-definite part K(h) + diag(C) / dt where few elements are partly dry
        (the Jacobian differs from it only there), else the LU of an earlier Jacobian; a fresh one when GMRES needs
        more than KRYLOV_REFRESH iterations or fails, and the LU of this Jacobian when even that fails."""
        self._fresh = False
        d = np.add.reduceat(np.abs(J.data), J.indptr[:-1])
        x, ok = None, False
        for _ in range(2):
            if self.pc is None:
                self._refresh_pc(J, A, C, dt, free_mask)
            x, k, ok = _gmres(lambda v: (J @ v) / d, lambda v: self.pc.solve(d * v), b / d, KRYLOV_RTOL, KRYLOV_MAX)
            self.stats["krylov_iterations"] += k
            fresh = self._fresh
            if k > KRYLOV_REFRESH or not ok:
                self.pc = None                       # refactorise (now, or at the next iteration)
                if fresh and self.pc_kind == "spd" and (k > SPD_GIVE_UP or not ok):
                    self.pc_kind = "lu"              # even a fresh symmetric one did not serve: the LU from now on
            if ok or fresh:
                break
        if ok:
            return x
        t0 = time.perf_counter()
        lu = _lu(J)
        self.pc, self._fresh = lu, True
        self.stats["factorizations"] += 1
        self.stats["factor_s"] += time.perf_counter() - t0
        return lu.solve(b)

    def _refresh_pc(self, J, A, C, dt, free_mask):
        """A new preconditioner: the LDL^T (qdldl) of K(h) + diag(C) / dt with the prescribed rows and columns replaced
        by identity ones (symmetric positive definite, one pattern whatever the active set, so later steps reuse it
        and refactorise numerically only); once a fresh one has not served (wide unsaturated zones, where the kr
        term of the Jacobian weighs), the LU of the Jacobian for the rest of the run."""
        import qdldl
        t0 = time.perf_counter()
        sysm = self.sysm
        if self.pc_kind == "lu":
            self.pc = _lu(J)
            self._fresh = True
            self.stats["factorizations"] += 1
            self.stats["factor_s"] += time.perf_counter() - t0
            return
        if self._upper is None:
            pos = sysm.matrix(np.arange(1, sysm.nnz + 1, dtype=float))
            U = sp.triu(pos, format="csc")
            U.sort_indices()
            self._upper = (U.data.astype(np.int64) - 1, U.indices.copy(), U.indptr.copy())
        perm, ind, ptr = self._upper
        v = A.data.copy()
        v[sysm.diag] += C / dt
        fixed = ~free_mask
        v[fixed[sysm.row] | fixed[sysm.indices]] = 0.0
        v[sysm.diag[fixed]] = 1.0
        U = sp.csc_matrix((v[perm], ind, ptr), shape=(self.n, self.n))
        try:
            if self._pc_solver is None or not hasattr(self._pc_solver, "update"):
                self._pc_solver = qdldl.Solver(U, upper=True)
            else:
                self._pc_solver.update(U, upper=True)       # numeric refactorisation, same pattern
            self.pc = self._pc_solver
        except (ValueError, RuntimeError):          # not positive definite after all: the LU of it instead
            self._pc_solver = None
            self.pc = spla.splu(sp.csc_matrix(sysm.matrix(v)), permc_spec="COLAMD")
        self._fresh = True
        self.stats["factorizations"] += 1
        self.stats["factorizations_preconditioner"] += 1
        self.stats["factor_s"] += time.perf_counter() - t0

    def _out(self, h, face, r, S, kr_e, fixed, converged, iterations, reason=""):
        return _StepOut(h=h, face=face, r=r, S=S, kr=None if kr_e is None else kr_e.copy(), fixed=fixed,
                        converged=converged, iterations=iterations, reason=reason)


# ---------------------------------------------------------------------------------------------- histories
class _History:
    """Time histories at every accepted step: stages, flows, volumes, storage, balance, least FS, exit gradient,
    toe head (the exit checks through :func:`seepfe.analyse`, without the hand methods)."""

    def __init__(self, section, mesh, hyd, exit_names, every_step, store, sched):
        self.section, self.mesh, self.hyd, self.exit_names = section, mesh, hyd, exit_names
        self.every_step, self.store, self.sched = every_step, store, sched
        self.rows: list[dict] = []
        self.volumes: dict = {}
        self.S0 = None
        self.time_s = 0.0
        self.worst_fs = math.inf
        self.worst_state = None
        self.toe_point = None
        self._toe = None
        self._template = None

    def _toe_setup(self, res, analysis):
        """The toe point: the landside toe of the first exit surface, at the base of the top stratum under it
        where there is one (the head that lifts it), else at the surface."""
        if not analysis.exits:
            return
        ex = next(iter(analysis.exits.values()))
        i = int(np.argmin(np.abs(ex.x - ex.toe_x)))
        yb = ex.y[i] - ex.thickness[i] if np.isfinite(ex.thickness[i]) else ex.y[i]
        p = np.array([[ex.toe_x, yb + (1e-6 * self.section.extent if np.isfinite(ex.thickness[i]) else 0.0)]])
        e, xi = res.locate(p)
        if e[0] < 0:
            return
        self.toe_point = (float(p[0, 0]), float(p[0, 1]))
        self._toe = (int(e[0]), fem.shape(self.mesh.order, xi)[0])

    def record(self, st: _State, S: np.ndarray, dt: float, iterations: int, store_result):
        from .analysis import analyse
        from .records import fs_value
        t0 = time.perf_counter()
        sec = section_at(self.section, st.t, self.hyd)
        Kz = self.section.zone_tensors()[self.mesh.zone]
        res = TimeResult(section=sec, mesh=self.mesh, h=st.h, reactions=st.reactions, load=bcs.conditions(
            sec, self.mesh).load, fixed=st.fixed, element_K=Kz if st.kr is None else Kz * st.kr[:, None, None],
            solver_info={"converged": st.converged}, face_nodes=st.face_nodes, face_active=st.face_active, kr=st.kr,
            time_s=st.t, storage_rate=st.storage_rate, time_unit=self.sched.unit)
        _share_geometry(res, self._template)
        self._template = res
        row = {"time_s": st.t, "dt_s": dt, "newton_iterations": iterations, "converged": float(st.converged)}
        for name, g in self.hyd.items():
            row[f"stage_{name}_m"] = float(g.stage(st.t))
        flows = res.flows
        for name, q in flows.items():
            row[f"flow_{name}_m3_s_per_m"] = q
            self.volumes[name] = self.volumes.get(name, 0.0) + q * dt       # backward Euler: q at the step's end
            row[f"volume_{name}_m3_per_m"] = self.volumes[name]
        Ssum = float(S.sum())
        if self.S0 is None:
            self.S0 = Ssum
            self.S_prev = Ssum
        row["storage_m3_per_m"] = Ssum - self.S0
        net = float(sum(flows.values()))
        dS = Ssum - self.S_prev
        gross = sum(abs(q) for q in flows.values())
        row["balance_error"] = abs(dS - net * dt) / max(abs(dS), gross * dt, 1e-300) if dt > 0 else 0.0
        self.S_prev = Ssum
        check = self.every_step or store_result is None or store_result
        if check:
            a = analyse(res, self.exit_names, hand=False)
            g = a.governing
            if self._toe is None and self.toe_point is None:
                self._toe_setup(res, a)
            row["fs"] = fs_value(g)
            row["fs_boundary"] = g["boundary"] or ""
            row["fs_mode"] = g["mode"] or ""
            row["fs_x_m"] = g["x_m"] if g["x_m"] is not None else math.nan
            row["exit_gradient_max"] = g["exit_gradient_max"] if g["exit_gradient_max"] is not None else math.nan
            if row["fs"] < self.worst_fs and math.isfinite(row["fs"]):
                self.worst_fs = row["fs"]
                self.worst_state = st
        else:
            row.update(fs=math.nan, fs_boundary="", fs_mode="", fs_x_m=math.nan, exit_gradient_max=math.nan)
        if self._toe is not None:
            e, N = self._toe
            row["toe_head_m"] = float(N @ st.h[self.mesh.cells[e]])
        else:
            row["toe_head_m"] = math.nan
        self.rows.append(row)
        self.time_s += time.perf_counter() - t0

    def arrays(self) -> dict:
        keys = list(dict.fromkeys(k for r in self.rows for k in r))
        out = {}
        for k in keys:
            vals = [r.get(k, math.nan if k not in ("fs_boundary", "fs_mode") else "") for r in self.rows]
            out[k] = np.array(vals, dtype=object if k in ("fs_boundary", "fs_mode") else float)
        return out
