"""Fourth held-back VALIDATION corpus for the sampling detectors (set "validation", seeds 8000-8999): set D.

README
------
Shared case format: ``cases(seed, quick=False)`` yields ``Case`` objects one at a time (name, set, family, group,
rate_hz, audio (frames, channels) float64 in [-1, 1], expect, channel_labels, facts, note).  Written without
reading any detector code, the tuning corpora or their scorers, and without running the detectors while labels
were chosen: every label is true by how the file was built, and the construction fact each label relies on is
MEASURED when the case is made (``Case.facts``).  A case whose fact does not hold is moved to an ``ambiguous-...``
group with the disputed key left out, or dropped.  Score it with
``bench/sampling_scoring.py --corpus bench/corpus_validation_d.py --seed 8000``.

Tool chains (none of them used by sets A, B, C or the tuning families).  ``print_versions()`` prints what is in use;
built and checked with GStreamer 1.22.0 (Debian 12: gstreamer1.0-tools, -plugins-base, -plugins-good),
zita-resampler 1.8.0 (``zita-resampler``, Debian package zita-resampler), LAME 3.100 (Debian package lame),
julius 0.2.8 on torch 2.13.0+cpu (PyPI, in a separate interpreter, see ``JULIUS_PYTHON``), numpy 2.4, scipy 1.17:
    gst-kaiser-q<Q>            GStreamer ``audioresample resample-method=kaiser quality=Q`` (Q 0-10)
    gst-bnuttall-q<Q>          GStreamer ``audioresample resample-method=blackman-nuttall quality=Q``
    gst-cubic, gst-linear,     GStreamer ``audioresample`` with its cubic / linear / nearest methods (no real image
    gst-nearest                filter: imaging cases upward, folding cases downward)
    zita-resampler             the ``zita-resampler`` command-line converter (zresample), float WAV in and out
    julius-sinc-z<Z>           julius ``resample_frac`` (Hann-windowed sinc, Z zero crossings, rolloff 0.90-0.99),
                               run by a separate Python interpreter with torch (skipped when there is none)
    lame-<bitrate>-at-<rate>   LAME CLI encode at a LOWER rate (``--resample``: 8 .. 32 kHz MPEG-2/2.5), ``lame
                               --decode``, then converted up by zita-resampler or GStreamer kaiser q10
    lame-cbr<k>, lame-v<n>     LAME CLI round trip at the file's own rate (codec shelf negatives)
    naive-pd, naive-trisync,   oscillators written here, evaluated per sample (no band limiting): phase-distortion
    naive-wtnearest            cosine, hard-synced triangle, single-cycle table read with NEAREST-sample lookup at
                               high pitch; polyphonic (2-4 voices), ADSR envelopes, vibrato
    naive-hardclip,            bright tonal chords (sines, vibrato, envelopes) through a hard clipper / a sine wave
    naive-wavefold             folder at the file's rate, without oversampling
    additive-<osc>,            their band-limited twins: the oscillators summed as Fourier series below Nyquist
    oversampled-<nl>           (coefficients from one period on a 65536-point grid); the nonlinear ones applied at
                               32x (clipper) or 16x (folder) the rate and cut at Nyquist in the FFT domain
    gst-wsinc-<window>,        mastering low-passes: GStreamer ``audiowsinclimit`` (windowed-sinc FIR) and
    gst-cheb<type>             ``audiocheblimit`` (Chebyshev type 1 / 2), scipy elliptic IIR and scipy ``remez``
    scipy-ellip, scipy-remez   linear-phase FIR
Debian packages: ``apt-get install gstreamer1.0-tools gstreamer1.0-plugins-base gstreamer1.0-plugins-good
zita-resampler lame``.  julius: ``python3 -m venv .venv-d && .venv-d/bin/pip install torch julius numpy`` at the
repository root (or point ``JULIUS_PYTHON`` at an interpreter that has them).  Families whose tool is missing are
skipped and named in ``SKIPPED_FAMILIES``, as in the other sets.

Groups and labels (keys per the shared contract; ``main()`` prints the counts per group and family for a seed):
    upsampled                 a converter up from a lower standard rate, images measured clean.
                              upsampled_from_hz = source rate, imaging_detected = False.  Facts: the measured
                              transfer (output PSD over source PSD) falls 6 dB between 0.85 and 1.0 of the source
                              Nyquist, and the energy above 1.05x the source Nyquist is <= -70 dB of the energy below.
    imaging                   an upsampler whose images measure >= -40 dB (energy between 1.05x the source Nyquist and
                              the file's Nyquist over the energy below the source Nyquist): upsampled_from_hz = source
                              rate, imaging_detected = True.
    upsampled-one-channel     stereo / 5.1 with one non-LFE channel converted up (facts as for "upsampled"), the others
                              native wideband (>= -60 dB in their top 10 %): upsampled_channels = [label].
    upsampled-via-codec       LAME at a lower rate, decoded, converted up: upsampled_from_hz = the MP3's rate, imaging
                              False.  Facts: the file's spectrum ends (30 dB under its mid-band level) between 0.85
                              and 1.02 of that rate's Nyquist, and images <= -70 dB.
    naive-synth               naive oscillators and unoversampled nonlinearities: aliasing_detected = True, upsampled
                              None, imaging False.  Fact: energy of (naive - band-limited twin), i.e. the folded
                              partials, >= -30 dB of the twin.  A naive case whose fold measures lower is dropped.
    band-limited-synth        the twins: aliasing False, upsampled None, imaging False.  Fact (nonlinear twins): the
                              twin (32x for the clipper, 16x for the folder) differs from a rendering at half that
                              oversampling by <= -60 dB (an upper bound on the folding left in the twin); else dropped.
    decimation                GStreamer nearest / linear methods DOWN to a lower rate, on bright tonal material:
                              aliasing True, upsampled None, imaging False.  Fact: the source's content above the new
                              Nyquist, put through the same chain alone, gives >= -30 dB of the output energy.
    filtered-decimation, downsampled   GStreamer kaiser q10 / zita-resampler down-conversions of tonal material and
                              of wideband mixes: aliasing False, upsampled None, imaging False.  Fact: folded leak
                              <= -80 dB (else dropped).
    native, speech            material made at the file's rate, reaching its Nyquist (top 10 % >= -80 dB of all):
                              upsampled None, imaging False, aliasing False.
    lowpass                   the native mix through a mastering low-pass: upsampled None, imaging False, aliasing
                              False.
    codec-shelf               LAME round trips at the file's own rate (``--resample`` = that rate): upsampled None,
                              imaging False (aliasing not labelled: codec filter banks are not alias-free).
AMBIGUOUS (reported apart by the scorer for ambiguous-lowpass; the others carry only undisputed keys):
    ambiguous-upsampled-lowband   truly upsampled, but the measured 6 dB edge lies below 0.85 of the source Nyquist:
                              from the spectrum alone it looks like a low-pass.  Labels as "upsampled".
    ambiguous-imaging-weak    an upsampler whose images measure between -70 and -40 dB: imaging key left out.
    ambiguous-codec-upsampled LAME at a lower rate whose own band ends outside 0.85-1.02 of that rate's Nyquist (LAME's
                              own low-pass sits well below it at low bit rates): upsampled_from_hz kept (true), no
                              converter cliff marks it.
    ambiguous-codec-shelf, ambiguous-lowpass   a band limit that falls from -3 dB to -40 dB within 12 % of its edge
                              with its -3 dB edge within 0.80-1.05 of a lower standard rate's Nyquist (where a
                              converter's cliff could sit).  Labels as "codec-shelf" / "lowpass".
    ambiguous-decimation      a nearest / linear down-conversion whose folded share measures between -60 and -30 dB:
                              aliasing key left out.

Material (generators written for this set, wideband to Nyquist at the rate they are made at): band (a pink-ish noise
bed, chords of detuned additive voices, hi-hat-like ticks, 5.1 LFE = the low end below 100 Hz), speech (impulse-train
voice through moving formant resonators, plosive and sibilant noise up to Nyquist), sparse (isolated bell-like
strikes over silence or a faint floor), noise (bed only), bright (tonal notes whose partials reach Nyquist, for the
decimation families).  Levels -30..-6 dBFS RMS, peaks <= 0.98.  Durations 3-4.5 s, one in ten 8-10 s (quick slice: 3 s).

CAUTION: the files hold loud, bright test material (naive oscillators, hard clipping and wave folding, full-strength
images, noise up to Nyquist, levels up to -6 dBFS RMS).  Keep monitoring low if you listen, and never on
loudspeakers that cannot take content near their upper limit.  The labels describe how each file was made; a
receiving party's own spec and QC govern what it accepts.
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
from pathlib import Path
from typing import Iterator

import numpy as np
from scipy import fft as sfft
from scipy import signal
from scipy.ndimage import uniform_filter1d

sys.path.insert(0, str(Path(__file__).resolve().parent))
# the shared case format, its constants and the helpers set D uses unchanged, as set C defines them
from corpus_validation_c import (  # noqa: E402
    CHANNEL_LABELS, LFE_INDEX, PEAK_MAX, SET_NAME, STANDARD_RATES_HZ, Case, _db, _energy, _fit, _khz, _labels, _mid,
    _run, band_energy, band_split, set_level, steep_near_rates)

SEED_RANGE = range(8000, 9000)
MAX_SAMPLES = 1_600_000           # frames x channels per case (house choice: keeps a seed to a few minutes)

# label thresholds (house choices, the same meaning as in the earlier validation sets)
EDGE_LO_FRAC = 0.85               # a converter's 6 dB edge, as a fraction of the source Nyquist, for "upsampled"
EDGE_HI_FRAC = 1.0
CODEC_EDGE_HI_FRAC = 1.02
IMAGE_MIN_DB = -40.0              # images a positive must reach
IMAGE_MAX_NEG_DB = -70.0          # images a clean upsampler may leave
FOLD_MIN_DB = -30.0               # folded energy a positive must reach
FOLD_AMBIG_DB = -60.0             # below this a weak decimator counts as clean (own reasoning: 30 dB under a positive)
LEAK_MAX_DB = -80.0               # folded leak a proper down-converter may leave
TWIN_RESIDUAL_MAX_DB = -60.0      # what an oversampled twin may keep of folding (8x vs 16x rendering)

ROOT = Path(__file__).resolve().parent.parent
GST = shutil.which("gst-launch-1.0")
ZITA = shutil.which("zita-resampler") or shutil.which("zresample")
LAME = shutil.which("lame")
JULIUS_PYTHON = os.environ.get("JULIUS_PYTHON") or str(ROOT / ".venv-d" / "bin" / "python")
SKIPPED_FAMILIES: list[str] = []
_HAVE: dict = {}


def _gst_ok() -> bool:
    if "gst" not in _HAVE:
        ok = GST is not None and shutil.which("gst-inspect-1.0") is not None
        if ok:
            for el in ("rawaudioparse", "audioresample", "audiowsinclimit", "audiocheblimit"):
                ok = ok and subprocess.run(["gst-inspect-1.0", el], capture_output=True).returncode == 0
        _HAVE["gst"] = ok
    return _HAVE["gst"]


def _julius_ok() -> bool:
    if "julius" not in _HAVE:
        ok = os.path.exists(JULIUS_PYTHON)
        if ok:
            ok = subprocess.run([JULIUS_PYTHON, "-c", "import julius, torch, numpy"], capture_output=True).returncode == 0
        _HAVE["julius"] = ok
    return _HAVE["julius"]


def print_versions(stream=sys.stdout) -> dict:
    """Print (and return) the versions of the tools this corpus runs."""
    v = {"numpy": np.__version__, "scipy": __import__("scipy").__version__}
    if GST:
        out = subprocess.run([GST, "--version"], capture_output=True, text=True).stdout.splitlines()
        v["gstreamer"] = out[1].strip() if len(out) > 1 else (out[0] if out else "?")
    if ZITA:
        out = subprocess.run([ZITA, "--help"], capture_output=True, text=True)
        lines = [ln.strip() for ln in (out.stdout + out.stderr).splitlines() if ln.strip()]
        v["zita-resampler"] = lines[0] if lines else "?"
    if LAME:
        out = subprocess.run([LAME, "--version"], capture_output=True, text=True).stdout.splitlines()
        v["lame"] = out[0].strip() if out else "?"
    if _julius_ok():
        out = subprocess.run([JULIUS_PYTHON, "-c", "from importlib.metadata import version as v; print(v('julius'), v('torch'))"],
                             capture_output=True, text=True).stdout.split()
        v["julius"], v["torch"] = (out + ["?", "?"])[:2]
    for k, val in v.items():
        print(f"{k}: {val}", file=stream)
    return v


# ------------------------------------------------------------------------------------------------------------
# measurement helpers (the construction facts)
# ------------------------------------------------------------------------------------------------------------


def psd(x: np.ndarray, rate: int, df_hz: float = 25.0) -> tuple[np.ndarray, np.ndarray]:
    """Welch periodogram (Hann, half overlap, density per Hz) summed over channels, bins about df_hz apart."""
    if x.ndim == 1:
        x = x[:, None]
    nper = int(2 ** round(math.log2(rate / df_hz)))
    nper = min(nper, 1 << int(math.log2(max(256, x.shape[0]))))
    f, p = signal.welch(x, fs=rate, window="hann", nperseg=nper, noverlap=nper // 2, axis=0, detrend=False)
    return f, p.sum(axis=1)


def image_db(y: np.ndarray, rate: int, src_rate: int) -> float:
    """Energy between 1.05x the source Nyquist and 0.995x the file's Nyquist, relative to below the source Nyquist."""
    f, p = psd(y, rate)
    nyq = src_rate / 2
    return _db(band_energy(f, p, 1.05 * nyq, 0.995 * rate / 2), band_energy(f, p, 20.0, nyq))


def transfer_edge_frac(x: np.ndarray, src_rate: int, y: np.ndarray, dst_rate: int) -> float:
    """The converter's 6 dB edge from the measured transfer Pyy/Pxx, as a fraction of the source Nyquist; scans up
    from 0.5x Nyquist, the transfer smoothed over about 1 % of Nyquist, referenced to its median at 0.3-0.5x."""
    fx, px = psd(x, src_rate)
    fy, py = psd(y, dst_rate)
    nyq = src_rate / 2
    m = (fy > 0.3 * nyq) & (fy < nyq)
    if not m.any():
        return float("nan")
    h_db = 10 * np.log10(np.maximum(py[m], 1e-30) / np.maximum(np.interp(fy[m], fx, px), 1e-30))
    h_db = uniform_filter1d(h_db, max(1, int(0.01 * nyq / (fy[1] - fy[0]))), mode="nearest")
    fm = fy[m]
    ref = float(np.median(h_db[fm < 0.5 * nyq]))
    below = np.nonzero((fm >= 0.5 * nyq) & (h_db < ref - 6.0))[0]
    return float(fm[below[0]] / nyq) if below.size else 1.0


def transfer_points(x: np.ndarray, y: np.ndarray, rate: int) -> tuple[float, float]:
    """(-3 dB, -40 dB) frequencies of the measured transfer Pyy/Pxx of a process at one rate, scanning up from 1 kHz."""
    f, px = psd(x, rate)
    _, py = psd(y, rate)
    h = 10 * np.log10(np.maximum(py, 1e-30) / np.maximum(px, 1e-30))
    h = uniform_filter1d(h, max(1, int(0.01 * rate / 2 / (f[1] - f[0]))), mode="nearest")
    ref = float(np.median(h[(f > 1000) & (f < 5000)]))
    m = f > 1000
    i3 = np.nonzero(m & (h < ref - 3))[0]
    i40 = np.nonzero(m & (h < ref - 40))[0]
    return (float(f[i3[0]]) if i3.size else rate / 2), (float(f[i40[0]]) if i40.size else rate / 2)


def response_points(h_imp: np.ndarray, rate: int) -> tuple[float, float]:
    """(-3 dB, -40 dB) frequencies of a filter from its measured impulse response."""
    w, h = signal.freqz(h_imp, [1.0], worN=1 << 15, fs=rate)
    hdb = 20 * np.log10(np.maximum(np.abs(h), 1e-12))
    hdb -= np.median(hdb[(w > 500) & (w < 5000)])
    i3 = np.nonzero((w > 1000) & (hdb < -3))[0]
    i40 = np.nonzero((w > 1000) & (hdb < -40))[0]
    return (float(w[i3[0]]) if i3.size else rate / 2), (float(w[i40[0]]) if i40.size else rate / 2)


def spectrum_edge_frac(y: np.ndarray, rate: int, src_rate: int, drop_db: float = 30.0) -> float:
    """Where the file's own spectrum ends, as a fraction of src_rate's Nyquist: the highest frequency (below 1.2x that
    Nyquist) whose smoothed PSD stays within drop_db of its median between 0.2 and 0.5 of that Nyquist."""
    f, p = psd(y, rate)
    nyq = src_rate / 2
    pdb = uniform_filter1d(10 * np.log10(np.maximum(p, 1e-30)), max(1, int(0.01 * nyq / (f[1] - f[0]))),
                           mode="nearest")
    ref = float(np.median(pdb[(f > 0.2 * nyq) & (f < 0.5 * nyq)]))
    ok = np.nonzero((f < 1.2 * nyq) & (pdb > ref - drop_db))[0]
    return float(f[ok[-1]] / nyq) if ok.size else 0.0


def top_band_db(x: np.ndarray, rate: int) -> float:
    """Energy in the top 10 % of the band (0.9-0.99 Nyquist) relative to all of it."""
    f, p = psd(x, rate)
    return _db(band_energy(f, p, 0.9 * rate / 2, 0.99 * rate / 2), band_energy(f, p, 20, rate / 2))


# ------------------------------------------------------------------------------------------------------------
# material (written for this set)
# ------------------------------------------------------------------------------------------------------------

def shaped_noise(n: int, rate: int, rng: np.random.Generator, slope_db_oct: float) -> np.ndarray:
    """Gaussian noise with a spectral slope above 200 Hz (flat below), up to Nyquist; unit RMS."""
    m = sfft.next_fast_len(n, real=True)
    X = sfft.rfft(rng.standard_normal(m))
    f = np.fft.rfftfreq(m, 1.0 / rate)
    X *= (np.maximum(f, 200.0) / 200.0) ** (slope_db_oct / 6.0206)
    X[0] = 0
    y = sfft.irfft(X, m)[:n]
    return y / (np.std(y) + 1e-12)


def _tone(ln: int, rate: int, rng: np.random.Generator, f0: float, partials: int, tilt: float, detune: float,
          reach_nyquist: bool = False) -> np.ndarray:
    """One note: partials k*f0 (slightly inharmonic unless reach_nyquist), 1/k^tilt, per-partial decay, vibrato;
    every partial stays below 0.96x Nyquist even at the top of its vibrato."""
    t = np.arange(ln) / rate
    vib = rng.uniform(0.001, 0.005) * np.sin(2 * np.pi * rng.uniform(3.5, 6.0) * t + rng.uniform(0, 6.3))
    ph = 2 * np.pi * f0 * np.cumsum(1 + vib) / rate
    y = np.zeros(ln)
    inh = 0.0 if reach_nyquist else rng.uniform(0, 3e-4)
    for k in range(1, partials + 1):
        r = k * math.sqrt(1 + inh * k * k)
        if f0 * r * 1.006 >= 0.96 * rate / 2:
            break
        y += (k ** -tilt) * rng.uniform(0.5, 1.0) * np.sin(r * ph * (1 + detune) + rng.uniform(0, 6.3)) \
            * np.exp(-t * k * rng.uniform(0.01, 0.25 if not reach_nyquist else 0.03))
    return y


def chords(n: int, rate: int, rng: np.random.Generator, voices: int, lo_hz: float, hi_hz: float, partials: int,
           tilt: float, reach_nyquist: bool = False) -> np.ndarray:
    out = np.zeros(n)
    pos = 0
    while pos < n - int(0.05 * rate):
        ln = int(min(n - pos, rate * rng.uniform(0.5, 1.4)))
        root = float(np.exp(rng.uniform(np.log(lo_hz), np.log(hi_hz))))
        env = np.minimum(1, np.arange(ln) / (rate * rng.uniform(0.002, 0.04))) * \
            np.exp(-np.arange(ln) / (rate * rng.uniform(0.3, 1.5)))
        for v in range(voices):
            ratio = [1.0, 1.25, 1.5, 2.0, 1.333, 1.875][v % 6]
            f0 = root * ratio
            if reach_nyquist:
                partials_v = max(4, int(0.96 * rate / 2 / f0))
            else:
                partials_v = partials
            out[pos:pos + ln] += _tone(ln, rate, rng, f0, partials_v, tilt, rng.uniform(-0.002, 0.002),
                                       reach_nyquist) * env
        pos += int(ln * rng.uniform(0.7, 1.0))
    return out


def ticks(n: int, rate: int, rng: np.random.Generator, per_s: float) -> np.ndarray:
    """Short high-passed noise ticks (hi-hat-like), content up to Nyquist."""
    out = np.zeros(n)
    b, a = signal.butter(2, min(7000.0, 0.3 * rate), "highpass", fs=rate)
    step = rate / per_s
    p = rng.uniform(0, step)
    while p < n:
        i = int(p)
        ln = min(n - i, int(rate * rng.uniform(0.03, 0.15)))
        if ln > 8:
            out[i:i + ln] += signal.lfilter(b, a, rng.standard_normal(ln)) * np.exp(-np.arange(ln) / (rate * 0.02)) \
                * rng.uniform(0.3, 1.0)
        p += step * rng.uniform(0.5, 1.5)
    return out


def voice(n: int, rate: int, rng: np.random.Generator) -> np.ndarray:
    """Speech-like: a band-limited impulse train (sum of harmonics of a gliding f0 up to 0.9x Nyquist, 1/k) through
    two moving formant resonators per syllable; sibilant and plosive noise bursts; faint floor to Nyquist."""
    t = np.arange(n) / rate
    f0 = rng.uniform(90, 220) * (1 + 0.12 * np.sin(2 * np.pi * rng.uniform(0.3, 0.9) * t))
    ph = 2 * np.pi * np.cumsum(f0) / rate
    src = np.zeros(n)
    for k in range(1, 400):
        if k * float(np.max(f0)) >= 0.9 * rate / 2:
            break
        src += np.sin(k * ph) / k
    out = np.zeros(n)
    pos = int(rate * rng.uniform(0.05, 0.2))
    sib_b, sib_a = signal.butter(3, min(4500.0, 0.25 * rate), "highpass", fs=rate)
    while pos < n:
        ln = int(min(n - pos, rate * rng.uniform(0.1, 0.3)))
        seg = src[pos:pos + ln]
        y = np.zeros(ln)
        for lo, hi, bw in ((280, 900, 90), (850, 2500, 130), (2300, 3600, 200)):
            fc = min(rng.uniform(lo, hi), 0.42 * rate)
            r = math.exp(-math.pi * bw / rate)
            y += signal.lfilter([1 - r], [1, -2 * r * math.cos(2 * math.pi * fc / rate), r * r], seg)
        out[pos:pos + ln] += y * np.sin(np.linspace(0, np.pi, ln)) ** 0.8
        end = pos + ln
        if rng.random() < 0.4:
            fl = int(min(n - end, rate * rng.uniform(0.04, 0.12)))
            if fl > 16:
                out[end:end + fl] += 0.25 * signal.lfilter(sib_b, sib_a, rng.standard_normal(fl)) * np.hanning(fl)
        pos = end + int(rate * (rng.uniform(0.03, 0.12) if rng.random() < 0.75 else rng.uniform(0.25, 0.6)))
    out /= np.std(out) + 1e-12
    return out + 10 ** (-52 / 20) * shaped_noise(n, rate, rng, -1.5)


def strikes(n: int, rate: int, rng: np.random.Generator) -> np.ndarray:
    """Bell-like strikes (inharmonic partials, a click) between silences; a faint floor or digital silence."""
    out = np.zeros(n)
    pos = int(rate * rng.uniform(0.1, 0.5))
    while pos < n - int(0.1 * rate):
        ln = int(min(n - pos, rate * rng.uniform(0.4, 1.0)))
        t = np.arange(ln) / rate
        f0 = rng.uniform(200, 1200)
        y = np.zeros(ln)
        for r in (1.0, 2.76, 5.40, 8.93, 13.34, 18.64, 24.8, 31.9):
            if f0 * r < 0.95 * rate / 2:
                y += np.sin(2 * np.pi * f0 * r * t + rng.uniform(0, 6.3)) * np.exp(-t * r * rng.uniform(1.5, 4)) / r ** 0.5
        click = rng.standard_normal(min(ln, int(0.003 * rate))) * 0.4
        y[:click.size] += click
        out[pos:pos + ln] += y
        pos += ln + int(rate * rng.uniform(0.3, 1.0))
    if rng.random() < 0.6:
        out += 10 ** (rng.uniform(-75, -55) / 20) * np.std(out) * rng.standard_normal(n)
    return out


def material(kind: str, n: int, rate: int, channels: int, rng: np.random.Generator) -> np.ndarray:
    """(n, channels) material made at ``rate``: band, speech, sparse, noise or bright."""
    x = np.zeros((n, channels))
    if kind == "speech":
        v = voice(n, rate, rng)
        for c in range(channels):
            x[:, c] = v * (1.0 if c in (0, 2) else rng.uniform(0.3, 0.9)) + 10 ** (-55 / 20) * shaped_noise(n, rate, rng, -1.0)
    elif kind == "sparse":
        for c in range(channels):
            x[:, c] = strikes(n, rate, rng)
    elif kind == "noise":
        for c in range(channels):
            x[:, c] = shaped_noise(n, rate, rng, rng.uniform(-3.5, -0.5))
    elif kind == "bright":
        tone = chords(n, rate, rng, int(rng.integers(2, 4)), 400, 1800, 0, 0.5, reach_nyquist=True)
        tone /= np.std(tone) + 1e-12
        for c in range(channels):
            x[:, c] = tone * rng.uniform(0.7, 1.0) + 0.02 * shaped_noise(n, rate, rng, -1.0)
    else:   # band
        tone = chords(n, rate, rng, int(rng.integers(3, 6)), 60, 700, 20, 1.1)
        tone /= np.std(tone) + 1e-12
        tk = ticks(n, rate, rng, rng.uniform(2, 8))
        tk /= np.std(tk) + 1e-12
        for c in range(channels):
            bed = shaped_noise(n, rate, rng, rng.uniform(-3.0, -1.5))
            x[:, c] = rng.uniform(0.5, 1.0) * tone + 0.3 * tk * rng.uniform(0.5, 1) + 0.3 * bed
    if channels == 6:
        b, a = signal.butter(4, 100, fs=rate)
        x[:, LFE_INDEX] = signal.lfilter(b, a, x[:, :3].sum(axis=1))
    return x


# ------------------------------------------------------------------------------------------------------------
# tools
# ------------------------------------------------------------------------------------------------------------


def gst_pipe(x: np.ndarray, rate: int, out_rate: int, element: list[str]) -> np.ndarray:
    """Each channel of x through ``rawaudioparse ! ELEMENT ! audio/x-raw,rate=out_rate`` (float64 raw on pipes)."""
    outs = []
    g = 0.5 / max(float(np.max(np.abs(x))), 1e-12)
    for c in range(x.shape[1]):
        cmd = [GST, "-q", "fdsrc", "fd=0", "!", "rawaudioparse", "use-sink-caps=false", "format=pcm",
               "pcm-format=f64le", f"sample-rate={rate}", "num-channels=1", "!", *element, "!",
               f"audio/x-raw,format=F64LE,rate={out_rate},channels=1", "!", "fdsink", "fd=1"]
        outs.append(np.frombuffer(_run(cmd, np.ascontiguousarray(x[:, c] * g, dtype="<f8").tobytes()), "<f8"))
    n = min(o.size for o in outs)
    return np.stack([o[:n] for o in outs], axis=1) / g


def gst_resample(x: np.ndarray, rate: int, out_rate: int, method: str, quality: int) -> np.ndarray:
    y = gst_pipe(x, rate, out_rate, ["audioresample", f"resample-method={method}", f"quality={quality}"])
    return _fit(y, int(round(x.shape[0] * out_rate / rate)))


class UnsupportedRatio(RuntimeError):
    """A converter refuses the pair of rates (zita-resampler takes only ratios it can tabulate)."""


DROPPED_CASES: list[str] = []


def zita_resample(x: np.ndarray, rate: int, out_rate: int) -> np.ndarray:
    import soundfile as sf
    g = 0.5 / max(float(np.max(np.abs(x))), 1e-12)
    with tempfile.TemporaryDirectory(prefix="cvd-") as tmp:
        a, b = os.path.join(tmp, "in.wav"), os.path.join(tmp, "out.wav")
        sf.write(a, x * g, rate, subtype="DOUBLE")
        try:
            _run([ZITA, "--rate", str(out_rate), "--float", a, b])
        except RuntimeError as e:
            if "not supported" in str(e):
                raise UnsupportedRatio(f"zita-resampler: ratio {out_rate}/{rate} not supported") from None
            raise
        y, r = sf.read(b, always_2d=True, dtype="float64")
    assert r == out_rate
    return _fit(y / g, int(round(x.shape[0] * out_rate / rate)))


_JULIUS_SCRIPT = r"""
import sys, io, numpy as np, torch, julius
s, d, z, ro = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), float(sys.argv[4])
x = np.load(io.BytesIO(sys.stdin.buffer.read()))
y = julius.resample_frac(torch.from_numpy(np.ascontiguousarray(x.T)), s, d, zeros=z, rolloff=ro).numpy().T
buf = io.BytesIO(); np.save(buf, np.ascontiguousarray(y)); sys.stdout.buffer.write(buf.getvalue())
"""


def julius_resample(x: np.ndarray, rate: int, out_rate: int, zeros: int, rolloff: float) -> np.ndarray:
    import io
    buf = io.BytesIO()
    np.save(buf, np.ascontiguousarray(x, dtype=np.float64))
    out = _run([JULIUS_PYTHON, "-c", _JULIUS_SCRIPT, str(rate), str(out_rate), str(zeros), str(rolloff)],
               buf.getvalue())
    return _fit(np.load(io.BytesIO(out)).astype(np.float64), int(round(x.shape[0] * out_rate / rate)))


def _align(x: np.ndarray, y: np.ndarray, max_lag: int = 6000) -> np.ndarray:
    """Drop y's leading delay (codec priming) found by cross-correlating the channel sums."""
    a, b = x.sum(axis=1), y.sum(axis=1)
    m = min(a.size, b.size - max_lag, 1 << 17)
    if m < 1024:
        return y
    c = signal.fftconvolve(b[:m + max_lag], a[:m][::-1], mode="full")[m - 1:m - 1 + max_lag]
    return y[int(np.argmax(np.abs(c))):]


def lame_roundtrip(x: np.ndarray, rate: int, codec_rate: int, args: list[str]) -> tuple[np.ndarray, int]:
    """LAME encode at codec_rate (``--resample``; LAME converts by itself when it differs from ``rate``), decode;
    returns (decoded audio at codec_rate, its rate as the decoder wrote it)."""
    import soundfile as sf
    g = 0.5 / max(float(np.max(np.abs(x))), 1e-12)
    with tempfile.TemporaryDirectory(prefix="cvd-") as tmp:
        a, m, b = (os.path.join(tmp, f) for f in ("in.wav", "c.mp3", "out.wav"))
        sf.write(a, x * g, rate, subtype="PCM_24")
        mode = ["-m", "m"] if x.shape[1] == 1 else ["-m", "j"]
        _run([LAME, "--quiet", "--noreplaygain", *mode, *args, "--resample", f"{codec_rate / 1000:g}", a, m])
        _run([LAME, "--quiet", "--decode", m, b])
        y, r = sf.read(b, always_2d=True, dtype="float64")
    return y / g, int(r)


def naive_downconvert(x: np.ndarray, rate: int, out_rate: int, method: str) -> np.ndarray:
    return gst_resample(x, rate, out_rate, method, 4)


# ------------------------------------------------------------------------------------------------------------
# oscillators (naive and Fourier-series twins) and nonlinear processes (naive and oversampled twins)
# ------------------------------------------------------------------------------------------------------------

GRID = 1 << 16


def wave_period(kind: str, v: dict) -> np.ndarray:
    """One period of the waveform on GRID points, u in [0, 1)."""
    u = np.arange(GRID) / GRID
    if kind == "pd":                          # phase-distortion cosine: the phase runs fast up to d, slow after
        d = v["knee"]
        w = np.where(u < d, 0.5 * u / d, 0.5 + 0.5 * (u - d) / (1 - d))
        return -np.cos(2 * np.pi * w)
    if kind == "trisync":                     # triangle slave reset by the master every period
        s = np.mod(v["ratio"] * u, 1.0)
        return 1 - 4 * np.abs(s - 0.5)
    if kind == "wtnearest":                   # table read with the nearest (floor) index
        tab = v["table"]
        return tab[(u * tab.size).astype(int) % tab.size]
    raise ValueError(kind)


def naive_wave(kind: str, v: dict, u: np.ndarray) -> np.ndarray:
    """The same waveform evaluated directly at each sample's phase (what a naive oscillator does)."""
    if kind == "pd":
        d = v["knee"]
        w = np.where(u < d, 0.5 * u / d, 0.5 + 0.5 * (u - d) / (1 - d))
        return -np.cos(2 * np.pi * w)
    if kind == "trisync":
        s = np.mod(v["ratio"] * u, 1.0)
        return 1 - 4 * np.abs(s - 0.5)
    if kind == "wtnearest":
        tab = v["table"]
        return tab[np.minimum((u * tab.size).astype(int), tab.size - 1)]
    raise ValueError(kind)


def _env_adsr(ln: int, rate: int, v: dict) -> np.ndarray:
    t = np.arange(ln) / rate
    att = np.minimum(1.0, t / v["att"])
    dec = v["sus"] + (1 - v["sus"]) * np.exp(-np.maximum(t - v["att"], 0) / v["dec"])
    rel = np.minimum(1.0, (ln - 1 - np.arange(ln)) / (0.02 * rate))
    return att * dec * rel


def voices_plan(n: int, rate: int, rng: np.random.Generator, voices: int, lo_hz: float, hi_hz: float) -> list[dict]:
    plan = []
    for _ in range(voices):
        pos = int(rng.integers(0, max(1, n // 6)))
        while pos < n - int(0.15 * rate):
            ln = int(min(n - pos, rate * rng.uniform(0.6, 1.6)))
            plan.append(dict(pos=pos, ln=ln, f0=float(np.exp(rng.uniform(np.log(lo_hz), np.log(hi_hz)))),
                             vib_hz=float(rng.uniform(4.0, 6.5)), vib=float(rng.uniform(0.002, 0.01)),
                             att=float(rng.uniform(0.004, 0.04)), dec=float(rng.uniform(0.3, 1.5)),
                             sus=float(rng.uniform(0.3, 0.8)), ph0=float(rng.uniform(0, 1)),
                             knee=float(rng.uniform(0.01, 0.05)), ratio=float(rng.uniform(1.4, 3.6))))
            pos += int(ln * rng.uniform(0.55, 1.0))
    return plan


def osc_render(kind: str, n: int, rate: int, plan: list[dict], naive: bool) -> np.ndarray:
    nyq = rate / 2
    out = np.zeros(n)
    for v in plan:
        ln = v["ln"]
        t = np.arange(ln) / rate
        inst = v["f0"] * (1 + v["vib"] * np.sin(2 * np.pi * v["vib_hz"] * t))
        cyc = v["ph0"] + np.cumsum(inst) / rate
        if naive:
            y = naive_wave(kind, v, np.mod(cyc, 1.0))
        else:
            c = np.fft.rfft(wave_period(kind, v)) / GRID          # c_k, k = 0 .. GRID/2
            z1 = np.exp(2j * np.pi * np.mod(cyc, 1.0))
            zk = z1.copy()
            y = np.full(ln, float(np.real(c[0])))
            k = 1
            fmax = float(np.max(inst))
            while k * float(np.min(inst)) < nyq and k < GRID // 2:
                fk = k * inst
                gain = 1.0
                if k * fmax > 0.98 * nyq:                        # raised-cosine fade over the last 2 % below Nyquist
                    gain = 0.5 * (1 + np.cos(np.pi * np.clip((fk - 0.98 * nyq) / (0.02 * nyq), 0, 1)))
                y += gain * 2 * np.real(c[k] * zk)
                zk *= z1
                k += 1
        y = y - float(np.mean(wave_period(kind, v)))             # the period's mean (c_0) removed from both
        out[v["pos"]:v["pos"] + ln] += y * _env_adsr(ln, rate, v)
    return out


def nl_input(n_out: int, rate: int, over: int, plan: list[dict]) -> np.ndarray:
    """Bright tonal chords (2-3 sine partials per voice, vibrato, ADSR) evaluated at over x rate; exact phases so
    every rendering shares the same continuous-time signal."""
    n = n_out * over
    r = rate * over
    out = np.zeros(n)
    for v in plan:
        i0, ln = v["pos"] * over, v["ln"] * over
        tt = np.arange(ln) / r
        ph = 2 * np.pi * v["f0"] * (tt + v["vib"] * (1 - np.cos(2 * np.pi * v["vib_hz"] * tt)) / (2 * np.pi * v["vib_hz"]))
        y = np.sin(ph + 2 * np.pi * v["ph0"])
        for k, a in ((2, 0.5), (3, 0.3)):
            if k * v["f0"] * (1 + v["vib"]) < 0.45 * rate:
                y += a * np.sin(k * ph)
        te = np.arange(ln) / r
        env = np.minimum(1.0, te / v["att"]) * (v["sus"] + (1 - v["sus"]) * np.exp(-np.maximum(te - v["att"], 0) / v["dec"]))
        env *= np.minimum(1.0, (ln - 1 - np.arange(ln)) / (0.02 * r))
        out[i0:i0 + ln] += y * env
    return out / max(1e-12, float(np.max(np.abs(out))))


def nl_apply(kind: str, x: np.ndarray, drive: float) -> np.ndarray:
    if kind == "hardclip":
        return np.clip(drive * x, -1.0, 1.0)
    if kind == "wavefold":
        return np.sin(0.5 * np.pi * drive * x)
    raise ValueError(kind)


def nl_render(kind: str, n: int, rate: int, plan: list[dict], drive: float, over: int) -> np.ndarray:
    """over = 1: naive (the nonlinearity at the file's rate).  over > 1: applied at over x rate, cut at the file's
    Nyquist in the FFT domain, decimated (the band-limited twin)."""
    y = nl_apply(kind, nl_input(n, rate, over, plan), drive)
    if over == 1:
        return y
    m = sfft.next_fast_len(n, real=True)
    Y = sfft.rfft(y, m * over)
    return sfft.irfft(Y[: m // 2 + 1], m)[:n] / over


def bright_table(rng: np.random.Generator, size: int) -> np.ndarray:
    k = np.arange(1, size // 2)
    C = np.zeros(size // 2 + 1, complex)
    C[1:size // 2] = k ** -0.6 * np.exp(2j * np.pi * rng.uniform(0, 1, k.size))
    t = np.fft.irfft(C, size)
    return t / np.max(np.abs(t))


# ------------------------------------------------------------------------------------------------------------
# the plan
# ------------------------------------------------------------------------------------------------------------

UP_SOURCES = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000)
UP_TARGETS = (32000, 44100, 48000, 88200, 96000, 176400, 192000)


def _pair(rng: np.random.Generator, sources=UP_SOURCES, targets=UP_TARGETS) -> tuple[int, int]:
    s = int(rng.choice(sources))
    return s, int(rng.choice([t for t in targets if t > s] or [192000]))


def build_plan(seed: int) -> list[dict]:
    rng = np.random.default_rng(seed)
    P: list[dict] = []

    def add(**kw):
        kw.setdefault("channels", int(rng.choice([1, 2, 2, 2, 6])))
        kw.setdefault("material", str(rng.choice(["band", "band", "speech", "sparse", "noise"])))
        kw.setdefault("dur", float(rng.uniform(3, 4.5) if rng.random() < 0.9 else rng.uniform(8, 10)))
        kw.setdefault("level", float(rng.uniform(-30, -6)))
        if kw["channels"] == 6 and max(kw.get("rate", 0), kw.get("src", 0)) > 96000:
            kw["channels"] = 2                                 # 5.1 at 176.4/192 kHz: too costly (house choice)
        P.append(kw)

    # proper up-conversions
    chains = []
    for q in (4, 5, 6, 7, 8, 9, 10, 10):
        chains += [(f"gst-kaiser-q{q}", dict(tool="gst", method="kaiser", quality=q))] * 2
    for q in (4, 6, 8, 10):
        chains += [(f"gst-bnuttall-q{q}", dict(tool="gst", method="blackman-nuttall", quality=q))] * 2
    chains += [("zita-resampler", dict(tool="zita"))] * 14
    for z, ro in ((24, 0.945), (32, 0.97), (16, 0.92), (24, 0.99), (48, 0.96), (12, 0.90), (32, 0.945), (24, 0.96),
                  (64, 0.98), (20, 0.93)):
        chains += [(f"julius-sinc-z{z}", dict(tool="julius", zeros=z, rolloff=ro))]
    for fam, ch in chains:
        s, d = _pair(rng)
        extra = {"material": str(rng.choice(["speech", "speech", "band"]))} if s <= 16000 else {}
        add(kind="up", family=fam, chain=ch, src=s, rate=d, **extra)

    # upsamplers with little or no image filter
    img = ([("gst-nearest", dict(tool="gst", method="nearest", quality=4))] * 5
           + [("gst-linear", dict(tool="gst", method="linear", quality=4))] * 5
           + [("gst-cubic", dict(tool="gst", method="cubic", quality=4))] * 4
           + [("gst-kaiser-q0", dict(tool="gst", method="kaiser", quality=0))] * 3
           + [("gst-kaiser-q1", dict(tool="gst", method="kaiser", quality=1))] * 2
           + [("gst-bnuttall-q0", dict(tool="gst", method="blackman-nuttall", quality=0))] * 2
           + [("julius-sinc-z2", dict(tool="julius", zeros=2, rolloff=0.99))] * 2)
    for fam, ch in img:
        s, d = _pair(rng, sources=(8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000),
                     targets=(44100, 48000, 88200, 96000))
        add(kind="up", family=fam, chain=ch, src=s, rate=d)

    # one channel converted up, the others native
    one = [("zita-resampler", dict(tool="zita")), ("gst-kaiser-q10", dict(tool="gst", method="kaiser", quality=10)),
           ("julius-sinc-z32", dict(tool="julius", zeros=32, rolloff=0.97)),
           ("gst-bnuttall-q8", dict(tool="gst", method="blackman-nuttall", quality=8))]
    for i in range(10):
        fam, ch = one[i % len(one)]
        chans = 2 if i < 6 else 6
        s, d = _pair(rng, sources=(22050, 32000, 44100, 48000),
                     targets=(48000, 88200, 96000, 192000) if chans == 2 else (48000, 88200, 96000))
        which = int(rng.choice([0, 1] if chans == 2 else [0, 1, 2, 4, 5]))
        add(kind="one", family=fam, chain=ch, src=s, rate=d, channels=chans, which=which, material="band")

    # LAME at a lower rate, decoded, converted up
    low = [(8000, ["-b", "16"]), (11025, ["-b", "24"]), (16000, ["-b", "32"]), (16000, ["-b", "64"]),
           (22050, ["-b", "48"]), (22050, ["-b", "96"]), (24000, ["-b", "64"]), (24000, ["-V", "4"]),
           (32000, ["-b", "96"]), (32000, ["-b", "128"]), (11025, ["-b", "32"]), (22050, ["-V", "2"])]
    for s, args in low:
        d = int(rng.choice([t for t in (44100, 48000, 88200, 96000) if t > s]))
        add(kind="codec-up", family="lame", args=args, src=s, rate=d, channels=int(rng.choice([1, 2])),
            material="speech" if s <= 11025 else str(rng.choice(["band", "speech"])),
            up=str(rng.choice(["zita", "gst-kaiser-q10"])))

    # naive synthesis / nonlinear processes and their twins
    for i, kind in enumerate(["pd", "trisync", "wtnearest", "hardclip", "wavefold"] * 5):
        r = int(rng.choice([44100, 48000, 44100, 48000, 88200, 96000]))
        lo, hi = {"pd": (700, 2500), "trisync": (150, 900), "wtnearest": (500, 2000),
                  "hardclip": (1500, 4500), "wavefold": (1200, 4000)}[kind]
        if r > 48000:
            lo, hi = 2 * lo, 2 * hi
        add(kind="synth", osc=kind, rate=r, channels=int(rng.choice([1, 2])), dur=float(rng.uniform(3, 4.5)),
            voices=int(rng.integers(2, 5)), lo=lo, hi=hi,
            drive=float(rng.uniform(8.0, 25.0) if kind == "hardclip" else rng.uniform(4.0, 12.0)),
            table=int(rng.choice([64, 128, 256])), material="synth")

    # down-conversions: nearest / linear (folding) and kaiser q10 / zita (clean)
    for i in range(10):
        r0 = int(rng.choice([88200, 96000, 176400, 192000, 48000]))
        d = int(rng.choice([r for r in (22050, 24000, 32000, 44100, 48000) if r <= r0 / 2 + 1] or [44100]))
        add(kind="down-naive", family=("gst-nearest-down" if i % 2 == 0 else "gst-linear-down"),
            method=("nearest" if i % 2 == 0 else "linear"), src=r0, rate=d, material="bright",
            channels=int(rng.choice([1, 2])))
    for i in range(10):
        r0 = int(rng.choice([88200, 96000, 176400, 192000, 48000]))
        d = int(rng.choice([r for r in (32000, 44100, 48000, 88200, 96000) if r < r0] or [44100]))
        add(kind="down", family=("gst-kaiser-q10-down" if i % 2 == 0 else "zita-resampler-down"), src=r0, rate=d,
            material="bright" if i < 5 else "band", channels=int(rng.choice([1, 2])))

    # native material at every rate, speech
    for i, r in enumerate(STANDARD_RATES_HZ + (44100, 48000, 96000, 88200)):
        add(kind="native", family="native", rate=r, material=["band", "sparse", "noise", "band"][i % 4])
    for r in (8000, 16000, 22050, 24000, 44100, 48000):
        add(kind="native", family="native", rate=r, material="speech", channels=1)

    # mastering low-passes
    lp = [("gst-wsinc-hamming", dict(fc=20000, length=int(rng.choice([101, 255, 511])), window=0)),
          ("gst-wsinc-blackman", dict(fc=19000, length=255, window=1)),
          ("gst-wsinc-blackman", dict(fc=16000, length=61, window=1)),
          ("gst-wsinc-hamming", dict(fc=21000, length=1023, window=0)),
          ("gst-cheb1", dict(fc=18000, poles=int(rng.choice([4, 6, 8])), ripple=0.25, type=1)),
          ("gst-cheb1", dict(fc=20000, poles=4, ripple=0.5, type=1)),
          ("gst-cheb2", dict(fc=21000, poles=8, ripple=60.0, type=2)),
          ("gst-cheb2", dict(fc=19500, poles=6, ripple=40.0, type=2)),
          ("scipy-ellip", dict(fc=20000, order=int(rng.integers(4, 8)), rp=0.1, rs=80.0)),
          ("scipy-ellip", dict(fc=17000, order=5, rp=0.5, rs=60.0)),
          ("scipy-ellip", dict(fc=21500, order=7, rp=0.05, rs=90.0)),
          ("scipy-remez", dict(fc=20000, tw=2000, taps=int(rng.choice([127, 201])))),
          ("scipy-remez", dict(fc=18000, tw=4000, taps=63)),
          ("scipy-remez", dict(fc=16500, tw=1500, taps=255))]
    for fam, prm in lp:
        add(kind="lowpass", family=fam, prm=prm, rate=int(rng.choice([44100, 48000, 88200, 96000])), material="band")

    # LAME at the file's own rate
    own = [(["-b", "128"], 44100), (["-b", "192"], 44100), (["-b", "320"], 44100), (["-b", "256"], 48000),
           (["-b", "160"], 48000), (["-V", "0"], 44100), (["-V", "2"], 48000), (["-V", "5"], 44100),
           (["-V", "7"], 48000), (["-b", "96"], 32000), (["-b", "112"], 48000), (["-b", "224"], 32000),
           (["-V", "3"], 32000), (["-b", "64"], 44100)]
    for args, r in own:
        add(kind="codec", family="lame", args=args, rate=r, src=r, channels=int(rng.choice([1, 2])),
            material=str(rng.choice(["band", "band", "speech"])))

    for i, p in enumerate(P):
        p["idx"] = i
    return P


def _bucket(p: dict) -> str:
    return {"up": "up", "one": "one", "codec-up": "codec-up", "synth": f"synth-{p.get('osc')}",
            "down-naive": "down-naive", "down": "down", "native": f"native-{p['material'] == 'speech'}",
            "lowpass": "lowpass", "codec": "codec"}[p["kind"]] + (
        "-img" if p["kind"] == "up" and p["family"].split("-q")[0] in ("gst-nearest", "gst-linear", "gst-cubic") else "")


def _quick_indices(plan: list[dict]) -> list[int]:
    """About two plans per bucket (kind, and imaging vs proper up-conversion), skipping rates above 96 kHz."""
    out, seen = [], {}
    for p in plan:
        b = _bucket(p)
        if max(p.get("rate", 0), p.get("src", 0)) > 96000 or seen.get(b, 0) >= 2:
            continue
        seen[b] = seen.get(b, 0) + 1
        out.append(p["idx"])
    return out


# ------------------------------------------------------------------------------------------------------------
# rendering
# ------------------------------------------------------------------------------------------------------------

def _needs(p: dict) -> list[str]:
    need = []
    tool = (p.get("chain") or {}).get("tool", "")
    fam = p.get("family", "") or ""
    if tool == "gst" or fam.startswith("gst") or p["kind"] == "down-naive" or p.get("up") == "gst-kaiser-q10":
        need.append("gst")
    if tool == "zita" or fam.startswith("zita") or p.get("up") == "zita":
        need.append("zita")
    if tool == "julius":
        need.append("julius")
    if fam == "lame":
        need.append("lame")
    return need


def _family_ok(p: dict) -> bool:
    have = {"gst": _gst_ok, "zita": lambda: ZITA is not None, "julius": _julius_ok, "lame": lambda: LAME is not None}
    return all(have[k]() for k in _needs(p))


def _name(seed: int, p: dict, *parts) -> str:
    s = "-".join([f"d{seed}", f"{p['idx']:03d}", *[str(x) for x in parts if x not in (None, "")]])
    return re.sub(r"[^a-z0-9_-]+", "", s.lower().replace(".", "_"))


def up_convert(x: np.ndarray, rate: int, out_rate: int, chain: dict) -> np.ndarray:
    t = chain["tool"]
    if t == "gst":
        return gst_resample(x, rate, out_rate, chain["method"], chain["quality"])
    if t == "zita":
        return zita_resample(x, rate, out_rate)
    if t == "julius":
        return julius_resample(x, rate, out_rate, chain["zeros"], chain["rolloff"])
    raise ValueError(chain)


NEG3 = {"upsampled_from_hz": None, "imaging_detected": False, "aliasing_detected": False}


def _render(seed: int, p: dict, quick: bool) -> Iterator[Case]:
    rng = np.random.default_rng([seed, p["idx"], 4242])
    dur = 3.0 if quick else p["dur"]
    k, ch, rate = p["kind"], p["channels"], p["rate"]

    def frames(r):
        return int(max(2.5, min(dur, MAX_SAMPLES / ch / max(rate, r, p.get("src", 0)))) * r)

    if k == "up":
        s, d = p["src"], rate
        x = material(p["material"], frames(s), s, ch, rng)
        y = up_convert(x, s, d, p["chain"])
        edge, img = transfer_edge_frac(x, s, y, d), image_db(y, d, s)
        facts = dict(edge_frac=edge, image_db=img, src_hz=s)
        expect = {"upsampled_from_hz": s}
        if img >= IMAGE_MIN_DB:
            group, expect["imaging_detected"] = "imaging", True
        elif img <= IMAGE_MAX_NEG_DB:
            expect["imaging_detected"] = False
            group = "upsampled" if EDGE_LO_FRAC <= edge <= EDGE_HI_FRAC else "ambiguous-upsampled-lowband"
        else:
            group = "ambiguous-imaging-weak"
        y, facts["level_db"] = set_level(y, p["level"])
        yield Case(_name(seed, p, p["family"], p["material"], _khz(s), _khz(d)), SET_NAME, p["family"], group, d, y,
                   expect, _labels(ch), facts, f"{p['material']} {ch} ch made at {s} Hz, {p['chain']} to {d} Hz")
        return

    if k == "one":
        s, d = p["src"], rate
        n_src = frames(s)
        nat = material("band", int(round(n_src * d / s)), d, ch, rng)
        srcx = material("band", n_src, s, 1, rng)
        y1 = up_convert(srcx, s, d, p["chain"])
        edge, img = transfer_edge_frac(srcx, s, y1, d), image_db(y1, d, s)
        others = [c for c in range(ch) if c != p["which"] and not (ch == 6 and c == LFE_INDEX)]
        nat_hi = min(top_band_db(nat[:, c], d) for c in others)
        y = nat.copy()
        y[:, p["which"]] = _fit(y1, y.shape[0])[:, 0] * (np.std(nat[:, p["which"]]) / (np.std(y1) + 1e-12))
        facts = dict(edge_frac=edge, image_db=img, native_top_db=nat_hi, src_hz=s)
        if not (EDGE_LO_FRAC <= edge <= EDGE_HI_FRAC and img <= IMAGE_MAX_NEG_DB and nat_hi > -60):
            return
        y, facts["level_db"] = set_level(y, p["level"])
        lab = _labels(ch)
        yield Case(_name(seed, p, p["family"], "one", lab[p["which"]], _khz(s), _khz(d)), SET_NAME, p["family"],
                   "upsampled-one-channel", d, y, {"upsampled_channels": [lab[p["which"]]]}, lab, facts,
                   f"channel {lab[p['which']]} made at {s} Hz and converted up by {p['chain']}; others native")
        return

    if k == "codec-up":
        s, d = p["src"], rate
        x = material(p["material"], frames(s), s, ch, rng)
        yc, r_dec = lame_roundtrip(x, s, s, p["args"])
        if r_dec != s:                                # the decoder's rate is the truth for the label
            s = r_dec
        if p["up"] == "zita":
            y = zita_resample(yc, s, d)
        else:
            y = gst_resample(yc, s, d, "kaiser", 10)
        ed, img = spectrum_edge_frac(y, d, s), image_db(y, d, s)
        facts = dict(band_edge_frac=ed, image_db=img, src_hz=s)
        if img > IMAGE_MAX_NEG_DB:
            return
        group = "upsampled-via-codec" if EDGE_LO_FRAC <= ed <= CODEC_EDGE_HI_FRAC else "ambiguous-codec-upsampled"
        y, facts["level_db"] = set_level(y, p["level"])
        setting = "".join(p["args"]).replace("-b", "cbr").replace("-V", "v")
        yield Case(_name(seed, p, "lame", setting, "at", _khz(s), "up", p["up"], _khz(d)), SET_NAME,
                   f"lame-low-rate-{p['up']}", group, d, y, {"upsampled_from_hz": s, "imaging_detected": False},
                   _labels(ch), facts, f"LAME {p['args']} at {s} Hz, decoded, converted up to {d} Hz by {p['up']}")
        return

    if k == "codec":
        x = material(p["material"], frames(rate), rate, ch, rng)
        y, r_dec = lame_roundtrip(x, rate, rate, p["args"])
        if r_dec != rate:
            return
        y = _fit(_align(x, y), x.shape[0])
        f3, f40 = transfer_points(x, y, rate)
        steep, near = steep_near_rates(f3, f40, rate)
        y, lvl = set_level(y, p["level"])
        setting = "".join(p["args"]).replace("-b", "cbr").replace("-V", "v")
        yield Case(_name(seed, p, "lame", setting, _khz(rate)), SET_NAME, f"lame-{setting}",
                   "ambiguous-codec-shelf" if steep and near else "codec-shelf", rate, y,
                   {"upsampled_from_hz": None, "imaging_detected": False}, _labels(ch),
                   dict(f3_hz=f3, f40_hz=f40, steep=steep, near_rates=near, level_db=lvl),
                   "LAME round trip at the file's rate")
        return

    if k == "synth":
        n = frames(rate)
        plan = voices_plan(n, rate, rng, p["voices"], p["lo"], p["hi"])
        osc = p["osc"]
        facts = {}
        if osc in ("hardclip", "wavefold"):
            a = nl_render(osc, n, rate, plan, p["drive"], 1)
            over = 32 if osc == "hardclip" else 16          # the clipper's corners decay slowly: more headroom
            b = nl_render(osc, n, rate, plan, p["drive"], over)
            b_half = nl_render(osc, n, rate, plan, p["drive"], over // 2)
            facts["twin_residual_db"] = _db(_energy(b - b_half), _energy(b))   # bounds what b keeps of folding
            fam_n, fam_b = f"naive-{osc}", f"oversampled-{osc}"
        else:
            if osc == "wtnearest":
                tab = bright_table(rng, p["table"])
                for v in plan:
                    v["table"] = tab
            a = osc_render(osc, n, rate, plan, naive=True)
            b = osc_render(osc, n, rate, plan, naive=False)
            fam_n, fam_b = f"naive-{osc}", f"additive-{osc}"
        fold = _db(_energy(a - b), _energy(b))
        facts["fold_db"] = fold
        gains = [rng.uniform(0.6, 1.0) for _ in range(ch)]
        if fold >= FOLD_MIN_DB:
            ya, la = set_level(np.stack([a * g for g in gains], axis=1), p["level"])
            yield Case(_name(seed, p, fam_n, _khz(rate)), SET_NAME, fam_n, "naive-synth", rate, ya,
                       {"aliasing_detected": True, "upsampled_from_hz": None, "imaging_detected": False}, _labels(ch),
                       dict(facts, level_db=la, voices=p["voices"]), "naive rendering: folded partials")
        if facts.get("twin_residual_db", -999.0) <= TWIN_RESIDUAL_MAX_DB:
            yb, lb = set_level(np.stack([b * g for g in gains], axis=1), p["level"])
            yield Case(_name(seed, p, fam_b, _khz(rate)), SET_NAME, fam_b, "band-limited-synth", rate, yb,
                       dict(NEG3), _labels(ch), dict(facts, level_db=lb), "band-limited twin")
        return

    if k in ("down-naive", "down"):
        r0, d = p["src"], rate
        x = material(p["material"], frames(r0), r0, ch, rng)
        if k == "down-naive":
            def chain(z):
                return gst_resample(z, r0, d, p["method"], 4)
        elif p["family"].startswith("gst"):
            def chain(z):
                return gst_resample(z, r0, d, "kaiser", 10)
        else:
            def chain(z):
                return zita_resample(z, r0, d)
        y = chain(x)
        _, xhi = band_split(x, r0, d / 2)
        fold = _db(_energy(_mid(chain(xhi), d)), _energy(_mid(y, d)))
        facts = dict(fold_db=fold, src_hz=r0)
        if k == "down":
            if fold > LEAK_MAX_DB:
                return
            group = "filtered-decimation" if p["material"] == "bright" else "downsampled"
            expect = dict(NEG3)
        elif fold >= FOLD_MIN_DB:
            group = "decimation"
            expect = {"aliasing_detected": True, "upsampled_from_hz": None, "imaging_detected": False}
        elif fold > FOLD_AMBIG_DB:
            group = "ambiguous-decimation"
            expect = {"upsampled_from_hz": None, "imaging_detected": False}
        else:
            group = "filtered-decimation"
            expect = dict(NEG3)
        y, facts["level_db"] = set_level(y, p["level"])
        yield Case(_name(seed, p, p["family"], _khz(r0), _khz(d)), SET_NAME, p["family"], group, d, y, expect,
                   _labels(ch), facts, f"{p['material']} made at {r0} Hz, {p['family']} to {d} Hz")
        return

    if k == "native":
        x = material(p["material"], frames(rate), rate, ch, rng)
        top = top_band_db(x, rate)
        if top < -80:
            return
        y, lvl = set_level(x, p["level"])
        yield Case(_name(seed, p, "native", p["material"], _khz(rate)), SET_NAME, "native",
                   "speech" if p["material"] == "speech" else "native", rate, y, dict(NEG3), _labels(ch),
                   dict(top_band_db=top, level_db=lvl), f"{p['material']} made at {rate} Hz")
        return

    if k == "lowpass":
        x = material("band", frames(rate), rate, ch, rng)
        fam, prm = p["family"], p["prm"]
        fc = min(prm["fc"], 0.45 * rate)
        imp = np.zeros((1 << 14, 1))
        imp[1 << 12, 0] = 1.0
        if fam.startswith("gst-wsinc"):
            el = ["audiowsinclimit", "mode=low-pass", f"cutoff={fc:.0f}", f"length={prm['length']}",
                  f"window={prm['window']}"]
        elif fam.startswith("gst-cheb"):
            el = ["audiocheblimit", "mode=low-pass", f"cutoff={fc:.0f}", f"poles={prm['poles']}",
                  f"ripple={prm['ripple']}", f"type={prm['type']}"]
        if fam.startswith("gst"):
            y = _fit(gst_pipe(x, rate, rate, el), x.shape[0])
            h = gst_pipe(imp, rate, rate, el)[:, 0]
        elif fam == "scipy-ellip":
            sos = signal.ellip(prm["order"], prm["rp"], prm["rs"], fc, fs=rate, output="sos")
            y = signal.sosfilt(sos, x, axis=0)
            h = signal.sosfilt(sos, imp[:, 0])
        else:
            edge = min(fc + prm["tw"], 0.49 * rate)
            try:
                taps = signal.remez(prm["taps"], [0, fc, edge, rate / 2], [1, 0], fs=rate, maxiter=60)
            except ValueError:               # no convergence: the least-squares linear-phase design of the same band
                taps = signal.firls(prm["taps"] | 1, [0, fc, edge, rate / 2], [1, 1, 0, 0], fs=rate)
                fam = "scipy-firls"
            y = signal.lfilter(taps, [1.0], x, axis=0)
            h = taps
        f3, f40 = response_points(h, rate)
        steep, near = steep_near_rates(f3, f40, rate)
        y, lvl = set_level(y, p["level"])
        yield Case(_name(seed, p, fam, int(fc), _khz(rate)), SET_NAME, fam,
                   "ambiguous-lowpass" if steep and near else "lowpass", rate, y, dict(NEG3), _labels(ch),
                   dict(f3_hz=f3, f40_hz=f40, steep=steep, near_rates=near, level_db=lvl), str(prm))
        return
    raise ValueError(f"unknown plan kind {k!r}")


def cases(seed: int, quick: bool = False) -> Iterator[Case]:
    """Yield the corpus for ``seed`` (8000-8999), or its quick slice (about two cases per bucket, 3 s each)."""
    if seed not in SEED_RANGE:
        raise ValueError(f"corpus_validation_d: seed {seed} is outside {SEED_RANGE.start}-{SEED_RANGE.stop - 1}")
    plan = build_plan(seed)
    if quick:
        keep = set(_quick_indices(plan))
        plan = [p for p in plan if p["idx"] in keep]
    for p in plan:
        if not _family_ok(p):
            fam = p.get("family") or p["kind"]
            if fam not in SKIPPED_FAMILIES:
                SKIPPED_FAMILIES.append(fam)
                print(f"corpus_validation_d: {fam} skipped (tool not installed: {', '.join(_needs(p))})",
                      file=sys.stderr)
            continue
        try:
            rendered = list(_render(seed, p, quick))
        except UnsupportedRatio as e:                 # the tool refuses this pair of rates: no case, said so
            DROPPED_CASES.append(f"{p.get('family') or p['kind']} {p.get('src')} -> {p.get('rate')}: {e}")
            print(f"corpus_validation_d: case dropped ({DROPPED_CASES[-1]})", file=sys.stderr)
            continue
        yield from rendered


def plan_counts(seed: int) -> dict:
    out: dict = {}
    for p in build_plan(seed):
        out[p["kind"]] = out.get(p["kind"], 0) + 1
    return out


def main(argv: list[str] | None = None) -> int:
    import argparse
    ap = argparse.ArgumentParser(description="Generate validation set D and print counts and construction facts.")
    ap.add_argument("--seed", type=int, default=8000)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--only", help="render only plan kinds in this comma-separated list (for checking)")
    ap.add_argument("--out", help="write each case as WAV PCM_24 into this folder")
    ap.add_argument("--verbose", action="store_true")
    a = ap.parse_args(argv)
    print_versions()
    t0 = time.perf_counter()
    groups: dict = {}
    fams: dict = {}
    names = set()
    only = set(a.only.split(",")) if a.only else None
    if only:
        plan = [p for p in build_plan(a.seed) if p["kind"] in only]
        it = (c for p in plan if _family_ok(p) for c in _render(a.seed, p, a.quick))
    else:
        it = cases(a.seed, quick=a.quick)
    for c in it:
        assert c.name not in names, c.name
        assert c.audio.ndim == 2 and np.all(np.isfinite(c.audio)) and np.max(np.abs(c.audio)) <= 1.0, c.name
        names.add(c.name)
        groups[c.group] = groups.get(c.group, 0) + 1
        fams[c.family] = fams.get(c.family, 0) + 1
        if a.verbose:
            fx = ", ".join(f"{k}={v:.3g}" if isinstance(v, float) else f"{k}={v}" for k, v in c.facts.items())
            print(f"{c.name:64s} {c.group:26s} {c.expect} {fx}", flush=True)
        if a.out:
            import soundfile as sf
            os.makedirs(a.out, exist_ok=True)
            sf.write(os.path.join(a.out, c.name + ".wav"), c.audio, c.rate_hz, subtype="PCM_24")
    print(f"{len(names)} cases in {time.perf_counter() - t0:.1f} s (seed {a.seed}, quick={a.quick})")
    for g in sorted(groups):
        print(f"  group {g:30s} {groups[g]}")
    for f_ in sorted(fams):
        print(f"  family {f_:40s} {fams[f_]}")
    if SKIPPED_FAMILIES:
        print("skipped:", ", ".join(SKIPPED_FAMILIES))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
