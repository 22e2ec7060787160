"""Normalisation headroom: what turning the master to the target would do, and its judge.

:func:`headroom` is always computed (the pipeline stores it as
``result["normalisation"]``); the ``normalisation.limiting`` requirement, when
given, judges the limiting it needs.

Figures (all dB-valued keys name their unit):

``gain_db``                    target_lufs - integrated_lufs (negative: turned down)
``true_peak_after_gain_dbtp``  true_peak_dbtp + gain_db
``limiting_needed_db``         max(0, true_peak_after_gain_dbtp - ceiling_dbtp): the peak
                               reduction a limiter would have to apply to keep the
                               normalised master under the ceiling
"""

from __future__ import annotations

from masterqc.judge.core import Finding, add_detail, check_limits, skipped


def headroom(measurements: dict, target_lufs: float | None, ceiling_dbtp: float | None,
             target_source: str | None = None, ceiling_source: str | None = None) -> dict:
    """The normalisation figures for one file (pure; None where a figure cannot exist).

    ``note`` says why figures are None.
    """
    integ = measurements.get("integrated_lufs")
    tp = measurements.get("true_peak_dbtp")
    out = {"target_lufs": target_lufs, "target_source": target_source,
           "ceiling_dbtp": ceiling_dbtp, "ceiling_source": ceiling_source,
           "gain_db": None, "true_peak_after_gain_dbtp": None, "limiting_needed_db": None, "note": None}
    if target_lufs is None:
        out["note"] = "no loudness target in the spec (set normalisation.target_lufs or loudness.integrated)"
        return out
    if integ is None:
        out["note"] = "integrated loudness does not exist for this file (silent or below the gate)"
        return out
    gain = round(target_lufs - integ, 9)  # 1e-9 dB: drop float noise such as 8.9e-16
    out["gain_db"] = gain
    if tp is None:
        out["note"] = "true peak was not measured"
        return out
    after = round(tp + gain, 9)
    out["true_peak_after_gain_dbtp"] = after
    if ceiling_dbtp is None:
        out["note"] = "no true-peak ceiling in the spec (set normalisation.ceiling_dbtp or peaks.true_peak)"
        return out
    out["limiting_needed_db"] = max(0.0, round(after - ceiling_dbtp, 9))
    return out


def figures_for(section, result: dict) -> dict:
    """:func:`headroom` from a resolved ``normalisation`` section and a measure result."""
    return headroom(result.get("measurements") or {}, section.target_lufs, section.ceiling_dbtp,
                    section.target_source, section.ceiling_source)


def judge(section, result: dict) -> list[Finding]:
    if section.limiting is None:
        return []
    fig = result.get("normalisation") or figures_for(section, result)
    if fig["limiting_needed_db"] is None:
        return [skipped("normalisation.limiting", f"limiting needed to reach the target: not judged; {fig['note']}",
                        severity=section.limiting.severity)]
    f = check_limits("normalisation.limiting", "limiting needed to reach the target",
                     fig["limiting_needed_db"], section.limiting)
    gain = fig["gain_db"]
    change = "no gain change" if round(gain, 1) == 0 else \
        f"{'raising' if gain > 0 else 'lowering'} the gain by {abs(gain):.1f} dB"
    add_detail(f, f". Turned to {fig['target_lufs']:.1f} LUFS ({change}), the true peak would be at "
                  f"{fig['true_peak_after_gain_dbtp']:.1f} dBTP against a ceiling of {fig['ceiling_dbtp']:.1f} dBTP")
    return [f]
