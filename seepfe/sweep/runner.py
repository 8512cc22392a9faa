"""Run many cases: serially, on a local process pool, or on a Dask cluster, with a disk cache.

:class:`Runner` takes a list of payloads (small dicts, see :func:`seepfe.sweep.case.run_case`),
answers from the cache what it can, solves the rest on its backend and stores each record as soon as
it arrives.  Progress goes to a callback ``progress(done, total, cached)``; the library never prints.

Backends

* ``workers=1``: in this process (no pool; simplest to debug).
* ``workers>1`` (default: all usable cores): ``concurrent.futures.ProcessPoolExecutor`` with the
  ``spawn`` start method; BLAS/OpenMP pools are set to one thread in the workers.  Each solve
  initialises and finalises gmsh itself, so meshing in the workers is safe.  The workers never have
  the working directory on their import path (a file there named like a standard-library module,
  ``multiprocessing.py`` say, is never run): they start with ``PYTHONSAFEPATH=1`` and the parent's
  ``sys.path`` without the working directory.  Each worker exits by itself when the parent process
  is gone (killed outright, SIGKILL), and :meth:`Runner.close` with ``abort=True`` (an exception or
  a signal in the parent) terminates them instead of waiting for their solves.  A worker that dies
  (the out-of-memory killer) ends the run with one line; the cases finished by then stay cached.
* ``scheduler="tcp://host:port"`` (or a ``distributed.Client``): the same function on a Dask
  cluster.  Only the small payload goes out and the small record comes back; the mesh is made and
  dropped inside the worker.  The workers need seepfe installed.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import sys
import threading
import time
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Callable, Iterable, Optional

from ..errors import SeepfeError
from .cache import CaseCache, basic_fault, record_fault
from .case import _THREAD_VARS, case_hash, run_case

__all__ = ["Runner", "usable_cores"]


def usable_cores() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:       # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _import_path() -> list[str]:
    """sys.path without the working directory ('' or the folder itself), unless that folder is where
    seepfe itself is imported from (a checkout run in place): then it stays, as an absolute path."""
    def real(p):
        try:
            return os.path.realpath(p or ".")
        except OSError:
            return p
    try:
        here = real(os.getcwd())
    except OSError:                       # the working directory was removed: nothing to strip
        here = None
    root = real(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))  # holds seepfe/
    out = []
    for p in sys.path:
        if p in ("", ".") or real(p) == here:
            if real(p) == root and root not in out:
                out.append(root)
            continue
        out.append(p)
    return out


@contextlib.contextmanager
def _worker_start_env():
    """Children started while this is active get one BLAS/OpenMP thread each and no working directory
    on their import path: ``PYTHONSAFEPATH`` keeps Python from putting it first when the child starts
    (before it imports ``multiprocessing``), and the ``sys.path`` it receives from this process is
    stripped of it."""
    names = _THREAD_VARS + ("PYTHONSAFEPATH",)
    old = {v: os.environ.get(v) for v in names}
    for v in names:
        os.environ[v] = "1"
    old_path = list(sys.path)
    sys.path[:] = _import_path()
    # Python 3.10 has no PYTHONSAFEPATH: start the children in an empty folder instead
    here = empty = None
    if sys.version_info < (3, 11):                       # pragma: no cover - tested on 3.11+
        import tempfile
        with contextlib.suppress(OSError):
            here = os.getcwd()
            empty = tempfile.mkdtemp(prefix="seepfe-spawn-")
            os.chdir(empty)
    try:
        yield
    finally:
        if empty is not None:                            # pragma: no cover
            os.chdir(here)
            with contextlib.suppress(OSError):
                os.rmdir(empty)
        sys.path[:] = old_path
        for v, x in old.items():
            if x is None:
                os.environ.pop(v, None)
            else:
                os.environ[v] = x


def _watch_parent(parent: int) -> None:
    while True:
        time.sleep(0.5)
        if os.getppid() != parent:
            os._exit(70)


def _worker_init(parent: int) -> None:
    """Run first in each worker: drop the working directory from the import path (also on Python 3.10,
    which has no PYTHONSAFEPATH), and exit when the parent process is gone."""
    sys.path[:] = _import_path()
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True, name="seepfe-parent-watch").start()


class Runner:
    """Solve payloads with a cache and a backend.

    Parameters
    ----------
    cache_dir : folder of the case cache (``None``: no cache).
    workers : number of local processes (default: all usable cores); 1 runs in this process.
    scheduler : Dask scheduler address or a ``distributed.Client`` (then ``workers`` is ignored).
    max_solves : stop after this many new solves (the rest stay for the next run).
    func : what a worker runs on a payload (default :func:`seepfe.sweep.case.run_case`).
    validate : ``validate(record, payload)`` -> None, or why a record may not be cached or reused (default:
        :func:`seepfe.sweep.cache.record_fault` for ``run_case``, :func:`seepfe.sweep.cache.basic_fault`
        for another ``func``).

    After each :meth:`run`, ``self.solved`` and ``self.cached`` count what happened (also totals in
    ``self.total_solved``).
    """

    def __init__(self, cache_dir=None, workers: Optional[int] = None, scheduler=None,
                 max_solves: Optional[int] = None, func: Callable[[dict], dict] = run_case,
                 validate: Optional[Callable[[dict, dict], Optional[str]]] = None):
        self.func = func            # what a worker runs on a payload (a module-level function: it is pickled)
        self.validate = validate or (record_fault if func is run_case else basic_fault)
        self.cache = CaseCache(cache_dir) if cache_dir is not None else None
        self.workers = workers or usable_cores()
        self.scheduler = scheduler
        self.max_solves = max_solves
        self.total_solved = 0
        self.solved = self.cached = 0
        self._pool = None
        self._client = None
        self._own_client = False
        if self.cache is not None:
            self.cache.clean()

    @property
    def backend(self) -> str:
        if self.scheduler is not None:
            return "dask"
        return "serial" if self.workers == 1 else f"process pool ({self.workers} workers)"

    # ------------------------------------------------------------------ backends
    def _dask(self):
        if self._client is None:
            try:
                from distributed import Client
            except ImportError:
                raise SeepfeError("--scheduler needs dask.distributed: pip install 'seepfe[cluster]'") from None
            if isinstance(self.scheduler, str):
                try:
                    self._client = Client(self.scheduler, timeout="20s")
                except (OSError, TimeoutError) as e:
                    raise SeepfeError(f"cannot reach the Dask scheduler at {self.scheduler} ({e})") from None
                self._own_client = True
            else:
                self._client = self.scheduler
        return self._client

    def _local_pool(self):
        if self._pool is None:
            with _worker_start_env():
                self._pool = ProcessPoolExecutor(max_workers=self.workers,
                                                 mp_context=multiprocessing.get_context("spawn"),
                                                 initializer=_worker_init, initargs=(os.getpid(),))
        return self._pool

    def close(self, abort: bool = False) -> None:
        """Shut the backend down: wait for running solves, or with ``abort`` terminate the workers now."""
        if self._pool is not None:
            pool, self._pool = self._pool, None
            if abort:
                procs = list((getattr(pool, "_processes", None) or {}).values())
                pool.shutdown(wait=False, cancel_futures=True)
                for p in procs:
                    with contextlib.suppress(Exception):
                        p.terminate()
                for p in procs:
                    with contextlib.suppress(Exception):
                        p.join(timeout=5)
                        if p.is_alive():
                            p.kill()
            else:
                pool.shutdown(wait=True, cancel_futures=True)
        if self._client is not None and self._own_client:
            self._client.close()
        self._client = None

    def __enter__(self):
        return self

    def __exit__(self, exc_type, *exc):
        self.close(abort=exc_type is not None)

    def _solve_iter(self, items: list[tuple[str, dict]]) -> Iterable[tuple[str, dict]]:
        """Yield (hash, record) as cases finish, on the chosen backend."""
        if not items:
            return
        if self.scheduler is not None:
            from distributed import as_completed
            client = self._dask()
            futs = {}
            for h, p in items:
                f = client.submit(self.func, p, key=f"seepfe-case-{h}", pure=False)
                futs[f] = h
            ac = as_completed(list(futs), with_results=True)
            try:
                for f, rec in ac:
                    yield futs[f], rec
            finally:
                for f in futs:
                    if not f.done():
                        f.cancel()
            return
        if self.workers == 1:
            for h, p in items:
                yield h, self.func(p)
            return
        pool = self._local_pool()
        with _worker_start_env():
            pending = {pool.submit(self.func, p): h for h, p in items}
        try:
            while pending:
                done, _ = wait(pending, return_when=FIRST_COMPLETED)
                for f in done:
                    h = pending.pop(f)
                    try:
                        rec = f.result()
                    except BrokenProcessPool:
                        raise SeepfeError(
                            "a worker process died before finishing its case (killed by the system, most often "
                            "for lack of memory); the cases finished so far are kept in the cache: run again "
                            "with fewer --workers or a coarser mesh") from None
                    yield h, rec
        finally:
            for f in pending:
                f.cancel()

    # ------------------------------------------------------------------ run
    def run(self, payloads: list[dict], progress: Optional[Callable[[int, int, int], None]] = None
            ) -> list[Optional[dict]]:
        """Records for the payloads, in order (None for a case left unsolved by ``max_solves``)."""
        hashes = [case_hash(p) for p in payloads]
        records: dict[str, dict] = {}
        todo: list[tuple[str, dict]] = []
        seen = set()
        for h, p in zip(hashes, payloads):
            if h in seen:
                continue
            seen.add(h)
            rec = self.cache.get(h, p, self.validate) if self.cache is not None else None
            if rec is not None:
                records[h] = rec
            else:
                if self.cache is not None:
                    self.cache.check_writable(h)
                todo.append((h, p))
        self.cached = len(records)
        self.solved = 0
        total = len(seen)
        if self.max_solves is not None:
            todo = todo[: max(0, self.max_solves - self.total_solved)]
        if progress:
            progress(self.cached, total, self.cached)
        payload_of = dict(todo)
        for h, rec in self._solve_iter(todo):
            records[h] = rec
            self.solved += 1
            self.total_solved += 1
            # failed cases are not kept (solved again next time), nor anything not shaped like a record
            if self.cache is not None and self.validate(rec, payload_of[h]) is None:
                self.cache.put(h, rec)
            if progress:
                progress(self.cached + self.solved, total, self.cached)
        return [records.get(h) for h in hashes]
