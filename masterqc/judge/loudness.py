"""Judge of the ``loudness:`` section against the loudness measurements (checks declared by the section)."""

from __future__ import annotations

from masterqc.contract import SHORT_PROGRAMME_S
from masterqc.judge.core import Finding, add_detail, judge_checks
from masterqc.spec.sections.loudness import CHECKS


def judge(section, result: dict) -> list[Finding]:
    out = judge_checks(section, result, CHECKS)
    duration = (result.get("format") or {}).get("duration_s")
    for f in out:
        if f.check == "loudness.range" and f.status != "skipped" and duration is not None \
                and duration < SHORT_PROGRAMME_S:
            add_detail(f, ". Loudness range means little for a programme under one minute (EBU R 128 does not "
                          "recommend it there)")
    return out
