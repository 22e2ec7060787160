"""Imaging of nearest-phase polyphase converters (a windowed-sinc bank tabulated at N fractional delays, each output
taking the nearest one with no interpolation between them).

Analytic references (derived here, no outside values):

* Such a bank outputs the properly interpolated signal ``y`` at each output instant rounded to the grid of
  ``1 / (N r)`` seconds (``r`` the source rate).  That is exactly ``y`` sampled at ``R = N r``, held (a zero-order
  hold of width ``1 / R``) and read at the file's rate ``fs``.  The hold's response is ``sinc(nu / R)``; the copy of
  the content at ``f`` that the sampling at ``R`` puts at ``R + f`` passes it with ``|sinc((R + f) / R)| =
  |sin(pi f / R)| / (pi (R + f) / R)``, against ``|sin(pi f / R)| / (pi f / R)`` for the content itself: the first
  image lies ``20 log10(f / (R + f))`` dB relative to the tone, about ``20 log10(f / R)`` (and the one at ``R - f``:
  ``20 log10(f / (R - f))``).  Once read at ``fs``, it sits at ``(R + f) mod fs``.  (The hold of a fractional-step
  sample-and-hold is the same box, see tests/test_imaging_interpolators.py.)
* For 22.05 kHz to 48 kHz with 16 phases: ``R = 352.8 kHz = 7 * 48 kHz + 16.8 kHz``, so a tone at 1 kHz leaves its
  first images at 17.8 kHz and 15.8 kHz, ``20 log10(1000 / 353800) = -50.98`` dB and ``20 log10(1000 / 351800) =
  -50.93`` dB below it.
* A whole multiple of the source rate modulo ``fs`` is a cycle frequency of every converter's own images (its stop
  band's residue at ``q r +- f``), so the test leaves out cycle frequencies within 8 bins of one.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from corpus_sampling import analyse, good_resample, pink, quantise
from masterqc.measure import imaging as im
from masterqc.measure.imaging import ImagingAnalyzer
from masterqc.measure.options import MeasureOptions


def _bank(x, src, dst, phases, taps=32, beta=9.0, cutoff=0.95):
    """A windowed-sinc (Kaiser) bank evaluated at each output instant, rounded to ``phases`` fractional delays
    (None: not rounded, the exact converter)."""
    n_out = len(x) * dst // src
    pos = np.arange(n_out) * (src / dst)
    i0 = np.floor(pos + 1e-9).astype(np.int64)
    mu = pos - i0
    if phases:
        mu = np.round(mu * phases) / phases
    half = taps // 2
    pad = np.concatenate([np.zeros(half + 1), x, np.zeros(half + 2)])
    y = np.zeros(n_out)
    for k in range(-half + 1, half + 1):
        t = mu - k
        w = np.i0(beta * np.sqrt(np.clip(1 - (2 * t / taps) ** 2, 0, 1))) / np.i0(beta)
        y += np.where(np.abs(t) < taps / 2, cutoff * np.sinc(cutoff * t) * w, 0.0) * pad[i0 + k + half + 1]
    return y


def _run(y, fs):
    return analyse(np.asarray(y).reshape(len(y), -1), fs, [ImagingAnalyzer], 24)


def _material(src, seconds, rng):
    """Pink noise band-limited well inside the source band (a long proper design), 0.1 RMS."""
    x = pink(src, seconds, rng, level=0.1)
    return good_resample(good_resample(x, src, 2 * src), 2 * src, src)[:len(x)]


def test_nearest_phase_bank_is_a_hold_at_the_phase_count_times_the_rate():
    """The error of a 16-phase bank from 22.05 to 48 kHz on a 1 kHz tone: its first images at 17.8 and 15.8 kHz lie
    -50.98 and -50.93 dB relative to the tone (the hold at 352.8 kHz, derivation above), within 0.5 dB."""
    src, dst, phases = 22050, 48000, 16
    t = np.arange(src * 2) / src
    x = 0.5 * np.sin(2 * math.pi * 1000.0 * t)
    y = _bank(x, src, dst, phases)[2000:-2000]
    w = np.hanning(y.size)
    spec = np.abs(np.fft.rfft(y * w)) ** 2
    f = np.fft.rfftfreq(y.size, 1.0 / dst)

    def level(freq):
        k = int(round(freq / (f[1] - f[0])))
        return float(spec[k - 3:k + 4].sum())

    tone = level(1000.0)
    assert 10 * math.log10(level(17800.0) / tone) == pytest.approx(20 * math.log10(1000.0 / 353800.0), abs=0.5)
    assert 10 * math.log10(level(15800.0) / tone) == pytest.approx(20 * math.log10(1000.0 / 351800.0), abs=0.5)


def test_cycle_frequencies_of_the_banks_are_the_phase_count_times_the_rate():
    """Analytic (a bank of N phases holds at N times the source rate; its cycle folds modulo the file's rate):
    8 * 44.1 kHz = 352.8 kHz = 7 * 48 kHz + 16.8 kHz; 16 phases: 705.6 kHz = 14 * 48 kHz + 33.6 kHz, folded to
    14.4 kHz; 32: 1411.2 kHz = 29 * 48 kHz + 19.2 kHz; 64: 38.4 -> 9.6 kHz; 128: 28.8 -> 19.2 kHz (already there);
    256: 9.6 (there); and so on.  Bins of 25 Hz."""
    a = ImagingAnalyzer.__new__(ImagingAnalyzer)
    a.fs, a.n_fft, a.bin_hz = 48000, 1920, 25.0
    got = a._nearest_phase_cycles(44100.0)
    assert [(al * 25, n) for al, n in got] == [(16800, 8), (14400, 16), (19200, 32), (9600, 64)]
    # a whole ratio: every phase count's cycle frequency is a multiple of the rate, none is tested
    a.fs, a.n_fft = 96000, 3840
    assert a._nearest_phase_cycles(48000.0) == []
    assert a._nearest_phase_cycles(32000.0) == []


@pytest.mark.parametrize("src,dst,phases", [(22050, 48000, 16), (44100, 96000, 8), (32000, 44100, 16)])
def test_bank_with_few_phases_is_imaging_at_its_source_rate(src, dst, phases):
    """Images of the hold at ``phases * src`` of the content at 0.3-0.7 of the source Nyquist frequency: at
    ``(f / (phases src))**2`` power-weighted over that content (the model, from the material's own spectrum), -42
    dB and more for 16 phases; the analyzer's level within 4 dB of it, the phase count within a factor 1.5."""
    rng = np.random.default_rng(7)
    x = _material(src, 4.0, rng)
    y = quantise(_bank(x, src, dst, phases), 24, rng)
    m = _run(y, dst)
    cand = next(c for c in m["imaging"] if c["source_rate_hz"] == src)
    f = np.fft.rfftfreq(x.size, 1.0 / src)
    p = np.abs(np.fft.rfft(x)) ** 2
    inner = (f >= 0.3 * src / 2) & (f <= 0.7 * src / 2)
    model = 10 * math.log10(float(np.sum(p[inner] * (f[inner] / (phases * src)) ** 2)) / float(np.sum(p[inner])))
    assert model > im.DEFECT_IMAGE_LEVEL_DB + 5
    assert m["imaging_detected"] is True
    assert cand["verdict"] == "defect"
    assert cand["image_level_db"] == pytest.approx(model, abs=4.0)
    found = int(cand["reason"].split("about ")[1].split(" phases")[0])
    assert phases / 1.5 <= found <= phases * 1.5


@pytest.mark.parametrize("phases", [1024, None])
def test_bank_with_many_phases_or_none_is_not_imaging(phases):
    """1024 phases from 44.1 to 96 kHz: images at about (f / 45.2 MHz)**2, -72 dB and less for the inner band's
    content, far under the line (-50 dB); the exact bank (no rounding): no such images at all."""
    rng = np.random.default_rng(8)
    src, dst = 44100, 96000
    x = _material(src, 4.0, rng)
    y = quantise(_bank(x, src, dst, phases), 24, rng)
    m = _run(y, dst)
    assert m["imaging_detected"] is False
    assert not any(c["verdict"] == "defect" for c in m["imaging"])


def test_a_converters_own_stop_band_at_a_bank_cycle_frequency_is_not_a_bank():
    """scipy's default resample_poly design from 32 to 44.1 kHz (up 441, down 320, Kaiser beta 5) leaves its own
    stop band's residue at ``q * 32 kHz +- f`` for every ``q``, folded: at 16 * 32 kHz modulo 44.1 kHz = 26.9 kHz
    (17.2 kHz folded), a bank cycle frequency.  Flat across the audio band, not rising as f**2: not read as a
    bank's images."""
    from scipy import signal as sps
    rng = np.random.default_rng(11)
    x = pink(32000, 4.0, rng, level=0.1)
    y = quantise(sps.resample_poly(x, 441, 320), 24, rng)
    m = _run(y, 44100)
    assert m["imaging_detected"] is False


def test_gather_from_the_one_sided_store_is_the_two_sided_spectrum():
    """X(N - k) = conj X(k) for real frames: the kept one-sided spectra read at two-sided bins give exactly the
    two-sided spectrum's values (bit for bit)."""
    rng = np.random.default_rng(3)
    fs = 48000
    x = rng.standard_normal((fs * 2, 2)) * 0.1
    info = type("Info", (), {"sample_rate_hz": fs, "frames": x.shape[0], "channels": 2, "channel_layout": ["L", "R"]})()
    a = ImagingAnalyzer(info, MeasureOptions())
    for i in range(0, x.shape[0], 8192):
        a.process(x[i:i + 8192])
    n = a.n_fft
    k = np.array([0, 1, 5, n // 2, n // 2 + 1, n - 1, 777, n - 777])
    for ch in (0, 1):
        full = np.concatenate([a.store[ch, :a.frames], np.conj(a.store[ch, :a.frames, (n - 1) // 2:0:-1])], axis=-1)
        assert np.array_equal(a._gather(ch, k), full[:, k])


def _kernel_response_db(window, taps, cutoff, beta, f_src):
    """|H| (dB re its DC gain) of the continuous kernel ``cutoff sinc(cutoff t) w(t)`` (``t`` in source samples, a
    ``taps``-sample window) at ``f_src`` (fractions of the source rate): its Fourier transform summed on a grid of
    1/256 sample."""
    over = 256
    t = np.arange(-taps // 2 * over, taps // 2 * over + 1) / over
    x = 2 * t / taps
    if window == "bnuttall":
        w = 0.3635819 + 0.4891775 * np.cos(np.pi * x) + 0.1365995 * np.cos(2 * np.pi * x) + \
            0.0106411 * np.cos(3 * np.pi * x)
    else:
        w = np.i0(beta * np.sqrt(np.clip(1 - x * x, 0, 1))) / np.i0(beta)
    h = cutoff * np.sinc(cutoff * t) * w
    f = np.atleast_1d(np.asarray(f_src, dtype=float))
    resp = np.abs(np.exp(-2j * np.pi * np.outer(f, t)) @ h)
    return 20 * np.log10(resp / abs(h.sum()))


def test_no_level_just_above_the_source_nyquist_separates_a_32_tap_blackman_nuttall_bank():
    """Why a 32-tap Blackman-Nuttall bank (-6 dB at 0.97 of the source Nyquist frequency) is not imaging by the house
    definition (images of the content at 0.3-0.7 of the source Nyquist frequency, beyond 1.3 of it): from the
    kernels' own responses, just above the Nyquist frequency (1.0 to 1.1 of it, where its images of the band's top
    lie) scipy's default resample_poly design (20 taps per phase, Kaiser beta 5, -6 dB at the Nyquist frequency, a
    tuning negative) leaks more than it everywhere, and a 32-tap Kaiser beta 9 bank with the same -6 dB point leaks
    within 10 dB of it; beyond 1.3 of the Nyquist frequency all three lie more than 65 dB down."""
    g = np.array([1.0, 1.02, 1.04, 1.06, 1.08, 1.1]) / 2.0
    bn = _kernel_response_db("bnuttall", 32, 0.97, None, g)
    scipy_default = _kernel_response_db("kaiser", 20, 1.0, 5.0, g)
    k9 = _kernel_response_db("kaiser", 32, 0.97, 9.0, g)
    assert np.all(scipy_default > bn)
    assert np.all(np.abs(k9 - bn) < 10.0)
    far = np.array([1.3, 1.4, 1.5, 1.6, 1.7]) / 2.0
    for window, taps, cutoff, beta in (("bnuttall", 32, 0.97, None), ("kaiser", 20, 1.0, 5.0),
                                       ("kaiser", 32, 0.97, 9.0)):
        assert np.all(_kernel_response_db(window, taps, cutoff, beta, far) < -65.0)


@pytest.mark.parametrize("phases,kept", [(16, True), (0.3, False)])
def test_a_fit_implying_fewer_phases_than_any_bank_tested_is_not_the_hold_model(monkeypatch, phases, kept):
    """Analytic: a bank of N phases holds at N times the source rate r, so its images of content below r / 2 lie at
    most (1 / 2N)**2 below it, -24 dB for the fewest tested (8).  A fitted hold rate of 0.3 r (images above the
    content) is no bank's: refused; 16 r is kept and reported as 16 phases.  The coherence statistics are given
    (the fit's inputs), so this checks the rule alone."""
    a = ImagingAnalyzer.__new__(ImagingAnalyzer)
    a.fs, a.n_fft, a.bin_hz, a.frames, a.store = 48000, 1920, 25.0, 40, object()
    a.power = [np.ones(a.n_fft // 2 + 1)]
    rate = 44100.0
    inv = 1.0 / (phases * rate) ** 2
    monkeypatch.setattr(ImagingAnalyzer, "_np_stats",
                        lambda self, ch, al, r, level: (100.0, inv, 0.9) if level and al == self._np_al else (0.0, None))
    a._np_al = a._nearest_phase_cycles(rate)[0][0]
    got = a._nearest_phase(0, rate)
    if kept:
        assert got is not None and got[1] == 16
    else:
        assert got is None
    assert im.NEAREST_PHASE_MIN_FITTED == im.NEAREST_PHASE_COUNTS[0] / 2 == 4
