"""Imaging at small ratios, where the first images fold back onto the programme (44.1 -> 48 kHz: the image of content
at ``f`` lies at ``44.1 k - f``, above 24 kHz for ``f`` < 20.1 kHz, and folds to ``f + 3.9 kHz``).

Analytic reference (derived here, no outside values): a converter that evaluates a continuous kernel ``h(t)`` (``t``
in source samples) at every output instant outputs ``sum_k x[k] h(t - k)``, the continuous filtering of the source's
impulse train, whose spectrum repeats every source rate ``r``; so the first image of content at ``f`` lies
``|H(r - f)|^2 / |H(f)|^2`` below it in power, ``H`` the kernel's Fourier transform (computed here by numerical
integration of the piecewise polynomial on a grid of 1/1024 sample).  On white noise the house definition's level
(the first images of the content at 0.3-0.7 of the source Nyquist frequency, power-weighted) is the mean of that ratio
over the band.  The 6-point Lagrange interpolator weighs the points ``k = -2 .. 3`` around a fractional position
``mu`` in [0, 1) by the Lagrange basis polynomials ``prod_{j != k} (mu - j) / (k - j)``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from corpus_sampling import analyse
from masterqc.measure.imaging import DEFECT_IMAGE_LEVEL_DB, ImagingAnalyzer

SRC_HZ, FS_HZ = 44100, 48000


def _lagrange6(t):
    """The 6-point Lagrange kernel at ``t`` (source samples): the weight of the point ``k`` at ``mu = t + k``."""
    t = np.asarray(t, dtype=float)
    out = np.zeros_like(t)
    for k in range(-2, 4):
        mu = t + k
        sel = (mu >= 0) & (mu < 1)
        w = np.ones(int(sel.sum()))
        for j in range(-2, 4):
            if j != k:
                w *= (mu[sel] - j) / (k - j)
        out[sel] = w
    return out


def _hann16(t):
    """A sinc under a 16-sample Hann window (a proper short design: its inner-band images lie near -62 dB)."""
    t = np.asarray(t, dtype=float)
    return np.where(np.abs(t) < 8, np.sinc(t) * (0.5 + 0.5 * np.cos(2 * np.pi * t / 16)), 0.0)


def _convert(x, kernel, half):
    """``x`` from 44.1 to 48 kHz, each output sample ``sum_k x[k] h(t - k)`` at its exact instant ``t``."""
    n_out = x.size * FS_HZ // SRC_HZ
    t = np.arange(n_out) * (SRC_HZ / FS_HZ)
    i0 = np.floor(t).astype(np.int64)
    pad = np.concatenate([np.zeros(half + 1), x, np.zeros(half + 2)])
    y = np.zeros(n_out)
    for k in range(-half, half + 2):
        y += kernel(t - (i0 + k)) * pad[i0 + k + half + 1]
    return y


def _level_db(kernel, half):
    """The kernel's inner-band image level on white noise: mean over f in 0.3-0.7 of the source Nyquist frequency of
    |H(r - f)|^2 / |H(f)|^2 (module docstring)."""
    t = np.arange(-(half + 1) * 1024, (half + 1) * 1024 + 1) / 1024.0
    h = kernel(t)
    f = np.linspace(0.3, 0.7, 81) * SRC_HZ / 2
    resp = (lambda fr: np.abs(np.exp(-2j * np.pi * np.outer(fr / SRC_HZ, t)) @ h) / 1024.0)
    return 10 * math.log10(float(np.mean((resp(SRC_HZ - f) / resp(f)) ** 2)))


def _noise():
    rng = np.random.default_rng(11)
    x = 0.1 * rng.standard_normal(4 * SRC_HZ)
    return x


def test_lagrange6_images_folded_onto_the_programme_are_found_at_the_kernels_level():
    """6-point Lagrange from 44.1 to 48 kHz on white noise: its inner-band images (analytic, from the kernel: about
    -28 dB) all fold back onto the noise; found as a defect at the kernel's level within 3 dB (the estimate from 4 s
    of noise is good to a dB or two; house tolerance)."""
    expected = _level_db(_lagrange6, 3)
    assert -32.0 < expected < -24.0
    y = _convert(_noise(), _lagrange6, 3)
    m = analyse(y[:, None], FS_HZ, [ImagingAnalyzer], 24)
    c = next(a for a in m["imaging"] if a["source_rate_hz"] == SRC_HZ)
    assert c["verdict"] == "defect"
    assert m["imaging_detected"] is True
    assert c["image_level_db"] == pytest.approx(expected, abs=3.0)
    assert "folded back" in c["reason"]


def test_a_proper_short_design_at_the_same_ratio_is_not_imaging():
    """A 16-tap Hann-windowed sinc evaluated at the same instants: its inner-band images lie near -62 dB (analytic,
    from the kernel), 12 dB under the line; the same noise converted by it is not imaging."""
    expected = _level_db(_hann16, 8)
    assert expected < DEFECT_IMAGE_LEVEL_DB - 10.0
    y = _convert(_noise(), _hann16, 8)
    m = analyse(y[:, None], FS_HZ, [ImagingAnalyzer], 24)
    c = next(a for a in m["imaging"] if a["source_rate_hz"] == SRC_HZ)
    assert c["verdict"] in ("trace", "none")
    assert m["imaging_detected"] is False
