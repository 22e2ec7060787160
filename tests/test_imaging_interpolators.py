"""Imaging of interpolating converters (Lagrange, Catmull-Rom), of a linear interpolator at a fractional ratio
and of a sample-and-hold with a fractional step.

Analytic references (derived here, no outside values):

* A converter that evaluates a continuous kernel ``h(t)`` (t in source samples) at every output instant is,
  for a whole factor ``L`` from ``R`` to ``L*R``, zero stuffing followed by the FIR ``g[m] = h(m / L)`` at
  ``L*R``.  Zero stuffing copies a tone at ``f`` to ``R - f`` at the same level, so the first image lies below
  the tone by ``|G(R - f)| / |G(f)|`` with ``G(f) = sum_m g[m] exp(-j 2 pi f m / (L R))`` (its DTFT).
* The 4-point Lagrange interpolator weighs the source samples ``k = -1, 0, 1, 2`` around a fractional position
  ``mu`` in [0, 1) by ``l_k(mu) = prod_{j != k} (mu - j) / (k - j)`` (the Lagrange basis polynomials); at
  ``mu = 1/2`` that is ``(-1/16, 9/16, 9/16, -1/16)``.  The Catmull-Rom cubic has the kernel
  ``1.5|t|^3 - 2.5|t|^2 + 1`` on ``|t| < 1`` and ``-0.5|t|^3 + 2.5|t|^2 - 4|t| + 2`` on ``1 <= |t| < 2``.
* Linear interpolation at any (fractional) ratio samples the continuous reconstruction ``sum x[n] tri(t R - n)``,
  whose spectrum is ``X(f) sinc^2(f / R)``; at ``R - f`` the numerator ``sin^2(pi (R - f) / R)`` equals
  ``sin^2(pi f / R)``, so the first image lies ``40 log10(f / (R - f))`` dB relative to the tone.
* A hold at an effective rate ``r`` (a fractional step of ``fs / r`` samples) is the continuous box of width
  ``1/r``, response ``sinc(f / r)``: the first image lies ``20 log10(f / (r - f))`` dB relative to the tone.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal as sps

from corpus_sampling import analyse
from masterqc.measure.imaging import ImagingAnalyzer

BENCH = str(Path(__file__).resolve().parent.parent / "bench")
if BENCH not in sys.path:
    sys.path.insert(0, BENCH)


def _lagrange_weight(k: int, mu: float, points: int = 4) -> float:
    """Lagrange basis polynomial of the point ``k`` at ``mu`` (points ``-points/2 + 1 .. points/2``)."""
    half = points // 2
    w = 1.0
    for j in range(-half + 1, half + 1):
        if j != k:
            w *= (mu - j) / (k - j)
    return w


def _catmull_rom(t: float) -> float:
    a = abs(t)
    if a < 1:
        return 1.5 * a ** 3 - 2.5 * a ** 2 + 1
    if a < 2:
        return -0.5 * a ** 3 + 2.5 * a ** 2 - 4 * a + 2
    return 0.0


def _kernel_taps(kind: str, factor: int) -> np.ndarray:
    """``g[m] = h(m / L)`` for m = -2L .. 2L (both kernels span 4 source samples)."""
    m = np.arange(-2 * factor, 2 * factor + 1)
    out = np.zeros(m.size)
    for i, mm in enumerate(m):
        t = mm / factor
        if kind == "catmullrom":
            out[i] = _catmull_rom(t)
        else:
            # h(t) = l_k(mu) with t = mu - k, mu in [0, 1)
            k = -int(math.floor(t))
            mu = t + k
            out[i] = _lagrange_weight(k, mu) if -1 <= k <= 2 else 0.0
    return out


def _convert_whole(x: np.ndarray, factor: int, kind: str) -> np.ndarray:
    """Whole-factor conversion written from the kernels (independent of the corpus' converter)."""
    g = _kernel_taps(kind, factor)
    z = np.zeros(x.size * factor)
    z[::factor] = x
    return np.convolve(z, g)[2 * factor:2 * factor + z.size]


def _tone(f, fs, seconds=2.0, amp=0.5):
    return amp * np.sin(2 * math.pi * f * np.arange(int(fs * seconds)) / fs + 0.3)


def _run(x, fs):
    return analyse(np.asarray(x).reshape(len(x), -1), fs, [ImagingAnalyzer], 24)


def test_lagrange_4_point_weights_at_half_a_sample():
    """Analytic: l_k(1/2) = (-1/16, 9/16, 9/16, -1/16) for k = -1, 0, 1, 2."""
    assert [_lagrange_weight(k, 0.5) for k in (-1, 0, 1, 2)] == pytest.approx([-1 / 16, 9 / 16, 9 / 16, -1 / 16])
    ct = pytest.importorskip("corpus_tuning_imaging")
    # the corpus' converter uses the same weights (its kernel at t = mu - k)
    got = ct.kernel("lagrange", 4, None, np.array([0.5 + 1, 0.5, 0.5 - 1, 0.5 - 2]))
    assert got == pytest.approx([-1 / 16, 9 / 16, 9 / 16, -1 / 16])


@pytest.mark.parametrize("kind", ["lagrange4", "catmullrom"])
@pytest.mark.parametrize("f", [4500.0, 7000.0])
def test_cubic_interpolator_image_level_is_its_kernels_response(kind, f):
    """Analytic: the first image of a tone lies |G(R - f)| / |G(f)| below it, G the DTFT of the kernel's taps
    at 4 x 24 kHz (module docstring); the analyzer measures it within 0.3 dB and calls it a defect."""
    src, factor = 24000, 4
    fs = src * factor
    g = _kernel_taps("catmullrom" if kind == "catmullrom" else "lagrange", factor)
    _w, resp = sps.freqz(g, 1.0, worN=[f, src - f], fs=fs)
    expected = 20 * math.log10(abs(resp[1]) / abs(resp[0]))
    # (the levels these kernels leave for tones at 0.38-0.58 of the source Nyquist frequency: -19 to -40 dB,
    # well above the -50 dB line)
    assert -45.0 < expected < -15.0
    y = _convert_whole(_tone(f, src), factor, "catmullrom" if kind == "catmullrom" else "lagrange")
    m = _run(y, fs)
    c = next(a for a in m["imaging"] if a["source_rate_hz"] == src)
    assert c["image_level_db"] == pytest.approx(expected, abs=0.3)
    assert c["verdict"] == "defect"
    assert m["imaging_detected"] is True


def test_linear_interpolation_at_a_fractional_ratio_leaves_the_triangles_image():
    """Analytic: 40 log10(f / (R - f)) for linear interpolation from 16 to 44.1 kHz (module docstring): a tone
    at 4.13 kHz has its image at 11.87 kHz, 18.35 dB down (4 kHz would divide the source rate: its harmonics
    pair up like images and the test says untestable)."""
    src, fs, f = 16000, 44100, 4130.0
    x = _tone(f, src)
    y = np.interp(np.arange(x.size * fs // src) * (src / fs), np.arange(x.size), x)
    m = _run(y, fs)
    c = next(a for a in m["imaging"] if a["source_rate_hz"] == src)
    assert c["image_level_db"] == pytest.approx(40 * math.log10(f / (src - f)), abs=0.3)
    assert c["verdict"] == "defect"


def _crush(x: np.ndarray, step: float) -> np.ndarray:
    """Sample-and-hold rate reducer: each output sample repeats the input at the last multiple of ``step``."""
    idx = (np.floor(np.arange(x.size) / step) * step).astype(np.int64)
    return x[np.minimum(idx, x.size - 1)]


@pytest.mark.parametrize("dither", [False, True])
def test_fractional_step_hold_is_imaging_at_its_effective_rate(rng, dither):
    """A hold of 4.8 samples at 48 kHz is a hold at 10 kHz (no standard rate): found from its repeated samples,
    also when dithered at 24 bits afterwards (TPDF, +-1 LSB); its level is the box's, 20 log10(3.1 / 6.9) =
    -6.95 dB for a tone at 3.1 kHz (module docstring)."""
    fs = 48000
    y = _crush(_tone(3100.0, fs), 4.8)
    if dither:
        lsb = 2.0 ** -23
        y = np.round(y / lsb + rng.uniform(-0.5, 0.5, y.size) + rng.uniform(-0.5, 0.5, y.size)) * lsb
    m = _run(y, fs)
    assert m["imaging_detected"] is True
    c = next(a for a in m["imaging"] if a.get("evidence") == "samples")
    assert c["source_rate_hz"] == 10000.0
    assert c["verdict"] == "defect"
    assert c["image_level_db"] == pytest.approx(20 * math.log10(3.1 / 6.9), abs=0.3)


def _square(f, fs, duty, seconds=2.0, amp=0.5):
    ph = np.mod(f * np.arange(int(fs * seconds)) / fs, 1.0)
    return amp * (np.where(ph < duty, 1.0, -1.0) - (2 * duty - 1))


def test_native_low_level_16_bit_and_steady_pulse_material_is_not_a_hold(rng):
    """Neither full-band noise, nor a quiet 40 Hz tone quantised to 16 bits (neighbouring samples often share a
    code there, in runs whose lengths follow the slope), nor steady naive pulse waves (two values in regular
    runs) are found as a sample-and-hold."""
    fs = 48000
    lsb16 = 2.0 ** -15
    quiet = np.round(_tone(40.0, fs, amp=10 ** (-60 / 20)) / lsb16) * lsb16
    noise = np.round(rng.standard_normal(2 * fs) * 0.1 / 2.0 ** -23) * 2.0 ** -23
    for x in (quiet, noise, _square(1990.0, fs, 0.27), _square(443.0, fs, 0.5)):
        m = _run(x, fs)
        assert not any(a.get("evidence") == "samples" for a in m["imaging"])
    assert _run(noise, fs)["imaging_detected"] is False


def test_no_transition_band_level_separates_the_short_kaiser_designs_from_the_shortest_proper_one():
    """Why the definition judges images beyond 1.3 of the source Nyquist frequency only (house choice,
    DEVELOPERS.md): within the transition band, the shortest design a general-purpose resampler ships (12 taps
    per phase, Kaiser beta 5, -6 dB at the source Nyquist frequency, a tuning negative) leaks the images of the
    top of the band more than a 32-tap Kaiser design (beta 16, -6 dB at 0.93-0.99 of it) at every content
    frequency from 0.7 to 0.95 of the Nyquist frequency, so any level line there that calls the latter imaging
    calls the former imaging too.  Responses from the taps (scipy.signal.firwin, freqz)."""
    src, up = 32000, 3
    fs = src * up

    def ratio_db(taps_per_phase, cutoff, beta, g):
        h = sps.firwin(taps_per_phase * up + 1, cutoff * src / 2.0, window=("kaiser", beta), fs=fs)
        _w, r = sps.freqz(h, 1.0, worN=[g * src / 2, src - g * src / 2], fs=fs)
        return 20 * math.log10(abs(r[1]) / abs(r[0]))

    for g in (0.7, 0.8, 0.85, 0.9, 0.95):
        shortest = ratio_db(12, 1.0, 5.0, g)
        for cutoff in (0.93, 0.96, 0.99):
            assert shortest > ratio_db(32, cutoff, 16.0, g)
    # and inside the judged band (images beyond 1.3 of the Nyquist frequency) the shortest one stays below the line
    assert ratio_db(12, 1.0, 5.0, 0.7) < -50.0
