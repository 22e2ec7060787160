"""Every judged spec section declares its checks in the registry (house choice).

A declared check (:class:`masterqc.contract.Check`) names the spec key, the result field it
is judged from, that field's unit and what a null there means.  Checked here against the
code itself, so a declaration cannot drift from what is judged:

* every requirement key of a judged section is declared (or listed as a setting);
* every declared field exists in the generated result schema, with the declared unit;
* judging one measured master against a spec that sets every key writes only findings
  whose check id a declaration covers, and every declaration is used.
"""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from masterqc.contract import NO_UNIT, Format, Normalisation, unit_of_key
from masterqc.registry import SECTIONS, judged_sections

FULL_SPEC = """\
spec_version: 1
name: every key (invented)
format:
  containers: [wav]
  encodings: [pcm_24]
  sample_rates_hz: [96000]
  bit_depths: [24]
  channel_counts: [2]
  channel_layouts: [[L, R]]
duration:
  total: {min_s: 1.0, max_s: 5.0}
loudness:
  integrated: {target_lufs: -23.0, tolerance_lu: 1.0}
  range: {max_lu: 20.0}
  max_momentary: {max_lufs: -10.0}
  max_short_term: {max_lufs: -12.0}
peaks:
  true_peak: {max_dbtp: -1.0}
  sample_peak: {max_dbfs: -1.0}
normalisation:
  limiting: {max_db: 1.0}
metadata:
  timecode_fps: "25"
  chunk_problems: {severity: fail}
  bext: {required: true}
  bext_loudness: {required: false}
  isrc: {required: true}
  time_reference: {required: true}
  timecode_fps_matches_file: true
integrity:
  clipped_runs: {max_count: 0}
  over_full_scale_samples: {max_count: 0}
  dc_offset: {max_dbfs: -60.0}
  subsonic_energy: {max_db: -30.0}
  head_silence: {max_s: 2.0}
  tail_silence: {max_s: 2.0}
  head_digital_silence: {max_s: 2.0}
  tail_digital_silence: {max_s: 2.0}
  dropouts: {max_count: 0}
  effective_bit_depth: {min_bits: 16}
  dual_mono: [false]
  inverted_polarity: [false]
  phase_correlation: {min_corr: -0.5}
  phase_correlation_below: {max_percent: 5.0}
  level_balance: {max_lu: 1.5}
  nonfinite_samples: true
sampling:
  effective_bandwidth: {min_hz: 15000}
  upsampled: [false]
  band_limited: [false]
  imaging: [false]
  aliasing: [false]
  alias_to_harmonic_ratio: {max_db: -40.0}
  ultrasonic_energy: {max_db: -30.0}
  ultrasonic_energy_3s: {max_db: -20.0}
  ultrasonic_tones: {max_dbfs: -60.0}
  ultrasonic_loudness_change: {max_lu: 0.2}
  conversions:
    - target_rate_hz: 48000
      energy_above_nyquist: {max_db: -40.0}
"""

#: findings a judge writes only when there is a problem (none for a whole, well-formed file)
ONLY_ON_A_PROBLEM = {"integrity.truncated_audio"}


def _requirement_keys(entry) -> set[str]:
    return set(entry.spec.Section.model_fields)


@pytest.mark.parametrize("entry", judged_sections(), ids=lambda e: e.key)
def test_every_requirement_key_is_declared(entry):
    declared = {c.spec_key for c in entry.checks}
    settings = set(entry.settings)
    keys = _requirement_keys(entry)
    assert keys - declared - settings == set(), f"{entry.key}: keys with no declared check"
    assert (declared | settings) - keys == set(), f"{entry.key}: declarations of keys the section lacks"
    assert declared & settings == set()
    for c in entry.checks:
        assert c.check.startswith(entry.key + "."), c
        assert c.null_means and c.what, c


def test_every_declared_field_is_in_the_result_schema_with_its_unit():
    from masterqc.audio.container import METADATA_SCHEMA  # the test may read the reader's schema
    from masterqc.schema import measurement_properties
    measurements = measurement_properties()
    seen = 0
    for entry in SECTIONS:
        for c in entry.checks:
            part, dot, key = c.measurement.partition(".")
            if dot and part == "format":
                assert key in Format.model_fields, c
            elif dot and part == "normalisation":
                assert key in Normalisation.model_fields, c
                assert unit_of_key(key).code == c.unit, c
            elif dot and part == "metadata":
                assert key in METADATA_SCHEMA["properties"], c
            else:
                assert c.measurement in measurements, c
                assert measurements[c.measurement]["x-unit"] == c.unit, c
            if c.where:
                assert measurements[c.where]["x-unit"] == "s", c
            if c.kind == "limits":
                assert c.unit != NO_UNIT, c
            seen += 1
    # house choice: a floor under the count of declared checks (so an empty registry cannot pass)
    assert seen >= 50  # every judged section declares its checks


@pytest.fixture(scope="module")
def judged(tmp_path_factory):
    """One stereo 96 kHz master (2 s of tone and noise) measured and judged against FULL_SPEC."""
    from masterqc.pipeline import judge_result, options_for
    from masterqc.measure.engine import measure_file
    from masterqc.spec.loader import load_spec
    folder = tmp_path_factory.mktemp("declared")
    rate = 96000
    rng = np.random.default_rng(12)
    t = np.arange(2 * rate) / rate
    x = 0.1 * np.sin(2 * np.pi * 440.0 * t)[:, None] + 0.01 * rng.standard_normal((t.size, 2))
    sf.write(folder / "m.wav", x, rate, subtype="PCM_24")
    (folder / "spec.yaml").write_text(FULL_SPEC, encoding="utf-8")
    loaded = load_spec(folder / "spec.yaml")
    return judge_result(measure_file(folder / "m.wav", options_for(loaded)), loaded)


def test_judging_writes_only_declared_checks_and_uses_every_declaration(judged):
    findings = judged["findings"]
    assert not [f for f in findings if f["status"] == "error"], findings
    checks = [c for e in judged_sections() for c in e.checks]
    undeclared = [f["check"] for f in findings if not any(c.covers(f["check"]) for c in checks)]
    assert undeclared == []
    unused = [c.check for c in checks
              if c.check not in ONLY_ON_A_PROBLEM and not any(c.covers(f["check"]) for f in findings)]
    assert unused == []


def test_declared_allowed_checks_judge_the_format(judged):
    """The format section is judged from its declarations alone: the 96 kHz file meets [96000]."""
    by = {f["check"]: f for f in judged["findings"]}
    assert by["format.sample_rate"]["status"] == "pass" and by["format.sample_rate"]["measured"] == 96000
    assert by["format.sample_rate"]["message"] == 'Sample rate is 96000 Hz (allowed: 96000 Hz).'
    assert by["format.bit_depth"]["measured_text"] == "24-bit" and by["format.bit_depth"]["unit"] == "bits"
    assert by["format.channel_layout"]["measured_text"] == "[L, R]"


def test_a_layout_guessed_from_nothing_is_judged_as_unknown():
    from masterqc.judge.core import judge_checks
    from masterqc.spec.sections import format as fmt_section
    section = fmt_section.Section.model_validate({"channel_layouts": [["L", "R"]], "channel_counts": [2]})
    result = {"format": {"channel_layout": ["ch1", "ch2"], "channel_layout_source": "unknown", "channels": 3}}
    layout, count = judge_checks(section, result, fmt_section.CHECKS)[::-1]
    assert layout.status == "skipped" and "does not say which channel is which" in layout.message
    assert count.status == "fail" and count.message == 'Channel count is 3, which the spec does not allow (allowed: 2).'
