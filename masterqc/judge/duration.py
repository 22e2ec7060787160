"""Judge of the ``duration:`` section against ``result["format"]["duration_s"]`` (checks declared by the section)."""

from __future__ import annotations

from masterqc.judge.core import Finding, judge_checks
from masterqc.spec.sections.duration import CHECKS


def judge(section, result: dict) -> list[Finding]:
    return judge_checks(section, result, CHECKS)
