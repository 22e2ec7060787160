"""Spectral front end (masterqc.measure.spectral): framing, normalisation, statistics, display.

References: Parseval's theorem and the constant-overlap-add property of the
periodic Hann window at 50 % overlap (analytic); the level of a sine in dBFS
(AES17, "AES standard method for digital audio engineering - Measurement of digital
audio equipment", clause 3 definitions: full-scale amplitude is that of a sine whose
positive peak reaches digital full scale, and dB FS is relative to it, so a full-scale
sine reads 0 dBFS; clause number from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from masterqc.measure.engine import run_analyzers
from masterqc.measure.options import MeasureOptions
from masterqc.measure.spectral import (SamplingSpectrumAnalyzer, SpectralFrontEnd, display_ltas,
                                       frame_length_for)


def run_fe(x, fs, block=65536, **kw):
    x = np.asarray(x, dtype=float)
    if x.ndim == 1:
        x = x[:, None]
    fe = SpectralFrontEnd(fs, x.shape[1], x.shape[0], **kw)
    for i in range(0, x.shape[0], block):
        fe.process(x[i:i + block])
    return fe, fe.finish()


def sine(fs, seconds, f, amp, phase=0.0):
    t = np.arange(int(round(fs * seconds))) / fs
    return amp * np.sin(2 * np.pi * f * t + phase)


@pytest.mark.parametrize("fs,n", [(48000, 4800), (44100, 4410), (96000, 9600), (88200, 8820), (32000, 3200)])
def test_frame_length_gives_10_hz_bins(fs, n):
    assert frame_length_for(fs) == n
    fe = SpectralFrontEnd(fs, 1, fs)
    assert fe.bin_hz == pytest.approx(10.0)


@pytest.mark.parametrize("fs", [88200, 96000, 192000])
def test_candidate_nyquists_and_mirrors_fall_on_bins(fs):
    # analytic: with 10 Hz bins, r/2 and fs - f for any 10 Hz multiple f are multiples of 10 Hz
    fe = SpectralFrontEnd(fs, 1, fs)
    for r in (32000, 44100, 48000, 88200, 96000):
        if r < fs:
            k = (r / 2) / fe.bin_hz
            assert k == pytest.approx(round(k), abs=1e-9)
            mirror = (r - 1230.0) / fe.bin_hz
            assert mirror == pytest.approx(round(mirror), abs=1e-9)


@pytest.mark.parametrize("f,amp", [(1000.0, 0.5), (30000.0, 0.01), (12345.6, 0.25)])
def test_sine_lobe_power_reads_its_peak_level(f, amp):
    fs = 96000
    fe, r = run_fe(sine(fs, 1.0, f, amp), fs)
    k = int(round(f / r.bin_hz))
    lobe = r.ltas[0, k - 3:k + 4].sum()
    # 20*log10(A): A sine's mean square is A^2/2, all inside the +-3-bin Hann main lobe
    assert 10 * math.log10(2 * lobe) == pytest.approx(20 * math.log10(amp), abs=0.02)


def test_parseval_white_noise_mean_square():
    # Hann at 50 % overlap is constant-overlap-add, and the leading/trailing half frames
    # make every sample count the same: sum of the LTAS is the mean square (analytic: Parseval's
    # theorem, module docstring; the 2 % allowance for the window's edges is a house choice)
    rng = np.random.default_rng(1)
    fs = 48000
    x = 0.1 * rng.standard_normal(fs * 2)
    fe, r = run_fe(x, fs)
    assert r.ltas[0].sum() == pytest.approx(np.mean(x ** 2), rel=0.02)


def test_frame_count_covers_the_file():
    fs = 48000
    fe, r = run_fe(np.zeros(12345), fs)
    # frames start at -hop, every hop, while the start is inside the file
    assert r.frames == math.ceil((12345 + 2400) / 2400)


def test_results_do_not_depend_on_block_size():
    rng = np.random.default_rng(2)
    fs = 44100
    x = rng.standard_normal((fs, 2)) * 0.1
    _, a = run_fe(x, fs, block=65536)
    _, b = run_fe(x, fs, block=1000)
    _, c = run_fe(x, fs, block=4410)
    np.testing.assert_allclose(a.ltas, b.ltas, rtol=1e-12, atol=0)
    np.testing.assert_allclose(a.ltas, c.ltas, rtol=1e-12, atol=0)
    np.testing.assert_array_equal(a.p50_db, b.p50_db)
    np.testing.assert_allclose(a.spectrogram_db, b.spectrogram_db, rtol=1e-12)


def test_percentiles_of_an_intermittent_tone():
    # a 5 kHz tone at -20 dBFS present in the middle 30 % of the time over noise at -100 dB:
    # the 10th percentile of its bin is the noise floor, the 90th the tone's bin level.
    # A noise bin's power in one frame is exponentially distributed (chi-square, 2 degrees
    # of freedom): its 10th percentile lies 10*log10(-ln 0.9) = -9.78 dB from the mean (analytic).
    fs = 48000
    rng = np.random.default_rng(3)
    n = fs * 4
    x = 1e-5 * rng.standard_normal(n)
    tone = sine(fs, 4.0, 5000.0, 0.1)
    gate = np.zeros(n)
    gate[int(0.35 * n):int(0.65 * n)] = 1.0
    x = x + tone * gate
    _, r = run_fe(x, fs)
    k = 500
    # bin level of a centred sine: A^2/2 * (coherent gain^2 / (N * sum w^2)) * 2 = A^2/2 * 2/3 for Hann
    tone_bin_db = 10 * math.log10(0.1 ** 2 / 2 * (2.0 / 3.0))
    noise_bin_db = 10 * math.log10(1e-10 / (r.frame_length / 2))
    assert r.p90_db[k] == pytest.approx(tone_bin_db, abs=1.0)
    # 81 frames give each bin's percentile a sampling spread of about a dB: average over bins
    noise = slice(600, 1000)
    assert np.mean(r.p10_db[noise]) == pytest.approx(noise_bin_db + 10 * math.log10(-math.log(0.9)), abs=0.7)
    # the median of an exponential is ln 2 of the mean (-1.59 dB)
    assert np.mean(r.p50_db[noise]) == pytest.approx(noise_bin_db + 10 * math.log10(math.log(2)), abs=0.7)
    assert r.p10_db[k] < tone_bin_db - 60


def test_spectrogram_is_bounded_and_locates_a_burst():
    fs = 8000
    rng = np.random.default_rng(4)
    n = fs * 60
    x = 1e-4 * rng.standard_normal(n)
    x[int(31.0 * fs):int(31.5 * fs)] += 0.3 * rng.standard_normal(int(0.5 * fs))
    fe, r = run_fe(x, fs, columns=400, rows=64, frame_stride=1)
    assert r.spectrogram_db.shape == (400, 64)
    col_energy = (10 ** (r.spectrogram_db / 10)).sum(axis=1)
    j = int(np.argmax(col_energy))
    # by construction: the burst spans 31.0-31.5 s, centre 31.25; 0.3 s is two 0.15 s columns (60 s / 400,
    # house choice)
    assert r.spectrogram_time_s[j] == pytest.approx(31.25, abs=0.3)
    assert r.spectrogram_freq_hz[-1] < fs / 2


def test_display_ltas_is_short_and_smoothed():
    fs = 96000
    rng = np.random.default_rng(5)
    _, r = run_fe(0.1 * rng.standard_normal(fs), fs)
    hz, db = display_ltas(r)
    assert len(hz) <= 1000 and db.shape == (1, len(hz))
    # house choice: the display starts at 20 Hz (the usual lower edge of the audio band, common practice,
    # no source)
    assert hz[0] == pytest.approx(20.0) and hz[-1] <= fs / 2
    # white noise of mean square 0.01 over 4800 bins: -56.8 dB per 10 Hz bin, flat within
    # about a dB above 5 kHz, where each point averages 10 or more bins of 21 frames
    sel = hz > 5000
    assert np.ptp(db[0, sel]) < 2.0
    assert np.median(db[0, sel]) == pytest.approx(10 * math.log10(0.01 / 4800), abs=0.3)


from corpus_sampling import ArrayStream as _Stream  # noqa: E402  (the corpus module's in-memory stream)


def test_analyzer_series_and_keys_through_the_engine():
    fs = 48000
    rng = np.random.default_rng(6)
    x = 0.05 * rng.standard_normal((fs * 2, 2))
    m, series, settings = run_analyzers(_Stream(x, fs), MeasureOptions(), classes=[SamplingSpectrumAnalyzer])
    for key in SamplingSpectrumAnalyzer.measurement_schema:
        assert key in m
    assert len(series["ltas_hz"]) <= 1000
    assert len(series["ltas_db_per_channel"]) == 2
    sg = series["spectrogram"]
    assert len(sg["db"]) <= 1000 and len(sg["db"][0]) <= 256
    assert len(sg["time_s"]) == len(sg["db"]) and len(sg["frequency_hz"]) == len(sg["db"][0])
    assert settings["sampling_spectrum"]["front_end"]["bin_hz"] == pytest.approx(10.0)


def test_long_files_are_analysed_on_a_regular_subsample():
    from masterqc.measure.spectral import (LONG_FILE_STRIDE, MID_FILE_STRIDE, VERY_LONG_FILE_STRIDE,
                                           default_frame_stride)
    # house choice: every frame up to 15 s, 1 in 4 up to 60 s, 1 in 6 up to 5 minutes, 1 in 12 beyond
    assert default_frame_stride(15.0) == 1
    assert default_frame_stride(15.1) == default_frame_stride(60.0) == MID_FILE_STRIDE == 4
    assert default_frame_stride(60.1) == default_frame_stride(300.0) == LONG_FILE_STRIDE == 6
    assert default_frame_stride(300.1) == default_frame_stride(3600.0) == VERY_LONG_FILE_STRIDE == 12
    rng = np.random.default_rng(8)
    fs = 48000
    x = 0.1 * rng.standard_normal((fs * 6, 1))
    _, full = run_fe(x, fs, frame_stride=1)
    fe, sub = run_fe(x, fs, frame_stride=6)
    assert sub.frames == -(-full.frames // 6)
    # the subsample's LTAS estimates the same mean square (analytic: Parseval; 3 % and 0.2 dB are house
    # choices for the noise of one frame in six)
    assert sub.ltas[0].sum() == pytest.approx(np.mean(x ** 2), rel=0.03)
    band = slice(100, 2300)
    ratio_db = 10 * np.log10(sub.ltas[0, band].mean() / full.ltas[0, band].mean())
    assert abs(ratio_db) < 0.2
    assert fe.settings()["frame_stride"] == 6


def test_noise_floor_series_follows_the_low_percentile():
    # white noise of mean square 0.01: per 10 Hz bin at 48 kHz the mean is 10*log10(0.01/2400) = -53.8 dB;
    # a single frame's bin is exponential, its 10th percentile 9.78 dB below the mean (analytic)
    fs = 48000
    rng = np.random.default_rng(9)
    x = 0.1 * rng.standard_normal((fs * 3, 1))
    m, series, _ = run_analyzers(_Stream(x, fs), MeasureOptions(), classes=[SamplingSpectrumAnalyzer])
    floor = np.array(series["ltas_floor_db"], dtype=float)
    hz = np.array(series["ltas_hz"])
    sel = (hz > 2000) & (hz < 20000)
    assert len(floor) == len(hz)
    assert np.median(floor[sel]) == pytest.approx(10 * math.log10(0.01 / 2400) + 10 * math.log10(-math.log(0.9)),
                                                  abs=1.0)


def test_spectrogram_of_a_subsampled_long_file_has_no_empty_columns():
    fs = 8000
    rng = np.random.default_rng(10)
    x = 0.1 * rng.standard_normal((fs * 70, 1))          # 70 s: analysed on 1 frame in 6
    fe, r = run_fe(x, fs)
    assert fe.stride == 6
    assert np.isfinite(r.spectrogram_db).all()
    assert r.spectrogram_db.shape[0] <= 300  # house choice: SPECTROGRAM_COLUMNS, 300 columns at most


@pytest.mark.parametrize("fs,channels,seconds,stride", [(48000, 2, 1.3, 1), (44100, 1, 2.05, 6), (22050, 3, 1.0, 2)])
def test_each_analysed_frame_is_a_direct_transform_of_its_samples(fs, channels, seconds, stride):
    """The frames the front end cuts (straight from the blocks, or across two blocks, in batches)
    against a direct computation on the whole signal: half a frame of zeros before it, zeros after
    it, frame j from sample j*hop, periodic Hann (scipy.signal.get_window), a float64 FFT and the
    module docstring's scaling (analytic).  Float32 windowing and transform: within 1e-5 of each
    frame's strongest bin (house bound, some 100 float32 units in the last place).  The frames and
    their values are the same bit for bit whatever the block size and input layout (house rule:
    results never depend on the block size)."""
    from scipy.signal import get_window
    rng = np.random.default_rng(fs + channels)
    x = np.round(rng.standard_normal((int(fs * seconds), channels)) * 0.1 * 2 ** 23) / 2 ** 23
    got = {}
    for block in (65536, 777, 1):
        if block == 1 and x.shape[0] > 30000:
            block = 3001
        for planar in (False, True):
            fe = SpectralFrontEnd(fs, channels, x.shape[0], frame_stride=stride)
            seen = []
            fe.consumers.append(lambda p, i: seen.append((p.copy(), i.copy())))
            for s in range(0, x.shape[0], block):
                blk = x[s:s + block]
                fe.process_planar(np.ascontiguousarray(blk.T)) if planar else fe.process(blk)
            fe.finish()
            got[(block, planar)] = (np.concatenate([p for p, _ in seen]), np.concatenate([i for _, i in seen]))
    power, index = got[(65536, False)]
    for key, (p, i) in got.items():
        assert np.array_equal(p, power) and np.array_equal(i, index), key
    n = frame_length_for(fs)
    hop = n // 2
    frames_total = -(-(x.shape[0] + hop) // hop)
    assert list(index) == list(range(0, frames_total, stride))
    padded = np.concatenate([np.zeros((hop, channels)), x, np.zeros((n, channels))])
    w = get_window("hann", n)                       # periodic (DFT-even) Hann
    scale = np.full(n // 2 + 1, 2.0 / (n * np.sum(w ** 2)))
    scale[0] /= 2
    if n % 2 == 0:                                  # (an odd frame, 2205 samples at 22.05 kHz, has no Nyquist bin)
        scale[-1] /= 2
    for row, j in enumerate(index):
        seg = padded[j * hop:j * hop + n].T * w
        ref = np.abs(np.fft.rfft(seg, axis=-1)) ** 2 * scale
        err = np.abs(power[row] - ref).max(axis=-1) / ref.max(axis=-1)
        assert err.max() < 1e-5, (j, err)
