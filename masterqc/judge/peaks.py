"""Judge of the ``peaks:`` section against the true-peak and sample-peak measurements."""

from __future__ import annotations

from masterqc.judge.core import Finding, check_limits

_SILENT = "the file is digital silence (no peak level exists)"


def judge(section, result: dict) -> list[Finding]:
    m = result.get("measurements") or {}
    out = []
    if section.true_peak is not None:
        where = m.get("true_peak_over_ranges_s") or []
        why = _SILENT if "true_peak_dbtp" in m else "the measurement true_peak_dbtp is missing from the result"
        out.append(check_limits("peaks.true_peak", "true peak", m.get("true_peak_dbtp"), section.true_peak,
                                where_s=where, missing_reason=why))
    if section.sample_peak is not None:
        why = _SILENT if "sample_peak_dbfs" in m else "the measurement sample_peak_dbfs is missing from the result"
        out.append(check_limits("peaks.sample_peak", "sample peak", m.get("sample_peak_dbfs"),
                                section.sample_peak, missing_reason=why))
    return out
