"""Property tests: arbitrary bytes, and valid files with random corruptions, never raise out of
the container walker, and the reader raises nothing but AudioReadError.

Every failure must become data: a walker problem ``{"offset", "message"}`` with
an offset inside the file, or an AudioReadError naming the file.  The CLI turns
an unreadable file into one line on stderr and exit code 3.
"""

from __future__ import annotations

import os
import struct
import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import containerbytes as cb
from masterqc.audio.container import ContainerInfo, walk
from masterqc.audio.reader import open_stream
from masterqc.errors import AudioReadError

#: examples per property; raise MASTERQC_FUZZ_EXAMPLES for a deeper run outside the suite
FUZZ = settings(max_examples=int(os.environ.get("MASTERQC_FUZZ_EXAMPLES", "150")), deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _seeds() -> dict[str, bytes]:
    rng = np.random.default_rng(7)
    codes = rng.integers(-3000, 3000, size=(64, 2))
    mono = codes[:, :1]
    bext = cb.chunk(b"bext", cb.bext_body(version=2, description="ISRC XXQ7Z2600042", time_reference=48000,
                                          loudness=(-2300, 500, -100, -1800, -2000),
                                          coding_history=b"A=PCM,F=48000\r\n"))
    ixml = cb.chunk(b"iXML", b"<BWFXML><PROJECT>P</PROJECT><SPEED><TIMECODE_RATE>25</TIMECODE_RATE>"
                             b"</SPEED></BWFXML>")
    seeds = {
        "wav": cb.riff([cb.fmt_pcm(2, 48000, 16), bext, ixml, cb.chunk(b"data", cb.pcm16(codes)),
                        cb.list_info([(b"INAM", "T"), (b"ISRC", "XXQ7Z2600042")]),
                        cb.chunk(b"id3 ", cb.id3v2([(b"TSRC", "XXQ7Z2600042")]))]),
        "wavex": cb.riff([cb.fmt_extensible(2, 48000, 24, 0x3), cb.chunk(b"data", cb.pcm24(codes))]),
        "aiff": cb.aiff([cb.comm(1, 64, 16, 44100.0), cb.chunk(b"NAME", b"N", endian=">"),
                         cb.ssnd(cb.be16(mono))]),
        "aifc": cb.aiff([cb.comm(1, 64, 16, 48000.0, compression=b"NONE", name=b"none"),
                         cb.ssnd(cb.be16(mono))], form=b"AIFC"),
    }
    audio = cb.pcm16(codes)
    fmt = cb.fmt_pcm(2, 48000, 16)
    data_chunk = b"data" + struct.pack("<I", 0xFFFFFFFF) + audio
    ds64 = cb.chunk(b"ds64", cb.ds64_body(4 + 36 + len(fmt) + len(data_chunk), len(audio), 64))
    seeds["rf64"] = b"RF64" + struct.pack("<I", 0xFFFFFFFF) + b"WAVE" + ds64 + fmt + data_chunk
    seeds["bw64"] = b"BW64" + seeds["rf64"][4:]  # ITU-R BS.2088: the RF64 layout under another magic
    return seeds


SEEDS = _seeds()


@pytest.fixture(scope="module")
def flac_seed(tmp_path_factory):
    p = tmp_path_factory.mktemp("seed") / "s.flac"
    sf.write(p, np.zeros((256, 1), dtype=np.int16), 48000, format="FLAC", subtype="PCM_16")
    blocks, audio = cb.flac_blocks(p.read_bytes())
    blocks = [b for b in blocks if b[0] != 4] + [(4, cb.vorbis_comment("v", ["ISRC=XXQ7Z2600042"]))]
    return cb.flac_join(blocks, audio)


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


def _check(path, size):
    info = walk(path)
    assert isinstance(info, ContainerInfo)
    for p in info.problems:
        assert set(p) == {"offset", "message"}
        assert isinstance(p["offset"], int) and 0 <= p["offset"] <= max(size, 0)
        assert isinstance(p["message"], str) and p["message"]
    for c in info.chunks:
        assert 0 <= c["offset"] < size
    try:
        stream = open_stream(path)
    except AudioReadError as exc:
        assert str(path) in str(exc)
        return info
    with stream:
        n = 0
        try:
            for block in stream.blocks(4096):
                assert block.ndim == 2 and block.shape[1] == stream.info.channels
                n += block.shape[0]
                if n > 10_000_000:  # a corrupted header may claim a vast length; the file is tiny
                    break
        except AudioReadError as exc:
            assert str(path) in str(exc)
    return info


def _write(workdir, name, data):
    p = workdir / name
    p.write_bytes(data)
    return p


@FUZZ
@given(st.binary(max_size=3000))
def test_arbitrary_bytes(workdir, data):
    _check(_write(workdir, "any.bin", data), len(data))


MAGICS = [b"RIFF", b"RF64", b"BW64", b"RIFX", b"FORM"]
FORMS = [b"WAVE", b"AIFF", b"AIFC"]


@FUZZ
@given(st.sampled_from(MAGICS), st.integers(0, 2**32 - 1), st.sampled_from(FORMS),
       st.lists(st.tuples(st.sampled_from([b"fmt ", b"data", b"bext", b"iXML", b"LIST", b"ds64", b"id3 ",
                                           b"fact", b"COMM", b"SSND", b"ANNO", b"COMT", b"cue "]),
                          st.one_of(st.integers(0, 2**32 - 1), st.integers(0, 700)),
                          st.binary(max_size=700)), max_size=6))
def test_random_chunk_soup(workdir, magic, size, form, chunks):
    endian = ">" if magic in (b"FORM", b"RIFX") else "<"
    body = b"".join(cid + struct.pack(endian + "I", n) + payload for cid, n, payload in chunks)
    data = magic + struct.pack(endian + "I", size) + form + body
    _check(_write(workdir, "soup.wav", data), len(data))


def _mutate(seed: bytes, edits, cut):
    b = bytearray(seed)
    for kind, pos, value in edits:
        pos %= max(len(b), 1)
        if kind == "flip":
            b[pos] ^= value & 0xFF or 1
        elif kind == "size32":  # overwrite 4 bytes with a random 32-bit number (hits size fields often)
            b[pos:pos + 4] = struct.pack("<I", value)
        elif kind == "insert":
            b[pos:pos] = bytes([value & 0xFF]) * (1 + value % 7)
        elif kind == "delete":
            del b[pos:pos + 1 + value % 9]
    if cut is not None:
        b = b[:cut % (len(b) + 1)]
    return bytes(b)


EDITS = st.lists(st.tuples(st.sampled_from(["flip", "size32", "insert", "delete"]),
                           st.integers(0, 10**6), st.integers(0, 2**32 - 1)), min_size=1, max_size=5)


@FUZZ
@given(st.sampled_from(sorted(SEEDS)), EDITS, st.one_of(st.none(), st.integers(0, 10**6)))
def test_corrupted_valid_files(workdir, name, edits, cut):
    data = _mutate(SEEDS[name], edits, cut)
    _check(_write(workdir, f"bad.{name}", data), len(data))


@FUZZ
@given(EDITS, st.one_of(st.none(), st.integers(0, 10**6)))
def test_corrupted_flac(workdir, flac_seed, edits, cut):
    data = _mutate(flac_seed, edits, cut)
    _check(_write(workdir, "bad.flac", data), len(data))


@pytest.mark.parametrize("name", sorted(SEEDS))
def test_seeds_are_clean(workdir, name):
    # the uncorrupted seeds read without a single problem, so the properties above test corruption
    info = _check(_write(workdir, f"ok.{name}", SEEDS[name]), len(SEEDS[name]))
    assert info.problems == []
    with open_stream(workdir / f"ok.{name}") as s:
        assert s.info.frames == 64


def test_cli_unreadable_file_one_line_exit_3(tmp_path):
    p = tmp_path / "broken.wav"
    p.write_bytes(cb.riff([cb.chunk(b"data", b"\0" * 100), cb.fmt_pcm(1, 48000, 16)])[:60])
    proc = subprocess.run([sys.executable, "-m", "masterqc", "measure", str(p), "--quiet"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 3
    lines = [x for x in proc.stderr.splitlines() if x.strip()]
    assert len(lines) == 1
    assert str(p) in lines[0] and "(at byte " in lines[0]
    assert "Traceback" not in proc.stderr


@pytest.mark.parametrize("rate", [1, 7, 4000, 768000])
def test_unmeasurable_sample_rate_is_a_read_error(tmp_path, rate):
    # such files open in libsndfile, but no loudness filter exists for them: an unreadable file
    # (exit 3 in the CLI), never an exception from deep inside an analyzer
    from masterqc.measure import measure_file

    p = tmp_path / f"r{rate}.wav"
    p.write_bytes(cb.riff([cb.fmt_pcm(1, rate, 16), cb.chunk(b"data", b"\0" * 200)]))
    with pytest.raises(AudioReadError, match=f"sample rate {rate} Hz is outside"):
        measure_file(p)


@settings(max_examples=int(os.environ.get("MASTERQC_FUZZ_EXAMPLES", "60")), deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(sorted(SEEDS)), EDITS, st.one_of(st.none(), st.integers(0, 10**6)))
def test_corrupted_files_through_the_whole_measurement(workdir, name, edits, cut):
    # readable-but-odd files (a flipped rate, channel count or size) reach every analyzer:
    # the measurement either completes or stops with AudioReadError
    from masterqc.measure import measure_file

    p = _write(workdir, f"m.{name}", _mutate(SEEDS[name], edits, cut))
    try:
        result = measure_file(p)
    except AudioReadError as exc:
        assert str(p) in str(exc)
    else:
        assert result["format"]["frames"] >= 1
        assert isinstance(result["metadata"]["problems"], list)
