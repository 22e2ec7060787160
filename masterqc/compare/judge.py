"""Judge a comparison against a spec's ``derivation:`` section: pure, no I/O.

Each requirement gives one :class:`masterqc.judge.core.Finding` with the same
precision rule as every other judge (a value is rounded once to the shown step
and that value is compared).  Messages are plain sentences about the
deliverable.
"""

from __future__ import annotations

from masterqc.judge.core import Finding, check_allowed, check_limits, skipped, verdict

_ID_WORDS = {"same": "the same programme as the master", "different_mix": "a different mix of the master's programme",
             "different_programme": "not the master's programme"}


def judge(section, comparison: dict) -> tuple[list[Finding], str]:
    """``(findings, verdict)`` of ``comparison`` (a :class:`~masterqc.compare.model.Comparison` dumped to a
    dict) against ``section`` (the validated ``derivation:`` section)."""
    c = comparison
    out: list[Finding] = []
    ident = c["identity"]
    same = ident["verdict"] == "same"
    not_same = "the deliverable is not the same programme, so the conversion is not assessed"
    if section.identity is not None:
        f = check_allowed("derivation.identity", "identity", ident["verdict"], section.identity,
                          show=lambda v: v.replace("_", " "))
        corr = ident.get("correlation")
        if corr is not None:
            f.message += (f": the deliverable is {_ID_WORDS[ident['verdict']]} (correlation {corr:.4f}, "
                          f"residual {ident['residual_re_signal_db']:.1f} dB below the signal)"
                          if ident.get("residual_re_signal_db") is not None else "")
        out.append(f)
    ch = c["channels"]
    if section.gain is not None:
        out.append(check_limits("derivation.gain", "gain against the master", ch.get("gain_db"), section.gain,
                                missing_reason="no gain could be measured (no common signal)"))
    if section.polarity_inverted is not None:
        inv = ch.get("polarity_inverted") or []
        f = check_limits("derivation.polarity_inverted", "channels with inverted polarity", len(inv),
                         section.polarity_inverted)
        if inv:
            f.message += f" ({', '.join(inv)})"
        out.append(f)
    if section.channel_order is not None:
        f = check_allowed("derivation.channel_order", "channel order", ch["order"], section.channel_order)
        pairs = ", ".join(f"{m['deliverable_channel']}<-{m['master_channel']}" for m in ch["matches"])
        f.message += f" (deliverable<-master: {pairs})"
        out.append(f)
    tr = c["transfer"]
    if section.passband_ripple is not None:
        lo, hi = tr["ripple_band_hz"]
        out.append(check_limits("derivation.passband_ripple", f"pass-band ripple {lo:g} Hz to {hi / 1000:g} kHz",
                                tr.get("passband_ripple_db") if same else None, section.passband_ripple,
                                missing_reason=None if same else not_same))
    if section.level_at_20khz is not None:
        why = not_same if not same else "20 kHz lies outside the band the two files share"
        out.append(check_limits("derivation.level_at_20khz", "level at 20 kHz",
                                tr.get("level_at_20khz_db") if same else None, section.level_at_20khz,
                                missing_reason=why))
    rs = c["residue"]
    if section.folded_residue is not None:
        why = not_same if not same else "the deliverable's rate is not below the master's, so nothing can fold"
        val = rs.get("folded_re_signal_db") if same else None
        if same and val is None and rs.get("folded_detection_floor_db") is not None:
            val = rs["folded_detection_floor_db"]  # nothing measurable: judged at the floor
        out.append(check_limits("derivation.folded_residue", "folded residue (from above the new Nyquist "
                                "frequency)", val, section.folded_residue, missing_reason=why))
    if section.image_residue is not None:
        why = not_same if not same else "the deliverable's rate is not above the master's"
        out.append(check_limits("derivation.image_residue", "content above the master's Nyquist frequency",
                                rs.get("above_master_band_re_signal_db") if same else None,
                                section.image_residue, missing_reason=why))
    if section.other_residue is not None:
        out.append(check_limits("derivation.other_residue", "residue not explained by the master",
                                rs.get("other_re_signal_db") if same else None, section.other_residue,
                                missing_reason=not_same))
    rq = c["requantisation"]
    if section.dither_required:
        out.append(_dither(rq, same, not_same))
    pl = c["peaks_loudness"]
    if section.loudness_change is not None:
        out.append(check_limits("derivation.loudness_change", "integrated loudness change",
                                pl.get("loudness_change_lu"), section.loudness_change,
                                missing_reason="one of the files has no gated loudness (silence)"))
    if section.true_peak_after is not None:
        where = [[o["start_s"], o["end_s"]] for o in pl.get("overs_introduced", []) if o["kind"] == "true_peak_over"]
        out.append(check_limits("derivation.true_peak_after", "true peak of the deliverable",
                                pl.get("deliverable_true_peak_dbtp"), section.true_peak_after, where_s=where,
                                missing_reason="the deliverable is digital silence"))
    if section.overs_introduced is not None:
        where = [[o["start_s"], o["end_s"]] for o in pl.get("overs_introduced", [])]
        out.append(check_limits("derivation.overs_introduced", "clipped runs and overs the conversion added",
                                pl.get("overs_introduced_count"), section.overs_introduced, where_s=where))
    if section.jumps is not None:
        jumps = c["alignment"].get("jumps") or []
        where = [[j["at_master_s"], j["at_master_s"]] for j in jumps]
        f = check_limits("derivation.jumps", "jumps of the offset (edits)", len(jumps), section.jumps, where_s=where)
        if jumps:
            f.message += ": " + "; ".join(_jump_words(j) for j in jumps[:4])
        out.append(f)
    return out, verdict(out)


def _jump_words(j: dict) -> str:
    size = j["size_ms"]
    what = "missing" if size < 0 else "repeated or inserted"
    return f"{abs(size):.1f} ms of the master {what} at {j['at_master_s']:.3f} s (master time)"


def _dither(rq: dict, same: bool, not_same: str) -> Finding:
    check = "derivation.dither_required"
    if not same:
        return skipped(check, f"dither: not judged, {not_same}", limit="dithered")
    v = rq.get("verdict")
    if v == "unknown":
        return skipped(check, f"dither: not judged, {rq.get('verdict_reason') or 'the requantisation cannot be assessed'}",
                       limit="dithered")
    level = rq.get("residual_power_dbfs")
    lvl = f"{level:.1f} dBFS" if level is not None else "n/a"
    if v == "signal_correlated":
        return Finding(check=check, status="fail", severity="fail", measured="undithered",
                       measured_text="undithered", limit="dithered",
                       message=(f"the requantisation error follows the signal: where the signal falls below it, its "
                                f"level changes by {rq['quiet_residual_change_db']:+.1f} dB (TPDF dither keeps it "
                                "level): the word length was cut without dither"))
    return Finding(check=check, status="pass", severity="fail", measured="dithered", measured_text="dithered",
                   limit="dithered",
                   message=(f"the requantisation error ({lvl}) stays level through quiet passages: dithered"))
