"""Imaging detector: spectral correlation between f and its mirror q*r - f.

Analytic references used here (derived in the docstrings, no outside values):

* Sample hold by 2 from rate R to 2R is the filter h = [1, 1] at 2R after zero
  stuffing: H(f) = 1 + exp(-j 2 pi f / 2R), |H(f)| = 2 |cos(pi f / 2R)|.  The image of
  a baseband tone at f sits at R - f with |H(R - f)| = 2 |sin(pi f / 2R)|, so the
  image level relative to the tone is 20*log10|tan(pi f / 2R)| (R = the original rate).
* Linear interpolation by 2 is h = [1/2, 1, 1/2]: H(f) = 1 + cos(2 pi f / 2R) =
  2 cos^2(pi f / 2R), so the image level is 40*log10|tan(pi f / 2R)|.
* Zero stuffing by 2 (gain 2) leaves the image at the level of the tone: 0 dB.
* Sample hold by any whole factor L from R to L*R is the box h = [1]*L after zero stuffing:
  |H(f)| = |sin(pi f L / fs) / (L sin(pi f / fs))| with fs = L*R.  At the first image R - f the
  numerator is sin(pi - pi f L / fs) = sin(pi f L / fs), the same as at f, so the image lies below
  the tone by |sin(pi f / fs) / sin(pi (R - f) / fs)| (the ratio of the denominators), in dB
  20*log10 of it.  For L = 2 this is |sin(pi f / 2R) / cos(pi f / 2R)| = |tan(pi f / 2R)|.
  Linear interpolation is the triangle, the box convolved with itself: twice the hold's dB.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from corpus_sampling import (analyse, good_resample, hold_upsample, linear_upsample, naive_wave, pink, quantise, white,
                             zero_stuff)
from masterqc.measure import imaging as im
from masterqc.measure.imaging import ImagingAnalyzer
from masterqc.measure.options import MeasureOptions

R = 48000


def _tone(f, seconds=1.0, fs=R, amp=0.5):
    return amp * np.sin(2 * math.pi * f * np.arange(int(fs * seconds)) / fs + 0.3)


def _candidate(m, rate):
    return next(c for c in m["imaging"] if c["source_rate_hz"] == rate)


def _run(x, fs, bits=24, options=None):
    return analyse(np.asarray(x).reshape(len(x), -1), fs, [ImagingAnalyzer], bits, options)


@pytest.mark.parametrize("f", [1000.0, 3000.0, 6000.0, 12000.0, 16000.0])
def test_hold_by_two_image_level_is_tan(f):
    """Analytic: 20*log10|tan(pi f / 2R)| (see module docstring)."""
    m = _run(hold_upsample(_tone(f), R, 2 * R), 2 * R)
    c = _candidate(m, R)
    expected = 20 * math.log10(math.tan(math.pi * f / (2 * R)))
    assert c["image_level_db"] == pytest.approx(expected, abs=0.1)
    assert c["verdict"] == "defect"
    assert c["coherence"] > 0.99
    assert m["imaging_detected"] is True


@pytest.mark.parametrize("f", [3000.0, 6000.0, 12000.0])
def test_linear_by_two_image_level_is_tan_squared(f):
    """Analytic: 40*log10|tan(pi f / 2R)| (see module docstring)."""
    m = _run(linear_upsample(_tone(f), R, 2 * R), 2 * R)
    c = _candidate(m, R)
    assert c["image_level_db"] == pytest.approx(40 * math.log10(math.tan(math.pi * f / (2 * R))), abs=0.1)


def test_linear_by_two_deep_image_is_a_trace_not_a_defect():
    """A 1 kHz tone: image at 40*log10 tan(pi/96) = -59.4 dB, below the defect level."""
    m = _run(linear_upsample(_tone(1000.0), R, 2 * R), 2 * R)
    c = _candidate(m, R)
    assert c["verdict"] == "trace"
    assert c["image_level_db"] == pytest.approx(40 * math.log10(math.tan(math.pi * 1000 / (2 * R))), abs=0.3)
    assert c["image_level_db"] < im.DEFECT_IMAGE_LEVEL_DB


def test_zero_stuffing_image_at_full_level(rng):
    x = white(R, 1.0, rng, 0.1)
    m = _run(zero_stuff(x, 2), 2 * R)
    c = _candidate(m, R)
    assert c["image_level_db"] == pytest.approx(0.0, abs=0.5)
    assert c["verdict"] == "defect"


def test_hold_from_32k_to_96k_found_at_32k_only(rng):
    """x3 hold: the images at 32k +- f and 64k +- f are paired; no other rate is implicated."""
    x = white(32000, 1.0, rng, 0.1)
    m = _run(hold_upsample(x, 32000, 96000), 96000)
    verdicts = {c["source_rate_hz"]: c["verdict"] for c in m["imaging"]}
    assert verdicts[32000.0] == "defect"
    assert all(v == "none" for r, v in verdicts.items() if r != 32000.0)


def test_native_noise_is_not_imaged(rng):
    x = np.stack([white(96000, 1.0, rng, 0.1) for _ in range(2)], axis=1)
    m = analyse(quantise(x, 24, rng), 96000, [ImagingAnalyzer])
    assert m["imaging_detected"] is False
    for c in m["imaging"]:
        assert c["verdict"] == "none"
        assert c["coherence"] < 0.01  # house choice: native noise leaves (almost) none
        assert abs(c["z_score"]) < im.Z_SIGNIFICANT


def test_proper_resampler_leaves_no_defect(rng):
    """The corpus' proper filter has a 100 dB stop band: at most a deep trace."""
    x = good_resample(white(44100, 1.0, rng, 0.1), 44100, 88200)
    m = _run(quantise(x, 24, rng), 88200)
    c = _candidate(m, 44100)
    assert m["imaging_detected"] is False
    assert c["verdict"] in ("trace", "none")
    if c["verdict"] == "trace":
        assert c["image_level_db"] < -90.0  # the filter's stop band is 100 dB (by construction); 10 dB margin: house choice


def test_block_size_does_not_change_the_result(rng):
    x = hold_upsample(white(48000, 1.0, rng, 0.1), 48000, 96000)
    a = _run(x, 96000, options=MeasureOptions(block_frames=1000))
    b = _run(x, 96000, options=MeasureOptions(block_frames=65536))
    assert a == b


def test_silence_is_untestable():
    m = _run(np.zeros(96000), 96000)
    assert m["imaging_detected"] is None
    assert all(c["verdict"] == "untestable" and "no signal" in c["reason"] for c in m["imaging"])


def test_short_file_is_untestable():
    m = _run(_tone(1000.0, seconds=0.1, fs=96000), 96000)
    assert m["imaging_detected"] is None
    assert all("too short" in c["reason"] for c in m["imaging"])


def test_no_candidate_at_or_below_8k():
    m = _run(_tone(1000.0, fs=8000), 8000)
    assert m["imaging"] == [] and m["imaging_detected"] is None


def test_candidates_are_every_standard_rate_below_the_file_rate():
    m = _run(_tone(1000.0, fs=32000), 32000)
    assert [c["source_rate_hz"] for c in m["imaging"]] == [8000.0, 11025.0, 16000.0, 22050.0, 24000.0]


def test_periodic_material_locked_to_a_candidate_is_untestable():
    """f0 = 480 Hz at 96 kHz: 100*f0 = 48 kHz, so harmonics pair up like images of 48 kHz."""
    m = _run(naive_wave("saw", 480.0, 96000), 96000)
    c = _candidate(m, 48000)
    assert c["verdict"] == "untestable"
    assert "periodic" in c["reason"]
    assert m["imaging_detected"] is not True


def test_mirror_pairs_sum_to_the_cycle_frequency():
    n = 2400  # 48 kHz at 20 Hz bins
    ka, kb, al = im.mirror_pairs(48000, 32000.0, n)
    assert ka.size > 0
    assert np.all((ka + kb - al) % n == 0)
    # both the direct image (32k - f) and the one folded about Nyquist (16k - f) are paired
    # analytic: the cycle frequency 32 kHz is bin 32000 / 20 = 1600, and 16 kHz (its half) is bin 800
    assert set(np.unique(al).tolist()) == {1600}
    fa = np.minimum(ka, n - ka)
    fb = np.minimum(kb, n - kb)
    assert np.all(fa <= 800) and np.all(np.abs(fa - fb) >= im.PAIR_GUARD_BINS)
    keys = {tuple(sorted((int(a), int(b)))) for a, b in zip(ka, kb)}
    assert len(keys) == ka.size  # no duplicates


def test_null_bias_of_disjoint_frames_is_one_over_m():
    w = np.hanning(100)
    # analytic: M disjoint frames of independent noise leave a coherence of 1/M on average; M = 4 -> 0.25
    assert im.null_coherence_bias([0, 100, 200, 300], w) == pytest.approx(0.25)
    assert im.null_coherence_bias([0, 0], w) == pytest.approx(1.0)


def test_frame_starts_are_irregular_and_inside():
    s = im.frame_starts(96000, 4800, 192, 2400)
    assert s.min() >= 0 and s.max() <= 96000 - 4800
    assert np.all(np.diff(s) >= 0)
    assert np.unique(np.diff(s)).size > 3


def test_locked_order():
    assert im.locked_order(480.0, 48000.0, 96000.0, 0.5) == 100
    assert im.locked_order(435.2, 32000.0, 96000.0, 0.5) is None


def test_keys_are_declared():
    m = _run(_tone(1000.0, fs=96000), 96000)
    assert set(m) == set(ImagingAnalyzer.measurement_schema)


@pytest.mark.parametrize("block", [1, 7, 480, 4800, 100000])
@pytest.mark.parametrize("frame_len", [64, 3000])
def test_frame_picker_cuts_the_same_frames_for_any_block_size(block, frame_len, rng):
    """By construction: the frames are the stream's samples at the given starts, whatever the
    blocks (overlapping frames and frames longer than a block included), even when the caller
    reuses its block buffer after each block."""
    x = rng.standard_normal((20000, 2))
    starts = sorted({0, 5, 4000, 4001, 9000, 15000 - frame_len, 20000 - frame_len})
    picker = im.FramePicker(starts, frame_len, 2)
    got = []
    buf = np.empty((block, 2))
    for i in range(0, x.shape[0], block):
        piece = buf[:min(block, x.shape[0] - i)]
        piece[:] = x[i:i + block]
        got += [(s, f.copy()) for s, f in picker.feed(piece)]
        piece[:] = np.nan                 # the caller reuses its buffer
    assert [s for s, _f in got] == starts
    for s, f in got:
        assert np.array_equal(f, x[s:s + frame_len])


def test_programme_material_is_testable_and_never_a_false_defect():
    """Music and speech of the corpus's programme group: a proper resampler leaves no image
    defect (at most a trace), native music gets a verdict at every candidate rate (not
    "untestable" because drums make the power vary from frame to frame), and music upsampled
    by hold, linear interpolation or zero stuffing is still a defect at its source rate."""
    from corpus_sampling import corpus
    seen = 0
    for sig in corpus(groups={"programme"}):
        m = _run(sig.data, sig.fs)
        verdicts = {c["source_rate_hz"]: c["verdict"] for c in m["imaging"]}
        if sig.labels["imaging"]:
            src = int(sig.name.split("_from_")[1].split("_")[0])
            assert verdicts[src] == "defect", (sig.name, m["imaging"])
        else:
            assert "defect" not in verdicts.values(), (sig.name, m["imaging"])
            assert m["imaging_detected"] is False, sig.name
            if sig.name.startswith("music"):
                assert "untestable" not in verdicts.values(), (sig.name, m["imaging"])
        seen += 1
    assert seen >= 12


def test_proper_44k1_to_96k_music_is_at_most_a_trace(rng):
    """The reported case: 12 s of music converted 44.1 -> 96 kHz with the corpus's proper
    resampler (100 dB stop band from 22.05 kHz).  Whatever coherence is left is the filter's
    stop-band residue, far below the defect level."""
    from masterqc import demo
    x = demo.music(6.0, 44100, rng)
    y = np.stack([good_resample(x[:, c], 44100, 96000) for c in range(2)], axis=1)
    y = 0.5 * y / np.max(np.abs(y))
    m = _run(y, 96000)
    c = _candidate(m, 44100)
    assert c["verdict"] in ("none", "trace"), c
    # 100 dB stop band by construction; -90 dB keeps a 10 dB margin (house choice)
    assert c["image_level_db"] is None or c["image_level_db"] < -90.0
    assert m["imaging_detected"] is False


def _hold_by(x, factor):
    return np.repeat(np.asarray(x, dtype=float), factor)


def _linear_by(x, factor):
    n = len(x) * factor
    return np.interp(np.arange(n) / factor, np.arange(len(x)), x)


@pytest.mark.parametrize("src,factor,f", [(8000, 12, 2300.0), (16000, 3, 4100.0), (22050, 4, 5500.0),
                                          (24000, 8, 6100.0), (11025, 4, 2600.0)])
def test_hold_by_l_first_image_is_the_box_response(src, factor, f):
    """Analytic (module docstring): sample hold by L leaves its first image at R - f at
    20*log10|sin(pi f / fs) / sin(pi (R - f) / fs)| below the tone, fs = L*R.  Tones inside the
    inner band (0.3-0.7 of the source Nyquist frequency), sources below 32 kHz included."""
    fs = src * factor
    m = _run(_hold_by(_tone(f, fs=src), factor), fs)
    c = _candidate(m, float(src))
    expected = 20 * math.log10(math.sin(math.pi * f / fs) / math.sin(math.pi * (src - f) / fs))
    assert c["image_level_db"] == pytest.approx(expected, abs=0.1)
    assert c["verdict"] == "defect" and m["imaging_detected"] is True
    assert im.image_response_ratio("hold", src, fs, f) == pytest.approx(10 ** (expected / 10), rel=1e-9)


@pytest.mark.parametrize("src,factor,f", [(16000, 3, 4100.0), (44100, 4, 10000.0), (8000, 6, 2300.0)])
def test_linear_by_l_first_image_is_the_triangle_response(src, factor, f):
    """Analytic: the triangle is the box convolved with itself, so the image lies twice the hold's dB
    below the tone: 40*log10|sin(pi f / fs) / sin(pi (R - f) / fs)|."""
    fs = src * factor
    m = _run(_linear_by(_tone(f, fs=src), factor), fs)
    c = _candidate(m, float(src))
    expected = 40 * math.log10(math.sin(math.pi * f / fs) / math.sin(math.pi * (src - f) / fs))
    assert c["image_level_db"] == pytest.approx(expected, abs=0.15)
    assert c["verdict"] == "defect"
    assert im.image_response_ratio("linear", src, fs, f) == pytest.approx(10 ** (expected / 10), rel=1e-9)


@pytest.mark.parametrize("factor", [3, 5, 12])
def test_zero_stuffing_by_l_leaves_images_at_the_content_level(rng, factor):
    """Analytic: inserting L-1 zeros replicates the spectrum unchanged around every multiple of the
    source rate, so the first image is as strong as the content: 0 dB."""
    src = 8000 if factor == 12 else 16000
    x = white(src, 1.5, rng, 0.1)
    y = np.zeros(len(x) * factor)
    y[::factor] = x * factor
    m = _run(y, src * factor)
    c = _candidate(m, float(src))
    assert c["image_level_db"] == pytest.approx(0.0, abs=0.5)
    assert c["verdict"] == "defect"
    assert im.image_response_ratio("zero-stuff", src, src * factor, [1000.0, 3000.0]).tolist() == [1.0, 1.0]


def _short_sinc(src, up, taps_per_phase, cutoff, beta):
    """A short Kaiser-windowed sinc interpolation filter at src*up, -6 dB at ``cutoff`` of the source
    Nyquist frequency (scipy.signal.firwin: the cutoff is the -6 dB point of the windowed sinc)."""
    from scipy import signal as sps
    return sps.firwin(taps_per_phase * up + 1, cutoff * src / 2.0, window=("kaiser", beta), fs=float(src * up))


@pytest.mark.parametrize("taps,cutoff,beta", [(12, 1.0, 5.0), (16, 1.0, 6.0), (32, 0.97, 9.0)])
def test_short_filters_stop_the_inner_band_images_and_leak_the_top(taps, cutoff, beta):
    """The physics behind INNER_BAND and DEFECT_IMAGE_LEVEL_DB, from scipy's filter design: a short
    windowed-sinc interpolation filter whose transition band straddles the source Nyquist frequency
    passes the images of the band's top (content at 0.9 of the Nyquist frequency: image at 1.1) within
    40 dB, but keeps every image of content at or below 0.7 of it (images at 1.3 and beyond) under the
    defect level, and those of the inner band as a whole (flat content) 5 dB and more under it; hold and
    linear interpolation leave those at -15 / -30 dB at most (image_response_ratio, derived above)."""
    from scipy import signal as sps
    src, up = 48000, 4
    w, h = sps.freqz(_short_sinc(src, up, taps, cutoff, beta), worN=1 << 16, fs=src * up)
    a = np.abs(h)

    def ratio_db(frac):
        f = frac * src / 2
        return 20 * math.log10(np.interp(src - f, w, a) / np.interp(f, w, a))

    assert ratio_db(0.9) > -40.0
    # every image of content up to the inner band's top below the line, and on flat content the inner
    # band's images as a whole (the power mean the analyzer reports) at least 5 dB below it
    assert max(ratio_db(fr) for fr in np.linspace(0.05, im.INNER_BAND[1], 30)) < im.DEFECT_IMAGE_LEVEL_DB
    inner = np.linspace(im.INNER_BAND[0], im.INNER_BAND[1], 201)
    mean_db = 10 * math.log10(float(np.mean([10 ** (ratio_db(fr) / 10) for fr in inner])))
    assert mean_db < im.DEFECT_IMAGE_LEVEL_DB - 5.0
    worst_hold = 10 * math.log10(im.image_response_ratio("hold", src, src * up, im.INNER_BAND[0] * src / 2))
    worst_linear = 10 * math.log10(im.image_response_ratio("linear", src, src * up, im.INNER_BAND[0] * src / 2))
    assert worst_hold > -16.0 and worst_linear > -31.0 > im.DEFECT_IMAGE_LEVEL_DB + 10.0


@pytest.mark.parametrize("src,dst", [(44100, 96000), (48000, 192000), (22050, 48000)])
def test_leaky_short_resampler_is_a_trace_not_imaging(rng, src, dst):
    """scipy resample_poly with a 16-tap-per-phase Kaiser (beta 6) sinc, -6 dB at the source Nyquist
    frequency: coherent images exist (its transition band leaks the top of the band), but those of the
    inner band's content are deep, so the file is not imaged.  The same noise held is."""
    from fractions import Fraction
    from scipy import signal as sps
    fr = Fraction(dst, src)
    x = pink(src, 2.0, rng, 0.1)
    y = sps.resample_poly(x, fr.numerator, fr.denominator, window=_short_sinc(src, fr.numerator, 16, 1.0, 6.0))
    m = _run(quantise(y[:, None], 24, rng)[:, 0], dst)
    c = _candidate(m, float(src))
    assert m["imaging_detected"] is False
    assert c["verdict"] == "trace" and c["image_level_db"] < im.DEFECT_IMAGE_LEVEL_DB - 10.0
    held = hold_upsample(x, src, dst)
    m2 = _run(quantise(held[:, None], 24, rng)[:, 0], dst)
    assert m2["imaging_detected"] is True and _candidate(m2, float(src))["verdict"] == "defect"


def test_images_of_the_band_top_alone_are_not_judged_from_the_spectrum():
    """A hold by 2 of a tone at 0.8 of the source Nyquist frequency: its image (analytically
    20*log10 tan(0.4 pi) ... -1.9 dB) lies where a short resampler's transition band leaks too, so
    the spectral test does not call it a defect (a trace); the held samples do (runs of exactly 2 repeated
    values: the imaging analyzer's own count, and the sample pattern of the next test)."""
    m = _run(hold_upsample(_tone(19200.0), R, 2 * R), 2 * R)
    c = _candidate(m, R)
    assert c["evidence"] == "samples" and "the spectral test alone: trace" in c["reason"]
    assert c["verdict"] == "defect" and m["imaging_detected"] is True


def test_sample_pattern_makes_the_images_a_defect_with_their_predicted_level():
    """Harmonics 1..16 of 1 kHz (amplitude 1/k) held from 48 to 96 kHz: 48 x 1 kHz = 48 kHz, so the
    material's own periodicity meets the candidate's cycle frequency and the spectral test cannot tell
    (untestable).  With the interpolation analyzer in the run the file is imaged all the same: the
    pattern proves a hold upsampler from 48 kHz, whose first image of a partial at f lies
    tan^2(pi f / 96000) below it in power (box response, module docstring).  The level is taken over
    the inner band's partials (k = 8..16, 7.2-16.8 kHz) as they are in the file, i.e. after the hold's
    own response cos^2(pi f / 96000): sum k^-2 sin^2(pi k / 96) / sum k^-2 cos^2(pi k / 96)."""
    from masterqc.measure.interpolation import InterpolationTraceAnalyzer
    t = np.arange(R) / R
    x = sum(np.sin(2 * np.pi * 1000.0 * k * t + 0.1 * k) / k for k in range(1, 17))
    x = quantise(hold_upsample(0.3 * x / np.max(np.abs(x)), R, 2 * R)[:, None], 24, np.random.default_rng(4))
    alone = _candidate(_run(x[:, 0], 2 * R), R)
    # the spectral test alone cannot tell; the imaging analyzer's own count of exactly repeated samples (runs of
    # 2, a hold from 48 kHz) can
    assert alone["verdict"] == "defect" and alone["evidence"] == "samples"
    assert "spectral test alone: untestable (periodic" in alone["reason"]
    m = analyse(x, 2 * R, [ImagingAnalyzer, InterpolationTraceAnalyzer])
    assert m["interpolation_source_rate_hz"] == R and m["interpolation_kind"] == "hold"
    c = _candidate(m, R)
    assert c["verdict"] == "defect" and c["evidence"] == "samples" and m["imaging_detected"] is True
    k = np.arange(8, 17)
    expected = 10 * math.log10(np.sum(k ** -2.0 * np.sin(np.pi * k / 96) ** 2) / np.sum(k ** -2.0 * np.cos(np.pi * k / 96) ** 2))
    assert c["image_level_db"] == pytest.approx(expected, abs=0.05)  # analytic (docstring); 0.05 dB: house choice


def test_sparse_held_material_found_through_its_sample_pattern(rng):
    """Three short bursts in 2 s of near-silence, held from 11.025 to 44.1 kHz: few frames carry the
    images, yet the file is imaged (the pattern names the source), at the hold's level."""
    from masterqc.measure.interpolation import InterpolationTraceAnalyzer
    src, fs = 11025, 44100
    x = 1e-4 * rng.standard_normal(2 * src)
    for s0 in (3000, 9000, 16000):
        x[s0:s0 + 400] += 0.3 * rng.standard_normal(400) * np.hanning(400)
    y = quantise(np.repeat(x, 4)[:, None], 24, rng)
    m = analyse(y, fs, [ImagingAnalyzer, InterpolationTraceAnalyzer])
    c = _candidate(m, float(src))
    assert m["imaging_detected"] is True and c["verdict"] == "defect"
    # house choice: a wide band around the analytic level of a 4x hold's first image (box response,
    # module docstring) for noise bursts whose spectrum is not known in advance
    assert -16.0 < c["image_level_db"] < -1.0


def test_a_trace_names_the_source_only_when_nothing_else_did():
    """House rule (the last step of provenance.combine): the lowest rate with a resampler's trace
    names the source when no cliff, pattern or defect did; an existing verdict is never replaced."""
    from masterqc.measure import provenance
    imaging = [{"source_rate_hz": 88200.0, "verdict": "trace", "image_level_db": -84.0, "channel": "L",
                "channels": ["L", "R"]},
               {"source_rate_hz": 44100.0, "verdict": "trace", "image_level_db": -77.0, "channel": "L",
                "channels": ["L", "R"]},
               {"source_rate_hz": 22050.0, "verdict": "none", "image_level_db": None, "channel": "L",
                "channels": []}]
    m = provenance.from_traces({"upsampled_from_hz": None, "imaging": imaging})
    assert m["upsampled_from_hz"] == 44100 and m["upsampled_evidence"] == "images"
    assert m["upsampled_channels"] == ["L", "R"] and "-77 dB" in m["bandwidth_note"]
    kept = provenance.from_traces({"upsampled_from_hz": 48000, "imaging": imaging})
    assert kept["upsampled_from_hz"] == 48000 and "upsampled_evidence" not in kept
    none = provenance.from_traces({"upsampled_from_hz": None, "imaging": imaging[2:]})
    assert none["upsampled_from_hz"] is None
    assert provenance.from_traces({"imaging": imaging}) == {"imaging": imaging}   # no bandwidth analysis run
    # combine runs the trace step after the pattern and image steps, as the post-step it replaces did
    both = provenance.combine({"upsampled_from_hz": None, "imaging": imaging})
    assert both["upsampled_from_hz"] == 44100 and both["upsampled_evidence"] == "images"
    from masterqc.measure.registry import post_steps
    assert post_steps()[-1] == provenance.combine      # the trace step runs inside the last post-step


@pytest.mark.parametrize("make", ["hold", "good", "tones"])
def test_kept_spectra_and_streamed_sums_give_the_same_result(make, rng, monkeypatch):
    """By construction: with the frames' spectra kept, the pairs only a significant candidate needs
    (controls, first-half sums) are summed at finish, frame by frame in the same order as the
    streamed sums; with the store disabled every pair is summed while streaming.  Both must give
    the same measurements to the last bit, on an imaged file (hold from 24 kHz: controls and
    half-file sums are used), a properly resampled one and a line spectrum (pairs of lines)."""
    fs = 48000
    if make == "hold":
        x = hold_upsample(pink(24000, 2.0, rng), 24000, fs)
    elif make == "good":
        x = good_resample(pink(32000, 2.0, rng), 32000, fs)
    else:
        t = np.arange(2 * fs) / fs
        x = 0.3 * np.sin(2 * np.pi * 997.0 * t) + 0.2 * np.sin(2 * np.pi * 7001.0 * t) + 0.01 * white(fs, 2.0, rng)
    x = np.stack([x, 0.5 * x[::-1]], axis=1)
    kept = _run(x, fs)
    monkeypatch.setattr(im, "SPECTRA_STORE_MAX_BYTES", 0)
    streamed = _run(x, fs)
    assert kept == streamed
    if make == "hold":
        assert kept["imaging_detected"] is True and _candidate(kept, 24000)["verdict"] == "defect"



def _steady_a_notes(fs, seconds, rng):
    """Steady (vibrato-free) harmonic notes on 110 and 220 Hz, partials up to 0.48 fs with 1/k
    amplitudes, over a quiet pink bed (-30 dB re the notes' RMS)."""
    t = np.arange(int(fs * seconds)) / fs
    x = np.zeros(t.size)
    for f0 in (110.0, 220.0):
        for k in range(1, int(0.48 * fs / f0) + 1):
            x += np.sin(2 * math.pi * k * f0 * t + rng.uniform(0, 2 * math.pi)) / k
    x /= np.std(x)
    return 0.1 * (x + pink(fs, seconds, rng, 0.03))


def test_partials_summing_to_the_fold_frequency_are_not_images(rng):
    """Steady notes on 110 Hz (and 220 Hz) converted from 32 to 44.1 kHz by libsamplerate's best sinc
    converter.  The images of a 32 kHz source fold at 44.1 kHz to 12 100 Hz - f, and 12 100 = 110 x 110:
    every pair of partials k*110 and (110 - k)*110 sums to that fold frequency and keeps its phase
    relation over the file, exactly as a component and its image would (a periodic signal is
    cyclostationary at every multiple of its fundamental).  The images a hold would leave above 16 kHz,
    clear of the programme, are absent (the converter's stop band lies below the 24-bit floor), so the
    file is not imaged; held, it is."""
    samplerate = pytest.importorskip("samplerate")
    x = _steady_a_notes(32000, 2.0, rng)
    y = np.asarray(samplerate.resample(x, 44100 / 32000, "sinc_best"), dtype=float)
    m = _run(quantise(y[:, None], 24, rng)[:, 0], 44100)
    c = _candidate(m, 32000.0)
    assert m["imaging_detected"] is False
    assert c["verdict"] in ("none", "trace") and c["z_score"] >= im.Z_SIGNIFICANT   # coherent, yet not images
    held = hold_upsample(x, 32000, 44100)
    m2 = _run(quantise(held[:, None], 24, rng)[:, 0], 44100)
    assert m2["imaging_detected"] is True and _candidate(m2, 32000.0)["verdict"] == "defect"


# ---------------------------------------------------------------- short FIR interpolators (the house line)
def _fir_upsample(x, src, up, taps, cutoff, window):
    """Zero stuffing by ``up`` and a ``taps``-tap scipy.signal.firwin low-pass at src*up, -6 dB at ``cutoff`` of
    the source Nyquist frequency (scipy.signal.resample_poly with the taps as its window); returns (y, h)."""
    from scipy import signal as sps
    h = sps.firwin(taps, cutoff * src / 2.0, window=window, fs=float(src * up))
    return sps.resample_poly(x, up, 1, window=h), h


def _fir_inner_level_db(h, src, up):
    """Analytic image level of white content through ``h``: zero stuffing by ``up`` puts a mirror copy of the
    baseband X(f) at src - f (conjugated); the filter leaves the content at |H(f)|^2 sigma^2 and its first image
    at |H(src - f)|^2 sigma^2, so the inner band's images relative to that content are
    sum |H(src - f)|^2 / sum |H(f)|^2 over f in INNER_BAND of src/2 (H from the taps, scipy.signal.freqz)."""
    from scipy import signal as sps
    f = np.arange(math.ceil(im.INNER_BAND[0] * src / 2 / im.BIN_HZ),
                  math.floor(im.INNER_BAND[1] * src / 2 / im.BIN_HZ) + 1) * im.BIN_HZ
    _w, h_in = sps.freqz(h, worN=f, fs=float(src * up))
    _w, h_im = sps.freqz(h, worN=src - f, fs=float(src * up))
    return 10 * math.log10(float(np.sum(np.abs(h_im) ** 2) / np.sum(np.abs(h_in) ** 2)))


def _subband_levels_db(h, src, up):
    """The same ratio per CLEAR_SUBBANDS sub-band (white content), from the taps."""
    from scipy import signal as sps
    out = []
    for lo, hi in im.CLEAR_SUBBANDS:
        f = np.linspace(lo, hi, 41)[:-1] * src / 2
        _w, h_in = sps.freqz(h, worN=f, fs=float(src * up))
        _w, h_im = sps.freqz(h, worN=src - f, fs=float(src * up))
        out.append(10 * math.log10(float(np.sum(np.abs(h_im) ** 2) / np.sum(np.abs(h_in) ** 2))))
    return out


def test_short_fir_with_minus_31_7_db_side_lobes_is_imaging(rng):
    """32 -> 96 kHz by a 32-tap Kaiser FIR, -6 dB at 0.9 of the source Nyquist frequency, its window chosen by
    Kaiser's formula for a 31.7 dB stop band (scipy.signal.kaiser_beta): the images reach about -32 dB (its
    first side lobe, from the taps), and those of the inner band's content lie at about -44 dB, as strong as
    linear interpolation's (-30 dB at 0.3 of the Nyquist frequency).  By the house definition
    (DEFECT_IMAGE_LEVEL_DB, -50 dB) that is imaging; the analyzer's level matches the taps' within 1.5 dB."""
    from scipy import signal as sps
    src, up = 32000, 3
    x = white(src, 3.0, rng, 0.1)
    y, h = _fir_upsample(x, src, up, 32, 0.9, ("kaiser", float(sps.kaiser_beta(31.7))))
    w, hh = sps.freqz(h, worN=1 << 15, fs=src * up)
    side_lobe_db = 20 * math.log10(np.max(np.abs(hh[w >= 0.55 * src])) / np.abs(hh[0]))
    assert -35.0 < side_lobe_db < -29.0
    expected = _fir_inner_level_db(h, src, up)
    assert DEFECT_LINE_MARGIN_DB <= expected - im.DEFECT_IMAGE_LEVEL_DB <= 8.0
    m = _run(quantise(y[:, None], 24, rng)[:, 0], src * up)
    c = _candidate(m, float(src))
    assert c["verdict"] == "defect" and m["imaging_detected"] is True
    # analytic (from the taps); house choice: 1.5 dB for the estimate from 3 s of noise
    assert c["image_level_db"] == pytest.approx(expected, abs=1.5)
    # analytic: images alone above the Nyquist frequency explain all of it; house choice: 0.05 for noise
    assert c["images_explained_fraction"] > 0.95


#: the analytic level of the FIR cases stands at least this far from the line (house choice)
DEFECT_LINE_MARGIN_DB = 3.0


def test_images_under_the_line_in_part_of_the_band_do_not_rule_them_out(rng):
    """16 -> 96 kHz by a 40-tap Kaiser (beta 5) FIR, -6 dB at the source Nyquist frequency: from its taps, the
    images of the inner band lie 18 dB above the line as a whole (its transition band reaches into the band),
    yet in the two lowest sub-bands (0.3-0.5 of the Nyquist frequency) they lie under it.  An upsampler's
    images mirror the whole band at a level one response sets, and a short filter's response varies over the
    band, so the images are ruled out only where most sub-bands with content lack them (CLEAR_RULE_OUT_SHARE):
    a defect, at the taps' level."""
    src, up = 16000, 6
    x = white(src, 3.0, rng, 0.1)
    y, h = _fir_upsample(x, src, up, 40, 1.0, ("kaiser", 5.0))
    subs = _subband_levels_db(h, src, up)
    below = [v for v in subs if v < im.DEFECT_IMAGE_LEVEL_DB]
    assert 2 <= len(below) < im.CLEAR_RULE_OUT_SHARE * len(subs)
    expected = _fir_inner_level_db(h, src, up)
    assert expected > im.DEFECT_IMAGE_LEVEL_DB + 10.0
    m = _run(quantise(y[:, None], 24, rng)[:, 0], src * up)
    c = _candidate(m, float(src))
    assert c["verdict"] == "defect", c
    # analytic (from the taps); house choice: 1.5 dB for the estimate from 3 s of noise
    assert c["image_level_db"] == pytest.approx(expected, abs=1.5)
    # analytic: images alone above the Nyquist frequency explain all of it; house choice: 0.05 for noise
    assert c["images_explained_fraction"] > 0.95


@pytest.mark.parametrize("taps,cutoff,beta", [(48, 0.8, 5.0), (40, 0.9, 6.0)])
def test_short_fir_with_a_deep_stop_band_is_a_trace(rng, taps, cutoff, beta):
    """48 -> 96 kHz by short Kaiser FIRs whose inner-band images lie, from their taps, 10 dB and more under the
    line: coherent images (the file is upsampled), but no imaging."""
    src, up = 48000, 2
    x = white(src, 3.0, rng, 0.1)
    y, h = _fir_upsample(x, src, up, taps, cutoff, ("kaiser", beta))
    expected = _fir_inner_level_db(h, src, up)
    assert expected < im.DEFECT_IMAGE_LEVEL_DB - 10.0
    m = _run(quantise(y[:, None], 24, rng)[:, 0], src * up)
    c = _candidate(m, float(src))
    assert m["imaging_detected"] is False
    assert c["verdict"] == "trace"
    assert c["image_level_db"] is None or c["image_level_db"] < im.DEFECT_IMAGE_LEVEL_DB


# ---------------------------------------------------------------- the null's spread, measured on the material
def test_null_spread_of_independent_pairs_is_about_one(rng):
    """By construction the pooled statistic is a z score: for material whose pairs are independent under the
    null (white noise held by 2 from 48 kHz: images at the candidate, white noise at the controls, which no
    upsampler uses), the root-mean-square z over the 8 controls is a chi statistic with 8 degrees of freedom
    over sqrt(8): within 0.3-1.7 with probability above 0.99 (scipy.stats.chi), made a little smaller by
    NULL_VARIANCE_INFLATION's margin.  The images themselves stand far above it, and explain all of the band
    above the source Nyquist frequency: there the file holds its images and nothing else."""
    from scipy import stats
    lo, hi = stats.chi.ppf([0.005, 0.995], 8) / math.sqrt(8)
    assert 0.3 < lo and hi < 1.7
    m = _run(hold_upsample(white(R, 2.0, rng, 0.1), R, 2 * R), 2 * R)
    c = _candidate(m, float(R))
    assert c["verdict"] == "defect"
    assert 0.2 < c["null_spread_z"] < hi
    assert c["z_score"] > 20 * im.Z_SIGNIFICANT * max(1.0, c["null_spread_z"])
    assert c["images_explained_fraction"] > 0.99


def _naive_voices(fs, seconds, rng, kind):
    """Three overlapping voices of a naive (non-band-limited) oscillator, steady pitches 55-880 Hz, envelopes."""
    n = int(fs * seconds)
    out = np.zeros(n)
    for _v in range(3):
        pos = int(rng.uniform(0, 0.3) * fs)
        while pos < n - int(0.3 * fs):
            length = min(int(rng.uniform(0.8, 2.5) * fs), n - pos)
            f0 = 55.0 * 2 ** (int(rng.integers(0, 49)) / 12.0)
            t = np.arange(length) / fs
            ph = np.mod(rng.uniform() + f0 * t, 1.0)
            wave = 2 * ph - 1 if kind == "saw" else np.where(ph < 0.2, 1.0, -1.0) + 0.6
            out[pos:pos + length] += rng.uniform(0.5, 1.0) * np.minimum(1, t / 0.01) * np.exp(-t * 0.5) * wave
            pos += length + int(rng.uniform(0, 0.15) * fs)
    return 0.3 * out / np.max(np.abs(out))


@pytest.mark.parametrize("fs,kind", [(96000, "saw"), (176400, "pulse"), (192000, "saw"), (88200, "pulse")])
def test_naive_synthesis_at_high_rates_is_not_imaged(fs, kind):
    """Naive synthesis folds its partials at the file's Nyquist frequency; a folded partial and a direct one
    can sum to a candidate's cycle frequency and keep their phase over the file (steady notes here).  Never a
    defect: such pairs are judged against the spread at control cycle frequencies, which they share, and
    they explain little of what lies above the candidate's Nyquist frequency (the other notes' partials have
    no partner there), where an upsampler's images would explain all of it."""
    rng = np.random.default_rng(fs + len(kind))
    m = _run(_naive_voices(fs, 4.0, rng, kind), fs)
    assert m["imaging_detected"] is not True
    for c in m["imaging"]:
        assert c["verdict"] != "defect", c
        if c["images_explained_fraction"] is not None and c["z_score"] > 100:
            assert c["images_explained_fraction"] < im.MIN_IMAGES_EXPLAINED_FRACTION


class _KeptImaging(ImagingAnalyzer):
    """The imaging analyzer, kept after :meth:`finish` so the tests can ask it about further cycle frequencies."""
    last = None

    def finish(self):
        type(self).last = self
        return super().finish()


def _kept(x, fs):
    analyse(np.asarray(x).reshape(len(x), -1), fs, [_KeptImaging])
    return _KeptImaging.last


@pytest.mark.parametrize("fs", [44100, 48000])
def test_block_framing_is_coherent_at_every_harmonic_of_its_frame_rate(rng, fs):
    """Analytic: independent random impulses every P = 576 samples at positions n_j = j P, X(f) = sum_j a_j
    exp(-j 2 pi f n_j / fs); at alpha = k fs / P every exp(j 2 pi alpha n_j / fs) = exp(j 2 pi k j) = 1, so
    X(f - alpha) = X(f): the train is cyclostationary at every harmonic k fs / P with unit spectral coherence.
    Added to white noise of equal power (the impulses' power a^2 / P), the coherence magnitude is 1/2 at every
    f (both flat), so fs/2 = 288 fs/576 and its neighbours fs/2 +- fs/576 are all strongly coherent: the trace
    a block coder's framing leaves, which must not name a source rate."""
    n = 4 * fs
    x = rng.standard_normal(n)
    x[::576] += math.sqrt(576.0) * rng.standard_normal(x[::576].size)
    a = _kept(0.05 * x, fs)
    half = fs / 2.0
    z_own = a._z_at(0, half, half)
    z_nb = [a._z_at(0, half + s * fs / 576.0, half) for s in (-1, 1)]
    assert z_own > 4 * im.Z_SIGNIFICANT
    assert min(z_nb) > max(im.Z_SIGNIFICANT, im.FRAMING_Z_RELATIVE * z_own)
    # fs/32 = 18 fs/576 is a harmonic too: the first period the rule tries names it
    assert a._coder_framing(0, half) == (32, pytest.approx(z_own), pytest.approx(min(
        a._z_at(0, half + s * fs / 32.0, half) for s in (-1, 1))))
    # half way between two harmonics (fs/1152 off) the train is not coherent: the statistic resolves the comb
    # (own reasoning: a leak of the main lobe, 1.5-1.7 bins away, stays under a tenth of the harmonic's z)
    assert abs(a._z_at(0, half + fs / 1152.0, half)) < 0.1 * z_own


@pytest.mark.parametrize("kind", ["zero-stuff", "linear", "hold"])
def test_upsampler_trace_is_not_coherent_at_a_coders_framing_harmonics(rng, kind):
    """Analytic: an upsampler by 2 from R = fs/2 turns its source into a(n) x_up(n), x_up zero-stuffed and
    filtered: X(f) = H(f) Xs(f) with Xs periodic in R, so X(f) and X(f - q R) are linked for whole q only: the
    spectral correlation sits at multiples of R, not at R +- fs/576 (nor +- fs/1152, fs/1024, fs/2048), where
    the frames' phase corrections of independent components average out.  The rule that takes a coder's framing
    out therefore leaves an upsampler's trace alone."""
    fs = 44100
    src = rng.standard_normal(2 * fs) * 0.1
    y = zero_stuff(src, 2) if kind == "zero-stuff" else \
        {"linear": linear_upsample, "hold": hold_upsample}[kind](src, fs // 2, fs)
    a = _kept(y, fs)
    half = fs / 2.0
    z_own = a._z_at(0, half, half)
    assert z_own > 4 * im.Z_SIGNIFICANT
    for hop in im.CODER_HOPS_SAMPLES:
        for s in (-1, 1):
            # (a neighbour 21.5 Hz off, hop 2048, is inside the 25 Hz bins' main lobe and keeps a few
            # per cent of the candidate's z; own reasoning)
            assert abs(a._z_at(0, half + s * fs / hop, half)) < 0.05 * z_own, (hop, s)
    assert a._coder_framing(0, half) is None
    m = _run(y, fs)
    assert _candidate(m, float(fs // 2))["verdict"] == "defect"


def test_filter_bank_aliasing_in_an_empty_band_is_a_coders_framing_not_a_conversion(rng, monkeypatch):
    """Analytic: a critically sampled filter bank of 32 bands whose aliasing is not cancelled (its bands
    quantised apart) leaves copies of the content shifted by every k fs/32.  Modelled exactly: c(n) = 32 for
    n = 0 mod 32, else 0, equals sum_{k=0}^{31} exp(j 2 pi k n / 32), so x(n) c(n) holds x shifted by every
    k fs/32 with gain 1; y = x + eps * highpass(x c) with x low-passed at 15 kHz puts those copies alone above
    17 kHz.  The term k = 16 is x(n) (-1)^n, the copy at fs/2 - f: at fs/2 = 44.1 kHz / 2 a coherent image of
    the content at eps (-80 dB here), too deep for a defect, a trace, which would name 22.05 kHz; but the
    neighbours fs/2 +- fs/32 are as coherent, where a conversion from 22.05 kHz leaves nothing (images at
    multiples of 22.05 kHz only).  So the candidate is untestable, and only the rule makes it so."""
    from scipy import signal as sps
    fs = 44100
    x = sps.sosfiltfilt(sps.butter(12, 15000, fs=fs, output="sos"), pink(fs, 4.0, rng, 0.1))
    c = np.zeros(x.size)
    c[::32] = 32.0
    y = x + 1e-4 * sps.sosfiltfilt(sps.butter(12, 17000, btype="high", fs=fs, output="sos"), x * c)
    cand = _candidate(_run(y, fs), fs / 2)
    assert cand["verdict"] == "untestable" and "every 32 samples" in cand["reason"]
    monkeypatch.setattr(im, "FRAMING_Z_RELATIVE", 1e9)       # the rule off: the trace, at eps exactly
    cand = _candidate(_run(y, fs), fs / 2)
    assert cand["verdict"] == "trace" and cand["image_level_db"] == pytest.approx(-80.0, abs=0.5)
