"""Batch throughput plumbing: jobs 2 gives the same run outputs as jobs 1, the workers (not the
parent) render, re-judgements that need new reports go to the workers, the longest file is
started first, and a worker's threads are held to the cores divided by the jobs.

The speed itself is measured in bench/bench_batch.py (ratios side by side), never here.
"""

from __future__ import annotations

import csv
import io
import json
import os

import numpy as np
import pyloudnorm as pyln
import pytest
import soundfile as sf

from masterqc.batch.runner import BatchConfig, run_batch

SPEC = """\
spec_version: 1
name: Throughput test label
loudness:
  integrated: {{min_lufs: {lo}, max_lufs: -5.0}}
release:
  pooled_loudness: {{target_lufs: -16.0, tolerance_lu: 2.0}}
"""


def tone_noise(path, seconds, level_dbfs, seed, sr=48000):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((int(seconds * sr), 2))
    x = x / np.sqrt(np.mean(x ** 2)) * 10 ** (level_dbfs / 20)
    os.makedirs(os.path.dirname(path), exist_ok=True)
    sf.write(path, x, sr, subtype="PCM_24")


def comparable(out):
    """summary.json's file rows, releases, counts and exit code without timings, and index.csv's rows."""
    s = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    files = [{k: v for k, v in f.items() if k not in ("elapsed_s", "cpu_s")} for f in s["files"]]
    rows = list(csv.reader(io.StringIO((out / "index.csv").read_text(encoding="utf-8"))))
    return files, s["releases"], s["counts"], s["exit_code"], rows


def stage_rows(path):
    with open(path, encoding="utf-8") as f:
        return [json.loads(line) for line in f if line.strip()]


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    base = tmp_path_factory.mktemp("throughput")
    root = base / "in"
    # lengths out of name order, so the longest-first order differs from the discovery order
    for i, (secs, level) in enumerate([(0.6, -20.0), (2.0, -18.0), (1.0, -40.0), (1.4, -16.0)]):
        tone_noise(str(root / "album" / f"{i:02d}.wav"), secs, level, seed=100 + i)
    with open(root / "album" / "04.wav", "wb") as f:  # a broken file never stops the batch
        f.write(b"RIFF\x10\x00\x00\x00WAVEfmt ")
    spec = base / "spec.yaml"
    spec.write_text(SPEC.format(lo=-30.0))
    return base, root, spec


def test_jobs_2_matches_jobs_1_and_renders_in_the_workers(folder, monkeypatch):
    base, root, spec = folder
    runs = {}
    for jobs in (1, 2):
        log = base / f"stages-{jobs}.jsonl"
        monkeypatch.setenv("MASTERQC_STAGE_LOG", str(log))
        out = base / f"out{jobs}"
        o = run_batch(BatchConfig(roots=[str(root)], spec_path=str(spec), out_dir=str(out),
                                  formats=("json", "html"), jobs=jobs, quiet=True))
        runs[jobs] = (o, out, stage_rows(log))
    o1, out1, log1 = runs[1]
    o2, out2, log2 = runs[2]
    assert o1.exit_code == o2.exit_code == 3  # the broken file: not readable
    # by construction: the fixture folder holds five files, 00-03.wav readable and 04.wav broken
    assert o1.summary["counts"]["files"] == 5 and o1.summary["counts"]["measured"] == 5  # (the broken one: tried, unreadable)
    assert comparable(out1) == comparable(out2)
    for f in o2.summary["files"]:  # every report written, by the workers
        assert (out2 / f["outputs"]["html"]).exists(), f["rel"]
    # where the per-file stages ran: all in the parent with jobs 1, none in the parent with jobs 2
    roles1 = {(r["role"], r["stage"]) for r in log1}
    roles2 = {(r["role"], r["stage"]) for r in log2}
    assert ("parent", "render_html") in roles1 and ("parent", "measure") in roles1
    assert ("worker", "render_html") in roles2 and ("worker", "measure") in roles2
    assert not {s for role, s in roles2 if role == "parent"} & {"measure", "render_html", "render_pdf", "judge"}
    # each worker logged its start-up once, before its tasks
    starts = [r for r in log2 if r["stage"] == "worker_startup"]
    assert 1 <= len(starts) <= 2 and len({r["pid"] for r in starts}) == len(starts)


def test_rejudged_reports_are_rendered_by_the_workers(folder, monkeypatch):
    """A spec that moves only limits re-judges stored measurements; the new reports are rendered
    by the workers with jobs 2, and read the same as those of jobs 1."""
    base, root, _ = folder
    spec2 = base / "spec-moved.yaml"
    spec2.write_text(SPEC.format(lo=-13.0))  # moves a limit only: nothing measured again
    runs = {}
    for jobs in (1, 2):
        out = base / f"out{jobs}"
        log = base / f"stages-rejudge-{jobs}.jsonl"
        monkeypatch.setenv("MASTERQC_STAGE_LOG", str(log))
        o = run_batch(BatchConfig(roots=[str(root)], spec_path=str(spec2), out_dir=str(out),
                                  formats=("json", "html"), jobs=jobs, quiet=True))
        runs[jobs] = (o, out, stage_rows(log))
    for jobs, (o, out, log) in runs.items():
        c = o.summary["counts"]
        assert (c["measured"], c["rejudged"]) == (0, 5), jobs  # (the broken file: its stored outcome)
        verdicts = {f["rel"].rsplit("/", 1)[1]: f["verdict"] for f in o.summary["files"]}
        # the oracle: ITU-R BS.1770 integrated loudness by pyloudnorm (filter_class="DeMan") against the
        # moved lower limit of -13 LUFS (the files lie 0.85 LU or more either side of it)
        for name in ("00.wav", "01.wav", "02.wav", "03.wav"):
            x, sr = sf.read(str(root / "album" / name))
            lufs = pyln.Meter(sr, filter_class="DeMan").integrated_loudness(x)
            assert verdicts[name] == ("fail" if lufs < -13.0 else "pass"), (name, lufs, verdicts)
        assert sorted(verdicts.values()) == ["error", "fail", "fail", "pass", "pass"]
        page = (out / next(f for f in o.summary["files"] if f["rel"].endswith("00.wav"))["outputs"]["html"]
                ).read_text(encoding="utf-8")
        assert "Throughput test label" in page and "FAIL" in page
    assert comparable(runs[1][1]) == comparable(runs[2][1])
    rendered2 = [r for r in runs[2][2] if r["stage"] == "render_html"]
    # by construction: the folder holds five masters (00-04.wav; 04 is broken and still gets a report)
    assert len(rendered2) == 5 and {r["role"] for r in rendered2} == {"worker"}
    assert not [r for r in runs[2][2] if r["stage"] == "measure"]


def test_longest_file_is_started_first(folder, tmp_path):
    from masterqc.batch.execute import InlineBackend

    _, root, spec = folder
    seen = []

    class Recording(InlineBackend):
        def map_unordered(self, fn, items):
            seen.extend(os.path.basename(t["path"]) for t in items if isinstance(t, dict))
            return super().map_unordered(fn, items)

    import masterqc.batch.runner as runner_mod
    real = runner_mod.make_backend
    runner_mod.make_backend = lambda *a, **k: Recording()
    try:
        run_batch(BatchConfig(roots=[str(root)], spec_path=str(spec), out_dir=str(tmp_path / "o"), jobs=1,
                              quiet=True))
    finally:
        runner_mod.make_backend = real
    # sizes follow the lengths: 2.0 s, 1.4 s, 1.0 s, 0.6 s, then the 20-byte broken file
    # by construction: the fixture writes four readable masters of 0.6, 2.0, 1.0 and 1.4 s; longest first is 01, 03, 02, 00
    assert seen[:4] == ["01.wav", "03.wav", "02.wav", "00.wav"], seen


def test_threads_knob(monkeypatch):
    """House choice: MASTERQC_THREADS sets the threads of one measurement; a pool of N jobs gives each
    worker the cores divided by N, at least 1; a bad value is an error that names the variable."""
    from masterqc.batch import execute
    from masterqc.errors import UsageError
    from masterqc.measure.options import MeasureOptions, default_thread_count

    monkeypatch.setenv("MASTERQC_THREADS", "3")
    assert default_thread_count() == 3 and MeasureOptions().threads == 3
    monkeypatch.setenv("MASTERQC_THREADS", "0")
    with pytest.raises(UsageError, match="MASTERQC_THREADS"):
        default_thread_count()
    monkeypatch.delenv("MASTERQC_THREADS")
    monkeypatch.setattr(execute, "default_jobs", lambda: 2)
    assert execute.threads_per_worker(2) == 1 and execute.threads_per_worker(1) == 2
    assert execute.PoolBackend(2).threads == 1
    monkeypatch.setattr(execute, "default_jobs", lambda: 8)
    assert execute.threads_per_worker(2) == 4 and execute.threads_per_worker(16) == 1
    monkeypatch.setenv("MASTERQC_THREADS", "2")
    assert execute.threads_per_worker(2) == 2  # the variable caps it


def test_worker_limits_blas_and_measurement_threads(monkeypatch):
    threadpoolctl = pytest.importorskip("threadpoolctl")
    from masterqc.batch import work
    from masterqc.measure.options import MeasureOptions

    for var in ("MASTERQC_THREADS", "OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        monkeypatch.delenv(var, raising=False)  # whatever limit_threads sets is undone after the test
    work.limit_threads(1)
    try:
        assert os.environ["MASTERQC_THREADS"] == "1" and MeasureOptions().threads == 1
        blas = [p for p in threadpoolctl.threadpool_info() if p["user_api"] == "blas"]
        assert all(p["num_threads"] == 1 for p in blas)
    finally:
        work._BLAS_LIMIT.pop().restore_original_limits()


def test_worker_makes_the_ledger_row_the_parent_would(folder, tmp_path):
    """The measured result's ledger row is made in the worker: the same bytes as the parent's encoding,
    and the ledger reads it back as the result (judged keys and all)."""
    import zlib

    from masterqc.batch.ledger import Ledger, measurements_blob
    from masterqc.batch.specmap import spec_key
    from masterqc.batch.work import check_task
    from masterqc.measure.options import MeasureOptions
    from masterqc.spec.loader import load_spec

    _, root, spec = folder
    key = spec_key(load_spec(str(spec)), MeasureOptions())
    value = check_task({"path": str(root / "album" / "01.wav"), "spec_path": str(spec), "spec_key": key,
                        "out_dir": str(tmp_path), "stem": "one", "formats": ["json"], "layout": None,
                        "threads": 1, "durable": False})
    blob = value["measurements_z"]
    assert blob == measurements_blob(value["result"])
    assert json.loads(zlib.decompress(blob))["file"]["sha256"] == value["result"]["file"]["sha256"]
    with Ledger(tmp_path / "l.sqlite") as led:
        led.put_measurements("abc", "k", blob=blob)
        assert led.get_measurements("abc", "k") == value["result"]
    broken = check_task({"path": str(root / "album" / "04.wav"), "spec_path": str(spec), "spec_key": key,
                         "out_dir": str(tmp_path), "stem": "two", "formats": ["json"], "layout": None,
                         "threads": 1, "durable": False})
    assert broken["result"]["verdict"] == "error" and broken["measurements_z"] is not None  # why it cannot be read
