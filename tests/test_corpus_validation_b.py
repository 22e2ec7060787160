"""Self-check of the second held-back validation corpus (bench/corpus_validation_b.py).

Checks the quick slice against the shared case format (names, set, shapes, levels, labels) and the
construction facts its labels rest on; no detector is run here.  The analytic checks carry their derivations.
"""
from __future__ import annotations

import importlib.util
import math
import re
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

ROOT = Path(__file__).resolve().parents[1]
spec = importlib.util.spec_from_file_location("corpus_validation_b", ROOT / "bench" / "corpus_validation_b.py")
cvb = importlib.util.module_from_spec(spec)
sys.modules["corpus_validation_b"] = cvb       # the module's dataclass looks itself up there
spec.loader.exec_module(cvb)

SEED = 6000
GROUPS = {"upsampled", "upsampled-one-channel", "native", "speech", "lowpass", "ambiguous-lowpass", "codec-shelf",
          "downsampled", "naive-synth", "band-limited-synth", "decimation", "filtered-decimation", "imaging"}
EXPECT_KEYS = {"upsampled_from_hz", "upsampled_channels", "imaging_detected", "aliasing_detected"}


@pytest.fixture(scope="module")
def quick():
    facts: dict = {}
    return list(cvb.cases(SEED, quick=True, facts=facts)), facts


def _rms_db(y):
    return 10 * math.log10(float(np.mean(np.square(y))))


def test_quick_slice_follows_the_case_format(quick):
    cs, _ = quick
    assert 15 <= len(cs) <= 30
    names = [c.name for c in cs]
    assert len(set(names)) == len(names)
    for c in cs:
        assert re.fullmatch(r"[a-z0-9_-]+", c.name), c.name
        assert c.set == "validation"
        assert c.group in GROUPS, c.group
        assert c.family and re.fullmatch(r"[a-z0-9_-]+", c.family), c.family
        assert c.audio.dtype == np.float64 and c.audio.ndim == 2 and c.audio.shape[1] in (1, 2, 6)
        assert np.all(np.isfinite(c.audio))
        assert np.max(np.abs(c.audio)) <= 0.98 + 1e-9, c.name
        assert c.channel_labels == cvb.CHANNEL_LABELS[c.audio.shape[1]]
        assert c.rate_hz in cvb.STANDARD_RATES_HZ
        assert 2.0 <= len(c.audio) / c.rate_hz <= 20.0, c.name
        # house choice: levels -30 to -6 dBFS RMS over all channels
        assert -30.0 <= _rms_db(c.audio) <= -6.0, (c.name, _rms_db(c.audio))
        assert c.expect and set(c.expect) <= EXPECT_KEYS, c.expect
        for lab in c.expect.get("upsampled_channels", []):
            assert lab in c.channel_labels and lab != "LFE"


def test_quick_slice_covers_every_group_but_the_ambiguous_one(quick):
    cs, _ = quick
    assert {c.group for c in cs} >= GROUPS - {"ambiguous-lowpass"}


def test_labels_are_consistent_with_the_groups(quick):
    cs, _ = quick
    for c in cs:
        e = c.expect
        if c.group in ("upsampled", "imaging"):
            assert e["upsampled_from_hz"] in cvb.STANDARD_RATES_HZ and e["upsampled_from_hz"] < c.rate_hz
        if c.group == "imaging":
            assert e["imaging_detected"] is True
        if c.group in ("naive-synth", "decimation"):
            assert e["aliasing_detected"] is True and e["upsampled_from_hz"] is None
        if c.group in ("native", "speech", "lowpass", "downsampled", "band-limited-synth", "filtered-decimation"):
            assert e == {"upsampled_from_hz": None, "imaging_detected": False, "aliasing_detected": False}
        if c.group == "codec-shelf":
            assert e == {"upsampled_from_hz": None, "imaging_detected": False}


def test_imaging_positives_hold_images_above_the_old_nyquist(quick):
    # For a linear upsampler fed a source band-limited to src/2, any output energy above src/2 is an image.
    cs, _ = quick
    img = [c for c in cs if c.expect.get("imaging_detected")]
    assert img
    assert all(c.group == "imaging" or c.family.startswith(("sox-cli", "ffmpeg")) for c in img)
    for c in img:
        assert cvb.image_ratio_db(c.audio, c.rate_hz, c.expect["upsampled_from_hz"]) >= cvb.IMAGE_MIN_DB, c.name


def test_tool_upsampled_positives_end_in_a_cliff_at_the_source_nyquist(quick):
    # The label rests on the chain alone; this checks the tools really converted: little energy above
    # 1.05x the source Nyquist (house threshold -50 dB re the band below it).
    cs, _ = quick
    up = [c for c in cs if c.group == "upsampled" and "imaging_detected" not in c.expect]
    assert up
    for c in up:
        assert cvb.image_ratio_db(c.audio, c.rate_hz, c.expect["upsampled_from_hz"]) < -50.0, c.name  # house choice
    one = [c for c in cs if c.group == "upsampled-one-channel"]
    assert one
    for c in one:
        (src,) = {f["src"] for n, f in quick[1].items() if n == c.name}
        idx = c.channel_labels.index(c.expect["upsampled_channels"][0])
        others = [i for i in range(c.audio.shape[1]) if i != idx and c.channel_labels[i] != "LFE"]
        assert cvb.image_ratio_db(c.audio[:, idx], c.rate_hz, src) < -50.0
        for i in others:   # the native channels carry content above the source Nyquist (house choice: -30 dB)
            assert cvb.image_ratio_db(c.audio[:, i], c.rate_hz, src) > -30.0


def test_zero_stuffing_by_two_mirrors_the_band_exactly(quick):
    # Analytic: inserting one zero after each sample gives Y(w) = 2 X(2w), so the band src/2..src holds the
    # mirror image of 0..src/2 with equal energy (0 dB; the Hann window costs a few hundredths of a dB).
    cs, _ = quick
    zs = [c for c in cs if c.family == "zero-stuff" and c.rate_hz == 2 * c.expect["upsampled_from_hz"]]
    assert zs
    for c in zs:
        assert abs(cvb.image_ratio_db(c.audio, c.rate_hz, c.expect["upsampled_from_hz"])) < 1.0
        assert np.all(c.audio[1::2] == 0.0)


def test_filtered_negatives_let_no_folded_content_through(quick):
    cs, facts = quick
    neg = [c for c in cs if c.group in ("downsampled", "filtered-decimation")]
    assert neg
    for c in neg:
        fact = facts[c.name]
        leak = fact.get("leak_db", fact.get("stop_db"))
        assert leak is not None and leak <= cvb.LEAK_MAX_DB, (c.name, fact)
        assert c.expect.get("aliasing_detected") is False


def test_folded_positives_carry_their_folded_energy(quick):
    cs, facts = quick
    folded = [c for c in cs if c.expect.get("aliasing_detected")]
    assert {c.group for c in folded} == {"naive-synth", "decimation"}
    for c in folded:
        assert facts[c.name]["fold_db"] >= cvb.FOLD_MIN_DB, (c.name, facts[c.name])


def test_decimation_positive_folds_what_its_source_held_above_the_new_nyquist():
    # Independent of the generator's bookkeeping: a tone above the new Nyquist, picked 2:1, lands at fs - f.
    rate, f = 96000, 31000.0
    x = np.sin(2 * np.pi * f * np.arange(96000) / rate)[:, None]
    assert cvb.fold_source_ratio_db(x, rate, 48000) > -1.0
    y = x[::2, 0]
    spec_ = np.abs(np.fft.rfft(y * np.hanning(len(y))))
    assert abs(np.fft.rfftfreq(len(y), 1 / 48000)[np.argmax(spec_)] - (48000 - f)) < 2.0


def test_pwl_fourier_matches_the_sawtooth_series():
    # Analytic: 2x - 1 on [0, 1) has c_k = 2 * int x exp(-i 2 pi k x) dx = i / (pi k), c_0 = 0.
    c = cvb.pwl_fourier([(0.0, 1.0, -1.0, 2.0)], 50)
    k = np.arange(1, 51)
    assert abs(c[0]) < 1e-12
    assert np.allclose(c[1:], 1j / (np.pi * k), atol=1e-12)


@pytest.mark.parametrize("shape,param", [("pulse", 0.2), ("sync", 2.4)])
def test_pwl_fourier_matches_a_dense_fft(shape, param):
    # The DFT of M samples of a period approximates c_k with error O(k/M) at the jumps: checked at 1e-3.
    g, segs = cvb.wave_shape(shape, param)
    m = 1 << 18
    ref = np.fft.fft(g((np.arange(m) + 0.5) / m)) / m * np.exp(-1j * np.pi * np.arange(m) / m)
    c = cvb.pwl_fourier(segs, 40)
    assert np.allclose(c, ref[:41], atol=1e-3)


def test_naive_saw_folds_what_its_series_puts_above_nyquist():
    # Analytic: the naive saw's power is 1/3 (mean of (2x-1)^2); the band-limited twin keeps the partials
    # k <= K, power sum 2/(pi k)^2; for a pitch incommensurate with the rate the folded partials are
    # orthogonal to the kept ones, so folded power = sum over k > K of 2/(pi k)^2.
    rate, f0 = 48000, 1234.5
    note = dict(t0=0.0, length=4.0, f0=f0, vib_hz=5.0, vib_cents=0.0, vib_phase=0.0, amp=1.0, x0=0.1,
                env_seed=3, pan=0.5)
    n = 4 * rate
    naive = cvb._render_notes([note], n, rate, "saw", 0.0, naive=True)[:, 0]
    bl = cvb._render_notes([note], n, rate, "saw", 0.0, naive=False)[:, 0]
    k_max = int(rate / 2 / (f0 * 1.0005))
    k = np.arange(1, 200000)
    expect_db = 10 * math.log10(np.sum(2 / (np.pi * k[k > k_max]) ** 2) / np.sum(2 / (np.pi * k[k <= k_max]) ** 2))
    got_db = _rms_db(naive - bl) - _rms_db(bl)
    assert abs(got_db - expect_db) < 0.5, (got_db, expect_db)


def test_mastering_lowpass_grouping():
    # scipy's digital Butterworth is a bilinear transform: the response has its zeros at Nyquist, so an
    # 8th-order design at 20 kHz on 48 kHz falls from -3 dB at 20.0 kHz to -40 dB by about 21.7 kHz
    # (computed below) -- a cliff where a 44.1 kHz converter would leave one.  A 4th-order design reaches
    # -40 dB only at about 22.7 kHz (13.5 % past its edge), and at 96 kHz the 8th order is a slope.
    cases_ = [("butter", dict(order=8), 20000, 48000, True), ("butter", dict(order=4), 20000, 48000, False),
              ("butter", dict(order=8), 20000, 96000, False), ("butter", dict(order=12), 17000, 48000, False),
              ("ellip", dict(order=8, rp=0.1, rs=80), 20000, 48000, True),
              ("ellip", dict(order=8, rp=0.1, rs=80), 17000, 48000, False),
              ("fir", dict(numtaps=511, beta=8.0), 20500, 96000, True)]
    for kind, prm, fc, rate, amb in cases_:
        _, h_db, f = cvb._lowpass(kind, prm, fc, rate)
        got, f3 = cvb.lowpass_is_ambiguous(h_db, f, rate)
        assert got is amb, (kind, prm, fc, rate, f3)
    sos = signal.butter(8, 20000, fs=48000, output="sos")
    _, h = signal.sosfreqz(sos, worN=[21000, 22500], fs=48000)
    assert -20 * np.log10(abs(h[0])) < 40 < -20 * np.log10(abs(h[1]))


def test_limiter_and_dither_hold_their_ceiling_and_grid():
    rng = np.random.default_rng(1)
    y = rng.standard_normal((48000, 2)) * 0.6
    ceiling = 10 ** (-1 / 20)      # the chain's -1 dBFS limiter ceiling (house choice of the corpus)
    z = cvb.soft_limit(y, 48000, ceiling)
    assert np.max(np.abs(z)) <= ceiling + 1e-12
    d = cvb.tpdf_dither_24(z, rng)
    q = 2.0 ** -23
    assert np.allclose(d / q, np.round(d / q), atol=1e-6)
    # analytic: TPDF dither spans +-1 LSB and rounding adds at most 1/2 LSB, so |d - z| <= 1.5 LSB
    assert np.max(np.abs(d - z)) <= 1.5 * q


def test_seed_range_and_determinism():
    with pytest.raises(ValueError, match="6000-6999"):
        next(cvb.cases(5000, quick=True))
    a = next(cvb.cases(6001, quick=True))
    b = next(cvb.cases(6001, quick=True))
    assert a.name == b.name and np.array_equal(a.audio, b.audio)
