"""One batch run: plan, hash, schedule, summarise -- each step its own module.

:func:`run_batch` is what ``masterqc check FOLDER...`` calls.  In order:

1. load ``--spec`` (one spec or a spec map; an invalid spec stops the run before any file is touched);
2. discover the masters (:mod:`masterqc.batch.discover`);
3. plan: one item per master with its rule, release and output name (:mod:`masterqc.batch.plan`);
4. hash every file (content SHA-256; skipped for a file whose size, mtime, ctime and inode
   the ledger has seen with a hash) (:mod:`masterqc.batch.hashing`);
5. schedule: each file through the one per-file step (:func:`masterqc.pipeline.check_file`),
   from the ledger's stored measurements when they were made under the same measurement
   key (no audio read), else measured through the backend (inline, process pool or dask);
   files with identical content and spec are checked once; every file is recorded in the
   ledger the moment it is done (:mod:`masterqc.batch.schedule`);
6. summarise: judge each release folder, compare with the previous complete run into the
   same output folder (new, fixed, newly failing, gone) (:mod:`masterqc.batch.summarise`);
7. write ``summary.json``, ``junit.xml`` and ``index.html`` atomically (:mod:`masterqc.batch.outputs`).

Output layout::

    OUT/index.html  OUT/summary.json  OUT/junit.xml  OUT/masterqc-ledger.sqlite
    OUT/files/<folder label>/<sub folders>/<name>.json|.html|.pdf

Exit code: 3 when a file could not be read, else 1 when a file or a release failed, else 0.
"""

from __future__ import annotations

import os
import signal
import sys
import time
from dataclasses import dataclass, field

from masterqc import __version__, stagelog
from masterqc.batch.discover import discover
from masterqc.batch.execute import make_backend
from masterqc.batch.hashing import hash_items
from masterqc.batch.ledger import Ledger
from masterqc.batch.plan import FILES_DIR, Item, plan_items  # noqa: F401  (FILES_DIR, Item: part of the interface)
from masterqc.batch.progress import BatchProgress
from masterqc.batch.releases import DEFAULT_RELEASE_MODE, parse_release_mode
from masterqc.batch.schedule import Scheduler
from masterqc.batch.specmap import load_spec_map
from masterqc.batch.summarise import summarise
from masterqc.batch.work import check_task, hash_task
from masterqc.fileio import shown

LEDGER_NAME = "masterqc-ledger.sqlite"


@dataclass
class BatchConfig:
    roots: list
    spec_path: str
    out_dir: str
    formats: tuple = ("json",)
    jobs: int | None = None
    scheduler: str | None = None
    ledger_path: str | None = None
    releases: str | None = None  #: grouping mode; None: the spec map's, else the default (top)
    layout: tuple | None = None
    quiet: bool = False
    reuse: bool = True  #: False: analyse every file again (results still recorded)
    progress_stream: object = None
    live_progress: bool | None = None
    spec_libraries: tuple = ()  #: folders besides a spec's own that ``extends:`` may reach


@dataclass
class BatchOutcome:
    exit_code: int
    summary: dict
    run_id: int
    ledger_path: str
    outputs: dict = field(default_factory=dict)


class _Terminate(KeyboardInterrupt):
    """SIGTERM, handled like Ctrl-C: stop, keep what is done, mark the run interrupted."""


def _on_sigterm(signum, frame):
    raise _Terminate()


def run_batch(cfg: BatchConfig) -> BatchOutcome:
    """Run a batch (see the module docstring); raises SpecError/UsageError before touching any file."""
    from masterqc.measure.options import MeasureOptions

    stagelog.note_startup()
    t0 = time.perf_counter()
    c0 = time.process_time()
    base = MeasureOptions(channel_layout=cfg.layout)
    specmap = load_spec_map(cfg.spec_path, base, cfg.spec_libraries)
    mode = parse_release_mode(cfg.releases or specmap.releases or DEFAULT_RELEASE_MODE)
    out_dir = os.path.abspath(cfg.out_dir)
    os.makedirs(out_dir, exist_ok=True)
    ledger_path = os.path.abspath(cfg.ledger_path) if cfg.ledger_path else os.path.join(out_dir, LEDGER_NAME)
    ledger = Ledger(ledger_path)
    backend = None
    run_id = None
    old_term = None
    progress = None
    try:
        try:
            old_term = signal.signal(signal.SIGTERM, _on_sigterm)
        except ValueError:  # not the main thread (e.g. called from a test thread)
            old_term = None
        backend = make_backend(cfg.jobs, cfg.scheduler, tuple(cfg.formats))
        disc = discover(cfg.roots, exclude=[out_dir])
        if not disc.files:  # a gate that checked nothing must not pass
            from masterqc.errors import UsageError
            where = ", ".join(shown(os.fspath(r)) for r in cfg.roots)
            why = "".join(f"\n  not checked: {shown(p.path)}: {p.message}" for p in disc.problems[:20])
            raise UsageError(f"nothing to check: no audio master found in {where}{why}")
        run_id = ledger.start_run(cfg.roots, out_dir, os.path.abspath(cfg.spec_path), __version__)
        items = plan_items(disc.files, cfg.roots, specmap, mode, out_dir)
        stagelog.note("plan", time.perf_counter() - t0, time.process_time() - c0)
        with stagelog.stage("hash"):
            hash_items(items, ledger, backend, hash_task)

        progress = BatchProgress(len(items), sum(it.size_bytes for it in items), stream=cfg.progress_stream,
                                 quiet=cfg.quiet, live=cfg.live_progress)
        for p in disc.problems:
            progress.note(f"masterqc: not checked: {shown(p.path)}: {p.message}")
        # previous outputs of this output folder: re-render only what is missing or stale
        prev_run = ledger.previous_run(run_id, out_dir)
        prev_rows = {r["path"]: r for r in ledger.run_files(prev_run["run_id"])} if prev_run else {}
        with stagelog.stage("schedule"):
            Scheduler(out_dir=out_dir, formats=tuple(cfg.formats), ledger=ledger, run_id=run_id, progress=progress,
                      base_options=base, specmap=specmap, prev_rows=prev_rows, reuse=cfg.reuse,
                      layout=cfg.layout).run(items, backend, check_task)
        progress.close()

        with stagelog.stage("summarise"):
            summary = summarise(cfg, items, disc, specmap, ledger.run(run_id)["started_utc"], run_id, out_dir,
                                ledger_path, backend.description, prev_run, prev_rows, t0)
            from masterqc.batch.pairing import add_pairs  # deliverables against their masters (spec map pairs:)
            add_pairs(summary, items, specmap, cfg.formats, None if cfg.quiet else (cfg.progress_stream or sys.stderr))
        from masterqc.batch.outputs import write_run_outputs
        with stagelog.stage("run_outputs"):
            outputs = write_run_outputs(summary, out_dir)
            row = ledger.finish_run(run_id, "complete", time.perf_counter() - t0)
        summary["run"]["finished_utc"] = row["finished_utc"]
        stagelog.note("run_total", time.perf_counter() - t0, time.process_time() - c0)
        return BatchOutcome(summary["exit_code"], summary, run_id, ledger_path, outputs)
    except KeyboardInterrupt:
        if backend is not None:
            backend.close(cancel=True)
            backend = None
        if run_id is not None:
            ledger.finish_run(run_id, "interrupted", time.perf_counter() - t0)
        raise
    except Exception:
        if backend is not None:
            backend.close(cancel=True)
            backend = None
        if run_id is not None:
            try:
                ledger.finish_run(run_id, "failed", time.perf_counter() - t0)
            except Exception:
                pass
        raise
    finally:
        if progress is not None:
            progress.close()
        if backend is not None:
            backend.close()
        if old_term is not None:
            signal.signal(signal.SIGTERM, old_term)
        ledger.close()
