"""`masterqc measure` through the CLI: the JSON contract, the table, bad input.

Expected loudness values come from ITU-R BS.1770-5 (a 997 Hz sine at 0 dBFS in
one front channel reads -3.01 LKFS: the mean square of a sine is 1/2, the K-filter gain at
997 Hz cancels the -0.691 offset of the Annex 1 loudness equation, so 10*log10(1/2) = -3.01) and pyloudnorm with
its exact BS.1770 filter (filter_class="DeMan") as an outside reference.
"""

from __future__ import annotations

import json
import subprocess
import sys

import jsonschema
import numpy as np
import pyloudnorm
import pytest
import soundfile as sf

from masterqc.cli import main
from masterqc.schema import result_schema

RATE_HZ = 48000


def _sine(seconds, freq_hz, amplitude, rate=RATE_HZ):
    t = np.arange(int(seconds * rate)) / rate
    return amplitude * np.sin(2 * np.pi * freq_hz * t)


def _run(argv, capsys):
    code = main(argv)
    out = capsys.readouterr()
    return code, out.out, out.err


def test_measure_json_contract(tmp_path, capsys):
    x = _sine(6.0, 997, 10 ** (-20 / 20))
    stereo = np.c_[x, 0.5 * x]
    path = tmp_path / "tone.wav"
    sf.write(path, stereo, RATE_HZ, subtype="PCM_24")
    code, out, err = _run(["measure", str(path), "--json", "--quiet"], capsys)
    assert code == 0
    result = json.loads(out)
    jsonschema.validate(result, result_schema())
    fmt = result["format"]
    assert fmt == {**fmt, "container": "wav", "encoding": "pcm_24", "sample_rate_hz": RATE_HZ, "bit_depth": 24,
                   "channels": 2, "channel_layout": ["L", "R"], "frames": 6 * RATE_HZ, "duration_s": 6.0}
    m = result["measurements"]
    ref = pyloudnorm.Meter(RATE_HZ, filter_class="DeMan").integrated_loudness(stereo)
    assert m["integrated_lufs"] == pytest.approx(ref, abs=0.05)
    # Sample peak of a -20 dBFS sine (24-bit quantised): -20.0 dBFS within quantisation.
    assert m["sample_peak_dbfs"] == pytest.approx(-20.0, abs=0.01)
    assert m["sample_peak_dbfs_per_channel"][1] == pytest.approx(-20.0 - 20 * np.log10(2), abs=0.01)
    assert m["true_peak_dbtp"] >= m["sample_peak_dbfs"]
    assert len(m["true_peak_dbtp_per_channel"]) == 2
    assert result["file"]["size_bytes"] == path.stat().st_size


def test_one_channel_full_scale_997_hz_reads_minus_3_01(tmp_path, capsys):
    # ITU-R BS.1770-5, section 2.2 note: 0 dBFS 997 Hz sine in one front channel -> -3.01 LKFS.
    x = _sine(5.0, 997, 1.0)
    path = tmp_path / "fs.wav"
    sf.write(path, np.c_[x, np.zeros_like(x)], RATE_HZ, subtype="FLOAT")
    code, out, _ = _run(["measure", str(path), "--json"], capsys)
    assert code == 0
    assert json.loads(out)["measurements"]["integrated_lufs"] == pytest.approx(-3.01, abs=0.01)


def test_silence_gives_null_not_sentinel(tmp_path, capsys):
    path = tmp_path / "silence.wav"
    sf.write(path, np.zeros((RATE_HZ * 2, 2)), RATE_HZ, subtype="PCM_16")
    code, out, _ = _run(["measure", str(path), "--json"], capsys)
    assert code == 0
    result = json.loads(out)
    jsonschema.validate(result, result_schema())
    m = result["measurements"]
    assert m["integrated_lufs"] is None
    assert m["loudness_range_lu"] is None
    assert m["sample_peak_dbfs"] is None
    assert m["true_peak_dbtp"] is None


def test_shorter_than_one_gating_block_is_null(tmp_path, capsys):
    path = tmp_path / "short.wav"
    sf.write(path, _sine(0.3, 997, 0.5)[:, None], RATE_HZ, subtype="PCM_16")
    code, out, _ = _run(["measure", str(path), "--json"], capsys)
    assert code == 0
    m = json.loads(out)["measurements"]
    assert m["integrated_lufs"] is None and m["max_momentary_lufs"] is None
    assert m["sample_peak_dbfs"] == pytest.approx(20 * np.log10(0.5), abs=0.01)  # analytic, 16-bit rounding inside 0.01 dB


def test_table_output_names_the_numbers(tmp_path, capsys):
    path = tmp_path / "t.wav"
    sf.write(path, np.c_[_sine(4.0, 1000, 0.1), _sine(4.0, 1000, 0.1)], RATE_HZ, subtype="PCM_16")
    code, out, err = _run(["measure", str(path)], capsys)
    assert code == 0
    assert "Integrated loudness" in out and "LUFS" in out and "True peak" in out and "dBTP" in out
    assert err == ""


@pytest.mark.parametrize("kind", ["missing", "text", "truncated", "empty", "ulaw"])
def test_bad_input_one_line_exit_3_no_traceback(tmp_path, kind):
    path = tmp_path / f"{kind}.wav"
    if kind == "text":
        path.write_text("not audio at all\n")
    elif kind in ("truncated", "empty"):
        good = tmp_path / "good.wav"
        sf.write(good, np.zeros((1000 if kind == "truncated" else 0, 2)), RATE_HZ, subtype="PCM_16")
        data = good.read_bytes()
        path.write_bytes(data[:30] if kind == "truncated" else data)
    elif kind == "ulaw":
        sf.write(path, np.zeros((100, 1)), 8000, subtype="ULAW")
    proc = subprocess.run([sys.executable, "-m", "masterqc", "measure", str(path), "--json"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 3
    assert proc.stdout == ""
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert str(path) in lines[0]
    assert "Traceback" not in proc.stderr


def test_bad_invocation_exit_2(capsys):
    with pytest.raises(SystemExit) as e:
        main(["measure"])
    assert e.value.code == 2
    with pytest.raises(SystemExit) as e:
        main(["measure", "x.wav", "--true-peak-oversample", "3"])
    assert e.value.code == 2


def test_result_schema_command(capsys):
    code, out, _ = _run(["schema"], capsys)
    assert code == 0
    schema = json.loads(out)
    jsonschema.Draft202012Validator.check_schema(schema)
    for key in ("integrated_lufs", "loudness_range_lu", "true_peak_dbtp", "sample_peak_dbfs_per_channel"):
        assert key in schema["properties"]["measurements"]["properties"]


def test_annex2_filter_only_at_4x(tmp_path, capsys):
    path = tmp_path / "a.wav"
    sf.write(path, np.c_[_sine(1.0, 1000, 0.5)], RATE_HZ, subtype="PCM_16")
    code, out, err = _run(["measure", str(path), "--true-peak-filter", "annex2", "--true-peak-oversampling", "8"], capsys)
    assert code == 2 and "4x only" in err
    code, out, err = _run(["measure", str(path), "--json", "--true-peak-filter", "annex2"], capsys)
    assert code == 0
    # Tech 3341 tolerance for a 1 kHz sine: true peak within +0.2/-0.4 dB of the 0.5 peak (-6.02 dBFS).
    assert json.loads(out)["measurements"]["true_peak_dbtp"] == pytest.approx(-6.02, abs=0.2)


def test_schema_family_and_old_spellings_with_a_note(capsys):
    """House choice: one command family ``masterqc schema result|spec|runs``; the old spellings still print
    the same schema, with a deprecation note on standard error."""
    from masterqc.cli import main
    outs = {}
    for what in ("result", "spec", "runs"):
        assert main(["schema", what]) == 0
        outs[what] = json.loads(capsys.readouterr().out)
    assert outs["result"]["title"] == "masterqc result" and outs["spec"]["title"] == "masterqc delivery spec"
    for old, what in ((["spec", "schema"], "spec"), (["runs", "schema"], "runs")):
        assert main(old) == 0
        captured = capsys.readouterr()
        assert json.loads(captured.out) == outs[what] and "deprecated" in captured.err
    assert main(["schema"]) == 0 and json.loads(capsys.readouterr().out) == outs["result"]


def test_measure_json_layout_one_key_per_line_ascii(tmp_path, capsys):
    """``measure --json`` prints the layout of check's result files (CHANGELOG: command line): one
    top-level key per line, ASCII only (RFC 8259 section 7: other characters as \\u escapes), and the
    same values as the Python API (the run's own elapsed time aside; by construction)."""
    from masterqc.measure import MeasureOptions, measure_file
    path = tmp_path / "t\u00e9l\u00e9.wav"
    sf.write(path, np.c_[_sine(1.0, 997, 0.1), _sine(1.0, 997, 0.1)], RATE_HZ, subtype="PCM_24")
    code, out, _ = _run(["measure", str(path), "--json", "--quiet"], capsys)
    assert code == 0 and out.isascii() and "\\u00e9" in out
    lines = out.splitlines()
    result = json.loads(out)
    assert lines[0] == "{" and lines[-1] == "}" and len(lines) == len(result) + 2
    assert [json.loads("{" + line.rstrip(",") + "}").popitem()[0] for line in lines[1:-1]] == list(result)
    api = measure_file(str(path), MeasureOptions())
    for r in (result, api):
        r["analysis"].pop("elapsed_s")
    assert result == api
