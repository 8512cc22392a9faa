"""One case: solve a resolved section dict and reduce the result to a small record.

:func:`run_case` is what the workers run, locally or on a Dask cluster.  It takes a small dict (the
section as a dict and the probes) and returns a small dict (flows, heads at named points, the exit
gradient profile along each exit boundary and the governing values); nothing large travels back.

Exit gradient and factor of safety: when the result offers ``exit_gradients(name)`` (the checks
module), its ``x``, ``gradient`` and ``fs`` are used.  Otherwise a stand-in is computed here: the
exit gradient of each outline edge is the head gradient in the element on that edge, taken along the
outward normal, ``i = -grad h . n`` (positive where water leaves); the factor of safety against
heave is ``FS = i_c / i`` with Terzaghi's critical gradient ``i_c = (gamma_sat - gamma_w) / gamma_w``
of that element's material (Terzaghi, K. (1943), Theoretical Soil Mechanics, ch. XII: heave when
the upward seepage force equals the submerged weight).  The record says which was used.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import logging
import math
import os
import time

import numpy as np

__all__ = ["run_case", "case_hash", "exit_profile", "CASE_FORMAT", "from_json_float"]

#: bump when the record format or the reduction changes, so old cached cases are not reused
CASE_FORMAT = 1
_THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "VECLIB_MAXIMUM_THREADS",
                "NUMEXPR_NUM_THREADS")


def case_hash(payload: dict) -> str:
    """sha256 of the resolved input of a case: section dict, solve options, probes, format, version."""
    from .. import __version__
    canon = json.dumps({"format": CASE_FORMAT, "seepfe": __version__, "section": payload["section"],
                        "solve": payload.get("solve") or {}, "points": payload.get("points") or {},
                        "exit": payload.get("exit")},
                       sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(canon.encode()).hexdigest()


class _Collect(logging.Handler):
    def __init__(self):
        super().__init__(logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record):
        self.messages.append(record.getMessage())


@contextlib.contextmanager
def _quiet_log():
    """Keep the solver's warnings with the case record instead of printing them from the workers."""
    lg = logging.getLogger("seepfe")
    h = _Collect()
    old = lg.propagate
    lg.addHandler(h)
    lg.propagate = False
    try:
        yield h.messages
    finally:
        lg.removeHandler(h)
        lg.propagate = old


@contextlib.contextmanager
def _one_thread():
    """Limit BLAS/OpenMP pools to one thread for this solve (workers share the cores)."""
    for v in _THREAD_VARS:
        os.environ.setdefault(v, "1")
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:          # optional: the environment variables above then do the job
        yield
        return
    with threadpool_limits(limits=1):
        yield


def _edge_elements(tri: np.ndarray, pairs: np.ndarray, n: int) -> np.ndarray:
    """Element owning each outline edge (vertex pairs), vectorised by sorted edge keys."""
    e = np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]])
    owner = np.tile(np.arange(len(tri)), 3)
    e.sort(axis=1)
    keys = e[:, 0].astype(np.int64) * n + e[:, 1]
    order = np.argsort(keys)
    p = np.sort(pairs, axis=1)
    q = p[:, 0].astype(np.int64) * n + p[:, 1]
    pos = np.searchsorted(keys[order], q)
    return owner[order[np.minimum(pos, len(order) - 1)]]


def exit_profile(result, name: str) -> dict:
    """Exit gradient profile along a boundary: {"x": m, "y": m, "gradient": -, "fs": -, "method": str}."""
    eg = None
    if hasattr(result, "exit_gradients"):
        eg = result.exit_gradients(name)
    else:
        try:
            from ..checks import exit_gradients
        except ImportError:
            exit_gradients = None
        if exit_gradients is not None:
            eg = exit_gradients(result, name)
    if eg is not None:
        x = np.asarray(eg.x, float)
        i = np.asarray(eg.gradient, float)
        fs = np.asarray(eg.fs, float)
        y = np.asarray(getattr(eg, "y", np.full(len(x), np.nan)), float)
        return {"x": x, "y": y, "gradient": i, "fs": fs, "method": "seepfe checks (exit_gradients)"}
    sec, m = result.section, result.mesh
    bi = sec.boundary_names.index(name)
    on = m.edge_boundary == bi
    E = m.edges[on]
    if len(E) == 0:
        z = np.zeros(0)
        return {"x": z, "y": z, "gradient": z, "fs": z, "method": "element gradient on the exit edge"}
    pa, pb = m.points[E[:, 0]], m.points[E[:, 1]]
    el = _edge_elements(m.triangles, E[:, :2], m.n_nodes)
    t = pb - pa
    nrm = np.column_stack([t[:, 1], -t[:, 0]]) / np.linalg.norm(t, axis=1)[:, None]
    mid = 0.5 * (pa + pb)
    cen = m.points[m.triangles[el]].mean(axis=1)
    flip = np.einsum("ij,ij->i", nrm, mid - cen) < 0
    nrm[flip] *= -1
    i = -np.einsum("ij,ij->i", result.element_gradient[el], nrm)
    gw = sec.gamma_w
    gsat = np.array([np.nan if sec.zone_material(z).unit_weight is None else sec.zone_material(z).unit_weight
                     for z in range(len(sec.spec.zones))])[m.zone[el]]
    ic = gsat / gw - 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        fs = np.where(i > 0, ic / i, np.inf)
    o = np.argsort(mid[:, 0], kind="stable")
    return {"x": mid[o, 0], "y": mid[o, 1], "gradient": i[o], "fs": fs[o],
            "method": "element gradient on the exit edge; FS = i_c / i (Terzaghi critical gradient)"}


def _jf(v: float):
    """A float for JSON: inf becomes "inf", nan becomes None (read back by :func:`from_json_float`)."""
    v = float(v)
    if math.isnan(v):
        return None
    return v if math.isfinite(v) else ("inf" if v > 0 else "-inf")


def from_json_float(v) -> float:
    return math.nan if v is None else float(v)


_ALLOCATOR_TUNED = False


def _tune_allocator() -> None:
    """Give glibc's allocator room for large arrays, once per process.

    Dask starts its workers with MALLOC_TRIM_THRESHOLD_=65536, which also pins glibc's mmap
    threshold at 128 KiB: every large numpy array is then mapped and unmapped afresh and a solve
    costs about 1.7x the CPU time (measured with scripts/bench_sweep.py). Raising the trim and mmap
    thresholds (mallopt M_TRIM_THRESHOLD = -1, M_MMAP_THRESHOLD = -3) undoes that. Elsewhere
    (not Linux, not glibc) this does nothing.
    """
    global _ALLOCATOR_TUNED
    if _ALLOCATOR_TUNED:
        return
    _ALLOCATOR_TUNED = True
    try:
        import ctypes
        libc = ctypes.CDLL("libc.so.6")
        libc.mallopt(-1, 256 * 1024 * 1024)
        libc.mallopt(-3, 32 * 1024 * 1024)
    except (OSError, AttributeError):
        pass


def run_case(payload: dict) -> dict:
    """Solve one case (payload: {"section": dict, "solve": {...}, "points": {...}, "exit": [...]}).

    Returns a small, JSON-ready record; a bad case gives {"status": "error: ..."} instead of raising.
    """
    _tune_allocator()
    from ..errors import SeepfeError
    from ..section import load_section
    from ..solver import solve
    t0 = time.perf_counter()
    opts = payload.get("solve") or {}
    try:
        with _one_thread(), _quiet_log() as warnings:
            sec = load_section(payload["section"])
            res = solve(sec, order=opts.get("order"), size=opts.get("size"), linear=opts.get("linear"))
            names = payload.get("exit")
            if names is None:
                names = [b.name for b in sec.spec.boundaries if b.kind in ("seepage_face", "drain")]
            for nm in names:
                if nm not in sec.boundary_names:
                    raise SeepfeError(f"exit boundary '{nm}' is not a boundary of the section "
                                      f"(known: {', '.join(sec.boundary_names)})")
            pts = payload.get("points") or {}
            heads = res.head(np.array(list(pts.values()), float).reshape(-1, 2)) if pts else []
            exits = {nm: exit_profile(res, nm) for nm in names}
    except SeepfeError as e:
        return {"status": f"error: {e}", "time_s": time.perf_counter() - t0}
    gov = {"exit_gradient_max": None, "exit_gradient_x_m": None, "exit_gradient_boundary": "",
           "fs_min": None, "fs_min_x_m": None, "fs_min_boundary": ""}
    imax, fmin = -math.inf, math.inf
    if exits:
        gov["fs_min"] = math.inf
    method = ""
    for nm, p in exits.items():
        method = p["method"]
        if len(p["gradient"]) and np.nanmax(p["gradient"]) > imax:
            k = int(np.nanargmax(p["gradient"]))
            imax = float(p["gradient"][k])
            gov.update(exit_gradient_max=imax, exit_gradient_x_m=float(p["x"][k]), exit_gradient_boundary=nm)
        f = p["fs"]
        if np.isnan(f).any():        # a material without unit_weight: no FS, never a silent pass
            fmin = math.nan
            gov.update(fs_min=math.nan, fs_min_x_m=math.nan, fs_min_boundary=f"{nm} (unit_weight missing)")
        elif len(f) and f.min() < fmin:
            k = int(np.argmin(f))
            fmin = float(f[k])
            gov.update(fs_min=fmin, fs_min_x_m=float(p["x"][k]) if math.isfinite(fmin) else math.nan,
                       fs_min_boundary=nm)
    info = res.solver_info
    return {
        "status": "ok" if info.get("converged", True) else "not converged",
        "flows_m3_s_per_m": res.flows,
        "heads_m": {k: _jf(v) for k, v in zip(pts, heads)},
        "governing": {k: (_jf(v) if isinstance(v, float) else v) for k, v in gov.items()},
        "exit": {nm: {"x_m": p["x"].tolist(), "gradient": [_jf(v) for v in p["gradient"]],
                      "fs": [_jf(v) for v in p["fs"]]} for nm, p in exits.items()},
        "fs_method": method,
        "warnings": warnings,
        "nodes": int(res.mesh.n_nodes),
        "balance_relative_error": float(res.balance["relative_error"]),
        "time_s": time.perf_counter() - t0,
    }
