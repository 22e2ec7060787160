"""Names other people chose: not valid UTF-8, newlines, terminal escape codes, very long paths.

Any name the operating system allows must work end to end (discovery, ledger,
output names, JSON, HTML, junit) and reach a terminal only escaped.  POSIX file
names are byte strings with only '/' and NUL excluded (POSIX.1-2017, 3.170
"Filename"), which is what these tests create.
"""

from __future__ import annotations

import json
import os
import sys
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import numpy as np
import pytest
import soundfile as sf

from masterqc.cli import main

pytestmark = pytest.mark.skipif(sys.platform != "linux", reason="byte-string names as Linux stores them")

GOOD = "spec_version: 1\nname: Invented house spec\n"
LATIN1 = b"caf\xe9"                       # "café" written by a Latin-1 system: not valid UTF-8
ESCAPES = "\x1b]0;owned\x07name\x1b[2J"   # set the terminal title, then clear the screen


def tone(path, seconds=0.5, rate=48000):
    t = np.arange(int(seconds * rate)) / rate
    x = 0.25 * np.sin(2 * np.pi * 997.0 * t)
    with open(path, "wb") as f:  # a file object: soundfile's own path handling is not what is tested
        sf.write(f, np.stack([x, x], axis=1), rate, subtype="PCM_24", format="WAV")
    return path


def run_cli(argv, capsys):
    code = main([a if isinstance(a, str) else os.fsdecode(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


class _Parses(HTMLParser):
    pass


def test_measure_reads_a_name_that_is_not_utf8(tmp_path, capsys):
    p = os.path.join(os.fsencode(tmp_path), LATIN1 + b".wav")
    tone(p)
    code, out, err = run_cli(["measure", p, "--json", "--quiet"], capsys)
    assert code == 0, err
    r = json.loads(out)
    assert r["file"]["path"].endswith("caf\\xe9.wav")  # the byte shown as \xNN, never a codec error
    assert r["format"]["frames"] == 24000  # by construction: tone() writes 0.5 s at 48 kHz


def test_check_of_a_name_that_is_not_utf8_writes_its_json(tmp_path, capsys):
    p = os.path.join(os.fsencode(tmp_path), LATIN1 + b".wav")
    tone(p)
    spec = tmp_path / "s.yaml"
    spec.write_text(GOOD)
    code, out, err = run_cli(["check", p, "--spec", spec, "--out", tmp_path / "out", "--format", "json"], capsys)
    assert code == 0, err
    (written,) = (tmp_path / "out").glob("*.json")
    r = json.loads(written.read_text(encoding="utf-8"))
    assert r["verdict"] == "pass" and r["file"]["path"].endswith("caf\\xe9.wav")
    assert "\\xe9" in out  # the summary line shows the byte escaped


@pytest.fixture
def odd_folder(tmp_path):
    """A delivery whose names hold a Latin-1 byte, a newline (file and folder) and escape codes."""
    root = os.fsencode(tmp_path / "in")
    os.makedirs(os.path.join(root, b"albums", b"two\nlines"))
    tone(os.path.join(root, b"albums", LATIN1 + b".wav"))
    tone(os.path.join(root, b"albums", b"side\nb.wav"))
    tone(os.path.join(root, b"albums", b"two\nlines", b"01.wav"))
    tone(os.path.join(root, b"albums", ESCAPES.encode() + b".wav"))
    spec = tmp_path / "house.yaml"
    spec.write_text(GOOD)
    smap = tmp_path / "map.yaml"
    smap.write_text('masterqc_spec_map: 1\nspecs:\n  - {match: "albums/**", spec: house.yaml}\n')
    return tmp_path, os.fsdecode(root), smap


def test_a_batch_over_odd_names_checks_every_file_and_writes_outputs_that_parse(odd_folder, capsys):
    tmp_path, root, smap = odd_folder
    out = tmp_path / "out"
    code, stdout, err = run_cli(["check", root, "--spec", smap, "--out", out, "--format", "json,html",
                                 "--jobs", "1"], capsys)
    assert "Traceback" not in err
    assert "\x1b" not in stdout + err and "\x07" not in stdout + err  # escape codes never reach the terminal
    assert code == 0, err
    s = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    rels = sorted(r["rel"] for r in s["files"])
    assert len(rels) == 4
    # every row judged against the map's rule: "**" crosses the newline (item 3)
    assert all(r["verdict"] == "pass" for r in s["files"]), [(r["rel"], r["first_problem"]) for r in s["files"]]
    assert any(r.endswith("caf\\xe9.wav") for r in rels)
    assert any("two\nlines/01.wav" in r for r in rels) and any("side\nb.wav" in r for r in rels)
    for r in s["files"]:
        per_file = out / r["outputs"]["json"]
        assert per_file.resolve().is_relative_to(out.resolve())
        json.loads(per_file.read_text(encoding="utf-8"))
        _Parses().feed((out / r["outputs"]["html"]).read_text(encoding="utf-8"))
    ET.parse(out / "junit.xml")
    html = (out / "index.html").read_text(encoding="utf-8")
    _Parses().feed(html)
    assert "\x1b" not in html
    # the ledger kept them: a second run reuses all four
    code, stdout, err = run_cli(["check", root, "--spec", smap, "--out", out, "--format", "json",
                                 "--jobs", "1", "--quiet"], capsys)
    s2 = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert code == 0 and s2["counts"]["reused"] == 4 and s2["counts"]["analysed"] == 0  # by construction: 4 files


def test_newline_in_names_matches_a_single_star_rule_too(odd_folder, capsys):
    from masterqc.batch.specmap import glob_regex
    assert glob_regex("albums/*.wav").match("albums/side\nb.wav")
    assert glob_regex("albums/**").match("albums/two\nlines/01.wav")
    assert not glob_regex("albums/*.wav").match("albums/two\nlines/01.wav")  # '*' stays in one folder


def test_escape_codes_in_a_single_file_name_are_shown_escaped(tmp_path, capsys):
    p = tone(tmp_path / (ESCAPES + ".wav"))
    spec = tmp_path / "s.yaml"
    spec.write_text(GOOD)
    code, out, err = run_cli(["check", p, "--spec", spec, "--out", tmp_path / "o", "--format", "json"], capsys)
    assert code == 0
    assert "\x1b" not in out + err and "\\x1b]0;owned\\x07name\\x1b[2J.wav" in out
    code, out, err = run_cli(["measure", tmp_path / "missing\x1b[2J.wav"], capsys)
    assert code == 3 and "\x1b" not in err and "missing\\x1b[2J.wav" in err


def test_a_master_at_a_path_over_1024_bytes_is_read(tmp_path, capsys):
    deep = tmp_path.joinpath(*["d" + "x" * 200] * 6)
    deep.mkdir(parents=True)
    p = tone(deep / "long.wav")
    assert len(os.fsencode(p)) > 1100
    code, out, err = run_cli(["measure", p, "--json", "--quiet"], capsys)
    assert code == 0, err
    assert json.loads(out)["format"]["frames"] == 24000  # by construction: tone() writes 0.5 s at 48 kHz
