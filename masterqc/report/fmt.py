"""Formatting of values for the HTML and PDF reports.

Pure functions turning numbers from the result object into the short strings a
report shows.  The unit of a value comes from the suffix of its key
(``_lufs``, ``_dbtp``, ``_hz``, ``_s`` ...), as in the result contract.
Nothing here measures or judges; it only writes numbers down.
"""

from __future__ import annotations

import math
import re

from masterqc.contract import UNITS

#: key suffix -> (unit shown, decimals), from the one unit table (:data:`masterqc.contract.UNITS`),
#: longest suffix first so ``_dbtp`` is tried before ``_db``
UNIT_SUFFIXES = [(f"_{u.code}", u.label, u.decimals)
                 for u in sorted(UNITS.values(), key=lambda u: len(u.code), reverse=True)]

#: unit shown -> decimals, where only the unit is known (e.g. a finding's ``unit``)
UNIT_DECIMALS = {u.label: u.decimals for u in UNITS.values() if u.label}

#: key words rendered in the trade's spelling when a key is turned into a label
_WORDS = {
    "lufs": "LUFS", "lkfs": "LKFS", "lu": "LU", "dbtp": "dBTP", "dbfs": "dBFS", "db": "dB",
    "hz": "Hz", "khz": "kHz", "ms": "ms", "s": "s", "dc": "DC", "lfe": "LFE", "isrc": "ISRC",
    "bext": "bext", "ixml": "iXML", "umid": "UMID", "lra": "LRA", "tp": "TP", "id": "ID",
    "sha256": "SHA-256", "pcm": "PCM", "rf64": "RF64", "wav": "WAV", "aiff": "AIFF",
    "flac": "FLAC", "utc": "UTC", "ltas": "long-term spectrum", "src": "SRC",
}

_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f]")


def unit_of_key(key: str) -> tuple[str, int | None]:
    """``(unit, decimals)`` from a key's suffix; ``("", None)`` when it names none.

    Per-channel keys (``true_peak_dbtp_per_channel``) take the unit before
    ``_per_channel``.
    """
    k = key.lower()
    for tail in ("_per_channel", "_list", "_values"):
        if k.endswith(tail):
            k = k[: -len(tail)]
    for suffix, unit, digits in UNIT_SUFFIXES:
        if k.endswith("_per" + suffix):  # a rate: dB per kHz, samples per s ...
            head, _u = unit_of_key(k[: -len("_per" + suffix)])
            if head:
                return f"{head}/{unit}", 2
            continue
        if k.endswith(suffix):
            return unit, digits
    return "", None


#: labels of the main measurements (the values carry the unit)
KNOWN_LABELS = {
    "integrated_lufs": "Integrated loudness",
    "loudness_range_lu": "Loudness range (LRA)",
    "loudness_range_low_lufs": "LRA low end",
    "loudness_range_high_lufs": "LRA high end",
    "max_momentary_lufs": "Max momentary loudness",
    "max_short_term_lufs": "Max short-term loudness",
    "true_peak_dbtp": "True peak (highest channel)",
    "true_peak_dbtp_per_channel": "True peak per channel",
    "sample_peak_dbfs": "Sample peak (highest channel)",
    "sample_peak_dbfs_per_channel": "Sample peak per channel",
}


def label_of_key(key: str, with_unit_text: bool = False) -> str:
    """A readable label for a key: ``"max_short_term_lufs"`` -> ``"Max short term"``.

    Words of the trade keep their spelling; the unit suffix is dropped (the
    value shows it), or put in brackets with ``with_unit_text`` (for table
    headers).  The main measurements have fixed labels (:data:`KNOWN_LABELS`).
    """
    unit, _d = unit_of_key(key)
    if key in KNOWN_LABELS:
        return KNOWN_LABELS[key] + (f" ({unit})" if with_unit_text and unit else "")
    k = key
    for tail in ("_per_channel",):
        if k.endswith(tail):
            k = k[: -len(tail)]
    parts = [p for p in k.split("_") if p]
    if unit and "/" in unit and len(parts) >= 3 and parts[-2] == "per":
        parts = parts[:-3]
    elif unit and parts and _WORDS.get(parts[-1].lower(), parts[-1]) == unit:
        parts = parts[:-1]
    words = [_WORDS.get(p.lower(), p) for p in parts]
    if words:
        first = words[0]
        if first == first.lower():
            words[0] = first[:1].upper() + first[1:]
    text = " ".join(words) or key
    if key.endswith("_per_channel"):
        text += " per channel"
    return f"{text} ({unit})" if unit and with_unit_text else text


def clean_text(value) -> str:
    """A string safe to show: control characters become visible ``\\xNN`` escapes.

    Metadata strings come from incoming files; NUL padding and other control
    bytes must neither vanish silently nor break the document.  (Markup is
    escaped by the templates, not here.)
    """
    text = str(value)
    return _CONTROL.sub(lambda m: f"\\x{ord(m.group()):02x}", text)


def number(value, digits: int | None = None) -> str:
    """A number as text: ``None`` -> ``"n/a"``; floats with ``digits`` decimals.

    Negative zero after rounding is shown as ``0.0``.  The minus sign is the
    ASCII hyphen-minus, as in the findings' messages, so a search for
    ``-23.0`` finds every occurrence in the HTML and the PDF.
    """
    if value is None:
        return "n/a"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}".replace(",", "\u202f") if abs(value) >= 1_000_000 else str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            return "n/a"
        if digits is None:
            digits = 3 if abs(value) < 100 else 1
        text = f"{value:.{digits}f}"
        if float(text) == 0.0:
            text = text.lstrip("-")
        return text
    return clean_text(value)


def signed(value, digits: int = 1) -> str:
    """A difference with its sign always shown (``+1.4``, ``-0.3``); ``None`` -> ``"n/a"``."""
    if value is None or not isinstance(value, (int, float)) or isinstance(value, bool):
        return "n/a" if value is None else clean_text(value)
    text = f"{value:+.{digits}f}"
    if float(text) == 0.0:
        text = f"{0.0:.{digits}f}"
    return text


def with_unit(value, unit: str = "", digits: int | None = None) -> str:
    """``number(value)`` followed by the unit (nothing after ``n/a``)."""
    if digits is None:
        digits = UNIT_DECIMALS.get(unit)
    text = number(value, digits)
    if text == "n/a" or not unit:
        return text
    return f"{text}\u00a0{unit}"


def value_for_key(key: str, value) -> str:
    """Format a measurement value using the unit its key names.

    Lists (per-channel values) are joined with commas; dicts and lists of
    dicts are summarised by their length (the report shows them in tables).
    """
    unit, digits = unit_of_key(key)
    if isinstance(value, list):
        if all(not isinstance(v, (dict, list)) for v in value):
            if len(value) > 12:
                return f"{len(value)} values"
            inner = ", ".join(number(v, digits) for v in value)
            return f"{inner}\u00a0{unit}" if unit and value else inner or "none"
        return f"{len(value)} entries"
    if isinstance(value, dict):
        return f"{len(value)} fields"
    if unit == "s" and isinstance(value, (int, float)) and not isinstance(value, bool):
        return with_unit(float(value), "s", 3)
    return with_unit(value, unit, digits)


def clock(seconds: float | None, decimals: int = 2) -> str:
    """Seconds as ``H:MM:SS.ss`` (hours omitted below one hour: ``M:SS.ss``)."""
    if seconds is None:
        return "n/a"
    neg = seconds < 0
    scale = 10 ** decimals
    total = int(round(abs(seconds) * scale))
    whole, frac = divmod(total, scale)
    h, rem = divmod(whole, 3600)
    m, s = divmod(rem, 60)
    tail = f".{frac:0{decimals}d}" if decimals else ""
    body = f"{h}:{m:02d}:{s:02d}{tail}" if h else f"{m}:{s:02d}{tail}"
    return ("-" if neg else "") + body


def timecode(seconds: float, fps: float | None) -> str:
    """Time of day ``HH:MM:SS:FF`` at ``fps`` frames per second (non-drop count).

    Without a frame rate the fraction is shown in hundredths: ``HH:MM:SS.ss``.
    Rates like 29.97 are counted at the nominal integer rate (non-drop); the
    report says so where it uses them.  Wraps at 24 hours.
    """
    seconds = seconds % 86400.0
    if fps:
        nominal = int(round(fps))
        total_frames = int(math.floor(seconds * nominal + 1e-6))
        frames = total_frames % nominal
        whole = total_frames // nominal
        h, rem = divmod(whole, 3600)
        m, s = divmod(rem, 60)
        return f"{h:02d}:{m:02d}:{s:02d}:{frames:02d}"
    total = int(round(seconds * 100))
    whole, frac = divmod(total, 100)
    h, rem = divmod(whole, 3600)
    m, s = divmod(rem, 60)
    return f"{h:02d}:{m:02d}:{s:02d}.{frac:02d}"


def size_bytes(n: int | None) -> str:
    """A byte count with a binary-prefixed summary: ``"52 428 800 bytes (50.0 MiB)"``."""
    if n is None:
        return "n/a"
    text = f"{n:,}".replace(",", "\u202f") + " bytes"
    for unit, scale in (("GiB", 1 << 30), ("MiB", 1 << 20), ("KiB", 1 << 10)):
        if n >= scale:
            return f"{text} ({n / scale:.1f} {unit})"
    return text
