"""Non-finite samples in float files: counts, first positions, and the rest of the measurement.

Truth: NaN and +-Inf are written at known frames of a float32 file (IEEE 754
float32 represents them; libsndfile passes float samples through unscaled).
"""

from __future__ import annotations

import numpy as np
import soundfile as sf

from integrity_support import feed, info_for
from masterqc.measure.engine import measure_file
from masterqc.measure.nonfinite import FIRST_POSITIONS, NonFiniteAnalyzer
from masterqc.measure.options import MeasureOptions

FS = 48000


def _signal():
    t = np.arange(5 * FS) / FS
    tone = 0.1 * np.sin(2 * np.pi * 997 * t)
    x = np.stack([tone, tone], axis=1).astype(np.float32)
    x[1000, 0] = np.nan
    x[2000, 1] = np.inf
    x[3000, 0] = -np.inf
    x[70000:70010, 1] = np.nan  # a run of ten NaN
    return x


def test_counts_and_first_positions(tmp_path):
    path = tmp_path / "nan.wav"
    sf.write(path, _signal(), FS, subtype="FLOAT")
    r = measure_file(path, MeasureOptions(block_frames=4096))
    m = r["measurements"]
    # by construction (_signal): L has NaN at 1000 and -inf at 3000; R has +inf at 2000 and ten NaN
    # from 70000: 13 in all, 11 NaN and 2 inf
    assert m["nonfinite_sample_count"] == 13
    assert m["nonfinite_sample_count_per_channel"] == [2, 11]
    assert m["nan_sample_count"] == 11 and m["inf_sample_count"] == 2
    first = [(p["channel"], p["frame"], p["kind"]) for p in m["nonfinite_first_positions"]]
    assert first[:4] == [("L", 1000, "nan"), ("R", 2000, "+inf"), ("L", 3000, "-inf"), ("R", 70000, "nan")]
    assert m["nonfinite_first_positions"][0]["time_s"] == 1000 / FS
    assert m["nonfinite_where_s"][0] == [1000 / FS, 1001 / FS]
    assert m["nonfinite_where_s"][-1] == [70000 / FS, 70010 / FS]
    # the rest of the measurement completes: loudness and peaks exist and are finite
    assert isinstance(m["integrated_lufs"], float)
    # analytic: the finite samples are a 0.1 sine, 20*log10(0.1) = -20 dBFS at most
    assert m["sample_peak_dbfs"] is not None and m["sample_peak_dbfs"] < -19.9
    assert m["effective_bit_depth_bits"] == 32  # genuine float content


def test_positions_kept_are_bounded_but_counts_exact():
    x = np.zeros((10000, 1))
    x[::100, 0] = np.nan
    m = feed(NonFiniteAnalyzer, x, info_for(x, bits=32, is_float=True), block=333).measurements
    assert m["nonfinite_sample_count"] == 100
    assert len(m["nonfinite_first_positions"]) == FIRST_POSITIONS
    assert [p["frame"] for p in m["nonfinite_first_positions"]] == list(range(0, 100 * FIRST_POSITIONS, 100))


def test_integer_pcm_counts_zero():
    x = np.zeros((1000, 2))
    m = feed(NonFiniteAnalyzer, x, info_for(x, bits=24)).measurements
    assert m["nonfinite_sample_count"] == 0 and m["nonfinite_first_positions"] == []
