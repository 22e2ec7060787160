"""Summarise a batch: one row per file, the releases judged, the changes since the previous run.

:func:`summarise` builds the ``summary.json`` document (its schema:
:mod:`masterqc.batch.summary_schema`) from the run's items; the run outputs
(``summary.json``, ``junit.xml``, ``index.html``) are written from it by
:mod:`masterqc.batch.outputs`.  Pure apart from reading the run's start time.
"""

from __future__ import annotations

import os
import time

from masterqc import __version__
from masterqc.batch.ledger import utc_now
from masterqc.batch.releases import judge_release
from masterqc.batch.schedule import first_problem
from masterqc.fileio import text_safe
from masterqc.pipeline import exit_code_for

#: finding statuses counted per file, in the order shown
COUNTED = ("pass", "warn", "fail", "skipped", "error")


def problems(result: dict) -> list[dict]:
    """The error, fail and warn findings of a result (check, status, message)."""
    return [{"check": f["check"], "status": f["status"], "message": f["message"]}
            for f in result.get("findings", []) if f["status"] in ("fail", "error", "warn")]


def missing_audio(result: dict) -> dict | None:
    """What a truncated master lacks, for its index row (None when it is whole or unread)."""
    data = (result.get("metadata") or {}).get("audio_data") or {}
    if not data.get("missing_bytes"):
        return None
    from masterqc.judge.integrity import clock_text
    return {"missing_bytes": int(data["missing_bytes"]), "missing_s": float(data.get("missing_s") or 0.0),
            "missing_text": f"{clock_text(float(data.get('missing_s') or 0.0))} ({int(data['missing_bytes']):,} bytes) "
                            "of audio missing"}


def change(previous_verdict: str | None, verdict: str, had_previous_run: bool) -> str:
    """How a file's verdict moved since the previous run: ``new``, ``fixed``, ``newly_failing``,
    ``changed`` or ``unchanged``."""
    if not had_previous_run or previous_verdict is None:
        return "new"
    if previous_verdict in ("fail", "error") and verdict in ("pass", "warn"):
        return "fixed"
    if previous_verdict in ("pass", "warn") and verdict in ("fail", "error"):
        return "newly_failing"
    return "changed" if previous_verdict != verdict else "unchanged"


def file_row(it, prev: dict | None, had_previous_run: bool) -> dict:
    """The summary row of one item (its slimmed result in ``it.result``)."""
    r = it.result or {}
    m = r.get("measurements") or {}
    fmt = r.get("format") or {}
    v = r.get("verdict", "error")
    return {
        "path": it.path, "rel": it.rel, "release": it.release, "verdict": v, "analysed": it.analysed,
        "how": it.how,
        "reused": it.reused,
        "spec_from_delivery_folder": bool((r.get("spec") or {}).get("from_delivery_folder")),
        "missing_audio": missing_audio(r),
        "elapsed_s": it.elapsed_s, "cpu_s": it.cpu_s,
        "change": change(prev["verdict"] if prev else None, v, had_previous_run),
        "previous_verdict": prev["verdict"] if prev else None,
        "sha256": it.sha256, "size_bytes": it.size_bytes,
        "spec": (r.get("spec") or {}).get("name"), "spec_key": it.rule.key if it.rule else None,
        "integrated_lufs": m.get("integrated_lufs"), "true_peak_dbtp": m.get("true_peak_dbtp"),
        "loudness_range_lu": m.get("loudness_range_lu"), "duration_s": fmt.get("duration_s"),
        "sample_rate_hz": fmt.get("sample_rate_hz"), "bit_depth": fmt.get("bit_depth"),
        "channels": fmt.get("channels"),
        "counts": {s: sum(1 for f in r.get("findings", []) if f["status"] == s) for s in COUNTED},
        "first_problem": first_problem(r), "problems": problems(r),
        "outputs": {k: f"{it.out_rel}/{name}" for k, name in (r.get("outputs") or {}).items()},
    }


def judge_releases(items) -> list[dict]:
    """Each release's result (:func:`masterqc.batch.releases.judge_release`), sorted by release id."""
    by_release: dict[str, list] = {}
    for it in items:
        if it.release is not None:
            by_release.setdefault(it.release, []).append(it)
    releases = []
    for rid in sorted(by_release):
        group = by_release[rid]
        lead = next((g for g in group if g.rule is not None), None)
        rel = judge_release(rid, rid, [g.rel for g in group], [g.result or {} for g in group],
                            lead.rule.loaded if lead else None)
        rel["mixed_specs"] = len({g.rule.key for g in group if g.rule is not None}) > 1
        releases.append(rel)
    return releases


def summarise(cfg, items, disc, specmap, started_utc: str, run_id: int, out_dir: str, ledger_path: str,
              backend_description: str, prev_run: dict | None, prev_rows: dict, t0: float) -> dict:
    """The run's summary document (``summary.json``)."""
    had_previous = prev_run is not None
    files = [file_row(it, prev_rows.get(text_safe(it.path)), had_previous) for it in items]
    outcomes = [{k: (it.result or {})[k] for k in ("verdict", "error") if k in (it.result or {})} for it in items]
    releases = judge_releases(items)
    counts = {v: sum(1 for f in files if f["verdict"] == v) for v in ("pass", "warn", "fail", "error")}
    counts.update(files=len(files), analysed=sum(1 for f in files if f["analysed"]),
                  reused=sum(1 for it in items if it.reused),
                  not_analysed=sum(1 for it in items if not it.analysed and not it.reused),
                  measured=sum(1 for f in files if f["how"] == "measured"),
                  rejudged=sum(1 for f in files if f["how"] == "rejudged"),
                  releases=len(releases),
                  releases_failed=sum(1 for r in releases if r["verdict"] in ("fail", "error")))
    now = {text_safe(it.path) for it in items}
    changes = {"new": [f["rel"] for f in files if f["change"] == "new" and had_previous],
               "fixed": [f["rel"] for f in files if f["change"] == "fixed"],
               "newly_failing": [f["rel"] for f in files if f["change"] == "newly_failing"],
               "gone": sorted(r["rel"] for p, r in prev_rows.items() if p not in now)}
    code = exit_code_for(outcomes + [{"verdict": r["verdict"]} for r in releases if r["verdict"] == "fail"])
    return {
        "tool": {"name": "masterqc", "version": __version__},
        "run": {"id": run_id, "started_utc": started_utc, "finished_utc": utc_now(),
                "elapsed_s": time.perf_counter() - t0, "roots": [os.fspath(r) for r in cfg.roots],
                "out_dir": out_dir, "ledger": ledger_path, "spec": os.fspath(cfg.spec_path),
                "spec_map": specmap.is_map, "backend": backend_description, "formats": list(cfg.formats),
                "releases_mode": cfg.releases or specmap.releases or "folder"},
        "exit_code": code,
        "counts": counts,
        "previous_run": ({"run_id": prev_run["run_id"], "started_utc": prev_run["started_utc"]} if prev_run else None),
        "changes": changes,
        "releases": releases,
        "files": files,
        "skipped_paths": [{"path": p.path, "message": p.message} for p in disc.problems],
    }
