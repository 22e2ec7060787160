"""The compiled integer-PCM decoder (masterqc/audio/pcm.py, ``pcm_to_double`` in
masterqc/measure/_cascade.c) against numpy's arithmetic and against libsndfile's own decode.

Reference outside the project: libsndfile (through python-soundfile) decodes the same files to
float64; every block the reader hands the engine must be those bits.  The scaling itself is an
analytic fact: a B-bit two's-complement code placed in the top bits of an int32 and multiplied by
2**-31 is code / 2**(B - 1) exactly (an integer below 2**53 times a power of two).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf

from masterqc.audio import open_stream, pcm
from masterqc.audio.reader import AudioStream
from masterqc.measure import engine
from masterqc.measure.options import MeasureOptions
from masterqc.measure.registry import analyzer_classes

KERNEL = pcm.kernel()
needs_kernel = pytest.mark.skipif(KERNEL is None, reason="compiled module not built or switched off")


@needs_kernel
@pytest.mark.parametrize("width", [2, 3, 4])
@pytest.mark.parametrize("big", [False, True])
@pytest.mark.parametrize("channels", [1, 2, 6])
def test_kernel_equals_numpy_bit_for_bit(width, big, channels):
    rng = np.random.default_rng(width * 10 + channels + (100 if big else 0))
    frames = 1001
    raw = rng.integers(0, 256, size=frames * channels * width, dtype=np.uint8).tobytes()
    want = pcm.pcm_to_double_numpy(raw, frames, channels, width, big)
    inter = np.empty((frames, channels))
    rows = np.empty((channels, frames))
    KERNEL(raw, inter, rows, frames, channels, width, int(big))
    assert np.array_equal(inter, want)
    assert np.array_equal(rows, want.T)
    assert rows.flags.c_contiguous


def test_numpy_reference_scales_codes_exactly():
    # analytic (two's complement codes over 2**(bits - 1), libsndfile's integer-to-double scaling):
    # 24-bit little-endian codes: -2**23 (bytes 00 00 80), -1 (ff ff ff), 1, 2**23 - 1 (ff ff 7f)
    raw = bytes([0, 0, 0x80, 0xFF, 0xFF, 0xFF, 1, 0, 0, 0xFF, 0xFF, 0x7F])
    got = pcm.pcm_to_double_numpy(raw, 4, 1, 3, False)[:, 0]
    assert got.tolist() == [-1.0, -1 / 2 ** 23, 1 / 2 ** 23, (2 ** 23 - 1) / 2 ** 23]
    # the same codes big-endian, 16-bit: 0x8000 -> -1.0, 0x7fff -> (2**15 - 1) / 2**15
    got16 = pcm.pcm_to_double_numpy(bytes([0x80, 0, 0x7F, 0xFF]), 2, 1, 2, True)[:, 0]
    assert got16.tolist() == [-1.0, (2 ** 15 - 1) / 2 ** 15]


def _codes(frames, channels, bits, seed):
    rng = np.random.default_rng(seed)
    codes = rng.integers(-(2 ** (bits - 1)), 2 ** (bits - 1), size=(frames, channels), dtype=np.int64)
    codes[0, 0], codes[1, 0], codes[2, 0] = -(2 ** (bits - 1)), 2 ** (bits - 1) - 1, 0
    return codes


@pytest.mark.parametrize("fmt, subtype, ext", [
    ("WAV", "PCM_16", "wav"), ("WAV", "PCM_24", "wav"), ("WAV", "PCM_32", "wav"),
    ("WAVEX", "PCM_24", "wav"), ("RF64", "PCM_24", "wav"), ("W64", "PCM_24", "w64"),
    ("AIFF", "PCM_16", "aiff"), ("AIFF", "PCM_24", "aiff"), ("AIFF", "PCM_32", "aiff"),
])
@pytest.mark.parametrize("channels", [1, 2, 3])
def test_blocks_with_rows_are_libsndfiles_blocks(tmp_path, fmt, subtype, ext, channels):
    bits = {"PCM_16": 16, "PCM_24": 24, "PCM_32": 32}[subtype]
    frames = 5000 + channels
    path = tmp_path / f"t.{ext}"
    # written as int32 with the code in the top bits: exact for every width
    sf.write(path, (_codes(frames, channels, bits, channels) << (32 - bits)).astype(np.int32), 48000,
             subtype=subtype, format=fmt)
    for block_frames in (777, 5000 + channels, 65536):
        with open_stream(path) as a, open_stream(path) as b:
            want = list(a.blocks(block_frames))
            got = list(b.blocks_with_rows(block_frames))
        assert [g.shape for g, _ in got] == [w.shape for w in want]
        for w, (g, rows) in zip(want, got):
            assert np.array_equal(g, w)
            if KERNEL is not None:
                assert rows is not None and np.array_equal(rows, w.T) and rows.flags.c_contiguous


@pytest.mark.parametrize("fmt, subtype, ext, endian", [
    ("FLAC", "PCM_24", "flac", "FILE"), ("WAV", "FLOAT", "wav", "FILE"), ("WAV", "PCM_U8", "wav", "FILE"),
    ("WAV", "PCM_24", "wav", "BIG"),          # RIFX: big-endian WAVE, left to libsndfile
])
def test_other_encodings_left_to_libsndfile(tmp_path, fmt, subtype, ext, endian):
    path = tmp_path / f"t.{ext}"
    x = np.round(np.sin(np.arange(3000) * 0.01)[:, None] * np.array([[0.5, -0.25]]) * 100) / 128
    sf.write(path, x, 44100, subtype=subtype, format=fmt, endian=endian)
    with open_stream(path) as a, open_stream(path) as b:
        want = list(a.blocks(1000))
        got = list(b.blocks_with_rows(1000))
    assert len(got) == len(want) == 3
    for w, (g, rows) in zip(want, got):
        assert rows is None
        assert np.array_equal(g, w)


def _stereo24(tmp_path, frames=10000):
    path = tmp_path / "s.wav"
    sf.write(path, (_codes(frames, 2, 24, 7) << 8).astype(np.int32), 48000, subtype="PCM_24")
    return path


def test_first_block_disagreeing_hands_the_file_to_libsndfile(tmp_path, monkeypatch):
    path = _stereo24(tmp_path)

    def wrong(raw, inter, rows, n, c, w, big):          # numpy's decode, off by one 24-bit code
        v = pcm.pcm_to_double_numpy(raw, n, c, w, bool(big)) + 2.0 ** -23
        inter[...] = v
        if rows.size:
            rows[...] = v.T

    monkeypatch.setattr(pcm, "kernel", lambda: wrong)
    with open_stream(path) as a, open_stream(path) as b:
        want = list(a.blocks(3000))
        got = list(b.blocks_with_rows(3000))
    assert len(got) == len(want) == 4
    for w, (g, rows) in zip(want, got):
        assert rows is None and np.array_equal(g, w)


def test_short_raw_read_hands_the_rest_to_libsndfile(tmp_path, monkeypatch):
    path = _stereo24(tmp_path)
    real = pcm.read_raw
    calls = []

    def short(sfile, ptr, nbytes):                      # the third read comes back one frame short
        calls.append(nbytes)
        return real(sfile, ptr, nbytes - (6 if len(calls) == 3 else 0))

    monkeypatch.setattr(pcm, "read_raw", short)
    with open_stream(path) as a, open_stream(path) as b:
        want = list(a.blocks(3000))
        got = list(b.blocks_with_rows(3000))
    assert len(calls) == 3
    assert [g.shape for g, _ in got] == [w.shape for w in want] == [(3000, 2)] * 3 + [(1000, 2)]
    for k, (w, (g, rows)) in enumerate(zip(want, got)):
        assert np.array_equal(g, w)
        assert (rows is None) == (k >= 2 or KERNEL is None)


def test_engine_results_equal_with_and_without_the_decoder(tmp_path, monkeypatch):
    path = tmp_path / "m.wav"
    rng = np.random.default_rng(3)
    t = np.arange(3 * 48000) / 48000
    x = 0.4 * np.sin(2 * np.pi * 997 * t)[:, None] * np.array([[1.0, 0.7]]) + 0.01 * rng.standard_normal((t.size, 2))
    sf.write(path, x, 48000, subtype="PCM_24")
    results = []
    for with_rows in (True, False):
        if not with_rows:                    # the engine then transposes libsndfile's blocks itself
            monkeypatch.setattr(AudioStream, "blocks_with_rows", None)
        for threads in (1, 2):
            with open_stream(path) as s:
                opts = MeasureOptions(threads=threads, block_frames=20000)
                results.append(json.dumps(engine.run_analyzers(s, opts, classes=analyzer_classes()),
                                          sort_keys=True, default=repr))
    assert results[0] == results[1] == results[2] == results[3]


def test_without_raw_reading_libsndfile_decodes(tmp_path, monkeypatch):
    path = _stereo24(tmp_path, 2500)
    monkeypatch.setattr(pcm, "raw_reading_available", lambda sfile: False)
    with open_stream(path) as a, open_stream(path) as b:
        want = list(a.blocks(1000))
        got = list(b.blocks_with_rows(1000))
    assert [g.shape for g, _ in got] == [(1000, 2), (1000, 2), (500, 2)]
    for w, (g, rows) in zip(want, got):
        assert rows is None and np.array_equal(g, w)
