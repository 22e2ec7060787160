"""Judge of the ``format:`` section against ``result["format"]``."""

from __future__ import annotations

from masterqc.judge.core import Finding, check_allowed

#: spec key -> (check id, what, result["format"] key, how values are shown)
_CHECKS = [
    ("containers", "format.container", "container", "container", str),
    ("encodings", "format.encoding", "encoding", "encoding", str),
    ("sample_rates_hz", "format.sample_rate", "sample rate", "sample_rate_hz", lambda v: f"{v} Hz"),
    ("bit_depths", "format.bit_depth", "bit depth", "bit_depth", lambda v: f"{v}-bit"),
    ("channel_counts", "format.channels", "channel count", "channels", str),
    ("channel_layouts", "format.channel_layout", "channel layout", "channel_layout",
     lambda v: "[" + ", ".join(v) + "]"),
]


def judge(section, result: dict) -> list[Finding]:
    fmt = result.get("format") or {}
    out = []
    for key, check, what, rkey, show in _CHECKS:
        req = getattr(section, key)
        if req is None:
            continue
        value = fmt.get(rkey)
        if rkey == "channel_layout" and value is not None:
            value = list(value)
            if fmt.get("channel_layout_source") == "unknown":
                out.append(check_allowed(check, what, None, req, show=show,
                                         missing_reason="the file does not say which channel is which "
                                                        "(no channel mask, no usual order for this count)"))
                continue
        out.append(check_allowed(check, what, value, req, show=show))
    return out
