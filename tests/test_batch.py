"""End-to-end batch runs of ``masterqc check FOLDER``: a generated catalogue of 24 masters in
nested folders with broken files, a symbolic-link loop, hidden/temporary files and a hostile
file name; exit codes, index.html, summary.json, junit.xml (parsed with xml.etree), the
ledger's reuse (second run analyses nothing, one changed file is analysed alone), a dask
LocalCluster run against the local run, interruption and resume.

Signals: 997 Hz sines, L and R a quarter period apart (so no channel pair is identical).
EBU Tech 3341 (2023) Table 1 case 1: a stereo 1 kHz sine at -23 dBFS peak per channel reads
-23.0 LUFS; at 997 Hz BS.1770-5's K-weighting gain is the 0.691 dB its constant cancels, so a
stereo sine of peak P dBFS reads P LUFS (to well within 0.1 LU).
"""

from __future__ import annotations

import json
import os
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import soundfile as sf

from masterqc.batch import runner as runner_mod
from masterqc.batch.runner import BatchConfig, run_batch
from masterqc.cli import main

SR = 48000
SPEC = """\
spec_version: 1
name: Test album label
loudness:
  integrated: {target_lufs: -14.0, tolerance_lu: 1.0}
peaks:
  true_peak: {max_dbtp: -1.0}
release:
  pooled_loudness: {target_lufs: -14.0, tolerance_lu: 1.0}
  track_loudness_spread: {max_lu: 3.0}
  consistent_format: {}
"""
HOSTILE = "<img src=x onerror=y> \x07bell"
#: album_b (loudness spread, mixed rates) and misc (unreadable files); episodes/s01 holds 24-bit
#: episodes and 16-bit extras, and consistent_format checks bit depth by default
RELEASES_FAILED = 3


def tone(path, peak_dbfs, seconds=1.0, sr=SR, subtype="PCM_16", fmt=None):
    t = np.arange(int(seconds * sr)) / sr
    a = 10 ** (peak_dbfs / 20)
    x = np.stack([a * np.sin(2 * np.pi * 997 * t), a * np.cos(2 * np.pi * 997 * t)], axis=1)
    sf.write(path, x, sr, subtype=subtype, format=fmt)
    return x


def make_catalogue(root):
    """24 masters (+ things that must be skipped).  Returns {rel: expected verdict}."""
    exp = {}

    def put(rel, verdict, *args, **kw):
        p = os.path.join(root, rel)
        os.makedirs(os.path.dirname(p), exist_ok=True)
        tone(p, *args, **kw)
        exp[rel] = verdict

    for i in range(1, 7):
        put(f"album_a/{i:02d}.wav", "pass", -14.0 + 0.1 * i)
    put("album_b/01.wav", "pass", -14.0)
    put("album_b/02.wav", "fail", -8.0)          # 6 LU too loud
    put("album_b/03.wav", "pass", -14.5)
    put("album_b/04.wav", "pass", -13.5, sr=44100)  # mixes the release's sample rates
    put("album_b/05.wav", "fail", -20.0)         # 6 LU too quiet
    put("album_b/bonus/01.flac", "pass", -14.0, fmt="FLAC")
    put("album_b/bonus/02.aiff", "pass", -14.2, fmt="AIFF")
    for i in range(1, 5):
        put(f"episodes/s01/e{i:02d}.wav", "pass", -14.0, seconds=1.5, subtype="PCM_24")
    put("episodes/s01/extras/trailer.flac", "pass", -14.1, fmt="FLAC")
    put("episodes/s01/extras/" + HOSTILE + ".wav", "pass", -14.0)
    put("misc/take7.dat", "pass", -14.0, fmt="WAV")  # audio by content, not by extension
    put("misc/loud.wav", "fail", -0.5)               # true peak and loudness fail
    # broken: random bytes named .wav, an empty .wav, a WAV cut inside its header
    os.makedirs(os.path.join(root, "misc"), exist_ok=True)
    with open(os.path.join(root, "misc", "noise.wav"), "wb") as f:
        f.write(np.random.default_rng(7).bytes(3000))
    exp["misc/noise.wav"] = "error"
    open(os.path.join(root, "misc", "empty.wav"), "wb").close()
    exp["misc/empty.wav"] = "error"
    tone(os.path.join(root, "misc", "whole.wav"), -14.0)
    with open(os.path.join(root, "misc", "whole.wav"), "rb") as f:
        head = f.read(30)
    os.unlink(os.path.join(root, "misc", "whole.wav"))
    with open(os.path.join(root, "misc", "cut.wav"), "wb") as f:
        f.write(head)
    exp["misc/cut.wav"] = "error"
    # must be skipped
    tone(os.path.join(root, "album_a", ".hidden.wav"), -14.0)
    tone(os.path.join(root, "album_a", "06.wav.part"), -14.0, fmt="WAV")
    tone(os.path.join(root, "album_a", "~$lock.wav"), -14.0)
    os.makedirs(os.path.join(root, ".cache"))
    tone(os.path.join(root, ".cache", "x.wav"), -14.0)
    with open(os.path.join(root, "misc", "notes.txt"), "w") as f:
        f.write("liner notes, not audio\n")
    os.symlink("..", os.path.join(root, "misc", "loop"))            # a link loop
    os.symlink("../album_a", os.path.join(root, "misc", "again"))   # the same folder twice
    return exp


@pytest.fixture(scope="module")
def catalogue(tmp_path_factory):
    base = tmp_path_factory.mktemp("batch")
    root = base / "catalogue"
    root.mkdir()
    exp = make_catalogue(str(root))
    spec = base / "spec.yaml"
    spec.write_text(SPEC)
    return base, root, spec, exp


@pytest.fixture(scope="module")
def first_run(catalogue):
    base, root, spec, exp = catalogue
    out = base / "out"
    code = main(["check", str(root), "--spec", str(spec), "--out", str(out), "--format", "json",
                 "--jobs", "2", "--quiet"])
    # later runs in this module rewrite the run outputs: keep what the first run wrote
    snap = {"summary": load(out / "summary.json"), "junit": (out / "junit.xml").read_bytes(),
            "index": (out / "index.html").read_text(encoding="utf-8")}
    return code, out, snap


def load(path):
    with open(path, encoding="utf-8") as f:
        return json.load(f)


def by_rel(summary):
    return {f["rel"].split("/", 1)[1]: f for f in summary["files"]}


def test_first_run_verdicts_and_exit_code(catalogue, first_run):
    _, root, _, exp = catalogue
    code, out, snap = first_run
    assert code == 3  # unreadable files present: exit 3 wins (house choice, README exit-code table)
    s = snap["summary"]
    files = by_rel(s)
    assert set(files) == set(exp), "discovery must find exactly the 24 masters"
    assert len(files) == 24
    for rel, verdict in exp.items():
        assert files[rel]["verdict"] == verdict, (rel, files[rel]["first_problem"])
    assert s["counts"] == {"pass": 18, "warn": 0, "fail": 3, "error": 3, "files": 24, "analysed": 19, "reused": 5,
                           "not_analysed": 0, "measured": 19, "rejudged": 0, "releases": 4, "releases_failed": RELEASES_FAILED}
    # files of identical content (and spec) are analysed once; each still gets its own result
    assert sorted(r for r, f in files.items() if not f["analysed"]) == [
        "episodes/s01/e02.wav", "episodes/s01/e03.wav", "episodes/s01/e04.wav",
        "episodes/s01/extras/" + HOSTILE + ".wav", "misc/take7.dat"]
    dup = load(out / files["misc/take7.dat"]["outputs"]["json"])
    assert dup["file"]["path"].endswith("take7.dat") and dup["file"]["sha256"] == files["album_b/01.wav"]["sha256"]
    # Tech 3341 case 1 scaling: a stereo sine of peak P dBFS reads P LUFS
    assert files["album_b/02.wav"]["integrated_lufs"] == pytest.approx(-8.0, abs=0.05)
    assert files["album_b/bonus/02.aiff"]["integrated_lufs"] == pytest.approx(-14.2, abs=0.05)
    assert files["misc/take7.dat"]["integrated_lufs"] == pytest.approx(-14.0, abs=0.05)
    # a -0.5 dBFS sine is above a -1.0 dBTP ceiling whatever the overshoot at its abrupt start
    assert files["misc/loud.wav"]["true_peak_dbtp"] > -0.5 - 0.01
    assert {p["check"] for p in files["misc/loud.wav"]["problems"]} >= {"peaks.true_peak", "loudness.integrated"}
    # every readable file's report and result exist and stay inside the output folder
    real_out = os.path.realpath(out)
    for f in s["files"]:
        assert "json" in f["outputs"]
        for href in f["outputs"].values():
            p = os.path.realpath(os.path.join(out, href))
            assert p.startswith(real_out + os.sep) and os.path.isfile(p), href
    # skipped things are reported, not checked
    skipped = {os.path.basename(p["path"]): p["message"] for p in s["skipped_paths"]}
    assert "loop" in skipped and "again" in skipped
    # nothing half-written anywhere
    for dirpath, _, names in os.walk(out):
        assert not [n for n in names if n.startswith(".masterqc-") or n.endswith(".tmp")]


def test_summary_json_matches_its_published_schema(first_run, capsys):
    import jsonschema
    assert main(["runs", "schema"]) == 0
    schema = json.loads(capsys.readouterr().out)
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.validate(first_run[2]["summary"], schema)
    broken = json.loads(json.dumps(first_run[2]["summary"]))
    broken["files"][0]["verdict"] = "maybe"
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(broken, schema)


def test_error_rows_name_the_cause(first_run):
    _, out, snap = first_run
    files = by_rel(snap["summary"])
    for rel in ("misc/noise.wav", "misc/empty.wav", "misc/cut.wav"):
        f = files[rel]
        assert f["verdict"] == "error"
        assert rel.split("/")[-1] in f["first_problem"]
        assert "cannot be checked" in f["first_problem"]
        r = load(out / f["outputs"]["json"])
        assert r["verdict"] == "error" and r["findings"][0]["check"] == "file.read"


def test_release_checks(first_run):
    _, out, snap = first_run
    rel = {r["id"].split("/", 1)[1]: r for r in snap["summary"]["releases"]}
    # the default grouping (house choice): the top folder holding audio, its sub-folders counted in
    assert set(rel) == {"album_a", "album_b", "episodes/s01", "misc"}
    assert "catalogue/album_b/bonus/01.flac" in rel["album_b"]["files"]
    assert rel["album_b"]["measurements"]["track_count"] == 7
    assert rel["episodes/s01"]["measurements"]["track_count"] == 6
    a, b = rel["album_a"], rel["album_b"]
    assert a["verdict"] == "pass"
    assert a["measurements"]["track_count"] == 6
    # six equal-length tracks at -13.9 .. -13.4 LUFS: pooled = 10 log10(mean of energies)
    expect = 10 * np.log10(np.mean([10 ** ((-14.0 + 0.1 * i) / 10) for i in range(1, 7)]))
    assert a["measurements"]["pooled_integrated_lufs"] == pytest.approx(expect, abs=0.02)
    assert a["measurements"]["track_loudness_spread_lu"] == pytest.approx(0.5, abs=0.02)
    assert b["verdict"] == "fail"
    checks = {f["check"]: f for f in b["findings"]}
    assert checks["release.sample_rate"]["status"] == "fail"
    assert "44100 Hz" in checks["release.sample_rate"]["message"] and "48000 Hz" in checks["release.sample_rate"]["message"]
    assert checks["release.track_loudness_spread"]["status"] == "fail"
    assert checks["release.track_loudness_spread"]["measured"] == pytest.approx(12.0, abs=0.1)
    assert checks["release.channels"]["status"] == "pass"
    m = rel["misc"]["measurements"]
    assert m["track_count"] == 5 and m["unreadable_count"] == 3
    assert rel["misc"]["verdict"] == "error"


def test_junit_xml(first_run):
    _, out, snap = first_run
    top = ET.fromstring(snap["junit"])  # a standard XML parser must accept it
    assert top.tag == "testsuites"
    suites = {s.get("name"): s for s in top.findall("testsuite")}
    files = suites["masterqc.files"]
    cases = files.findall("testcase")
    assert len(cases) == 24 and files.get("tests") == "24"
    assert files.get("failures") == "3" and files.get("errors") == "3"
    by_name = {c.get("name").split("/", 1)[1]: c for c in cases}
    f = by_name["album_b/02.wav"].find("failure")
    assert f is not None and "integrated loudness" in f.get("message").lower() and "above the limit" in f.get("message")
    assert by_name["misc/noise.wav"].find("error") is not None
    assert by_name["album_a/01.wav"].find("failure") is None and by_name["album_a/01.wav"].find("error") is None
    loud = by_name["misc/loud.wav"].find("failure")
    assert "[FAIL] peaks.true_peak" in loud.text or "true peak" in loud.text
    hostile = [n for n in by_name if "onerror" in n]
    assert len(hostile) == 1 and "\\x07" in hostile[0]  # a control character is spelled out, not written raw
    rel = suites["masterqc.releases"]
    assert {c.get("name").split("/", 1)[1] for c in rel.findall("testcase") if c.find("failure") is not None} == {"album_b", "episodes/s01"}  # s01 mixes 24- and 16-bit files


def test_index_html(first_run):
    _, out, snap = first_run
    html = snap["index"]
    assert "<img src=x" not in html and "&lt;img src=x onerror=y&gt;" in html  # autoescaped
    assert "http://" not in html.replace('xmlns="http://www.w3.org/2000/svg"', "") and "https://" not in html
    for key in ("verdict", "file", "loudness", "peak"):
        assert f'data-key="{key}"' in html
    # counts by verdict and worst-first order without JavaScript
    assert '<span class="n">3</span>FAIL' in html and '<span class="n">18</span>PASS' in html
    body = html.split('id="file-table"', 1)[1]
    first_rows = body.split("<tr class=\"row-")[1:]
    order = [r.split('"', 1)[0] for r in first_rows]
    assert order == sorted(order, key=["error", "fail", "warn", "pass"].index)
    assert 'id="releases"' in html and html.index('id="releases"') < html.index('id="file-table"')
    assert "--pass:" in html  # the per-file report's stylesheet is inlined
    style = html.split("<style>", 1)[1].split("</style>", 1)[0]
    assert '"DejaVu Sans"' in style and "&#34;" not in style  # CSS inlined verbatim, not HTML-escaped


def test_a_spec_change_that_moves_only_limits_reads_no_audio(catalogue, first_run, tmp_path, monkeypatch):
    """Measure once, judge many (house choice): the ledger keys measurements by content and measurement
    settings, not by spec, so a spec that moves only a limit re-judges every file from the ledger."""
    base, root, spec, exp = catalogue
    _, out, _ = first_run
    import masterqc.measure.engine as engine
    monkeypatch.setattr(engine, "open_stream", lambda *a, **k: pytest.fail(f"audio was read: {a}"))
    strict = tmp_path / "strict.yaml"  # -14 +- 1 LUFS becomes -14 +- 0.2 LUFS: only a limit moves
    strict.write_text(SPEC.replace("integrated: {target_lufs: -14.0, tolerance_lu: 1.0}",
                                   "integrated: {target_lufs: -14.0, tolerance_lu: 0.2}"))
    import sqlite3
    ledger = tmp_path / "ledger.sqlite"  # a copy of the first run's ledger (the other tests count its runs)
    with sqlite3.connect(out / "masterqc-ledger.sqlite") as src, sqlite3.connect(ledger) as dst:
        src.backup(dst)
    o = run_batch(BatchConfig(roots=[str(root)], spec_path=str(strict), out_dir=str(tmp_path / "out"),
                              ledger_path=str(ledger), formats=("json",), jobs=1, quiet=True))
    c = o.summary["counts"]
    assert (c["measured"], c["rejudged"]) == (0, 24)  # identical files and unreadable ones too: stored outcomes
    files = by_rel(o.summary)
    assert {f["how"] for f in files.values()} <= {"rejudged", "identical", None}
    html = (tmp_path / "out" / "index.html").read_text(encoding="utf-8")
    assert "0 measured, 24 re-judged from stored measurements" in html


def test_second_run_analyses_nothing_then_one_change(catalogue, first_run, tmp_path):
    base, root, spec, exp = catalogue
    _, out, _ = first_run
    cfg = dict(roots=[str(root)], spec_path=str(spec), out_dir=str(out), formats=("json",), jobs=1, quiet=True)
    second = run_batch(BatchConfig(**cfg))
    assert second.exit_code == 3
    c = second.summary["counts"]
    # by construction: the catalogue's 24 masters, of which 19 distinct contents are analysed and 5 reused
    # on the first run (test_first_run_verdicts_and_exit_code)
    assert (c["analysed"], c["reused"], c["rejudged"]) == (0, 24, 24)  # the stored measurements judged again
    assert second.summary["changes"] == {"new": [], "fixed": [], "newly_failing": [], "gone": []}
    # fix the too-loud track: exactly that file is analysed again, and it counts as fixed
    tone(os.path.join(root, "album_b", "02.wav"), -14.3)
    third = run_batch(BatchConfig(**cfg))
    files = by_rel(third.summary)
    assert [r for r, f in files.items() if f["analysed"]] == ["album_b/02.wav"]
    assert files["album_b/02.wav"]["verdict"] == "pass" and files["album_b/02.wav"]["change"] == "fixed"
    assert [x.split("/", 1)[1] for x in third.summary["changes"]["fixed"]] == ["album_b/02.wav"]
    import jsonschema
    from masterqc.batch.summary_schema import summary_schema
    jsonschema.validate(third.summary, summary_schema())  # with a previous run and changes
    # break a passing one: exactly that file, newly failing
    tone(os.path.join(root, "album_a", "03.wav"), -3.0)
    fourth = run_batch(BatchConfig(**cfg))
    files = by_rel(fourth.summary)
    assert [r for r, f in files.items() if f["analysed"]] == ["album_a/03.wav"]
    ch = fourth.summary["changes"]
    assert ch["fixed"] == [] and [x.split("/", 1)[1] for x in ch["newly_failing"]] == ["album_a/03.wav"]
    html = (out / "index.html").read_text(encoding="utf-8")
    assert "Newly failing (1)" in html and "Fixed (0)" in html and "album_a/03.wav" in html.split("Newly failing")[1]
    # the runs command lists the three runs and one file's history
    import io
    import contextlib
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(["runs", "--out", str(out), "--json", "list"]) == 0
    runs = json.loads(buf.getvalue())
    assert [r["run_id"] for r in runs] == [fourth.run_id, third.run_id, second.run_id, second.run_id - 1]
    assert [r["analysed"] for r in runs] == [1, 1, 0, 19]
    assert [r["status"] for r in runs] == ["complete"] * 4
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(["runs", "--out", str(out), "--json", "history", str(root / "album_b" / "02.wav")]) == 0
    hist = json.loads(buf.getvalue())
    assert [h["verdict"] for h in hist] == ["fail", "fail", "pass", "pass"]
    assert [h["analysed"] for h in hist] == [1, 0, 1, 0]
    # by content: the first 12 hex digits of the duplicated tone find all three masters holding it
    sha = by_rel(second.summary)["misc/take7.dat"]["sha256"]
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        assert main(["runs", "history", sha[:12], "--out", str(out), "--json"]) == 0
    rows = json.loads(buf.getvalue())
    assert {r["rel"].split("/", 1)[1] for r in rows} == {"album_b/01.wav", "episodes/s01/extras/" + HOSTILE + ".wav",
                                                         "misc/take7.dat"}
    assert len(rows) == 3 * 4  # in each of the four runs
    # restore for the dask comparison
    tone(os.path.join(root, "album_b", "02.wav"), -8.0)
    tone(os.path.join(root, "album_a", "03.wav"), -14.0 + 0.1 * 3)


def test_dask_local_cluster_matches_local_run(catalogue, first_run, tmp_path):
    distributed = pytest.importorskip("distributed")
    base, root, spec, exp = catalogue
    local = by_rel(first_run[2]["summary"])
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None) as cl:
        outcome = run_batch(BatchConfig(roots=[str(root)], spec_path=str(spec), out_dir=str(tmp_path / "dask"),
                                        formats=("json",), scheduler=cl.scheduler_address, quiet=True))
    assert outcome.exit_code == 3
    assert outcome.summary["run"]["backend"].startswith("dask cluster")
    remote = by_rel(outcome.summary)
    assert set(remote) == set(local)
    assert outcome.summary["counts"]["analysed"] == 19  # by construction: the catalogue's 19 distinct contents
    for rel in local:
        assert remote[rel]["verdict"] == local[rel]["verdict"], rel
        assert remote[rel]["integrated_lufs"] == local[rel]["integrated_lufs"], rel
        assert remote[rel]["true_peak_dbtp"] == local[rel]["true_peak_dbtp"], rel
        assert remote[rel]["sha256"] == local[rel]["sha256"], rel


def test_interrupted_run_resumes(tmp_path, monkeypatch):
    root = tmp_path / "in"
    root.mkdir()
    for i in range(5):
        tone(root / f"t{i}.wav", -14.0 - 0.2 * i)
    spec = tmp_path / "spec.yaml"
    spec.write_text(SPEC)
    out = tmp_path / "out"
    calls = {"n": 0}
    real = runner_mod.check_task

    def flaky(task):
        calls["n"] += 1
        if calls["n"] == 3:
            raise KeyboardInterrupt  # as Ctrl-C during the third file
        return real(task)

    monkeypatch.setattr(runner_mod, "check_task", flaky)
    cfg = BatchConfig(roots=[str(root)], spec_path=str(spec), out_dir=str(out), formats=("json",), jobs=1, quiet=True)
    with pytest.raises(KeyboardInterrupt):
        run_batch(cfg)
    assert not (out / "index.html").exists() and not (out / "summary.json").exists()
    leftovers = [n for _, _, names in os.walk(out) for n in names if n.startswith(".masterqc-")]
    assert leftovers == []
    monkeypatch.setattr(runner_mod, "check_task", real)
    again = run_batch(BatchConfig(roots=[str(root)], spec_path=str(spec), out_dir=str(out), formats=("json", "html"),
                                  jobs=1, quiet=True))
    c = again.summary["counts"]
    assert (c["analysed"], c["reused"], c["pass"]) == (3, 2, 5)
    # the two reused results get their HTML reports rendered from the ledger, without analysis
    for f in again.summary["files"]:
        page = (out / f["outputs"]["html"]).read_text(encoding="utf-8")
        assert os.path.basename(f["path"]) in page and "PASS" in page
    from masterqc.batch.ledger import Ledger
    with Ledger(again.ledger_path) as led:
        assert [r["status"] for r in led.runs()] == ["complete", "interrupted"]


def test_index_rows_list_every_failure_worst_first(first_run):
    """misc/loud.wav fails loudness AND true peak: its index row, its junit message and its
    index.csv row name both, not the first alone."""
    _, out, snap = first_run
    files = by_rel(snap["summary"])
    loud = files["misc/loud.wav"]
    fails = [p for p in loud["problems"] if p["status"] == "fail"]
    assert {p["check"] for p in fails} >= {"peaks.true_peak", "loudness.integrated"}
    html = snap["index"]
    row = next(r for r in html.split("<tr class=\"row-")[1:] if "misc/<wbr>loud.wav" in r)
    for p in fails:
        assert p["message"].split(" ")[0] in row
        assert row.count('<span class="word">FAIL</span>') == len(fails)
    top = ET.fromstring(snap["junit"])
    case = next(c for c in top.iter("testcase") if c.get("name").endswith("misc/loud.wav"))
    msg = case.find("failure").get("message")
    for p in fails:
        assert p["message"] in msg
    # error rows: a readable summary, never a Python bytes dump
    noise = next(r for r in html.split("<tr class=\"row-")[1:] if "misc/<wbr>noise.wav" in r)
    assert "b&#39;" not in noise and "\\x" not in noise and "first bytes" not in noise


def test_index_csv_matches_summary_json(first_run):
    import csv
    _, out, snap = first_run
    with open(out / "index.csv", encoding="utf-8", newline="") as f:
        rows = list(csv.DictReader(f))
    summary = load(out / "summary.json")
    files = {f["rel"]: f for f in summary["files"]}
    assert len(rows) == len(files) == 24
    order = [r["verdict"] for r in rows]
    assert order == sorted(order, key=["error", "fail", "warn", "pass"].index)   # worst first
    for r in rows:
        f = files[r["file"]]
        assert r["verdict"] == f["verdict"] and r["release"] == (f["release"] or "")
        assert int(r["fail_count"]) == sum(p["status"] == "fail" for p in f["problems"])
        assert int(r["error_count"]) == sum(p["status"] == "error" for p in f["problems"])
        if f["integrated_lufs"] is None:
            assert r["integrated_lufs"] == ""
        else:
            # index.csv writes 0.1 LU and 0.001 s (house choice, masterqc/exports.py): half a step either way
            assert float(r["integrated_lufs"]) == pytest.approx(f["integrated_lufs"], abs=0.05)
        if f["duration_s"] is not None:
            assert float(r["duration_s"]) == pytest.approx(f["duration_s"], abs=5e-4)
        for p in f["problems"]:
            assert p["message"] in r["problems"]
    loud = next(r for r in rows if r["file"].endswith("misc/loud.wav"))
    assert loud["problems"].startswith("FAIL ") and loud["problems"].count("FAIL ") >= 2
    assert next(r for r in rows if r["file"].endswith("album_a/01.wav"))["duration"] == "0:01"
