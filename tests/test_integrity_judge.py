"""The integrity spec section and its judge, end to end on files with built-in defects.

Each file carries known defects (frames chosen in the test); the findings
must name them with the exact times, and the options the spec sets must
reach the measurement.
"""

from __future__ import annotations

import jsonschema
import numpy as np
import pytest
import soundfile as sf
from pydantic import ValidationError

from integrity_support import write_pcm
from masterqc.judge import judge
from masterqc.measure.engine import measure_file
from masterqc.schema import result_schema
from masterqc.spec import build_spec, measure_options_for

FS = 48000


def _spec(integrity: dict):
    return build_spec({"spec_version": 1, "name": "Ostravel integrity test", "integrity": integrity})


def _by_check(findings):
    return {f.check: f for f in findings}


def _defective(tmp_path):
    """24-bit stereo: 0.5 s head silence, 1 kHz tone, a clipped run, a dropout, 16-bit padding in R."""
    frames = 4 * FS
    t = np.arange(frames) / FS
    tone = np.round(0.3 * np.sin(2 * np.pi * 1000 * t) * 2 ** 23).astype(np.int64)
    codes = np.stack([tone, (tone >> 8) << 8], axis=1)  # R carries 16-bit codes, padded
    codes[: FS // 2] = 0
    codes[96000:96010, 0] = 2 ** 23 - 1              # clipped run of 10 in L at 2.0 s
    codes[120010:120490, 1] = 0                       # 10 ms dropout in R at 2.5002 s (off the zero crossings)
    codes[-FS // 4:] = 0                              # 0.25 s tail silence
    return write_pcm(tmp_path / "defective.wav", codes, FS, 24)


def test_findings_on_a_defective_file(tmp_path):
    spec = _spec({
        "clipped_runs": {"max_count": 0},
        "dc_offset": {"max_dbfs": -60.0},
        "head_silence": {"max_s": 0.2},
        "tail_silence": {"min_s": 1.0},
        "dropouts": {"max_count": 0},
        "effective_bit_depth": {"min_bits": 24},
        "dual_mono": [False],
        "inverted_polarity": [False],
        "phase_correlation": {"min_corr": 0.5},
        "level_balance": {"max_lu": 0.5},
    })
    result = measure_file(_defective(tmp_path), measure_options_for(spec))
    findings, verdict = judge(spec, result)
    f = _by_check(findings)
    assert verdict == "fail"
    assert f["integrity.clipped_runs"].status == "fail"
    assert f["integrity.clipped_runs"].measured == 1
    assert f["integrity.clipped_runs"].where_s == [[2.0, 96010 / FS]]
    assert "per channel: L 1, R 0" in f["integrity.clipped_runs"].message
    assert f["integrity.head_silence"].status == "fail"
    assert f["integrity.head_silence"].measured == 0.5
    # the tone starts at frame 24000 with sin(0) = 0: the first sample above -60 dBFS is frame 24001
    assert f["integrity.head_silence"].where_s == [[0.0, 24001 / FS]]
    assert f["integrity.tail_silence"].status == "fail"
    assert f["integrity.tail_silence"].where_s == [[3.75, 4.0]]  # by construction: the last 0.25 s of 4 s
    assert f["integrity.dropouts"].status == "fail"
    assert f["integrity.dropouts"].where_s == [[120010 / FS, 120490 / FS]]
    assert "; found: digital silence" in f["integrity.dropouts"].message
    bits = f["integrity.effective_bit_depth"]
    assert bits.status == "fail" and bits.measured == 16 and "R" in bits.message
    assert f["integrity.dual_mono"].status == "pass"
    assert f["integrity.inverted_polarity"].status == "pass"
    assert f["integrity.phase_correlation"].status == "pass"
    assert f["integrity.level_balance"].status == "pass"
    assert f["integrity.dc_offset"].status == "pass"
    # the judged result is a valid result object
    out = dict(result, spec={"name": "t", "path": "t.yaml", "sha256": "0" * 64},
               findings=[x.to_dict() for x in findings], verdict=verdict)
    jsonschema.validate(out, result_schema())


def test_spec_options_reach_the_measurement(tmp_path):
    spec = _spec({"clipped_runs": {"max_count": 0}, "clip_min_run_samples": 11,
                  "dropouts": {"max_count": 0}, "dropout_min_s": 0.02})
    opts = measure_options_for(spec)
    assert opts.clip_min_run_samples == 11 and opts.dropout_min_s == 0.02
    result = measure_file(_defective(tmp_path), opts)
    f = _by_check(judge(spec, result)[0])
    assert f["integrity.clipped_runs"].status == "pass"  # the run of 10 is now too short
    assert f["integrity.dropouts"].status == "pass"      # 10 ms < 20 ms


def test_nonfinite_is_an_error_even_without_the_section(tmp_path):
    x = np.full((FS, 2), 0.1, np.float32)
    x[4800, 1] = np.nan
    path = tmp_path / "nan.wav"
    sf.write(path, x, FS, subtype="FLOAT")
    spec = build_spec({"spec_version": 1, "name": "no integrity section"})
    findings, verdict = judge(spec, measure_file(path))
    f = _by_check(findings)["integrity.nonfinite_samples"]
    assert f.status == "error" and verdict == "error"
    assert f.measured == 1
    assert f.where_s == [[0.1, 4801 / FS]]  # by construction: frame 4800 is 0.1 s, its end 4801 frames
    assert "nan in R at frame 4800" in f.message


def test_nonfinite_pass_only_when_asked(tmp_path):
    path = tmp_path / "ok.wav"
    sf.write(path, np.full((FS, 1), 0.1, np.float32), FS, subtype="FLOAT")
    result = measure_file(path)
    assert "integrity.nonfinite_samples" not in _by_check(judge(build_spec({"spec_version": 1, "name": "a"}), result)[0])
    f = _by_check(judge(_spec({"nonfinite_samples": True}), result)[0])["integrity.nonfinite_samples"]
    assert f.status == "pass"
    assert "integrity.nonfinite_samples" not in _by_check(judge(_spec({"nonfinite_samples": False}), result)[0])


def test_inverted_and_unbalanced_pair(tmp_path):
    t = np.arange(2 * FS) / FS
    tone = 0.4 * np.sin(2 * np.pi * 997 * t)
    path = tmp_path / "inv.wav"
    sf.write(path, np.stack([tone, -tone / 2], axis=1), FS, subtype="FLOAT")
    spec = _spec({"inverted_polarity": [False], "phase_correlation": {"min_corr": -0.2},
                  "phase_correlation_below": {"max_percent": 5.0}, "level_balance": {"max_lu": 1.0},
                  "over_full_scale_samples": {"max_count": 0}, "subsonic_energy": {"max_db": -30.0}})
    f = _by_check(judge(spec, measure_file(path))[0])
    assert f["integrity.inverted_polarity"].status == "fail" and "(L/R)" in f["integrity.inverted_polarity"].message
    assert f["integrity.phase_correlation"].status == "fail" and f["integrity.phase_correlation"].measured == -1.0
    assert f["integrity.phase_correlation_below"].measured == 100.0
    assert f["integrity.phase_correlation_below"].where_s == [[0.0, 2.0]]
    bal = f["integrity.level_balance"]
    # analytic: R at half L's amplitude is 20*log10(2) = 6.02 LU quieter, judged at 0.1 LU: 6.0
    assert bal.status == "fail" and bal.measured == 6.0 and "L is the louder" in bal.message
    assert f["integrity.over_full_scale_samples"].status == "pass"
    assert f["integrity.subsonic_energy"].status == "pass"


def test_pcm_skips_float_only_and_mono_skips_pairs(tmp_path):
    path = write_pcm(tmp_path / "mono.wav", np.full((FS, 1), 1000, np.int64), FS, 24)
    spec = _spec({"over_full_scale_samples": {"max_count": 0}, "dual_mono": [False],
                  "level_balance": {"max_lu": 1.0}, "dc_offset": {"max_dbfs": -60.0, "severity": "warn"}})
    f = _by_check(judge(spec, measure_file(path))[0])
    assert f["integrity.over_full_scale_samples"].status == "skipped"
    assert "integer PCM" in f["integrity.over_full_scale_samples"].message
    assert f["integrity.dual_mono"].status == "skipped" and "one channel" in f["integrity.dual_mono"].message
    assert f["integrity.level_balance"].status == "skipped"
    # constant 1000/2**23: DC at -78.5 dBFS meets -60
    assert f["integrity.dc_offset"].status == "pass"


@pytest.mark.parametrize("bad, key", [
    ({"clipped_runs": {"max_runs": 0}}, "max_runs"),
    ({"clip_threshold_db": -1.0}, "clip_threshold_db"),
    ({"dropout_min_s": 0.0}, "dropout_min_s"),
    ({"phase_correlation": {"min_corr": "low"}}, "min_corr"),
    ({"silence_threshold": -60}, "silence_threshold"),
])
def test_invalid_section_names_the_key(bad, key):
    with pytest.raises(ValidationError) as info:
        _spec(bad)
    assert key in str(info.value)


def test_results_of_awkward_files_fit_the_result_schema(tmp_path):
    # NaN in a float file, a mono file, a digitally silent file: every integrity key still fits
    x = np.full((FS // 2, 2), 0.2, np.float32)
    x[100, 0] = np.nan
    sf.write(tmp_path / "nan.wav", x, FS, subtype="FLOAT")
    write_pcm(tmp_path / "mono.wav", np.full((FS // 2, 1), 77, np.int64), FS, 16)
    write_pcm(tmp_path / "silent.wav", np.zeros((FS // 2, 2), np.int64), FS, 24)
    schema = result_schema()
    for name in ("nan.wav", "mono.wav", "silent.wav"):
        r = measure_file(tmp_path / name)
        jsonschema.validate(r, schema)
    m = measure_file(tmp_path / "silent.wav")["measurements"]
    assert m["effective_bit_depth_bits"] is None and m["dual_mono"] is None
    assert m["head_digital_silence_s"] == 0.5 and m["dc_offset_dbfs"] is None
