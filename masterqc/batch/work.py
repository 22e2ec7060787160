"""The per-file work of a batch, as top-level functions a process pool or a dask worker can run.

Both take and return plain picklable values (paths and dicts), so the same
function runs in this process, in a spawned worker process, or on a dask
worker that reads the masters (and writes the reports) by path on shared storage.
"""

from __future__ import annotations

import os
import signal
import threading
import time

from masterqc import __version__

_SPECS: dict = {}
_LOCK = threading.Lock()


def ignore_sigint() -> None:
    """Pool-worker initializer: Ctrl-C is handled by the parent, which stops the workers."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)


_BLAS_LIMIT = []  # the worker's threadpoolctl limit, kept alive for the worker's life


def limit_threads(threads: int | None) -> None:
    """Hold this worker process to ``threads`` threads: its measurements (``MASTERQC_THREADS``, read by
    :class:`masterqc.measure.options.MeasureOptions`) and its BLAS/OpenMP pools (threadpoolctl)."""
    if not threads:
        return
    from masterqc.measure.options import THREADS_ENV
    os.environ[THREADS_ENV] = str(int(threads))
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(var, str(int(threads)))  # libraries loaded from now on
    try:
        from threadpoolctl import threadpool_limits
        _BLAS_LIMIT.append(threadpool_limits(limits=int(threads)))  # libraries already loaded
    except Exception:  # threadpoolctl missing or unable to inspect: the measurement holds BLAS itself
        pass


def warm_up(formats=("html", "pdf")) -> None:
    """Pay a worker's start-up once, before its first task: import the measuring, judging and
    report code (matplotlib, weasyprint) and load the report templates.  Never raises: what
    fails here fails again, with its file named, in the task that needs it."""
    try:
        _warm_up(formats)
    except Exception:
        pass


def _warm_up(formats) -> None:
    import masterqc.judge  # noqa: F401
    import masterqc.measure.engine  # noqa: F401
    import masterqc.pipeline  # noqa: F401
    from masterqc.measure.registry import analyzer_classes
    analyzer_classes()
    if any(f in ("html", "pdf") for f in formats):
        from masterqc.formats import reports_available
        if reports_available() is None:
            from masterqc.report import render
            render._env()
            import masterqc.report.plots  # noqa: F401
            import masterqc.report.view  # noqa: F401
            if "pdf" in formats:
                import weasyprint  # noqa: F401


#: seconds between two looks of a worker at its parent (the watch that backs up the parent-death signal)
PARENT_WATCH_S = 0.5


def _set_parent_death_signal() -> bool:
    """Linux: ask the kernel to SIGKILL this process when its parent dies (prctl PR_SET_PDEATHSIG)."""
    import sys
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes
        libc = ctypes.CDLL(None, use_errno=True)
        PR_SET_PDEATHSIG = 1
        return libc.prctl(PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0) == 0
    except (OSError, AttributeError):
        return False


def _watch_parent(parent_pid: int) -> None:
    """End this process as soon as its parent is gone (re-parented: ``getppid`` changes)."""
    while True:
        if os.getppid() != parent_pid:
            os._exit(70)
        time.sleep(PARENT_WATCH_S)


def worker_init(parent_pid: int | None = None, threads: int | None = None, formats=("html", "pdf")) -> None:
    """Pool-worker initializer: never outlive the batch that started it, and leave Ctrl-C to the parent.

    A ``kill -9`` of the batch gives it no chance to stop its workers, so each worker
    arranges its own end: the parent-death signal on Linux, and everywhere a daemon
    thread that exits the process when the parent is gone.  Both are set before any
    work is taken, and a parent that died before they were set is caught at once.
    Then the worker's threads are limited (:func:`limit_threads`) and its start-up is paid
    (:func:`warm_up`) while the parent hashes the files.
    """
    if parent_pid is not None:
        _set_parent_death_signal()
        if os.getppid() != parent_pid:  # the parent died before the signal was armed
            os._exit(70)
        threading.Thread(target=_watch_parent, args=(parent_pid,), name="masterqc-parent-watch",
                         daemon=True).start()
    ignore_sigint()
    from masterqc import stagelog
    stagelog.ROLE["name"] = "worker"
    limit_threads(threads)
    warm_up(tuple(formats or ()))
    # what the warm-up loaded lives as long as the worker: out of every later collection (each
    # task's garbage is still collected) and out of the collection at the worker's exit
    import gc
    gc.collect()
    gc.freeze()
    stagelog.note_startup("worker_startup")


def warm(_=None) -> int:
    """A no-op task that makes a pool start its workers now; returns the worker's process id."""
    return os.getpid()


def hash_task(path: str) -> dict:
    """``{"path", "sha256", "size_bytes"}`` of a file, or ``{"path", "error"}`` when it cannot be read."""
    from masterqc.errors import AudioReadError
    from masterqc.filehash import file_facts
    try:
        facts = file_facts(path)
    except AudioReadError as exc:
        return {"path": path, "error": exc.cause}
    except OSError as exc:
        return {"path": path, "error": f"cannot be read ({exc.strerror or exc})"}
    return {"path": path, "sha256": facts["sha256"], "size_bytes": facts["size_bytes"]}


def _spec(spec_path: str, key: str, layout, libraries=(), from_delivery_folder=False):
    from masterqc.batch.specmap import spec_key
    from masterqc.measure.options import MeasureOptions
    from masterqc.spec.loader import load_spec
    with _LOCK:
        loaded = _SPECS.get((spec_path, key))
        if loaded is None:
            loaded = load_spec(spec_path, libraries=libraries, from_delivery_folder=from_delivery_folder)
            got = spec_key(loaded, MeasureOptions(channel_layout=layout))
            if got != key:
                raise RuntimeError(f"{spec_path}: the spec changed while the batch was running "
                                   "(its resolved content differs from the one the run started with)")
            _SPECS[(spec_path, key)] = loaded
        return loaded


def _options(layout, threads):
    from masterqc.measure.options import MeasureOptions
    if threads:
        return MeasureOptions(channel_layout=layout, threads=int(threads))
    return MeasureOptions(channel_layout=layout)


def check_task(task: dict) -> dict:
    """Run :func:`masterqc.pipeline.check_file` for one master.

    ``task``: ``path``, ``spec_path``, ``spec_key``, ``out_dir``, ``stem``, ``formats``,
    ``layout`` (list or None), ``threads`` (threads per measurement, None for the default),
    ``durable`` (fsync the outputs, default true; :func:`masterqc.fileio.write_atomic`); to judge
    stored measurements again instead of measuring: ``stored``, ``encoded`` (their JSON text,
    :func:`masterqc.pipeline.parse_result_text`) and ``keep`` (reports still fresh).  Returns ``{"result": <result dict>, "elapsed_s": float,
    "cpu_s": float, "worker_pid": int}``.  A failure outside reading the master (an internal bug)
    still returns a result: an error result whose ``error.internal`` is true, so the
    batch records it and goes on.  ``measurements_z``: a measured result as the ledger stores
    it (:func:`masterqc.batch.ledger.measurements_blob`), None for a re-judgement or an internal error.
    """
    from masterqc.measure.options import MeasureOptions
    from masterqc.pipeline import check_file, error_result

    t0 = time.perf_counter()
    c0 = time.process_time()
    layout = tuple(task["layout"]) if task.get("layout") else None
    loaded = _spec(task["spec_path"], task["spec_key"], layout, tuple(task.get("spec_libraries") or ()),
                   bool(task.get("spec_from_delivery_folder")))
    try:
        result = check_file(task["path"], loaded, task["out_dir"], tuple(task["formats"]), stem=task["stem"],
                            base_options=_options(layout, task.get("threads")),
                            durable=bool(task.get("durable", True)), stored=task.get("stored"),
                            encoded=task.get("encoded"), keep=tuple(task.get("keep") or ()))
    except Exception as exc:  # never lose the batch to one file
        result = error_result(task["path"], loaded, f"internal error while checking: {type(exc).__name__}: {exc}")
        result["error"]["internal"] = True
        result["outputs"] = {}
    blob = None
    if task.get("stored") is None and not (result.get("error") or {}).get("internal"):
        from masterqc.batch.ledger import measurements_blob
        blob = measurements_blob(result)  # the ledger's row, made here rather than in the parent
    from masterqc import stagelog
    stagelog.note("task", time.perf_counter() - t0, time.process_time() - c0)
    return {"result": result, "elapsed_s": time.perf_counter() - t0, "cpu_s": time.process_time() - c0,
            "worker_pid": os.getpid(), "measurements_z": blob,
            "tool_version": __version__}
