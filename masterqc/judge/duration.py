"""Judge of the ``duration:`` section against ``result["format"]["duration_s"]``."""

from __future__ import annotations

from masterqc.judge.core import Finding, check_limits


def judge(section, result: dict) -> list[Finding]:
    out = []
    if section.total is not None:
        value = (result.get("format") or {}).get("duration_s")
        out.append(check_limits("duration.total", "duration", value, section.total))
    return out
