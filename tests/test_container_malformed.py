"""Malformed chunks: each becomes a problem with its byte offset, and the audio is still
measured when only the metadata is broken (checked through measure_file).

Offsets are computed here from the byte layout the test builds (RIFF header 12
bytes, chunk header 8 bytes, 16-byte PCM fmt body; see tests/containerbytes.py).
"""

from __future__ import annotations

import struct

import numpy as np
import pytest

import containerbytes as cb
from masterqc.audio.container import walk
from masterqc.errors import AudioReadError
from masterqc.measure import measure_file

RATE = 48000
FMT = cb.fmt_pcm(1, RATE, 16)          # 24 bytes on disk
FMT_END = 12 + len(FMT)                 # 36


def _codes(n=4800):
    t = np.arange(n)
    return np.round(8000 * np.sin(2 * np.pi * 1000 * t / RATE)).astype(np.int64).reshape(-1, 1)


CODES = _codes()
DATA = cb.chunk(b"data", cb.pcm16(CODES))


def _offsets(info):
    return [p["offset"] for p in info.problems]


def _measured_peak_ok(result):
    # the audio arrived intact: sample peak of the 8000-code sine, exactly 20*log10(max|code|/32768)
    peak = np.max(np.abs(CODES)) / 32768
    assert result["format"]["frames"] == len(CODES)
    assert result["measurements"]["sample_peak_dbfs"] == pytest.approx(20 * np.log10(peak), abs=1e-9)


def test_clean_file_has_no_problems(tmp_path):
    p = tmp_path / "ok.wav"
    p.write_bytes(cb.riff([FMT, DATA]))
    assert walk(p).problems == []


def test_chunk_length_past_end(tmp_path):
    # a LIST chunk at the end declaring 1000 bytes with only 10 present
    tail = b"LIST" + struct.pack("<I", 1000) + b"INFOINAM\x02\0"
    raw = cb.riff([FMT, DATA]) + tail
    raw = raw[:4] + struct.pack("<I", len(raw) - 8) + raw[8:]
    p = tmp_path / "past.wav"
    p.write_bytes(raw)
    info = walk(p)
    list_offset = FMT_END + len(DATA)
    assert info.problems[0] == {"offset": list_offset,
                                "message": "chunk 'LIST' declares 1000 bytes; only 10 remain in the file"}
    result = measure_file(p)
    assert list_offset in [q["offset"] for q in result["metadata"]["problems"]]
    _measured_peak_ok(result)


def test_riff_size_past_end_of_file(tmp_path):
    raw = cb.riff([FMT, DATA], size=10_000_000)
    p = tmp_path / "riffsize.wav"
    p.write_bytes(raw)
    info = walk(p)
    assert _offsets(info) == [4]
    assert "truncated" in info.problems[0]["message"]
    _measured_peak_ok(measure_file(p))


def test_truncated_data_chunk(tmp_path):
    raw = cb.riff([FMT, DATA])[:-1000]  # the last 500 frames are lost
    p = tmp_path / "cut.wav"
    p.write_bytes(raw)
    info = walk(p)
    assert FMT_END in _offsets(info)
    msg = [q["message"] for q in info.problems if q["offset"] == FMT_END][0]
    assert msg == f"chunk 'data' declares {2 * len(CODES)} bytes; only {2 * len(CODES) - 1000} remain in the file"
    result = measure_file(p)
    assert result["format"]["frames"] == len(CODES) - 500


def test_odd_size_without_pad_byte(tmp_path):
    # an odd 5-byte chunk with its pad byte left out, then the data chunk right after it
    odd = b"xtra" + struct.pack("<I", 5) + b"abcde"
    p = tmp_path / "odd.wav"
    p.write_bytes(cb.riff([FMT, odd, DATA]))
    info = walk(p)
    assert info.problems == [{"offset": FMT_END, "message":
                              f"chunk 'xtra' has an odd size (5) and no pad byte; the next chunk starts at "
                              f"byte {FMT_END + 13}"}]
    assert [c["id"] for c in info.chunks] == ["fmt ", "xtra", "data"]
    assert info.metadata["audio_data"]["offset"] == FMT_END + 13 + 8
    try:
        result = measure_file(p)
    except AudioReadError as exc:
        # libsndfile 1.2 looks for the data chunk after the (missing) pad byte and gives up;
        # the error then names the walker's problem and its offset
        assert exc.offset == FMT_END and "no pad byte" in str(exc)
    else:
        _measured_peak_ok(result)


def test_odd_size_with_pad_byte_is_clean(tmp_path):
    p = tmp_path / "pad.wav"
    p.write_bytes(cb.riff([FMT, cb.chunk(b"xtra", b"abcde"), DATA]))
    info = walk(p)
    assert info.problems == []
    assert info.metadata["audio_data"]["offset"] == FMT_END + 14 + 8


def test_duplicate_fmt(tmp_path):
    second = cb.fmt_pcm(2, 44100, 24)
    p = tmp_path / "dup.wav"
    p.write_bytes(cb.riff([FMT, second, DATA]))
    info = walk(p)
    assert info.problems == [{"offset": FMT_END, "message":
                              "duplicate fmt chunk (the first is at byte 12); the first one is reported"}]
    assert info.metadata["fmt"]["sample_rate_hz"] == RATE


def test_data_before_fmt(tmp_path):
    p = tmp_path / "order.wav"
    p.write_bytes(cb.riff([DATA, FMT]))
    info = walk(p)
    assert info.problems == [{"offset": 12, "message":
                              "data chunk comes before the fmt chunk (RIFF WAVE requires fmt first)"}]
    # the frame count is still known from the later fmt
    assert info.metadata["audio_data"]["frames"] == len(CODES)
    try:
        result = measure_file(p)
    except AudioReadError as exc:
        # libsndfile may refuse the order; then the error names the problem and its byte offset
        assert exc.offset == 12 and "before the fmt chunk" in str(exc)
    else:
        assert 12 in [q["offset"] for q in result["metadata"]["problems"]]
        _measured_peak_ok(result)


@pytest.mark.parametrize("version,size,missing", [
    (2, 400, "UMID, loudness fields"),
    (2, 420, "loudness fields"),
    (1, 350, "UMID"),
    (0, 500, None),
])
def test_bext_shorter_than_its_version_requires(tmp_path, version, size, missing):
    body = cb.bext_body(version=version, originator="Tamberlo Lane Post",
                        loudness=(-2300, 500, -100, -1800, -2000))[:size]
    p = tmp_path / "short.wav"
    p.write_bytes(cb.riff([FMT, cb.chunk(b"bext", body), DATA]))
    info = walk(p)
    expect = f"bext chunk is {size} bytes, version {version} requires at least 602 (EBU Tech 3285)"
    if missing:
        expect += f"; missing: {missing}"
    assert info.problems == [{"offset": FMT_END, "message": expect}]
    bx = info.metadata["bext"]
    assert bx["originator"] == "Tamberlo Lane Post"
    if size == 420:  # four of five loudness fields fit
        assert bx["loudness_value_lufs"] == -23.0 and bx["max_momentary_loudness_lufs"] == -18.0
        assert bx["max_short_term_loudness_lufs"] is None
    result = measure_file(p)
    assert [q["offset"] for q in result["metadata"]["problems"]] == [FMT_END]
    _measured_peak_ok(result)


def test_bext_too_short_for_version(tmp_path):
    p = tmp_path / "tiny.wav"
    p.write_bytes(cb.riff([FMT, cb.chunk(b"bext", b"only a description"), DATA]))
    info = walk(p)
    assert _offsets(info) == [FMT_END]
    assert "too short to hold its Version field" in info.problems[0]["message"]
    assert info.metadata["bext"]["version"] is None
    _measured_peak_ok(measure_file(p))


def test_garbage_instead_of_a_chunk_id(tmp_path):
    raw = cb.riff([FMT, DATA]) + b"\x00\xff\x10\x80" + b"\0" * 12
    raw = raw[:4] + struct.pack("<I", len(raw) - 8) + raw[8:]
    p = tmp_path / "garbage.wav"
    p.write_bytes(raw)
    info = walk(p)
    assert info.problems == [{"offset": FMT_END + len(DATA), "message":
                              "bytes b'\\x00\\xff\\x10\\x80' are not a chunk id; the remaining 16 bytes "
                              "were not walked"}]
    _measured_peak_ok(measure_file(p))


def test_trailing_bytes_after_form(tmp_path):
    raw = cb.riff([FMT, DATA]) + b"JUNKJUNK"
    p = tmp_path / "trail.wav"
    p.write_bytes(raw)
    info = walk(p)
    assert info.problems == [{"offset": len(raw) - 8,
                              "message": "8 bytes after the end of the RIFF form are not part of it"}]


def test_fmt_block_align_contradiction(tmp_path):
    body = struct.pack("<HHIIHH", 1, 1, RATE, RATE * 2, 4, 16)  # 1 x 16 bit needs nBlockAlign 2
    p = tmp_path / "align.wav"
    p.write_bytes(cb.riff([cb.chunk(b"fmt ", body), DATA]))
    info = walk(p)
    assert info.problems[0] == {"offset": 12 + 8 + 12,
                                "message": "fmt nBlockAlign is 4; 1 channels of 16 bits need 2"}


def test_data_not_whole_frames(tmp_path):
    fmt = cb.fmt_pcm(2, RATE, 16)
    p = tmp_path / "partial.wav"
    p.write_bytes(cb.riff([fmt, cb.chunk(b"data", b"\0" * 4002)]))
    info = walk(p)
    assert info.problems == [{"offset": 36, "message":
                              "data chunk holds 4002 bytes, not a whole number of 4-byte frames (2 bytes left over)"}]


def test_list_info_entry_past_list_end(tmp_path):
    body = b"INFO" + b"INAM" + struct.pack("<I", 200) + b"Short\0"
    lst = cb.chunk(b"LIST", body)
    p = tmp_path / "info.wav"
    p.write_bytes(cb.riff([FMT, DATA, lst]))
    info = walk(p)
    entry_offset = FMT_END + len(DATA) + 8 + 4
    assert info.problems == [{"offset": entry_offset, "message":
                              "LIST/INFO entry 'INAM' declares 200 bytes; only 6 remain in the list"}]
    assert info.metadata["info"] == {"INAM": "Short"}


def test_aiff_duplicate_comm_and_truncated_form(tmp_path):
    c = cb.comm(1, len(CODES), 16, 48000.0)
    raw = cb.aiff([c, c, cb.ssnd(cb.be16(CODES))], size=999_999)
    p = tmp_path / "dup.aiff"
    p.write_bytes(raw)
    info = walk(p)
    assert _offsets(info) == [4, 12 + len(c)]
    assert "duplicate COMM" in info.problems[1]["message"]
    result = measure_file(p)
    assert result["format"]["frames"] == len(CODES)


def test_not_a_container(tmp_path):
    p = tmp_path / "text.wav"
    p.write_bytes(b"this is a text file, not audio\n")
    info = walk(p)
    assert info.kind is None and _offsets(info) == [0]
    with pytest.raises(AudioReadError) as err:
        measure_file(p)
    assert err.value.offset == 0 and "text.wav" in str(err.value)


def test_measure_table_lists_container_problems(tmp_path, capsys):
    from masterqc.cli import main

    p = tmp_path / "short.wav"
    p.write_bytes(cb.riff([FMT, cb.chunk(b"bext", cb.bext_body(version=2, time_reference=RATE)[:500]), DATA]))
    assert main(["measure", str(p), "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "Container     1 problem:" in out
    assert "at byte 36: bext chunk is 500 bytes, version 2 requires at least 602 (EBU Tech 3285)" in out
    assert "Start         00:00:01:00 (25 fps, from bext: 48000 samples)" in out
