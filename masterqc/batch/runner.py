"""One batch run: discover, hash, reuse or check each master, judge releases, write the run outputs.

:func:`run_batch` is what ``masterqc check FOLDER...`` calls.  In order:

1. load ``--spec`` (one spec or a spec map; an invalid spec stops the run before any file is touched);
2. discover the masters (:mod:`masterqc.batch.discover`);
3. hash every file (content SHA-256; skipped for a file whose size, mtime, ctime and inode
   the ledger has seen with a hash);
4. for each file, judge the ledger's stored measurements for (content hash, measurement key:
   the settings that can change a number and the tool version) again, reading no audio
   (:func:`masterqc.pipeline.measure_and_judge`), or run :func:`masterqc.pipeline.check_file`
   through the backend (inline, process pool or dask) and store its measurements;
   files with identical content and spec are checked once;
5. record every file in the ledger the moment it is done (an interrupted run keeps them);
6. judge each release folder (:mod:`masterqc.batch.releases`);
7. compare with the previous complete run into the same output folder (new, fixed, newly failing, gone);
8. write ``summary.json``, ``junit.xml`` and ``index.html`` atomically.

Output layout::

    OUT/index.html  OUT/summary.json  OUT/junit.xml  OUT/masterqc-ledger.sqlite
    OUT/files/<folder label>/<sub folders>/<name>.json|.html|.pdf

Exit code: 3 when a file could not be read, else 1 when a file or a release failed, else 0.
"""

from __future__ import annotations

import os
import posixpath
import signal
import sys
import time
from dataclasses import dataclass, field

from masterqc import __version__
from masterqc.batch.discover import discover
from masterqc.batch.execute import make_backend
from masterqc.batch.ledger import Ledger, utc_now
from masterqc.batch.names import NameAllocator, inside, safe_component
from masterqc.batch.progress import BatchProgress
from masterqc.batch.releases import judge_release, parse_release_mode, release_of
from masterqc.batch.specmap import Unusable, load_spec_map
from masterqc.pipeline import exit_code_for
from masterqc.batch.work import check_task, hash_task
from masterqc.fileio import shown, text_safe

LEDGER_NAME = "masterqc-ledger.sqlite"
FILES_DIR = "files"


@dataclass
class BatchConfig:
    roots: list
    spec_path: str
    out_dir: str
    formats: tuple = ("json",)
    jobs: int | None = None
    scheduler: str | None = None
    ledger_path: str | None = None
    releases: str | None = None  #: grouping mode; None: the spec map's, else "folder"
    layout: tuple | None = None
    quiet: bool = False
    reuse: bool = True  #: False: analyse every file again (results still recorded)
    progress_stream: object = None
    live_progress: bool | None = None
    spec_libraries: tuple = ()  #: folders besides a spec's own that ``extends:`` may reach


@dataclass
class Item:
    found: object
    path: str          #: absolute path as reached (the ledger's key for a file)
    rel: str           #: shown name: folder label / path below it
    release: str | None
    rule: object       #: specmap.Rule or None
    out_folder: str    #: absolute output folder
    out_rel: str       #: output folder relative to OUT
    stem: str
    size_bytes: int = 0
    stat: object = None
    sha256: str | None = None
    result: dict | None = None
    analysed: bool = False
    reused: bool = False  #: the result came from the ledger or from an identical file (never for error rows)
    elapsed_s: float = 0.0
    cpu_s: float = 0.0
    rule_error: str | None = None  #: the folder spec governing this master does not validate
    measure_key: str | None = None  #: key of the measurement settings the file's spec asks for
    how: str | None = None  #: "measured", "rejudged" (stored measurements), "identical" (another file's result)
    hash_error: str | None = None


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


def _root_labels(roots) -> dict:
    labels, used = {}, set()
    for r in roots:
        key = os.fspath(r)
        base = os.path.abspath(key) if os.path.isdir(key) else os.path.dirname(os.path.abspath(key))
        label = safe_component(os.path.basename(base.rstrip(os.sep)) or "root")
        cand, n = label, 1
        while cand.lower() in used:
            n += 1
            cand = f"{label}-{n}"
        used.add(cand.lower())
        labels[key] = cand
    return labels


def _problems(result: dict) -> list[dict]:
    return [{"check": f["check"], "status": f["status"], "message": f["message"]}
            for f in result.get("findings", []) if f["status"] in ("fail", "error", "warn")]


def _first_problem(result: dict) -> str | None:
    for status in ("error", "fail", "warn"):
        for f in result.get("findings", []):
            if f["status"] == status:
                return f["message"]
    return None


def _error_result(item: Item, loaded, cause: str) -> dict:
    from masterqc.pipeline import error_result
    r = error_result(item.path, loaded, cause)
    r["outputs"] = {}
    return r


def _safe_folder(out_dir: str, folder: str) -> bool:
    """Create ``folder`` and say whether it really lies inside ``out_dir`` (links followed)."""
    if not inside(out_dir, folder):
        return False
    try:
        os.makedirs(folder, exist_ok=True)
    except OSError:
        return False
    return inside(out_dir, folder)


def _slim(result: dict) -> dict:
    """What the run outputs and release checks need of a result (drops the display series)."""
    keep = {k: result[k] for k in ("file", "format", "measurements", "spec", "findings", "verdict", "outputs", "error")
            if k in result}
    audio_data = (result.get("metadata") or {}).get("audio_data")
    if audio_data:
        keep["metadata"] = {"audio_data": audio_data}
    hist = (result.get("series") or {}).get("gating_block_histogram")
    if hist is not None:
        keep["series"] = {"gating_block_histogram": hist}
    return keep


class _NoSpec:
    """Stand-in spec for a file that no spec-map rule matches."""

    def info(self):
        return {"name": None, "path": None, "sha256": None, "files": []}


def run_batch(cfg: BatchConfig) -> BatchOutcome:
    """Run a batch (see the module docstring); raises SpecError/UsageError before touching any file."""
    from masterqc.measure.options import MeasureOptions

    t0 = time.perf_counter()
    base = MeasureOptions(channel_layout=cfg.layout)
    specmap = load_spec_map(cfg.spec_path, base, cfg.spec_libraries)
    mode = parse_release_mode(cfg.releases or specmap.releases or "folder")
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
        backend = make_backend(cfg.jobs, cfg.scheduler)
        disc = discover(cfg.roots, exclude=[out_dir])
        if not disc.files:  # a gate that checked nothing must not pass
            from masterqc.errors import UsageError
            where = ", ".join(shown(os.fspath(r)) for r in cfg.roots)
            why = "".join(f"\n  not checked: {shown(p.path)}: {p.message}" for p in disc.problems[:20])
            raise UsageError(f"nothing to check: no audio master found in {where}{why}")
        run_id = ledger.start_run(cfg.roots, out_dir, os.path.abspath(cfg.spec_path), __version__)
        labels = _root_labels(cfg.roots)
        names = NameAllocator()
        items: list[Item] = []
        for fnd in disc.files:
            label = labels.get(fnd.root) or safe_component(os.path.basename(os.path.abspath(fnd.root)))
            rel_in_root = fnd.rel
            parts = [label] + rel_in_root.split("/")[:-1]
            stem = os.path.splitext(posixpath.basename(rel_in_root))[0] or "master"
            folder_rel, stem = names.allocate(parts, stem)
            out_folder = os.path.join(out_dir, FILES_DIR, *folder_rel.split("/"))
            rule = specmap.lookup(rel_in_root, fnd.root)
            items.append(Item(found=fnd, path=os.path.abspath(fnd.path), rel=f"{label}/{rel_in_root}",
                              release=release_of(label, rel_in_root, mode),
                              rule=None if isinstance(rule, Unusable) else rule,
                              rule_error=rule.message if isinstance(rule, Unusable) else None,
                              out_folder=out_folder, out_rel=f"{FILES_DIR}/{folder_rel}", stem=stem))

        # ---- 1. content hashes (stat cache first)
        to_hash = []
        for it in items:
            try:
                it.stat = os.stat(it.path)
                it.size_bytes = it.stat.st_size
            except OSError as exc:
                it.hash_error = f"cannot be read ({exc.strerror or exc})"
                continue
            known = ledger.known_hash(it.path, it.stat)
            if known:
                it.sha256 = known
            else:
                to_hash.append(it)
        if to_hash:  # new or changed files: there will be work, let the workers start up meanwhile
            backend.start()
        for i, value, exc in backend.hash_unordered(hash_task, [it.path for it in to_hash]):
            it = to_hash[i]
            if exc is not None:
                it.hash_error = f"cannot be hashed ({type(exc).__name__}: {exc})"
            elif "error" in value:
                it.hash_error = value["error"]
            else:
                it.sha256 = value["sha256"]
                ledger.remember_hash(it.path, it.stat, it.sha256)

        progress = BatchProgress(len(items), sum(it.size_bytes for it in items), stream=cfg.progress_stream,
                                 quiet=cfg.quiet, live=cfg.live_progress)
        for p in disc.problems:
            progress.note(f"masterqc: not checked: {shown(p.path)}: {p.message}")

        # previous outputs of this output folder: re-render only what is missing or stale
        prev_run = ledger.previous_run(run_id, out_dir)
        prev_rows = {r["path"]: r for r in ledger.run_files(prev_run["run_id"])} if prev_run else {}

        def finish(it: Item, result: dict, analysed: bool, reused: bool = False) -> None:
            it.result = _slim(result)  # a catalogue's results are not all kept whole in memory
            it.analysed = analysed
            it.reused = reused and not analysed
            verdict = result.get("verdict", "error")
            ledger.record_file(run_id, path=it.path, rel=it.rel, release=it.release, content_sha256=it.sha256,
                               spec_key=it.rule.key if it.rule else None, verdict=verdict, analysed=analysed,
                               message=_first_problem(result), out_stem=f"{it.out_rel}/{it.stem}")
            audio_s = float((result.get("format") or {}).get("duration_s") or 0.0)
            progress.file_done(it.rel, verdict, audio_s, it.size_bytes, analysed,
                               how="checked" if analysed else ("re-judged" if it.how == "rejudged" else
                                                               "reused" if it.reused else "not analysed"))

        def place(it: Item, result: dict, wrote: bool) -> dict:
            """Write ``result`` as ``it``'s outputs (JSON always; HTML/PDF when missing or stale)."""
            result = dict(result)
            result["file"] = dict(result.get("file") or {}, path=text_safe(it.found.path))
            outputs = {}
            if not _safe_folder(out_dir, it.out_folder):
                from masterqc.judge.core import Finding, verdict
                result["findings"] = list(result.get("findings", [])) + [Finding(
                    check="batch.output", status="error",
                    message=f"{it.found.path}: its output folder {it.out_folder} resolves outside {out_dir} "
                            "(a link inside the output folder?); nothing written for this file").to_dict()]
                result["verdict"] = verdict(result["findings"])
                result["outputs"] = {}
                return result
            if not wrote:  # the per-file step's writer (pipeline.write_outputs); fresh reports are kept
                from masterqc.pipeline import write_outputs
                prev = prev_rows.get(text_safe(it.path))
                fresh = (prev is not None and prev.get("content_sha256") == it.sha256 and it.rule is not None
                         and prev.get("spec_key") == it.rule.key and prev.get("out_stem") == f"{it.out_rel}/{it.stem}")
                keep = [f for f in cfg.formats if f in ("html", "pdf") and fresh
                        and os.path.exists(os.path.join(it.out_folder, f"{it.stem}.{f}"))]
                result = write_outputs(result, it.out_folder, it.stem, cfg.formats, keep=keep)
            return result

        # ---- 2. reuse or schedule
        groups: dict[tuple, list[Item]] = {}
        for it in items:
            if it.hash_error is not None:
                loaded = it.rule.loaded if it.rule else _NoSpec()
                finish(it, place(it, _error_result(it, loaded, it.hash_error), False), False)
                continue
            if it.rule_error is not None:
                finish(it, place(it, _error_result(it, _NoSpec(), it.rule_error), False), False)
                continue
            if it.rule is None:
                finish(it, place(it, _error_result(it, _NoSpec(), f"no rule of the spec map {specmap.path} matches "
                                                                   f"{it.found.rel!r}"), False), False)
                continue
            from masterqc.pipeline import measure_and_judge, options_for
            it.measure_key = options_for(it.rule.loaded, base).measurement_key()
            stored = ledger.get_measurements(it.sha256, it.measure_key) if cfg.reuse else None
            if stored is not None:  # measure once, judge many: no audio is read
                it.how = "rejudged"
                finish(it, place(it, measure_and_judge(it.path, it.rule.loaded, base_options=base, stored=stored),
                                 False), False, reused=True)
                continue
            groups.setdefault((it.sha256, it.rule.key), []).append(it)

        keys = []
        tasks = []
        for k in list(groups):
            safe = []
            for it in groups[k]:
                if _safe_folder(out_dir, it.out_folder):
                    safe.append(it)
                else:  # place() turns this into an error row and writes nothing
                    finish(it, place(it, _error_result(
                        it, it.rule.loaded, f"its output folder {it.out_folder} resolves outside {out_dir} "
                                            "(a link planted there?); not analysed"),
                                     False), False)
            if not safe:
                continue
            groups[k] = safe
            lead = safe[0]
            keys.append(k)
            tasks.append({"path": lead.found.path, "spec_path": lead.rule.spec_path, "spec_key": lead.rule.key,
                          "out_dir": lead.out_folder, "stem": lead.stem, "formats": list(cfg.formats),
                          "layout": list(cfg.layout) if cfg.layout else None,
                          "spec_libraries": list(specmap.libraries),
                          "spec_from_delivery_folder": bool(lead.rule.loaded.from_delivery_folder),
                          # several files at once: each measurement on one thread (no oversubscription)
                          "threads": 1 if backend.workers > 1 else None})
        for i, value, exc in backend.map_unordered(check_task, tasks):
            group = groups[keys[i]]
            lead = group[0]
            if exc is not None:
                result = _error_result(lead, lead.rule.loaded,
                                       f"the worker checking this file stopped: {type(exc).__name__}: {exc}")
                result["error"]["internal"] = True
                wrote = False
            else:
                result = value["result"]
                lead.elapsed_s = value["elapsed_s"]
                lead.cpu_s = value.get("cpu_s", 0.0)
                wrote = True
            internal = bool((result.get("error") or {}).get("internal"))
            got_hash = (result.get("file") or {}).get("sha256")
            if not internal and got_hash == lead.sha256:  # measurements, or why the file cannot be read
                ledger.put_measurements(lead.sha256, lead.measure_key, result)
            lead.how = "measured"
            finish(lead, place(lead, result, wrote), True)
            for other in group[1:]:
                other.how = "identical"
                finish(other, place(other, result, False), False, reused=exc is None)
        progress.close()

        # ---- 3. releases, changes, outputs
        summary = _summary(cfg, items, disc, specmap, ledger, run_id, out_dir, ledger_path, backend, prev_run,
                           prev_rows, t0)
        from masterqc.batch.pairing import add_pairs  # deliverables against their masters (spec map pairs:)
        add_pairs(summary, items, specmap, cfg.formats, None if cfg.quiet else (cfg.progress_stream or sys.stderr))
        from masterqc.batch.outputs import write_run_outputs
        outputs = write_run_outputs(summary, out_dir)
        row = ledger.finish_run(run_id, "complete", time.perf_counter() - t0)
        summary["run"]["finished_utc"] = row["finished_utc"]
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


def _missing_audio(result: dict) -> dict | None:
    """What a truncated master lacks, for its index row (None when it is whole or unread)."""
    data = (result.get("metadata") or {}).get("audio_data") or {}
    if not data.get("missing_bytes"):
        return None
    from masterqc.judge.integrity import clock_text
    return {"missing_bytes": int(data["missing_bytes"]), "missing_s": float(data.get("missing_s") or 0.0),
            "missing_text": f"{clock_text(float(data.get('missing_s') or 0.0))} ({int(data['missing_bytes']):,} bytes) "
                            "of audio missing"}


def _summary(cfg, items, disc, specmap, ledger, run_id, out_dir, ledger_path, backend, prev_run, prev_rows, t0) -> dict:
    files = []
    outcomes = []  # verdict and error marker of every file, for the exit code
    for it in items:
        r = it.result or {}
        m = r.get("measurements") or {}
        fmt = r.get("format") or {}
        prev = prev_rows.get(text_safe(it.path))
        v = r.get("verdict", "error")
        if prev_run is None or prev is None:
            change = "new"
        elif prev["verdict"] in ("fail", "error") and v in ("pass", "warn"):
            change = "fixed"
        elif prev["verdict"] in ("pass", "warn") and v in ("fail", "error"):
            change = "newly_failing"
        elif prev["verdict"] != v:
            change = "changed"
        else:
            change = "unchanged"
        outcomes.append({k: r[k] for k in ("verdict", "error") if k in r})
        files.append({
            "path": it.path, "rel": it.rel, "release": it.release, "verdict": v, "analysed": it.analysed,
            "how": it.how,
            "reused": it.reused,
            "spec_from_delivery_folder": bool((r.get("spec") or {}).get("from_delivery_folder")),
            "missing_audio": _missing_audio(r),
            "elapsed_s": it.elapsed_s, "cpu_s": it.cpu_s, "change": change, "previous_verdict": prev["verdict"] if prev else None,
            "sha256": it.sha256, "size_bytes": it.size_bytes,
            "spec": (r.get("spec") or {}).get("name"), "spec_key": it.rule.key if it.rule else None,
            "integrated_lufs": m.get("integrated_lufs"), "true_peak_dbtp": m.get("true_peak_dbtp"),
            "loudness_range_lu": m.get("loudness_range_lu"), "duration_s": fmt.get("duration_s"),
            "sample_rate_hz": fmt.get("sample_rate_hz"), "bit_depth": fmt.get("bit_depth"),
            "channels": fmt.get("channels"),
            "counts": {s: sum(1 for f in r.get("findings", []) if f["status"] == s)
                       for s in ("pass", "warn", "fail", "skipped", "error")},
            "first_problem": _first_problem(r), "problems": _problems(r),
            "outputs": {k: f"{it.out_rel}/{name}" for k, name in (r.get("outputs") or {}).items()},
        })
    # releases
    releases = []
    by_release: dict[str, list[Item]] = {}
    for it in items:
        if it.release is not None:
            by_release.setdefault(it.release, []).append(it)
    for rid in sorted(by_release):
        group = by_release[rid]
        lead = next((g for g in group if g.rule is not None), None)
        rel = judge_release(rid, rid, [g.rel for g in group], [g.result or {} for g in group],
                            lead.rule.loaded if lead else None)
        specs = {g.rule.key for g in group if g.rule is not None}
        rel["mixed_specs"] = len(specs) > 1
        releases.append(rel)
    counts = {v: sum(1 for f in files if f["verdict"] == v) for v in ("pass", "warn", "fail", "error")}
    counts.update(files=len(files), analysed=sum(1 for f in files if f["analysed"]),
                  reused=sum(1 for it in items if it.reused),
                  not_analysed=sum(1 for it in items if not it.analysed and not it.reused),
                  measured=sum(1 for f in files if f["how"] == "measured"),
                  rejudged=sum(1 for f in files if f["how"] == "rejudged"),
                  releases=len(releases),
                  releases_failed=sum(1 for r in releases if r["verdict"] in ("fail", "error")))
    now = {text_safe(it.path) for it in items}
    changes = {"new": [f["rel"] for f in files if f["change"] == "new" and prev_run is not None],
               "fixed": [f["rel"] for f in files if f["change"] == "fixed"],
               "newly_failing": [f["rel"] for f in files if f["change"] == "newly_failing"],
               "gone": sorted(r["rel"] for p, r in prev_rows.items() if p not in now)}
    code = exit_code_for(outcomes + [{"verdict": r["verdict"]} for r in releases if r["verdict"] == "fail"])
    started = ledger.run(run_id)["started_utc"]
    return {
        "tool": {"name": "masterqc", "version": __version__},
        "run": {"id": run_id, "started_utc": started, "finished_utc": utc_now(),
                "elapsed_s": time.perf_counter() - t0, "roots": [os.fspath(r) for r in cfg.roots],
                "out_dir": out_dir, "ledger": ledger_path, "spec": os.fspath(cfg.spec_path),
                "spec_map": specmap.is_map, "backend": backend.description, "formats": list(cfg.formats),
                "releases_mode": cfg.releases or specmap.releases or "folder"},
        "exit_code": code,
        "counts": counts,
        "previous_run": ({"run_id": prev_run["run_id"], "started_utc": prev_run["started_utc"]} if prev_run else None),
        "changes": changes,
        "releases": releases,
        "files": files,
        "skipped_paths": [{"path": p.path, "message": p.message} for p in disc.problems],
    }
