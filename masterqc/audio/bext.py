"""The Broadcast Wave ``bext`` chunk (EBU Tech 3285, versions 0, 1 and 2).

Layout of the chunk body (little-endian, offsets from the start of the body):

======  =======================  ==========================================
offset  field                    type
======  =======================  ==========================================
0       Description              char[256]
256     Originator               char[32]
288     OriginatorReference      char[32]
320     OriginationDate          char[10], yyyy-mm-dd
330     OriginationTime          char[8], hh:mm:ss
338     TimeReference            uint32 low, uint32 high: samples since midnight
346     Version                  uint16
348     UMID                     64 bytes (version >= 1)
412     LoudnessValue            int16, 100 x LUFS (version 2)
414     LoudnessRange            int16, 100 x LU
416     MaxTruePeakLevel         int16, 100 x dBTP
418     MaxMomentaryLoudness     int16, 100 x LUFS
420     MaxShortTermLoudness     int16, 100 x LUFS
422     Reserved                 180 bytes
602     CodingHistory            CR/LF-terminated ASCII lines, to the end
======  =======================  ==========================================

Every version has the same 602-byte fixed part (version 0 reserves 254 bytes
after Version, version 1 reserves 190 after the UMID).  A loudness field
holding 0x7FFF is unused (convention, from memory).
"""

from __future__ import annotations

import re
import struct

FIXED_SIZE = 602
OFFSET_TIME_REFERENCE = 338
OFFSET_VERSION = 346
OFFSET_UMID = 348
OFFSET_LOUDNESS = 412
OFFSET_CODING_HISTORY = 602
#: int16 value meaning "field not used"
LOUDNESS_UNUSED = 0x7FFF

#: (key in the result, unit) of the five version-2 loudness fields, in layout order
LOUDNESS_FIELDS = (
    ("loudness_value_lufs", "LUFS"),
    ("loudness_range_lu", "LU"),
    ("max_true_peak_level_dbtp", "dBTP"),
    ("max_momentary_loudness_lufs", "LUFS"),
    ("max_short_term_loudness_lufs", "LUFS"),
)

#: ranges outside which a stored loudness value is reported as implausible (common practice, no source)
PLAUSIBLE = {"LUFS": (-99.0, 10.0), "LU": (0.0, 99.0), "dBTP": (-99.0, 30.0)}

_TEXT_FIELDS = (
    ("description", 0, 256),
    ("originator", 256, 32),
    ("originator_reference", 288, 32),
    ("origination_date", 320, 10),
    ("origination_time", 330, 8),
)
_DATE_RE = re.compile(r"^\d{4}\D\d{2}\D\d{2}$")
_TIME_RE = re.compile(r"^\d{2}\D\d{2}\D\d{2}$")


def decode_text(raw: bytes) -> str:
    """A fixed-width text field: up to the first NUL, UTF-8 when it decodes, else Latin-1; trailing blanks dropped."""
    raw = raw.split(b"\0", 1)[0]
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")
    return text.rstrip(" \r\n\t")


def _loudness(raw: bytes, index: int):
    (value,) = struct.unpack_from("<h", raw, OFFSET_LOUDNESS + 2 * index)
    if value == LOUDNESS_UNUSED:
        return None
    return value / 100.0


def parse_bext(body: bytes, chunk_size: int, chunk_offset: int = 0, history_truncated: bool = False):
    """Parse a bext chunk body.

    ``body`` holds the bytes read (possibly fewer than ``chunk_size`` when the
    coding history was capped or the file ends early); ``chunk_offset`` is the
    file offset of the chunk header, used in problem messages.

    Returns ``(fields, problems)``: ``fields`` has ``version``, the text fields,
    ``time_reference_samples``, ``umid`` (hex, None when absent or all zero),
    the five loudness fields as floats in their units (None when the version
    has no loudness fields, the field is unused (0x7FFF) or the chunk is too
    short to hold it), ``coding_history`` and ``size_bytes``; ``problems`` is a
    list of ``{"offset", "message"}``.
    """
    problems = []
    body_offset = chunk_offset + 8
    n = len(body)
    fields = {"version": None, "size_bytes": int(chunk_size)}
    for key, off, width in _TEXT_FIELDS:
        fields[key] = decode_text(body[off:off + width]) if n > off else None
    fields["time_reference_samples"] = None
    if n >= OFFSET_TIME_REFERENCE + 8:
        lo, hi = struct.unpack_from("<II", body, OFFSET_TIME_REFERENCE)
        fields["time_reference_samples"] = (hi << 32) | lo
    version = None
    if n >= OFFSET_VERSION + 2:
        (version,) = struct.unpack_from("<H", body, OFFSET_VERSION)
    fields["version"] = version
    fields["umid"] = None
    if version is not None and version >= 1 and n >= OFFSET_UMID + 64:
        umid = body[OFFSET_UMID:OFFSET_UMID + 64]
        if any(umid):
            fields["umid"] = umid.hex()
    for i, (key, _unit) in enumerate(LOUDNESS_FIELDS):
        fields[key] = None
        if version is not None and version >= 2 and n >= OFFSET_LOUDNESS + 2 * i + 2:
            fields[key] = _loudness(body, i)
    history = body[OFFSET_CODING_HISTORY:] if n > OFFSET_CODING_HISTORY else b""
    fields["coding_history"] = decode_text(history).replace("\r\n", "\n").strip("\n") if history else ""

    # The chunk length, checked against what its version requires.
    if chunk_size < FIXED_SIZE:
        need = FIXED_SIZE
        if version is None:
            problems.append({"offset": chunk_offset, "message":
                             f"bext chunk is {chunk_size} bytes, too short to hold its Version field "
                             f"(needs {OFFSET_VERSION + 2}; every version needs {FIXED_SIZE}, EBU Tech 3285)"})
        else:
            lost = []
            if chunk_size < OFFSET_VERSION + 2:
                lost.append("Version")
            if version >= 1 and chunk_size < OFFSET_UMID + 64:
                lost.append("UMID")
            if version >= 2 and chunk_size < OFFSET_LOUDNESS + 10:
                lost.append("loudness fields")
            what = f"; missing: {', '.join(lost)}" if lost else ""
            problems.append({"offset": chunk_offset, "message":
                             f"bext chunk is {chunk_size} bytes, version {version} requires at least "
                             f"{need} (EBU Tech 3285){what}"})
    if version is not None and version > 2:
        problems.append({"offset": body_offset + OFFSET_VERSION, "message":
                         f"bext version {version} is newer than version 2; fields were read as version 2"})
    if version is not None and version >= 2 and n >= OFFSET_LOUDNESS + 10:
        for i, (key, unit) in enumerate(LOUDNESS_FIELDS):
            (raw,) = struct.unpack_from("<h", body, OFFSET_LOUDNESS + 2 * i)
            value = fields[key]
            if value is None:
                continue
            low, high = PLAUSIBLE[unit]
            if not low <= value <= high:
                problems.append({"offset": body_offset + OFFSET_LOUDNESS + 2 * i, "message":
                                 f"bext {key} holds {raw} ({value:.2f} {unit}), outside any plausible range"})
    date = fields.get("origination_date")
    if date and not _DATE_RE.match(date):
        problems.append({"offset": body_offset + 320, "message":
                         f"bext OriginationDate {date!r} is not yyyy-mm-dd"})
    tm = fields.get("origination_time")
    if tm and not _TIME_RE.match(tm):
        problems.append({"offset": body_offset + 330, "message":
                         f"bext OriginationTime {tm!r} is not hh:mm:ss"})
    if history_truncated:
        problems.append({"offset": body_offset + OFFSET_CODING_HISTORY, "message":
                         f"bext CodingHistory is {chunk_size - FIXED_SIZE} bytes; only the first "
                         f"{max(n - FIXED_SIZE, 0)} were read"})
    return fields, problems
