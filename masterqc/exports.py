"""Spreadsheet exports: ``<stem>.events.csv`` per master and ``index.csv`` per batch.

Both are plain CSV (RFC 4180: comma separated, double-quoted where needed,
CRLF line ends), UTF-8 without a byte-order mark, one header row, numbers
with a ``.`` decimal point and no thousands separator.  A text cell that a
spreadsheet would take for a formula (starting ``=``, ``+``, ``-``, ``@``, a
tab or a carriage return) is written with a leading ``'``.

``events.csv`` -- one row per located event of a master, in time order:

=================  ==============================================================
column             meaning
=================  ==============================================================
kind               ``true_peak_over``, ``clipping``, ``dropout``, ``nonfinite``
                   or ``low_correlation``
channels           the channels the event touches, joined by ``+`` (``L+R``);
                   empty where the measurement is not per channel
start_s, end_s     start and end in seconds from the first sample (6 decimals)
duration_s         ``end_s - start_s``
start_timecode,    the same instants as timecode HH:MM:SS:FF (``;`` before the
end_timecode       frames when drop-frame) from the file's start time (bext or
                   iXML; 00:00:00:00 when it has none)
timecode_fps       the frame rate of those labels: the spec's
                   ``metadata.timecode_fps``, else the rate the file declares,
                   else 25
value, unit        the event's figure: the highest true peak in dBTP (overs),
                   the frames spanned in samples (clipping), the length in
                   seconds (dropouts); empty where there is none
detail             words: polarity and runs joined (clipping), silence / frozen
                   value (dropouts)
=================  ==============================================================

``index.csv`` -- one row per file of a batch, worst first (see
:data:`INDEX_COLUMNS`); ``problems`` holds every error, failure and warning of
the file, worst first, separated by `` | ``.
"""

from __future__ import annotations

import csv
import io

from masterqc.problems import SEVERITY, ranked_problems

EVENT_COLUMNS = ("kind", "channels", "start_s", "end_s", "duration_s", "start_timecode", "end_timecode",
                 "timecode_fps", "value", "unit", "detail")

INDEX_COLUMNS = ("file", "release", "verdict", "error_count", "fail_count", "warn_count", "problems",
                 "integrated_lufs", "true_peak_dbtp", "loudness_range_lu", "duration_s", "duration",
                 "sample_rate_hz", "bit_depth", "channels", "spec", "how", "change", "sha256", "report", "json")

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _text(value) -> str:
    """A text cell, guarded against being read as a spreadsheet formula."""
    s = "" if value is None else str(value)
    return "'" + s if s.startswith(_FORMULA_START) else s


def _num(value, decimals: int | None = None) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, int) or decimals is None:
        return str(value)
    text = f"{float(value):.{decimals}f}"
    return text[1:] if text.startswith("-") and float(text) == 0 else text


def _csv(header, rows) -> bytes:
    buf = io.StringIO(newline="")
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(header)
    w.writerows(rows)
    return buf.getvalue().encode("utf-8")


def clock_text(seconds) -> str:
    """``m:ss`` below an hour, else ``h:mm:ss`` (rounded to the second); empty for None."""
    if seconds is None:
        return ""
    s = int(round(float(seconds)))
    h, m, sec = s // 3600, s // 60 % 60, s % 60
    return f"{h}:{m:02d}:{sec:02d}" if h else f"{m}:{sec:02d}"


# ---------------------------------------------------------------- events

def _timecoder(result: dict):
    """``(fps name, seconds -> label)``, or ``("", None)`` when the result has no sample rate."""
    from masterqc import timecode as tc
    meta = result.get("metadata") or {}
    fps = meta.get("timecode_fps") or meta.get("declared_timecode_fps") or tc.DEFAULT_FPS
    try:
        tc.frame_rate(str(fps))
        tc.timecode_for(0.0, result, str(fps))
    except (ValueError, KeyError, TypeError):
        return "", None
    return str(fps), (lambda s: tc.timecode_for(max(float(s), 0.0), result, str(fps)))


def event_records(result: dict) -> list[dict]:
    """Every located event of a result as ``{kind, channels, start_s, end_s, value, unit, detail}``, in time order."""
    m = result.get("measurements") or {}
    out = []
    for e in m.get("true_peak_over_events") or []:
        out.append({"kind": "true_peak_over", "channels": e.get("channel", ""), "start_s": e["start_s"],
                    "end_s": e["end_s"], "value": e.get("peak_dbtp"), "decimals": 2, "unit": "dBTP", "detail": ""})
    if not m.get("true_peak_over_events"):     # a result measured before the events key existed
        for a, b in m.get("true_peak_over_ranges_s") or []:
            out.append({"kind": "true_peak_over", "channels": "", "start_s": a, "end_s": b, "value": None,
                        "unit": "", "detail": ""})
    for e in m.get("clipped_run_events") or []:
        runs = e.get("runs", 1)
        out.append({"kind": "clipping", "channels": e.get("channel", ""), "start_s": e["start_s"],
                    "end_s": e["end_s"], "value": e.get("samples"), "unit": "samples",
                    "detail": f"{e.get('polarity', '')}" + (f", {runs} runs" if runs and runs > 1 else "")})
    for e in m.get("dropout_events") or []:
        kind = e.get("kind", "")
        detail = "digital silence" if kind == "silence" else (
            f"frozen at {e.get('value', 0.0):.6g}" if kind == "frozen" else "silence and frozen values")
        out.append({"kind": "dropout", "channels": e.get("channel", ""), "start_s": e["start_s"],
                    "end_s": e["end_s"], "value": e["end_s"] - e["start_s"], "decimals": 6, "unit": "s",
                    "detail": detail})
    for a, b in m.get("nonfinite_where_s") or []:
        out.append({"kind": "nonfinite", "channels": "", "start_s": a, "end_s": b, "value": None, "unit": "",
                    "detail": "NaN or infinite samples"})
    for a, b in m.get("phase_correlation_below_where_s") or []:
        out.append({"kind": "low_correlation", "channels": "", "start_s": a, "end_s": b, "value": None,
                    "unit": "", "detail": "channel correlation below the threshold"})
    out.sort(key=lambda r: (float(r["start_s"]), r["kind"]))
    return out


def events_csv(result: dict) -> bytes:
    """The ``events.csv`` text of one result (a header row alone when it has no events)."""
    fps, tc = _timecoder(result)
    rows = []
    for r in event_records(result):
        a, b = float(r["start_s"]), float(r["end_s"])
        rows.append([r["kind"], _text(r["channels"]), _num(a, 6), _num(b, 6), _num(b - a, 6),
                     tc(a) if tc else "", tc(b) if tc else "", fps,
                     _num(r["value"], r.get("decimals")), r["unit"], _text(r["detail"])])
    return _csv(EVENT_COLUMNS, rows)


# ---------------------------------------------------------------- index

def index_rows(summary: dict) -> list[list[str]]:
    """The rows of ``index.csv``: every file of a batch summary, worst first, then by name."""
    files = sorted(summary.get("files", []),
                   key=lambda f: (SEVERITY.get(f.get("verdict"), 3 if f.get("verdict") == "pass" else 9), f["rel"]))
    rows = []
    for f in files:
        problems = ranked_problems(f.get("problems") or [])
        counts = {s: sum(1 for p in problems if p["status"] == s) for s in ("error", "fail", "warn")}
        outs = f.get("outputs") or {}
        rows.append([_text(f["rel"]), _text(f.get("release") or ""), f["verdict"],
                     counts["error"], counts["fail"], counts["warn"],
                     _text(" | ".join(f"{p['status'].upper()} {p['message']}" for p in problems)),
                     _num(f.get("integrated_lufs"), 1), _num(f.get("true_peak_dbtp"), 1),
                     _num(f.get("loudness_range_lu"), 1), _num(f.get("duration_s"), 3),
                     clock_text(f.get("duration_s")), _num(f.get("sample_rate_hz")), _num(f.get("bit_depth")),
                     _num(f.get("channels")), _text(f.get("spec") or ""),
                     f.get("how") or ("reused" if f.get("reused") else ""),
                     f.get("change") or "", f.get("sha256") or "", _text(outs.get("html", "")),
                     _text(outs.get("json", ""))])
    return rows


def index_csv(summary: dict) -> bytes:
    """The ``index.csv`` text of a batch summary."""
    return _csv(INDEX_COLUMNS, index_rows(summary))
