"""Effective bit depth.

Truth: a 24-bit file written from 16-bit codes carries them shifted left by
8 bits (libsndfile's int16 -> PCM_24 conversion, checked below from the
codes read back), so its low 8 bits are zero: 16 bits used.  A float file
holding k / 2**23 uses a 24-bit grid.  The frexp-based lowest-bit exponent is
checked against Python's exact ``float.as_integer_ratio`` (denominator 2**k).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf
from hypothesis import given, settings
from hypothesis import strategies as st

from integrity_support import feed, info_for, pcm, write_pcm
from masterqc.measure.bitdepth import BitDepthAnalyzer, lowest_bit_exponent
from masterqc.measure.engine import measure_file

FS = 48000


def _exact_lowest_exponent(x: float) -> int:
    p, q = x.as_integer_ratio()
    if q > 1:
        return -int(math.log2(q))  # p is odd when q > 1
    p = abs(p)
    return (p & -p).bit_length() - 1


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(allow_nan=False, allow_infinity=False, min_value=-1e6, max_value=1e6)
                .filter(lambda v: v != 0.0), min_size=1, max_size=20))
def test_lowest_bit_exponent_is_exact(values):
    got = lowest_bit_exponent(np.array(values)[:, None])
    assert int(got[0]) == min(_exact_lowest_exponent(v) for v in values)


def _dithered_codes(rng, bits, frames=48000, channels=2):
    t = np.arange(frames) / FS
    tone = 0.3 * np.sin(2 * np.pi * 997 * t)[:, None] * 2 ** (bits - 1)
    return np.round(tone + rng.uniform(-1, 1, (frames, channels))).astype(np.int64)


def test_16_bit_padded_into_24_reads_16(tmp_path, rng):
    codes16 = _dithered_codes(rng, 16)
    path = tmp_path / "padded.wav"
    sf.write(path, codes16.astype(np.int16), FS, subtype="PCM_24")
    back, _ = sf.read(path, dtype="int32")
    assert np.array_equal(back >> 16, codes16)  # int32 view: 16-bit code in the top bits
    m = measure_file(path)["measurements"]
    assert m["effective_bit_depth_bits"] == 16
    assert m["effective_bit_depth_bits_per_channel"] == [16, 16]


def test_true_24_bit_reads_24_and_mixed_channels(tmp_path, rng):
    codes = _dithered_codes(rng, 24)
    codes[:, 1] = (codes[:, 1] >> 4) << 4  # R padded to 20 bits
    path = write_pcm(tmp_path / "mixed.wav", codes, FS, 24)
    m = measure_file(path)["measurements"]
    assert m["effective_bit_depth_bits_per_channel"] == [24, 20]
    assert m["effective_bit_depth_bits"] == 24


def test_24_in_32_and_silent_channel(rng):
    codes = _dithered_codes(rng, 24, channels=2) << 8
    codes[:, 1] = 0
    x = pcm(codes, 32)
    m = feed(BitDepthAnalyzer, x, info_for(x, bits=32), block=5000).measurements
    assert m["effective_bit_depth_bits_per_channel"] == [24, None]
    assert m["effective_bit_depth_bits"] == 24


@pytest.mark.parametrize("grid", [16, 24])
def test_float_file_carrying_integers(tmp_path, rng, grid):
    codes = _dithered_codes(rng, grid)
    path = tmp_path / f"f{grid}.wav"
    sf.write(path, (codes / 2.0 ** (grid - 1)).astype(np.float32), FS, subtype="FLOAT")
    m = measure_file(path)["measurements"]
    assert m["effective_bit_depth_bits_per_channel"] == [grid, grid]


def test_genuine_float_reads_container_depth(tmp_path, rng):
    # 32 is the container's word size: subtype FLOAT is IEEE 754 binary32, wBitsPerSample 32
    # (WAVE_FORMAT_IEEE_FLOAT).  Analytic: binary32 has a 24-bit significand, so a sample with
    # |x| < 2**-9 has its lowest possible bit at 2**-33 or below, finer than the 2**-31 step
    # of a 32-bit integer grid; with sigma 0.1, erf(2**-9 / (0.1 * sqrt 2)) = 1.6 % of the
    # 48000 samples per channel lie there and about half of them have that bit set.  A float file whose grid is finer
    # than 32 bits reads its container depth (house choice, FLOAT_GRID_MAX_BITS).
    x = rng.normal(0, 0.1, (48000, 2)).astype(np.float32)
    path = tmp_path / "float.wav"
    sf.write(path, x, FS, subtype="FLOAT")
    assert measure_file(path)["measurements"]["effective_bit_depth_bits"] == 32


def test_all_zero_file_has_no_depth():
    x = np.zeros((1000, 2))
    m = feed(BitDepthAnalyzer, x, info_for(x, bits=24)).measurements
    assert m["effective_bit_depth_bits"] is None and m["effective_bit_depth_bits_per_channel"] == [None, None]
