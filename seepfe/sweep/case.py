"""One case: solve a resolved section dict and reduce the result to a small record.

:func:`run_case` is what the workers run, locally or on a Dask cluster.  It takes a small dict (the
section as a dict and the probes) and returns a small dict: :meth:`seepfe.Analysis.record`, a
projection of the summary.json that ``seepfe solve`` writes for the same input (flows, heads at named
points, the governing values and verdict, the hand methods, the exit profile along each checked
boundary), so the sweep table says what ``seepfe solve`` says; nothing large travels back.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import logging
import math
import time


__all__ = ["run_case", "case_hash", "CASE_FORMAT", "from_json_float"]

#: bump when the record format or the reduction changes, so old cached cases are not reused
CASE_FORMAT = 3
_THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "VECLIB_MAXIMUM_THREADS",
                "NUMEXPR_NUM_THREADS")


def case_hash(payload: dict) -> str:
    """sha256 of the resolved input of a case: section dict, solve options, probes, format, version."""
    from ..about import __version__
    key = {"format": CASE_FORMAT, "seepfe": __version__, "section": payload["section"],
           "solve": payload.get("solve") or {}, "points": payload.get("points") or {}, "exit": payload.get("exit")}
    if payload.get("report"):            # a reach station: the record and its report (other options, other case)
        key["report"] = payload["report"]
    canon = json.dumps(key,
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
    """Limit BLAS/OpenMP pools to one thread for this solve (workers share the cores); restored afterwards.

    Through threadpoolctl only: the process environment (OMP/OPENBLAS/MKL_NUM_THREADS) is never changed,
    so a sweep run in-process leaves the caller's settings as they were."""
    from ..linsolve import one_thread
    with one_thread():
        yield


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


def transient_record(res) -> dict:
    """The moments of a case under a hydrograph (SI): when the least FS occurs, its lag behind the crest, the
    stages then, the peak head under the landside toe and when, the seepage volumes, the water balance."""
    lf, pk = res.least_fs, res.peak_toe_head
    return {"least_fs": lf["fs"], "least_fs_time_s": lf["time_s"], "lag_after_crest_s": lf["lag_after_crest_s"],
            "stages_at_least_fs_m": lf["stages_m"], "crest_time_s": res.crest["time_s"],
            "peak_toe_head_m": pk["head_m"], "peak_toe_head_time_s": pk["time_s"],
            "volumes_m3_per_m": res.volumes(), "balance_largest_step_error": res.balance["largest_step_error"],
            "steps": res.solver_info["steps"], "time_unit": res.time_unit}


def run_case(payload: dict) -> dict:
    """Solve one case (payload: {"section": dict, "solve": {...}, "points": {...}, "exit": [...] or None}).

    Returns a small, JSON-ready record (:class:`seepfe.records.CaseRecord`); a bad case gives
    {"status": "error: ..."} instead of raising. ``exit`` names the exit surfaces to check (default:
    the same rule as every other command, :func:`seepfe.analyse`).
    """
    return record_case(payload, _transient_fields)


def _transient_fields(a, res, rec: dict, payload: dict) -> None:
    if getattr(res, "is_transient", False):
        rec["transient"] = transient_record(res)
        if not res.solver_info.get("converged", True):
            rec["status"] = "not converged"


def record_case(payload: dict, extra=None) -> dict:
    """What a worker does with one payload (see :func:`run_case`): load, solve, analyse and the case record,
    in one BLAS thread with the log kept as warnings; ``extra(analysis, result, record, payload)`` adds to the
    record inside the same guard (a module-level function, so it travels to worker processes). A
    SeepfeError gives {"status": "error: ...", "time_s": ...}."""
    _tune_allocator()
    from ..analysis import analyse
    from ..errors import SeepfeError
    from ..section import load_section
    from ..solver import solve
    t0 = time.perf_counter()
    opts = payload.get("solve") or {}
    try:
        with _one_thread(), _quiet_log() as warnings:
            sec = load_section(payload["section"])
            res = solve(sec, order=opts.get("order"), size=opts.get("size"), linear=opts.get("linear"))
            a = analyse(res, payload.get("exit"))        # a hydrograph: the moment of the least FS
            rec = a.record(payload.get("points") or {}, warnings)
            if extra is not None:
                extra(a, res, rec, payload)
    except SeepfeError as e:
        return {"status": f"error: {e}", "time_s": time.perf_counter() - t0}
    rec["time_s"] = time.perf_counter() - t0
    return rec
