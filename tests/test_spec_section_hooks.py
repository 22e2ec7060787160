"""The sections' hooks on a validated spec (pure: no audio; runs under ``make mutation``).

``measure_options`` turns the spec keys that change a measurement into MeasureOptions fields, and
``resolve`` fills one section's defaults from another's.  Both rules are the project's own (house
choice, written in each section's docstring); the values here are invented.
"""

from __future__ import annotations

from masterqc.measure.options import MeasureOptions
from masterqc.spec import build_spec, measure_options_for
from masterqc.spec.sections import integrity, metadata, sampling


def spec(**sections):
    return build_spec({"spec_version": 1, "name": "invented hooks spec", **sections})


def test_sampling_options_list_each_target_once_in_spec_order():
    sp = spec(sampling={"conversions": [{"target_rate_hz": 48000}, {"target_rate_hz": 44100},
                                        {"target_rate_hz": 48000, "energy_above_nyquist": {"max_db": -30.0}}],
                        "ultrasonic_from_hz": 24000})
    assert sampling.measure_options(sp.sampling) == {"conversion_targets_hz": (48000, 44100),
                                                     "ultrasonic_from_hz": 24000.0}
    assert isinstance(sampling.measure_options(sp.sampling)["ultrasonic_from_hz"], float)
    opts = measure_options_for(sp)
    assert opts.conversion_targets_hz == (48000, 44100) and opts.ultrasonic_from_hz == 24000.0
    assert sampling.measure_options(spec(sampling={}).sampling) == {}
    assert sampling.measure_options(spec(sampling={"conversions": []}).sampling) == {}


def test_a_conversion_without_its_ceiling_takes_the_peaks_ceiling():
    convs = [{"target_rate_hz": 48000}, {"target_rate_hz": 44100, "true_peak": {"max_dbtp": -2.0}}]
    sp = spec(peaks={"true_peak": {"max_dbtp": -1.0, "severity": "warn"}}, sampling={"conversions": convs})
    c48, c44 = sp.sampling.conversions
    assert (c48.true_peak.max_dbtp, c48.true_peak.severity) == (-1.0, "warn")
    assert (c44.true_peak.max_dbtp, c44.true_peak.severity) == (-2.0, "fail")
    # no peaks section, or one without a true-peak ceiling: nothing to take
    assert spec(sampling={"conversions": convs}).sampling.conversions[0].true_peak is None
    assert spec(peaks={"true_peak_oversampling": 8},
                sampling={"conversions": convs}).sampling.conversions[0].true_peak is None
    # resolve on its own: the section is returned unchanged when there is nothing to fill
    sec = spec(sampling={"ultrasonic_from_hz": 22000}).sampling
    assert sampling.resolve(sec, sp) is sec


def test_integrity_options_only_those_given():
    sp = spec(integrity={"silence_threshold_dbfs": -70.0, "dropout_min_s": 0.01})
    assert integrity.measure_options(sp.integrity) == {"silence_threshold_dbfs": -70.0, "dropout_min_s": 0.01}
    opts = measure_options_for(sp)
    # the others keep MeasureOptions' defaults
    assert (opts.silence_threshold_dbfs, opts.dropout_min_s) == (-70.0, 0.01)
    assert opts.clip_min_run_samples == MeasureOptions().clip_min_run_samples
    assert integrity.measure_options(spec(integrity={}).integrity) == {}


def test_metadata_option_is_the_timecode_rate():
    sp = spec(metadata={"timecode_fps": "29.97df"})
    assert metadata.measure_options(sp.metadata) == {"timecode_fps": "29.97df"}
    assert measure_options_for(sp).timecode_fps == "29.97df"
    assert metadata.measure_options(spec(metadata={}).metadata) == {}
    assert measure_options_for(spec()).timecode_fps == MeasureOptions().timecode_fps


def test_options_start_from_a_given_base():
    base = MeasureOptions(timecode_fps="24", extra={"note": 1})
    opts = measure_options_for(spec(sampling={"ultrasonic_from_hz": 30000}), base)
    assert (opts.timecode_fps, opts.ultrasonic_from_hz, opts.extra) == ("24", 30000.0, {"note": 1})
    assert base.extra == {"note": 1} and opts.extra is not base.extra


def test_normalisation_target_and_ceiling_name_the_key_they_came_from():
    # house choice (normalisation.py docstring): the section's own keys first, else the loudness target
    # and the true-peak ceiling
    own = spec(normalisation={"target_lufs": -14.0, "ceiling_dbtp": -1.0},
               loudness={"integrated": {"target_lufs": -23.0, "tolerance_lu": 1.0}},
               peaks={"true_peak": {"max_dbtp": -2.0}}).normalisation
    assert (own.target_lufs, own.target_source, own.ceiling_dbtp, own.ceiling_source) == (
        -14.0, "normalisation.target_lufs", -1.0, "normalisation.ceiling_dbtp")
    taken = spec(loudness={"integrated": {"target_lufs": -23.0, "tolerance_lu": 1.0}},
                 peaks={"true_peak": {"max_dbtp": -2.0}}).normalisation
    assert (taken.target_lufs, taken.target_source, taken.ceiling_dbtp, taken.ceiling_source) == (
        -23.0, "loudness.integrated", -2.0, "peaks.true_peak")
    none = spec().normalisation
    assert (none.target_lufs, none.target_source, none.ceiling_dbtp, none.ceiling_source) == (None, None, None, None)
