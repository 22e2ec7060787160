"""``masterqc demo``: invented example masters, checked against the invented demo specs.

Every master is synthesised here from a fixed random seed (chords, bass,
percussion, noise beds, speech-like bursts), set to a designed integrated
loudness, and some carry a deliberate fault.  :data:`MASTERS` lists each one
with the properties it was built to have; the tests derive every expected
verdict from those properties and check the properties themselves with
reference libraries.

The five 96 kHz masters show the sampling-integrity checks against the
high-resolution album spec (specs_demo/quillfen-hires.yaml): one made at
96 kHz that passes; one made at 44.1 kHz and converted up with a good
resampler (:func:`good_upsample`); one with a naively generated sawtooth lead
(:func:`naive_saw_lead`, its partials above Nyquist fold back); one with a
stationary 30 kHz tone; and one whose bells' ultrasonic partial flattens their
peaks (:func:`flat_topped_bell`), so its 48 and 44.1 kHz deliverables go over
the true-peak ceiling that the 96 kHz master meets.

All titles, labels, networks and people are invented.

CAUTION: the demo masters include loud test content (a hot master, a clipped
master, full-scale 12 kHz bursts, a 30 kHz tone you cannot hear but your
tweeters and amplifier can).  Set the monitoring level low before listening.  masterqc is a measurement aid: the receiving party's own spec and
QC govern acceptance.
"""

from __future__ import annotations

import os
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

from fractions import Fraction

import numpy as np
import soundfile as sf
from scipy import signal

CAUTION = ("CAUTION: the demo masters include loud test content (hot, clipped and full-scale "
           "high-frequency material, and a 30 kHz tone that is inaudible but reaches your tweeters); "
           "set your monitoring level low before listening. masterqc is a "
           "measurement aid: the receiving party's own spec and QC govern acceptance.")

SEED = 20261201


# ---------------------------------------------------------------- building blocks

def _note_hz(midi: float) -> float:
    return 440.0 * 2.0 ** ((midi - 69) / 12.0)


def _env(n: int, sr: int, attack_s: float, release_s: float) -> np.ndarray:
    """Linear attack, exponential-ish release envelope of ``n`` samples."""
    e = np.ones(n)
    a = max(1, min(n, int(attack_s * sr)))
    e[:a] = np.linspace(0.0, 1.0, a)
    r = max(1, min(n - a, int(release_s * sr)))
    e[n - r:] *= np.linspace(1.0, 0.0, r) ** 2
    return e


def _tone(freq_hz: float, n: int, sr: int, harmonics: int = 6, bright: float = 1.0, phase: float = 0.0):
    t = np.arange(n) / sr
    out = np.zeros(n)
    for k in range(1, harmonics + 1):
        if k * freq_hz >= 0.45 * sr:
            break
        out += (bright ** (k - 1)) / k * np.sin(2 * np.pi * k * freq_hz * t + phase * k)
    return out


def _pink(n: int, rng) -> np.ndarray:
    """Pink-ish noise (-3 dB/octave) by filtering white noise, unit RMS."""
    white = rng.standard_normal(n)
    b = [0.049922035, -0.095993537, 0.050612699, -0.004408786]
    a = [1.0, -2.494956002, 2.017265875, -0.522189400]
    x = signal.lfilter(b, a, white)
    return x / (np.sqrt(np.mean(x ** 2)) + 1e-30)


def music(duration_s: float, sr: int, rng, tempo_bpm: float = 112.0, key_midi: int = 57) -> np.ndarray:
    """A stereo music-like bed: chords, bass, kick, snare, hats and a noise bed (frames, 2).

    The pitched parts and the kick repeat exactly every cycle of the chord progression, so one
    cycle is made and tiled (a 2-minute master costs little more than a 10-second one); the
    snare, hats and noise bed are fresh noise throughout."""
    n = int(round(duration_s * sr))
    beat = int(round(60.0 / tempo_bpm * sr))
    bar = 4 * beat
    progression = [(0, 4, 7, 11), (5, 9, 12, 16), (7, 11, 14, 17), (9, 12, 16, 19)]  # I, IV, V, vi-ish
    nc = min(n, len(progression) * bar)     # one cycle of the progression
    cycle = np.zeros((nc, 2))
    # chords: one per bar, slight detune and pan per voice
    for i, start in enumerate(range(0, nc, bar)):
        m = min(bar, nc - start)
        chord = progression[i % len(progression)]
        env = _env(m, sr, 0.03, 0.4)
        for j, step in enumerate(chord):
            f = _note_hz(key_midi + step) * (1 + 0.001 * (j - 1.5))
            v = _tone(f, m, sr, harmonics=5, bright=0.6) * env * 0.12
            pan = 0.25 + 0.5 * (j / (len(chord) - 1))
            cycle[start:start + m, 0] += v * np.cos(pan * np.pi / 2)
            cycle[start:start + m, 1] += v * np.sin(pan * np.pi / 2)
    # bass: root on every beat, an octave below the chords
    for i, start in enumerate(range(0, nc, beat)):
        m = min(beat, nc - start)
        root = progression[(i // 4) % len(progression)][0]
        f = _note_hz(key_midi - 24 + root)
        v = _tone(f, m, sr, harmonics=3, bright=0.5) * _env(m, sr, 0.005, 0.25) * 0.35
        cycle[start:start + m] += v[:, None]
    # kick on beats 1 and 3
    for i, start in enumerate(range(0, nc, beat)):
        if i % 2 == 0:
            m = min(int(0.18 * sr), nc - start)
            t = np.arange(m) / sr
            sweep = 2 * np.pi * np.cumsum(50 + 90 * np.exp(-t / 0.03)) / sr
            v = np.sin(sweep) * np.exp(-t / 0.06) * 0.5
            cycle[start:start + m] += v[:, None]
    out = np.empty((n, 2))
    for k in range(0, n, nc):
        out[k:k + nc] = cycle[:min(nc, n - k)]
    # snare on 2 and 4, hats on eighths
    snare_b, snare_a = signal.butter(2, [900 / (sr / 2), 5000 / (sr / 2)], "band")
    for i, start in enumerate(range(0, n, beat)):
        if i % 2 == 1:
            m = min(int(0.14 * sr), n - start)
            t = np.arange(m) / sr
            v = signal.lfilter(snare_b, snare_a, rng.standard_normal(m)) * np.exp(-t / 0.04) * 0.35
            out[start:start + m, 0] += v * 0.9
            out[start:start + m, 1] += v
    hat_b, hat_a = signal.butter(2, 7000 / (sr / 2), "high")
    for start in range(0, n, beat // 2):
        m = min(int(0.03 * sr), n - start)
        t = np.arange(m) / sr
        v = signal.lfilter(hat_b, hat_a, rng.standard_normal(m)) * np.exp(-t / 0.008) * 0.12
        out[start:start + m, 1] += v
        out[start:start + m, 0] += 0.5 * v
    # noise bed
    out += 0.004 * np.stack([_pink(n, rng), _pink(n, rng)], axis=1)
    return out


def speech(duration_s: float, sr: int, rng, f0_hz: float = 140.0) -> np.ndarray:
    """A mono speech-like signal: voiced syllables through formant filters, pauses, room tone (frames,)."""
    n = int(round(duration_s * sr))
    out = np.zeros(n)
    vowels = [(730, 1090, 2440), (270, 2290, 3010), (300, 870, 2240), (530, 1840, 2480), (570, 840, 2410)]
    formants = [[signal.iirpeak(fc / (sr / 2), fc / (80 + 40 * k)) for k, fc in enumerate(v)] for v in vowels]
    fric_b, fric_a = signal.butter(2, 3500 / (sr / 2), "high")
    pos = int(0.2 * sr)
    while pos < n:
        phrase_end = pos + int(rng.uniform(1.2, 2.6) * sr)
        while pos < min(phrase_end, n):
            m = min(int(rng.uniform(0.09, 0.26) * sr), n - pos)
            t = np.arange(m) / sr
            f0 = f0_hz * (1 + 0.08 * np.sin(2 * np.pi * rng.uniform(1, 3) * t)) * rng.uniform(0.9, 1.15)
            phase = 2 * np.pi * np.cumsum(f0) / sr
            src = np.sign(np.sin(phase)) * 0.5 + 0.5 * np.sin(phase)  # buzzy glottal-like source
            v = np.zeros(m)
            for k, (b, a) in enumerate(formants[rng.integers(len(vowels))]):
                v += signal.lfilter(b, a, src) / (k + 1)
            if rng.random() < 0.3:  # fricative onset
                fr = min(int(0.05 * sr), m)
                v[:fr] += signal.lfilter(fric_b, fric_a, rng.standard_normal(fr)) * 0.3
            out[pos:pos + m] += v * np.hanning(m)
            pos += m + int(rng.uniform(0.02, 0.08) * sr)
        pos += int(rng.uniform(0.3, 0.8) * sr)
    out += 0.0015 * _pink(n, rng)  # room tone
    return out


def integrated_lufs(x: np.ndarray, sr: int) -> float:
    """Integrated loudness (BS.1770) of an in-memory signal, with masterqc's meter."""
    from masterqc.audio.layout import bs1770_weight
    from masterqc.measure.loudness import LoudnessMeter
    x2 = x if x.ndim == 2 else x[:, None]
    labels = ["L", "R"] if x2.shape[1] == 2 else ["C"] * x2.shape[1]
    meter = LoudnessMeter(sr, [bs1770_weight(lab) for lab in labels])
    meter.process(x2)
    value = meter.summary().gating.integrated_lufs
    if value is None:
        raise ValueError("demo signal has no gated loudness")
    return value


def set_loudness(x: np.ndarray, sr: int, target_lufs: float) -> np.ndarray:
    """``x`` scaled to ``target_lufs`` integrated (gating is scale-invariant, so one pass is exact)."""
    return x * 10.0 ** ((target_lufs - integrated_lufs(x, sr)) / 20.0)


def quarter_rate_burst(n: int, amplitude: float, sr: int, fade_s: float = 0.004) -> np.ndarray:
    """``n`` samples of a sine at fs/4 with 45 degree phase: samples at +-0.707*amplitude,
    true peak ``amplitude`` (the shape of EBU Tech 3341 true-peak case 16)."""
    k = np.arange(n)
    x = amplitude * np.sin(np.pi / 2 * k + np.pi / 4)
    return x * _env(n, sr, fade_s, fade_s) ** 0.5


def good_upsample(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    """``x`` (frames, channels) converted from ``fs_in`` to ``fs_out`` (> ``fs_in``) as a good
    sample-rate converter does: polyphase FIR (scipy ``resample_poly``), Kaiser window for
    110 dB stop-band attenuation, -6 dB at 21 kHz, stop band from 22 kHz (below the 22.05 kHz
    Nyquist frequency of 44.1 kHz, so no mirror image of the source passes)."""
    fr = Fraction(fs_out, fs_in)
    up, down = fr.numerator, fr.denominator
    work_hz = fs_in * up
    numtaps, beta = signal.kaiserord(110.0, 2000.0 / (work_hz / 2.0))
    h = signal.firwin(numtaps | 1, 21000.0, window=("kaiser", beta), fs=work_hz)
    return signal.resample_poly(x, up, down, axis=0, window=h)


#: the notes of the naive synthesiser lead (MIDI numbers, one per eighth of the master);
#: 96000 Hz is a whole multiple of none of their fundamentals, so their folded partials
#: fall between the harmonics and can be told from them
LEAD_NOTES = (69, 72, 76, 74, 72, 69, 67, 69)


def naive_saw_lead(duration_s: float, sr: int, notes=LEAD_NOTES) -> np.ndarray:
    """A mono sawtooth lead generated naively: the ideal sawtooth evaluated at the sample
    instants (2*phase - 1), not band-limited, so every partial above ``sr``/2 folds back
    into the band.  Peak 1, a short fade at each note's start and end (frames,)."""
    n = int(round(duration_s * sr))
    out = np.zeros(n)
    step = n // len(notes)
    for i, midi in enumerate(notes):
        k = np.arange(step)
        phase = np.mod(k * _note_hz(midi) / sr + 0.123, 1.0)
        out[i * step:(i + 1) * step] = (2.0 * phase - 1.0) * _env(step, sr, 0.01, 0.05)
    return out


#: the bell partials of :func:`flat_topped_bell`: a fundamental and its third harmonic at a
#: sixth of its amplitude, in sine phase: sin(x) + sin(3x)/6 peaks at sqrt(3)/2 (at x = 60 deg,
#: where the first derivative cos(x) + cos(3x)/2 is zero), 1.249 dB below the fundamental's own peak
BELL_HZ = 11000.0
BELL_THIRD_RATIO = 1.0 / 6.0


def flat_topped_bell(n: int, sr: int, peak: float, fade_s: float = 0.005) -> np.ndarray:
    """``n`` samples of a bell tone of :data:`BELL_HZ` whose third harmonic (33 kHz, ultrasonic)
    flattens its peaks: true peak ``peak``.  Without the third harmonic (any conversion to
    48 or 44.1 kHz removes it) the peak is ``peak * 2/sqrt(3)``, 1.249 dB higher (frames,)."""
    x = 2.0 * np.pi * BELL_HZ * np.arange(n) / sr
    wave = (np.sin(x) + BELL_THIRD_RATIO * np.sin(3.0 * x)) / (np.sqrt(3.0) / 2.0)
    return peak * wave * _env(n, sr, fade_s, fade_s) ** 0.5


def sine(freq_hz: float, n: int, sr: int, peak: float) -> np.ndarray:
    """``n`` samples of a sine of ``freq_hz`` with peak amplitude ``peak`` (frames,)."""
    return peak * np.sin(2 * np.pi * freq_hz * np.arange(n) / sr)


# ---------------------------------------------------------------- the masters

@dataclass(frozen=True)
class DemoMaster:
    """One invented master and the properties it is built to have.

    ``integrated_lufs`` is set exactly (to float precision); the ``*_max`` and
    ``*_min`` fields are design bounds the tests verify with reference libraries.
    """

    stem: str
    title: str
    build: str
    sample_rate_hz: int
    bit_depth: int
    channels: int
    duration_s: float
    integrated_lufs: float
    true_peak_dbtp_max: float
    true_peak_dbtp_min: float | None = None
    loudness_range_lu_min: float | None = None
    loudness_range_lu_max: float | None = None
    max_short_term_lufs_max: float | None = None
    sample_peak_dbfs_max: float | None = None
    fault: str = ""
    #: demo specs this master is checked against by ``masterqc demo`` (stems in specs_demo/)
    demo_specs: tuple = field(default_factory=tuple)
    #: sampling integrity by construction: the rate the music was made at before a good
    #: upsampler brought it to ``sample_rate_hz`` (None: made at its own rate)
    source_rate_hz: int | None = None
    #: a naively generated (non-band-limited, so folding) waveform is part of the mix
    naive_synthesis: bool = False
    #: a stationary ultrasonic tone in the mix: (frequency Hz, peak level dBFS), or None
    ultrasonic_tone: tuple | None = None
    #: bell bursts whose ultrasonic partial flattens their peaks (:func:`flat_topped_bell`):
    #: their true peak at the master's rate, dBTP, or None
    bell_peak_dbtp: float | None = None


#: length of the masters made for the long-form programme spec (ostravel-house): loudness range
#: and the short-term figures need well over a minute of programme to mean anything
LONG_FORM_S = 120.0

MASTERS: list[DemoMaster] = [
    DemoMaster("brelloway_theme", "Brelloway (main theme)", "music", 48000, 24, 2, LONG_FORM_S, -23.0,
               true_peak_dbtp_max=-8.0, loudness_range_lu_max=5.0, max_short_term_lufs_max=-19.0,
               demo_specs=("ostravel-house", "quillfen-album")),
    DemoMaster("quorrin_ad_hot", "Quorrin Street Bakery - 30 s spot", "music", 48000, 24, 2, 30.0, -15.0,
               true_peak_dbtp_max=-2.0, loudness_range_lu_max=5.0, max_short_term_lufs_max=-11.0,
               fault="too loud for broadcast (-15 LUFS)", demo_specs=("ostravel-shortform",)),
    DemoMaster("gullwick_overs", "Gullwick Glass (radio edit)", "music+bursts", 48000, 24, 2, LONG_FORM_S, -23.0,
               true_peak_dbtp_max=0.3, true_peak_dbtp_min=-0.4, sample_peak_dbfs_max=-2.9,
               fault="inter-sample overs: 12 kHz bursts peak at 0 dBTP while samples stay at -3 dBFS",
               demo_specs=("ostravel-house",)),
    DemoMaster("ostmere_suite_wide", "Ostmere Suite, mvt. II", "music+dynamics", 48000, 24, 2, LONG_FORM_S, -23.0,
               true_peak_dbtp_max=-9.0, loudness_range_lu_min=19.0, max_short_term_lufs_max=-19.0,
               fault="too much loudness range (quiet and loud passages 22 dB apart)",
               demo_specs=("ostravel-house",)),
    DemoMaster("pellany_interview_44k", "Pellany Talks, ep. 4 (interview)", "speech", 44100, 24, 2, LONG_FORM_S,
               -23.0,
               true_peak_dbtp_max=-8.0, fault="wrong sample rate for broadcast (44.1 kHz)",
               demo_specs=("ostravel-house",)),
    DemoMaster("trevarrow_clipped", "Trevarrow (club mix)", "music+clip", 48000, 24, 2, 20.0, -9.5,
               true_peak_dbtp_max=3.0, true_peak_dbtp_min=0.0, sample_peak_dbfs_max=0.0,
               fault="driven into hard clipping at full scale",
               demo_specs=("quillfen-album",)),
    DemoMaster("wrenmoor_episode", "Wrenmoor Stories, ep. 12", "speech", 48000, 24, 1, 15.0, -18.0,
               true_peak_dbtp_max=-2.0, demo_specs=("wrenmoor-spoken",)),
    DemoMaster("caddow_talk_quiet", "Caddow Talk, ep. 3", "speech", 48000, 16, 1, 15.0, -19.7,
               true_peak_dbtp_max=-2.0, fault="quiet: within 0.5 LU of the lower loudness limit",
               demo_specs=("wrenmoor-spoken",)),
    # high-resolution masters, checked against the high-resolution album spec
    DemoMaster("ilvenbrook_hires", "Ilvenbrook (high-resolution master)", "music", 96000, 24, 2, 12.0, -18.0,
               true_peak_dbtp_max=-3.5, demo_specs=("quillfen-hires",)),
    DemoMaster("yarrowgate_fake_hires", "Yarrowgate Dawn (\"96 kHz\" master)", "music", 96000, 24, 2, 12.0, -18.0,
               true_peak_dbtp_max=-3.5, source_rate_hz=44100,
               fault="not high resolution: a 44.1 kHz mix converted up to 96 kHz", demo_specs=("quillfen-hires",)),
    DemoMaster("drimble_synth_lead", "Drimble Run (synth lead mix)", "music+naive-lead", 96000, 24, 2, 12.0, -18.0,
               true_peak_dbtp_max=-3.5, naive_synthesis=True,
               fault="aliasing: a naively generated sawtooth lead folds its upper partials into the band",
               demo_specs=("quillfen-hires",)),
    DemoMaster("maunsel_pilot", "Maunsel Rise (high-resolution master)", "music+tone", 96000, 24, 2, 12.0, -18.0,
               true_peak_dbtp_max=-3.0, ultrasonic_tone=(30000.0, -30.0),
               fault="a 30 kHz tone at -30 dBFS left in the master (inaudible, but it adds 0.6 LU of loudness)",
               demo_specs=("quillfen-hires",)),
    DemoMaster("corrowin_bells", "Corrowin Waltz (high-resolution master)", "music+bells", 96000, 24, 2,
               12.0, -16.0, true_peak_dbtp_max=-1.2, true_peak_dbtp_min=-1.8, bell_peak_dbtp=-1.6,
               fault="under -1 dBTP at 96 kHz, over it once converted to 48 or 44.1 kHz: the bells' 33 kHz "
                     "partial flattens their peaks, and the conversion removes it",
               demo_specs=("quillfen-hires",)),
]


def _section_gain(n: int, sr: int, levels_db, fade_s: float = 0.5) -> np.ndarray:
    """Piecewise-constant gain (dB levels, equal sections) with short linear fades between."""
    k = len(levels_db)
    g = np.repeat(np.asarray(levels_db, dtype=float), int(np.ceil(n / k)))[:n]
    w = max(1, int(fade_s * sr))
    padded = np.pad(g, (w // 2, w - w // 2 - 1), mode="edge")
    c = np.concatenate([[0.0], np.cumsum(padded)])
    g = (c[w:] - c[:-w]) / w  # moving average: linear fades of fade_s between sections
    return 10.0 ** (g / 20.0)


def _voice_chain(x: np.ndarray, drive: float = 4.0) -> np.ndarray:
    """A gentle saturating leveller for the voice (peaks normalised, then tanh), as speech masters have."""
    x = x / (np.max(np.abs(x)) + 1e-30)
    y = np.tanh(drive * x) / np.tanh(drive)
    return signal.sosfilt(signal.butter(4, 0.35, "low", output="sos"), y)  # voice band: below 0.35 * Nyquist


def synthesize(master: DemoMaster, seed: int = SEED) -> np.ndarray:
    """The float signal of ``master`` (frames, channels), before writing to PCM."""
    rng = np.random.default_rng([seed, sum(map(ord, master.stem))])
    sr, dur = master.sample_rate_hz, master.duration_s
    n = int(round(dur * sr))
    if master.build == "music" and master.source_rate_hz:
        src = master.source_rate_hz  # made at the lower rate, then converted up properly
        x = good_upsample(music(dur, src, rng), src, sr)[:n]
        x = set_loudness(x, sr, master.integrated_lufs)
    elif master.build == "music":
        x = set_loudness(music(dur, sr, rng), sr, master.integrated_lufs)
    elif master.build == "music+naive-lead":
        x = 0.5 * music(dur, sr, rng) + 0.25 * naive_saw_lead(dur, sr)[:, None]
        x = set_loudness(x, sr, master.integrated_lufs)
    elif master.build == "music+bells":
        bells = np.zeros(n)
        burst_n = int(0.04 * sr)
        gap = np.ones(n)
        for start_s in (2.5, 6.0, 9.5):
            k = int(start_s * sr)
            bells[k:k + burst_n] = flat_topped_bell(burst_n, sr, 10.0 ** (master.bell_peak_dbtp / 20.0))
            pad = int(0.02 * sr)  # the music ducks by 30 dB under each bell, so the bells set the peaks
            gap[k - pad:k + burst_n + pad] = 10.0 ** (-30.0 / 20.0)
        gap = np.convolve(gap, np.ones(64) / 64, mode="same")
        bed = music(dur, sr, rng) * gap[:, None]
        gain = 10.0 ** ((master.integrated_lufs - integrated_lufs(bed, sr)) / 20.0)
        bells = np.stack([bells, 0.8 * bells], axis=1)
        for _ in range(30):  # the bells carry a good part of the loudness: settle the bed's gain
            x = bed * gain + bells
            err = master.integrated_lufs - integrated_lufs(x, sr)
            if abs(err) < 1e-4:
                break
            # Newton step: the bed's share of the power is how far its gain moves the total
            share = 10.0 ** ((integrated_lufs(bed * gain, sr) - (master.integrated_lufs - err)) / 10.0)
            gain *= 10.0 ** (err / max(share, 0.2) / 20.0)
    elif master.build == "music+tone":
        freq_hz, level_dbfs = master.ultrasonic_tone
        tone = sine(freq_hz, n, sr, 10.0 ** (level_dbfs / 20.0))[:, None]
        bed = music(dur, sr, rng)
        gain = 10.0 ** ((master.integrated_lufs - integrated_lufs(bed, sr)) / 20.0)
        for _ in range(8):  # the tone adds loudness (K-weighting does not fall above 20 kHz): settle the bed
            x = bed * gain + tone
            err = master.integrated_lufs - integrated_lufs(x, sr)
            if abs(err) < 1e-4:
                break
            gain *= 10.0 ** (err / 20.0)
    elif master.build == "music+dynamics":
        x = music(dur, sr, rng) * _section_gain(n, sr, [-22.0, 0.0, -22.0, 0.0])[:, None]
        x = set_loudness(x, sr, master.integrated_lufs)
    elif master.build == "music+bursts":
        bed = music(dur, sr, rng)
        burst_n = int(0.004 * sr)  # short, so the bursts barely add loudness
        starts = [int(s * sr) for s in (7.0, 15.5, 24.25, 48.0, 77.5, 103.25) if s < dur - 1.0]
        gap = np.ones(n)
        for s in starts:  # the music ducks by 26 dB around each burst (20 ms either side), never to silence
            pad = int(0.02 * sr)
            gap[s - pad:s + burst_n + pad] = 0.05
        gap = np.convolve(gap, np.ones(64) / 64, mode="same")
        bursts = np.zeros(n)
        for s in starts:
            bursts[s:s + burst_n] = quarter_rate_burst(burst_n, 1.0, sr, fade_s=0.0005)
        gain = 10.0 ** ((master.integrated_lufs - integrated_lufs(bed, sr)) / 20.0)
        for _ in range(8):  # the bursts add a little loudness: settle the bed's gain
            x = bed * gap[:, None] * gain + bursts[:, None]
            err = master.integrated_lufs - integrated_lufs(x, sr)
            if abs(err) < 1e-4:
                break
            gain *= 10.0 ** (err / 20.0)
    elif master.build == "music+clip":
        bed = music(dur, sr, rng)
        bed = bed / np.max(np.abs(bed))
        drive = 1.0
        for _ in range(30):  # louder until the clipped result reaches the target
            x = np.clip(bed * drive, -1.0, 1.0)
            err = master.integrated_lufs - integrated_lufs(x, sr)
            if abs(err) < 1e-3:
                break
            drive *= 10.0 ** (err / 20.0 * 1.5)
        x = np.clip(bed * drive, -1.0, 1.0)
    elif master.build == "speech":
        mono = _voice_chain(speech(dur, sr, rng, f0_hz=120.0 + 60.0 * rng.random()))
        if master.channels == 2:  # two voices: host left-of-centre, guest right-of-centre
            other = _voice_chain(speech(dur, sr, rng, f0_hz=210.0))
            x = np.stack([0.8 * mono + 0.35 * other, 0.35 * mono + 0.8 * other], axis=1)
        else:
            x = mono[:, None]
        x = set_loudness(x, sr, master.integrated_lufs)
    else:  # pragma: no cover - table error
        raise ValueError(f"unknown build {master.build!r}")
    return x


def write_master(master: DemoMaster, folder) -> Path:
    """Synthesise ``master`` and write it as WAV (integer PCM of its bit depth); returns the path."""
    x = synthesize(master)
    full_scale = (2 ** (master.bit_depth - 1) - 1) / 2 ** (master.bit_depth - 1)  # largest positive code
    x = np.clip(x, -1.0, full_scale)  # the clipped master is already inside; the others never reach it
    path = Path(folder) / f"{master.stem}.wav"
    tmp = path.with_name(f".{path.name}.tmp")
    sf.write(tmp, x, master.sample_rate_hz, subtype=f"PCM_{master.bit_depth}", format="WAV")
    os.replace(tmp, path)
    return path


def demo_specs_dir() -> Path:
    """The folder of the demo specs (the repository's specs_demo/, or the installed copy)."""
    here = Path(__file__).resolve().parent.parent / "specs_demo"
    if here.is_dir():
        return here
    from importlib.resources import files
    return Path(str(files("masterqc.specs_demo")))


# ---------------------------------------------------------------- the command

def _check_one(job: tuple) -> dict:
    """One demo check (runs in a worker process): returns the verdict and the findings' gist."""
    from masterqc.pipeline import check_file
    from masterqc.spec.loader import load_spec
    path, spec_path, report_dir, fmts, stem = job
    loaded = load_spec(spec_path)
    r = check_file(path, loaded, report_dir, fmts, stem=stem)
    return {"verdict": r["verdict"], "spec_name": loaded.name,
            "findings": [{k: f[k] for k in ("check", "status", "message")} for f in r["findings"]]}


def _pool(jobs: int):
    if jobs <= 1:
        return None
    try:
        from concurrent.futures import ProcessPoolExecutor
        return ProcessPoolExecutor(max_workers=jobs)
    except (OSError, ImportError, NotImplementedError):  # no process support here: run inline
        return None


def run_demo(out_dir="demo-output", formats: str | None = None, stream=None, jobs: int | None = None) -> int:
    """Make the masters, check each against its demo specs, print a summary; returns exit code 0.

    The demo's own exit code is 0 when it ran (the faults are deliberate); the
    per-file verdicts are in the summary and the reports.  ``jobs``: worker
    processes (default: up to 2, the cores of a small machine; 1 runs inline).
    """
    from masterqc.errors import UsageError
    from masterqc.formats import formats_for

    out = stream or sys.stdout
    started = time.perf_counter()
    fmts = formats_for(formats)
    if jobs is None:
        jobs = max(1, min(2, os.cpu_count() or 1))
    if jobs < 1:
        raise UsageError(f"--jobs {jobs}: give a whole number of 1 or more")
    out.write(CAUTION + "\n\n")
    out_dir = Path(out_dir)
    masters_dir = out_dir / "masters"
    masters_dir.mkdir(parents=True, exist_ok=True)
    spec_files = {p.stem: p for p in sorted(demo_specs_dir().glob("*.yaml"))}
    needed = sorted({s for m in MASTERS for s in m.demo_specs})
    missing = [s for s in needed if s not in spec_files]
    if missing:
        raise UsageError(f"demo specs missing from {demo_specs_dir()}: {', '.join(missing)}")
    out.write(f"Writing {len(MASTERS)} invented masters to {masters_dir}/\n")
    out.flush()
    jobs_list = [(m, s) for m in MASTERS for s in m.demo_specs]
    pool = _pool(jobs)
    try:
        if pool is not None:
            paths = dict(zip([m.stem for m in MASTERS], pool.map(write_master, MASTERS, [masters_dir] * len(MASTERS))))
        else:
            paths = {m.stem: write_master(m, masters_dir) for m in MASTERS}
        out.write(f"Checking them against {len(needed)} invented delivery specs ({demo_specs_dir()}):\n\n")
        out.flush()
        work = [(str(paths[m.stem]), str(spec_files[s]), str(out_dir / s), tuple(fmts), m.stem) for m, s in jobs_list]
        results = pool.map(_check_one, work) if pool is not None else map(_check_one, work)
        from masterqc.problems import problem_lines, ranked_problems
        for (m, s), r in zip(jobs_list, results):
            # every problem, worst first, one line each (as `check` prints them)
            lines = problem_lines(ranked_problems(r["findings"]), indent="        ") or \
                ["        meets every requirement"]
            out.write(f"  {r['verdict'].upper():5s} {m.stem:22s} vs {r['spec_name']}\n"
                      + "".join(line + "\n" for line in lines))
            out.flush()
    finally:
        if pool is not None:
            pool.shutdown()
    from masterqc.compare.demo import run_compare_demo
    run_compare_demo(out_dir, fmts, out)  # one master and three deliverables made from it
    elapsed = time.perf_counter() - started
    out.write(f"\nReports ({', '.join(fmts)}) are in {out_dir}/<spec>/<master>.*; the masters in {masters_dir}/.\n")
    out.write(f"Done in {elapsed:.1f} s. The faults are deliberate: see masterqc/demo.py for how each master was made.\n")
    return 0
