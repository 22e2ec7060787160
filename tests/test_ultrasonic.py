"""Ultrasonic content (masterqc.measure.ultrasonic).

References: analytic energy ratios of sines (mean square A^2/2); the level of
a sine in dBFS (AES17 clause 3 definitions, clause number from memory: a sine whose positive
peak reaches full scale reads 0 dBFS, so a sine of peak amplitude A reads 20*log10(A) dBFS
and A = 0.01 reads -40 dBFS);
pyloudnorm ``Meter(rate, filter_class="DeMan")`` (ITU-R BS.1770-5 K-weighting
and gating) as the reference for the loudness change of a 20 kHz low-pass,
the low-pass done exactly by zeroing FFT bins.

Listening caution: these signals include loud noise and tones; if you write
them out and play them, turn the monitoring level down first.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import pyloudnorm

from corpus_sampling import ArrayStream
from masterqc.measure.engine import run_analyzers
from masterqc.measure.options import MeasureOptions
from masterqc.measure.spectral import SamplingSpectrumAnalyzer
from masterqc.measure.ultrasonic import gated_loudness


Stream = ArrayStream  # the corpus module's in-memory stream


def measure(x, fs, **opts):
    m, _s, _t = run_analyzers(Stream(x, fs), MeasureOptions(**opts), classes=[SamplingSpectrumAnalyzer])
    return m


def sine(fs, seconds, f, amp, phase=0.0):
    t = np.arange(int(round(fs * seconds))) / fs
    return amp * np.sin(2 * np.pi * f * t + phase)


def band_noise(fs, seconds, lo, hi, rms, rng):
    n = int(round(fs * seconds))
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1 / fs)
    spec[(f < lo) | (f > hi)] = 0.0
    x = np.fft.irfft(spec, n)
    return rms * x / np.sqrt(np.mean(x ** 2))


def test_tone_at_30_khz_is_found_with_its_level():
    fs = 96000
    rng = np.random.default_rng(1)
    x = band_noise(fs, 2.0, 20.0, 18000.0, 0.05, rng) + sine(fs, 2.0, 30000.0, 0.01)  # 20*log10(0.01) = -40 dBFS
    m = measure(x, fs)
    tones = m["ultrasonic_tones"]
    assert len(tones) == 1
    assert tones[0]["frequency_hz"] == pytest.approx(30000.0, abs=1.0)
    assert tones[0]["level_dbfs"] == pytest.approx(-40.0, abs=0.5)


@pytest.mark.parametrize("f,amp", [(25003.3, 0.003), (41234.5, 0.02)])
def test_off_bin_tones(f, amp):
    fs = 96000
    rng = np.random.default_rng(2)
    x = band_noise(fs, 1.5, 20.0, 18000.0, 0.05, rng) + sine(fs, 1.5, f, amp)
    tones = measure(x, fs)["ultrasonic_tones"]
    assert [round(t["frequency_hz"]) for t in tones] == [pytest.approx(f, abs=2.0)]
    assert tones[0]["level_dbfs"] == pytest.approx(20 * math.log10(amp), abs=0.5)


def test_tone_19_db_above_white_noise_is_found():
    # white noise of RMS 0.05 puts -62.8 dB in each 10 Hz bin; a -40 dBFS sine's centre bin holds
    # 0.01^2/2 * 2/3 (Hann) = -44.8 dB: 18 dB above the noise
    fs = 96000
    rng = np.random.default_rng(11)
    x = 0.05 * rng.standard_normal(fs) + sine(fs, 1.0, 25000.0, 0.01)
    tones = measure(x, fs)["ultrasonic_tones"]
    assert [t["frequency_hz"] for t in tones] == [pytest.approx(25000.0, abs=1.0)]
    assert tones[0]["level_dbfs"] == pytest.approx(-40.0, abs=0.5)


def test_broadband_ultrasonic_noise_is_not_a_tone():
    fs = 96000
    rng = np.random.default_rng(3)
    x = 0.05 * rng.standard_normal(fs * 2)
    m = measure(x, fs)
    assert m["ultrasonic_tones"] == []
    # white noise: (48 - 20) / (20 - 0.01) kHz of the bandwidth -> 10*log10(28/19.99) = +1.46 dB
    assert m["ultrasonic_energy_db"] == pytest.approx(10 * math.log10(28000 / 19990), abs=0.1)


def test_energy_ratio_of_two_sines():
    fs = 96000
    x = sine(fs, 2.0, 1000.0, 0.5) + sine(fs, 2.0, 31000.0, 0.05)
    m = measure(x, fs)
    # mean squares a^2/2 and b^2/2: ratio 20*log10(b/a) = -20 dB
    assert m["ultrasonic_energy_db"] == pytest.approx(-20.0, abs=0.05)
    assert m["ultrasonic_energy_max_3s_db"] == pytest.approx(-20.0, abs=0.05)


def test_44k1_file_has_no_ultrasonic_band():
    fs = 44100
    rng = np.random.default_rng(4)
    m = measure(0.1 * rng.standard_normal(fs), fs)
    assert m["ultrasonic_energy_db"] is None
    assert m["ultrasonic_energy_max_3s_db"] is None
    assert m["ultrasonic_energy_max_3s_where_s"] == []
    assert m["ultrasonic_tones"] == []
    assert m["ultrasonic_loudness_change_lu"] is None


def test_48k_file_has_no_ultrasonic_band_either():
    fs = 48000
    x = sine(fs, 1.0, 1000.0, 0.5) + sine(fs, 1.0, 21000.0, 0.05)
    assert measure(x, fs)["ultrasonic_energy_db"] is None


def test_threshold_frequency_from_options():
    fs = 96000
    x = sine(fs, 1.0, 1000.0, 0.5) + sine(fs, 1.0, 19000.0, 0.05)
    fade = int(0.05 * fs)                    # 50 ms raised-cosine fades: no onset splatter above 20 kHz
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(fade) / fade)
    x[:fade] *= ramp
    x[-fade:] *= ramp[::-1]
    # house choice: nothing above 20 kHz but the faded tones' window leakage, far below -100 dB
    assert measure(x, fs)["ultrasonic_energy_db"] < -100          # nothing above 20 kHz
    m = measure(x, fs, ultrasonic_from_hz=18000.0)
    assert m["ultrasonic_energy_db"] == pytest.approx(-20.0, abs=0.05)
    assert m["ultrasonic_from_hz"] == 18000.0
    assert measure(x, fs, ultrasonic_from_hz=48000.0)["ultrasonic_energy_db"] is None


def test_worst_3s_window_locates_a_burst():
    # stationary audible noise over 12 s; ultrasonic noise only from 6 to 8 s.  A 3 s window holding the
    # whole burst has 3/12 of the audible energy: its ratio is the long-term one + 10*log10(12/3) = +6.02 dB
    fs = 96000
    rng = np.random.default_rng(5)
    x = band_noise(fs, 12.0, 20.0, 18000.0, 0.05, rng)
    burst = band_noise(fs, 2.0, 25000.0, 40000.0, 0.02, rng)
    x[6 * fs:8 * fs] += burst
    m = measure(x, fs)
    assert m["ultrasonic_energy_max_3s_db"] - m["ultrasonic_energy_db"] == pytest.approx(6.02, abs=0.3)
    (a, b), = m["ultrasonic_energy_max_3s_where_s"]
    assert b - a == pytest.approx(3.0, abs=0.06)
    assert a <= 6.05 and b >= 7.95


def _lowpass_fft(x, fs, f_hz):
    spec = np.fft.rfft(x)
    spec[np.fft.rfftfreq(x.size, 1 / fs) >= f_hz] = 0.0
    return np.fft.irfft(spec, x.size)


@pytest.mark.parametrize("ultra_rms", [0.1, 0.02])
def test_loudness_change_of_a_20k_low_pass_against_pyloudnorm(ultra_rms):
    fs = 96000
    rng = np.random.default_rng(6)
    audible = band_noise(fs, 6.0, 30.0, 16000.0, 0.05, rng)
    audible[:fs] *= 1e-4                             # a quiet second, removed by the gates
    x = audible + band_noise(fs, 6.0, 22000.0, 45000.0, ultra_rms, rng)
    meter = pyloudnorm.Meter(fs, filter_class="DeMan")
    expected = meter.integrated_loudness(_lowpass_fft(x, fs, 20000.0)) - meter.integrated_loudness(x)
    m = measure(x, fs)
    assert expected < -0.05                          # the case is not trivial
    assert m["ultrasonic_loudness_change_lu"] == pytest.approx(expected, abs=0.05)


def test_loudness_change_is_zero_without_ultrasonic_content():
    fs = 96000
    rng = np.random.default_rng(7)
    x = band_noise(fs, 3.0, 30.0, 15000.0, 0.05, rng)
    assert measure(x, fs)["ultrasonic_loudness_change_lu"] == pytest.approx(0.0, abs=0.01)


def test_gated_loudness_matches_bs1770_arithmetic():
    # blocks at -20 LUFS and -40 LUFS (mean squares 10**((L + 0.691)/10)); -40 is more than 10 LU below
    # the ungated mean of the blocks above -70 LUFS, so only the -20 blocks count: -20.0 LUFS
    z = np.array([10 ** ((-20 + 0.691) / 10)] * 10 + [10 ** ((-40 + 0.691) / 10)] * 10 + [1e-12] * 5)
    assert gated_loudness(z) == pytest.approx(-20.0, abs=1e-9)
    assert gated_loudness(np.array([1e-12] * 5)) is None


def test_subsampled_analysis_still_finds_a_2s_burst_and_the_loudness_change():
    # frame_stride 6 is what files over 60 s get: 100 ms frames every 300 ms
    fs = 96000
    rng = np.random.default_rng(12)
    x = band_noise(fs, 12.0, 20.0, 18000.0, 0.05, rng)
    x[6 * fs:8 * fs] += band_noise(fs, 2.0, 25000.0, 40000.0, 0.02, rng)
    m, _s, _t = run_analyzers(Stream(x, fs), MeasureOptions(extra={"spectrum": {"frame_stride": 6}}),
                              classes=[SamplingSpectrumAnalyzer])
    full = measure(x, fs)
    assert m["ultrasonic_energy_db"] == pytest.approx(full["ultrasonic_energy_db"], abs=0.3)
    assert m["ultrasonic_energy_max_3s_db"] == pytest.approx(full["ultrasonic_energy_max_3s_db"], abs=0.5)
    (a, b), = m["ultrasonic_energy_max_3s_where_s"]
    assert a <= 6.3 and b >= 7.7
    meter = pyloudnorm.Meter(fs, filter_class="DeMan")
    expected = meter.integrated_loudness(_lowpass_fft(x, fs, 20000.0)) - meter.integrated_loudness(x)
    assert m["ultrasonic_loudness_change_lu"] == pytest.approx(expected, abs=0.1)
