"""Judge of the ``integrity:`` section against the sample-level measurements.

Times in findings are seconds from the file start (``where_s``); the report
shows them as timecode.  Non-finite samples give an ``error`` finding with
the first positions whatever else the spec asks.
"""

from __future__ import annotations

from masterqc.judge.core import (Finding, add_detail, check_allowed, check_limits, judge_checks, limit_text,
                                 limit_words, sentence, skipped)
from masterqc.spec.sections.integrity import CHECKS

_DECLARED = {c.spec_key: c for c in CHECKS}


def _declared(section, result: dict, key: str) -> list[Finding]:
    """The finding of the section's declared check ``key`` (empty when the spec does not set it)."""
    return judge_checks(section, result, [_DECLARED[key]])

_MISSING = "the measurement {key} is missing from the result"


def _per_channel(result: dict, values) -> str:
    """``"; per channel: L 2, R 0"`` for per-channel values, or ``""``."""
    labels = (result.get("format") or {}).get("channel_layout") or []
    if not values or len(values) != len(labels):
        return ""
    return "; per channel: " + ", ".join(f"{lab} {v}" for lab, v in zip(labels, values))


_add_detail = add_detail


_KINDS = {"silence": "digital silence", "frozen": "a frozen sample value"}


def _why(m: dict, key: str, reason: str) -> str:
    return reason if key in m else _MISSING.format(key=key)


def _nonfinite(section, result: dict, m: dict) -> list[Finding]:
    count = m.get("nonfinite_sample_count")
    if count is None:
        if "nonfinite_samples" in section.model_fields_set:
            return [skipped("integrity.nonfinite_samples", "non-finite samples: not judged; "
                            + _MISSING.format(key="nonfinite_sample_count"))]
        return []
    if count == 0:
        if "nonfinite_samples" in section.model_fields_set:
            return [Finding(check="integrity.nonfinite_samples", status="pass", measured=0, measured_raw=0,
                            limit="none", measured_text="0",
                            message="No non-finite samples (NaN or infinite values).")]
        return []
    first = m.get("nonfinite_first_positions") or []
    shown = ", ".join(f"{p['kind']} in {p['channel']} at frame {p['frame']} ({p['time_s']:.6f} s)"
                      for p in first[:5])
    more = f" and {count - min(len(first), 5)} more" if count > min(len(first), 5) else ""
    return [Finding(check="integrity.nonfinite_samples", status="error", measured=count, measured_raw=count,
                    limit="none", measured_text=str(count),
                    where_s=[list(w) for w in (m.get("nonfinite_where_s") or [])],
                    message=sentence(
                        f"{count} non-finite sample{'' if count == 1 else 's'} (NaN {m.get('nan_sample_count', '?')}, "
                        f"infinite {m.get('inf_sample_count', '?')})"
                        f"{_per_channel(result, m.get('nonfinite_sample_count_per_channel'))}"
                        f"; first {shown}{more}; they were read as 0.0 for every other measurement"))]


def _dc(section, m: dict) -> Finding:
    value = m.get("dc_offset_dbfs")
    per = m.get("dc_offset_dbfs_per_channel")
    if value is None and per is not None and all(v is None for v in per):
        # every channel has a mean of exactly zero: no DC at all, which meets any ceiling
        return Finding(check="integrity.dc_offset", status="pass", severity=section.dc_offset.severity,
                       limit=limit_text(section.dc_offset), unit="dBFS",
                       message=f"No DC offset: every channel's mean is exactly zero "
                               f"(limit: {limit_words(section.dc_offset)}).")
    return check_limits("integrity.dc_offset", "DC offset (worst channel)", value, section.dc_offset,
                        missing_reason=_MISSING.format(key="dc_offset_dbfs"))


def _worst_balance(m: dict):
    pairs = m.get("channel_pairs") or []
    values = m.get("level_balance_lu_per_pair") or []
    best = None
    for pair, v in zip(pairs, values):
        if v is not None and (best is None or abs(v) > abs(best[1])):
            best = ("/".join(pair), v)
    return best


def _lowest_depth(result: dict, m: dict):
    per = m.get("effective_bit_depth_bits_per_channel") or []
    labels = (result.get("format") or {}).get("channel_layout") or [f"ch{i + 1}" for i in range(len(per))]
    known = [(v, lab) for v, lab in zip(per, labels) if v is not None]
    return min(known) if known else None


def clock_text(seconds: float) -> str:
    """``h:mm:ss.sss``, e.g. 143.75 -> ``"0:02:23.750"``."""
    ms = int(round(max(0.0, seconds) * 1000))
    h, rest = divmod(ms, 3_600_000)
    m, rest = divmod(rest, 60_000)
    return f"{h}:{m:02d}:{rest // 1000:02d}.{rest % 1000:03d}"


def _truncation(section, result: dict) -> list[Finding]:
    """A file cut short: the container's data chunk declares more audio than the file holds."""
    data = (result.get("metadata") or {}).get("audio_data") or {}
    missing = data.get("missing_bytes")
    if not missing:
        return []
    missing_s = data.get("missing_s")
    held = data.get("size_bytes") or 0
    declared = data.get("declared_size_bytes") or (held + missing)
    dur = (result.get("format") or {}).get("duration_s")
    time = f"{clock_text(missing_s)} of audio" if missing_s is not None else "audio of unknown length"
    message = (f"The file is cut short: its header declares {declared:,} bytes of audio but the file holds "
               f"{held:,}, so the last {missing:,} bytes ({time}) are missing"
               + (f"; only the first {clock_text(dur)} can be checked" if dur is not None else ""))
    mode = section.truncated_audio
    status = {"fail": "fail", "warn": "warn", "allow": "pass"}[mode]
    if mode != "fail":
        message += f" (the spec's integrity.truncated_audio is {mode})"
    message = sentence(message)
    return [Finding(check="integrity.truncated_audio", status=status, severity=mode if mode != "allow" else None,
                    measured=missing_s, measured_raw=missing, unit="s", limit="nothing missing",
                    measured_text=f"{clock_text(missing_s)} missing ({missing:,} bytes)" if missing_s is not None
                    else f"{missing:,} bytes missing",
                    where_s=[[dur, dur + missing_s]] if dur is not None and missing_s is not None else [],
                    message=message)]


def judge(section, result: dict) -> list[Finding]:
    m = result.get("measurements") or {}
    out: list[Finding] = []
    s = section
    out += _truncation(s, result)
    if s.nonfinite_samples:
        out += _nonfinite(s, result, m)
    for f in _declared(s, result, "clipped_runs"):
        if f.status in ("warn", "fail"):
            _add_detail(f, _per_channel(result, m.get("clipped_run_count_per_channel"))
                        + f"; the longest run is {m.get('clipped_run_longest_samples')} samples")
        out.append(f)
    out += _declared(s, result, "over_full_scale_samples")
    if s.dc_offset is not None:
        out.append(_dc(s, m))
    out += _declared(s, result, "subsonic_energy")
    for key, what, where in (("head_silence", "silence at the head", "head"),
                             ("tail_silence", "silence at the tail", "tail"),
                             ("head_digital_silence", "digital silence at the head", "head"),
                             ("tail_digital_silence", "digital silence at the tail", "tail")):
        req = getattr(s, key)
        if req is None:
            continue
        value = m.get(f"{key}_s")
        f = check_limits(f"integrity.{key}", what, value, req, missing_reason=_MISSING.format(key=f"{key}_s"))
        if f.status in ("warn", "fail") and value is not None:
            dur = (result.get("format") or {}).get("duration_s")
            if where == "head":
                f.where_s = [[0.0, float(value)]] if value > 0 else []
            elif dur is not None and value > 0:
                f.where_s = [[float(dur) - float(value), float(dur)]]
        out.append(f)
    for f in _declared(s, result, "dropouts"):
        if f.status in ("warn", "fail"):
            events = m.get("dropout_events") or []
            kinds = sorted({e.get("kind") for e in events} & set(_KINDS))
            _add_detail(f, _per_channel(result, m.get("dropout_count_per_channel"))
                        + ("; found: " + " and ".join(_KINDS[k] for k in kinds) if kinds else ""))
        out.append(f)
    if s.effective_bit_depth is not None:
        low = _lowest_depth(result, m)
        what = f"effective bit depth (lowest channel, {low[1]})" if low else "effective bit depth"
        reason = _why(m, "effective_bit_depth_bits_per_channel", "every channel is digital silence")
        out.append(check_limits("integrity.effective_bit_depth", what, low[0] if low else None,
                                s.effective_bit_depth, missing_reason=reason))
    mono = ((result.get("format") or {}).get("channels") or 0) < 2
    mono_reason = "the file has one channel" if mono else "the channels are digital silence"
    if s.dual_mono is not None:
        out.append(check_allowed("integrity.dual_mono", "dual mono",
                                 m.get("dual_mono"), s.dual_mono, show=lambda v: str(v).lower(),
                                 missing_reason=_why(m, "dual_mono", mono_reason),
                                 says=("Dual mono: the first two channels are identical",
                                       "Dual mono: the first two channels differ")))
    if s.inverted_polarity is not None:
        pairs = m.get("inverted_polarity_pairs") or []
        which = (" (" + ", ".join("/".join(p) for p in pairs) + ")") if pairs else ""
        f = check_allowed("integrity.inverted_polarity", "polarity",
                          m.get("inverted_polarity"), s.inverted_polarity, show=lambda v: str(v).lower(),
                          missing_reason=_why(m, "inverted_polarity", mono_reason),
                          says=(f"Polarity: the channels{which} are inverted",
                                "Polarity: the channels are not inverted"))
        out.append(f)
    out += _declared(s, result, "phase_correlation")
    out += _declared(s, result, "phase_correlation_below")
    if s.level_balance is not None:
        worst = _worst_balance(m)
        what = f"level difference {worst[0]}" if worst else "level difference between the channels"
        f = check_limits("integrity.level_balance", what, abs(worst[1]) if worst else None, s.level_balance,
                         missing_reason=_why(m, "level_balance_lu_per_pair",
                                             "no channel pair with signal in both channels"))
        if worst and f.status in ("warn", "fail"):
            side = worst[0].split("/")[0 if worst[1] > 0 else 1]
            _add_detail(f, f"; {side} is the louder")
        out.append(f)
    return out
