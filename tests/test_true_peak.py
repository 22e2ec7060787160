"""True peak and sample peak: conformance cases, analytic results, a reference
library and over-ceiling time ranges.

Sources beside each check: EBU Tech 3341 (2023) Table 1 cases 15-23; ITU-R
BS.1770-5 Annex 2 (example filter, under-read formula); pyebur128 (libebur128)
as a test-only oracle; analytic results where stated.
Caution: these signals are synthesized at high level (up to +3 dBTP); do not
play them over monitors without turning the level down first.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf
from scipy import signal

from masterqc.audio.reader import open_stream
from masterqc.measure import oversample as ov
from masterqc.measure.engine import run_analyzers
from masterqc.measure.options import MeasureOptions
from masterqc.measure.peaks import SamplePeakAnalyzer, TruePeakAnalyzer

FS = 48000
PEAK_CLASSES = [SamplePeakAnalyzer, TruePeakAnalyzer]


def db(x):
    return 20 * np.log10(np.asarray(x, dtype=float))


def faded_sine(freq_div, amplitude, phase_deg, seconds=1.0, fade_s=0.010, fs=FS):
    """Tech 3341 style sine at fs/freq_div with 10 ms linear fades, stereo in phase."""
    n = np.arange(int(seconds * fs))
    x = amplitude * np.sin(2 * np.pi * n / freq_div + np.deg2rad(phase_deg))
    ramp = int(fade_s * fs)
    env = np.minimum(1.0, np.minimum(n, n[-1] - n) / ramp)
    x = x * env
    return np.stack([x, x], axis=1)


def measure_array(tmp_path, x, fs=FS, subtype="FLOAT", options=None, name="sig.wav"):
    path = tmp_path / name
    sf.write(path, x, fs, subtype=subtype)
    with open_stream(path) as stream:
        m, series, settings = run_analyzers(stream, options or MeasureOptions(), classes=PEAK_CLASSES)
    return m, series, settings


# --- EBU Tech 3341 Table 1, cases 15-19 (expected TP, tolerance +0.2/-0.4 dB) ------------------
TECH3341_SINES = [
    (15, 4, 0.50, 0.0, -6.0),
    (16, 4, 0.50, 45.0, -6.0),
    (17, 6, 0.50, 60.0, -6.0),
    (18, 8, 0.50, 67.5, -6.0),
    (19, 4, 1.41, 45.0, +3.0),
]


@pytest.mark.parametrize("design", ["kaiser", "annex2"])
@pytest.mark.parametrize("case,div,amp,phase,expected", TECH3341_SINES)
def test_tech3341_sine_cases(tmp_path, design, case, div, amp, phase, expected):
    x = faded_sine(div, amp, phase)
    m, _, _ = measure_array(tmp_path, x, options=MeasureOptions(true_peak_filter=design))
    for tp in m["true_peak_dbtp_per_channel"]:
        assert expected - 0.4 <= tp <= expected + 0.2, (case, design, tp)


def test_tech3341_sine_cases_kaiser_is_close_to_the_analytic_peak():
    # Analytic: the continuous peak is the amplitude; with our filter the reading at
    # fs/4..fs/8 must be within 0.02 dB of it (tighter than the Tech 3341 window).
    for case, div, amp, phase, _ in TECH3341_SINES:
        tp = db(ov.true_peak_linear(faded_sine(div, amp, phase)[:, 0], FS))[0]
        assert abs(tp - db(amp)) < 0.02, (case, tp)


def tech3341_case_20_23(offset):
    """fs/6 at 0.50 with one period of fs/4 at 1.00 inserted phase-continuously,
    made at 4*fs, low-passed below the 48 kHz Nyquist, decimated with ``offset``.

    Returns (decimated 48 kHz signal, the peak of the low-passed 192 kHz signal).
    """
    hi = 4 * FS
    seg_a = int(0.5 * hi)              # 0.5 s of fs/6 before, then one fs/4 period, then 0.5 s
    f_lo, f_hi = FS / 6, FS / 4
    n_burst = int(round(hi / f_hi))    # samples of one period of fs/4 at 4*fs (16)
    inst_f = np.concatenate([np.full(seg_a, f_lo), np.full(n_burst, f_hi), np.full(seg_a, f_lo)])
    amp = np.concatenate([np.full(seg_a, 0.5), np.full(n_burst, 1.0), np.full(seg_a, 0.5)])
    # start the burst on a zero crossing of the phase: cumulative phase, continuous
    start_phase = -2 * np.pi * f_lo * seg_a / hi
    phase = start_phase + np.concatenate([[0.0], np.cumsum(2 * np.pi * inst_f / hi)[:-1]])
    x = amp * np.sin(phase)
    n = np.arange(x.size)
    ramp = int(0.010 * hi)
    x *= np.minimum(1.0, np.minimum(n, n[-1] - n) / ramp)
    lp = signal.firwin(801, 20000, window=("kaiser", 9.0), fs=hi)
    y = np.convolve(x, lp, mode="same")
    return y[offset::4].copy(), float(np.abs(y).max())


@pytest.mark.parametrize("offset", [0, 1, 2, 3])
def test_tech3341_cases_20_to_23(tmp_path, offset):
    x, peak_hi = tech3341_case_20_23(offset)
    m, _, _ = measure_array(tmp_path, np.stack([x, x], axis=1))
    tp = m["true_peak_dbtp"]
    assert -0.4 <= tp <= 0.2, tp                       # Tech 3341 Table 1, cases 20-23
    # the 192 kHz low-passed signal is the reference the file was decimated from
    assert abs(tp - db(peak_hi)) < 0.15, (tp, db(peak_hi))


def test_sine_at_quarter_rate_sampled_at_45_degrees_reads_3_01_db_over_its_samples():
    # Analytic: samples of sin(pi*n/2 + pi/4) are +-sqrt(2)/2 of the amplitude, so the
    # true peak is 20*log10(sqrt(2)) = 3.0103 dB above the sample peak.
    x = faded_sine(4, 0.5, 45.0)[:, 0]
    tp = db(ov.true_peak_linear(x, FS))[0]
    sp = db(np.abs(x).max())
    assert abs((tp - sp) - 20 * math.log10(math.sqrt(2))) < 0.01


# --- under-read of the oversampling grid (BS.1770-5 Annex 2) ---------------------------------
ANALYTIC_TABLE = {4: (0.554, 0.688), 8: (0.136, 0.169), 16: (0.034, 0.042), 32: (0.008, 0.010)}


def test_analytic_underread_matches_the_printed_table():
    # standards-figures.md table, computed from 20*log10(cos(pi*f/(n*fs))) (Annex 2)
    for factor, (at45, at50) in ANALYTIC_TABLE.items():
        assert ov.analytic_underread_db(factor, 0.45) == pytest.approx(at45, abs=0.0015)
        assert ov.analytic_underread_db(factor, 0.5) == pytest.approx(at50, abs=0.0015)


def test_underread_computation_reproduces_the_analytic_grid_loss_for_a_near_ideal_filter():
    # A long, flat interpolator has no passband loss, so only the grid loss of
    # Annex 2 remains: the computed worst case must equal 20*log10(cos(pi*f/(n*fs))).
    flt = ov.kaiser_filter(4, 256, 8.0)
    for f in (0.1, 0.25, 0.4, 0.45):
        assert ov.underread_db(flt, [f])[0] == pytest.approx(ov.analytic_underread_db(4, f), abs=0.003)


@pytest.mark.parametrize("factor", [4, 8, 16])
def test_reported_underread_of_our_filters_is_the_analytic_figure(factor):
    # Our filter is flat to 0.45*fs within ~0.02 dB (phases within ~0.03 dB), so the
    # worst under-read up to 0.45*fs must exceed the analytic grid loss at 0.45*fs
    # (Annex 2) by no more than that passband loss, and never be below it by more
    # than the ripple.
    worst = ov.worst_underread_db(factor)
    analytic = ov.analytic_underread_db(factor, 0.45)
    assert analytic - 0.01 <= worst <= analytic + 0.04
    # and the measured under-read of a real signal never exceeds the reported figure:
    # a sine at 0.45*fs, many sub-sample positions
    n = np.arange(4000)
    for t0 in np.linspace(0, 1, 17)[:-1]:
        x = np.cos(2 * np.pi * 0.45 * (n - 2000 - t0)) * np.hanning(n.size) ** 0.05
        tp = db(ov.true_peak_linear(x, FS, factor))[0]
        assert -tp <= worst + 0.005


def test_annex2_example_filter_computed_properties():
    # BS.1770-5 Annex 2 example filter: ripple about +-0.1 dB to 20 kHz, -1.26 dB at
    # 21.6 kHz and -6.2 dB at 24 kHz for 48 kHz input (standards-figures.md, computed there)
    flt = ov.annex2_filter()
    f_pass = np.linspace(0.0, 20000 / FS, 200)
    assert np.abs(ov.magnitude_db(flt, f_pass)).max() == pytest.approx(0.1, abs=0.03)
    assert ov.magnitude_db(flt, [21600 / FS])[0] == pytest.approx(-1.26, abs=0.02)
    assert ov.magnitude_db(flt, [0.5])[0] == pytest.approx(-6.2, abs=0.05)
    # taps are as printed: phase 2 is phase 1 reversed, phase 3 is phase 0 reversed
    assert np.array_equal(flt.taps[:, 2], flt.taps[::-1, 1])
    assert np.array_equal(flt.taps[:, 3], flt.taps[::-1, 0])
    # the phases sit at i + 1/8, 3/8, 5/8, 7/8: a low tone is reproduced there in
    # phase; the printed phases' gains at 0 Hz differ (1.0016 and 0.9732, computed)
    g = ov.phase_responses(flt, [0.01])[0]
    assert np.abs(np.angle(g)).max() < 0.01
    assert np.abs(np.abs(g) - 1).max() < 0.03


def test_kaiser_filter_properties_as_documented():
    # Figures stated in masterqc/measure/oversample.py, computed from the taps.
    props = ov.filter_properties(ov.get_filter(4))
    assert props["passband_ripple_db_to_0_375fs"] < 0.011
    assert props["gain_db_at_0_45fs"] > -0.02
    assert props["gain_db_at_0_5fs"] == pytest.approx(-6.02, abs=0.01)   # Nyquist filter: half amplitude
    assert props["image_rejection_db_to_0_4fs"] < -58.0
    assert ov.image_rejection_db(ov.get_filter(4), [0.45])[0] < -54.0
    # phase 0 is the sample itself (zeros of the sinc fall on the integers)
    taps = ov.get_filter(4).taps
    unit = np.zeros(taps.shape[0])
    unit[ov.get_filter(4).lead] = 1.0
    assert np.array_equal(taps[:, 0], unit)


# --- reported true peak is never below the sample peak ---------------------------------------
@pytest.mark.parametrize("design", ["kaiser", "annex2"])
def test_true_peak_never_below_sample_peak(tmp_path, design):
    rng = np.random.default_rng(7)
    b, a = signal.butter(2, 0.05)
    for k in range(4):
        x = rng.standard_normal((9000, 2)) * 0.3
        if k % 2:
            x = signal.lfilter(b, a, x, axis=0) * 5     # smooth: peaks sit on samples
        x[rng.integers(0, 9000)] = [0.9, -0.95]          # isolated spikes
        m, _, _ = measure_array(tmp_path, np.clip(x, -1, 1),
                                options=MeasureOptions(true_peak_filter=design), name=f"n{k}.wav")
        for tp, sp in zip(m["true_peak_linear_per_channel"], m["sample_peak_linear_per_channel"]):
            assert tp >= sp


# --- agreement with a reference library ------------------------------------------------------
def test_agrees_with_pyebur128_within_tech3341_tolerance():
    pyebur128 = pytest.importorskip("pyebur128")
    rng = np.random.default_rng(11)
    n = FS * 2
    t = np.arange(n) / FS
    w = rng.standard_normal((n, 2))
    b19, a19 = signal.butter(8, 19000 / (FS / 2))
    b7, a7 = signal.butter(4, 7000 / (FS / 2))
    chirp = signal.chirp(t, 20, t[-1], 19000) * 0.7
    square = signal.lfilter(b19, a19, signal.square(2 * np.pi * 997 * t) * 0.5)
    sigs = {
        "noise to 19 kHz": 0.3 * signal.lfilter(b19, a19, w, axis=0),
        "noise to 7 kHz": 0.5 * signal.lfilter(b7, a7, w, axis=0),
        "sweep 20 Hz-19 kHz": np.stack([chirp, -0.5 * chirp], axis=1),
        "band-limited square": np.stack([square, square * 0.8], axis=1),
        "case 16": faded_sine(4, 0.5, 45.0, seconds=0.5),
    }
    # Content reaching the Nyquist frequency (white noise) is left out: libebur128's
    # 49-tap filter under-reads there by design.
    for name, x in sigs.items():
        state = pyebur128.R128State(2, FS, pyebur128.MeasurementMode.MODE_TRUE_PEAK)
        buf = np.ascontiguousarray(x, dtype=np.float64)
        state.add_frames(buf.ravel(), buf.shape[0])
        ref = db([pyebur128.get_true_peak(state, c) for c in range(2)])
        ours = db(ov.true_peak_linear(x, FS, 4))
        diff = ours - ref
        assert np.all(diff <= 0.2) and np.all(diff >= -0.4), (name, ours, ref)


# --- over-ceiling time ranges ----------------------------------------------------------------
def burst_signal():
    """-20 dBFS 1 kHz tone for 3 s; left channel bursts to -0.5 dBFS from 1.25 to
    1.50 s, right channel from 2.00 to 2.10 s (starting and ending on zero crossings)."""
    n = np.arange(3 * FS)
    tone = np.sin(2 * np.pi * 1000 * n / FS)
    left = 0.1 * tone
    right = 0.1 * tone
    hot = 10 ** (-0.5 / 20)
    left[int(1.25 * FS):int(1.50 * FS)] = hot * tone[int(1.25 * FS):int(1.50 * FS)]
    right[int(2.00 * FS):int(2.10 * FS)] = hot * tone[int(2.00 * FS):int(2.10 * FS)]
    return np.stack([left, right], axis=1), hot


def test_over_ranges_at_known_times(tmp_path):
    x, hot = burst_signal()
    m, _, _ = measure_array(tmp_path, x, options=MeasureOptions(true_peak_ceiling_dbtp=-1.0))
    ranges = m["true_peak_over_ranges_s"]
    assert len(ranges) == 2 and m["true_peak_over_range_count"] == 2
    # Analytic: |hot*sin| exceeds 10**(-1/20) where sin > 10**(-0.5/20) ... i.e. for
    # phase angles between asin(r) and 180 deg - asin(r), r = 10**(-0.5/20).
    r = 10 ** (-1 / 20) / hot
    a = math.asin(r) / (2 * math.pi)                     # fraction of a 1 kHz period
    first = 1.25 + a / 1000
    last = 1.50 - a / 1000                              # last negative half-cycle ends at 1.5 s
    tol = 1.5 / FS
    assert ranges[0][0] == pytest.approx(first, abs=tol)
    assert ranges[0][1] == pytest.approx(last, abs=tol)
    assert ranges[1][0] == pytest.approx(2.00 + a / 1000, abs=tol)
    assert ranges[1][1] == pytest.approx(2.10 - a / 1000, abs=tol)
    # over count: frames holding an over instant, from the analytic signal on the 4x grid
    inst = np.arange(3 * FS * 4) / (4 * FS)
    ana = np.abs(hot * np.sin(2 * np.pi * 1000 * inst))
    in_burst = ((inst >= 1.25) & (inst < 1.5)) | ((inst >= 2.0) & (inst < 2.1))
    frames = np.unique(np.floor(inst[(ana > 10 ** (-1 / 20)) & in_burst] * FS))
    assert m["true_peak_over_count"] == pytest.approx(frames.size, rel=0.01)
    # nothing over with a ceiling above the burst
    m2, _, _ = measure_array(tmp_path, x, options=MeasureOptions(true_peak_ceiling_dbtp=0.0), name="b.wav")
    assert m2["true_peak_over_ranges_s"] == [] and m2["true_peak_over_count"] == 0


def test_over_ranges_are_capped_but_all_counted(tmp_path):
    # 150 clicks 30 ms apart (further apart than the 10 ms merge gap)
    x = np.zeros((int(150 * 0.03 * FS) + FS, 1))
    pos = (np.arange(150) * 0.03 * FS).astype(int) + 100
    x[pos, 0] = 0.99
    m, _, _ = measure_array(tmp_path, x)
    assert m["true_peak_over_range_count"] == 150
    assert len(m["true_peak_over_ranges_s"]) == 100
    assert m["true_peak_over_ranges_s"][0][0] <= 100 / FS < m["true_peak_over_ranges_s"][0][1]


# --- sample peak, envelope, factor ------------------------------------------------------------
def test_sample_peak_exact_codes_and_silent_channel(tmp_path):
    x = np.zeros((4800, 3), dtype=np.int16)
    x[100, 0] = 16384            # 0.5 of full scale: -6.0206 dBFS (analytic)
    x[200, 1] = -32768           # negative full scale: 0.0 dBFS
    path = tmp_path / "codes.wav"
    sf.write(path, x, FS, subtype="PCM_16")
    with open_stream(path) as stream:
        m, _, _ = run_analyzers(stream, MeasureOptions(), classes=PEAK_CLASSES)
    per = m["sample_peak_dbfs_per_channel"]
    assert per[0] == pytest.approx(20 * math.log10(0.5), abs=1e-12)
    assert per[1] == 0.0
    assert per[2] is None and m["true_peak_dbtp_per_channel"][2] is None
    assert m["sample_peak_dbfs"] == 0.0


def test_all_zero_file_gives_null_levels(tmp_path):
    m, series, _ = measure_array(tmp_path, np.zeros((1000, 2)))
    assert m["sample_peak_dbfs"] is None and m["true_peak_dbtp"] is None
    assert all(v is None for v in series["true_peak_envelope_dbtp"])


def test_envelope_is_bounded_and_holds_the_peak(tmp_path):
    x, _ = burst_signal()
    m, series, _ = measure_array(tmp_path, x)
    env = series["true_peak_envelope_dbtp"]
    times = series["true_peak_envelope_time_s"]
    assert len(env) == len(times) <= 2000
    assert np.all(np.diff(times) > 0)
    assert max(env) == pytest.approx(m["true_peak_dbtp"], abs=1e-4)
    # quiet tone bucket reads about -20 dBTP, burst bucket about -0.5 dBTP
    i_quiet = int(np.searchsorted(times, 0.5))
    i_hot = int(np.searchsorted(times, 1.3))
    assert env[i_quiet] == pytest.approx(-20.0, abs=0.05)
    assert env[i_hot] == pytest.approx(-0.5, abs=0.05)


def test_factor_choice_follows_annex2_minimum():
    # BS.1770-5 Annex 2: 4x at <= 48 kHz, the oversampled rate reaching ~192 kHz above
    assert ov.choose_factor(44100, None) == 4
    assert ov.choose_factor(48000, 2) == 4          # never below the minimum
    assert ov.choose_factor(96000, None) == 2
    assert ov.choose_factor(96000, 2) == 2
    assert ov.choose_factor(96000, 4) == 4          # never below the request
    assert ov.choose_factor(192000, None) == 1
    assert ov.choose_factor(48000, 16) == 16
    with pytest.raises(ValueError, match="3 is not one of"):
        ov.choose_factor(48000, 3)


@pytest.mark.parametrize("factor", [8, 16])
def test_higher_factors_read_the_tech3341_cases(tmp_path, factor):
    for case, div, amp, phase, expected in TECH3341_SINES:
        x = faded_sine(div, amp, phase, seconds=0.3)
        tp = db(ov.true_peak_linear(x[:, 0], FS, factor))[0]
        assert expected - 0.4 <= tp <= expected + 0.2
        assert abs(tp - db(amp)) < 0.02
    m, _, settings = measure_array(tmp_path, faded_sine(6, 0.5, 60.0, seconds=0.3),
                                   options=MeasureOptions(true_peak_oversampling=factor))
    assert m["true_peak_oversampling_factor"] == factor
    assert settings["true_peak"]["oversampled_rate_hz"] == FS * factor
    assert m["true_peak_underread_max_db"] < ov.analytic_underread_db(4, 0.45)


def test_high_rate_file_uses_2x_when_asked(tmp_path):
    # 96 kHz: 2x reaches 192 kHz (Annex 2); 1/4-rate sine at 45 deg still reads its peak
    fs = 96000
    x = faded_sine(4, 0.5, 45.0, seconds=0.3, fs=fs)
    m, _, _ = measure_array(tmp_path, x, fs=fs, options=MeasureOptions(true_peak_oversampling=2))
    assert m["true_peak_oversampling_factor"] == 2
    assert m["true_peak_dbtp"] == pytest.approx(db(0.5), abs=0.05)


def test_meter_rejects_wrong_channel_count():
    meter = ov.TruePeakMeter(FS, 2, 4)
    with pytest.raises(ValueError, match="3 channels"):
        meter.process(np.zeros((10, 3)))


def test_column_abs_max_equals_the_plain_reduction():
    from masterqc.measure.peaks import column_abs_max
    rng = np.random.default_rng(3)
    for n in (1, 7, 255, 256, 257, 1000, 65536):
        for c in (1, 2, 6):
            b = rng.standard_normal((n, c))
            assert np.array_equal(column_abs_max(b), np.abs(b).max(axis=0)), (n, c)


@pytest.mark.parametrize("factor,design", [(4, "kaiser"), (8, "kaiser"), (16, "kaiser"), (4, "annex2")])
def test_float32_block_products_match_a_float64_direct_convolution(factor, design):
    # Independent float64 path: each phase as a plain convolution of the taps.
    # The meter's float32 products must agree within 0.001 dB at any level.
    flt = ov.get_filter(factor, design)
    rng = np.random.default_rng(factor)
    b, a = signal.butter(6, 0.85)
    base = signal.lfilter(b, a, rng.standard_normal(20000))
    for level_db in (0.0, -30.0, -60.0):
        x = base / np.abs(base).max() * 10 ** (level_db / 20)
        T = flt.taps_per_phase
        padded = np.concatenate([np.zeros(flt.lead), x, np.zeros(T - flt.lead - 1)])
        phases = [np.convolve(padded, flt.taps[::-1, p], mode="valid") for p in range(flt.factor)]
        ref = max(np.abs(np.stack(phases)).max(), np.abs(x).max())
        got = ov.true_peak_linear(x, FS, factor, design)[0]
        assert abs(db(got) - db(ref)) < 0.001, (level_db, db(got), db(ref))
