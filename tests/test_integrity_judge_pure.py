"""The integrity judge on synthetic measurement dicts (pure: no audio, fast enough for mutation runs).

The rule is the judge's own (house choice, written in masterqc/judge/core.py and
masterqc/spec/sections/integrity.py): every value is judged at its display step and
the message names the value, the limit and the miss; per-channel detail and times
travel with warnings and failures.  The measurements here are invented numbers; the
end-to-end tests on real files are in tests/test_integrity_judge.py.
"""

from __future__ import annotations

import pytest

from masterqc.judge import judge
from masterqc.spec.loader import load_spec_text

SPEC = """\
spec_version: 1
name: integrity, every key
integrity:
  clipped_runs: {max_count: 0}
  over_full_scale_samples: {max_count: 0}
  dc_offset: {max_dbfs: -60.0}
  subsonic_energy: {max_db: -30.0, severity: warn}
  head_silence: {min_s: 0.5, max_s: 2.0}
  tail_silence: {min_s: 1.0}
  head_digital_silence: {max_s: 0.1}
  tail_digital_silence: {max_s: 0.2}
  dropouts: {max_count: 0}
  effective_bit_depth: {min_bits: 24}
  dual_mono: [false]
  inverted_polarity: [false]
  phase_correlation: {min_corr: -0.3, severity: warn}
  phase_correlation_below: {max_percent: 5.0}
  level_balance: {max_lu: 1.5}
"""


@pytest.fixture(scope="module")
def spec():
    return load_spec_text(SPEC).spec


def result(**over):
    m = {"clipped_run_count": 0, "clipped_run_count_per_channel": [0, 0], "clipped_run_longest_samples": 0,
         "clipped_run_where_s": [], "over_full_scale_sample_count": 0, "dc_offset_dbfs": -90.0,
         "dc_offset_dbfs_per_channel": [-90.0, -95.0], "subsonic_energy_db": -50.0,
         "head_silence_s": 1.0, "tail_silence_s": 2.0, "head_digital_silence_s": 0.0,
         "tail_digital_silence_s": 0.0, "dropout_count": 0, "dropout_count_per_channel": [0, 0],
         "dropout_events": [], "dropout_where_s": [], "effective_bit_depth_bits": 24,
         "effective_bit_depth_bits_per_channel": [24, 24], "dual_mono": False, "inverted_polarity": False,
         "inverted_polarity_pairs": [], "phase_correlation_min": 0.2, "phase_correlation_below_percent": 1.0,
         "phase_correlation_below_where_s": [], "channel_pairs": [["L", "R"]], "level_balance_lu_per_pair": [0.3],
         "nonfinite_sample_count": 0}
    fmt = {"channel_layout": ["L", "R"], "channels": 2, "duration_s": 30.0}
    for k, v in over.items():
        (fmt if k in fmt else m)[k] = v
    return {"format": fmt, "measurements": m}


def findings(spec, **over):
    out, verdict = judge(spec, result(**over))
    return {f.check: f for f in out if f.check.startswith("integrity.")}, verdict


def test_a_clean_file_passes_every_check(spec):
    f, verdict = findings(spec)
    assert verdict == "pass"
    assert sorted(f) == sorted(f"integrity.{k}" for k in (
        "clipped_runs", "over_full_scale_samples", "dc_offset", "subsonic_energy", "head_silence",
        "tail_silence", "head_digital_silence", "tail_digital_silence", "dropouts", "effective_bit_depth",
        "dual_mono", "inverted_polarity", "phase_correlation", "phase_correlation_below", "level_balance"))
    assert all(x.status == "pass" for x in f.values()), {k: x.message for k, x in f.items() if x.status != "pass"}
    assert f["integrity.level_balance"].message == 'Level difference L/R is 0.3 LU (limit: at most 1.5 LU).'
    assert f["integrity.effective_bit_depth"].message == \
        'Effective bit depth (lowest channel, L) is 24 bits (limit: at least 24 bits).'
    assert f["integrity.phase_correlation_below"].measured == 1.0  # 0.01 of the time = 1.0 %


def test_clipped_runs_name_channels_longest_run_and_times(spec):
    f, verdict = findings(spec, clipped_run_count=3, clipped_run_count_per_channel=[2, 1], clipped_run_longest_samples=7,
                          clipped_run_where_s=[[1.0, 1.001], [2.0, 2.001]])
    c = f["integrity.clipped_runs"]
    assert verdict == "fail" and c.status == "fail"
    assert c.message == '3 clipped runs where the spec allows none; per channel: L 2, R 1; the longest run is 7 samples.'
    assert c.where_s == [[1.0, 1.001], [2.0, 2.001]]


def test_warn_detail_goes_before_the_severity_note(spec):
    s = load_spec_text(SPEC.replace("clipped_runs: {max_count: 0}", "clipped_runs: {max_count: 0, severity: warn}")).spec
    f, _ = findings(s, clipped_run_count=1, clipped_run_count_per_channel=[1, 0], clipped_run_longest_samples=4)
    assert f["integrity.clipped_runs"].message == ('1 clipped run where the spec allows none; per channel: L 1, R 0; the longest run is 4 samples (the spec counts this as a warning).')


def test_per_channel_detail_needs_one_value_per_label(spec):
    f, _ = findings(spec, clipped_run_count=1, clipped_run_count_per_channel=[1], clipped_run_longest_samples=3)
    assert f["integrity.clipped_runs"].message == '1 clipped run where the spec allows none; the longest run is 3 samples.'


def test_missing_measurements_are_skipped_with_the_key(spec):
    r = result()
    for key in ("clipped_run_count", "over_full_scale_sample_count", "dc_offset_dbfs", "subsonic_energy_db",
                "dropout_count", "head_silence_s", "phase_correlation_min", "phase_correlation_below_percent",
                "dual_mono", "level_balance_lu_per_pair", "effective_bit_depth_bits_per_channel"):
        del r["measurements"][key]
    out = {x.check: x for x in judge(spec, r)[0]}
    expect = {
        "integrity.clipped_runs": "clipped runs: not judged; the measurement clipped_run_count is missing from the result",
        "integrity.over_full_scale_samples": "samples beyond full scale: not judged; the measurement "
                                             "over_full_scale_sample_count is missing from the result",
        "integrity.dc_offset": "DC offset (worst channel): not judged; the measurement dc_offset_dbfs is missing "
                               "from the result",
        "integrity.subsonic_energy": "energy below 20 Hz (worst channel): not judged; the measurement "
                                     "subsonic_energy_db is missing from the result",
        "integrity.dropouts": "dropouts: not judged; the measurement dropout_count is missing from the result",
        "integrity.head_silence": "silence at the head: not judged; the measurement head_silence_s is missing "
                                  "from the result",
        "integrity.phase_correlation": "lowest phase correlation (100 ms windows): not judged; the measurement "
                                       "phase_correlation_min is missing from the result",
        "integrity.phase_correlation_below": "share of time below the phase threshold: not judged; the "
                                             "measurement phase_correlation_below_percent is missing from the result",
        "integrity.dual_mono": "dual mono: not judged; the measurement dual_mono "
                               "is missing from the result",
        "integrity.level_balance": "level difference between the channels: not judged; the measurement level_balance_lu_per_pair is "
                                   "missing from the result",
        "integrity.effective_bit_depth": "effective bit depth: not judged; the measurement "
                                         "effective_bit_depth_bits_per_channel is missing from the result",
    }
    for check, message in expect.items():
        # each message is a sentence: a capital first, a full stop last
        assert (out[check].status, out[check].message) == ("skipped", message[0].upper() + message[1:] + "."), check


def test_values_that_cannot_exist_say_why(spec):
    f, verdict = findings(spec, over_full_scale_sample_count=None, subsonic_energy_db=None, dual_mono=None,
                          inverted_polarity=None, phase_correlation_min=None, phase_correlation_below_percent=None,
                          level_balance_lu_per_pair=[None], effective_bit_depth_bits_per_channel=[None, None],
                          channels=1)
    assert verdict == "pass"
    assert f["integrity.over_full_scale_samples"].message == ('Samples beyond full scale: not judged; integer PCM cannot exceed full scale (only float files are judged).')
    assert f["integrity.subsonic_energy"].message == \
        'Energy below 20 Hz (worst channel): not judged; every channel is digital silence.'
    assert f["integrity.dual_mono"].message == \
        'Dual mono: not judged; the file has one channel.'
    assert f["integrity.inverted_polarity"].message == \
        'Polarity: not judged; the file has one channel.'
    assert f["integrity.phase_correlation"].message == ('Lowest phase correlation (100 ms windows): not judged; no channel pair, or no window above the level floor.')
    assert f["integrity.phase_correlation_below"].message == ('Share of time below the phase threshold: not judged; no channel pair, or no window above the level floor.')
    assert f["integrity.level_balance"].message == \
        'Level difference between the channels: not judged; no channel pair with signal in both channels.'
    assert f["integrity.effective_bit_depth"].message == \
        'Effective bit depth: not judged; every channel is digital silence.'
    g, _ = findings(spec, dual_mono=None)
    assert g["integrity.dual_mono"].message == \
        'Dual mono: not judged; the channels are digital silence.'


def test_dc_offset_of_exact_zero_means_passes(spec):
    f, _ = findings(spec, dc_offset_dbfs=None, dc_offset_dbfs_per_channel=[None, None])
    d = f["integrity.dc_offset"]
    assert (d.status, d.message, d.limit, d.unit, d.severity) == \
        ("pass", "No DC offset: every channel's mean is exactly zero (limit: at most -60.0 dBFS).", "<= -60.0 dBFS",
         "dBFS", "fail")
    f, _ = findings(spec, dc_offset_dbfs=-40.0)
    assert f["integrity.dc_offset"].message == \
        'DC offset (worst channel) is -40.0 dBFS, 20.0 dB above the limit of -60.0 dBFS.'
    f, _ = findings(spec, dc_offset_dbfs=None, dc_offset_dbfs_per_channel=[None, -70.0])
    assert f["integrity.dc_offset"].status == "skipped"


def test_silence_times_head_and_tail(spec):
    f, _ = findings(spec, head_silence_s=2.5, tail_silence_s=0.5, head_digital_silence_s=0.3,
                    tail_digital_silence_s=0.25, duration_s=30.0)
    h, t = f["integrity.head_silence"], f["integrity.tail_silence"]
    assert h.message == 'Silence at the head is 2.500 s, 0.500 s above the limit of 2.000 s.'
    assert h.where_s == [[0.0, 2.5]]
    assert t.message == 'Silence at the tail is 0.500 s, 0.500 s below the limit of 1.000 s.'
    assert t.where_s == [[29.5, 30.0]]  # by construction: the last 0.5 s of the 30 s duration
    assert f["integrity.head_digital_silence"].where_s == [[0.0, 0.3]]
    assert f["integrity.tail_digital_silence"].where_s == [[29.75, 30.0]]  # by construction: 30 - 0.25
    # no head silence at all misses the 0.5 s minimum with no time range; no duration: no tail range
    f, _ = findings(spec, head_silence_s=0.0, tail_silence_s=0.0, duration_s=None)
    assert f["integrity.head_silence"].status == "fail" and f["integrity.head_silence"].where_s == []
    assert f["integrity.tail_silence"].status == "fail" and f["integrity.tail_silence"].where_s == []


def test_dropouts_name_channels_and_kinds(spec):
    events = [{"kind": "silence"}, {"kind": "frozen"}, {"kind": "other"}]
    f, _ = findings(spec, dropout_count=3, dropout_count_per_channel=[1, 2], dropout_events=events,
                    dropout_where_s=[[1.0, 1.01]])
    d = f["integrity.dropouts"]
    assert d.message == ('3 dropouts where the spec allows none; per channel: L 1, R 2; found: a frozen sample value and digital silence.')
    assert d.where_s == [[1.0, 1.01]]
    f, _ = findings(spec, dropout_count=1, dropout_count_per_channel=[1, 0], dropout_events=[])
    assert f["integrity.dropouts"].message == '1 dropout where the spec allows none; per channel: L 1, R 0.'


def test_bit_depth_names_the_lowest_channel(spec):
    f, _ = findings(spec, effective_bit_depth_bits_per_channel=[24, 16])
    b = f["integrity.effective_bit_depth"]
    assert b.message == 'Effective bit depth (lowest channel, R) is 16 bits, 8 bits below the limit of 24 bits.'
    f, _ = findings(spec, effective_bit_depth_bits_per_channel=[None, 20], channel_layout=[])
    assert f["integrity.effective_bit_depth"].message.startswith("Effective bit depth (lowest channel, ch2) is 20 bits")


def test_channel_pairs(spec):
    f, verdict = findings(spec, dual_mono=True, inverted_polarity=True, inverted_polarity_pairs=[["L", "R"]],
                          phase_correlation_min=-0.95, phase_correlation_below_percent=12.5,
                          phase_correlation_below_where_s=[[3.0, 4.0]])
    assert verdict == "fail"
    assert f["integrity.dual_mono"].message == \
        'Dual mono: the first two channels are identical; the spec does not allow this.'
    assert f["integrity.inverted_polarity"].message == \
        'Polarity: the channels (L/R) are inverted; the spec does not allow this.'
    p = f["integrity.phase_correlation"]
    assert (p.status, p.measured) == ("warn", -0.95)
    assert p.message == ('Lowest phase correlation (100 ms windows) is -0.95, 0.65 below the limit of -0.30 (the spec counts this as a warning).')
    b = f["integrity.phase_correlation_below"]
    assert (b.status, b.measured, b.where_s) == ("fail", 12.5, [[3.0, 4.0]])
    f, _ = findings(spec, inverted_polarity=True, inverted_polarity_pairs=[])
    assert f["integrity.inverted_polarity"].message == \
        'Polarity: the channels are inverted; the spec does not allow this.'


@pytest.mark.parametrize("balance, side", [(2.0, "L"), (-2.0, "R")])
def test_level_balance_names_the_louder_side(spec, balance, side):
    f, _ = findings(spec, channel_pairs=[["L", "R"], ["Ls", "Rs"]], level_balance_lu_per_pair=[0.5, balance])
    b = f["integrity.level_balance"]
    assert b.measured == 2.0
    assert b.message == f"Level difference Ls/Rs is 2.0 LU, 0.5 LU above the limit of 1.5 LU; {side}s is the louder."
    # the worst pair is the largest magnitude; a pair without a value is passed over
    f, _ = findings(spec, channel_pairs=[["L", "R"], ["Ls", "Rs"]], level_balance_lu_per_pair=[-1.2, None])
    assert f["integrity.level_balance"].message == 'Level difference L/R is 1.2 LU (limit: at most 1.5 LU).'
    f, _ = findings(spec, channel_pairs=[["L", "R"], ["Ls", "Rs"]], level_balance_lu_per_pair=[-1.2, 1.2])
    assert f["integrity.level_balance"].message.startswith("Level difference L/R ")  # a tie keeps the first


def test_nonfinite_samples_are_an_error_with_positions(spec):
    first = [{"kind": "NaN", "channel": "L", "frame": 10, "time_s": 10 / 48000},
             {"kind": "+Inf", "channel": "R", "frame": 20, "time_s": 20 / 48000}]
    f, verdict = findings(spec, nonfinite_sample_count=7, nan_sample_count=6, inf_sample_count=1,
                          nonfinite_sample_count_per_channel=[5, 2], nonfinite_first_positions=first,
                          nonfinite_where_s=[[0.0002, 0.0005]])
    n = f["integrity.nonfinite_samples"]
    assert verdict == "error" and n.status == "error" and n.measured == 7 and n.where_s == [[0.0002, 0.0005]]
    assert n.message == ('7 non-finite samples (NaN 6, infinite 1); per channel: L 5, R 2; first NaN in L at frame 10 (0.000208 s), +Inf in R at frame 20 (0.000417 s) and 5 more; they were read as 0.0 for every other measurement.')
    # none: no finding unless the spec names the key; the key written gives a pass
    assert "integrity.nonfinite_samples" not in findings(spec)[0]
    s = load_spec_text(SPEC + "  nonfinite_samples: true\n").spec
    p = findings(s)[0]["integrity.nonfinite_samples"]
    assert (p.status, p.message, p.measured_text, p.limit) == ("pass", "No non-finite samples (NaN or infinite values).", "0",
                                                               "none")
    off = load_spec_text(SPEC + "  nonfinite_samples: false\n").spec
    assert "integrity.nonfinite_samples" not in findings(off, nonfinite_sample_count=3)[0]
    missing = findings(s, nonfinite_sample_count=None)[0]["integrity.nonfinite_samples"]
    assert missing.status == "skipped" and missing.message == (
        'Non-finite samples: not judged; the measurement nonfinite_sample_count is missing from the result.')


def test_warnings_carry_the_same_detail_as_failures():
    warn = SPEC.replace("dropouts: {max_count: 0}", "dropouts: {max_count: 0, severity: warn}") \
        .replace("inverted_polarity: [false]", "inverted_polarity: {allowed: [false], severity: warn}") \
        .replace("level_balance: {max_lu: 1.5}", "level_balance: {max_lu: 1.5, severity: warn}") \
        .replace("tail_silence: {min_s: 1.0}", "tail_silence: {min_s: 1.0, severity: warn}") \
        .replace("head_silence: {min_s: 0.5, max_s: 2.0}", "head_silence: {min_s: 0.5, max_s: 2.0, severity: warn}")
    s = load_spec_text(warn).spec
    f, verdict = findings(s, dropout_count=1, dropout_count_per_channel=[0, 1], dropout_events=[{"kind": "frozen"}],
                          inverted_polarity=True, inverted_polarity_pairs=[["L", "R"]],
                          level_balance_lu_per_pair=[-2.0], tail_silence_s=0.25, head_silence_s=3.0)
    assert verdict == "warn"
    assert f["integrity.dropouts"].message == ('1 dropout where the spec allows none; per channel: L 0, R 1; found: a frozen sample value (the spec counts this as a warning).')
    assert f["integrity.inverted_polarity"].message == ('Polarity: the channels (L/R) are inverted; the spec does not allow this (the spec counts this as a warning).')
    assert f["integrity.level_balance"].message == ('Level difference L/R is 2.0 LU, 0.5 LU above the limit of 1.5 LU; R is the louder (the spec counts this as a warning).')
    assert f["integrity.tail_silence"].where_s == [[29.75, 30.0]]  # by construction: 30 s file (fmt above) - 0.25
    assert f["integrity.head_silence"].where_s == [[0.0, 3.0]]
    # a tail of zero length gives no time range
    g, _ = findings(s, tail_silence_s=0.0)
    assert g["integrity.tail_silence"].status == "warn" and g["integrity.tail_silence"].where_s == []


def test_silence_messages_name_head_tail_and_kind(spec):
    f, _ = findings(spec, head_digital_silence_s=0.3, tail_digital_silence_s=0.25)
    assert f["integrity.head_digital_silence"].message == \
        'Digital silence at the head is 0.300 s, 0.200 s above the limit of 0.100 s.'
    assert f["integrity.tail_digital_silence"].message == \
        'Digital silence at the tail is 0.250 s, 0.050 s above the limit of 0.200 s.'


@pytest.mark.parametrize("count, shown, more", [(5, 5, ""), (6, 6, " and 1 more"), (7, 5, " and 2 more")])
def test_nonfinite_lists_at_most_five_positions(spec, count, shown, more):
    first = [{"kind": "NaN", "channel": "L", "frame": k, "time_s": k / 48000} for k in range(shown)]
    f, _ = findings(spec, nonfinite_sample_count=count, nonfinite_first_positions=first)
    n = f["integrity.nonfinite_samples"]
    listed = ", ".join(f"NaN in L at frame {k} ({k / 48000:.6f} s)" for k in range(min(shown, 5)))
    assert n.message == (f"{count} non-finite samples (NaN ?, infinite ?); first {listed}{more}; they were read "
                         "as 0.0 for every other measurement.")
    assert (n.measured, n.measured_raw, n.measured_text, n.limit) == (count, count, str(count), "none")


def test_nonfinite_pass_fields(spec):
    s = load_spec_text(SPEC + "  nonfinite_samples: true\n").spec
    p = findings(s)[0]["integrity.nonfinite_samples"]
    assert (p.measured, p.measured_raw, p.measured_text, p.limit, p.status) == (0, 0, "0", "none", "pass")


def test_clock_text_rounds_to_the_millisecond():
    from masterqc.judge.integrity import clock_text
    # analytic: 143.75 s = 0 h 2 min 23.750 s; 3725.25 s = 1 h 2 min 5.250 s; 59.9996 s rounds to 60.000 s
    assert clock_text(143.75) == "0:02:23.750"
    assert clock_text(3725.25) == "1:02:05.250"
    assert clock_text(59.9996) == "0:01:00.000"
    assert clock_text(-1.0) == "0:00:00.000"    # house choice: no negative times


def _truncated(duration_s=18.0, **audio_data):
    r = result(duration_s=duration_s)
    r["metadata"] = {"audio_data": audio_data}
    return r


@pytest.mark.parametrize("mode,status", [("fail", "fail"), ("warn", "warn"), ("allow", "pass")])
def test_a_truncated_file_names_the_missing_time_and_bytes(mode, status):
    # by construction: stereo 24-bit 48 kHz is 48000 * 2 * 3 = 288,000 bytes a second, so a header declaring
    # 20 s (5,760,000 bytes) over a file holding 18 s (5,184,000 bytes) misses 576,000 bytes = 2.000 s, from
    # 18 s to 20 s.  The wording and the three modes are the house rule (spec/sections/integrity.py).
    s = load_spec_text(SPEC + f"  truncated_audio: {mode}\n").spec
    findings, verdict = judge(s, _truncated(missing_bytes=576_000, missing_s=2.0, size_bytes=5_184_000,
                                            declared_size_bytes=5_760_000))
    (f,) = [f for f in findings if f.check == "integrity.truncated_audio"]
    assert (f.status, f.severity) == (status, None if mode == "allow" else mode)
    assert verdict == status
    assert (f.measured, f.measured_raw, f.unit, f.limit) == (2.0, 576_000, "s", "nothing missing")
    assert f.measured_text == "0:00:02.000 missing (576,000 bytes)"
    assert f.where_s == [[18.0, 20.0]]
    tail = "" if mode == "fail" else f" (the spec's integrity.truncated_audio is {mode})"
    assert f.message == ("The file is cut short: its header declares 5,760,000 bytes of audio but the file holds "
                         "5,184,000, so the last 576,000 bytes (0:00:02.000 of audio) are missing; only the first "
                         f"0:00:18.000 can be checked{tail}.")


def test_a_truncation_of_unknown_length_still_fails_by_default(spec):
    # by construction: 100 bytes missing with no time known; the declared size is what is held plus what is
    # missing (5,184,000 + 100), and without a duration there is no place to mark
    findings, verdict = judge(spec, _truncated(duration_s=None, missing_bytes=100, size_bytes=5_184_000))
    (f,) = [f for f in findings if f.check == "integrity.truncated_audio"]
    assert (f.status, verdict, f.measured, f.where_s) == ("fail", "fail", None, [])
    assert f.measured_text == "100 bytes missing"
    assert f.message == ("The file is cut short: its header declares 5,184,100 bytes of audio but the file holds "
                         "5,184,000, so the last 100 bytes (audio of unknown length) are missing.")


def test_nothing_missing_is_no_finding(spec):
    # by construction: missing_bytes 0 (or absent) means the data chunk is whole
    for data in ({"missing_bytes": 0, "size_bytes": 10}, {}):
        findings, _ = judge(spec, _truncated(**data))
        assert not [f for f in findings if f.check == "integrity.truncated_audio"]
