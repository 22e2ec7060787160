"""Judge of the ``metadata:`` section: malformed chunks, bext, bext loudness, ISRC, time reference.

Check ids: ``metadata.chunk_problems`` (one finding per problem, the byte
offset in the message), ``metadata.bext``, ``metadata.bext_loudness.<field>``
(``loudness_value``, ``loudness_range``, ``max_true_peak_level``,
``max_momentary_loudness``, ``max_short_term_loudness``),
``metadata.isrc.present`` / ``.syntax`` / ``.consistent``,
``metadata.time_reference``, ``metadata.timecode_fps``.
"""

from __future__ import annotations

from masterqc import timecode as _tc
from masterqc.judge.core import Finding, check_limits, fmt, sentence, skipped
from masterqc.spec.types import target, unit_label

#: bext v2 field -> (check suffix, Tech 3285 name, measurement key, unit suffix, what is measured)
BEXT_LOUDNESS = (
    ("loudness_value_lufs", "loudness_value", "LoudnessValue", "integrated_lufs", "lufs", "integrated loudness"),
    ("loudness_range_lu", "loudness_range", "LoudnessRange", "loudness_range_lu", "lu", "loudness range"),
    ("max_true_peak_level_dbtp", "max_true_peak_level", "MaxTruePeakLevel", "true_peak_dbtp", "dbtp", "true peak"),
    ("max_momentary_loudness_lufs", "max_momentary_loudness", "MaxMomentaryLoudness", "max_momentary_lufs",
     "lufs", "max momentary loudness"),
    ("max_short_term_loudness_lufs", "max_short_term_loudness", "MaxShortTermLoudness", "max_short_term_lufs",
     "lufs", "max short-term loudness"),
)


def _missed(severity: str) -> str:
    return "fail" if severity == "fail" else "warn"


def judge(section, result: dict) -> list[Finding]:
    meta = result.get("metadata") or {}
    out: list[Finding] = []
    fps = section.timecode_fps or meta.get("timecode_fps") or _tc.DEFAULT_FPS
    if section.chunk_problems is not None:
        out.extend(_chunk_problems(section, meta))
    if section.bext is not None:
        out.extend(_bext(section.bext, meta))
    if section.bext_loudness is not None:
        out.extend(_bext_loudness(section.bext_loudness, meta, result.get("measurements") or {}))
    if section.isrc is not None:
        out.extend(_isrc(section.isrc, meta))
    if section.time_reference is not None:
        out.append(_time_reference(section.time_reference, result, fps))
    if section.timecode_fps_matches_file:
        out.append(_fps_match(section, meta, fps))
    for f in out:
        f.message = sentence(f.message)
    return out


def _chunk_problems(section, meta) -> list[Finding]:
    problems = meta.get("problems") or []
    sev = section.chunk_problems.severity
    explicit = "chunk_problems" in section.model_fields_set
    if not problems:
        if not explicit:
            return []
        return [Finding(check="metadata.chunk_problems", status="pass", severity=sev, measured=0,
                        measured_text="0", limit="no malformed chunks",
                        message="container structure: no malformed chunks")]
    out = []
    for p in problems:
        out.append(Finding(check="metadata.chunk_problems", status=_missed(sev), severity=sev,
                           measured=p.get("offset"), measured_text=f"byte {p.get('offset')}",
                           limit="no malformed chunks", unit="byte offset",
                           message=f"at byte {p.get('offset')}: {p.get('message')}"))
    return out


def _bext(rule, meta) -> list[Finding]:
    bx = meta.get("bext")
    sev = rule.severity
    if bx is None:
        status = _missed(sev) if rule.required else "skipped"
        kind = meta.get("container_kind")
        where = "" if kind in ("riff", "rf64", "bw64", "rifx") else f" ({kind or 'this'} files cannot carry one)"
        msg = f"no bext chunk{where}" + ("" if rule.required else "; not required")
        return [Finding(check="metadata.bext", status=status, severity=sev, measured=None,
                        limit="bext chunk present", message=msg)]
    out = [Finding(check="metadata.bext", status="pass", severity=sev, measured=bx.get("version"),
                   measured_text=f"version {bx.get('version')}", limit="bext chunk present",
                   message=f"bext chunk version {bx.get('version')} present")]
    if rule.min_version is not None:
        v = bx.get("version")
        ok = v is not None and v >= rule.min_version
        out.append(Finding(check="metadata.bext.version", status="pass" if ok else _missed(sev), severity=sev,
                           measured=v, measured_text=f"version {v}", limit=f"version {rule.min_version} or later",
                           message=f"bext version {v} " + ("(required: version " if ok else "is older than the required "
                                                          "version ") + f"{rule.min_version}" + (")" if ok else "")))
    for name in rule.fields_required:
        value = bx.get(name)
        present = value not in (None, "", 0) if name != "time_reference_samples" else value is not None
        out.append(Finding(check=f"metadata.bext.{name}", status="pass" if present else _missed(sev),
                           severity=sev, measured=value, limit="non-empty",
                           message=f"bext {name} " + (f"is {value!r}" if present else "is empty, which the spec does not allow")))
    return out


def _bext_loudness(rule, meta, measurements) -> list[Finding]:
    bx = meta.get("bext")
    sev = rule.severity
    out = []
    for key, suffix, tech_name, mkey, unit, what in BEXT_LOUDNESS:
        check = f"metadata.bext_loudness.{suffix}"
        tol = rule.true_peak_tolerance_db if unit == "dbtp" else rule.tolerance_lu
        tol_unit = "dB" if unit == "dbtp" else "LU"
        stored = None if bx is None else bx.get(key)
        if stored is None:
            if bx is None:
                why = "the file has no bext chunk"
            elif (bx.get("version") or 0) < 2:
                why = f"bext version {bx.get('version')} has no loudness fields (they arrived in version 2)"
            else:
                why = f"bext {tech_name} is not filled in (0x7FFF or cut short)"
            if rule.required:
                out.append(Finding(check=check, status=_missed(sev), severity=sev, limit=f"{tech_name} present",
                                   message=f"{what}: {why}"))
            else:
                out.append(skipped(check, f"{what}: not compared, {why}", severity=sev))
            continue
        measured = measurements.get(mkey)
        req = target(unit)(**{f"target_{unit}": stored,
                              f"tolerance_{'db' if unit == 'dbtp' else 'lu'}": tol, "severity": sev})
        why = "the measurement does not exist for this file (e.g. digital silence)" if mkey in measurements \
            else f"the measurement {mkey} is missing from the result"
        f = check_limits(check, f"bext {tech_name} against the measured {what}", measured, req,
                         missing_reason=why)
        label = unit_label(unit)
        if f.status != "skipped":
            dec = f.decimals or 2
            diff = f.measured - stored
            agree = "agrees with" if f.status == "pass" else "does not match"
            f.message = (f"bext {tech_name} {fmt(stored, 2)} {label} {agree} the measured {what} "
                         f"{fmt(f.measured, dec)} {label} (difference {fmt(abs(diff), dec)} {tol_unit}, "
                         f"tolerance {fmt(tol, dec)} {tol_unit})")
        out.append(f)
    return out


def _isrc(rule, meta) -> list[Finding]:
    entries = meta.get("isrc") or []
    sev = rule.severity
    out = []
    if not entries:
        status = _missed(sev) if rule.required else "skipped"
        out.append(Finding(check="metadata.isrc.present", status=status, severity=sev, limit="ISRC present",
                           message="no ISRC found (bext text, LIST/INFO ISRC, id3 TSRC, Vorbis ISRC, "
                                   "FLAC cue sheet, iXML)" + ("" if rule.required else "; not required")))
        return out
    places = ", ".join(e.get("source", "?") for e in entries)
    out.append(Finding(check="metadata.isrc.present", status="pass", severity=sev, measured=len(entries),
                       limit="ISRC present", message=f"ISRC found in {places}"))
    bad = [e for e in entries if not e.get("valid")]
    for e in bad:
        where = f" at byte {e['offset']}" if e.get("offset") is not None else ""
        out.append(Finding(check="metadata.isrc.syntax", status=_missed(sev), severity=sev, measured=e.get("raw"),
                           measured_text=e.get("raw"), limit="ISO 3901: CC-XXX-YY-NNNNN",
                           message=f"ISRC {e.get('raw')!r} in {e.get('source')}{where} is malformed: "
                                   f"{e.get('problem')}"))
    good = [e for e in entries if e.get("valid")]
    if not bad:
        codes = sorted({e["display"] for e in good})
        notes = [f"{e['source']}: {e['note']}" for e in good if e.get("note")]
        out.append(Finding(check="metadata.isrc.syntax", status="pass", severity=sev, measured=codes[0],
                           measured_text=", ".join(codes), limit="ISO 3901: CC-XXX-YY-NNNNN",
                           message=f"ISRC {', '.join(codes)} is well-formed (ISO 3901)"
                                   + (f"; {'; '.join(notes)}" if notes else "")))
    if rule.consistent and len(good) > 1:
        codes = {}
        for e in good:
            codes.setdefault(e["code"], []).append(e["source"])
        if len(codes) > 1:
            listing = "; ".join(f"{_fmt_code(c)} in {', '.join(s)}" for c, s in codes.items())
            out.append(Finding(check="metadata.isrc.consistent", status=_missed(sev), severity=sev,
                               measured=len(codes), limit="one ISRC per file",
                               message=f"the file carries {len(codes)} different ISRCs: {listing}"))
        else:
            out.append(Finding(check="metadata.isrc.consistent", status="pass", severity=sev, measured=1,
                               limit="one ISRC per file",
                               message=f"every place carries the same ISRC {_fmt_code(next(iter(codes)))}"))
    return out


def _fmt_code(code: str) -> str:
    return f"{code[0:2]}-{code[2:5]}-{code[5:7]}-{code[7:12]}"


def _time_reference(rule, result, fps) -> Finding:
    meta = result.get("metadata") or {}
    sev = rule.severity
    ref = meta.get("time_reference_samples")
    limit = "time reference present" if rule.start_timecode is None else f"starts at {rule.start_timecode}"
    if ref is None:
        status = _missed(sev) if rule.required or rule.start_timecode else "skipped"
        return Finding(check="metadata.time_reference", status=status, severity=sev, limit=limit,
                       message="the file declares no time reference (no bext TimeReference, no iXML timestamp)")
    rate = (result.get("format") or {}).get("sample_rate_hz")
    if not rate:
        return skipped("metadata.time_reference", "time reference: not judged; the sample rate is unknown",
                       limit=limit, severity=sev)
    shown = _tc.samples_to_timecode(ref, rate, fps)
    src = meta.get("time_reference_source") or "bext"
    base = dict(check="metadata.time_reference", severity=sev, measured=shown, measured_raw=ref,
                measured_text=f"{shown} ({fps} fps)", limit=limit)
    if rule.start_timecode is None:
        return Finding(status="pass", message=f"starts at {shown} ({fps} fps; {ref} samples since midnight, "
                                              f"from {src})", **base)
    want = _tc.timecode_to_frames(rule.start_timecode, fps)
    have = _tc.samples_to_frames(ref, rate, fps)
    exact = _tc.frames_to_samples(have, rate, fps) == ref
    if want == have and exact:
        return Finding(status="pass", message=f"starts at {shown} ({fps} fps) as required", **base)
    off = "" if want != have else " but not on a frame boundary"
    return Finding(status=_missed(sev),
                   message=f"starts at {shown} ({fps} fps){off}; the spec requires {rule.start_timecode}", **base)


def _fps_match(section, meta, fps) -> Finding:
    declared = meta.get("declared_timecode_fps")
    if declared is None:
        return skipped("metadata.timecode_fps", "timecode rate: not compared, the file declares none (no iXML "
                                                "TIMECODE_RATE)", limit=f"{fps} fps", severity="warn")
    ok = declared == fps
    return Finding(check="metadata.timecode_fps", status="pass" if ok else "warn", severity="warn",
                   measured=declared, measured_text=f"{declared} fps", limit=f"{fps} fps",
                   message=f"the file's iXML declares {declared} fps" +
                           (" as the spec does" if ok else f"; the spec uses {fps} fps"))
