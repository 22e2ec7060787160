"""Ground-truth corpus for the sampling-integrity detectors (imaging, aliasing,
upsampling from a lower rate, ultrasonic content, band limits).

Every signal is synthesised here from its definition, so its truth is known by
construction.  :func:`corpus` yields :class:`CorpusSignal` objects one at a time
(memory stays small); ``labels`` holds only the detectors the signal is scored
on:

``imaging``            True: mirror images left by an unfiltered upsampler
                       (hold, linear interpolation, zero stuffing); False: none
                       (native content or a proper resampler).
``aliasing``           True: folded content that a detector must see (naive
                       waveforms, sample-dropping decimation of tonal material,
                       a sweep generated past Nyquist); False: must not be
                       flagged (band-limited synthesis, filtered decimation, and
                       noise-like material, which never carries evidence of its
                       own folding); None: not assessable (fs a whole multiple
                       of f0) and must not be flagged.
``upsampled_from_hz``  the source rate of noise converted up by a proper
                       resampler, or None for native content.
``ultrasonic_tones_hz`` the stationary tones above 20 kHz that were added
                       ([] when none).
``ultrasonic``         True when the band above 20 kHz carries broadband energy
                       within 20 dB of the audible band (white or pink noise
                       generated at 96 kHz); False when nothing was ever there
                       (noise from 32 kHz converted up properly: empty above
                       16 kHz but for the filter's stop band).
``band_limit_hz``      the corner of a steep low-pass at no standard rate's
                       Nyquist (a codec-like shelf), or None.  Programme-like
                       material (speech, soft acoustic music, dull recordings)
                       that only rolls off gently is labelled None, and must
                       never read as upsampled or band-limited.

Integer masters are the norm, so signals are quantised to 24 bits (TPDF dither
of one LSB) unless a case asks for 16-bit noise-shaped dither.

Listening caution: these are test signals (noise, naive waveforms, sweeps up to
Nyquist); if you write them to files and play them, start with the monitoring
level turned down.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np
from scipy import signal as sps

from masterqc.audio.reader import StreamInfo

SECONDS = 1.0
SWEEP_SECONDS = 1.5
IMAGING_SECONDS = 2.0


@dataclass
class CorpusSignal:
    name: str
    group: str
    fs: int
    data: np.ndarray  # (frames, channels) float64 in [-1, 1)
    bits: int
    labels: dict = field(default_factory=dict)


# ---------------------------------------------------------------- building blocks
def times(fs: int, seconds: float) -> np.ndarray:
    return np.arange(int(round(fs * seconds))) / fs


def additive_wave(kind: str, f0: float, fs: int, seconds: float = SECONDS, top_hz: float | None = None,
                  amplitude: float = 0.5, phase0: float = 0.0) -> np.ndarray:
    """Band-limited sawtooth or square by additive synthesis: every harmonic below
    ``top_hz`` (default the Nyquist frequency) with its Fourier-series amplitude
    (saw: 2/(pi k), all k; square: 4/(pi k), odd k)."""
    t = times(fs, seconds)
    top = fs / 2.0 if top_hz is None else min(top_hz, fs / 2.0)
    out = np.zeros_like(t)
    k = 1
    while k * f0 < top:
        if kind == "saw":
            out += (2 / math.pi) * (-1) ** (k + 1) * np.sin(2 * math.pi * k * f0 * t + k * phase0) / k
        elif kind == "square":
            if k % 2:
                out += (4 / math.pi) * np.sin(2 * math.pi * k * f0 * t + k * phase0) / k
        else:
            raise ValueError(kind)
        k += 1
    return amplitude * out


def naive_wave(kind: str, f0: float, fs: int, seconds: float = SECONDS, amplitude: float = 0.5) -> np.ndarray:
    """Naively sampled sawtooth or square (the discontinuous waveform evaluated at
    the sample instants, no band limitation).  A start phase offset keeps every
    sample off the discontinuities, so the samples equal the periodised Fourier
    series exactly."""
    n = np.arange(int(round(fs * seconds)))
    ph = np.mod(n * (f0 / fs) + 0.1234567, 1.0)
    if kind == "saw":
        x = 2.0 * ph - 1.0
    elif kind == "square":
        x = np.where(ph < 0.5, 1.0, -1.0)
    else:
        raise ValueError(kind)
    return amplitude * x


def white(fs: int, seconds: float, rng, level: float = 0.1) -> np.ndarray:
    return level * rng.standard_normal(int(round(fs * seconds)))


def pink(fs: int, seconds: float, rng, level: float = 0.1) -> np.ndarray:
    """Gaussian noise with a 1/f power spectrum above 20 Hz (FFT shaping), RMS ``level``."""
    n = int(round(fs * seconds))
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1.0 / fs)
    shape = 1.0 / np.sqrt(np.maximum(f, 20.0))
    shape[f < 10.0] = 0.0
    x = np.fft.irfft(spec * shape, n)
    return level * x / np.sqrt(np.mean(x ** 2))


def good_filter(fs_in: int, fs_out: int):
    """The proper resampling filter of the corpus: Kaiser-window FIR at the working
    rate ``fs_in*up``, pass band to 0.45*min(fs_in, fs_out), 100 dB stop band from
    0.5*min(fs_in, fs_out) (scipy.signal.kaiserord / firwin).  Unity DC gain."""
    fr = Fraction(fs_out, fs_in)
    up, down = fr.numerator, fr.denominator
    work = fs_in * up
    edge = 0.5 * min(fs_in, fs_out)
    width = 0.05 * min(fs_in, fs_out)
    numtaps, beta = sps.kaiserord(100.0, width / (work / 2.0))
    numtaps |= 1
    h = sps.firwin(numtaps, edge - width / 2.0, window=("kaiser", beta), fs=work)
    return up, down, h


def good_resample(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    """Convert ``x`` from ``fs_in`` to ``fs_out`` with :func:`good_filter` (polyphase)."""
    up, down, h = good_filter(fs_in, fs_out)
    return sps.resample_poly(x, up, down, window=h)


def hold_upsample(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    """Sample hold: output sample n repeats input sample floor(n*fs_in/fs_out)."""
    n = np.arange(len(x) * fs_out // fs_in)
    return x[(n * fs_in) // fs_out]


def linear_upsample(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    """Linear interpolation between input samples at the output instants."""
    n = np.arange((len(x) - 1) * fs_out // fs_in)
    return np.interp(n * fs_in / fs_out, np.arange(len(x)), x)


def zero_stuff(x: np.ndarray, factor: int) -> np.ndarray:
    """Zero stuffing by an integer factor (gain ``factor`` keeps the baseband level)."""
    y = np.zeros(len(x) * factor)
    y[::factor] = x * factor
    return y


def drop_decimate(x: np.ndarray, factor: int) -> np.ndarray:
    """Decimation by keeping every ``factor``-th sample (no anti-alias filter)."""
    return x[::factor]


def quantise(x: np.ndarray, bits: int, rng) -> np.ndarray:
    """Round to ``bits``-bit codes with TPDF dither of 1 LSB peak, as code/2**(bits-1)."""
    q = 2.0 ** (bits - 1)
    d = rng.random(x.shape) - rng.random(x.shape)
    return np.clip(np.round(x * q + d), -q, q - 1) / q


def shaped_dither_16(x: np.ndarray, rng) -> np.ndarray:
    """16-bit quantisation with TPDF dither and second-order error feedback
    (error filter 1 - 2 z^-1 + z^-2: the requantisation noise rises 12 dB per octave
    towards Nyquist)."""
    q = 32768.0
    xs = x * q
    d = rng.random(x.shape) - rng.random(x.shape)
    y = np.empty_like(xs)
    e1 = e2 = 0.0
    for i in range(xs.size):
        v = xs[i] - 2.0 * e1 + e2
        o = min(max(round(v + d[i]), -q), q - 1)
        e2, e1 = e1, o - v
        y[i] = o
    return y / q


def chord(fs: int, seconds: float, top_hz: float, rng) -> np.ndarray:
    """Music-like tonal material: three band-limited sawtooth notes (f0 196.3, 247.1,
    293.9 Hz, harmonics below ``top_hz``) with a slow tremolo, plus noise at -50 dB."""
    t = times(fs, seconds)
    x = sum(additive_wave("saw", f0, fs, seconds, top_hz=top_hz, amplitude=0.2, phase0=p)
            for f0, p in ((196.3, 0.3), (247.1, 1.1), (293.9, 2.0)))
    x = x * (1.0 + 0.3 * np.sin(2 * math.pi * 3.1 * t))
    return x + 0.003 * rng.standard_normal(t.size)


def sine_sweep(fs: int, f_start: float, f_end: float, seconds: float = SWEEP_SECONDS,
               amplitude: float = 0.5) -> np.ndarray:
    """Linear sine sweep evaluated at the sample instants (beyond fs/2 it folds)."""
    t = times(fs, seconds)
    k = (f_end - f_start) / seconds
    return amplitude * np.sin(2 * math.pi * (f_start * t + 0.5 * k * t * t))


def naive_saw_sweep(fs: int, f_start: float, f_end: float, seconds: float = SWEEP_SECONDS,
                    amplitude: float = 0.4) -> np.ndarray:
    """Naive sawtooth whose fundamental rises linearly: aliased partials fall."""
    t = times(fs, seconds)
    k = (f_end - f_start) / seconds
    ph = np.mod(f_start * t + 0.5 * k * t * t + 0.1234567, 1.0)
    return amplitude * (2.0 * ph - 1.0)


def lowpass(x: np.ndarray, fs: int, corner_hz: float) -> np.ndarray:
    """Steep elliptic low-pass (order 10, 0.1 dB ripple, 90 dB stop band), zero phase."""
    sos = sps.ellip(10, 0.1, 90.0, corner_hz, fs=fs, output="sos")
    return sps.sosfiltfilt(sos, x)


def tones(fs: int, seconds: float, freqs_hz, level: float) -> np.ndarray:
    t = times(fs, seconds)
    return sum(level * np.sin(2 * math.pi * f * t + i) for i, f in enumerate(freqs_hz))


# ---------------------------------------------------------------- the corpus
#: fundamentals whose folds land at least 40 Hz from a harmonic at every standard rate
#: (fs mod f0 is at least 40 Hz from 0 and from f0), so they are resolvable at 5 Hz bins
FUNDAMENTALS_HZ = (139.4, 286.9, 435.2, 1204.9)
#: (fundamental, rate) pairs where fs is a whole multiple of f0: aliasing not assessable
WHOLE_MULTIPLES = ((1000.0, 48000), (1200.0, 48000), (441.0, 44100), (480.0, 96000))
#: (source rate, file rate) of the proper-resampler cases
UP_PAIRS = ((32000, 48000), (44100, 48000), (44100, 88200), (44100, 96000), (48000, 96000), (32000, 96000))
#: (source rate, file rate) of the unfiltered-upsampler cases
IMAGING_PAIRS = ((44100, 88200), (48000, 96000), (32000, 96000), (44100, 48000))
#: (source rate, decimation factor)
DECIMATIONS = ((96000, 2), (88200, 2), (96000, 3))


def _mono(x):
    return np.asarray(x, dtype=float).reshape(-1, 1)


def _builders():
    """(name, group, builder(rng) -> (fs, data, bits, labels)) for every corpus signal."""
    out = []

    def add(name, group, fn):
        out.append((name, group, fn))

    # 1. band-limited (additive) vs naive sawtooth and square
    for fs in (44100, 48000, 96000):
        for kind in ("saw", "square"):
            for f0 in FUNDAMENTALS_HZ:
                add(f"additive_{kind}_{f0:g}Hz_{fs}", "waveforms",
                    lambda rng, fs=fs, kind=kind, f0=f0: (fs, _mono(additive_wave(kind, f0, fs)), 24,
                                                          {"aliasing": False, "imaging": False}))
                add(f"naive_{kind}_{f0:g}Hz_{fs}", "waveforms",
                    lambda rng, fs=fs, kind=kind, f0=f0: (fs, _mono(naive_wave(kind, f0, fs)), 24,
                                                          {"aliasing": True, "imaging": False}))
    for f0, fs in WHOLE_MULTIPLES:
        add(f"naive_saw_{f0:g}Hz_{fs}_whole_multiple", "waveforms",
            lambda rng, fs=fs, f0=f0: (fs, _mono(naive_wave("saw", f0, fs)), 24, {"aliasing": None}))

    # 2. noise band-limited at a candidate rate's Nyquist, converted up properly; native noise
    for r, fs in UP_PAIRS:
        for kind in ("white", "pink"):
            def build(rng, r=r, fs=fs, kind=kind):
                gen = white if kind == "white" else pink
                x = np.stack([good_resample(gen(r, SECONDS, rng), r, fs) for _ in range(2)], axis=1)
                lab = {"upsampled_from_hz": r, "imaging": False, "aliasing": False, "band_limit_hz": None}
                if fs >= 88200:
                    lab["ultrasonic_tones_hz"] = []
                if fs >= 88200 and r == 32000:
                    lab["ultrasonic"] = False
                return fs, x, 24, lab
            add(f"{kind}_from_{r}_to_{fs}_proper", "proper_upsampling", build)
    for fs in (48000, 96000):
        for kind in ("white", "pink"):
            def build(rng, fs=fs, kind=kind):
                gen = white if kind == "white" else pink
                x = np.stack([gen(fs, SECONDS, rng) for _ in range(2)], axis=1)
                lab = {"upsampled_from_hz": None, "imaging": False, "aliasing": False, "band_limit_hz": None}
                if fs >= 88200:
                    lab["ultrasonic"] = True
                    lab["ultrasonic_tones_hz"] = []
                return fs, x, 24, lab
            add(f"{kind}_native_{fs}", "native_noise", build)

    # 3. hold, linear-interpolation and unfiltered (zero-stuffing) upsampling
    for r, fs in IMAGING_PAIRS:
        methods = ["hold", "linear"] + (["zero_stuff"] if fs % r == 0 else [])
        for method in methods:
            for material in ("pink", "chord"):
                def build(rng, r=r, fs=fs, method=method, material=material):
                    x = pink(r, IMAGING_SECONDS, rng, 0.15) if material == "pink" else \
                        chord(r, IMAGING_SECONDS, 0.45 * r, rng)
                    if method == "hold":
                        y = hold_upsample(x, r, fs)
                    elif method == "linear":
                        y = linear_upsample(x, r, fs)
                    else:
                        y = zero_stuff(x, fs // r)
                    return fs, _mono(y), 24, {"imaging": True}
                add(f"{material}_from_{r}_to_{fs}_{method}", "unfiltered_upsampling", build)

    # 3b. native tonal programme (no conversion at all): must not look imaged or aliased
    for fs in (44100, 48000, 88200, 96000):
        def build(rng, fs=fs):
            x = chord(fs, IMAGING_SECONDS, 0.45 * fs, rng)
            return fs, np.stack([x, 0.9 * x], axis=1), 24, {"imaging": False, "aliasing": False}
        add(f"chord_native_{fs}", "native_tonal", build)

    # 4. decimation by sample dropping vs with a proper filter, tonal and noise-like
    for fs_src, d in DECIMATIONS:
        fs = fs_src // d
        for method in ("drop", "filtered"):
            for f0 in (529.3, 1561.0):
                def build(rng, fs_src=fs_src, d=d, fs=fs, method=method, f0=f0):
                    x = additive_wave("saw", f0, fs_src, SECONDS + 0.05, amplitude=0.5)
                    y = drop_decimate(x, d) if method == "drop" else good_resample(x, fs_src, fs)
                    return fs, _mono(y[:int(fs * SECONDS)]), 24, {"aliasing": method == "drop"}
                add(f"saw_{f0:g}Hz_{fs_src}_decimated_{d}_{method}", "decimation", build)
            def build(rng, fs_src=fs_src, d=d, fs=fs, method=method):
                x = white(fs_src, SECONDS + 0.05, rng, 0.1)
                y = drop_decimate(x, d) if method == "drop" else good_resample(x, fs_src, fs)
                lab = {"aliasing": False}
                if fs > 32000:
                    lab["imaging"] = False
                return fs, _mono(y[:int(fs * SECONDS)]), 24, lab
            add(f"white_{fs_src}_decimated_{d}_{method}", "decimation", build)

    # 5. genuinely wide-band 96 kHz content, with and without ultrasonic tones
    for i, tone_set in enumerate(((), (), (25000.0,), (31500.0, 40000.0), (), (27300.0,), (), (44000.0,))):
        kind = "white" if i % 2 == 0 else "pink"
        def build(rng, tone_set=tone_set, kind=kind):
            fs = 96000
            gen = white if kind == "white" else pink
            x = gen(fs, SECONDS, rng, 0.05)
            if tone_set:
                x = x + tones(fs, SECONDS, tone_set, 0.01)
            lab = {"ultrasonic_tones_hz": list(tone_set), "upsampled_from_hz": None, "imaging": False,
                   "aliasing": False, "band_limit_hz": None, "ultrasonic": True}
            return fs, _mono(x), 24, lab
        add(f"wideband_{i}_{kind}_96000_tones_{'_'.join(f'{f:g}' for f in tone_set) or 'none'}", "wideband", build)

    # 6. 16-bit noise-shaped dither on quiet tonal material
    for fs in (44100, 48000):
        for f0 in (311.1, 740.3):
            def build(rng, fs=fs, f0=f0):
                x = additive_wave("saw", f0, fs, SECONDS, top_hz=0.45 * fs, amplitude=0.05)
                return fs, _mono(shaped_dither_16(x, rng)), 16, {"imaging": False, "aliasing": False,
                                                                 "upsampled_from_hz": None}
            add(f"saw_{f0:g}Hz_{fs}_16bit_shaped_dither", "dither", build)

    # 7. codec-like shelf: steep low-pass at a corner no standard rate explains (a brick wall at exactly a
    #    standard Nyquist, 16 kHz for 32 kHz, is what an FFT resampler leaves, so it is not used here)
    for fs in (44100, 48000):
        for corner in (17000.0, 15000.0):
            def build(rng, fs=fs, corner=corner):
                x = lowpass(pink(fs, SECONDS, rng, 0.1), fs, corner)
                return fs, _mono(x), 24, {"band_limit_hz": corner, "upsampled_from_hz": None,
                                          "imaging": False, "aliasing": False}
            add(f"pink_{fs}_lowpass_{corner:g}", "codec_shelf", build)

    # 8. sweeps crossing Nyquist (naive) vs band-limited sweeps
    for fs in (44100, 48000, 96000):
        add(f"sine_sweep_{fs}_past_nyquist", "sweeps",
            lambda rng, fs=fs: (fs, _mono(sine_sweep(fs, 500.0, 0.8 * fs)), 24, {"aliasing": True}))
        add(f"sine_sweep_{fs}_bandlimited", "sweeps",
            lambda rng, fs=fs: (fs, _mono(sine_sweep(fs, 500.0, 0.45 * fs)), 24, {"aliasing": False}))
        add(f"naive_saw_sweep_{fs}", "sweeps",
            lambda rng, fs=fs: (fs, _mono(naive_saw_sweep(fs, 300.0, 1500.0)), 24, {"aliasing": True}))
    _programme_builders(add)
    _bandwidth_builders(add)
    return out


# ---------------------------------------------------------------- programme material (imaging/aliasing)
def _programme(kind: str, fs: int, rng) -> np.ndarray:
    """Demo programme (:mod:`masterqc.demo`) of :data:`IMAGING_SECONDS` at ``fs``, peak 0.5:
    ``music`` (stereo chords, bass, drums, noise bed) or ``speech`` (mono)."""
    from masterqc import demo
    x = demo.music(IMAGING_SECONDS, fs, rng) if kind == "music" else \
        demo.speech(IMAGING_SECONDS, fs, rng).reshape(-1, 1)
    return 0.5 * x / max(float(np.max(np.abs(x))), 1e-12)


def _programme_builders(add):
    """Music and speech, native and converted: the false claims seen on programme material
    (imaging called a defect after a proper resampler, music untestable) must not come back,
    while hold, linear and zero-stuffing upsamplers of music are still found.  Truth by
    construction: the demo's music keeps its partials below 0.45*fs (no folds) and
    :func:`good_resample` leaves nothing above the source's Nyquist frequency.  Speech is
    scored for imaging only: its buzzy source is generated naively, so it may hold folds."""
    for fs in (44100, 48000, 96000):
        add(f"music_native_{fs}", "programme",
            lambda rng, fs=fs: (fs, _programme("music", fs, rng), 24, {"imaging": False, "aliasing": False}))
    for fs in (44100, 48000):
        add(f"speech_native_{fs}", "programme",
            lambda rng, fs=fs: (fs, _programme("speech", fs, rng), 24, {"imaging": False}))
    for r, fs in ((44100, 96000), (48000, 96000), (44100, 48000)):
        def build(rng, r=r, fs=fs):
            x = _programme("music", r, rng)
            y = np.stack([good_resample(x[:, c], r, fs) for c in range(x.shape[1])], axis=1)
            return fs, y, 24, {"imaging": False, "aliasing": False}
        add(f"music_from_{r}_to_{fs}_proper", "programme", build)
    # upsampled by 2 or more without a proper filter.  (44.1 -> 48 kHz hold/linear of music is
    # left out: its images fall back onto the programme a few kHz above their source and are not
    # found in 2 s of drum-dominated music.)
    for r, fs in ((44100, 96000), (48000, 96000)):
        for method in ("hold", "linear") + (("zero_stuff",) if fs % r == 0 else ()):
            def build(rng, r=r, fs=fs, method=method):
                x = _programme("music", r, rng)
                if method == "hold":
                    up = [hold_upsample(x[:, c], r, fs) for c in range(x.shape[1])]
                elif method == "linear":
                    up = [linear_upsample(x[:, c], r, fs) for c in range(x.shape[1])]
                else:
                    up = [zero_stuff(x[:, c], fs // r) for c in range(x.shape[1])]
                return fs, np.stack(up, axis=1) / (fs // r if method == "zero_stuff" else 1), 24, \
                    {"imaging": True}
            add(f"music_from_{r}_to_{fs}_{method}", "programme", build)


# ---------------------------------------------------------------- programme-like material (bandwidth)
#: vowel formants (F1, F2, F3), Hz: textbook averages for adult voices, from memory
VOWEL_FORMANTS_HZ = ((730, 1090, 2440), (270, 2290, 3010), (300, 870, 2240), (530, 1840, 2480), (570, 840, 2410))


def speech_like(fs: int, seconds: float, rng, f0_hz: float = 140.0, voice_corner_hz: float | None = 7500.0) -> np.ndarray:
    """Speech-like material: voiced syllables (a buzzy glottal-like source through three
    formant resonators), sibilant noise bursts (high-passed at 3.5 kHz), short pauses
    with room tone (pink noise at -56 dB), and the gentle voice-band roll-off of a voice
    chain (4th-order Butterworth low-pass at ``voice_corner_hz``; None: a bright
    voice, sibilants kept).  Its spectrum runs out into the floor with no cliff anywhere."""
    n = int(round(fs * seconds))
    out = np.zeros(n)
    pos = int(0.03 * fs)
    while pos < n:
        m = min(int(rng.uniform(0.09, 0.22) * fs), n - pos)
        t = np.arange(m) / fs
        f0 = f0_hz * (1 + 0.08 * np.sin(2 * math.pi * rng.uniform(1, 3) * t)) * rng.uniform(0.9, 1.15)
        phase = 2 * math.pi * np.cumsum(f0) / fs
        src = 0.5 * np.sign(np.sin(phase)) + 0.5 * np.sin(phase)
        v = np.zeros(m)
        for k, fc in enumerate(VOWEL_FORMANTS_HZ[rng.integers(len(VOWEL_FORMANTS_HZ))]):
            b, a = sps.iirpeak(fc, fc / (80 + 40 * k), fs=fs)
            v += sps.lfilter(b, a, src) / (k + 1)
        if rng.random() < 0.4:  # sibilant onset
            fr = min(int(0.05 * fs), m)
            v[:fr] += 0.3 * sps.sosfilt(sps.butter(2, 3500.0, "high", fs=fs, output="sos"), rng.standard_normal(fr))
        out[pos:pos + m] += v * np.hanning(m)
        pos += m + int(rng.uniform(0.02, 0.12) * fs)
    out += 0.0015 * pink(fs, seconds, rng, 1.0)
    out = np.tanh(3.0 * out / (np.max(np.abs(out)) + 1e-30))  # a gentle leveller
    if voice_corner_hz is not None:
        out = sps.sosfilt(sps.butter(4, voice_corner_hz, fs=fs, output="sos"), out)
    return 0.3 * out / np.max(np.abs(out))


def analog_lowpass(x: np.ndarray, fs: int, corner_hz: float, order: int) -> np.ndarray:
    """Zero-phase low-pass with an analogue Butterworth magnitude, 1/sqrt(1 + (f/fc)**(2 order)),
    applied in the frequency domain: an acoustic or analogue roll-off, with no zero at the
    Nyquist frequency (the bilinear transform would put one there)."""
    f = np.fft.rfftfreq(x.size, 1.0 / fs)
    return np.fft.irfft(np.fft.rfft(x) / np.sqrt(1.0 + (f / corner_hz) ** (2 * order)), x.size)


def soft_acoustic(fs: int, seconds: float, rng) -> np.ndarray:
    """Soft acoustic music: three plucked notes whose harmonics fall 9 dB per octave of
    harmonic number and decay, over a pink room bed, through an analogue 2nd-order low-pass at
    5 kHz (12 dB/octave: a soft, natural roll-off)."""
    t = times(fs, seconds)
    x = np.zeros_like(t)
    for f0, start in ((220.4, 0.0), (277.7, 0.3), (330.1, 0.6)):
        env = np.where(t >= start, np.exp(-(t - start) / 0.5), 0.0)
        k = 1
        while k * f0 < 0.5 * fs:
            x += env * 0.2 * k ** -1.5 * np.sin(2 * math.pi * k * f0 * t + rng.uniform(0, 2 * math.pi))
            k += 1
    x = analog_lowpass(x + pink(fs, seconds, rng, 0.01), fs, 5000.0, 2)
    return 0.3 * x / np.max(np.abs(x))


def dull_recording(fs: int, seconds: float, rng) -> np.ndarray:
    """A dull recording: pink noise through an analogue 3rd-order Butterworth low-pass at 3 kHz
    (18 dB/octave from 3 kHz: about 50 dB down at 20 kHz)."""
    x = analog_lowpass(pink(fs, seconds, rng, 1.0), fs, 3000.0, 3)
    return 0.3 * x / np.max(np.abs(x))


def faded(x: np.ndarray, fs: int, fade_s: float = 0.02) -> np.ndarray:
    """``x`` with raised-cosine fades in and out (no step at the file's ends: a step is a
    click whose spectrum reaches Nyquist, which a dull recording would not have)."""
    m = min(int(fade_s * fs), x.size // 2)
    w = np.ones(x.size)
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(m) / m)
    w[:m], w[x.size - m:] = ramp, ramp[::-1]
    return x * w


def bright_speech(fs: int, seconds: float, rng) -> np.ndarray:
    """:func:`speech_like` without the voice chain's low-pass (sibilants reach the top of the band)."""
    return speech_like(fs, seconds, rng, voice_corner_hz=None)


BANDWIDTH_MATERIALS = {"voice_chain_speech": speech_like, "bright_speech": bright_speech,
                       "soft_acoustic": soft_acoustic, "dull_recording": dull_recording}

def _bandwidth_builders(add):
    """Programme-like material at 44.1 and 48 kHz for the bandwidth detector.

    Native speech, soft acoustic music and dull recordings roll off gently into the
    floor: never upsampled, never band-limited.  The same material with a true
    17 kHz band limit (:func:`lowpass`) must read as band-limited at 17 kHz, and
    material made at 32 or 44.1 kHz and converted up with :func:`good_resample` must
    read as upsampled, except the voice-chain speech, which holds nothing near the
    old Nyquist frequency (60 dB and more below its main band there): it is scored
    only on not being called band-limited.
    """
    for fs in (44100, 48000):
        for material, gen in BANDWIDTH_MATERIALS.items():
            add(f"{material}_native_{fs}", "programme_bandwidth",
                lambda rng, fs=fs, gen=gen: (fs, _mono(faded(gen(fs, SECONDS, rng), fs)), 24,
                                             {"upsampled_from_hz": None, "band_limit_hz": None}))
            if material != "bright_speech":
                add(f"{material}_{fs}_lowpass_17000", "programme_bandwidth",
                    lambda rng, fs=fs, gen=gen: (fs, _mono(faded(lowpass(gen(fs, SECONDS, rng), fs, 17000.0), fs)),
                                                 24, {"band_limit_hz": 17000.0, "upsampled_from_hz": None}))
            for r in (32000, 44100):
                if r >= fs:
                    continue
                lab = {"band_limit_hz": None} if material == "voice_chain_speech" else \
                    {"upsampled_from_hz": r, "band_limit_hz": None}
                add(f"{material}_from_{r}_to_{fs}_proper", "programme_bandwidth",
                    lambda rng, fs=fs, gen=gen, r=r, lab=lab: (
                        fs, _mono(faded(good_resample(gen(r, SECONDS, rng), r, fs), fs)), 24, dict(lab)))


def corpus_names(step: int = 1) -> list[str]:
    return [name for i, (name, _g, _f) in enumerate(_builders()) if i % step == 0]


#: the representative slice the unit tests run (tests/test_sampling_corpus.py): every SLICE_STEP-th signal in
#: building order, which takes signals of every group and rate; the full corpus runs in
#: bench/bench_sampling_detection.py
SLICE_STEP = 3


def corpus(seed: int = 20261201, groups=None, step: int = 1):
    """Yield every :class:`CorpusSignal` (deterministic for a given ``seed``); with ``step`` > 1 only
    every ``step``-th signal (the same signals, with the same noise, as in the full corpus)."""
    for i, (name, group, fn) in enumerate(_builders()):
        if groups is not None and group not in groups:
            continue
        if i % step:
            continue
        rng = np.random.default_rng([seed, i])
        fs, data, bits, labels = fn(rng)
        data = np.asarray(data, dtype=float)
        if data.ndim == 1:
            data = data.reshape(-1, 1)
        if bits == 24:
            data = quantise(data, 24, rng)
        yield CorpusSignal(name=name, group=group, fs=int(fs), data=data, bits=bits, labels=labels)


# ---------------------------------------------------------------- running analyzers on arrays
class ArrayStream:
    """An in-memory stand-in for :class:`masterqc.audio.reader.AudioStream`."""

    def __init__(self, data: np.ndarray, fs: int, bits: int = 24):
        data = np.asarray(data, dtype=float)
        if data.ndim == 1:
            data = data.reshape(-1, 1)
        self.data = data
        ch = data.shape[1]
        labels = ("M",) if ch == 1 else ("L", "R") if ch == 2 else tuple(f"ch{i + 1}" for i in range(ch))
        self.info = StreamInfo(path="<memory>", container="wav", encoding=f"pcm_{bits}", sample_rate_hz=int(fs),
                               bit_depth=bits, is_float=False, channels=ch, frames=data.shape[0],
                               channel_layout=labels, layout_source="conventional",
                               channel_weights=tuple(1.0 for _ in labels))

    def blocks(self, block_frames: int = 65536):
        for i in range(0, self.data.shape[0], block_frames):
            yield self.data[i:i + block_frames]


def analyse(data, fs, classes, bits: int = 24, options=None):
    """Measurements of ``classes`` on an array, through the engine's :func:`run_analyzers`."""
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    measurements, _series, _settings = run_analyzers(ArrayStream(data, fs, bits), options or MeasureOptions(),
                                                     classes=classes)
    return measurements


# ---------------------------------------------------------------- scoring
#: scoring threshold for "ultrasonic energy present": within 20 dB of the audible band
#: (a choice of this corpus, not a delivery requirement)
ULTRASONIC_PRESENT_DB = -20.0
#: a reported ultrasonic tone matches a true one within this many hertz or 0.2 %
TONE_MATCH_HZ = 50.0
#: a reported band limit matches the true corner within 5 %
BAND_LIMIT_MATCH = 0.05

#: measurements kept per signal by :func:`score_corpus`
KEPT_KEYS = ("imaging_detected", "aliasing_detected", "aliasing_assessable", "alias_to_harmonic_ratio_db",
             "upsampled_from_hz", "band_limit_hz", "ultrasonic_energy_db")

DETECTORS = ("imaging", "aliasing", "upsampled_from", "ultrasonic_tones", "ultrasonic_energy", "band_limit")

#: the result keys each detector needs; a detector whose keys are missing is reported as
#: missing, never skipped silently
DETECTOR_KEYS = {
    "imaging": ("imaging_detected",),
    "aliasing": ("aliasing_detected",),
    "upsampled_from": ("upsampled_from_hz",),
    "ultrasonic_tones": ("ultrasonic_tones",),
    "ultrasonic_energy": ("ultrasonic_energy_db",),
    "band_limit": ("band_limit_hz",),
}


def _tone_hit(truth_hz, reported):
    return any(abs(t.get("frequency_hz", -1e9) - truth_hz) <= max(TONE_MATCH_HZ, 0.002 * truth_hz)
               for t in reported)


def judge_signal(sig: CorpusSignal, m: dict) -> dict:
    """Outcome per detector for one signal: {"detector": ("hit"|"miss"|"false_alarm"|"correct_reject", note)}.

    Only detectors the signal is labelled for are judged; a detector whose result
    key is absent from ``m`` is judged "missing".
    """
    lab = sig.labels
    out = {}

    def have(det):
        return all(k in m for k in DETECTOR_KEYS[det])

    if "imaging" in lab:
        if not have("imaging"):
            out["imaging"] = ("missing", "")
        else:
            got = m["imaging_detected"] is True
            out["imaging"] = _outcome(lab["imaging"] is True, got)
    if "aliasing" in lab:
        if not have("aliasing"):
            out["aliasing"] = ("missing", "")
        else:
            got = m["aliasing_detected"] is True
            out["aliasing"] = _outcome(lab["aliasing"] is True, got)
    if "upsampled_from_hz" in lab:
        if not have("upsampled_from"):
            out["upsampled_from"] = ("missing", "")
        else:
            truth, got = lab["upsampled_from_hz"], m["upsampled_from_hz"]
            if truth is None:
                out["upsampled_from"] = ("false_alarm", f"reported {got}") if got is not None else \
                    ("correct_reject", "")
            else:
                out["upsampled_from"] = ("hit", "") if got is not None and abs(got - truth) < 1 else \
                    ("miss", f"reported {got}")
    if "ultrasonic_tones_hz" in lab:
        if not have("ultrasonic_tones"):
            out["ultrasonic_tones"] = ("missing", "")
        else:
            rep = m["ultrasonic_tones"] or []
            truth = lab["ultrasonic_tones_hz"]
            extra = [t for t in rep if not any(abs(t.get("frequency_hz", -1e9) - f) <= max(TONE_MATCH_HZ, 0.002 * f)
                                               for f in truth)]
            if truth:
                missed = [f for f in truth if not _tone_hit(f, rep)]
                out["ultrasonic_tones"] = ("miss", f"missed {missed}") if missed else \
                    (("false_alarm", f"extra {extra}") if extra else ("hit", ""))
            else:
                out["ultrasonic_tones"] = ("false_alarm", f"extra {extra}") if extra else ("correct_reject", "")
    if "ultrasonic" in lab:
        if not have("ultrasonic_energy"):
            out["ultrasonic_energy"] = ("missing", "")
        else:
            e = m["ultrasonic_energy_db"]
            got = e is not None and e >= ULTRASONIC_PRESENT_DB
            out["ultrasonic_energy"] = _outcome(lab["ultrasonic"], got)
    if "band_limit_hz" in lab:
        if not have("band_limit"):
            out["band_limit"] = ("missing", "")
        else:
            truth, got = lab["band_limit_hz"], m["band_limit_hz"]
            if truth is None:
                out["band_limit"] = ("false_alarm", f"reported {got}") if got is not None else ("correct_reject", "")
            else:
                ok = got is not None and abs(got - truth) <= BAND_LIMIT_MATCH * truth
                out["band_limit"] = ("hit", "") if ok else ("miss", f"reported {got}")
    return out


def _outcome(truth: bool, got: bool):
    if truth:
        return ("hit", "") if got else ("miss", "")
    return ("false_alarm", "") if got else ("correct_reject", "")


def sampling_classes():
    """The analyzer classes of the sampling-integrity issue that are registered."""
    from masterqc.measure.registry import analyzer_classes
    names = {"ImagingAnalyzer", "AliasingAnalyzer", "SamplingSpectrumAnalyzer"}
    return [c for c in analyzer_classes() if c.__name__ in names]


_SCORED: dict = {}


def score_corpus_cached(seed: int = 20261201, step: int = 1):
    """:func:`score_corpus` with the registered sampling analyzers, computed once per process (test session)
    for each ``(seed, step)``."""
    key = (seed, step)
    if key not in _SCORED:
        _SCORED[key] = score_corpus(seed, step=step)
    return _SCORED[key]


def score_corpus(seed: int = 20261201, classes=None, progress=None, step: int = 1):
    """Run ``classes`` (default :func:`sampling_classes`) over the whole corpus.

    Returns ``(rates, outcomes)``: ``rates[detector] = {"detected", "positives",
    "false_alarms", "negatives", "missing", "detection_rate", "false_alarm_rate"}``
    and the list of ``(signal name, {detector: outcome}, facts)`` where ``facts`` holds
    the labels and the measurements listed in :data:`KEPT_KEYS`.
    """
    classes = sampling_classes() if classes is None else classes
    outcomes = []
    for sig in corpus(seed, step=step):
        m = analyse(sig.data, sig.fs, classes, sig.bits)
        res = judge_signal(sig, m)
        facts = {"labels": sig.labels, "fs": sig.fs, **{k: m.get(k) for k in KEPT_KEYS}}
        outcomes.append((sig.name, res, facts))
        if progress is not None:
            progress(sig, m, res)
    rates = {}
    for det in DETECTORS:
        c = {"detected": 0, "positives": 0, "false_alarms": 0, "negatives": 0, "missing": 0}
        for _name, res, _facts in outcomes:
            if det not in res:
                continue
            o = res[det][0]
            if o == "missing":
                c["missing"] += 1
            elif o in ("hit", "miss"):
                c["positives"] += 1
                c["detected"] += o == "hit"
            else:
                c["negatives"] += 1
                c["false_alarms"] += o == "false_alarm"
        c["detection_rate"] = c["detected"] / c["positives"] if c["positives"] else None
        c["false_alarm_rate"] = c["false_alarms"] / c["negatives"] if c["negatives"] else None
        rates[det] = c
    return rates, outcomes
