"""The ``sampling:`` spec section and its judge, end to end on files written here.

The measured facts come from signals whose truth is known by construction
(see tests/test_bandwidth.py and tests/test_conversion.py for the references);
here we check that the spec validates, derives the measurement options, and
that the judge turns the measurements into the right statuses with frequency
and time ranges.  Listening caution: loud test tones.
"""

from __future__ import annotations

import math
import re
from fractions import Fraction

import numpy as np
import pydantic
import pytest
import soundfile as sf
from scipy import signal as sps

from masterqc.judge import judge
from masterqc.measure.engine import measure_file
from masterqc.spec import build_spec, measure_options_for


def spec(**sampling):
    return build_spec({"spec_version": 1, "name": "invented sampling spec", "sampling": sampling})


def write(tmp_path, name, x, fs):
    p = tmp_path / name
    sf.write(p, x, fs, subtype="PCM_24")
    return p


def findings_for(path, sp):
    result = measure_file(path, measure_options_for(sp))
    found, verdict = judge(sp, result)
    return {f.check: f for f in found}, verdict, result


def sine(fs, seconds, f, amp):
    t = np.arange(int(fs * seconds)) / fs
    x = amp * np.sin(2 * np.pi * f * t)
    n = int(0.02 * fs)
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(n) / n)
    x[:n] *= ramp
    x[-n:] *= ramp[::-1]
    return x


def test_spec_keys_validate_and_derive_options():
    sp = build_spec({"spec_version": 1, "name": "x", "peaks": {"true_peak": {"max_dbtp": -1.0}},
                     "sampling": {"ultrasonic_from_hz": 24000,
                                  "conversions": [{"target_rate_hz": 48000},
                                                  {"target_rate_hz": 44100, "true_peak": {"max_dbtp": -2.0}}]}})
    opts = measure_options_for(sp)
    assert opts.conversion_targets_hz == (48000, 44100)
    assert opts.ultrasonic_from_hz == 24000.0
    # a conversion without its own ceiling takes peaks.true_peak
    assert sp.sampling.conversions[0].true_peak.max_dbtp == -1.0
    assert sp.sampling.conversions[1].true_peak.max_dbtp == -2.0


@pytest.mark.parametrize("bad", [{"upsampled": "no"}, {"ultrasonic_energy": {"max_dbfs": -30}},
                                 {"conversions": [{"target_rate": 48000}]}, {"upsampled_min_confidence": 2.0}])
def test_bad_keys_are_refused(bad):
    with pytest.raises(pydantic.ValidationError):
        spec(**bad)


def test_upsampled_master_fails_and_names_the_cliff(tmp_path):
    rng = np.random.default_rng(1)
    x = sps.resample_poly(0.1 * rng.standard_normal(44100 * 2), *(Fraction(96000, 44100).as_integer_ratio()))
    p = write(tmp_path, "from44k1.wav", x, 96000)
    found, verdict, result = findings_for(p, spec(upsampled=[False], effective_bandwidth={"min_hz": 30000.0},
                                                  band_limited=[False]))
    f = found["sampling.upsampled"]
    assert f.status == "fail" and verdict == "fail"
    assert "44.1 kHz" in f.message and "kHz" in f.message
    assert found["sampling.effective_bandwidth"].status == "fail"
    assert found["sampling.band_limited"].status == "pass"
    assert result["measurements"]["upsampled_from_hz"] == 44100
    assert f.where_s == [[0.0, 2.0]]


def test_min_confidence_can_waive_a_verdict(tmp_path):
    rng = np.random.default_rng(2)
    x = sps.resample_poly(0.1 * rng.standard_normal(48000 * 2), 2, 1)
    p = write(tmp_path, "from48k.wav", x, 96000)
    found, _v, result = findings_for(p, spec(upsampled=[False], upsampled_min_confidence=1.0))
    conf = result["measurements"]["upsampled_confidence_fraction"]
    assert conf is not None and conf < 1.0
    assert found["sampling.upsampled"].status == "pass"
    assert "not counted" in found["sampling.upsampled"].message


def test_ultrasonic_tone_and_energy(tmp_path):
    fs = 96000
    rng = np.random.default_rng(3)
    x = 0.05 * sps.sosfilt(sps.butter(8, 15000, fs=fs, output="sos"), rng.standard_normal(fs * 4))
    x = x + sine(fs, 4.0, 30000.0, 0.01)
    p = write(tmp_path, "tone30k.wav", x, fs)
    found, verdict, _r = findings_for(p, spec(ultrasonic_tones={"max_dbfs": -60.0},
                                              ultrasonic_energy={"max_db": -10.0},
                                              ultrasonic_energy_3s={"max_db": -10.0},
                                              ultrasonic_loudness_change={"max_lu": 0.5}))
    t = found["sampling.ultrasonic_tones"]
    assert t.status == "fail"
    assert "30.00 kHz" in t.message
    assert t.measured == pytest.approx(-40.0, abs=0.5)
    assert found["sampling.ultrasonic_energy"].status == "pass"
    e3 = found["sampling.ultrasonic_energy_3s"]
    assert e3.status == "pass"
    assert found["sampling.ultrasonic_loudness_change"].status == "pass"


def test_ultrasonic_requirements_skip_at_48k(tmp_path):
    fs = 48000
    p = write(tmp_path, "plain48.wav", sine(fs, 1.0, 1000.0, 0.5), fs)
    found, verdict, _r = findings_for(p, spec(ultrasonic_energy={"max_db": -30.0},
                                              ultrasonic_tones={"max_dbfs": -60.0}))
    for key in ("sampling.ultrasonic_energy", "sampling.ultrasonic_tones"):
        assert found[key].status == "skipped"
        assert "48 kHz" in found[key].message
    assert verdict == "pass"


def test_conversion_true_peak_and_fold(tmp_path):
    # 96 kHz master: 1 kHz at 0.5 and 30 kHz at 0.3; at 48 kHz the tone would fold to 18 kHz, and the good
    # conversion's true peak is that of the 1 kHz sine alone: 20*log10(0.5) = -6.02 dBTP (analytic)
    fs = 96000
    x = sine(fs, 2.0, 1000.0, 0.5) + sine(fs, 2.0, 30000.0, 0.3)
    p = write(tmp_path, "conv.wav", x, fs)
    sp = build_spec({"spec_version": 1, "name": "x", "peaks": {"true_peak": {"max_dbtp": -1.0}},
                     "sampling": {"conversions": [
                         {"target_rate_hz": 48000, "energy_above_nyquist": {"max_db": -40.0}},
                         {"target_rate_hz": 44100, "true_peak": {"max_dbtp": -7.0}},
                         {"target_rate_hz": 96000, "true_peak": {"max_dbtp": -1.0}}]}})
    found, verdict, result = findings_for(p, sp)
    tp48 = found["sampling.conversion_48000.true_peak"]
    assert tp48.status == "pass" and tp48.measured == pytest.approx(-6.0, abs=0.05)
    fold = found["sampling.conversion_48000.energy_above_nyquist"]
    # above 24 kHz: 0.3^2/2 vs 0.5^2/2 below: 20*log10(0.3/0.5) = -4.44 dB
    assert fold.status == "fail" and fold.measured == pytest.approx(20 * math.log10(0.6), abs=0.1)
    lo, hi = (float(v) for v in re.search(r"to (\d+\.\d+)-(\d+\.\d+) kHz", fold.message).groups())
    assert lo <= 18.0 <= hi
    assert found["sampling.conversion_44100.true_peak"].status == "fail"
    assert found["sampling.conversion_96000.true_peak"].status == "skipped"
    assert "already at 96 kHz" in found["sampling.conversion_96000.true_peak"].message
    assert verdict == "fail"


def test_missing_measurements_are_skipped_not_errors():
    sp = spec(imaging=[False], aliasing=[False], alias_to_harmonic_ratio={"max_db": -40.0}, upsampled=[False])
    found, verdict = judge(sp, {"format": {"sample_rate_hz": 48000}, "measurements": {}})
    assert {f.status for f in found} == {"skipped"}
    assert verdict == "pass"
    assert all("missing" in f.message for f in found)


def test_imaging_and_aliasing_findings_from_their_keys():
    sp = spec(imaging=[False], aliasing=[False], alias_to_harmonic_ratio={"max_db": -40.0})
    m = {"imaging_detected": True,
         "imaging": [{"source_rate_hz": 48000, "coherence": 0.97, "image_level_db": -3.0, "verdict": "defect"},
                     {"source_rate_hz": 88200, "coherence": None, "image_level_db": None, "verdict": "untestable"}],
         "aliasing_detected": True, "alias_to_harmonic_ratio_db": -21.5, "aliasing_assessable": True,
         "aliasing_detail": {"reason": None, "where_s": [[1.0, 2.5]]}}
    found, verdict = judge(sp, {"format": {"sample_rate_hz": 96000}, "measurements": m})
    by = {f.check: f for f in found}
    assert by["sampling.imaging"].status == "fail" and "From a 48 kHz source: mirror images" in by["sampling.imaging"].message
    assert by["sampling.aliasing"].status == "fail" and by["sampling.aliasing"].where_s == [[1.0, 2.5]]
    # house choice (the judge's rule): -21.5 dB against a -40.0 dB ceiling misses by 18.5 dB
    assert by["sampling.alias_to_harmonic_ratio"].status == "fail" and by["sampling.alias_to_harmonic_ratio"].miss == pytest.approx(18.5)
    m["aliasing_detected"], m["alias_to_harmonic_ratio_db"] = None, None
    m["aliasing_detail"] = {"reason": "fs is a whole multiple of f0: aliases land on harmonics"}
    by = {f.check: f for f in judge(sp, {"format": {"sample_rate_hz": 96000}, "measurements": m})[0]}
    assert by["sampling.aliasing"].status == "skipped" and "whole multiple" in by["sampling.aliasing"].message


def test_imaging_finding_names_the_level_and_the_sample_pattern_evidence():
    sp = spec(imaging=[False])
    m = {"imaging_detected": True,
         "imaging": [{"source_rate_hz": 22050, "coherence": None, "image_level_db": -9.1, "verdict": "defect",
                      "evidence": "samples", "channel": "L"},
                     {"source_rate_hz": 44100, "coherence": 0.02, "image_level_db": -77.0, "verdict": "trace",
                      "evidence": "spectrum", "channel": "L"}]}
    found, verdict = judge(sp, {"format": {"sample_rate_hz": 96000}, "measurements": m})
    msg = {f.check: f for f in found}["sampling.imaging"].message
    assert verdict == "fail"
    assert ("From a 22.05 kHz source: the sample pattern of an unfiltered upsampler, the first image -9.1 dB "
            "relative to the content it mirrors in channel L.") in msg
    assert ("A 44.1 kHz source leaves a faint trace only: its first mirror image lies at -77.0 dB relative to the "
            "content it mirrors in channel L, too weak to count as a defect.") in msg


def test_partly_upsampled_master_fails_with_its_time_range():
    sp = spec(upsampled=[False])
    m = {"upsampled_from_hz": None, "upsampled_confidence_fraction": None, "effective_bandwidth_hz": 48000.0,
         "bandwidth_segments": [{"start_s": 0.0, "end_s": 5.0, "upsampled_from_hz": 44100, "upsampled_confidence_fraction": 0.8},
                                {"start_s": 5.0, "end_s": 10.0, "upsampled_from_hz": 44100, "upsampled_confidence_fraction": 0.7},
                                {"start_s": 10.0, "end_s": 15.0, "upsampled_from_hz": None, "upsampled_confidence_fraction": None}]}
    found, verdict = judge(sp, {"format": {"sample_rate_hz": 96000}, "measurements": m})
    f = found[0]
    assert f.status == "fail" and f.where_s == [[0.0, 10.0]]
    assert "44.1 kHz" in f.message and "0.0-10.0 s" in f.message
    # a minimum confidence above the segments' waives them
    found, _v = judge(spec(upsampled=[False], upsampled_min_confidence=0.9),
                      {"format": {"sample_rate_hz": 96000}, "measurements": m})
    assert found[0].status == "pass"


def test_upsampling_findings_read_as_plain_sentences():
    # wording of the upsampling finding (house choice): what was found, where, and what to do
    sp = spec(upsampled=[False])
    m = {"upsampled_from_hz": 44100, "upsampled_confidence_fraction": 0.93, "effective_bandwidth_hz": 21000.0,
         "upsampled_edge_ratio": 0.952, "bandwidth_edge_depth_db": 110.0, "upsampled_evidence": "cliff",
         "upsampled_channels": ["R"], "upsampled_where_s": [[0.0, 12.0]], "untestable_source_rates_hz": []}
    found, _v = judge(sp, {"measurements": m})
    msg = next(f for f in found if f.check == "sampling.upsampled").message
    assert "Converted up from 44.1 kHz: the spectrum ends in a converter's cliff at 21.0 kHz (0.95 of 22.05 kHz)" in msg
    assert "Channel converted: R." in msg
    assert "Reconvert from the original 44.1 kHz master rather than delivering an upsampled file" in msg
    # a gentle low-pass is a band limit, in words
    m = {"upsampled_from_hz": None, "upsampled_confidence_fraction": None, "effective_bandwidth_hz": 19800.0,
         "bandwidth_edge": "rolloff", "upsampled_channels": [], "band_limit_hz": None}
    found, _v = judge(sp, {"measurements": m})
    f = next(f for f in found if f.check == "sampling.upsampled")
    assert f.status == "pass"
    assert "rolls off gently by 19.8 kHz" in f.message and "not a rate conversion" in f.message
    # images, no cliff: named as an upsampler without a proper filter
    m = {"upsampled_from_hz": 48000, "upsampled_confidence_fraction": 0.9, "upsampled_evidence": "images",
         "upsampled_channels": ["L", "R"]}
    found, _v = judge(sp, {"measurements": m})
    msg = next(f for f in found if f.check == "sampling.upsampled").message
    assert "Converted up from 48 kHz without a proper interpolation filter" in msg and "Channels converted: L, R." in msg


def test_upsampling_from_a_sample_pattern_reads_as_a_plain_sentence():
    # wording (house choice): a hold / straight-line / zero-stuffed pattern names the source rate itself
    sp = spec(upsampled=[False])
    m = {"upsampled_from_hz": 8000, "upsampled_confidence_fraction": 1.0, "upsampled_evidence": "samples",
         "upsampled_channels": ["M"], "interpolation_kind": "hold"}
    found, _v = judge(sp, {"measurements": m})
    f = next(f for f in found if f.check == "sampling.upsampled")
    assert f.status == "fail"
    assert "Converted up from 8 kHz without an interpolation filter" in f.message
    assert "at 8 kHz exactly" in f.message and "Channel converted: M." in f.message
