"""The report's view model: everything the templates show, prepared from a result.

:func:`build_view` turns a result object (``measure_file()`` output, plus
``spec``, ``findings``, ``verdict`` and ``normalisation`` after a check) into a
plain dict of strings, rows and SVG plots.  The templates only loop and print.

Rules:

* Nothing is measured or judged here.  Numbers are formatted, series are
  handed to :mod:`masterqc.report.plots` as they arrive.
* Every value is read from the typed result contract (:mod:`masterqc.contract`):
  findings as :class:`~masterqc.contract.Finding` (numeric limits, target and
  units as attributes), series as :class:`~masterqc.contract.Series` (each value
  list with its named axis), measurements by their one key.  No key is guessed,
  no text is parsed back into numbers.  A section whose data is absent says
  "not measured" (naming the keys), never raises.
* Strings from the file (metadata) are passed as plain text and escaped by the
  template; control characters are made visible (:func:`fmt.clean_text`).
* Deterministic: the same result gives the same view (no clock is read).
"""

from __future__ import annotations

import os
import re

from masterqc.contract import SHORT_PROGRAMME_S, Finding, Normalisation, parse_finding, parse_series
from masterqc.report import fmt
from masterqc.report import plots
from masterqc.report.advice import advice_for

#: the check ids whose limits the plots draw (exact ids the judge writes)
CHECK_INTEGRATED = "loudness.integrated"
CHECK_TRUE_PEAK = "peaks.true_peak"

#: status -> (word shown, shape name used by the template's icon): the one set of state words
#: (documented in DEVELOPERS.md, "State words"); no other word is used for a state
STATUS_WORDS = {
    "pass": ("PASS", "circle"),
    "warn": ("WARN", "triangle"),
    "fail": ("FAIL", "square"),
    "skipped": ("SKIPPED", "dash"),
    "error": ("ERROR", "diamond"),
    "unjudged": ("MEASURED ONLY", "ring"),
}

#: what each state word means (shown in the report's appendix and in DEVELOPERS.md)
STATUS_MEANINGS = [
    ("pass", "the requirement is met."),
    ("warn", "met, but close to the limit; or missed where the spec counts a miss as a warning."),
    ("fail", "the requirement is missed."),
    ("error", "the check could not be completed (unreadable file, or a fault in masterqc)."),
    ("skipped", "the quantity cannot be measured for this file (e.g. a loudness range of a 2 s file); "
                "it does not change the verdict."),
    ("unjudged", "no delivery spec was applied: the file was measured, not judged."),
]

#: status -> colour of its icon (the CSS uses the same values for the words; icons carry the
#: colour as an attribute because not every renderer resolves ``currentColor`` inside inline SVG)
STATUS_COLOURS = {
    "pass": "#007a5a", "warn": "#d99500", "fail": "#b84a00", "error": "#9c4a7a",
    "skipped": "#6e6e6e", "unjudged": "#0061a0",
}

#: findings are listed worst first
STATUS_ORDER = {"error": 0, "fail": 1, "warn": 2, "skipped": 3, "pass": 4}

#: how many time ranges a finding lists in full before it summarises them
MAX_WHERE = 4
#: how many individual events (clipped runs, dropouts...) the events table lists
MAX_EVENT_ROWS = 12

CAUTIONS = [
    "masterqc is a measurement aid. The receiving party's own delivery spec and QC govern "
    "acceptance; a PASS here is not an acceptance by anyone.",
    "Loud content: masters that fail often hold full-scale peaks, clipping or inter-sample "
    "overs. Set your monitoring level low before you play the file, and raise it slowly.",
    "Measurements follow the methods and settings in the appendix; another meter set "
    "differently (true-peak oversampling, gating, spectrum resolution) may read slightly differently.",
]

#: the certificate's fields, in order: key -> label (set by the spec's ``report:`` section or ``--field``)
CERTIFICATE_FIELDS = [("client", "Client"), ("job", "Job / order no."), ("operator", "Operator")]

_SENTENCE_END = re.compile(r"(?<=[a-z0-9)\]%])\. (?=[A-Z])")


def headline(message: str) -> str:
    """The first sentence of a finding's message: what the certificate shows on one line."""
    text = str(message or "").strip()
    parts = _SENTENCE_END.split(text, maxsplit=1)
    first = parts[0]
    return first if first.endswith((".", "!", "?")) else first + "."


# ----------------------------------------------------------------- small helpers

def _get(d, *path, default=None):
    """``d[path[0]][path[1]]...`` or ``default`` when any step is missing or not a dict."""
    for key in path:
        if not isinstance(d, dict) or key not in d:
            return default
        d = d[key]
    return d


def _is_number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _is_ranges(v) -> bool:
    return isinstance(v, list) and all(
        isinstance(r, (list, tuple)) and len(r) == 2 and all(_is_number(x) for x in r) for r in v)


def _numbers(v) -> bool:
    return isinstance(v, list) and len(v) > 0 and all(x is None or _is_number(x) for x in v)


class TimeLabels:
    """Times shown as the file's timecode when it has a start time, else as m:ss from its start."""

    def __init__(self, result: dict):
        self.result = result
        meta = result.get("metadata") or {}
        self.rate_hz = int(_get(result, "format", "sample_rate_hz", default=0) or 0)
        self.start_samples = meta.get("time_reference_samples")
        # the spec's rate, else the rate the file declares (iXML), else the timecode module's default
        self.fps = meta.get("timecode_fps") or meta.get("declared_timecode_fps")
        self.has_start = self.start_samples is not None and self.rate_hz > 0
        self._tc = None
        if self.has_start:
            try:
                from masterqc import timecode as _tc
                self._tc = _tc
                self.fps_name = str(self.fps or _tc.DEFAULT_FPS)
                _tc.frame_rate(self.fps_name)
            except (ImportError, ValueError):
                self._tc = None
                self.has_start = False

    def at(self, seconds: float) -> str:
        """One instant: ``"01:00:12:10 (0:12.40)"`` with a start time, else ``"0:12.40"``."""
        rel = fmt.clock(seconds, 2)
        if self.has_start and self._tc is not None:
            return f"{self.timecode(seconds)} ({rel})"
        return rel

    def timecode(self, seconds: float) -> str:
        return self._tc.timecode_for(max(seconds, 0.0), self.result, self.fps_name)

    def span(self, a: float, b: float) -> str:
        """A range ``start–end``; a range shorter than 10 ms is shown as its start only."""
        if b - a < 0.01:
            return self.at(a)
        if self.has_start and self._tc is not None:
            ta, tb = self.timecode(a), self.timecode(b)
            tc = ta if ta == tb else f"{ta}\u2013{tb}"  # within one frame: one label
            return f"{tc} ({fmt.clock(a, 2)}\u2013{fmt.clock(b, 2)})"
        return f"{fmt.clock(a, 2)}\u2013{fmt.clock(b, 2)}"

    def axis(self) -> plots.TimeAxis:
        """The plots' time axis: timecode ticks when the file has a start time."""
        if self.has_start and self._tc is not None:
            fr = self._tc.frame_rate(self.fps_name)
            suffix = " drop-frame" if fr.drop_frame else ""
            return _TimecodeAxis(self, f"timecode (HH:MM:SS:FF at {fr.name} fps{suffix})")
        return plots.TimeAxis()


class _TimecodeAxis(plots.TimeAxis):
    """A :class:`plots.TimeAxis` whose ticks are the file's timecode (the reader's timecode rules)."""

    def __init__(self, labels: TimeLabels, label: str):
        super().__init__(labels.start_samples / labels.rate_hz, None)
        self._labels = labels
        self._label_text = label

    @property
    def label(self) -> str:
        return self._label_text

    def tick(self, seconds: float) -> str:
        return self._labels.timecode(seconds)


def where_text(ranges, labels: TimeLabels) -> tuple[str, int]:
    """``(text, count)`` of a finding's ranges, the first :data:`MAX_WHERE` spelled out."""
    if not _is_ranges(ranges) or not ranges:
        return "", 0
    if len(ranges) <= MAX_WHERE:
        return "; ".join(labels.span(float(a), float(b)) for a, b in ranges), len(ranges)
    first = [labels.span(float(a), float(b)) for a, b in ranges[:MAX_WHERE - 1]]
    start = min(float(a) for a, _b in ranges)
    end = max(float(b) for _a, b in ranges)
    text = (f"{len(ranges):,} places from {labels.at(start)} to {labels.at(end)}; the first {len(first)} listed: "
            + "; ".join(first))
    return text, len(ranges)


# ----------------------------------------------------------------- verdict and findings

def _check_label(check: str) -> str:
    """``"loudness.integrated"`` -> ``"Loudness · integrated"``."""
    parts = re.split(r"[./]", str(check))
    words = [fmt.label_of_key(p) if i == 0 else fmt.label_of_key(p).lower() for i, p in enumerate(parts)]
    fixed = []
    for w in words:
        for low, spelled in (("lufs", "LUFS"), ("dbtp", "dBTP"), ("isrc", "ISRC"), ("bext", "bext"),
                             ("lra", "LRA"), ("dc", "DC"), ("lfe", "LFE"), ("db", "dB"),
                             ("nyquist", "Nyquist")):
            w = re.sub(rf"\b{low}\b", spelled, w, flags=re.I)
        fixed.append(w)
    return " \u00b7 ".join(fixed)


def _measured_text(f: Finding) -> str:
    if f.measured_text:
        # exactly the value the judge compared; value and unit kept on one line
        return fmt.clean_text(f.measured_text).replace(" ", "\u00a0")
    if f.measured is None:
        return "n/a"
    if isinstance(f.measured, list):
        return ", ".join(fmt.clean_text(v) for v in f.measured) or "none"
    if _is_number(f.measured):
        return fmt.with_unit(f.measured, f.unit or "", f.decimals)
    return fmt.clean_text(f.measured)


def _miss_text(f: Finding) -> str:
    if not _is_number(f.miss):
        return ""
    return fmt.with_unit(float(f.miss), f.miss_unit or "", f.decimals)


def limit_display(limit) -> str:
    """A finding's limit text for reading: ``<=`` and ``>=`` as the signs, ``..`` as "to"."""
    if not limit:
        return "\u2014"
    text = fmt.clean_text(limit)
    return text.replace("<=", "\u2264").replace(">=", "\u2265").replace(" .. ", " to ")


def _findings(result: dict) -> list[Finding]:
    """The result's findings as :class:`Finding`; an item that is not a finding becomes an error finding."""
    out = []
    for item in result.get("findings") or []:
        f = parse_finding(item)
        if f is None:
            f = Finding(check=str(item.get("check", "")) if isinstance(item, dict) else "",
                        status="error", message=f"not a valid finding in the result: {fmt.clean_text(item)[:200]}")
        out.append(f)
    return out


def _finding(result: dict, check: str) -> Finding | None:
    """The finding with this exact check id, or None."""
    return next((f for f in _findings(result) if f.check == check), None)


def findings_view(result: dict, labels: TimeLabels) -> list[dict]:
    """Rows of the findings table, worst first (stable within a status)."""
    rows = []
    for i, f in enumerate(_findings(result)):
        word, shape = STATUS_WORDS[f.status]
        where, n_where = where_text(f.where_s, labels)
        rows.append({
            "order": (STATUS_ORDER[f.status], i),
            "status": f.status, "word": word, "shape": shape,
            "check": fmt.clean_text(f.check),
            "label": _check_label(f.check),
            "measured": _measured_text(f),
            "limit": limit_display(f.limit),
            "miss": _miss_text(f) or "\u2014",
            "where": where or "\u2014",
            "where_count": n_where,
            "message": fmt.clean_text(f.message),
            "headline": fmt.clean_text(headline(f.message)),
            "advice": fmt.clean_text(advice_for(f, result)) if f.status in ("fail", "warn", "error") else "",
            "severity": f.severity or "",
        })
    rows.sort(key=lambda r: r["order"])
    return rows


def verdict_view(result: dict, findings: list[dict]) -> dict:
    """The first lines: status word, one-line summary, and what to fix."""
    verdict = result.get("verdict")
    judged = verdict in ("pass", "warn", "fail", "error")
    status = verdict if judged else "unjudged"
    word, shape = STATUS_WORDS[status]
    counts = {s: sum(1 for f in findings if f["status"] == s) for s in STATUS_ORDER}
    n = len(findings)
    spec_name = fmt.clean_text(_get(result, "spec", "name", default="") or "")
    spec_ref = f"the spec \u201c{spec_name}\u201d" if spec_name else "the spec"
    if not judged:
        summary = "Measured only: no delivery spec was applied, so nothing was judged"
    elif status == "pass":
        summary = f"Meets {spec_ref}: all {counts['pass']} judged checks passed"
    elif status == "warn":
        summary = (f"Meets {spec_ref} with {_plural(counts['warn'], 'warning')}: "
                   f"{counts['pass']} of {n - counts['skipped']} judged checks passed cleanly")
    elif status == "fail":
        summary = (f"Does not meet {spec_ref}: {_plural(counts['fail'], 'check')} failed"
                   + (f", {_plural(counts['warn'], 'warning')}" if counts["warn"] else ""))
    elif "measurements" not in result:
        summary = "Could not be checked: the master could not be read, so nothing was measured"
    else:
        summary = (f"Could not be fully judged against {spec_ref}: {_plural(counts['error'], 'check')} "
                   "ended in an error" + (f", {counts['fail']} failed" if counts["fail"] else ""))
    if judged and counts["skipped"]:
        summary += f" ({counts['skipped']} skipped: not measurable for this file)"
    summary += "."
    fixes, seen = [], set()
    for f in findings:
        if f["status"] in ("error", "fail", "warn") and f["advice"] and f["advice"] not in seen:
            seen.add(f["advice"])  # one line per piece of advice (two conversion targets, one limiter setting)
            fixes.append(f)
    fixes_title = "What to fix" if any(f["status"] in ("error", "fail") for f in fixes) else "What to look at"
    # printed in every PDF page's head; built from fixed words only (it goes into CSS)
    page_mark = f"verdict: {word}" + (f" ({_plural(counts['fail'], 'fail')})" if status == "fail" else "")
    return {"status": status, "word": word, "shape": shape, "summary": summary, "page_mark": page_mark,
            "fixes_title": fixes_title,
            "fixes": fixes, "more_fixes": 0, "counts": counts,
            "judged": judged}


def _plural(n: int, word: str) -> str:
    return f"{n} {word}" + ("" if n == 1 else "s")


# ----------------------------------------------------------------- the certificate (page one)

def format_words(f: dict) -> str:
    """``"WAV, PCM 24-bit, 48 kHz"`` from the result's ``format``."""
    parts = []
    if f.get("container"):
        parts.append(fmt.clean_text(f["container"]).upper())
    enc = str(f.get("encoding") or "")
    depth = f.get("bit_depth")
    if enc.startswith("pcm"):
        parts.append(f"PCM {depth}-bit" if depth else "PCM")
    elif enc.startswith("float") or enc == "double":
        parts.append(f"{depth}-bit float" if depth else "floating point")
    elif enc:
        parts.append(fmt.clean_text(enc) + (f", {depth}-bit" if depth else ""))
    rate = f.get("sample_rate_hz")
    if _is_number(rate):
        parts.append(f"{rate / 1000:g}\u00a0kHz")
    return ", ".join(parts) or "unknown"


def report_fields(result: dict) -> dict:
    """The certificate's fields (client, job, operator, date) from the result's ``spec.report``."""
    fields = _get(result, "spec", "report", default=None)
    if not isinstance(fields, dict):
        return {}
    return {str(k): fmt.clean_text(v) for k, v in fields.items() if v not in (None, "")}


#: the key figures of the certificate: (measurement key, label)
KEY_FIGURES = [
    ("integrated_lufs", "Integrated"), ("loudness_range_lu", "Loudness range"),
    ("max_momentary_lufs", "Max momentary"), ("max_short_term_lufs", "Max short-term"),
    ("true_peak_dbtp", "True peak"), ("sample_peak_dbfs", "Sample peak"),
]


def certificate_view(result: dict, findings: list[dict], verdict: dict) -> dict:
    """Page one: verdict, file identity, spec, every failure and warning, key figures, fields, sign-off."""
    f = result.get("format") or {}
    file = result.get("file") or {}
    spec = result.get("spec") or {}
    m = result.get("measurements") or {}
    path = str(file.get("path") or "")
    identity = [("File", fmt.clean_text(os.path.basename(path) or "(unnamed)")),
                ("SHA-256", fmt.clean_text(file.get("sha256") or "not computed"))]
    dur = f.get("duration_s")
    if _is_number(dur):
        identity.append(("Duration", f"{fmt.clock(dur, 3)} ({fmt.number(float(dur), 3)}\u00a0s)"))
    if f:
        identity.append(("Format", format_words(f)))
        layout = " ".join(fmt.clean_text(x) for x in (f.get("channel_layout") or []))
        if f.get("channels"):
            identity.append(("Channels", f"{f['channels']}" + (f" ({layout})" if layout else "")))
    if spec.get("name") or spec.get("sha256"):
        spec_rows = [("Spec", fmt.clean_text(spec.get("name") or "(unnamed)")),
                     ("Spec version", fmt.clean_text(spec.get("version") or "not stated in the spec")),
                     ("Spec SHA-256", fmt.clean_text(spec.get("sha256") or "n/a"))]
    else:
        spec_rows = [("Spec", "none: measured only, nothing judged")]
    fields = report_fields(result)
    field_rows = [(label, fields.get(key, "")) for key, label in CERTIFICATE_FIELDS]
    problems = [r for r in findings if r["status"] in ("error", "fail", "warn")]
    figures = []
    for key, label in KEY_FIGURES:
        if key in m:
            figures.append((label, fmt.value_for_key(key, m[key])))
    if _is_number(f.get("sample_rate_hz")):
        figures.append(("Sample rate", f"{f['sample_rate_hz'] / 1000:g}\u00a0kHz"))
    if f.get("bit_depth"):
        figures.append(("Bit depth", f"{f['bit_depth']}-bit"
                        + (" float" if str(f.get("encoding", "")).startswith("float") else "")))
    c = verdict["counts"]
    judged = len(findings)
    tally = (f"{judged} check{'' if judged == 1 else 's'}: {c['pass']} pass, {c['warn']} warn, {c['fail']} fail"
             + (f", {c['error']} error" if c["error"] else "")
             + (f", {c['skipped']} skipped (not measurable for this file)" if c["skipped"] else "") + ".")
    return {"identity": identity, "spec": spec_rows, "fields": field_rows, "date": fields.get("date", ""),
            "problems": problems, "figures": figures, "tally": tally if judged else "",
            "dense": len(problems) > 10}


# ----------------------------------------------------------------- format and metadata

def format_rows(result: dict) -> list[tuple[str, str]]:
    f = result.get("format") or {}
    file = result.get("file") or {}
    rows = []
    if file.get("path"):
        rows.append(("File", fmt.clean_text(file["path"])))
    if "size_bytes" in file:
        rows.append(("Size", fmt.size_bytes(file.get("size_bytes"))))
    if f:
        kind = _get(result, "metadata", "container_kind")
        rows.append(("Format", format_words(f) + (f" ({fmt.clean_text(kind)} container)" if kind else "")))
    if f.get("channels"):
        layout = " ".join(fmt.clean_text(x) for x in (f.get("channel_layout") or []))
        src = {"channel_mask": "from the channel mask", "conventional": "conventional order for the count",
               "override": "set by the user or spec", "unknown": "unknown: every channel weighted 1.0"
               }.get(f.get("channel_layout_source"), "")
        text = f"{f['channels']}" + (f" ({layout})" if layout else "") + (f", {src}" if src else "")
        rows.append(("Channels", text))
        if f.get("channel_weights"):
            rows.append(("Loudness weights", ", ".join(
                f"{lab} {w:g}" for lab, w in zip(f.get("channel_layout") or [], f["channel_weights"]))))
    if f.get("frames"):
        dur = f.get("duration_s")
        rows.append(("Duration", f"{fmt.clock(dur, 3)} ({fmt.number(dur, 3)}\u00a0s, "
                     f"{fmt.number(f['frames'])} frames)" if _is_number(dur) else fmt.number(f["frames"])))
    labels = TimeLabels(result)
    if labels.has_start:
        rows.append(("Start timecode", f"{labels.timecode(0.0)} ({labels.fps_name} fps)"))
    return rows


#: metadata keys not listed in the report's table: container internals (the format table shows what they
#: mean; the JSON keeps them) and keys shown elsewhere
_META_SKIP = {"chunks", "problems", "container_kind", "time_reference_samples", "fmt", "audio_data"}


def _flatten(prefix: str, value, out: list, depth: int = 0):
    if isinstance(value, dict) and depth < 3:
        for k in sorted(value, key=str):
            _flatten(f"{prefix}.{k}" if prefix else str(k), value[k], out, depth + 1)
    elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value) and depth < 3:
        for i, v in enumerate(value[:50]):
            _flatten(f"{prefix}[{i}]", v, out, depth + 1)
    else:
        if isinstance(value, list):
            text = ", ".join(fmt.clean_text(v) for v in value[:64])
            if len(value) > 64:
                text += f" \u2026 ({len(value)} items)"
        elif value is None:
            text = "\u2014"
        elif value == "":
            text = "(empty)"
        else:
            text = fmt.clean_text(value)
        if len(text) > 2000:
            text = text[:2000] + f" \u2026 ({len(text)} characters)"
        out.append((fmt.clean_text(prefix), text))


def metadata_view(result: dict) -> dict:
    meta = result.get("metadata") or {}
    rows: list = []
    absent = []
    for key in sorted(meta, key=str):
        if key in _META_SKIP:
            continue
        if meta[key] is None or meta[key] == {} or meta[key] == []:
            absent.append(fmt.clean_text(key))
            continue
        _flatten(str(key), meta[key], rows)
    rows = [(k, v) for k, v in rows if v != "\u2014"]
    if meta.get("container_kind"):
        rows.insert(0, ("container_kind", fmt.clean_text(meta["container_kind"])))
    if meta.get("time_reference_samples") is not None:
        rows.append(("time_reference_samples", fmt.number(meta["time_reference_samples"])))
    chunks = [{"id": fmt.clean_text(c.get("id", "")), "offset": fmt.number(c.get("offset")),
               "size": fmt.number(c.get("size"))} for c in (meta.get("chunks") or []) if isinstance(c, dict)]
    problems = [{"offset": fmt.number(p.get("offset")) if p.get("offset") is not None else "\u2014",
                 "message": fmt.clean_text(p.get("message", ""))}
                for p in (meta.get("problems") or []) if isinstance(p, dict)]
    return {"rows": rows, "chunks": chunks, "problems": problems, "absent": ", ".join(absent)}


# ----------------------------------------------------------------- plot sections

def _not_measured(keys) -> str:
    """The sentence shown where a section's data is absent, naming the keys looked for."""
    return "Not measured: the result holds no " + " or ".join(f"\u201c{k}\u201d" for k in keys) + "."


def _rows_for(m: dict, keys) -> list[tuple[str, str]]:
    return [(fmt.label_of_key(k), fmt.value_for_key(k, m[k])) for k in keys if k in m]


def loudness_view(result: dict, labels: TimeLabels, duration_s: float) -> dict:
    m = result.get("measurements") or {}
    series = parse_series(result.get("series"))
    mom = series.pair("momentary_lufs", "loudness_time_s")
    st = series.pair("short_term_lufs", "loudness_time_s")
    rows = _rows_for(m, ["integrated_lufs", "loudness_range_lu", "max_momentary_lufs", "max_short_term_lufs"])
    band = None
    f = _finding(result, CHECK_INTEGRATED)
    note = ""
    if f is not None and (f.limit_low is not None or f.limit_high is not None):
        band = (f.limit_low, f.limit_high)
    duration = _get(result, "format", "duration_s")
    if _is_number(duration) and duration < SHORT_PROGRAMME_S and _is_number(m.get("loudness_range_lu")):
        note = ("Loudness range is of little meaning for a programme under one minute "
                "(EBU Tech 3342: not recommended under one minute). ")
    if mom is None and st is None:
        return {"svg": None, "rows": rows, "note": _not_measured(["momentary_lufs", "short_term_lufs"]),
                "present": bool(rows)}
    if band and band[0] is not None and band[1] is not None:
        note += (f"Hatched band: the spec's integrated-loudness range {fmt.number(band[0], 1)} to "
                 f"{fmt.number(band[1], 1)} LUFS.")
    elif band:
        side = "at most" if band[1] is not None else "at least"
        note += (f"Dotted line: the spec's integrated-loudness limit, {side} "
                 f"{fmt.number(band[1] if band[1] is not None else band[0], 1)} LUFS.")
    svg = plots.loudness_plot(duration_s, labels.axis(), momentary=mom, short_term=st,
                              integrated_lufs=m.get("integrated_lufs") if _is_number(m.get("integrated_lufs"))
                              else None, target_band=band)
    return {"svg": svg, "rows": rows, "note": note, "present": True}


def _ceiling(result: dict):
    f = _finding(result, CHECK_TRUE_PEAK)
    if f is not None and f.limit_high is not None:
        return f.limit_high, "spec"
    v = (result.get("measurements") or {}).get("true_peak_ceiling_dbtp")
    if _is_number(v):
        return float(v), "measurement"
    return None, None


def _ranges_of(value) -> list:
    """Time ranges ``[[start_s, end_s], ...]`` as tuples (empty when not ranges)."""
    return [(float(a), float(b)) for a, b in value] if _is_ranges(value) else []


def true_peak_view(result: dict, labels: TimeLabels, duration_s: float) -> dict:
    m = result.get("measurements") or {}
    fmt_ = result.get("format") or {}
    rows = _rows_for(m, ["true_peak_dbtp", "sample_peak_dbfs"])
    ch = fmt_.get("channel_layout") or []
    for key, unit in (("true_peak_dbtp_per_channel", "dBTP"), ("sample_peak_dbfs_per_channel", "dBFS")):
        per = m.get(key)
        if _numbers(per):
            rows.append((fmt.label_of_key(key), ", ".join(
                f"{fmt.clean_text(lab)} {fmt.number(v, fmt.UNIT_DECIMALS[unit])}"
                for lab, v in zip(ch or [f"ch{i + 1}" for i in range(len(per))], per))
                + f"\u00a0{unit}"))
    overs = _ranges_of(m.get("true_peak_over_ranges_s"))
    ceiling, source = _ceiling(result)
    if overs or "true_peak_over_ranges_s" in m:
        rows.append(("Overs above the ceiling", (f"{len(overs):,}" if overs else "none") + (
            f" (ceiling {fmt.number(ceiling, 1)} dBTP)" if ceiling is not None else "")))
    env = parse_series(result.get("series")).pair("true_peak_envelope_dbtp", "true_peak_envelope_time_s")
    if env is None:
        return {"svg": None, "rows": rows, "present": bool(rows),
                "note": _not_measured(["true_peak_envelope_dbtp"])}
    envelopes = [env]
    names = ["all channels (max)"]
    svg = plots.true_peak_plot(duration_s, labels.axis(), envelopes, names, ceiling_dbtp=ceiling,
                               over_ranges=overs)
    note = ""
    if ceiling is not None:
        note = (f"Dashed line: the {'spec' if source == 'spec' else 'measurement'} ceiling "
                f"{fmt.number(ceiling, 1)} dBTP; triangles and shaded spans mark the overs."
                + (" The envelope is the highest channel in each time step." if len(envelopes) == 1 else ""))
    return {"svg": svg, "rows": rows, "note": note, "present": True}


def _conversion_targets(result: dict) -> list[float]:
    return sorted({float(c["target_rate_hz"]) for c in _conversions_raw(result) if _is_number(c.get("target_rate_hz"))})


#: measurement keys shown beside the long-term spectrum, in this order of prefixes
_SPECTRAL_PREFIXES = ("bandwidth_note", "effective_bandwidth", "bandwidth", "band_limit", "upsampled",
                      "imaging", "imaged", "aliasing", "alias_to_harmonic", "aliased", "ultrasonic")


#: detector internals left to the JSON result (the findings give what they mean)
_SPECTRAL_IN_JSON = {"bandwidth_note", "bandwidth_edge_slope_db_per_khz", "upsampled_edge_ratio",
                     "upsampled_evidence", "aliasing_assessable", "aliasing_assessable_fraction",
                     "ultrasonic_from_hz"}


def _spectral_order(key: str):
    for i, p in enumerate(_SPECTRAL_PREFIXES):
        if key.startswith(p):
            return (i, key)
    return (len(_SPECTRAL_PREFIXES), key)


def spectrum_view(result: dict) -> dict:
    fmt_ = result.get("format") or {}
    rate = int(fmt_.get("sample_rate_hz") or 0)
    series = parse_series(result.get("series"))
    m = result.get("measurements") or {}
    freqs, per = series.ltas_hz, series.ltas_db_per_channel
    rows = _rows_for(m, [k for k in sorted(m, key=_spectral_order) if k.startswith(_SPECTRAL_PREFIXES)
                         and not isinstance(m[k], (list, dict)) and k not in _SPECTRAL_IN_JSON])
    if not freqs or not per or any(len(row) != len(freqs) for row in per) or rate <= 0:
        return {"svg": None, "rows": rows, "present": bool(rows),
                "note": _not_measured(["ltas_hz", "ltas_db_per_channel"])}
    ch = [fmt.clean_text(x) for x in (fmt_.get("channel_layout") or [])]
    names = ch if len(ch) == len(per) else [f"ch{i + 1}" for i in range(len(per))]
    lines = _reference_lines(result, rate)
    edge = m.get("effective_bandwidth_hz")
    if _is_number(edge) and 0 < edge < rate / 2.0 * 0.995:
        lines.append((float(edge), f"content edge {edge / 1000:.2f} kHz (measured)"))
    marks = []
    tones = m.get("ultrasonic_tones")
    if isinstance(tones, list):
        tones = [t for t in tones if isinstance(t, dict) and _is_number(t.get("frequency_hz"))
                 and _is_number(t.get("level_dbfs"))]
        for t in sorted(tones, key=lambda t: -t["level_dbfs"])[:3]:  # the loudest three, so labels stay apart
            marks.append((float(t["frequency_hz"]),
                          f"tone {t['frequency_hz'] / 1000:.2f} kHz, {fmt.number(t['level_dbfs'], 1)} dBFS"))
    svg = plots.spectrum_plot(freqs, per, names, rate, lines, marks)
    note = "Vertical lines: " + "; ".join(text for _f, text in lines) + "."
    if rate / 2.0 > plots.UPPER_PANEL_MIN_NYQUIST_HZ:
        note += (f" Lower panel: the band from {plots.UPPER_PANEL_FROM_HZ / 1000:g} kHz to Nyquist on a linear "
                 "axis, the ultrasonic band shaded" + ("; arrows point at stationary ultrasonic tones" if marks
                                                       else "") + ".")
    missing = [label for label, v in rows if v == "n/a"]
    rows = [(label, v) for label, v in rows if v != "n/a"]
    if missing:
        note += (" Not existing for this file (null in the result): " + ", ".join(missing).lower()
                 + ". Ultrasonic figures exist only where the file has a band above the ultrasonic edge.")
    return {"svg": svg, "rows": rows, "present": True, "note": note}


def _reference_lines(result: dict, rate: int) -> list[tuple[float, str]]:
    nyq = rate / 2.0
    lines = []
    if nyq > 20000.0:
        lines.append((20000.0, "20 kHz"))
    lines.append((nyq, f"Nyquist {nyq / 1000:g} kHz"))
    for target in _conversion_targets(result):
        if target / 2.0 < nyq:
            lines.append((target / 2.0, f"{target / 1000:g} kHz target: Nyquist {target / 2000:g} kHz"))
    if nyq <= 20000.0:
        lines = lines[:1] + lines[1:]
    return lines


def spectrogram_view(result: dict, labels: TimeLabels, duration_s: float) -> dict:
    fmt_ = result.get("format") or {}
    rate = int(fmt_.get("sample_rate_hz") or 0)
    sg = parse_series(result.get("series")).spectrogram
    if sg is None or rate <= 0 or not sg.time_s or not sg.frequency_hz:
        return {"svg": None, "present": False, "note": _not_measured(["spectrogram"])}
    if len(sg.db) != len(sg.time_s) or any(len(r) != len(sg.frequency_hz) for r in sg.db):
        return {"svg": None, "present": False,
                "note": "Spectrogram present but its axes do not match its values; not drawn."}
    lines = [(f, t) for f, t in _reference_lines(result, rate) if f < rate / 2.0]
    svg = plots.spectrogram_plot(sg.time_s, sg.frequency_hz, sg.db, labels.axis(), duration_s, rate, lines)
    note = fmt.clean_text(sg.note).rstrip(".") + ". " if sg.note else ""
    return {"svg": svg, "present": True, "note": note + "Colour: dark is quiet, light is loud (cividis map); "
            "dashed lines at 20 kHz and each conversion target's Nyquist frequency."}


# ----------------------------------------------------------------- events

#: located-event keys drawn in the "quiet" colour (silence and dropouts)
_QUIET_EVENT_KEYS = {"dropout_where_s"}


def events_view(result: dict, labels: TimeLabels, duration_s: float) -> dict:
    """Lanes of located events (clipping, silence, dropouts, overs...) and a table of them."""
    m = result.get("measurements") or {}
    lanes, table = [], []
    for key in sorted(m):
        if key.endswith("_where_s") or key.endswith("_ranges_s"):
            ranges = _ranges_of(m[key])
            stem = key.rsplit("_where_s", 1)[0] if key.endswith("_where_s") else key.rsplit("_ranges_s", 1)[0]
            label = fmt.label_of_key(stem)
            kind = "quiet" if key in _QUIET_EVENT_KEYS else "info"
            lanes.append((label, ranges, kind))
            table.append({"label": label, "count": f"{len(ranges):,}",
                          "where": where_text([list(r) for r in ranges], labels)[0] or "none"})
    head = m.get("head_silence_s")
    tail = m.get("tail_silence_s")
    if _is_number(head) or _is_number(tail):
        ranges = []
        if _is_number(head) and head > 0:
            ranges.append((0.0, float(head)))
        if _is_number(tail) and tail > 0:
            ranges.append((max(duration_s - float(tail), 0.0), duration_s))
        lanes.append(("Head/tail silence", ranges, "quiet"))
        table.append({"label": "Head / tail silence",
                      "count": f"{fmt.with_unit(head, 's', 3)} / {fmt.with_unit(tail, 's', 3)}",
                      "where": where_text([list(r) for r in ranges], labels)[0] or "none"})
    details = []
    for key in sorted(m):
        if key.endswith("_events") and isinstance(m[key], list):
            kind = fmt.label_of_key(key[: -len("_events")])
            for e in m[key]:
                if isinstance(e, dict) and _is_number(e.get("start_s")):
                    a = float(e["start_s"])
                    b = float(e["end_s"]) if _is_number(e.get("end_s")) else a
                    if isinstance(e.get("samples"), int):
                        length = f"{e['samples']} samples"
                    elif b - a < 1.0:
                        length = fmt.with_unit((b - a) * 1000.0, "ms", 1)
                    else:
                        length = fmt.with_unit(b - a, "s", 3)
                    extra = [fmt.clean_text(e[k]) for k in ("polarity", "kind") if isinstance(e.get(k), str)]
                    details.append({"kind": kind, "channel": fmt.clean_text(e.get("channel", "")),
                                    "at": labels.at(a), "length": length, "detail": ", ".join(extra),
                                    "order": (a, kind)})
    details.sort(key=lambda d: d["order"])
    for f in result.get("findings") or []:
        if isinstance(f, dict) and f.get("status") in ("fail", "warn") and _is_ranges(f.get("where_s")) \
                and f.get("where_s"):
            word = STATUS_WORDS[f["status"]][0]
            lanes.append((f"{word}: {_check_label(f.get('check', ''))}"[:40], _ranges_of(f["where_s"]),
                          f["status"]))
    quiet_kinds = [r["label"] for r in table if r["count"] == "0"]
    table = [r for r in table if r["count"] != "0"]
    if not lanes:
        return {"svg": None, "rows": [], "present": False, "details": [], "details_more": 0, "none_of": "",
                "note": "Not measured: the result holds no located events (keys ending in \u201c_where_s\u201d "
                        "or \u201c_ranges_s\u201d, head or tail silence)."}
    drawn = [lane for lane in lanes if lane[1]]
    svg = plots.markers_plot(duration_s, labels.axis(), drawn) if duration_s > 0 and drawn else None
    return {"svg": svg, "rows": table, "present": True, "details": details[:MAX_EVENT_ROWS],
            "details_more": max(len(details) - MAX_EVENT_ROWS, 0),
            "details_total": f"{len(details):,}",
            "none_of": ", ".join(k.lower() for k in quiet_kinds),
            "note": "Only kinds with at least one event are drawn. Events too short to see at this scale are "
                    "widened to be visible and marked with a triangle."}


# ----------------------------------------------------------------- tables

def _conversions_raw(result: dict) -> list[dict]:
    conv = (result.get("measurements") or {}).get("conversions")
    return [c for c in conv if isinstance(c, dict)] if isinstance(conv, list) else []


def _khz_ranges(ranges, most: int = 4) -> str:
    """Frequency ranges in kHz: ``"8.20\u201310.00 kHz; 12.00\u201312.40 kHz"`` (``"none"`` when empty)."""
    if not _is_ranges(ranges) or not ranges:
        return "none"
    parts = [f"{a / 1000:.2f}\u2013{b / 1000:.2f}" for a, b in ranges[:most]]
    more = len(ranges) - len(parts)
    return "; ".join(parts) + "\u00a0kHz" + (f"; and {more} more" if more > 0 else "")


#: conversion entry key -> column heading (other keys follow, labelled from their names)
_CONVERSION_COLUMNS = [
    ("target_rate_hz", "Target rate"),
    ("energy_above_target_nyquist_db", "Energy above the target's Nyquist, relative to the band below"),
    ("energy_above_target_nyquist_dbfs", "Energy above the target's Nyquist, as a level"),
    ("fold_to_hz", "Would fold (alias) to"),
    ("true_peak_after_dbtp", "True peak after conversion"),
    ("true_peak_after_dbtp_per_channel", "per channel"),
    ("filter", "Converter filter"),
]


def conversions_view(result: dict) -> dict:
    """Conversion-safety table, one row per target rate."""
    conv = [c for c in _conversions_raw(result) if isinstance(c, dict)]
    if not conv:
        note = _not_measured(["conversions"])
        if "conversions" in (result.get("measurements") or {}):
            note = "No conversion targets: the spec names no target rates to convert to."
        return {"table": None, "note": note}
    known = [k for k, _h in _CONVERSION_COLUMNS if any(k in c for c in conv) and k != "filter"]
    extra = []
    for c in conv:
        for k in c:
            if k not in known and k not in extra and k not in ("folds", "target", "filter"):
                extra.append(k)
    columns = [h for k, h in _CONVERSION_COLUMNS if k in known] + [fmt.label_of_key(k, True) for k in extra]
    rows = []
    for c in conv:
        row = []
        for k in known + extra:
            v = c.get(k)
            if k == "target_rate_hz" and _is_number(v):
                cell = f"{v / 1000:g}\u00a0kHz"
            elif k == "fold_to_hz":
                cell = _khz_ranges(v)
            elif k == "filter":
                cell = fmt.clean_text(v) if v else "\u2014"
            elif v is None:
                cell = "n/a"
            else:
                cell = fmt.value_for_key(k, v)
            row.append(cell)
        rows.append(row)
    note = ("n/a: the quantity does not exist for that target (e.g. no content above the target's "
            "Nyquist frequency, or a target above the file's own rate).")
    filters = [(c.get("target_rate_hz"), c.get("filter")) for c in conv if c.get("filter")]
    if filters:
        note += " Converter used for these estimates: " + "; ".join(
            (f"{t / 1000:g} kHz: " if _is_number(t) else "") + fmt.clean_text(f) for t, f in filters) + "."
    # the spec's true-peak ceiling of each deliverable, as judged, beside the measured value
    judged = {f.check: f for f in _findings(result)}
    verdicts = []
    for c in conv:
        t = c.get("target_rate_hz")
        f = judged.get(f"sampling.conversion_{int(t)}.true_peak") if _is_number(t) else None
        if f is None or f.status not in ("pass", "warn", "fail"):
            verdicts.append("no requirement")
            continue
        limit = limit_display(f.limit)
        if f.status == "pass":
            verdicts.append(f"PASS ({limit})")
        elif _is_number(f.miss):
            verdicts.append(f"{f.status.upper()}: {_miss_text(f)} over ({limit})")
        else:
            verdicts.append(f"{f.status.upper()} ({limit})")
    if any(v != "no requirement" for v in verdicts) and "true_peak_after_dbtp" in known:
        at = known.index("true_peak_after_dbtp") + 1
        columns.insert(at, "Spec ceiling")
        for row, v in zip(rows, verdicts):
            row.insert(at, v)
        note += " Spec ceiling: the deliverable's true-peak requirement and how the converted signal meets it."
    return {"table": {"columns": columns, "rows": rows}, "note": note}


_HEADROOM_ROWS = [
    ("target_lufs", "Target loudness"), ("gain_db", "Gain to reach the target"),
    ("true_peak_after_gain_dbtp", "True peak after that gain"), ("ceiling_dbtp", "True-peak ceiling"),
    ("limiting_needed_db", "Peak limiting needed"),
]


def headroom_sentence(norm: dict) -> str:
    """One plain sentence from the normalisation figures (already computed by the judge layer)."""
    gain, after = norm.get("gain_db"), norm.get("true_peak_after_gain_dbtp")
    target, ceiling, limiting = norm.get("target_lufs"), norm.get("ceiling_dbtp"), norm.get("limiting_needed_db")
    if not (_is_number(gain) and _is_number(target)):
        return ""
    text = (f"Playing this master at {fmt.number(float(target), 1)} LUFS means a gain of "
            f"{fmt.signed(float(gain), 1)} dB")
    if _is_number(after):
        text += f", which puts its true peak at {fmt.number(float(after), 1)} dBTP"
    if _is_number(limiting) and _is_number(ceiling):
        if limiting > 0:
            text += (f": {fmt.number(float(limiting), 1)} dB over the {fmt.number(float(ceiling), 1)} dBTP "
                     "ceiling, so a normaliser would have to limit the peaks by that much")
        else:
            text += f", within the {fmt.number(float(ceiling), 1)} dBTP ceiling: no limiting needed"
    return text + "."


def normalisation_view(result: dict) -> dict:
    try:
        norm = Normalisation.model_validate(result.get("normalisation"))
    except Exception:  # absent or not the headroom figures
        return {"table": None, "rows": [], "sentence": "",
                "note": "Not computed: the result holds no \u201cnormalisation\u201d block "
                "(masterqc check adds it from the spec's loudness target and true-peak ceiling)."}
    figures = norm.model_dump()
    rows = []
    for key, label in _HEADROOM_ROWS:
        v = figures[key]
        text = fmt.signed(v, 1) + "\u00a0dB" if key == "gain_db" and _is_number(v) else fmt.value_for_key(key, v)
        src = {"target_lufs": norm.target_source, "ceiling_dbtp": norm.ceiling_source}.get(key)
        if src:
            text += f" (from {fmt.clean_text(src)})"
        rows.append((label, text))
    note = fmt.clean_text(norm.note) if norm.note else ""
    return {"table": None, "rows": rows, "sentence": headroom_sentence(figures), "note": note}


def provenance_view(result: dict) -> dict:
    tool = result.get("tool") or {}
    file = result.get("file") or {}
    spec = result.get("spec") or {}
    analysis = result.get("analysis") or {}
    rows = [("Tool", f"{fmt.clean_text(tool.get('name', 'masterqc'))} {fmt.clean_text(tool.get('version', '?'))}")]
    if file:
        rows.append(("File", fmt.clean_text(file.get("path", ""))))
    if spec:
        rows.append(("Spec", fmt.clean_text(spec.get("name", "")) + (f" ({fmt.clean_text(spec['path'])})"
                                                                    if spec.get("path") else "")))
        if spec.get("from_delivery_folder"):
            rows.append(("Spec source", "from the delivery folder (it came with the masters, not from the operator)"))
    else:
        rows.append(("Spec", "none (measured only)"))
    how = (result.get("provenance") or {}).get("how")
    if how:
        rows.append(("Findings", "judged again from stored measurements (no audio read)" if how == "rejudged"
                     else "judged on a fresh measurement"))
    for key in sorted(analysis, key=str):
        v = analysis[key]
        if isinstance(v, (dict, list)) or key == "block_frames":
            continue
        label = {"elapsed_s": "Analysis time", "block_frames": "Block size (frames)"}.get(key, fmt.label_of_key(key))
        rows.append((label, fmt.value_for_key(key, v) if key != "block_frames" else fmt.number(v)))
    # one compact line per analyzer: its scalar settings at their real precision; lists, tables and
    # long descriptions are in the JSON result ("settings")
    settings = []
    in_json = 0
    for name in sorted(result.get("settings") or {}, key=str):
        block = result["settings"][name]
        if name not in SETTINGS_SHOWN:
            in_json += len(block) if isinstance(block, dict) else 1
            continue
        if not isinstance(block, dict):
            block = {name: block}
        parts = []
        for k in sorted(block, key=str):
            text = setting_text(k, block[k])
            if text is None:
                in_json += 1
                continue
            parts.append(f"{fmt.clean_text(k)} {text}")
        if parts:
            settings.append((fmt.label_of_key(str(name)), "; ".join(parts)))
    note = ("The settings of the loudness and true-peak meters. Every setting "
            + (f"({in_json} more) " if in_json else "") + "and every measured value are in the JSON result, under "
            "\u201csettings\u201d and \u201cmeasurements\u201d.")
    return {"rows": rows, "settings": settings, "settings_note": note}


#: the analyzers whose settings the report shows (where meters set differently read differently);
#: every other setting is in the JSON result
SETTINGS_SHOWN = ("loudness", "true_peak")


def setting_text(key, v) -> str | None:
    """A setting's value as written, at its real precision (0.01 stays 0.01), with the unit its key names;
    None for lists, mappings and texts longer than 60 characters (they stay in the JSON)."""
    if isinstance(v, (dict, list)):
        return None
    if isinstance(v, bool):
        return "yes" if v else "no"
    unit = fmt.unit_of_key(str(key))[0]
    if isinstance(v, float):
        text = f"{v:.10g}"
    elif isinstance(v, int):
        text = str(v)
    elif v is None:
        text = "none"
    else:
        text = fmt.clean_text(v)
        if len(text) > 60:
            return None
    return f"{text}\u00a0{unit}" if unit and (isinstance(v, (int, float))) else text


def all_measurements(result: dict) -> list[tuple[str, str, str]]:
    """Every scalar or short-list measurement: (label, key, value) rows, in key order."""
    m = result.get("measurements") or {}
    rows = []
    for k in sorted(m):
        v = m[k]
        if isinstance(v, dict) or (isinstance(v, list) and v and isinstance(v[0], (dict, list))):
            continue
        rows.append((fmt.label_of_key(k), k, fmt.value_for_key(k, v)))
    return rows


# ----------------------------------------------------------------- the whole view

def build_view(result: dict, paper: str = "a4") -> dict:
    """The complete view model of one report (see the module docstring)."""
    if not isinstance(result, dict):
        raise TypeError("a result object must be a dict")
    labels = TimeLabels(result)
    duration = _get(result, "format", "duration_s", default=0.0)
    duration = float(duration) if _is_number(duration) else 0.0
    findings = findings_view(result, labels)
    verdict = verdict_view(result, findings)
    path = _get(result, "file", "path", default="") or ""
    name = os.path.basename(str(path)) or "(unnamed)"
    return {
        "certificate": certificate_view(result, findings, verdict),
        "status_meanings": [(STATUS_WORDS[k][0], STATUS_WORDS[k][1], k, text) for k, text in STATUS_MEANINGS],
        "file_name": fmt.clean_text(name),
        "title": f"{verdict['word']} \u2014 {fmt.clean_text(name)}",
        "paper": "letter" if str(paper).lower() == "letter" else "a4",
        "verdict": verdict,
        "findings": findings,
        "spec_name": fmt.clean_text(_get(result, "spec", "name", default="") or ""),
        "format_rows": format_rows(result),
        "metadata": metadata_view(result),
        "loudness": loudness_view(result, labels, duration),
        "true_peak": true_peak_view(result, labels, duration),
        "spectrum": spectrum_view(result),
        "spectrogram": spectrogram_view(result, labels, duration),
        "events": events_view(result, labels, duration),
        "conversions": conversions_view(result),
        "normalisation": normalisation_view(result),
        "provenance": provenance_view(result),
        "measurements": all_measurements(result),
        "cautions": CAUTIONS,
        "time_note": ("Times are given as the file's timecode, with the time from the start of the file in "
                      "brackets." if labels.has_start else "Times count from the start of the file (m:ss.ss)."),
    }
