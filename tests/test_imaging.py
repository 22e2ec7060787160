"""Imaging detector: spectral correlation between f and its mirror q*r - f.

Analytic references used here (derived in the docstrings, no outside values):

* Sample hold by 2 from rate R to 2R is the filter h = [1, 1] at 2R after zero
  stuffing: H(f) = 1 + exp(-j 2 pi f / 2R), |H(f)| = 2 |cos(pi f / 2R)|.  The image of
  a baseband tone at f sits at R - f with |H(R - f)| = 2 |sin(pi f / 2R)|, so the
  image level relative to the tone is 20*log10|tan(pi f / 2R)| (R = the original rate).
* Linear interpolation by 2 is h = [1/2, 1, 1/2]: H(f) = 1 + cos(2 pi f / 2R) =
  2 cos^2(pi f / 2R), so the image level is 40*log10|tan(pi f / 2R)|.
* Zero stuffing by 2 (gain 2) leaves the image at the level of the tone: 0 dB.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from corpus_sampling import (analyse, good_resample, hold_upsample, linear_upsample, naive_wave, quantise, white,
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


@pytest.mark.parametrize("f", [1000.0, 3000.0, 6000.0, 12000.0, 18000.0])
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
        assert c["coherence"] < 0.01
        assert abs(c["z_score"]) < im.Z_SIGNIFICANT


def test_proper_resampler_leaves_no_defect(rng):
    """The corpus' proper filter has a 100 dB stop band: at most a deep trace."""
    x = good_resample(white(44100, 1.0, rng, 0.1), 44100, 88200)
    m = _run(quantise(x, 24, rng), 88200)
    c = _candidate(m, 44100)
    assert m["imaging_detected"] is False
    assert c["verdict"] in ("trace", "none")
    if c["verdict"] == "trace":
        assert c["image_level_db"] < -90.0


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


def test_no_candidate_below_32k():
    m = _run(_tone(1000.0, fs=32000), 32000)
    assert m["imaging"] == [] and m["imaging_detected"] is None


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
    assert set(np.unique(al).tolist()) == {1600}
    fa = np.minimum(ka, n - ka)
    fb = np.minimum(kb, n - kb)
    assert np.all(fa <= 800) and np.all(np.abs(fa - fb) >= im.PAIR_GUARD_BINS)
    keys = {tuple(sorted((int(a), int(b)))) for a, b in zip(ka, kb)}
    assert len(keys) == ka.size  # no duplicates


def test_null_bias_of_disjoint_frames_is_one_over_m():
    w = np.hanning(100)
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
def test_frame_picker_cuts_the_same_frames_for_any_block_size(block, rng):
    x = rng.standard_normal((20000, 2))
    starts = [0, 5, 4000, 4001, 9000, 15000 - 64, 20000 - 64]
    picker = im.FramePicker(starts, 64, 2)
    got = []
    for i in range(0, x.shape[0], block):
        got += [(s, f.copy()) for s, f in picker.feed(x[i:i + block])]
    assert [s for s, _f in got] == starts
    for s, f in got:
        assert np.array_equal(f, x[s:s + 64])


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
    assert c["image_level_db"] is None or c["image_level_db"] < -90.0
    assert m["imaging_detected"] is False
