"""Judge of the ``loudness:`` section against the loudness measurements."""

from __future__ import annotations

from masterqc.judge.core import Finding, check_below_measurable, check_limits

#: below this duration a loudness-range figure is shown with a caution: the EBU R 128 s1
#: supplement (short-form content) finds LRA not meaningful for short programmes, and
#: EBU Tech 3341 (2016 revision) has meters signal that LRA is not stable in a
#: programme's first 60 s
SHORT_PROGRAMME_S = 60.0

_SILENT = "the programme has no gated loudness (digital silence or below the -70 LUFS gate)"

#: shortest programme (s) for which a None means "below the gate" rather than "too short to measure"
_WINDOW_S = {"integrated": 0.4, "max_momentary": 0.4, "max_short_term": 3.0}

#: spec key -> (check id, what, measurement key, why a None can happen)
_CHECKS = [
    ("integrated", "loudness.integrated", "integrated loudness", "integrated_lufs", _SILENT),
    ("range", "loudness.range", "loudness range", "loudness_range_lu",
     "too little gated short-term loudness to compute a range (programme shorter than 3 s or silent)"),
    ("max_momentary", "loudness.max_momentary", "maximum momentary loudness", "max_momentary_lufs",
     "the programme is shorter than one 400 ms block or silent"),
    ("max_short_term", "loudness.max_short_term", "maximum short-term loudness", "max_short_term_lufs",
     "the programme is shorter than one 3 s window or silent"),
]


def judge(section, result: dict) -> list[Finding]:
    m = result.get("measurements") or {}
    out = []
    for key, check, what, mkey, why in _CHECKS:
        req = getattr(section, key)
        if req is None:
            continue
        if mkey not in m:
            out.append(check_limits(check, what, None, req,
                                    missing_reason=f"the measurement {mkey} is missing from the result"))
            continue
        duration = (result.get("format") or {}).get("duration_s")
        if m[mkey] is None and key in _WINDOW_S and duration is not None and duration >= _WINDOW_S[key]:
            # Long enough to measure, yet no value: the programme lies below the -70 LUFS gate.
            out.append(check_below_measurable(check, what, req, _SILENT))
            continue
        f = check_limits(check, what, m[mkey], req, missing_reason=why)
        if key == "range" and f.status != "skipped" and duration is not None and duration < SHORT_PROGRAMME_S:
            f.message += " (loudness range is not recommended for programmes under one minute, EBU R 128)"
        out.append(f)
    return out
