"""Held-back VALIDATION corpus for the sampling detectors (upsampling, imaging, folded content).

Set "validation", seeds 5000-5999.  The files are made with tool families that the detectors are never tuned
on: soxr (every quality preset), the sox command-line tool's ``rate`` effect, ffmpeg's own resampler (swr),
scipy's FFT ``resample``, and hold / linear-interpolation / zero-stuffed upsamplers, naive synthesis and
decimation written here, independently of the detectors.  Every label comes from how the file was built (and,
for the steep low-pass cases, from where the filter's edge lies), never from what masterqc reports.

``cases(seed, quick=False)`` yields ``Case`` objects in the shared corpus format (a generator: one case in
memory at a time).  ``quick=True`` yields a small representative slice (about two cases per group).

If the ``sox`` or ``ffmpeg`` programs are missing, their families are skipped and named in ``SKIPPED_FAMILIES``
(and on standard error).

Caution: the files hold loud, bright test material (noise bursts up to the Nyquist frequency, naive
oscillators with folded partials, full-strength images up to 96 kHz).  Keep monitoring low if you listen.
"""

from __future__ import annotations

import math
import os
import shutil
import subprocess
import sys
import tempfile
from dataclasses import dataclass, field
from typing import Iterator

import numpy as np
import soundfile as sf
from scipy import signal

SET_NAME = "validation"
SEED_RANGE = range(5000, 6000)
STANDARD_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400, 192000)
SOURCE_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000)
TARGET_RATES_HZ = (44100, 48000, 88200, 96000, 176400, 192000)

SOX = shutil.which("sox")
FFMPEG = shutil.which("ffmpeg")
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
    note: str = ""          # free text: how the file was made (for the JSON dump)


def default_labels(channels: int) -> list[str]:
    return {1: ["M"], 2: ["L", "R"], 6: ["L", "R", "C", "LFE", "Ls", "Rs"]}.get(
        channels, [f"ch{i + 1}" for i in range(channels)])


# --------------------------------------------------------------------------------------------------------
# Resamplers: the tool families of this set
# --------------------------------------------------------------------------------------------------------

SOXR_PRESETS = ("QQ", "LQ", "MQ", "HQ", "VHQ")
SOX_QUALITIES = ("q", "l", "m", "h", "v")
# ffmpeg swr variants: (family suffix, extra aresample options).  The man page (ffmpeg-resampler) gives
# filter_size 32 and cutoff 0.97 (swr: the 6 dB point, as a fraction of the lower Nyquist) as defaults.
FFMPEG_VARIANTS = (("", ""), ("-fs64-c095", ":filter_size=64:cutoff=0.95"), ("-fs16", ":filter_size=16"))

PROPER_FAMILIES = ([f"soxr-{q}" for q in SOXR_PRESETS] + [f"sox-cli-rate-{q}" for q in SOX_QUALITIES]
                   + [f"ffmpeg-swr{s}" for s, _ in FFMPEG_VARIANTS] + ["scipy-fft-resample"])


def family_available(family: str) -> bool:
    if family.startswith("sox-cli"):
        return SOX is not None
    if family.startswith("ffmpeg"):
        return FFMPEG is not None
    return True


def _fit_length(y: np.ndarray, n: int) -> np.ndarray:
    if len(y) >= n:
        return y[:n]
    return np.concatenate([y, np.zeros((n - len(y), y.shape[1]))])


def resample_tool(x: np.ndarray, src_hz: int, dst_hz: int, family: str) -> np.ndarray:
    """Convert ``x`` (frames, channels) from src_hz to dst_hz with the named tool family."""
    n_out = int(round(len(x) * dst_hz / src_hz))
    if family.startswith("soxr-"):
        import soxr
        y = soxr.resample(np.ascontiguousarray(x), src_hz, dst_hz, quality=family.split("-", 1)[1])
        return _fit_length(np.asarray(y, dtype=np.float64).reshape(len(y), -1), n_out)
    if family == "scipy-fft-resample":
        return signal.resample(x, n_out, axis=0)
    with tempfile.TemporaryDirectory(prefix="mqcval-") as tmp:
        src_path = os.path.join(tmp, "in.wav")
        dst_path = os.path.join(tmp, "out.wav")
        sf.write(src_path, x.astype(np.float32), src_hz, subtype="FLOAT")
        if family.startswith("sox-cli-rate-"):
            q = family.rsplit("-", 1)[1]
            cmd = [SOX, "-D", "-V1", src_path, "-e", "floating-point", "-b", "32", dst_path,
                   "rate", f"-{q}", str(dst_hz)]
        elif family.startswith("ffmpeg-swr"):
            extra = dict(FFMPEG_VARIANTS)[family[len("ffmpeg-swr"):]]
            cmd = [FFMPEG, "-nostdin", "-v", "error", "-y", "-i", src_path,
                   "-af", f"aresample={dst_hz}:resampler=swr{extra}", "-c:a", "pcm_f32le", dst_path]
        else:
            raise ValueError(f"unknown resampler family {family!r}")
        proc = subprocess.run(cmd, capture_output=True, text=True)
        if proc.returncode != 0:
            raise RuntimeError(f"{family}: {' '.join(cmd)} failed: {proc.stderr.strip()}")
        y, rate = sf.read(dst_path, dtype="float64", always_2d=True)
        if rate != dst_hz:
            raise RuntimeError(f"{family}: wrote {rate} Hz, expected {dst_hz} Hz")
        return _fit_length(y, n_out)


def hold_upsample(x: np.ndarray, src_hz: int, dst_hz: int) -> np.ndarray:
    """Nearest-previous-sample (zero-order hold) upsampling; any ratio."""
    n_out = int(round(len(x) * dst_hz / src_hz))
    idx = (np.arange(n_out, dtype=np.int64) * src_hz) // dst_hz
    return x[np.minimum(idx, len(x) - 1)]


def linear_upsample(x: np.ndarray, src_hz: int, dst_hz: int) -> np.ndarray:
    """Straight-line interpolation between source samples; any ratio."""
    n_out = int(round(len(x) * dst_hz / src_hz))
    pos = np.arange(n_out) * (src_hz / dst_hz)
    i0 = np.minimum(np.floor(pos).astype(np.int64), len(x) - 1)
    i1 = np.minimum(i0 + 1, len(x) - 1)
    frac = (pos - i0)[:, None]
    return x[i0] * (1.0 - frac) + x[i1] * frac


def zero_stuff_upsample(x: np.ndarray, src_hz: int, dst_hz: int) -> np.ndarray:
    """Insert L-1 zeros after every sample (integer ratios only), gain L: no interpolation filter at all."""
    if dst_hz % src_hz:
        raise ValueError(f"zero-stuffing needs an integer ratio, got {src_hz} -> {dst_hz}")
    factor = dst_hz // src_hz
    y = np.zeros((len(x) * factor, x.shape[1]))
    y[::factor] = x * factor
    return y


def fir_decimate(x: np.ndarray, factor: int, rate_hz: int) -> np.ndarray:
    """Properly filtered integer decimation: linear-phase Kaiser windowed-sinc low-pass, then keep every
    factor-th sample.  Pass band to 0.90 of the new Nyquist, >= 100 dB down from 1.0 of it (kaiserord)."""
    new_nyq = rate_hz / factor / 2.0
    numtaps, beta = signal.kaiserord(100.0, 0.10 * new_nyq / (rate_hz / 2.0))
    numtaps |= 1
    h = signal.firwin(numtaps, 0.95 * new_nyq, window=("kaiser", beta), fs=rate_hz)
    y = signal.oaconvolve(x, h[:, None], mode="same", axes=0)
    return y[::factor]


# --------------------------------------------------------------------------------------------------------
# Material (vectorised): every generator fills its own band up to near its Nyquist frequency
# --------------------------------------------------------------------------------------------------------

def _adsr(n: int, rate: int, a_s: float, d_s: float, sustain: float, r_s: float) -> np.ndarray:
    dur = n / rate
    a_s, d_s, r_s = (min(v, dur / 3) for v in (a_s, d_s, r_s))
    t = np.arange(n) / rate
    return np.interp(t, [0.0, a_s, a_s + d_s, max(dur - r_s, a_s + d_s), dur], [0.0, 1.0, sustain, sustain, 0.0])


def _phase(f0: float, n: int, rate: int, vib_hz: float, vib_depth: float, rng) -> tuple[np.ndarray, float]:
    """Instantaneous phase (radians) of a note with sinusoidal vibrato; returns (phase, max frequency)."""
    t = np.arange(n) / rate
    f = f0 * (1.0 + vib_depth * np.sin(2 * np.pi * vib_hz * t + rng.uniform(0, 2 * np.pi)))
    return rng.uniform(0, 2 * np.pi) + 2 * np.pi * np.cumsum(f) / rate, float(f.max())


def _partials(phi: np.ndarray, ks, amps, phases) -> np.ndarray:
    out = np.zeros(len(phi))
    for k, a, p in zip(ks, amps, phases):
        out += a * np.cos(k * phi + p)
    return out


def _harmonic_sum(phi: np.ndarray, coefs: np.ndarray) -> np.ndarray:
    """Re(sum_k coefs[k-1] * exp(i k phi)) by complex recursion (one multiply per partial)."""
    z1 = np.exp(1j * phi)
    z = z1.copy()
    acc = np.zeros(len(phi), dtype=np.complex128)
    for c in coefs:
        acc += c * z
        z *= z1
    return acc.real


def _decay_env(n: int, rate: int, hit_times_s, decay_s: float, levels) -> np.ndarray:
    imp = np.zeros(n)
    idx = np.clip((np.asarray(hit_times_s) * rate).astype(np.int64), 0, n - 1)
    np.add.at(imp, idx, np.asarray(levels, dtype=float))
    a = math.exp(-1.0 / (decay_s * rate))
    return signal.lfilter([1.0], [1.0, -a], imp)


def _tilted_noise(n: int, rate: int, rng, slope_db_per_oct: float) -> np.ndarray:
    """White noise shaped by a constant slope per octave above 100 Hz; content continues to Nyquist."""
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1.0 / rate)
    gain = (np.maximum(f, 100.0) / 1000.0) ** (slope_db_per_oct / (20 * math.log10(2)))
    y = np.fft.irfft(spec * gain, n)
    return y / (np.std(y) + 1e-30)


def _pan_gains(nch: int, rng) -> np.ndarray:
    if nch == 1:
        return np.ones(1)
    if nch == 2:
        p = rng.uniform(0.15, 0.85)
        return np.array([math.cos(p * math.pi / 2), math.sin(p * math.pi / 2)])
    g = rng.uniform(0.2, 1.0, nch)
    g[3] = 0.0   # LFE gets its own low-passed feed
    return g


def _finish_channels(x: np.ndarray, rate: int) -> np.ndarray:
    """For 5.1: the LFE channel is the low-passed (120 Hz, 4th-order) sum of the others (common practice)."""
    if x.shape[1] == 6:
        sos = signal.butter(4, min(120.0, 0.4 * rate), fs=rate, output="sos")
        x[:, 3] = signal.sosfilt(sos, x[:, [0, 1, 2, 4, 5]].sum(axis=1)) * 0.5
    return x


def music_mix(rate: int, n: int, nch: int, rng, sparse: bool = False, top_frac: float = 0.97,
              hats: bool = True, pad: bool = True) -> np.ndarray:
    """Polyphonic, music-like: 3 voices of bright harmonic notes (partials up to top_frac of Nyquist, with
    vibrato and ADSR), hi-hat / cymbal-like noise bursts that fill the band to Nyquist, a low pad.
    ``sparse``: notes separated by silences (and no pad)."""
    nyq = rate / 2.0
    x = np.zeros((n, nch))
    beat_s = 60.0 / rng.uniform(88, 140)
    root = 110.0 * 2 ** (rng.integers(0, 12) / 12)
    scale = np.array([0, 2, 4, 5, 7, 9, 11, 12, 14, 16, 19, 24])
    for _voice in range(3):
        t = rng.uniform(0, 2) * beat_s
        gains = _pan_gains(nch, rng)
        while t < n / rate - 0.3:
            dur_s = min(rng.integers(1, 5) * beat_s, n / rate - t)
            if rng.random() < (0.5 if sparse else 0.15):      # a rest (longer ones when sparse)
                t += dur_s * (1.5 if sparse else 1.0)
                continue
            i0, m = int(t * rate), int(dur_s * rate)
            if m < 64:
                break
            f0 = root * 2 ** (rng.choice(scale) / 12) * 2 ** rng.integers(0, 3)
            depth = rng.uniform(0.0, 0.006)
            phi, fmax = _phase(f0, m, rate, rng.uniform(4.5, 6.5), depth, rng)
            kmax = int(top_frac * nyq / fmax)
            if kmax < 1:
                t += dur_s
                continue
            low = np.arange(1, min(kmax, 12) + 1)
            high = (np.unique(np.geomspace(13, kmax, 16).astype(int)) if kmax > 13 else np.array([], int))
            ks = np.concatenate([low, high])
            power = rng.uniform(0.5, 1.0)
            amps = ks.astype(float) ** -power
            # the sparse high partials stand for many: scale so the top of the band is not starved
            amps[len(low):] *= 2.0
            note = _partials(phi, ks, amps, rng.uniform(0, 2 * np.pi, len(ks)))
            note *= _adsr(m, rate, rng.uniform(0.005, 0.05), rng.uniform(0.05, 0.3), rng.uniform(0.3, 0.8),
                          rng.uniform(0.05, 0.4))
            x[i0:i0 + m] += note[:, None] * gains[None, :] * rng.uniform(0.5, 1.0)
            t += dur_s
    tonal_rms = np.sqrt(np.mean(x ** 2)) + 1e-12
    if hats:
        n_hits = int(n / rate / (beat_s / 2))
        hit_t = np.arange(n_hits) * beat_s / 2 + rng.uniform(-0.01, 0.01, n_hits)
        keep = rng.random(n_hits) < (0.45 if sparse else 0.8)
        for c in range(nch):
            noise = rng.standard_normal(n)
            hp = np.diff(noise, prepend=0.0) * 0.7 + noise * 0.3          # gently tilted up to Nyquist
            env = _decay_env(n, rate, hit_t[keep], rng.uniform(0.03, 0.09), rng.uniform(0.5, 1.0, keep.sum()))
            cym_t = np.arange(0, n / rate, 8 * beat_s) + rng.uniform(0, beat_s)
            env += _decay_env(n, rate, cym_t, rng.uniform(0.6, 1.5), 0.6 * np.ones(len(cym_t)))
            x[:, c] += hp * env * tonal_rms * rng.uniform(0.6, 1.2)
    if pad and not sparse:
        for c in range(nch):
            p = _tilted_noise(n, rate, rng, -6.0)
            x[:, c] += p * tonal_rms * 0.15
    return _finish_channels(x, rate)


_VOWELS_HZ = ((730, 1090, 2440), (270, 2290, 3010), (300, 870, 2240), (530, 1840, 2480), (570, 840, 2410))


def speech_like(rate: int, n: int, nch: int, rng) -> np.ndarray:
    """Speech-like: voiced syllables (harmonics of a 90-230 Hz glottal f0 with a falling contour, shaped by
    three formants, up to 5 kHz) alternating with fricatives (high-passed noise up to Nyquist) and pauses."""
    nyq = rate / 2.0
    mono = np.zeros(n)
    t = rng.uniform(0.05, 0.3)
    f_base = rng.uniform(90, 200)
    while t < n / rate - 0.4:
        if rng.random() < 0.4:       # fricative
            m = int(rng.uniform(0.06, 0.18) * rate)
            cut = min(rng.uniform(2500, 5000), 0.4 * rate)
            sos = signal.butter(2, cut, btype="highpass", fs=rate, output="sos")
            fr = signal.sosfilt(sos, rng.standard_normal(m)) * _adsr(m, rate, 0.01, 0.02, 0.8, 0.03)
            mono[int(t * rate):int(t * rate) + m] += fr * rng.uniform(0.15, 0.35)
            t += m / rate
        m = int(rng.uniform(0.12, 0.32) * rate)
        i0 = int(t * rate)
        if i0 + m > n:
            break
        f0 = f_base * rng.uniform(0.9, 1.2)
        tt = np.arange(m) / rate
        f = f0 * (1.0 - 0.15 * tt / tt[-1]) * (1 + 0.01 * np.sin(2 * np.pi * 5.5 * tt))
        phi = 2 * np.pi * np.cumsum(f) / rate
        kmax = int(min(5000.0, 0.95 * nyq) / f.max())
        ks = np.arange(1, kmax + 1)
        formants = _VOWELS_HZ[rng.integers(len(_VOWELS_HZ))]
        fk = ks * f0
        shape = sum(np.exp(-0.5 * ((fk - F) / (60 + 0.06 * F)) ** 2) * w
                    for F, w in zip(formants, (1.0, 0.6, 0.3)))
        coefs = (shape + 0.02) / ks * np.exp(1j * rng.uniform(0, 2 * np.pi, kmax))
        v = _harmonic_sum(phi, coefs) * _adsr(m, rate, 0.02, 0.04, 0.85, 0.05)
        mono[i0:i0 + m] += v
        t += m / rate + (rng.uniform(0.2, 0.6) if rng.random() < 0.25 else rng.uniform(0.02, 0.08))
    x = np.repeat(mono[:, None], nch, axis=1)
    if nch > 1:
        x *= _pan_gains(nch, rng)[None, :] if nch == 6 else np.array([[1.0, 0.9]])
        x += 0.003 * rng.standard_normal(x.shape)      # room noise, uncorrelated per channel
    return _finish_channels(x, rate)


def noise_bed(rate: int, n: int, nch: int, rng) -> np.ndarray:
    """Stationary noise bed with a gentle tilt (0 to -3 dB/octave) and a slow swell; reaches Nyquist."""
    slope = rng.uniform(-3.0, 0.0)
    t = np.arange(n) / rate
    swell = 1.0 + 0.3 * np.sin(2 * np.pi * rng.uniform(0.05, 0.2) * t)
    x = np.stack([_tilted_noise(n, rate, rng, slope) * swell for _ in range(nch)], axis=1)
    return _finish_channels(x, rate)


MATERIALS = {"music": music_mix, "sparse": lambda r, n, c, g: music_mix(r, n, c, g, sparse=True),
             "speech": speech_like, "noise": noise_bed}


def set_level(x: np.ndarray, rms_dbfs: float, peak_max: float = 0.97) -> np.ndarray:
    """Scale to a target RMS (all channels pooled); scale down further if the sample peak would pass peak_max."""
    rms = math.sqrt(float(np.mean(x ** 2))) + 1e-30
    y = x * (10 ** (rms_dbfs / 20) / rms)
    peak = float(np.max(np.abs(y)))
    return y * (peak_max / peak) if peak > peak_max else y


# --------------------------------------------------------------------------------------------------------
# Naive (non-band-limited) oscillators and their band-limited twins
# --------------------------------------------------------------------------------------------------------

def _naive_wave(shape: str, cyc: np.ndarray, params: dict) -> np.ndarray:
    """Waveform of phase in cycles ``cyc`` (any real), evaluated sample by sample: no band limiting."""
    u = cyc - np.floor(cyc)
    if shape == "saw":
        return 2.0 * u - 1.0
    if shape == "square":
        return np.where(u < 0.5, 1.0, -1.0)
    if shape == "pulse":
        d = params["duty"]
        return np.where(u < d, 1.0, 0.0) - d
    if shape == "sync":                      # hard-synced sawtooth: slave restarts at each master cycle
        v = u * params["ratio"]
        return 2.0 * (v - np.floor(v)) - 1.0
    raise ValueError(shape)


def _fourier_coefs(shape: str, params: dict, kmax: int, table: int = 1 << 15) -> tuple[float, np.ndarray]:
    """Fourier series of one period of the continuous waveform: (c_0, [c_1..c_kmax]) with
    wave(u) ~= c_0 + sum_k Re(c_k exp(i 2 pi k u)).  From a finely sampled period (table >> kmax), sampled at
    the centres u_j = (j + 1/2) / table, so spec[k] = exp(i pi k / table) * C_k and C_k needs the opposite
    rotation."""
    u = (np.arange(table) + 0.5) / table
    spec = np.fft.rfft(_naive_wave(shape, u, params)) / table
    k = np.arange(1, kmax + 1)
    return float(spec[0].real), 2.0 * spec[k] * np.exp(-1j * np.pi * k / table)


def synth_voices(rate: int, n: int, rng, shape: str, naive: bool, notes: list[dict], params: dict) -> np.ndarray:
    """Render ``notes`` (start_s, dur_s, f0, vib_hz, vib_depth, env, gain, phase0) with one oscillator shape,
    naive or band-limited (additive: only partials whose frequency stays below 0.49 fs through the vibrato)."""
    y = np.zeros(n)
    for nt in notes:
        i0 = int(nt["start_s"] * rate)
        m = min(int(nt["dur_s"] * rate), n - i0)
        if m <= 0:
            continue
        tt = np.arange(m) / rate
        f = nt["f0"] * (1.0 + nt["vib_depth"] * np.sin(2 * np.pi * nt["vib_hz"] * tt + nt["vib_phase"]))
        cyc = nt["phase0"] + np.cumsum(f) / rate
        if naive:
            w = _naive_wave(shape, cyc, params)
        else:
            kmax = int(0.49 * rate / f.max())
            c0, coefs = _fourier_coefs(shape, params, kmax)
            w = c0 + _harmonic_sum(2 * np.pi * cyc, coefs)
        env = _adsr(m, rate, *nt["env"])
        y[i0:i0 + m] += w * env * nt["gain"]
    return y


def make_notes(rng, dur_s: float, f_lo: float, f_hi: float, poly: bool) -> list[dict]:
    """Polyphonic: 2-4 overlapping notes at a time; monophonic: a legato melody.  ADSR and vibrato per note."""
    notes = []
    t = 0.05
    while t < dur_s - 0.5:
        count = int(rng.integers(2, 5)) if poly else 1
        base = rng.uniform(f_lo, f_hi / 1.6 if poly else f_hi)
        length = rng.uniform(0.6, 2.0) if poly else rng.uniform(0.2, 0.6)
        for j in range(count):
            ratio = (1.0, 1.26, 1.5, 1.78)[j]
            notes.append(dict(
                start_s=t + (rng.uniform(0, 0.25) if poly else 0.0),
                dur_s=min(length * rng.uniform(0.9, 1.6), dur_s - t - 0.05),
                f0=base * ratio, vib_hz=rng.uniform(4.5, 6.5), vib_depth=rng.uniform(0.002, 0.008),
                vib_phase=rng.uniform(0, 2 * np.pi), phase0=rng.uniform(0, 1),
                env=(rng.uniform(0.005, 0.08), rng.uniform(0.05, 0.3), rng.uniform(0.4, 0.9),
                     rng.uniform(0.05, 0.3)),
                gain=rng.uniform(0.5, 1.0)))
        t += length * rng.uniform(0.7, 1.1)
    return notes


# --------------------------------------------------------------------------------------------------------
# Where a steep low-pass is ambiguous with a conversion
# --------------------------------------------------------------------------------------------------------

def conversion_cliff_rates(edge_hz: float, file_rate_hz: int, lo: float = 0.83, hi: float = 1.02) -> list[int]:
    """Lower standard rates whose Nyquist frequency puts a converter's cliff where this edge lies
    (edge between about 0.85 and 1.0 of that Nyquist; a small margin either side)."""
    return [r for r in STANDARD_RATES_HZ if r < file_rate_hz and lo * r / 2 <= edge_hz <= hi * r / 2]


def edge_hz_of(filt: dict, rate_hz: int) -> float:
    """The -3 dB frequency of a low-pass (sos or FIR taps), from its own frequency response."""
    f = np.linspace(0, rate_hz / 2, 16385)
    if "sos" in filt:
        _, h = signal.sosfreqz(filt["sos"], worN=f, fs=rate_hz)
    else:
        _, h = signal.freqz(filt["taps"], worN=f, fs=rate_hz)
    mag = 20 * np.log10(np.abs(h) + 1e-300)
    below = np.nonzero(mag < -3.0)[0]
    return float(f[below[0]]) if len(below) else rate_hz / 2


def apply_filter(x: np.ndarray, filt: dict) -> np.ndarray:
    if "sos" in filt:
        return signal.sosfilt(filt["sos"], x, axis=0)
    return signal.oaconvolve(x, filt["taps"][:, None], mode="same", axes=0)


def codec_shelf(x: np.ndarray, rate: int, corner_hz: float, depth_db: float, width_hz: float) -> np.ndarray:
    """Lossy-codec-like high shelf in the frequency domain: above corner_hz the level falls smoothly (raised
    cosine over width_hz) by depth_db and stays there: a shelf, not a cliff to the floor."""
    spec = np.fft.rfft(x, axis=0)
    f = np.fft.rfftfreq(len(x), 1.0 / rate)
    ramp = np.clip((f - corner_hz) / width_hz, 0.0, 1.0)
    gain_db = -depth_db * 0.5 * (1 - np.cos(np.pi * ramp))
    return np.fft.irfft(spec * (10 ** (gain_db / 20))[:, None], len(x), axis=0)


# --------------------------------------------------------------------------------------------------------
# The plan: a deterministic list of case specifications (cheap), rendered lazily by cases()
# --------------------------------------------------------------------------------------------------------

def _upsample_pairs() -> list[tuple[int, int]]:
    return [(s, d) for s in SOURCE_RATES_HZ for d in TARGET_RATES_HZ if d > s]


def _plan(seed: int) -> list[dict]:
    rng = np.random.default_rng([seed, 0])
    plan: list[dict] = []

    def dur(lo=8, hi=12, rate=48000):
        d = int(rng.integers(lo, hi + 1))
        r = rng.random()
        if rate <= 48000 and r < 0.05:
            d = int(rng.integers(24, 31))           # a few longer ones at the lower rates
        elif r < 0.15:
            d = int(rng.integers(16, 21))
        return d

    def channels(rate):
        r = rng.random()
        if rate <= 96000 and r < 0.08:
            return 6
        return 2 if r < 0.6 else 1

    def level():
        return float(rng.uniform(-30, -6))

    mats = ["music", "music", "speech", "sparse", "noise"]
    # 1. upsampled by proper resamplers: every (source, target) pair, two tool families each (round robin
    #    over a shuffled family list, so every family meets many pairs)
    fams = list(PROPER_FAMILIES)
    order = []
    for _ in range(12):
        rng.shuffle(fams)
        order += fams
    k = 0
    for src, dst in _upsample_pairs():
        for _rep in range(2):
            fam = order[k]
            k += 1
            mat = mats[int(rng.integers(len(mats)))]
            if mat == "speech" and src > 48000:
                mat = "music"
            expect = {"upsampled_from_hz": src}
            if fam not in ("soxr-QQ", "sox-cli-rate-q", "ffmpeg-swr-fs16"):
                # Left unlabelled for imaging: the cubic-interpolation presets (image rejection "~30 dB @ Fs/4"
                # per the sox man page; measured -7 dB at the source Nyquist, -26 dB at 1.5x it) and swr with a
                # 16-tap filter (-14 dB at 1.1x, -28 dB at 1.2x the source Nyquist): how much leaked image
                # counts as imaging is a threshold, not a fact of construction.
                # NB ffmpeg swr (default and fs64): its upsampling filter is 6 dB down at the source Nyquist
                # itself (see the slice test), so a narrow band of leaked image lies just above it (-9 dB at
                # 1.02x, -13 dB at 1.05x with 32 taps).  Labelled False as a "proper" conversion, house choice.
                expect["imaging_detected"] = False
            plan.append(dict(kind="upsampled", group="upsampled", family=fam, src=src, rate=dst, mat=mat,
                             dur=dur(rate=dst), nch=channels(dst), level=level(), expect=expect))
    # 2. hold / linear / zero-stuffed upsampling: imaging, and upsampled from the source rate
    integer_pairs = [(s, d) for s, d in _upsample_pairs() if d % s == 0]
    other_pairs = [(44100, 48000), (48000, 88200), (22050, 48000), (32000, 44100), (16000, 44100)]
    for fam, pairs in (("zero-stuff", integer_pairs[::3]),
                       ("hold", integer_pairs[1::3] + other_pairs[:3]),
                       ("linear", integer_pairs[2::3] + other_pairs[2:])):
        for src, dst in pairs:
            mat = ["music", "speech", "noise", "sparse"][int(rng.integers(4))]
            if mat == "speech" and src > 48000:
                mat = "music"
            plan.append(dict(kind="upsampled", group="imaging", family=fam, src=src, rate=dst, mat=mat,
                             dur=dur(rate=dst), nch=channels(dst), level=level(),
                             expect={"upsampled_from_hz": src, "imaging_detected": True}))
    # 3. one channel upsampled, the other(s) native
    for src, dst, fam, nch, which in ((44100, 96000, "soxr-VHQ", 2, "R"), (48000, 96000, "soxr-HQ", 2, "L"),
                                     (44100, 88200, "sox-cli-rate-v", 2, "R"), (22050, 48000, "ffmpeg-swr", 2, "L"),
                                     (48000, 192000, "scipy-fft-resample", 2, "R"), (32000, 48000, "soxr-MQ", 2, "R"),
                                     (48000, 96000, "sox-cli-rate-h", 6, "C"), (44100, 48000, "ffmpeg-swr-fs64-c095", 6, "C")):
        plan.append(dict(kind="one-channel", group="upsampled-one-channel", family=fam, src=src, rate=dst,
                         which=which, nch=nch, dur=dur(rate=dst), level=level(), mat="music",
                         expect={"upsampled_channels": [which], "imaging_detected": False}))
    # 4. native wideband material at every standard rate
    for rate in STANDARD_RATES_HZ:
        for mat in ("music", ["noise", "sparse", "speech"][int(rng.integers(3))]):
            if mat == "speech" and rate > 48000:
                mat = "sparse"
            exp = {"upsampled_from_hz": None, "imaging_detected": False}
            if mat in ("music", "sparse", "speech"):
                exp["aliasing_detected"] = False
            plan.append(dict(kind="native", group="native" if mat != "speech" else "speech", family="native",
                             rate=rate, mat=mat, dur=dur(rate=rate), nch=channels(rate), level=level(),
                             expect=exp))
    for rate in (44100, 48000, 96000):
        plan.append(dict(kind="native", group="speech", family="native", rate=min(rate, 48000), mat="speech",
                         dur=dur(rate=rate), nch=1, level=level(),
                         expect={"upsampled_from_hz": None, "imaging_detected": False, "aliasing_detected": False}))
        plan.append(dict(kind="native", group="noise", family="native", rate=rate, mat="noise",
                         dur=dur(rate=rate), nch=2, level=level(),
                         expect={"upsampled_from_hz": None, "imaging_detected": False, "aliasing_detected": False}))
    # 5. mastering low-passes and codec shelves on native wideband material
    lp = []
    for order_, cut, rate in ((2, 16000, 44100), (4, 18000, 44100), (6, 20000, 44100), (8, 21000, 44100),
                              (10, 17000, 48000), (12, 19000, 48000), (8, 20000, 48000), (4, 21000, 48000),
                              (2, 20000, 96000), (6, 18000, 96000), (12, 21000, 96000), (8, 16000, 48000)):
        lp.append(("butter", dict(order=order_, cut=cut), rate))
    for cut, rate, order_ in ((17000, 44100, 8), (18000, 48000, 10), (17500, 48000, 7), (20000, 44100, 9),
                              (30000, 96000, 10), (34000, 96000, 8), (60000, 192000, 9)):
        lp.append(("ellip", dict(order=order_, cut=cut), rate))
    for cut, rate, taps in ((17000, 44100, 511), (18000, 48000, 1023), (32000, 96000, 511), (17500, 48000, 101)):
        lp.append(("fir", dict(taps=taps, cut=cut), rate))
    # ambiguous: steep edges where a converter's cliff would sit for a lower standard rate
    for cut, rate, kind_, p in ((20000, 48000, "ellip", 10), (21000, 48000, "fir", 1023), (19500, 48000, "ellip", 8),
                                (20500, 96000, "ellip", 10), (42000, 96000, "fir", 1023), (15000, 44100, "ellip", 9),
                                (40500, 88200, "ellip", 10), (21500, 48000, "cheby2", 12)):
        lp.append((kind_, dict(order=p, taps=p, cut=cut), rate))
    for kind_, prm, rate in lp:
        mat = "music" if rng.random() < 0.7 else "noise"
        plan.append(dict(kind="lowpass", filt=kind_, prm=prm, family=None, group=None, rate=rate, mat=mat,
                         dur=dur(rate=rate), nch=channels(rate) if rate <= 96000 else 2, level=level(),
                         expect=None))
    for corner, rate, depth, width in ((17000, 44100, 15, 1500), (18000, 44100, 25, 800), (17500, 48000, 20, 1200),
                                       (18500, 48000, 12, 2000), (17000, 48000, 30, 1000), (18000, 44100, 18, 1500)):
        plan.append(dict(kind="shelf", group="codec-shelf", family="codec-shelf", rate=rate, mat="music",
                         corner=corner, depth=depth, width=width, dur=dur(rate=rate), nch=2, level=level(),
                         expect={"upsampled_from_hz": None, "imaging_detected": False}))
    # 6. folded content: naive polyphonic / monophonic synthesis and its band-limited twins
    shapes = [("saw", {}), ("square", {}), ("pulse", {"duty": 0.25}), ("sync", {"ratio": 2.37})]
    for rate in (44100, 48000, 96000):
        for shape, prm in shapes:
            prm = dict(prm)
            if shape == "pulse":
                prm["duty"] = float(rng.uniform(0.1, 0.35))
            if shape == "sync":
                prm["ratio"] = float(rng.uniform(1.6, 3.4))
            bed = bool(rng.random() < 0.4)
            plan.append(dict(kind="synth", shape=shape, prm=prm, poly=True, rate=rate, bed=bed,
                             f_lo=150.0, f_hi=1400.0, dur=dur(8, 12, rate), nch=int(rng.integers(1, 3)),
                             level=level(), sub=int(rng.integers(1 << 30))))
    for rate, shape in ((44100, "saw"), (48000, "square"), (44100, "pulse"), (96000, "saw"), (48000, "sync")):
        prm = {"duty": 0.2} if shape == "pulse" else {"ratio": 2.1} if shape == "sync" else {}
        plan.append(dict(kind="synth", shape=shape, prm=prm, poly=False, rate=rate, bed=False, f_lo=1000.0,
                         f_hi=2000.0, dur=dur(8, 12, rate), nch=1, level=level(), sub=int(rng.integers(1 << 30))))
    # 7. decimation of tonal music: unfiltered 2:1, 3:1 and sample dropping; filtered twins
    for src, factor, how in ((96000, 2, "keep"), (88200, 2, "keep"), (96000, 2, "keep"), (144000, 3, "keep"),
                             (132300, 3, "keep"), (48000, 44100, "drop"), (96000, 88200, "drop"), (96000, 44100, "drop")):
        plan.append(dict(kind="decim", src=src, factor=factor, how=how, dur=dur(8, 12, src), nch=int(rng.integers(1, 3)),
                         level=level(), sub=int(rng.integers(1 << 30))))
    return plan


QUICK_COUNTS = {"upsampled": 3, "imaging": 2, "upsampled-one-channel": 1, "native": 1, "speech": 1,
                "lowpass-butter": 1, "lowpass-ellip": 1, "synth-poly": 1, "synth-mono": 1, "decim-keep": 1}


def _quick_pick(plan: list[dict]) -> list[int]:
    """A representative slice for the unit tests (about 16 cases of 8 s, mono or stereo): three proper
    conversions, two hold/linear/zero-stuff, one per-channel case, negatives (native, speech, a gentle and a
    steep low-pass), a polyphonic and a monophonic naive-synthesis pair, and a decimation pair."""
    by_key: dict[str, list[int]] = {}
    for i, p in enumerate(plan):
        key = {"synth": "synth-" + ("poly" if p.get("poly") else "mono"), "decim": "decim-" + p.get("how", "")}.get(
            p["kind"], p.get("group") or p["kind"])
        if key == "lowpass":
            key = "lowpass-" + p["filt"]
        by_key.setdefault(key, []).append(i)
    picks = []
    for key, idx in by_key.items():
        n = QUICK_COUNTS.get(key, 0)
        idx = [i for i in idx if plan[i].get("rate", 48000) <= 96000]        # keep the slice cheap
        step = max(1, len(idx) // max(n, 1))
        chosen, families = [], set()
        for i in idx[step // 2::step] + idx:                                   # distinct families first
            if len(chosen) < n and i not in chosen and plan[i].get("family") not in families:
                chosen.append(i)
                families.add(plan[i].get("family"))
        picks += chosen
    return sorted(picks)


def _rates_tag(hz: int) -> str:
    return f"{hz / 1000:g}k".replace(".", "p")


def _render(i: int, p: dict, seed: int, quick: bool) -> Iterator[Case]:
    rng = np.random.default_rng([seed, 1, i])
    dur_s = 8 if quick else p["dur"]
    nch = min(p["nch"], 2) if quick else p["nch"]
    kind = p["kind"]
    if kind == "upsampled":
        src, dst, fam = p["src"], p["rate"], p["family"]
        x = MATERIALS[p["mat"]](src, src * dur_s, nch, rng)
        x = set_level(x, -14.0)                                  # headroom for the converter's overshoot
        if fam == "hold":
            y = hold_upsample(x, src, dst)
        elif fam == "linear":
            y = linear_upsample(x, src, dst)
        elif fam == "zero-stuff":
            y = zero_stuff_upsample(x, src, dst)
        else:
            y = resample_tool(x, src, dst, fam)
        name = f"up-{_rates_tag(src)}-to-{_rates_tag(dst)}-{fam}-{p['mat']}-{nch}ch-{i:03d}"
        yield Case(name.lower(), SET_NAME, fam, p["group"], dst, set_level(y, p["level"]), dict(p["expect"]),
                   default_labels(nch), f"{p['mat']} made at {src} Hz, converted to {dst} Hz by {fam}")
    elif kind == "one-channel":
        src, dst, fam = p["src"], p["rate"], p["family"]
        labels = default_labels(p["nch"])
        y = music_mix(dst, dst * dur_s, p["nch"], rng)
        x = (speech_like if p["which"] == "C" else music_mix)(src, src * dur_s, 1, rng)
        up = resample_tool(set_level(x, -14.0), src, dst, fam)[:, 0]
        ci = labels.index(p["which"])
        y[:, ci] = up * (np.sqrt(np.mean(y[:, ci] ** 2)) / (np.sqrt(np.mean(up ** 2)) + 1e-30))
        if p["nch"] == 6:
            y = _finish_channels(y, dst)
        name = f"onech-{p['which']}-{_rates_tag(src)}-to-{_rates_tag(dst)}-{fam}-{p['nch']}ch-{i:03d}"
        yield Case(name.lower(), SET_NAME, fam, p["group"], dst, set_level(y, p["level"]), dict(p["expect"]),
                   labels, f"channel {p['which']} made at {src} Hz and converted by {fam}; the others native")
    elif kind == "native":
        rate = p["rate"]
        y = MATERIALS[p["mat"]](rate, rate * dur_s, nch, rng)
        name = f"native-{p['mat']}-{_rates_tag(rate)}-{nch}ch-{i:03d}"
        yield Case(name.lower(), SET_NAME, "native", p["group"], rate, set_level(y, p["level"]), dict(p["expect"]),
                   default_labels(nch), f"{p['mat']} made at {rate} Hz, filling the band to Nyquist")
    elif kind == "lowpass":
        rate, prm, ftype = p["rate"], p["prm"], p["filt"]
        if ftype == "butter":
            filt = {"sos": signal.butter(prm["order"], prm["cut"], fs=rate, output="sos")}
            fam = f"butter{prm['order']}-{prm['cut'] // 1000}k"
        elif ftype == "ellip":
            filt = {"sos": signal.ellip(prm["order"], 0.1, 90, prm["cut"], fs=rate, output="sos")}
            fam = f"ellip{prm['order']}-{prm['cut'] / 1000:g}k"
        elif ftype == "cheby2":
            # Chebyshev II is specified by its stop-band edge; put it a little above the named frequency
            filt = {"sos": signal.cheby2(prm["order"], 90, prm["cut"] * 1.06, fs=rate, output="sos")}
            fam = f"cheby2-{prm['order']}-{prm['cut'] / 1000:g}k"
        else:
            taps = signal.firwin(prm["taps"], prm["cut"], window=("kaiser", 8.6), fs=rate)
            filt = {"taps": taps}
            fam = f"fir{prm['taps']}-{prm['cut'] / 1000:g}k"
        edge = edge_hz_of(filt, rate)
        # Butterworth slopes are never a converter's cliff (gentle at any order used here); the others are
        # steep or medium and are ambiguous when their edge sits where a lower rate's converter would cliff.
        amb = conversion_cliff_rates(edge, rate) if ftype != "butter" else []
        if ftype == "fir" and prm["taps"] < 200:
            amb = []          # a 101-tap FIR's transition is several kHz wide: no cliff
        group = "ambiguous-lowpass" if amb else "lowpass"
        x = MATERIALS[p["mat"]](rate, rate * dur_s, nch, rng)
        y = apply_filter(x, filt)
        name = f"lp-{fam}-{_rates_tag(rate)}-{p['mat']}-{nch}ch-{i:03d}".replace(".", "p")
        yield Case(name.lower(), SET_NAME, fam.replace(".", "p"), group, rate, set_level(y, p["level"]),
                   {"upsampled_from_hz": None, "imaging_detected": False}, default_labels(nch),
                   f"{p['mat']} at {rate} Hz through {fam} (-3 dB at {edge:.0f} Hz"
                   + (f"; a converter from {amb} Hz would cliff here)" if amb else ")"))
    elif kind == "shelf":
        rate = p["rate"]
        x = music_mix(rate, rate * dur_s, nch, rng)
        y = codec_shelf(x, rate, p["corner"], p["depth"], p["width"])
        name = f"shelf-{p['corner'] // 100}-{p['depth']}db-{_rates_tag(rate)}-{i:03d}"
        yield Case(name.lower(), SET_NAME, "codec-shelf", p["group"], rate, set_level(y, p["level"]),
                   dict(p["expect"]), default_labels(nch),
                   f"music at {rate} Hz, high shelf -{p['depth']} dB from {p['corner']} Hz over {p['width']} Hz")
    elif kind == "synth":
        rate = p["rate"]
        n = rate * dur_s
        nrng = np.random.default_rng([seed, 2, p["sub"]])
        notes = make_notes(nrng, dur_s, p["f_lo"], p["f_hi"], p["poly"])
        bed = None
        if p["bed"]:
            brng = np.random.default_rng([seed, 3, p["sub"]])
            # a soft pad (steeply tilted noise) plus a little hiss
            bed = _tilted_noise(n, rate, brng, -9.0) * 0.3 + _tilted_noise(n, rate, brng, 0.0) * 0.03
        for naive in (True, False):
            mono = synth_voices(rate, n, rng, p["shape"], naive, notes, p["prm"])
            if bed is not None:
                mono = mono + bed * np.sqrt(np.mean(mono ** 2))
            y = np.repeat(mono[:, None], nch, axis=1)
            if nch == 2:
                y[:, 1] *= 0.85
            fam = f"naive-{p['shape']}" if naive else f"additive-{p['shape']}"
            group = "naive-synth" if naive else "band-limited-synth"
            tag = "poly" if p["poly"] else "mono"
            name = f"{'naive' if naive else 'blimit'}-{p['shape']}-{tag}-{_rates_tag(rate)}-{nch}ch-{i:03d}"
            yield Case(name.lower(), SET_NAME, fam, group, rate, set_level(y, p["level"]),
                       {"aliasing_detected": naive, "imaging_detected": False,
                        **({} if naive else {"upsampled_from_hz": None})},
                       default_labels(nch),
                       f"{tag}phonic {p['shape']} voices at {rate} Hz, "
                       + ("naive (partials fold)" if naive else "additive, partials below 0.49 fs only")
                       + (", with a noise bed" if bed is not None else ""))
    elif kind == "decim":
        src = p["src"]
        n = src * dur_s
        x = music_mix(src, n, nch, rng, top_frac=0.97, hats=True, pad=True)
        if p["how"] == "keep":
            factor = p["factor"]
            dst = src // factor
            variants = (("unfiltered", x[::factor], True), ("filtered", fir_decimate(x, factor, src), False))
            what = f"{factor}:1"
        else:
            dst = p["factor"]
            idx = (np.arange(int(n * dst / src), dtype=np.int64) * src) // dst
            variants = (("dropped", x[idx], True),
                        ("filtered", _fit_length(resample_tool(x, src, dst, "soxr-VHQ"), len(idx)), False))
            what = f"sample dropping {src}->{dst}"
        for how, y, folded in variants:
            fam = {"unfiltered": "naive-decimate", "dropped": "sample-drop", "filtered": (
                "fir-decimate" if p["how"] == "keep" else "soxr-VHQ-down")}[how]
            name = f"decim-{how}-{_rates_tag(src)}-to-{_rates_tag(dst)}-{nch}ch-{i:03d}"
            yield Case(name.lower(), SET_NAME, fam, "decimation" if folded else "filtered-decimation", dst,
                       set_level(y, p["level"]), {"aliasing_detected": folded}, default_labels(nch),
                       f"tonal music made at {src} Hz (partials to 0.97 of its Nyquist), {what}, {how}")
    else:
        raise ValueError(kind)


def cases(seed: int = 5000, quick: bool = False) -> Iterator[Case]:
    """The validation set (seeds 5000-5999), one case at a time."""
    if seed not in SEED_RANGE:
        raise ValueError(f"corpus_validation: seed {seed} is outside the validation range 5000-5999")
    plan = _plan(seed)
    picks = _quick_pick(plan) if quick else range(len(plan))
    skipped = set()
    for i in picks:
        p = plan[i]
        fam = p.get("family")
        if fam and not family_available(fam):
            skipped.add(fam)
            continue
        if p["kind"] == "decim" and p["how"] == "drop" and not family_available("soxr-VHQ"):
            continue
        yield from _render(i, p, seed, quick)
    for fam in sorted(skipped):
        if fam not in SKIPPED_FAMILIES:
            SKIPPED_FAMILIES.append(fam)
            print(f"corpus_validation: {fam} skipped ({'sox' if 'sox-cli' in fam else 'ffmpeg'} not installed)",
                  file=sys.stderr)


def plan_summary(seed: int = 5000, quick: bool = False) -> dict:
    """Counts per group and family without rendering audio (cheap)."""
    plan = _plan(seed)
    return {"cases_planned": len(_quick_pick(plan) if quick else plan)}
