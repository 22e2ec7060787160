"""Measurements the validation corpora's contract tests share: independent of each corpus module's own estimators
(a plain periodogram), so that a test re-measures a construction fact rather than re-reading it."""
from __future__ import annotations

import math
import re

import numpy as np
from scipy import signal


def image_db(audio: np.ndarray, rate: int, src: int) -> float:
    """Energy between 1.05x the source Nyquist and 0.995x the file's Nyquist over the energy below the source
    Nyquist (from 20 Hz), from a plain Hann periodogram of the channels' summed powers; dB."""
    f, p = signal.periodogram(audio, fs=rate, axis=0, window="hann")
    p = p.sum(axis=1)
    hi = p[(f >= 1.05 * src / 2) & (f < 0.995 * rate / 2)].sum()
    lo = p[(f >= 20) & (f < src / 2)].sum()
    return 10 * math.log10(max(hi, 1e-30) / max(lo, 1e-30))


def top_band_db(audio: np.ndarray, rate: int) -> float:
    """Energy in 0.9-0.99 of the Nyquist frequency over the energy from 20 Hz up, from a plain (boxcar)
    periodogram of the channels' summed powers; dB."""
    f, p = signal.periodogram(audio, fs=rate, axis=0)
    p = p.sum(axis=1)
    top = p[(f >= 0.9 * rate / 2) & (f < 0.99 * rate / 2)].sum() / p[f >= 20].sum()
    return 10 * math.log10(top)


def assert_case_shape(c, corpus, contract_keys: set, seconds: tuple[float, float]) -> None:
    """One case of a validation corpus against the shared case format: name [a-z0-9_-], set "validation", a rate
    of the corpus' ``STANDARD_RATES_HZ``, float64 (frames, channels) with 1, 2 or 6 channels, ``seconds[0]`` to
    ``seconds[1]`` long, finite, |x| <= the corpus' ``PEAK_MAX``, labels only of ``contract_keys`` (at least one),
    the corpus' channel labels, and RMS -31..-5.9 dBFS (the corpora draw -30..-6 dBFS: their own design)."""
    assert re.fullmatch(r"[a-z0-9_-]+", c.name), c.name
    assert c.set == "validation"
    assert c.rate_hz in corpus.STANDARD_RATES_HZ, (c.name, c.rate_hz)
    assert c.audio.dtype == np.float64 and c.audio.ndim == 2
    assert c.audio.shape[1] in (1, 2, 6)
    assert seconds[0] * c.rate_hz <= c.audio.shape[0] <= seconds[1] * c.rate_hz, (c.name, c.audio.shape)
    assert float(np.max(np.abs(c.audio))) <= corpus.PEAK_MAX + 1e-9
    assert np.all(np.isfinite(c.audio))
    assert set(c.expect) <= contract_keys and c.expect, c.name
    assert c.channel_labels == corpus.CHANNEL_LABELS[c.audio.shape[1]]
    rms_db = 20 * math.log10(math.sqrt(np.mean(c.audio ** 2)))
    assert -31.0 <= rms_db <= -5.9, (c.name, rms_db)
