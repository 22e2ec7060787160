"""Judge of the ``sampling:`` section: bandwidth, upsampling, imaging, aliasing, ultrasonic content, conversions.

Reads the measurements of :mod:`masterqc.measure.spectral` (bandwidth,
ultrasonic, conversions) and of :mod:`masterqc.measure.imaging` and
:mod:`masterqc.measure.aliasing`.  Every finding names where in frequency the
problem lies (in its message) and, where the measurement locates it in time,
the time ranges (``where_s``).
"""

from __future__ import annotations

from masterqc.judge.core import (Finding, add_detail, check_allowed, check_below_measurable, check_limits,
                                 limit_words, sentence, skipped)

_LOW = "ultrasonic content is judged for masters above 48 kHz"


def _khz(hz) -> str:
    return f"{float(hz) / 1000.0:.2f} kHz"


def _khz_range(lo, hi) -> str:
    return f"{float(lo) / 1000.0:.2f}-{float(hi) / 1000.0:.2f} kHz"


def _merge(ranges) -> list:
    out = []
    for a, b in sorted(ranges):
        if out and a <= out[-1][1] + 1e-6:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return out


def _missing(m: dict, key: str, reason: str) -> str:
    if key not in m:
        return f"the measurement {key} is missing from the result (its analyzer did not run)"
    return reason


def _aliasing_score(m: dict, detail: dict, req, where) -> Finding:
    """The alias-to-harmonic ratio against its ceiling.  The score is null where no alias line
    was found above the floor on assessable tonal material (``aliasing_detail`` then gives the
    floor-limited upper bound): the ratio lies below what can be measured there, which meets a
    ceiling.  It is skipped where nothing was assessable, or where folded partial tracks were
    found without alias lines (the aliasing check reports those)."""
    key = "alias_to_harmonic_ratio_db"
    value = m.get(key)
    what = "alias-to-harmonic ratio"
    if value is None and key in m and m.get("aliasing_assessable") is True \
            and (detail.get("assessable_frames") or 0) > 0 and not detail.get("folded_partials") \
            and not detail.get("frames_with_alias_lines"):
        bound = detail.get("score_upper_bound_db")
        tested = detail.get("fold_positions_tested") or 0
        reason = f"no alias lines found above the floor at the {tested} fold positions tested"
        if bound is not None:
            reason += f" (at most {float(bound):.0f} dB if every one held a line just below the detection level)"
        return check_below_measurable("sampling.alias_to_harmonic_ratio", what, req, reason)
    return check_limits("sampling.alias_to_harmonic_ratio", what, value, req, where_s=where,
                        missing_reason=_missing(m, key, detail.get("reason") or "not assessable on this material"))


def _bool_str(v) -> str:
    return str(v).lower()


def _rate(result: dict):
    return (result.get("format") or {}).get("sample_rate_hz")


def _ultra_band(result: dict, m: dict) -> str:
    """The ultrasonic band in words, e.g. "20.00-48.00 kHz" (or "above 20.00 kHz" when the rate is unknown)."""
    frm = m.get("ultrasonic_from_hz") or 20000.0
    fs = _rate(result)
    return _khz_range(frm, fs / 2) if fs else f"above {_khz(frm)}"


def _ultra_reason(result: dict, m: dict, key: str) -> str:
    fs = _rate(result)
    if key not in m:
        return _missing(m, key, "")
    if fs is not None and fs <= 48000:
        return f"the master is at {fs / 1000:g} kHz; {_LOW}"
    frm = m.get("ultrasonic_from_hz")
    if fs is not None and frm is not None and fs / 2 <= frm:
        return f"the Nyquist frequency ({_khz(fs / 2)}) is not above the ultrasonic band edge ({_khz(frm)})"
    return "the audible band holds no energy (digital silence)"


def _upsampling(section, m: dict) -> list[Finding]:
    key = "upsampled_from_hz"
    if key not in m:
        return [check_allowed("sampling.upsampled", "upsampling", None, section.upsampled,
                              show=_bool_str, missing_reason=_missing(m, key, ""))]
    src, conf = m.get(key), m.get("upsampled_confidence_fraction")
    need = section.upsampled_min_confidence or 0.0
    counted = src is not None and (conf is None or conf >= need)
    # parts of the file (time segments) read as upsampled, when the whole file is not
    parts = [p for p in (m.get("bandwidth_segments") or [])
             if p.get("upsampled_from_hz") is not None
             and (p.get("upsampled_confidence_fraction") is None or p["upsampled_confidence_fraction"] >= need)]
    partial = src is None and bool(parts)
    if partial:
        rates = sorted({p["upsampled_from_hz"] for p in parts})
        from_words = " or ".join(f"{r / 1000:g} kHz" for r in rates)
        says = f"Upsampling: part of the file was converted up from {from_words}"
    elif src is not None:
        says = f"Upsampling: the file was converted up from {src / 1000:g} kHz"
    else:
        says = "Upsampling: the file was not converted up from a lower rate"
    f = check_allowed("sampling.upsampled", "upsampling", counted or partial, section.upsampled, show=_bool_str,
                      says=(says, says))
    if partial:
        ranges = _merge([[p["start_s"], p["end_s"]] for p in parts])
        add_detail(f, ". Part of the file ends in a converter's cliff, as if converted up from "
                   + from_words + " (" + ", ".join(f"{a:.1f}-{b:.1f} s" for a, b in ranges) + ")")
        if f.status in ("warn", "fail"):
            f.where_s = ranges
    elif src is None:
        add_detail(f, ". " + _not_upsampled_sentence(m))
    if src is not None:
        add_detail(f, ". " + _upsampled_sentence(m, src, conf))
        if not counted:
            f.message += f" Below the spec's minimum confidence of {need:.2f}, so not counted."
        if f.status in ("warn", "fail"):
            f.where_s = [list(w) for w in (m.get("upsampled_where_s") or [])]
    untestable = m.get("untestable_source_rates_hz") or []
    if untestable:
        f.message += (" Cannot be tested for a source at " + ", ".join(f"{r / 1000:g}" for r in untestable)
                      + " kHz (no content just below its Nyquist frequency, or no room above it).")
    return [f]


def _upsampled_sentence(m: dict, src: int, conf) -> str:
    """A plain sentence on why the file reads as converted up from ``src`` Hz, and what to do."""
    src_khz = f"{src / 1000:g} kHz"
    chans = m.get("upsampled_channels")
    evidence = m.get("upsampled_evidence") or "cliff"
    edge, ratio = m.get("effective_bandwidth_hz"), m.get("upsampled_edge_ratio")
    if evidence == "images":
        body = (f"Converted up from {src_khz} without a proper interpolation filter: the spectrum above "
                f"{src / 2000:g} kHz holds mirror images of the content below it.")
    elif evidence == "samples":
        body = (f"Converted up from {src_khz} without an interpolation filter: the samples repeat a "
                f"held, straight-line or zero-stuffed pattern at {src_khz} exactly.")
    elif evidence == "segments":
        body = (f"Converted up from {src_khz}: every part of the file ends in a converter's cliff below "
                f"{src / 2000:g} kHz.")
    elif edge is not None and ratio is not None:
        body = (f"Converted up from {src_khz}: the spectrum ends in a converter's cliff at {edge / 1000:.1f} kHz "
                f"({ratio:.2f} of {src / 2000:g} kHz)"
                + (f", {m['bandwidth_edge_depth_db']:.0f} dB deep" if m.get("bandwidth_edge_depth_db") else "") + ".")
    else:
        body = f"Converted up from {src_khz}: the spectrum ends in a converter's cliff."
    if chans:
        body += f" Channel{'s' if len(chans) > 1 else ''} converted: {', '.join(chans)}."
    body += (f" Reconvert from the original {src_khz} master rather than delivering an upsampled file"
             + (f" (confidence {conf:.2f})." if conf is not None else "."))
    return body


def _not_upsampled_sentence(m: dict) -> str:
    """A plain sentence on why the file does not read as upsampled."""
    limit, edge = m.get("band_limit_hz"), m.get("effective_bandwidth_hz")
    if limit is not None:
        return (f"Band-limited at {limit / 1000:.1f} kHz by a low-pass whose position or slope no rate "
                "converter explains; not a rate conversion.")
    if m.get("bandwidth_edge") == "cliff" and edge is not None:
        return f"Band-limited at {edge / 1000:.1f} kHz; not a rate conversion."
    if m.get("bandwidth_edge") == "rolloff" and edge is not None:
        return f"The spectrum rolls off gently by {edge / 1000:.1f} kHz (no converter's cliff); not a rate conversion."
    if m.get("bandwidth_note"):
        return f"No converter's cliff below a lower standard rate's Nyquist frequency ({m['bandwidth_note']})."
    return "No converter's cliff below a lower standard rate's Nyquist frequency."


def _imaging_detail(m: dict) -> str:
    """One sentence per source-rate candidate that left images ("defect") or a faint trace of them."""
    parts = []
    for c in m.get("imaging") or []:
        v = c.get("verdict")
        if v not in ("defect", "trace"):
            continue
        coh, lvl = c.get("coherence"), c.get("image_level_db")
        rate = f"{float(c.get('source_rate_hz')) / 1000:g} kHz"
        where = f" in channel {c['channel']}" if c.get("channel") else ""
        if v == "defect":
            txt = f"From a {rate} source: "
            txt += ("the sample pattern of an unfiltered upsampler" if c.get("evidence") == "samples"
                    else "mirror images of the content")
            if lvl is not None:
                txt += f", the first image {lvl:.1f} dB relative to the content it mirrors"
            txt += where
            if coh is not None:
                txt += f" (images and content move together: coherence {coh:.2f})"
        else:
            txt = f"A {rate} source leaves a faint trace only"
            if lvl is not None:
                txt += f": its first mirror image lies at {lvl:.1f} dB relative to the content it mirrors{where}"
            elif where:
                txt += where
            txt += ", too weak to count as a defect"
        parts.append(txt + ".")
    return (" " + " ".join(parts)) if parts else ""


def judge(section, result: dict) -> list[Finding]:
    m = result.get("measurements") or {}
    s = section
    out: list[Finding] = []

    if s.effective_bandwidth is not None:
        f = check_limits("sampling.effective_bandwidth", "effective bandwidth", m.get("effective_bandwidth_hz"),
                         s.effective_bandwidth,
                         missing_reason=_missing(m, "effective_bandwidth_hz",
                                                 m.get("bandwidth_note") or "no content above the noise floor"))
        if f.status in ("warn", "fail") and m.get("bandwidth_note"):
            add_detail(f, f" ({m['bandwidth_note']})")
        out.append(f)

    if s.upsampled is not None:
        out += _upsampling(s, m)

    if s.band_limited is not None:
        key = "band_limit_hz"
        value = (m.get(key) is not None) if key in m else None
        what = "band limit"
        cut = (f"Band limit: the content ends in a cliff at {_khz(m[key])} that no sample-rate conversion explains"
               if value else "")
        f = check_allowed("sampling.band_limited", what, value, s.band_limited, show=_bool_str,
                          missing_reason=_missing(m, key, ""),
                          says=(cut, "Band limit: no low-pass at a frequency that no standard rate explains"))
        if value:
            depth = m.get("bandwidth_edge_depth_db")
            # the bandwidth analysis says why it is a band limit where it knows (a low-pass, a coder's steps)
            why = m.get("bandwidth_note") or "a lossy or low-passed source?"
            add_detail(f, (f". The cliff is {float(depth):.0f} dB deep" if depth is not None else ". The cliff")
                       + f" ({why})")
        elif value is False and m.get("bandwidth_note"):
            add_detail(f, f" ({m['bandwidth_note']})")
        out.append(f)

    if s.imaging is not None:
        key = "imaging_detected"
        what = "imaging"
        why = "no candidate source rate could be tested"
        untestable = [c for c in (m.get("imaging") or []) if isinstance(c, dict)
                      and c.get("verdict") == "untestable" and c.get("reason") and c.get("source_rate_hz")]
        if untestable:  # the first candidate's reason says why (they are usually the same)
            c = untestable[0]
            why += f" (e.g. {float(c['source_rate_hz']) / 1000:g} kHz: {c['reason']})"
        f = check_allowed("sampling.imaging", what, m.get(key), s.imaging, show=_bool_str,
                          missing_reason=_missing(m, key, why),
                          says=("Imaging: the spectrum holds mirror images left by an unfiltered upsampler",
                                "Imaging: no mirror images of an unfiltered upsampler"))
        if f.status != "skipped" and _imaging_detail(m):
            add_detail(f, "." + _imaging_detail(m)[:-1])
        out.append(f)

    detail = m.get("aliasing_detail") or {}
    where = [list(w) for w in (detail.get("where_s") or [])]
    if s.aliasing is not None:
        key = "aliasing_detected"
        f = check_allowed("sampling.aliasing", "aliasing", m.get(key), s.aliasing,
                          show=_bool_str, missing_reason=_missing(m, key, detail.get("reason")
                                                                  or "not assessable on this material"),
                          says=("Aliasing: folded (aliased) content found", "Aliasing: no folded (aliased) content"))
        if f.status in ("warn", "fail"):
            f.where_s = where
            f.message = _aliasing_message(result, m, detail, where, f.status)
        out.append(f)
    if s.alias_to_harmonic_ratio is not None:
        out.append(_aliasing_score(m, detail, s.alias_to_harmonic_ratio, where))

    if s.ultrasonic_energy is not None:
        out.append(check_limits("sampling.ultrasonic_energy", f"ultrasonic energy ({_ultra_band(result, m)}) "
                                "relative to the audible band",
                                m.get("ultrasonic_energy_db"), s.ultrasonic_energy,
                                missing_reason=_ultra_reason(result, m, "ultrasonic_energy_db")))
    if s.ultrasonic_energy_3s is not None:
        out.append(check_limits("sampling.ultrasonic_energy_3s", f"ultrasonic energy ({_ultra_band(result, m)}) "
                                "relative to the audible band, worst 3 s",
                                m.get("ultrasonic_energy_max_3s_db"), s.ultrasonic_energy_3s,
                                where_s=m.get("ultrasonic_energy_max_3s_where_s") or [],
                                missing_reason=_ultra_reason(result, m, "ultrasonic_energy_max_3s_db")))
    if s.ultrasonic_tones is not None:
        out.append(_tones(s, result, m))
    if s.ultrasonic_loudness_change is not None:
        change = m.get("ultrasonic_loudness_change_lu")
        f = check_limits("sampling.ultrasonic_loudness_change",
                         "loudness change from a low-pass at the ultrasonic band edge (magnitude)",
                         None if change is None else abs(change), s.ultrasonic_loudness_change,
                         missing_reason=_ultra_reason(result, m, "ultrasonic_loudness_change_lu"))
        out.append(f)

    for target in s.conversions or []:
        out += _conversion(target, result, m)
    return out


def _clock(t_s: float) -> str:
    """A time in the file as m:ss (h:mm:ss from an hour)."""
    t = int(max(0.0, float(t_s)))
    h, rest = divmod(t, 3600)
    return f"{h}:{rest // 60:02d}:{rest % 60:02d}" if h else f"{rest // 60}:{rest % 60:02d}"


def _aliasing_message(result: dict, m: dict, detail: dict, where: list, status: str) -> str:
    """Plain sentences for folded content that the spec does not allow: where, what it is, what to do."""
    rate = (result.get("format") or {}).get("sample_rate_hz")
    nyq = f"{float(rate) / 2000.0:g} kHz" if rate else "the Nyquist frequency"
    if where:
        lo, hi = min(a for a, _ in where), max(b for _, b in where)
        span = f"from {_clock(lo)} to {_clock(hi)}" if _clock(lo) != _clock(hi) else f"at {_clock(lo)}"
    else:
        span = "in this file"
    sentences = [f"Aliasing: folded (aliased) content found {span}; the spec does not allow this"
                 + (" (the spec counts this as a warning)." if status == "warn" else ".")]
    tonal = bool(detail.get("polyphonic_instances_with_folds") or detail.get("frames_with_alias_lines"))
    f0 = detail.get("median_f0_hz")
    if tonal:
        who = f"notes here (fundamental about {float(f0):.1f} Hz)" if f0 else "notes here"
        sentences.append(f"The {who} have harmonics above {nyq} that fold back into the audible band, between "
                         "the true harmonics.")
    mirrored = bool(detail.get("reflected_grid_frames_with_folds")) and "reflection about half" in str(
        detail.get("reason") or "")
    if mirrored:
        sentences.append(f"{'Also, the' if tonal else 'The'} lines of a frequency- or ring-modulated voice come back "
                         f"mirrored about {nyq}: its sidebands above {nyq} fold back into the audible band.")
        tonal = True
    ex = detail.get("fold_examples") or []
    if detail.get("folded_partials"):
        s = (f"{'Also, a' if tonal else 'A'} partial rising towards {nyq} "
             "comes back falling at the mirrored frequency")
        if ex:
            e = ex[0]
            s += (f" (e.g. {float(e['rising_hz']) / 1000:.2f} kHz at {float(e['at_s']):.2f} s, back at "
                  f"{float(e['folded_hz']) / 1000:.2f} kHz at {float(e['folded_at_s']):.2f} s)")
        sentences.append(s + ".")
    sharp = detail.get("sharp_steps")
    if sharp and not detail.get("sharp_steps_on_hold_grid_hz") and not detail.get("sharp_steps_period_samples") \
            and "sample-sharp" in str(detail.get("reason") or ""):
        earlier = tonal or bool(detail.get("folded_partials"))
        sentences.append(f"{'Also, the' if earlier else 'The'} waveform jumps "
                         f"between two samples with no band-limited transition ({sharp} such jumps): its "
                         f"partials above {nyq} keep their strength and all fold back.")
    # the grid is named only when it is the whole evidence: notes, folded partials or sample-sharp jumps
    # (naive synthesis) can also make the prediction error repeat, and then explain the finding better
    grid = None if tonal or detail.get("folded_partials") or sharp else _grid_sentence(detail)
    if grid:
        sentences.append(grid)
    clipped = detail.get("ceiling_flat_run_count") and "sit flat on the waveform's extreme value" in str(
        detail.get("reason") or "")
    if clipped:
        earlier = tonal or bool(detail.get("folded_partials")) or bool(sharp) or bool(grid)
        sentences.append(f"{'Also, the' if earlier else 'The'} waveform sits flat on its extreme value in "
                         f"{int(detail['ceiling_flat_run_count'])} runs of samples, each entered and left by a "
                         "large step: it was clipped or saturated at the file's own rate, and the clipper's "
                         f"harmonics above {nyq} fold back into the audible band.")
    ratio = m.get("alias_to_harmonic_ratio_db")
    if ratio is not None:
        sentences.append(f"The folded partials are {float(ratio):.1f} dB relative to the harmonics.")
    if clipped and not (tonal or detail.get("folded_partials") or sharp or grid):
        sentences.append("Clip or saturate at an oversampled rate (or limit with a true-peak limiter instead), "
                         "and render again from the unclipped mix.")
        return " ".join(sentences)
    sentences.append("A synthesiser voice generated without band limiting does this, and so does a rate "
                     "conversion that dropped samples without an anti-alias filter. Re-render the voice with its "
                     "oscillators' anti-aliasing on, or at a higher internal rate; or redo the conversion from the "
                     "original with a proper resampler.")
    if clipped:
        sentences.append("Clip or saturate at an oversampled rate, too.")
    return " ".join(sentences)


def _grid_sentence(detail: dict) -> str | None:
    """The irregular sample grid in words, when the analyzer's reason names it (dropped or picked samples)."""
    reason = str(detail.get("reason") or "")
    if "irregular time grid" not in reason:
        return None
    interval = detail.get("grid_drop_interval_samples")
    period = detail.get("grid_pattern_period_samples")
    if "jumps about every" in reason and interval:
        how = f"a sample is missing about every {float(interval):.1f} samples"
    elif "repeats a drop pattern" in reason and "binary fraction" in reason \
            and detail.get("grid_binary_pattern_period_samples"):
        how = (f"the same pattern of kept and missing samples repeats every "
               f"{int(detail['grid_binary_pattern_period_samples'])} samples, as a converter whose read position "
               "is a binary fraction leaves it")
    elif "repeats a drop pattern" in reason and period:
        how = f"the same pattern of kept and missing samples repeats every {int(period)} samples"
    elif "carries the lines a conversion" in reason and detail.get("grid_conversion_source_hz"):
        how = (f"the prediction error carries the lines that picking or interpolating samples from "
               f"{float(detail['grid_conversion_source_hz']) / 1000:g} kHz without a filter leaves")
    else:
        return None
    return (f"The samples lie on an irregular time grid: {how}, in step with the sample clock through the "
            "file. That is what a rate conversion leaves when it keeps some samples and drops others without "
            "a filter; every partial is then also read at the wrong instants.")


def _tones(s, result, m) -> Finding:
    key = "ultrasonic_tones"
    req = s.ultrasonic_tones
    if m.get("ultrasonic_energy_db") is None or key not in m:
        return check_limits("sampling.ultrasonic_tones", "loudest ultrasonic tone", None, req,
                            missing_reason=_ultra_reason(result, m, "ultrasonic_energy_db"))
    tones = m.get(key) or []
    if not tones:
        from masterqc.judge.core import limit_text
        limit = limit_text(req)
        return Finding(check="sampling.ultrasonic_tones", status="pass",
                       message=f"No stationary tone above {_khz(m.get('ultrasonic_from_hz') or 20000)} "
                               f"(limit: {limit_words(req)}).",
                       limit=limit, unit="dBFS", severity=req.severity)
    loudest = max(tones, key=lambda t: t["level_dbfs"])
    f = check_limits("sampling.ultrasonic_tones", f"loudest ultrasonic tone ({_khz(loudest['frequency_hz'])})",
                     loudest["level_dbfs"], req)
    listed = sorted(tones, key=lambda t: -t["level_dbfs"])[:5]
    add_detail(f, ". Tones: " + ", ".join(f"{_khz(t['frequency_hz'])} at {t['level_dbfs']:.1f} dBFS" for t in listed))
    return f


def _conversion(target, result, m) -> list[Finding]:
    t = target.target_rate_hz
    fs = _rate(result)
    entries = {c.get("target_rate_hz"): c for c in (m.get("conversions") or [])}
    c = entries.get(t)
    base = f"sampling.conversion_{t}"
    out = []
    if c is None:
        why = (f"the master is already at {t / 1000:g} kHz" if fs == t
               else f"no conversion to {t} Hz was measured (the measurement was made without this spec's targets)")
        if target.true_peak is not None:
            out.append(skipped(f"{base}.true_peak", f"true peak after conversion to {t / 1000:g} kHz: not judged; {why}",
                               severity=target.true_peak.severity))
        if target.energy_above_nyquist is not None:
            out.append(skipped(f"{base}.energy_above_nyquist",
                               f"energy above {_khz(t / 2)} (Nyquist of {t / 1000:g} kHz): not judged; {why}",
                               severity=target.energy_above_nyquist.severity))
        return out
    if target.true_peak is not None:
        f = check_limits(f"{base}.true_peak", f"true peak after conversion to {t / 1000:g} kHz",
                         c.get("true_peak_after_dbtp"), target.true_peak,
                         missing_reason="the converted signal is digital silence")
        if f.status in ("warn", "fail"):
            add_detail(f, f". Converter used for this estimate: {c.get('filter')}")
        out.append(f)
    if target.energy_above_nyquist is not None:
        f = check_limits(f"{base}.energy_above_nyquist",
                         f"energy above {_khz(t / 2)} (Nyquist of {t / 1000:g} kHz) relative to the band below",
                         c.get("energy_above_target_nyquist_db"), target.energy_above_nyquist,
                         missing_reason=(f"the target rate is not below the master's ({fs} Hz): nothing can fold"
                                         if fs is not None and t >= fs else "no content above the target's Nyquist"))
        folds = c.get("folds") or []
        if f.status in ("warn", "fail") and folds:
            add_detail(f, ". A converter without an anti-alias filter would fold " + ", ".join(
                f"{_khz_range(d['from_hz'], d['to_hz'])} to "
                + " and ".join(_khz_range(a, b) for a, b in d["fold_to_hz"])
                for d in folds[:4]))
        out.append(f)
    return out
