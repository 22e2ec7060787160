"""Exit codes of ``check`` (house choice, the README's table): 0 pass (warnings allowed), 1 a file failed,
2 bad invocation or spec, 3 a file could not be read.  A master that was read but carries an
error finding (NaN samples) is not "unreadable": it is a failure (1)."""

from __future__ import annotations

import json

import numpy as np
import soundfile as sf

from masterqc.cli import main
from masterqc.pipeline import exit_code_for

SPEC = """spec_version: 1
name: exit-code test
loudness:
  integrated: {target_lufs: -23.0, tolerance_lu: 1.0}
"""


def _tone(path, level_dbfs, seconds=3.0, rate=48000, subtype="PCM_24", nan_at=None):
    t = np.arange(int(seconds * rate)) / rate
    x = 10 ** (level_dbfs / 20) * np.sin(2 * np.pi * 1000 * t)
    if nan_at is not None:
        x[nan_at] = np.nan
    sf.write(path, np.c_[x, x], rate, subtype=subtype)
    return path


def test_exit_code_rule():
    assert exit_code_for([{"verdict": "pass"}, {"verdict": "warn"}]) == 0
    assert exit_code_for([{"verdict": "pass"}, {"verdict": "fail"}]) == 1
    assert exit_code_for([{"verdict": "error"}]) == 1
    assert exit_code_for([{"verdict": "fail"}, {"verdict": "error", "error": {"cause": "x"}}]) == 3


def test_nan_master_is_read_and_fails_with_exit_1(tmp_path, capsys):
    spec = tmp_path / "s.yaml"
    spec.write_text(SPEC)
    # EBU Tech 3341 case 1 level: a stereo 1 kHz sine at -23 dBFS per channel reads -23.0 LUFS.
    good = _tone(tmp_path / "good.wav", -23.0)
    bad = _tone(tmp_path / "nan.wav", -23.0, subtype="FLOAT", nan_at=48000)
    out = tmp_path / "out"
    assert main(["check", str(good), "--spec", str(spec), "--out", str(out), "--format", "json", "--quiet"]) == 0
    assert main(["check", str(good), str(bad), "--spec", str(spec), "--out", str(out),
                 "--format", "json", "--quiet"]) == 1
    r = json.loads((out / "nan.json").read_text())
    assert r["verdict"] == "error" and "error" not in r
    (f,) = [f for f in r["findings"] if f["status"] == "error"]
    assert f["check"] == "integrity.nonfinite_samples" and f["measured"] == 2  # one NaN per channel
    assert f["where_s"][0][0] == 1.0  # frame 48000 at 48 kHz
    missing = tmp_path / "missing.wav"
    assert main(["check", str(good), str(missing), "--spec", str(spec), "--out", str(out),
                 "--format", "json", "--quiet"]) == 3
