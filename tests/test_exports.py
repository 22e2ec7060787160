"""events.csv per master and the CSV helpers: parsed back with Python's csv module and compared
with the JSON result written beside it.

The signal: a 3 s stereo 24-bit master, a 997 Hz sine at -20 dBFS, with (frames at 48 kHz)
a 50 ms mute on both channels at 1.0 s (one dropout, L+R), 6 samples at positive full scale in
L at 2.0 s (one clipping event) -- and that clip is also a true-peak over of a -1 dBTP ceiling
(a full-scale sample is 0 dBFS, so its true peak is at least 0 dBTP).
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest

from integrity_support import write_pcm
from masterqc.exports import EVENT_COLUMNS, clock_text, events_csv
from masterqc.pipeline import check_file
from masterqc.spec.loader import load_spec

FS = 48000
SPEC = """\
spec_version: 1
name: Export test
peaks:
  true_peak: {max_dbtp: -1.0}
integrity:
  clipped_runs: {max_count: 0}
  dropouts: {max_count: 0}
metadata:
  timecode_fps: "25"
"""


def _master(tmp_path):
    t = np.arange(3 * FS) / FS
    x = np.round(0.1 * np.sin(2 * np.pi * 997 * t) * 2 ** 23).astype(np.int64)
    codes = np.stack([x, x], axis=1)
    codes[FS:FS + 2400] = 0                    # 50 ms, both channels
    codes[2 * FS:2 * FS + 6, 0] = 2 ** 23 - 1  # 6 samples at full scale, L
    return write_pcm(tmp_path / "m.wav", codes, FS, 24)


def test_events_csv_parses_and_matches_the_json(tmp_path):
    spec = tmp_path / "spec.yaml"
    spec.write_text(SPEC)
    try:
        loaded = load_spec(str(spec))
    except Exception as exc:  # pragma: no cover - a spec key spelled differently in this version
        pytest.fail(f"test spec does not load: {exc}")
    out = tmp_path / "out"
    result = check_file(str(_master(tmp_path)), loaded, str(out), ("json",), stem="m")
    assert result["outputs"]["events"] == "m.events.csv"
    with open(out / "m.events.csv", encoding="utf-8", newline="") as f:
        reader = csv.reader(f)
        header = next(reader)
        rows = [dict(zip(header, r)) for r in reader]
    assert tuple(header) == EVENT_COLUMNS
    saved = json.loads((out / "m.json").read_text(encoding="utf-8"))
    m = saved["measurements"]
    by_kind = {}
    for r in rows:
        by_kind.setdefault(r["kind"], []).append(r)
    # one dropout on both channels, as the JSON says
    assert m["dropout_count"] == 1 and len(by_kind["dropout"]) == 1
    d = by_kind["dropout"][0]
    assert d["channels"] == "L+R" == m["dropout_events"][0]["channel"]
    # by construction (module docstring): the mute spans 1.0 .. 1.05 s; the CSV prints 6 decimals
    assert float(d["start_s"]) == pytest.approx(1.0, abs=1e-6) and float(d["end_s"]) == pytest.approx(1.05, abs=1e-6)
    # 25 fps, no start time in the file: 1.0 s is frame 25 -> 00:00:01:00; 1.05 s is frame 26.25 -> :01
    assert (d["start_timecode"], d["end_timecode"], d["timecode_fps"]) == ("00:00:01:00", "00:00:01:01", "25")
    assert d["value"] == "0.050000" and d["unit"] == "s"
    # clipping and overs: the same counts and times as the JSON
    assert len(by_kind["clipping"]) == m["clipped_run_count"] == 1
    c = by_kind["clipping"][0]
    assert (c["channels"], float(c["start_s"]), c["value"]) == ("L", pytest.approx(2.0), "6")
    assert len(by_kind["true_peak_over"]) == m["true_peak_over_range_count"] >= 1
    for r, e in zip(by_kind["true_peak_over"], m["true_peak_over_events"]):
        assert float(r["start_s"]) == pytest.approx(e["start_s"], abs=1e-6)
        assert float(r["value"]) == pytest.approx(e["peak_dbtp"], abs=0.01)  # events.csv writes 0.01 dB (house choice, masterqc/exports.py)
        assert r["channels"] == e["channel"]
    assert [float(r["start_s"]) for r in rows] == sorted(float(r["start_s"]) for r in rows)


def test_events_csv_of_an_error_result_is_a_header_alone():
    text = events_csv({"verdict": "error", "findings": []}).decode("utf-8")
    assert text == ",".join(EVENT_COLUMNS) + "\r\n"


def test_text_cells_are_not_read_as_formulas():
    r = {"format": {"sample_rate_hz": 48000}, "measurements": {"dropout_events": [
        {"channel": "=HYPERLINK(1)", "channels": ["x"], "start_s": 0.5, "end_s": 0.6, "kind": "silence", "value": 0.0}]}}
    rows = list(csv.reader(events_csv(r).decode("utf-8").splitlines()))
    assert rows[1][1] == "'=HYPERLINK(1)"


def test_clock_text():
    # m:ss below an hour, h:mm:ss from an hour (house choice)
    assert [clock_text(v) for v in (45.0, 59.6, 61.0, 3599.4, 3600.0, 7384.2)] == \
        ["0:45", "1:00", "1:01", "59:59", "1:00:00", "2:03:04"]
    assert clock_text(None) == ""
