"""Judge a comparison against a spec's ``derivation:`` section: pure, no I/O.

Each requirement gives one :class:`masterqc.judge.core.Finding` with the same
precision rule as every other judge (a value is rounded once to the shown step
and that value is compared).  Messages are plain sentences about the
deliverable.
"""

from __future__ import annotations

from masterqc.judge.core import Finding, check_allowed, check_limits, fmt, quantize, skipped, verdict
from masterqc.judge.integrity import clock_text

def judge(section, comparison: dict) -> tuple[list[Finding], str]:
    """``(findings, verdict)`` of ``comparison`` (a :class:`~masterqc.compare.model.Comparison` dumped to a
    dict) against ``section`` (the validated ``derivation:`` section).

    Status, measured value and limit come from the shared checks (one precision rule everywhere);
    each message is then written as a sentence about the deliverable, with the value as judged."""
    c = comparison
    out: list[Finding] = []
    ident = c["identity"]
    same = ident["verdict"] == "same"
    not_same = "the deliverable is not the master's programme, so the conversion is not assessed"
    if section.identity is not None:
        f = check_allowed("derivation.identity", "identity", ident["verdict"], section.identity,
                          show=lambda v: v.replace("_", " "))
        f.message = _identity_words(ident, f, section.identity.allowed)
        out.append(f)
    ch = c["channels"]
    if section.gain is not None:
        f = check_limits("derivation.gain", "gain against the master", ch.get("gain_db"), section.gain,
                         missing_reason="no gain could be measured (no common signal)")
        if f.status != "skipped":
            f.message = _gain_words(f, ch) + _limit_words(f)
        out.append(f)
    if section.polarity_inverted is not None:
        inv = ch.get("polarity_inverted") or []
        f = check_limits("derivation.polarity_inverted", "channels with inverted polarity", len(inv),
                         section.polarity_inverted)
        f.message = (f"Polarity is inverted on {_and(inv)}." if inv else
                     "Polarity matches the master on every channel.") + _limit_words(f, "")
        out.append(f)
    if section.channel_order is not None:
        f = check_allowed("derivation.channel_order", "channel order", ch["order"], section.channel_order)
        f.message = _order_words(ch) + ("" if f.status == "pass" else
                                        f" The spec allows: {', '.join(section.channel_order.allowed)}.")
        out.append(f)
    tr = c["transfer"]
    if section.passband_ripple is not None:
        lo, hi = tr["ripple_band_hz"]
        f = check_limits("derivation.passband_ripple", f"pass-band ripple {lo:g} Hz to {hi / 1000:g} kHz",
                         tr.get("passband_ripple_db") if same else None, section.passband_ripple,
                         missing_reason=None if same else not_same)
        if f.status != "skipped":
            f.message = (f"The pass-band ripple from {lo:g} Hz to {_khz(hi)} is {f.measured_text}."
                         if f.status == "pass" else
                         f"The pass band ripples by {f.measured_text} from {lo:g} Hz to {_khz(hi)}.") \
                + _limit_words(f)
        out.append(f)
    if section.level_at_20khz is not None:
        why = not_same if not same else "20 kHz lies outside the band the two files share"
        f = check_limits("derivation.level_at_20khz", "level at 20 kHz",
                         tr.get("level_at_20khz_db") if same else None, section.level_at_20khz,
                         missing_reason=why)
        if f.status != "skipped":
            v = f.measured
            f.message = ("At 20 kHz the deliverable matches the master (0.0 dB)." if v == 0 else
                         f"At 20 kHz the deliverable is {_num(abs(v), f)} dB "
                         f"{'down on' if v < 0 else 'up on'} the master"
                         + (": the converter rolls off the top of the band." if f.status != "pass" and v < 0
                            else "."))
            lo_db = f.limit_low
            f.message += (f" The spec allows at most {_num(-lo_db, f)} dB of loss." if f.status != "pass" and
                          f.limit_high is None and lo_db is not None and lo_db <= 0 else _limit_words(f))
        out.append(f)
    rs = c["residue"]
    nyq = f"{_khz(tr['nyquist_new_hz'])}"
    if section.folded_residue is not None:
        why = not_same if not same else "the deliverable's rate is not below the master's, so nothing can fold"
        val = rs.get("folded_re_signal_db") if same else None
        at_floor = False
        if same and val is None and rs.get("folded_detection_floor_db") is not None:
            val = rs["folded_detection_floor_db"]  # nothing measurable: judged at the floor
            at_floor = True
        f = check_limits("derivation.folded_residue", "folded residue (from above the new Nyquist "
                         "frequency)", val, section.folded_residue, missing_reason=why)
        if f.status != "skipped":
            if at_floor:
                f.message = (f"Nothing measurable folded down from above {nyq}: at most {f.measured_text} against "
                             "the signal (the detection floor).")
            elif not rs.get("folded_found"):
                f.message = (f"Nothing measurable folded down from above {nyq} (estimate {f.measured_text} against "
                             "the signal, under the detection floor).")
            elif f.status == "pass":
                f.message = (f"A trace of content from above {nyq} folded down, {f.measured_text} against the "
                             "signal.")
            else:
                f.message = (f"Content from above {nyq} folded down into the audio band at {f.measured_text} "
                             "against the signal: the converter's anti-alias filter let it through.")
            f.message += _limit_words(f, "dB against the signal")
        out.append(f)
    if section.image_residue is not None:
        why = not_same if not same else "the deliverable's rate is not above the master's"
        f = check_limits("derivation.image_residue", "content above the master's Nyquist frequency",
                         rs.get("above_master_band_re_signal_db") if same else None,
                         section.image_residue, missing_reason=why)
        if f.status != "skipped":
            top = _khz(c["master"]["sample_rate_hz"] / 2)
            f.message = (f"Content above {top}, where the master has none, lies at {f.measured_text} against "
                         "the signal" + (": images the upsampler's filter left." if f.status != "pass" else ".")
                         ) + _limit_words(f, "dB against the signal")
        out.append(f)
    if section.other_residue is not None:
        f = check_limits("derivation.other_residue", "residue not explained by the master",
                         rs.get("other_re_signal_db") if same else None, section.other_residue,
                         missing_reason=not_same)
        if f.status != "skipped":
            f.message = (f"What the master does not explain lies at {f.measured_text} against the signal."
                         + _limit_words(f, "dB against the signal"))
        out.append(f)
    rq = c["requantisation"]
    if section.dither_required:
        out.append(_dither(rq, same, not_same, c["deliverable"]))
    pl = c["peaks_loudness"]
    if section.loudness_change is not None:
        f = check_limits("derivation.loudness_change", "integrated loudness change",
                         pl.get("loudness_change_lu"), section.loudness_change,
                         missing_reason="one of the files has no gated loudness (silence)")
        if f.status != "skipped":
            v = f.measured
            f.message = ("Integrated loudness is the master's (0.0 LU change)." if v == 0 else
                         f"Integrated loudness is {_num(abs(v), f)} LU {'lower' if v < 0 else 'higher'} than "
                         "the master's.") + _limit_words(f)
        out.append(f)
    if section.true_peak_after is not None:
        where = [[o["start_s"], o["end_s"]] for o in pl.get("overs_introduced", []) if o["kind"] == "true_peak_over"]
        f = check_limits("derivation.true_peak_after", "true peak of the deliverable",
                         pl.get("deliverable_true_peak_dbtp"), section.true_peak_after, where_s=where,
                         missing_reason="the deliverable is digital silence")
        if f.status != "skipped":
            f.message = f"The deliverable peaks at {f.measured_text}"
            if pl.get("master_true_peak_dbtp") is not None:
                f.message += f" (the master at {pl['master_true_peak_dbtp']:.1f} dBTP)"
            f.message += "." + _limit_words(f)
        out.append(f)
    if section.overs_introduced is not None:
        overs = pl.get("overs_introduced", [])
        where = [[o["start_s"], o["end_s"]] for o in overs]
        f = check_limits("derivation.overs_introduced", "clipped runs and overs the conversion added",
                         pl.get("overs_introduced_count"), section.overs_introduced, where_s=where)
        n = pl.get("overs_introduced_count") or 0
        f.message = ("The conversion added no clipped runs and no true-peak overs." if not n else
                     f"The conversion added {n} clipped run{'s' if n != 1 else ''} or true-peak "
                     f"over{'s' if n != 1 else ''} the master does not have, the first at "
                     f"{clock_text(overs[0]['start_s'])}.") + _limit_words(f, "")
        out.append(f)
    if section.jumps is not None:
        jumps = c["alignment"].get("jumps") or []
        where = [[j["at_master_s"], j["at_master_s"]] for j in jumps]
        f = check_limits("derivation.jumps", "jumps of the offset (edits)", len(jumps), section.jumps, where_s=where)
        f.message = ("The offset holds along the whole programme: no edits." if not jumps else
                     f"The offset jumps {_times(len(jumps))}: " + "; ".join(_jump_words(j) for j in jumps[:4])
                     + ("; ..." if len(jumps) > 4 else "") + ".") + _limit_words(f, "")
        out.append(f)
    for f in out:
        if f.check in _ALLOWED_WORDS and f.limit and f.limit.startswith("one of "):
            words = _ALLOWED_WORDS[f.check]
            f.limit = " or ".join(words.get(v.strip(), v.strip()) for v in f.limit[len("one of "):].split(","))
        elif f.limit_low is None and f.limit_high == 0 and f.check in _COUNTS:
            f.limit = "none"
    return out, verdict(out)


#: limits of allowed-value checks in words (the JSON keeps the values in ``measured``)
_ALLOWED_WORDS = {"derivation.identity": {"same": "same programme", "different mix": "different mix",
                                          "different programme": "different programme"},
                  "derivation.channel_order": {"same": "the master's order", "swapped": "swapped",
                                               "remapped": "remapped", "ambiguous": "ambiguous"}}
_COUNTS = ("derivation.polarity_inverted", "derivation.overs_introduced", "derivation.jumps")


# ---------------------------------------------------------------- words

def _khz(hz: float) -> str:
    return f"{hz / 1000:.4g} kHz" if hz >= 1000 else f"{hz:g} Hz"


def _and(items) -> str:
    items = list(items)
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


def _times(n: int) -> str:
    return {1: "once", 2: "twice"}.get(n, f"{n} times")


def _num(v: float, f: Finding) -> str:
    return fmt(v, f.decimals if f.decimals is not None else 1)


def _limit_words(f: Finding, unit: str | None = None) -> str:
    """The spec's limit as a clause, after a finding that missed it (or came near); empty on a pass."""
    if f.status == "pass":
        return ""
    u = f.unit if unit is None else unit
    u = f" {u}" if u else ""
    dec = f.decimals if f.decimals is not None else 0
    lo, hi = f.limit_low, f.limit_high
    if lo is None and hi == 0:
        allowed = "none"
    elif lo is not None and hi is not None:
        allowed = f"{fmt(lo, dec)} to {fmt(hi, dec)}{u}"
    elif hi is not None:
        allowed = f"at most {fmt(hi, dec)}{u}"
    elif lo is not None:
        allowed = f"at least {fmt(lo, dec)}{u}"
    else:
        return ""
    if f.status == "warn" and f.miss is None:
        return f" That is close to the spec's limit ({allowed})."
    return f" The spec allows {allowed}."


def _identity_words(ident: dict, f: Finding, allowed) -> str:
    v = ident["verdict"]
    corr = ident.get("correlation")
    rsr = ident.get("residual_re_signal_db")
    if v == "same":
        text = "The deliverable is the master's programme"
        text += (f": what the master does not explain lies {-rsr:.1f} dB below the signal." if rsr is not None
                 else ".")
    elif v == "different_mix":
        text = ("The deliverable is a different mix of the master's programme: the two share most of their "
                f"content (correlation {corr:.2f}) but not all of it.")
    else:
        text = "The deliverable is not the master's programme" + (
            f" (correlation {corr:.2f})." if corr is not None else ": the two share no common signal.")
    if f.status != "pass":
        text += " The spec allows only: " + ", ".join(a.replace("_", " ") for a in allowed) + "."
    return text


def _gain_words(f: Finding, ch: dict) -> str:
    v = f.measured
    gains = [m.get("gain_db") for m in ch.get("matches", [])]
    shown = [None if g is None else quantize(g, f.decimals, "up") for g in gains]
    if v == 0:
        return f"The deliverable is at the master's level ({f.measured_text})."
    word = "quieter" if v < 0 else "louder"
    if len(shown) > 1 and all(x == v for x in shown):
        where = " on both channels" if len(shown) == 2 else " on every channel"
    elif len(shown) > 1:
        where = " (" + ", ".join(f"{m['deliverable_channel']} {fmt(abs(x), f.decimals)} dB" for m, x in
                                 zip(ch["matches"], shown) if x is not None) + ")"
    else:
        where = ""
    return f"The deliverable is {_num(abs(v), f)} dB {word} than the master{where}."


def _order_words(ch: dict) -> str:
    order = ch["order"]
    pairs = ", ".join(f"{m['deliverable_channel']} from {m['master_channel']}" for m in ch["matches"])
    if order == "same":
        return f"The channels are in the master's order ({pairs})."
    if order == "swapped":
        return "Left and right are swapped: the deliverable's L carries the master's R, and its R the master's L."
    if order == "ambiguous":
        return f"The channel order cannot be told from the content: the channels are too alike ({pairs})."
    return f"The channels are in another order than the master's ({pairs})."


def _jump_words(j: dict) -> str:
    size = j["size_ms"]
    what = "missing" if size < 0 else "repeated or inserted"
    return f"{abs(size):.1f} ms of the master {what} at {clock_text(j['at_master_s'])} (master time)"


def _dither(rq: dict, same: bool, not_same: str, deliverable: dict) -> Finding:
    check = "derivation.dither_required"
    if not same:
        return skipped(check, f"Dither not judged: {not_same}.", limit="dithered")
    v = rq.get("verdict")
    bits = deliverable.get("bit_depth")
    if v == "unknown":
        return skipped(check, f"Dither not judged: {rq.get('verdict_reason') or 'the requantisation cannot be assessed'}.",
                       limit="dithered")
    level = rq.get("residual_power_dbfs")
    lvl = f" ({level:.1f} dBFS)" if level is not None else ""
    if v == "signal_correlated":
        change = rq.get("quiet_residual_change_db")
        how = (f"{'rises' if change > 0 else 'falls'} by {abs(change):.1f} dB where the signal drops below it"
               if change is not None else "changes where the signal drops below it")
        return Finding(check=check, status="fail", severity="fail", measured="undithered",
                       measured_text="no dither", limit="dithered",
                       message=(f"{'Rounded' if (change or 0) < 0 else 'Truncated'} to {bits} bits without dither: "
                                f"the error follows the signal in the fades (it {how}; with TPDF dither it would "
                                "stay level). Requantise from the master with TPDF dither."))
    return Finding(check=check, status="pass", severity="fail", measured="dithered", measured_text="dithered",
                   limit="dithered",
                   message=(f"Requantised to {bits} bits with dither: the error{lvl} stays level through the fades "
                            "and quiet passages."))
