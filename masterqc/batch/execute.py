"""Running the per-file work: in this process, on a local process pool, or on a dask cluster.

:func:`make_backend` returns an object with ``map_unordered(fn, items)`` (a
generator of ``(index, value, exception)`` in completion order), ``workers``
(how many tasks run at once) and ``close(cancel=False)``.  ``fn`` must be a
top-level function of :mod:`masterqc.batch.work` (picklable by name).

* ``jobs == 1`` runs inline, in order (no pool, no start-up cost).
* ``jobs > 1`` uses a :class:`concurrent.futures.ProcessPoolExecutor` with the
  ``spawn`` start method (safe with threads, identical on every platform);
  the workers ignore Ctrl-C, and :meth:`close` with ``cancel=True`` drops queued
  tasks and stops running ones; a worker ends itself when this process dies, even
  by ``kill -9`` (:func:`masterqc.batch.work.worker_init`).  Each worker pays its
  start-up once, while the parent hashes: it imports the measuring and report code and
  loads the report templates before its first task.  Threads: each worker's
  measurements, and its BLAS/OpenMP pools, get :func:`threads_per_worker` threads
  (``MASTERQC_THREADS`` is set to it in the worker), so ``jobs x threads`` never
  exceeds the cores.
* ``scheduler`` connects a :class:`distributed.Client` to an existing cluster
  (``pip install masterqc[cluster]``); masters and the output folder must be at the
  same paths on every worker.
"""

from __future__ import annotations

import os
import uuid


def default_jobs() -> int:
    """Cores this process may use (``os.sched_getaffinity`` where it exists)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


def threads_per_worker(jobs: int) -> int:
    """Threads each of ``jobs`` worker processes may use: the cores divided by the jobs, at least 1
    (``MASTERQC_THREADS``, when set in this process, caps it)."""
    n = max(1, default_jobs() // max(1, jobs))
    from masterqc.measure.options import THREADS_ENV
    raw = os.environ.get(THREADS_ENV, "").strip()
    if raw.isdigit() and int(raw) >= 1:
        n = min(n, int(raw))
    return n


def _hash_in_threads(fn, items, threads: int = 4):
    """``map_unordered`` over threads of this process (hashing is I/O and releases the GIL)."""
    from concurrent.futures import ThreadPoolExecutor, as_completed
    with ThreadPoolExecutor(max_workers=threads) as ex:
        futures = {ex.submit(fn, item): i for i, item in enumerate(items)}
        for f in as_completed(futures):
            exc = f.exception()
            yield futures[f], (None if exc else f.result()), exc


class InlineBackend:
    workers = 1
    description = "in this process"
    #: threads per measurement: None, the default (MeasureOptions.threads: MASTERQC_THREADS or up to 2)
    threads = None

    def start(self) -> None:
        pass

    def hash_unordered(self, fn, items):
        return self.map_unordered(fn, items)

    def map_unordered(self, fn, items):
        for i, item in enumerate(items):
            try:
                value = fn(item)
            except Exception as exc:
                yield i, None, exc
            else:
                yield i, value, None

    def close(self, cancel: bool = False) -> None:
        pass


class PoolBackend:
    def __init__(self, jobs: int, formats=("json",)):
        self.workers = jobs
        self.formats = tuple(formats)
        self.threads = threads_per_worker(jobs)
        self.description = f"{jobs} worker processes"
        self._pool = None

    def start(self) -> None:
        """Spawn the workers now (they import the measuring code while the parent hashes)."""
        from masterqc.batch.work import warm
        pool = self._get()
        for _ in range(self.workers):
            pool.submit(warm)

    def hash_unordered(self, fn, items):
        return _hash_in_threads(fn, items)

    def _get(self):
        if self._pool is None:
            import multiprocessing
            from concurrent.futures import ProcessPoolExecutor

            from masterqc.batch.work import worker_init
            # each worker ends itself when this process dies, even by kill -9 (see worker_init)
            self._pool = ProcessPoolExecutor(max_workers=self.workers, mp_context=multiprocessing.get_context("spawn"),
                                             initializer=worker_init, initargs=(os.getpid(), self.threads, self.formats))
        return self._pool

    def map_unordered(self, fn, items):
        from concurrent.futures import as_completed
        pool = self._get()
        futures = {pool.submit(fn, item): i for i, item in enumerate(items)}
        try:
            for f in as_completed(futures):
                exc = f.exception()
                yield futures[f], (None if exc else f.result()), exc
        finally:
            for f in futures:
                f.cancel()

    def close(self, cancel: bool = False) -> None:
        pool, self._pool = self._pool, None
        if pool is None:
            return
        if cancel:
            procs = list(getattr(pool, "_processes", {}).values())  # stop work in progress now
            pool.shutdown(wait=False, cancel_futures=True)
            for p in procs:
                try:
                    p.terminate()
                except Exception:
                    pass
        else:
            pool.shutdown(wait=True)


class DaskBackend:
    def __init__(self, address: str):
        try:
            from distributed import Client
        except ImportError:
            from masterqc.errors import UsageError
            raise UsageError("--scheduler needs dask.distributed: pip install 'masterqc[cluster]'") from None
        try:
            self.client = Client(address, timeout="20s", set_as_default=False)
        except Exception as exc:
            from masterqc.errors import UsageError
            raise UsageError(f"--scheduler {address}: cannot connect to the dask scheduler ({type(exc).__name__}: {exc})") from None
        info = self.client.scheduler_info()
        self.workers = max(1, sum(int(w.get("nthreads", 1)) for w in info.get("workers", {}).values()))
        self.description = f"dask cluster at {address} ({len(info.get('workers', {}))} workers, {self.workers} threads)"
        self.threads = 1  #: one thread per measurement: the cluster's threads are its parallelism
        self._futures = []

    def start(self) -> None:
        pass

    def hash_unordered(self, fn, items):
        """On the workers: they see the masters on shared storage, this machine may not hold them."""
        return self.map_unordered(fn, items)

    def map_unordered(self, fn, items):
        from distributed import as_completed
        tag = uuid.uuid4().hex[:12]
        futures = {}
        for i, item in enumerate(items):
            f = self.client.submit(fn, item, pure=False, key=f"masterqc-{fn.__name__}-{tag}-{i}")
            futures[f.key] = (f, i)
        self._futures = [f for f, _ in futures.values()]
        try:
            for f in as_completed(self._futures, loop=self.client.loop):
                i = futures[f.key][1]
                try:
                    value = f.result()
                except Exception as exc:
                    yield i, None, exc
                else:
                    yield i, value, None
                f.release()
        finally:
            for f in self._futures:
                if not f.done():
                    f.cancel()
            self._futures = []

    def close(self, cancel: bool = False) -> None:
        if cancel and self._futures:
            self.client.cancel(self._futures)
        self.client.close()


def make_backend(jobs: int | None, scheduler: str | None, formats=("json",)):
    """The backend for ``--jobs`` / ``--scheduler`` (``jobs`` None: the number of cores; ``formats``:
    the outputs the tasks will write, so pool workers load only the renderers they need)."""
    if scheduler:
        return DaskBackend(scheduler)
    n = default_jobs() if jobs is None else jobs
    return InlineBackend() if n <= 1 else PoolBackend(n, formats)
