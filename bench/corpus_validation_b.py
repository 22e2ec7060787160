"""Second held-back validation corpus for the sampling detectors (set "validation", seeds 6000-6999).

Follows the shared case format (``cases(seed, quick=False)`` yields ``Case``).  Written without reading the
detectors' code or the other corpora; every label is true by construction, and the generator checks the
construction facts it relies on (folded energy, image energy, filter stop bands) and raises if one fails.
The families complement the first validation set: realistic conversion chains rather than tool presets.

Material (all synthesised here, band-limited to the rate it is made at):
    mix      tilted noise bed to Nyquist, polyphonic additive tones (k^-p partials, at most 120, below Nyquist), cymbal-like
             high-passed noise bursts; channels share a panned tonal part plus their own noise; a 5.1 LFE
             channel is the low end through a 120 Hz low-pass.
    speech   voiced harmonic source (f0 contour 90-230 Hz, up to 120 harmonics) through three formant resonators with syllable
             envelopes, plus fricative noise bursts reaching Nyquist.
    tonal    bright polyphonic additive notes (partials ~k^-0.5 up to Nyquist, f0 raised with the rate so
             120 partials reach it) over a quiet noise bed.

Families and groups (counts per full seed; ``quick=True`` keeps a ~20-case slice with 2-3 s files):
    upsampled (48)             source rates 16/22.05/32/44.1/48/88.2/96 kHz to every higher standard rate up
                               to 192 kHz: each of the 34 pairs once plus 14 common ones (44.1 -> 88.2/96/
                               176.4/192, 48 -> 96/192, ...) a second time, shuffled per seed.
        sox-cli-{linear,intermediate,minimum}-phase   ``sox ... rate -v -L|-I|-M [-b 85..99 | -s]``   (18)
        ffmpeg-swr-kaiser / ffmpeg-swr-bnuttall / ffmpeg-soxr   ``aresample`` with explicit filter_size,
                               cutoff (0.90-0.99), kaiser_beta, or resampler=soxr with precision/cheby (18)
        chain-*                upsample (sox -v / ffmpeg soxr / ffmpeg swr) then gain, a look-ahead gain-riding
                               limiter at -1 dBFS and TPDF dither to 24 bit (12)
        expect: upsampled_from_hz = source rate; where a short or soft filter (not the chains) leaves
                               images as strong as the imaging group's fact (>= -40 dB, below), also
                               imaging_detected = True.
    upsampled-one-channel (10) stereo or 5.1, one non-LFE channel converted up from a lower rate, the others
                               native wideband; expect upsampled_channels = [that channel's label].
    native (14)                wideband mix at 16k..192k, mono/stereo/5.1; expect not upsampled, no imaging,
                               no aliasing.
    speech (4)                 speech-like material at 16/22.05/44.1/48 kHz, same expectations.
    lowpass / ambiguous-lowpass (18)  the native mix through a mastering low-pass at 16-21 kHz (44.1-96 kHz
                               files): Butterworth orders 2-12, Chebyshev I, elliptic (scipy, causal), linear-
                               phase Kaiser FIR.  A filter is "ambiguous-lowpass" when it is steep (falls from
                               -3 dB to -40 dB within 12 % of its edge) and its -3 dB edge lies within 0.80-1.05
                               of a lower standard rate's Nyquist frequency; otherwise "lowpass".  (scipy's
                               bilinear Butterworths of order >= 8 near Nyquist at 44.1/48 kHz are steep by this
                               rule: their zeros sit at Nyquist.)  Expect not upsampled, no imaging, no aliasing.
    codec-shelf (12)           lossy round trips through ffmpeg's encoders at the file's own rate (libmp3lame,
                               aac, libvorbis; libopus at 48 kHz only), decoded back to that rate.  Not upsampled,
                               no imaging (aliasing not labelled: codec filter banks are not alias-free).
    downsampled (8)            88.2/96/176.4/192 kHz mixes converted DOWN to 44.1/48 kHz by sox -v, ffmpeg
                               soxr or ffmpeg swr (filter_size 256, cutoff 0.91, kaiser_beta 12): native at the
                               lower rate.  Not upsampled, no imaging; no aliasing where the fact check holds:
                               the source's content above the new Nyquist, converted alone, gives at most
                               -80 dB of the output energy (else the aliasing label is left out).
    naive-synth (16)           naive-saw / naive-square / naive-pulse / naive-sync: phase-accumulator voices
                               evaluated directly (no band limiting), 2-4 voices, ADSR envelopes, vibrato.
                               Fact checked: (naive - band-limited twin) energy, i.e. the folded partials, is at
                               least -30 dB relative to the twin.  Expect aliasing, not upsampled, no imaging.
    band-limited-synth (12)    additive-{saw,square,pulse,sync}: the same note plans rendered from their exact
                               Fourier series with partials up to Nyquist.  Expect no aliasing, not upsampled,
                               no imaging.
    decimation (12)            tonal material decimated without a filter: decimate-pick (every M-th sample,
                               2:1 and 4:1), decimate-nearest (nearest-sample picking 48->44.1, 96->88.2,
                               44.1->32) and decimate-linear (linear interpolation, no filter).  Fact checked:
                               source energy above the new Nyquist is at least -30 dB of the total.
                               Expect aliasing, not upsampled, no imaging.
    filtered-decimation (8)    the same sources through a Kaiser FIR (stop band checked <= -80 dB above the
                               new Nyquist) then picked (decimate-fir), or through sox -v (sox-cli-down, folded
                               leak checked <= -80 dB as for "downsampled").
                               Expect no aliasing, not upsampled, no imaging.
    imaging (18)               hold, linear (integer ratios and linear-frac at non-integer ratios), zero-stuff
                               (integer ratios) written here; ffmpeg-swr-short (filter_size 2-4, cutoff 1.0 or
                               cubic) and sox-cli-rate-quick (``rate -q``).  Fact checked: energy between 1.05x
                               the old Nyquist and the new Nyquist is at least -40 dB of the energy below the old
                               Nyquist (any such energy from a linear upsampler of a band-limited source is an
                               image).  Expect imaging and upsampled_from_hz = source rate; a short-filter case
                               whose images fall short keeps only the upsampling label.

Levels: -30 to -6 dBFS RMS over all channels, peaks <= 0.98 (the dithered chains end at -1 dBFS).  Files are
2-20 s, capped so frames x channels stays under 1.6 M samples.  Deterministic per seed (sox runs with -R).
"""
from __future__ import annotations

import math
import re
import shutil
import subprocess
from dataclasses import dataclass
from typing import Iterator

import numpy as np
from scipy import signal
from scipy.ndimage import minimum_filter1d, uniform_filter1d

SET_NAME = "validation"
SEED_RANGE = range(6000, 7000)
STANDARD_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400, 192000)
SOURCE_RATES_HZ = (16000, 22050, 32000, 44100, 48000, 88200, 96000)
TARGET_RATES_HZ = (32000, 44100, 48000, 88200, 96000, 176400, 192000)
CHANNEL_LABELS = {1: ["M"], 2: ["L", "R"], 6: ["L", "R", "C", "LFE", "Ls", "Rs"]}
LFE_INDEX = 3
MAX_SAMPLES = 1_600_000          # frames x channels per case (house choice: keeps one seed near a minute)
PEAK_MAX = 0.98
FOLD_MIN_DB = -30.0              # folded / image energy a positive must reach (house choice)
IMAGE_MIN_DB = -40.0
LEAK_MAX_DB = -80.0              # folded content a down-converter may let through and still be "no aliasing"
HARM_K_MAX = 120                 # partial count cap of the k^-p tones (cost; -40 dB and lower past it)


@dataclass
class Case:
    name: str
    set: str
    family: str
    group: str
    rate_hz: int
    audio: np.ndarray
    expect: dict
    channel_labels: list[str] | None = None


# ----------------------------------------------------------------------------------------------- helpers
def _db(x: float) -> float:
    return 10.0 * math.log10(max(x, 1e-300))


def _rms_db(y: np.ndarray) -> float:
    return _db(float(np.mean(np.square(y))))


def _fit(y: np.ndarray, n: int) -> np.ndarray:
    if len(y) >= n:
        return y[:n]
    return np.concatenate([y, np.zeros((n - len(y),) + y.shape[1:])])


def _as2d(x: np.ndarray) -> np.ndarray:
    return x[:, None] if x.ndim == 1 else x


def _to_level(y: np.ndarray, rng: np.random.Generator, lo_db: float = -30.0, hi_db: float = -6.0) -> np.ndarray:
    """Scale to a random RMS level in [lo, hi] dBFS that keeps the peak at or under PEAK_MAX."""
    rms = _rms_db(y)
    crest = 20 * math.log10(np.max(np.abs(y))) - rms
    hi = min(hi_db, 20 * math.log10(PEAK_MAX) - crest)
    if hi < lo_db:
        raise ValueError(f"crest factor {crest:.1f} dB too high for a {lo_db} dBFS floor")
    target = rng.uniform(lo_db + 0.5, max(lo_db + 0.5, hi - 0.05))
    return y * 10 ** ((target - rms) / 20)


def _band_energy(y: np.ndarray, rate: int, f_lo: float, f_hi: float) -> float:
    """Energy of all channels between f_lo and f_hi (Hann window, whole file)."""
    w = np.hanning(len(y))[:, None]
    s = np.abs(np.fft.rfft(_as2d(y) * w, axis=0)) ** 2
    f = np.fft.rfftfreq(len(y), 1 / rate)
    return float(s[(f >= f_lo) & (f < f_hi)].sum())


def image_ratio_db(y: np.ndarray, rate: int, src_rate: int) -> float:
    """Energy above 1.05x the source Nyquist over energy below it: images, for a linear upsampler."""
    nyq_src = src_rate / 2
    return _db(_band_energy(y, rate, 1.05 * nyq_src, rate / 2) / _band_energy(y, rate, 0, nyq_src))


def fold_source_ratio_db(x: np.ndarray, rate: int, new_rate: int) -> float:
    """Energy of the source above the new Nyquist over its total: what an unfiltered decimation folds."""
    return _db(_band_energy(x, rate, new_rate / 2, rate / 2) / _band_energy(x, rate, 0, rate / 2))


def _split_at(x: np.ndarray, rate: int, f_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """The parts of x below and above f_hz (FFT masks; they sum to x)."""
    spec_ = np.fft.rfft(x, axis=0)
    f = np.fft.rfftfreq(len(x), 1 / rate)
    hi = np.fft.irfft(np.where((f >= f_hz)[:, None], spec_, 0), len(x), axis=0)
    return x - hi, hi


def fold_leak_db(convert, x: np.ndarray, rate: int, new_rate: int) -> float:
    """Output energy a linear down-converter makes from the source content above the new Nyquist, over the
    output energy: the folded content it lets through.  The part above 1.01x the new Nyquist is faded in
    and out over 50 ms so the file edges add no broadband step of their own."""
    _lo, hi = _split_at(x, rate, 1.01 * new_rate / 2)
    hi = hi * signal.windows.tukey(len(hi), min(1.0, 2 * 0.05 * rate / len(hi)))[:, None]
    return _db(float(np.sum(np.square(convert(hi)))) / float(np.sum(np.square(convert(x)))))


def _name(*parts) -> str:
    s = "-".join(str(p) for p in parts if str(p)).lower().replace(".", "p")
    return re.sub(r"[^a-z0-9_-]+", "-", s)


def _khz(rate: int) -> str:
    return f"{rate / 1000:g}k".replace(".", "p")


# ------------------------------------------------------------------------------------------- material
def _tilted_noise(rng: np.random.Generator, n: int, rate: int, slope_db_oct: float, f_lo_hz: float = 30.0) -> np.ndarray:
    """Gaussian noise with a spectral tilt (dB per octave re 1 kHz), flat shape up to Nyquist."""
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1 / rate)
    g = np.power(np.maximum(f, f_lo_hz) / 1000.0, slope_db_oct / 6.0206)
    g[f < f_lo_hz] *= (f[f < f_lo_hz] / f_lo_hz) ** 2
    y = np.fft.irfft(spec * g, n)
    return y / (np.std(y) + 1e-12)


def _cymbals(rng: np.random.Generator, n: int, rate: int) -> np.ndarray:
    """Cymbal-like bursts: high-passed noise under exponential decays at random onsets."""
    sos = signal.butter(2, rng.uniform(3000, 7000), "highpass", fs=rate, output="sos")
    noise = signal.sosfilt(sos, rng.standard_normal(n))
    env = np.zeros(n)
    t = rng.uniform(0, 0.3)
    while t < n / rate:
        i0 = int(t * rate)
        tau = rng.uniform(0.08, 0.45)
        seg = np.exp(-np.arange(n - i0) / (tau * rate))
        env[i0:] += rng.uniform(0.3, 1.0) * seg
        t += rng.choice([0.25, 0.5, 0.75, 1.0])
    return noise * env / (np.std(noise * env) + 1e-12)


def _adsr(n: int, rate: int, rng: np.random.Generator) -> np.ndarray:
    a = max(2, int(rng.uniform(0.002, 0.03) * rate))
    d = max(2, int(rng.uniform(0.05, 0.3) * rate))
    r = max(2, int(rng.uniform(0.03, 0.3) * rate))
    s = rng.uniform(0.4, 0.9)
    env = np.full(n, s)
    a_, d_ = min(a, n), min(d, max(0, n - a))
    env[:a_] = np.linspace(0, 1, a_, endpoint=False)
    env[a_:a_ + d_] = np.linspace(1, s, d_, endpoint=False)
    r_ = min(r, n)
    env[n - r_:] *= np.linspace(1, 0, r_)
    return env


def _note_plan(rng: np.random.Generator, dur_s: float, voices: int, f0_lo: float, f0_hi: float) -> list[dict]:
    """Overlapping notes: each voice plays a sequence with random lengths, pitches, vibrato and envelope seeds."""
    notes = []
    for _v in range(voices):
        t = rng.uniform(0, 0.4)
        while t < dur_s - 0.15:
            length = min(rng.uniform(0.3, 1.8), dur_s - t)
            midi_lo, midi_hi = 69 + 12 * math.log2(f0_lo / 440), 69 + 12 * math.log2(f0_hi / 440)
            f0 = 440 * 2 ** ((round(rng.uniform(midi_lo, midi_hi)) - 69) / 12)
            notes.append(dict(t0=t, length=length, f0=f0, vib_hz=rng.uniform(4.5, 6.5),
                              vib_cents=rng.uniform(0, 30), vib_phase=rng.uniform(0, 2 * np.pi),
                              amp=rng.uniform(0.4, 1.0), x0=rng.uniform(0, 1), env_seed=int(rng.integers(2**31)),
                              pan=rng.uniform(0.15, 0.85)))
            t += length * rng.uniform(0.6, 1.1)
    return notes


def pwl_fourier(segments: list[tuple[float, float, float, float]], k_max: int) -> np.ndarray:
    """Exponential Fourier coefficients c_0..c_k_max of a period-1 piecewise-linear wave.

    segments: (x0, x1, alpha, beta) with g(x) = alpha + beta * x on [x0, x1).  Closed form:
    c_k = sum over segments of the integral of (alpha + beta x) exp(-i 2 pi k x) dx, using
    int exp(-iwx) = i/w exp(-iwx) and int x exp(-iwx) = exp(-iwx) (i x / w + 1 / w^2).
    """
    c = np.zeros(k_max + 1, complex)
    k = np.arange(1, k_max + 1)
    w = 2 * np.pi * k
    for x0, x1, a, b in segments:
        c[0] += a * (x1 - x0) + b * (x1 ** 2 - x0 ** 2) / 2
        e1, e0 = np.exp(-1j * w * x1), np.exp(-1j * w * x0)
        c[1:] += a * (1j / w) * (e1 - e0)
        c[1:] += b * (e1 * (1j * x1 / w + 1 / w ** 2) - e0 * (1j * x0 / w + 1 / w ** 2))
    return c


def wave_shape(shape: str, param: float) -> tuple[callable, list]:
    """Naive evaluator g(x) on x in [0, 1) and its piecewise-linear segments."""
    if shape == "saw":
        return (lambda x: 2 * x - 1), [(0.0, 1.0, -1.0, 2.0)]
    if shape in ("square", "pulse"):
        w = 0.5 if shape == "square" else param
        return (lambda x: np.where(x < w, 1.0, -1.0)), [(0.0, w, 1.0, 0.0), (w, 1.0, -1.0, 0.0)]
    if shape == "sync":      # slave saw at `param` x the master frequency, reset by the master
        r = param
        segs = []
        j = 0
        while j / r < 1.0:
            segs.append((j / r, min((j + 1) / r, 1.0), -1.0 - 2 * j, 2 * r))
            j += 1
        return (lambda x: 2 * np.mod(r * x, 1.0) - 1), segs
    if shape == "harm":      # only used band-limited: amplitudes k^-param, random phases set by caller
        return None, []
    raise ValueError(f"unknown wave shape {shape!r}")


def _render_notes(notes: list[dict], n: int, rate: int, shape: str, param: float, naive: bool,
                  channels: int = 1, rng_phase: np.random.Generator | None = None) -> np.ndarray:
    """Render a note plan: naive (the wave evaluated at the accumulator phase) or band-limited (its exact
    Fourier series, every partial below Nyquist at the note's highest vibrato frequency)."""
    out = np.zeros((n, channels))
    nyq = rate / 2
    g_naive, segs = wave_shape(shape, param)
    for note in notes:
        i0 = int(note["t0"] * rate)
        m = min(int(note["length"] * rate), n - i0)
        if m < 16:
            continue
        t = np.arange(m) / rate
        cents = note["vib_cents"] * np.sin(2 * np.pi * note["vib_hz"] * t + note["vib_phase"])
        f = note["f0"] * 2 ** (cents / 1200)
        x = note["x0"] + np.cumsum(f) / rate            # phase in cycles
        env = _adsr(m, rate, np.random.default_rng(note["env_seed"]))
        f_max = note["f0"] * 2 ** (note["vib_cents"] / 1200) * 1.0005
        k_max = int(nyq / f_max)
        if shape == "harm":      # k^-p tones: partials past HARM_K_MAX are below the noise beds anyway
            k_max = min(k_max, HARM_K_MAX)
        if naive:
            y = g_naive(np.mod(x, 1.0))
        else:
            if shape == "harm":
                ph = np.random.default_rng(note["env_seed"] + 1).uniform(0, 2 * np.pi, k_max + 1)
                k = np.arange(k_max + 1)
                c = np.zeros(k_max + 1, complex)
                c[1:] = 0.5 * k[1:] ** (-param) * np.exp(1j * ph[1:])
            else:
                c = pwl_fourier(segs, k_max)
            z = np.exp(2j * np.pi * np.mod(x, 1.0))
            acc = z.copy()
            y = np.full(m, c[0].real)
            for kk in range(1, k_max + 1):
                y += 2 * (c[kk] * acc).real
                acc *= z
        y = y * env * note["amp"]
        if channels == 1:
            out[i0:i0 + m, 0] += y
        else:
            p = note["pan"]
            gains = np.array([math.cos(p * math.pi / 2), math.sin(p * math.pi / 2)] + [0.5] * (channels - 2))
            out[i0:i0 + m] += y[:, None] * gains[None, :channels]
    return out


def _mix(rng: np.random.Generator, n: int, rate: int, channels: int) -> np.ndarray:
    """Music-like wideband mix; shared panned tonal part plus each channel's own noise bed and cymbals."""
    dur = n / rate
    notes = _note_plan(rng, dur, int(rng.integers(2, 5)), 110, 1400)
    tonal = _render_notes(notes, n, rate, "harm", rng.uniform(0.7, 1.2), naive=False,
                          channels=min(channels, 2))
    tonal /= np.std(tonal) + 1e-12
    out = np.zeros((n, channels))
    slope = rng.uniform(-3.0, -1.0)
    for ch in range(channels):
        bed = _tilted_noise(rng, n, rate, slope)
        cym = _cymbals(rng, n, rate)
        part = tonal[:, ch % tonal.shape[1]]
        out[:, ch] = part + 10 ** (rng.uniform(-14, -6) / 20) * bed + 10 ** (rng.uniform(-12, -4) / 20) * cym
    if channels == 6:
        sos = signal.butter(4, 120, fs=rate, output="sos")
        out[:, LFE_INDEX] = signal.sosfilt(sos, tonal[:, 0] + _tilted_noise(rng, n, rate, -3.0)) * 2.0
    return out


def _speech(rng: np.random.Generator, n: int, rate: int, channels: int) -> np.ndarray:
    """Speech-like: harmonic glottal source with a pitch contour, three formants, syllables, fricatives."""
    t = np.arange(n) / rate
    f0 = rng.uniform(90, 180) * 2 ** (0.25 * np.sin(2 * np.pi * rng.uniform(0.2, 0.6) * t)) \
        * 2 ** (0.1 * np.sin(2 * np.pi * rng.uniform(2, 4) * t))
    x = np.cumsum(f0) / rate
    k_max = min(HARM_K_MAX, int((rate / 2) / (f0.max() * 1.001)))
    z = np.exp(2j * np.pi * np.mod(x, 1.0))
    acc = z.copy()
    src = np.zeros(n)
    for k in range(1, k_max + 1):
        src += (acc.imag) / k
        acc *= z
    voiced = np.zeros(n)
    for fc, bw in ((rng.uniform(500, 800), 90), (rng.uniform(1100, 1900), 120), (rng.uniform(2400, 3200), 180)):
        if fc < rate / 2 * 0.9:
            b, a = signal.iirpeak(fc, fc / bw, fs=rate)
            voiced += signal.lfilter(b, a, src)
    syl = np.clip(np.sin(2 * np.pi * rng.uniform(3, 5) * t + rng.uniform(0, 6)), 0, None) ** 0.7
    pause = (np.sin(2 * np.pi * 0.23 * t + rng.uniform(0, 6)) > -0.7).astype(float)
    sos = signal.butter(2, min(3500, rate * 0.3), "highpass", fs=rate, output="sos")
    fric = signal.sosfilt(sos, rng.standard_normal(n))
    fric_env = (np.sin(2 * np.pi * rng.uniform(1.0, 2.0) * t + rng.uniform(0, 6)) > 0.75).astype(float)
    fric_env = uniform_filter1d(fric_env, int(0.01 * rate) + 1)
    y = voiced / (np.std(voiced) + 1e-12) * syl * pause + 0.35 * fric * fric_env * pause \
        + 10 ** (-55 / 20) * _tilted_noise(rng, n, rate, 0.0)
    return np.repeat(y[:, None], channels, axis=1) * (1.0 if channels == 1 else 0.7)


def _tonal(rng: np.random.Generator, n: int, rate: int, channels: int) -> np.ndarray:
    """Bright polyphonic tonal material (partials ~k^-0.5 up to Nyquist) with a quiet noise bed."""
    f0_lo = max(200.0, 1.2 * rate / 2 / HARM_K_MAX)     # partials reach Nyquist within the cap
    notes = _note_plan(rng, n / rate, int(rng.integers(2, 5)), f0_lo, 4 * f0_lo)
    y = _render_notes(notes, n, rate, "harm", rng.uniform(0.4, 0.6), naive=False, channels=min(channels, 2))
    y /= np.std(y) + 1e-12
    bed = np.stack([_tilted_noise(rng, n, rate, -1.5) for _ in range(y.shape[1])], axis=1)
    return y + 10 ** (-30 / 20) * bed


def _material(kind: str, rng: np.random.Generator, n: int, rate: int, channels: int) -> np.ndarray:
    y = {"mix": _mix, "speech": _speech, "tonal": _tonal}[kind](rng, n, rate, channels)
    return y / np.max(np.abs(y)) * 0.5


# ------------------------------------------------------------------------------------- external tools
def _run(cmd: list[str], data: bytes) -> bytes:
    p = subprocess.run(cmd, input=data, capture_output=True)
    if p.returncode != 0:
        raise RuntimeError(f"{cmd[0]} failed ({p.returncode}): {' '.join(cmd)}\n{p.stderr.decode()[-800:]}")
    return p.stdout


def sox_rate(x: np.ndarray, src: int, dst: int, opts: list[str]) -> np.ndarray:
    """sox CLI rate effect through raw float64 pipes (-D: no dither, -R: repeatable)."""
    x = _as2d(x)
    raw = ["-t", "raw", "-e", "floating-point", "-b", "64"]
    cmd = ["sox", "-D", "-R", "-V1", *raw, "-r", str(src), "-c", str(x.shape[1]), "-",
           *raw, "-r", str(dst), "-", "rate", *opts, str(dst)]
    y = np.frombuffer(_run(cmd, np.ascontiguousarray(x, "<f8").tobytes()), "<f8").reshape(-1, x.shape[1])
    return _fit(y.copy(), round(len(x) * dst / src))


def ffmpeg_aresample(x: np.ndarray, src: int, dst: int, opts: dict) -> np.ndarray:
    x = _as2d(x)
    af = f"aresample={dst}" + "".join(f":{k}={v}" for k, v in opts.items())
    cmd = ["ffmpeg", "-nostdin", "-hide_banner", "-loglevel", "error", "-f", "f64le", "-ar", str(src),
           "-ac", str(x.shape[1]), "-i", "pipe:0", "-af", af, "-c:a", "pcm_f64le", "-f", "f64le", "pipe:1"]
    y = np.frombuffer(_run(cmd, np.ascontiguousarray(x, "<f8").tobytes()), "<f8").reshape(-1, x.shape[1])
    return _fit(y.copy(), round(len(x) * dst / src))


CODECS = {  # name: (encoder args, muxer, demuxer)
    "mp3": (["-c:a", "libmp3lame"], "mp3", "mp3"),
    "aac": (["-c:a", "aac"], "adts", "aac"),
    "vorbis": (["-c:a", "libvorbis"], "ogg", "ogg"),
    "opus": (["-c:a", "libopus"], "ogg", "ogg"),
}


def ffmpeg_codec_roundtrip(x: np.ndarray, rate: int, codec: str, quality: list[str]) -> np.ndarray:
    x = _as2d(x)
    enc, fmt, demux = CODECS[codec]
    base = ["ffmpeg", "-nostdin", "-hide_banner", "-loglevel", "error"]
    coded = _run(base + ["-f", "f64le", "-ar", str(rate), "-ac", str(x.shape[1]), "-i", "pipe:0",
                         *enc, *quality, "-f", fmt, "pipe:1"], np.ascontiguousarray(x, "<f8").tobytes())
    dec = _run(base + ["-f", demux, "-i", "pipe:0", "-ar", str(rate), "-c:a", "pcm_f64le", "-f", "f64le", "pipe:1"], coded)
    y = np.frombuffer(dec, "<f8").reshape(-1, x.shape[1]).copy()
    return _fit(y, len(x))


def soft_limit(y: np.ndarray, rate: int, ceiling: float) -> np.ndarray:
    """Look-ahead gain-riding limiter, channels linked.  The gain is the running minimum of the needed gain
    over +-5 ms, averaged over the same +-5 ms: every average includes the sample's own needed gain or a
    smaller one, so no sample exceeds the ceiling."""
    half = int(0.005 * rate)
    need = np.minimum(1.0, ceiling / np.maximum(np.max(np.abs(y), axis=1), 1e-12))
    g = uniform_filter1d(minimum_filter1d(need, 2 * half + 1, mode="nearest"), 2 * half + 1, mode="nearest")
    return y * g[:, None]


def tpdf_dither_24(y: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    q = 2.0 ** -23
    d = rng.random(y.shape) - rng.random(y.shape)
    return np.round(y / q + d) * q


# ------------------------------------------------------------------------------------------ the plan
# conversions met most in practice, drawn a second time on top of every (source, target) pair once
COMMON_PAIRS = ((44100, 88200), (44100, 96000), (44100, 176400), (44100, 192000), (48000, 96000),
                (48000, 192000), (44100, 48000), (48000, 88200), (88200, 176400), (96000, 192000),
                (22050, 44100), (16000, 48000), (32000, 48000), (22050, 48000))


def _pairs(rng: np.random.Generator) -> list[tuple[int, int]]:
    """All 34 (source, higher target) pairs plus COMMON_PAIRS, shuffled: 48, one per upsampled case."""
    pairs = [(s, d) for s in SOURCE_RATES_HZ for d in TARGET_RATES_HZ if d > s] + list(COMMON_PAIRS)
    order = rng.permutation(len(pairs))
    return [pairs[i] for i in order]


def _plan(seed: int) -> list[dict]:
    rng = np.random.default_rng(seed)
    pairs = _pairs(rng)
    pi = iter(range(10**6))

    def pair():
        return pairs[next(pi) % len(pairs)]

    plan: list[dict] = []

    def add(kind, quick=False, **kw):
        plan.append(dict(kind=kind, quick=quick, **kw))

    # upsampled: sox phase/bandwidth options
    phases = [("linear", "-L"), ("intermediate", "-I"), ("minimum", "-M")]
    bws = [[], ["-b", "85"], ["-b", "90"], ["-b", "95"], ["-b", "99"], ["-s"]]
    for i in range(18):
        ph = phases[i % 3]
        bw = bws[int(rng.integers(len(bws)))]
        s, d = pair()
        add("up-sox", quick=(i == 0), src=s, dst=d, phase=ph, bw=bw,
            material="speech" if s <= 22050 and rng.random() < 0.5 else "mix", channels=int(rng.choice([1, 2, 2, 6])))
    # upsampled: ffmpeg aresample with explicit filter options
    for i in range(18):
        s, d = pair()
        v = i % 3
        if v == 0:
            o = dict(filter_type="kaiser", filter_size=int(rng.choice([32, 64, 128, 256])),
                     cutoff=float(rng.choice([0.90, 0.93, 0.95, 0.97, 0.99])), kaiser_beta=int(rng.choice([8, 9, 12, 16])))
            fam = "ffmpeg-swr-kaiser"
        elif v == 1:
            o = dict(filter_type="blackman_nuttall", filter_size=int(rng.choice([32, 64, 128])),
                     cutoff=float(rng.choice([0.91, 0.95, 0.97])))
            fam = "ffmpeg-swr-bnuttall"
        else:
            o = dict(resampler="soxr", precision=int(rng.choice([20, 24, 28, 33])), cheby=int(rng.integers(2)))
            fam = "ffmpeg-soxr"
        add("up-ffmpeg", quick=(i == 2), src=s, dst=d, opts=o, family=fam,
            material="speech" if s <= 22050 and rng.random() < 0.5 else "mix", channels=int(rng.choice([1, 2, 2, 6])))
    # upsampled then mastered
    for i in range(12):
        s, d = pair()
        add("up-chain", quick=(i == 0), src=s, dst=d, tool=["sox-v", "ffmpeg-soxr", "ffmpeg-swr"][i % 3],
            channels=int(rng.choice([1, 2, 2, 6])))
    # one channel upsampled
    for i in range(10):
        d = int(rng.choice([44100, 48000, 88200, 96000, 176400, 192000]))
        s = int(rng.choice([r for r in SOURCE_RATES_HZ if r < d]))
        ch = 2 if i < 6 else 6
        which = int(rng.integers(2)) if ch == 2 else int(rng.choice([0, 1, 2, 4, 5]))
        add("up-one", quick=(i == 0), src=s, dst=d, channels=ch, which=which,
            tool=["sox-v", "ffmpeg-soxr", "ffmpeg-swr"][i % 3])
    # native wideband at each rate
    rates = [16000, 22050, 32000, 44100, 48000, 88200, 96000, 176400, 192000, 44100, 48000, 96000, 48000, 44100]
    for i, r in enumerate(rates):
        add("native", quick=(i in (4, 7)), rate=r, channels=int(rng.choice([1, 2, 2, 6])))
    for i, r in enumerate([16000, 22050, 44100, 48000]):
        add("speech", quick=(i == 0), rate=r, channels=1)
    # mastering low-passes
    lp_kinds = ["butter", "butter", "butter", "butter", "butter", "butter", "cheby1", "cheby1", "ellip",
                "ellip", "fir", "fir", "butter", "ellip", "butter", "butter", "butter", "fir"]
    for i, kind in enumerate(lp_kinds):
        r = int(rng.choice([44100, 48000, 48000, 88200, 96000]))
        if kind == "butter":
            prm = dict(order=[2, 4, 6, 8, 10, 12][i % 6])
        elif kind == "cheby1":
            prm = dict(order=int(rng.integers(4, 9)), rp=float(rng.choice([0.5, 1.0])))
        elif kind == "ellip":
            prm = dict(order=int(rng.integers(5, 9)), rp=float(rng.choice([0.1, 0.5])), rs=float(rng.choice([60, 80, 90])))
        else:
            prm = dict(numtaps=int(rng.choice([101, 201, 301, 511])), beta=float(rng.choice([6.0, 8.0, 9.0])))
        fc = float(rng.choice([16000, 17000, 17500, 18000, 19000, 20000, 20500, 21000]))
        add("lowpass", quick=(i in (3, 8)), rate=r, filt=kind, prm=prm, fc=fc, channels=int(rng.choice([1, 2])))
    # lossy round trips
    codec_plan = [("mp3", ["-b:a", "128k"]), ("mp3", ["-b:a", "192k"]), ("mp3", ["-b:a", "320k"]),
                  ("mp3", ["-q:a", "2"]), ("aac", ["-b:a", "128k"]), ("aac", ["-b:a", "256k"]),
                  ("aac", ["-b:a", "96k"]), ("vorbis", ["-q:a", "3"]), ("vorbis", ["-q:a", "6"]),
                  ("vorbis", ["-q:a", "9"]), ("opus", ["-b:a", "96k"]), ("opus", ["-b:a", "160k"])]
    for i, (codec, q) in enumerate(codec_plan):
        r = 48000 if codec == "opus" else int(rng.choice([44100, 48000] + ([88200, 96000] if codec in ("aac", "vorbis") else [])))
        add("codec", quick=(i in (0, 4)), rate=r, codec=codec, q=q, channels=int(rng.choice([1, 2, 2])))
    # downsampled then nothing
    downs = [(96000, 48000), (88200, 44100), (192000, 48000), (96000, 44100), (176400, 44100),
             (192000, 96000), (96000, 48000), (88200, 48000)]
    for i, (s, d) in enumerate(downs):
        add("down", quick=(i == 0), src=s, dst=d, tool=["sox-v", "ffmpeg-soxr", "ffmpeg-swr"][i % 3],
            channels=int(rng.choice([1, 2])))
    # naive synthesis and band-limited twins
    shapes = [("saw", 0.0), ("square", 0.5), ("pulse", None), ("sync", None)]
    for i in range(16):
        shape, prm = shapes[i % 4]
        if shape == "pulse":
            prm = float(rng.uniform(0.1, 0.3))
        if shape == "sync":
            prm = float(rng.uniform(1.5, 3.5))
        r = int(rng.choice([44100, 48000, 44100, 48000, 32000, 88200, 96000]))
        lo, hi = (300, 1500) if r <= 48000 else (600, 2500)
        add("naive", quick=(i in (0, 3)), rate=r, shape=shape, prm=prm, f0=(lo, hi), twin=(i < 12),
            voices=int(rng.integers(2, 5)), channels=int(rng.choice([1, 2])), twin_quick=(i == 0))
    # unfiltered decimation and filtered twins
    decs = [("pick", 96000, 48000), ("pick", 88200, 44100), ("pick", 192000, 48000), ("pick", 176400, 44100),
            ("pick", 96000, 48000), ("nearest", 48000, 44100), ("nearest", 96000, 88200), ("nearest", 44100, 32000),
            ("nearest", 48000, 44100), ("linear", 48000, 44100), ("linear", 44100, 32000), ("linear", 96000, 88200)]
    twin_of = {0, 1, 2, 5, 6, 7, 9, 10}
    for i, (how, s, d) in enumerate(decs):
        add("decim", quick=(i in (0, 5)), how=how, src=s, dst=d, twin=(i in twin_of), twin_quick=(i == 5),
            channels=int(rng.choice([1, 2])))
    # imaging by construction
    img = [("hold", 22050, 44100), ("hold", 48000, 96000), ("hold", 44100, 176400), ("hold", 16000, 48000),
           ("hold", 96000, 192000), ("linear", 44100, 88200), ("linear", 22050, 88200), ("linear", 32000, 96000),
           ("linear-frac", 44100, 48000), ("linear-frac", 22050, 48000), ("zero-stuff", 44100, 88200),
           ("zero-stuff", 48000, 192000), ("zero-stuff", 16000, 48000), ("zero-stuff", 88200, 176400),
           ("ffmpeg-short", 44100, 96000), ("ffmpeg-short", 48000, 96000), ("sox-quick", 44100, 88200),
           ("sox-quick", 22050, 48000)]
    for i, (how, s, d) in enumerate(img):
        add("imaging", quick=(i in (0, 10, 14)), how=how, src=s, dst=d,
            material="speech" if s <= 22050 else "mix", channels=int(rng.choice([1, 2, 2, 6])),
            short=int(rng.integers(3)))
    for i, p in enumerate(plan):
        p["idx"] = i
        p["dur_s"] = float(rng.uniform(2.0, 20.0))
    return plan


# --------------------------------------------------------------------------------------- generation
def _frames(rate: int, channels: int, dur_s: float, quick: bool) -> int:
    if quick:
        dur_s = 2.0 + (dur_s % 1.0)
    n = int(dur_s * rate)
    return max(int(2.0 * rate), min(n, MAX_SAMPLES // channels))


def _upsample(x: np.ndarray, src: int, dst: int, tool: str) -> np.ndarray:
    if tool == "sox-v":
        return sox_rate(x, src, dst, ["-v"])
    if tool == "ffmpeg-soxr":
        return ffmpeg_aresample(x, src, dst, dict(resampler="soxr", precision=28))
    if tool == "ffmpeg-swr":
        return ffmpeg_aresample(x, src, dst, dict(filter_size=64, cutoff=0.95))
    raise ValueError(tool)


def _not_up() -> dict:
    return {"upsampled_from_hz": None, "imaging_detected": False, "aliasing_detected": False}


def _lowpass(kind: str, prm: dict, fc: float, rate: int):
    """(apply function, frequency response magnitude in dB on a grid, grid) of a mastering low-pass."""
    f = np.linspace(0, rate / 2, 8192, endpoint=False)
    if kind == "fir":
        h = signal.firwin(prm["numtaps"], fc, window=("kaiser", prm["beta"]), fs=rate)
        _, H = signal.freqz(h, worN=f, fs=rate)
        return (lambda y: signal.oaconvolve(y, h[:, None], mode="full")[len(h) // 2: len(h) // 2 + len(y)]), \
            20 * np.log10(np.abs(H) + 1e-15), f
    if kind == "butter":
        sos = signal.butter(prm["order"], fc, fs=rate, output="sos")
    elif kind == "cheby1":
        sos = signal.cheby1(prm["order"], prm["rp"], fc, fs=rate, output="sos")
    else:
        sos = signal.ellip(prm["order"], prm["rp"], prm["rs"], fc, fs=rate, output="sos")
    _, H = signal.sosfreqz(sos, worN=f, fs=rate)
    return (lambda y: signal.sosfilt(sos, y, axis=0)), 20 * np.log10(np.abs(H) + 1e-15), f


def lowpass_is_ambiguous(h_db: np.ndarray, f: np.ndarray, rate: int) -> tuple[bool, float]:
    """Steep (-3 dB to -40 dB within 12 % of the edge) with its -3 dB edge at 0.80-1.05 of a lower
    standard rate's Nyquist: a cliff a converter from that rate could have left (house rule)."""
    h_db = h_db - h_db[0]
    f3 = f[np.argmax(h_db < -3)] if np.any(h_db < -3) else rate / 2
    f40 = f[np.argmax(h_db < -40)] if np.any(h_db < -40) else rate / 2
    steep = (f40 - f3) <= 0.12 * f3
    near = any(0.80 * c / 2 <= f3 <= 1.05 * c / 2 for c in STANDARD_RATES_HZ if c < rate)
    return bool(steep and near), float(f3)


def _one(p: dict, seed: int, quick: bool, facts: dict | None) -> Iterator[Case]:
    rng = np.random.default_rng([seed, p["idx"]])
    k = p["kind"]
    ch = p.get("channels", 1)
    labels = CHANNEL_LABELS[ch]

    def case(name_parts, family, group, rate, audio, expect, fact=None):
        audio = np.ascontiguousarray(_as2d(audio), dtype=np.float64)
        name = _name(f"{p['idx']:03d}", *name_parts)
        if facts is not None:
            facts[name] = dict(fact or {}, kind=k)
            if expect.get("upsampled_from_hz") and "img_db" not in facts[name]:
                facts[name]["img_db"] = image_ratio_db(audio, rate, expect["upsampled_from_hz"])
            if "upsampled_channels" in expect:
                facts[name]["img_db"] = image_ratio_db(audio[:, fact["channel"]], rate, fact["src"])
        return Case(name, SET_NAME, family, group, int(rate), audio, expect, list(CHANNEL_LABELS[audio.shape[1]]))

    if k in ("up-sox", "up-ffmpeg", "up-chain"):
        s, d = p["src"], p["dst"]
        n_src = _frames(d, ch, p["dur_s"], quick) * s // d
        x = _material(p.get("material", "mix"), rng, n_src, s, ch)
        if k == "up-sox":
            opts = ["-v", p["phase"][1], *p["bw"]]
            y = sox_rate(x, s, d, opts)
            fam = f"sox-cli-{p['phase'][0]}-phase"
            detail = "".join(o.strip("-") for o in p["bw"]) or "default"
        elif k == "up-ffmpeg":
            y = ffmpeg_aresample(x, s, d, p["opts"])
            fam = p["family"]
            detail = "_".join(f"{kk[:4]}{v}" for kk, v in p["opts"].items() if kk != "filter_type" and kk != "resampler")
        else:
            y = _upsample(x, s, d, p["tool"])
            fam = f"chain-{p['tool']}-limit-dither24"
            detail = "master"
            target = rng.uniform(-16, -9)
            y = y * 10 ** ((target + 2 - _rms_db(y)) / 20)
            y = soft_limit(y, d, 10 ** (-1 / 20))
            y = tpdf_dither_24(y, rng)
            yield case([fam, _khz(s), "to", _khz(d), detail], fam, "upsampled", d, y, {"upsampled_from_hz": s},
                       dict(src=s))
            return
        expect = {"upsampled_from_hz": s}
        img_db = image_ratio_db(y, d, s)
        if img_db >= IMAGE_MIN_DB:      # a short or soft filter left images as strong as the imaging group's
            expect["imaging_detected"] = True
        yield case([fam, _khz(s), "to", _khz(d), detail], fam, "upsampled", d, _to_level(y, rng), expect,
                   dict(src=s, img_db=img_db))
        return

    if k == "up-one":
        s, d, which = p["src"], p["dst"], p["which"]
        n = _frames(d, ch, p["dur_s"], quick)
        y = _material("mix", rng, n, d, ch)
        x = _material("mix", rng, n * s // d, s, 1)
        up = _upsample(x, s, d, p["tool"])[:, 0]
        y[:, which] = _fit(up[:, None], n)[:, 0] * (np.std(y[:, which]) / (np.std(up) + 1e-12))
        fam = f"one-channel-{p['tool']}"
        yield case([fam, labels[which], _khz(s), "to", _khz(d)], fam, "upsampled-one-channel", d,
                   _to_level(y, rng), {"upsampled_channels": [labels[which]]}, dict(src=s, channel=which))
        return

    if k in ("native", "speech"):
        r = p["rate"]
        n = _frames(r, ch, p["dur_s"], quick)
        kind = "mix" if k == "native" else "speech"
        y = _material(kind, rng, n, r, ch)
        fam = f"native-{kind}"
        yield case([fam, _khz(r), f"{ch}ch"], fam, k, r, _to_level(y, rng), _not_up())
        return

    if k == "lowpass":
        r = p["rate"]
        n = _frames(r, ch, p["dur_s"], quick)
        apply, h_db, f = _lowpass(p["filt"], p["prm"], p["fc"], r)
        amb, f3 = lowpass_is_ambiguous(h_db, f, r)
        y = apply(_material("mix", rng, n, r, ch))
        fam = {"butter": "butter", "cheby1": "cheby1", "ellip": "ellip", "fir": "fir-kaiser"}[p["filt"]]
        detail = "".join(f"{kk}{v:g}" for kk, v in p["prm"].items())
        yield case([f"{fam}-lowpass", detail, f"{p['fc'] / 1000:g}k", _khz(r)], fam,
                   "ambiguous-lowpass" if amb else "lowpass", r, _to_level(y, rng), _not_up(), dict(f3_hz=f3))
        return

    if k == "codec":
        r = p["rate"]
        n = _frames(r, ch, p["dur_s"], quick)
        x = _material("mix", rng, n, r, ch)
        y = ffmpeg_codec_roundtrip(x, r, p["codec"], p["q"])
        fam = f"ffmpeg-{p['codec']}"
        yield case([fam, "".join(p["q"]).replace(":", "").strip("-"), _khz(r)], fam, "codec-shelf", r, _to_level(y, rng),
                   {"upsampled_from_hz": None, "imaging_detected": False})
        return

    if k == "down":
        s, d = p["src"], p["dst"]
        n = _frames(s, ch, p["dur_s"], quick)
        x = _material("mix", rng, n, s, ch)
        if p["tool"] == "sox-v":
            conv = lambda z: sox_rate(z, s, d, ["-v"])                                    # noqa: E731
        elif p["tool"] == "ffmpeg-soxr":
            conv = lambda z: ffmpeg_aresample(z, s, d, dict(resampler="soxr", precision=28))  # noqa: E731
        else:
            conv = lambda z: ffmpeg_aresample(z, s, d, dict(filter_size=256, cutoff=0.91,   # noqa: E731
                                                             kaiser_beta=12))
        leak = fold_leak_db(conv, x, s, d)
        expect = _not_up()
        if leak > LEAK_MAX_DB:          # folded content not provably absent: no aliasing label
            del expect["aliasing_detected"]
        fam = f"down-{p['tool']}"
        yield case([fam, _khz(s), "to", _khz(d)], fam, "downsampled", d, _to_level(conv(x), rng), expect,
                   dict(leak_db=leak))
        return

    if k == "naive":
        r = p["rate"]
        n = _frames(r, ch, p["dur_s"], quick)
        notes = _note_plan(rng, n / r, p["voices"], *p["f0"])
        naive = _render_notes(notes, n, r, p["shape"], p["prm"], naive=True, channels=ch)
        bl = _render_notes(notes, n, r, p["shape"], p["prm"], naive=False, channels=ch)
        fold_db = _rms_db(naive - bl) - _rms_db(bl)
        if fold_db < FOLD_MIN_DB:
            raise AssertionError(f"naive case {p['idx']}: folded energy {fold_db:.1f} dB under {FOLD_MIN_DB}")
        lvl = 10 ** ((rng.uniform(-28, -8) - _rms_db(bl)) / 20)
        g = min(lvl, PEAK_MAX / max(np.max(np.abs(naive)), np.max(np.abs(bl))))
        prm = "" if p["shape"] in ("saw", "square") else f"{p['prm']:.2f}"
        yield case([f"naive-{p['shape']}", prm, _khz(r), f"{p['voices']}v"], f"naive-{p['shape']}", "naive-synth",
                   r, naive * g, {"aliasing_detected": True, "upsampled_from_hz": None, "imaging_detected": False},
                   dict(fold_db=fold_db))
        if p["twin"] and (not quick or p["twin_quick"]):
            yield case([f"additive-{p['shape']}", prm, _khz(r), f"{p['voices']}v"], f"additive-{p['shape']}",
                       "band-limited-synth", r, bl * g, _not_up(), dict(fold_db=fold_db))
        return

    if k == "decim":
        s, d = p["src"], p["dst"]
        n = _frames(s, ch, p["dur_s"], quick)
        x = _material("tonal", rng, n, s, ch)
        fold_db = fold_source_ratio_db(x, s, d)
        if fold_db < FOLD_MIN_DB:
            raise AssertionError(f"decimation case {p['idx']}: source above new Nyquist {fold_db:.1f} dB")
        m = int(len(x) * d // s)
        pos = np.arange(m) * (s / d)
        if p["how"] == "pick":
            y = x[:: s // d][:m]
        elif p["how"] == "nearest":
            y = x[np.minimum(np.round(pos).astype(int), len(x) - 1)]
        else:
            y = np.stack([np.interp(pos, np.arange(len(x)), x[:, c]) for c in range(ch)], axis=1)
        fam = f"decimate-{p['how']}"
        yield case([fam, _khz(s), "to", _khz(d)], fam, "decimation", d, _to_level(y, rng),
                   {"aliasing_detected": True, "upsampled_from_hz": None, "imaging_detected": False},
                   dict(fold_db=fold_db))
        if p["twin"] and (not quick or p["twin_quick"]):
            if s % d == 0:
                mdec = s // d
                h = signal.firwin(80 * mdec + 1, 0.46 * d, window=("kaiser", 10.0), fs=s)
                _, H = signal.freqz(h, worN=np.linspace(d / 2, s / 2, 2048), fs=s)
                stop_db = float(20 * np.log10(np.max(np.abs(H))))
                if stop_db > -80:
                    raise AssertionError(f"decimation FIR stop band only {stop_db:.1f} dB")
                z = signal.oaconvolve(x, h[:, None], mode="full")[len(h) // 2: len(h) // 2 + len(x)]
                y2, fam2, fact2 = z[::mdec][:m], "decimate-fir", dict(stop_db=stop_db)
            else:
                leak = fold_leak_db(lambda z: sox_rate(z, s, d, ["-v"]), x, s, d)
                if leak > LEAK_MAX_DB:
                    raise AssertionError(f"sox -v down-conversion lets {leak:.1f} dB of folded content through")
                y2, fam2, fact2 = sox_rate(x, s, d, ["-v"]), "sox-cli-down", dict(leak_db=leak)
            yield case([fam2, _khz(s), "to", _khz(d)], fam2, "filtered-decimation", d, _to_level(y2, rng),
                       _not_up(), fact2)
        return

    if k == "imaging":
        s, d, how = p["src"], p["dst"], p["how"]
        n_src = _frames(d, ch, p["dur_s"], quick) * s // d
        x = _material(p["material"], rng, n_src, s, ch)
        n = round(n_src * d / s)
        if how in ("hold", "linear", "zero-stuff"):
            L = d // s
            if L * s != d:
                raise ValueError(f"{how} needs an integer ratio, got {s}->{d}")
            if how == "hold":
                y = np.repeat(x, L, axis=0)
            elif how == "zero-stuff":
                y = np.zeros((n, ch))
                y[::L] = x * L
            else:
                pos = np.arange(n) / L
                y = np.stack([np.interp(pos, np.arange(n_src), x[:, c]) for c in range(ch)], axis=1)
            fam = how
        elif how == "linear-frac":
            pos = np.arange(n) * (s / d)
            y = np.stack([np.interp(pos, np.arange(n_src), x[:, c]) for c in range(ch)], axis=1)
            fam = "linear"
        elif how == "ffmpeg-short":
            o = [dict(filter_size=2, cutoff=1.0), dict(filter_size=4, cutoff=1.0),
                 dict(filter_type="cubic", filter_size=4)][p["short"]]
            y = ffmpeg_aresample(x, s, d, o)
            fam = "ffmpeg-swr-short"
        else:
            y = sox_rate(x, s, d, ["-q"])
            fam = "sox-cli-rate-quick"
        img_db = image_ratio_db(y, d, s)
        expect = {"upsampled_from_hz": s}
        if img_db >= IMAGE_MIN_DB:
            expect["imaging_detected"] = True
        elif how in ("hold", "linear", "zero-stuff", "linear-frac"):
            raise AssertionError(f"imaging case {p['idx']} ({how}): images only {img_db:.1f} dB")
        yield case([fam, "frac" if how == "linear-frac" else "", _khz(s), "to", _khz(d)], fam,
                   "imaging" if "imaging_detected" in expect else "upsampled", d, _to_level(y, rng), expect,
                   dict(img_db=img_db, src=s))
        return
    raise ValueError(f"unknown plan kind {k!r}")


def cases(seed: int, quick: bool = False, facts: dict | None = None) -> Iterator[Case]:
    """Yield the validation-B cases of one seed (6000-6999).  ``facts``, when given, is filled per case name
    with the construction facts the labels rest on (folded / image energy in dB, filter edges)."""
    if seed not in SEED_RANGE:
        raise ValueError(f"corpus_validation_b: seed {seed} outside its range 6000-6999")
    for tool in ("sox", "ffmpeg"):
        if shutil.which(tool) is None:
            raise RuntimeError(f"corpus_validation_b needs the {tool} command on PATH")
    for p in _plan(seed):
        if quick and not p["quick"]:
            continue
        yield from _one(p, seed, quick, facts)


if __name__ == "__main__":   # summary of one seed: python bench/corpus_validation_b.py [seed] [--quick]
    import collections
    import sys
    import time

    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    t0 = time.process_time()
    w0 = time.time()
    count = collections.Counter()
    fam = collections.Counter()
    facts_: dict = {}
    for c in cases(int(args[0]) if args else 6000, quick="--quick" in sys.argv, facts=facts_):
        count[c.group] += 1
        fam[c.family] += 1
        fact = " ".join(f"{k}={v:.1f}" for k, v in facts_[c.name].items() if k.endswith("_db"))
        print(f"{c.name:62s} {c.group[:14]:14s} {c.rate_hz:6d} {c.audio.shape[1]}ch {len(c.audio) / c.rate_hz:5.1f}s "
              f"{_rms_db(c.audio):6.1f} dBFS {c.expect} {fact}", flush=True)
    print(dict(count), sum(count.values()))
    print(dict(fam))
    print(f"cpu {time.process_time() - t0:.1f} s (own process), wall {time.time() - w0:.1f} s")
