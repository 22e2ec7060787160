"""Tuning corpus of the imaging detector: files converted up by good resamplers (negatives), short FIR
interpolators whose images are or are not a defect by the house definition, and naive synthesis at high rates.

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

Short FIR interpolators (group ``short-fir``, family ``scipy-resample_poly-shortfir-<window>``): scipy
``firwin`` designs of 16-48 taps (counted at the target rate), Kaiser (beta 0-6) or Hann windows, -6 dB at
0.8-1.0 of the source Nyquist frequency, applied by ``resample_poly``, from 16, 22.05, 24, 32, 44.1 and
48 kHz to 88.2, 96 and 192 kHz.  Their label comes from the filter's own taps and the source material's
own spectrum (:func:`fir_image_level_db`): the first images (at ``r - f``) of the content at 0.3-0.7 of
the source Nyquist frequency relative to that content, the quantity the house definition of imaging
judges (:data:`IMAGING_DEFECT_DB`).  ``imaging_detected`` True at or above the line plus
:data:`LABEL_MARGIN_DB`, False at or below it minus the margin; between the two no imaging label (reported
apart, not scored).  Each has a twin: the same material converted by ``resample_poly``'s own long
Kaiser design (False).

Naive synthesis at high rates (group ``naive-synth``, families ``naive-saw``, ``naive-square``,
``naive-pulse``; False): two to four overlapping voices of non-band-limited oscillators with envelopes,
some with vibrato and some steady, at 88.2, 96, 176.4 and 192 kHz.  Their partials fold at the file's
Nyquist frequency, and a folded partial and a direct one can sum to a candidate's cycle frequency by
chance, like a component and its image.  Twins (group ``band-limited-synth``, ``oversampled-<kind>``,
False): the same voices synthesised at 8 (4 at 176.4 and 192 kHz) times the rate and decimated by
``resample_poly``.

Interpolating stream converters written here (group ``stream-converter``, families ``own-stream-<kernel>``): 4- and
6-point Lagrange, Catmull-Rom and windowed sincs of 8-32 taps evaluated at each output instant, labelled from the
kernel's continuous response against the same line (:func:`kernel_image_level_db`); nearest-phase polyphase banks
(``own-nearest-phase``: no imaging label, their error is jitter-like, see the imaging analyzer's docs); sample-and-hold
rate reducers with fractional steps (``own-fractional-hold``, True) with the native material as twin.

Stream converters at small ratios (group ``folded-stream``, families ``own-stream-folded-<kernel>``): windowed sincs
of 8-16 taps and 6-point Lagrange at 44.1 -> 48, 88.2 -> 96, 22.05 -> 24 and 32 -> 44.1 kHz, where the first images
of the inner band's content fold back onto the programme; labelled from the kernel's continuous response, each
with a long-design twin (False).

Short Kaiser banks with interpolated phases (group ``short-kaiser-bank``, families ``own-kaiser-bank<taps>``): Kaiser-
windowed sincs of 6-12 taps (beta 3-6, -6 dB at 0.84-0.90 of the source Nyquist frequency) tabulated at 8-32 phases,
the weights interpolated linearly between neighbouring phases, at whole and fractional ratios from 11.025-32 kHz;
labelled from the effective kernel's response as the file samples it (:func:`kaiser_bank_image_level_db`), each with
a long-design twin (False).

Listening caution: test material at up to -8 dBFS RMS with full-band noise and percussive bursts;
turn the monitoring level down before playing any of it.
"""

from __future__ import annotations

import sys
from fractions import Fraction
from pathlib import Path
from typing import Iterator

import numpy as np
from scipy import signal as sps

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


#: the house definition of imaging, the line the short-FIR labels are drawn against (dB, images of the
#: content at 0.3-0.7 of the source Nyquist frequency relative to it); see the imaging analyzer's docs
IMAGING_DEFECT_DB = -50.0
#: labels only where the filter's level is at least this far from the line (house choice: the
#: level's estimate from a few seconds of programme is good to about 1-2 dB)
LABEL_MARGIN_DB = 3.0
FIR_SOURCES_HZ = (16000, 22050, 24000, 32000, 44100, 48000)
FIR_TARGETS_HZ = (88200, 96000, 192000)
FIR_MATERIALS = ("music", "speech", "tonal", "dull", "noise")
NAIVE_RATES_HZ = (88200, 96000, 176400, 192000)
NAIVE_KINDS = ("saw", "square", "pulse")


def imaging_expect(src: int, lvl: float) -> dict:
    """The labels of an upsampled case whose first images lie ``lvl`` dB under the content: imaging where they
    reach the house line by the label margin, clean where they stay under it by the margin, no imaging label
    between (left to the detector, unscored)."""
    expect = {"upsampled_from_hz": src}
    if lvl >= IMAGING_DEFECT_DB + LABEL_MARGIN_DB:
        expect["imaging_detected"] = True
    elif lvl <= IMAGING_DEFECT_DB - LABEL_MARGIN_DB:
        expect["imaging_detected"] = False
    return expect


def long_twin(x: np.ndarray, src: int, dst: int) -> np.ndarray:
    """The proper twin of a conversion: ``resample_poly`` with a long Kaiser (beta 12) design, 32 zero crossings
    per side, -6 dB at 0.95 of the lower Nyquist frequency, per channel."""
    fr = Fraction(dst, src)
    m = max(fr.numerator, fr.denominator)
    h = sps.firwin(2 * 32 * m + 1, 0.95 / m, window=("kaiser", 12.0))
    return np.stack([sps.resample_poly(x[:, c], fr.numerator, fr.denominator, window=h) for c in range(x.shape[1])],
                    axis=1)


def fir_design(src: int, dst: int, taps: int, cutoff: float, window):
    """``(h, up, down)``: a ``firwin`` low-pass of ``taps`` taps counted at the target rate (``taps * down``
    at the design rate ``src * up``), -6 dB at ``cutoff`` of the source Nyquist frequency."""
    fr = Fraction(dst, src)
    up_, down = fr.numerator, fr.denominator
    h = sps.firwin(taps * down, cutoff * src / 2.0, window=window, fs=float(src * up_))
    return h, up_, down


def fir_image_level_db(h, src: int, up_: int, x: np.ndarray) -> float:
    """Level (dB) of the first images of the content at 0.3-0.7 of the source Nyquist frequency relative to
    that content, for material ``x`` (at ``src``, channels in columns) through filter ``h`` (at ``src * up_``):
    sum P(f) |H(src - f)|^2 / sum P(f) |H(f)|^2 over that band, P the material's own power spectrum (Welch,
    25 Hz bins), H from the taps (scipy.signal.freqz)."""
    f, p = sps.welch(np.sum(np.atleast_2d(x.T), axis=0), fs=src, nperseg=int(src // 25))
    band = (f >= 0.3 * src / 2) & (f <= 0.7 * src / 2)
    f, p = f[band], p[band]
    _w, h_in = sps.freqz(h, worN=f, fs=float(src * up_))
    _w, h_im = sps.freqz(h, worN=src - f, fs=float(src * up_))
    return float(10 * np.log10(np.sum(p * np.abs(h_im) ** 2) / np.sum(p * np.abs(h_in) ** 2)))


def _fir_plan(seed: int, quick: bool):
    rng = np.random.default_rng([int(seed), 29])
    plan = []
    for src in (FIR_SOURCES_HZ if not quick else (32000, 48000)):
        for _rep in range(2 if not quick else 1):
            dst = FIR_TARGETS_HZ[int(rng.integers(0, len(FIR_TARGETS_HZ)))]
            taps = int(rng.integers(16, 49))
            cutoff = float(np.round(rng.uniform(0.8, 1.0), 3))
            window = ("kaiser", float(np.round(rng.uniform(0.0, 6.0), 2))) if rng.random() < 0.7 else "hann"
            mat = FIR_MATERIALS[int(rng.integers(0, len(FIR_MATERIALS)))]
            ch = [1, 2][int(rng.integers(0, 2))]
            level = float(rng.uniform(-30.0, -8.0))
            wname = "hann" if window == "hann" else f"kaiser{window[1]:g}"
            plan.append(("fir", (src, dst, taps, cutoff, window, mat, ch, level),
                         f"fir{taps}_{wname}_c{cutoff:g}_{src}_to_{dst}_{mat}_{ch}ch",
                         f"scipy-resample_poly-shortfir-{'hann' if window == 'hann' else 'kaiser'}"))
    return plan


def _naive_plan(seed: int, quick: bool):
    rng = np.random.default_rng([int(seed), 31])
    plan = []
    for fs in (NAIVE_RATES_HZ if not quick else (96000,)):
        for kind in NAIVE_KINDS:
            # some voices steady (no vibrato): their folded partials keep their phase over the file
            depth = float(rng.choice([0.0, rng.uniform(0.001, 0.006)]))
            plan.append(("naive", (fs, kind, depth, int(rng.integers(2, 5)), float(rng.uniform(-24.0, -8.0))),
                         f"naive_{kind}_{fs}_v{depth * 1000:.1f}", f"naive-{kind}"))
    return plan


def naive_voices(fs: int, seconds: float, kind: str, depth: float, voices: int, rng, over: int = 1):
    """Overlapping notes of a naive (non-band-limited) oscillator at ``fs * over``: equal-tempered pitches
    from 55 to 880 Hz, attack and decay envelopes, vibrato of relative ``depth`` at 4-7 Hz (none at 0)."""
    n = int(round(fs * seconds))
    out = np.zeros(n * over)
    rate = fs * over
    for _v in range(voices):
        pos = int(rng.uniform(0.0, 0.3) * fs)
        while pos < n - int(0.3 * fs):
            length = min(int(rng.uniform(0.8, 2.5) * fs), n - pos)
            f0 = 55.0 * 2 ** (int(rng.integers(0, 49)) / 12.0)
            t = np.arange(length * over) / rate
            f_inst = f0 * (1.0 + depth * np.sin(2 * np.pi * rng.uniform(4.0, 7.0) * t + rng.uniform(0, 2 * np.pi)))
            ph = np.mod(rng.uniform() + np.cumsum(f_inst) / rate, 1.0)
            if kind == "saw":
                wave = 2.0 * ph - 1.0
            elif kind == "square":
                wave = np.where(ph < 0.5, 1.0, -1.0)
            else:
                duty = rng.uniform(0.1, 0.35)
                wave = np.where(ph < duty, 1.0, -1.0) - (2.0 * duty - 1.0)
            env = np.minimum(1.0, t / 0.01) * np.exp(-t * rng.uniform(0.2, 1.5))
            out[pos * over:(pos + length) * over] += rng.uniform(0.5, 1.0) * env * wave
            pos += length + int(rng.uniform(0.0, 0.15) * fs)
    return out


def _extra_cases(seed: int, quick: bool):
    """The short-FIR and naive-synthesis cases with their twins (see the module docstring)."""
    seconds = 2.0 if quick else 4.0
    for i, (kind, spec, name, family) in enumerate(_fir_plan(seed, quick) + _naive_plan(seed, quick)):
        rng = np.random.default_rng([int(seed), 37, i])
        if kind == "fir":
            src, dst, taps, cutoff, window, mat, ch, level = spec
            x = up.set_rms(np.stack([material(mat, src, seconds, rng) for _ in range(ch)], axis=1), level)
            h, up_, down = fir_design(src, dst, taps, cutoff, window)
            lvl = fir_image_level_db(h, src, up_, x)
            expect = imaging_expect(src, lvl)
            y = np.stack([sps.resample_poly(x[:, c], up_, down, window=h) for c in range(ch)], axis=1)
            twin = np.stack([sps.resample_poly(x[:, c], up_, down) for c in range(ch)], axis=1)
            out = ((f"{name}_img{lvl:.0f}db", family, "short-fir", y, expect),
                   (f"{name}_twin", "scipy-resample_poly-kaiser5", "good-resampler", twin,
                    {"upsampled_from_hz": src, "imaging_detected": False}))
            rate, labels = dst, up.default_labels(ch)
        else:
            fs, wave, depth, voices, level = spec
            state = int(rng.integers(1 << 62))
            x = naive_voices(fs, seconds, wave, depth, voices, np.random.default_rng(state))
            over = 8 if fs < 150000 else 4
            y = naive_voices(fs, seconds, wave, depth, voices, np.random.default_rng(state), over=over)
            y = sps.resample_poly(y, 1, over)[:x.size]
            g = 10 ** (level / 20.0) / max(float(np.sqrt(np.mean(x ** 2))), 1e-12)
            out = ((name, family, "naive-synth", x * g, {"imaging_detected": False}),
                   (f"{name}_twin", f"oversampled-{wave}", "band-limited-synth", y * g, {"imaging_detected": False}))
            rate, labels = fs, ["M"]
        for cname, fam, group, audio, expect in out:
            yield up.tuning_case(cname, fam, group, rate, audio, expect, labels, seed, rng)


# ================================================================ interpolating stream converters (written here)
# Converters that evaluate a continuous interpolation kernel at each output instant ``t = n * src / dst``
# (source samples): the published 4- and 6-point Lagrange polynomials, the Catmull-Rom cubic (cubic Hermite
# with centred-difference slopes), short windowed sincs (Kaiser or Hann, 8-32 taps) evaluated at the exact
# position, a nearest-phase polyphase bank (the same windowed sinc tabulated at ``phases`` fractional delays,
# each output taking the nearest one, no interpolation between phases), and a sample-and-hold rate reducer
# with a fractional step.  Labels from the kernel's own continuous response (:func:`kernel_image_level_db`).

#: interpolation kernels of the stream converters: (name, taps, kind, parameter)
STREAM_KERNELS = (("lagrange4", 4, "lagrange", None), ("lagrange6", 6, "lagrange", None),
                  ("catmullrom", 4, "catmullrom", None), ("wsinc8-kaiser", 8, "kaiser", 6.0),
                  ("wsinc16-kaiser", 16, "kaiser", 8.0), ("wsinc16-hann", 16, "hann", None),
                  ("wsinc32-kaiser", 32, "kaiser", 10.0), ("wsinc32-hann", 32, "hann", None))
#: (source, target) rates of the stream converters: whole and fractional ratios
STREAM_CONVERSIONS = ((44100, 48000), (32000, 48000), (22050, 48000), (44100, 96000), (48000, 96000),
                      (16000, 44100), (24000, 96000), (48000, 88200))
#: nearest-phase banks: (taps, phases)
NEAREST_PHASE_BANKS = ((32, 8), (32, 16), (16, 32), (32, 1024))
#: sample-and-hold rate reducers: (file rate, step in samples)
HOLD_STEPS = ((48000, 4.8), (44100, 3.3), (48000, 2.5), (96000, 7.3))


def kernel(kind: str, taps: int, param, t):
    """Impulse response of an interpolation kernel at ``t`` (source samples, any real values): the Lagrange
    polynomial of ``taps`` points (the interval between the two middle points interpolated), the Catmull-Rom
    cubic, or a sinc windowed by a Kaiser (beta ``param``) or Hann window over ``taps`` samples."""
    t = np.asarray(t, dtype=float)
    a = np.abs(t)
    if kind == "catmullrom":
        return np.where(a < 1, 1.5 * a ** 3 - 2.5 * a ** 2 + 1,
                        np.where(a < 2, -0.5 * a ** 3 + 2.5 * a ** 2 - 4 * a + 2, 0.0))
    if kind == "lagrange":
        # the weight of the point k (k = -taps/2 + 1 .. taps/2) at fractional position mu = t + k in [0, 1)
        half = taps // 2
        out = np.zeros_like(t)
        for k in range(-half + 1, half + 1):
            mu = t + k
            sel = (mu >= 0) & (mu < 1)
            w = np.ones(int(sel.sum()))
            for j in range(-half + 1, half + 1):
                if j != k:
                    w *= (mu[sel] - j) / (k - j)
            out[sel] = w
        return out
    inside = a < taps / 2.0
    if kind == "kaiser":
        w = np.i0(param * np.sqrt(np.clip(1 - (2 * t / taps) ** 2, 0, 1))) / np.i0(param)
    else:
        w = 0.5 + 0.5 * np.cos(2 * np.pi * t / taps)
    return np.where(inside, np.sinc(t) * w, 0.0)


def at_instants(x: np.ndarray, src: int, dst: int, taps: int, phases, weight) -> np.ndarray:
    """One channel from ``src`` to ``dst``: each output sample the ``weight``-weighted sum of the ``taps`` source
    samples around its instant (``weight(t)``, ``t`` in source samples from the instant); ``phases``: the
    fractional position rounded to the nearest of that many (None: exact)."""
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
        y += weight(mu - k) * pad[i0 + k + half + 1]
    return y


def stream_convert(x: np.ndarray, src: int, dst: int, kind: str, taps: int, param, phases: int | None = None):
    """One channel from ``src`` to ``dst`` through :func:`kernel` (:func:`at_instants`)."""
    return at_instants(x, src, dst, taps, phases, lambda t: kernel(kind, taps, param, t))


def kernel_response(kind: str, taps: int, param, f_frac):
    """Magnitude of the kernel's continuous-time frequency response at ``f_frac`` (fractions of the source
    rate): its Fourier transform, summed numerically on a grid of 1/512 source sample."""
    over = 512
    half = max(2, taps // 2)
    t = np.arange(-half * over, half * over + 1) / over
    h = kernel(kind, taps, param, t)
    f = np.atleast_1d(np.asarray(f_frac, dtype=float))
    return np.abs(np.exp(-2j * np.pi * np.outer(f, t)) @ h) / over


def kernel_image_level_db(kind: str, taps: int, param, src: int, x: np.ndarray, band=(0.3, 0.7)) -> float:
    """Level (dB) of the first images (at ``src - f``) of the content at ``band`` of the source Nyquist
    frequency relative to that content, through the kernel's continuous response: sum P(f) |H(src - f)|^2
    over sum P(f) |H(f)|^2, P the material's own power spectrum (Welch, 100 Hz bins)."""
    f, p = sps.welch(np.sum(np.atleast_2d(x.T), axis=0), fs=src, nperseg=int(src // 100))
    sel = (f >= band[0] * src / 2) & (f <= band[1] * src / 2)
    f, p = f[sel], p[sel]
    h_in = kernel_response(kind, taps, param, f / src)
    h_im = kernel_response(kind, taps, param, (src - f) / src)
    return float(10 * np.log10(np.sum(p * h_im ** 2) / np.sum(p * h_in ** 2)))


def _stream_plan(seed: int, quick: bool):
    rng = np.random.default_rng([int(seed), 41])
    plan = []
    kernels = STREAM_KERNELS if not quick else STREAM_KERNELS[::3]
    for name, taps, kind, param in kernels:
        for _rep in range(2 if not quick else 1):
            src, dst = STREAM_CONVERSIONS[int(rng.integers(0, len(STREAM_CONVERSIONS)))]
            mat = FIR_MATERIALS[int(rng.integers(0, len(FIR_MATERIALS)))]
            plan.append(("stream", (src, dst, kind, taps, param, None, mat, [1, 2][int(rng.integers(0, 2))],
                                    float(rng.uniform(-30.0, -8.0))),
                         f"stream_{name}_{src}_to_{dst}_{mat}", f"own-stream-{name}"))
    for taps, phases in (NEAREST_PHASE_BANKS if not quick else NEAREST_PHASE_BANKS[1:2]):
        src, dst = STREAM_CONVERSIONS[int(rng.integers(0, 4))]
        mat = FIR_MATERIALS[int(rng.integers(0, len(FIR_MATERIALS)))]
        plan.append(("stream", (src, dst, "kaiser", taps, 9.0, phases, mat, [1, 2][int(rng.integers(0, 2))],
                                float(rng.uniform(-30.0, -8.0))),
                     f"nearest{phases}_wsinc{taps}_{src}_to_{dst}_{mat}", "own-nearest-phase"))
    for fs, step in (HOLD_STEPS if not quick else HOLD_STEPS[:1]):
        mat = ("music", "tonal", "speech")[int(rng.integers(0, 3))]
        plan.append(("crush", (fs, step, mat, float(rng.uniform(-24.0, -8.0))),
                     f"crushhold_{fs}_step{step:g}_{mat}", "own-fractional-hold"))
    return plan


def _stream_cases(seed: int, quick: bool):
    """The stream-converter, nearest-phase and fractional-hold cases (see above), each with a negative: the
    same material converted by ``resample_poly``'s long Kaiser design, or for the hold, left native."""
    seconds = 2.0 if quick else 4.0
    for i, (kind, spec, name, family) in enumerate(_stream_plan(seed, quick)):
        rng = np.random.default_rng([int(seed), 43, i])
        if kind == "stream":
            src, dst, kk, taps, param, phases, mat, ch, level = spec
            x = up.set_rms(np.stack([material(mat, src, seconds, rng) for _ in range(ch)], axis=1), level)
            y = np.stack([stream_convert(x[:, c], src, dst, kk, taps, param, phases) for c in range(ch)], axis=1)
            expect = {"upsampled_from_hz": src}
            if phases is None:
                lvl = kernel_image_level_db(kk, taps, param, src, x)
                name = f"{name}_img{lvl:.0f}db"
                expect = imaging_expect(src, lvl)
            fr = Fraction(dst, src)
            twin = np.stack([sps.resample_poly(x[:, c], fr.numerator, fr.denominator) for c in range(ch)], axis=1)
            out = ((name, family, "stream-converter" if phases is None else "nearest-phase", y, expect),
                   (f"{name}_twin", "scipy-resample_poly-kaiser5", "good-resampler", twin,
                    {"upsampled_from_hz": src, "imaging_detected": False}))
            rate, labels = dst, up.default_labels(ch)
        else:
            fs, step, mat, level = spec
            x = up.set_rms(material(mat, fs, seconds, rng)[:, None], level)
            held = x[np.minimum((np.floor(np.arange(x.shape[0]) / step) * step).astype(np.int64), x.shape[0] - 1)]
            out = ((name, family, "sample-hold", held, {"imaging_detected": True}),
                   (f"{name}_native", "native", "native", x, {"upsampled_from_hz": None, "imaging_detected": False}))
            rate, labels = fs, ["M"]
        for cname, fam, group, audio, expect in out:
            yield up.tuning_case(cname, fam, group, rate, audio, expect, labels, seed, rng)


# ================================================================ own polyphase converters and nearest-phase banks
# Windowed-sinc polyphase converters written here from the published method: the ideal interpolator
# ``cutoff * sinc(cutoff * t)`` (``cutoff`` a fraction of the source Nyquist frequency) under a window of ``taps``
# source samples (Blackman-Nuttall, Kaiser or Hann), evaluated at each output instant (every phase of the bank, so
# no rounding), or at the instant rounded to the nearest of ``phases`` fractional delays with no interpolation
# between them (a nearest-phase bank).  Labels from the converter's own design (see :func:`poly_image_level_db`):
# the house definition's first images of the content at 0.3-0.7 of the source Nyquist frequency relative to it,
# the kernel's own response plus, for a nearest-phase bank, the images of its rounding (a zero-order hold at
# ``phases * src``: ``(f / (phases * src - f))**2``, see the imaging analyzer's NEAREST_PHASE_COUNTS).

#: windows of the own polyphase converters: (name, taps per phase)
POLY_WINDOWS = (("bnuttall", 32), ("bnuttall", 16), ("kaiser", 32), ("kaiser", 64), ("hann", 32), ("kaiser", 8),
                ("hann", 16), ("bnuttall", 64))
#: (source, target) rates of the polyphase converters and nearest-phase banks: fractional ratios, whose phases a
#: bank rounds (a whole ratio's instants fall on phases any even count holds exactly)
POLY_CONVERSIONS = ((44100, 48000), (22050, 48000), (44100, 96000), (32000, 44100), (16000, 44100),
                    (48000, 88200), (24000, 44100), (11025, 48000))
#: phase counts of the nearest-phase banks
POLY_PHASES = (8, 16, 32, 64, 128, 256, 1024)
POLY_MATERIALS = ("music", "speech", "tonal", "dull", "noise")
#: the native negatives' steady notes pair about the cycle frequency of a nearest-phase bank's first images (for
#: 44.1 kHz in a 48 kHz file with 8 phases: 16.8 kHz; for 32 kHz in a 44.1 kHz file: 8.6 kHz): fundamentals
#: ``alpha / k`` (their partials ``m1 + m2 = k`` sum to it), for these ``k``, that leave no multiple within 5 Hz of
#: a standard rate (no pairing at an ordinary image cycle frequency)
PAIRING_ORDERS = (23, 29, 31, 35, 37, 41, 43, 47)
PAIRING_SOURCES_HZ = {48000: 44100, 44100: 32000}


def window_kernel(window: str, taps: int, beta: float, cutoff: float, t):
    """``cutoff * sinc(cutoff * t)`` under a ``taps``-sample window (``t`` in source samples): Blackman-Nuttall
    (4 terms: 0.3635819, 0.4891775, 0.1365995, 0.0106411), Kaiser (``beta``) or Hann."""
    t = np.asarray(t, dtype=float)
    x = 2.0 * t / taps
    inside = np.abs(x) < 1.0
    if window == "bnuttall":
        c = np.cos(np.pi * x)
        w = 0.3635819 + 0.4891775 * c + 0.1365995 * np.cos(2 * np.pi * x) + 0.0106411 * np.cos(3 * np.pi * x)
    elif window == "kaiser":
        w = np.i0(beta * np.sqrt(np.clip(1 - x * x, 0, 1))) / np.i0(beta)
    else:
        w = 0.5 + 0.5 * np.cos(np.pi * x)
    return np.where(inside, cutoff * np.sinc(cutoff * t) * w, 0.0)


def poly_convert(x: np.ndarray, src: int, dst: int, window: str, taps: int, beta: float, cutoff: float,
                 phases: int | None = None) -> np.ndarray:
    """One channel from ``src`` to ``dst`` through the windowed-sinc bank (see above, :func:`at_instants`);
    ``phases``: the fractional position rounded to the nearest of that many (a nearest-phase bank)."""
    return at_instants(x, src, dst, taps, phases, lambda t: window_kernel(window, taps, beta, cutoff, t))


def _judged_band_and_kernel_grid(x: np.ndarray, src: int, taps: int):
    """The material's power spectrum (Welch, 100 Hz bins) over the judged band, 0.3-0.7 of the source Nyquist
    frequency, as ``(f, p)``; the kernel's time grid of 1/512 sample over its ``taps`` taps, ``t``; and 512."""
    f, p = sps.welch(np.sum(np.atleast_2d(x.T), axis=0), fs=src, nperseg=int(src // 100))
    sel = (f >= 0.3 * src / 2) & (f <= 0.7 * src / 2)
    over = 512
    return f[sel], p[sel], np.arange(-(taps // 2) * over, (taps // 2) * over + 1) / over, over


def poly_image_level_db(window: str, taps: int, beta: float, cutoff: float, phases, src: int, x: np.ndarray) -> float:
    """The house definition's level (dB) for the bank: the first images (at ``src - f``) of the content at 0.3-0.7
    of the source Nyquist frequency relative to that content through the kernel's continuous response (its Fourier
    transform summed on a grid of 1/512 sample), plus for a nearest-phase bank the hold's images
    ``(f / (phases * src - f))**2``; power-weighted by the material's own spectrum (Welch, 100 Hz bins)."""
    f, p, t, over = _judged_band_and_kernel_grid(x, src, taps)
    h = window_kernel(window, taps, beta, cutoff, t)
    resp = (lambda fr: np.abs(np.exp(-2j * np.pi * np.outer(fr, t)) @ h) / over)
    ratio = (resp((src - f) / src) / resp(f / src)) ** 2
    if phases:
        ratio = ratio + (f / (phases * src - f)) ** 2
    return float(10 * np.log10(np.sum(p * ratio) / np.sum(p)))


def _poly_plan(seed: int, quick: bool):
    rng = np.random.default_rng([int(seed), 47])
    plan = []
    for window, taps in (POLY_WINDOWS if not quick else POLY_WINDOWS[:2]):
        src, dst = POLY_CONVERSIONS[int(rng.integers(0, len(POLY_CONVERSIONS)))]
        cutoff = float(np.round(rng.uniform(0.9, 1.0), 3))
        beta = float(np.round(rng.uniform(6.0, 10.0), 2)) if window == "kaiser" else 0.0
        plan.append(("bank", (src, dst, window, taps, beta, cutoff, None), f"poly_{window}{taps}_c{cutoff:g}"))
    for phases in (POLY_PHASES if not quick else (8, 1024)):
        src, dst = POLY_CONVERSIONS[int(rng.integers(0, len(POLY_CONVERSIONS)))]
        window = ("bnuttall", "kaiser", "hann")[int(rng.integers(0, 3))]
        cutoff = float(np.round(rng.uniform(0.9, 1.0), 3))
        beta = float(np.round(rng.uniform(6.0, 10.0), 2)) if window == "kaiser" else 0.0
        plan.append(("bank", (src, dst, window, 32, beta, cutoff, phases), f"nearest{phases}_{window}32_c{cutoff:g}"))
    for fs in ((44100, 48000) if not quick else (48000,)):
        plan.append(("pairing", (fs,), f"pairing_notes_{fs}"))
    return [(kind, spec, name, rng.uniform(-30.0, -8.0), [1, 2][int(rng.integers(0, 2))],
             POLY_MATERIALS[int(rng.integers(0, len(POLY_MATERIALS)))]) for kind, spec, name in plan]


def pairing_notes(fs: int, seconds: float, rng) -> np.ndarray:
    """Native negative: three steady notes whose partials pair about the first-image cycle frequency of an 8-phase
    bank from ``PAIRING_SOURCES_HZ[fs]`` (:data:`PAIRING_ORDERS`), partials up to 0.45 of ``fs``, over a quiet noise
    bed, low-passed (elliptic, 10th order) at 0.9 of that source's Nyquist frequency so that the band above it is as
    quiet as a converter from there leaves it; unit RMS."""
    src = PAIRING_SOURCES_HZ[fs]
    alpha = (8 * src) % fs
    alpha = min(alpha, fs - alpha)
    rates = [r for r in (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000) if r < fs]
    f0s = [alpha / k for k in PAIRING_ORDERS
           if all(abs(r / (alpha / k) - round(r / (alpha / k))) * (alpha / k) > 5.0 for r in rates)]
    n = int(round(fs * seconds))
    t = np.arange(n) / fs
    out = np.zeros(n)
    for f0 in rng.choice(f0s, size=3, replace=False):
        k = np.arange(1, int(0.45 * fs / f0) + 1)
        amp = k ** -rng.uniform(0.6, 1.2)
        for kk, a in zip(k, amp):
            out += a * np.sin(2 * np.pi * kk * f0 * t + rng.uniform(0, 2 * np.pi))
    out += 0.05 * np.std(out) * rng.standard_normal(n)
    sos = sps.ellip(10, 0.1, 100, 0.9 * src / 2.0, output="sos", fs=fs)
    out = sps.sosfiltfilt(sos, out)
    return out / max(float(np.std(out)), 1e-12)


def _poly_cases(seed: int, quick: bool):
    """The own polyphase converters and nearest-phase banks (see above), each with a negative twin: the same
    material through ``resample_poly`` with a long design (64 taps per phase, Kaiser beta 12, -6 dB at 0.95 of
    the source Nyquist frequency); and the native pairing-notes negatives."""
    seconds = 2.0 if quick else 4.0
    for i, (kind, spec, name, level, ch, mat) in enumerate(_poly_plan(seed, quick)):
        rng = np.random.default_rng([int(seed), 53, i])
        if kind == "bank":
            src, dst, window, taps, beta, cutoff, phases = spec
            x = up.set_rms(np.stack([material(mat, src, seconds, rng) for _ in range(ch)], axis=1), level)
            y = np.stack([poly_convert(x[:, c], src, dst, window, taps, beta, cutoff, phases) for c in range(ch)],
                         axis=1)
            lvl = poly_image_level_db(window, taps, beta, cutoff, phases, src, x)
            expect = imaging_expect(src, lvl)
            twin = long_twin(x, src, dst)
            family = f"own-nearest-phase-{window}" if phases else f"own-poly-{window}{taps}"
            full = f"{name}_{src}_to_{dst}_{mat}_img{lvl:.0f}db"
            out = ((full, family, "nearest-phase" if phases else "polyphase", y, expect),
                   (f"{full}_twin", "scipy-resample_poly-kaiser12-long", "good-resampler", twin,
                    {"upsampled_from_hz": src, "imaging_detected": False}))
            rate, labels = dst, up.default_labels(ch)
        else:
            (fs,) = spec
            x = up.set_rms(pairing_notes(fs, seconds, rng)[:, None], level)
            out = ((name, "native-pairing-notes", "native", x, {"upsampled_from_hz": None, "imaging_detected": False}),)
            rate, labels = fs, ["M"]
        for cname, fam, group, audio, expect in out:
            yield up.tuning_case(cname, fam, group, rate, audio, expect, labels, seed, rng)


# ================================================================ stream converters at small ratios (written here)
# Windowed sincs of 8-16 taps evaluated at each output instant (:func:`stream_convert`) at ratios whose first images of
# the inner band's content lie beyond the file's Nyquist frequency and fold back onto the programme (44.1 -> 48,
# 88.2 -> 96, 22.05 -> 24 kHz; images of content at f at ``f + fs - r``), and 32 -> 44.1 kHz for contrast; group
# ``folded-stream``, families ``own-stream-folded-<kernel>``, labelled from the kernel's continuous response against
# the house line (:func:`kernel_image_level_db`), each with a long-design twin (64 taps per phase, Kaiser beta 12, -6 dB
# at 0.95 of the source Nyquist frequency, False).

#: kernels of the small-ratio stream converters: (name, taps, kind, parameter)
FOLDED_KERNELS = (("wsinc8-kaiser", 8, "kaiser", 6.0), ("wsinc8-hann", 8, "hann", None),
                  ("wsinc12-kaiser", 12, "kaiser", 5.0), ("wsinc16-hann", 16, "hann", None),
                  ("lagrange6", 6, "lagrange", None), ("wsinc16-kaiser", 16, "kaiser", 8.0))
FOLDED_CONVERSIONS = ((44100, 48000), (88200, 96000), (22050, 24000), (32000, 44100))


def _folded_plan(seed: int, quick: bool):
    rng = np.random.default_rng([int(seed), 59])
    plan = []
    for i, (name, taps, kind, param) in enumerate(FOLDED_KERNELS if not quick else FOLDED_KERNELS[:2]):
        for rep in range(2 if not quick else 1):
            src, dst = FOLDED_CONVERSIONS[(i + rep) % len(FOLDED_CONVERSIONS)] if rep == 0 else \
                FOLDED_CONVERSIONS[int(rng.integers(0, len(FOLDED_CONVERSIONS)))]
            mat = FIR_MATERIALS[int(rng.integers(0, len(FIR_MATERIALS)))]
            plan.append((src, dst, kind, taps, param, mat, [1, 2][int(rng.integers(0, 2))],
                         float(rng.uniform(-30.0, -8.0)), f"folded_{name}_{src}_to_{dst}_{mat}", name))
    return plan


def _folded_cases(seed: int, quick: bool):
    """The small-ratio stream converters (see above) with their long-design twins."""
    seconds = 2.0 if quick else 4.0
    for i, (src, dst, kk, taps, param, mat, ch, level, name, kname) in enumerate(_folded_plan(seed, quick)):
        rng = np.random.default_rng([int(seed), 61, i])
        x = up.set_rms(np.stack([material(mat, src, seconds, rng) for _ in range(ch)], axis=1), level)
        y = np.stack([stream_convert(x[:, c], src, dst, kk, taps, param) for c in range(ch)], axis=1)
        lvl = kernel_image_level_db(kk, taps, param, src, x)
        expect = imaging_expect(src, lvl)
        twin = long_twin(x, src, dst)
        full = f"{name}_img{lvl:.0f}db"
        for cname, fam, group, audio, exp in (
                (full, f"own-stream-folded-{kname}", "folded-stream", y, expect),
                (f"{full}_twin", "scipy-resample_poly-kaiser12-long", "good-resampler", twin,
                 {"upsampled_from_hz": src, "imaging_detected": False})):
            yield up.tuning_case(cname, fam, group, dst, audio, exp, up.default_labels(ch), seed, rng)


# ======================================================== short Kaiser banks with interpolated phases (written here)
# A short Kaiser-windowed sinc (6-12 taps, beta 3-6, -6 dB at 0.84-0.90 of the source Nyquist frequency, the
# ``cutoff * sinc(cutoff * t)`` of :func:`window_kernel`) tabulated at a few fractional delays (8, 16 or 32 phases),
# each output's weights interpolated linearly between the two nearest tabulated phases: the effective kernel is the
# windowed sinc sampled every ``1/phases`` source sample and joined by straight lines.  Group ``short-kaiser-bank``,
# families ``own-kaiser-bank<taps>``, at whole and fractional ratios from 11.025-32 kHz; labelled from that
# piecewise-linear kernel's response as the file samples it, against the house line
# (:func:`kaiser_bank_image_level_db`): its first images at ``r - f`` plus the images of the phase table at
# ``phases * r - f``, of the content at 0.3-0.7 of the source Nyquist frequency.  Each with its long-design twin
# (False).  Short designs of this kind whose
# first side lobes lie near 55 dB (8 taps, beta 5) leave the inner band's images at about -56 dB on flat content:
# a resampler's trace by the house line, not imaging, although the energy of their transition band above the
# source Nyquist frequency reaches -30 to -40 dB of the band.

#: taps per phase of the short Kaiser banks
KAISER_BANK_TAPS = (6, 8, 8, 10, 12, 6, 8, 10)
#: phase counts of their tables (weights interpolated linearly between neighbouring phases)
KAISER_BANK_PHASES = (8, 16, 32)
#: (source, target) rates: whole ratios (2 and 4) and fractional ones
KAISER_BANK_CONVERSIONS = ((24000, 48000), (22050, 44100), (22050, 48000), (16000, 48000), (11025, 44100),
                           (32000, 96000), (24000, 44100))


def kaiser_bank_kernel(taps: int, beta: float, cutoff: float, phases: int, t):
    """The bank's effective kernel at ``t`` (source samples): :func:`window_kernel` (Kaiser) sampled every
    ``1 / phases`` source sample, interpolated linearly between those points."""
    half = taps // 2
    grid = np.arange(-half * phases, half * phases + 1) / phases
    return np.interp(np.asarray(t, dtype=float), grid, window_kernel("kaiser", taps, beta, cutoff, grid),
                     left=0.0, right=0.0)


def kaiser_bank_convert(x: np.ndarray, src: int, dst: int, taps: int, beta: float, cutoff: float,
                        phases: int) -> np.ndarray:
    """One channel from ``src`` to ``dst`` through the bank (:func:`at_instants` with the exact position, the
    weights from :func:`kaiser_bank_kernel`)."""
    return at_instants(x, src, dst, taps, None, lambda t: kaiser_bank_kernel(taps, beta, cutoff, phases, t))


def kaiser_bank_image_level_db(taps: int, beta: float, cutoff: float, phases: int, src: int, dst: int,
                               x: np.ndarray) -> float:
    """The house definition's level (dB) for the bank: the first images (at ``src - f``) of the content at 0.3-0.7
    of the source Nyquist frequency relative to that content, as the file holds them, plus the phase table's images
    (at ``phases * src - f``), power-weighted by the material's own spectrum (Welch, 100 Hz bins).

    The file samples the continuous output ``sum_k x[k] h(t src - k)`` (spectrum ``X(f) H(f)``, ``H`` the effective
    kernel's Fourier transform, summed on a grid of 1/512 source sample) at ``dst``; with ``dst / src = P / Q`` in
    lowest terms, what lies at ``src - f`` in the file and is coherent with the content at ``f`` is
    ``sum_q H(src - f + q P src)`` (the aliases that carry ``X(-f)``), and the content itself
    ``sum_q H(f + q P src)``.  A kernel truncated where it is not zero (a Kaiser window's edges under a sinc whose
    zeros are not at whole samples) has a response whose tail falls only as ``1/f``, so these alias terms move the
    level by several dB near the line."""
    f, p, t, over = _judged_band_and_kernel_grid(x, src, taps)
    h = kaiser_bank_kernel(taps, beta, cutoff, phases, t)
    resp = (lambda fr: np.exp(-2j * np.pi * np.outer(fr, t)) @ h / over)
    big_p = Fraction(dst, src).numerator
    shifts = np.arange(-8, 9) * big_p
    content = sum(resp(f / src + q) for q in shifts)
    image = sum(resp((src - f) / src + q) for q in shifts)
    ratio = (np.abs(image) ** 2 + np.abs(resp((phases * src - f) / src)) ** 2) / np.abs(content) ** 2
    return float(10 * np.log10(np.sum(p * ratio) / np.sum(p)))


def _kaiser_bank_plan(seed: int, quick: bool):
    rng = np.random.default_rng([int(seed), 67])
    plan = []
    for taps in (KAISER_BANK_TAPS if not quick else KAISER_BANK_TAPS[:2]):
        beta = float(np.round(rng.uniform(3.0, 6.0), 2))
        cutoff = float(np.round(rng.uniform(0.84, 0.90), 3))
        phases = int(KAISER_BANK_PHASES[int(rng.integers(0, len(KAISER_BANK_PHASES)))])
        src, dst = KAISER_BANK_CONVERSIONS[int(rng.integers(0, len(KAISER_BANK_CONVERSIONS)))]
        mat = FIR_MATERIALS[int(rng.integers(0, len(FIR_MATERIALS)))]
        plan.append((src, dst, taps, beta, cutoff, phases, mat, [1, 2][int(rng.integers(0, 2))],
                     float(rng.uniform(-30.0, -8.0))))
    return plan


def _kaiser_bank_cases(seed: int, quick: bool):
    """The short Kaiser banks with interpolated phases (see above) and their long-design twins."""
    seconds = 2.0 if quick else 4.0
    for i, (src, dst, taps, beta, cutoff, phases, mat, ch, level) in enumerate(_kaiser_bank_plan(seed, quick)):
        rng = np.random.default_rng([int(seed), 71, i])
        x = up.set_rms(np.stack([material(mat, src, seconds, rng) for _ in range(ch)], axis=1), level)
        y = np.stack([kaiser_bank_convert(x[:, c], src, dst, taps, beta, cutoff, phases) for c in range(ch)], axis=1)
        lvl = kaiser_bank_image_level_db(taps, beta, cutoff, phases, src, dst, x)
        full = f"kbank{taps}_b{beta:g}_c{cutoff:g}_p{phases}_{src}_to_{dst}_{mat}_img{lvl:.0f}db"
        for cname, fam, group, audio, exp in (
                (full, f"own-kaiser-bank{taps}", "short-kaiser-bank", y, imaging_expect(src, lvl)),
                (f"{full}_twin", "scipy-resample_poly-kaiser12-long", "good-resampler", long_twin(x, src, dst),
                 {"upsampled_from_hz": src, "imaging_detected": False})):
            yield up.tuning_case(cname, fam, group, dst, audio, exp, up.default_labels(ch), seed, rng)


def cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """Every case for ``seed`` (1000-1999); ``quick``: the first two conversions at 2 s, and a slice of the
    short-FIR and naive-synthesis cases."""
    if not 1000 <= int(seed) <= 1999:
        raise ValueError(f"tuning seeds are 1000-1999, got {seed}")
    yield from _extra_cases(seed, quick)
    yield from _stream_cases(seed, quick)
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
    yield from _poly_cases(seed, quick)
    yield from _folded_cases(seed, quick)
    yield from _kaiser_bank_cases(seed, quick)
