"""Timecode arithmetic (masterqc.timecode) against analytic values.

Drop-frame rule (SMPTE ST 12-1, from memory): at 30000/1001 frames per second,
frame labels 00 and 01 are skipped at the start of every minute except minutes
0, 10, 20, ...; so ten minutes hold 17982 frames and an hour 107892.
"""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from masterqc import timecode as tc

RATES = list(tc.FRAME_RATES)


@pytest.mark.parametrize("fps,samples,label", [
    ("25", 0, "00:00:00:00"),
    ("25", 48000 * 3600, "01:00:00:00"),
    ("25", 10 * 3600 * 48000, "10:00:00:00"),
    ("25", 1919, "00:00:00:00"),            # one 25 fps frame is 1920 samples at 48 kHz
    ("25", 1920, "00:00:00:01"),
    ("24", 48000 + 2000, "00:00:01:01"),    # 2000 samples per frame at 48 kHz
    ("30", 44100 * 61 + 1470 * 29, "00:01:01:29"),  # 1470 samples per frame at 44.1 kHz
    ("23.976", 2002, "00:00:00:01"),        # 48000 x 1001/24000 = 2002 samples per frame
    ("23.976", 2001, "00:00:00:00"),
    ("23.976", 24 * 2002, "00:00:01:00"),
    ("29.97ndf", 8008, "00:00:00:05"),      # 5 frames = 5 x 1601.6 = 8008 samples exactly
    ("29.97ndf", 8007, "00:00:00:04"),
    # frame n starts at ceil(n x 1601.6) samples at 48 kHz
    ("29.97df", (1800 * 8008 + 4) // 5, "00:01:00;02"),  # frame 1800: labels ;00 and ;01 of minute 1 are dropped
    ("29.97df", (1799 * 8008 + 4) // 5, "00:00:59;29"),
    ("29.97df", (17982 * 8008 + 4) // 5, "00:10:00;00"),  # minute 10 keeps its first two labels
    ("29.97df", (107892 * 8008 + 4) // 5, "01:00:00;00"),
    ("25", 24 * 3600 * 48000 + 1920, "00:00:00:01"),  # labels wrap at 24 h
])
def test_known_labels(fps, samples, label):
    assert tc.samples_to_timecode(samples, 48000 if fps != "30" else 44100, fps) == label


def test_drop_frame_hour_is_short_of_clock_hour():
    # analytic: 107892 frames x 1001/30000 s = 3599.9964 s
    frames = tc.timecode_to_frames("01:00:00;00", "29.97df")
    assert frames == 107892
    assert frames * 1001 / 30000 == pytest.approx(3599.9964, abs=1e-9)
    # the same clock hour in non-drop labels runs 3.6 s (108 frames) behind
    assert tc.timecode_to_frames("01:00:00:00", "29.97ndf") - frames == 108


@pytest.mark.parametrize("label", ["00:01:00;00", "00:01:00;01", "12:59:00;01"])
def test_dropped_labels_do_not_exist(label):
    with pytest.raises(ValueError, match="drop-frame"):
        tc.timecode_to_frames(label, "29.97df")
    assert tc.timecode_to_frames("00:10:00;00", "29.97df") == 17982


@pytest.mark.parametrize("label,fps", [("00:00:00:25", "25"), ("24:00:00:00", "25"), ("1:2:3", "25"),
                                       ("00:60:00:00", "30"), ("00:00:00:24", "23.976")])
def test_bad_labels_raise(label, fps):
    with pytest.raises(ValueError):
        tc.timecode_to_frames(label, fps)


def test_unknown_rate_names_the_choices():
    with pytest.raises(ValueError, match="23.976, 24, 25, 29.97df, 29.97ndf, 30"):
        tc.frame_rate("29.97")


@settings(max_examples=300, deadline=None)
@given(st.sampled_from(RATES), st.data())
def test_label_round_trip(fps, data):
    fr = tc.frame_rate(fps)
    frame = data.draw(st.integers(0, fr.frames_per_day - 1))
    label = tc.frames_to_timecode(frame, fps)
    assert tc.timecode_to_frames(label, fps) == frame
    hh, mm, ss, ff = (int(x) for x in label.replace(";", ":").split(":"))
    assert hh < 24 and mm < 60 and ss < 60 and ff < fr.nominal
    if fr.drop_frame:
        assert not (ss == 0 and ff < 2 and mm % 10 != 0)


@settings(max_examples=300, deadline=None)
@given(st.sampled_from(RATES), st.sampled_from([44100, 48000, 88200, 96000, 192000]),
       st.integers(0, 10**11))
def test_sample_frame_round_trip(fps, rate, samples):
    frame = tc.samples_to_frames(samples, rate, fps)
    first = tc.frames_to_samples(frame, rate, fps)
    # the first sample of the frame holding `samples` is at or before it, and the previous
    # sample belongs to the previous frame
    assert first <= samples
    assert tc.samples_to_frames(first, rate, fps) == frame
    if first > 0:
        assert tc.samples_to_frames(first - 1, rate, fps) == frame - 1


def test_timecode_for_a_result():
    result = {"format": {"sample_rate_hz": 48000},
              "metadata": {"time_reference_samples": 10 * 3600 * 48000, "timecode_fps": "25"}}
    assert tc.start_timecode(result) == "10:00:00:00"
    assert tc.timecode_for(12.5, result) == "10:00:12:12"
    assert tc.timecode_for(12.5, result, "24") == "10:00:12:12"
    assert tc.timecode_for(0.04, result) == "10:00:00:01"
    # no time reference: the file starts at 00:00:00:00
    assert tc.timecode_for(61.0, {"format": {"sample_rate_hz": 44100}, "metadata": {}}, "30") == "00:01:01:00"


@pytest.mark.parametrize("rate,flag,name", [("25", "NDF", "25"), ("30000/1001", "DF", "29.97df"),
                                            ("29.97", "NDF", "29.97ndf"), ("24000/1001", None, "23.976"),
                                            ("24/1", "NDF", "24"), ("50", "NDF", None), ("x", None, None)])
def test_fps_from_ixml(rate, flag, name):
    assert tc.fps_from_ixml(rate, flag) == name
