"""Fixtures of the report tests: small synthesized masters, measured and judged for real.

Signals follow EBU Tech 3341 (2023) Table 1, case 1 shape (a 1 kHz sine in phase
on both channels of a stereo file reads at its per-channel peak level in LUFS);
the bext chunk is laid out by ``containerbytes.bext_body`` at the EBU Tech 3285
offsets.  Every result comes from ``measure_file`` and the real judge, so the
tests follow the analyzers' keys as they change.
"""

from __future__ import annotations

import numpy as np

import containerbytes as cb

RATE_HZ = 48000
#: markup in an incoming file's bext description: must render as text
HOSTILE_DESCRIPTION = "<b>Night & Day</b><script>alert('x')</script>"
#: a control character in the originator: must show as a visible escape
ORIGINATOR = "Tamberlo Lane Rooms\x07"
START_SAMPLES = 3600 * RATE_HZ  # bext TimeReference: 01:00:00:00

SPEC_YAML = """\
spec_version: 1
name: "Trevarrow streaming stereo (fictional)"
loudness:
  integrated: {target_lufs: -20.0, tolerance_lu: 1.0}
  range: {max_lu: 15.0, severity: warn}
peaks:
  true_peak: {max_dbtp: -25.0}
  sample_peak: {max_dbfs: -0.1}
sampling:
  conversions:
    - target_rate_hz: 44100
"""


#: a 30 ms digital-silence dropout in both channels of the tone, from this instant (s)
DROPOUT_AT_S = 3.0
DROPOUT_S = 0.030


def tone_frames(seconds: float = 8.0, level_dbfs: float = -20.0, freq_hz: float = 1000.0,
                dropout: bool = True) -> np.ndarray:
    """Stereo 24-bit integer codes of a sine at ``level_dbfs`` peak, in phase on both channels.

    With ``dropout``, samples [DROPOUT_AT_S, DROPOUT_AT_S + DROPOUT_S) are digital silence.
    """
    n = int(round(seconds * RATE_HZ))
    t = np.arange(n) / RATE_HZ
    amp = 10.0 ** (level_dbfs / 20.0)
    x = amp * np.sin(2.0 * np.pi * freq_hz * t)
    codes = np.round(x * (2 ** 23 - 1)).astype(np.int64)
    if dropout:
        a = int(round(DROPOUT_AT_S * RATE_HZ))
        codes[a:a + int(round(DROPOUT_S * RATE_HZ))] = 0
    return np.stack([codes, codes], axis=1)


def write_bwf(path, frames: np.ndarray, description: str = HOSTILE_DESCRIPTION,
              originator: str = ORIGINATOR, time_reference: int = START_SAMPLES) -> None:
    """A 24-bit stereo BWF with a bext chunk (EBU Tech 3285 v2 layout)."""
    bext = cb.chunk(b"bext", cb.bext_body(version=2, description=description, originator=originator,
                                         date="2026-11-30", time="10:15:00", time_reference=time_reference))
    data = cb.chunk(b"data", cb.pcm24(frames))
    path.write_bytes(cb.riff([cb.fmt_pcm(2, RATE_HZ, 24), bext, data]))


def measured_and_judged(tmp_path, seconds: float = 8.0):
    """``(wav_path, spec_path, result)``: a judged result of the hostile-metadata tone master."""
    from masterqc.measure import measure_file
    from masterqc.pipeline import judge_result
    from masterqc.spec.loader import load_spec
    from masterqc.spec.model import measure_options_for

    wav = tmp_path / "Trevarrow_Glass_master.wav"
    write_bwf(wav, tone_frames(seconds))
    spec = tmp_path / "trevarrow.yaml"
    spec.write_text(SPEC_YAML, encoding="utf-8")
    loaded = load_spec(spec)
    result = judge_result(measure_file(wav, measure_options_for(loaded.spec, None)), loaded)
    return wav, spec, result
