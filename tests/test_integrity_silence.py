"""Head/tail silence and dropouts.

Every signal is built with silence, low-level noise, frozen values and
dropouts at known frames, so expected durations and times follow by
arithmetic (frames / 48000).

The defaults the tests rely on are house choices (MeasureOptions): near-silence is a
sample peak at or below -60 dBFS in every channel, and a dropout is a run of at least
5 ms (240 frames at 48 kHz) of digital silence or one frozen value in a channel.
-80 dBFS is 1e-4 of full scale (20*log10(1e-4) = -80), i.e. round(1e-4 * 2**23) = 839
codes at 24 bits.
"""

from __future__ import annotations

import numpy as np
import pytest

from integrity_support import feed, info_for, pcm, write_pcm
from masterqc.measure.engine import measure_file
from masterqc.measure.options import MeasureOptions
from masterqc.measure.silence import SilenceAnalyzer

FS = 48000


def _programme(frames=3 * FS):
    """24-bit codes: 12000 frames digital silence, 2400 frames at -80 dBFS (alternating sign),
    tone, and 24000 frames of digital silence at the end."""
    t = np.arange(frames) / FS
    tone = np.round(0.25 * np.sin(2 * np.pi * 997 * t) * 2 ** 23).astype(np.int64)
    codes = np.stack([tone, tone // 2], axis=1)
    codes[:12000] = 0
    low = int(round(1e-4 * 2 ** 23))  # -80 dBFS
    codes[12000:14400, 0] = low * np.where(np.arange(2400) % 2 == 0, 1, -1)
    codes[12000:14400, 1] = 0
    codes[-24000:] = 0
    return codes


@pytest.mark.parametrize("block", [65536, 4800, 997])
def test_head_and_tail_silence(block):
    x = pcm(_programme(), 24)
    m = feed(SilenceAnalyzer, x, info_for(x), block=block).measurements
    assert m["head_digital_silence_s"] == 12000 / FS
    assert m["head_silence_s"] == 14400 / FS   # -80 dBFS is below the -60 dBFS default (house choice)
    assert m["tail_silence_s"] == 24000 / FS
    assert m["tail_digital_silence_s"] == 24000 / FS
    assert m["dropout_count"] == 0


def test_threshold_moves_near_silence():
    x = pcm(_programme(), 24)
    m = feed(SilenceAnalyzer, x, info_for(x), silence_threshold_dbfs=-90.0).measurements
    assert m["head_silence_s"] == 12000 / FS  # -80 dBFS is now above the threshold


def test_all_silent_file_is_silent_from_both_ends():
    x = np.zeros((9600, 2))
    m = feed(SilenceAnalyzer, x, info_for(x)).measurements
    # by construction: 9600 frames / 48000 = 0.2 s, all of it silent
    assert m["head_silence_s"] == m["tail_silence_s"] == 0.2
    assert m["head_digital_silence_s"] == m["tail_digital_silence_s"] == 0.2
    assert m["dropout_count"] == 0  # a silent channel touches both ends: not a dropout


def _dropouts():
    codes = _programme()
    codes[50000:50240, 0] = 0          # 240 samples = 5.0 ms of silence in L: a dropout (5 ms: house choice)
    codes[60000:60239, 0] = 0          # 239 samples: shorter than the 5 ms default, not reported
    codes[65500:66500, 1] = 12345      # 1000 frames frozen in R, across the 65536 boundary
    codes[90000:90480, :] = 0          # both channels silent for 10 ms
    return codes


@pytest.mark.parametrize("block", [65536, 4096, 1001])
def test_dropouts_silence_and_frozen_values(block):
    x = pcm(_dropouts(), 24)
    m = feed(SilenceAnalyzer, x, info_for(x), block=block).measurements
    # the mute at 90000 is on both channels at one time: one dropout naming L and R (events are
    # one per time span across channels, house choice); the per-channel runs keep their own keys
    assert m["dropout_count"] == 3
    assert m["dropout_count_per_channel"] == [2, 2]
    assert m["dropout_channel_run_count"] == 4
    got = [(e["channel"], e["channels"], e["start_s"], e["end_s"], e["kind"]) for e in m["dropout_events"]]
    assert got == [("L", ["L"], 50000 / FS, 50240 / FS, "silence"),
                   ("R", ["R"], 65500 / FS, 66500 / FS, "frozen"),
                   ("L+R", ["L", "R"], 90000 / FS, 90480 / FS, "silence")]
    assert m["dropout_events"][1]["value"] == 12345 / 2 ** 23
    assert m["dropout_longest_s"] == 1000 / FS
    assert m["dropout_where_s"] == [[50000 / FS, 50240 / FS], [65500 / FS, 66500 / FS], [90000 / FS, 90480 / FS]]


def test_dropout_length_option_and_exclusions():
    x = pcm(_dropouts(), 24)
    m = feed(SilenceAnalyzer, x, info_for(x), dropout_min_s=0.015).measurements
    assert m["dropout_count"] == 1  # only the 1000-frame (20.8 ms) frozen run
    # a flat top at the full-scale code is clipping, not a dropout
    codes = _programme()
    codes[70000:71000, 0] = 2 ** 23 - 1
    codes[72000:73000, 0] = -2 ** 23
    x = pcm(codes, 24)
    assert feed(SilenceAnalyzer, x, info_for(x)).measurements["dropout_count"] == 0
    with pytest.raises(ValueError, match="dropout_min_s"):
        feed(SilenceAnalyzer, x, info_for(x), dropout_min_s=0.0)


def test_measure_file_silence_keys(tmp_path):
    path = write_pcm(tmp_path / "s.wav", _dropouts(), FS, 24)
    m = measure_file(path, MeasureOptions(block_frames=10000))["measurements"]
    # by construction (_programme, _dropouts): 12000 / 48000 = 0.25 s of digital silence at the head,
    # 24000 / 48000 = 0.5 s at the tail; three dropouts, the one on both channels counted as two runs
    assert m["head_digital_silence_s"] == 0.25 and m["tail_silence_s"] == 0.5
    assert m["dropout_count"] == 3 and m["dropout_channel_run_count"] == 4


def test_stereo_mute_at_one_time_is_one_dropout():
    """A 50 ms mute on both channels of a stereo file at one time is ONE dropout naming both
    channels; each channel's run is still counted in the per-channel key."""
    t = np.arange(2 * FS) / FS
    tone = np.round(0.25 * np.sin(2 * np.pi * 997 * t) * 2 ** 23).astype(np.int64)
    codes = np.stack([tone, tone], axis=1)
    codes[FS:FS + 2400] = 0                 # 2400 frames = 50 ms at 48 kHz, both channels
    x = pcm(codes, 24)
    m = feed(SilenceAnalyzer, x, info_for(x)).measurements
    assert m["dropout_count"] == 1
    assert m["dropout_count_per_channel"] == [1, 1]
    ev = m["dropout_events"]
    assert len(ev) == 1 and ev[0]["channels"] == ["L", "R"] and ev[0]["kind"] == "silence"
    # the neighbours of the mute are tone samples far from 0 (sin(2 pi 997 t) just before t = 1 s
    # and at t = 1.05 s, sin(2 pi 0.85), round to large codes), so the run is exactly the mute
    assert (ev[0]["start_s"], ev[0]["end_s"]) == (FS / FS, (FS + 2400) / FS)
    assert m["dropout_longest_s"] == 2400 / FS
