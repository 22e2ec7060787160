"""Helpers of the tests/test_integrity_*.py files: stream facts, block feeding, file writing."""

from __future__ import annotations

import numpy as np
import soundfile as sf

from masterqc.audio.layout import CONVENTIONAL, bs1770_weight, unknown_labels
from masterqc.audio.reader import StreamInfo
from masterqc.measure.options import MeasureOptions

ENCODING = {("pcm", 16): "pcm_16", ("pcm", 24): "pcm_24", ("pcm", 32): "pcm_32",
            ("float", 32): "float_32", ("float", 64): "float_64"}


def info_for(x: np.ndarray, fs: int = 48000, bits: int = 24, is_float: bool = False, labels=None) -> StreamInfo:
    """StreamInfo for an in-memory signal ``x`` of shape (frames, channels)."""
    ch = x.shape[1]
    if labels is None:
        labels = CONVENTIONAL.get(ch) or unknown_labels(ch)
    return StreamInfo(path="<memory>", container="wav",
                      encoding=ENCODING[("float" if is_float else "pcm", bits)],
                      sample_rate_hz=fs, bit_depth=bits, is_float=is_float, channels=ch,
                      frames=x.shape[0], channel_layout=tuple(labels), layout_source="conventional",
                      channel_weights=tuple(bs1770_weight(v) for v in labels))


def feed(cls, x: np.ndarray, info: StreamInfo, block: int = 65536, **options):
    """Run analyzer ``cls`` over ``x`` in blocks of ``block`` frames; return its AnalyzerResult.

    Non-finite samples are replaced by 0.0 for analyzers without ``raw_input``, as the engine does.
    """
    a = cls(info, MeasureOptions(**options))
    for i in range(0, x.shape[0], block):
        b = x[i:i + block]
        if not cls.raw_input and not np.isfinite(b).all():
            b = np.where(np.isfinite(b), b, 0.0)
        a.process(b)
    return a.finish()


def pcm(codes, bits: int) -> np.ndarray:
    """Float samples as the reader delivers integer PCM: code / 2**(bits-1)."""
    return np.asarray(codes, dtype=np.float64) / float(2 ** (bits - 1))


def write_pcm(path, codes: np.ndarray, fs: int, bits: int, fmt: str = "WAV"):
    """Write integer ``codes`` (frames, channels) of ``bits`` bits exactly (24-bit through int32 << 8)."""
    codes = np.asarray(codes, dtype=np.int64)
    if bits == 16:
        sf.write(path, codes.astype(np.int16), fs, subtype="PCM_16", format=fmt)
    elif bits == 24:
        sf.write(path, (codes << 8).astype(np.int32), fs, subtype="PCM_24", format=fmt)
    elif bits == 32:
        sf.write(path, codes.astype(np.int32), fs, subtype="PCM_32", format=fmt)
    else:
        raise ValueError(bits)
    return path
