"""Batch pieces: pooled release loudness against pyebur128, discovery, safe output names,
spec maps and spec keys, the ledger under overlapping runs, release grouping and judging,
progress lines and CLI errors.
"""

from __future__ import annotations

import io
import json
import os
import sqlite3
import threading

import numpy as np
import pyebur128 as eb
import pytest
import soundfile as sf

from masterqc.batch.discover import discover, sniff_audio
from masterqc.batch.ledger import Ledger
from masterqc.batch.names import NameAllocator, inside, safe_component
from masterqc.batch.progress import BatchProgress
from masterqc.batch.releases import parse_release_mode, release_of
from masterqc.batch.runner import BatchConfig, run_batch
from masterqc.batch.specmap import glob_regex, load_spec_map
from masterqc.cli import main
from masterqc.errors import SpecError

SPEC = """\
spec_version: 1
name: Unit album label
loudness:
  integrated: {min_lufs: -30.0, max_lufs: -5.0}
release:
  pooled_loudness: {target_lufs: -16.0, tolerance_lu: 2.0}
  track_loudness_spread: {max_lu: 20.0}
  consistent_format: {severity: warn}
"""


def write(path, x, sr=48000, subtype="PCM_24", fmt=None):
    os.makedirs(os.path.dirname(path), exist_ok=True)
    sf.write(path, x, sr, subtype=subtype, format=fmt)
    return x


def noise(rng, seconds, level_dbfs, sr=48000, ch=2):
    x = rng.standard_normal((int(seconds * sr), ch))
    return x / np.sqrt(np.mean(x ** 2)) * 10 ** (level_dbfs / 20)


def spec_file(tmp_path, text=SPEC, name="spec.yaml"):
    p = tmp_path / name
    p.write_text(text)
    return p


def ebur128_state(x, sr):
    st = eb.R128State(x.shape[1], sr, eb.MeasurementMode.MODE_I)
    for i, ch in enumerate((eb.ChannelType.LEFT, eb.ChannelType.RIGHT)[:x.shape[1]]):
        st.set_channel(i, ch)
    st.add_frames(np.ascontiguousarray(x, dtype=np.float64).ravel(), x.shape[0])
    return st


# ---------------------------------------------------------------- pooled release loudness

def test_pooled_release_loudness_matches_pyebur128_global_multiple(tmp_path, rng):
    """BS.1770-5 gates the blocks of a programme together; pyebur128's get_loudness_global_multiple
    does the same over several meter states.  Tracks differ in level and length, one holds a quiet
    passage far below the others, one is at 44.1 kHz."""
    folder = tmp_path / "release" / "album"
    tracks = {
        "01.wav": (np.concatenate([noise(rng, 3.0, -12.0), noise(rng, 2.0, -38.0)]), 48000),
        "02.wav": (noise(rng, 4.0, -20.0), 48000),
        "03.wav": (noise(rng, 2.0, -9.0), 48000),
        "04.wav": (noise(rng, 2.5, -26.0, sr=44100), 44100),
    }
    states = []
    for name, (x, sr) in tracks.items():
        write(str(folder / name), x, sr=sr, subtype="FLOAT")
        states.append(ebur128_state(x, sr))
    want = eb.get_loudness_global_multiple(states)
    out = run_batch(BatchConfig(roots=[str(tmp_path / "release")], spec_path=str(spec_file(tmp_path)),
                                out_dir=str(tmp_path / "out"), formats=("json",), jobs=1, quiet=True))
    (rel,) = out.summary["releases"]
    m = rel["measurements"]
    assert m["track_count"] == 4
    assert m["pooled_integrated_lufs"] == pytest.approx(want, abs=0.1)
    own = [f["integrated_lufs"] for f in out.summary["files"]]
    # each track alone agrees with pyebur128's single-state figure as well
    for f, st in zip(sorted(out.summary["files"], key=lambda f: f["rel"]), states):
        assert f["integrated_lufs"] == pytest.approx(st.get_loudness_global() if hasattr(st, "get_loudness_global")
                                                     else eb.get_loudness_global(st), abs=0.1)
    assert m["track_loudness_spread_lu"] == pytest.approx(max(own) - min(own), abs=1e-12)
    checks = {f["check"]: f for f in rel["findings"]}
    assert checks["release.pooled_loudness"]["status"] in ("pass", "fail")
    assert checks["release.sample_rate"]["status"] == "warn"  # severity warn: a mixed release warns
    assert checks["release.bit_depth"]["status"] == "pass"


# ---------------------------------------------------------------- discovery

def test_sniff_recognises_containers_by_their_bytes():
    assert sniff_audio(b"RIFF\x00\x00\x00\x00WAVEfmt ") == "wav"
    assert sniff_audio(b"RF64\xff\xff\xff\xffWAVEds64") == "wav"
    assert sniff_audio(b"FORM\x00\x00\x00\x00AIFCFVER") == "aiff"
    assert sniff_audio(b"fLaC\x00\x00\x00\x22") == "flac"
    assert sniff_audio(b"ID3\x04\x00\x00\x00\x00\x00\x00") is None  # decided by sniff_file
    assert sniff_audio(b"RIFF\x00\x00\x00\x00AVI LIST") is None


def test_discover_by_content_skips_hidden_temp_and_loops(tmp_path, rng):
    root = tmp_path / "in"
    x = noise(rng, 0.2, -20.0)
    write(str(root / "a" / "song.wav"), x)
    write(str(root / "a" / "noext"), x, fmt="WAV")                 # audio without an extension
    write(str(root / "b" / "take.flac"), x, fmt="FLAC", subtype="PCM_16")
    flac = (root / "b" / "take.flac").read_bytes()
    body = b"\x00" * 20  # an ID3v2.4 tag of 20 bytes (synchsafe size) in front of the FLAC stream
    (root / "b" / "tagged.bin").write_bytes(b"ID3\x04\x00\x00\x00\x00\x00\x14" + body + flac)
    (root / "b" / "notes.txt").write_text("not audio")
    (root / "b" / "bad.aiff").write_bytes(b"garbage")                # named as audio: kept (error row later)
    write(str(root / ".hidden" / "x.wav"), x)
    write(str(root / "a" / ".x.wav"), x)
    write(str(root / "a" / "y.wav.part"), x, fmt="WAV")
    write(str(root / "a" / "y.wav~"), x, fmt="WAV")
    os.symlink("..", root / "a" / "up")
    os.symlink(str(root / "nowhere"), root / "a" / "dangling.wav")
    d = discover([str(root)])
    assert [f.rel for f in d.files] == ["a/noext", "a/song.wav", "b/bad.aiff", "b/tagged.bin", "b/take.flac"]
    assert {f.rel: f.by_content for f in d.files} == {"a/noext": True, "a/song.wav": True, "b/bad.aiff": False,
                                                       "b/take.flac": True, "b/tagged.bin": True}
    msgs = {os.path.basename(p.path): p.message for p in d.problems}
    assert "loop" in msgs["up"] and "broken symbolic link" == msgs["dangling.wav"]
    # an explicit non-audio file is a problem, an excluded folder is not entered
    d2 = discover([str(root / "b" / "notes.txt"), str(root)], exclude=[str(root / "a")])
    assert [p.path for p in d2.problems][0].endswith("notes.txt")
    assert all(not f.rel.startswith("a/") for f in d2.files)


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads folders whatever their permissions")
def test_discover_reports_unreadable_folder(tmp_path, rng):
    root = tmp_path / "in"
    write(str(root / "ok" / "a.wav"), noise(rng, 0.2, -20.0))
    locked = root / "locked"
    locked.mkdir()
    locked.chmod(0)
    try:
        d = discover([str(root)])
    finally:
        locked.chmod(0o755)
    assert [f.rel for f in d.files] == ["ok/a.wav"]
    assert any(p.path.endswith("locked") and "cannot be listed" in p.message for p in d.problems)


# ---------------------------------------------------------------- names

@pytest.mark.parametrize("name,want", [
    ("..", "_"), ("../../etc/passwd", "_.._etc_passwd"), ("a b?.wav", "a_b_.wav"), ("", "_"),
    ("CON", "_CON"), ("nul.txt", "_nul.txt"), ("line\nbreak\x00", "line_break_"), (".hidden", "hidden"),
    ("Ünïcode-名前", "Ünïcode-名前"),
])
def test_safe_component(name, want):
    got = safe_component(name)
    assert got == want
    assert "/" not in got and "\\" not in got and not got.startswith(".")


def test_name_allocator_and_containment(tmp_path):
    alloc = NameAllocator()
    assert alloc.allocate(["x", "a"], "Mix") == ("x/a", "Mix")
    assert alloc.allocate(["x", "a"], "mix") == ("x/a", "mix-2")  # case-folding file systems
    assert alloc.allocate(["x", "a"], "m?x") == ("x/a", "m_x")
    out = tmp_path / "out"
    (out / "files").mkdir(parents=True)
    os.symlink(str(tmp_path), out / "files" / "escape")
    assert inside(str(out), str(out / "files" / "a"))
    assert not inside(str(out), str(out / "files" / "escape" / "x"))
    assert not inside(str(out), str(tmp_path / "outside"))


# ---------------------------------------------------------------- spec maps

@pytest.mark.parametrize("pattern,path,hit", [
    ("**", "a/b/c.wav", True), ("*.wav", "a.wav", True), ("*.wav", "a/b.wav", False),
    ("albums/**", "albums/x/1.wav", True), ("albums/**", "podcasts/1.wav", False),
    ("**/bonus/*", "a/b/bonus/1.wav", True), ("**/bonus/*", "bonus/1.wav", True),
    ("s0?/*.wav", "s01/e.wav", True), ("s0[12]/*", "s03/e.wav", False), ("s0[!3]/*", "s01/e.wav", True),
])
def test_glob_regex(pattern, path, hit):
    assert bool(glob_regex(pattern).match(path)) is hit


def test_spec_map_routes_files_and_reports_unmatched(tmp_path, rng):
    spec_file(tmp_path, SPEC, "album.yaml")
    spec_file(tmp_path, SPEC.replace("min_lufs: -30.0", "min_lufs: -8.0").replace("Unit album", "Unit speech"),
              "speech.yaml")
    mp = spec_file(tmp_path, "masterqc_spec_map: 1\nreleases: root\nspecs:\n"
                             "  - {match: 'talk/**', spec: speech.yaml}\n"
                             "  - {match: 'music/**', spec: album.yaml}\n", "map.yaml")
    root = tmp_path / "in"
    x = noise(rng, 1.0, -20.0)
    write(str(root / "talk" / "ep1.wav"), x)
    write(str(root / "music" / "t1.wav"), x)
    write(str(root / "other" / "x.wav"), x)
    out = run_batch(BatchConfig(roots=[str(root)], spec_path=str(mp), out_dir=str(tmp_path / "out"),
                                formats=("json",), jobs=1, quiet=True))
    files = {f["rel"]: f for f in out.summary["files"]}
    assert files["in/talk/ep1.wav"]["spec"] == "Unit speech label" and files["in/talk/ep1.wav"]["verdict"] == "fail"
    assert files["in/music/t1.wav"]["spec"] == "Unit album label" and files["in/music/t1.wav"]["verdict"] == "pass"
    assert files["in/other/x.wav"]["verdict"] == "error"
    assert "no rule of the spec map" in files["in/other/x.wav"]["first_problem"]
    assert [r["id"] for r in out.summary["releases"]] == ["in"]  # releases: root, from the map
    assert out.summary["releases"][0]["mixed_specs"] is True


def test_spec_map_errors_name_file_and_key(tmp_path):
    bad = spec_file(tmp_path, "masterqc_spec_map: 1\nspecs:\n  - {match: '**', spec: missing.yaml}\nextra: 1\n",
                    "map.yaml")
    with pytest.raises(SpecError) as e:
        load_spec_map(str(bad))
    text = str(e.value)
    assert "missing.yaml" in text and "extra" in text


def test_editing_an_extends_base_rejudges_its_files(tmp_path, rng):
    """A base spec edit that moves a limit re-judges the stored measurements (no re-analysis) and the
    verdict follows the new limit (house choice: measurements keyed by content and measurement settings)."""
    base = spec_file(tmp_path, SPEC, "base.yaml")
    child = spec_file(tmp_path, "spec_version: 1\nname: Child\nextends: base.yaml\n", "child.yaml")
    root = tmp_path / "in"
    write(str(root / "a.wav"), noise(rng, 1.0, -20.0))
    cfg = BatchConfig(roots=[str(root)], spec_path=str(child), out_dir=str(tmp_path / "out"), formats=("json",),
                      jobs=1, quiet=True)
    assert run_batch(cfg).summary["counts"]["analysed"] == 1
    assert run_batch(cfg).summary["counts"]["analysed"] == 0
    base.write_text(SPEC.replace("max_lufs: -5.0", "max_lufs: -25.0"))  # only the base changes
    third = run_batch(cfg)
    assert (third.summary["counts"]["analysed"], third.summary["counts"]["rejudged"]) == (0, 1)
    assert third.summary["files"][0]["verdict"] == "fail" and third.summary["files"][0]["how"] == "rejudged"
    assert third.summary["changes"]["newly_failing"] == ["in/a.wav"]


# ---------------------------------------------------------------- ledger

def test_ledger_is_wal_and_overlapping_runs_both_complete(tmp_path, rng):
    spec = spec_file(tmp_path)
    ledger = tmp_path / "shared.sqlite"
    for k in ("one", "two"):
        for i in range(3):
            write(str(tmp_path / k / f"{i}.wav"), noise(rng, 1.0, -20.0 - i - (k == "two")))
    outcomes, errors = {}, []

    def go(k):
        try:
            outcomes[k] = run_batch(BatchConfig(roots=[str(tmp_path / k)], spec_path=str(spec),
                                                out_dir=str(tmp_path / f"out-{k}"), formats=("json",), jobs=1,
                                                ledger_path=str(ledger), quiet=True))
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)

    threads = [threading.Thread(target=go, args=(k,)) for k in ("one", "two")]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    assert {k: o.summary["counts"]["analysed"] for k, o in outcomes.items()} == {"one": 3, "two": 3}
    with sqlite3.connect(ledger) as db:
        assert db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert db.execute("SELECT COUNT(*) FROM measurements").fetchone()[0] == 6  # by construction: 2 folders x 3 files
        assert [r[0] for r in db.execute("SELECT status FROM runs ORDER BY run_id")] == ["complete", "complete"]
    with Ledger(ledger) as led:
        assert len(led.runs()) == 2


def test_ledger_refuses_a_file_that_is_not_a_database(tmp_path):
    from masterqc.batch.ledger import LedgerError
    p = tmp_path / "x.sqlite"
    p.write_bytes(b"this is not an SQLite database at all" * 10)
    with pytest.raises(LedgerError, match="x.sqlite"):
        Ledger(p)


# ---------------------------------------------------------------- releases

def test_release_grouping_modes():
    assert parse_release_mode("depth:2") == ("depth", 2)
    with pytest.raises(ValueError, match="folder, root, depth:N, none"):
        parse_release_mode("albums")
    rel = "label/album/disc1/01.wav"
    assert release_of("in", rel, ("folder", 0)) == "in/label/album/disc1"
    assert release_of("in", rel, ("root", 0)) == "in"
    assert release_of("in", rel, ("depth", 2)) == "in/label/album"
    assert release_of("in", "single.wav", ("depth", 2)) == "in"
    assert release_of("in", rel, ("none", 0)) is None


def test_sub_folder_joins_its_parents_release_by_default():
    """House choice: the top folder holding audio is the release; bonus/ and alternates/ below it
    count into it; a folder with no audio of its own (label/) leaves its album folders apart."""
    from masterqc.batch.releases import DEFAULT_RELEASE_MODE, audio_folders
    rels = ["label/album_a/01.wav", "label/album_a/02.wav", "label/album_a/bonus/03.wav",
            "label/album_a/alternates/takes/04.wav", "label/album_b/01.wav", "label/album_b/extra/02.wav"]
    have = audio_folders(rels)
    mode = parse_release_mode(DEFAULT_RELEASE_MODE)
    assert mode == ("top", 0)
    got = {r: release_of("in", r, mode, have) for r in rels}
    assert got == {"label/album_a/01.wav": "in/label/album_a", "label/album_a/02.wav": "in/label/album_a",
                   "label/album_a/bonus/03.wav": "in/label/album_a",
                   "label/album_a/alternates/takes/04.wav": "in/label/album_a",
                   "label/album_b/01.wav": "in/label/album_b", "label/album_b/extra/02.wav": "in/label/album_b"}
    # folder mode keeps the old grouping: bonus/ is a release of its own
    assert release_of("in", "label/album_a/bonus/03.wav", ("folder", 0), have) == "in/label/album_a/bonus"
    # audio in the folder argument itself: everything below joins it (depth:1 splits it again)
    assert release_of("in", "album_c/01.wav", mode, audio_folders(["x.wav", "album_c/01.wav"])) == "in"
    assert release_of("in", "album_c/01.wav", ("depth", 1)) == "in/album_c"


def test_release_judge_analytic():
    from masterqc.judge.release import judge
    from masterqc.spec.sections.release import Section
    sec = Section.model_validate({"pooled_loudness": {"target_lufs": -14.0, "tolerance_lu": 1.0},
                                  "track_loudness_spread": {"max_lu": 3.0},
                                  "consistent_format": {"channels": False}, "track_count": {"min_count": 3}})
    m = {"track_count": 2, "unreadable_count": 0, "pooled_integrated_lufs": -15.06,
         "track_loudness_spread_lu": 3.04, "sample_rates_hz": [48000], "sample_formats": ["24-bit integer", "16-bit integer"],
         "channel_counts": [1, 2]}
    got = {f.check: f for f in judge(sec, m)}
    assert got["release.track_count"].status == "fail"
    # judged at the 0.1 LU shown (masterqc.judge.core): -15.06 is shown as -15.1, 0.1 LU below -15.0
    assert got["release.pooled_loudness"].status == "fail"
    assert got["release.pooled_loudness"].miss == pytest.approx(0.1, abs=1e-9)
    assert got["release.track_loudness_spread"].status == "pass"  # 3.04 is shown and judged as 3.0
    assert got["release.sample_rate"].status == "pass"
    assert got["release.bit_depth"].status == "fail" and "16-bit integer" in got["release.bit_depth"].message
    assert "release.channels" not in got


def test_release_section_refuses_unknown_keys(tmp_path):
    from masterqc.spec.loader import load_spec
    p = spec_file(tmp_path, "spec_version: 1\nname: X\nrelease:\n  pooled_loudnes: {target_lufs: -14, tolerance_lu: 1}\n")
    with pytest.raises(SpecError, match="pooled_loudnes"):
        load_spec(p)


# ---------------------------------------------------------------- progress and CLI

def test_progress_plain_and_live_lines():
    buf = io.StringIO()
    p = BatchProgress(2, 200, stream=buf, live=False)
    p.file_done("in/a.wav", "pass", 3600.0, 100, True)
    p.file_done("in/b.wav", "fail", 10.0, 100, False)
    assert buf.getvalue().splitlines() == ["[1/2] PASS  in/a.wav (checked)", "[2/2] FAIL  in/b.wav (reused)"]
    st = p.stats()
    assert st["audio_hours"] == pytest.approx(1.0) and st["eta_s"] == pytest.approx(0.0)
    live = io.StringIO()
    q = BatchProgress(4, 400, stream=live, live=True)
    q.file_done("x", "pass", 60.0, 100, True)
    text = live.getvalue()
    q.close()
    assert text.startswith("\r1/4 files") and "x real time" in text and "elapsed 0:00:0" in text and "ETA" in text
    assert live.getvalue().endswith("\r\033[K")  # the live line is cleared at the end
    quiet = io.StringIO()
    BatchProgress(1, 1, stream=quiet, quiet=True).file_done("x", "pass", 1.0, 1, True)
    assert quiet.getvalue() == ""


def test_progress_lines_give_every_reason_worst_first():
    findings = [{"check": "a", "status": "pass", "message": "fine"},
                {"check": "b", "status": "warn", "message": "loudness range 21 LU is above 20 LU"},
                {"check": "c", "status": "fail", "message": "integrated -8.0 LUFS is 5.0 LU too loud"},
                {"check": "d", "status": "fail", "message": "true peak +0.4 dBTP is above -1.0 dBTP"}]
    buf = io.StringIO()
    BatchProgress(1, 100, stream=buf, live=False).file_done("in/b.wav", "fail", 10.0, 100, True, problems=findings)
    assert buf.getvalue().splitlines() == ["[1/1] FAIL  in/b.wav (checked)",
                                           "      FAIL  integrated -8.0 LUFS is 5.0 LU too loud",
                                           "      FAIL  true peak +0.4 dBTP is above -1.0 dBTP",
                                           "      WARN  loudness range 21 LU is above 20 LU"]
    live = io.StringIO()
    q = BatchProgress(2, 200, stream=live, live=True)
    q.file_done("in/b.wav", "fail", 10.0, 100, True, problems=findings)
    q.close()
    text = live.getvalue()
    assert "FAIL  in/b.wav\n" in text and "true peak +0.4 dBTP" in text   # printed above the live line


def test_cli_errors_before_any_file_is_touched(tmp_path, rng, capsys):
    root = tmp_path / "in"
    write(str(root / "a.wav"), noise(rng, 0.5, -20.0))
    bad = spec_file(tmp_path, "spec_version: 1\nname: X\nrelease:\n  track_loudness_spread: {max_db: 3}\n")
    out = tmp_path / "out"
    assert main(["check", str(root), "--spec", str(bad), "--out", str(out), "--quiet"]) == 2
    assert not out.exists()
    good = spec_file(tmp_path)
    assert main(["check", str(root), "--spec", str(good), "--out", str(out), "--jobs", "0", "--quiet"]) == 2
    assert main(["check", str(root), "--spec", str(good), "--out", str(out), "--releases", "albums", "--quiet"]) == 2
    assert main(["runs", "--out", str(tmp_path / "nothing"), "list"]) == 2
    assert "no run ledger" in capsys.readouterr().err


def test_release_failure_alone_gives_exit_1_and_gone_files_are_listed(tmp_path, rng, capsys):
    root = tmp_path / "in"
    write(str(root / "album" / "01.wav"), noise(rng, 1.0, -20.0))
    write(str(root / "album" / "02.wav"), noise(rng, 1.0, -20.0, sr=44100), sr=44100)
    spec = spec_file(tmp_path, SPEC.replace("consistent_format: {severity: warn}", "consistent_format: {}")
                     .replace("tolerance_lu: 2.0", "tolerance_lu: 8.0"))
    out = tmp_path / "out"
    args = ["check", str(root), "--spec", str(spec), "--out", str(out), "--format", "json", "--jobs", "1"]
    assert main(args) == 1  # both files pass; the release mixes sample rates
    printed = capsys.readouterr().out
    assert "2 files: 0 fail, 0 error, 0 warn, 2 pass" in printed and "1 failing" in printed
    assert main(args + ["--releases", "none", "--quiet"]) == 0
    os.unlink(root / "album" / "02.wav")
    assert main(args + ["--quiet"]) == 0
    import json
    s = json.loads((out / "summary.json").read_text())
    assert s["changes"]["gone"] == ["in/album/02.wav"]


def test_unreadable_folder_is_a_problem_not_a_stop(tmp_path, rng, monkeypatch):
    """The same as a folder without read permission, for a test run as root: listing raises EACCES."""
    import masterqc.batch.discover as dmod
    root = tmp_path / "in"
    write(str(root / "ok" / "a.wav"), noise(rng, 0.2, -20.0))
    (root / "locked").mkdir()
    real_scandir = os.scandir

    def scandir(path):
        if os.fspath(path).endswith("locked"):
            raise PermissionError(13, "Permission denied", os.fspath(path))
        return real_scandir(path)

    monkeypatch.setattr(dmod.os, "scandir", scandir)
    d = discover([str(root)])
    assert [f.rel for f in d.files] == ["ok/a.wav"]
    (p,) = d.problems
    assert p.path.endswith("locked") and p.message == "folder cannot be listed (Permission denied)"


@pytest.mark.parametrize("signame", ["SIGTERM", "SIGKILL"])
def test_killed_run_resumes(tmp_path, rng, signame):
    """SIGTERM to a running ``masterqc check FOLDER``: the run is marked interrupted; SIGKILL: it stays
    marked running.  Either way no temporary file is left and the next run analyses only what the
    killed one had not finished."""
    import signal
    import subprocess
    import sys
    import time
    root = tmp_path / "in"
    for i in range(8):
        write(str(root / f"t{i}.wav"), noise(rng, 1.0, -20.0 - i))
    spec = spec_file(tmp_path)
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "masterqc", "check", str(root), "--spec", str(spec), "--out",
                             str(out), "--format", "json", "--jobs", "1", "--quiet"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    ledger = out / "masterqc-ledger.sqlite"
    deadline = time.monotonic() + 60
    done = 0
    while time.monotonic() < deadline and proc.poll() is None:
        if ledger.exists():
            try:
                with sqlite3.connect(ledger, timeout=5) as db:
                    done = db.execute("SELECT COUNT(*) FROM measurements").fetchone()[0]
            except sqlite3.OperationalError:
                done = 0
            if done >= 2:
                break
        time.sleep(0.05)
    assert proc.poll() is None, "the run finished before it could be stopped"
    proc.send_signal(getattr(signal, signame))
    proc.wait(timeout=30)
    assert proc.returncode == (130 if signame == "SIGTERM" else -signal.SIGKILL), proc.stderr.read()
    assert not (out / "summary.json").exists()
    if signame == "SIGTERM":  # a killed process may leave a temporary file being written; never a report
        assert [n for _, _, names in os.walk(out) for n in names if n.startswith(".masterqc-")] == []
    with Ledger(ledger) as led:
        (run,) = led.runs()
        assert run["status"] == ("interrupted" if signame == "SIGTERM" else "running")
        finished = len(led.run_files(run["run_id"]))
    assert 2 <= finished < 8
    again = run_batch(BatchConfig(roots=[str(root)], spec_path=str(spec), out_dir=str(out), formats=("json",),
                                  jobs=1, quiet=True))
    c = again.summary["counts"]
    assert c["files"] == 8 and c["reused"] == finished and c["analysed"] == 8 - finished
    reports = sorted(n for n in os.listdir(out / "files" / "in") if n.endswith(".json"))
    assert reports == [f"t{i}.json" for i in range(8)]
    for n in reports:  # every report is whole JSON
        json.loads((out / "files" / "in" / n).read_text())


def test_output_folder_inside_the_input_is_not_checked(tmp_path, rng):
    root = tmp_path / "in"
    write(str(root / "a.wav"), noise(rng, 1.0, -20.0))
    cfg = BatchConfig(roots=[str(root)], spec_path=str(spec_file(tmp_path)), out_dir=str(root / "qc"),
                      formats=("json",), jobs=1, quiet=True)
    run_batch(cfg)
    again = run_batch(cfg)
    assert [f["rel"] for f in again.summary["files"]] == ["in/a.wav"]
    assert again.summary["counts"]["analysed"] == 0


def test_link_planted_in_the_output_folder_writes_nothing_outside(tmp_path, rng):
    root = tmp_path / "in"
    write(str(root / "sub" / "a.wav"), noise(rng, 1.0, -20.0))
    write(str(root / "b.wav"), noise(rng, 1.0, -21.0))
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    out = tmp_path / "out"
    (out / "files" / "in").mkdir(parents=True)
    os.symlink(str(elsewhere), out / "files" / "in" / "sub")  # would redirect in/sub/*
    res = run_batch(BatchConfig(roots=[str(root)], spec_path=str(spec_file(tmp_path)), out_dir=str(out),
                                formats=("json",), jobs=1, quiet=True))
    files = {f["rel"]: f for f in res.summary["files"]}
    assert files["in/b.wav"]["verdict"] == "pass"
    assert files["in/sub/a.wav"]["verdict"] == "error"
    assert "resolves outside" in files["in/sub/a.wav"]["first_problem"]
    assert os.listdir(elsewhere) == []


def test_spec_in_folder_rules(tmp_path, rng):
    """Each album folder carries its own spec; the nearest one wins; a broken one makes error rows only there."""
    spec_file(tmp_path, SPEC, "house.yaml")
    mp = spec_file(tmp_path, "masterqc_spec_map: 1\nspecs:\n"
                             "  - {match: 'albums/**', spec_in_folder: delivery-spec.yaml}\n"
                             "  - {match: '**', spec: house.yaml}\n", "map.yaml")
    root = tmp_path / "in"
    x = noise(rng, 1.0, -20.0)
    for rel in ("albums/one/01.wav", "albums/one/cd2/01.wav", "albums/two/01.wav", "albums/three/01.wav"):
        write(str(root / rel), x)
    (root / "albums" / "one" / "delivery-spec.yaml").write_text(SPEC.replace("Unit album label", "Album one"))
    (root / "albums" / "one" / "cd2" / "delivery-spec.yaml").write_text(
        SPEC.replace("Unit album label", "Album one, disc two").replace("max_lufs: -5.0", "max_lufs: -25.0"))
    (root / "albums" / "three" / "delivery-spec.yaml").write_text("spec_version: 1\nname: Broken\nloudness: {nope: 1}\n")
    out = run_batch(BatchConfig(roots=[str(root)], spec_path=str(mp), out_dir=str(tmp_path / "out"),
                                formats=("json",), jobs=1, quiet=True))
    files = {f["rel"]: f for f in out.summary["files"]}
    assert set(files) == {"in/albums/one/01.wav", "in/albums/one/cd2/01.wav", "in/albums/two/01.wav",
                          "in/albums/three/01.wav"}  # the YAML files are not masters
    assert files["in/albums/one/01.wav"]["spec"] == "Album one"
    assert files["in/albums/one/cd2/01.wav"]["spec"] == "Album one, disc two"
    assert files["in/albums/one/cd2/01.wav"]["verdict"] == "fail"
    assert files["in/albums/two/01.wav"]["spec"] == "Unit album label"  # no folder spec: the next rule
    bad = files["in/albums/three/01.wav"]
    assert bad["verdict"] == "error" and "folder spec" in bad["first_problem"] and "nope" in bad["first_problem"]
    assert out.exit_code == 3
