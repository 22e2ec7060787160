"""The comparison part of ``masterqc demo``: one invented master and three deliverables made from it.

* ``tide-clock_96k24.wav`` -- the master, 96 kHz / 24-bit, music fading out to silence;
* ``tide-clock_44k16_careful.wav`` -- a long Kaiser-windowed polyphase filter to 44.1 kHz, then
  16 bits with TPDF dither (2 LSB peak to peak): what a careful conversion leaves;
* ``tide-clock_44k16_truncated.wav`` -- the same conversion, then the word length cut without dither;
* ``tide-clock_44k16_cheap-converter.wav`` -- linear interpolation straight to 44.1 kHz with no
  anti-alias filter (content above 22.05 kHz folds down), then 16 bits with TPDF dither.

Each deliverable is compared with the master against ``specs_demo/derivation-cd.yaml``.  Title and
file names are invented.
"""

from __future__ import annotations

from fractions import Fraction
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy import signal

MASTER_RATE_HZ = 96000
DELIVERABLE_RATE_HZ = 44100
DURATION_S = 6.0
SPEC_NAME = "derivation-cd.yaml"


def _careful_resample(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    fr = Fraction(fs_out, fs_in)
    up, down = fr.numerator, fr.denominator
    work_hz = fs_in * up
    numtaps, beta = signal.kaiserord(110.0, 1500.0 / (work_hz / 2.0))
    h = signal.firwin(numtaps | 1, 21000.0, window=("kaiser", beta), fs=work_hz)
    return signal.resample_poly(x, up, down, axis=0, window=h)


def _cheap_resample(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    n_out = int(x.shape[0] * fs_out // fs_in)
    t = np.arange(n_out) * (fs_in / fs_out)
    return np.stack([np.interp(t, np.arange(x.shape[0]), x[:, c]) for c in range(x.shape[1])], axis=1)


def _to_16_bits(x: np.ndarray, rng, dither: bool) -> np.ndarray:
    delta = 2.0 ** -15
    if dither:
        tpdf = rng.uniform(-0.5, 0.5, x.shape) + rng.uniform(-0.5, 0.5, x.shape)
        q = np.round(x / delta + tpdf)
    else:
        q = np.floor(x / delta)
    return np.clip(q, -32768, 32767) * delta


def make_files(folder, seed: int = 20261204) -> tuple[Path, dict[str, Path]]:
    """Write the master and its three deliverables into ``folder``; returns (master, {label: path})."""
    from masterqc.demo import music
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    fs = MASTER_RATE_HZ
    x = music(DURATION_S, fs, rng, tempo_bpm=96.0, key_midi=52)
    # a band of air above 22 kHz (cymbal sheen) that a converter without a filter folds down
    air = signal.lfilter(*signal.butter(4, 23000.0, "high", fs=fs), rng.standard_normal(x.shape), axis=0)
    x = x + 0.02 * air
    n = x.shape[0]
    fade = np.ones(n)
    k = int(0.55 * n)
    fade[k:] = 10 ** (np.linspace(0.0, -110.0, n - k) / 20)   # a long fade to below the 16-bit step
    x = 0.45 * x / np.max(np.abs(x)) * fade[:, None]
    master = folder / "tide-clock_96k24.wav"
    sf.write(master, x, fs, subtype="PCM_24")
    x24 = sf.read(master)[0]
    careful = _careful_resample(x24, fs, DELIVERABLE_RATE_HZ)
    cheap = _cheap_resample(x24, fs, DELIVERABLE_RATE_HZ)
    out = {}
    for label, y, dither in (("careful", careful, True), ("truncated", careful, False),
                             ("cheap-converter", cheap, True)):
        p = folder / f"tide-clock_44k16_{label}.wav"
        sf.write(p, _to_16_bits(y, rng, dither), DELIVERABLE_RATE_HZ, subtype="PCM_16")
        out[label] = p
    return master, out


def run_compare_demo(out_dir, formats, out) -> None:
    """Make the files under ``out_dir/derivation/`` and compare each deliverable with the master."""
    from masterqc.compare.command import run_compare
    from masterqc.demo import demo_specs_dir
    folder = Path(out_dir) / "derivation"
    master, deliverables = make_files(folder / "files")
    spec = demo_specs_dir() / SPEC_NAME
    out.write(f"\nComparing three deliverables with their master ({master.name}) against {spec.name}:\n\n")
    for label, path in deliverables.items():
        r = run_compare(master, path, spec, folder, formats)
        bad = [f for f in r["findings"] if f["status"] in ("fail", "error", "warn")]
        reason = bad[0]["message"] if bad else "a careful conversion: meets every requirement"
        out.write(f"  {str(r['verdict']).upper():5s} {path.name}\n        {reason}\n")
        out.flush()
    out.write(f"\nThe comparison reports are in {folder}/ (command: masterqc compare MASTER DELIVERABLE "
              f"--spec {spec})\n")
