"""Sample patterns of unfiltered upsamplers (masterqc.measure.interpolation).

Every expectation here is analytic (derivation beside each check) or a library's output:
scipy.signal.resample_poly is the interpolating resampler that must leave no pattern.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal as sps

from masterqc.audio.reader import StreamInfo
from masterqc.measure import interpolation as it
from masterqc.measure import provenance


def _info(fs, frames, channels, bits=24, is_float=False):
    labels = ("M",) if channels == 1 else ("L", "R")[:channels]
    return StreamInfo(path="<memory>", container="wav", encoding="pcm_24", sample_rate_hz=int(fs),
                      bit_depth=bits, is_float=is_float, channels=channels, frames=frames,
                      channel_layout=labels, layout_source="conventional", channel_weights=(1.0,) * channels)


def _run(y, fs, bits=24, is_float=False, block=10007):
    y = np.asarray(y, dtype=float)
    if y.ndim == 1:
        y = y[:, None]
    a = it.InterpolationTraceAnalyzer(_info(fs, y.shape[0], y.shape[1], bits, is_float), None)
    for i in range(0, y.shape[0], block):
        a.process(y[i:i + block])
    return a.finish().measurements


def _noise(n, fs, rng, band_hz):
    """White noise low-passed to ``band_hz`` (material that fills the source's band)."""
    x = rng.standard_normal(n)
    x = sps.sosfilt(sps.butter(8, band_hz, fs=fs, output="sos"), x)
    return 0.1 * x / np.std(x)


def _q24(x, rng):
    """24-bit quantisation with TPDF dither (+-1 LSB), as a WAV writer with dither does."""
    q = 2.0 ** 23
    return np.round(x * q + rng.random(x.shape) - rng.random(x.shape)) / q


def _hold(x, src, dst):
    pos = np.arange(len(x) * dst // src) * (src / dst)
    return x[np.minimum(np.floor(pos + 1e-9).astype(np.int64), len(x) - 1)]


def test_hold_by_integer_factor_leaves_runs_of_exactly_L_equal_samples():
    # Analytic: a hold upsampler by L sets y[n] = x[floor(n / L)], so y[kL] = ... = y[kL + L - 1]:
    # runs of exactly L equal samples, and d1[n] = y[n] - y[n-1] is zero unless n = 0 mod L.
    rng = np.random.default_rng(1)
    x = _noise(24000, 8000, rng, 3500.0)
    y = _hold(x, 8000, 48000)
    L = 6
    d1 = np.diff(y)
    n = np.arange(1, len(y))
    assert np.all(d1[n % L != 0] == 0.0)
    assert np.count_nonzero(d1[n % L == 0]) > 0.99 * np.count_nonzero(n % L == 0)
    m = _run(y, 48000, is_float=True)
    # the lowest rate whose phase pattern holds: fs / L = 8 kHz (16 and 24 kHz pass too, being multiples)
    assert m["interpolation_source_rate_hz"] == 8000
    assert m["interpolation_kind"] == "hold"
    assert m["interpolation_contrast_db"] == pytest.approx(200.0)     # the other phases are exactly zero


def test_hold_survives_24_bit_dither():
    # With TPDF dither of +-1 LSB the held runs differ by at most 2 LSB (power about 1/3 LSB^2 per
    # difference), while the jumps carry the content (0.1 RMS = 2^23 * 0.1 LSB): contrast far above 20 dB.
    rng = np.random.default_rng(2)
    y = _q24(_hold(_noise(22050, 22050, rng, 10000.0), 22050, 96000), rng)
    m = _run(y, 96000)
    assert m["interpolation_source_rate_hz"] == 22050
    # analytic order of magnitude from the numbers above: content jumps of about 0.1 RMS (2^23 * 0.1 LSB)
    # against held differences of 1/3 LSB^2 power, 10*log10((2^23 * 0.1)^2 * 3) = 123 dB; 60 dB is a
    # house-choice floor well under that and far above the detector's 20 dB need
    assert m["interpolation_contrast_db"] > 60.0


def test_hold_by_non_integer_ratio_names_the_source():
    # Analytic: 44100 / 8000 = 441 / 80, so the jumps of a hold upsampler repeat every 441 output
    # samples, 80 of them per period (one per source sample): d1 is zero in 361 of 441 phases.
    rng = np.random.default_rng(3)
    y = _q24(_hold(_noise(16000, 8000, rng, 3500.0), 8000, 44100), rng)
    assert it.period(44100, 8000) == (441, 80)
    m = _run(y, 44100)
    assert m["interpolation_source_rate_hz"] == 8000
    assert m["interpolation_kind"] == "hold"


def test_linear_interpolation_leaves_second_differences_only_at_the_knots():
    # Analytic: linear interpolation by L makes y a straight line between y[kL] and y[(k+1)L], so
    # d2[n] = y[n+1] - 2 y[n] + y[n-1] = 0 unless n = 0 mod L (a knot).
    rng = np.random.default_rng(4)
    x = _noise(16000, 16000, rng, 7000.0)
    L = 3
    y = np.interp(np.arange(len(x) * L) / L, np.arange(len(x)), x)
    d2 = y[2:] - 2 * y[1:-1] + y[:-2]
    n = np.arange(1, len(y) - 1)
    assert np.max(np.abs(d2[n % L != 0])) < 1e-10     # float64 rounding of the positions n / 3 only
    m = _run(_q24(y, rng), 48000)
    assert m["interpolation_source_rate_hz"] == 16000
    assert m["interpolation_kind"] == "linear"


def test_linear_by_non_integer_ratio():
    # Analytic: 32000 / 11025 = 1280 / 441; each knot lies strictly between two output samples
    # (except every 441st), so d2 is non-zero at its two neighbours: at most 2 * 441 = 882 of 1280
    # phases, and exactly zero in the others.
    rng = np.random.default_rng(5)
    x = _noise(11025, 11025, rng, 5000.0)
    y = np.interp(np.arange(len(x) * 32000 // 11025) * (11025 / 32000), np.arange(len(x)), x)
    m = _run(_q24(y, rng), 32000)
    assert m["interpolation_source_rate_hz"] == 11025


def test_zero_stuffing_names_the_factor():
    # Analytic: zero stuffing by L keeps x only at n = 0 mod L: y itself is zero in L-1 of L phases.
    rng = np.random.default_rng(6)
    x = _noise(12000, 16000, rng, 7000.0)
    y = np.zeros(len(x) * 12)
    y[::12] = x
    m = _run(_q24(y, rng), 192000)
    assert m["interpolation_source_rate_hz"] == 16000
    assert m["interpolation_kind"] == "zero-stuff"


@pytest.mark.parametrize("fs", [44100, 48000, 96000])
def test_native_noise_and_an_interpolating_resampler_leave_no_pattern(fs):
    # Wideband noise has the same difference power at every phase (stationarity); scipy's
    # resample_poly (a windowed-sinc interpolator) spreads it evenly too (its images lie some
    # 50 dB and more down, so the phases differ by far less than the 20 dB contrast).
    rng = np.random.default_rng(7)
    native = _q24(0.1 * rng.standard_normal(fs), rng)
    assert _run(native, fs)["interpolation_source_rate_hz"] is None
    conv = _q24(sps.resample_poly(_noise(fs // 2, fs // 2, rng, 0.45 * fs / 2), 2, 1), rng)
    m = _run(conv, fs)
    assert m["interpolation_source_rate_hz"] is None
    assert m["interpolation_channels"] == []


def test_square_wave_with_a_whole_period_is_not_named():
    # A naive 1 kHz square wave at 48 kHz (period 48 samples) changes only every 24 samples, so
    # its d1 pattern is also that of a hold from 8 kHz, but equally of one from 4 kHz (r/2): the
    # guard sees a pattern coarser than any candidate and names none.
    n = np.arange(96000)
    y = 0.25 * np.where((n // 24) % 2 == 0, 1.0, -1.0)
    assert _run(y, 48000, is_float=True)["interpolation_source_rate_hz"] is None


def test_silence_names_nothing():
    # digital silence has no content for a pattern to show in (house choice: ACTIVE_MIN_LSB2)
    m = _run(np.zeros(48000), 48000)
    assert m["interpolation_source_rate_hz"] is None


def test_one_channel_held_the_other_native():
    rng = np.random.default_rng(8)
    held = _hold(_noise(16000, 16000, rng, 7000.0), 16000, 48000)
    native = 0.1 * rng.standard_normal(held.size)
    m = _run(_q24(np.stack([native, held], axis=1), rng), 48000)
    assert m["interpolation_source_rate_hz"] == 16000
    assert m["interpolation_channels"] == ["R"]


def test_provenance_prefers_the_sample_pattern_over_images():
    # the imaging analyzer tests 32 kHz and up: for an 8 kHz hold it names 32 kHz (a multiple);
    # the pattern names 8 kHz itself and wins
    m = {"upsampled_from_hz": None, "imaging": [{"source_rate_hz": 32000, "coherence": 0.9, "verdict": "defect",
                                                 "image_level_db": -12.0, "channels": ["M"]}],
         "interpolation_source_rate_hz": 8000, "interpolation_kind": "hold", "interpolation_contrast_db": 80.0,
         "interpolation_channels": ["M"]}
    out = provenance.combine(dict(m))
    assert out["upsampled_from_hz"] == 8000
    assert out["upsampled_evidence"] == "samples"
    assert out["upsampled_channels"] == ["M"]
    # with time segments, the whole file is where it was converted up (file and segments agree)
    segs = [{"start_s": 0.0, "end_s": 6.0, "upsampled_from_hz": None},
            {"start_s": 6.0, "end_s": 12.0, "upsampled_from_hz": None}]
    out = provenance.combine(dict(m, bandwidth_segments=segs, upsampled_where_s=[]))
    assert out["upsampled_where_s"] == [[0.0, 12.0]]
    m["interpolation_source_rate_hz"] = None
    out = provenance.combine(dict(m))
    assert out["upsampled_from_hz"] == 32000 and out["upsampled_evidence"] == "images"


def test_zero_stuffing_by_8_is_not_read_as_a_nearby_rate_with_fewer_phases():
    # Analytic: zero stuffing 24 kHz -> 192 kHz (L = 8) keeps 160 of every 1280 phases; 22.05 kHz
    # (192000 / 22050 = 1280 / 147) would take 147 of them, leaving 13 busy phases among its others,
    # which a true 22.05 kHz pattern never has: the source read is 24 kHz.
    rng = np.random.default_rng(9)
    x = _noise(6000, 24000, rng, 11000.0)
    y = np.zeros(len(x) * 8)
    y[::8] = x
    m = _run(_q24(y, rng), 192000)
    assert m["interpolation_source_rate_hz"] == 24000


def test_sparse_bursts_over_a_quiet_bed_name_nothing():
    # natural material moves at every phase (its quiet bed included), however the bursts fall
    rng = np.random.default_rng(10)
    n = 32000 * 2
    y = 1e-3 * rng.standard_normal(n)
    for s in rng.integers(0, n - 3000, 6):
        y[s:s + 2000] += 0.3 * rng.standard_normal(2000) * np.hanning(2000)
    assert _run(_q24(y, rng), 32000)["interpolation_source_rate_hz"] is None


@pytest.mark.parametrize("start", [0, 5, 11520 - 8192, 11520 - 3000, 11520 + 77])
def test_slice_sums_equal_the_counted_sums(start, rng):
    """By construction: a frame no longer than the common period puts each sample on its own phase,
    so adding its squared differences with slices (two runs around the wrap) gives the same per-phase
    sums, to the last bit, as counting them with bincount."""
    fs = 48000
    x = np.round(0.1 * rng.standard_normal((it.FRAME_SAMPLES, 2)) * 2 ** 23) / 2 ** 23
    x[1::2, 0] = x[0::2, 0]                      # a held channel: some differences are exactly zero
    a = it.InterpolationTraceAnalyzer(_info(fs, 10 * fs, 2), None)
    b = it.InterpolationTraceAnalyzer(_info(fs, 10 * fs, 2), None)
    assert x.shape[0] <= a.M                    # (11520 at 48 kHz)
    for _ in range(2):
        a._add_distinct(start, x)
        b._add_counted(start, x)
    for name in ("energy", "hits", "counts"):
        assert np.array_equal(getattr(a, name), getattr(b, name)), name
    assert a.counts[0].sum() == 2 * x.shape[0] and a.counts[2].sum() == 2 * (x.shape[0] - 2)
