"""The malformed-input suite: hundreds of generated files, hostile names and hostile specs.

What a QC host that reads files from outside must guarantee for every one of
them (house choices): no traceback; the documented exit code (README "Exit
codes": ``measure`` 0 or 3; ``spec validate`` 0 or 2 with file, line and
column); a batch over all of them finishes and lists every file; every output
parses; nothing is written outside ``--out``; and each file is done within a
time and memory bound.

The corpus (:mod:`tests.malformed_corpus`) is generated once per session.  One
batch CLI process runs over the whole folder; ``measure`` and ``spec validate``
run in this process, file by file.
"""

from __future__ import annotations

import json
import os
import re
import resource
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import pytest

import malformed_corpus
from masterqc.cli import main

#: per-file bounds (house choice: a 50 ms master of any shape is read in well under these).
#: Time is bounded as CPU time, which a machine shared with other work does not inflate, and
#: loosely as wall time, which catches a file that blocks or hangs.
MAX_CPU_SECONDS_PER_FILE = 10.0
MAX_WALL_SECONDS_PER_FILE = 60.0
MAX_RSS_GROWTH_MIB = 256  # the peak of every file's measurement lies below the starting size plus this


@pytest.fixture(scope="session")
def corpus(tmp_path_factory):
    root = tmp_path_factory.mktemp("malformed")
    files = malformed_corpus.build(root / "in")
    return root, files


def _snapshot(root: bytes, skip: bytes) -> dict:
    out = {}
    for d, dirs, names in os.walk(root):
        if d == skip or d.startswith(skip + b"/"):
            continue
        for n in names + dirs:
            p = os.path.join(d, n)
            if p == skip:
                continue
            st = os.lstat(p)
            out[p] = (st.st_mode, st.st_size, st.st_mtime_ns)
    return out


def test_the_corpus_is_large_and_covers_every_container(corpus):
    _, files = corpus
    assert len(files["audio"]) + len(files["names"]) >= 300
    exts = {os.path.splitext(p)[1] for p in files["audio"]}
    assert {b".wav", b".rf64", b".w64", b".aiff", b".flac", b".caf"} <= exts


def test_measure_documented_exit_code_and_bounds(corpus, capsys):
    """In this process: every fourth corrupted file (the batch below reads them all), every name, every special file."""
    _, files = corpus
    paths = files["audio"][::4] + files["names"] + files["special"]
    main(["measure", os.fsdecode(files["names"][0]), "--json", "--quiet"])  # imports and caches warmed
    capsys.readouterr()
    start_rss_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    codes = {}
    slow = []
    for p in paths:
        t0, c0 = time.perf_counter(), time.process_time()
        code = main(["measure", os.fsdecode(p), "--json", "--quiet"])  # any exception fails the test here
        wall, cpu = time.perf_counter() - t0, time.process_time() - c0
        out, err = capsys.readouterr()
        if cpu > MAX_CPU_SECONDS_PER_FILE or wall > MAX_WALL_SECONDS_PER_FILE:
            slow.append((p, cpu, wall))
        assert code in (0, 3), (p, code, err)
        assert "Traceback" not in err and "\x1b" not in err, (p, err)
        if code == 0:
            r = json.loads(out)
            assert r["format"]["frames"] > 0 and r["format"]["channels"] > 0
        else:
            assert out == "" and err.startswith("masterqc: ") and err.count("\n") == 1, (p, err)
        codes[p] = code
    grew_mib = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - start_rss_kib) / 1024
    assert not slow, slow
    assert grew_mib < MAX_RSS_GROWTH_MIB, grew_mib
    assert all(codes[p] == 0 for p in files["names"])          # a name never makes a master unreadable
    assert all(codes[p] == 3 for p in files["special"])        # FIFO and device: refused, never waited on
    # house choice: a floor well under the count of unreadable files the generator builds (so a
    # reader that accepts everything fails here)
    assert sum(c == 3 for c in codes.values()) >= 30          # the corpus really is malformed


class _Parses(HTMLParser):
    pass


def test_one_batch_over_everything(corpus, tmp_path):
    root, files = corpus
    in_dir = root / "in"
    spec = tmp_path / "spec.yaml"
    spec.write_bytes(malformed_corpus.GOOD_SPEC.encode())
    out = root / "out"
    before = _snapshot(os.fsencode(root), os.fsencode(out))
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, "-m", "masterqc", "check", os.fspath(in_dir), "--spec", os.fspath(spec),
                        "--out", os.fspath(out), "--format", "json", "--jobs", "2"],
                       capture_output=True, timeout=900)
    elapsed = time.perf_counter() - t0
    err = r.stderr.decode("utf-8", "replace")
    assert b"Traceback" not in r.stderr and b"\x1b" not in r.stderr + r.stdout, err[-3000:]
    assert r.returncode == 3, err[-3000:]  # some masters cannot be read: 3 wins (README "Exit codes")
    # nothing outside --out changed
    assert _snapshot(os.fsencode(root), os.fsencode(out)) == before
    for d, _, names in os.walk(out):
        for n in names:
            assert os.path.realpath(os.path.join(d, n)).startswith(os.path.realpath(out) + os.sep)
    s = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    listed = {row["path"] for row in s["files"]} | {p["path"] for p in s["skipped_paths"]}

    def key(p: bytes) -> str:
        from masterqc.fileio import text_safe
        return text_safe(os.path.abspath(os.fsdecode(p)))

    every = files["audio"] + files["names"] + files["special"]
    missing = [p for p in every if key(p) not in listed]
    assert not missing, missing[:10]
    assert s["counts"]["files"] == len(files["audio"]) + len(files["names"])
    for p in files["special"]:
        (msg,) = [x["message"] for x in s["skipped_paths"] if x["path"] == key(p)]
        assert "not a regular file" in msg
    # every output parses
    ET.parse(out / "junit.xml")
    _Parses().feed((out / "index.html").read_text(encoding="utf-8"))
    for row in s["files"]:
        if "json" in row["outputs"]:
            res = json.loads((out / row["outputs"]["json"]).read_text(encoding="utf-8"))
            assert res["verdict"] == row["verdict"]
        assert row["cpu_s"] < MAX_CPU_SECONDS_PER_FILE and row["elapsed_s"] < MAX_WALL_SECONDS_PER_FILE, row
    assert all(row["verdict"] != "error" for row in s["files"] if "/names/" in row["rel"])
    valid = [row for row in s["files"] if os.path.basename(row["rel"]).startswith("valid.")]
    assert len(valid) == len(malformed_corpus.BASES) and all(row["verdict"] != "error" for row in valid)
    # an unreadable master is an error row with its cause (exit 3), never an internal failure
    internal = [row for row in s["files"] if any(
        phrase in (row["first_problem"] or "")
        for phrase in ("internal error while checking", "the worker checking this file stopped"))]
    assert not internal, internal[:5]
    assert sum(row["verdict"] == "error" for row in s["files"]) >= 100
    print(f"batch over {len(every)} files: {elapsed:.1f} s")


SPECS = malformed_corpus.hostile_specs()


def test_hostile_specs_are_exit_0_or_2_with_a_place(tmp_path, capsys):
    where = re.compile(r"\.yaml:(\d+):(\d+):")
    codes = {}
    for label, data in SPECS:
        p = tmp_path / f"{label}.yaml"
        p.write_bytes(data)
        c0 = time.process_time()
        code = main(["spec", "validate", os.fspath(p)])
        took = time.process_time() - c0
        out, err = capsys.readouterr()
        assert took < MAX_CPU_SECONDS_PER_FILE, (label, took)
        assert code in (0, 2), (label, code)
        assert "Traceback" not in err and "\x1b" not in err and "\x00" not in err, (label, err)
        assert "root:" not in out + err  # /etc/passwd never quoted
        if code == 2:
            assert where.search(err), (label, err)
        codes[label] = code
    for label in ("nul", "bell", "escape", "latin1", "deep_flow", "deep_map", "deep_dash", "huge_int",
                  "python_tag", "abs_extends", "dotdot_extends", "quoted_version", "alias_bomb", "utf16",
                  "negative_duration", "zero_channels"):
        assert codes[label] == 2, label
    assert codes["positive_lufs"] == 0  # a warning, not an error
