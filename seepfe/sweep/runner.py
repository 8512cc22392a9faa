"""Run many cases: serially, on a local process pool, or on a Dask cluster, with a disk cache.

:class:`Runner` takes a list of payloads (small dicts, see :func:`seepfe.sweep.case.run_case`),
answers from the cache what it can, solves the rest on its backend and stores each record as soon as
it arrives.  Progress goes to a callback ``progress(done, total, cached)``; the library never prints.

Backends

* ``workers=1``: in this process (no pool; simplest to debug).
* ``workers>1`` (default: all usable cores): ``concurrent.futures.ProcessPoolExecutor`` with the
  ``spawn`` start method; BLAS/OpenMP pools are set to one thread in the workers.  Each solve
  initialises and finalises gmsh itself, so meshing in the workers is safe.
* ``scheduler="tcp://host:port"`` (or a ``distributed.Client``): the same function on a Dask
  cluster.  Only the small payload goes out and the small record comes back; the mesh is made and
  dropped inside the worker.  The workers need seepfe installed.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from typing import Callable, Iterable, Optional

from ..errors import SeepfeError
from .cache import CaseCache
from .case import _THREAD_VARS, case_hash, run_case

__all__ = ["Runner", "usable_cores"]


def usable_cores() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:       # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


@contextlib.contextmanager
def _thread_env():
    """Children started while this is active get one BLAS/OpenMP thread each."""
    old = {v: os.environ.get(v) for v in _THREAD_VARS}
    for v in _THREAD_VARS:
        os.environ[v] = "1"
    try:
        yield
    finally:
        for v, x in old.items():
            if x is None:
                os.environ.pop(v, None)
            else:
                os.environ[v] = x


class Runner:
    """Solve payloads with a cache and a backend.

    Parameters
    ----------
    cache_dir : folder of the case cache (``None``: no cache).
    workers : number of local processes (default: all usable cores); 1 runs in this process.
    scheduler : Dask scheduler address or a ``distributed.Client`` (then ``workers`` is ignored).
    max_solves : stop after this many new solves (the rest stay for the next run).

    After each :meth:`run`, ``self.solved`` and ``self.cached`` count what happened (also totals in
    ``self.total_solved``).
    """

    def __init__(self, cache_dir=None, workers: Optional[int] = None, scheduler=None,
                 max_solves: Optional[int] = None, func: Callable[[dict], dict] = run_case):
        self.func = func            # what a worker runs on a payload (a module-level function: it is pickled)
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
            with _thread_env():
                self._pool = ProcessPoolExecutor(max_workers=self.workers,
                                                 mp_context=multiprocessing.get_context("spawn"))
        return self._pool

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None
        if self._client is not None and self._own_client:
            self._client.close()
        self._client = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

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
        with _thread_env():
            pending = {pool.submit(self.func, p): h for h, p in items}
        try:
            while pending:
                done, _ = wait(pending, return_when=FIRST_COMPLETED)
                for f in done:
                    h = pending.pop(f)
                    yield h, f.result()
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
            rec = self.cache.get(h) if self.cache is not None else None
            if rec is not None:
                records[h] = rec
            else:
                todo.append((h, p))
        self.cached = len(records)
        self.solved = 0
        total = len(seen)
        if self.max_solves is not None:
            todo = todo[: max(0, self.max_solves - self.total_solved)]
        if progress:
            progress(self.cached, total, self.cached)
        for h, rec in self._solve_iter(todo):
            records[h] = rec
            self.solved += 1
            self.total_solved += 1
            if self.cache is not None and not rec.get("status", "").startswith("error"):
                self.cache.put(h, rec)
            if progress:
                progress(self.cached + self.solved, total, self.cached)
        return [records.get(h) for h in hashes]
