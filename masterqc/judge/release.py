"""Judge of the ``release:`` section against a release result.

Registered without a per-file judge in :data:`masterqc.registry.SECTIONS`: those judge one file's
result, while this judges the figures of a whole release
(:func:`masterqc.batch.releases.release_measurements`), once per release.
``release`` is the ``measurements`` dict of a release result:

``pooled_integrated_lufs``     all tracks' gating blocks gated together (None: nothing above -70 LUFS)
``track_loudness_spread_lu``   loudest minus quietest track (None: fewer than one measured track)
``sample_rates_hz``, ``bit_depths``, ``channel_counts``  the distinct values found
``track_count``                files in the release; ``unreadable_count`` of them could not be read
"""

from __future__ import annotations

from masterqc.judge.core import WARN_NOTE, Finding, check_limits, sentence


def _consistency(check: str, what: str, values: list, severity: str, show) -> Finding:
    if not values:
        return Finding(check=check, status="skipped", message=sentence(f"{what}: not judged; no file of the release could be read"),
                       limit="one value", severity=severity)
    text = ", ".join(show(v) for v in values)
    if len(values) == 1:
        return Finding(check=check, status="pass", message=sentence(f"every file has the {what} {text}"),
                       measured=text, measured_text=text, limit="one value", severity=severity)
    status = "fail" if severity == "fail" else "warn"
    note = "" if severity == "fail" else WARN_NOTE
    return Finding(check=check, status=status, measured=text, measured_text=text, limit="one value",
                   severity=severity, message=sentence(f"the release mixes {what}s: {text}{note}"))


def judge(section, release: dict) -> list[Finding]:
    """Findings of one release (``release`` as described in the module docstring)."""
    out: list[Finding] = []
    m = release
    if m.get("unreadable_count"):
        out.append(Finding(check="release.files", status="error",
                           message=sentence(f"{m['unreadable_count']} of {m['track_count']} files could not be read; "
                                            "the release figures cover the others only")))
    if section.track_count is not None:
        out.append(check_limits("release.track_count", "track count", m.get("track_count"), section.track_count))
    if section.pooled_loudness is not None:
        out.append(check_limits("release.pooled_loudness", "pooled integrated loudness",
                                m.get("pooled_integrated_lufs"), section.pooled_loudness,
                                missing_reason="no gating block of any track is above the -70 LUFS absolute gate"))
    if section.track_loudness_spread is not None:
        out.append(check_limits("release.track_loudness_spread", "track loudness spread",
                                m.get("track_loudness_spread_lu"), section.track_loudness_spread,
                                missing_reason="no track has an integrated loudness"))
    c = section.consistent_format
    if c is not None:
        if c.sample_rate:
            out.append(_consistency("release.sample_rate", "sample rate", m.get("sample_rates_hz") or [],
                                    c.severity, lambda v: f"{v} Hz"))
        if c.bit_depth:
            out.append(_consistency("release.bit_depth", "sample format", m.get("sample_formats") or [],
                                    c.severity, str))
        if c.channels:
            out.append(_consistency("release.channels", "channel count", m.get("channel_counts") or [],
                                    c.severity, str))
    return out
