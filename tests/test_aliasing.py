"""Aliasing (folded content) detector.

Analytic reference: a sawtooth's harmonic k has amplitude proportional to 1/k (its
Fourier series, 2/(pi k)).  Sampling it naively at fs keeps every harmonic, and the
ones above Nyquist land at |k*f0 - m*fs|.  The alias-to-harmonic ratio measured over
the fold positions the detector tests is therefore

    sum over folds landing in a tested lobe of 1/k^2  /  sum over harmonics below Nyquist of 1/k^2

where folds of different orders that land in the same lobe are added in power (their
frequencies differ, so they do not add coherently over a frame).  Only fold positions below
0.45 fs are tested (house choice: a proper decimation filter's transition band may reach
the top 10 % of the band), so the prediction sums over those alone.

The tuning corpus (bench/corpus_tuning_aliasing.py, set "tuning", seeds 1000-1999) is
sampled by its quick slice below: polyphonic naive synthesis with envelopes and vibrato,
unfiltered decimation, and their band-limited / properly filtered twins, native mixes and
speech.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "bench"))

import corpus_tuning_aliasing as tuning  # noqa: E402
from corpus_sampling import (additive_wave, analyse, drop_decimate, good_resample, naive_saw_sweep, naive_wave,
                             sine_sweep, white)
from masterqc.measure import aliasing as al
from masterqc.measure.aliasing import AliasingAnalyzer
from masterqc.measure.options import MeasureOptions


def _run(x, fs, options=None):
    return analyse(np.asarray(x).reshape(len(x), -1), fs, [AliasingAnalyzer], 24, options)


def predicted_naive_saw_score_db(f0: float, fs: float) -> float:
    """Alias-to-harmonic ratio of a naive sawtooth from its Fourier series (module docstring)."""
    harmonics, folds, _orders = al.fold_plan(f0, fs, al.TONAL_BIN_HZ, max_fold_hz=al.POLY_TOP_FRACTION * fs)
    k = np.arange(1, int(200 * fs / f0))
    pos = al.fold_frequency(k * f0, fs)
    power = 1.0 / k ** 2
    lobe = (al.LOBE_BINS + 0.5) * al.TONAL_BIN_HZ
    near_fold = np.min(np.abs(pos[:, None] - folds[None, :]), axis=1) <= lobe
    near_harm = np.min(np.abs(pos[:, None] - harmonics[None, :]), axis=1) <= lobe
    return 10 * math.log10(power[near_fold].sum() / power[near_harm].sum())


@pytest.mark.parametrize("fs", [44100, 48000, 96000])
@pytest.mark.parametrize("f0", [435.2, 1204.9])
def test_naive_sawtooth_score_follows_fourier_series(fs, f0):
    m = _run(naive_wave("saw", f0, fs), fs)
    assert m["aliasing_detected"] is True
    assert m["aliasing_assessable"] is True
    assert m["alias_to_harmonic_ratio_db"] == pytest.approx(predicted_naive_saw_score_db(f0, fs), abs=0.5)


def test_fourier_prediction_is_about_one_over_highest_harmonic():
    """Sanity of the analytic formula itself: the first fold zone alone carries
    sum_{K..2K} 1/k^2 ~ 1/(2K) against pi^2/6, i.e. about -10*log10(3.3 K) dB."""
    f0, fs = 1204.9, 48000
    kh = int((fs / 2) // f0)
    rough = -10 * math.log10(math.pi ** 2 / 6 * 2 * kh)
    assert predicted_naive_saw_score_db(f0, fs) == pytest.approx(rough, abs=3.0)


@pytest.mark.parametrize("kind", ["saw", "square"])
def test_band_limited_synthesis_is_clean(kind):
    m = _run(additive_wave(kind, 435.2, 48000), 48000)
    assert m["aliasing_detected"] is False
    assert m["aliasing_assessable"] is True
    assert m["alias_to_harmonic_ratio_db"] is None or m["alias_to_harmonic_ratio_db"] < al.ALIAS_SCORE_MIN_DB


def test_fs_whole_multiple_of_f0_is_not_assessable():
    m = _run(naive_wave("saw", 1000.0, 48000), 48000)
    assert m["aliasing_detected"] is None
    assert m["aliasing_assessable"] is False
    assert "whole multiple" in m["aliasing_detail"]["reason"]


def test_noise_is_never_flagged(rng):
    """White noise decimated by dropping samples is folded, but carries no evidence of it."""
    x = drop_decimate(white(96000, 1.0, rng, 0.1), 2)
    m = _run(x, 48000)
    assert m["aliasing_detected"] is None
    assert m["aliasing_assessable"] is False
    assert "noise-like" in m["aliasing_detail"]["reason"]


def test_sample_dropping_folds_the_upper_harmonics():
    """A band-limited sawtooth at 96 kHz decimated by 2 without a filter: harmonics between
    24 and 48 kHz reappear at 48 kHz - k*f0; with a proper filter they do not."""
    f0 = 529.3
    x = additive_wave("saw", f0, 96000, 1.05)
    dropped = _run(drop_decimate(x, 2)[:48000], 48000)
    filtered = _run(good_resample(x, 96000, 48000)[:48000], 48000)
    assert dropped["aliasing_detected"] is True
    assert filtered["aliasing_detected"] is False
    assert dropped["alias_to_harmonic_ratio_db"] > -30.0
    assert filtered["alias_to_harmonic_ratio_db"] is None or filtered["alias_to_harmonic_ratio_db"] < -100.0
    assert dropped["aliasing_detail"]["median_f0_hz"] == pytest.approx(f0, abs=0.05)


@pytest.mark.parametrize("fs", [44100, 48000, 96000])
def test_sweep_generated_past_nyquist_reflects(fs):
    """A linear sweep 500 Hz -> 0.8 fs over 1.5 s meets Nyquist at t = (fs/2 - 500)/k."""
    m = _run(sine_sweep(fs, 500.0, 0.8 * fs), fs)
    d = m["aliasing_detail"]
    assert m["aliasing_detected"] is True
    assert d["folded_partials"] >= 1
    rate = (0.8 * fs - 500.0) / 1.5
    t_cross = (fs / 2 - 500.0) / rate
    # the frequency tolerances (100 Hz rising, 150 Hz folded) are a house choice: ten to fifteen
    # 10 Hz bins for a partial that moves (0.8 fs - 500) / 1.5 Hz per second within a frame
    for ex in d["fold_examples"]:
        assert ex["at_s"] <= t_cross + 0.01 and ex["folded_at_s"] >= t_cross - 0.01
        # the rising partial is the sweep itself, and its continuation is mirrored at Nyquist
        assert ex["rising_hz"] == pytest.approx(500.0 + rate * ex["at_s"], abs=100.0)
        assert ex["folded_hz"] == pytest.approx(fs - (500.0 + rate * ex["folded_at_s"]), abs=150.0)
    lo, hi = d["where_s"][0]
    assert lo <= t_cross <= hi


@pytest.mark.parametrize("fs", [44100, 96000])
def test_band_limited_sweep_is_clean(fs):
    m = _run(sine_sweep(fs, 500.0, 0.45 * fs), fs)
    assert m["aliasing_detected"] is not True
    assert m["aliasing_detail"]["folded_partials"] == 0


def test_naive_sawtooth_sweep_partials_fall_while_the_fundamental_rises():
    """A naive sawtooth sweep: its upper partials reflect at Nyquist, but within the top 10 % of
    the band only (where a decimation filter's transition band may also reflect them), so the
    finding rests on its sample-sharp jumps, one per period."""
    m = _run(naive_saw_sweep(48000, 300.0, 1500.0), 48000)
    assert m["aliasing_detected"] is True
    assert m["aliasing_detail"]["sharp_steps"] >= al.MIN_SHARP_STEPS


def test_fold_frequency():
    # analytic: f folds to |f - m*fs| for the nearest multiple m of fs, e.g. 30 kHz at 48 kHz ->
    # 48 - 30 = 18 kHz, 71 kHz -> 71 - 48 = 23 kHz, 50 kHz -> 50 - 48 = 2 kHz
    assert al.fold_frequency(30000.0, 48000.0) == pytest.approx(18000.0)
    assert al.fold_frequency(50000.0, 48000.0) == pytest.approx(2000.0)
    assert al.fold_frequency(71000.0, 48000.0) == pytest.approx(23000.0)
    assert al.fold_frequency(-1000.0, 48000.0) == pytest.approx(1000.0)


def test_fold_plan_excludes_folds_on_harmonics():
    h, folds, orders = al.fold_plan(1000.0, 48000.0, al.TONAL_BIN_HZ)
    assert h.size == 23 and folds.size == 0
    h, folds, orders = al.fold_plan(1204.9, 48000.0, al.TONAL_BIN_HZ)
    assert np.allclose(folds, al.fold_frequency(orders * 1204.9, 48000.0))
    assert np.all(orders * 1204.9 > 24000.0)


def test_block_size_does_not_change_the_result():
    x = naive_wave("square", 286.9, 48000)
    a = _run(x, 48000, MeasureOptions(block_frames=777))
    b = _run(x, 48000, MeasureOptions(block_frames=65536))
    assert a == b


def test_keys_are_declared():
    m = _run(naive_wave("saw", 435.2, 48000), 48000)
    assert set(m) == set(AliasingAnalyzer.measurement_schema)


def _judge_score(m, max_db=-40.0):
    from masterqc.judge import judge
    from masterqc.spec import build_spec
    sp = build_spec({"spec_version": 1, "name": "invented sampling spec",
                     "sampling": {"alias_to_harmonic_ratio": {"max_db": max_db}}})
    found, _verdict = judge(sp, {"format": {"sample_rate_hz": 48000}, "measurements": m})
    return next(f for f in found if f.check == "sampling.alias_to_harmonic_ratio")


@pytest.mark.parametrize("fs", [44100, 48000, 96000])
@pytest.mark.parametrize("f0", [139.4, 435.2])
def test_clean_band_limited_material_has_no_score_and_passes_a_minus_40_db_limit(f0, fs):
    """Band-limited (additive) sawtooth: no partial above Nyquist, so no alias line.  The score
    is null (not the floor's power at the fold positions read as a ratio), the detail states
    the floor-limited bound, and a -40 dB ceiling on the score is met."""
    m = _run(additive_wave("saw", f0, fs), fs)
    assert m["aliasing_detected"] is False and m["aliasing_assessable"] is True
    assert m["alias_to_harmonic_ratio_db"] is None
    d = m["aliasing_detail"]
    assert d["alias_lines_found"] == 0 or d["frames_with_alias_lines"] == 0
    assert isinstance(d["score_upper_bound_db"], float)
    assert "no alias lines found above the floor" in d["reason"]
    f = _judge_score(m)
    assert f.status == "pass" and "no alias lines found above the floor" in f.message


def test_clean_music_has_no_score_and_passes(rng):
    """The demo's music (chords, bass, drums, noise bed; partials below 0.45 fs) at 48 kHz:
    other notes' partials and the noise bed at the fold positions are no aliases."""
    from masterqc import demo
    x = demo.music(4.0, 48000, rng)
    x = 0.5 * x / np.max(np.abs(x))
    m = _run(x[:, 0], 48000)
    assert m["aliasing_detected"] is not True
    assert m["alias_to_harmonic_ratio_db"] is None
    f = _judge_score(m)
    assert f.status in ("pass", "skipped")
    if m["aliasing_assessable"]:
        assert f.status == "pass"


def test_naive_sawtooth_keeps_its_analytic_score_and_fails_a_minus_40_db_limit():
    """Fourier series (module docstring): the naive sawtooth's ratio is far above -40 dB."""
    f0, fs = 435.2, 48000
    m = _run(naive_wave("saw", f0, fs), fs)
    expected = predicted_naive_saw_score_db(f0, fs)
    assert m["alias_to_harmonic_ratio_db"] == pytest.approx(expected, abs=0.5)
    assert m["aliasing_detail"]["score_upper_bound_db"] is None
    f = _judge_score(m)
    assert f.status == "fail" and f.miss == pytest.approx(expected + 40.0, abs=0.51)


def test_score_bound_is_an_upper_bound_for_a_naive_sawtooth_under_noise():
    """A naive sawtooth under white noise loud enough (RMS 0.15) to bury its alias lines: no
    line is found, the score is null, and the stated floor-limited bound is indeed at least
    the true (analytic, Fourier-series) ratio.  (At RMS 0.1 the rank test still sees the folds
    over all note instances.)  With the noise at RMS 0.02 the lines are found and scored at the
    analytic ratio."""
    f0, fs = 435.2, 48000
    expected = predicted_naive_saw_score_db(f0, fs)
    x = naive_wave("saw", f0, fs, amplitude=0.5) + white(fs, 1.0, np.random.default_rng(7), 0.15)
    m = _run(x, fs)
    assert m["aliasing_detected"] is False
    assert m["aliasing_assessable"] is True and m["alias_to_harmonic_ratio_db"] is None
    assert m["aliasing_detail"]["score_upper_bound_db"] >= expected
    x = naive_wave("saw", f0, fs, amplitude=0.5) + white(fs, 1.0, np.random.default_rng(7), 0.02)
    m = _run(x, fs)
    assert m["aliasing_detected"] is True
    assert m["alias_to_harmonic_ratio_db"] == pytest.approx(expected, abs=1.0)


# ---------------------------------------------------------------- analytic fold lines
@pytest.mark.parametrize("fs,f0", [(48000, 1204.9), (44100, 1503.7)])
def test_naive_sawtooth_fold_lines_sit_where_and_as_loud_as_the_fourier_series_says(fs, f0):
    """A naive sawtooth's partial k has amplitude 2/(pi k) (its Fourier series, all k), and
    sampling puts partial k > fs/(2 f0) at |k*f0 - fs| (first fold zone).  So the line at that
    place stands 20*log10(k) dB below the fundamental, and the first folded partial
    (k = K+1, K the highest harmonic below Nyquist) 20*log10((K+1)/K) dB below harmonic K.
    Checked on a 1 s Blackman-Harris spectrum (5 Hz bins: the folds of higher zones that land
    near these lines are 30 dB or more weaker for these f0, from the same 1/k law)."""
    x = naive_wave("saw", f0, fs, seconds=1.0, amplitude=0.5)
    n = x.size
    spec = np.abs(np.fft.rfft(x * al.blackman_harris(n)))
    bin_hz = fs / n

    def level_db(f):
        k = int(round(f / bin_hz))
        return 20 * math.log10(spec[k - 2:k + 3].max())

    ref = level_db(f0)
    kh = int((fs / 2) // f0)
    for k in range(kh + 1, kh + 6):
        pos = float(al.fold_frequency(k * f0, fs))
        assert pos == pytest.approx(fs - k * f0)
        # scalloping of the Blackman-Harris window (at most 0.83 dB, from memory) bounds the error
        assert level_db(pos) - ref == pytest.approx(-20 * math.log10(k), abs=0.9), k


@pytest.mark.parametrize("notes,depth", [
    (((523.3, 5.1, 0.3), (659.3, 5.7, 1.9), (784.0, 4.8, 4.0)), 0.0),
    # once a known false alarm on the band-limited twin (E5 a major third above C5: C5's fold comb
    # sits 0.27 f0 off its harmonic grid, where E5's vibrato-smeared upper harmonics leak); the
    # steady-tone lines are no longer confirmed by a few more evident instances than chance
    (((523.3, 5.1, 0.3), (659.3, 5.7, 1.9)), 0.004),
    (((1046.5, 5.1, 0.3), (1318.5, 5.7, 1.9)), 0.004),
])
def test_polyphonic_fold_test_finds_a_naive_chord_and_not_its_additive_twin(notes, depth):
    """Overlapping naive sawtooth notes at 48 kHz, steady or with a slight vibrato (depth as a
    fraction of f0): folds at |k*f0 - m*fs| for every note.  The band-limited twin (same notes,
    partials below Nyquist) has none.  House choice of notes and vibrato.  Known limits: with
    a 0.4 % vibrato on three notes the smearing of high fold orders within a 50 ms frame leaves
    too few clear note instances (found in about a third of them); an octave lower (C4-E4-G4)
    the fold combs sit too close to the harmonic grid for 20 Hz bins to place control combs,
    and the chord is reported not assessable."""
    fs, seconds = 48000, 4.0
    t = np.arange(int(fs * seconds)) / fs
    naive = np.zeros(t.size)
    twin = np.zeros(t.size)
    for f0, rate, phase in notes:
        f_inst = f0 * (1 + depth * np.sin(2 * math.pi * rate * t + phase))
        naive += tuning.naive_note("saw", f_inst, fs, 0.1, 0.5, 1.0)
        twin += tuning.additive_note("saw", f_inst, fs, 0.1, 0.5, 1.0, 0.95 * fs / 2)
    a = _run(0.25 * naive, fs)
    b = _run(0.25 * twin, fs)
    assert a["aliasing_detected"] is True and a["aliasing_assessable"] is True
    assert a["aliasing_detail"]["polyphonic_instances_with_folds"] >= al.MIN_EVIDENT_INSTANCES
    assert b["aliasing_detected"] is False and b["aliasing_assessable"] is True
    assert 0.0 < a["aliasing_assessable_fraction"] <= 1.0


def test_assessable_fraction_is_zero_on_noise_and_reported_on_tones(rng):
    m = _run(white(48000, 2.0, rng, 0.1), 48000)
    assert m["aliasing_assessable_fraction"] == 0.0
    m = _run(naive_wave("saw", 1204.9, 48000, seconds=2.0), 48000)
    assert m["aliasing_assessable_fraction"] > 0.5


# ---------------------------------------------------------------- tuning corpus slice
@pytest.fixture(scope="module")
def tuning_slice():
    out = []
    for case in tuning.cases(1000, quick=True):
        m = _run(case.audio[:, 0], case.rate_hz)
        out.append((case, m))
    return out


POSITIVE = ("naive-synth", "decimation")
#: share of the quick slice's positives found today (house floor; the issue's target is 0.9; the
#: slice reaches 13 of 15: sample dropping one in 12 and one 2:1 decimation are missed)
FOUND_FLOOR = 0.9
NEGATIVE_STRICT = ("band-limited-synth", "native", "speech")


def test_tuning_slice_has_no_false_alarm(tuning_slice):
    """Target (issue): 0 false alarms on band-limited synthesis, native material and speech;
    properly filtered decimation and noise beds are held to the same."""
    alarms = [c.name for c, m in tuning_slice if c.expect["aliasing_detected"] is False
              and m["aliasing_detected"] is True]
    assert alarms == []
    assert any(c.group in NEGATIVE_STRICT for c, _m in tuning_slice)


def test_tuning_slice_noise_is_not_assessable(tuning_slice):
    for c, m in tuning_slice:
        if c.group == "noise-like":
            assert m["aliasing_detected"] is None and m["aliasing_assessable_fraction"] == 0.0, c.name


def test_tuning_slice_finds_folded_content(tuning_slice):
    """Target (issue): found >= 90 % on naive synthesis and unfiltered decimation.  The
    detector finds every naive voice on this slice (sample-sharp jumps) and the sample dropping (the
    irregular-grid test) but not every decimation (14 of 15 in all); this test holds the target."""
    pos = [(c, m) for c, m in tuning_slice if c.group in POSITIVE]
    found = [c.name for c, m in pos if m["aliasing_detected"] is True]
    assert len(found) >= FOUND_FLOOR * len(pos), (found, [c.name for c, _m in pos])
    # and nothing it misses is called clean for want of assessable material: every positive
    # is assessable (None would mean "noise-like")
    assert all(m["aliasing_detected"] is not None for _c, m in pos)


def test_aliasing_finding_reads_as_plain_sentences_with_advice():
    """The finding says where (m:ss), what (harmonics above the file's Nyquist frequency fold
    back) and what to do (anti-aliasing on, a higher internal rate, or a proper resampler).
    House wording."""
    from masterqc.judge import judge
    from masterqc.spec import build_spec
    m = _run(naive_wave("saw", 1204.9, 48000, seconds=2.0), 48000)
    sp = build_spec({"spec_version": 1, "name": "invented sampling spec", "sampling": {"aliasing": [False]}})
    found, _verdict = judge(sp, {"format": {"sample_rate_hz": 48000}, "measurements": m})
    f = next(f for f in found if f.check == "sampling.aliasing")
    assert f.status == "fail"
    assert f.message.startswith("Aliasing: folded (aliased) content found from 0:0")
    assert "; the spec does not allow this. " in f.message
    assert "above 24 kHz" in f.message and "1204.9 Hz" in f.message
    assert "anti-aliasing on" in f.message and "higher internal rate" in f.message
    assert f.message.endswith("or redo the conversion from the original with a proper resampler.")


# ---------------------------------------------------------------- sample-sharp steps
def test_fold_of_harmonic_k_is_exactly_k_f0_minus_the_nearest_multiple_of_fs():
    """Analytic: sampling at fs maps k*f0 to |k*f0 - m*fs| with m the nearest whole number."""
    f0, fs = 1234.5, 44100
    assert float(al.fold_frequency(20 * f0, fs)) == pytest.approx(fs - 20 * f0)        # 19410 Hz
    assert float(al.fold_frequency(37 * f0, fs)) == pytest.approx(37 * f0 - fs)        # 1576.5 Hz
    assert float(al.fold_frequency(71 * f0, fs)) == pytest.approx(abs(71 * f0 - 2 * fs))  # 1849.5 Hz


def _band_limited_step(n_samples: int, at: float) -> np.ndarray:
    """An ideal low-pass (cut-off at Nyquist) unit step at fractional sample position ``at``, sampled:
    1/2 + Si(pi*(n - at))/pi (the sine integral from scipy, the step's exact response)."""
    from scipy.special import sici
    n = np.arange(n_samples) - at
    return 0.5 + sici(math.pi * n)[0] / math.pi


def test_a_naive_jump_is_sample_sharp_and_a_band_limited_one_is_not():
    """Analytic: a naive ramp-and-jump (sawtooth samples) fits a smooth curve plus a step between two
    samples exactly, so its residual is at rounding level.  The sampled ideal band-limited step
    1/2 + Si(pi*(n - a))/pi rings around the jump (Gibbs: about 9 % overshoot near it) wherever the
    jump falls between samples, so its residual stays well above STEP_MAX_RESIDUAL: the least, about
    0.0187 of the jump with the cubic smooth curve (STEP_POLY_DEGREE), for a jump halfway between two
    samples, where the step is odd-symmetric about the gap and the cubic's odd terms take up the most of
    the ringing (computed from the formula above; 0.0215 with a quadratic)."""
    n = 200
    ramp = 0.004 * np.arange(n)
    naive = ramp - 0.8 * (np.arange(n) >= 100)
    idx, jump, resid = al.sharp_steps(naive)
    j = int(np.argmax(np.abs(jump)))
    assert idx[j] == 99 and jump[j] == pytest.approx(-0.8, abs=1e-9)
    assert resid[j] < 1e-9
    least = []
    for at in np.linspace(0.0, 0.95, 20):
        x = ramp + 0.8 * _band_limited_step(n, 100 + at)
        idx, jump, resid = al.sharp_steps(x)
        big = np.abs(jump) > 0.4
        assert big.any() and np.all(resid[big] > 1.8 * al.STEP_MAX_RESIDUAL), (at, resid[big])
        least.append(float(resid[big].min()))
    assert min(least) == pytest.approx(0.0187, abs=0.0005)
    assert int(np.argmin(least)) == 10    # at = 0.5: halfway between two samples


def test_step_alias_ratio_matches_the_sawtooth_fourier_series():
    """Analytic: a naive sawtooth of peak A has harmonics 2A/(pi k); the power of those above Nyquist,
    sum_{k > K} 2A^2/(pi^2 k^2), is about 4 A^2 f0 / (pi^2 fs) for K = fs/(2 f0) large, and its
    total power is A^2/3.  The jump train (J = 2A, f0 jumps per second) gives the same:
    sum(J^2)/(pi^2 N) over A^2/3."""
    fs, f0, seconds = 48000, 437.3, 3.0
    x = naive_wave("saw", f0, fs, seconds=seconds)
    fr = al.sharp_step_frame(x.reshape(-1, 1))
    est = al.step_alias_ratio_db(fr["sharp_jump_sq"], float(x.size), fr["power"])
    kh = int(fs / 2 // f0)
    k = np.arange(kh + 1, 200000)
    exact = 10 * math.log10(np.sum(1.0 / k ** 2) / (math.pi ** 2 / 6))
    assert fr["sharp"] == pytest.approx(seconds * f0, abs=3)
    assert est == pytest.approx(exact, abs=0.3)


def test_jumps_on_a_fixed_grid_are_no_evidence():
    """A held upsampling from 8 kHz to 192 kHz jumps only on the 8 kHz grid (every 24 samples);
    a sawtooth of exactly fs/48 repeats every 48 samples, so its folds land on its harmonics.  A
    sawtooth with a vibrato jumps off any grid."""
    rng = np.random.default_rng(3)
    fs = 192000
    held = np.repeat(rng.uniform(-0.5, 0.5, 8000), 24)
    fr = al.sharp_step_frame(held.reshape(-1, 1))
    assert fr["sharp"] > 1000
    assert al.step_grid(fr["positions"], fs) == ("hold", 8000)
    saw = naive_wave("saw", 1000.0, 48000, seconds=1.0)
    fr = al.sharp_step_frame(saw.reshape(-1, 1))
    assert al.step_grid(fr["positions"], 48000) == ("period", 48)
    t = np.arange(48000) / 48000
    wob = tuning.naive_note("saw", 1000.0 * (1 + 0.005 * np.sin(2 * math.pi * 5 * t)), 48000, 0.0, 0.5, 1.0)
    fr = al.sharp_step_frame(wob.reshape(-1, 1))
    assert fr["sharp"] > 900 and al.step_grid(fr["positions"], 48000) is None


def test_rank_statistic_is_standard_normal_when_controls_and_fold_are_alike():
    """Analytic: the rank j/c of one value among c exchangeable others is uniform on 0..c, mean 1/2,
    variance (c + 2)/(12 c); the z of the rank sum over n instances is then about N(0, 1)."""
    rng = np.random.default_rng(11)
    zs = []
    for _ in range(2000):
        c = rng.integers(3, 17, size=30)
        ranks = rng.integers(0, c + 1) / c
        _hit, z = al.rank_evidence(float(ranks.sum()), float(np.sum((c + 2.0) / (12.0 * c))), 30)
        zs.append(z)
    assert np.mean(zs) == pytest.approx(0.0, abs=0.08)
    assert np.std(zs) == pytest.approx(1.0, abs=0.08)
    assert al.rank_evidence(30.0, 30 * 0.1, 30)[0] is True
    assert al.rank_evidence(15.0, 30 * 0.1, 30)[0] is False


@pytest.mark.parametrize("kind", ["saw", "square", "pulse", "hardsync"])
def test_naive_chord_with_deep_vibrato_is_found_and_its_oversampled_twin_is_not(kind):
    """Three naive voices with a 1 % vibrato at 44.1 kHz: jumps between samples, found.  The same
    voices made at 16 times the rate and brought down by scipy's resample_poly (a proper
    decimation filter): no sample-sharp jumps, not found.  House choice of notes."""
    fs, over, seconds = 44100, 16, 3.0
    naive = np.zeros(int(fs * seconds))
    twin = np.zeros(int(fs * seconds * over))
    for f0, rate, phase in ((146.8, 5.1, 0.3), (220.0, 5.7, 1.9), (329.6, 4.8, 4.0)):
        for sig, rate_hz in ((naive, fs), (twin, fs * over)):
            t = np.arange(sig.size) / rate_hz
            sig += tuning.naive_note(kind, f0 * (1 + 0.01 * np.sin(2 * math.pi * rate * t + phase)), rate_hz,
                                     0.1, 0.3, 2.3)
    from scipy.signal import resample_poly
    twin = resample_poly(twin, 1, over)
    a = _run(0.1 * naive, fs)
    b = _run(0.1 * twin, fs)
    assert a["aliasing_detected"] is True and a["aliasing_detail"]["sharp_steps"] >= al.MIN_SHARP_STEPS
    assert a["aliasing_assessable_fraction"] > 0.9
    assert b["aliasing_detected"] is not True and b["aliasing_detail"]["sharp_steps"] == 0


# ---------------------------------------------------------------- irregular sample grid (sample dropping)
def _phase_at(x: np.ndarray, f_hz: float, fs: float, n0: int) -> float:
    """Phase (radians) of a pure tone at ``f_hz`` in ``x``, referred to sample index ``n0`` of a
    regular grid: least-squares fit of ``a*cos + b*sin`` at the known frequency (exact for a noiseless
    tone up to rounding)."""
    n = np.arange(x.size) + n0
    w = 2 * math.pi * f_hz / fs
    a = np.stack([np.cos(w * n), np.sin(w * n)], axis=1)
    c, s = np.linalg.lstsq(a, x, rcond=None)[0]
    return math.atan2(-s, c)   # x = cos(w n + phi) = cos(phi) cos(w n) - sin(phi) sin(w n)


@pytest.mark.parametrize("fs", [44100, 48000])
@pytest.mark.parametrize("f_hz", [440.0, 3150.7, 9876.5])
def test_a_dropped_sample_advances_a_tones_phase_by_two_pi_f_over_fs(fs, f_hz):
    """Analytic: x[n] = cos(2*pi*f*n/fs + phi).  Deleting sample d gives y[n] = x[n] for n < d and
    y[n] = x[n + 1] = cos(2*pi*f*n/fs + phi + 2*pi*f/fs) from d on: the phase steps by exactly
    2*pi*f/fs at the drop, proportional to f, the same instant for every partial."""
    d, n = 3000, 6000
    x = np.cos(2 * math.pi * f_hz * np.arange(n) / fs + 0.7)
    y = np.delete(x, d)
    before = _phase_at(y[:d], f_hz, fs, 0)
    after = _phase_at(y[d:], f_hz, fs, d)
    step = float(np.mod(after - before, 2 * math.pi))
    assert step == pytest.approx(al.dropped_sample_phase_step(f_hz, fs), abs=1e-9)
    assert step == pytest.approx(2 * math.pi * f_hz / fs, abs=1e-9)


def _tone_mix(fs_in: int, seconds: float, rng) -> np.ndarray:
    """Three voices of harmonic notes (partials up to 0.45 of fs_in, 1/k amplitudes), a new pitch every
    second, each with a slight vibrato (0.4 % at 5 Hz), and a noise bed 40 dB down."""
    n = int(seconds * fs_in)
    t = np.arange(n) / fs_in
    x = np.zeros(n)
    for voice in range(3):
        f0 = np.repeat(rng.choice([196.0, 220.0, 246.9, 261.6, 293.7, 311.1, 349.2, 392.0, 440.0, 523.3],
                                  int(seconds) + 1), fs_in)[:n]
        f0 = f0 * (1 + 0.004 * np.sin(2 * math.pi * 5.0 * t + voice))
        theta = 2 * math.pi * np.cumsum(f0) / fs_in
        for k in range(1, int(0.45 * fs_in / 530.0)):
            x += np.sin(k * theta + rng.uniform(0, 2 * math.pi)) / k
    x /= np.sqrt(np.mean(x ** 2))
    return 0.1 * (x + 10 ** (-40 / 20) * rng.standard_normal(n))


@pytest.mark.parametrize("k", [12, 25])
def test_deleting_every_kth_sample_is_an_irregular_grid_with_interval_k_minus_1(k, rng):
    """Deleting one sample in every k leaves the drops k-1 output samples apart, locked to the sample
    index over the whole file: the grid test finds a coherent line at interval k-1 (analytic), and the
    same material through a proper resampler (scipy resample_poly, the band-limited twin) is not
    flagged."""
    fs = 48000
    fs_in = int(round(fs * k / (k - 1)))
    x = _tone_mix(fs_in, 6.0, rng)
    keep = np.ones(x.size, dtype=bool)
    keep[k - 1::k] = False
    m = _run(x[keep], fs)
    det = m["aliasing_detail"]
    assert m["aliasing_detected"] is True
    assert det["grid_line_coherence"] >= al.GRID_MIN_COHERENCE
    # the error magnitude repeats every k - 1 samples, so its lines sit at every multiple j/(k - 1) (analytic);
    # the test reports the lowest coherent one it kept, the drop interval itself or a whole fraction of it
    interval = det["grid_drop_interval_samples"]
    assert any(interval * j == pytest.approx(k - 1, rel=1e-3) for j in (1, 2, 3, 4)), interval
    from scipy.signal import resample_poly
    g = math.gcd(fs_in, fs)
    twin = _run(resample_poly(x, fs // g, fs_in // g), fs)
    assert twin["aliasing_detail"]["grid_line_coherence"] < al.GRID_MIN_COHERENCE
    assert twin["aliasing_detected"] is not True


def test_grid_coherence_is_low_for_lines_that_do_not_keep_their_phase(rng):
    """A line at the same frequency in every frame but with an unrelated phase per frame (a note
    restruck, not the sample clock) gives a short mean phasor; the same line with its phase locked to
    the absolute sample index gives one of length 1 (analytic: |mean of unit phasors|)."""
    n, frames = 1024, 12
    starts = np.floor((np.arange(frames) + rng.random(frames)) * 200000 / frames).astype(np.int64)
    alpha = 37.3 / n
    rows_locked, rows_free = [], []
    for s in starts:
        t = np.arange(n) + s
        locked = np.cos(2 * math.pi * alpha * t) + 0.01 * rng.standard_normal(n)
        free = np.cos(2 * math.pi * alpha * np.arange(n) + rng.uniform(0, 2 * math.pi)) + 0.01 * rng.standard_normal(n)
        rows_locked.append(np.fft.rfft(locked * np.hanning(n), al.GRID_PAD * n))
        rows_free.append(np.fft.rfft(free * np.hanning(n), al.GRID_PAD * n))
    c_locked, a_locked, _l = al.grid_coherence(np.stack(rows_locked), starts, n)
    c_free, _a, _l2 = al.grid_coherence(np.stack(rows_free), starts, n)
    assert c_locked > 0.99
    assert a_locked == pytest.approx(alpha, abs=0.5 / (al.GRID_PAD * n))
    assert c_free < 0.8


# ---------------------------------------------------------------- the drop pattern's period (dense dropping)
@pytest.mark.parametrize("fs_in, fs_out, period", [(48000, 44100, 147), (96000, 88200, 147), (88200, 48000, 80),
                                                   (44100, 32000, 320), (192000, 176400, 147), (176400, 96000, 80)])
def test_drop_pattern_period_is_fs_out_over_the_gcd(fs_in, fs_out, period):
    """analytic: picking output sample n at input index floor(n*fs_in/fs_out) repeats once n*fs_in/fs_out is a
    whole number again, i.e. every fs_out/gcd(fs_in, fs_out) output samples (48 -> 44.1 kHz: gcd 300 Hz,
    44100/300 = 147; 88.2 -> 48 kHz: gcd 600 Hz, 80; 176.4 -> 96 kHz: gcd 1200 Hz, 80); checked against the picked indices themselves."""
    assert al.drop_pattern_period(fs_in, fs_out) == period
    n = np.arange(4 * period, dtype=np.int64)
    idx = n * fs_in // fs_out
    steps = np.diff(idx)
    assert np.array_equal(steps[:period], steps[period:2 * period])          # periodic at `period` ...
    assert all(not np.array_equal(steps[q:], steps[:-q]) for q in range(1, period) if period % q == 0)  # ... and not less
    assert al.drop_pattern_period(fs_in, fs_out) in al.pattern_periods(fs_out)


@pytest.mark.parametrize("fs", [8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400, 192000])
def test_only_periods_a_rate_conversion_makes_are_tested(fs):
    """analytic: a picking pattern from fs_in to fs repeats every fs/gcd(fs_in, fs) samples, so every period tested
    divides the file's rate and is made by a conversion from one of the listed source rates; 12 samples at 8 kHz
    (8000/12 is not a whole number) can never be one, whatever line the prediction error shows."""
    periods = al.pattern_periods(fs)
    made = {al.drop_pattern_period(r, fs) for r in al.PICK_SOURCE_RATES_HZ if r > fs and r % fs}
    assert periods and set(periods) <= made
    assert all(fs % p == 0 for p in periods)
    assert 12 not in al.pattern_periods(8000)
    assert 147 in al.pattern_periods(44100) and 147 in al.pattern_periods(88200)
    assert al.pattern_periods(8000) == [10, 20, 40, 80, 160, 320]   # 8000/gcd: 88.2 kHz -> 40, 44.1 -> 80, ...


def _pick_floor(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    n = np.arange(int((x.size - 1) * fs_out // fs_in), dtype=np.int64)
    return x[n * fs_in // fs_out]


def test_picking_48k_to_44k1_puts_the_analytic_sidebands_on_a_sine():
    """analytic: picking (floor rule) from 48 to 44.1 kHz reads a sine sin(2*pi*f*t) at t = n/44100 + tau[n],
    tau[n] = -frac(160 n/147)/48000 = -((13 n) mod 147)/(147*48000): a phase modulation
    phi[n] = -2*pi*f*((13 n) mod 147)/(147*48000), periodic in 147 samples.  To first order in phi the output is
    sin(theta) + phi*cos(theta), so a line of phi at k/147 cycles per sample puts sidebands at f +- k*300 Hz of
    relative amplitude |Phi_k|.  With m = 13 n mod 147 (13 is invertible mod 147, u = 13^-1):
    Phi_k = -(2*pi*f/48000)/147 * sum_m (m/147) w^m, w = exp(-2j*pi*k*u/147), and sum_{m<N} m w^m = N/(w - 1) for
    w^N = 1, so |Phi_k| = (2*pi*f/48000) / (147 * 2*sin(pi*k*u/147)).  The strongest is k = 13 (k*u = 1 mod 147):
    sidebands at f +- 3900 Hz, relative amplitude (2*pi*f/48000)/(294*sin(pi/147)), about f/48000."""
    f, fs_in, fs_out = 1201.0, 48000, 44100
    x = np.sin(2 * math.pi * f * np.arange(2 * fs_in) / fs_in)
    y = _pick_floor(x, fs_in, fs_out)[:fs_out]            # 1 s: 1 Hz bins, every line on a bin (by construction)
    spec = np.abs(np.fft.rfft(y))
    predicted = (2 * math.pi * f / fs_in) / (294.0 * math.sin(math.pi / 147))
    for side in (f + 3900.0, abs(f - 3900.0)):
        ratio = spec[int(side)] / spec[int(f)]
        # first order in phi (at most 2*pi*1201/48000 = 0.16 rad): the neglected phi^2/2 terms move it by a few %
        assert 20 * math.log10(ratio) == pytest.approx(20 * math.log10(predicted), abs=0.3)
    # the weaker sidebands follow the same law, e.g. k = 26 (k*u = 2 mod 147): 1/(2 sin(2 pi/147)), 6 dB down
    ratio26 = spec[int(f + 7800.0)] / spec[int(f)]
    assert 20 * math.log10(ratio26) == pytest.approx(
        20 * math.log10((2 * math.pi * f / fs_in) / (294.0 * math.sin(2 * math.pi / 147))), abs=0.5)


def _grid_frames(y: np.ndarray):
    starts = al.frame_starts(y.size, al.GRID_FRAME, al.GRID_FRAMES, al.GRID_FRAME, seed=6)
    errors = [al.grid_error_magnitude(y[s:s + al.GRID_FRAME].reshape(-1, 1))[0] for s in starts]
    return errors, [y[s:s + al.GRID_FRAME] for s in starts], starts


def test_drop_pattern_is_found_at_its_period_and_not_in_the_band_limited_twin(rng):
    """Picking from 48 to 44.1 kHz (one drop about every 11 samples, far too dense for a single error line): the
    prediction-error profiles over the phases n mod 147 agree across frames spread over the file (the pattern's
    period, analytic above); the same material through scipy's resample_poly (the band-limited twin) gives
    profiles that do not agree.  Thresholds: GRID_PATTERN_MIN_AGREEMENT (house choice)."""
    x = _tone_mix(48000, 7.0, rng)
    ag, period, sig = al.pattern_evidence(*_grid_frames(_pick_floor(x, 48000, 44100)), 44100)
    assert period == 147
    assert ag >= 0.8 and sig < al.GRID_PATTERN_MAX_SIGNAL_AGREEMENT
    from scipy.signal import resample_poly
    ag_twin, _p, _s = al.pattern_evidence(*_grid_frames(resample_poly(x, 147, 160)), 44100)
    assert ag_twin < al.GRID_PATTERN_MIN_AGREEMENT


def test_a_short_picked_file_is_found_by_its_drop_pattern_and_its_twin_is_not(rng):
    """A 3 s file (shorter than the irregular-grid line test's span) picked from 48 to 44.1 kHz: the drop-pattern
    test alone runs, on frames that do not overlap, and finds the period 147 (analytic, above); the same material
    through scipy's resample_poly is not called folded.  Thresholds: GRID_PATTERN_MIN_AGREEMENT (house choice)."""
    x = _tone_mix(48000, 3.2, rng)
    picked = _run(_pick_floor(x, 48000, 44100)[:3 * 44100], 44100)
    d = picked["aliasing_detail"]
    assert 3.0 * 44100 / al.GRID_FRAME > al.GRID_MIN_FRAMES and 3.0 < al.GRID_MIN_SPAN_S
    assert d["grid_pattern_period_samples"] == 147 and d["grid_pattern_agreement"] >= 0.6
    assert picked["aliasing_detected"] is True
    from scipy.signal import resample_poly
    twin = _run(resample_poly(x, 147, 160)[:3 * 44100], 44100)
    assert twin["aliasing_detail"]["grid_pattern_agreement"] < al.GRID_PATTERN_MIN_AGREEMENT
    assert twin["aliasing_detected"] is not True


def test_a_channel_holding_only_low_frequencies_is_left_out_of_the_grid_tests(rng):
    """by construction: white noise is unpredictable (prediction gain about 0 dB, analytic) and is kept; noise
    low-passed at 120 Hz in a 88.2 kHz frame (an LFE) is predicted to far beyond GRID_MAX_PREDICTION_GAIN_DB and
    is left out, alone or beside a kept channel (the error magnitude of a two-channel frame is then the kept
    channel's alone)."""
    from scipy.signal import butter, sosfiltfilt
    n = al.GRID_FRAME
    noise = rng.standard_normal(4 * n)
    lfe = sosfiltfilt(butter(4, 120.0, fs=88200, output="sos"), noise)[n:2 * n]
    white_frame = rng.standard_normal(n)
    assert al.grid_error_magnitude(lfe.reshape(-1, 1)) is None
    e_white, _p = al.grid_error_magnitude(white_frame.reshape(-1, 1))
    e_both, _p2 = al.grid_error_magnitude(np.stack([white_frame, lfe], axis=1))
    assert np.allclose(e_both, e_white)


def test_a_steady_chord_periodic_at_the_pattern_is_no_evidence(rng):
    """A chord on multiples of 300 Hz at 44.1 kHz repeats every 147 samples (analytic: 147 * 300/44100 = 1), so its
    prediction error does too: the signal's own profiles agree, and the period is not taken as a drop pattern;
    the whole analyzer does not call it folded."""
    fs = 44100
    t = np.arange(7 * fs) / fs
    x = sum(np.sin(2 * math.pi * k * 900.0 * t + rng.uniform(0, 6)) / k for k in range(1, 20))
    x = 0.1 * x / np.sqrt(np.mean(x ** 2)) + 1e-4 * rng.standard_normal(t.size)
    errors, signals, starts = _grid_frames(x)
    prof = np.stack([al.phase_profile(s, st, 147) for s, st in zip(signals, starts)])
    assert al.profile_agreement(prof) > 0.99
    _ag, period, _sig = al.pattern_evidence(errors, signals, starts, fs)
    assert period != 147
    assert _run(x, fs)["aliasing_detected"] is not True


def test_phase_profile_and_agreement_by_construction():
    """by construction: a frame that repeats a pattern every 7 samples, started at absolute sample s, has the pattern
    rotated by s mod 7 as its profile; identical profiles agree with correlation 1, independent noise about 0."""
    pat = np.array([3.0, -1.0, 0.0, 2.0, -2.0, -1.0, -1.0])
    for s in (0, 5, 703):
        x = np.tile(np.roll(pat, -(s % 7)), 100)
        assert np.allclose(al.phase_profile(x, s, 7), pat - pat.mean())
    assert al.profile_agreement(np.tile(pat, (6, 1))) == pytest.approx(1.0)
    noise = np.random.default_rng(3).standard_normal((12, 147))
    assert abs(al.profile_agreement(noise)) < 0.3


def test_first_pass_settles_clean_material_and_keeps_the_verdict(rng, monkeypatch):
    """The first pass (every FIRST_PASS_STRIDE-th frame, TRACK_FIRST_PASS_STRIDE-th track run) settles a noise bed (no note, no sharp jump, no drop
    pattern) without analysing the rest, with the verdict of analysing every frame; tonal material keeps its
    verdict either way; a naive sawtooth is not settled and is found (by construction of the settling rule)."""
    from corpus_sampling import ArrayStream
    from masterqc.measure.engine import run_analyzers
    fs = 48000

    def run(x):
        m, _series, settings = run_analyzers(ArrayStream(np.asarray(x).reshape(-1, 1), fs, 24), MeasureOptions(),
                                             classes=[AliasingAnalyzer])
        return m["aliasing_detected"], settings["aliasing"]["first_pass_settled_clean"]

    noise = white(fs, 8.0, rng, 0.05)
    tones = _tone_mix(fs, 8.0, rng)
    saw = naive_wave("saw", 435.2, fs)
    assert run(noise) == (None, True)
    tones_verdict = run(tones)[0]
    assert tones_verdict is not True
    assert run(saw) == (True, False)
    monkeypatch.setattr(al, "FIRST_PASS_STRIDE", 1)
    monkeypatch.setattr(al, "TRACK_FIRST_PASS_STRIDE", 1)
    assert run(noise) == (None, False)
    assert run(tones) == (tones_verdict, False)


def test_first_pass_settles_noise_with_a_rare_untestable_note(rng, monkeypatch):
    """A noise bed with one short note (eight harmonics of 110 Hz falling as 1/k^2: nothing near Nyquist to
    fold) placed on a frame of the first pass: notes show in one first-pass frame of 11, none testable, so the
    first pass settles it (SETTLED_NOTE_FRAME_SHARE, house choice) with the verdict of reading every frame, not
    assessable (by construction of the settling rule)."""
    from corpus_sampling import ArrayStream
    from masterqc.measure.engine import run_analyzers
    fs, seconds = 48000, 8.0
    n_poly = int(round(fs / al.POLY_BIN_HZ))
    first = al.frame_starts(int(seconds * fs), n_poly, al.MAX_POLY_FRAMES, n_poly // 2, seed=4)[::al.FIRST_PASS_STRIDE]
    x = white(fs, seconds, rng, 0.01)
    at = int(first[len(first) // 2])
    t = np.arange(n_poly * 3) / fs
    note = sum(np.sin(2 * math.pi * 110.0 * k * t) / k ** 2 for k in range(1, 9)) * 0.3
    x = np.array(x, dtype=float)
    x[at - n_poly:at + 2 * n_poly] += note

    def run(sig):
        m, _series, settings = run_analyzers(ArrayStream(np.asarray(sig).reshape(-1, 1), fs, 24), MeasureOptions(),
                                             classes=[AliasingAnalyzer])
        return m["aliasing_detected"], settings["aliasing"]["first_pass_settled_clean"], m["aliasing_detail"]

    verdict, settled, detail = run(x)
    assert (verdict, settled) == (None, True)
    assert detail["reason"].startswith("not assessable: no note with fold positions")
    monkeypatch.setattr(al, "FIRST_PASS_STRIDE", 1)
    monkeypatch.setattr(al, "TRACK_FIRST_PASS_STRIDE", 1)
    assert run(x)[:2] == (None, False)



# ---------------------------------------------------------------- picking and interpolating rules, predicted lines
@pytest.mark.parametrize("fs_in, fs_out, lines", [
    (48000, 44100, (13 / 147, 26 / 147, 39 / 147)),
    (96000, 88200, (13 / 147, 26 / 147, 39 / 147)),
    (44100, 32000, (121 / 320, 78 / 320, 43 / 320)),
])
def test_conversion_lines_are_the_orders_of_the_read_fraction(fs_in, fs_out, lines):
    """analytic: output n reads the input at n*a/b (a = fs_in/g, b = fs_out/g, g = gcd), so its fraction is
    u[n] = (n*a mod b)/b and e^(2j*pi*m*u[n]) = e^(2j*pi*(m*a mod b)*n/b): the m-th order of any function of u sits
    at (m*a mod b)/b cycles per sample, folded into 0..1/2.  48 -> 44.1 kHz: a = 160, b = 147, 160 mod 147 = 13,
    so 13, 26, 39 (of 147); 96 -> 88.2 kHz the same; 44.1 -> 32 kHz: a = 441, b = 320, 441 mod 320 = 121,
    2*121 = 242 -> 320 - 242 = 78, 3*121 = 363 -> 43.  Checked also against the spectrum of u[n] itself."""
    got = al.conversion_lines(fs_in, fs_out)
    assert got == pytest.approx(list(lines), abs=1e-12)
    b = al.drop_pattern_period(fs_in, fs_out)
    n = np.arange(64 * b, dtype=np.int64)
    u = (n * fs_in % fs_out) / fs_out
    spec = np.abs(np.fft.rfft(np.exp(2j * math.pi * u).real))     # cos(2*pi*u): order 1 only, at lines[0]
    assert np.argmax(spec[1:]) + 1 == round(lines[0] * n.size)


@pytest.mark.parametrize("x, shape", [(0.5, 1), (3.0, 3), (12.0, 3), (40.0, 3), (25.0, 6)])
def test_gamma_survival_matches_scipy(x, shape):
    """reference library: scipy.stats.gamma.sf (the Rayleigh statistics of independent lines of random phase sum
    to a Gamma(L, 1) variable)."""
    from scipy.stats import gamma
    assert al._gamma_sf_log10(x, shape) == pytest.approx(math.log10(gamma.sf(x, shape)), abs=1e-9)


def test_rayleigh_sum_of_random_phases_stays_near_chance(rng):
    """by construction: frames whose lines have random phases give, per source rate, a summed Rayleigh statistic
    whose chance probability is uniform (analytic: J*R^2 ~ Exp(1) per line, their sum Gamma(L, 1)); a 44.1 kHz file
    has 6 candidate source rates, so over 50 draws of 12 frames the best of 300 probabilities falls below
    10^-CONVERSION_LINES_MIN_LOG10 = 10^-4 with probability about 3 %, and the median draw's best stays near
    1 - 2^(-1/6) = 0.11 (log10 about -1.0)."""
    nfft = 2 * 4096
    best = []
    assert len(al.pick_sources(44100)) == 6
    for _ in range(50):
        spectra = rng.standard_normal((12, nfft // 2 + 1)) + 1j * rng.standard_normal((12, nfft // 2 + 1))
        starts = rng.integers(0, 10 ** 6, 12)
        lp, _src, _p = al.conversion_line_evidence(spectra, starts, 44100, al.GRID_FRAME)
        best.append(lp)
    assert min(best) > -al.CONVERSION_LINES_MIN_LOG10
    assert -1.5 < float(np.median(best)) < -0.4


def test_single_precision_accumulator_steps_by_a_binary_fraction():
    """analytic: a read position accumulated in single precision (24-bit significand) holds positions in
    [2^k, 2^(k+1)) on a grid of 2^(k-23) samples, so each step of 160/147 = 1.08843... is rounded to that grid:
    for positions 2^17..2^18 (grid 1/64) to 70/64 and for 2^18..2^19 (grid 1/32) to 35/32.  The pattern there
    keeps 32 of every 35 input samples: idx[n + 32] = idx[n] + 35, a power-of-two period that no conversion
    between trade rates makes, and it is not periodic at 147 (the exact ratio's period)."""
    idx, _frac = tuning.rule_positions(480000, 48000, 44100, "dda32", np.random.default_rng(0))
    pos_lo = int(np.searchsorted(idx, 2 ** 17 + 64)) + 1
    pos_hi = int(np.searchsorted(idx, 2 ** 19 - 64)) - 40
    seg = idx[pos_lo:pos_hi]
    assert np.all(seg[32:] - seg[:-32] == 35)
    assert not np.all(seg[147:] - seg[:-147] == 160)
    assert 32 in al.BINARY_PHASE_PERIODS and 16 in al.BINARY_PHASE_PERIODS
    assert 32 not in al.pattern_periods(44100)
    exact, _f = tuning.rule_positions(480000, 48000, 44100, "round", np.random.default_rng(0))
    assert np.all(exact[147:] - exact[:-147] == 160)


def test_linear_interpolation_is_found_by_its_lines_and_its_twin_is_not(rng):
    """Linear interpolation from 44.1 to 32 kHz reads the input at n*441/320 and weighs the two neighbours by the
    fraction u[n]: a 2-tap filter whose high-frequency loss, 2*u*(1-u)*(1 - cos w) in power, is a smooth function
    of u[n] (analytic), so the prediction error carries the first orders of u at the lines
    (m*441 mod 320)/320 (above), in step with the sample clock.  The predicted-line test finds them beyond
    CONVERSION_LINES_MIN_LOG10 (house choice); the band-limited twin (scipy resample_poly) stays near chance."""
    from scipy.signal import resample_poly
    x = _tone_mix(44100, 8.0, rng).reshape(-1, 1)
    y = tuning.rule_convert(x, 44100, 32000, "linear", rng)[:, 0]
    errors, _signals, starts = _grid_frames(y)
    spectra = np.stack([np.fft.rfft((e - e.mean()) * np.hanning(e.size), al.GRID_PAD * e.size) for e in errors])
    lp, src, period = al.conversion_line_evidence(spectra, starts, 32000)
    assert src == 44100 and period == 320 and lp <= -al.CONVERSION_LINES_MIN_LOG10
    twin = resample_poly(x[:, 0], 320, 441)
    errors_t, _s, starts_t = _grid_frames(twin)
    spectra_t = np.stack([np.fft.rfft((e - e.mean()) * np.hanning(e.size), al.GRID_PAD * e.size) for e in errors_t])
    lp_t, _src, _p = al.conversion_line_evidence(spectra_t, starts_t, 32000)
    assert lp_t > -3.0
    assert _run(y, 32000)["aliasing_detected"] is True
    assert _run(twin, 32000)["aliasing_detected"] is not True


# ---------------------------------------------------------------- ring modulation (naive oscillator times a sine)
def _ring_saw_sine(fs: int, seconds: float, f0: float, f2: float, naive: bool) -> np.ndarray:
    """A sawtooth at f0 multiplied by a sine at f2.  Naive: the sawtooth evaluated at the sample instants
    (a jump of 2 every period).  Band-limited: by the product identity
    sin(a)*sin(b) = (cos(a - b) - cos(a + b))/2, the sawtooth's harmonic k, (2/(pi k))*(-1)^(k+1)*sin(k*w0*t),
    times sin(w2*t) is two lines at k*f0 - f2 and k*f0 + f2; only those below 0.95 of Nyquist are summed."""
    t = np.arange(int(seconds * fs)) / fs
    if naive:
        return 0.5 * (2.0 * np.mod(f0 * t, 1.0) - 1.0) * np.sin(2 * math.pi * f2 * t)
    out = np.zeros(t.size)
    for k in range(1, int((0.95 * fs / 2 + f2) // f0) + 1):
        a = 2.0 / (math.pi * k) * (-1) ** (k + 1)
        for sign in (-1.0, 1.0):
            f = k * f0 + sign * f2
            if 0.0 < abs(f) < 0.95 * fs / 2:
                out += 0.5 * a * (-sign) * 0.5 * np.cos(2 * math.pi * f * t)
    return out


def test_a_steep_smooth_stretch_is_no_jump_candidate():
    """Analytic: the differences of A*sin(w*n) peak at 2*A*sin(w/2) and, two samples on, are that times
    cos(2*w); below fs/12 (w < pi/6) the peak never reaches STEP_JUMP_CONTRAST = 2 times the differences two
    samples either side, however large A is, so a loud sine up to fs/12 gives no jump candidate at all."""
    fs = 48000
    n = np.arange(fs // 10)
    for f in (fs / 40.0, fs / 20.0, fs / 13.0):
        idx, _jump, _resid = al.sharp_steps(0.9 * np.sin(2 * math.pi * f * n / fs + 0.3))
        assert idx.size == 0, f
    assert 1.0 / math.cos(4 * math.pi / 13.0) < al.STEP_JUMP_CONTRAST < 1.0 / math.cos(4 * math.pi / 11.0)


@pytest.mark.parametrize("f2", [1300.0, 1900.0])
def test_ring_modulated_naive_saw_is_found_by_its_jumps_and_its_band_limited_twin_is_not(f2, monkeypatch):
    """A naive sawtooth times a sine (ring modulation) jumps by 2*0.5*sin(w2*t) at every sawtooth wrap, with
    smooth curves either side that bend at the sine's rate: the cubic smooth curve (STEP_POLY_DEGREE) takes
    them up to about 2 kHz at 48 kHz, where a quadratic takes none, and the jump-contrast rule keeps the
    sine's steep stretches out of the share.  The band-limited twin (the product's lines k*f0 +- f2 below
    Nyquist, by the product identity) has no sample-sharp jump and is not called folded."""
    fs, f0 = 48000, 233.3
    x = _ring_saw_sine(fs, 4.0, f0, f2, True)
    naive = _run(x, fs)
    d = naive["aliasing_detail"]
    assert naive["aliasing_detected"] is True
    assert d["sharp_steps"] >= al.MIN_SHARP_STEPS and d["sharp_steps"] >= al.MIN_SHARP_SHARE * d["steps_fitted"], d
    twin = _run(_ring_saw_sine(fs, 4.0, f0, f2, False), fs)
    assert twin["aliasing_detail"]["sharp_steps"] == 0
    assert twin["aliasing_detected"] is not True
    a2, p2 = al._step_design(degree=2)
    monkeypatch.setattr(al, "_STEP_A", a2)
    monkeypatch.setattr(al, "_STEP_PINV", p2)
    assert _run(x, fs)["aliasing_detail"]["sharp_steps"] == 0


@pytest.fixture(scope="module")
def modulation_slice():
    return [(case, _run(case.audio[:, 0], case.rate_hz)) for case in tuning.modulation_cases(1000, quick=True)]


def test_modulation_slice_naive_voices_with_jumps_are_found_and_band_limited_twins_are_not(modulation_slice):
    """Target (issue): found on naive synthesis, 0 false alarms on band-limited synthesis.  Ring modulation
    of a naive oscillator by a sine, PWM and swept hard sync jump between two samples (found); their twins
    rendered at 8x and cut to Nyquist in the FFT domain are not called folded, nor is a band-limited
    two-operator FM voice.  (A naive FM voice, smooth at every sample, is not found: left open.)"""
    jumps = [(c, m) for c, m in modulation_slice if c.expect["aliasing_detected"] and "-fm-" not in c.name]
    assert len(jumps) == 4
    assert [c.name for c, m in jumps if m["aliasing_detected"] is not True] == []
    twins = [(c, m) for c, m in modulation_slice if c.group == "band-limited-synth"]
    assert len(twins) == 5
    assert [c.name for c, m in twins if m["aliasing_detected"] is True] == []


# ---------------------------------------------------------------- reflected line grids (two-operator FM, ring modulation)
# Analytic reference (Jacobi-Anger expansion): sin(2 pi fc t + I sin(2 pi fm t)) = sum over every whole k of
# J_k(I) sin(2 pi (fc + k fm) t), J_k the Bessel function of the first kind (J_-k = (-1)^k J_k).  Evaluated at the
# sample instants n/fs with nothing band-limiting it, the line fc + k fm above fs/2 lands at fs - (fc + k fm) (first
# fold zone) with the same amplitude |J_k(I)|.  The voice's own lines sit at +-fc modulo fm; the folded ones at
# fs -+ fc modulo fm: a second grid, the first reflected about fs/2.


def _fm_voice(fc, fm, index, fs, seconds, naive=True):
    """Steady two-operator FM: naive (evaluated at the sample instants) or its band-limited twin (the
    Jacobi-Anger lines below fs/2 only, summed)."""
    from scipy.special import jv
    t = np.arange(int(seconds * fs)) / fs
    if naive:
        return np.sin(2 * math.pi * fc * t + index * np.sin(2 * math.pi * fm * t))
    x = np.zeros(t.size)
    for k in range(-60, 61):
        f = fc + k * fm
        if abs(f) < fs / 2:
            x += jv(k, index) * np.sin(2 * math.pi * f * t)
    return x


@pytest.mark.parametrize("fs,fc,fm,index,k", [(48000, 1500, 2115, 8.0, 12), (44100, 1860, 6510, 3.0, 4),
                                              (48000, 2300, 3243, 8.0, 8)])
def test_naive_fm_folds_sideband_k_to_fs_minus_fc_plus_k_fm_at_its_bessel_level(fs, fc, fm, index, k):
    from scipy.special import jv
    f_k = fc + k * fm
    assert fs / 2 < f_k < fs
    x = _fm_voice(fc, fm, index, fs, 1.0)        # 1 s: 1 Hz bins, every line on a bin (whole Hz)
    spec = np.abs(np.fft.rfft(x * np.hanning(x.size))) / (0.5 * x.size / 2.0)   # Hann coherent gain 0.5
    folded = fs - f_k
    assert spec[folded] == pytest.approx(abs(jv(k, index)), rel=1e-3, abs=1e-6)
    # the band-limited twin has nothing there (only the window's leakage from lines at least fm - fc away)
    y = _fm_voice(fc, fm, index, fs, 1.0, naive=False)
    spec_y = np.abs(np.fft.rfft(y * np.hanning(y.size))) / (0.5 * y.size / 2.0)
    assert spec_y[folded] < 1e-6
    # the fold sits on the reflected grid fs - (fc + k fm), off the voice's own offsets +-fc modulo fm
    assert al._circ(folded, fs - fc, fm) < 1e-9
    assert min(al._circ(folded, fc, fm), al._circ(folded, -fc, fm)) > 0.05 * fm


def _frame_lines(x, fs):
    """One Hann-windowed frame's ``(power, floor, bin_hz, line frequencies in Hz, line powers)``, the lines
    found and refined as the polyphonic test finds them."""
    power = np.abs(np.fft.rfft(x * np.hanning(x.size + 2)[1:-1])) ** 2
    bin_hz = fs / x.size
    floor = al.block_floor(power)
    peaks = al.find_lines(power, floor, al.POLY_LINE_DB)
    return power, floor, bin_hz, al.refine_peaks(power, peaks) * bin_hz, power[peaks]


def test_voice_grid_finds_the_fm_spacing_and_offset():
    fs, fc, fm, index = 48000, 1500, 2115, 5.0
    x = _fm_voice(fc, fm, index, fs, 0.05)
    power, floor, bin_hz, fr, pw = _frame_lines(x, fs)
    p, spacing, _sp, _sd, matched = al.voice_grid(fr, pw, bin_hz, fs)
    assert spacing == pytest.approx(fm, rel=2e-3)
    assert min(al._circ(p, fc, spacing), al._circ(p, -fc, spacing)) < 2 * bin_hz
    assert matched.size >= 8


@pytest.mark.parametrize("fs,fc,ratio,index", [(48000, 1503.7, 1.41, 8.0), (44100, 803.1, 3.5, 5.0),
                                               (48000, 1101.3, 2.76, 6.0)])
def test_naive_fm_voice_is_found_by_its_reflected_grid_and_its_twin_is_not(fs, fc, ratio, index):
    """A steady naive FM voice with a slight vibrato (both operators follow it), bright enough that sidebands
    fold below 0.45 fs at -25 to -40 dB under its strongest line (J_12(8), J_13(8) against J_5(8) for the first; from
    the Bessel functions): its reflected grid stands above every control in most frames; the twin (the same voice rendered at 8x, cut at Nyquist in the FFT
    domain, the tuning corpus' band_limit_down) is clean."""
    over = 8
    def render(rate):
        t = np.arange(int(4.0 * rate)) / rate
        ph = np.cumsum(fc * (1 + 0.003 * np.sin(2 * math.pi * 5.13 * t))) / rate
        return 0.5 * np.sin(2 * math.pi * ph + index * np.sin(2 * math.pi * ratio * ph))
    x = render(fs)
    y = tuning.band_limit_down(render(fs * over), over)
    mx, my = _run(x, fs), _run(y, fs)
    dx, dy = mx["aliasing_detail"], my["aliasing_detail"]
    assert mx["aliasing_detected"] is True
    assert dx["reflected_grid_frames_with_folds"] >= 0.45 * dx["reflected_grid_frames"] > 0
    assert mx["aliasing_assessable_fraction"] >= 0.5
    assert "reflection about half the sampling rate" in dx["reason"]
    assert my["aliasing_detected"] is not True
    assert dy["reflected_grid_frames_with_folds"] <= dy["reflected_grid_expected_by_chance"] + 1.0


def test_reflected_offsets_coincide_with_the_voice_when_fs_is_a_multiple_of_the_spacing():
    """fs - (fc + k fm) = fc' + k' fm for whole k' when fs = N fm and the offsets meet (fs - fc = -fc modulo fm):
    the folds land on the voice's own grid and prove nothing; the test must not read them."""
    fs, fm, fc, index = 48000, 2400.0, 700.0, 6.0     # 48000 = 20 * 2400
    x = _fm_voice(fc, fm, index, fs, 0.05)
    power, floor, bin_hz, fr, pw = _frame_lines(x, fs)
    level = 10 * np.log10(np.maximum(power, 1e-300) / np.maximum(floor, 1e-300))
    from masterqc.measure.npkernels import maximum_filter1d
    lm = [level] + [maximum_filter1d(level, 2 * h + 1, mode="nearest") for h in (1, 2)]
    assert al.reflected_grid_frame(fr, pw, power, lm, np.zeros(0), np.zeros(0), bin_hz, fs) is None


def test_naive_ring_modulator_is_found_and_its_twin_is_not():
    """A square wave at f1 times a sine at f2 (ring modulation): lines at (2j+1) f1 +- f2 with amplitudes
    2/(pi (2j+1)) (the square's odd harmonics 4/(pi (2j+1)), halved by the product), folding past Nyquist."""
    fs, f1, f2 = 48000, 710.0, 1937.0
    def render(rate):
        t = np.arange(int(4.0 * rate)) / rate
        vib = 1 + 0.002 * np.sin(2 * math.pi * 5.5 * t)
        ph1 = np.cumsum(f1 * vib) / rate
        return 0.4 * np.where(np.mod(ph1, 1.0) < 0.5, 1.0, -1.0) * np.sin(2 * math.pi * np.cumsum(f2 * vib) / rate)
    x = render(fs)
    y = tuning.band_limit_down(render(8 * fs), 8)
    assert _run(x, fs)["aliasing_detected"] is True
    assert _run(y, fs)["aliasing_detected"] is not True


def test_a_reflected_grid_finding_reads_as_a_plain_sentence():
    """House wording: the finding names the mirrored modulation sidebands and the fold about Nyquist."""
    from masterqc.judge import judge
    from masterqc.spec import build_spec
    fs = 48000
    t = np.arange(3 * fs) / fs
    ph = np.cumsum(1503.7 * (1 + 0.003 * np.sin(2 * math.pi * 5.13 * t))) / fs
    m = _run(0.5 * np.sin(2 * math.pi * ph + 8.0 * np.sin(2 * math.pi * 1.41 * ph)), fs)
    assert m["aliasing_detected"] is True
    assert "folding could be tested in" in m["aliasing_detail"]["reason"]
    sp = build_spec({"spec_version": 1, "name": "invented sampling spec", "sampling": {"aliasing": [False]}})
    found, _verdict = judge(sp, {"format": {"sample_rate_hz": fs}, "measurements": m})
    f = next(f for f in found if f.check == "sampling.aliasing")
    assert f.status == "fail"
    assert "frequency- or ring-modulated voice come back mirrored about 24 kHz" in f.message


@pytest.mark.parametrize("f_rel,most_db,least_db", [(0.55, -21.5, -24.0), (0.58, -52.0, -200.0),
                                                    (0.65, -52.0, -200.0), (0.9, -52.0, -200.0)])
def test_resample_polys_own_filter_folds_past_0_58_fs_at_least_52_db_down(f_rel, most_db, least_db):
    """Where the thresholds REFLECTED_MIN_REL_DB (50 dB), POLY_TOP_FRACTION (0.45) and TRACK_MAX_FALL_FRACTION (0.42)
    come from, measured on scipy's resample_poly itself (a general-purpose reference library, default filter): a sine
    at f_rel * fs_out, made at 8 * fs_out and brought down by 8, comes back folded at (1 - f_rel) * fs_out, about
    22.6 dB down from 0.55 fs (fold at 0.45 fs) and more than 52 dB down from 0.58 fs (folds below 0.42 fs); taking
    every 8th sample instead keeps it at 0 dB."""
    fs_out = 48000
    n = fs_out                                  # 1 s at the output rate: 1 Hz bins
    f = f_rel * fs_out
    t = np.arange(8 * n) / (8 * fs_out)
    x = np.sin(2 * math.pi * f * t)
    y = signal.resample_poly(x, 1, 8)
    folded = int(round(fs_out - f))
    mid = slice(n // 4, 3 * n // 4)             # away from the filter's start and end
    seg = y[mid]
    amp = np.abs(np.fft.rfft(seg * np.hanning(seg.size))) / (0.25 * seg.size)
    level_db = 20 * math.log10(max(float(amp[int(round(folded * seg.size / fs_out))]), 1e-12))
    assert least_db <= level_db <= most_db
    naive = x[::8][mid]
    amp_n = np.abs(np.fft.rfft(naive * np.hanning(naive.size))) / (0.25 * naive.size)
    assert 20 * math.log10(float(amp_n[int(round(folded * naive.size / fs_out))])) == pytest.approx(0.0, abs=0.05)
    assert al.TRACK_MAX_FALL_FRACTION <= 1 - 0.58 < al.POLY_TOP_FRACTION


# ---------------------------------------------------------------- fold combs that fall with frequency
def _zone_one_comb(fs: float, f0: float):
    """Orders k of a note at ``f0`` whose partial k*f0 lies in the first fold zone (fs/2 < k*f0 < fs) and folds
    below 0.45 fs, with the fold positions fs - k*f0."""
    k = np.arange(int(fs / 2 / f0) + 1, int(fs / f0) + 1)
    pos = fs - k * f0
    keep = (pos < al.POLY_TOP_FRACTION * fs) & (pos > 0)
    return k[keep], pos[keep]


def test_a_naive_sawtooths_fold_comb_rises_towards_nyquist_and_is_kept():
    """Analytic: a sawtooth's partial k has amplitude 1/k (its Fourier series); sampled without band-limiting, the
    partial k*f0 in (fs/2, fs) folds to fs - k*f0, so the fold at a higher position comes from a lower order and is
    stronger.  Such a comb is never read as unreflected, whatever its lines' scatter below the 10 dB margin."""
    fs, f0 = 96000.0, 523.25
    k, pos = _zone_one_comb(fs, f0)
    power = 1.0 / k.astype(float) ** 2
    lines = np.ones(k.size, dtype=bool)
    assert 10.0 * np.log10(power[np.argmax(pos)] / power[np.argmin(pos)]) > 5.0   # rises by more than 5 dB
    assert al.falls_as_unreflected(pos, power, lines, np.ones(k.size, dtype=bool)) is False
    # a scatter of +-4 dB around the rising trend (own choice of spread) still passes
    scatter = np.where(np.arange(k.size) % 2 == 0, 10 ** 0.4, 10 ** -0.4)
    assert al.falls_as_unreflected(pos, power * scatter, lines, np.ones(k.size, dtype=bool)) is False


def test_a_series_that_falls_like_a_voices_own_partials_is_no_evidence():
    """Analytic: the same positions holding a voice's own lines (a 1/n spectrum read at its own frequency, power
    (f0/position)^2, as a ring modulator's sideband grid or an octave's odd harmonics are) fall by far more than
    FOLD_TREND_MAX_FALL_DB over the comb: no folding puts them there (the first zone's folds rise, previous test)."""
    fs, f0 = 96000.0, 523.25
    k, pos = _zone_one_comb(fs, f0)
    power = (f0 / pos) ** 2
    lines = np.ones(k.size, dtype=bool)
    fall_db = 10.0 * np.log10(power[np.argmin(pos)] / power[np.argmax(pos)])
    assert fall_db > 3 * al.FOLD_TREND_MAX_FALL_DB
    assert al.falls_as_unreflected(pos, power, lines, np.ones(k.size, dtype=bool)) is True
    # positions without a line, or outside the first fold zone, do not count: with three lines left (fewer than
    # NOTE_MIN_PEAKS) nothing is read as unreflected
    few = np.zeros(k.size, dtype=bool)
    few[:al.NOTE_MIN_PEAKS - 1] = True
    assert al.falls_as_unreflected(pos, power, few, np.ones(k.size, dtype=bool)) is False
    assert al.falls_as_unreflected(pos, power, lines, np.zeros(k.size, dtype=bool)) is False


def test_a_naive_sawtooth_whose_folds_land_midway_between_its_harmonics_stays_evident():
    """A naive sawtooth at 96 kHz with f0 = fs/183.5: its first-zone folds fs - k*f0 = (183.5 - k)*f0 sit exactly
    midway between its harmonics, where an octave's odd harmonics or a ring modulator's sidebands could also sit.
    One 50 ms frame (Hann window, the polyphonic test's frame): the note instance is tested and its comb stands
    above every control, with the trend rule in place (the folds rise towards Nyquist as 1/k)."""
    fs = 96000
    n = fs // 20
    f0 = fs / 183.5
    t = np.arange(n) / fs
    x = 2.0 * np.mod(f0 * t + 0.1, 1.0) - 1.0 + 1e-6 * np.random.default_rng(2).standard_normal(n)
    spec = np.fft.rfft(x * np.hanning(n))
    r = al.polyphonic_fold_frame(spec.real ** 2 + spec.imag ** 2, fs / n, fs)
    assert r is not None and r["instances"] == 1 and r["evident"] == 1
    assert abs(r["evident_f0_hz"][0] - f0) < 0.5


# ---------------------------------------------------------------- flat tops at the waveform's extreme value
def _clipped_sine(fs: int, f: float, seconds: float, ceiling: float) -> np.ndarray:
    n = np.arange(int(fs * seconds))
    return np.clip(np.sin(2 * math.pi * f * n / fs), -ceiling, ceiling)


def test_a_sine_clipped_at_the_files_rate_leaves_two_flat_tops_per_period():
    # analytic: 1 kHz at 48 kHz is 48 samples a period; clipped at 0.5 the sine sits on the ceiling from 30 to 150
    # degrees of each half period (16 samples) and is entered by a step of about sin(30 deg + 7.5 deg) - 0.5 = 0.11
    # (far above 50 q = 0.0025); 1 s holds 1000 periods, so 1000 runs on each side, none touching the ends
    x = _clipped_sine(48000, 1000.0, 1.0, 0.5)
    q = al.ceiling_tolerance(0.5, 2.0 ** -23)
    assert q == pytest.approx(5e-5)
    assert al.ceiling_plateaus(x, 0.5, q) == 1000
    assert al.ceiling_plateaus(-x, 0.5, q) == 1000


def test_a_smooth_maximum_or_a_band_limited_flat_top_is_no_flat_top():
    fs = 48000
    # a plain sine: the samples next to its peak lie 1 - cos(2 pi / 48) = 0.0086 under it, far outside q
    x = np.sin(2 * math.pi * 1000.0 * np.arange(fs) / fs)
    assert al.ceiling_plateaus(x, float(x.max()), al.ceiling_tolerance(float(x.max()), 0.0)) == 0
    # a slow sine in 16-bit codes at a low level: several equal codes at each peak, but entered by one code
    # (a quadratic maximum: at most 4 q two samples on), so no flat top
    lsb = 2.0 ** -15
    y = np.round(200 * np.sin(2 * math.pi * 20.0 * np.arange(fs) / fs)) * lsb
    assert int(np.sum(y == y.max())) > 3 * 20
    assert al.ceiling_plateaus(y, float(y.max()), al.ceiling_tolerance(float(y.max()), lsb)) == 0
    # the clipped sine evaluated at 16x and cut at the file's Nyquist (a band-limited clipper) rings about the
    # ceiling: no flat top left
    over = 16
    hi = _clipped_sine(fs * over, 1000.0, 1.0, 0.5)
    spec = np.fft.rfft(hi)[:fs // 2 + 1]
    spec[fs // 2:] = 0.0
    b = np.fft.irfft(spec, fs) / over
    assert float(b.max()) > 0.5   # the twin overshoots the ceiling (Gibbs)
    assert al.ceiling_plateaus(b, float(b.max()), al.ceiling_tolerance(float(b.max()), 2.0 ** -23)) == 0


def test_a_hard_clipper_at_the_files_rate_is_folded_and_its_oversampled_twin_is_not():
    # tuning corpus, group naive-nonlinear / oversampled-nonlinear (seed 1000, entry 0: three voices at 44.1 kHz)
    got = {}
    for case in tuning.nonlinear_cases(1000, entries=(0,)):
        got[case.group] = _run(case.audio[:, 0], case.rate_hz)
    naive, twin = got["naive-nonlinear"], got["oversampled-nonlinear"]
    assert naive["aliasing_detected"] is True
    assert naive["aliasing_detail"]["ceiling_flat_run_count"] >= al.CEILING_MIN_PLATEAUS
    assert twin["aliasing_detected"] is not True
    assert twin["aliasing_detail"]["ceiling_flat_run_count"] == 0


def _flat_top_count(x: np.ndarray, block: int, lsb: float, reuse: bool = False) -> int:
    """The analyzer's flat-top count of ``x`` fed in blocks of ``block`` frames; ``reuse``: each block's memory is
    overwritten after it is handed over, as a reader that recycles its buffer would."""
    a = al.AliasingAnalyzer.__new__(al.AliasingAnalyzer)
    a.ceiling_lsb, a.ceiling_blocks, a.ceiling_seen, a.ceiling_buffer, a.ceiling_buffered = lsb, [], None, [], 0
    for s in range(0, x.shape[0], block):
        b = x[s:s + block].copy()
        a._ceiling(b)
        if reuse:
            b[:] = 0.25
    return a._ceiling_count()


@pytest.mark.parametrize("block", [65536, 48000, 100000, 4096])
def test_flat_tops_counted_in_whole_chunks_whatever_the_block_and_chunks_inside_the_extremes_passed_over(block):
    # analytic: a 1 kHz sine at 48 kHz clipped at +-0.5 sits on each ceiling for 5 samples twice a period (see
    # above), 1000 runs per side per second; 3 s of it, then 3 s of the same sine at half the level (its extremes
    # lie inside the ceilings, so those chunks are passed over), then 1 s clipped again: 4000 runs per side
    fs = 48000
    loud = _clipped_sine(fs, 1000.0, 3.0, 0.5)
    quiet = 0.2 * np.sin(2 * math.pi * 1000.0 * np.arange(3 * fs) / fs)
    x = np.concatenate([loud, quiet, _clipped_sine(fs, 1000.0, 1.0, 0.5)])
    x = np.stack([x, -x], axis=1)                           # two channels, each with both ceilings
    lsb = 2.0 ** -23
    # a run touching a chunk's edge is not counted (its entry or exit lies in the next chunk): at most one per
    # chunk edge and side is lost
    edges = x.shape[0] // al.CEILING_CHUNK
    got = _flat_top_count(x, block, lsb)
    assert 2 * 2 * 4000 - 2 * 2 * edges <= got <= 2 * 2 * 4000
    assert got == _flat_top_count(x, 65536, lsb)
    # a part chunk kept between blocks is the analyzer's own copy
    assert _flat_top_count(x, block, lsb, reuse=True) == got
