"""A generated corpus of malformed masters, hostile names and hostile specs (test data, invented).

:func:`build` writes, into one folder, short valid masters of every container
``measure`` reads (WAV, WAVE_FORMAT_EXTENSIBLE, RF64, BW64, Wave64, AIFF, AIFF-C,
FLAC, CAF) and, from each, deterministic corruptions: truncations, header byte
flips, impossible chunk sizes, 65535 and 0 channels, rates of 0 and 2**32-1,
duplicated chunks, broken FLAC metadata; then valid masters under hostile names
and a few special files.  Every corruption is derived from a seed, so a failure
names a file that can be made again.
"""

from __future__ import annotations

import io
import os
import struct
import sys

import numpy as np
import soundfile as sf

SEED = 20261204
RATE_HZ = 48000
FRAMES = 2400  # 50 ms: enough for every analyzer to run, short enough for hundreds of files

#: (name, soundfile format, subtype, channels)
BASES = [
    ("pcm16", "WAV", "PCM_16", 2), ("pcm24", "WAV", "PCM_24", 2), ("float32", "WAV", "FLOAT", 1),
    ("wavex6", "WAVEX", "PCM_24", 6), ("rf64", "RF64", "PCM_24", 2), ("bw64", "RF64", "PCM_16", 2),
    ("w64", "W64", "PCM_24", 2), ("aiff", "AIFF", "PCM_24", 2), ("aifc", "AIFF", "FLOAT", 2),
    ("flac", "FLAC", "PCM_24", 2), ("caf", "CAF", "PCM_24", 2),
]
EXT = {"WAV": ".wav", "WAVEX": ".wav", "RF64": ".rf64", "W64": ".w64", "AIFF": ".aiff", "FLAC": ".flac",
       "CAF": ".caf"}

#: chunk ids whose 4-byte size field follows them (RIFF little-endian, AIFF big-endian)
RIFF_IDS = [b"fmt ", b"data", b"ds64", b"fact"]
AIFF_IDS = [b"COMM", b"SSND", b"FVER"]


def _base_bytes(fmt: str, subtype: str, channels: int, seed: int) -> bytes:
    rng = np.random.default_rng(seed)
    t = np.arange(FRAMES) / RATE_HZ
    x = 0.3 * np.sin(2 * np.pi * 997.0 * t)[:, None] + 0.01 * rng.standard_normal((FRAMES, channels))
    buf = io.BytesIO()
    sf.write(buf, x, RATE_HZ, subtype=subtype, format=fmt)
    return buf.getvalue()


def _patch(raw: bytes, offset: int, value: bytes) -> bytes:
    if offset < 0 or offset + len(value) > len(raw):
        return raw
    return raw[:offset] + value + raw[offset + len(value):]


def _mutations(name: str, raw: bytes, rng) -> list[tuple[str, bytes]]:
    out = []
    n = len(raw)
    # truncations: inside the magic, inside the first chunk header, at chunk boundaries, inside the audio
    for cut in sorted({0, 4, 11, 12, 20, 36, n // 4, n // 2, n - n // 10, n - 1}):
        if 0 <= cut < n:
            out.append((f"trunc{cut}", raw[:cut]))
    # header byte flips: one to three random bytes among the first 80
    for k in range(6):
        b = bytearray(raw)
        for _ in range(1 + k % 3):
            i = int(rng.integers(0, min(80, n)))
            b[i] ^= int(rng.integers(1, 256))
        out.append((f"flip{k}", bytes(b)))
    # impossible and wrong chunk sizes
    little = raw[:4] in (b"RIFF", b"RF64", b"BW64")
    ids = RIFF_IDS if little else AIFF_IDS
    for cid in ids:
        at = raw.find(cid)
        if at < 0:
            continue
        for label, size in (("max", 0xFFFFFFFF), ("zero", 0), ("huge", 0x7FFFFFF0)):
            out.append((f"size_{cid.decode().strip()}_{label}",
                        _patch(raw, at + 4, struct.pack("<I" if little else ">I", size))))
    if raw[:4] in (b"RIFF", b"FORM", b"RF64", b"BW64"):
        out.append(("form_size_max", _patch(raw, 4, b"\xff\xff\xff\xff")))
        out.append(("form_size_small", _patch(raw, 4, struct.pack("<I" if little else ">I", 12))))
    # channels 65535 and 0, rates 0 and 2**32-1 where the header holds them plainly
    fmt_at = raw.find(b"fmt ")
    if little and fmt_at >= 0:
        body = fmt_at + 8
        out += [("ch65535", _patch(raw, body + 2, struct.pack("<H", 65535))),
                ("ch0", _patch(raw, body + 2, struct.pack("<H", 0))),
                ("rate0", _patch(raw, body + 4, struct.pack("<I", 0))),
                ("ratemax", _patch(raw, body + 4, struct.pack("<I", 0xFFFFFFFF))),
                ("align0", _patch(raw, body + 12, struct.pack("<H", 0))),
                ("bits0", _patch(raw, body + 14, struct.pack("<H", 0)))]
        # duplicate chunks: the fmt chunk again at the end, and the first 8 bytes of data again
        fmt_size = struct.unpack_from("<I", raw, fmt_at + 4)[0]
        out.append(("dup_fmt", raw + raw[fmt_at:fmt_at + 8 + min(fmt_size, 64)]))
        data_at = raw.find(b"data")
        if data_at >= 0:
            out.append(("dup_data_hdr", raw + raw[data_at:data_at + 8] + b"\x00" * 16))
    comm_at = raw.find(b"COMM")
    if raw[:4] == b"FORM" and comm_at >= 0:
        body = comm_at + 8
        out += [("ch65535", _patch(raw, body, b"\xff\xff")), ("ch0", _patch(raw, body, b"\x00\x00")),
                ("rate0", _patch(raw, body + 8, b"\x00" * 10)),
                ("ratemax", _patch(raw, body + 8, b"\x7f\xff" + b"\xff" * 8)),
                ("dup_comm", raw + raw[comm_at:comm_at + 8 + 18])]
    if raw[:4] == b"fLaC":
        # STREAMINFO: 4-byte block header at 4, then rate (20 bits) / channels (3) / bits (5) at byte 18
        out += [("si_len_max", _patch(raw, 5, b"\xff\xff\xff")),
                ("si_len_zero", _patch(raw, 5, b"\x00\x00\x00")),
                ("rate0", _patch(raw, 18, b"\x00\x00\x02")),
                ("ratemax", _patch(raw, 18, b"\xff\xff\xf2")),
                ("last_flag_off", _patch(raw, 4, bytes([raw[4] & 0x7F]))),
                ("block_type_127", _patch(raw, 4, bytes([(raw[4] & 0x80) | 0x7F]))),
                ("dup_streaminfo", raw[:4] + bytes([raw[4] & 0x7F]) + raw[5:42] + raw[4:])]
    if raw[:4] == b"caff":
        desc = raw.find(b"desc")
        if desc >= 0:
            out += [("desc_size_max", _patch(raw, desc + 4, b"\xff" * 8)),
                    ("rate0", _patch(raw, desc + 12, b"\x00" * 8)),
                    ("ch0", _patch(raw, desc + 12 + 24, b"\x00" * 4)),
                    ("ch65535", _patch(raw, desc + 12 + 24, struct.pack(">I", 65535)))]
    # garbage in the middle and after the end
    mid = bytearray(raw)
    mid[n // 3:n // 3 + 64] = bytes(rng.integers(0, 256, size=min(64, n - n // 3), dtype=np.uint8))
    out.append(("garbage_mid", bytes(mid)))
    out.append(("garbage_tail", raw + bytes(rng.integers(0, 256, size=333, dtype=np.uint8))))
    return out


#: valid masters under names other people chose (bytes: POSIX names are byte strings)
HOSTILE_NAMES = [
    b"caf\xe9.wav", b"\xff\xfe.wav", b"new\nline.wav", b"tab\there.wav", b"cr\rhere.wav",
    b"\x1b]0;title\x07.wav", b"\x1b[2Jclear.wav", b"-rf.wav", b"--spec.wav", b" leading space.wav",
    b"trailing space .wav", b"quote\"s.wav", b"apos'trophe.wav", b"<script>alert(1)<script>.wav",
    b"&amp;.wav", b"back\\slash.wav", b"percent%s%n.wav", b"\xe2\x80\xaeevil.wav.txt.wav",
    b"\xe3\x83\x86\xe3\x82\xb9\xe3\x83\x88.wav", b"emoji\xf0\x9f\x8e\xb5.wav", b"CON.wav", b"nul.wav",
    b"a" * 240 + b".wav", b"dots...wav", b"UPPER.WAV", b"x.wav.partial.wav", b"]]>cdata.wav",
    b"{{ jinja }}.wav", b"${HOME}.wav", b"$(id).wav",
]


def build(root) -> dict:
    """Write the corpus under ``root``; returns ``{"audio": [paths], "special": [paths], "names": [paths]}``."""
    root = os.fsencode(root)
    rng = np.random.default_rng(SEED)
    audio, names, special = [], [], []
    os.makedirs(os.path.join(root, b"corrupt"), exist_ok=True)
    for i, (name, fmt, subtype, ch) in enumerate(BASES):
        raw = _base_bytes(fmt, subtype, ch, SEED + i)
        if name == "bw64":
            raw = b"BW64" + raw[4:]
        ext = EXT[fmt].encode()
        folder = os.path.join(root, b"corrupt", name.encode())
        os.makedirs(folder, exist_ok=True)
        variants = [("valid", raw)] + _mutations(name, raw, rng)
        for label, data in variants:
            p = os.path.join(folder, label.encode() + ext)
            with open(p, "wb") as f:
                f.write(data)
            audio.append(p)
    good = _base_bytes("WAV", "PCM_24", 2, SEED)
    nfolder = os.path.join(root, b"names", b"odd\nfolder \x1b[1m")
    os.makedirs(nfolder, exist_ok=True)
    for n in HOSTILE_NAMES:
        p = os.path.join(nfolder, n)
        with open(p, "wb") as f:
            f.write(good)
        names.append(p)
    deep = os.path.join(root, b"names", *([b"d" * 200] * 6))
    os.makedirs(deep, exist_ok=True)
    p = os.path.join(deep, b"long-path.wav")
    with open(p, "wb") as f:
        f.write(good)
    names.append(p)
    sp = os.path.join(root, b"special")
    os.makedirs(sp, exist_ok=True)
    for n, data in ((b"empty.wav", b""), (b"text.wav", b"not audio at all\n")):
        with open(os.path.join(sp, n), "wb") as f:
            f.write(data)
        audio.append(os.path.join(sp, n))
    if sys.platform == "linux":
        os.mkfifo(os.path.join(sp, b"pipe.wav"))
        os.symlink(b"/dev/zero", os.path.join(sp, b"zero.wav"))
        special += [os.path.join(sp, b"pipe.wav"), os.path.join(sp, b"zero.wav")]
    return {"audio": audio, "names": names, "special": special}


GOOD_SPEC = """\
spec_version: 1
name: Invented fuzz spec
format:
  sample_rates_hz: [48000]
  channel_counts: [2]
loudness:
  integrated: {target_lufs: -23.0, tolerance_lu: 1.0}
peaks:
  true_peak: {max_dbtp: -1.0, warn_margin_db: 0.3}
integrity:
  clipped_runs: {max_count: 0}
"""


def hostile_specs(n_random: int = 40) -> list[tuple[str, bytes]]:
    """``(label, bytes)`` of hostile spec files: known attacks, then seeded random byte damage of a good spec."""
    rng = np.random.default_rng(SEED + 1)
    good = GOOD_SPEC.encode()
    out = [
        ("nul", good + b"description: a\x00b\n"), ("bell", good + b"description: \x07\n"),
        ("escape", good + b"description: \x1b[2J\n"), ("latin1", good + b"description: caf\xe9\n"),
        ("deep_flow", good + b"x: " + b"[" * 2000 + b"]" * 2000 + b"\n"),
        ("deep_map", good + b"x: " + b"{a: " * 500 + b"1" + b"}" * 500 + b"\n"),
        ("deep_dash", good + b"x:\n" + b"- " * 800 + b"1\n"),
        ("huge_int", good + b"description: " + b"9" * 5000 + b"\n"),
        ("huge_key", good + b"k" * 100000 + b": 1\n"),
        ("alias_bomb", b"a: &a [x, x, x, x, x, x, x, x, x]\nb: &b [*a, *a, *a, *a, *a, *a, *a, *a, *a]\n"
                       b"c: &c [*b, *b, *b, *b, *b, *b, *b, *b, *b]\nd: &d [*c, *c, *c, *c, *c, *c, *c, *c, *c]\n"
                       b"e: &e [*d, *d, *d, *d, *d, *d, *d, *d, *d]\nf: [*e, *e, *e, *e, *e, *e, *e, *e, *e]\n"),
        ("python_tag", good + b"x: !!python/object/apply:os.system [echo hi]\n"),
        ("abs_extends", good + b"extends: /etc/passwd\n"),
        ("dotdot_extends", good + b"extends: ../../../../etc/passwd\n"),
        ("quoted_version", good.replace(b"spec_version: 1", b'spec_version: "1"')),
        ("list_doc", b"- 1\n- 2\n"), ("scalar_doc", b"just text\n"), ("empty", b""),
        ("two_docs", good + b"---\n" + good), ("tabs", good.replace(b"  ", b"\t")),
        ("bom_only", b"\xef\xbb\xbf"), ("utf16", GOOD_SPEC.encode("utf-16")),
        ("positive_lufs", good.replace(b"-23.0", b"23.0")), ("negative_duration",
                                                             good + b"duration:\n  total: {min_s: -5, max_s: -1}\n"),
        ("zero_channels", good.replace(b"channel_counts: [2]", b"channel_counts: [0]")),
        ("empty_label", good + b"  channel_layouts: [[L, '']]\n"),
    ]
    for k in range(n_random):
        b = bytearray(good)
        for _ in range(1 + k % 4):
            i = int(rng.integers(0, len(b)))
            b[i] = int(rng.integers(0, 256))
        out.append((f"random{k:02d}", bytes(b)))
    return out
