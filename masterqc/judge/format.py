"""Judge of the ``format:`` section against ``result["format"]``."""

from __future__ import annotations

from masterqc.judge.core import Finding, check_allowed

#: spec key -> (check id, what, result["format"] key, how values are shown, unit)
_CHECKS = [
    ("containers", "format.container", "container", "container", str, None),
    ("encodings", "format.encoding", "encoding", "encoding", str, None),
    ("sample_rates_hz", "format.sample_rate", "sample rate", "sample_rate_hz", lambda v: f"{v} Hz", "Hz"),
    ("bit_depths", "format.bit_depth", "bit depth", "bit_depth", lambda v: f"{v}-bit", "bits"),
    ("channel_counts", "format.channels", "channel count", "channels", str, None),
    ("channel_layouts", "format.channel_layout", "channel layout", "channel_layout",
     lambda v: " ".join(v), None),
]


def judge(section, result: dict) -> list[Finding]:
    fmt = result.get("format") or {}
    out = []
    for key, check, what, rkey, show, unit in _CHECKS:
        req = getattr(section, key)
        if req is None:
            continue
        value = fmt.get(rkey)
        if rkey == "channel_layout" and value is not None:
            value = list(value)
            if fmt.get("channel_layout_source") == "unknown":
                out.append(check_allowed(check, what, None, req, show=show, unit=unit,
                                         missing_reason="the file does not say which channel is which "
                                                        "(no channel mask, no usual order for this count)"))
                continue
        out.append(check_allowed(check, what, value, req, show=show, unit=unit))
    return out
