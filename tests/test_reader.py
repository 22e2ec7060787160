"""The streaming reader: formats, encodings, channel layouts, bad input.

Sources: WAVE_FORMAT_EXTENSIBLE speaker-position bits (Microsoft's published
WAVEFORMATEXTENSIBLE definition, from memory: FL=0x1, FR=0x2, FC=0x4, LFE=0x8,
BL=0x10, BR=0x20, SL=0x200, SR=0x400); ITU-R BS.1770-5 channel weights (section 2.4
and Annex 3: 1.0 for L, R, C; 1.41 for the surrounds; LFE excluded).
"""

from __future__ import annotations

import struct

import numpy as np
import pytest
import soundfile as sf

from masterqc.audio import open_stream
from masterqc.audio.layout import bs1770_weight, labels_from_mask
from masterqc.errors import AudioReadError


@pytest.mark.parametrize(
    "fmt, subtype, container, encoding, bits",
    [
        ("WAV", "PCM_16", "wav", "pcm_16", 16),
        ("WAV", "PCM_24", "wav", "pcm_24", 24),
        ("WAV", "PCM_32", "wav", "pcm_32", 32),
        ("WAV", "FLOAT", "wav", "float_32", 32),
        ("WAV", "DOUBLE", "wav", "float_64", 64),
        ("WAVEX", "PCM_24", "wav", "pcm_24", 24),
        ("RF64", "PCM_24", "rf64", "pcm_24", 24),
        ("AIFF", "PCM_16", "aiff", "pcm_16", 16),
        ("AIFF", "PCM_24", "aiff", "pcm_24", 24),
        ("FLAC", "PCM_16", "flac", "pcm_16", 16),
        ("FLAC", "PCM_24", "flac", "pcm_24", 24),
    ],
)
def test_formats_round_trip_exact_codes(tmp_path, fmt, subtype, container, encoding, bits):
    # Integer codes survive exactly: libsndfile scales PCM by 1/2**(bits-1).
    rng = np.random.default_rng(1)
    bits_data = 16 if bits == 16 else 24
    codes = rng.integers(-(2 ** (bits_data - 1)), 2 ** (bits_data - 1), size=(5000, 2))
    x = codes / 2.0 ** (bits_data - 1)
    ext = {"WAV": "wav", "WAVEX": "wav", "RF64": "wav", "AIFF": "aiff", "FLAC": "flac"}[fmt]
    path = tmp_path / f"t.{ext}"
    sf.write(path, x, 48000, subtype=subtype, format=fmt)
    with open_stream(path) as s:
        assert s.info.container == container
        assert s.info.encoding == encoding
        assert s.info.bit_depth == bits
        assert s.info.frames == 5000
        assert s.info.sample_rate_hz == 48000
        got = np.concatenate(list(s.blocks(777)))
    assert got.shape == (5000, 2)
    np.testing.assert_array_equal(got, x)


def test_float_passes_through_above_full_scale(tmp_path):
    x = np.array([[0.5], [1.5], [-2.0], [0.0]])
    path = tmp_path / "f.wav"
    sf.write(path, x, 44100, subtype="FLOAT")
    with open_stream(path) as s:
        got = np.concatenate(list(s.blocks(2)))
    np.testing.assert_array_equal(got, x)


@pytest.mark.parametrize("block", [1, 3, 4096, 65536])
def test_blocks_cover_file_in_order(tmp_path, block):
    x = np.arange(10007, dtype=float)[:, None] / 2 ** 15 - 0.1
    path = tmp_path / "r.wav"
    sf.write(path, x, 8000, subtype="PCM_16")
    with open_stream(path) as s:
        got = np.concatenate(list(s.blocks(block)))
    np.testing.assert_array_equal(got, np.round(x * 2 ** 15) / 2 ** 15)


@pytest.mark.parametrize(
    "mask, channels, labels",
    [
        (0x3, 2, ["L", "R"]),
        (0x60F, 6, ["L", "R", "C", "LFE", "Ls", "Rs"]),      # 5.1 side
        (0x3F, 6, ["L", "R", "C", "LFE", "Ls", "Rs"]),       # 5.1 back, treated as surround
        (0x63F, 8, ["L", "R", "C", "LFE", "Lrs", "Rrs", "Ls", "Rs"]),  # 7.1 back + side
        (0x607, 5, ["L", "R", "C", "Ls", "Rs"]),
        (0x3, 6, None),                                        # mask names too few speakers
    ],
)
def test_labels_from_mask(mask, channels, labels):
    assert labels_from_mask(mask, channels) == labels


def test_bs1770_weights():
    # ITU-R BS.1770-5 Table 3: L, R, C 1.0; Ls, Rs 1.41; LFE excluded.
    assert [bs1770_weight(x) for x in ["L", "R", "C", "LFE", "Ls", "Rs"]] == [1.0, 1.0, 1.0, 0.0, 1.41, 1.41]
    # Annex 3: 60..120 deg azimuth at low elevation -> 1.41; rear surrounds at 135 deg -> 1.0;
    # height channels (45 deg elevation) -> 1.0.
    assert bs1770_weight("Lrs") == 1.0 and bs1770_weight("Ltf") == 1.0 and bs1770_weight("Lss") == 1.41


def _wavex_with_mask(path, frames, channels, mask, rate=48000):
    """A 16-bit WAVE_FORMAT_EXTENSIBLE file built byte by byte with the given mask."""
    block_align = 2 * channels
    sub_format = struct.pack("<IHH8s", 1, 0, 0x10, b"\x80\x00\x00\xaa\x00\x38\x9b\x71")
    fmt = struct.pack("<HHIIHHHHI", 0xFFFE, channels, rate, rate * block_align, block_align, 16, 22, 16, mask)
    fmt += sub_format
    data = np.zeros((frames, channels), dtype="<i2").tobytes()
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", len(data)) + data
    path.write_bytes(b"RIFF" + struct.pack("<I", len(body)) + body)


def test_layout_from_extensible_mask(tmp_path):
    path = tmp_path / "m.wav"
    _wavex_with_mask(path, 100, 6, 0x60F)
    with open_stream(path) as s:
        assert s.info.channel_layout == ("L", "R", "C", "LFE", "Ls", "Rs")
        assert s.info.layout_source == "channel_mask"
        assert s.info.channel_weights == (1.0, 1.0, 1.0, 0.0, 1.41, 1.41)


def test_conventional_and_unknown_layouts(tmp_path):
    for channels, source in [(1, "conventional"), (2, "conventional"), (6, "conventional"),
                             (8, "conventional"), (3, "unknown"), (5, "unknown")]:
        path = tmp_path / f"c{channels}.wav"
        sf.write(path, np.zeros((10, channels)), 48000, subtype="PCM_16", format="WAV")
        with open_stream(path) as s:
            assert s.info.layout_source == source
            if source == "unknown":
                assert s.info.channel_layout == tuple(f"ch{i + 1}" for i in range(channels))
                assert set(s.info.channel_weights) == {1.0}


def test_layout_override_checked(tmp_path):
    path = tmp_path / "o.wav"
    sf.write(path, np.zeros((10, 5)), 48000, subtype="PCM_16", format="WAV")
    with open_stream(path, channel_layout=("L", "R", "C", "Ls", "Rs")) as s:
        assert s.info.layout_source == "override"
        # ITU-R BS.1770-5 channel weightings: L, R, C 1.0, surrounds 1.41 (Annex 1; table number from memory)
        assert s.info.channel_weights == (1.0, 1.0, 1.0, 1.41, 1.41)
    with pytest.raises(AudioReadError, match="names 2 channels, the file has 5"):
        open_stream(path, channel_layout=("L", "R"))


def test_bad_inputs_name_file_and_cause(tmp_path):
    missing = tmp_path / "missing.wav"
    with pytest.raises(AudioReadError) as e:
        open_stream(missing)
    assert str(missing) in str(e.value) and "no such file" in str(e.value)

    text = tmp_path / "notes.wav"
    text.write_text("this is not audio\n" * 10)
    with pytest.raises(AudioReadError, match="not a readable audio file"):
        open_stream(text)

    good = tmp_path / "good.wav"
    sf.write(good, np.zeros((1000, 2)), 48000, subtype="PCM_16")
    truncated = tmp_path / "truncated.wav"
    truncated.write_bytes(good.read_bytes()[:30])
    with pytest.raises(AudioReadError, match=str(truncated.name)):
        open_stream(truncated)

    empty = tmp_path / "empty.wav"
    sf.write(empty, np.zeros((0, 2)), 48000, subtype="PCM_16")
    with pytest.raises(AudioReadError, match="no audio frames"):
        open_stream(empty)

    ulaw = tmp_path / "ulaw.wav"
    sf.write(ulaw, np.zeros((100, 1)), 8000, subtype="ULAW")
    with pytest.raises(AudioReadError, match="unsupported encoding"):
        open_stream(ulaw)

    with pytest.raises(AudioReadError, match="is a directory"):
        open_stream(tmp_path)


@pytest.mark.parametrize("channels, labels", [
    (4, ("L", "R", "Ls", "Rs")),
    (5, ("L", "R", "C", "Ls", "Rs")),
    (6, ("L", "R", "C", "LFE", "Ls", "Rs")),
    (8, ("L", "R", "C", "LFE", "Lrs", "Rrs", "Ls", "Rs")),
])
def test_flac_channel_order_without_mask(tmp_path, channels, labels):
    # FLAC format specification, channel assignment for 3..8 channels (from memory).
    path = tmp_path / f"f{channels}.flac"
    sf.write(path, np.zeros((100, channels)), 48000, subtype="PCM_16", format="FLAC")
    with open_stream(path) as s:
        if s.info.layout_source == "channel_mask":
            pytest.skip("libsndfile wrote a channel-mask comment")
        assert s.info.channel_layout == labels
        assert s.info.layout_source == "conventional"
