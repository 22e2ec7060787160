"""Third held-back VALIDATION corpus for the sampling detectors (set "validation", seeds 7000-7999).

Follows the shared case format: ``cases(seed, quick=False)`` yields ``Case`` objects one at a time.  Written
without reading the detectors, their tuning corpora or their scorers; every label is true by construction and
the construction fact each label relies on is MEASURED when the case is made (``Case.facts``).  A case whose
fact does not hold is relabelled (moved to an ``ambiguous-...`` group with the disputed key left out) or dropped.

Tool chains (new against the two earlier validation sets; ``print_versions()`` prints the versions in use; built
and checked with resampy 0.4.3 (numba), pedalboard 0.9.26, SoX 14.4.2, ffmpeg 5.1 (Debian 12 build), numpy 2.4,
scipy 1.17):
    resampy-kaiser_best, resampy-kaiser_fast    resampy.resample (python, numba)
    resampy-short-sinc                          resampy with its ``sinc_window`` filter, 2-4 zero crossings, a
                                                rectangular or Hann window and rolloff 0.97-1.0 (weak image filter)
    sox-cli-rate-p<P>                           ``sox ... rate -h|-v -p P`` with odd phase values (P 5..95)
    sox-cli-rate-lowband                        ``sox ... rate -v -b 74..84`` (pass band ends early)
    sox-cli-rate-alias                          ``sox ... rate -h|-v -a [-b 90..95]`` (transition band allowed past Nyquist)
    sox-cli-upsample[-biquad]                   ``sox ... upsample N`` (zero stuffing) [then ``lowpass`` 2-pole]
    sox-cli-downsample                          ``sox ... downsample N`` (sample picking, no filter)
    sox-cli-rate-down                           ``sox ... rate -v -p 30 -b 92`` down-conversion
    sox-cli-rate-p45-twin                       ``sox ... rate -v -p 45 -b 93``: the proper twins of imaging cases
    ffmpeg-swr-cubic                            ``aresample`` with filter_type=cubic, filter_size 16-64, cutoff 0.90-0.98
    ffmpeg-swr-nointerp                         ``aresample`` with linear_interp=0, exact_rational=0, phase_shift 5-8
    pedalboard-resample-<q>                     pedalboard ``Resample`` effect (down to a rate, back up) at each
                                                quality: ZeroOrderHold, Linear, CatmullRom, Lagrange, WindowedSinc*
    pedalboard-stream-<q>                       pedalboard.io ``StreamResampler`` (one-way conversion)
    codecs (ffmpeg)                             mp2, libtwolame, ac3, eac3, aac, libvorbis q-1..1, wmav2, libopus
                                                12-24 kbit/s; at a LOWER rate then converted up: mp2 (MPEG-2 LSF
                                                16/22.05/24 kHz), g722 (16 kHz), libgsm (8 kHz), libspeex (8/16 kHz),
                                                nellymoser (11.025/22.05 kHz), ac3 at 32 kHz
    pedalboard-mp3, pedalboard-gsm              pedalboard MP3Compressor (VBR quality), GSMFullRateCompressor (it
                                                converts to 8 kHz and back by its documented design)
    naive-pwm, naive-sync, naive-fm,            oscillators written here without band limiting: pulse with its width
    naive-wavetable, naive-ringmod              swept by an LFO, hard-synced sawtooth, two-operator FM, a bright
                                                single-cycle table read with linear interpolation, naive sawtooth
                                                times a sine; polyphonic (2-4 voices), envelopes, vibrato
    additive-*, oversampled-fm                  their band-limited twins (Fourier series summed below Nyquist;
                                                FM rendered at 8x the rate and cut at Nyquist in the FFT domain)
    crush-hold                                  sample-and-hold rate reducer with a fractional step (non-standard rate)
    lowpass filters                             sox ``sinc`` (Kaiser FIR), sox ``lowpass`` (biquad), scipy Bessel and
                                                Chebyshev II (mastering low-passes)

Groups and labels (keys per the contract; ``main()`` prints the counts per group and family for a seed):
    upsampled                 a converter up from a lower standard rate, images measured clean.
                              upsampled_from_hz = source rate, imaging_detected = False.  Facts: the measured
                              transfer (output PSD over source PSD) falls 6 dB between 0.85 and 1.0 of the source
                              Nyquist, and the energy above 1.05x the source Nyquist is <= -70 dB of the energy below.
                              Includes the proper twins of half the imaging cases (``sox rate -v -p 45 -b 93``) and
                              pedalboard's Resample effect (made at the file's rate, down to the source rate and back)
                              where its fold-back on the way down measures <= -80 dB (then also aliasing False).
    imaging                   any upsampler whose images measure >= -40 dB (energy between 1.05x the source Nyquist
                              and the file's Nyquist over the energy below the source Nyquist): zero stuffing, hold,
                              linear, Catmull-Rom, Lagrange, short sinc, ffmpeg cubic, ffmpeg without interpolation on
                              its default filter.  upsampled_from_hz = source rate, imaging_detected = True.
    upsampled-one-channel     stereo / 5.1, one non-LFE channel converted up (its facts as for "upsampled"), the others
                              native wideband (>= -60 dB in their top 10 %): upsampled_channels = [label].
    upsampled-via-codec       a codec run at a lower rate (ffmpeg) and converted up (``sox rate -h -p 40`` or
                              pedalboard WindowedSinc64); pedalboard's GSM effect (8 kHz inside, by its design).
                              upsampled_from_hz = the codec's rate, imaging False.  Facts: the file's own spectrum
                              ends (30 dB under its mid-band level) between 0.85 and 1.02 of that rate's Nyquist, and
                              images <= -70 dB.
    naive-synth               naive oscillators: aliasing_detected = True, upsampled None, imaging False.  Fact:
                              energy of (naive - band-limited twin), i.e. the folded partials, >= -30 dB of the twin.
                              A naive voice whose fold measures lower is dropped (its twin stays).
    band-limited-synth        the twins: aliasing False, upsampled None, imaging False (exact by construction).
    decimation                ``sox downsample N`` (sample picking, no filter) of tonal material: aliasing True,
                              upsampled None, imaging False.  Fact: the source's content above the new Nyquist, put
                              through the same chain alone, gives >= -30 dB of the output energy (measured 0.2 s in
                              from either end).
    sample-hold               pedalboard Resample ZeroOrderHold to a lower standard rate and back, on tonal material:
                              a held, undersampled signal.  aliasing True, imaging True, upsampled_from_hz = the lower
                              rate.  Facts: folded energy >= -30 dB (as for decimation) and images >= -40 dB.
    filtered-decimation, downsampled   proper down-conversions (resampy kaiser_best / kaiser_fast, ``sox rate -v -p 30
                              -b 92``) of tonal material and of wideband mixes: aliasing False, upsampled None,
                              imaging False.  Fact: folded leak <= -80 dB (else dropped).
    native, speech            material made at the file's rate, reaching its Nyquist: upsampled None, imaging False,
                              aliasing False.
    lowpass                   the native mix through a mastering low-pass: upsampled None, imaging False, aliasing False.
    codec-shelf               lossy round trips at the file's own rate: upsampled None, imaging False (aliasing is
                              not labelled: codec filter banks are not alias-free).
AMBIGUOUS in theory (reported apart):
    ambiguous-upsampled-lowband   truly upsampled, but the measured 6 dB edge lies below 0.85 of the source Nyquist
                              (sox -b 74..84, some pedalboard round trips): from the spectrum alone it is a low-pass.
                              Labels as "upsampled" (true by construction).
    ambiguous-imaging-weak    an upsampler whose images measure between -70 and -40 dB: imaging key left out.
    ambiguous-resample-fold   pedalboard's Resample effect folding on its way down (leak > -80 dB, mostly noise onto
                              noise, which no detector can see as folding): upsampled_from_hz and imaging False kept,
                              aliasing key left out.
    ambiguous-codec-upsampled a codec at a lower rate whose own band ends outside 0.85-1.02 of that rate's Nyquist (or
                              pedalboard's GSM effect when its images are not clean): upsampled_from_hz kept (true),
                              but no converter cliff marks it.
    ambiguous-codec           libopus at 12-24 kbit/s: the decoder may run its speech layer at 8-16 kHz internally and
                              convert up by itself; upsampled key left out, imaging False.
    ambiguous-codec-shelf, ambiguous-lowpass   a codec round trip or mastering low-pass whose band limit is steep
                              (-3 dB to -40 dB within 12 % of its edge, measured: the filter's response, or the codec's
                              average transfer) with its -3 dB edge within 0.80-1.05 of a lower standard rate's
                              Nyquist, where a converter's cliff could sit.  Labels as "codec-shelf" / "lowpass".
    ambiguous-sample-hold     sample-and-hold with a fractional step (a non-standard rate): aliasing True, imaging
                              True, no upsampled key.

Material (own generators, wideband to Nyquist at the rate they are made at): mix (tilted noise bed, polyphonic
inharmonic notes, cymbal-like bursts; 5.1 LFE is the low end through a 120 Hz low-pass), speech (band-limited
glottal pulses through formant resonators, syllable envelopes, fricatives), sparse (plucks between silences),
noise (bed only), tonal (bright notes with partials up to Nyquist, for decimation).  Levels -30..-6 dBFS RMS,
peaks <= 0.98.  Durations 3-12 s (quick slice: 3 s).

Families whose tool is missing (sox, ffmpeg, resampy, pedalboard) are skipped and named in SKIPPED_FAMILIES.

Caution: the files hold loud, bright test material (naive oscillators, full-strength images, noise to Nyquist).
Keep monitoring low if you listen.
"""
from __future__ import annotations

import math
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from typing import Iterator

import numpy as np
from scipy import fft as sfft
from scipy import signal
from scipy.ndimage import uniform_filter1d

SET_NAME = "validation"
SEED_RANGE = range(7000, 8000)
STANDARD_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400, 192000)
CHANNEL_LABELS = {1: ["M"], 2: ["L", "R"], 6: ["L", "R", "C", "LFE", "Ls", "Rs"]}
LFE_INDEX = 3
PEAK_MAX = 0.98
MAX_SAMPLES = 1_800_000           # frames x channels per case (house choice: keeps a seed near three minutes)

# label thresholds (house choices)
EDGE_LO_FRAC = 0.85               # a converter's 6 dB edge, as a fraction of the source Nyquist, for "upsampled"
EDGE_HI_FRAC = 1.0
CODEC_EDGE_HI_FRAC = 1.02
IMAGE_MIN_DB = -40.0              # images a positive must reach
IMAGE_MAX_NEG_DB = -70.0          # images a clean upsampler may leave
FOLD_MIN_DB = -30.0               # folded energy a positive must reach
LEAK_MAX_DB = -80.0               # folded leak a proper down-converter may leave

SOX = shutil.which("sox")
FFMPEG = shutil.which("ffmpeg")
try:
    import resampy  # noqa: F401
    HAVE_RESAMPY = True
except Exception:  # pragma: no cover - depends on the machine
    HAVE_RESAMPY = False
try:
    import pedalboard  # noqa: F401
    import pedalboard.io  # noqa: F401
    HAVE_PEDALBOARD = True
except Exception:  # pragma: no cover
    HAVE_PEDALBOARD = False
SKIPPED_FAMILIES: list[str] = []


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
    facts: dict = field(default_factory=dict)   # measured construction facts (not read by the scorer)
    note: str = ""


def print_versions(stream=sys.stdout) -> dict:
    """Print (and return) the versions of the tools this corpus runs."""
    v = {"numpy": np.__version__, "scipy": __import__("scipy").__version__}
    if HAVE_RESAMPY:
        import resampy
        v["resampy"] = resampy.__version__
    if HAVE_PEDALBOARD:
        import pedalboard
        v["pedalboard"] = pedalboard.__version__
    for prog, args in ((SOX, ["--version"]), (FFMPEG, ["-version"])):
        if prog:
            out = subprocess.run([prog, *args], capture_output=True, text=True).stdout.strip().splitlines()
            v[os.path.basename(prog)] = out[0] if out else "?"
    for k, val in v.items():
        print(f"{k}: {val}", file=stream)
    return v


# ------------------------------------------------------------------------------------------------------------
# small helpers
# ------------------------------------------------------------------------------------------------------------

def _mid(x: np.ndarray, rate: int, edge_s: float = 0.2) -> np.ndarray:
    """x without its first and last edge_s seconds (the FFT band split wraps around at the ends)."""
    m = int(edge_s * rate)
    return x[m:x.shape[0] - m] if x.shape[0] > 4 * m else x


def _db(a: float, b: float) -> float:
    return 10.0 * math.log10(max(a, 1e-30) / max(b, 1e-30))


def _energy(x: np.ndarray) -> float:
    return float(np.sum(np.square(x, dtype=np.float64)))


def _fit(x: np.ndarray, n: int) -> np.ndarray:
    """Trim or zero-pad the frame axis to n frames."""
    if x.shape[0] >= n:
        return x[:n]
    return np.concatenate([x, np.zeros((n - x.shape[0],) + x.shape[1:])], axis=0)


def set_level(x: np.ndarray, level_db: float) -> tuple[np.ndarray, float]:
    """Scale to level_db dBFS RMS over all channels, then down if the peak passes PEAK_MAX."""
    rms = math.sqrt(max(_energy(x) / x.size, 1e-30))
    y = x * (10 ** (level_db / 20) / rms)
    pk = float(np.max(np.abs(y)))
    if pk > PEAK_MAX:
        y *= PEAK_MAX / pk
    return y, 20 * math.log10(math.sqrt(_energy(y) / y.size))


def band_split(x: np.ndarray, rate: int, cut_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """Brick-wall split along frames in the FFT domain: (below cut_hz, above cut_hz)."""
    n = x.shape[0]
    m = sfft.next_fast_len(n, real=True)                 # zero-padded to a fast length; the ends are not used
    X = sfft.rfft(x, m, axis=0)
    f = np.fft.rfftfreq(m, 1.0 / rate)
    hi = X.copy()
    X[f >= cut_hz] = 0
    hi[f < cut_hz] = 0
    return sfft.irfft(X, m, axis=0)[:n], sfft.irfft(hi, m, axis=0)[:n]


def psd(x: np.ndarray, rate: int, df_hz: float = 25.0) -> tuple[np.ndarray, np.ndarray]:
    """Averaged periodogram (Welch: Hann frames, half overlap, density per Hz) summed over channels, bins about
    df_hz apart."""
    if x.ndim == 1:
        x = x[:, None]
    nper = int(2 ** round(math.log2(rate / df_hz)))
    nper = min(nper, 1 << int(math.log2(max(256, x.shape[0]))))
    w = np.hanning(nper + 2)[1:-1]
    hop = nper // 2
    nseg = max(1, (x.shape[0] - nper) // hop + 1)
    acc = np.zeros(nper // 2 + 1)
    for c in range(x.shape[1]):
        fr = np.lib.stride_tricks.sliding_window_view(x[:, c], nper)[::hop][:nseg]
        acc += np.sum(np.abs(np.fft.rfft(fr * w, axis=1)) ** 2, axis=0)
    p = acc / (nseg * rate * np.sum(w ** 2))
    p[1:-1] *= 2
    return np.fft.rfftfreq(nper, 1.0 / rate), p


def band_energy(f: np.ndarray, p: np.ndarray, lo: float, hi: float) -> float:
    m = (f >= lo) & (f < hi)
    return float(p[m].sum())


def image_db(y: np.ndarray, rate: int, src_rate: int) -> float:
    """Energy between 1.05x the source Nyquist and 0.995x the file's Nyquist, relative to below the source Nyquist."""
    f, p = psd(y, rate)
    nyq = src_rate / 2
    return _db(band_energy(f, p, 1.05 * nyq, 0.995 * rate / 2), band_energy(f, p, 20.0, nyq))


def transfer_edge_frac(x: np.ndarray, src_rate: int, y: np.ndarray, dst_rate: int, nyq_hz: float | None = None) -> float:
    """The converter's 6 dB edge from the measured transfer sqrt(Pyy/Pxx), as a fraction of nyq_hz (default: the
    source Nyquist).  Scans upward from 0.5x nyq_hz; the transfer is smoothed over about 1 % of nyq_hz."""
    fx, px = psd(x, src_rate)
    fy, py = psd(y, dst_rate)
    nyq = nyq_hz or src_rate / 2
    m = (fy > 0.3 * nyq) & (fy < nyq * 1.0)
    if not m.any():
        return float("nan")
    pxi = np.interp(fy[m], fx, px)
    h_db = 10 * np.log10(np.maximum(py[m], 1e-30) / np.maximum(pxi, 1e-30))
    w = max(1, int(0.01 * nyq / (fy[1] - fy[0])))
    h_db = uniform_filter1d(h_db, w, mode="nearest")
    ref = float(np.median(h_db[(fy[m] > 0.3 * nyq) & (fy[m] < 0.5 * nyq)]))
    fm = fy[m]
    below = np.nonzero((fm >= 0.5 * nyq) & (h_db < ref - 6.0))[0]
    return float(fm[below[0]] / nyq) if below.size else 1.0


def transfer_points(x: np.ndarray, y: np.ndarray, rate: int) -> tuple[float, float]:
    """(-3 dB, -40 dB) frequencies of the measured transfer sqrt(Pyy/Pxx) of a process run at one rate (codecs:
    an average over the file), scanning up from 1 kHz; smoothed over about 1 % of Nyquist."""
    f, px = psd(x, rate)
    _, py = psd(y, rate)
    h = 10 * np.log10(np.maximum(py, 1e-30) / np.maximum(px, 1e-30))
    h = uniform_filter1d(h, max(1, int(0.01 * rate / 2 / (f[1] - f[0]))), mode="nearest")
    ref = float(np.median(h[(f > 1000) & (f < 5000)]))
    m = f > 1000
    i3 = np.nonzero(m & (h < ref - 3))[0]
    i40 = np.nonzero(m & (h < ref - 40))[0]
    return (float(f[i3[0]]) if i3.size else rate / 2), (float(f[i40[0]]) if i40.size else rate / 2)


def steep_near_rates(f3_hz: float, f40_hz: float, rate: int) -> tuple[bool, list[int]]:
    """A band limit that falls from -3 dB to -40 dB within 12 % of its edge, and the lower standard rates whose
    Nyquist lies within 0.80-1.05 of that edge (a converter's cliff could sit there)."""
    steep = (f40_hz - f3_hz) / f3_hz < 0.12
    near = [r for r in STANDARD_RATES_HZ if r < rate and 0.80 <= f3_hz / (r / 2) <= 1.05]
    return bool(steep), near


def spectrum_edge_frac(y: np.ndarray, rate: int, src_rate: int, drop_db: float = 30.0) -> float:
    """Where the file's own spectrum ends, as a fraction of src_rate's Nyquist: the highest frequency whose smoothed
    PSD stays within drop_db of its median level between 0.2 and 0.5 of that Nyquist (for material whose source
    spectrum is not at hand, e.g. codec output)."""
    f, p = psd(y, rate)
    nyq = src_rate / 2
    pdb = 10 * np.log10(np.maximum(p, 1e-30))
    w = max(1, int(0.01 * nyq / (f[1] - f[0])))
    pdb = uniform_filter1d(pdb, w, mode="nearest")
    ref = float(np.median(pdb[(f > 0.2 * nyq) & (f < 0.5 * nyq)]))
    ok = np.nonzero((f < 1.2 * nyq) & (pdb > ref - drop_db))[0]
    return float(f[ok[-1]] / nyq) if ok.size else 0.0


def lowpass_steepness(b, a, rate: int) -> tuple[float, float]:
    """(-3 dB frequency, -40 dB frequency) of a filter from its response on a fine grid."""
    w, h = signal.freqz(b, a, worN=1 << 16, fs=rate)
    hdb = 20 * np.log10(np.maximum(np.abs(h), 1e-12))
    i3 = np.nonzero(hdb < -3)[0]
    i40 = np.nonzero(hdb < -40)[0]
    return (float(w[i3[0]]) if i3.size else rate / 2), (float(w[i40[0]]) if i40.size else rate / 2)


# ------------------------------------------------------------------------------------------------------------
# material
# ------------------------------------------------------------------------------------------------------------

def noise_bed(n: int, rate: int, rng: np.random.Generator, tilt_db_oct: float = -2.0) -> np.ndarray:
    """White noise shaped in the FFT domain: flat to 500 Hz, tilt_db_oct above, up to Nyquist."""
    m = sfft.next_fast_len(n, real=True)
    X = sfft.rfft(rng.standard_normal(m))
    f = np.fft.rfftfreq(m, 1.0 / rate)
    g = np.where(f < 500, 1.0, (np.maximum(f, 1.0) / 500) ** (tilt_db_oct / 6.0206))
    g[0] = 0
    return sfft.irfft(X * g, m)[:n]


def _env(n: int, rate: int, att_s: float, dec_s: float) -> np.ndarray:
    t = np.arange(n) / rate
    return np.minimum(1.0, t / max(att_s, 1e-4)) * np.exp(-t / max(dec_s, 1e-3))


def notes(n: int, rate: int, rng: np.random.Generator, voices: int, f0_lo: float, f0_hi: float,
          max_partials: int, slope: float, to_nyquist: bool = False, vib: bool = True) -> np.ndarray:
    """Polyphonic additive notes (slightly stretched partials, decays, vibrato), all partials below 0.97x Nyquist.
    to_nyquist: choose f0 so the partial series reaches Nyquist (bright tonal material)."""
    out = np.zeros(n)
    nyq = rate / 2
    for _ in range(voices):
        pos = int(rng.integers(0, max(1, n // 6)))
        while pos < n:
            ln = int(min(n - pos, rate * rng.uniform(0.4, 1.6)))
            if ln < rate * 0.05:
                break
            if to_nyquist:
                f0 = float(rng.uniform(max(f0_lo, 0.97 * nyq / max_partials), max(f0_hi, 0.97 * nyq / max_partials * 1.3)))
            else:
                f0 = float(np.exp(rng.uniform(np.log(f0_lo), np.log(f0_hi))))
            t = np.arange(ln) / rate
            vib_hz, vib_depth = rng.uniform(4, 6.5), (rng.uniform(0.002, 0.006) if vib else 0.0)
            inst = f0 * (1 + vib_depth * np.sin(2 * np.pi * vib_hz * t))
            ph = 2 * np.pi * np.cumsum(inst) / rate
            stretch = rng.uniform(0, 4e-4)
            env = _env(ln, rate, rng.uniform(0.003, 0.03), rng.uniform(0.2, 1.5))
            tone = np.zeros(ln)
            for k in range(1, max_partials + 1):
                ratio = k * (1 + stretch * k * k) if not to_nyquist else k
                if f0 * ratio * (1 + vib_depth) >= 0.97 * nyq:
                    break
                amp = k ** (-slope) * rng.uniform(0.6, 1.0)
                kdec = k * (rng.uniform(0.0, 0.3) if not to_nyquist else 0.02)
                tone += amp * np.sin(ratio * ph + rng.uniform(0, 2 * np.pi)) * np.exp(-t * kdec)
            out[pos:pos + ln] += tone * env
            pos += int(ln * rng.uniform(0.6, 1.1))
    return out


def bursts(n: int, rate: int, rng: np.random.Generator, per_s: float = 2.0) -> np.ndarray:
    """Cymbal-like bursts: high-passed noise with fast decays (content up to Nyquist)."""
    out = np.zeros(n)
    sos = signal.butter(4, min(6000, 0.3 * rate) / (rate / 2), "highpass", output="sos")
    for _ in range(max(1, int(per_s * n / rate))):
        p = int(rng.integers(0, n))
        ln = min(n - p, int(rate * rng.uniform(0.1, 0.5)))
        if ln < 16:
            continue
        out[p:p + ln] += signal.sosfilt(sos, rng.standard_normal(ln)) * _env(ln, rate, 0.001, rng.uniform(0.04, 0.2))
    return out


def speech(n: int, rate: int, rng: np.random.Generator) -> np.ndarray:
    """Speech-like: band-limited glottal pulses (windowed-sinc impulses at fractional positions) through three formant
    resonators that move per syllable, syllable envelopes with pauses, fricative noise bursts up to Nyquist."""
    voiced = np.zeros(n + 64)
    half = 16
    taps = np.arange(-half, half + 1)
    t = 0.0
    f0_base = rng.uniform(95, 210)
    while t < n - 40:
        f0 = f0_base * (1 + 0.15 * math.sin(2 * math.pi * 0.7 * t / rate) + 0.02 * rng.standard_normal())
        i, frac = int(t), t - int(t)
        k = np.sinc(0.92 * (taps - frac)) * 0.92 * np.hanning(2 * half + 3)[1:-1]
        voiced[i + 16: i + 16 + 2 * half + 1] += k
        t += rate / f0
    voiced = voiced[16:16 + n]
    voiced = signal.lfilter([1.0], [1.0, -0.95], voiced)          # glottal roll-off
    out = np.zeros(n)
    pos = 0
    fric_sos = signal.butter(4, min(3500, 0.2 * rate) / (rate / 2), "highpass", output="sos")
    while pos < n:
        ln = int(min(n - pos, rate * rng.uniform(0.12, 0.35)))
        seg = voiced[pos:pos + ln].copy()
        y = np.zeros(ln)
        for fc, bw in ((rng.uniform(300, 850), 80), (rng.uniform(900, 2300), 120), (rng.uniform(2400, 3400), 180)):
            fc = min(fc, 0.45 * rate)
            r = math.exp(-math.pi * bw / rate)
            y += signal.lfilter([1 - r], [1, -2 * r * math.cos(2 * math.pi * fc / rate), r * r], seg)
        env = np.sin(np.linspace(0, np.pi, ln)) ** 0.6
        out[pos:pos + ln] += y * env
        if rng.random() < 0.35:                                    # fricative after the syllable
            fl = int(min(n - pos - ln, rate * rng.uniform(0.05, 0.15)))
            if fl > 32:
                out[pos + ln:pos + ln + fl] += 0.3 * signal.sosfilt(fric_sos, rng.standard_normal(fl)) * np.hanning(fl)
        pos += ln + int(rate * (rng.uniform(0.02, 0.1) if rng.random() < 0.8 else rng.uniform(0.2, 0.5)))
    # faint room noise to Nyquist
    return out / (np.std(out) + 1e-12) + 10 ** (-55 / 20) * noise_bed(n, rate, rng, -1.0)


def sparse(n: int, rate: int, rng: np.random.Generator, floor_db: float | None) -> np.ndarray:
    """Plucks (bright partials + a short noise transient) between silences; floor_db None = digital silence."""
    out = np.zeros(n)
    pos = int(rate * rng.uniform(0.1, 0.4))
    while pos < n - rate * 0.1:
        ln = int(min(n - pos, rate * rng.uniform(0.3, 0.8)))
        p = notes(ln, rate, rng, 1, 150, 900, 24, 0.8)
        tr = rng.standard_normal(min(ln, int(0.004 * rate))) * 0.5
        p[:tr.size] += tr
        out[pos:pos + ln] += p * np.hanning(2 * ln)[ln:] if rng.random() < 0.5 else p
        pos += ln + int(rate * rng.uniform(0.4, 1.2))
    if floor_db is not None:
        out += 10 ** (floor_db / 20) * np.std(out) * rng.standard_normal(n)
    return out


def material(kind: str, n: int, rate: int, channels: int, rng: np.random.Generator) -> np.ndarray:
    """(n, channels) material made at ``rate``: mix, speech, sparse, noise or tonal."""
    if kind == "speech":
        mono = speech(n, rate, rng)
        chans = [mono * g for g in (1.0, 0.95, 0.85, 0.2, 0.3, 0.3)[:channels]] if channels > 1 else [mono]
        x = np.stack(chans, axis=1)
        for c in range(channels):
            x[:, c] += 10 ** (-50 / 20) * noise_bed(n, rate, rng, -1.0)
    elif kind == "sparse":
        floor = None if rng.random() < 0.4 else float(rng.uniform(-70, -50))
        x = np.stack([sparse(n, rate, rng, floor) for _ in range(channels)], axis=1)
    elif kind == "noise":
        x = np.stack([noise_bed(n, rate, rng, rng.uniform(-3, 0)) for _ in range(channels)], axis=1)
    elif kind == "tonal":
        tone = notes(n, rate, rng, int(rng.integers(2, 4)), 300, 1500, 48, 0.6, to_nyquist=True)
        x = np.stack([tone * rng.uniform(0.7, 1.0) + 0.02 * np.std(tone) * noise_bed(n, rate, rng, -1.0)
                      for _ in range(channels)], axis=1)
    else:   # mix
        tone = notes(n, rate, rng, int(rng.integers(3, 6)), 70, 1200, 16, 1.0)
        tone /= np.std(tone) + 1e-12
        cym = bursts(n, rate, rng)
        cym /= np.std(cym) + 1e-12
        x = np.zeros((n, channels))
        for c in range(channels):
            pan = rng.uniform(0.4, 1.0)
            bed = noise_bed(n, rate, rng, rng.uniform(-3.0, -1.0))
            x[:, c] = pan * tone + 0.25 * cym * rng.uniform(0.5, 1) + 0.3 * bed / (np.std(bed) + 1e-12)
    if channels == 6:
        sos = signal.butter(4, 120 / (rate / 2), output="sos")
        x[:, LFE_INDEX] = signal.sosfilt(sos, x[:, :3].sum(axis=1))
    return x


# ------------------------------------------------------------------------------------------------------------
# tools
# ------------------------------------------------------------------------------------------------------------

def _run(cmd: list[str], data: bytes | None = None) -> bytes:
    p = subprocess.run(cmd, input=data, capture_output=True)
    if p.returncode != 0:
        raise RuntimeError(f"{' '.join(cmd)} failed: {p.stderr.decode(errors='replace')[-400:]}")
    return p.stdout


def sox_effect(x: np.ndarray, rate: int, out_rate: int, effect: list[str]) -> np.ndarray:
    """Run x (frames, channels) through ``sox`` with the given effect chain; float64 raw in and out."""
    raw = ["-t", "raw", "-e", "floating-point", "-b", "64", "-c", str(x.shape[1])]
    g = 0.25 / max(float(np.max(np.abs(x))), 1e-12)      # sox works in 32-bit integers: keep far from clipping
    out = _run([SOX, "-D", "-R", "-V1", *raw, "-r", str(rate), "-", *raw, "-r", str(out_rate), "-", *effect],
               np.ascontiguousarray(x * g, dtype="<f8").tobytes())
    return np.frombuffer(out, dtype="<f8").reshape(-1, x.shape[1]) / g


def ffmpeg_aresample(x: np.ndarray, rate: int, out_rate: int, opts: dict) -> np.ndarray:
    af = f"aresample={out_rate}" + "".join(f":{k}={v}" for k, v in opts.items())
    cmd = [FFMPEG, "-nostdin", "-v", "error", "-f", "f64le", "-ar", str(rate), "-ac", str(x.shape[1]), "-i", "pipe:0",
           "-af", af, "-c:a", "pcm_f64le", "-f", "f64le", "pipe:1"]
    g = 0.25 / max(float(np.max(np.abs(x))), 1e-12)
    out = _run(cmd, np.ascontiguousarray(x * g, dtype="<f8").tobytes())
    return np.frombuffer(out, dtype="<f8").reshape(-1, x.shape[1]) / g


# codec: (encoder args, container, extension)
CODECS = {
    "mp2": (["-c:a", "mp2"], "mp2"),
    "twolame": (["-c:a", "libtwolame"], "mp2"),
    "ac3": (["-c:a", "ac3"], "ac3"),
    "eac3": (["-c:a", "eac3"], "eac3"),
    "aac": (["-c:a", "aac"], "adts"),
    "vorbis": (["-c:a", "libvorbis"], "ogg"),
    "wmav2": (["-c:a", "wmav2"], "asf"),
    "opus": (["-c:a", "libopus"], "ogg"),
    "g722": (["-c:a", "g722"], "wav"),
    "gsm": (["-c:a", "libgsm"], "gsm"),
    "speex": (["-c:a", "libspeex"], "ogg"),
    "nellymoser": (["-c:a", "nellymoser"], "flv"),
}


def ffmpeg_codec(x: np.ndarray, rate: int, codec: str, args: list[str]) -> np.ndarray:
    """Encode x at ``rate`` with ffmpeg, decode back to float at the same rate; aligned by cross-correlation."""
    enc, fmt = CODECS[codec]
    with tempfile.TemporaryDirectory(prefix="cvc-") as tmp:
        path = os.path.join(tmp, "coded.bin")
        _run([FFMPEG, "-nostdin", "-v", "error", "-y", "-f", "f64le", "-ar", str(rate), "-ac", str(x.shape[1]),
              "-i", "pipe:0", *enc, *args, "-f", fmt, path], np.ascontiguousarray(x, dtype="<f8").tobytes())
        demux = ["-f", "gsm", "-ar", str(rate)] if fmt == "gsm" else []       # raw GSM carries no header
        out = _run([FFMPEG, "-nostdin", "-v", "error", *demux, "-i", path, "-ar", str(rate), "-ac", str(x.shape[1]),
                    "-c:a", "pcm_f64le", "-f", "f64le", "pipe:1"])
    y = np.frombuffer(out, dtype="<f8").reshape(-1, x.shape[1]).copy()
    return _fit(_align(x, y), x.shape[0])


def _align(x: np.ndarray, y: np.ndarray, max_lag: int = 8192) -> np.ndarray:
    """Drop y's leading delay (codec priming) found by cross-correlating the channel sums."""
    a, b = x.sum(axis=1), y.sum(axis=1)
    m = min(a.size, b.size, 1 << 17)
    c = signal.fftconvolve(b[:m + max_lag], a[:m][::-1], mode="full")[m - 1:m - 1 + max_lag]
    lag = int(np.argmax(np.abs(c))) if c.size else 0
    return y[lag:]


def resampy_conv(x: np.ndarray, rate: int, out_rate: int, filt: str, **kw) -> np.ndarray:
    import resampy
    y = resampy.resample(np.ascontiguousarray(x.T), rate, out_rate, axis=-1, filter=filt, **kw).T
    return _fit(y, int(round(x.shape[0] * out_rate / rate)))


def pb_quality(name: str):
    import pedalboard
    return getattr(pedalboard.Resample.Quality, name)


def pedalboard_stream(x: np.ndarray, rate: int, out_rate: int, quality: str) -> np.ndarray:
    """pedalboard.io.StreamResampler, one way; its reported latency is removed."""
    import pedalboard.io as pio
    r = pio.StreamResampler(rate, out_rate, x.shape[1], pb_quality(quality))
    a = r.process(np.ascontiguousarray(x.T, dtype=np.float32))
    b = r.process()
    y = np.concatenate([a, b], axis=1).T.astype(np.float64)
    lat = int(round(r.input_latency * out_rate / rate))
    return _fit(y[lat:], int(round(x.shape[0] * out_rate / rate)))


def pedalboard_roundtrip(x: np.ndarray, rate: int, low_rate: int, quality: str) -> np.ndarray:
    """pedalboard's Resample effect: to low_rate and back to rate, one call."""
    import pedalboard
    fx = pedalboard.Resample(target_sample_rate=float(low_rate), quality=pb_quality(quality))
    y = fx(np.ascontiguousarray(x.T, dtype=np.float32), float(rate)).T.astype(np.float64)
    return _fit(y, x.shape[0])


def up_proper(x: np.ndarray, rate: int, out_rate: int, chain: dict) -> np.ndarray:
    """One proper (or deliberately weak) up-conversion chain described by ``chain``."""
    t = chain["tool"]
    n_out = int(round(x.shape[0] * out_rate / rate))
    if t == "resampy":
        return resampy_conv(x, rate, out_rate, chain["filter"])
    if t == "resampy-short":
        win = signal.windows.boxcar if chain["window"] == "boxcar" else signal.windows.hann
        return resampy_conv(x, rate, out_rate, "sinc_window", num_zeros=chain["zeros"], window=win,
                            rolloff=chain["rolloff"], precision=9)
    if t == "sox":
        return _fit(sox_effect(x, rate, out_rate, ["rate", *chain["opts"], str(out_rate)]), n_out)
    if t == "sox-upsample":
        eff = ["upsample", str(out_rate // rate)]
        if chain.get("biquad"):
            eff += ["lowpass", "-2", str(int(chain["biquad"]))]
        y = sox_effect(x, rate, out_rate, eff)
        return _fit(y * (out_rate // rate if chain.get("gain", True) else 1), n_out)
    if t == "ffmpeg":
        return _fit(ffmpeg_aresample(x, rate, out_rate, chain["opts"]), n_out)
    if t == "pb-stream":
        return pedalboard_stream(x, rate, out_rate, chain["quality"])
    raise ValueError(f"unknown chain {chain!r}")


# ------------------------------------------------------------------------------------------------------------
# naive oscillators and their band-limited twins
# ------------------------------------------------------------------------------------------------------------

def _voice_plan(n: int, rate: int, rng: np.random.Generator, voices: int, f0_lo: float, f0_hi: float) -> list[dict]:
    plan = []
    for _ in range(voices):
        pos = int(rng.integers(0, max(1, n // 8)))
        while pos < n - rate * 0.1:
            ln = int(min(n - pos, rate * rng.uniform(0.5, 1.8)))
            plan.append(dict(pos=pos, ln=ln, f0=float(np.exp(rng.uniform(np.log(f0_lo), np.log(f0_hi)))),
                             vib_hz=float(rng.uniform(4.5, 6.5)), vib=float(rng.uniform(0.003, 0.012)),
                             att=float(rng.uniform(0.005, 0.05)), dec=float(rng.uniform(0.4, 2.0)),
                             sus=float(rng.uniform(0.3, 0.8)), ph0=float(rng.uniform(0, 1)),
                             lfo_hz=float(rng.uniform(0.3, 2.0)), width=float(rng.uniform(0.15, 0.45)),
                             ratio=float(rng.uniform(1.3, 3.7)), index=float(rng.uniform(2.0, 7.0)),
                             ring_hz=float(rng.uniform(300, 3000))))
            pos += int(ln * rng.uniform(0.5, 1.0))
    return plan


def _adsr(ln: int, rate: int, v: dict) -> np.ndarray:
    t = np.arange(ln) / rate
    a = np.minimum(1.0, t / v["att"])
    d = v["sus"] + (1 - v["sus"]) * np.exp(-np.maximum(t - v["att"], 0) / v["dec"])
    rel = np.minimum(1.0, (ln - 1 - np.arange(ln)) / (0.03 * rate))
    return a * d * rel


def _cycles(ln: int, rate: int, v: dict, f0: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(phase in cycles, instantaneous frequency) with vibrato."""
    t = np.arange(ln) / rate
    inst = (f0 or v["f0"]) * (1 + v["vib"] * np.sin(2 * np.pi * v["vib_hz"] * t))
    return v["ph0"] + np.cumsum(inst) / rate, inst


def _taper(freq: np.ndarray, nyq: float):
    """Gain for a partial at freq: 1 up to 0.985 Nyquist, raised cosine to 0 at Nyquist (a scalar 1.0 when the
    partial never comes near)."""
    if float(np.max(freq)) < 0.985 * nyq:
        return 1.0
    x = np.clip((freq - 0.985 * nyq) / (0.015 * nyq), 0, 1)
    return 0.5 * (1 + np.cos(np.pi * x))


def _sync_table(ratio: float, kmax: int) -> np.ndarray:
    """Complex Fourier coefficients c_k (k=1..kmax) of one master period of a hard-synced sawtooth whose slave runs
    ``ratio`` times faster: s(u) = 2 frac(ratio u) - 1, u in [0, 1)."""
    m = 1 << 16
    u = np.arange(m) / m
    s = 2 * np.mod(ratio * u, 1.0) - 1
    s -= s.mean()
    return np.fft.rfft(s)[1:kmax + 1] / m


def _additive(cyc: np.ndarray, inst: np.ndarray, nyq: float, coef) -> np.ndarray:
    """sum_k 2 Re(c_k e^{2 pi i k cyc}) over the partials below Nyquist (tapered near it).  coef(k) gives c_k (a
    scalar or an array over time); the harmonics come from a complex recurrence (exact to ~1e-12 over 500 steps)."""
    z1 = np.exp(2j * np.pi * np.mod(cyc, 1.0))
    zk = z1.copy()
    out = np.zeros(cyc.size)
    fmin = float(np.min(inst))
    k = 1
    while k * fmin < nyq:
        g = _taper(k * inst, nyq)
        out += g * 2 * np.real(coef(k) * zk)
        zk *= z1
        k += 1
    return out


def synth(kind: str, n: int, rate: int, plan: list[dict], naive: bool) -> np.ndarray:
    """Render a voice plan with the named oscillator, naive (evaluated per sample) or band-limited."""
    nyq = rate / 2
    out = np.zeros(n)
    for v in plan:
        ln = v["ln"]
        cyc, inst = _cycles(ln, rate, v)
        t = np.arange(ln) / rate
        if kind == "pwm":
            width = v["width"] + 0.12 * np.sin(2 * np.pi * v["lfo_hz"] * t)      # pulse width swept by an LFO
            if naive:
                y = np.where(np.mod(cyc, 1.0) < width, 1.0, -1.0) - (2 * width - 1)
            else:
                # pulse of width d (+1 on [0,d), -1 elsewhere, mean removed):
                # sum_k 4/(k pi) sin(k pi d) cos(2 pi k u - k pi d), i.e. c_k = (2/(k pi)) sin(k pi d) e^{-i k pi d}
                zw1 = np.exp(-1j * np.pi * width)
                state = {"zw": np.ones(ln, complex)}

                def coef(k, state=state, zw1=zw1):
                    state["zw"] = state["zw"] * zw1                              # e^{-i k pi d}
                    return (2 / (k * np.pi)) * (-np.imag(state["zw"])) * state["zw"]
                y = _additive(cyc, inst, nyq, coef)
        elif kind == "sync":
            ratio = v["ratio"]
            if naive:
                y = 2 * np.mod(ratio * np.mod(cyc, 1.0), 1.0) - 1
                y -= np.mean(2 * np.mod(ratio * (np.arange(1 << 16) / (1 << 16)), 1.0) - 1)
            else:
                c = _sync_table(ratio, int(nyq / float(np.min(inst))) + 2)
                y = _additive(cyc, inst, nyq, lambda k, c=c: c[k - 1])
        elif kind == "wavetable":
            table = v["table"]
            L = table.size
            if naive:
                pos = np.mod(cyc, 1.0) * L
                i0 = np.floor(pos).astype(int)
                fr = pos - i0
                y = table[i0 % L] * (1 - fr) + table[(i0 + 1) % L] * fr
            else:
                # the linearly interpolated table is a periodic function whose Fourier series is the table's DFT
                # (periodic in k) times sinc^2(k/L) (linear interpolation = a triangle kernel); summed below Nyquist
                C = np.fft.rfft(table) / L

                def coef(k, C=C, L=L):
                    j = k % L
                    ck = C[j] if j <= L // 2 else np.conj(C[L - j])
                    return ck * np.sinc(k / L) ** 2
                y = _additive(cyc, inst, nyq, coef)
        elif kind == "ringmod":
            carrier = np.sin(2 * np.pi * v["ring_hz"] * t)
            if naive:
                y = (2 * np.mod(cyc, 1.0) - 1) * carrier
            else:
                # saw = -(2/pi) sum sin(2 pi k cyc)/k; times sin(wc t) gives sidebands k f0 -/+ fc:
                # a_k/2 [cos(A - B) - cos(A + B)]
                zc = np.exp(2j * np.pi * v["ring_hz"] * t)
                z1 = np.exp(2j * np.pi * np.mod(cyc, 1.0))
                zk = z1.copy()
                y = np.zeros(ln)
                k = 1
                fmin = float(np.min(inst))
                while k * fmin - v["ring_hz"] < nyq:
                    a = -(2 / np.pi) / k
                    lo_f, hi_f = np.abs(k * inst - v["ring_hz"]), k * inst + v["ring_hz"]
                    y += a * 0.5 * _taper(lo_f, nyq) * np.real(zk * np.conj(zc))
                    if k * fmin + v["ring_hz"] < nyq:
                        y -= a * 0.5 * _taper(hi_f, nyq) * np.real(zk * zc)
                    zk *= z1
                    k += 1
        elif kind == "fm":
            def fm_at(r: int) -> np.ndarray:
                m = ln * (r // rate)
                tt = np.arange(m) / r
                # exact phase of f0 (1 + vib sin(2 pi fv t)), so both renderings share it sample for sample
                ph = 2 * np.pi * v["f0"] * (tt + v["vib"] * (1 - np.cos(2 * np.pi * v["vib_hz"] * tt))
                                            / (2 * np.pi * v["vib_hz"]))
                ienv = v["index"] * (0.4 + 0.6 * np.exp(-tt / v["dec"]))
                return np.sin(ph + ienv * np.sin(v["ratio"] * ph))
            if naive:
                y = fm_at(rate)
            else:
                over = 8
                z = fm_at(rate * over) * _adsr(ln * over, rate * over, v)    # envelope applied before the cut
                lp = sfft.next_fast_len(ln, real=True)                        # the note ends at zero: pad freely
                Z = sfft.rfft(z, lp * over)
                y = sfft.irfft(Z[: lp // 2 + 1], lp)[:ln] / over
                out[v["pos"]:v["pos"] + ln] += y
                continue
        else:
            raise ValueError(kind)
        out[v["pos"]:v["pos"] + ln] += y * _adsr(ln, rate, v)
    return out


def bright_table(rng: np.random.Generator, L: int = 2048) -> np.ndarray:
    """A single-cycle table rich up to its own Nyquist (harmonics up to L/2 at 1/k^0.7, random phases)."""
    k = np.arange(1, L // 2)
    C = np.zeros(L // 2 + 1, complex)
    C[1:L // 2] = k ** -0.7 * np.exp(2j * np.pi * rng.uniform(0, 1, k.size))
    t = np.fft.irfft(C, L)
    return t / np.max(np.abs(t))


# ------------------------------------------------------------------------------------------------------------
# the plan
# ------------------------------------------------------------------------------------------------------------

UP_SOURCES = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200)
UP_TARGETS = (44100, 48000, 88200, 96000, 176400, 192000)


def _pair(rng: np.random.Generator, sources=UP_SOURCES, targets=UP_TARGETS, integer: bool = False) -> tuple[int, int]:
    while True:
        s = int(rng.choice(sources))
        d = int(rng.choice([t for t in targets if t > s] or [192000]))
        if integer and d % s:
            continue
        return s, d


def _lower_standard(rate: int, rng: np.random.Generator) -> int:
    cands = [r for r in STANDARD_RATES_HZ if r < rate and r >= rate / 4 and r >= 8000]
    return int(rng.choice(cands))


def build_plan(seed: int) -> list[dict]:
    rng = np.random.default_rng(seed)
    P: list[dict] = []

    def add(**kw):
        kw.setdefault("channels", int(rng.choice([1, 2, 2, 2, 6])))
        kw.setdefault("material", str(rng.choice(["mix", "mix", "speech", "sparse", "noise"])))
        kw.setdefault("dur", float(rng.uniform(3, 5.5) if rng.random() < 0.85 else rng.uniform(8, 12)))
        kw.setdefault("level", float(rng.uniform(-30, -6)))
        if kw["channels"] == 6 and kw.get("rate", 0) > 96000:
            kw["channels"] = 2                               # 5.1 at 176.4/192 kHz: too costly for 3 s (house choice)
        P.append(kw)

    # upsampled by proper (and some odd) converters
    up_chains = ([("resampy-kaiser_best", dict(tool="resampy", filter="kaiser_best"))] * 9
                 + [("resampy-kaiser_fast", dict(tool="resampy", filter="kaiser_fast"))] * 6)
    for p in (5, 15, 35, 65, 85, 95):
        up_chains += [(f"sox-cli-rate-p{p}", dict(tool="sox", opts=[str(rng.choice(["-h", "-v"])), "-p", str(p)]))] * 2
    for b in (74, 77, 80, 84):
        up_chains += [("sox-cli-rate-lowband", dict(tool="sox", opts=["-v", "-b", str(b)]))]
    for opts in (["-h", "-a"], ["-v", "-a"], ["-v", "-a", "-b", "90"], ["-h", "-a", "-b", "95"], ["-v", "-a", "-b", "97"]):
        up_chains += [("sox-cli-rate-alias", dict(tool="sox", opts=opts))]
    for fs, co in ((16, 0.9), (32, 0.95), (64, 0.98), (24, 0.93), (48, 0.97), (32, 0.91)):
        up_chains += [("ffmpeg-swr-cubic", dict(tool="ffmpeg", opts=dict(filter_type="cubic", filter_size=fs, cutoff=co)))]
    for ps, fs in ((4, 128), (6, 128), (8, 96), (3, 0), (5, 0), (7, 0)):
        o = dict(linear_interp=0, exact_rational=0, phase_shift=ps)
        if fs:
            o.update(filter_size=fs, cutoff=0.91)
        up_chains += [("ffmpeg-swr-nointerp", dict(tool="ffmpeg", opts=o))]
    for q in ("WindowedSinc128", "WindowedSinc64", "WindowedSinc", "WindowedSinc16"):
        up_chains += [(f"pedalboard-stream-{q.lower()}", dict(tool="pb-stream", quality=q))] * (1 if q.endswith("16") else 2)
    for i, (fam, ch) in enumerate(up_chains):
        s, d = _pair(rng)
        mat = str(rng.choice(["speech", "speech", "mix"])) if s <= 16000 else None
        extra = {"material": mat} if mat else {}
        if fam.startswith("resampy"):
            extra["dur"] = float(rng.uniform(3, 4))         # resampy is the slowest tool here (house choice: cost)
        add(kind="up", family=fam, chain=ch, src=s, rate=d, **extra)

    # pedalboard Resample effect, WindowedSinc qualities: native material at rate d, down to s and back
    for q in ("WindowedSinc256", "WindowedSinc64", "WindowedSinc128", "WindowedSinc64", "WindowedSinc32", "WindowedSinc"):
        s, d = _pair(rng, sources=(16000, 22050, 24000, 32000, 44100, 48000), targets=(44100, 48000, 88200, 96000))
        add(kind="pb-roundtrip", family=f"pedalboard-resample-{q.lower()}", quality=q, src=s, rate=d)

    # one channel upsampled
    one_chains = [("resampy-kaiser_best", dict(tool="resampy", filter="kaiser_best")),
                  ("sox-cli-rate-p35", dict(tool="sox", opts=["-v", "-p", "35"])),
                  ("ffmpeg-swr-nointerp", dict(tool="ffmpeg", opts=dict(linear_interp=0, exact_rational=0, phase_shift=6,
                                                                        filter_size=128, cutoff=0.91))),
                  ("pedalboard-stream-windowedsinc128", dict(tool="pb-stream", quality="WindowedSinc128")),
                  ("sox-cli-rate-p85", dict(tool="sox", opts=["-h", "-p", "85"]))]
    for i in range(10):
        fam, ch = one_chains[i % len(one_chains)]
        chans = 2 if i < 6 else 6
        s, d = _pair(rng, sources=(22050, 32000, 44100, 48000),
                     targets=(48000, 88200, 96000, 192000) if chans == 2 else (48000, 88200, 96000))
        which = int(rng.choice([0, 1] if chans == 2 else [0, 1, 2, 4, 5]))
        add(kind="one", family=fam, chain=ch, src=s, rate=d, channels=chans, which=which, material="mix")

    # imaging: no or weak image filter, half of them with a proper twin (the same source through sox rate -v -p 45 -b 93)
    img_chains = ([("sox-cli-upsample", dict(tool="sox-upsample"))] * 4
                  + [("sox-cli-upsample-biquad", dict(tool="sox-upsample", biquad=0))] * 3
                  + [("resampy-short-sinc", dict(tool="resampy-short", zeros=z, window=w, rolloff=r))
                     for z, w, r in ((2, "boxcar", 1.0), (3, "hann", 0.97), (4, "boxcar", 0.99))]
                  + [(f"pedalboard-stream-{q.lower()}", dict(tool="pb-stream", quality=q))
                     for q in ("ZeroOrderHold", "Linear", "CatmullRom", "Lagrange", "WindowedSinc8", "WindowedSinc8")])
    for i, (fam, ch) in enumerate(img_chains):
        integer = fam.startswith("sox-cli-upsample")
        s, d = _pair(rng, sources=(8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000),
                     targets=(44100, 48000, 88200, 96000), integer=integer)
        ch = dict(ch)
        if ch.get("biquad") == 0:
            ch["biquad"] = int(0.5 * s * rng.uniform(0.9, 1.1))
        add(kind="up", family=fam, chain=ch, src=s, rate=d, twin=(i % 2 == 0), imaging_case=True)

    # naive synthesis and band-limited twins
    for i, kind in enumerate(["pwm", "sync", "fm", "wavetable", "ringmod"] * 4):
        r = int(rng.choice([44100, 48000, 44100, 48000, 88200, 96000]))
        add(kind="synth", osc=kind, rate=r, channels=int(rng.choice([1, 2])), dur=float(rng.uniform(3, 5)),
            voices=int(rng.integers(2, 5)), f0_lo=float(rng.choice([150, 300, 600])), f0_hi=float(rng.choice([1200, 2000])),
            material="synth")

    # unfiltered decimation (sox downsample) and sample-and-hold of tonal material; proper down-conversions
    decim_pairs = [(88200, 2), (96000, 2), (192000, 2), (192000, 4), (48000, 3), (96000, 3), (88200, 4),
                   (176400, 4), (96000, 4), (176400, 2)]
    for i in range(6):
        r0, m = decim_pairs[int(rng.integers(len(decim_pairs)))]
        add(kind="decim", family="sox-cli-downsample", src=r0, factor=m, rate=r0 // m, material="tonal",
            channels=int(rng.choice([1, 2])))
    for i in range(5):
        r0 = int(rng.choice([44100, 48000, 88200, 96000]))
        low = _lower_standard(r0, rng)
        add(kind="hold", family="pedalboard-resample-zeroorderhold", rate=r0, src=low, material="tonal",
            channels=int(rng.choice([1, 2])))
    for i in range(3):
        r0 = int(rng.choice([44100, 48000]))
        add(kind="crush", family="crush-hold", rate=r0, step=float(rng.uniform(2.3, 5.7)), material="tonal",
            channels=int(rng.choice([1, 2])))
    down_tools = ["resampy-kaiser_best", "sox-cli-rate-down", "resampy-kaiser_fast"]
    for i in range(12):
        r0 = int(rng.choice([88200, 96000, 176400, 192000, 48000]))
        d = int(rng.choice([r for r in (44100, 48000, 88200, 96000) if r < r0] or [44100]))
        add(kind="down", family=down_tools[i % 3], src=r0, rate=d,
            material="tonal" if i < 6 else "mix", channels=int(rng.choice([1, 2])))

    # native material at every rate, speech
    for i, r in enumerate(STANDARD_RATES_HZ + (44100, 48000, 96000)):
        add(kind="native", family="native", rate=r, material=["mix", "sparse", "noise", "mix"][i % 4])
    for r in (16000, 22050, 32000, 44100, 48000):
        add(kind="native", family="native", rate=r, material="speech", channels=1)

    # mastering low-passes
    lp = [("sox-sinc", dict(fc=20000, tbw=int(rng.choice([500, 1000, 2000])))), ("sox-sinc", dict(fc=19000, tbw=3000)),
          ("sox-sinc", dict(fc=20500, tbw=600)), ("sox-sinc", dict(fc=16000, tbw=1500)),
          ("sox-lowpass-biquad", dict(fc=18000)), ("sox-lowpass-biquad", dict(fc=20000)),
          ("bessel", dict(order=int(rng.integers(4, 9)), fc=19000)), ("bessel", dict(order=6, fc=21000)),
          ("cheby2", dict(order=int(rng.integers(6, 11)), rs=float(rng.choice([60, 80])), fc=21500)),
          ("cheby2", dict(order=8, rs=70.0, fc=23000)), ("cheby2", dict(order=10, rs=90.0, fc=19500))]
    for fam, prm in lp:
        add(kind="lowpass", family=fam, prm=prm, rate=int(rng.choice([44100, 48000, 88200, 96000])), material="mix")

    # lossy codecs at the file's own rate
    own = [("mp2", ["-b:a", "192k"], 48000), ("mp2", ["-b:a", "256k"], 44100), ("mp2", ["-b:a", "384k"], 32000),
           ("twolame", ["-b:a", "160k"], 48000), ("twolame", ["-b:a", "320k"], 44100),
           ("ac3", ["-b:a", "192k"], 48000), ("ac3", ["-b:a", "448k"], 48000), ("ac3", ["-b:a", "128k"], 44100),
           ("eac3", ["-b:a", "96k"], 48000), ("eac3", ["-b:a", "256k"], 48000),
           ("aac", ["-b:a", "32k"], 44100), ("aac", ["-b:a", "64k"], 48000), ("aac", ["-b:a", "160k"], 48000),
           ("vorbis", ["-q:a", "-1"], 44100), ("vorbis", ["-q:a", "0"], 48000), ("vorbis", ["-q:a", "1"], 44100),
           ("wmav2", ["-b:a", "128k"], 44100), ("wmav2", ["-b:a", "192k"], 48000),
           ("pb-mp3", [2.0], 44100), ("pb-mp3", [6.5], 48000)]
    for codec, args, r in own:
        ch = int(rng.choice([1, 2])) if codec not in ("ac3", "eac3", "twolame") else int(rng.choice([2, 6] if "ac3" in codec else [2]))
        add(kind="codec", codec=codec, args=args, rate=r, channels=ch, material=str(rng.choice(["mix", "mix", "speech"])))
    for br in ("12k", "16k", "24k"):
        add(kind="codec", codec="opus", args=["-b:a", br], rate=48000, channels=1, material="speech")

    # codec at a lower rate, then converted up properly (upsampled by construction)
    low = [("mp2", ["-b:a", "96k"], 16000), ("mp2", ["-b:a", "128k"], 22050), ("mp2", ["-b:a", "160k"], 24000),
           ("g722", [], 16000), ("gsm", [], 8000), ("speex", [], 16000), ("speex", [], 8000),
           ("nellymoser", [], 11025), ("nellymoser", [], 22050), ("ac3", ["-b:a", "192k"], 32000), ("pb-gsm", [], 8000)]
    for codec, args, s in low:
        d = int(rng.choice([t for t in (44100, 48000, 96000) if t > s]))
        mono = codec in ("g722", "gsm", "speex", "nellymoser", "pb-gsm")
        add(kind="codec-up", codec=codec, args=args, src=s, rate=d, channels=1 if mono else int(rng.choice([1, 2])),
            material="speech" if s <= 16000 else str(rng.choice(["mix", "speech"])),
            up=str(rng.choice(["sox-p40", "pb-sinc64"])))

    for i, p in enumerate(P):
        p["idx"] = i
    return P


def _quick_indices(plan: list[dict]) -> list[int]:
    """About 20 cases: the first of each (kind, family-ish) bucket, cheapest first."""
    want = ["up:resampy-kaiser_best", "up:sox-cli-rate-p35", "up:ffmpeg-swr-cubic", "up:pedalboard-stream-windowedsinc64",
            "up:sox-cli-rate-lowband", "pb-roundtrip", "one", "up:sox-cli-upsample", "up:pedalboard-stream-zeroorderhold",
            "up:resampy-short-sinc", "synth:pwm", "synth:sync", "synth:fm", "decim", "hold", "down", "native",
            "native:speech", "lowpass", "codec", "codec:opus", "codec-up:g722", "crush",
            "pb-roundtrip:pedalboard-resample-windowedsinc"]
    out = []
    for w in want:
        k, _, sub = w.partition(":")
        for p in plan:
            if p["kind"] != k or p["idx"] in out:
                continue
            tag = p.get("family") or p.get("osc") or p.get("codec") or ""
            if k == "synth":
                tag = p["osc"]
            if k == "native" and sub != "speech" and p["material"] == "speech":
                continue
            if sub and sub != tag and not (k == "native" and sub == "speech" and p["material"] == "speech"):
                continue
            if p.get("rate", 48000) > 96000:
                continue
            out.append(p["idx"])
            break
    return out


# ------------------------------------------------------------------------------------------------------------
# rendering
# ------------------------------------------------------------------------------------------------------------

def _family_ok(p: dict) -> bool:
    fam = p.get("family", "") or ""
    tool = (p.get("chain") or {}).get("tool", "")
    needs = []
    if fam.startswith("sox") or tool.startswith("sox") or p["kind"] == "decim" or p.get("up") == "sox-v":
        needs.append(("sox", SOX is not None))
    if fam.startswith("ffmpeg") or p["kind"] in ("codec", "codec-up") and not str(p.get("codec", "")).startswith("pb-"):
        needs.append(("ffmpeg", FFMPEG is not None))
    if fam.startswith("resampy") or tool.startswith("resampy"):
        needs.append(("resampy", HAVE_RESAMPY))
    if p.get("twin") or p.get("up") == "sox-p40":
        needs.append(("sox", SOX is not None))
    if "pedalboard" in fam or tool == "pb-stream" or str(p.get("codec", "")).startswith("pb-") \
            or p.get("up") == "pb-sinc64":
        needs.append(("pedalboard", HAVE_PEDALBOARD))
    return all(ok for _, ok in needs)


def _labels(ch: int) -> list[str]:
    return list(CHANNEL_LABELS.get(ch, [f"ch{i + 1}" for i in range(ch)]))


def _name(seed: int, p: dict, *parts) -> str:
    s = "-".join([f"c{seed}", f"{p['idx']:03d}", *[str(x) for x in parts if x not in (None, "")]])
    return re.sub(r"[^a-z0-9_-]+", "", s.lower().replace(".", "_"))


def _khz(r: int) -> str:
    return f"{r / 1000:g}k".replace(".", "_")


def _render(seed: int, p: dict, quick: bool) -> Iterator[Case]:
    rng = np.random.default_rng([seed, p["idx"], 77])
    dur = 3.0 if quick else p["dur"]
    k = p["kind"]
    ch = p["channels"]
    rate = p["rate"]

    def frames(r):
        # caps the file and any higher-rate intermediate at MAX_SAMPLES
        return int(max(3.0, min(dur, MAX_SAMPLES / ch / max(rate, r))) * r)

    if k in ("up", "one"):
        s, d = p["src"], p["rate"]
        n_src = frames(s)
        if k == "one":
            nat = material("mix", int(round(n_src * d / s)), d, ch, rng)
            srcx = material("mix", n_src, s, 1, rng)
            y1 = up_proper(srcx, s, d, p["chain"])
            edge = transfer_edge_frac(srcx, s, y1, d)
            img = image_db(y1, d, s)
            natx = nat[:, [c for c in range(ch) if c != p["which"] and c != (LFE_INDEX if ch == 6 else -1)][0]]
            fnat, pnat = psd(natx[:, None], d)
            # a native channel reaches the file's Nyquist: energy in its top 10 % vs all
            nat_hi = _db(band_energy(fnat, pnat, 0.9 * d / 2, 0.99 * d / 2), band_energy(fnat, pnat, 20, d / 2))
            y = nat.copy()
            y1 = y1[:, 0] * (np.std(nat[:, p["which"]]) / (np.std(y1) + 1e-12))
            y[:, p["which"]] = y1
            if not (EDGE_LO_FRAC <= edge <= EDGE_HI_FRAC and img <= IMAGE_MAX_NEG_DB and nat_hi > -60):
                return
            y, lvl = set_level(y, p["level"])
            lab = _labels(ch)
            yield Case(_name(seed, p, p["family"], "one", lab[p["which"]], _khz(s), _khz(d)), SET_NAME, p["family"],
                       "upsampled-one-channel", d, y, {"upsampled_channels": [lab[p["which"]]]}, lab,
                       dict(edge_frac=edge, image_db=img, native_hi_db=nat_hi, level_db=lvl, src_hz=s),
                       f"channel {lab[p['which']]} from {s} Hz via {p['chain']}")
            return
        x = material(p["material"], n_src, s, ch, rng)
        y = up_proper(x, s, d, p["chain"])
        edge = transfer_edge_frac(x, s, y, d)
        img = image_db(y, d, s)
        facts = dict(edge_frac=edge, image_db=img, src_hz=s)
        expect = {"upsampled_from_hz": s}
        if img >= IMAGE_MIN_DB:
            group, expect["imaging_detected"] = "imaging", True
        elif img <= IMAGE_MAX_NEG_DB:
            expect["imaging_detected"] = False
            group = "upsampled" if EDGE_LO_FRAC <= edge <= EDGE_HI_FRAC else "ambiguous-upsampled-lowband"
        else:
            group = "ambiguous-imaging-weak"
        if p.get("imaging_case") and group == "upsampled":
            group = "upsampled"          # a "weak" filter that turned out clean: labelled as what it is
        y, lvl = set_level(y, p["level"])
        facts["level_db"] = lvl
        yield Case(_name(seed, p, p["family"], p["material"], _khz(s), _khz(d)), SET_NAME, p["family"], group, d, y,
                   expect, _labels(ch), facts, f"{p['material']} {ch} ch from {s} Hz via {p['chain']}")
        if p.get("twin"):
            y2 = _fit(sox_effect(x, s, d, ["rate", "-v", "-p", "45", "-b", "93", str(d)]), y.shape[0])
            e2, i2 = transfer_edge_frac(x, s, y2, d), image_db(y2, d, s)
            if EDGE_LO_FRAC <= e2 <= EDGE_HI_FRAC and i2 <= IMAGE_MAX_NEG_DB:
                y2, l2 = set_level(y2, p["level"])
                yield Case(_name(seed, p, "twin-sox-cli-rate-p45", _khz(s), _khz(d)), SET_NAME, "sox-cli-rate-p45-twin",
                           "upsampled", d, y2, {"upsampled_from_hz": s, "imaging_detected": False}, _labels(ch),
                           dict(edge_frac=e2, image_db=i2, src_hz=s, level_db=l2, twin_of=p["family"]),
                           "proper twin of an imaging case")
        return

    if k == "pb-roundtrip":
        s, d = p["src"], p["rate"]
        n = frames(d)
        x = material(p["material"], n, d, ch, rng)
        y = pedalboard_roundtrip(x, d, s, p["quality"])
        edge = transfer_edge_frac(x, d, y, d, s / 2)          # as a fraction of the low rate's Nyquist
        img = image_db(y, d, s)
        # the Resample effect's way down: content above s/2 that folds back (measured away from the file's ends)
        _, xhi = band_split(x, d, s / 2)
        leak = _db(_energy(_mid(pedalboard_roundtrip(xhi, d, s, p["quality"]), d)), _energy(_mid(y, d)))
        facts = dict(edge_frac=edge, image_db=img, fold_leak_db=leak, src_hz=s)
        if img > IMAGE_MAX_NEG_DB:
            return
        expect = {"upsampled_from_hz": s, "imaging_detected": False}
        if leak <= LEAK_MAX_DB:
            expect["aliasing_detected"] = False
            group = "upsampled" if EDGE_LO_FRAC <= edge <= EDGE_HI_FRAC else "ambiguous-upsampled-lowband"
        else:
            # folded on the way down (mostly noise folded onto noise): the aliasing truth is there but may not be
            # observable in principle; the key is left out and the case reported apart
            group = "ambiguous-resample-fold"
        y, facts["level_db"] = set_level(y, p["level"])
        yield Case(_name(seed, p, p["family"], p["material"], _khz(s), _khz(d)), SET_NAME, p["family"], group, d, y,
                   expect, _labels(ch), facts,
                   f"{p['material']} made at {d} Hz, pedalboard Resample to {s} Hz and back ({p['quality']})")
        return

    if k == "synth":
        n = frames(rate)
        lo_hz = max(p["f0_lo"], rate / 2 / 100)         # at most ~100 partials below Nyquist (house choice: cost)
        plan = _voice_plan(n, rate, rng, p["voices"], lo_hz, max(p["f0_hi"], 2 * lo_hz))
        if p["osc"] == "wavetable":
            table = bright_table(rng)
            for v in plan:
                v["table"] = table
        a = synth(p["osc"], n, rate, plan, naive=True)
        b = synth(p["osc"], n, rate, plan, naive=False)
        fold = _db(_energy(a - b), _energy(b))
        pan = [rng.uniform(0.6, 1.0) for _ in range(ch)]
        lvl = p["level"]
        fam_n, fam_b = f"naive-{p['osc']}", ("oversampled-fm" if p["osc"] == "fm" else f"additive-{p['osc']}")
        if fold >= FOLD_MIN_DB:
            ya, la = set_level(np.stack([a * g for g in pan], axis=1), lvl)
            yield Case(_name(seed, p, fam_n, _khz(rate)), SET_NAME, fam_n, "naive-synth", rate, ya,
                       {"aliasing_detected": True, "upsampled_from_hz": None, "imaging_detected": False}, _labels(ch),
                       dict(fold_db=fold, level_db=la, voices=p["voices"]), "naive oscillator, folded partials")
        yb, lb = set_level(np.stack([b * g for g in pan], axis=1), lvl)
        yield Case(_name(seed, p, fam_b, _khz(rate)), SET_NAME, fam_b, "band-limited-synth", rate, yb,
                   {"aliasing_detected": False, "upsampled_from_hz": None, "imaging_detected": False}, _labels(ch),
                   dict(fold_db_of_naive=fold, level_db=lb), "band-limited twin")
        return

    if k in ("decim", "hold", "crush", "down"):
        r0 = p["src"] if k in ("decim", "down") else p["rate"]
        n0 = frames(r0)
        x = material(p["material"], n0, r0, ch, rng)
        if k == "decim":
            m = p["factor"]

            def chain(z):
                return sox_effect(z, r0, r0 // m, ["downsample", str(m)])
            new_nyq, out_rate = r0 / m / 2, r0 // m
        elif k == "hold":
            def chain(z):
                return pedalboard_roundtrip(z, r0, p["src"], "ZeroOrderHold")
            new_nyq, out_rate = p["src"] / 2, r0
        elif k == "crush":
            step = p["step"]

            def chain(z):
                idx = np.floor(np.floor(np.arange(z.shape[0]) / step) * step).astype(int)
                return z[idx]
            new_nyq, out_rate = r0 / step / 2, r0
        else:
            d = p["rate"]
            fam = p["family"]

            def chain(z):
                if fam == "resampy-kaiser_best":
                    return resampy_conv(z, r0, d, "kaiser_best")
                if fam == "sox-cli-rate-down":
                    return sox_effect(z, r0, d, ["rate", "-v", "-p", "30", "-b", "92", str(d)])
                return resampy_conv(z, r0, d, "kaiser_fast")
            new_nyq, out_rate = d / 2, d
        y = chain(x)
        _, xhi = band_split(x, r0, new_nyq)
        fold = _db(_energy(_mid(chain(xhi), out_rate)), _energy(_mid(y, out_rate)))
        facts = dict(fold_db=fold, src_hz=r0)
        fam = p["family"]
        if k == "down":
            if fold > LEAK_MAX_DB:
                return
            expect = {"aliasing_detected": False, "upsampled_from_hz": None, "imaging_detected": False}
            group = "filtered-decimation" if p["material"] == "tonal" else "downsampled"
            nm = (fam, _khz(r0), _khz(out_rate))
        else:
            if fold < FOLD_MIN_DB:
                return
            if k == "decim":
                expect = {"aliasing_detected": True, "upsampled_from_hz": None, "imaging_detected": False}
                group, nm = "decimation", (fam, f"by{p['factor']}", _khz(r0), _khz(out_rate))
            else:
                img = image_db(y, out_rate, int(2 * new_nyq))
                facts["image_db"] = img
                if img < IMAGE_MIN_DB:
                    return
                if k == "hold":
                    expect = {"aliasing_detected": True, "imaging_detected": True, "upsampled_from_hz": p["src"]}
                    group, nm = "sample-hold", (fam, _khz(p["src"]), _khz(r0))
                else:
                    expect = {"aliasing_detected": True, "imaging_detected": True}
                    group, nm = "ambiguous-sample-hold", (fam, f"step{p['step']:.2f}", _khz(r0))
        y, facts["level_db"] = set_level(y, p["level"])
        yield Case(_name(seed, p, *nm), SET_NAME, fam, group, out_rate, y, expect, _labels(ch), facts,
                   f"{p['material']} at {r0} Hz")
        return

    if k == "native":
        x = material(p["material"], frames(rate), rate, ch, rng)
        f, pp = psd(x, rate)
        top = _db(band_energy(f, pp, 0.9 * rate / 2, 0.99 * rate / 2), band_energy(f, pp, 20, rate / 2))
        if top < -80:
            return
        y, lvl = set_level(x, p["level"])
        group = "speech" if p["material"] == "speech" else "native"
        yield Case(_name(seed, p, "native", p["material"], _khz(rate)), SET_NAME, "native", group, rate, y,
                   {"upsampled_from_hz": None, "imaging_detected": False, "aliasing_detected": False}, _labels(ch),
                   dict(top_band_db=top, level_db=lvl), f"{p['material']} made at {rate} Hz")
        return

    if k == "lowpass":
        x = material("mix", frames(rate), rate, ch, rng)
        fam, prm = p["family"], p["prm"]
        if fam == "sox-sinc":
            fc = min(prm["fc"], 0.45 * rate)
            y = _fit(sox_effect(x, rate, rate, ["sinc", "-t", str(prm["tbw"]), f"-{int(fc)}"]), x.shape[0])
            b = _fit(sox_effect(np.eye(1, 1 << 14, 1 << 13).T, rate, rate, ["sinc", "-t", str(prm["tbw"]), f"-{int(fc)}"]),
                     1 << 14)[:, 0]
            a = [1.0]
        elif fam == "sox-lowpass-biquad":
            fc = min(prm["fc"], 0.45 * rate)
            y = sox_effect(x, rate, rate, ["lowpass", "-2", str(int(fc))])
            b = sox_effect(np.eye(1, 1 << 14, 0).T, rate, rate, ["lowpass", "-2", str(int(fc))])[:, 0]
            a = [1.0]
        elif fam == "bessel":
            fc = min(prm["fc"], 0.45 * rate)
            b, a = signal.bessel(prm["order"], fc, fs=rate, norm="mag")
            y = signal.lfilter(b, a, x, axis=0)
        else:
            fc = min(prm["fc"], 0.49 * rate)
            b, a = signal.cheby2(prm["order"], prm["rs"], fc, fs=rate)
            y = signal.lfilter(b, a, x, axis=0)
        f3, f40 = lowpass_steepness(b, a, rate)
        steep, near = steep_near_rates(f3, f40, rate)
        group = "ambiguous-lowpass" if steep and near else "lowpass"
        y, lvl = set_level(y, p["level"])
        yield Case(_name(seed, p, fam, int(fc), _khz(rate)), SET_NAME, fam, group, rate, y,
                   {"upsampled_from_hz": None, "imaging_detected": False, "aliasing_detected": False}, _labels(ch),
                   dict(f3_hz=f3, f40_hz=f40, steep=bool(steep), near_rates=near, level_db=lvl), str(prm))
        return

    if k in ("codec", "codec-up"):
        codec = p["codec"]
        r_codec = p["src"] if k == "codec-up" else rate
        if codec == "pb-gsm":
            r_codec = rate                 # the plugin converts to 8 kHz and back by itself
        x = material(p["material"], frames(r_codec), r_codec, ch, rng)
        x = x * (0.5 / (np.max(np.abs(x)) + 1e-12))
        if codec == "pb-mp3":
            import pedalboard
            y = _fit(pedalboard.MP3Compressor(vbr_quality=p["args"][0])(x.T.astype(np.float32), float(r_codec)).T
                     .astype(np.float64), x.shape[0])
            fam = "pedalboard-mp3"
        elif codec == "pb-gsm":
            import pedalboard
            y = _fit(pedalboard.GSMFullRateCompressor()(x.T.astype(np.float32), float(r_codec)).T.astype(np.float64),
                     x.shape[0])
            fam = "pedalboard-gsm"
        else:
            y = ffmpeg_codec(x, r_codec, codec, p["args"])
            fam = f"ffmpeg-{codec}"
        setting = ("".join(str(a_) for a_ in p["args"]).replace("-b:a", "").replace("-q:a", "q") if p["args"] else "")
        if codec == "pb-mp3":
            setting = f"vbr{p['args'][0]:g}"
        if k == "codec":
            f3, f40 = transfer_points(x, y, rate)
            steep, near = steep_near_rates(f3, f40, rate)
            y, lvl = set_level(y, p["level"])
            facts = dict(f3_hz=f3, f40_hz=f40, steep=steep, near_rates=near, level_db=lvl)
            if codec == "opus":
                yield Case(_name(seed, p, fam, setting, _khz(rate)), SET_NAME, fam, "ambiguous-codec", rate, y,
                           {"imaging_detected": False}, _labels(ch), facts, "low-rate opus: internal layer rate unknown")
            else:
                yield Case(_name(seed, p, fam, setting, _khz(rate)), SET_NAME, fam,
                           "ambiguous-codec-shelf" if steep and near else "codec-shelf", rate, y,
                           {"upsampled_from_hz": None, "imaging_detected": False}, _labels(ch), facts,
                           "lossy round trip at the file's rate")
            return
        s, d = p["src"], rate
        if codec == "pb-gsm":
            up_name = "internal"
        else:
            if p["up"] == "sox-p40":
                y = _fit(sox_effect(y, s, d, ["rate", "-h", "-p", "40", str(d)]), int(round(y.shape[0] * d / s)))
            else:
                y = pedalboard_stream(y, s, d, "WindowedSinc64")
            up_name = p["up"]
        ed = spectrum_edge_frac(y, d, s)
        img = image_db(y, d, s)
        facts = dict(band_edge_frac=ed, image_db=img, src_hz=s)
        if img > IMAGE_MAX_NEG_DB and codec != "pb-gsm":
            return
        expect = {"upsampled_from_hz": s}
        if img <= IMAGE_MAX_NEG_DB:
            expect["imaging_detected"] = False
        elif img >= IMAGE_MIN_DB:
            expect["imaging_detected"] = True
        group = "upsampled-via-codec" if EDGE_LO_FRAC <= ed <= CODEC_EDGE_HI_FRAC and img <= IMAGE_MAX_NEG_DB \
            else "ambiguous-codec-upsampled"
        y, facts["level_db"] = set_level(y, p["level"])
        yield Case(_name(seed, p, fam, setting, "at", _khz(s), "up", up_name, _khz(d)), SET_NAME, fam, group, d, y, expect,
                   _labels(ch), facts, f"{codec} at {s} Hz, converted up to {d} Hz by {up_name}")
        return
    raise ValueError(f"unknown plan kind {k!r}")


def cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """Yield the corpus for ``seed`` (7000-7999), or its quick slice (about 20 cases, 3 s each)."""
    if seed not in SEED_RANGE:
        raise ValueError(f"corpus_validation_c: seed {seed} is outside {SEED_RANGE.start}-{SEED_RANGE.stop - 1}")
    plan = build_plan(seed)
    if quick:
        keep = set(_quick_indices(plan))
        plan = [p for p in plan if p["idx"] in keep]
    for p in plan:
        if not _family_ok(p):
            fam = p.get("family") or p.get("codec") or p["kind"]
            if fam not in SKIPPED_FAMILIES:
                SKIPPED_FAMILIES.append(fam)
                print(f"corpus_validation_c: {fam} skipped (tool not installed)", file=sys.stderr)
            continue
        yield from _render(seed, p, quick)


def plan_counts(seed: int) -> dict:
    """Planned cases per kind (before the fact checks, which may drop or regroup some)."""
    out: dict = {}
    for p in build_plan(seed):
        out[p["kind"]] = out.get(p["kind"], 0) + 1
    return out


def main(argv: list[str] | None = None) -> int:
    import argparse
    ap = argparse.ArgumentParser(description="Generate the third validation corpus and print counts and facts.")
    ap.add_argument("--seed", type=int, default=7000)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--out", help="write each case as WAV PCM_24 into this folder")
    ap.add_argument("--verbose", action="store_true")
    a = ap.parse_args(argv)
    print_versions()
    t0 = time.perf_counter()
    groups: dict = {}
    fams: dict = {}
    names = set()
    def cpu():
        t = os.times()
        return t.user + t.system + t.children_user + t.children_system
    c0 = cpu()
    for c in cases(a.seed, quick=a.quick):
        c1 = cpu()
        c.facts["cpu_s"], c0 = c1 - c0, c1
        assert c.name not in names, c.name
        names.add(c.name)
        groups[c.group] = groups.get(c.group, 0) + 1
        fams[c.family] = fams.get(c.family, 0) + 1
        if a.verbose:
            fx = ", ".join(f"{k}={v:.3g}" if isinstance(v, float) else f"{k}={v}" for k, v in c.facts.items())
            print(f"{c.name:70s} {c.group:28s} {c.expect} {fx}")
        if a.out:
            import soundfile as sf
            os.makedirs(a.out, exist_ok=True)
            sf.write(os.path.join(a.out, c.name + ".wav"), c.audio, c.rate_hz, subtype="PCM_24")
    dt = time.perf_counter() - t0
    print(f"{len(names)} cases in {dt:.1f} s wall, {cpu():.1f} s CPU with child processes (seed {a.seed}, quick={a.quick})")
    for g in sorted(groups):
        print(f"  group {g:30s} {groups[g]}")
    for f_ in sorted(fams):
        print(f"  family {f_:40s} {fams[f_]}")
    if SKIPPED_FAMILIES:
        print("skipped:", ", ".join(SKIPPED_FAMILIES))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
