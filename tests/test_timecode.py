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


# ---------------------------------------------------------------- edges and exact messages

def test_frames_per_day():
    # analytic: 24 h of labels is 86400 s x nominal fps; drop frame: 24 x 6 = 144 ten-minute cycles of
    # 10 x 60 x 30 - 9 x 2 = 17982 frames (the drop rule of the module docstring)
    assert [tc.frame_rate(f).frames_per_day for f in ("23.976", "25", "30", "29.97ndf", "29.97df")] == \
        [24 * 86400, 25 * 86400, 30 * 86400, 30 * 86400, 144 * 17982]
    assert tc.frames_to_timecode(144 * 17982, "29.97df") == "00:00:00;00"  # wraps at 24 h
    assert tc.frames_to_timecode(144 * 17982 - 1, "29.97df") == "23:59:59;29"
    assert tc.frames_to_timecode(25 * 86400 - 1, "25") == "23:59:59:24"


@pytest.mark.parametrize("frame, label", [(0, "00:00:00;00"), (1, "00:00:00;01"), (2, "00:00:00;02"),
                                          (1799, "00:00:59;29"), (1800, "00:01:00;02"),
                                          (1801, "00:01:00;03"), (3597, "00:01:59;29"),
                                          (3598, "00:02:00;02"), (17981, "00:09:59;29"),
                                          (17982, "00:10:00;00"), (17983, "00:10:00;01"),
                                          (17984, "00:10:00;02"), (19782, "00:11:00;02")])
def test_drop_frame_labels_around_the_minutes(frame, label):
    # minute m > 0 not divisible by 10 starts at label ;02 (SMPTE ST 12-1 drop-frame rule, from memory)
    assert tc.frames_to_timecode(frame, "29.97df") == label
    assert tc.timecode_to_frames(label, "29.97df") == frame


def test_rate_lookup_and_messages():
    fr = tc.frame_rate(" 29.97DF ")
    assert fr is tc.FRAME_RATES["29.97df"] and tc.frame_rate(fr) is fr
    assert (fr.name, fr.nominal, fr.drop_frame) == ("29.97df", 30, True)
    assert tc.DEFAULT_FPS == "25"
    with pytest.raises(ValueError) as e:
        tc.frame_rate("29.97")
    assert str(e.value) == "unknown timecode rate '29.97'; use one of 23.976, 24, 25, 29.97df, 29.97ndf, 30"
    for fn in (tc.samples_to_frames, tc.frames_to_samples):
        with pytest.raises(ValueError) as e:
            fn(10, 0, "25")
        assert str(e.value) == "sample rate must be positive, got 0"
        with pytest.raises(ValueError, match="got -48000"):
            fn(10, -48000, "25")


@pytest.mark.parametrize("label, message", [
    ("1:2:3", "timecode '1:2:3' is not HH:MM:SS:FF"),
    ("00:00:00:25", "timecode '00:00:00:25' has a field out of range at 25 fps"),
    ("24:00:00:00", "timecode '24:00:00:00' has a field out of range at 25 fps"),
    ("00:60:00:00", "timecode '00:60:00:00' has a field out of range at 25 fps"),
    ("00:00:60:00", "timecode '00:00:60:00' has a field out of range at 25 fps"),
])
def test_bad_label_messages(label, message):
    with pytest.raises(ValueError) as e:
        tc.timecode_to_frames(label, "25")
    assert str(e.value) == message


def test_dropped_label_message_and_accepted_spellings():
    with pytest.raises(ValueError) as e:
        tc.timecode_to_frames("00:01:00;01", "29.97df")
    assert str(e.value) == ("timecode '00:01:00;01' does not exist in drop-frame count "
                            "(frames 00 and 01 are skipped in this minute)")
    # the same label is fine without drop frame, and ;02 exists with it
    assert tc.timecode_to_frames("00:01:00:01", "29.97ndf") == 1801
    assert tc.timecode_to_frames("00:01:00;02", "29.97df") == 1800
    # separators ':' '.' before the seconds, ':' ';' '.' ',' before the frames; spaces around
    assert tc.timecode_to_frames(" 1.02.03.04 ", "25") == ((1 * 60 + 2) * 60 + 3) * 25 + 4
    assert tc.timecode_to_frames("01:02:03,04", "25") == ((1 * 60 + 2) * 60 + 3) * 25 + 4
    assert tc.timecode_to_frames("23:59:59:24", "25") == 25 * 86400 - 1  # analytic: the last label of 24 h


def test_frames_to_samples_is_a_ceiling():
    # analytic: 29.97 fps at 48 kHz: a frame is 48000 x 1001 / 30000 = 1601.6 samples, frame 1 starts at
    # ceil(1601.6) = 1602, frame 5 at 8008 exactly; at 25 fps a frame is 1920 samples, 3 x 1920 = 5760
    assert tc.frames_to_samples(1, 48000, "29.97ndf") == 1602
    assert tc.frames_to_samples(5, 48000, "29.97ndf") == 8008
    assert tc.frames_to_samples(3, 48000, "25") == 5760
    assert tc.samples_to_frames(1601, 48000, "29.97ndf") == 0 and tc.samples_to_frames(1602, 48000, "29.97ndf") == 1
    assert tc.timecode_to_samples("00:00:01:00", 48000) == 48000  # default 25 fps
    assert tc.samples_to_timecode(48000 + 1920, 48000) == "00:00:01:01"


def test_timecode_for_edges():
    r = {"format": {"sample_rate_hz": 48000}, "metadata": {"time_reference_samples": 48000}}
    assert tc.timecode_for(-5.0, r) == "00:00:01:00"      # before the start: the first sample
    assert tc.timecode_for(0.02, r) == "00:00:01:00"      # 960 samples: still frame 25 at 25 fps
    assert tc.timecode_for(0.0399, r) == "00:00:01:00"    # 1915 samples
    assert tc.timecode_for(0.04, r) == "00:00:01:01"      # 1920 samples: the next frame
    assert tc.timecode_for(1.0, r, "30") == "00:00:02:00"
    assert tc.timecode_for(1.0, {"format": {"sample_rate_hz": 48000}}) == "00:00:01:00"  # no metadata key
    for bad in ({"format": {}}, {"format": {"sample_rate_hz": 0}}, {}):
        with pytest.raises(ValueError) as e:
            tc.timecode_for(1.0, bad)
        assert str(e.value) == "result has no sample rate; cannot place a timecode"


@pytest.mark.parametrize("rate, flag, name", [("30", "NDF", "30"), ("30", None, "30"), ("30000/1001", "", "29.97ndf"),
                                              (" 30000/1001 ", " df ", "29.97df"), ("29.97", "DF", "29.97df"),
                                              ("", "DF", None), (None, None, None), ("1/0", None, None),
                                              ("25", "DF", None), ("23.98", None, "23.976"), ("23.9", None, None)])
def test_fps_from_ixml_edges(rate, flag, name):
    assert tc.fps_from_ixml(rate, flag) == name


def test_any_positive_sample_rate_is_arithmetic():
    # analytic: 1 Hz is odd but not wrong: 48 samples are 48 s, 1152 frames at 24 fps
    assert tc.samples_to_frames(48, 1, "24") == 48 * 24
    assert tc.frames_to_samples(48 * 24, 1, "24") == 48
    assert tc.timecode_for(2.0, {"format": {"sample_rate_hz": 1}}) == "00:00:02:00"


def test_timecode_for_takes_the_rate_from_the_result_and_counts_from_its_start():
    r = {"format": {"sample_rate_hz": 48000}, "metadata": {"timecode_fps": "30", "time_reference_samples": 49600}}
    # 49600 samples = 1 s + 1600 samples: one 30 fps frame (1600 samples) past 00:00:01
    assert tc.start_timecode(r) == "00:00:01:01"
    assert tc.start_timecode(r, "25") == "00:00:01:00"  # 1600 < 1920 samples: still frame 0 of the second
    assert tc.timecode_for(0.0, r, "25") == "00:00:01:00"
    no_ref = {"format": {"sample_rate_hz": 48000}, "metadata": {}}
    assert tc.timecode_for(1919 / 48000, no_ref) == "00:00:00:00"  # last sample of frame 0 at 25 fps
    one_short = {"format": {"sample_rate_hz": 48000}, "metadata": {"time_reference_samples": 1919}}
    assert tc.start_timecode(one_short) == "00:00:00:00"


def test_ixml_rate_tolerance_is_strictly_below_a_two_hundredth():
    assert tc.fps_from_ixml("24.00499", None) == "24"  # just inside 1/200 = 0.005 fps
    assert tc.fps_from_ixml("24.005", None) is None  # exactly 1/200 fps away
    assert tc.fps_from_ixml("30000/1001", "df") == "29.97df"
