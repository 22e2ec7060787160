"""A QC host running unattended: special files, killed batches, output permissions, cut files, gates.

Exit codes are the documented contract (README "Exit codes"): 0 pass, 1 fail,
2 bad invocation or invalid spec, 3 a file could not be read.
"""

from __future__ import annotations

import json
import os
import signal
import sqlite3
import stat
import subprocess
import sys
import time

import numpy as np
import pytest
import soundfile as sf

from masterqc.cli import main

linux_only = pytest.mark.skipif(sys.platform != "linux", reason="FIFOs, /dev/zero and /proc as Linux has them")

GOOD = "spec_version: 1\nname: Invented house spec\n"
MASTERQC = [sys.executable, "-m", "masterqc"]


def tone(path, seconds=0.5, rate=48000, fmt="WAV", subtype="PCM_24", seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * rate)) / rate
    x = 0.25 * np.sin(2 * np.pi * 997.0 * t) + 0.01 * rng.standard_normal(t.size)
    sf.write(os.fspath(path), np.stack([x, x], axis=1), rate, subtype=subtype, format=fmt)
    return path


def run_cli(argv, capsys):
    code = main([os.fspath(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def spec_file(tmp_path, extra=""):
    p = tmp_path / "spec.yaml"
    p.write_text(GOOD + extra)
    return p


# ------------------------------------------------------------------ item 5: only regular files are read


@linux_only
@pytest.mark.parametrize("kind", ["fifo", "device_link"])
@pytest.mark.parametrize("command", ["measure", "check"])
def test_a_fifo_or_device_as_the_master_is_refused_at_once(tmp_path, kind, command):
    p = tmp_path / "master.wav"
    if kind == "fifo":
        os.mkfifo(p)
    else:
        os.symlink("/dev/zero", p)
    argv = MASTERQC + [command, os.fspath(p)]
    if command == "check":
        argv += ["--spec", os.fspath(spec_file(tmp_path)), "--out", os.fspath(tmp_path / "o"), "--format", "json"]
    t0 = time.monotonic()
    r = subprocess.run(argv, capture_output=True, text=True, timeout=120)  # today's code blocks here for ever
    assert r.returncode == 3, r.stderr
    assert time.monotonic() - t0 < 60
    word = "FIFO (named pipe)" if kind == "fifo" else "character device"
    assert f"is a {word}, not a regular file" in r.stderr + r.stdout


@linux_only
def test_special_files_in_a_folder_are_listed_as_not_checked(tmp_path, capsys):
    root = tmp_path / "in"
    root.mkdir()
    tone(root / "good.wav")
    os.mkfifo(root / "pipe.wav")
    os.symlink("/dev/zero", root / "zero.wav")
    os.symlink(root / "gone.wav", root / "broken.wav")
    out = tmp_path / "out"
    code, _, err = run_cli(["check", root, "--spec", spec_file(tmp_path), "--out", out, "--format", "json",
                            "--jobs", "1"], capsys)
    assert code == 0, err
    s = json.loads((out / "summary.json").read_text())
    assert [f["rel"] for f in s["files"]] == ["in/good.wav"]
    skipped = {os.path.basename(p["path"]): p["message"] for p in s["skipped_paths"]}
    assert "FIFO (named pipe)" in skipped["pipe.wav"] and "not checked" in skipped["pipe.wav"]
    assert "character device" in skipped["zero.wav"] and "symbolic link" in skipped["zero.wav"]
    assert skipped["broken.wav"] == "broken symbolic link"
    assert "FIFO" in (out / "index.html").read_text()


# ------------------------------------------------------------------ item 8: outputs honour the umask


@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o027, 0o640), (0o002, 0o664)])
def test_outputs_honour_the_umask(tmp_path, capsys, umask, mode):
    """POSIX open(2): a created file gets mode & ~umask; 0666 is what a user's ordinary files start from."""
    root = tmp_path / "in"
    root.mkdir()
    tone(root / "a.wav")
    out = tmp_path / "out"
    old = os.umask(umask)
    try:
        code, _, err = run_cli(["check", root, "--spec", spec_file(tmp_path), "--out", out,
                                "--format", "json,html", "--jobs", "1", "--quiet"], capsys)
    finally:
        os.umask(old)
    assert code == 0, err
    written = [p for p in out.rglob("*") if p.is_file() and "ledger" not in p.name]
    names = {p.name for p in written}
    assert {"index.html", "summary.json", "junit.xml", "a.json", "a.html"} <= names
    for p in written:
        assert stat.S_IMODE(p.stat().st_mode) == mode, (p, oct(p.stat().st_mode))


# ------------------------------------------------------------------ item 10: truncation fails by default


@pytest.fixture
def cut_wav(tmp_path):
    """A 48 kHz stereo 24-bit WAV of 10 s cut to its first 40 %.

    Bytes per frame = 2 channels x 3 bytes = 6; declared data = 480000 frames x 6 = 2,880,000 bytes.
    The file keeps 44 + floor(0.4 * (44 + 2,880,000)) bytes; what is missing is counted below.
    """
    full = tone(tmp_path / "full.wav", seconds=10.0)
    raw = full.read_bytes()
    keep = int(0.4 * len(raw))
    cut = tmp_path / "cut.wav"
    cut.write_bytes(raw[:keep])
    full.unlink()
    held = keep - 44                       # a canonical 44-byte header (RIFF, fmt of 16 bytes, data header)
    missing = 2_880_000 - held
    missing_s = (2_880_000 // 6 - held // 6) / 48000
    return cut, missing, missing_s


def _clock(s):
    ms = round(s * 1000)
    return f"{ms // 3600000}:{ms // 60000 % 60:02d}:{ms // 1000 % 60:02d}.{ms % 1000:03d}"


def test_a_cut_master_fails_and_says_what_is_missing(tmp_path, capsys, cut_wav):
    cut, missing, missing_s = cut_wav
    code, out, err = run_cli(["check", cut, "--spec", spec_file(tmp_path), "--out", tmp_path / "o",
                              "--format", "json"], capsys)
    assert code == 1, out + err
    r = json.loads((tmp_path / "o" / "cut.json").read_text())
    (f,) = [f for f in r["findings"] if f["check"] == "integrity.truncated_audio"]
    assert f["status"] == "fail"
    assert f"{missing:,} bytes" in f["message"] and _clock(missing_s) in f["message"]
    assert _clock(missing_s) == "0:00:06.000"
    assert r["metadata"]["audio_data"]["missing_bytes"] == missing


@pytest.mark.parametrize("mode, code, status", [("warn", 0, "warn"), ("allow", 0, "pass")])
def test_a_spec_may_accept_a_cut_master(tmp_path, capsys, cut_wav, mode, code, status):
    cut, missing, _ = cut_wav
    spec = spec_file(tmp_path, f"integrity:\n  truncated_audio: {mode}\n"
                               "metadata:\n  chunk_problems: {severity: warn}\n")
    got, out, err = run_cli(["check", cut, "--spec", spec, "--out", tmp_path / "o", "--format", "json"], capsys)
    assert got == code, out + err
    r = json.loads((tmp_path / "o" / "cut.json").read_text())
    (f,) = [f for f in r["findings"] if f["check"] == "integrity.truncated_audio"]
    assert f["status"] == status and f"{missing:,} bytes" in f["message"]


def test_the_index_row_shows_the_missing_audio(tmp_path, capsys, cut_wav):
    cut, missing, missing_s = cut_wav
    root = tmp_path / "in"
    root.mkdir()
    cut.rename(root / "cut.wav")
    tone(root / "whole.wav")
    out = tmp_path / "out"
    code, _, err = run_cli(["check", root, "--spec", spec_file(tmp_path), "--out", out, "--format", "json",
                            "--jobs", "1", "--quiet"], capsys)
    assert code == 1, err
    s = json.loads((out / "summary.json").read_text())
    rows = {f["rel"]: f for f in s["files"]}
    assert rows["in/whole.wav"]["missing_audio"] is None
    m = rows["in/cut.wav"]["missing_audio"]
    assert m["missing_bytes"] == missing and abs(m["missing_s"] - missing_s) < 1e-9
    assert f"truncated: {_clock(missing_s)} ({missing:,} bytes) of audio missing" in (out / "index.html").read_text()


def test_a_whole_file_with_one_wrong_size_field_is_not_called_cut(tmp_path, capsys):
    """The data size grows but the RIFF size still matches the file: a bad field, not missing audio."""
    p = tone(tmp_path / "x.wav", seconds=1.0)
    raw = bytearray(p.read_bytes())
    assert raw[36:40] == b"data"
    raw[40:44] = (int.from_bytes(raw[40:44], "little") + 6000).to_bytes(4, "little")
    p.write_bytes(bytes(raw))
    code, out, err = run_cli(["check", p, "--spec", spec_file(tmp_path), "--out", tmp_path / "o",
                              "--format", "json"], capsys)
    r = json.loads((tmp_path / "o" / "x.json").read_text())
    assert not [f for f in r["findings"] if f["check"] == "integrity.truncated_audio"]
    assert code == 0


# ------------------------------------------------------------------ item 11: the smaller defects


def test_every_container_measure_reads_is_found_in_folders(tmp_path, capsys):
    root = tmp_path / "in"
    root.mkdir()
    tone(root / "a.caf", fmt="CAF")
    tone(root / "b.w64", fmt="W64")
    tone(root / "c.rf64", fmt="RF64")
    tone(root / "d.aiff", fmt="AIFF")
    tone(root / "e.flac", fmt="FLAC")
    tone(root / "f.wav")
    tone(root / "caf_named.dat", fmt="CAF")  # found by content, whatever the name
    out = tmp_path / "out"
    code, _, err = run_cli(["check", root, "--spec", spec_file(tmp_path), "--out", out, "--format", "json",
                            "--jobs", "1", "--quiet"], capsys)
    s = json.loads((out / "summary.json").read_text())
    rows = {f["rel"]: f for f in s["files"]}
    assert set(rows) == {f"in/{n}" for n in ("a.caf", "b.w64", "c.rf64", "d.aiff", "e.flac", "f.wav",
                                              "caf_named.dat")}
    assert code == 0 and all(f["verdict"] == "pass" for f in rows.values()), \
        [(k, f["first_problem"]) for k, f in rows.items()]


def test_an_empty_folder_is_nothing_to_check(tmp_path, capsys):
    (tmp_path / "empty").mkdir()
    code, out, err = run_cli(["check", tmp_path / "empty", "--spec", spec_file(tmp_path), "--out",
                              tmp_path / "out", "--format", "json", "--jobs", "1"], capsys)
    assert code == 2 and "nothing to check" in err
    (tmp_path / "notes").mkdir()
    (tmp_path / "notes" / "readme.txt").write_text("no audio here")
    code, out, err = run_cli(["check", tmp_path / "notes", "--spec", spec_file(tmp_path), "--out",
                              tmp_path / "out", "--format", "json"], capsys)
    assert code == 2 and "nothing to check" in err


def test_rows_never_analysed_are_not_called_reused(tmp_path, capsys):
    root = tmp_path / "in"
    (root / "podcasts").mkdir(parents=True)
    (root / "albums").mkdir()
    tone(root / "albums" / "a.wav")
    tone(root / "albums" / "a-copy.wav")  # the same bytes: checked once, the copy really reuses it
    tone(root / "podcasts" / "p.wav", seed=3)
    spec_file(tmp_path)
    smap = tmp_path / "map.yaml"
    smap.write_text('masterqc_spec_map: 1\nspecs:\n  - {match: "albums/**", spec: spec.yaml}\n')
    out = tmp_path / "out"
    code, _, err = run_cli(["check", root, "--spec", smap, "--out", out, "--format", "json", "--jobs", "1"],
                           capsys)
    assert code == 3
    lines = {line.split()[2]: line for line in err.splitlines() if line.startswith("[")}
    assert lines["in/podcasts/p.wav"].endswith("(not analysed)"), lines
    assert lines["in/albums/a.wav"].endswith("(reused)") != lines["in/albums/a-copy.wav"].endswith("(reused)")
    c = json.loads((out / "summary.json").read_text())["counts"]
    assert (c["analysed"], c["reused"], c["not_analysed"]) == (1, 1, 1)


# ------------------------------------------------------------------ item 7: a killed batch leaves nothing running


def _children(pid: int) -> list[int]:
    out = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat", "rb") as f:
                    raw = f.read()
            except OSError:
                continue
            fields = raw[raw.rindex(b")") + 2:].split()
            if int(fields[1]) == pid:
                out.append(int(entry))
    return out


def _running(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat", "rb") as f:
            raw = f.read()
    except OSError:
        return False
    return raw[raw.rindex(b")") + 2:][:1] not in (b"Z", b"X")


@linux_only
def test_kill_9_of_a_batch_leaves_no_worker_and_the_next_run_resumes(tmp_path):
    root = tmp_path / "in"
    root.mkdir()
    for i in range(6):
        tone(root / f"{i:02d}.wav", seconds=3.0, seed=i)
    spec = spec_file(tmp_path)
    out = tmp_path / "out"
    argv = MASTERQC + ["check", os.fspath(root), "--spec", os.fspath(spec), "--out", os.fspath(out),
                       "--format", "json", "--jobs", "2", "--quiet"]
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    ledger = out / "masterqc-ledger.sqlite"
    workers: list[int] = []
    deadline = time.monotonic() + 120
    done = 0
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            workers = [c for c in _children(proc.pid) if "spawn_main" in
                       open(f"/proc/{c}/cmdline", "rb").read().decode(errors="replace")] or workers
            if ledger.exists() and len(workers) == 2:
                try:
                    with sqlite3.connect(ledger, timeout=1) as db:
                        done = db.execute("SELECT COUNT(*) FROM run_files").fetchone()[0]
                except sqlite3.Error:
                    done = 0
                if done >= 1:
                    break
            time.sleep(0.05)
        assert proc.poll() is None and len(workers) == 2 and done >= 1, "the batch ended before it could be killed"
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=30)
        t0 = time.monotonic()
        while any(_running(w) for w in workers) and time.monotonic() - t0 < 5.0:
            time.sleep(0.05)
        alive = [w for w in workers if _running(w)]
        assert not alive, f"workers {alive} still running {time.monotonic() - t0:.1f} s after kill -9"
    finally:
        for w in workers:  # never leave them behind, whatever the outcome
            if _running(w):
                os.kill(w, signal.SIGKILL)
        if proc.poll() is None:
            proc.kill()
        proc.stderr.close()
    r = subprocess.run(MASTERQC + ["runs", "--out", os.fspath(out), "list", "--json"], capture_output=True,
                       text=True, timeout=60)
    assert [x["status"] for x in json.loads(r.stdout)] == ["running"]  # nobody has looked yet
    r = subprocess.run(argv[:-3] + ["--jobs", "1", "--quiet"], capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stderr
    runs = json.loads(subprocess.run(MASTERQC + ["runs", "--out", os.fspath(out), "list", "--json"],
                                     capture_output=True, text=True, timeout=60).stdout)
    assert [x["status"] for x in runs] == ["complete", "abandoned"]
    assert runs[1]["files"] >= done  # what it finished before the kill is counted
    assert runs[0]["reused"] >= done and runs[0]["files"] == 6  # and reused by the next run
