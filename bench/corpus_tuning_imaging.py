"""Tuning corpus of the imaging detector: files converted up by good resamplers (negatives).

Follows the shared case format of the sampling-detector corpora (``cases(seed, quick)`` yields
:class:`Case` objects one at a time).  Set "tuning", seeds 1000-1999.  The positives (hold, linear,
zero-stuffing upsamplers) and the leaky short-filter negatives live in
``bench/corpus_tuning_upsampling.py``; this module adds what those lack: longer files (2, 5 and
10 s) converted up by resamplers that leave no images (libsamplerate ``sinc_best`` and
``sinc_medium``, scipy ``resample_poly`` with its default Kaiser window), on material that is
itself cyclostationary at a candidate's cycle frequency.

That material is music with steady (vibrato-free) harmonic notes tuned to A = 440 Hz: the partials
of a note on 110 Hz sit on multiples of 110 Hz, and 12 100 Hz = 110 x 110 is where the images of a
32 kHz source fold to in a 44.1 kHz file (44 100 - 32 000).  Two partials whose frequencies sum to a
cycle frequency keep their phase relation over the file exactly as a component and its image do.
Labels: ``upsampled_from_hz`` the source rate, ``imaging_detected`` False.

Listening caution: test material at up to -8 dBFS RMS with full-band noise and percussive bursts;
turn the monitoring level down before playing any of it.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Iterator

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import corpus_tuning_upsampling as up  # noqa: E402

Case = up.Case

#: (source, target) rates: the 32 -> 44.1 kHz fold at 12.1 kHz first, then other common conversions
CONVERSIONS = ((32000, 44100), (32000, 48000), (22050, 44100), (24000, 44100), (16000, 44100), (44100, 96000))
CONVERTERS = ("libsamplerate-sinc_best", "libsamplerate-sinc_medium", "scipy-resample_poly-kaiser5")
MATERIALS = ("steady", "steady", "music", "tonal")
LENGTHS_S = (2.0, 5.0, 10.0)
#: the first two notes' fundamentals: A1, A2 or A3, whose multiples include 12 100 Hz; the other notes are drawn
#: from the equal-tempered scale from 55 Hz up
A_NOTES_HZ = (55.0, 110.0, 220.0)


def steady_notes(n: int, fs: int, rng, notes: int) -> np.ndarray:
    """Harmonic notes without vibrato (the first two on A1, A2 or A3), slow decays, partials up to 0.48 fs; unit RMS."""
    t = np.arange(n) / fs
    out = np.zeros(n)
    for i in range(notes):
        f0 = A_NOTES_HZ[int(rng.integers(0, len(A_NOTES_HZ)))] if i < 2 else \
            55.0 * 2 ** (int(rng.integers(0, 48)) / 12.0)
        start = rng.uniform(0, 0.3) * n / fs
        env = np.clip((t - start) / 0.02, 0, 1) * np.exp(-np.maximum(t - start, 0) * rng.uniform(0.05, 0.6))
        k = np.arange(1, int(0.48 * fs / f0) + 1)
        amp = k ** -rng.uniform(0.8, 1.4)
        ph = rng.uniform(0, 2 * np.pi, k.size)
        note = np.zeros(n)
        for kk, a, p in zip(k, amp, ph):
            note += a * np.sin(2 * np.pi * kk * f0 * t + p)
        out += env * note
    return out / max(np.std(out), 1e-12)


def material(kind: str, fs: int, seconds: float, rng) -> np.ndarray:
    """Mono material at ``fs``, unit RMS: ``steady`` (steady A-tuned notes over a noise bed with
    percussive bursts) or one of the upsampling corpus's imaging materials."""
    if kind != "steady":
        return up.imaging_material(kind, fs, seconds, rng)
    n = int(round(fs * seconds))
    notes = steady_notes(n, fs, rng, int(rng.integers(2, 6)))
    bed = up._tilted_noise(n, fs, rng, rng.uniform(-4.0, -1.0))
    hits = np.zeros(n)
    for s in rng.integers(0, max(1, n - int(0.2 * fs)), max(1, int(seconds))):
        m = int(0.15 * fs)
        hits[s:s + m] += up._pink(m, rng) * np.exp(-np.arange(m) / (0.03 * fs))
    x = notes + rng.uniform(0.05, 0.5) * bed + 0.7 * hits
    x = x - np.mean(x)
    return x / max(np.sqrt(np.mean(x ** 2)), 1e-12)


def _plan(seed: int, quick: bool):
    rng = np.random.default_rng([int(seed), 23])
    plan = []
    for ci, (src, dst) in enumerate(CONVERSIONS if not quick else CONVERSIONS[:2]):
        for fi, family in enumerate(CONVERTERS):
            # the first conversion (32 -> 44.1 kHz) always on steady notes at 10 s
            mat = "steady" if ci == 0 else MATERIALS[int(rng.integers(0, len(MATERIALS)))]
            seconds = 10.0 if ci == 0 else LENGTHS_S[int(rng.integers(0, len(LENGTHS_S)))]
            ch = [1, 2][int(rng.integers(0, 2))]
            level = float(rng.uniform(-30.0, -8.0))
            plan.append((f"good_{family}_{src}_to_{dst}_{mat}_{seconds:g}s_{ch}ch", family, "good-resampler",
                         (src, dst, family, mat, seconds, ch, level)))
    return plan


def cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """Every case for ``seed`` (1000-1999); ``quick``: the first two conversions at 2 s."""
    if not 1000 <= int(seed) <= 1999:
        raise ValueError(f"tuning seeds are 1000-1999, got {seed}")
    for i, (name, family, group, spec) in enumerate(_plan(seed, quick)):
        src, dst, how, mat, seconds, ch, level = spec
        rng = np.random.default_rng([int(seed), 23, i])
        seconds = 2.0 if quick else seconds
        x = up.set_rms(np.stack([material(mat, src, seconds, rng) for _ in range(ch)], axis=1), level)
        y = np.stack([up.upsample(x[:, c], src, dst, how) for c in range(ch)], axis=1)
        peak = float(np.max(np.abs(y)))
        if peak > 0.99:
            y = y * (0.99 / peak)
        y = up.quantise24(y, rng)
        safe = name.lower().replace(".", "p")
        yield Case(name=f"{safe}_s{seed}", set="tuning", family=family, group=group, rate_hz=int(dst), audio=y,
                   expect={"upsampled_from_hz": src, "imaging_detected": False},
                   channel_labels=up.default_labels(ch))
