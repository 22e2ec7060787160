"""Clipped runs and overs.

Truth is built into each signal: runs of full-scale codes are written at known
frames, so the expected counts, lengths and times follow by arithmetic.
Full-scale codes of two's-complement PCM: +(2**(b-1) - 1) and -2**(b-1) (fact
of the encoding).  Minimum run of 3 samples as the default: common practice,
no source.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from integrity_support import feed, info_for, pcm, write_pcm
from masterqc.measure.clipping import ClippingAnalyzer, clip_levels, full_scale_levels
from masterqc.measure.engine import measure_file
from masterqc.measure.options import MeasureOptions
from masterqc.measure.runs import RunTracker, merge_ranges

FS = 48000


def brute_runs(labels, active, min_len):
    """Reference: maximal runs of equal labels among active samples, by plain iteration."""
    out = []
    for key, grp in itertools.groupby(range(len(labels)), key=lambda k: (bool(active[k]), labels[k] if active[k] else None)):
        idx = list(grp)
        if key[0] and len(idx) >= min_len:
            out.append((idx[0], len(idx), key[1]))
    return out


@settings(max_examples=150, deadline=None)
@given(data=st.lists(st.tuples(st.booleans(), st.integers(-1, 1)), min_size=1, max_size=300),
       cuts=st.lists(st.integers(1, 40), min_size=1, max_size=20),
       min_len=st.integers(1, 5))
def test_run_tracker_matches_plain_iteration_for_any_block_split(data, cuts, min_len):
    active = np.array([a for a, _ in data])
    labels = np.array([v for _, v in data], dtype=np.int8)
    tr = RunTracker(min_len)
    got = []
    pos = 0
    for size in itertools.cycle(cuts):
        if pos >= len(labels):
            break
        s, n, lab = tr.feed(labels[pos:pos + size], active[pos:pos + size])
        got += list(zip(s.tolist(), n.tolist(), lab.tolist()))
        pos += size
    s, n, lab = tr.close()
    got += list(zip(s.tolist(), n.tolist(), lab.tolist()))
    assert sorted(got) == brute_runs(labels, active, min_len)


def test_full_scale_and_clip_levels():
    # analytic: 16-bit two's complement codes run -32768..+32767, read as code / 32768 (the usual
    # PCM-to-float scaling, common practice, no source; libsndfile does the same): +32767/32768 and -1.0
    assert full_scale_levels(16, False) == (32767 / 32768, -1.0)
    assert full_scale_levels(24, False) == ((2 ** 23 - 1) / 2 ** 23, -1.0)
    assert clip_levels(24, False, 0.0) == ((2 ** 23 - 1) / 2 ** 23, -1.0)
    # 0.1 dB below full scale, rounded to the code at or above the level
    up, lo = clip_levels(16, False, 0.1)
    assert up == np.ceil(32767 * 10 ** (-0.1 / 20) - 1e-9) / 32768
    assert lo == np.floor(-32768 * 10 ** (-0.1 / 20) + 1e-9) / 32768
    assert clip_levels(32, True, 0.0) == (1.0, -1.0)
    with pytest.raises(ValueError, match="below full scale"):
        clip_levels(24, False, -0.5)


def _clipped_codes(frames=100000):
    t = np.arange(frames) / FS
    x = np.round(0.5 * np.sin(2 * np.pi * 997 * t) * 2 ** 23).astype(np.int64)
    codes = np.stack([x, -x], axis=1)
    top, bottom = 2 ** 23 - 1, -2 ** 23
    codes[10000:10005, 0] = top          # run of 5, positive, L
    codes[20000:20003, 1] = bottom       # run of 3, negative, R
    codes[30000:30002, 0] = top          # run of 2: too short
    codes[65530:65540, 0] = bottom       # run of 10 across the 65536 block boundary, L
    codes[80000:80004, 1] = top          # 4 positive then 4 negative in R: two runs, not one
    codes[80004:80008, 1] = bottom
    return codes


@pytest.mark.parametrize("block", [65536, 4096, 1000, 7])
def test_clipped_runs_counts_lengths_and_times(block):
    codes = _clipped_codes()
    x = pcm(codes, 24)
    m = feed(ClippingAnalyzer, x, info_for(x, bits=24), block=block).measurements
    # five runs; the two touching runs in R at 80000 form one event (house choice: runs that
    # overlap or touch in time, in any channels, are one event)
    assert m["clipped_run_count"] == 4
    assert m["clipped_run_channel_run_count"] == 5
    assert m["clipped_run_count_per_channel"] == [2, 3]
    assert m["clipped_sample_count_per_channel"] == [15, 11]
    assert m["clipped_run_longest_samples"] == 10
    ev = [(e["channel"], e["start_s"], e["end_s"], e["samples"], e["runs"], e["polarity"])
          for e in m["clipped_run_events"]]
    assert ev == [("L", 10000 / FS, 10005 / FS, 5, 1, "positive"),
                  ("R", 20000 / FS, 20003 / FS, 3, 1, "negative"),
                  ("L", 65530 / FS, 65540 / FS, 10, 1, "negative"),
                  ("R", 80000 / FS, 80008 / FS, 8, 2, "both")]
    # touching ranges merge into one located problem
    assert m["clipped_run_where_s"] == [[10000 / FS, 10005 / FS], [20000 / FS, 20003 / FS],
                                        [65530 / FS, 65540 / FS], [80000 / FS, 80008 / FS]]
    assert m["over_full_scale_sample_count"] is None  # integer PCM cannot exceed full scale


def test_min_run_and_threshold_options():
    codes = _clipped_codes()
    x = pcm(codes, 24)
    m = feed(ClippingAnalyzer, x, info_for(x, bits=24), clip_min_run_samples=2).measurements
    assert m["clipped_run_count"] == 5  # the run of 2 now counts (4 events before, one more)
    # a plateau 0.05 dB below full scale: clipped only once the threshold reaches it
    level = int(np.floor((2 ** 23 - 1) * 10 ** (-0.05 / 20)))
    codes = np.zeros((5000, 1), np.int64)
    codes[100:200, 0] = level
    x = pcm(codes, 24)
    assert feed(ClippingAnalyzer, x, info_for(x, bits=24)).measurements["clipped_run_count"] == 0
    assert feed(ClippingAnalyzer, x, info_for(x, bits=24), clip_threshold_db=0.04).measurements["clipped_run_count"] == 0
    m = feed(ClippingAnalyzer, x, info_for(x, bits=24), clip_threshold_db=0.06).measurements
    assert m["clipped_run_count"] == 1 and m["clipped_sample_count_per_channel"] == [100]


def test_stereo_clip_at_one_time_is_one_event():
    """Both channels clipped over the same frames: one event naming L and R, two channel runs."""
    codes = np.zeros((20000, 2), np.int64)
    codes[5000:5006, :] = 2 ** 23 - 1          # 6 frames at positive full scale in L and R
    codes[5003:5010, 1] = 2 ** 23 - 1          # R's run continues to 5010: one run of 10 in R
    x = pcm(codes, 24)
    m = feed(ClippingAnalyzer, x, info_for(x, bits=24)).measurements
    assert m["clipped_run_count"] == 1 and m["clipped_run_count_per_channel"] == [1, 1]
    e = m["clipped_run_events"][0]
    assert (e["channels"], e["start_s"], e["end_s"], e["samples"], e["runs"]) == (["L", "R"], 5000 / FS,
                                                                                  5010 / FS, 10, 2)


def test_padded_16_bit_full_scale_needs_a_threshold(tmp_path):
    # 16-bit full scale padded into 24 bits sits at code 0x7FFF00, 0.00027 dB below 24-bit full scale
    codes = np.zeros((4800, 2), np.int64)
    codes[1000:1010, :] = 32767
    codes[2000:2004, 1] = -32768
    path = tmp_path / "padded.wav"
    import soundfile as sf
    sf.write(path, codes.astype(np.int16), FS, subtype="PCM_24")  # libsndfile pads: code << 8
    r = measure_file(path)
    assert r["measurements"]["clipped_run_count"] == 1  # only -32768<<8 == -2**23 is 24-bit full scale
    r = measure_file(path, MeasureOptions(clip_threshold_db=0.001))
    assert r["measurements"]["clipped_run_count_per_channel"] == [1, 2]


def test_float_file_overs_and_runs(tmp_path):
    import soundfile as sf
    x = np.zeros((48000, 2))
    x[100:110, 0] = 1.0       # a run at full scale
    x[500:503, 1] = 1.5       # beyond full scale: 3 overs, and a run
    x[900, 0] = -2.0          # one over, no run
    path = tmp_path / "f.wav"
    sf.write(path, x.astype(np.float32), FS, subtype="FLOAT")
    m = measure_file(path)["measurements"]
    # by construction (the samples written above): overs 1 in L and 3 in R, one run per channel
    assert m["over_full_scale_sample_count"] == 4
    assert m["over_full_scale_sample_count_per_channel"] == [1, 3]
    assert m["clipped_run_count_per_channel"] == [1, 1]
    assert m["clipped_run_where_s"] == [[100 / FS, 110 / FS], [500 / FS, 503 / FS]]


def test_file_round_trip_matches_in_memory(tmp_path):
    codes = _clipped_codes()
    path = write_pcm(tmp_path / "c.wav", codes, FS, 24)
    m = measure_file(path, MeasureOptions(block_frames=3001))["measurements"]
    # by construction: the runs written in _clipped_codes (counted in test_runs_and_counts above)
    assert m["clipped_run_count"] == 4 and m["clipped_run_count_per_channel"] == [2, 3]


def test_merge_ranges():
    # by construction: touching or overlapping ranges are joined; limit keeps the first n (house choice)
    assert merge_ranges([(3.0, 4.0), (1.0, 2.0), (2.0, 2.5), (3.5, 5.0)]) == [[1.0, 2.5], [3.0, 5.0]]
    assert merge_ranges([(float(i), i + 0.5) for i in range(10)], limit=3) == [[0.0, 0.5], [1.0, 1.5], [2.0, 2.5]]
