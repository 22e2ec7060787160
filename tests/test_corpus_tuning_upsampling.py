"""The tuning corpus of the upsampling verdict labels its mastering low-pass sweep as built.

Provenance: the filter responses are read with scipy.signal.freqz (a reference library); the labels are by
construction (bench/corpus_tuning_upsampling.py, ``_plan_lowpass_sweep``); the 0.88-1.0 ambiguity window is a
house choice.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal as sps

BENCH = str(Path(__file__).resolve().parent.parent / "bench")
if BENCH not in sys.path:
    sys.path.insert(0, BENCH)

ct = pytest.importorskip("corpus_tuning_upsampling")


def _gain_db(h, f_hz, fs):
    _w, r = sps.freqz(h, 1.0, worN=[f_hz], fs=fs)
    return 20.0 * np.log10(abs(r[0]))


@pytest.mark.parametrize("taps,width", [(127, 1500.0), (255, 800.0), (511, 600.0)])
def test_remez_minus_6_db_point_is_mid_transition(taps, width):
    # the sweep reads an equiripple design's -6 dB point at the middle of its transition band (scipy freqz as
    # the reference: within 1.5 dB of -6 dB there, house tolerance), the pass-band edge itself near 0 dB
    fs, corner = 48000, 18000.0
    h = ct.sweep_filter(np.r_[1.0, np.zeros(2047)][:, None], fs, "remez", corner, {"taps": taps, "width": width})[:, 0]
    assert abs(_gain_db(h, corner + 0.5 * max(width, 2.0 * fs / taps), fs) + 6.0) <= 1.5
    assert abs(_gain_db(h, corner - 200.0, fs)) <= 1.0


def test_sweep_labels_are_as_built():
    # Butterworth and Bessel low-passes are always scored negatives (slopes no converter makes); a steep design
    # whose -6 dB point lies at 0.88-1.0 of a lower standard Nyquist is ambiguous and carries no expectation
    seen = {"lowpass": 0, "ambiguous-lowpass": 0, "upsampled": 0}
    for seed in (1000, 1001):
        for name, family, group, spec in ct._plan_lowpass_sweep(seed, quick=False):
            seen[group] += 1
            if spec[0] != "sweep":
                assert group == "upsampled" and spec[1] < spec[2]
                continue
            _k, fs, kind, corner, p, _mat, _level = spec
            if kind in ("butter", "bessel"):
                assert group == "lowpass", name
            minus6 = corner + 0.5 * max(p["width"], 2.0 * fs / p["taps"]) if kind == "remez" else corner
            assert (group == "ambiguous-lowpass") == (kind not in ("butter", "bessel")
                                                      and ct._ambiguous_cutoff(minus6, fs)), name
            assert p["ambiguous"] == (group == "ambiguous-lowpass")
    assert all(v > 0 for v in seen.values()), seen
    assert ct._ambiguous_cutoff(20800.0, 48000)           # 0.943 of 22.05 kHz (by construction)
    assert not ct._ambiguous_cutoff(17500.0, 48000)       # 0.794 of 22.05 kHz, 0.729 of 24 kHz


def test_codec_transform_reconstructs_without_quantisation():
    # The coder's MDCT (sine window, 50 % overlap) reconstructs its input exactly when nothing is quantised:
    # the sine window meets the Princen-Bradley condition w[n]^2 + w[n + N]^2 = 1 (analytic), so the time-domain
    # aliasing of neighbouring frames cancels
    n = 256
    cmat = ct._mdct_matrix(n)
    win = np.sin(np.pi * (np.arange(2 * n) + 0.5) / (2 * n))
    assert np.allclose(win[:n] ** 2 + win[n:] ** 2, 1.0)
    rng = np.random.default_rng(3)
    x = rng.standard_normal(8 * n)
    pad = np.concatenate([np.zeros(n), x, np.zeros(2 * n)])
    out = np.zeros(pad.size)
    for j in range((pad.size - 2 * n) // n + 1):
        spec = (pad[j * n:j * n + 2 * n] * win) @ cmat
        out[j * n:j * n + 2 * n] += (2.0 / n) * (cmat @ spec) * win
    assert np.max(np.abs(out[n:n + x.size] - x)) < 1e-9


def _top_hz(y, fs, below_db=40.0):
    f, p = sps.welch(y, fs, nperseg=4096)
    db = 10.0 * np.log10(np.maximum(p, 1e-30))
    ref = np.median(db[(f > 2000.0) & (f < 6000.0)])
    return float(f[np.nonzero(db > ref - below_db)[0][-1]])


def test_codec_band_limit_rises_with_the_bit_budget_and_obeys_its_low_pass():
    # The coder's band limit is where its per-frame budget runs out (house design): more bits, a higher limit;
    # the encoder's own low-pass caps it whatever the budget
    fs = 44100
    rng = np.random.default_rng(5)
    x = 0.05 * ct.material("noise", fs, 1.0, rng)
    low = _top_hz(ct.codec_roundtrip(x, fs, 48, np.random.default_rng(1)), fs)
    high = _top_hz(ct.codec_roundtrip(x, fs, 112, np.random.default_rng(1)), fs)
    capped = _top_hz(ct.codec_roundtrip(x, fs, 112, np.random.default_rng(1), lowpass_hz=12000.0), fs)
    assert 8000.0 <= low < high - 4000.0
    assert capped <= 12000.0 + 700.0           # one band of at most 700 Hz past the low-pass
    sub = ct.codec_roundtrip(x, fs, 56, np.random.default_rng(1), lowpass_hz=11025.0, subband=True)
    assert _top_hz(sub, fs) <= 11025.0 + 100.0   # sub-bands are fs/64 wide: 16 of them end at exactly fs/4


@pytest.mark.parametrize("src,dst,design", [(192000, 48000, ("kaiser", 32, 0.97, 9.0)),
                                            (96000, 44100, ("kaiser", 64, 0.91, 8.0))])
def test_down_converter_design_is_minus_6_db_at_its_cutoff(src, dst, design):
    # a windowed sinc's gain at its cutoff is one half (-6.02 dB): the ideal sinc's response is 0.5 at its
    # discontinuity and a symmetric window keeps it there (analytic, to the window's ripple); scipy freqz as
    # the reference
    from fractions import Fraction
    h = ct.down_filter(src, dst, design)
    up = Fraction(dst, src).numerator
    assert abs(_gain_db(h, design[2] * dst / 2.0, src * up) + 6.02) <= 0.3


def test_down_conversion_labels():
    # libsamplerate's fastest converter from 192 to 48 kHz is -6 dB near 19.7 kHz (0.89 of 22.05 kHz) and 40 dB
    # down by 22.7 kHz (1.03 of it): it reads as an upsampler's filter from 44.1 kHz, so it is ambiguous; a design
    # centred on 0.97 of the new Nyquist (-6 dB at 23.3 kHz, 1.06 of 22.05 kHz) is not (house window, see
    # ambiguous_down)
    pytest.importorskip("samplerate")
    six, stop = ct.down_response(192000, 48000, ("lsr", "sinc_fastest"))
    assert 0.85 <= six / 22050.0 <= 0.95 and stop <= 1.06 * 22050.0
    assert ct.ambiguous_down(192000, 48000, ("lsr", "sinc_fastest"))
    assert not ct.ambiguous_down(192000, 48000, ("kaiser", 32, 0.97, 9.0))
    names = [n for n, _f, _g, _s in ct._plan_codec_and_downconversion(1000, quick=False)]
    assert len(names) == len(set(names))


@pytest.mark.parametrize("design", ct.SHORT_SINC_DESIGNS)
def test_short_sinc_is_6_db_down_at_its_cutoff(design):
    # analytic: a windowed sinc's amplitude passes through half its pass-band gain at the sinc's cutoff (the
    # window's transform is symmetric about it), read with scipy freqz; 0.5 dB is a house tolerance for the
    # shortest design; the factor m = 4 is a 192 -> 48 kHz conversion
    window, taps, cutoff, beta = design
    h = ct.short_sinc(window, taps, cutoff, beta, 4)
    assert abs(float(np.sum(h)) - 1.0) < 1e-12
    g = _gain_db(h, cutoff * 24000.0, 192000)
    assert abs(g + 6.02) <= 0.5, g


def test_coder_wall_cuts_at_its_line():
    # by construction: with line_cut every MDCT line above the cut is zeroed in every frame, so 1-4 kHz above it
    # only the synthesis window's leakage remains, far below the coded band (Welch, scipy)
    fs, wall = 48000, 15946.0
    rng = np.random.default_rng(5)
    x = 0.1 * rng.standard_normal(fs * 2)
    y = ct.codec_roundtrip(x, fs, 256, rng, lowpass_hz=wall, line_cut=True)
    f, p = sps.welch(y, fs, nperseg=4096)
    below = 10 * np.log10(np.median(p[(f > 12000.0) & (f < 15000.0)]))
    above = 10 * np.log10(np.median(p[(f > wall + 1000.0) & (f < wall + 4000.0)]))
    assert below - above > 60.0, (below, above)
    # the last coded line sits within two of the cut (23.4 Hz lines at 48 kHz)
    k = np.nonzero(10 * np.log10(p) > below - 20.0)[0]
    assert abs(f[k[-1]] - wall) <= 2 * fs / 4096 + 2 * fs / 2048


def test_dft_upsampler_leaves_nothing_above_the_old_nyquist():
    # by construction: the zero-padded spectrum has no bin above the old Nyquist (numpy's FFT, to rounding)
    rng = np.random.default_rng(6)
    x = rng.standard_normal(32000)
    y = ct.dft_upsample(x, 32000, 48000)
    spec = np.abs(np.fft.rfft(y))
    f = np.fft.rfftfreq(y.size, 1 / 48000)
    assert np.max(spec[f > 16001.0]) < 1e-9 * np.max(spec)
    assert y.size == 48000


@pytest.mark.parametrize("alpha", [4.0, 5.0])
def test_kbd_window_meets_the_perfect_reconstruction_condition(alpha):
    # analytic (Princen-Bradley): an MDCT with 50 % overlap reconstructs exactly when w[n]^2 + w[n + N]^2 = 1 and
    # the window is symmetric; the Kaiser-Bessel-derived window is built to meet it (ATSC A/52 section 7.9.4.1)
    w = ct.kbd_window(512, alpha)
    assert w.size == 512
    assert np.max(np.abs(w[:256] ** 2 + w[256:] ** 2 - 1.0)) < 1e-12
    assert np.max(np.abs(w - w[::-1])) < 1e-12


def test_mdct_frame_loop_reconstructs_without_coding():
    # analytic: with every frame passed through unchanged, the MDCT's time-domain aliasing cancels between
    # neighbouring frames (Princen-Bradley), so the output is the input to rounding, for each coder's window
    rng = np.random.default_rng(11)
    x = rng.standard_normal(4000)
    for n, win in ((256, ct.kbd_window(512, 5.0)), (576, np.sin(np.pi * (np.arange(1152) + 0.5) / 1152))):
        y = ct._mdct_roundtrip(x, n, win, lambda j, spec: spec)
        assert np.max(np.abs(y - x)) < 1e-9, n


def test_ac3_like_coder_cuts_at_its_bandwidth_code():
    # by construction (ATSC A/52 section 7.1.3: the last coded line is 73 + 3 x the bandwidth code, of 256 lines):
    # code 28 at 48 kHz keeps lines 0-156, so the band ends at 157 x 93.75 Hz = 14718.75 Hz; 1-4 kHz above it only
    # the KBD window's leakage and nothing else remains (Welch, scipy)
    fs = 48000
    rng = np.random.default_rng(12)
    x = 0.1 * rng.standard_normal(fs * 2)
    y = ct.ac3_roundtrip(x, fs, 28, rng)
    f, p = sps.welch(y, fs, nperseg=4096)
    below = 10 * np.log10(np.median(p[(f > 10000.0) & (f < 14000.0)]))
    above = 10 * np.log10(np.median(p[(f > 15800.0) & (f < 19000.0)]))
    assert below - above > 80.0, (below, above)
    k = np.nonzero(10 * np.log10(p) > below - 20.0)[0]
    assert abs(f[k[-1]] - 14718.75) <= 2 * 93.75


def test_layer3_like_coder_top_band_starts_at_the_standard_line():
    # ISO/IEC 11172-3 Table B.8 (from memory): the long-block band 21 starts at line 418 of 576 at 44.1 kHz and
    # 384 at 48 kHz, 16.0 kHz both (418 x 22050 / 576 = 16002 Hz; 384 x 24000 / 576 = 16000 Hz)
    assert ct.LAYER3_SFB_LONG[44100][21] * 22050.0 / 576 == pytest.approx(16002.0, abs=1.0)
    assert ct.LAYER3_SFB_LONG[48000][21] * 24000.0 / 576 == pytest.approx(16000.0, abs=1.0)
    # by construction: the encoder's low-pass zeroes every line above it (17 kHz here)
    rng = np.random.default_rng(13)
    x = 0.1 * rng.standard_normal(44100 * 2)
    y = ct.layer3_roundtrip(x, 44100, 128, rng, 17000.0)
    f, p = sps.welch(y, 44100, nperseg=4096)
    below = 10 * np.log10(np.median(p[(f > 8000.0) & (f < 12000.0)]))
    above = 10 * np.log10(np.median(p[(f > 18000.0) & (f < 21000.0)]))
    assert below - above > 60.0, (below, above)


def test_long_polyphase_down_design_falls_where_a_44k1_converter_does():
    # The 256-tap-per-phase Kaiser design (beta 12, cutoff 0.91 of the new Nyquist) from 192 kHz is -6.02 dB at
    # 0.91 x 24 kHz = 21.84 kHz (analytic: a windowed sinc is one half at its cutoff; scipy freqz as the reference)
    # and, its transition about 1.5 kHz wide (Kaiser's formula (A - 8) / (2.285 N) for A = 120 dB, N = 1024 taps
    # at 192 kHz, from memory), 40 dB down by 22.3-22.6 kHz: 0.99 and 1.01-1.03 of 22.05 kHz, where a converter
    # from 44.1 kHz puts its -6 dB point and its stop band.  So the corpus labels it ambiguous (house window,
    # ambiguous_down), and the 32-tap design (beta 9, cutoff 0.97: -6 dB at 23.3 kHz) it does not.
    from fractions import Fraction
    long_design, short_design = ct.POLYPHASE_DOWN_DESIGNS[1], ct.POLYPHASE_DOWN_DESIGNS[0]
    for dst in (48000, 96000):
        h = ct.down_filter(192000, dst, long_design)
        up = Fraction(dst, 192000).numerator
        assert abs(_gain_db(h, 0.91 * dst / 2.0, 192000 * up) + 6.02) <= 0.3
        old_nyquist = {48000: 22050.0, 96000: 44100.0}[dst]
        assert _gain_db(h, 1.03 * old_nyquist, 192000 * up) <= -40.0
        assert ct.ambiguous_down(192000, dst, long_design)
        assert not ct.ambiguous_down(192000, dst, short_design)
    groups = {n: g for n, _f, g, _s in ct._plan_channel_band_limits(1000, quick=False)}
    assert groups["chb_down_k256c91b12_192000_to_48000"] == "ambiguous-downconverted"
    assert groups["chb_down_k32c97b9_192000_to_48000"] == "downconverted"
    assert ct._plan_channel_band_limits(1000, quick=True) == []


def test_sub_band_coder_limits_sit_on_edges_of_32_equal_bands():
    # A 32-band polyphase sub-band coder at 48 kHz splits 0-24 kHz into bands of 750 Hz (common practice, no
    # source), so its band limit lies on a multiple of 750 Hz: 15.0 and 15.75 kHz next to 16 kHz (0.94 and 0.98 of
    # it).  From memory: the fixed sub-band limits of the standard Layer II allocation tables at 48 kHz are 27 and 30
    # bands (20.25 and 22.5 kHz) for the usual bit rates and 8 or 12 bands (6, 9 kHz) for the lowest, none near
    # 16 kHz: a cliff near 16 kHz is the bit allocation leaving the upper bands empty, not the table's limit.
    width_hz = 48000 / 2 / 32
    assert width_hz == 750.0
    assert [k * width_hz for k in (20, 21, 27, 30)] == [15000.0, 15750.0, 20250.0, 22500.0]
    rng = np.random.default_rng(5)
    x = ct.imaging_material("speech", 48000, 1.0, rng)
    y = ct.codec_roundtrip(x, 48000, 72, rng, subband=True)
    f, p = sps.welch(y, 48000, nperseg=4096)
    db = 10.0 * np.log10(np.maximum(p, 1e-30))
    top = float(np.max(db[(f > 2000.0) & (f < 8000.0)]))
    above = f[db > top - 60.0]
    # the top coded band ends on a band edge (within the Welch bin and the synthesis window's spread, 100 Hz)
    edge = float(above.max())
    assert min(abs(edge - k * width_hz) for k in range(1, 33)) <= 100.0
