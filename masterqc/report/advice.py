"""What to fix: one or two plain sentences of advice per finding that missed, in the trade's words.

:func:`advice_for` turns one failed or warned :class:`~masterqc.contract.Finding` (with the
result it belongs to) into what an engineer would do about it, with the amount:
"Lower the gain by 4.4 dB ...", "Put a true-peak limiter at or below -1.0 dBTP ...",
"Reconvert from the original 44.1 kHz master instead of delivering an upsampled file."
Every number comes from the finding (its numeric limits and the value judged) or from the
result's measurements; nothing is measured here.  The technical detail (converter designs,
detector figures) stays in the finding's message, shown in the appendix.

A kind of finding with no advice written for it gets a generic sentence built from its
value and limit, so no failure is left without a line.
"""

from __future__ import annotations

from masterqc.contract import Finding


def _n(v: float, d: int = 1) -> str:
    text = f"{v:.{d}f}"
    return text.lstrip("-") if float(text) == 0.0 else text


def _khz(hz) -> str:
    return f"{float(hz) / 1000:g} kHz"


def _over(f: Finding) -> float | None:
    """How far the value judged lies above the ceiling (None when it is not above one)."""
    if f.measured is None or isinstance(f.measured, (bool, str, list)) or f.limit_high is None:
        return None
    d = float(f.measured) - float(f.limit_high)
    return d if d > 0 else None


def _under(f: Finding) -> float | None:
    """How far the value judged lies below the floor (None when it is not below one)."""
    if f.measured is None or isinstance(f.measured, (bool, str, list)) or f.limit_low is None:
        return None
    d = float(f.limit_low) - float(f.measured)
    return d if d > 0 else None


def _integrated(f: Finding, m: dict, result: dict) -> str | None:
    value = f.measured
    if value is None or isinstance(value, (bool, str)):
        if f.limit_low is not None:
            return ("The programme has no measurable loudness (silence or below the -70 LUFS gate): check that "
                    "the right file was delivered.")
        return None
    aim = f.target if f.target is not None else (f.limit_high if _over(f) else f.limit_low)
    if aim is None:
        return None
    gain = float(aim) - float(value)
    aim_words = (f"the {_n(aim)} LUFS target" if f.target is not None else f"the limit of {_n(aim)} LUFS")
    if gain < 0:
        return f"Lower the gain by {_n(-gain)} dB to reach {aim_words}."
    text = f"Raise the gain by {_n(gain)} dB to reach {aim_words}"
    tp = m.get("true_peak_dbtp")
    ceiling = _true_peak_ceiling(result)
    if isinstance(tp, (int, float)) and ceiling is not None and tp + gain > ceiling:
        text += (f"; the true peak would then reach {_n(tp + gain)} dBTP, so put a true-peak limiter at or below "
                 f"{_n(ceiling)} dBTP")
    return text + "."


def _true_peak_ceiling(result: dict) -> float | None:
    for item in result.get("findings") or []:
        if isinstance(item, dict) and item.get("check") == "peaks.true_peak" and item.get("limit_high") is not None:
            return float(item["limit_high"])
    return None


def _true_peak(f: Finding, m: dict, result: dict) -> str | None:
    over = _over(f)
    if over is None:
        if f.limit_high is not None and f.status == "warn":
            return (f"The true peak sits just under the {_n(f.limit_high)} dBTP ceiling: a true-peak limiter at "
                    f"or below {_n(f.limit_high)} dBTP leaves room for later conversion and coding.")
        return None
    return (f"Put a true-peak limiter at or below {_n(f.limit_high)} dBTP (the peaks now reach {_n(f.measured)} "
            f"dBTP), or lower the gain by {_n(over)} dB.")


def _sample_peak(f: Finding, m: dict, result: dict) -> str | None:
    over = _over(f)
    if over is None:
        return None
    return (f"Bring the sample peaks down by {_n(over)} dB: a limiter with its ceiling at or below "
            f"{_n(f.limit_high)} dBFS, or less gain.")


def _range(f: Finding, m: dict, result: dict) -> str | None:
    if _over(f) is not None:
        return (f"Narrow the dynamics by {_n(_over(f))} LU: bring the quiet passages up or the loud ones down "
                "(gentle compression or riding the level), then check the integrated loudness again.")
    if _under(f) is not None:
        return (f"The master is {_n(_under(f))} LU too even: use less compression or limiting so that quiet and "
                "loud passages differ more.")
    return None


def _max_loudness(kind: str):
    def advise(f: Finding, m: dict, result: dict) -> str | None:
        over = _over(f)
        if over is None:
            return None
        return (f"Bring the loudest passages down by {_n(over)} dB: their {kind} loudness reaches {_n(f.measured)} "
                f"LUFS against a limit of {_n(f.limit_high)} LUFS.")
    return advise


def _format(kind: str):
    def advise(f: Finding, m: dict, result: dict) -> str | None:
        allowed = f.limit or "an allowed value"
        if kind == "sample rate":
            src = m.get("upsampled_from_hz")
            if src:
                return (f"Deliver at {allowed}: convert from the original {_khz(src)} master with a good "
                        "resampler, not from this file.")
            return f"Deliver at {allowed}: export or convert the master at that rate with a good resampler."
        if kind == "bit depth":
            return f"Export the master at {allowed} (from the session or the original master, not from this file)."
        return f"Export the master with the {kind} the spec asks for: {allowed}."
    return advise


def _clipping(f: Finding, m: dict, result: dict) -> str | None:
    n = f.measured if isinstance(f.measured, (int, float)) and not isinstance(f.measured, bool) else None
    runs = f"the {int(n)} clipped runs" if n else "the clipping"
    return (f"Remove {runs} at the source: lower the level into the converter or the last limiter and render "
            "again. A limiter after the clipping cannot repair it.")


def _dropouts(f: Finding, m: dict, result: dict) -> str | None:
    return ("Repair the dropouts (the times are listed in the appendix) from the session or a clean copy; they are "
            "gaps of digital silence or frozen samples inside the programme.")


def _head_tail(where: str):
    def advise(f: Finding, m: dict, result: dict) -> str | None:
        if _over(f) is not None:
            return f"Trim {_n(_over(f), 3)} s of silence from the {where} (at most {_n(f.limit_high, 3)} s)."
        if _under(f) is not None:
            return f"Add {_n(_under(f), 3)} s of silence at the {where} (at least {_n(f.limit_low, 3)} s)."
        return None
    return advise


def _duration(f: Finding, m: dict, result: dict) -> str | None:
    if _over(f) is not None:
        return f"The master runs {_n(_over(f), 3)} s too long: edit it to at most {_n(f.limit_high, 3)} s."
    if _under(f) is not None:
        return f"The master is {_n(_under(f), 3)} s too short: it should run at least {_n(f.limit_low, 3)} s."
    return None


def _dc(f: Finding, m: dict, result: dict) -> str | None:
    return "Remove the DC offset: a high-pass filter at a few hertz, or a DC-removal tool, on the master."


def _subsonic(f: Finding, m: dict, result: dict) -> str | None:
    return "High-pass the master just below 20 Hz to remove the subsonic energy (rumble, DC drift, wind)."


def _bit_depth_effective(f: Finding, m: dict, result: dict) -> str | None:
    bits = (result.get("format") or {}).get("bit_depth")
    have = f"{_n(f.measured, 0)} bits" if isinstance(f.measured, (int, float)) else "fewer bits"
    return (f"Only {have} of the {bits}-bit words carry audio: export again from a source of full resolution, "
            "or deliver at the lower word length if the spec allows it.")


def _polarity(f: Finding, m: dict, result: dict) -> str | None:
    return "Invert the polarity of one channel of the pair so that they play in phase, then check the mix in mono."


def _dual_mono(f: Finding, m: dict, result: dict) -> str | None:
    return ("The two channels are identical: deliver the real stereo master, or a mono file if mono was "
            "intended.")


def _balance(f: Finding, m: dict, result: dict) -> str | None:
    over = _over(f)
    if over is None:
        return None
    return f"Rebalance the channels: they differ by {_n(f.measured)} LU, {_n(over)} LU more than the spec allows."


def _correlation(f: Finding, m: dict, result: dict) -> str | None:
    return ("Check the stereo image for out-of-phase content (a wide stereo effect, a reversed microphone or "
            "cable); it will cancel when played in mono.")


def _upsampled(f: Finding, m: dict, result: dict) -> str | None:
    src = m.get("upsampled_from_hz")
    if src:
        return f"Reconvert from the original {_khz(src)} master instead of delivering an upsampled file."
    return "Deliver the master at the rate it was made at, instead of an upsampled file."


def _band_limited(f: Finding, m: dict, result: dict) -> str | None:
    edge = m.get("band_limit_hz") or m.get("effective_bandwidth_hz")
    at = f" at {_khz(edge)}" if edge else ""
    return (f"The content stops{at}, as after lossy coding or a low-pass: deliver from a full-bandwidth source "
            "(the original session or master, never an MP3 or AAC copy).")


def _imaging(f: Finding, m: dict, result: dict) -> str | None:
    src = m.get("upsampled_from_hz")
    where = f"the original {_khz(src)}" if src else "the original"
    return f"Reconvert from {where} master with a resampler that filters its images."


def _aliasing(f: Finding, m: dict, result: dict) -> str | None:
    return ("Re-render the synth voices with their anti-aliasing on (or at a higher internal rate), or redo the "
            "rate conversion from the original with a proper resampler.")


def _ultrasonic(f: Finding, m: dict, result: dict) -> str | None:
    over = _over(f)
    if f.check == "sampling.ultrasonic_loudness_change":
        return ("Low-pass the master at about 20 kHz: the ultrasonic content alone changes its loudness by "
                f"{_n(f.measured)} LU" + (f", {_n(over)} LU more than the spec allows." if over is not None else "."))
    amount = f" by at least {_n(over)} dB" if over is not None else ""
    return f"Low-pass the master at about 20 kHz to reduce the ultrasonic content{amount}."


def _tones(f: Finding, m: dict, result: dict) -> str | None:
    return ("Remove the ultrasonic tone with a steep low-pass or a notch (it can come from a plug-in, a monitor "
            "or a converter), then render again.")


def _conversion_tp(f: Finding, m: dict, result: dict) -> str | None:
    over = _over(f)
    if over is None:
        return None
    rate = f.check.split("conversion_", 1)[1].split(".", 1)[0]
    ceiling = float(f.limit_high) - over
    return (f"The {_khz(rate)} deliverable will peak {_n(over)} dB over the ceiling: set the true-peak limiter "
            f"of the master {_n(over)} dB lower (at or below {_n(ceiling)} dBTP), or limit the {_khz(rate)} "
            "version after converting it.")


def _conversion_energy(f: Finding, m: dict, result: dict) -> str | None:
    rate = f.check.split("conversion_", 1)[1].split(".", 1)[0]
    return (f"Convert to {_khz(rate)} with a resampler that has a steep anti-alias filter; a plain or "
            "cheap converter would fold this content back into the audible band.")


def _limiting(f: Finding, m: dict, result: dict) -> str | None:
    norm = result.get("normalisation") or {}
    after, ceiling = norm.get("true_peak_after_gain_dbtp"), norm.get("ceiling_dbtp")
    over = _over(f)
    if over is None or after is None or ceiling is None:
        return None
    return (f"A player turning this master to {_n(norm.get('target_lufs'))} LUFS would have to limit its peaks "
            f"by {_n(after - ceiling)} dB: master it quieter, or with {_n(over)} dB less true peak.")


def _truncated(f: Finding, m: dict, result: dict) -> str | None:
    return "The file is cut short: copy or export it again and check the copy against the original."


def _nonfinite(f: Finding, m: dict, result: dict) -> str | None:
    return "Export again from the session: the file holds samples that are not numbers (NaN or infinite)."


ADVICE = {
    "loudness.integrated": _integrated,
    "loudness.range": _range,
    "loudness.max_momentary": _max_loudness("momentary"),
    "loudness.max_short_term": _max_loudness("short-term"),
    "peaks.true_peak": _true_peak,
    "peaks.sample_peak": _sample_peak,
    "format.sample_rate": _format("sample rate"),
    "format.bit_depth": _format("bit depth"),
    "format.container": _format("file type"),
    "format.encoding": _format("encoding"),
    "format.channels": _format("channel count"),
    "format.channel_layout": _format("channel layout"),
    "duration.total": _duration,
    "integrity.clipped_runs": _clipping,
    "integrity.dropouts": _dropouts,
    "integrity.head_silence": _head_tail("head"),
    "integrity.tail_silence": _head_tail("tail"),
    "integrity.head_digital_silence": _head_tail("head"),
    "integrity.tail_digital_silence": _head_tail("tail"),
    "integrity.dc_offset": _dc,
    "integrity.subsonic_energy": _subsonic,
    "integrity.effective_bit_depth": _bit_depth_effective,
    "integrity.inverted_polarity": _polarity,
    "integrity.dual_mono": _dual_mono,
    "integrity.level_balance": _balance,
    "integrity.phase_correlation": _correlation,
    "integrity.phase_correlation_below": _correlation,
    "integrity.truncated_audio": _truncated,
    "integrity.nonfinite_samples": _nonfinite,
    "sampling.upsampled": _upsampled,
    "sampling.band_limited": _band_limited,
    "sampling.effective_bandwidth": _band_limited,
    "sampling.imaging": _imaging,
    "sampling.aliasing": _aliasing,
    "sampling.alias_to_harmonic_ratio": _aliasing,
    "sampling.ultrasonic_energy": _ultrasonic,
    "sampling.ultrasonic_energy_3s": _ultrasonic,
    "sampling.ultrasonic_loudness_change": _ultrasonic,
    "sampling.ultrasonic_tones": _tones,
    "normalisation.limiting": _limiting,
}


def _generic(f: Finding) -> str:
    """A line for a kind of finding with no advice written for it: the finding's first sentence."""
    from masterqc.report.view import headline
    return "Fix this and check again: " + headline(f.message)[:1].lower() + headline(f.message)[1:]


def advice_for(f: Finding, result: dict) -> str:
    """One or two sentences of what to do about ``f`` (a finding whose status is fail, warn or error)."""
    m = result.get("measurements") or {}
    if f.status == "error":
        if f.check == "file.read":
            return "The file could not be read: check that it is a complete audio file and deliver it again."
        return "The check could not be completed (see the appendix): check the file and run masterqc again."
    key = f.check
    if key.startswith("sampling.conversion_"):
        key = "sampling.conversion.true_peak" if key.endswith(".true_peak") else "sampling.conversion.energy"
    fn = {"sampling.conversion.true_peak": _conversion_tp,
          "sampling.conversion.energy": _conversion_energy}.get(key) or ADVICE.get(key)
    if fn is None and key.startswith("metadata."):
        return "Correct the file's metadata as the spec asks (see the appendix), then check again."
    text = fn(f, m, result) if fn is not None else None
    return text or _generic(f)
