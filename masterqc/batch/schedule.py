"""Schedule a batch's work: for each planned, hashed master, an error row, a re-judgement, or a measurement.

Every master goes through the one per-file step, :func:`masterqc.pipeline.check_file`:

* a master the ledger holds measurements of (same content hash, same measurement key)
  is judged again from them in this process -- no audio is read -- and its outputs
  are written (HTML/PDF kept when still fresh);
  -- with worker processes, a re-judgement whose HTML/PDF must be rendered again is sent
  to the workers with its stored measurements, so the parent renders nothing;
* the others are grouped by (content hash, spec key) and each group's first file is
  checked through the backend (longest file first, so no core idles at the end while one
  long file is still being checked) (:func:`masterqc.batch.work.check_task`, which calls
  ``check_file`` in a worker); its measurements are stored in the ledger and the other
  files of the group take its result (``how: "identical"``);
* a master that cannot be hashed, that no spec-map rule matches, whose folder spec is
  invalid, or whose output folder resolves outside the output folder gets an error row.

Each master is recorded in the ledger the moment it is done, so an interrupted run
keeps what it finished.  A batch's per-file outputs are written without an ``fsync``
each (:func:`masterqc.fileio.write_atomic`, ``durable=False``): the next run writes them
again, and the ledger holds the record.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

from masterqc.fileio import text_safe
from masterqc.pipeline import check_file, error_result, measure_and_judge, options_for, write_outputs
from masterqc.problems import ranked_problems
from masterqc.stagelog import stage


class NoSpec:
    """Stand-in spec for a file that no spec-map rule matches."""

    def info(self):
        return {"name": None, "path": None, "sha256": None, "files": []}


def first_problem(result: dict) -> str | None:
    """The message of the first error, else fail, else warning finding (None when all passed)."""
    ranked = ranked_problems(result.get("findings", []))
    return ranked[0]["message"] if ranked else None


def slim(result: dict) -> dict:
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


def error_row(item, loaded, cause: str) -> dict:
    """The error result of a master the batch could not check (``outputs`` empty until written)."""
    r = error_result(item.path, loaded, cause)
    r["outputs"] = {}
    return r


def how_shown(item) -> str:
    """How a file was done, in the progress line's words."""
    if item.analysed:
        return "checked"
    return "re-judged" if item.how == "rejudged" else "reused" if item.reused else "not analysed"


@dataclass
class Scheduler:
    """The per-run state the scheduling needs; :meth:`run` does the work."""

    out_dir: str
    formats: tuple
    ledger: object
    run_id: int
    progress: object
    base_options: object              #: MeasureOptions (the --layout override)
    specmap: object
    prev_rows: dict                   #: ``{path: run_files row}`` of the previous run into out_dir
    reuse: bool = True
    layout: tuple | None = None
    _safe: dict = field(default_factory=dict)
    _options: dict = field(default_factory=dict)
    #: re-judgements left to the backend's workers: ``[(item, stored, encoded, keep)]`` (see :meth:`triage`)
    _rejudge: list = field(default_factory=list)

    # ---------------------------------------------------------------- pieces

    def safe_folder(self, folder: str) -> bool:
        """Create ``folder`` and say whether it really lies inside the output folder (links followed);
        asked once per folder and run."""
        ok = self._safe.get(folder)
        if ok is None:
            from masterqc.batch.names import inside
            ok = inside(self.out_dir, folder)
            if ok:
                try:
                    os.makedirs(folder, exist_ok=True)
                    ok = inside(self.out_dir, folder)
                except OSError:
                    ok = False
            self._safe[folder] = ok
        return ok

    def options(self, rule):
        """``(MeasureOptions, measurement key)`` the rule's spec asks for (once per spec key)."""
        got = self._options.get(rule.key)
        if got is None:
            opts = options_for(rule.loaded, self.base_options)
            got = self._options[rule.key] = (opts, opts.measurement_key())
        return got

    def fresh_reports(self, it) -> list[str]:
        """The rendered formats of ``it`` already written by the previous run for the same content,
        spec and output name (kept, not rendered again)."""
        prev = self.prev_rows.get(text_safe(it.path))
        if prev is None or it.rule is None or prev.get("content_sha256") != it.sha256 \
                or prev.get("spec_key") != it.rule.key or prev.get("out_stem") != it.out_stem:
            return []
        return [f for f in self.formats if f in ("html", "pdf")
                and os.path.exists(os.path.join(it.out_folder, f"{it.stem}.{f}"))]

    def finish(self, it, result: dict, analysed: bool, reused: bool = False) -> None:
        """Keep ``it``'s (slimmed) result, record it in the ledger and on the progress display."""
        with stage("parent_finish_file"):
            self._finish(it, result, analysed, reused)

    def _finish(self, it, result: dict, analysed: bool, reused: bool) -> None:
        it.result = slim(result)  # a catalogue's results are not all kept whole in memory
        it.analysed = analysed
        it.reused = reused and not analysed
        verdict = result.get("verdict", "error")
        self.ledger.record_file(self.run_id, path=it.path, rel=it.rel, release=it.release, content_sha256=it.sha256,
                                spec_key=it.rule.key if it.rule else None, verdict=verdict, analysed=analysed,
                                message=first_problem(result), out_stem=it.out_stem)
        audio_s = float((result.get("format") or {}).get("duration_s") or 0.0)
        self.progress.file_done(it.rel, verdict, audio_s, it.size_bytes, analysed, how=how_shown(it),
                                problems=result.get("findings"), path=it.path)

    def outside(self, it, result: dict) -> dict:
        """``result`` with an error finding: ``it``'s output folder resolves outside the output folder."""
        from masterqc.judge.core import Finding, verdict
        result = dict(result)
        result["findings"] = list(result.get("findings", [])) + [Finding(
            check="batch.output", status="error",
            message=f"{it.found.path}: its output folder {it.out_folder} resolves outside {self.out_dir} "
                    "(a link inside the output folder?); nothing written for this file").to_dict()]
        result["verdict"] = verdict(result["findings"])
        result["outputs"] = {}
        return result

    def place(self, it, result: dict, written: bool) -> dict:
        """``result`` as ``it``'s: its path, and its outputs written unless ``written`` already
        (JSON always; HTML/PDF when missing or stale)."""
        result = dict(result)
        result["file"] = dict(result.get("file") or {}, path=text_safe(it.found.path))
        if not self.safe_folder(it.out_folder):
            return self.outside(it, result)
        if written:
            return result
        return write_outputs(result, it.out_folder, it.stem, self.formats, keep=self.fresh_reports(it),
                             durable=False)

    def task(self, lead, threads, stored=None, encoded=None, keep=()) -> dict:
        """The picklable task of :func:`masterqc.batch.work.check_task` for a group's first file
        (``stored``: measurements to judge again instead of measuring, ``keep``: fresh reports)."""
        task = {"path": lead.found.path, "spec_path": lead.rule.spec_path, "spec_key": lead.rule.key,
                "out_dir": lead.out_folder, "stem": lead.stem, "formats": list(self.formats),
                "layout": list(self.layout) if self.layout else None,
                "spec_libraries": list(self.specmap.libraries),
                "spec_from_delivery_folder": bool(lead.rule.loaded.from_delivery_folder),
                "threads": threads, "durable": False}
        if stored is not None:
            task.update(stored=stored, encoded=encoded, keep=list(keep))
        return task

    # ---------------------------------------------------------------- the run

    def rejudge_here(self, it, stored, encoded, opts) -> None:
        """Judge ``it`` again from ``stored`` measurements in this process and write its outputs."""
        if self.safe_folder(it.out_folder):  # the per-file step, from stored measurements
            result = check_file(it.found.path, it.rule.loaded, it.out_folder, self.formats, stem=it.stem,
                                stored=stored, options=opts, keep=self.fresh_reports(it), durable=False,
                                encoded=encoded)
        else:  # judged, written nowhere (place() adds why)
            result = measure_and_judge(it.found.path, it.rule.loaded, stored=stored, options=opts)
        self.finish(it, self.place(it, result, True), False, reused=True)

    def triage(self, items, workers: int = 1) -> dict:
        """Error rows and re-judgements, done at once; returns the groups left to measure:
        ``{(content hash, spec key): [items]}`` in order.  With ``workers`` > 1, a re-judgement
        whose HTML/PDF must be rendered again is left to the workers (:attr:`_rejudge`)."""
        groups: dict[tuple, list] = {}
        for it in items:
            if it.hash_error is not None:
                loaded = it.rule.loaded if it.rule else NoSpec()
                self.finish(it, self.place(it, error_row(it, loaded, it.hash_error), False), False)
                continue
            if it.rule_error is not None:
                self.finish(it, self.place(it, error_row(it, NoSpec(), it.rule_error), False), False)
                continue
            if it.rule is None:
                self.finish(it, self.place(it, error_row(it, NoSpec(), f"no rule of the spec map {self.specmap.path} "
                                                                       f"matches {it.found.rel!r}"), False), False)
                continue
            opts, it.measure_key = self.options(it.rule)
            got = self.ledger.get_measurements(it.sha256, it.measure_key, with_encoded=True) if self.reuse else None
            stored, encoded = got if got is not None else (None, None)
            if stored is not None:  # measure once, judge many: no audio is read
                # (stored is the measurements, or the stored outcome of an earlier read: it cannot be read)
                it.how = "rejudged"
                if workers > 1 and self.safe_folder(it.out_folder):
                    keep = self.fresh_reports(it)
                    if any(f in ("html", "pdf") and f not in keep for f in self.formats):  # rendering: a worker's job
                        self._rejudge.append((it, stored, encoded, keep))
                        continue
                self.rejudge_here(it, stored, encoded, opts)
                continue
            groups.setdefault((it.sha256, it.rule.key), []).append(it)
        return groups

    def measure(self, groups: dict, backend, check_task) -> None:
        """Check each group's first file through ``backend`` (``check_task``), store its measurements,
        and give the group's other files its result."""
        keys, tasks = [], []
        # several files at once: each gets the cores divided by the jobs (execute.threads_per_worker)
        threads = getattr(backend, "threads", 1 if backend.workers > 1 else None)
        for k in sorted(groups, key=lambda k: -groups[k][0].size_bytes):  # longest first (stable)
            safe = []
            for it in groups[k]:
                if self.safe_folder(it.out_folder):
                    safe.append(it)
                else:  # place() turns this into an error row and writes nothing
                    self.finish(it, self.place(it, error_row(
                        it, it.rule.loaded, f"its output folder {it.out_folder} resolves outside {self.out_dir} "
                                            "(a link planted there?); not analysed"), False), False)
            if not safe:
                continue
            groups[k] = safe
            keys.append(k)
            tasks.append(self.task(safe[0], threads))
        rejudge = sorted(self._rejudge, key=lambda r: -r[0].size_bytes)  # after the measuring: short tasks last
        self._rejudge = []
        n_measure = len(keys)
        for it, stored, encoded, keep in rejudge:
            tasks.append(self.task(it, threads, stored, encoded, keep))
        for i, value, exc in backend.map_unordered(check_task, tasks):
            if i >= n_measure:  # a re-judgement done by a worker
                it, stored, encoded, _ = rejudge[i - n_measure]
                if exc is None:  # (a failure inside check_file is an error result already)
                    self.finish(it, self.place(it, value["result"], True), False, reused=True)
                else:  # the worker stopped: judge it here
                    self.rejudge_here(it, stored, encoded, self.options(it.rule)[0])
                continue
            group = groups[keys[i]]
            lead = group[0]
            if exc is not None:
                result = error_row(lead, lead.rule.loaded,
                                   f"the worker checking this file stopped: {type(exc).__name__}: {exc}")
                result["error"]["internal"] = True
                written = False
            else:
                result = value["result"]
                lead.elapsed_s = value["elapsed_s"]
                lead.cpu_s = value.get("cpu_s", 0.0)
                written = True
            internal = bool((result.get("error") or {}).get("internal"))
            got_hash = (result.get("file") or {}).get("sha256")
            if not internal and got_hash == lead.sha256:  # measurements, or why the file cannot be read
                with stage("parent_put_measurements"):
                    self.ledger.put_measurements(lead.sha256, lead.measure_key, result,
                                                 blob=value.get("measurements_z") if exc is None else None)
            lead.how = "measured"
            self.finish(lead, self.place(lead, result, written), True)
            for other in group[1:]:
                other.how = "identical"
                self.finish(other, self.place(other, result, False), False, reused=exc is None)

    def run(self, items, backend, check_task) -> None:
        """Every item done: :meth:`triage`, then :meth:`measure` of what is left."""
        with stage("triage"):
            groups = self.triage(items, backend.workers)
        self.measure(groups, backend, check_task)
