"""Channel relations: dual mono, inverted polarity, phase correlation over time, level balance.

Analytic truth: for R = -L the correlation is exactly -1; for L = s + n1 and
R = -(s + n2) with independent noise of power Pn and signal power Ps it is
-Ps / (Ps + Pn); two sines of one frequency with amplitudes a and b differ by
20*log10(a/b) after any linear filter, so their K-weighted balance is that in
LU.  Reference library: pyloudnorm with the exact BS.1770 filter
(``Meter(rate, filter_class="DeMan")``) for the balance of different signals.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from integrity_support import feed, info_for
from masterqc.measure.channels import SERIES_POINTS, ChannelRelationAnalyzer, channel_pairs
from masterqc.measure.engine import measure_file

FS = 48000


def _tone(seconds, f=997.0, a=0.25, fs=FS):
    t = np.arange(int(seconds * fs)) / fs
    return a * np.sin(2 * np.pi * f * t)


def test_pairs_by_label():
    # house choice: front L/R, Ls/Rs and Lrs/Rrs are paired by label (indices by construction)
    assert channel_pairs(["L", "R"]) == [(0, 1)]
    assert channel_pairs(["L", "R", "C", "LFE", "Ls", "Rs"]) == [(0, 1), (4, 5)]
    assert channel_pairs(["L", "R", "C", "LFE", "Ls", "Rs", "Lrs", "Rrs"]) == [(0, 1), (4, 5), (6, 7)]
    assert channel_pairs(["ch1", "ch2"]) == [(0, 1)]
    assert channel_pairs(["ch1", "ch2", "ch3"]) == []


def test_dual_mono(rng):
    n = rng.normal(0, 0.1, 48000)
    x = np.stack([n, n], axis=1)
    m = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True), block=4000).measurements
    assert m["dual_mono"] is True
    assert m["identical_channel_pairs"] == [["L", "R"]]
    assert m["inverted_polarity"] is False
    assert m["channel_correlation_per_pair"] == [pytest.approx(1.0, abs=1e-12)]
    x[30000, 1] += 1e-9  # one sample differs: no longer identical
    m = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True), block=4000).measurements
    assert m["dual_mono"] is False and m["identical_channel_pairs"] == []


def test_exact_inversion(rng):
    n = rng.normal(0, 0.1, 48000)
    x = np.stack([n, -n], axis=1)
    m = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True)).measurements
    assert m["inverted_polarity"] is True
    assert m["inverted_polarity_pairs"] == [["L", "R"]]
    assert m["channel_correlation_per_pair"][0] == pytest.approx(-1.0, abs=1e-12)
    assert m["phase_correlation_min"] == pytest.approx(-1.0, abs=1e-12)
    assert m["phase_correlation_below_percent"] == 100.0
    assert m["dual_mono"] is False
    assert m["level_balance_lu"] == pytest.approx(0.0, abs=1e-9)


def test_inverted_mix_with_independent_parts(rng):
    s = rng.normal(0, 1.0, 10 * FS)
    n1, n2 = rng.normal(0, 0.5, (2, 10 * FS))
    x = 0.1 * np.stack([s + n1, -(s + n2)], axis=1)
    m = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True)).measurements
    # analytic: -var(s) / sqrt((var s + var n1)(var s + var n2)) = -1 / (1 + 0.25); 0.01 for 10 s of noise
    assert m["channel_correlation_per_pair"][0] == pytest.approx(-1.0 / 1.25, abs=0.01)
    assert m["inverted_polarity"] is True  # -0.8 <= -0.5 (default)
    m = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True),
             inverted_polarity_correlation=-0.9).measurements
    assert m["inverted_polarity"] is False


@pytest.mark.parametrize("block", [65536, 4801, 1000])
def test_phase_correlation_over_time(block):
    # analytic: 1 s in phase, 0.5 s with R inverted, 1.5 s in phase: 5 of 30 windows (100 ms, house
    # choice) at -1; over the whole file (2.5 - 0.5) / 3 = 2/3
    tone = _tone(3.0)
    r = tone.copy()
    r[FS:FS + FS // 2] *= -1
    x = np.stack([tone, r], axis=1)
    res = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True), block=block)
    m = res.measurements
    assert m["phase_correlation_min"] == pytest.approx(-1.0, abs=1e-9)
    assert m["phase_correlation_below_percent"] == pytest.approx(100 * 5 / 30, abs=1e-10)
    assert m["phase_correlation_below_s"] == pytest.approx(0.5, abs=1e-12)
    assert m["phase_correlation_below_where_s"] == [[1.0, 1.5]]
    assert m["channel_correlation_per_pair"][0] == pytest.approx(2 / 3, abs=1e-3)
    assert m["inverted_polarity"] is False
    series = res.series["phase_correlation"]
    assert series["pair"] == "L/R" and series["hop_s"] == pytest.approx(0.1)
    vals = series["values"]
    assert len(vals) == 30
    assert vals[10:15] == pytest.approx([-1.0] * 5, abs=1e-9)
    assert vals[:10] == pytest.approx([1.0] * 10, abs=1e-9)


def test_silent_windows_carry_no_correlation():
    tone = _tone(1.0)
    x = np.stack([tone, tone], axis=1)
    x[:24000, 1] = 0.0  # R silent for the first half
    m = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True)).measurements
    assert m["phase_correlation_min"] == pytest.approx(1.0, abs=1e-9)
    assert m["phase_correlation_below_percent"] == 0.0


def test_long_file_series_stays_bounded():
    fs = 8000
    tone = _tone(250.0, f=200.0, fs=fs)
    x = np.stack([tone, tone], axis=1)
    x[123 * fs:int(123.3 * fs), 1] *= -1
    res = feed(ChannelRelationAnalyzer, x, info_for(x, fs=fs, bits=64, is_float=True))
    vals = res.series["phase_correlation"]["values"]
    assert len(vals) <= SERIES_POINTS
    assert min(vals) == pytest.approx(res.measurements["phase_correlation_min"])
    assert res.measurements["phase_correlation_below_s"] == pytest.approx(0.3, abs=1e-9)  # by construction: 123..123.3 s


def test_balance_of_one_tone_at_two_levels():
    tone = _tone(5.0, a=0.5)
    x = np.stack([tone, tone / 2], axis=1)
    m = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True)).measurements
    assert m["level_balance_lu"] == pytest.approx(20 * math.log10(2), abs=1e-3)  # analytic: half the amplitude


def test_balance_against_pyloudnorm(tmp_path, rng):
    import pyloudnorm
    import soundfile as sf
    t = np.arange(10 * FS) / FS
    left = 0.2 * np.sin(2 * np.pi * 100 * t)   # K-weighting differs at 100 Hz and 3 kHz
    right = 0.2 * np.sin(2 * np.pi * 3000 * t)
    x = np.stack([left, right], axis=1)
    path = tmp_path / "bal.wav"
    sf.write(path, x, FS, subtype="DOUBLE")
    m = measure_file(path)["measurements"]
    meter = pyloudnorm.Meter(FS, filter_class="DeMan")
    expected = meter.integrated_loudness(left) - meter.integrated_loudness(right)
    assert m["level_balance_lu_per_pair"][0] == pytest.approx(expected, abs=0.02)


def test_surround_pairs(rng):
    base = rng.normal(0, 0.1, (FS, 6))
    base[:, 5] = base[:, 4] * 0.5  # Rs = Ls at -6 dB: balance 20*log10(2) = +6.02 LU, correlation 1 (analytic)
    base[:, 3] = 0.0               # LFE silent
    m = feed(ChannelRelationAnalyzer, base, info_for(base, bits=64, is_float=True)).measurements
    assert m["channel_pairs"] == [["L", "R"], ["Ls", "Rs"]]
    assert m["level_balance_lu_per_pair"][1] == pytest.approx(20 * math.log10(2), abs=1e-9)
    assert m["phase_correlation_min_per_pair"][1] == pytest.approx(1.0, abs=1e-9)
    assert m["level_balance_lu"] == pytest.approx(20 * math.log10(2), abs=1e-9)  # largest in magnitude
    assert m["identical_channel_pairs"] == []  # the silent LFE is not "identical" to anything


def test_mono_has_no_relations():
    x = _tone(0.5)[:, None]
    m = feed(ChannelRelationAnalyzer, x, info_for(x, bits=64, is_float=True)).measurements
    assert m["dual_mono"] is None and m["inverted_polarity"] is None
    assert m["phase_correlation_min"] is None and m["level_balance_lu"] is None
