"""Container walker: chunk structure and metadata of RIFF/RF64, AIFF/AIFF-C and FLAC.

This module reads container bytes itself so that masterqc can report what
libsndfile does not expose: the WAVE_FORMAT_EXTENSIBLE channel mask, bext,
iXML, LIST/INFO, id3, AIFF text chunks, FLAC Vorbis comments and cue sheets,
and every structural fault with its byte offset.

Rules the walker keeps:

* No length field is trusted: every read is bounded by the end of the file
  and of the enclosing form, and by a per-chunk cap (:data:`MAX_TEXT_BYTES`
  for text-like chunks, :data:`MAX_FORMAT_BYTES` for format chunks), so a chunk
  declaring gigabytes never allocates more than the cap.  When a cap cuts a
  read short, a problem says so.
* :func:`walk` never raises for malformed content: every fault becomes an
  entry ``{"offset": int, "message": str}`` of ``ContainerInfo.problems``.
  The audio is still read by libsndfile when only metadata is broken.

Layouts: RIFF WAVE chunks and ``fmt `` / WAVE_FORMAT_EXTENSIBLE (Microsoft
RIFF and WAVEFORMATEXTENSIBLE definitions); RF64 ``ds64`` (EBU Tech 3306,
the same layout as BW64 in ITU-R BS.2088); ``bext`` (EBU Tech 3285, see
:mod:`masterqc.audio.bext`); iXML (an XML document in an ``iXML`` chunk);
``LIST``/``INFO`` (Microsoft RIFF); ID3v2.2-2.4 tags in ``id3 ``/``ID3 ``
chunks; AIFF and AIFF-C (Apple AIFF 1.3 and AIFF-C drafts: COMM, SSND, NAME,
AUTH, ANNO, ``(c) ``, COMT); FLAC metadata blocks (STREAMINFO, VORBIS_COMMENT,
CUESHEET, PICTURE; the FLAC format description).
"""

from __future__ import annotations

import math
import os
import struct
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field

from masterqc.audio import bext as _bext
from masterqc.audio import isrc as _isrc
from masterqc import timecode as _tc

#: most bytes read from one text-like chunk (bext coding history, iXML, INFO, id3, Vorbis comments, AIFF text)
MAX_TEXT_BYTES = 1 << 20
#: most bytes read from a format chunk (fmt, ds64, COMM, STREAMINFO)
MAX_FORMAT_BYTES = 4096
#: the walk stops after this many chunks (a file of millions of tiny chunks is not a master)
MAX_CHUNKS = 20000
#: most entries kept from one list-like structure (INFO tags, id3 frames, Vorbis comments, iXML fields)
MAX_ENTRIES = 1000

WAVE_FORMAT_PCM = 0x0001
WAVE_FORMAT_IEEE_FLOAT = 0x0003
WAVE_FORMAT_EXTENSIBLE = 0xFFFE
FORMAT_NAMES = {0x0001: "pcm", 0x0003: "ieee_float", 0x0006: "alaw", 0x0007: "mulaw",
                0x0011: "ima_adpcm", 0x0055: "mpeg_layer3", 0xFFFE: "extensible"}
#: bytes 2..15 of every KSDATAFORMAT_SUBTYPE_* GUID built from a format code
KSDATAFORMAT_TAIL = bytes.fromhex("000000001000800000aa00389b71")

FLAC_BLOCK_NAMES = {0: "STREAMINFO", 1: "PADDING", 2: "APPLICATION", 3: "SEEKTABLE",
                    4: "VORBIS_COMMENT", 5: "CUESHEET", 6: "PICTURE"}

#: LIST/INFO tags (Microsoft RIFF).  'ISRC' there is defined as "source"; using it
#: for the recording code is a widespread convention, not the definition.
INFO_TAGS = {"INAM": "title", "IART": "artist", "ICMT": "comment", "ICOP": "copyright",
             "ICRD": "creation date", "IGNR": "genre", "ISFT": "software", "IENG": "engineer",
             "ITCH": "technician", "IPRD": "product", "ISRC": "source (ISRC by convention)",
             "ITRK": "track", "IKEY": "keywords", "ISBJ": "subject", "ISRF": "source form"}


@dataclass
class ContainerInfo:
    """What the container walker found.

    ``kind``: "riff", "rf64", "bw64", "rifx", "aiff", "aifc", "flac", "caf", "w64" (the last two
    recognised but not walked) or None when unrecognised.
    ``chunks``: list of dicts ``{"id", "offset", "size"}`` in file order (FLAC:
    metadata blocks by name); ``size`` is the declared body size.
    ``channel_mask``: dwChannelMask of WAVE_FORMAT_EXTENSIBLE (or the FLAC
    WAVEFORMATEXTENSIBLE_CHANNEL_MASK comment), or None.
    ``metadata``: parsed metadata, see :data:`METADATA_SCHEMA`.
    ``problems``: list of dicts ``{"offset": int, "message": str}``.
    """

    kind: str | None = None
    chunks: list = field(default_factory=list)
    channel_mask: int | None = None
    metadata: dict = field(default_factory=dict)
    problems: list = field(default_factory=list)


def _empty_metadata() -> dict:
    return {"bext": None, "ixml": None, "info": None, "id3": None, "vorbis_comments": None,
            "text_chunks": None, "cuesheet": None, "isrc": [],
            "time_reference_samples": None, "time_reference_source": None,
            "declared_timecode_fps": None, "audio_data": None}


def walk(path) -> ContainerInfo:
    """Walk the container of ``path`` and return a :class:`ContainerInfo`.

    Recognises RIFF/RF64/BW64/RIFX WAVE, AIFF/AIFF-C and FLAC (also behind a
    leading ID3v2 tag).  Never raises for malformed content or an unreadable
    file: the cause becomes a problem with its byte offset.
    """
    info = ContainerInfo(metadata=_empty_metadata())
    try:
        from masterqc.fileio import open_regular_file
        with open_regular_file(path) as f:  # never blocks on a FIFO or device: those are refused
            size = os.fstat(f.fileno()).st_size
            w = _Walker(f, size, info)
            head = w.read(0, 12)
            if head[:4] in (b"RIFF", b"RF64", b"BW64", b"RIFX") and head[8:12] == b"WAVE":
                w.riff(head)
            elif head[:4] == b"FORM" and head[8:12] in (b"AIFF", b"AIFC"):
                w.aiff(head)
            elif head[:4] == b"fLaC" or head[:3] == b"ID3":
                w.flac()
            elif head[:4] == b"caff" or w.read(0, 16) == bytes.fromhex("726966662e91cf11a5d628db04c10000"):
                # Apple CAF and Sony Wave64: read by libsndfile; their chunks are not walked here
                info.kind = "caf" if head[:4] == b"caff" else "w64"
            else:
                info.problems.append({"offset": 0, "message": "no RIFF/RF64 WAVE, AIFF or FLAC header "
                                      f"(first bytes {head[:12]!r}, file is {size} bytes)"})
            w.finish()
            # an offset names a byte of the file: a fault found past the end is reported at the end
            for p in info.problems:
                p["offset"] = max(0, min(int(p["offset"]), size))
    except OSError as exc:
        info.problems.append({"offset": 0, "message": f"cannot read container ({exc.strerror or exc})"})
    except Exception as exc:  # the walker must not take the measurement down with it
        info.problems.append({"offset": 0, "message": f"container walk stopped early ({type(exc).__name__}: {exc})"})
    return info


def _is_chunk_id(raw: bytes) -> bool:
    """Four printable ASCII characters (space allowed, as in 'fmt ' and '(c) ')."""
    return len(raw) == 4 and all(0x20 <= b <= 0x7E for b in raw)


def _popcount(x: int) -> int:
    return bin(x).count("1")


def _decode_ext80(raw: bytes) -> float | None:
    """An 80-bit IEEE 754 extended float (AIFF sample rate), big-endian; None when not finite."""
    if len(raw) < 10:
        return None
    se = int.from_bytes(raw[:2], "big")
    mant = int.from_bytes(raw[2:10], "big")
    sign = -1.0 if se & 0x8000 else 1.0
    exp = se & 0x7FFF
    if exp == 0x7FFF:
        return None
    if mant == 0:
        return 0.0
    if exp - 16383 - 63 > 1000:
        return None
    return sign * math.ldexp(mant, exp - 16383 - 63)


class _Walker:
    def __init__(self, f, size: int, info: ContainerInfo):
        self.f = f
        self.size = size
        self.info = info
        self.meta = info.metadata
        self.fmt = None          # parsed fmt / COMM / STREAMINFO facts
        self.fmt_offset = None
        self.seen: dict[str, int] = {}
        self.ds64 = None
        self.ixml_offset = None
        self.endian = "<"
        self.form_cut_bytes = 0  #: bytes the RIFF/FORM header declares beyond the end of the file

    # -- helpers -------------------------------------------------------------
    def read(self, offset: int, n: int) -> bytes:
        """At most ``n`` bytes at ``offset``, never past the end of the file."""
        if offset < 0 or offset >= self.size or n <= 0:
            return b""
        n = min(n, self.size - offset)
        self.f.seek(offset)
        return self.f.read(n)

    def problem(self, offset: int, message: str) -> None:
        self.info.problems.append({"offset": int(offset), "message": message})

    def capped(self, offset: int, size: int, cap: int, what: str) -> bytes:
        """Read a chunk body bounded by ``cap``; say so when the cap cuts it."""
        raw = self.read(offset, min(size, cap))
        if size > cap:
            self.problem(offset - 8, f"{what} is {size} bytes; only the first {cap} were read")
        return raw

    # -- chunk loop shared by RIFF and AIFF ----------------------------------
    def chunk_loop(self, start: int, form_end: int, endian: str, handlers: dict, form: str) -> None:
        pos = start
        while pos < form_end:
            if len(self.info.chunks) >= MAX_CHUNKS:
                self.problem(pos, f"more than {MAX_CHUNKS} chunks; the rest of the file was not walked")
                return
            remaining = form_end - pos
            if remaining < 8:
                self.problem(pos, f"{remaining} stray bytes at the end of the {form} form, "
                                  "too few for a chunk header")
                return
            hdr = self.read(pos, 8)
            cid_raw = hdr[:4]
            if not _is_chunk_id(cid_raw):
                self.problem(pos, f"bytes {cid_raw!r} are not a chunk id; the remaining {remaining} bytes "
                                  "were not walked")
                return
            cid = cid_raw.decode("ascii")
            (declared,) = struct.unpack(endian + "I", hdr[4:8])
            if declared == 0xFFFFFFFF and self.info.kind in ("rf64", "bw64"):
                declared = self.rf64_size(cid, pos, remaining)
            body = pos + 8
            avail = form_end - body
            size = declared
            truncated = declared > avail
            if truncated:
                self.problem(pos, f"chunk '{cid}' declares {declared} bytes; only {avail} remain in the file")
                size = avail
            self.info.chunks.append({"id": cid, "offset": pos, "size": declared})
            handler = handlers.get(cid)
            if handler is not None:
                try:
                    handler(cid, pos, body, size)
                except (struct.error, ValueError, IndexError, UnicodeError, OverflowError) as exc:
                    self.problem(pos, f"chunk '{cid}' could not be parsed ({exc})")
            nxt = body + size
            if size & 1 and not truncated:
                if nxt >= form_end:
                    self.problem(pos, f"chunk '{cid}' has an odd size ({size}) and no pad byte "
                                      f"before the end of the {form} form")
                elif _is_chunk_id(self.read(nxt, 4)) and not _is_chunk_id(self.read(nxt + 1, 4)):
                    self.problem(pos, f"chunk '{cid}' has an odd size ({size}) and no pad byte; "
                                      f"the next chunk starts at byte {nxt}")
                else:
                    nxt += 1
            pos = nxt

    def rf64_size(self, cid: str, pos: int, remaining: int) -> int:
        """Size of an RF64 chunk whose 32-bit size is 0xFFFFFFFF, from the ds64 chunk."""
        if self.ds64 is not None:
            if cid == "data":
                return self.ds64["data_size_bytes"]
            if cid in self.ds64["table"]:
                return self.ds64["table"][cid]
        self.problem(pos, f"chunk '{cid}' declares 0xFFFFFFFF bytes and the ds64 chunk gives no size "
                          "for it; assuming it runs to the end of the file")
        return max(remaining - 8, 0)

    # -- RIFF / RF64 ---------------------------------------------------------
    def riff(self, head: bytes) -> None:
        magic = head[:4].decode("ascii")
        self.info.kind = {"RIFF": "riff", "RF64": "rf64", "BW64": "bw64", "RIFX": "rifx"}[magic]
        endian = ">" if magic == "RIFX" else "<"
        self.endian = endian
        (declared,) = struct.unpack(endian + "I", head[4:8])
        start = 12
        form_end = 8 + declared
        if self.info.kind in ("rf64", "bw64"):
            hdr = self.read(12, 8)
            if hdr[:4] == b"ds64":
                (ds_size,) = struct.unpack("<I", hdr[4:8])
                self.info.chunks.append({"id": "ds64", "offset": 12, "size": ds_size})
                if ds_size > self.size - 20:
                    self.problem(12, f"chunk 'ds64' declares {ds_size} bytes; only {max(self.size - 20, 0)} "
                                     "remain in the file")
                self.parse_ds64(12, 20, min(ds_size, max(self.size - 20, 0)))
                start = 20 + ds_size + (ds_size & 1)
                form_end = 8 + self.ds64["riff_size_bytes"] if self.ds64 else self.size
            else:
                self.problem(12, f"{magic} file has no ds64 chunk in first position (EBU Tech 3306); "
                                 "chunk sizes of 0xFFFFFFFF cannot be resolved")
                form_end = self.size
            if declared != 0xFFFFFFFF:
                self.problem(4, f"{magic} header size is {declared}, expected 0xFFFFFFFF (size lives in ds64)")
        if form_end > self.size:
            self.problem(4, f"{magic} header declares {form_end - 8} bytes after the size field; the file "
                            f"holds {self.size - 8} (truncated by {form_end - self.size} bytes)")
            self.form_cut_bytes = form_end - self.size
            form_end = self.size
        elif form_end < self.size:
            extra = self.size - form_end
            if not (extra == 1 and declared & 1):
                self.problem(form_end, f"{extra} bytes after the end of the {magic} form are not part of it")
        handlers = {"fmt ": self.riff_fmt, "data": self.riff_data, "fact": self.riff_fact,
                    "bext": self.riff_bext, "iXML": self.riff_ixml, "LIST": self.riff_list,
                    "id3 ": self.id3_chunk, "ID3 ": self.id3_chunk, "ds64": self.misplaced_ds64,
                    "cue ": self.riff_cue}
        self.chunk_loop(start, form_end, endian, handlers, magic)
        if self.fmt:
            self.missing_audio(self.fmt.get("block_align") or 0, self.fmt.get("sample_rate_hz"),
                               unknown_size=0xFFFFFFFF if self.info.kind == "riff" else None)
        if "fmt " not in self.seen:
            self.problem(12, "no fmt chunk: the audio format is not declared")
        if "data" not in self.seen:
            self.problem(12, "no data chunk: the file holds no audio")
        self.check_data_frames()

    def parse_ds64(self, offset: int, body: int, size: int) -> None:
        raw = self.read(body, min(size, MAX_FORMAT_BYTES))
        if len(raw) < 28:
            self.problem(offset, f"ds64 chunk is {len(raw)} bytes; needs at least 28 (EBU Tech 3306)")
            return
        riff_size, data_size, sample_count, table_len = struct.unpack_from("<QQQI", raw, 0)
        table = {}
        room = (len(raw) - 28) // 12
        if table_len > room:
            self.problem(offset, f"ds64 table declares {table_len} entries; room for {room}")
        for i in range(min(table_len, room, MAX_ENTRIES)):
            cid_raw, csize = struct.unpack_from("<4sQ", raw, 28 + 12 * i)
            if _is_chunk_id(cid_raw):
                table[cid_raw.decode("ascii")] = csize
        self.ds64 = {"riff_size_bytes": riff_size, "data_size_bytes": data_size,
                     "sample_count": sample_count, "table": table}
        self.meta["ds64"] = {"riff_size_bytes": riff_size, "data_size_bytes": data_size,
                             "sample_count": sample_count, "table": dict(table)}

    def misplaced_ds64(self, cid, pos, body, size):
        self.problem(pos, "ds64 chunk outside the first position after the header"
                     if self.info.kind in ("rf64", "bw64") else "ds64 chunk in a plain RIFF file is ignored")

    def riff_fmt(self, cid, pos, body, size):
        if "fmt " in self.seen:
            self.problem(pos, f"duplicate fmt chunk (the first is at byte {self.seen['fmt ']}); "
                              "the first one is reported")
            return
        self.seen["fmt "] = pos
        self.fmt_offset = pos
        le = "<" if self.info.kind != "rifx" else ">"
        raw = self.read(body, min(size, MAX_FORMAT_BYTES))
        if len(raw) < 14:
            self.problem(pos, f"fmt chunk is {size} bytes; needs at least 16")
            return
        tag, channels, rate, byte_rate, block_align = struct.unpack_from(le + "HHIIH", raw, 0)
        fmt = {"format_tag": tag, "format_name": FORMAT_NAMES.get(tag, f"0x{tag:04X}"),
               "channels": channels, "sample_rate_hz": rate, "byte_rate": byte_rate,
               "block_align": block_align, "bits_per_sample": None, "valid_bits_per_sample": None,
               "channel_mask": None, "subformat_tag": None}
        if len(raw) < 16:
            self.problem(pos, f"fmt chunk is {size} bytes; needs at least 16 (no bits per sample)")
        else:
            fmt["bits_per_sample"] = struct.unpack_from(le + "H", raw, 14)[0]
        code = tag
        if tag == WAVE_FORMAT_EXTENSIBLE:
            if len(raw) < 40:
                self.problem(pos, f"WAVE_FORMAT_EXTENSIBLE fmt chunk is {size} bytes; needs 40 "
                                  "(the channel mask and sub-format are missing)")
            else:
                cb_size, valid_bits, mask = struct.unpack_from(le + "HHI", raw, 16)
                guid = raw[24:40]
                code = struct.unpack_from(le + "H", guid, 0)[0]
                fmt.update(valid_bits_per_sample=valid_bits, channel_mask=mask, subformat_tag=code,
                           subformat_name=FORMAT_NAMES.get(code, f"0x{code:04X}"))
                if cb_size < 22:
                    self.problem(pos + 8 + 16, f"WAVE_FORMAT_EXTENSIBLE cbSize is {cb_size}; needs 22")
                if guid[2:] != KSDATAFORMAT_TAIL:
                    self.problem(pos + 8 + 24, f"sub-format GUID {guid.hex()} is not a standard "
                                               "KSDATAFORMAT sub-type")
                self.info.channel_mask = mask
                if mask and _popcount(mask) < channels:
                    self.problem(pos + 8 + 20, f"channel mask 0x{mask:X} names {_popcount(mask)} speakers "
                                               f"for {channels} channels; the channel layout is unknown")
                bits = fmt["bits_per_sample"] or 0
                if valid_bits > bits:
                    self.problem(pos + 8 + 18, f"wValidBitsPerSample {valid_bits} exceeds the container's "
                                               f"{bits} bits per sample")
        if channels == 0:
            self.problem(pos + 8 + 2, "fmt declares 0 channels")
        if rate == 0:
            self.problem(pos + 8 + 4, "fmt declares a sample rate of 0 Hz")
        bits = fmt["bits_per_sample"]
        if code in (WAVE_FORMAT_PCM, WAVE_FORMAT_IEEE_FLOAT) and bits and channels:
            expect_align = channels * ((bits + 7) // 8)
            if block_align != expect_align:
                self.problem(pos + 8 + 12, f"fmt nBlockAlign is {block_align}; {channels} channels of "
                                           f"{bits} bits need {expect_align}")
            elif byte_rate != rate * block_align:
                self.problem(pos + 8 + 8, f"fmt nAvgBytesPerSec is {byte_rate}; {rate} Hz x {block_align} "
                                          f"bytes is {rate * block_align}")
        self.fmt = fmt
        self.meta["fmt"] = fmt

    def riff_data(self, cid, pos, body, size):
        if "data" in self.seen:
            self.problem(pos, f"second data chunk (the first is at byte {self.seen['data']}); it is not audio "
                              "any reader will play")
            return
        self.seen["data"] = pos
        if "fmt " not in self.seen:
            self.problem(pos, "data chunk comes before the fmt chunk (RIFF WAVE requires fmt first)")
        declared = self.info.chunks[-1]["size"] if self.info.chunks else size
        self.meta["audio_data"] = {"offset": body, "size_bytes": size, "declared_size_bytes": declared}

    def missing_audio(self, frame_bytes: int, rate_hz, unknown_size=None) -> None:
        """Record the audio a cut file lacks: the data chunk declares more than the file holds *and*
        the form header also reaches past the end of the file (a file cut short, not one wrong size field).

        Adds ``missing_bytes``, ``missing_frames`` and ``missing_s`` (None when the rate is unknown)
        to ``audio_data``.
        """
        data = self.meta.get("audio_data")
        if not data or not self.form_cut_bytes:
            return
        declared = data.get("declared_size_bytes")
        if declared is None or declared == unknown_size:  # 0xFFFFFFFF: a recorder that never wrote the size
            return
        missing = declared - data["size_bytes"]
        if missing <= 0:
            return
        data["missing_bytes"] = int(missing)
        frames = declared // frame_bytes - data["size_bytes"] // frame_bytes if frame_bytes > 0 else None
        data["missing_frames"] = frames
        rate = float(rate_hz) if rate_hz else 0.0
        data["missing_s"] = frames / rate if frames is not None and rate > 0 else None

    def check_data_frames(self):
        data = self.meta.get("audio_data")
        if not data or not self.fmt:
            return
        align = self.fmt.get("block_align") or 0
        if align > 0:
            frames, rest = divmod(data["size_bytes"], align)
            data["frames"] = frames
            if rest:
                self.problem(self.seen.get("data", data["offset"] - 8),
                             f"data chunk holds {data['size_bytes']} bytes, not a whole number of "
                             f"{align}-byte frames ({rest} bytes left over)")
            fact = self.meta.get("fact")
            if fact and fact.get("sample_length") not in (None, frames, 0xFFFFFFFF) \
                    and self.fmt.get("format_tag") in (WAVE_FORMAT_PCM, WAVE_FORMAT_IEEE_FLOAT, WAVE_FORMAT_EXTENSIBLE):
                self.problem(fact["offset"], f"fact chunk says {fact['sample_length']} frames; "
                                             f"the data chunk holds {frames}")

    def riff_fact(self, cid, pos, body, size):
        raw = self.read(body, min(size, 4))
        if len(raw) < 4:
            self.problem(pos, f"fact chunk is {size} bytes; needs 4")
            return
        le = "<" if self.info.kind != "rifx" else ">"
        self.meta["fact"] = {"offset": pos, "sample_length": struct.unpack(le + "I", raw)[0]}

    def riff_cue(self, cid, pos, body, size):
        raw = self.read(body, 4)
        if len(raw) == 4:
            count = struct.unpack("<I", raw)[0]
            room = max(size - 4, 0) // 24
            if count > room:
                self.problem(pos, f"cue chunk declares {count} cue points; room for {room}")
            self.meta["cue_points"] = min(count, room)

    def riff_bext(self, cid, pos, body, size):
        if "bext" in self.seen:
            self.problem(pos, f"duplicate bext chunk (the first is at byte {self.seen['bext']}); "
                              "the first one is reported")
            return
        self.seen["bext"] = pos
        cap = _bext.FIXED_SIZE + MAX_TEXT_BYTES
        raw = self.read(body, min(size, cap))
        fields, problems = _bext.parse_bext(raw, size, pos, history_truncated=size > cap)
        if len(raw) < min(size, cap):
            self.problem(pos, f"bext chunk is cut short by the end of the file ({len(raw)} of {size} bytes)")
        fields["offset"] = pos
        self.meta["bext"] = fields
        self.info.problems.extend(problems)

    def riff_ixml(self, cid, pos, body, size):
        if "iXML" in self.seen:
            self.problem(pos, f"duplicate iXML chunk (the first is at byte {self.seen['iXML']})")
            return
        self.seen["iXML"] = pos
        raw = self.capped(body, size, MAX_TEXT_BYTES, "iXML chunk")
        self.ixml_offset = pos
        self.meta["ixml"] = self.parse_ixml(raw, pos, size)

    def parse_ixml(self, raw: bytes, pos: int, size: int) -> dict:
        out = {"offset": pos, "size_bytes": size, "fields": {}, "tracks": []}
        text = raw.decode("utf-8", errors="replace").strip("\0 \r\n\t")
        if not text:
            self.problem(pos, "iXML chunk is empty")
            return out
        upper = text[:4096].upper()
        if "<!DOCTYPE" in upper or "<!ENTITY" in text.upper():
            self.problem(pos, "iXML declares a DOCTYPE or entities; it was not parsed (entity expansion risk)")
            return out
        try:
            root = ET.fromstring(text)
        except ET.ParseError as exc:
            self.problem(pos, f"iXML is not well-formed XML ({exc})")
            return out
        fields = out["fields"]

        def visit(node, prefix, depth):
            for child in node:
                if len(fields) >= MAX_ENTRIES or depth > 4:
                    return
                tag = child.tag if isinstance(child.tag, str) else ""
                key = f"{prefix}{tag}"
                if tag == "TRACK" and prefix.endswith("TRACK_LIST/"):
                    if len(out["tracks"]) < 256:
                        out["tracks"].append({c.tag: (c.text or "").strip()[:256] for c in child
                                              if isinstance(c.tag, str)})
                    continue
                if len(child):
                    visit(child, key + "/", depth + 1)
                elif key not in fields:
                    fields[key] = (child.text or "").strip()[:4096]

        visit(root, "", 0)
        speed_hi = fields.get("SPEED/TIMESTAMP_SAMPLES_SINCE_MIDNIGHT_HI")
        speed_lo = fields.get("SPEED/TIMESTAMP_SAMPLES_SINCE_MIDNIGHT_LO")
        out["timestamp_samples"] = None
        if speed_lo is not None:
            try:
                out["timestamp_samples"] = (int(speed_hi or 0) << 32) | int(speed_lo)
            except ValueError:
                self.problem(pos, f"iXML timestamp {speed_hi!r}/{speed_lo!r} is not a number")
        try:
            out["timestamp_sample_rate_hz"] = int(fields["SPEED/TIMESTAMP_SAMPLE_RATE"]) \
                if fields.get("SPEED/TIMESTAMP_SAMPLE_RATE") else None
        except ValueError:
            out["timestamp_sample_rate_hz"] = None
        out["timecode_fps"] = _tc.fps_from_ixml(fields.get("SPEED/TIMECODE_RATE"),
                                               fields.get("SPEED/TIMECODE_FLAG"))
        return out

    def riff_list(self, cid, pos, body, size):
        form = self.read(body, min(size, 4))
        if len(form) < 4:
            self.problem(pos, f"LIST chunk is {size} bytes; too short for its list type")
            return
        if form != b"INFO":
            return
        raw = self.capped(body, size, MAX_TEXT_BYTES, "LIST/INFO chunk")
        info = self.meta["info"] if self.meta["info"] is not None else {}
        offsets = self.meta.setdefault("info_offsets", {})
        p = 4
        while p + 8 <= len(raw) and len(info) < MAX_ENTRIES:
            tag_raw = raw[p:p + 4]
            if not _is_chunk_id(tag_raw):
                self.problem(body + p, f"LIST/INFO entry id {tag_raw!r} is not a tag; the rest of the list "
                                       "was not read")
                break
            (n,) = struct.unpack_from(self.endian + "I", raw, p + 4)
            if n > len(raw) - p - 8:
                self.problem(body + p, f"LIST/INFO entry '{tag_raw.decode('ascii')}' declares {n} bytes; "
                                       f"only {len(raw) - p - 8} remain in the list")
                n = len(raw) - p - 8
            tag = tag_raw.decode("ascii")
            if tag in info:
                self.problem(body + p, f"LIST/INFO tag '{tag}' appears twice; the first value is reported")
            else:
                info[tag] = _bext.decode_text(raw[p + 8:p + 8 + n])
                offsets[tag] = body + p
            p += 8 + n + (n & 1)
        self.meta["info"] = info

    def id3_chunk(self, cid, pos, body, size):
        raw = self.capped(body, size, MAX_TEXT_BYTES, f"'{cid}' chunk")
        self.store_id3(raw, pos)

    def store_id3(self, raw: bytes, pos: int):
        tag = parse_id3(raw, pos, self.problem)
        if tag is not None:
            tag["offset"] = pos
            if self.meta["id3"] is None:
                self.meta["id3"] = tag
            else:
                self.problem(pos, f"second ID3 tag (the first is at byte {self.meta['id3']['offset']}); "
                                  "the first one is reported")

    # -- AIFF / AIFF-C -------------------------------------------------------
    def aiff(self, head: bytes) -> None:
        self.info.kind = "aifc" if head[8:12] == b"AIFC" else "aiff"
        (declared,) = struct.unpack(">I", head[4:8])
        form_end = 8 + declared
        if form_end > self.size:
            self.problem(4, f"FORM header declares {declared} bytes after the size field; the file "
                            f"holds {self.size - 8} (truncated by {form_end - self.size} bytes)")
            self.form_cut_bytes = form_end - self.size
            form_end = self.size
        elif form_end < self.size:
            extra = self.size - form_end
            if not (extra == 1 and declared & 1):
                self.problem(form_end, f"{extra} bytes after the end of the FORM are not part of it")
        handlers = {"COMM": self.aiff_comm, "SSND": self.aiff_ssnd, "NAME": self.aiff_text,
                    "AUTH": self.aiff_text, "ANNO": self.aiff_text, "(c) ": self.aiff_text,
                    "COMT": self.aiff_comt, "ID3 ": self.id3_chunk, "id3 ": self.id3_chunk}
        self.chunk_loop(12, form_end, ">", handlers, "FORM")
        if "COMM" not in self.seen:
            self.problem(12, "no COMM chunk: the audio format is not declared")
        if "SSND" not in self.seen and not (self.fmt and self.fmt.get("frames") == 0):
            self.problem(12, "no SSND chunk: the file holds no audio")
        if self.fmt and self.fmt.get("bits_per_sample") and self.info.kind == "aiff" and self.fmt["channels"] > 0:
            self.missing_audio(self.fmt["channels"] * ((self.fmt["bits_per_sample"] + 7) // 8),
                               self.fmt.get("sample_rate_hz"))
        data = self.meta.get("audio_data")
        if data and self.fmt and self.fmt.get("bits_per_sample") and self.info.kind == "aiff":
            frame_bytes = self.fmt["channels"] * ((self.fmt["bits_per_sample"] + 7) // 8)
            if frame_bytes > 0:
                data["frames"] = data["size_bytes"] // frame_bytes
                if data["frames"] < self.fmt["frames"]:
                    self.problem(self.seen["SSND"], f"SSND holds {data['frames']} frames; COMM declares "
                                                    f"{self.fmt['frames']}")

    def aiff_comm(self, cid, pos, body, size):
        if "COMM" in self.seen:
            self.problem(pos, f"duplicate COMM chunk (the first is at byte {self.seen['COMM']}); "
                              "the first one is reported")
            return
        self.seen["COMM"] = pos
        raw = self.read(body, min(size, MAX_FORMAT_BYTES))
        if len(raw) < 18:
            self.problem(pos, f"COMM chunk is {size} bytes; needs at least 18")
            return
        channels, frames, bits = struct.unpack_from(">hIh", raw, 0)
        rate = _decode_ext80(raw[8:18])
        comm = {"channels": channels, "frames": frames, "bits_per_sample": bits,
                "sample_rate_hz": rate, "compression_type": None, "compression_name": None}
        if channels <= 0:
            self.problem(pos + 8, f"COMM declares {channels} channels")
        if not 1 <= bits <= 64:
            self.problem(pos + 14, f"COMM declares {bits} bits per sample")
        if rate is None or rate <= 0:
            self.problem(pos + 16, "COMM sample rate is not a positive finite number")
        if self.info.kind == "aifc":
            if len(raw) < 22:
                self.problem(pos, f"AIFF-C COMM chunk is {size} bytes; needs at least 22 (no compression type)")
            else:
                comm["compression_type"] = raw[18:22].decode("latin-1")
                if len(raw) > 22:
                    n = raw[22]
                    comm["compression_name"] = raw[23:23 + n].decode("latin-1")
        self.fmt = comm
        self.meta["comm"] = comm

    def aiff_ssnd(self, cid, pos, body, size):
        if "SSND" in self.seen:
            self.problem(pos, f"second SSND chunk (the first is at byte {self.seen['SSND']})")
            return
        self.seen["SSND"] = pos
        raw = self.read(body, 8)
        if len(raw) < 8 or size < 8:
            self.problem(pos, f"SSND chunk is {size} bytes; needs at least 8")
            return
        offset, block = struct.unpack(">II", raw)
        if offset > size - 8:
            self.problem(pos + 8, f"SSND offset {offset} points past the end of the chunk")
            offset = size - 8
        declared = self.info.chunks[-1]["size"] if self.info.chunks else size
        self.meta["audio_data"] = {"offset": body + 8 + offset, "size_bytes": size - 8 - offset,
                                   "declared_size_bytes": max(declared - 8 - offset, 0)}

    def aiff_text(self, cid, pos, body, size):
        raw = self.capped(body, size, MAX_TEXT_BYTES, f"'{cid}' chunk")
        text = _bext.decode_text(raw)
        tc = self.meta["text_chunks"] if self.meta["text_chunks"] is not None else {}
        key = {"NAME": "name", "AUTH": "author", "(c) ": "copyright", "ANNO": "annotations"}[cid]
        if key == "annotations":
            tc.setdefault(key, []).append(text)
        elif key in tc:
            self.problem(pos, f"duplicate '{cid}' chunk; the first one is reported")
        else:
            tc[key] = text
        self.meta["text_chunks"] = tc
        self.meta.setdefault("text_chunk_offsets", {}).setdefault(key, pos)

    def aiff_comt(self, cid, pos, body, size):
        raw = self.capped(body, size, MAX_TEXT_BYTES, "COMT chunk")
        if len(raw) < 2:
            return
        (count,) = struct.unpack_from(">H", raw, 0)
        p = 2
        comments = []
        for _ in range(min(count, MAX_ENTRIES)):
            if p + 8 > len(raw):
                self.problem(pos, f"COMT chunk declares {count} comments; it ends after {len(comments)}")
                break
            (n,) = struct.unpack_from(">H", raw, p + 6)
            comments.append(_bext.decode_text(raw[p + 8:p + 8 + n]))
            p += 8 + n + (n & 1)
        tc = self.meta["text_chunks"] if self.meta["text_chunks"] is not None else {}
        tc.setdefault("comments", []).extend(comments)
        self.meta["text_chunks"] = tc

    # -- FLAC ----------------------------------------------------------------
    def flac(self) -> None:
        pos = 0
        head = self.read(0, 10)
        if head[:3] == b"ID3":
            tag_size = _syncsafe(head[6:10]) if len(head) == 10 else 0
            total = 10 + (tag_size or 0) + (10 if len(head) == 10 and head[5] & 0x10 else 0)
            self.problem(0, f"an ID3v2 tag ({total} bytes) precedes the FLAC stream marker; "
                            "it is not part of the FLAC format and some readers reject it")
            self.info.chunks.append({"id": "ID3", "offset": 0, "size": total})
            self.store_id3(self.read(0, min(total, MAX_TEXT_BYTES)), 0)
            pos = total
        if self.read(pos, 4) != b"fLaC":
            self.problem(pos, "no fLaC stream marker")
            return
        self.info.kind = "flac"
        pos += 4
        first = True
        last = False
        while not last:
            if len(self.info.chunks) >= MAX_CHUNKS:
                self.problem(pos, f"more than {MAX_CHUNKS} metadata blocks; the rest was not walked")
                return
            hdr = self.read(pos, 4)
            if len(hdr) < 4:
                self.problem(pos, "the file ends inside the FLAC metadata blocks")
                return
            last = bool(hdr[0] & 0x80)
            btype = hdr[0] & 0x7F
            length = int.from_bytes(hdr[1:4], "big")
            if btype == 127:
                self.problem(pos, "invalid FLAC metadata block type 127; the rest was not walked")
                return
            name = FLAC_BLOCK_NAMES.get(btype, f"RESERVED_{btype}")
            self.info.chunks.append({"id": name, "offset": pos, "size": length})
            body = pos + 4
            avail = self.size - body
            if first and btype != 0:
                self.problem(pos, f"the first FLAC metadata block is {name}, not STREAMINFO")
            first = False
            if length > avail:
                self.problem(pos, f"FLAC metadata block {name} declares {length} bytes; only {avail} remain")
                length = avail
                last = True
            try:
                if btype == 0:
                    self.flac_streaminfo(pos, body, length)
                elif btype == 4:
                    self.flac_vorbis(pos, body, length)
                elif btype == 5:
                    self.flac_cuesheet(pos, body, length)
                elif btype == 3 and length % 18:
                    self.problem(pos, f"SEEKTABLE is {length} bytes, not a whole number of 18-byte points")
            except (struct.error, ValueError, IndexError, UnicodeError, OverflowError) as exc:
                self.problem(pos, f"FLAC metadata block {name} could not be parsed ({exc})")
            pos = body + length
        if "STREAMINFO" not in self.seen:
            self.problem(4, "no STREAMINFO block: the audio format is not declared")
        self.meta["audio_data"] = {"offset": pos, "size_bytes": max(self.size - pos, 0)}
        sync = self.read(pos, 2)
        if len(sync) < 2:
            self.problem(pos, "no audio frames after the FLAC metadata blocks")
        elif not (sync[0] == 0xFF and (sync[1] & 0xFE) == 0xF8):
            self.problem(pos, "no FLAC frame sync code where the audio frames should start")

    def flac_streaminfo(self, pos, body, length):
        if "STREAMINFO" in self.seen:
            self.problem(pos, f"second STREAMINFO block (the first is at byte {self.seen['STREAMINFO']})")
            return
        self.seen["STREAMINFO"] = pos
        if length != 34:
            self.problem(pos, f"STREAMINFO is {length} bytes; it must be 34")
        raw = self.read(body, min(length, 34))
        if len(raw) < 18:
            return
        min_block, max_block = struct.unpack_from(">HH", raw, 0)
        packed = int.from_bytes(raw[10:18], "big")
        rate = packed >> 44
        channels = ((packed >> 41) & 0x7) + 1
        bits = ((packed >> 36) & 0x1F) + 1
        frames = packed & ((1 << 36) - 1)
        si = {"sample_rate_hz": rate, "channels": channels, "bits_per_sample": bits, "frames": frames,
              "min_block_size": min_block, "max_block_size": max_block,
              "md5": raw[18:34].hex() if len(raw) >= 34 and any(raw[18:34]) else None}
        if rate == 0:
            self.problem(pos + 4 + 10, "STREAMINFO declares a sample rate of 0 Hz")
        if min_block < 16 or max_block < min_block:
            self.problem(pos + 4, f"STREAMINFO block sizes {min_block}..{max_block} are invalid")
        self.fmt = si
        self.meta["streaminfo"] = si

    def flac_vorbis(self, pos, body, length):
        if "VORBIS_COMMENT" in self.seen:
            self.problem(pos, f"second VORBIS_COMMENT block (the first is at byte {self.seen['VORBIS_COMMENT']}); "
                              "the first one is reported")
            return
        self.seen["VORBIS_COMMENT"] = pos
        raw = self.read(body, min(length, MAX_TEXT_BYTES))
        if length > MAX_TEXT_BYTES:
            self.problem(pos, f"VORBIS_COMMENT block is {length} bytes; only the first {MAX_TEXT_BYTES} were read")
        vc = parse_vorbis_comment(raw, body, self.problem)
        vc["offset"] = pos
        self.meta["vorbis_comments"] = vc
        masks = vc["comments"].get("WAVEFORMATEXTENSIBLE_CHANNEL_MASK")
        if masks:
            try:
                mask = int(masks[0], 0)
                if 0 < mask < (1 << 32):
                    self.info.channel_mask = mask
                else:
                    raise ValueError(masks[0])
            except ValueError:
                self.problem(pos, f"WAVEFORMATEXTENSIBLE_CHANNEL_MASK {masks[0]!r} is not a channel mask")

    def flac_cuesheet(self, pos, body, length):
        raw = self.read(body, min(length, MAX_TEXT_BYTES))
        if len(raw) < 396:
            self.problem(pos, f"CUESHEET is {length} bytes; needs at least 396")
            return
        catalog = _bext.decode_text(raw[:128])
        ntracks = raw[395]
        p = 396
        tracks = []
        for _ in range(ntracks):
            if p + 36 > len(raw):
                self.problem(pos, f"CUESHEET declares {ntracks} tracks; it ends after {len(tracks)}")
                break
            number = raw[p + 8]
            isrc = _bext.decode_text(raw[p + 9:p + 21])
            nindex = raw[p + 35]
            tracks.append({"number": number, "isrc": isrc or None, "offset": body + p + 9})
            p += 36 + 12 * nindex
        self.meta["cuesheet"] = {"offset": pos, "media_catalog_number": catalog or None, "tracks": tracks}

    # -- after the walk --------------------------------------------------------
    def finish(self) -> None:
        meta = self.meta
        bx = meta.get("bext")
        ix = meta.get("ixml")
        if bx and bx.get("time_reference_samples") is not None:
            meta["time_reference_samples"] = bx["time_reference_samples"]
            meta["time_reference_source"] = "bext"
            if ix and ix.get("timestamp_samples") is not None \
                    and ix["timestamp_samples"] != bx["time_reference_samples"]:
                self.problem(ix["offset"], f"iXML timestamp ({ix['timestamp_samples']} samples) differs from "
                                           f"the bext TimeReference ({bx['time_reference_samples']} samples)")
        elif ix and ix.get("timestamp_samples") is not None:
            meta["time_reference_samples"] = ix["timestamp_samples"]
            meta["time_reference_source"] = "ixml"
        if ix:
            meta["declared_timecode_fps"] = ix.get("timecode_fps")
        meta["isrc"] = self.collect_isrc()

    def collect_isrc(self) -> list:
        meta = self.meta
        found = []

        def add(raw, source, offset):
            entry = _isrc.check_isrc(raw)
            entry.update(source=source, offset=offset)
            found.append(entry)

        info = meta.get("info") or {}
        if info.get("ISRC"):
            add(info["ISRC"], "info.ISRC", (meta.get("info_offsets") or {}).get("ISRC"))
        id3 = meta.get("id3") or {}
        for key in ("TSRC", "TRC", "TXXX:ISRC"):
            if (id3.get("frames") or {}).get(key):
                add(id3["frames"][key], f"id3.{key}", id3.get("offset"))
        vc = meta.get("vorbis_comments") or {}
        for value in (vc.get("comments") or {}).get("ISRC", []):
            add(value, "vorbis.ISRC", vc.get("offset"))
        cue = meta.get("cuesheet") or {}
        for track in cue.get("tracks") or []:
            if track.get("isrc"):
                add(track["isrc"], f"cuesheet.track{track['number']}", track.get("offset"))
        bx = meta.get("bext") or {}
        for key in ("description", "originator_reference", "coding_history"):
            for raw in _isrc.find_in_text(bx.get(key) or ""):
                add(raw, f"bext.{key}", bx.get("offset"))
        ix = meta.get("ixml") or {}
        for key, value in (ix.get("fields") or {}).items():
            if key.split("/")[-1].upper() == "ISRC" and value:
                add(value, f"ixml.{key}", ix.get("offset"))
        tc = meta.get("text_chunks") or {}
        for key in ("name", "annotations", "comments"):
            values = tc.get(key) or []
            for text in [values] if isinstance(values, str) else values:
                for raw in _isrc.find_in_text(text):
                    add(raw, f"aiff.{key}", (meta.get("text_chunk_offsets") or {}).get(key))
        return found


def _syncsafe(raw: bytes) -> int | None:
    """A 28-bit ID3v2 "syncsafe" integer from 4 bytes; None when a byte has its top bit set."""
    if len(raw) != 4 or any(b & 0x80 for b in raw):
        return None
    return (raw[0] << 21) | (raw[1] << 14) | (raw[2] << 7) | raw[3]


def _id3_decode(data: bytes) -> str:
    """Decode an ID3v2 text frame body (encoding byte first), NUL separators kept."""
    if not data:
        return ""
    enc, body = data[0], data[1:]
    if enc == 0:
        text = body.decode("latin-1")
    elif enc == 1:
        text = body.decode("utf-16", errors="replace") if body[:2] in (b"\xff\xfe", b"\xfe\xff") \
            else body.decode("utf-16-le", errors="replace")
    elif enc == 2:
        text = body.decode("utf-16-be", errors="replace")
    elif enc == 3:
        text = body.decode("utf-8", errors="replace")
    else:
        raise ValueError(f"unknown text encoding {enc}")
    return text


def _id3_join(text: str) -> str:
    """NUL-separated ID3v2.4 values joined by ' / ' (byte-order marks and empty parts dropped)."""
    parts = [p.lstrip("\ufeff") for p in text.split("\0")]
    return " / ".join(p for p in parts if p)


def parse_id3(raw: bytes, offset: int, problem) -> dict | None:
    """Parse an ID3v2.2/2.3/2.4 tag held in ``raw`` (text frames only).

    ``offset`` is the file offset of the enclosing chunk (used in problems);
    ``problem(offset, message)`` records faults.  Returns ``{"version", "frames"}``
    (frame id -> text; ``TXXX:<description>`` for user text frames) or None.
    """
    if len(raw) < 10 or raw[:3] != b"ID3":
        problem(offset, "id3 chunk does not hold an ID3v2 tag")
        return None
    major, flags = raw[3], raw[5]
    size = _syncsafe(raw[6:10])
    if size is None:
        problem(offset, "ID3v2 tag size is not a syncsafe integer")
        return None
    if major not in (2, 3, 4):
        problem(offset, f"ID3v2.{major} is not a version masterqc reads (2.2, 2.3, 2.4)")
        return None
    body = raw[10:10 + size]
    if size > len(raw) - 10:
        problem(offset, f"ID3v2 tag declares {size} bytes; only {len(raw) - 10} were read")
    if flags & 0x80 and major < 4:
        body = body.replace(b"\xff\x00", b"\xff")
    p = 0
    if flags & 0x40 and major >= 3 and len(body) >= 4:
        ext = int.from_bytes(body[:4], "big")
        p = (_syncsafe(body[:4]) or 0) if major == 4 else ext + 4
    frames: dict = {}
    other: set = set()
    id_len, hdr_len = (3, 6) if major == 2 else (4, 10)
    while p + hdr_len <= len(body) and len(frames) < MAX_ENTRIES:
        fid_raw = body[p:p + id_len]
        if not any(fid_raw):
            break  # padding
        if not all(48 <= b <= 57 or 65 <= b <= 90 for b in fid_raw):
            problem(offset, f"ID3v2 frame id {fid_raw!r} is invalid; the rest of the tag was not read")
            break
        if major == 2:
            fsize = int.from_bytes(body[p + 3:p + 6], "big")
            fflags = 0
        elif major == 3:
            fsize = int.from_bytes(body[p + 4:p + 8], "big")
            fflags = int.from_bytes(body[p + 8:p + 10], "big")
        else:
            fsize = _syncsafe(body[p + 4:p + 8])
            fflags = int.from_bytes(body[p + 8:p + 10], "big")
            if fsize is None:
                problem(offset, "ID3v2.4 frame size is not syncsafe; the rest of the tag was not read")
                break
        fid = fid_raw.decode("ascii")
        data = body[p + hdr_len:p + hdr_len + fsize]
        if fsize > len(body) - p - hdr_len:
            problem(offset, f"ID3v2 frame {fid} declares {fsize} bytes; only {len(body) - p - hdr_len} remain")
        p += hdr_len + fsize
        compressed_or_encrypted = (major == 3 and fflags & 0x00C0) or (major == 4 and fflags & 0x000C)
        if not fid.startswith("T") or compressed_or_encrypted:
            other.add(fid)
            continue
        if major == 4 and fflags & 0x0002:
            data = data.replace(b"\xff\x00", b"\xff")
        if major == 4 and fflags & 0x0001:
            data = data[4:]  # data length indicator
        try:
            text = _id3_decode(data)
        except (ValueError, UnicodeError) as exc:
            problem(offset, f"ID3v2 frame {fid} text could not be decoded ({exc})")
            continue
        if fid in ("TXXX", "TXX"):
            desc, _sep, value = text.partition("\0")
            fid = f"TXXX:{desc.lstrip(chr(0xFEFF)).strip()}"
            text = value
        text = _id3_join(text)
        if fid not in frames:
            frames[fid] = text
    return {"version": f"2.{major}", "frames": frames, "other_frames": sorted(other)}


def parse_vorbis_comment(raw: bytes, offset: int, problem) -> dict:
    """Parse a Vorbis comment packet body (little-endian lengths, UTF-8 ``KEY=value`` strings).

    Returns ``{"vendor", "comments"}``: ``comments`` maps each upper-case key to its
    values in order.  Faults go to ``problem(offset, message)``.
    """
    out = {"vendor": None, "comments": {}}
    if len(raw) < 4:
        problem(offset, "VORBIS_COMMENT is too short for its vendor length")
        return out
    (vlen,) = struct.unpack_from("<I", raw, 0)
    if vlen > len(raw) - 4:
        problem(offset, f"Vorbis vendor string declares {vlen} bytes; only {len(raw) - 4} remain")
        return out
    out["vendor"] = raw[4:4 + vlen].decode("utf-8", errors="replace")
    p = 4 + vlen
    if p + 4 > len(raw):
        problem(offset + p, "VORBIS_COMMENT ends before its comment count")
        return out
    (count,) = struct.unpack_from("<I", raw, p)
    p += 4
    if count > (len(raw) - p) // 4:
        problem(offset + p - 4, f"VORBIS_COMMENT declares {count} comments; room for at most {(len(raw) - p) // 4}")
    n_read = 0
    for _ in range(min(count, MAX_ENTRIES)):
        if p + 4 > len(raw):
            problem(offset + p, f"VORBIS_COMMENT ends after {n_read} of {count} comments")
            break
        (n,) = struct.unpack_from("<I", raw, p)
        if n > len(raw) - p - 4:
            problem(offset + p, f"Vorbis comment {n_read + 1} declares {n} bytes; only {len(raw) - p - 4} remain")
            break
        text = raw[p + 4:p + 4 + n].decode("utf-8", errors="replace")
        p += 4 + n
        n_read += 1
        key, sep, value = text.partition("=")
        if not sep:
            problem(offset + p - n - 4, f"Vorbis comment {text[:40]!r} has no '='")
            continue
        out["comments"].setdefault(key.upper(), []).append(value)
    return out


# -- result metadata -----------------------------------------------------------

def timecode_metadata(container: ContainerInfo, sample_rate_hz: int, fps=None) -> dict:
    """``{"timecode_fps", "start_timecode"}`` for the result's metadata.

    ``start_timecode`` is the label of the file's first sample at ``fps``
    (default 25), from the time reference the walker found; None when the file
    declares none.  A bad ``fps`` falls back to the default and says so in
    ``timecode_note``.
    """
    out = {"timecode_fps": _tc.DEFAULT_FPS, "start_timecode": None}
    try:
        name = _tc.frame_rate(fps or _tc.DEFAULT_FPS).name
    except ValueError as exc:
        name = _tc.DEFAULT_FPS
        out["timecode_note"] = str(exc)
    out["timecode_fps"] = name
    ref = (container.metadata or {}).get("time_reference_samples")
    if ref is not None and sample_rate_hz and sample_rate_hz > 0:
        out["start_timecode"] = _tc.samples_to_timecode(ref, sample_rate_hz, name)
    return out


_PROBLEM = {"type": "object", "required": ["offset", "message"],
            "properties": {"offset": {"type": "integer", "minimum": 0}, "message": {"type": "string"}}}
_NUM_OR_NULL = {"type": ["number", "null"]}
_STR_OR_NULL = {"type": ["string", "null"]}

#: JSON Schema of ``result["metadata"]`` (the walker's metadata plus what the engine adds)
METADATA_SCHEMA = {
    "type": "object",
    "required": ["container_kind", "chunks", "problems", "bext", "isrc",
                 "time_reference_samples", "start_timecode", "timecode_fps"],
    "properties": {
        "container_kind": _STR_OR_NULL,
        "chunks": {"type": "array", "items": {"type": "object", "required": ["id", "offset", "size"],
                                               "properties": {"id": {"type": "string"},
                                                              "offset": {"type": "integer"},
                                                              "size": {"type": "integer"}}}},
        "problems": {"type": "array", "items": _PROBLEM},
        "bext": {"oneOf": [{"type": "null"}, {
            "type": "object",
            "required": ["version", "description", "originator", "originator_reference",
                         "origination_date", "origination_time", "time_reference_samples", "umid",
                         "coding_history"] + [k for k, _u in _bext.LOUDNESS_FIELDS],
            "properties": {
                "version": {"type": ["integer", "null"]},
                "description": _STR_OR_NULL, "originator": _STR_OR_NULL,
                "originator_reference": _STR_OR_NULL, "origination_date": _STR_OR_NULL,
                "origination_time": _STR_OR_NULL,
                "time_reference_samples": {"type": ["integer", "null"], "minimum": 0},
                "umid": _STR_OR_NULL, "coding_history": {"type": "string"},
                **{k: _NUM_OR_NULL for k, _u in _bext.LOUDNESS_FIELDS},
            }}]},
        "isrc": {"type": "array", "items": {
            "type": "object", "required": ["raw", "code", "valid", "source"],
            "properties": {"raw": {"type": "string"}, "code": _STR_OR_NULL, "display": _STR_OR_NULL,
                           "valid": {"type": "boolean"}, "problem": _STR_OR_NULL, "note": _STR_OR_NULL,
                           "source": {"type": "string"}, "offset": {"type": ["integer", "null"]}}}},
        "time_reference_samples": {"type": ["integer", "null"], "minimum": 0},
        "time_reference_source": {"enum": ["bext", "ixml", None]},
        "start_timecode": _STR_OR_NULL,
        "timecode_fps": {"enum": list(_tc.FRAME_RATES)},
        "declared_timecode_fps": {"enum": list(_tc.FRAME_RATES) + [None]},
        "ixml": {"type": ["object", "null"]},
        "info": {"type": ["object", "null"], "additionalProperties": {"type": "string"}},
        "id3": {"type": ["object", "null"]},
        "vorbis_comments": {"type": ["object", "null"]},
        "text_chunks": {"type": ["object", "null"]},
        "cuesheet": {"type": ["object", "null"]},
        "audio_data": {"type": ["object", "null"]},
    },
}
