"""Measurements the validation corpora's contract tests share: independent of each corpus module's own estimators
(a plain periodogram), so that a test re-measures a construction fact rather than re-reading it."""
from __future__ import annotations

import math

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
