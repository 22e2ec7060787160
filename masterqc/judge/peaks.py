"""Judge of the ``peaks:`` section against the true-peak and sample-peak measurements (checks declared by the section)."""

from __future__ import annotations

from masterqc.judge.core import Finding, judge_checks
from masterqc.spec.sections.peaks import CHECKS


def judge(section, result: dict) -> list[Finding]:
    return judge_checks(section, result, CHECKS)
