"""Sample positions <-> timecode labels, as pure integer arithmetic.

Supported rates (the spec key ``metadata.timecode_fps`` takes these names):

=========  ===============  ==========  ==========
name       frames per s     labels/s    drop frame
=========  ===============  ==========  ==========
"23.976"   24000/1001       24          no
"24"       24               24          no
"25"       25               25          no
"29.97df"  30000/1001       30          yes
"29.97ndf" 30000/1001       30          no
"30"       30               30          no
=========  ===============  ==========  ==========

A sample position counts samples since midnight (the meaning of the BWF bext
TimeReference, EBU Tech 3285).  The frame holding a sample is
``floor(samples * frame_rate / sample_rate)``; its label counts frames at the
nominal rate (SMPTE ST 12-1 style HH:MM:SS:FF).  Drop-frame labels skip frame
numbers 00 and 01 at the start of every minute except minutes divisible by 10,
which keeps the labels within a few milliseconds of clock time; they are
written with ``;`` before the frames (common practice, no source).  Labels
wrap at 24 hours (common practice, no source).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from fractions import Fraction


@dataclass(frozen=True)
class FrameRate:
    """A timecode rate: ``name``, true ``rate`` in frames per second, ``nominal`` labels per second, ``drop_frame``."""

    name: str
    rate: Fraction
    nominal: int
    drop_frame: bool

    @property
    def frames_per_day(self) -> int:
        """Number of frame labels in 24 hours (the wrap point)."""
        if self.drop_frame:
            # 10-minute cycle: 10 * 60 * 30 labels minus 9 * 2 dropped = 17982 frames.
            return 144 * _DF_FRAMES_PER_10MIN
        return self.nominal * 86400


_DF_FRAMES_PER_MIN = 30 * 60 - 2         # 1798 labels in a minute that drops two
_DF_FRAMES_PER_10MIN = 10 * 30 * 60 - 18  # 17982

FRAME_RATES: dict[str, FrameRate] = {
    "23.976": FrameRate("23.976", Fraction(24000, 1001), 24, False),
    "24": FrameRate("24", Fraction(24), 24, False),
    "25": FrameRate("25", Fraction(25), 25, False),
    "29.97df": FrameRate("29.97df", Fraction(30000, 1001), 30, True),
    "29.97ndf": FrameRate("29.97ndf", Fraction(30000, 1001), 30, False),
    "30": FrameRate("30", Fraction(30), 30, False),
}

#: The rate used when the spec names none (common practice in 50 Hz territories, no source).
DEFAULT_FPS = "25"

_TC_RE = re.compile(r"^\s*(\d{1,2})[:.](\d{2})[:.](\d{2})([:;.,])(\d{2})\s*$")


def frame_rate(fps) -> FrameRate:
    """Return the :class:`FrameRate` named ``fps`` (a key of :data:`FRAME_RATES`).

    Raises ``ValueError`` naming the accepted names for anything else.
    """
    if isinstance(fps, FrameRate):
        return fps
    key = str(fps).strip().lower()
    if key in FRAME_RATES:
        return FRAME_RATES[key]
    raise ValueError(f"unknown timecode rate {fps!r}; use one of {', '.join(FRAME_RATES)}")


def samples_to_frames(samples: int, sample_rate_hz: int, fps) -> int:
    """Index of the frame holding sample ``samples`` (floor), counted from sample 0."""
    fr = frame_rate(fps)
    if sample_rate_hz <= 0:
        raise ValueError(f"sample rate must be positive, got {sample_rate_hz}")
    samples = int(samples)
    return (samples * fr.rate.numerator) // (int(sample_rate_hz) * fr.rate.denominator)


def frames_to_samples(frames: int, sample_rate_hz: int, fps) -> int:
    """First sample of frame ``frames``: the smallest s with ``samples_to_frames(s) == frames``."""
    fr = frame_rate(fps)
    if sample_rate_hz <= 0:
        raise ValueError(f"sample rate must be positive, got {sample_rate_hz}")
    num = int(frames) * int(sample_rate_hz) * fr.rate.denominator
    den = fr.rate.numerator
    return -((-num) // den)  # ceiling division


def frames_to_timecode(frames: int, fps) -> str:
    """Label of frame index ``frames`` (0 = 00:00:00:00), wrapped at 24 hours."""
    fr = frame_rate(fps)
    frames = int(frames) % fr.frames_per_day
    if fr.drop_frame:
        tens, rem = divmod(frames, _DF_FRAMES_PER_10MIN)
        frames += 18 * tens
        # minutes 1..9 of the ten-minute block each skip two labels; minute 0 keeps all 1800
        frames += 2 * max(0, (rem - 2) // _DF_FRAMES_PER_MIN)
    n = fr.nominal
    ff = frames % n
    total_s = frames // n
    hh, rest = divmod(total_s, 3600)
    mm, ss = divmod(rest, 60)
    sep = ";" if fr.drop_frame else ":"
    return f"{hh:02d}:{mm:02d}:{ss:02d}{sep}{ff:02d}"


def timecode_to_frames(timecode: str, fps) -> int:
    """Frame index of a label ``HH:MM:SS:FF`` (``;`` or ``.`` accepted before FF).

    Raises ``ValueError`` for a malformed label, a field out of range or, at a
    drop-frame rate, a label that drop frame skips (e.g. 00:01:00;00).
    """
    fr = frame_rate(fps)
    m = _TC_RE.match(str(timecode))
    if not m:
        raise ValueError(f"timecode {timecode!r} is not HH:MM:SS:FF")
    hh, mm, ss, _sep, ff = m.groups()
    hh, mm, ss, ff = int(hh), int(mm), int(ss), int(ff)
    if hh > 23 or mm > 59 or ss > 59 or ff >= fr.nominal:
        raise ValueError(f"timecode {timecode!r} has a field out of range at {fr.name} fps")
    if fr.drop_frame and ss == 0 and ff < 2 and mm % 10 != 0:
        raise ValueError(f"timecode {timecode!r} does not exist in drop-frame count "
                         "(frames 00 and 01 are skipped in this minute)")
    labels = ((hh * 60 + mm) * 60 + ss) * fr.nominal + ff
    if fr.drop_frame:
        minutes = hh * 60 + mm
        labels -= 2 * (minutes - minutes // 10)
    return labels


def samples_to_timecode(samples: int, sample_rate_hz: int, fps=DEFAULT_FPS) -> str:
    """Timecode label of the frame holding sample position ``samples`` (samples since midnight)."""
    return frames_to_timecode(samples_to_frames(samples, sample_rate_hz, fps), fps)


def timecode_to_samples(timecode: str, sample_rate_hz: int, fps=DEFAULT_FPS) -> int:
    """First sample position (since midnight) of the frame labelled ``timecode``."""
    return frames_to_samples(timecode_to_frames(timecode, fps), sample_rate_hz, fps)


def timecode_for(seconds: float, result: dict, fps=None) -> str:
    """Timecode of an instant ``seconds`` into the file described by a result object.

    The file starts at ``result["metadata"]["time_reference_samples"]`` (the bext
    TimeReference, or the iXML timestamp when there is no bext; 0 when neither
    exists) at ``result["format"]["sample_rate_hz"]``.  ``fps`` defaults to
    ``result["metadata"]["timecode_fps"]`` (the spec's choice), else 25 fps.
    Used by the report to show located findings in timecode.
    """
    metadata = result.get("metadata") or {}
    rate_hz = int((result.get("format") or {}).get("sample_rate_hz") or 0)
    if rate_hz <= 0:
        raise ValueError("result has no sample rate; cannot place a timecode")
    fps = fps or metadata.get("timecode_fps") or DEFAULT_FPS
    start = int(metadata.get("time_reference_samples") or 0)
    offset = int(round(float(seconds) * rate_hz))
    return samples_to_timecode(start + max(offset, 0), rate_hz, fps)


def start_timecode(result: dict, fps=None) -> str:
    """Timecode of the first sample of the file described by ``result`` (see :func:`timecode_for`)."""
    return timecode_for(0.0, result, fps)


def fps_from_ixml(rate_text: str | None, flag_text: str | None) -> str | None:
    """Map iXML ``SPEED/TIMECODE_RATE`` (e.g. "30000/1001") and ``TIMECODE_FLAG`` ("DF"/"NDF") to a rate name.

    Returns None when the rate is missing, malformed or not one masterqc supports.
    """
    if not rate_text:
        return None
    try:
        value = Fraction(rate_text.strip())
    except (ValueError, ZeroDivisionError):
        return None
    drop = flag_text is not None and flag_text.strip().upper() == "DF"
    for name, fr in FRAME_RATES.items():
        # "29.97" and "30000/1001" both name the same rate; 0.005 fps separates every supported rate
        if abs(fr.rate - value) < Fraction(1, 200) and fr.drop_frame == drop:
            return name
    return None
