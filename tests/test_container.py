"""Container walker on files built byte by byte (tests/containerbytes.py), read back exactly.

Layout sources are named in tests/containerbytes.py; the bext layout is EBU
Tech 3285 v2 (the field offsets, loudness fields included, and 0x7FFF = unused are
written from memory of the v2 text).
"""

from __future__ import annotations

import struct
import tracemalloc

import numpy as np
import pytest
import soundfile as sf

import containerbytes as cb
from masterqc.audio import bext as bextmod
from masterqc.audio.container import MAX_TEXT_BYTES, METADATA_SCHEMA, walk
from masterqc.audio.reader import open_stream
from masterqc.errors import AudioReadError
from masterqc.measure import MeasureOptions, measure_file
from masterqc.schema import result_schema

jsonschema = pytest.importorskip("jsonschema")

RATE = 48000


def _codes(frames=480, channels=2, seed=1):
    rng = np.random.default_rng(seed)
    return rng.integers(-20000, 20000, size=(frames, channels), dtype=np.int64)


def _write(tmp_path, name, data: bytes):
    p = tmp_path / name
    p.write_bytes(data)
    return p


def _read_all(path):
    with open_stream(path) as s:
        return np.concatenate(list(s.blocks(1000))), s.info


# ------------------------------------------------------------------ bext

BEXT_V2 = dict(version=2, description="Reel 3, final mix (fictional programme)", originator="Tamberlo Lane Post",
               originator_reference="HLP0000000001", date="2026-11-30", time="17:45:09",
               time_reference=10 * 3600 * RATE, umid=bytes(range(1, 65)),
               loudness=(-2300, 850, -150, -1612, -1999),
               coding_history=b"A=PCM,F=48000,W=24,M=stereo,T=fictional desk\r\n")


def test_bext_v2_fields_read_back_exactly(tmp_path):
    codes = _codes()
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), cb.chunk(b"bext", cb.bext_body(**BEXT_V2)),
                    cb.chunk(b"data", cb.pcm16(codes))])
    info = walk(_write(tmp_path, "bwf.wav", data))
    assert info.kind == "riff"
    assert info.problems == []
    bx = info.metadata["bext"]
    assert bx["version"] == 2
    assert bx["description"] == BEXT_V2["description"]
    assert bx["originator"] == "Tamberlo Lane Post"
    assert bx["originator_reference"] == "HLP0000000001"
    assert bx["origination_date"] == "2026-11-30"
    assert bx["origination_time"] == "17:45:09"
    assert bx["time_reference_samples"] == 1_728_000_000
    assert bx["umid"] == bytes(range(1, 65)).hex()
    # Tech 3285 v2: int16 = round(100 x value)
    assert bx["loudness_value_lufs"] == -23.00
    assert bx["loudness_range_lu"] == 8.50
    assert bx["max_true_peak_level_dbtp"] == -1.50
    assert bx["max_momentary_loudness_lufs"] == -16.12
    assert bx["max_short_term_loudness_lufs"] == -19.99
    assert bx["coding_history"] == "A=PCM,F=48000,W=24,M=stereo,T=fictional desk"
    assert bx["offset"] == 36  # after RIFF header (12) and the 24-byte fmt chunk
    assert info.metadata["time_reference_samples"] == 1_728_000_000
    assert info.metadata["time_reference_source"] == "bext"


def test_bext_time_reference_uses_both_words():
    body = cb.bext_body(version=1, time_reference=(3 << 32) + 17)
    fields, problems = bextmod.parse_bext(body, len(body))
    assert fields["time_reference_samples"] == 3 * 2**32 + 17
    assert problems == []


def test_bext_unused_loudness_fields_are_null():
    # 0x7FFF marks an unused field (from memory); the others still read
    body = cb.bext_body(version=2, loudness=(-2450, 0x7FFF, -300, 0x7FFF, 0x7FFF))
    fields, problems = bextmod.parse_bext(body, len(body))
    assert fields["loudness_value_lufs"] == -24.5
    assert fields["loudness_range_lu"] is None
    assert fields["max_true_peak_level_dbtp"] == -3.0
    assert fields["max_momentary_loudness_lufs"] is None
    assert problems == []


@pytest.mark.parametrize("version", [0, 1])
def test_bext_before_v2_has_no_loudness(version):
    body = cb.bext_body(version=version, umid=b"\x01" * 64, description="v")
    assert len(body) == 602  # every version has the same fixed part (Tech 3285)
    fields, problems = bextmod.parse_bext(body, len(body))
    assert fields["version"] == version
    assert all(fields[k] is None for k, _u in bextmod.LOUDNESS_FIELDS)
    assert fields["umid"] == (None if version == 0 else "01" * 64)
    assert problems == []


def test_bext_through_measure_file_lands_in_result_metadata(tmp_path):
    codes = _codes(4800)
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), cb.chunk(b"bext", cb.bext_body(**BEXT_V2)),
                    cb.chunk(b"data", cb.pcm16(codes))])
    p = _write(tmp_path, "bwf.wav", data)
    result = measure_file(p, MeasureOptions(timecode_fps="25"))
    md = result["metadata"]
    assert md["bext"]["loudness_value_lufs"] == -23.0
    assert md["bext"]["max_true_peak_level_dbtp"] == -1.5
    assert md["time_reference_samples"] == 1_728_000_000
    assert md["start_timecode"] == "10:00:00:00"
    assert md["timecode_fps"] == "25"
    jsonschema.validate(md, METADATA_SCHEMA)
    # 29.97 drop frame, computed here from the drop-frame rule (labels 00 and 01 skipped each minute
    # except every tenth; SMPTE ST 12-1, from memory): one hour of labels is 107892 frames = 3599.9964 s,
    # so 10 h of clock time (frame 1078921) is label 10:00:00;01
    result = measure_file(p, MeasureOptions(timecode_fps="29.97df"))
    frames = 36000 * 30000 // 1001
    assert frames == 1078921
    tens, rem = divmod(frames, 17982)
    labels = frames + 18 * tens + (2 * ((rem - 2) // 1798) if rem >= 2 else 0)
    h, r = divmod(labels, 30 * 3600)
    m, r = divmod(r, 30 * 60)
    s, f = divmod(r, 30)
    assert (h, m, s, f) == (10, 0, 0, 1)
    assert result["metadata"]["start_timecode"] == "10:00:00;01"
    assert result["metadata"]["timecode_fps"] == "29.97df"


# ------------------------------------------------------------------ iXML, INFO, id3

IXML = """<?xml version="1.0" encoding="UTF-8"?>
<BWFXML><IXML_VERSION>1.61</IXML_VERSION><PROJECT>The Wickfen Keeper</PROJECT><SCENE>12A</SCENE>
<TAKE>3</TAKE><TAPE>DAY04</TAPE><NOTE>ISRC XX-Q7Z-26-00042</NOTE>
<SPEED><TIMECODE_RATE>30000/1001</TIMECODE_RATE><TIMECODE_FLAG>DF</TIMECODE_FLAG>
<TIMESTAMP_SAMPLES_SINCE_MIDNIGHT_HI>0</TIMESTAMP_SAMPLES_SINCE_MIDNIGHT_HI>
<TIMESTAMP_SAMPLES_SINCE_MIDNIGHT_LO>172800000</TIMESTAMP_SAMPLES_SINCE_MIDNIGHT_LO>
<TIMESTAMP_SAMPLE_RATE>48000</TIMESTAMP_SAMPLE_RATE></SPEED>
<TRACK_LIST><TRACK_COUNT>2</TRACK_COUNT><TRACK><CHANNEL_INDEX>1</CHANNEL_INDEX><NAME>BOOM</NAME></TRACK>
<TRACK><CHANNEL_INDEX>2</CHANNEL_INDEX><NAME>LAV</NAME></TRACK></TRACK_LIST></BWFXML>"""


def test_ixml_fields_rate_and_timestamp(tmp_path):
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), cb.chunk(b"iXML", IXML.encode()),
                    cb.chunk(b"data", cb.pcm16(_codes()))])
    info = walk(_write(tmp_path, "ix.wav", data))
    assert info.problems == []
    ix = info.metadata["ixml"]
    assert ix["fields"]["PROJECT"] == "The Wickfen Keeper"
    assert ix["fields"]["SCENE"] == "12A"
    assert ix["fields"]["SPEED/TIMECODE_RATE"] == "30000/1001"
    assert ix["tracks"] == [{"CHANNEL_INDEX": "1", "NAME": "BOOM"}, {"CHANNEL_INDEX": "2", "NAME": "LAV"}]
    assert ix["timestamp_samples"] == 172_800_000
    assert info.metadata["declared_timecode_fps"] == "29.97df"
    # no bext: the iXML timestamp is the time reference
    assert info.metadata["time_reference_samples"] == 172_800_000
    assert info.metadata["time_reference_source"] == "ixml"
    # an ISRC written in the NOTE text is not picked up (only an ISRC element is)
    assert info.metadata["isrc"] == []


def test_ixml_timestamp_contradicting_bext_is_a_problem(tmp_path):
    bext = cb.chunk(b"bext", cb.bext_body(version=1, time_reference=172_800_001))
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), bext, cb.chunk(b"iXML", IXML.encode()),
                    cb.chunk(b"data", cb.pcm16(_codes()))])
    info = walk(_write(tmp_path, "ix2.wav", data))
    ixml_offset = 12 + 24 + 8 + 602
    assert [p["offset"] for p in info.problems] == [ixml_offset]
    assert "differs from the bext TimeReference" in info.problems[0]["message"]
    assert info.metadata["time_reference_samples"] == 172_800_001


def test_ixml_with_entities_is_refused(tmp_path):
    bomb = '<?xml version="1.0"?><!DOCTYPE x [<!ENTITY a "aaaa">]><BWFXML><NOTE>&a;</NOTE></BWFXML>'
    data = cb.riff([cb.fmt_pcm(1, RATE, 16), cb.chunk(b"iXML", bomb.encode()),
                    cb.chunk(b"data", cb.pcm16(_codes(channels=1)))])
    info = walk(_write(tmp_path, "bomb.wav", data))
    assert info.metadata["ixml"]["fields"] == {}
    assert info.problems[0]["offset"] == 36
    assert "DOCTYPE" in info.problems[0]["message"]


def test_list_info_with_isrc(tmp_path):
    # LIST/INFO 'ISRC' is defined as "source"; carrying the ISRC there is a convention (common practice, no source)
    lst = cb.list_info([(b"INAM", "Skellbrook Lights"), (b"IART", "The Fictional Quartet"),
                        (b"ISRC", "XXQ7Z2600042"), (b"ICRD", "2026-11-30")])
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), cb.chunk(b"data", cb.pcm16(_codes())), lst])
    info = walk(_write(tmp_path, "info.wav", data))
    assert info.problems == []
    assert info.metadata["info"] == {"INAM": "Skellbrook Lights", "IART": "The Fictional Quartet",
                                     "ISRC": "XXQ7Z2600042", "ICRD": "2026-11-30"}
    (entry,) = info.metadata["isrc"]
    assert entry["source"] == "info.ISRC"
    assert entry["valid"] is True and entry["code"] == "XXQ7Z2600042" and entry["display"] == "XX-Q7Z-26-00042"


@pytest.mark.parametrize("major,encoding", [(3, 0), (4, 3)])
def test_id3_chunk_text_frames_and_tsrc(tmp_path, major, encoding):
    tag = cb.id3v2([(b"TIT2", "Skellbrook Lights \u00e9"), (b"TSRC", "XXQ7Z2600042"), (b"TPE1", "Quartet")],
                   major=major, encoding=encoding)
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), cb.chunk(b"data", cb.pcm16(_codes())), cb.chunk(b"id3 ", tag)])
    info = walk(_write(tmp_path, "id3.wav", data))
    assert info.problems == []
    id3 = info.metadata["id3"]
    assert id3["version"] == f"2.{major}"
    assert id3["frames"]["TIT2"] == "Skellbrook Lights \u00e9"
    assert id3["frames"]["TPE1"] == "Quartet"
    assert [(e["source"], e["code"]) for e in info.metadata["isrc"]] == [("id3.TSRC", "XXQ7Z2600042")]


def test_isrc_in_bext_description_and_bad_syntax(tmp_path):
    # "ISRC: <code>" in the bext description is a convention (common practice, no source)
    bext = cb.chunk(b"bext", cb.bext_body(version=1, description="ISRC:XX-Q7Z-26-0004"))  # one digit short
    lst = cb.list_info([(b"ISRC", "XXQ7Z2600042")])
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), bext, cb.chunk(b"data", cb.pcm16(_codes())), lst])
    info = walk(_write(tmp_path, "b.wav", data))
    # the short code does not match the in-text pattern at all; a wrong-length INFO value is reported invalid
    assert [e["source"] for e in info.metadata["isrc"]] == ["info.ISRC"]
    lst = cb.list_info([(b"ISRC", "XX-Q7Z-26-0004")])
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), cb.chunk(b"data", cb.pcm16(_codes())), lst])
    (entry,) = walk(_write(tmp_path, "c.wav", data)).metadata["isrc"]
    assert entry["valid"] is False and "hyphens" in entry["problem"]


# ------------------------------------------------------------------ RF64, extensible masks

def test_rf64_with_ds64_sizes(tmp_path):
    codes = _codes(1000)
    audio = cb.pcm16(codes)
    fmt = cb.fmt_pcm(2, RATE, 16)
    data_chunk = b"data" + struct.pack("<I", 0xFFFFFFFF) + audio
    riff_size = 4 + (8 + 28) + len(fmt) + len(data_chunk)
    ds64 = cb.chunk(b"ds64", cb.ds64_body(riff_size, len(audio), 1000))
    raw = b"RF64" + struct.pack("<I", 0xFFFFFFFF) + b"WAVE" + ds64 + fmt + data_chunk
    p = _write(tmp_path, "big.wav", raw)
    info = walk(p)
    assert info.kind == "rf64"
    assert info.problems == []
    assert info.metadata["ds64"]["data_size_bytes"] == 4000
    assert info.metadata["ds64"]["sample_count"] == 1000
    assert info.chunks[-1] == {"id": "data", "offset": 12 + 36 + 24, "size": 4000}
    assert info.metadata["audio_data"]["frames"] == 1000
    got, sinfo = _read_all(p)
    assert sinfo.container == "rf64" and sinfo.frames == 1000
    assert np.array_equal(got * 32768, codes)


def test_rf64_without_ds64_is_a_problem(tmp_path):
    raw = b"RF64" + struct.pack("<I", 0xFFFFFFFF) + b"WAVE" + cb.fmt_pcm(1, RATE, 16) + \
        b"data" + struct.pack("<I", 0xFFFFFFFF) + cb.pcm16(_codes(10, 1))
    info = walk(_write(tmp_path, "nods.wav", raw))
    offsets = [p["offset"] for p in info.problems]
    assert 12 in offsets  # no ds64 first
    assert 36 in offsets  # data size cannot be resolved


@pytest.mark.parametrize("mask,channels,labels", [
    (0x3, 2, ["L", "R"]),
    (0x4, 1, ["C"]),
    (0x60F, 6, ["L", "R", "C", "LFE", "Ls", "Rs"]),          # side surrounds
    (0x3F, 6, ["L", "R", "C", "LFE", "Ls", "Rs"]),           # back surrounds, read at the 5.1 positions
    (0x63F, 8, ["L", "R", "C", "LFE", "Lrs", "Rrs", "Ls", "Rs"]),
])
def test_extensible_channel_mask_sets_layout(tmp_path, mask, channels, labels):
    codes = _codes(64, channels)
    data = cb.riff([cb.fmt_extensible(channels, RATE, 24, mask), cb.chunk(b"data", cb.pcm24(codes))])
    p = _write(tmp_path, f"m{mask:x}.wav", data)
    info = walk(p)
    assert info.channel_mask == mask and info.problems == []
    assert info.metadata["fmt"]["subformat_tag"] == 1
    got, sinfo = _read_all(p)
    assert list(sinfo.channel_layout) == labels
    assert sinfo.layout_source == "channel_mask"
    assert np.array_equal(got * 2**23, codes)
    # BS.1770-5 weights: surrounds at +-110 deg 1.41, LFE 0, rear (135 deg) 1.0
    w = dict(zip(sinfo.channel_layout, sinfo.channel_weights))
    if "Ls" in w:
        assert w["Ls"] == 1.41 and w["LFE"] == 0.0
    if "Lrs" in w:
        assert w["Lrs"] == 1.0


def test_mask_naming_too_few_speakers_is_a_problem(tmp_path):
    data = cb.riff([cb.fmt_extensible(6, RATE, 24, 0x3), cb.chunk(b"data", cb.pcm24(_codes(16, 6)))])
    p = _write(tmp_path, "few.wav", data)
    info = walk(p)
    assert info.problems == [{"offset": 12 + 8 + 20, "message":
                              "channel mask 0x3 names 2 speakers for 6 channels; the channel layout is unknown"}]
    _got, sinfo = _read_all(p)
    assert sinfo.layout_source == "conventional"


# ------------------------------------------------------------------ AIFF / AIFF-C

def test_aiff_chunks_and_text(tmp_path):
    codes = _codes(300)
    chunks = [cb.comm(2, 300, 16, 44100.0), cb.chunk(b"NAME", b"Tamberlo Suite", endian=">"),
              cb.chunk(b"AUTH", b"A. Fictional", endian=">"),
              cb.chunk(b"(c) ", b"2026 Nowhere Records", endian=">"),
              cb.chunk(b"ANNO", b"master v3; ISRC XX-Q7Z-26-00042", endian=">"),
              cb.ssnd(cb.be16(codes))]
    p = _write(tmp_path, "a.aiff", cb.aiff(chunks))
    info = walk(p)
    assert info.kind == "aiff" and info.problems == []
    assert info.metadata["comm"] == {"channels": 2, "frames": 300, "bits_per_sample": 16,
                                     "sample_rate_hz": 44100.0, "compression_type": None,
                                     "compression_name": None}
    assert info.metadata["text_chunks"] == {"name": "Tamberlo Suite", "author": "A. Fictional",
                                            "copyright": "2026 Nowhere Records",
                                            "annotations": ["master v3; ISRC XX-Q7Z-26-00042"]}
    assert [(e["source"], e["code"]) for e in info.metadata["isrc"]] == [("aiff.annotations", "XXQ7Z2600042")]
    assert [c["id"] for c in info.chunks] == ["COMM", "NAME", "AUTH", "(c) ", "ANNO", "SSND"]
    got, sinfo = _read_all(p)
    assert sinfo.container == "aiff" and sinfo.sample_rate_hz == 44100
    assert np.array_equal(got * 32768, codes)


def test_aifc_uncompressed(tmp_path):
    codes = _codes(200, 1)
    chunks = [cb.chunk(b"FVER", struct.pack(">I", 0xA2805140), endian=">"),
              cb.comm(1, 200, 16, 48000.0, compression=b"NONE", name=b"not compressed"),
              cb.ssnd(cb.be16(codes))]
    p = _write(tmp_path, "a.aifc", cb.aiff(chunks, form=b"AIFC"))
    info = walk(p)
    assert info.kind == "aifc" and info.problems == []
    assert info.metadata["comm"]["compression_type"] == "NONE"
    assert info.metadata["comm"]["compression_name"] == "not compressed"
    got, sinfo = _read_all(p)
    assert sinfo.container == "aifc"
    assert np.array_equal(got[:, 0] * 32768, codes[:, 0])


# ------------------------------------------------------------------ FLAC

def _flac_with_comments(tmp_path, channels, comments):
    codes = _codes(2000, channels)
    base = tmp_path / "base.flac"
    sf.write(base, codes.astype(np.int16), RATE, format="FLAC", subtype="PCM_16")
    blocks, audio = cb.flac_blocks(base.read_bytes())
    blocks = [b for b in blocks if b[0] != 4] + [(4, cb.vorbis_comment("fictional encoder 1.0", comments))]
    p = _write(tmp_path, "c.flac", cb.flac_join(blocks, audio))
    return p, codes


def test_flac_vorbis_comments_and_mask(tmp_path):
    p, codes = _flac_with_comments(tmp_path, 6, ["TITLE=Skellbrook Lights", "isrc=XXQ7Z2600042",
                                                 "WAVEFORMATEXTENSIBLE_CHANNEL_MASK=0x60F"])
    info = walk(p)
    assert info.kind == "flac" and info.problems == []
    vc = info.metadata["vorbis_comments"]
    assert vc["vendor"] == "fictional encoder 1.0"
    assert vc["comments"]["TITLE"] == ["Skellbrook Lights"]
    assert info.metadata["streaminfo"]["channels"] == 6
    assert info.metadata["streaminfo"]["frames"] == 2000
    assert info.channel_mask == 0x60F
    assert [(e["source"], e["code"]) for e in info.metadata["isrc"]] == [("vorbis.ISRC", "XXQ7Z2600042")]
    got, sinfo = _read_all(p)
    assert list(sinfo.channel_layout) == ["L", "R", "C", "LFE", "Ls", "Rs"]
    assert np.array_equal(got * 32768, codes)


def test_flac_comment_past_block_end_is_a_problem(tmp_path):
    bad = struct.pack("<I", 4) + b"abcd" + struct.pack("<I", 1) + struct.pack("<I", 500) + b"X=1"
    codes = _codes(500, 1)
    base = tmp_path / "base.flac"
    sf.write(base, codes.astype(np.int16), RATE, format="FLAC", subtype="PCM_16")
    blocks, audio = cb.flac_blocks(base.read_bytes())
    blocks = [b for b in blocks if b[0] != 4] + [(4, bad)]
    p = _write(tmp_path, "bad.flac", cb.flac_join(blocks, audio))
    info = walk(p)
    block_offset = [c["offset"] for c in info.chunks if c["id"] == "VORBIS_COMMENT"][0]
    assert len(info.problems) == 1
    assert info.problems[0]["offset"] == block_offset + 4 + 12
    assert "declares 500 bytes" in info.problems[0]["message"]
    # libFLAC refuses the broken block; the reader's error names the walker's problem and its offset
    with pytest.raises(AudioReadError) as err:
        open_stream(p)
    assert err.value.offset == block_offset + 4 + 12
    assert "declares 500 bytes" in str(err.value)


# ------------------------------------------------------------------ bounded reads

def test_huge_ixml_is_capped_and_memory_stays_bounded(tmp_path):
    big = b"<BWFXML><NOTE>" + b"x" * (24 * MAX_TEXT_BYTES) + b"</NOTE></BWFXML>"
    data = cb.riff([cb.fmt_pcm(1, RATE, 16), cb.chunk(b"iXML", big), cb.chunk(b"data", cb.pcm16(_codes(10, 1)))])
    p = _write(tmp_path, "huge.wav", data)
    del data, big
    tracemalloc.start()
    info = walk(p)
    _cur, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    # the capped read, its decoded text and the XML parser's copies: a few MiB, not the 24 MiB chunk
    assert peak < 6 * MAX_TEXT_BYTES
    msgs = [pr["message"] for pr in info.problems]
    assert f"iXML chunk is {len(b'<BWFXML><NOTE>') + 24 * MAX_TEXT_BYTES + len(b'</NOTE></BWFXML>')} bytes; " \
           f"only the first {MAX_TEXT_BYTES} were read" in msgs


def test_declared_gigabytes_do_not_allocate(tmp_path):
    # a bext chunk declaring 3 GB in a file of a few hundred bytes
    chunks = [cb.fmt_pcm(1, RATE, 16), cb.chunk(b"data", cb.pcm16(_codes(10, 1)))]
    form = 4 + sum(len(c) for c in chunks) + 8 + 3_000_000_000
    raw = cb.riff(chunks, size=form) + b"bext" + struct.pack("<I", 3_000_000_000) + b"\0" * 100
    p = _write(tmp_path, "liar.wav", raw)
    tracemalloc.start()
    info = walk(p)
    _cur, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 1 << 20
    offset = 12 + 24 + 8 + 20
    assert {"offset": offset, "message": "chunk 'bext' declares 3000000000 bytes; only 100 remain in the file"} \
        in info.problems


def test_metadata_schema_accepts_a_full_result(tmp_path):
    lst = cb.list_info([(b"ISRC", "XXQ7Z2600042")])
    bext = cb.bext_body(**{**BEXT_V2, "time_reference": 172_800_000})  # the iXML timestamp
    data = cb.riff([cb.fmt_pcm(2, RATE, 16), cb.chunk(b"bext", bext),
                    cb.chunk(b"iXML", IXML.encode()), cb.chunk(b"data", cb.pcm16(_codes(4800))), lst])
    result = measure_file(_write(tmp_path, "full.wav", data))
    jsonschema.validate(result["metadata"], METADATA_SCHEMA)
    jsonschema.validate(result, result_schema())  # the published result schema carries the metadata schema
    assert result["metadata"]["problems"] == []


def _cuesheet(tracks):
    """A FLAC CUESHEET block body (FLAC format description, from memory): 128-byte catalog number,
    uint64 lead-in, 1 flag byte + 258 reserved, track count; each track 36 bytes + 12 per index point."""
    body = b"0000000000000".ljust(128, b"\0") + struct.pack(">Q", 0) + b"\0" * 259 + bytes([len(tracks)])
    for number, isrc, offset in tracks:
        body += struct.pack(">Q", offset) + bytes([number]) + isrc.ljust(12, b"\0") + b"\0" * 14 + bytes([1])
        body += struct.pack(">Q", 0) + bytes([1]) + b"\0\0\0"
    return body


def test_flac_cuesheet_track_isrc(tmp_path):
    base = tmp_path / "base.flac"
    sf.write(base, np.zeros((4410, 2), dtype=np.int16), 44100, format="FLAC", subtype="PCM_16")
    blocks, audio = cb.flac_blocks(base.read_bytes())
    blocks = blocks + [(5, _cuesheet([(1, b"XXQ7Z2600042", 0), (170, b"", 4410)]))]
    p = _write(tmp_path, "cue.flac", cb.flac_join(blocks, audio))
    info = walk(p)
    assert info.problems == []
    cue = info.metadata["cuesheet"]
    assert cue["media_catalog_number"] == "0000000000000"
    assert [(t["number"], t["isrc"]) for t in cue["tracks"]] == [(1, "XXQ7Z2600042"), (170, None)]
    assert [(e["source"], e["code"]) for e in info.metadata["isrc"]] == [("cuesheet.track1", "XXQ7Z2600042")]


def test_aiff_id3_chunk(tmp_path):
    codes = _codes(100, 1)
    tag = cb.id3v2([(b"TSRC", "XXQ7Z2600042")], major=4, encoding=3)
    p = _write(tmp_path, "id3.aiff", cb.aiff([cb.comm(1, 100, 16, 48000.0), cb.ssnd(cb.be16(codes)),
                                              cb.chunk(b"ID3 ", tag, endian=">")]))
    info = walk(p)
    assert info.problems == []
    assert [(e["source"], e["code"]) for e in info.metadata["isrc"]] == [("id3.TSRC", "XXQ7Z2600042")]
    _got, sinfo = _read_all(p)
    assert sinfo.frames == 100


def test_flac_behind_an_id3_tag_is_reported(tmp_path):
    base = tmp_path / "base.flac"
    sf.write(base, np.zeros((1000, 1), dtype=np.int16), RATE, format="FLAC", subtype="PCM_16")
    tag = cb.id3v2([(b"TIT2", "Tagged")])
    p = _write(tmp_path, "tagged.flac", tag + base.read_bytes())
    info = walk(p)
    assert info.kind == "flac"
    assert info.problems[0]["offset"] == 0 and "precedes the FLAC stream marker" in info.problems[0]["message"]
    assert info.metadata["id3"]["frames"]["TIT2"] == "Tagged"
    assert info.metadata["streaminfo"]["frames"] == 1000


def test_id3_utf16_and_user_text_frames():
    from masterqc.audio.container import parse_id3

    # ID3v2.3 frame: id, uint32 size, 2 flag bytes; text encoding 1 = UTF-16 with BOM (from memory)
    def frame(fid, data):
        return fid + struct.pack(">I", len(data)) + b"\0\0" + data

    title = b"\x01" + "Tamberlo \u00e9t\u00e9".encode("utf-16")
    user = b"\x00" + b"ISRC\0" + b"XXQ7Z2600042"
    body = frame(b"TIT2", title) + frame(b"TXXX", user) + frame(b"APIC", b"\0" * 20) + b"\0" * 10
    tag = b"ID3\x03\x00\x00" + cb.syncsafe(len(body)) + body
    seen = []
    out = parse_id3(tag, 100, lambda off, msg: seen.append((off, msg)))
    assert seen == []
    assert out["frames"] == {"TIT2": "Tamberlo \u00e9t\u00e9", "TXXX:ISRC": "XXQ7Z2600042"}
    assert out["other_frames"] == ["APIC"]


def test_bw64_is_walked_and_read_as_rf64(tmp_path):
    # BW64 (ITU-R BS.2088) keeps the RF64 layout of EBU Tech 3306 under the magic 'BW64' (from memory)
    codes = _codes(3000)
    base = tmp_path / "base.wav"
    sf.write(base, codes.astype(np.int16), RATE, format="RF64", subtype="PCM_16")
    raw = bytearray(base.read_bytes())
    assert raw[:4] == b"RF64"
    raw[:4] = b"BW64"
    p = _write(tmp_path, "adm.wav", bytes(raw))
    info = walk(p)
    assert info.kind == "bw64" and info.problems == []
    assert info.metadata["audio_data"]["frames"] == 3000
    got, sinfo = _read_all(p)
    assert sinfo.container == "rf64" and sinfo.frames == 3000
    assert np.array_equal(got * 32768, codes)
