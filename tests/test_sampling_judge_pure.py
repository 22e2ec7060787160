"""The sampling judge on measurement dicts written here (pure: no audio, fast enough for mutation runs).

The rule is the judge's own (house choice, written in masterqc/judge/core.py and
masterqc/spec/sections/sampling.py): a value is judged at its unit's display step, a
ceiling or floor missed gives ``fail`` (``warn`` at severity warn) with the miss from the
shown value to the limit, and the message names the value, the limit, where in frequency
(kHz) and, where known, where in time.  Every expected status and miss below follows from
the spec limits in the test by that rule; the wording checked is the judge's own (house
choice).  The measurements are invented numbers; the end-to-end tests on real files are in
tests/test_sampling_judge.py.

Provenance: house choice, the judge's rule above (DEVELOPERS.md, "judging precision"); the
expected values follow from the dicts and limits written in each test by decimal arithmetic.
"""

from __future__ import annotations

import pytest

from masterqc.judge import judge
from masterqc.judge import sampling as sj
from masterqc.spec import build_spec


def spec(**sampling):
    return build_spec({"spec_version": 1, "name": "invented sampling spec", "sampling": sampling})


def run(sp, m, rate=96000):
    fmt = {} if rate is None else {"sample_rate_hz": rate}
    found, verdict = judge(sp, {"format": fmt, "measurements": m})
    return {f.check: f for f in found}, verdict


# ------------------------------------------------------------------ small helpers

def test_khz_text_and_merged_ranges():
    assert sj._khz(22050) == "22.05 kHz"
    assert sj._khz_range(20000, 48000) == "20.00-48.00 kHz"
    # touching ranges (within 1e-6 s) merge, a gap keeps them apart, input order does not matter
    assert sj._merge([[5.0, 10.0], [0.0, 5.0], [12.0, 13.0]]) == [[0.0, 10.0], [12.0, 13.0]]
    assert sj._merge([[0.0, 4.0], [1.0, 3.0]]) == [[0.0, 4.0]]  # a range inside another keeps the wider end
    assert sj._merge([[0.0, 1.0], [1.0 + 5e-7, 2.0]]) == [[0.0, 2.0]]
    assert sj._merge([[0.0, 1.0], [1.0 + 2e-6, 2.0]]) == [[0.0, 1.0], [1.0 + 2e-6, 2.0]]
    assert sj._merge([]) == []


def test_clock_reads_minutes_then_hours():
    assert sj._clock(0.4) == "0:00"
    assert sj._clock(59.9) == "0:59"
    assert sj._clock(61.0) == "1:01"
    assert sj._clock(3599.0) == "59:59"
    assert sj._clock(3600.0) == "1:00:00"
    assert sj._clock(3725.0) == "1:02:05"
    assert sj._clock(-3.0) == "0:00"  # never a negative time


# ------------------------------------------------------------------ effective bandwidth

def test_effective_bandwidth_floor_and_note():
    sp = spec(effective_bandwidth={"min_hz": 20000.0})
    by, verdict = run(sp, {"effective_bandwidth_hz": 19000.0, "bandwidth_note": "noise-like top octave"})
    f = by["sampling.effective_bandwidth"]
    # 19000 Hz < 20000 Hz: missed by 1000 Hz (Hz are shown whole)
    assert (f.status, f.miss, verdict) == ("fail", 1000.0, "fail")
    assert f.message == ('Effective bandwidth is 19000 Hz, 1000 Hz below the limit of 20000 Hz (noise-like top octave).')
    by, verdict = run(sp, {"effective_bandwidth_hz": 20000.0, "bandwidth_note": "noise-like top octave"})
    f = by["sampling.effective_bandwidth"]
    assert (f.status, verdict) == ("pass", "pass")
    assert f.message == 'Effective bandwidth is 20000 Hz (limit: at least 20000 Hz).'  # the note only with a miss
    by, _v = run(sp, {"effective_bandwidth_hz": 19000.0})
    assert by["sampling.effective_bandwidth"].message.endswith("1000 Hz below the limit of 20000 Hz.")
    # missing key, and present but null (with and without a note)
    by, verdict = run(sp, {})
    assert by["sampling.effective_bandwidth"].status == "skipped" and verdict == "pass"
    assert by["sampling.effective_bandwidth"].message == (
        'Effective bandwidth: not judged; the measurement effective_bandwidth_hz is missing from the result (its analyzer did not run).')
    by, _v = run(sp, {"effective_bandwidth_hz": None})
    assert by["sampling.effective_bandwidth"].message == (
        'Effective bandwidth: not judged; no content above the noise floor.')
    by, _v = run(sp, {"effective_bandwidth_hz": None, "bandwidth_note": "digital silence"})
    assert by["sampling.effective_bandwidth"].message == 'Effective bandwidth: not judged; digital silence.'


def test_effective_bandwidth_at_severity_warn():
    sp = spec(effective_bandwidth={"min_hz": 20000.0, "severity": "warn"})
    by, verdict = run(sp, {"effective_bandwidth_hz": 15000.0, "bandwidth_note": "lossy source?"})
    f = by["sampling.effective_bandwidth"]
    assert (f.status, f.miss, verdict) == ("warn", 5000.0, "warn")
    assert f.message.endswith("(lossy source?) (the spec counts this as a warning).")


# ------------------------------------------------------------------ upsampling

def test_upsampling_missing_and_not_upsampled():
    sp = spec(upsampled=[False])
    by, verdict = run(sp, {})
    f = by["sampling.upsampled"]
    assert f.status == "skipped" and verdict == "pass"
    assert f.message == ('Upsampling: not judged; the measurement upsampled_from_hz is missing from the result (its analyzer did not run).')
    assert f.limit == 'no'
    by, verdict = run(sp, {"upsampled_from_hz": None})
    f = by["sampling.upsampled"]
    assert (f.status, f.measured, verdict) == ("pass", False, "pass")
    assert f.message == ("Upsampling: the file was not converted up from a lower rate. No converter's cliff below a lower standard rate's Nyquist frequency.")
    assert f.where_s == []


@pytest.mark.parametrize("m, sentence", [
    ({"band_limit_hz": 16000.0, "bandwidth_edge": "cliff", "effective_bandwidth_hz": 16000.0},
     "Band-limited at 16.0 kHz by a low-pass whose position or slope no rate converter explains; "
     "not a rate conversion."),
    ({"band_limit_hz": None, "bandwidth_edge": "cliff", "effective_bandwidth_hz": 19500.0},
     "Band-limited at 19.5 kHz; not a rate conversion."),
    ({"bandwidth_edge": "cliff", "effective_bandwidth_hz": None},
     "No converter's cliff below a lower standard rate's Nyquist frequency."),
    ({"bandwidth_edge": "rolloff", "effective_bandwidth_hz": 18250.0},
     "The spectrum rolls off gently by 18.2 kHz (no converter's cliff); not a rate conversion."),
    ({"bandwidth_edge": "rolloff", "effective_bandwidth_hz": None, "bandwidth_note": "too short"},
     "No converter's cliff below a lower standard rate's Nyquist frequency (too short)."),
    ({"bandwidth_note": "digital silence"},
     "No converter's cliff below a lower standard rate's Nyquist frequency (digital silence)."),
])
def test_not_upsampled_sentences(m, sentence):
    by, _v = run(spec(upsampled=[False]), {"upsampled_from_hz": None, **m})
    assert by["sampling.upsampled"].message == "Upsampling: the file was not converted up from a lower rate. " + sentence


def test_upsampled_cliff_fails_with_where_and_confidence():
    sp = spec(upsampled=[False], upsampled_min_confidence=0.5)
    m = {"upsampled_from_hz": 44100, "upsampled_confidence_fraction": 0.5, "upsampled_evidence": "cliff",
         "effective_bandwidth_hz": 21000.0, "upsampled_edge_ratio": 0.952, "bandwidth_edge_depth_db": 96.4,
         "upsampled_channels": ["L", "R"], "upsampled_where_s": [(0.0, 30.0)],
         "untestable_source_rates_hz": [88200, 48000]}
    by, verdict = run(sp, m)
    f = by["sampling.upsampled"]
    # a confidence equal to the minimum counts (at or above)
    assert (f.status, f.measured, verdict) == ("fail", True, "fail")
    assert f.where_s == [[0.0, 30.0]]
    assert f.message == (
        "Upsampling: the file was converted up from 44.1 kHz; the spec does not allow this. Converted up from 44.1 kHz: the spectrum ends in a converter's cliff at 21.0 kHz (0.95 of 22.05 kHz), 96 dB deep. Channels converted: L, R. Reconvert from the original 44.1 kHz master rather than delivering an upsampled file (confidence 0.50). Cannot be tested for a source at 88.2, 48 kHz (no content just below its Nyquist frequency, or no room above it).")


def test_upsampled_below_the_minimum_confidence_is_not_counted():
    sp = spec(upsampled=[False], upsampled_min_confidence=0.6)
    m = {"upsampled_from_hz": 48000, "upsampled_confidence_fraction": 0.59, "upsampled_where_s": [[0.0, 9.0]]}
    by, verdict = run(sp, m)
    f = by["sampling.upsampled"]
    assert (f.status, f.measured, verdict) == ("pass", False, "pass")
    assert f.where_s == []  # no time ranges on a pass
    assert f.message == (
        "Upsampling: the file was converted up from 48 kHz. Converted up from 48 kHz: the spectrum ends in a converter's cliff. Reconvert from the original 48 kHz master rather than delivering an upsampled file (confidence 0.59). Below the spec's minimum confidence of 0.60, so not counted.")
    # without a minimum every verdict counts; no confidence at all counts too
    by, _v = run(spec(upsampled=[False]), dict(m, upsampled_confidence_fraction=0.01))
    assert by["sampling.upsampled"].status == "fail"
    by, _v = run(sp, dict(m, upsampled_confidence_fraction=None))
    f = by["sampling.upsampled"]
    assert f.status == "fail" and f.where_s == [[0.0, 9.0]]
    assert f.message.endswith("rather than delivering an upsampled file.")


def test_upsampled_allowed_by_the_spec_and_severity_warn():
    m = {"upsampled_from_hz": 44100, "upsampled_confidence_fraction": 0.9, "upsampled_where_s": [[1.0, 2.0]]}
    by, verdict = run(spec(upsampled=[True, False]), m)
    f = by["sampling.upsampled"]
    assert (f.status, verdict, f.where_s) == ("pass", "pass", [])
    assert f.message.startswith("Upsampling: the file was converted up from 44.1 kHz. Converted up from 44.1 kHz")
    assert f.limit == 'yes or no'
    by, verdict = run(spec(upsampled={"allowed": [False], "severity": "warn"}), m)
    f = by["sampling.upsampled"]
    assert (f.status, verdict, f.where_s) == ("warn", "warn", [[1.0, 2.0]])
    assert f.message.startswith("Upsampling: the file was converted up from 44.1 kHz; the spec does not allow this "
                                "(the spec counts this as a warning). Converted up")


@pytest.mark.parametrize("evidence, body", [
    ("segments", "Converted up from 44.1 kHz: every part of the file ends in a converter's cliff below "
                 "22.05 kHz."),
    ("images", "Converted up from 44.1 kHz without a proper interpolation filter: the spectrum above 22.05 kHz "
               "holds mirror images of the content below it."),
    ("samples", "Converted up from 44.1 kHz without an interpolation filter: the samples repeat a held, "
                "straight-line or zero-stuffed pattern at 44.1 kHz exactly."),
])
def test_upsampled_sentence_per_evidence(evidence, body):
    m = {"upsampled_from_hz": 44100, "upsampled_confidence_fraction": 1.0, "upsampled_evidence": evidence,
         "upsampled_channels": ["M"]}
    by, _v = run(spec(upsampled=[False]), m)
    assert by["sampling.upsampled"].message == (
        "Upsampling: the file was converted up from 44.1 kHz; the spec does not allow this. " + body
        + " Channel converted: M. Reconvert from the original 44.1 kHz master rather than delivering an "
          "upsampled file (confidence 1.00).")


def test_upsampled_cliff_without_depth_or_edge():
    base = {"upsampled_from_hz": 48000, "upsampled_confidence_fraction": None}
    by, _v = run(spec(upsampled=[False]), dict(base, effective_bandwidth_hz=23000.0, upsampled_edge_ratio=0.958))
    msg = by["sampling.upsampled"].message
    assert "cliff at 23.0 kHz (0.96 of 24 kHz)." in msg and "deep" not in msg
    by, _v = run(spec(upsampled=[False]), dict(base, effective_bandwidth_hz=23000.0, upsampled_edge_ratio=0.958,
                                               bandwidth_edge_depth_db=0.0))
    assert "(0.96 of 24 kHz)." in by["sampling.upsampled"].message  # a depth of 0 is not written
    by, _v = run(spec(upsampled=[False]), dict(base, effective_bandwidth_hz=23000.0))
    assert "Converted up from 48 kHz: the spectrum ends in a converter's cliff. Reconvert" in \
        by["sampling.upsampled"].message
    by, _v = run(spec(upsampled=[False]), dict(base, upsampled_edge_ratio=0.958))
    assert "Converted up from 48 kHz: the spectrum ends in a converter's cliff. Reconvert" in \
        by["sampling.upsampled"].message


def test_partly_upsampled_names_rates_and_merged_times():
    seg = [{"start_s": 10.0, "end_s": 20.0, "upsampled_from_hz": 48000, "upsampled_confidence_fraction": 0.9},
           {"start_s": 0.0, "end_s": 10.0, "upsampled_from_hz": 44100, "upsampled_confidence_fraction": None},
           {"start_s": 30.0, "end_s": 40.0, "upsampled_from_hz": 44100, "upsampled_confidence_fraction": 0.8},
           {"start_s": 20.0, "end_s": 30.0, "upsampled_from_hz": None, "upsampled_confidence_fraction": None},
           {"start_s": 40.0, "end_s": 50.0, "upsampled_from_hz": 88200, "upsampled_confidence_fraction": 0.3}]
    m = {"upsampled_from_hz": None, "bandwidth_segments": seg}
    by, verdict = run(spec(upsampled=[False], upsampled_min_confidence=0.8), m)
    f = by["sampling.upsampled"]
    # 0.3 < 0.8 drops the 88.2 kHz segment; 0.8 counts (at or above); None counts
    assert (f.status, f.measured, verdict) == ("fail", True, "fail")
    assert f.where_s == [[0.0, 20.0], [30.0, 40.0]]
    assert f.message == ("Upsampling: part of the file was converted up from 44.1 kHz or 48 kHz; the spec does not allow this. Part of the file ends in a converter's cliff, as if converted up from 44.1 kHz or 48 kHz (0.0-20.0 s, 30.0-40.0 s).")
    # allowed by the spec: the parts are still named, without time ranges on the finding
    by, _v = run(spec(upsampled=[True, False], upsampled_min_confidence=0.8), m)
    f = by["sampling.upsampled"]
    assert f.status == "pass" and f.where_s == [] and "(0.0-20.0 s, 30.0-40.0 s)" in f.message
    # above every stated confidence only the segment without a confidence still counts
    by, _v = run(spec(upsampled=[False], upsampled_min_confidence=0.95), m)
    f = by["sampling.upsampled"]
    assert f.status == "fail" and f.where_s == [[0.0, 10.0]] and "up from 44.1 kHz (0.0-10.0 s)" in f.message
    # no segment counts: not upsampled
    m["bandwidth_segments"] = [s for s in seg if s["upsampled_confidence_fraction"] is not None]
    by, _v = run(spec(upsampled=[False], upsampled_min_confidence=0.95), m)
    assert by["sampling.upsampled"].status == "pass"


# ------------------------------------------------------------------ band limit

def test_band_limited():
    sp = spec(band_limited=[False])
    by, verdict = run(sp, {"band_limit_hz": 15500.0, "bandwidth_edge_depth_db": 60})
    f = by["sampling.band_limited"]
    assert (f.status, f.measured, verdict) == ("fail", True, "fail")
    assert f.message == ('Band limit: the content ends in a cliff at 15.50 kHz that no sample-rate conversion explains; the spec does not allow this. The cliff is 60 dB deep (a lossy or low-passed source?).')
    # where the bandwidth analysis says why the cliff is a band limit, the finding gives its reason
    by, _v = run(sp, {"band_limit_hz": 20940.0, "bandwidth_edge_depth_db": 60,
                      "bandwidth_note": "band-limited at 20.9 kHz by a low-pass"})
    assert by["sampling.band_limited"].message.endswith(
        'The cliff is 60 dB deep (band-limited at 20.9 kHz by a low-pass).')
    by, verdict = run(sp, {"band_limit_hz": None, "bandwidth_note": "rolls off"})
    f = by["sampling.band_limited"]
    assert (f.status, f.measured, verdict) == ("pass", False, "pass")
    assert f.message == 'Band limit: no low-pass at a frequency that no standard rate explains (rolls off).'
    by, _v = run(sp, {"band_limit_hz": None})
    assert by["sampling.band_limited"].message == \
        'Band limit: no low-pass at a frequency that no standard rate explains.'
    by, _v = run(sp, {})
    f = by["sampling.band_limited"]
    assert f.status == "skipped" and f.message == (
        'Band limit: not judged; the measurement band_limit_hz is missing from the result (its analyzer did not run).')


# ------------------------------------------------------------------ imaging

def test_imaging_detail_and_untestable_reason():
    sp = spec(imaging=[False])
    m = {"imaging_detected": True,
         "imaging": [{"source_rate_hz": 44100, "verdict": "defect", "coherence": 0.912, "image_level_db": -12.34,
                      "channel": "L"},
                     {"source_rate_hz": 48000, "verdict": "trace", "coherence": None, "image_level_db": None},
                     {"source_rate_hz": 88200, "verdict": "clean", "coherence": 0.1, "image_level_db": -90.0}]}
    by, verdict = run(sp, m)
    f = by["sampling.imaging"]
    assert (f.status, verdict) == ("fail", "fail")
    assert f.message == ('Imaging: the spectrum holds mirror images left by an unfiltered upsampler; the spec does not allow this. From a 44.1 kHz source: mirror images of the content, the first image -12.3 dB relative to the content it mirrors in channel L (images and content move together: coherence 0.91). A 48 kHz source leaves a faint trace only, too weak to count as a defect.')
    by, _v = run(sp, {"imaging_detected": False, "imaging": m["imaging"][2:]})
    f = by["sampling.imaging"]
    assert f.status == "pass" and f.message == 'Imaging: no mirror images of an unfiltered upsampler.'
    # not testable: the first untestable candidate with a reason and a rate says why
    cands = [{"source_rate_hz": 22050, "verdict": "untestable", "reason": ""},
             {"source_rate_hz": None, "verdict": "untestable", "reason": "no rate"},
             "not a record",
             {"source_rate_hz": 44100, "verdict": "untestable", "reason": "no content below 22 kHz"},
             {"source_rate_hz": 48000, "verdict": "untestable", "reason": "second reason"}]
    by, verdict = run(sp, {"imaging_detected": None, "imaging": cands})
    f = by["sampling.imaging"]
    assert (f.status, verdict) == ("skipped", "pass")
    assert f.message == ('Imaging: not judged; no candidate source rate could be tested (e.g. 44.1 kHz: no content below 22 kHz).')
    by, _v = run(sp, {"imaging_detected": None})
    assert by["sampling.imaging"].message == (
        'Imaging: not judged; no candidate source rate could be tested.')
    by, _v = run(sp, {})
    assert "the measurement imaging_detected is missing" in by["sampling.imaging"].message


# ------------------------------------------------------------------ aliasing

def test_aliasing_message_tonal_with_examples_and_ratio():
    sp = spec(aliasing=[False])
    detail = {"where_s": [[65.0, 70.0], [3.0, 5.5]], "frames_with_alias_lines": 4, "median_f0_hz": 440.04,
              "folded_partials": 2,
              "fold_examples": [{"rising_hz": 23500.0, "at_s": 3.25, "folded_hz": 24500.0, "folded_at_s": 3.5}]}
    by, verdict = run(sp, {"aliasing_detected": True, "alias_to_harmonic_ratio_db": -31.26,
                           "aliasing_detail": detail}, rate=48000)
    f = by["sampling.aliasing"]
    assert (f.status, verdict) == ("fail", "fail")
    assert f.where_s == [[65.0, 70.0], [3.0, 5.5]]
    assert f.message == (
        "Aliasing: folded (aliased) content found from 0:03 to 1:10; the spec does not allow this. "
        "The notes here (fundamental about 440.0 Hz) have "
        "harmonics above 24 kHz that fold back into the audible band, between the true harmonics. "
        "Also, a partial rising towards 24 kHz comes back falling at the mirrored frequency "
        "(e.g. 23.50 kHz at 3.25 s, back at 24.50 kHz at 3.50 s). "
        "The folded partials are -31.3 dB relative to the harmonics. "
        "A synthesiser voice generated without band limiting does this, and so does a rate conversion that "
        "dropped samples without an anti-alias filter. Re-render the voice with its oscillators' anti-aliasing "
        "on, or at a higher internal rate; or redo the conversion from the original with a proper resampler.")


def test_aliasing_message_partials_only_and_warn():
    sp = spec(aliasing={"allowed": [False], "severity": "warn"})
    detail = {"where_s": [[3.2, 3.9]], "folded_partials": 1, "fold_examples": []}
    by, verdict = run(sp, {"aliasing_detected": True, "aliasing_detail": detail}, rate=None)
    f = by["sampling.aliasing"]
    assert (f.status, verdict, f.where_s) == ("warn", "warn", [[3.2, 3.9]])
    assert f.message.startswith(
        "Aliasing: folded (aliased) content found at 0:03; the spec does not allow this (the spec counts this as "
        "a warning). A partial rising towards the Nyquist frequency comes back falling at the "
        "mirrored frequency. A synthesiser voice")
    assert "relative to the harmonics" not in f.message


def test_aliasing_message_without_times_or_kind():
    sp = spec(aliasing=[False])
    by, _v = run(sp, {"aliasing_detected": True, "aliasing_detail": {"polyphonic_instances_with_folds": 2}})
    f = by["sampling.aliasing"]
    assert f.where_s == []
    assert f.message.startswith("Aliasing: folded (aliased) content found in this file; the spec does not allow "
                                "this. The notes here have harmonics above 48 kHz that fold back")
    by, _v = run(sp, {"aliasing_detected": True})
    assert by["sampling.aliasing"].message.startswith("Aliasing: folded (aliased) content found in this file; the spec does not allow this. "
                                                      "A synthesiser voice")


def test_aliasing_pass_and_not_assessable():
    sp = spec(aliasing=[False])
    by, verdict = run(sp, {"aliasing_detected": False, "aliasing_detail": {"where_s": [[1.0, 2.0]]}})
    f = by["sampling.aliasing"]
    assert (f.status, verdict, f.where_s) == ("pass", "pass", [])
    assert f.message == 'Aliasing: no folded (aliased) content.'
    by, _v = run(sp, {"aliasing_detected": None})
    assert by["sampling.aliasing"].message == 'Aliasing: not judged; not assessable on this material.'
    by, _v = run(sp, {"aliasing_detected": None, "aliasing_detail": {"reason": "no tonal passage"}})
    assert by["sampling.aliasing"].message == 'Aliasing: not judged; no tonal passage.'
    by, _v = run(sp, {})
    assert by["sampling.aliasing"].message.startswith(
        "Aliasing: not judged; the measurement aliasing_detected is missing")


def test_alias_ratio_against_its_ceiling():
    sp = spec(alias_to_harmonic_ratio={"max_db": -40.0})
    detail = {"where_s": [[1.0, 2.0]]}
    by, verdict = run(sp, {"alias_to_harmonic_ratio_db": -35.04, "aliasing_detail": detail})
    f = by["sampling.alias_to_harmonic_ratio"]
    # -35.04 is shown as -35.0 (0.1 dB step), above -40.0 by 5.0 dB
    assert (f.status, f.miss, verdict, f.where_s) == ("fail", 5.0, "fail", [[1.0, 2.0]])
    assert f.message == 'Alias-to-harmonic ratio is -35.0 dB, 5.0 dB above the limit of -40.0 dB.'
    by, verdict = run(sp, {"alias_to_harmonic_ratio_db": -40.04, "aliasing_detail": detail})
    assert (by["sampling.alias_to_harmonic_ratio"].status, verdict) == ("pass", "pass")


def test_alias_ratio_below_the_floor_meets_the_ceiling():
    sp = spec(alias_to_harmonic_ratio={"max_db": -40.0})
    detail = {"assessable_frames": 12, "fold_positions_tested": 30, "score_upper_bound_db": -52.4}
    m = {"alias_to_harmonic_ratio_db": None, "aliasing_assessable": True, "aliasing_detail": detail}
    by, verdict = run(sp, m)
    f = by["sampling.alias_to_harmonic_ratio"]
    assert (f.status, verdict, f.measured) == ("pass", "pass", None)
    assert f.message == ('Alias-to-harmonic ratio: no alias lines found above the floor at the 30 fold positions tested (at most -52 dB if every one held a line just below the detection level) (limit: at most -40.0 dB).')
    by, _v = run(sp, dict(m, aliasing_detail={"assessable_frames": 1}))
    assert by["sampling.alias_to_harmonic_ratio"].message == (
        'Alias-to-harmonic ratio: no alias lines found above the floor at the 0 fold positions tested (limit: at most -40.0 dB).')
    # each condition withheld: skipped instead, with the detail's reason or the default
    for change in ({"aliasing_assessable": None}, {"aliasing_assessable": 1},
                   {"aliasing_detail": dict(detail, assessable_frames=0)},
                   {"aliasing_detail": dict(detail, assessable_frames=None)},
                   {"aliasing_detail": dict(detail, folded_partials=3)},
                   {"aliasing_detail": dict(detail, frames_with_alias_lines=2)}):
        by, _v = run(sp, dict(m, **change))
        f = by["sampling.alias_to_harmonic_ratio"]
        assert f.status == "skipped", change
        assert f.message == 'Alias-to-harmonic ratio: not judged; not assessable on this material.', change
    by, _v = run(sp, dict(m, aliasing_detail=dict(detail, folded_partials=3, reason="folds without lines")))
    assert by["sampling.alias_to_harmonic_ratio"].message == (
        'Alias-to-harmonic ratio: not judged; folds without lines.')
    by, _v = run(sp, {"aliasing_assessable": True, "aliasing_detail": detail})
    assert by["sampling.alias_to_harmonic_ratio"].message.startswith(
        "Alias-to-harmonic ratio: not judged; the measurement alias_to_harmonic_ratio_db is missing")


# ------------------------------------------------------------------ ultrasonic content

ULTRA = dict(ultrasonic_energy={"max_db": -30.0}, ultrasonic_energy_3s={"max_db": -20.0, "severity": "warn"},
             ultrasonic_tones={"max_dbfs": -60.0}, ultrasonic_loudness_change={"max_lu": 0.2})


def test_ultrasonic_energy_tones_and_loudness_change():
    m = {"ultrasonic_from_hz": 20000.0, "ultrasonic_energy_db": -25.0, "ultrasonic_energy_max_3s_db": -12.36,
         "ultrasonic_energy_max_3s_where_s": [[6.0, 9.0]], "ultrasonic_loudness_change_lu": -0.25,
         "ultrasonic_tones": [{"frequency_hz": 30000.0, "level_dbfs": -70.0},
                              {"frequency_hz": 25000.0, "level_dbfs": -55.04},
                              {"frequency_hz": 40000.0, "level_dbfs": -80.0}]}
    by, verdict = run(spec(**ULTRA), m)
    assert verdict == "fail"
    f = by["sampling.ultrasonic_energy"]
    assert (f.status, f.miss) == ("fail", 5.0)
    assert f.message == ('Ultrasonic energy (20.00-48.00 kHz) relative to the audible band is -25.0 dB, 5.0 dB above the limit of -30.0 dB.')
    f = by["sampling.ultrasonic_energy_3s"]
    # -12.36 is shown as -12.4, above -20.0 by 7.6 dB; severity warn
    assert (f.status, f.miss, f.where_s) == ("warn", pytest.approx(7.6), [[6.0, 9.0]])
    assert f.message.startswith("Ultrasonic energy (20.00-48.00 kHz) relative to the audible band, worst 3 s "
                                "is -12.4 dB, 7.6 dB above")
    f = by["sampling.ultrasonic_tones"]
    # the loudest tone (-55.04 dBFS, shown -55.0) is above -60.0 dBFS by 5.0 dB
    assert (f.status, f.miss) == ("fail", 5.0)
    assert f.message == ('Loudest ultrasonic tone (25.00 kHz) is -55.0 dBFS, 5.0 dB above the limit of -60.0 dBFS. Tones: 25.00 kHz at -55.0 dBFS, 30.00 kHz at -70.0 dBFS, 40.00 kHz at -80.0 dBFS.')
    f = by["sampling.ultrasonic_loudness_change"]
    # judged on the magnitude: |-0.25| is shown as 0.3 (a tie at a ceiling goes up), above 0.2 by 0.1 LU
    assert (f.status, f.measured, f.miss) == ("fail", 0.3, pytest.approx(0.1))
    assert f.message == ('Loudness change from a low-pass at the ultrasonic band edge (magnitude) is 0.3 LU, 0.1 LU above the limit of 0.2 LU.')


def test_ultrasonic_tones_at_most_five_listed_and_none_found():
    tones = [{"frequency_hz": 21000.0 + 1000 * i, "level_dbfs": -100.0 + i} for i in range(7)]
    by, _v = run(spec(**ULTRA), {"ultrasonic_energy_db": -50.0, "ultrasonic_tones": tones,
                                 "ultrasonic_from_hz": 21000.0})
    f = by["sampling.ultrasonic_tones"]
    assert f.status == "pass"
    assert f.message == ('Loudest ultrasonic tone (27.00 kHz) is -94.0 dBFS (limit: at most -60.0 dBFS). Tones: 27.00 kHz at -94.0 dBFS, 26.00 kHz at -95.0 dBFS, 25.00 kHz at -96.0 dBFS, 24.00 kHz at -97.0 dBFS, 23.00 kHz at -98.0 dBFS.')
    by, _v = run(spec(**ULTRA), {"ultrasonic_energy_db": -50.0, "ultrasonic_tones": [],
                                 "ultrasonic_from_hz": 24000.0})
    f = by["sampling.ultrasonic_tones"]
    assert (f.status, f.limit, f.unit, f.severity) == ("pass", "<= -60.0 dBFS", "dBFS", "fail")
    assert f.message == 'No stationary tone above 24.00 kHz (limit: at most -60.0 dBFS).'
    by, _v = run(spec(ultrasonic_tones={"max_dbfs": -60.0, "severity": "warn"}),
                 {"ultrasonic_energy_db": -50.0, "ultrasonic_tones": None})
    f = by["sampling.ultrasonic_tones"]
    assert (f.severity, f.message) == ("warn", 'No stationary tone above 20.00 kHz (limit: at most -60.0 dBFS).')


def test_ultrasonic_not_judged_reasons():
    sp = spec(**ULTRA)
    # at 48 kHz: the master is not above 48 kHz
    by, verdict = run(sp, {"ultrasonic_energy_db": None, "ultrasonic_energy_max_3s_db": None,
                           "ultrasonic_tones": [], "ultrasonic_loudness_change_lu": None}, rate=48000)
    assert verdict == "pass" and {f.status for f in by.values()} == {"skipped"}
    why = "not judged; the master is at 48 kHz; ultrasonic content is judged for masters above 48 kHz"
    assert by["sampling.ultrasonic_energy"].message == (
        "Ultrasonic energy (20.00-24.00 kHz) relative to the audible band: " + why + ".")
    assert by["sampling.ultrasonic_tones"].message == "Loudest ultrasonic tone: " + why + "."
    assert by["sampling.ultrasonic_loudness_change"].message.endswith(why + ".")
    by, _v = run(sp, {"ultrasonic_energy_db": None}, rate=44100)
    assert by["sampling.ultrasonic_energy"].message.endswith("the master is at 44.1 kHz; ultrasonic content is "
                                                             "judged for masters above 48 kHz.")
    # the band edge at or above Nyquist
    by, _v = run(sp, {"ultrasonic_energy_db": None, "ultrasonic_from_hz": 48000.0}, rate=96000)
    assert by["sampling.ultrasonic_energy"].message.endswith(
        "not judged; the Nyquist frequency (48.00 kHz) is not above the ultrasonic band edge (48.00 kHz).")
    by, _v = run(sp, {"ultrasonic_energy_db": None, "ultrasonic_from_hz": 47000.0}, rate=96000)
    assert by["sampling.ultrasonic_energy"].message.endswith("not judged; the audible band holds no energy "
                                                             "(digital silence).")
    by, _v = run(sp, {"ultrasonic_energy_db": None}, rate=96000)
    assert by["sampling.ultrasonic_energy"].message.endswith("(digital silence).")
    # unknown rate: the band is written from its edge only
    by, _v = run(sp, {"ultrasonic_energy_db": None, "ultrasonic_from_hz": 30000.0}, rate=None)
    assert by["sampling.ultrasonic_energy"].message == (
        'Ultrasonic energy (above 30.00 kHz) relative to the audible band: not judged; the audible band holds no energy (digital silence).')
    # missing measurements
    by, _v = run(sp, {}, rate=96000)
    assert by["sampling.ultrasonic_energy_3s"].message.endswith(
        "the measurement ultrasonic_energy_max_3s_db is missing from the result (its analyzer did not run).")
    assert by["sampling.ultrasonic_tones"].message.endswith(
        "the measurement ultrasonic_energy_db is missing from the result (its analyzer did not run).")
    assert by["sampling.ultrasonic_loudness_change"].message.endswith(
        "the measurement ultrasonic_loudness_change_lu is missing from the result (its analyzer did not run).")
    # energy measured but the tone list missing: not judged
    by, _v = run(sp, {"ultrasonic_energy_db": -40.0})
    assert by["sampling.ultrasonic_tones"].status == "skipped"


def test_loudness_change_magnitude_passes_below_the_ceiling():
    by, _v = run(spec(ultrasonic_loudness_change={"max_lu": 0.2}), {"ultrasonic_loudness_change_lu": -0.2})
    f = by["sampling.ultrasonic_loudness_change"]
    assert (f.status, f.measured) == ("pass", 0.2)


# ------------------------------------------------------------------ conversions

CONV = {"conversions": [{"target_rate_hz": 48000, "true_peak": {"max_dbtp": -1.0},
                         "energy_above_nyquist": {"max_db": -40.0, "severity": "warn"}},
                        {"target_rate_hz": 44100, "true_peak": {"max_dbtp": -2.0}}]}


def test_conversion_true_peak_and_folds():
    folds = [{"from_hz": 24000.0, "to_hz": 30000.0, "fold_to_hz": [[18000.0, 24000.0]]},
             {"from_hz": 30000.0, "to_hz": 48000.0, "fold_to_hz": [[0.0, 18000.0], [1000.0, 2000.0]]},
             *({"from_hz": 1.0, "to_hz": 2.0, "fold_to_hz": [[3.0, 4.0]]} for _ in range(3))]
    m = {"conversions": [{"target_rate_hz": 48000, "true_peak_after_dbtp": -0.54, "filter": "soxr VHQ",
                          "energy_above_target_nyquist_db": -35.0, "folds": folds},
                         {"target_rate_hz": 44100, "true_peak_after_dbtp": -2.5, "filter": "soxr VHQ",
                          "energy_above_target_nyquist_db": -90.0}]}
    by, verdict = run(spec(**CONV), m)
    assert verdict == "fail"
    f = by["sampling.conversion_48000.true_peak"]
    # -0.54 is shown as -0.5 dBTP, above -1.0 by 0.5 dB
    assert (f.status, f.miss) == ("fail", 0.5)
    assert f.message == ('True peak after conversion to 48 kHz is -0.5 dBTP, 0.5 dB above the limit of -1.0 dBTP. Converter used for this estimate: soxr VHQ.')
    f = by["sampling.conversion_48000.energy_above_nyquist"]
    assert (f.status, f.miss) == ("warn", 5.0)
    assert f.message == (
        'Energy above 24.00 kHz (Nyquist of 48 kHz) relative to the band below is -35.0 dB, 5.0 dB above the limit of -40.0 dB (the spec counts this as a warning). A converter without an anti-alias filter would fold 24.00-30.00 kHz to 18.00-24.00 kHz, 30.00-48.00 kHz to 0.00-18.00 kHz and 1.00-2.00 kHz, 0.00-0.00 kHz to 0.00-0.00 kHz, 0.00-0.00 kHz to 0.00-0.00 kHz.')  # at most four listed
    f = by["sampling.conversion_44100.true_peak"]
    assert f.status == "pass"
    assert f.message == 'True peak after conversion to 44.1 kHz is -2.5 dBTP (limit: at most -2.0 dBTP).'
    assert "sampling.conversion_44100.energy_above_nyquist" not in by  # not asked for


def test_conversion_pass_has_no_fold_list_and_silence_is_skipped():
    m = {"conversions": [{"target_rate_hz": 48000, "true_peak_after_dbtp": None,
                          "energy_above_target_nyquist_db": -60.0,
                          "folds": [{"from_hz": 24000.0, "to_hz": 30000.0, "fold_to_hz": [[18000.0, 24000.0]]}]}]}
    by, verdict = run(spec(**CONV), m)
    f = by["sampling.conversion_48000.energy_above_nyquist"]
    assert f.status == "pass" and "fold" not in f.message
    f = by["sampling.conversion_48000.true_peak"]
    assert f.status == "skipped"
    assert f.message == 'True peak after conversion to 48 kHz: not judged; the converted signal is digital silence.'
    m["conversions"][0]["energy_above_target_nyquist_db"] = None
    by, _v = run(spec(**CONV), m)
    assert by["sampling.conversion_48000.energy_above_nyquist"].message.endswith(
        "not judged; no content above the target's Nyquist.")
    by, _v = run(spec(**CONV), m, rate=48000)
    assert by["sampling.conversion_48000.energy_above_nyquist"].message.endswith(
        "not judged; the target rate is not below the master's (48000 Hz): nothing can fold.")
    by, _v = run(spec(**CONV), m, rate=None)
    assert by["sampling.conversion_48000.energy_above_nyquist"].message.endswith(
        "not judged; no content above the target's Nyquist.")
    # a pass or warn of the true peak: the converter is named only with a miss
    m["conversions"][0]["true_peak_after_dbtp"] = -3.0
    m["conversions"][0]["filter"] = "soxr VHQ"
    by, _v = run(spec(**CONV), m)
    assert by["sampling.conversion_48000.true_peak"].message == \
        'True peak after conversion to 48 kHz is -3.0 dBTP (limit: at most -1.0 dBTP).'


def test_conversion_not_measured_or_already_at_the_rate():
    by, verdict = run(spec(**CONV), {"conversions": []}, rate=96000)
    assert verdict == "pass"
    f = by["sampling.conversion_48000.true_peak"]
    assert (f.status, f.severity) == ("skipped", "fail")
    assert f.message == ("True peak after conversion to 48 kHz: not judged; no conversion to 48000 Hz was measured (the measurement was made without this spec's targets).")
    f = by["sampling.conversion_48000.energy_above_nyquist"]
    assert (f.status, f.severity) == ("skipped", "warn")
    assert f.message == ("Energy above 24.00 kHz (Nyquist of 48 kHz): not judged; no conversion to 48000 Hz was measured (the measurement was made without this spec's targets).")
    assert "sampling.conversion_44100.energy_above_nyquist" not in by
    by, _v = run(spec(**CONV), {}, rate=48000)
    assert by["sampling.conversion_48000.true_peak"].message == (
        'True peak after conversion to 48 kHz: not judged; the master is already at 48 kHz.')
    assert by["sampling.conversion_44100.true_peak"].message.endswith("no conversion to 44100 Hz was measured "
                                                                      "(the measurement was made without this "
                                                                      "spec's targets).")
    # a target with neither requirement gives no finding
    by, _v = run(spec(conversions=[{"target_rate_hz": 48000}]), {})
    assert not [c for c in by if c.startswith("sampling.conversion")]


def test_no_requirement_no_finding():
    found, verdict = judge(spec(), {"format": {"sample_rate_hz": 96000},
                                    "measurements": {"upsampled_from_hz": 44100, "aliasing_detected": True}})
    assert [f for f in found if f.check.startswith("sampling.")] == [] and verdict == "pass"


# ------------------------------------------------------------------ edges of each rule

def test_edges_of_merging_and_clock():
    # ranges within 1e-6 s of each other merge, that edge included
    assert sj._merge([[0.0, 1.0], [1.0 + 1e-6, 2.0]]) == [[0.0, 2.0]]
    # a whole minute: 60 s is 1:00, 3660 s is 1:01:00
    assert sj._clock(60.0) == "1:00"
    assert sj._clock(3660.0) == "1:01:00"


def test_khz_sentences_at_a_tenth_of_a_kilohertz():
    # 22060 Hz is 22.1 kHz at one decimal (22.06 rounds up)
    sp = spec(upsampled=[False])
    by, _v = run(sp, {"upsampled_from_hz": None, "band_limit_hz": 22060.0})
    assert "Band-limited at 22.1 kHz by a low-pass" in by["sampling.upsampled"].message
    by, _v = run(sp, {"upsampled_from_hz": None, "bandwidth_edge": "cliff", "effective_bandwidth_hz": 22060.0})
    assert "Band-limited at 22.1 kHz; not a rate conversion." in by["sampling.upsampled"].message
    by, _v = run(sp, {"upsampled_from_hz": None, "bandwidth_edge": "rolloff", "effective_bandwidth_hz": 22060.0})
    assert "rolls off gently by 22.1 kHz" in by["sampling.upsampled"].message
    by, _v = run(sp, {"upsampled_from_hz": 48000, "effective_bandwidth_hz": 22060.0, "upsampled_edge_ratio": 0.919})
    assert "cliff at 22.1 kHz (0.92 of 24 kHz)" in by["sampling.upsampled"].message


def test_bandwidth_and_upsampling_findings_are_both_kept():
    by, verdict = run(spec(effective_bandwidth={"min_hz": 20000.0}, upsampled=[False]),
                      {"effective_bandwidth_hz": 21000.0, "upsampled_from_hz": None})
    assert sorted(by) == ["sampling.effective_bandwidth", "sampling.upsampled"] and verdict == "pass"


def test_partly_upsampled_at_severity_warn_carries_its_times():
    m = {"upsampled_from_hz": None,
         "bandwidth_segments": [{"start_s": 0.0, "end_s": 5.0, "upsampled_from_hz": 44100,
                                 "upsampled_confidence_fraction": 0.9}]}
    by, verdict = run(spec(upsampled={"allowed": [False], "severity": "warn"}), m)
    f = by["sampling.upsampled"]
    assert (f.status, verdict, f.where_s) == ("warn", "warn", [[0.0, 5.0]])


def test_a_rate_just_above_48k_is_judged_for_ultrasonic_content():
    # the rule is "above 48 kHz": 48001 Hz is above it, so the reason is not the rate
    by, _v = run(spec(ultrasonic_energy={"max_db": -30.0}), {"ultrasonic_energy_db": None}, rate=48001)
    assert by["sampling.ultrasonic_energy"].message.endswith("the audible band holds no energy (digital silence).")


def test_conversion_misses_at_severity_warn_and_fail_name_converter_and_folds():
    conv = {"conversions": [{"target_rate_hz": 48000, "true_peak": {"max_dbtp": -1.0, "severity": "warn"},
                             "energy_above_nyquist": {"max_db": -40.0}}]}
    folds = [{"from_hz": 24000.0, "to_hz": 30000.0, "fold_to_hz": [[18000.0, 24000.0]]}]
    m = {"conversions": [{"target_rate_hz": 48000, "true_peak_after_dbtp": -0.5, "filter": "polyphase",
                          "energy_above_target_nyquist_db": -20.0, "folds": folds}]}
    by, verdict = run(spec(**conv), m)
    f = by["sampling.conversion_48000.true_peak"]
    assert f.status == "warn" and f.message.endswith("(the spec counts this as a warning). Converter used for this estimate: polyphase.")
    f = by["sampling.conversion_48000.energy_above_nyquist"]
    assert (f.status, f.miss, verdict) == ("fail", 20.0, "fail")
    assert f.message.endswith("20.0 dB above the limit of -40.0 dB. A converter without an anti-alias filter would fold 24.00-30.00 kHz to "
                              "18.00-24.00 kHz.")


def test_imaging_detail_names_evidence_from_the_sample_pattern():
    sp = spec(imaging=[False])
    m = {"imaging_detected": True,
         "imaging": [{"source_rate_hz": 44100, "verdict": "defect", "coherence": None, "image_level_db": None,
                      "evidence": "samples", "channel": "R"},
                     {"source_rate_hz": 48000, "verdict": "trace", "coherence": None, "image_level_db": None,
                      "evidence": "spectrum"}]}
    f = run(sp, m)[0]["sampling.imaging"]
    assert f.message.endswith(". From a 44.1 kHz source: the sample pattern of an unfiltered upsampler in channel R. "
                              "A 48 kHz source leaves a faint trace only, too weak to count as a defect.")


SHARP_TAIL = ("waveform jumps between two samples with no band-limited transition (12 such jumps): its partials "
              "above 24 kHz keep their strength and all fold back.")


@pytest.mark.parametrize("extra, sentence", [
    ({}, "The " + SHARP_TAIL),
    ({"folded_partials": 1}, "Also, the " + SHARP_TAIL),  # after the partials sentence
    ({"frames_with_alias_lines": 3}, "Also, the " + SHARP_TAIL),  # after the notes sentence
    # steps on a sample-and-hold grid or at a fixed period are told another way: no sentence
    ({"sharp_steps_on_hold_grid_hz": 8000.0}, None),
    ({"sharp_steps_period_samples": 6}, None),
])
def test_aliasing_message_sample_sharp_steps(extra, sentence):
    sp = spec(aliasing=[False])
    detail = {"sharp_steps": 12, "reason": "sample-sharp steps", **extra}
    msg = run(sp, {"aliasing_detected": True, "aliasing_detail": detail}, rate=48000)[0]["sampling.aliasing"].message
    if sentence is None:
        assert "waveform jumps" not in msg
    else:
        assert sentence in msg
        assert msg.index(sentence) > msg.index("the spec does not allow this")
        assert msg.endswith("with a proper resampler.")


def test_aliasing_message_sharp_steps_need_the_reason():
    sp = spec(aliasing=[False])
    for reason in (None, "folded partials", ""):
        detail = {"sharp_steps": 12, "reason": reason}
        msg = run(sp, {"aliasing_detected": True, "aliasing_detail": detail}, rate=48000)[0]["sampling.aliasing"]
        assert "waveform jumps" not in msg.message
    detail = {"sharp_steps": 0, "reason": "sample-sharp steps"}
    msg = run(sp, {"aliasing_detected": True, "aliasing_detail": detail}, rate=48000)[0]["sampling.aliasing"]
    assert "waveform jumps" not in msg.message


# analytic: keeping 147 of every 160 samples (48 kHz to 44.1 kHz by picking, gcd 300 Hz) repeats its
# pattern every 44100 / 300 = 147 output samples; one dropped sample in every 12 leaves about 11 between drops
@pytest.mark.parametrize("extra, reason, sentence", [
    ({"grid_pattern_period_samples": 147}, "x; the samples lie on an irregular time grid: the prediction error "
     "repeats a drop pattern every 147 samples", "The samples lie on an irregular time grid: the same pattern of "
     "kept and missing samples repeats every 147 samples, in step with the sample clock through the file."),
    ({"grid_drop_interval_samples": 11.0}, "the samples lie on an irregular time grid: the prediction error "
     "jumps about every 11.00 samples", "The samples lie on an irregular time grid: a sample is missing about "
     "every 11.0 samples, in step"),
    # other evidence (folded partials, notes, sample-sharp jumps of naive synthesis) explains it better: no sentence
    ({"grid_drop_interval_samples": 11.0, "folded_partials": 1}, "irregular time grid: jumps about every 11", None),
    ({"grid_drop_interval_samples": 11.0, "frames_with_alias_lines": 2}, "irregular time grid: jumps about every 11",
     None),
    ({"grid_drop_interval_samples": 11.0, "sharp_steps": 40}, "irregular time grid: jumps about every 11", None),
    # the reason does not name the grid, or names it without its figure: no sentence
    ({"grid_drop_interval_samples": 11.0}, "alias lines at the predicted fold frequencies", None),
    ({"grid_pattern_period_samples": None}, "irregular time grid: repeats a drop pattern every", None),
    # analytic: a single-precision read position near input sample 2^18 steps by 35/32 (keeps 32 of every 35)
    ({"grid_pattern_period_samples": 147, "grid_binary_pattern_period_samples": 32}, "the samples lie on an "
     "irregular time grid: the prediction error repeats a drop pattern every 32 samples, the period of a converter "
     "whose read position steps by a binary fraction", "The samples lie on an irregular time grid: the same pattern "
     "of kept and missing samples repeats every 32 samples, as a converter whose read position is a binary "
     "fraction leaves it, in step"),
    ({"grid_conversion_source_hz": 44100}, "the samples lie on an irregular time grid: the prediction error "
     "carries the lines a conversion from 44.1 kHz to 32 kHz without a filter leaves", "The samples lie on an "
     "irregular time grid: the prediction error carries the lines that picking or interpolating samples from "
     "44.1 kHz without a filter leaves, in step with the sample clock"),
    ({"grid_conversion_source_hz": None}, "irregular time grid: carries the lines a conversion", None),
])
def test_aliasing_message_irregular_sample_grid(extra, reason, sentence):
    sp = spec(aliasing=[False])
    detail = {"reason": reason, **extra}
    msg = run(sp, {"aliasing_detected": True, "aliasing_detail": detail}, rate=48000)[0]["sampling.aliasing"].message
    if sentence is None:
        assert "irregular time grid" not in msg
    else:
        assert sentence in msg
        assert msg.index(sentence) > msg.index("the spec does not allow this")
        assert "keeps some samples and drops others without a filter" in msg
        assert msg.endswith("with a proper resampler.")


CLIP_REASON = ("892 runs of samples sit flat on the waveform's extreme value, entered and left by a large step: a "
               "clipping curve evaluated at the sample instants, whose corners fold")


def test_aliasing_message_clipped_at_the_files_rate():
    # a clipper at the file's rate folds its harmonics (each flat top is a corner between two samples whose
    # spectrum falls as 1/f**2 past the Nyquist frequency, analytic): the finding says so and advises clipping at
    # an oversampled rate, not the synthesis or conversion advice
    sp = spec(aliasing=[False])
    detail = {"ceiling_flat_run_count": 892, "reason": CLIP_REASON}
    msg = run(sp, {"aliasing_detected": True, "aliasing_detail": detail}, rate=48000)[0]["sampling.aliasing"].message
    assert msg == (
        "Aliasing: folded (aliased) content found in this file; the spec does not allow this. The waveform sits flat "
        "on its extreme value in 892 runs of samples, each entered and left by a large step: it was clipped or "
        "saturated at the file's own rate, and the clipper's harmonics above 24 kHz fold back into the audible "
        "band. Clip or saturate at an oversampled rate (or limit with a true-peak limiter instead), and render "
        "again from the unclipped mix.")
    # beside folded notes: both causes, the notes first, and both pieces of advice
    detail = {"ceiling_flat_run_count": 40, "reason": CLIP_REASON, "frames_with_alias_lines": 3}
    msg = run(sp, {"aliasing_detected": True, "aliasing_detail": detail}, rate=48000)[0]["sampling.aliasing"].message
    assert msg.index("The notes here") < msg.index("Also, the waveform sits flat on its extreme value in 40 runs")
    assert msg.endswith("with a proper resampler. Clip or saturate at an oversampled rate, too.")
    # a count the analyzer did not call evidence (no reason naming it) says nothing of clipping
    detail = {"ceiling_flat_run_count": 3, "reason": "folded partials", "folded_partials": 1}
    msg = run(sp, {"aliasing_detected": True, "aliasing_detail": detail}, rate=48000)[0]["sampling.aliasing"].message
    assert "sits flat" not in msg and "oversampled rate" not in msg
