"""Tuning corpus for the folded-content (aliasing) detector, in the shared case format.

Set "tuning", seeds 1000-1999.  Everything here is synthesised by this module's own code
(naive oscillators, additive twins, unfiltered decimation) except the filtered negatives,
which use scipy's ``resample_poly``.  Rates 44.1, 48 and 96 kHz; 8-12 s per case.

Groups and what they expect (``expect["aliasing_detected"]``):

- ``naive-synth`` (True): 2-4 overlapping voices of naively sampled oscillators (the
  discontinuous waveform evaluated at the sample instants), each note with an ADSR
  envelope and a slight vibrato; families ``naive-saw``, ``naive-square``, ``naive-pulse``,
  ``naive-hardsync``, and ``naive-saw-melody`` (one voice, f0 1-2 kHz, slight vibrato).
- ``decimation`` (True): band-limited tonal music made at 2x or 3x the target rate, mixed
  with noise, then decimated by keeping every 2nd/3rd sample (families ``drop-2``,
  ``drop-3``) or by nearest-sample picking at a non-integer ratio (``drop-nearest``).
- ``band-limited-synth`` (False): the additive twin of every naive-synth case: the same
  notes, envelopes and vibrato, every partial below 0.95 of Nyquist at its highest pitch.
- ``filtered-decimation`` (False): the decimation material through ``resample_poly``.
- ``native`` (False): music-like mixes made at the file's own rate (harmonic notes with
  vibrato, stretched (piano-like) partials, drums, noise bed), family ``native-mix``.
- ``speech`` (False): voiced syllables by additive synthesis (formant envelope, pitch
  contour) with fricative noise, family ``speech-additive``.
- ``noise-like`` (False): noise beds, raw and dropped 2:1 (never judged: they carry no
  evidence of their own folding; counted as a false alarm only if called aliased).

Added cases (after the ones above, so that those keep their content), each set to an RMS level
drawn from -30..-6 dBFS (lowered where the peak would pass -0.1 dBFS):

- ``naive-synth`` (True): 2-3 voices per kind with a deeper vibrato (0.8-1.5 %) and a
  noise bed 30-50 dB under the voices (families ``naive-<kind>-deep``).
- ``band-limited-synth`` (False): their twins made by naive synthesis at 16 times the rate,
  brought down by ``resample_poly`` (an oversampled oscillator with a proper decimation
  filter; family ``oversampled-<kind>``).
- ``decimation`` (True): tonal music mixed with noise, rendered at 2x/3x and dropped 2:1 or
  3:1, with a steeper harmonic roll-off (1/k^1.2..1/k^1.8) and the noise 20-35 dB under the
  music (``drop-2``, ``drop-3``), and sample dropping that deletes one sample in every N
  (N = 12 or 20, ``drop-every-n``).
- ``filtered-decimation`` (False): the same sources through ``resample_poly``.
- ``decimation`` (True), last: nearest-sample rate changes 48 -> 44.1, 50 -> 44.1 and 100 -> 48 kHz
  (``drop-nearest``) and one sample deleted in every 30, 50 or 16 (``drop-every-n``), of music mixes or
  tonal music with a noise bed; ``filtered-decimation`` (False): their twins through ``resample_poly``.

- ``decimation`` (True), last: rate changes without a filter written the ways a quick converter is
  (:data:`RULE_PICKS`: nearest, truncated, ceiling, offset start, a read position accumulated in double
  or single precision or in 16.16 fixed point, linear interpolation at the exact or a single-precision
  position; 48 -> 44.1, 96 -> 88.2, 44.1 -> 32 and 48 -> 32 kHz; tonal music, band-limited polyphonic
  synthesis, music mixes; mono and stereo), families ``pick-<rule>`` and ``interp-<rule>``;
  ``filtered-decimation`` (False): their resample_poly twins.

- ``naive-synth`` (True) and ``band-limited-synth`` (False), last: ring modulation, two-operator FM, PWM and
  swept hard sync (:data:`MODULATION_VOICES`), naive and rendered at 8x then cut to Nyquist in the FFT domain
  (families ``naive-<kind>`` and ``oversampled-<kind>``); ``decimation`` (True), last: mono tonal music
  dropped 2:1 or 3:1 or picked 48 -> 44.1 kHz (:data:`MONO_DROPS`), with resample_poly twins.

- ``naive-synth`` (True) and ``band-limited-synth`` (False), last: two-operator FM voices (:data:`FM_VOICES`:
  carriers 200 Hz - 3 kHz, peak index 1-8, whole and fractional ratios) and naive ring modulators
  (:data:`RING_VOICES`), each with two twins rendered at 8x: cut at Nyquist in the FFT domain (``oversampled-fm``,
  ``oversampled-ring``) and brought down by resample_poly (``oversampled-fm-poly``, ``oversampled-ring-poly``);
  ``decimation`` (True): crushed holds at fractional steps 1.67-5.13, some quantised to 10-12 bits
  (:data:`CRUSH_HOLDS`, family ``crush-hold``), with FFT-band-limited twins (``filtered-decimation``, False).

Caution: several cases are bright full-band synthesis near full scale; turn monitors
down before listening to any of them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Iterator

import numpy as np
from scipy import signal as sps

SET = "tuning"
RATES_HZ = (44100, 48000, 96000)


@dataclass
class Case:
    name: str
    set: str
    family: str
    group: str
    rate_hz: int
    audio: np.ndarray
    expect: dict
    channel_labels: list | None = field(default=None)


# ---------------------------------------------------------------- notes, envelopes, vibrato
def adsr(n: int, fs: int, rng) -> np.ndarray:
    """Attack-decay-sustain-release envelope over ``n`` samples (random stage times)."""
    a = int(rng.uniform(0.005, 0.06) * fs)
    d = int(rng.uniform(0.05, 0.3) * fs)
    r = int(rng.uniform(0.05, 0.4) * fs)
    s = rng.uniform(0.4, 0.9)
    env = np.full(n, s)
    a, d, r = min(a, n // 4), min(d, n // 4), min(r, n // 3)
    env[:a] = np.linspace(0.0, 1.0, a, endpoint=False)
    env[a:a + d] = np.linspace(1.0, s, d, endpoint=False)
    if r:
        env[n - r:] *= np.linspace(1.0, 0.0, r)
    return env


def pitch_track(f0: float, n: int, fs: int, rng, depth: float | None = None) -> np.ndarray:
    """Instantaneous frequency of one note: ``f0`` with a slight vibrato (rate 4.5-6.5 Hz,
    depth 0.15-0.8 % unless given, fading in over the first 0.1-0.4 s)."""
    t = np.arange(n) / fs
    rate = rng.uniform(4.5, 6.5)
    dep = rng.uniform(0.0015, 0.008) if depth is None else depth
    fade = np.clip(t / rng.uniform(0.1, 0.4), 0.0, 1.0)
    return f0 * (1.0 + dep * fade * np.sin(2 * math.pi * rate * t + rng.uniform(0, 2 * math.pi)))


def voices(seconds: float, fs: int, rng, n_voices: int, f_lo: float, f_hi: float):
    """Note list ``(start, length, f0)`` for ``n_voices`` voices playing back to back over the
    file: notes of 0.6-2.5 s with short gaps, pitches on an equal-tempered scale."""
    n_total = int(seconds * fs)
    notes = []
    lo, hi = 12 * math.log2(f_lo / 440.0), 12 * math.log2(f_hi / 440.0)
    for _v in range(n_voices):
        pos = int(rng.uniform(0.0, 0.4) * fs)
        while pos < n_total - int(0.3 * fs):
            length = min(int(rng.uniform(0.6, 2.5) * fs), n_total - pos)
            f0 = 440.0 * 2 ** (round(rng.uniform(lo, hi)) / 12.0) * (1 + rng.uniform(-0.002, 0.002))
            notes.append((pos, length, f0))
            pos += length + int(rng.uniform(0.0, 0.15) * fs)
    return notes


# ---------------------------------------------------------------- oscillators
def naive_shape(kind: str, ph: np.ndarray, duty: float, sync: float) -> np.ndarray:
    """The discontinuous waveform at phase ``ph`` (cycles, in [0, 1))."""
    if kind == "saw":
        return 2.0 * ph - 1.0
    if kind == "square":
        return np.where(ph < 0.5, 1.0, -1.0)
    if kind == "pulse":
        return np.where(ph < duty, 1.0, -1.0) - (2.0 * duty - 1.0)
    if kind == "hardsync":   # a slave sawtooth at sync*f0, reset at every master cycle
        return 2.0 * np.mod(ph * sync, 1.0) - 1.0
    raise ValueError(kind)


def naive_note(kind: str, f_inst: np.ndarray, fs: int, phase0: float, duty: float, sync: float) -> np.ndarray:
    ph = np.mod(phase0 + np.cumsum(f_inst) / fs, 1.0)
    return naive_shape(kind, ph, duty, sync)


def shape_coefficients(kind: str, duty: float, sync: float, count: int) -> np.ndarray:
    """Complex Fourier coefficients c_1..c_count of one period of the waveform (from a
    finely sampled period; the shape's own series, so the additive twin is exact up to
    the truncation)."""
    m = 1 << 16
    ph = (np.arange(m) + 0.5) / m
    c = np.fft.rfft(naive_shape(kind, ph, duty, sync)) / m * 2.0
    return c[1:count + 1]


def additive_note(kind: str, f_inst: np.ndarray, fs: int, phase0: float, duty: float, sync: float,
                  top_hz: float) -> np.ndarray:
    """Band-limited twin: the waveform's harmonics whose highest instantaneous frequency stays
    below ``top_hz``, summed by complex recurrence (z**k) over the integrated phase."""
    kmax = int(top_hz // float(np.max(f_inst)))
    if kmax < 1:
        return np.zeros(f_inst.size)
    coef = shape_coefficients(kind, duty, sync, kmax)
    theta = 2 * math.pi * (phase0 + np.cumsum(f_inst) / fs)
    out = np.zeros(f_inst.size)
    step = 1 << 16
    for i in range(0, f_inst.size, step):
        z = np.exp(1j * theta[i:i + step])
        zk = z.copy()
        acc = np.zeros(z.size, dtype=complex)
        for k in range(kmax):
            acc += coef[k] * zk
            zk *= z
        # the rfft of a real period holds c_k for exp(-j 2 pi k n/m); the waveform is Re(sum c_k conj(z^k))
        out[i:i + step] = np.real(np.conj(acc))
    return out


def synth(notes, kind_of, seconds: float, fs: int, rng, naive: bool, depth=None):
    """Sum of notes; ``kind_of(i)`` gives (kind, duty, sync) per note.  Same rng draws for the
    naive and additive versions (the caller passes equal seeds)."""
    n_total = int(seconds * fs)
    out = np.zeros(n_total)
    for i, (pos, length, f0) in enumerate(notes):
        kind, duty, sync = kind_of(i)
        f_inst = pitch_track(f0, length, fs, rng, depth)
        env = adsr(length, fs, rng)
        phase0 = rng.uniform(0, 1)
        gain = rng.uniform(0.5, 1.0)
        if naive:
            v = naive_note(kind, f_inst, fs, phase0, duty, sync)
        else:
            v = additive_note(kind, f_inst, fs, phase0, duty, sync, 0.95 * fs / 2.0)
        out[pos:pos + length] += gain * env * v
    return out


def normalise(x: np.ndarray, peak: float) -> np.ndarray:
    m = float(np.max(np.abs(x)))
    return x if m == 0 else x * (peak / m)


# ---------------------------------------------------------------- programme material
def pink(n: int, rng) -> np.ndarray:
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.arange(spec.size) / n
    shape = 1.0 / np.sqrt(np.maximum(f, 1e-4))
    x = np.fft.irfft(spec * shape, n)
    return x / np.sqrt(np.mean(x ** 2))


def tonal_music(seconds: float, fs: int, rng, top_hz: float, vibrato: bool = True, stretch: float = 0.0,
                tilt: float = 1.0) -> np.ndarray:
    """Band-limited polyphonic music at rate ``fs``: 2-4 voices of harmonic notes (partials
    ``k*f0*sqrt(1 + stretch*k^2)`` with amplitudes 1/k**tilt up to ``top_hz``), ADSR envelopes,
    optional vibrato, a bass line."""
    n_total = int(seconds * fs)
    out = np.zeros(n_total)
    notes = voices(seconds, fs, rng, int(rng.integers(2, 5)), 150.0, 900.0)
    bass = [(p, l, f / 4.0) for p, l, f in voices(seconds, fs, rng, 1, 160.0, 320.0)]
    for pos, length, f0 in notes + bass:
        top = top_hz if f0 >= 100.0 else min(top_hz, 6000.0)
        f_inst = pitch_track(f0, length, fs, rng, None if vibrato else 0.0)
        env = adsr(length, fs, rng)
        theta = 2 * math.pi * np.cumsum(f_inst) / fs
        v = np.zeros(length)
        fmax = float(np.max(f_inst))
        if stretch == 0.0:   # harmonic: complex recurrence z**k, one random phase per partial
            kmax = int(top // fmax)
            z = np.exp(1j * theta)
            zk = z.copy()
            acc = np.zeros(length, dtype=complex)
            for k in range(1, kmax + 1):
                acc += zk * (np.exp(1j * rng.uniform(0, 2 * math.pi)) / k ** tilt)
                zk *= z
            v = acc.imag
        else:
            k = 1
            while True:
                ratio = k * math.sqrt(1.0 + stretch * k * k)
                if ratio * fmax >= top:
                    break
                v += np.sin(ratio * theta + rng.uniform(0, 2 * math.pi)) / k ** tilt
                k += 1
        out[pos:pos + length] += rng.uniform(0.5, 1.0) * env * v
    return out


def drums(seconds: float, fs: int, rng) -> np.ndarray:
    n_total = int(seconds * fs)
    out = np.zeros(n_total)
    beat = rng.uniform(0.25, 0.5)
    t = 0.1
    while t < seconds - 0.3:
        pos = int(t * fs)
        m = min(int(0.25 * fs), n_total - pos)
        tt = np.arange(m) / fs
        if rng.random() < 0.5:   # kick: a falling sine
            v = np.sin(2 * math.pi * (50 * tt + 80 * (1 - np.exp(-tt * 30)) / 30)) * np.exp(-tt * 12)
        else:                    # snare/hat: noise burst
            v = rng.standard_normal(m) * np.exp(-tt * rng.uniform(20, 60)) * 0.5
        out[pos:pos + m] += v
        t += beat
    return out


def music_mix(seconds: float, fs: int, rng, top_hz: float, noise_db: float) -> np.ndarray:
    """Tonal music with drums and a pink noise bed ``noise_db`` below the music's RMS."""
    x = tonal_music(seconds, fs, rng, top_hz, vibrato=rng.random() < 0.7, tilt=rng.uniform(0.8, 1.4))
    x = x / (np.sqrt(np.mean(x ** 2)) + 1e-30)
    if rng.random() < 0.6:
        d = drums(seconds, fs, rng)
        x = x + 0.5 * d / (np.sqrt(np.mean(d ** 2)) + 1e-30)
    x = x + 10 ** (noise_db / 20) * pink(x.size, rng)
    return x


def speech(seconds: float, fs: int, rng) -> np.ndarray:
    """Voiced syllables by additive synthesis: harmonics of a gliding f0 (90-260 Hz) under a
    three-formant envelope, every harmonic below 0.9 of Nyquist; fricatives as filtered noise."""
    n_total = int(seconds * fs)
    out = np.zeros(n_total)
    base = rng.uniform(90, 240)
    pos = int(0.05 * fs)
    formant_sets = ((730, 1090, 2440), (270, 2290, 3010), (530, 1840, 2480), (570, 840, 2410), (300, 870, 2240))
    while pos < n_total:
        m = min(int(rng.uniform(0.12, 0.35) * fs), n_total - pos)
        t = np.arange(m) / fs
        f0 = base * (1 + 0.12 * np.sin(2 * math.pi * rng.uniform(0.8, 2.5) * t + rng.uniform(0, 6))) \
            * rng.uniform(0.85, 1.2)
        theta = 2 * math.pi * np.cumsum(f0) / fs
        fm = rng.permutation(np.array(formant_sets[rng.integers(len(formant_sets))], dtype=float))
        fm = np.sort(fm)
        v = np.zeros(m)
        kmax = int(0.9 * fs / 2 / float(np.max(f0)))
        for k in range(1, kmax + 1):
            fk = k * float(np.mean(f0))
            amp = sum(1.0 / (1.0 + ((fk - c) / (60 + 0.06 * c)) ** 2) for c in fm) / (1 + fk / 3000.0)
            v += amp * np.sin(k * theta)
        if rng.random() < 0.45:
            fr = min(int(0.08 * fs), m)
            v[:fr] += 0.3 * sps.sosfilt(sps.butter(2, [3500, min(9000, 0.45 * fs)], "band", fs=fs, output="sos"),
                                        rng.standard_normal(fr))
        out[pos:pos + m] += v * np.hanning(m)
        pos += m + int(rng.uniform(0.03, 0.25) * fs)
    out += 0.002 * pink(n_total, rng)
    return out


# ---------------------------------------------------------------- decimation
def nearest_pick(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    """Rate change by keeping the nearest earlier input sample for each output instant
    (sample dropping at a non-integer ratio, no filter)."""
    n_out = int(x.size * fs_out / fs_in)
    idx = np.floor(np.arange(n_out) * (fs_in / fs_out)).astype(np.int64)
    return x[idx]


# ---------------------------------------------------------------- cases
NAIVE_KINDS = ("saw", "square", "pulse", "hardsync")


def _kind_params(kind: str, rng):
    if kind == "pulse":
        d = rng.uniform(0.1, 0.35)
        return lambda i: ("pulse", d, 1.0)
    if kind == "hardsync":
        s = rng.uniform(1.3, 3.2)
        return lambda i: ("hardsync", 0.5, s)
    return lambda i: (kind, 0.5, 1.0)


def set_rms(x: np.ndarray, rms_dbfs: float, max_peak: float = 0.989) -> np.ndarray:
    """``x`` scaled to an RMS of ``rms_dbfs`` dBFS, or lower where its peak would pass ``max_peak``."""
    r = float(np.sqrt(np.mean(x ** 2)))
    if r == 0.0:
        return x
    g = 10 ** (rms_dbfs / 20) / r
    return x * min(g, max_peak / float(np.max(np.abs(x))))


def drop_every(x: np.ndarray, n: int) -> np.ndarray:
    """Sample dropping: delete one sample in every ``n`` (a rate change by (n-1)/n, no filter)."""
    keep = np.ones(x.size, dtype=bool)
    keep[n - 1::n] = False
    return x[keep]


def _case(name, family, group, fs, x, expect, peak=None, rng=None, rms_dbfs=None):
    x = np.asarray(x, dtype=float)
    if rms_dbfs is not None:
        x = set_rms(x, rms_dbfs)
    elif peak is not None:
        x = normalise(x, peak)
    return Case(name=name, set=SET, family=family, group=group, rate_hz=int(fs),
                audio=np.clip(x, -1.0, 1.0).reshape(-1, 1), expect=expect)


def cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """Every case of the tuning set for ``seed`` (1000-1999); ``quick``: a small slice (one or two
    cases per family, short)."""
    if not 1000 <= seed <= 1999:
        raise ValueError(f"tuning seeds are 1000-1999, got {seed}")
    seconds = 8.0 if quick else 10.0
    reps = 1 if quick else 2
    idx = 0

    def rng_for(i):
        return np.random.default_rng([seed, i])

    # naive synthesis and its band-limited twins
    for kind in NAIVE_KINDS + ("saw-melody",):
        for fs in (RATES_HZ if not quick else (44100, 48000)):
            for r in range(reps if kind != "saw-melody" else reps):
                if quick and fs == 48000 and kind in ("square", "hardsync"):
                    continue
                idx += 1
                sub = rng_for(idx)
                peak = sub.uniform(0.3, 0.9)
                if kind == "saw-melody":
                    notes = voices(seconds, fs, sub, 1, 1000.0, 2000.0)
                    kinds = _kind_params("saw", sub)
                    fam = "naive-saw-melody"
                else:
                    notes = voices(seconds, fs, sub, int(sub.integers(2, 5)), 110.0, 880.0)
                    kinds = _kind_params(kind, sub)
                    fam = f"naive-{kind}"
                state = sub.integers(1 << 62)
                x = synth(notes, kinds, seconds, fs, np.random.default_rng(state), naive=True)
                y = synth(notes, kinds, seconds, fs, np.random.default_rng(state), naive=False)
                stem = f"{fam}-{fs // 100}-{seed}-{r}"
                yield _case(stem, fam, "naive-synth", fs, x, {"aliasing_detected": True}, peak)
                yield _case(f"additive-twin-{stem}", f"additive-{fam[6:]}", "band-limited-synth", fs, y,
                            {"aliasing_detected": False}, peak)

    # decimation of tonal music mixed with noise, and its properly filtered twin
    plans = ((2, 48000), (2, 44100), (3, 48000), (3, 44100), (2, 96000))
    if quick:
        plans = ((2, 48000), (3, 44100))
    for factor, fs in plans:
        idx += 1
        sub = rng_for(idx)
        fs_in = factor * fs
        src = music_mix(seconds, fs_in, sub, 0.45 * fs_in, sub.uniform(-45, -25))
        peak = sub.uniform(0.3, 0.9)
        stem = f"drop-{factor}-{fs // 100}-{seed}"
        yield _case(stem, f"drop-{factor}", "decimation", fs, src[::factor], {"aliasing_detected": True}, peak)
        yield _case(f"filtered-{stem}", "scipy-resample_poly", "filtered-decimation", fs,
                    sps.resample_poly(src, 1, factor), {"aliasing_detected": False}, peak)
    for fs_in, fs in (((96000, 44100),) if quick else ((96000, 44100), (88200, 48000), (144000, 96000))):
        idx += 1
        sub = rng_for(idx)
        src = music_mix(seconds, fs_in, sub, 0.45 * fs_in, sub.uniform(-45, -25))
        peak = sub.uniform(0.3, 0.9)
        stem = f"drop-nearest-{fs_in // 100}-{fs // 100}-{seed}-{idx}"
        yield _case(stem, "drop-nearest", "decimation", fs, nearest_pick(src, fs_in, fs),
                    {"aliasing_detected": True}, peak)
        g = math.gcd(fs_in, fs)
        yield _case(f"filtered-{stem}", "scipy-resample_poly", "filtered-decimation", fs,
                    sps.resample_poly(src, fs // g, fs_in // g), {"aliasing_detected": False}, peak)

    # native material, speech, noise
    for fs in (RATES_HZ if not quick else (44100, 48000)):
        for r in range(reps):
            idx += 1
            sub = rng_for(idx)
            x = music_mix(seconds, fs, sub, 0.45 * fs, sub.uniform(-50, -25))
            yield _case(f"native-mix-{fs // 100}-{seed}-{r}", "native-mix", "native", fs, x,
                        {"aliasing_detected": False}, sub.uniform(0.3, 0.9))
            idx += 1
            sub = rng_for(idx)
            x = tonal_music(seconds, fs, sub, 0.45 * fs, vibrato=True, stretch=sub.uniform(1e-4, 6e-4))
            x = x / np.sqrt(np.mean(x ** 2)) + 10 ** (sub.uniform(-60, -35) / 20) * pink(x.size, sub)
            yield _case(f"native-stretched-{fs // 100}-{seed}-{r}", "native-stretched", "native", fs, x,
                        {"aliasing_detected": False}, sub.uniform(0.3, 0.9))
            idx += 1
            sub = rng_for(idx)
            yield _case(f"speech-{fs // 100}-{seed}-{r}", "speech-additive", "speech", fs,
                        speech(seconds, fs, sub), {"aliasing_detected": False}, sub.uniform(0.2, 0.7))
            if quick and r:
                break
        idx += 1
        sub = rng_for(idx)
        nz = pink(int(seconds * fs) * 2, sub)
        yield _case(f"noise-dropped-{fs // 100}-{seed}", "drop-2", "noise-like", fs, nz[::2],
                    {"aliasing_detected": False}, 0.5)

    # added cases: deeper vibrato with a noise bed, oversampled-and-filtered twins, steeper music
    # for decimation, sample dropping one in N; RMS levels -30..-6 dBFS
    for kind in NAIVE_KINDS:
        for fs in ((44100, 48000) if not quick else (48000,)):
            if quick and kind in ("square", "hardsync"):
                continue
            idx += 1
            sub = rng_for(idx)
            notes = voices(seconds, fs, sub, int(sub.integers(2, 4)), 110.0, 1000.0)
            kinds = _kind_params(kind, sub)
            depth = sub.uniform(0.008, 0.015)
            state = sub.integers(1 << 62)
            x = synth(notes, kinds, seconds, fs, np.random.default_rng(state), naive=True, depth=depth)
            over = 16
            notes_o = [(p * over, n * over, f) for p, n, f in notes]
            y = synth(notes_o, kinds, seconds, fs * over, np.random.default_rng(state), naive=True, depth=depth)
            y = sps.resample_poly(y, 1, over)[:x.size]
            bed = 10 ** (-sub.uniform(30, 50) / 20) * float(np.sqrt(np.mean(x ** 2))) * pink(x.size, sub)
            level = sub.uniform(-30, -6)
            stem = f"naive-{kind}-deep-{fs // 100}-{seed}"
            yield _case(stem, f"naive-{kind}-deep", "naive-synth", fs, x + bed, {"aliasing_detected": True},
                        rms_dbfs=level)
            yield _case(f"oversampled-{stem}", f"oversampled-{kind}", "band-limited-synth", fs, y + bed,
                        {"aliasing_detected": False}, rms_dbfs=level)
    plans = ((2, 44100), (3, 48000), (2, 48000)) if not quick else ((2, 44100),)
    for factor, fs in plans:
        idx += 1
        sub = rng_for(idx)
        fs_in = factor * fs
        x = tonal_music(seconds, fs_in, sub, 0.45 * fs_in, vibrato=True, tilt=sub.uniform(1.2, 1.8))
        x = x / (np.sqrt(np.mean(x ** 2)) + 1e-30) + 10 ** (-sub.uniform(20, 35) / 20) * pink(x.size, sub)
        level = sub.uniform(-30, -6)
        stem = f"drop-{factor}-steep-{fs // 100}-{seed}"
        yield _case(stem, f"drop-{factor}", "decimation", fs, x[::factor], {"aliasing_detected": True},
                    rms_dbfs=level)
        yield _case(f"filtered-{stem}", "scipy-resample_poly", "filtered-decimation", fs,
                    sps.resample_poly(x, 1, factor), {"aliasing_detected": False}, rms_dbfs=level)
    for n_drop, fs in (((12, 48000), (20, 44100)) if not quick else ((12, 48000),)):
        idx += 1
        sub = rng_for(idx)
        fs_in = int(round(fs * n_drop / (n_drop - 1)))
        x = music_mix(seconds, fs_in, sub, 0.45 * fs_in, sub.uniform(-40, -25))
        level = sub.uniform(-30, -6)
        stem = f"drop-every-{n_drop}-{fs // 100}-{seed}"
        yield _case(stem, "drop-every-n", "decimation", fs, drop_every(x, n_drop), {"aliasing_detected": True},
                    rms_dbfs=level)
        g = math.gcd(fs_in, fs)
        yield _case(f"filtered-{stem}", "scipy-resample_poly", "filtered-decimation", fs,
                    sps.resample_poly(x, fs // g, fs_in // g), {"aliasing_detected": False}, rms_dbfs=level)

    # added: dense sample dropping at many standard rate pairs (own block, own random streams)
    yield from dense_drop_cases(seed, seconds, quick)
    # added: more sample dropping and nearest-sample rate changes of tonal material (with and without
    # drums and a noise bed), each with its band-limited twin (the same source through resample_poly)
    if quick:
        return
    drops = (("nearest", 48000, 44100), ("nearest", 50000, 44100), ("nearest", 100000, 48000),
             ("every", 30, 48000), ("every", 50, 44100), ("every", 16, 96000))
    for kind, a, fs in drops:
        idx += 1
        sub = rng_for(idx)
        fs_in = a if kind == "nearest" else int(round(fs * a / (a - 1)))
        if sub.random() < 0.5:
            x = music_mix(seconds, fs_in, sub, 0.45 * fs_in, sub.uniform(-45, -25))
        else:
            x = tonal_music(seconds, fs_in, sub, 0.45 * fs_in, vibrato=True, tilt=sub.uniform(1.0, 1.8))
            x = x / (np.sqrt(np.mean(x ** 2)) + 1e-30) + 10 ** (-sub.uniform(25, 45) / 20) * pink(x.size, sub)
        level = sub.uniform(-30, -6)
        if kind == "nearest":
            stem, fam, y = f"drop-nearest-{fs_in // 100}-{fs // 100}-{seed}-{idx}", "drop-nearest", \
                nearest_pick(x, fs_in, fs)
        else:
            stem, fam, y = f"drop-every-{a}-{fs // 100}-{seed}", "drop-every-n", drop_every(x, a)
        yield _case(stem, fam, "decimation", fs, y, {"aliasing_detected": True}, rms_dbfs=level)
        g = math.gcd(fs_in, fs)
        yield _case(f"filtered-{stem}", "scipy-resample_poly", "filtered-decimation", fs,
                    sps.resample_poly(x, fs // g, fs_in // g)[:y.size], {"aliasing_detected": False}, rms_dbfs=level)
    # added: picking and 2:1 dropping on masters of varied channel count, length and level
    yield from varied_pick_cases(seed, quick)
    # added: picking and interpolating rules as naive converters write them (own random streams)
    yield from rule_pick_cases(seed, quick)
    # added: ring modulation, two-operator FM, PWM and swept hard sync, naive and band-limited (own streams)
    yield from modulation_cases(seed, quick)
    # added: mono tonal music dropped 2:1 or 3:1, or picked from 48 to 44.1 kHz (own streams)
    yield from mono_drop_cases(seed, quick)
    # added: two-operator FM, ring modulators and crushed holds at fractional steps, with twins (own streams)
    yield from fm_ring_crush_cases(seed, quick)
    yield from additive_ring_cases(seed, quick)
    yield from poly_fm_cases(seed, quick)
    # added: tanh, hard clipping and sine wave folding of tonal voices at the file's rate, with twins (own streams)
    yield from nonlinear_cases(seed, quick)


# ---------------------------------------------------------------- dense sample dropping
#: rate changes by picking input samples without a filter, at standard rate pairs (input, output).
#: Each keeps fs_out/g of every fs_in/g input samples (g = gcd): the pattern of dropped samples
#: repeats every fs_out/g output samples (147 for 48 -> 44.1 kHz, 80 for 88.2 -> 48 kHz)
DENSE_DROP_PAIRS = ((48000, 44100), (96000, 88200), (44100, 32000), (48000, 32000), (88200, 48000),
                    (96000, 44100), (192000, 176400), (176400, 96000), (88200, 32000),
                    (192000, 88200), (96000, 32000), (48000, 44100))
#: the picking rule: the input sample at or before the output instant (``floor``), the nearest one
#: (``round``), or linear interpolation between the two neighbours (``linear``, no filter either)
DENSE_DROP_RULES = ("floor", "round", "linear", "floor", "round", "floor", "linear", "round", "floor",
                    "linear", "round", "linear")
DENSE_DROP_MATERIALS = ("tonal", "synth", "speech", "mix", "tonal", "synth", "tonal", "speech", "mix",
                        "synth", "tonal", "speech")


def pick_rate_change(x: np.ndarray, fs_in: int, fs_out: int, rule: str) -> np.ndarray:
    """Rate change from ``fs_in`` to a lower ``fs_out`` with no filter: output sample n is the input at
    time n/fs_out, taken as the sample at or before it (``floor``), the nearest sample (``round``), or
    interpolated linearly between the two neighbours (``linear``).  Exact integer arithmetic."""
    n_out = int((x.size - 2) * fs_out // fs_in)
    num = np.arange(n_out, dtype=np.int64) * fs_in
    i0 = num // fs_out
    if rule == "floor":
        return x[i0]
    if rule == "round":
        return x[np.minimum((2 * num + fs_out) // (2 * fs_out), x.size - 1)]
    if rule == "linear":
        frac = (num - i0 * fs_out) / fs_out
        return x[i0] * (1.0 - frac) + x[i0 + 1] * frac
    raise ValueError(rule)


def _dense_material(kind: str, seconds: float, fs: int, rng) -> np.ndarray:
    if kind == "tonal":
        x = tonal_music(seconds, fs, rng, 0.45 * fs, vibrato=True, tilt=rng.uniform(1.0, 1.8))
        return x / (np.sqrt(np.mean(x ** 2)) + 1e-30) + 10 ** (-rng.uniform(25, 50) / 20) * pink(x.size, rng)
    if kind == "synth":   # band-limited polyphonic synthesis: additive saw/square/pulse voices
        notes = voices(seconds, fs, rng, int(rng.integers(2, 5)), 110.0, 880.0)
        kinds = _kind_params(("saw", "square", "pulse")[int(rng.integers(3))], rng)
        x = synth(notes, kinds, seconds, fs, rng, naive=False)
        return x / (np.sqrt(np.mean(x ** 2)) + 1e-30) + 10 ** (-rng.uniform(40, 60) / 20) * pink(x.size, rng)
    if kind == "speech":
        return speech(seconds, fs, rng)
    if kind == "mix":
        return music_mix(seconds, fs, rng, 0.45 * fs, rng.uniform(-45, -25))
    raise ValueError(kind)


def dense_drop_cases(seed: int, seconds: float, quick: bool = False) -> Iterator[Case]:
    """Dense sample dropping (rate changes by picking samples without a filter) at the standard rate pairs of
    :data:`DENSE_DROP_PAIRS`, on tonal music, band-limited polyphonic synthesis, speech-like material and
    music mixes (group ``decimation``, expected True; families ``pick-floor``, ``pick-round``,
    ``pick-linear``), each with its band-limited twin (the same source through ``resample_poly``, expected
    False); and native steady chords whose period is a whole number of samples of the drop patterns' period
    (an organ-like chord on multiples of 300 Hz at 44.1 kHz and of 600 Hz at 48 kHz, expected False)."""
    todo = range(2) if quick else range(len(DENSE_DROP_PAIRS))
    for j in todo:
        fs_in, fs = DENSE_DROP_PAIRS[j]
        rule, kind = DENSE_DROP_RULES[j], DENSE_DROP_MATERIALS[j]
        sub = np.random.default_rng([seed, 20000 + j])
        x = _dense_material(kind, seconds, fs_in, sub)
        level = sub.uniform(-30, -8)
        y = pick_rate_change(x, fs_in, fs, rule)
        stem = f"pick-{rule}-{kind}-{fs_in // 100}-{fs // 100}-{seed}"
        yield _case(stem, f"pick-{rule}", "decimation", fs, y, {"aliasing_detected": True}, rms_dbfs=level)
        g = math.gcd(fs_in, fs)
        yield _case(f"filtered-{stem}", "scipy-resample_poly", "filtered-decimation", fs,
                    sps.resample_poly(x, fs // g, fs_in // g)[:y.size], {"aliasing_detected": False}, rms_dbfs=level)
    for j, (fs, step_hz) in enumerate(((44100, 300.0), (48000, 600.0))):
        if quick and j:
            break
        sub = np.random.default_rng([seed, 21000 + j])
        n = int(seconds * fs)
        t = np.arange(n) / fs
        x = np.zeros(n)
        for m in sub.choice(np.arange(1, 9), size=3, replace=False):
            f0 = m * step_hz
            kmax = int(0.45 * fs // f0)
            for k in range(1, kmax + 1):
                x += np.sin(2 * math.pi * k * f0 * t + sub.uniform(0, 2 * math.pi)) / k ** 1.5
        x = x / np.sqrt(np.mean(x ** 2)) + 10 ** (-sub.uniform(40, 60) / 20) * pink(n, sub)
        yield _case(f"native-steady-{int(step_hz)}-{fs // 100}-{seed}", "native-steady", "native", fs, x,
                    {"aliasing_detected": False}, rms_dbfs=sub.uniform(-30, -10))


# ---------------------------------------------------------------- picking and 2:1 dropping on varied masters
#: sample picking (48 -> 44.1 and 96 -> 88.2 kHz) and unfiltered 2:1 decimation of tonal material on masters that
#: vary what the earlier blocks keep fixed: channel count (mono, stereo, 5.1 with a low-passed LFE and quiet
#: surrounds), length (3 to 10 s), level, and the picking rule: ``floor`` (truncation: the input sample at or
#: before the output instant), ``round`` (the nearest sample), ``lengths`` (the nearest sample on a grid whose
#: step is taken from the two lengths, (N_in - 1)/(N_out - 1), as a quick script would), ``drop2`` (every 2nd
#: sample kept).  Each with its band-limited twin (resample_poly, False); then native masters of the same kinds
#: (False).  Entries: (fs_in, fs_out, rule, material, channels, seconds).
VARIED_PICKS = ((48000, 44100, "floor", "tonal", 2, 10.0), (48000, 44100, "round", "mix", 2, 5.0),
                (48000, 44100, "floor", "speech", 1, 3.0), (48000, 44100, "round", "tonal", 6, 10.0),
                (48000, 44100, "lengths", "mix", 2, 10.0), (48000, 44100, "floor", "synth", 2, 4.0),
                (96000, 88200, "floor", "tonal", 2, 10.0), (96000, 88200, "round", "synth", 2, 5.0),
                (96000, 88200, "round", "mix", 6, 8.0), (96000, 88200, "lengths", "tonal", 1, 10.0),
                (96000, 88200, "floor", "speech", 2, 3.0), (96000, 88200, "floor", "mix", 2, 10.0),
                (88200, 44100, "drop2", "tonal", 2, 10.0), (96000, 48000, "drop2", "tonal", 6, 6.0),
                (96000, 48000, "drop2", "tonal", 1, 3.0), (88200, 44100, "drop2", "tonal", 2, 5.0))
VARIED_NATIVE = ((44100, "mix", 2, 5.0), (88200, "tonal", 6, 8.0), (44100, "speech", 1, 3.0), (48000, "tonal", 2, 10.0),
                 (88200, "mix", 2, 10.0), (48000, "synth", 6, 6.0))


def pick_frames(x: np.ndarray, fs_in: int, fs_out: int, rule: str) -> np.ndarray:
    """Rate change of a ``(frames, channels)`` array with no filter (see :data:`VARIED_PICKS` for the rules)."""
    n_in = x.shape[0]
    if rule.startswith("drop"):                 # "drop2", "drop3": keep every 2nd or 3rd sample
        return x[::int(rule[4:])]
    n_out = int((n_in - 2) * fs_out // fs_in)
    num = np.arange(n_out, dtype=np.int64) * fs_in
    if rule == "floor":
        idx = num // fs_out
    elif rule == "round":
        idx = (2 * num + fs_out) // (2 * fs_out)
    elif rule == "lengths":
        idx = np.round(np.arange(n_out) * ((n_in - 1) / (n_out - 1))).astype(np.int64)
    else:
        raise ValueError(rule)
    return x[np.minimum(idx, n_in - 1)]


def _lowpass(x: np.ndarray, fs: int, hz: float) -> np.ndarray:
    return sps.sosfiltfilt(sps.butter(4, hz, fs=fs, output="sos"), x)


def master_channels(kind: str, channels: int, seconds: float, fs: int, rng) -> np.ndarray:
    """A ``(frames, channels)`` master: mono is one material; stereo pans two materials of ``kind`` across L and
    R; 5.1 adds a centre (speech-like or the same kind), an LFE low-passed at 120 Hz, and surrounds holding a
    quiet delayed copy of the front and a pink noise bed."""
    a = _dense_material(kind, seconds, fs, rng)
    if channels == 1:
        return a[:, None]
    b = _dense_material(kind, seconds, fs, rng)
    n = min(a.size, b.size)
    a, b = a[:n], b[:n]
    left, right = a + 0.4 * b, 0.4 * a + b
    if channels == 2:
        return np.stack([left, right], axis=1)
    c = _dense_material("speech" if rng.random() < 0.5 else kind, seconds, fs, rng)[:n]
    lfe = _lowpass(a + b, fs, 120.0)
    d = int(rng.uniform(0.015, 0.04) * fs)
    ls = 0.15 * np.concatenate([np.zeros(d), left[:n - d]]) + 0.03 * pink(n, rng)
    rs = 0.15 * np.concatenate([np.zeros(d), right[:n - d]]) + 0.03 * pink(n, rng)
    return np.stack([left, right, c, lfe, ls, rs], axis=1)


def _case_frames(name, family, group, fs, x, expect, rms_dbfs):
    x = set_rms(np.asarray(x, dtype=float), rms_dbfs)
    labels = {1: None, 2: ["L", "R"], 6: ["L", "R", "C", "LFE", "Ls", "Rs"]}[x.shape[1]]
    return Case(name=name, set=SET, family=family, group=group, rate_hz=int(fs), audio=np.clip(x, -1.0, 1.0),
                expect=expect, channel_labels=labels)


def _with_twin(stem, fam, fs_in, fs, x, y, level):
    """The unfiltered rate change ``y`` of ``x`` (group ``decimation``, folded) and its resample_poly twin cut to
    the same length (group ``filtered-decimation``, not folded), both at ``level`` dBFS RMS."""
    yield _case_frames(stem, fam, "decimation", fs, y, {"aliasing_detected": True}, level)
    g = math.gcd(fs_in, fs)
    twin = sps.resample_poly(x, fs // g, fs_in // g, axis=0)[:y.shape[0]]
    yield _case_frames(f"filtered-{stem}", "scipy-resample_poly", "filtered-decimation", fs, twin,
                       {"aliasing_detected": False}, level)


def varied_pick_cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """The cases of :data:`VARIED_PICKS` and :data:`VARIED_NATIVE` (own random streams)."""
    if quick:
        return
    for j, (fs_in, fs, rule, kind, ch, seconds) in enumerate(VARIED_PICKS):
        sub = np.random.default_rng([seed, 22000 + j])
        x = master_channels(kind, ch, seconds, fs_in, sub)
        level = sub.uniform(-30, -8)
        y = pick_frames(x, fs_in, fs, rule)
        fam = "drop-2" if rule == "drop2" else f"pick-{rule}"
        stem = f"varied-{fam}-{kind}-{ch}ch-{fs_in // 100}-{fs // 100}-{seed}-{j}"
        yield from _with_twin(stem, fam, fs_in, fs, x, y, level)
    for j, (fs, kind, ch, seconds) in enumerate(VARIED_NATIVE):
        sub = np.random.default_rng([seed, 23000 + j])
        x = master_channels(kind, ch, seconds, fs, sub)
        group = "speech" if kind == "speech" else "native"
        yield _case_frames(f"varied-native-{kind}-{ch}ch-{fs // 100}-{seed}-{j}", f"native-{kind}", group, fs, x,
                           {"aliasing_detected": False}, sub.uniform(-30, -8))


# ---------------------------------------------------------------- picking and interpolating rules as naive converters write them
#: rate changes without a filter written the ways a quick converter is: the read position n*fs_in/fs_out taken by
#: ``round`` (nearest sample), ``floor`` (truncation), ``ceil``, ``offset`` (truncation after a random start
#: phase), ``dda64`` (the position accumulated in double precision, step fs_in/fs_out as a float, rounded),
#: ``dda32`` (accumulated in single precision, truncated: the step is rounded to the accumulator's grid, which
#: coarsens as the position grows), ``fixed16`` (a 16.16 fixed-point accumulator: step round(65536*fs_in/fs_out),
#: truncated), ``linear`` (linear interpolation between the two neighbours at the exact position) and
#: ``linear-dda32`` (linear interpolation at a single-precision accumulated position).  Each with its band-limited
#: twin (resample_poly, False).  Entries: (fs_in, fs_out, rule, material, channels, seconds).
RULE_PICKS = ((48000, 44100, "round", "tonal", 2, 10.0), (48000, 44100, "ceil", "synth", 2, 8.0),
              (48000, 44100, "dda32", "tonal", 2, 10.0), (48000, 44100, "dda64", "tonal", 1, 10.0),
              (48000, 44100, "linear", "mix", 2, 10.0), (48000, 44100, "offset", "synth", 1, 8.0),
              (48000, 44100, "fixed16", "tonal", 1, 10.0), (48000, 44100, "linear-dda32", "tonal", 1, 10.0),
              (96000, 88200, "round", "synth", 2, 10.0), (96000, 88200, "dda32", "mix", 2, 10.0),
              (96000, 88200, "linear", "tonal", 2, 10.0), (96000, 88200, "floor", "tonal", 1, 8.0),
              (44100, 32000, "linear", "tonal", 2, 10.0), (44100, 32000, "linear", "synth", 1, 10.0),
              (44100, 32000, "round", "synth", 1, 10.0), (44100, 32000, "dda32", "tonal", 2, 10.0),
              (48000, 32000, "linear", "tonal", 2, 10.0), (48000, 32000, "linear", "synth", 1, 8.0))


def rule_positions(n_in: int, fs_in: int, fs_out: int, rule: str, rng) -> tuple:
    """``(index, fraction)``: the input sample each output sample starts from and the fraction towards the next
    (0 for the picking rules), as the converter of ``rule`` computes them (see :data:`RULE_PICKS`)."""
    n_out = int((n_in - 2) * fs_out // fs_in)
    n = np.arange(n_out, dtype=np.int64)
    num = n * fs_in
    zero = np.zeros(n_out)
    if rule == "round":
        return (2 * num + fs_out) // (2 * fs_out), zero
    if rule == "floor":
        return num // fs_out, zero
    if rule == "ceil":
        return -((-num) // fs_out), zero
    if rule == "offset":
        return np.floor(n * (fs_in / fs_out) + rng.uniform(0.0, 1.0)).astype(np.int64), zero
    if rule == "fixed16":
        step = int(round(65536 * fs_in / fs_out))
        return (n * step) >> 16, zero
    if rule in ("dda64", "dda32", "linear-dda32"):
        dtype = np.float64 if rule == "dda64" else np.float32
        step = np.full(max(n_out - 1, 0), fs_in / fs_out, dtype=dtype)
        # np.add.accumulate adds in order, rounding to the dtype at every step, as a running sum in a loop does
        pos = np.concatenate([np.zeros(1, dtype=dtype), np.add.accumulate(step, dtype=dtype)]).astype(np.float64)
        if rule == "dda64":
            return np.floor(pos + 0.5).astype(np.int64), zero
        i0 = np.floor(pos).astype(np.int64)
        return i0, (pos - i0 if rule == "linear-dda32" else zero)
    if rule == "linear":
        i0 = num // fs_out
        return i0, (num - i0 * fs_out) / fs_out
    raise ValueError(rule)


def rule_convert(x: np.ndarray, fs_in: int, fs_out: int, rule: str, rng) -> np.ndarray:
    """Rate change of a ``(frames, channels)`` array with no filter by ``rule`` (:func:`rule_positions`)."""
    idx, frac = rule_positions(x.shape[0], fs_in, fs_out, rule, rng)
    end = int(np.searchsorted(idx, x.shape[0] - 1))   # a converter stops where its read position leaves the input
    idx, frac = idx[:end], frac[:end]
    return x[idx] * (1.0 - frac[:, None]) + x[idx + 1] * frac[:, None]


def rule_pick_cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """The cases of :data:`RULE_PICKS` (own random streams), each with its resample_poly twin."""
    todo = RULE_PICKS[:3] if quick else RULE_PICKS
    for j, (fs_in, fs, rule, kind, ch, seconds) in enumerate(todo):
        sub = np.random.default_rng([seed, 24000 + j])
        x = master_channels(kind, ch, seconds, fs_in, sub)
        level = sub.uniform(-30, -8)
        y = rule_convert(x, fs_in, fs, rule, sub)
        fam = f"pick-{rule}" if not rule.startswith("linear") else f"interp-{rule}"
        stem = f"rule-{fam}-{kind}-{ch}ch-{fs_in // 100}-{fs // 100}-{seed}-{j}"
        yield from _with_twin(stem, fam, fs_in, fs, x, y, level)


# ---------------------------------------------------------------- modulation voices: ring, FM, PWM, swept sync
#: voices whose partials are not one harmonic series: the product of two oscillators (ring modulation: lines at
#: k*f1 +- m*f2), two-operator FM (lines at fc +- k*fm, reaching as far as the index takes them), pulse-width
#: modulation and hard sync with a swept slave ratio.  Each is rendered twice from the same random stream:
#: ``naive`` (evaluated at the file's own sample instants: every partial above Nyquist folds) and band-limited
#: (rendered at 8 times the rate by the same code, every bin at or above the file's Nyquist zeroed in the FFT
#: domain, and brought down to the file rate: exactly the partials below Nyquist, none folded).  Entries:
#: (kind, rate, number of voices); kinds: ``ring-saw-sine``, ``ring-square-sine``, ``ring-saw-saw``,
#: ``ring-pulse-square``, ``fm-<c>:<m>`` (carrier to modulator ratio), ``pwm``, ``sync-sweep``.
MODULATION_VOICES = (("ring-saw-sine", 48000, 1), ("ring-square-sine", 44100, 2), ("ring-saw-saw", 48000, 1),
                     ("ring-pulse-square", 44100, 1), ("ring-saw-sine", 96000, 2), ("ring-saw-square", 48000, 2),
                     ("fm-1:1", 48000, 1), ("fm-1:2", 44100, 2), ("fm-2:3", 48000, 1), ("fm-1:1.41", 48000, 1),
                     ("fm-1:1", 44100, 2), ("fm-1:3", 96000, 2), ("pwm", 48000, 2), ("pwm", 44100, 1),
                     ("sync-sweep", 48000, 1), ("sync-sweep", 44100, 2))
MODULATION_OVERSAMPLING = 8
#: the quick slice: naive saw and square times a sine, two-operator FM 1:2, PWM, swept sync
MODULATION_QUICK = (0, 1, 7, 12, 14)
#: a naive rendering is labelled folded (and yielded) only when the oversampled rendering holds at least this
#: much of its power above the file's Nyquist, dB (house choice: an FM voice whose sidebands die out below
#: Nyquist folds nothing measurable; ring, PWM and sync voices always pass)
MODULATION_MIN_FOLDED_DB = -30.0


def _osc(kind: str, ph: np.ndarray, duty=0.5) -> np.ndarray:
    """Naive oscillator at phase ``ph`` (cycles): ``sine`` or a discontinuous shape."""
    if kind == "sine":
        return np.sin(2 * math.pi * ph)
    return naive_shape(kind, np.mod(ph, 1.0), duty, 1.0)


def modulation_voice(kind: str, seconds: float, fs: int, over: int, state: int) -> np.ndarray:
    """One voice of modulation synthesis (notes with ADSR envelopes and vibrato) evaluated at ``fs * over``
    samples per second; the random stream ``state`` fixes every choice, so the naive (over = 1) and the
    oversampled renderings hold the same notes."""
    rng = np.random.default_rng(state)
    rate = fs * over
    n_total = int(seconds * fs) * over
    out = np.zeros(n_total)
    if kind.startswith("fm-"):
        c_ratio, m_ratio = (float(v) for v in kind[3:].split(":"))
        lo, hi = 500.0, 2000.0
    else:
        lo, hi = (150.0, 900.0) if kind.startswith("ring") else (110.0, 700.0)
    notes = voices(seconds, fs, rng, 1, lo, hi)
    for pos, length, f0 in notes:
        pos, length = pos * over, length * over
        f_inst = pitch_track(f0, length, rate, rng)
        env = adsr(length, rate, rng)
        ph = rng.uniform(0, 1) + np.cumsum(f_inst) / rate
        t = np.arange(length) / rate
        if kind.startswith("ring"):
            a, b = kind.split("-")[1:]
            ratio = rng.uniform(1.2, 3.7)   # the second oscillator, inharmonic to the first
            v = _osc(a, ph, rng.uniform(0.15, 0.4)) * _osc(b, rng.uniform(0, 1) + ratio * ph)
        elif kind.startswith("fm-"):
            index = rng.uniform(5.0, 12.0) * (0.35 + 0.65 * env)   # brightness follows the envelope
            fc = c_ratio * ph
            fmod = m_ratio * ph + rng.uniform(0, 1)
            v = np.sin(2 * math.pi * fc + index * np.sin(2 * math.pi * fmod))
        elif kind == "pwm":
            duty = 0.5 + rng.uniform(0.25, 0.4) * np.sin(2 * math.pi * rng.uniform(0.3, 2.0) * t + rng.uniform(0, 6))
            v = np.where(np.mod(ph, 1.0) < duty, 1.0, -1.0) - (2.0 * duty - 1.0)
        elif kind == "sync-sweep":
            s = rng.uniform(1.2, 2.0) + rng.uniform(0.8, 2.5) * (0.5 - 0.5 * np.cos(2 * math.pi * rng.uniform(0.2, 1.0) * t))
            frac = np.mod(ph, 1.0)
            v = 2.0 * np.mod(frac * s, 1.0) - 1.0
        else:
            raise ValueError(kind)
        out[pos:pos + length] += rng.uniform(0.5, 1.0) * env * v
    return out


def band_limit_down(y: np.ndarray, over: int) -> np.ndarray:
    """``y`` at ``over`` times the target rate to the target rate: bins at or above the target Nyquist zeroed
    in the FFT domain, the rest inverse-transformed at the target length (numpy only)."""
    n = y.size // over
    spec = np.fft.rfft(y[:n * over])
    keep = spec[:n // 2 + 1].copy()
    keep[n // 2:] = 0.0
    return np.fft.irfft(keep, n) / over


def modulation_cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """The voices of :data:`MODULATION_VOICES`, naive (group ``naive-synth``, True; only where the voice folds at
    least :data:`MODULATION_MIN_FOLDED_DB`) and band-limited (group ``band-limited-synth``, False), 6 s each, over a quiet noise bed, at an RMS level of -30..-8 dBFS."""
    seconds = 6.0
    for j in (MODULATION_QUICK if quick else range(len(MODULATION_VOICES))):
        kind, fs, n_voices = MODULATION_VOICES[j]
        sub = np.random.default_rng([seed, 26000 + j])
        states = [int(sub.integers(1 << 62)) for _ in range(n_voices)]
        x = sum(modulation_voice(kind, seconds, fs, 1, s) for s in states)
        y_over = sum(modulation_voice(kind, seconds, fs, MODULATION_OVERSAMPLING, s) for s in states)
        y = band_limit_down(y_over, MODULATION_OVERSAMPLING)
        # what the naive rendering folds: the oversampled rendering's power above the file's Nyquist
        spec = np.abs(np.fft.rfft(y_over)) ** 2
        above_db = 10 * math.log10(max(float(spec[spec.size // MODULATION_OVERSAMPLING:].sum()), 1e-300)
                                   / float(spec.sum()))
        del y_over, spec
        bed = 10 ** (-sub.uniform(45, 65) / 20) * float(np.sqrt(np.mean(y ** 2))) * pink(x.size, sub)
        level = sub.uniform(-30, -8)
        fam = kind.split(":")[0] if kind.startswith("fm-") else kind
        stem = f"mod-{kind.replace(':', 'to').replace('.', 'p')}-{n_voices}v-{fs // 100}-{seed}-{j}"
        if above_db >= MODULATION_MIN_FOLDED_DB:
            yield _case(stem, f"naive-{fam}", "naive-synth", fs, x + bed, {"aliasing_detected": True},
                        rms_dbfs=level)
        yield _case(f"band-limited-{stem}", f"oversampled-{fam}", "band-limited-synth", fs, y + bed,
                    {"aliasing_detected": False}, rms_dbfs=level)


# ---------------------------------------------------------------- mono dropping of tonal music
#: the held-back misses' shape, reproduced: mono tonal music with vibrato and a noise bed, brought down without a
#: filter by keeping every 2nd or 3rd sample (no drop pattern exists for a whole ratio: only the folded partials
#: are left) or by picking samples from 48 to 44.1 kHz; each with its resample_poly twin.  Entries:
#: (fs_in, fs_out, rule, seconds); rules as :func:`pick_frames` (``drop2``, ``drop3``, ``round``, ``floor``).
MONO_DROPS = ((96000, 48000, "drop2", 8.0), (88200, 44100, "drop2", 6.0), (144000, 48000, "drop3", 8.0),
              (132300, 44100, "drop3", 6.0), (48000, 44100, "round", 8.0), (48000, 44100, "floor", 5.0))


def mono_drop_cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """The cases of :data:`MONO_DROPS` (own random streams): group ``decimation`` (True) and
    ``filtered-decimation`` (False)."""
    for j, (fs_in, fs, rule, seconds) in enumerate(MONO_DROPS[:2] if quick else MONO_DROPS):
        sub = np.random.default_rng([seed, 27000 + j])
        x = _dense_material("tonal", seconds, fs_in, sub)[:, None]
        level = sub.uniform(-30, -8)
        y = pick_frames(x, fs_in, fs, rule)
        fam = f"drop-{rule[-1]}" if rule.startswith("drop") else f"pick-{rule}"
        stem = f"mono-{fam}-tonal-{fs_in // 100}-{fs // 100}-{seed}-{j}"
        yield from _with_twin(stem, fam, fs_in, fs, x, y, level)


# ---------------------------------------------------------------- two-operator FM, ring modulation, crushed holds
#: naive two-operator FM voices as a quick synthesiser renders them: a sine carrier at fc (200 Hz - 3 kHz, on a
#: scale, slight vibrato) phase-modulated by a sine at r*fc, with an index that follows the note's envelope
#: (peak 1-8), sin(2 pi fc t + I(t) sin(2 pi r fc t)); its lines sit at fc + k*r*fc with amplitudes J_k(I), and the
#: sidebands past Nyquist fold to fs - (fc + k*r*fc).  Entries: (rate, ratio r, voices, carrier range Hz, peak
#: index range).  Integer ratios give harmonic spectra, the others a line grid offset from every harmonic series.
FM_VOICES = ((44100, 1.0, 1, (800.0, 3000.0), (4.0, 8.0)), (48000, 2.0, 2, (500.0, 2500.0), (3.0, 7.0)),
             (48000, 1.41, 1, (1000.0, 3000.0), (3.0, 8.0)), (44100, 3.5, 1, (600.0, 2000.0), (2.0, 6.0)),
             (48000, 0.71, 2, (1500.0, 3000.0), (5.0, 8.0)), (44100, 2.76, 1, (700.0, 2500.0), (2.5, 6.0)),
             (48000, 3.0, 1, (800.0, 2500.0), (3.0, 7.0)), (44100, 1.73, 2, (1000.0, 3000.0), (3.0, 8.0)),
             (48000, 5.2, 1, (400.0, 1500.0), (1.0, 4.0)), (44100, 0.5, 1, (1500.0, 3000.0), (6.0, 8.0)),
             (48000, 2.41, 1, (200.0, 1200.0), (4.0, 8.0)), (44100, 7.0, 1, (300.0, 1000.0), (1.5, 4.0)))
#: naive ring modulators: the product of two oscillators at f1 and r*f1 (lines at k*f1 +- m*r*f1, folding past
#: Nyquist); entries (rate, first oscillator, second oscillator, voices, f1 range Hz)
RING_VOICES = ((48000, "saw", "sine", 1, (600.0, 2500.0)), (44100, "square", "saw", 1, (300.0, 1200.0)),
               (48000, "pulse", "sine", 2, (400.0, 1500.0)), (44100, "saw", "saw", 2, (200.0, 900.0)))
#: crushed holds: a sample-rate reducer that holds the input sample at every step of h output samples (h not a
#: whole number: a phase accumulator takes a new input sample whenever it passes a multiple of h), optionally
#: with its amplitude quantised to b bits; entries (rate, h, bits or 0, material)
CRUSH_HOLDS = ((48000, 2.37, 0, "tonal"), (44100, 3.61, 12, "synth"), (48000, 4.4, 0, "mix"),
               (44100, 2.83, 10, "tonal"), (48000, 5.13, 0, "synth"), (44100, 1.67, 0, "mix"))
#: the quick slice of these blocks (indices into FM_VOICES, RING_VOICES, CRUSH_HOLDS)
FM_QUICK, RING_QUICK, CRUSH_QUICK = (2, 3), (0,), (0,)


def _voice_notes(f_range, seconds: float, fs: int, over: int, state: int, tone) -> np.ndarray:
    """One voice's notes (:func:`voices`, fundamentals in ``f_range``) at ``fs * over`` samples per second, each
    ``tone(phase, envelope, rng)`` under its envelope with a random level; the random stream ``state`` fixes every
    choice, so the naive (over = 1) and oversampled renderings hold the same notes."""
    rng = np.random.default_rng(state)
    rate = fs * over
    out = np.zeros(int(seconds * fs) * over)
    for pos, length, f0 in voices(seconds, fs, rng, 1, *f_range):
        pos, length = pos * over, length * over
        f_inst = pitch_track(f0, length, rate, rng)
        env = adsr(length, rate, rng)
        ph = rng.uniform(0, 1) + np.cumsum(f_inst) / rate
        v = tone(ph, env, rng)
        out[pos:pos + length] += rng.uniform(0.5, 1.0) * env * v
    return out


def fm_voice(ratio: float, fc_range, index_range, seconds: float, fs: int, over: int, state: int) -> np.ndarray:
    """One voice of naive two-operator FM (see :data:`FM_VOICES`) at ``fs * over`` samples per second; the
    random stream ``state`` fixes every choice, so the naive (over = 1) and oversampled renderings hold the same
    notes."""
    def tone(ph, env, rng):
        index = rng.uniform(*index_range) * (0.3 + 0.7 * env)
        return np.sin(2 * math.pi * ph + index * np.sin(2 * math.pi * (ratio * ph + rng.uniform(0, 1))))
    return _voice_notes(fc_range, seconds, fs, over, state, tone)


def ring_voice(a: str, b: str, f_range, seconds: float, fs: int, over: int, state: int) -> np.ndarray:
    """One voice of a naive ring modulator (see :data:`RING_VOICES`) at ``fs * over`` samples per second."""
    def tone(ph, env, rng):
        ratio = rng.uniform(1.15, 3.3)
        return _osc(a, ph, rng.uniform(0.15, 0.4)) * _osc(b, rng.uniform(0, 1) + ratio * ph)
    return _voice_notes(f_range, seconds, fs, over, state, tone)


def crush_hold(x: np.ndarray, h: float, bits: int = 0) -> np.ndarray:
    """A sample-rate reducer: output sample n holds input sample floor(floor(n/h)*h) (a new input sample each
    time a phase accumulator passes a multiple of h); ``bits``: amplitude quantised to that many bits (0: not)."""
    idx = np.floor(np.floor(np.arange(x.size) / h) * h).astype(np.int64)
    y = x[np.minimum(idx, x.size - 1)]
    if bits:
        q = 2.0 ** (bits - 1)
        y = np.round(y * q) / q
    return y


def fm_ring_crush_cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """The voices of :data:`FM_VOICES` and :data:`RING_VOICES`, naive (``naive-synth``, True, only where the 8x
    rendering holds at least :data:`MODULATION_MIN_FOLDED_DB` of its power above the file's Nyquist) with two
    band-limited twins each (``band-limited-synth``, False): rendered at 8x and cut at Nyquist in the FFT domain
    (``oversampled-fm``, ``oversampled-ring``), and rendered at 8x and brought down by resample_poly, whose
    transition band straddles Nyquist (``oversampled-fm-poly``, ``oversampled-ring-poly``); then the crushed holds
    of :data:`CRUSH_HOLDS` (``decimation``, True, family ``crush-hold``) with twins band-limited to the held rate's
    Nyquist in the FFT domain and quantised alike (``filtered-decimation``, False, family ``fft-band-limit``).
    6 s each over a quiet noise bed, RMS -30..-8 dBFS; own random streams."""
    seconds = 6.0
    over = MODULATION_OVERSAMPLING
    plans = [("fm", j) for j in (FM_QUICK if quick else range(len(FM_VOICES)))]
    plans += [("ring", j) for j in (RING_QUICK if quick else range(len(RING_VOICES)))]
    for kind, j in plans:
        if kind == "fm":
            fs, ratio, n_voices, fc_range, i_range = FM_VOICES[j]
            sub = np.random.default_rng([seed, 28000 + j])
            make = lambda o, s: fm_voice(ratio, fc_range, i_range, seconds, fs, o, s)  # noqa: E731
            stem = f"fm-{str(ratio).replace('.', 'p')}-{n_voices}v-{fs // 100}-{seed}-{j}"
        else:
            fs, a, b, n_voices, f_range = RING_VOICES[j]
            sub = np.random.default_rng([seed, 29000 + j])
            make = lambda o, s: ring_voice(a, b, f_range, seconds, fs, o, s)  # noqa: E731
            stem = f"ring-{a}-{b}-{n_voices}v-{fs // 100}-{seed}-{j}"
        states = [int(sub.integers(1 << 62)) for _ in range(n_voices)]
        x = sum(make(1, s) for s in states)
        y_over = sum(make(over, s) for s in states)
        y = band_limit_down(y_over, over)
        y_poly = sps.resample_poly(y_over, 1, over)[:x.size]
        spec = np.abs(np.fft.rfft(y_over)) ** 2
        above_db = 10 * math.log10(max(float(spec[spec.size // over:].sum()), 1e-300) / float(spec.sum()))
        del y_over, spec
        bed = 10 ** (-sub.uniform(45, 65) / 20) * float(np.sqrt(np.mean(y ** 2))) * pink(x.size, sub)
        level = sub.uniform(-30, -8)
        if above_db >= MODULATION_MIN_FOLDED_DB:
            yield _case(stem, f"naive-{kind}", "naive-synth", fs, x + bed, {"aliasing_detected": True},
                        rms_dbfs=level)
        yield _case(f"band-limited-{stem}", f"oversampled-{kind}", "band-limited-synth", fs, y + bed,
                    {"aliasing_detected": False}, rms_dbfs=level)
        yield _case(f"poly-twin-{stem}", f"oversampled-{kind}-poly", "band-limited-synth", fs, y_poly + bed,
                    {"aliasing_detected": False}, rms_dbfs=level)
    for j in (CRUSH_QUICK if quick else range(len(CRUSH_HOLDS))):
        fs, h, bits, material = CRUSH_HOLDS[j]
        sub = np.random.default_rng([seed, 30000 + j])
        x = _dense_material(material, seconds, fs, sub)
        x = x / float(np.max(np.abs(x)))
        level = sub.uniform(-30, -8)
        g = 10 ** (level / 20) / float(np.sqrt(np.mean(x ** 2)))
        x = x * min(g, 0.95)
        # the twin: the same programme with nothing above the held rate's Nyquist, quantised alike
        spec = np.fft.rfft(x)
        spec[int(spec.size / h):] = 0.0
        twin = np.fft.irfft(spec, x.size)
        if bits:
            q = 2.0 ** (bits - 1)
            twin = np.round(twin * q) / q
        stem = f"crush-hold-{str(h).replace('.', 'p')}-{bits}b-{material}-{fs // 100}-{seed}-{j}"
        yield _case(stem, "crush-hold", "decimation", fs, crush_hold(x, h, bits), {"aliasing_detected": True})
        yield _case(f"band-limited-{stem}", "fft-band-limit", "filtered-decimation", fs, twin,
                    {"aliasing_detected": False})


# ---------------------------------------------------------------- additive ring modulators at high rates
#: a sawtooth at f0 (vibrato, envelope) times a sine carrier at fc of its own (not tied to f0): the product's lines
#: sit at k*f0 - fc and k*f0 + fc.  Rendered naive (the product evaluated per sample: the sawtooth's partials past
#: Nyquist fold) and additive (each sideband k*f0 -+ fc summed only where it stays below 0.99 of Nyquist over the
#: whole note: band-limited).  At 88.2 and 96 kHz a note's harmonic grid and its sideband grid (offset fc modulo
#: f0) sit where the note's fold comb (offset fs modulo f0) can land, which a fold test must not read as folding.
#: Entries: (rate, voices, f0 range Hz, carrier range Hz or ("ratio", carrier-to-note ratios): a carrier keyed to
#: the note, whose sidebands then fall on the harmonics of f0 or midway between them), and optionally the dry
#: share mixed back in (a ring modulator's dry/wet control: the sawtooth's own harmonics beside the sidebands; with
#: a carrier at an odd multiple of f0/2 the mix is a harmonic series of f0/2 whose even members dominate).
ADDITIVE_RINGS = ((96000, 2, (480.0, 1200.0), (300.0, 3000.0)), (88200, 2, (441.0, 1200.0), (300.0, 3000.0)),
                  (96000, 1, (600.0, 2000.0), (300.0, 3000.0)), (48000, 3, (240.0, 1200.0), (300.0, 3000.0)),
                  (88200, 1, (300.0, 900.0), (500.0, 2500.0)), (96000, 3, (300.0, 1000.0), (300.0, 3000.0)),
                  (96000, 2, (480.0, 1200.0), ("ratio", (0.5, 1.5, 2.5))),
                  (88200, 2, (441.0, 1200.0), ("ratio", (1.5, 2.5, 3.5))),
                  (96000, 1, (400.0, 1000.0), ("ratio", (1.0, 2.0, 3.0))),
                  (48000, 2, (300.0, 1200.0), ("ratio", (0.5, 1.5, 2.0))),
                  (96000, 2, (480.0, 1200.0), ("ratio", (0.5, 1.5)), 0.5),
                  (88200, 2, (441.0, 1200.0), ("ratio", (0.5, 1.5, 2.5)), 0.6),
                  (96000, 1, (300.0, 800.0), ("ratio", (0.5,)), 0.4),
                  (96000, 2, (480.0, 1200.0), (300.0, 3000.0), 0.5))
ADDITIVE_RING_QUICK = ()   # not in the quick slice (its bytes and the tests' time unchanged)


def additive_ring_voice(f_range, fc_range, seconds: float, fs: int, state: int, dry: float = 0.0):
    """One voice of sawtooth-times-sine ring modulation at ``fs``: ``(naive, additive)`` renderings of the same
    notes (see :data:`ADDITIVE_RINGS`).  The sawtooth 2 frac(ph) - 1 = -(2/pi) sum_k sin(2 pi k ph)/k; times
    sin(2 pi fc t) each partial gives (a_k/2) [cos(2 pi (k ph - fc t)) - cos(2 pi (k ph + fc t))], and the additive
    rendering keeps a sideband only while its instantaneous frequency stays below 0.99 of Nyquist."""
    rng = np.random.default_rng(state)
    n = int(seconds * fs)
    naive, addi = np.zeros(n), np.zeros(n)
    nyq = fs / 2.0
    for pos, length, f0 in voices(seconds, fs, rng, 1, *f_range):
        f_inst = pitch_track(f0, length, fs, rng)
        env = adsr(length, fs, rng)
        ph = rng.uniform(0, 1) + np.cumsum(f_inst) / fs
        if fc_range[0] == "ratio":   # a carrier keyed to the note at a fixed ratio (detuned by up to 1 %)
            fc = f0 * float(rng.choice(fc_range[1])) * rng.uniform(0.99, 1.01)
        else:
            fc = float(np.exp(rng.uniform(math.log(fc_range[0]), math.log(fc_range[1]))))
        t = np.arange(length) / fs
        carrier = np.exp(2j * math.pi * (fc * t + rng.uniform(0, 1)))
        gain = rng.uniform(0.5, 1.0) * env
        naive[pos:pos + length] += gain * (2.0 * np.mod(ph, 1.0) - 1.0) * (dry + (1.0 - dry) * carrier.imag)
        z1 = np.exp(2j * math.pi * np.mod(ph, 1.0))
        zk = z1.copy()
        f_hi = float(np.max(f_inst))
        y = np.zeros(length)
        k = 1
        while k * float(np.min(f_inst)) - fc < 0.99 * nyq:
            a = -(2.0 / math.pi) / k
            if dry and k * f_hi < 0.99 * nyq:
                y += dry * a * zk.imag
            if k * f_hi - fc < 0.99 * nyq and k * float(np.min(f_inst)) - fc > -0.99 * nyq:
                y += (1.0 - dry) * 0.5 * a * np.real(zk * np.conj(carrier))
            if k * f_hi + fc < 0.99 * nyq:
                y -= (1.0 - dry) * 0.5 * a * np.real(zk * carrier)
            zk *= z1
            k += 1
        addi[pos:pos + length] += gain * y
    return naive, addi


def additive_ring_cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """The voices of :data:`ADDITIVE_RINGS`: naive (group ``naive-synth``, family ``naive-ring-hi``, True, only where
    the naive rendering differs from the additive one by at least :data:`MODULATION_MIN_FOLDED_DB` of its power)
    and additive (group ``band-limited-synth``, family ``additive-ring``, False), 5 s each over a quiet noise bed,
    RMS -30..-8 dBFS, mono; own random streams."""
    seconds = 5.0
    for j in (ADDITIVE_RING_QUICK if quick else range(len(ADDITIVE_RINGS))):
        fs, n_voices, f_range, fc_range = ADDITIVE_RINGS[j][:4]
        dry = ADDITIVE_RINGS[j][4] if len(ADDITIVE_RINGS[j]) > 4 else 0.0
        sub = np.random.default_rng([seed, 31000 + j])
        states = [int(sub.integers(1 << 62)) for _ in range(n_voices)]
        pairs = [additive_ring_voice(f_range, fc_range, seconds, fs, s, dry) for s in states]
        x = sum(a for a, _b in pairs)
        y = sum(b for _a, b in pairs)
        fold_db = 10 * math.log10(max(float(np.sum((x - y) ** 2)), 1e-300) / max(float(np.sum(y ** 2)), 1e-300))
        bed = 10 ** (-sub.uniform(45, 65) / 20) * float(np.sqrt(np.mean(y ** 2))) * pink(x.size, sub)
        level = sub.uniform(-30, -8)
        stem = f"ring-add-{n_voices}v-{fs // 100}-{seed}-{j}"
        if fold_db >= MODULATION_MIN_FOLDED_DB:
            yield _case(f"naive-{stem}", "naive-ring-hi", "naive-synth", fs, x + bed, {"aliasing_detected": True},
                        rms_dbfs=level)
        yield _case(f"additive-{stem}", "additive-ring", "band-limited-synth", fs, y + bed,
                    {"aliasing_detected": False}, rms_dbfs=level)


# ---------------------------------------------------------------- polyphonic two-operator FM
#: several FM voices at once (as :data:`FM_VOICES`, but each note with its own modulator ratio and an index that
#: decays from its peak to 40 % of it, as a quick synthesiser's patch with an index envelope does): up to four grids
#: of different spacings overlap in a frame, so the strongest one carries a small share of the lines.  Entries:
#: (rate, voices, carrier range Hz, ratio range, peak index range).
POLY_FM_VOICES = ((48000, 4, (300.0, 2000.0), (1.3, 3.7), (2.0, 7.0)), (44100, 3, (300.0, 2000.0), (1.3, 3.7), (2.0, 7.0)),
                  (48000, 3, (600.0, 2000.0), (1.3, 3.7), (2.0, 7.0)), (44100, 4, (300.0, 1200.0), (1.3, 3.7), (2.0, 7.0)))
POLY_FM_QUICK = ()   # not in the quick slice (its bytes and the tests' time unchanged)


def poly_fm_voice(fc_range, ratio_range, index_range, seconds: float, fs: int, over: int, state: int) -> np.ndarray:
    """One voice of :data:`POLY_FM_VOICES` at ``fs * over`` samples per second (the random stream ``state`` fixes
    every choice, so the naive and the oversampled renderings hold the same notes)."""
    def tone(ph, env, rng):
        ratio = rng.uniform(*ratio_range)
        peak = rng.uniform(*index_range)
        decay_s = rng.uniform(0.4, 2.0)
        t = np.arange(ph.size) / (fs * over)
        index = peak * (0.4 + 0.6 * np.exp(-t / decay_s))
        return np.sin(2 * math.pi * ph + index * np.sin(2 * math.pi * (ratio * ph + rng.uniform(0, 1))))
    return _voice_notes(fc_range, seconds, fs, over, state, tone)


def poly_fm_cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """The voices of :data:`POLY_FM_VOICES`, naive (``naive-synth``, family ``naive-fm-poly``, True where the 8x
    rendering holds at least :data:`MODULATION_MIN_FOLDED_DB` of its power above Nyquist) and rendered at 8x and cut
    at Nyquist in the FFT domain (``band-limited-synth``, family ``oversampled-fm``, False); 5 s each over a quiet
    noise bed, RMS -30..-8 dBFS, mono; own random streams."""
    seconds = 5.0
    over = MODULATION_OVERSAMPLING
    for j in (POLY_FM_QUICK if quick else range(len(POLY_FM_VOICES))):
        fs, n_voices, fc_range, r_range, i_range = POLY_FM_VOICES[j]
        sub = np.random.default_rng([seed, 32000 + j])
        states = [int(sub.integers(1 << 62)) for _ in range(n_voices)]
        x = sum(poly_fm_voice(fc_range, r_range, i_range, seconds, fs, 1, s) for s in states)
        y_over = sum(poly_fm_voice(fc_range, r_range, i_range, seconds, fs, over, s) for s in states)
        y = band_limit_down(y_over, over)
        spec = np.abs(np.fft.rfft(y_over)) ** 2
        above_db = 10 * math.log10(max(float(spec[spec.size // over:].sum()), 1e-300) / float(spec.sum()))
        del y_over, spec
        bed = 10 ** (-sub.uniform(45, 65) / 20) * float(np.sqrt(np.mean(y ** 2))) * pink(x.size, sub)
        level = sub.uniform(-30, -8)
        stem = f"fm-poly-{n_voices}v-{fs // 100}-{seed}-{j}"
        if above_db >= MODULATION_MIN_FOLDED_DB:
            yield _case(f"naive-{stem}", "naive-fm-poly", "naive-synth", fs, x + bed, {"aliasing_detected": True},
                        rms_dbfs=level)
        yield _case(f"band-limited-{stem}", "oversampled-fm", "band-limited-synth", fs, y + bed,
                    {"aliasing_detected": False}, rms_dbfs=level)


# ---------------------------------------------------------------- memoryless nonlinearities at the file's rate
#: tonal voices (a sine with weaker 2nd and 3rd harmonics, vibrato, envelopes; 2-4 voices at once) through a
#: memoryless nonlinearity evaluated at the file's rate: a soft clipper tanh(d x) / tanh(d), a hard clipper
#: clip(d x, -1, 1) and a sine wave folder sin(pi/2 d x).  Each makes harmonics and intermodulation products of
#: the chord far above Nyquist, which fold to |fs - f| etc.  The twin evaluates the same notes at 16x the rate,
#: applies the same curve there and is cut at Nyquist in the FFT domain (what an oversampled processor delivers).
#: Entries: (rate, curve, voices, f0 range Hz at 48 kHz (scaled by rate / 48 kHz), drive range).
NONLINEAR_VOICES = ((44100, "hardclip", 3, (400.0, 2500.0), (4.0, 16.0)),
                    (48000, "tanh", 2, (500.0, 3000.0), (4.0, 20.0)),
                    (44100, "fold", 2, (300.0, 2500.0), (3.0, 9.0)),
                    (88200, "hardclip", 2, (400.0, 2500.0), (4.0, 16.0)),
                    (96000, "fold", 3, (300.0, 2500.0), (3.0, 9.0)),
                    (48000, "hardclip", 4, (300.0, 1500.0), (2.0, 10.0)),
                    (44100, "tanh", 3, (400.0, 2500.0), (5.0, 20.0)),
                    (48000, "fold", 4, (300.0, 2000.0), (2.0, 8.0)),
                    (88200, "fold", 2, (500.0, 3000.0), (3.0, 9.0)),
                    (96000, "tanh", 2, (400.0, 2500.0), (5.0, 20.0)))
NONLINEAR_OVERSAMPLING = 16
NONLINEAR_QUICK = ()   # not in the quick slice (its bytes and the tests' time unchanged)


def nonlinear_input(f_range, seconds: float, fs: int, over: int, state: int) -> np.ndarray:
    """One voice's notes at ``fs * over`` samples per second: a sine with its 2nd (0.2-0.6) and 3rd (0.1-0.4)
    harmonics; the random stream ``state`` fixes every choice (the naive and oversampled renderings match)."""
    def tone(ph, env, rng):
        a2, a3 = rng.uniform(0.2, 0.6), rng.uniform(0.1, 0.4)
        p = 2 * math.pi * ph
        return np.sin(p) + a2 * np.sin(2 * p + 0.7) + a3 * np.sin(3 * p + 1.9)
    return _voice_notes(f_range, seconds, fs, over, state, tone)


def nonlinear_curve(kind: str, x: np.ndarray, drive: float) -> np.ndarray:
    if kind == "tanh":
        return np.tanh(drive * x) / math.tanh(drive)
    if kind == "hardclip":
        return np.clip(drive * x, -1.0, 1.0)
    if kind == "fold":
        return np.sin(0.5 * math.pi * drive * x)
    raise ValueError(kind)


def nonlinear_cases(seed: int, quick: bool = False, entries=None) -> Iterator[Case]:
    """The entries of :data:`NONLINEAR_VOICES`: the curve at the file's rate (group ``naive-nonlinear``, family
    ``naive-<curve>``, True where the folded share, the energy of naive minus twin, is at least
    :data:`MODULATION_MIN_FOLDED_DB` of the twin's) and the oversampled twin (group ``oversampled-nonlinear``,
    family ``oversampled-<curve>``, False); 5 s each, a quiet noise bed in the source (before the curve), RMS -30..-8
    dBFS, mono; own random streams.  ``entries``: only those indices of :data:`NONLINEAR_VOICES`."""
    seconds = 5.0
    over = NONLINEAR_OVERSAMPLING
    for j in (entries if entries is not None else NONLINEAR_QUICK if quick else range(len(NONLINEAR_VOICES))):
        fs, kind, n_voices, f_range, d_range = NONLINEAR_VOICES[j]
        sub = np.random.default_rng([seed, 33000 + j])
        f_range = (f_range[0] * fs / 48000.0, f_range[1] * fs / 48000.0)
        states = [int(sub.integers(1 << 62)) for _ in range(n_voices)]
        drive = float(sub.uniform(*d_range))
        x = sum(nonlinear_input(f_range, seconds, fs, 1, s) for s in states)
        x_over = sum(nonlinear_input(f_range, seconds, fs, over, s) for s in states)
        # a quiet noise bed in the source, before the curve (band-limited to the file's Nyquist at 16x, so the
        # naive rendering reads its every 16th sample)
        spec = np.fft.rfft(pink(x_over.size, sub))
        spec[x.size // 2:] = 0.0
        bed = np.fft.irfft(spec, x_over.size)
        bed *= 10 ** (-sub.uniform(45, 65) / 20) * float(np.sqrt(np.mean(x ** 2))) / float(np.sqrt(np.mean(bed ** 2)))
        x, x_over = x + bed[::over], x_over + bed
        del spec, bed
        scale = 1.0 / max(float(np.max(np.abs(x))), 1e-12)
        naive = nonlinear_curve(kind, scale * x, drive)
        twin = band_limit_down(nonlinear_curve(kind, scale * x_over, drive), over)
        del x_over
        fold_db = 10 * math.log10(max(float(np.sum((naive - twin) ** 2)), 1e-300)
                                  / max(float(np.sum(twin ** 2)), 1e-300))
        level = sub.uniform(-30, -8)
        stem = f"nl-{kind}-{n_voices}v-{fs // 100}-{seed}-{j}"
        if fold_db >= MODULATION_MIN_FOLDED_DB:
            yield _case(f"naive-{stem}", f"naive-{kind}", "naive-nonlinear", fs, naive,
                        {"aliasing_detected": True}, rms_dbfs=level)
        yield _case(f"oversampled-{stem}", f"oversampled-{kind}", "oversampled-nonlinear", fs, twin,
                    {"aliasing_detected": False}, rms_dbfs=level)
