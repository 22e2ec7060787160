"""Byte-by-byte builders of container files for the container tests (struct.pack only).

Every layout here is written from the published format descriptions, not from
masterqc's walker, so a test that reads these bytes back checks the walker
against the format, not against itself:

* RIFF WAVE and ``fmt `` / WAVE_FORMAT_EXTENSIBLE: Microsoft RIFF and
  WAVEFORMATEXTENSIBLE definitions (from memory).
* ``bext``: EBU Tech 3285 v2 field offsets (the loudness fields of v2 and
  0x7FFF = unused included), from memory of the v2 text.
* ``ds64``: EBU Tech 3306 (RF64), from memory.
* AIFF / AIFF-C: Apple AIFF 1.3 / AIFF-C (big-endian; 80-bit extended rate), from memory.
* ID3v2.3 / 2.4 frame layout, from memory.
* FLAC metadata block header and VORBIS_COMMENT layout (little-endian lengths
  inside the block), from the FLAC format description (from memory).
"""

from __future__ import annotations

import math
import struct

import numpy as np


def chunk(cid: bytes, body: bytes, pad: bool = True, endian: str = "<", size: int | None = None) -> bytes:
    """A chunk: 4-byte id, 32-bit size (``size`` overrides the true length), body, pad byte if odd."""
    assert len(cid) == 4
    n = len(body) if size is None else size
    out = cid + struct.pack(endian + "I", n) + body
    if pad and len(body) % 2:
        out += b"\0"
    return out


def riff(chunks: list[bytes], magic: bytes = b"RIFF", size: int | None = None) -> bytes:
    """A RIFF WAVE file around ``chunks`` (``size`` overrides the header size field)."""
    body = b"WAVE" + b"".join(chunks)
    return magic + struct.pack("<I", len(body) if size is None else size) + body


def fmt_pcm(channels: int, rate: int, bits: int, tag: int = 1) -> bytes:
    """A 16-byte fmt chunk (PCM tag 1, IEEE float tag 3)."""
    align = channels * ((bits + 7) // 8)
    return chunk(b"fmt ", struct.pack("<HHIIHH", tag, channels, rate, rate * align, align, bits))


def fmt_extensible(channels: int, rate: int, bits: int, mask: int, valid_bits: int | None = None,
                   sub_tag: int = 1) -> bytes:
    """A 40-byte WAVE_FORMAT_EXTENSIBLE fmt chunk; sub-format GUID built from ``sub_tag``."""
    align = channels * ((bits + 7) // 8)
    guid = struct.pack("<H", sub_tag) + bytes.fromhex("000000001000800000aa00389b71")
    body = struct.pack("<HHIIHH", 0xFFFE, channels, rate, rate * align, align, bits)
    body += struct.pack("<HHI", 22, valid_bits or bits, mask) + guid
    assert len(body) == 40
    return chunk(b"fmt ", body)


def pcm16(frames: np.ndarray) -> bytes:
    """Interleaved little-endian int16 sample codes from an int array (frames, channels)."""
    return np.ascontiguousarray(frames, dtype="<i2").tobytes()


def pcm24(frames: np.ndarray) -> bytes:
    """Interleaved little-endian 24-bit codes from an int array (frames, channels)."""
    a = np.ascontiguousarray(frames, dtype="<i4").reshape(-1)
    b = a.view(np.uint8).reshape(-1, 4)[:, :3]
    return b.tobytes()


def _text(s: str, width: int) -> bytes:
    raw = s.encode("ascii")
    assert len(raw) <= width
    return raw + b"\0" * (width - len(raw))


def bext_body(version: int = 2, description: str = "", originator: str = "", originator_reference: str = "",
              date: str = "", time: str = "", time_reference: int = 0, umid: bytes = b"",
              loudness=(0x7FFF,) * 5, coding_history: bytes = b"") -> bytes:
    """A bext chunk body laid out field by field at the EBU Tech 3285 v2 offsets.

    ``loudness`` holds the five raw int16 values (100 x the level) in layout
    order: LoudnessValue, LoudnessRange, MaxTruePeakLevel,
    MaxMomentaryLoudness, MaxShortTermLoudness.
    """
    b = bytearray()
    b += _text(description, 256)
    assert len(b) == 256
    b += _text(originator, 32)
    assert len(b) == 288
    b += _text(originator_reference, 32)
    assert len(b) == 320
    b += _text(date, 10)
    assert len(b) == 330
    b += _text(time, 8)
    assert len(b) == 338
    b += struct.pack("<II", time_reference & 0xFFFFFFFF, time_reference >> 32)
    assert len(b) == 346
    b += struct.pack("<H", version)
    assert len(b) == 348
    if version == 0:
        b += b"\0" * 254
    else:
        b += umid.ljust(64, b"\0")
        assert len(b) == 412
        if version >= 2:
            b += struct.pack("<hhhhh", *loudness)
            assert len(b) == 422
            b += b"\0" * 180
        else:
            b += b"\0" * 190
    assert len(b) == 602
    return bytes(b) + coding_history


def ds64_body(riff_size: int, data_size: int, sample_count: int, table=()) -> bytes:
    """An RF64 ds64 body: three uint64 sizes, the table length, then (id, uint64 size) entries."""
    out = struct.pack("<QQQI", riff_size, data_size, sample_count, len(table))
    for cid, size in table:
        out += cid + struct.pack("<Q", size)
    return out


def list_info(entries: list[tuple[bytes, str]]) -> bytes:
    """A LIST chunk of type INFO with NUL-terminated text entries (each padded to even length)."""
    body = b"INFO"
    for tag, text in entries:
        body += chunk(tag, text.encode("latin-1") + b"\0")
    return chunk(b"LIST", body)


def syncsafe(n: int) -> bytes:
    return bytes([(n >> 21) & 0x7F, (n >> 14) & 0x7F, (n >> 7) & 0x7F, n & 0x7F])


def id3v2(frames: list[tuple[bytes, str]], major: int = 3, encoding: int = 0) -> bytes:
    """An ID3v2.3 (or 2.4) tag of text frames (encoding 0 = Latin-1, 3 = UTF-8)."""
    body = b""
    for fid, text in frames:
        data = bytes([encoding]) + text.encode("latin-1" if encoding == 0 else "utf-8")
        size = struct.pack(">I", len(data)) if major == 3 else syncsafe(len(data))
        body += fid + size + b"\0\0" + data
    return b"ID3" + bytes([major, 0, 0]) + syncsafe(len(body)) + body


def ext80(rate: float) -> bytes:
    """An 80-bit IEEE 754 extended float, big-endian (the AIFF COMM sample rate)."""
    if rate == 0:
        return b"\0" * 10
    e = math.floor(math.log2(rate))
    mant = int(rate * 2 ** (63 - e))
    return struct.pack(">H", 16383 + e) + mant.to_bytes(8, "big")


def aiff(chunks: list[bytes], form: bytes = b"AIFF", size: int | None = None) -> bytes:
    body = form + b"".join(chunks)
    return b"FORM" + struct.pack(">I", len(body) if size is None else size) + body


def comm(channels: int, frames: int, bits: int, rate: float, compression: bytes | None = None,
         name: bytes = b"") -> bytes:
    body = struct.pack(">hIh", channels, frames, bits) + ext80(rate)
    if compression is not None:
        pstr = bytes([len(name)]) + name
        if len(pstr) % 2:
            pstr += b"\0"
        body += compression + pstr
    return chunk(b"COMM", body, endian=">")


def ssnd(sample_bytes: bytes) -> bytes:
    return chunk(b"SSND", struct.pack(">II", 0, 0) + sample_bytes, endian=">")


def be16(frames: np.ndarray) -> bytes:
    return np.ascontiguousarray(frames, dtype=">i2").tobytes()


def flac_blocks(data: bytes):
    """Split a FLAC file into (list of (type, body), audio bytes); checks the fLaC marker."""
    assert data[:4] == b"fLaC"
    pos = 4
    blocks = []
    while True:
        h = data[pos]
        n = int.from_bytes(data[pos + 1:pos + 4], "big")
        blocks.append((h & 0x7F, data[pos + 4:pos + 4 + n]))
        pos += 4 + n
        if h & 0x80:
            break
    return blocks, data[pos:]


def flac_join(blocks, audio: bytes) -> bytes:
    out = b"fLaC"
    for i, (t, body) in enumerate(blocks):
        last = 0x80 if i == len(blocks) - 1 else 0
        out += bytes([last | t]) + len(body).to_bytes(3, "big") + body
    return out + audio


def vorbis_comment(vendor: str, comments: list[str]) -> bytes:
    """A VORBIS_COMMENT block body: little-endian lengths, UTF-8 strings, no framing bit."""
    out = struct.pack("<I", len(vendor.encode())) + vendor.encode() + struct.pack("<I", len(comments))
    for c in comments:
        raw = c.encode("utf-8")
        out += struct.pack("<I", len(raw)) + raw
    return out
