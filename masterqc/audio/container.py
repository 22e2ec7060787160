"""Container walker: chunk structure and metadata of RIFF/RF64, AIFF/AIFF-C and FLAC.

This module reads container bytes itself (never trusting a length field beyond
the file size) so that masterqc can report what libsndfile does not expose:
the WAVE_FORMAT_EXTENSIBLE channel mask, bext, iXML, LIST/INFO, and so on.

:func:`walk` never raises for malformed content: every problem becomes an entry
of ``ContainerInfo.problems`` with its byte offset.
"""

from __future__ import annotations

import struct
from dataclasses import dataclass, field


@dataclass
class ContainerInfo:
    """What the container walker found.

    ``kind``: "riff", "rf64", "aiff", "aifc", "flac" or None when unrecognised.
    ``chunks``: list of dicts ``{"id", "offset", "size"}`` in file order.
    ``channel_mask``: dwChannelMask of WAVE_FORMAT_EXTENSIBLE, or None.
    ``metadata``: parsed metadata (bext, ixml, info, vorbis comments, ...).
    ``problems``: list of dicts ``{"offset": int, "message": str}``.
    """

    kind: str | None = None
    chunks: list = field(default_factory=list)
    channel_mask: int | None = None
    metadata: dict = field(default_factory=dict)
    problems: list = field(default_factory=list)


def walk(path) -> ContainerInfo:
    """Walk the container of ``path`` and return a :class:`ContainerInfo`.

    Minimal version: RIFF/RF64 chunk list and the fmt channel mask.  Never raises
    for malformed content.
    """
    info = ContainerInfo()
    try:
        with open(path, "rb") as f:
            data_head = f.read(12)
            f.seek(0, 2)
            size = f.tell()
            if len(data_head) < 12 or data_head[:4] not in (b"RIFF", b"RF64") or data_head[8:12] != b"WAVE":
                return info
            info.kind = "riff" if data_head[:4] == b"RIFF" else "rf64"
            pos = 12
            while pos + 8 <= size:
                f.seek(pos)
                head = f.read(8)
                cid = head[:4].decode("latin-1")
                (csize,) = struct.unpack("<I", head[4:8])
                info.chunks.append({"id": cid, "offset": pos, "size": csize})
                if cid == "data" and info.kind == "rf64" and csize == 0xFFFFFFFF:
                    break
                if csize > size - pos - 8:
                    info.problems.append({"offset": pos, "message": f"chunk '{cid}' declares {csize} bytes, "
                                          f"only {size - pos - 8} remain in the file"})
                    csize = size - pos - 8
                if cid == "fmt ":
                    body = f.read(min(csize, 40))
                    if len(body) >= 40 and struct.unpack("<H", body[:2])[0] == 0xFFFE:
                        info.channel_mask = struct.unpack("<I", body[20:24])[0]
                pos += 8 + csize + (csize & 1)
    except OSError as exc:
        info.problems.append({"offset": 0, "message": f"cannot read container: {exc}"})
    return info
