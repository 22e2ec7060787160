"""Imaging of short Kaiser-windowed sinc converters near the house line, and of a converter's higher-order images.

Analytic references (derived here, no outside values):

* A converter that evaluates a continuous kernel ``h(t)`` (t in source samples) at every output instant is, for a
  whole factor ``L`` from ``R`` to ``L*R``, zero stuffing followed by the FIR ``g[m] = h(m / L)`` at ``L*R``: the
  first image of a tone at ``f`` lies ``|G(R - f)| / |G(f)|`` below it, ``G`` the DTFT of those taps
  (``scipy.signal.freqz``).  Kernel here: ``c sinc(c t)`` under a Kaiser window (``numpy.i0``) over ``taps`` source
  samples, ``c`` the -6 dB point as a fraction of the source Nyquist frequency.
* A converter from ``r`` is coherent at every multiple ``k r`` of the source rate (its images of order ``k`` lie at
  ``k r +- f``); from 22.05 to 48 kHz the second-order images of the content at ``f`` fold to ``f + 3.9 kHz``, which
  is where a 44.1 kHz source's first images would fold.  The house definition (DEVELOPERS.md, imaging) judges the
  first images of the source rate's content; those of a converter whose kernel stops them by 55 dB and more are a
  resampler's trace, not imaging, at every candidate rate.

The house line is -50 dB for the first images of the content at 0.3-0.7 of the source Nyquist frequency (house
choice, ``DEFECT_IMAGE_LEVEL_DB``).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal as sps

from corpus_sampling import analyse
from masterqc.measure.imaging import DEFECT_IMAGE_LEVEL_DB, ImagingAnalyzer


def _kaiser_sinc(t, taps: int, beta: float, cutoff: float) -> np.ndarray:
    t = np.asarray(t, dtype=float)
    x = 2.0 * t / taps
    w = np.i0(beta * np.sqrt(np.clip(1.0 - x * x, 0.0, 1.0))) / np.i0(beta)
    return np.where(np.abs(x) < 1.0, cutoff * np.sinc(cutoff * t) * w, 0.0)


def _taps_whole(factor: int, taps: int, beta: float, cutoff: float) -> np.ndarray:
    """``g[m] = h(m / L)`` over the kernel's span."""
    m = np.arange(-(taps // 2) * factor, (taps // 2) * factor + 1)
    return _kaiser_sinc(m / factor, taps, beta, cutoff)


def _convert_whole(x: np.ndarray, factor: int, g: np.ndarray) -> np.ndarray:
    z = np.zeros(x.size * factor)
    z[::factor] = x
    half = (g.size - 1) // 2
    return np.convolve(z, g)[half:half + z.size]


def _convert_exact(x: np.ndarray, src: int, dst: int, taps: int, beta: float, cutoff: float) -> np.ndarray:
    """The kernel evaluated at each output instant ``n src / dst`` (any ratio)."""
    n_out = x.size * dst // src
    pos = np.arange(n_out) * (src / dst)
    i0 = np.floor(pos).astype(np.int64)
    mu = pos - i0
    half = taps // 2
    pad = np.concatenate([np.zeros(half + 1), x, np.zeros(half + 2)])
    y = np.zeros(n_out)
    for k in range(-half + 1, half + 1):
        y += _kaiser_sinc(mu - k, taps, beta, cutoff) * pad[i0 + k + half + 1]
    return y


def _tones(freqs, fs, seconds=3.0, amp=0.2):
    t = np.arange(int(fs * seconds)) / fs
    return sum(amp * np.sin(2 * math.pi * f * t + 0.7 * i) for i, f in enumerate(freqs))


def _candidate(m, rate):
    return next(a for a in m["imaging"] if a["source_rate_hz"] == rate)


@pytest.mark.parametrize("taps,beta,verdict", [(8, 5.0, "trace"), (6, 3.0, "defect")])
def test_short_kaiser_converter_is_judged_by_its_kernels_inner_band_images(taps, beta, verdict):
    """Analytic (module docstring): from 24 to 48 kHz, -6 dB at 0.86 of the source Nyquist frequency, tones at
    3.913 and 4.797 kHz (0.33 and 0.40 of it, no common fundamental).
    The 8-tap beta-5 design (the shortest Kaiser converters ship designs of
    this kind) leaves their images 54 and 58.5 dB down, under the line: a trace; the 6-tap beta-3 design 34 dB
    down: imaging.  The analyzer measures the power-weighted level within 1 dB."""
    src, factor, cutoff = 24000, 2, 0.86
    fs = src * factor
    tones = (3913.0, 4797.0)
    g = _taps_whole(factor, taps, beta, cutoff)
    _w, r_in = sps.freqz(g, 1.0, worN=list(tones), fs=fs)
    _w, r_im = sps.freqz(g, 1.0, worN=[src - f for f in tones], fs=fs)
    expected = 10 * math.log10(float(np.sum(np.abs(r_im) ** 2)) / float(np.sum(np.abs(r_in) ** 2)))
    if verdict == "trace":
        assert -60.0 < expected < DEFECT_IMAGE_LEVEL_DB - 3.0    # -55.8 dB
    else:
        assert DEFECT_IMAGE_LEVEL_DB + 6.0 < expected < -30.0    # -34.1 dB
    y = _convert_whole(_tones(tones, src), factor, g)
    m = analyse(y.reshape(-1, 1), fs, [ImagingAnalyzer], 24)
    c = _candidate(m, src)
    assert c["verdict"] == verdict
    assert c["image_level_db"] == pytest.approx(expected, abs=1.0)
    assert m["imaging_detected"] is (verdict == "defect")


def test_a_multiple_of_the_source_rate_is_not_judged_a_defect_by_the_converters_higher_images(rng):
    """Analytic (module docstring; tolerances a house choice).
    From 22.05 to 48 kHz through an 8-tap Kaiser (beta 5.8, -6 dB at 0.86 of the source Nyquist frequency) on
    white noise: the 22.05 kHz candidate measures the kernel's first images of the inner band's content within
    1.5 dB of their level from the kernel's continuous response (its Fourier transform summed numerically on a
    grid of 1/512 sample), 55 dB and more down, a trace; the 44.1 kHz candidate, coherent through the second-order
    images (module docstring), is that conversion's trace too, and the file is not imaging.  Above 11.025 kHz the
    file holds the converter's images and nothing else, so the content explains more than 0.99 of it."""
    src, fs, taps, beta, cutoff = 22050, 48000, 8, 5.84, 0.861
    x = rng.standard_normal(src * 4) * 0.1
    y = _convert_exact(x, src, fs, taps, beta, cutoff)
    t = np.arange(-(taps // 2) * 512, (taps // 2) * 512 + 1) / 512.0
    h = _kaiser_sinc(t, taps, beta, cutoff)
    f = np.linspace(0.3, 0.7, 161) * src / 2
    resp = (lambda fr: np.abs(np.exp(-2j * np.pi * np.outer(fr, t)) @ h) / 512.0)
    expected = 10 * math.log10(float(np.sum(resp((src - f) / src) ** 2)) / float(np.sum(resp(f / src) ** 2)))
    assert expected < DEFECT_IMAGE_LEVEL_DB - 5.0
    m = analyse(y.reshape(-1, 1), fs, [ImagingAnalyzer], 24)
    c = _candidate(m, src)
    assert c["verdict"] == "trace"
    assert c["image_level_db"] == pytest.approx(expected, abs=1.5)
    assert c["images_explained_fraction"] > 0.99
    assert _candidate(m, 44100)["verdict"] in ("trace", "none")
    assert m["imaging_detected"] is False
