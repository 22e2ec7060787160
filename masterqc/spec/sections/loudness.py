"""``loudness:`` -- programme loudness (ITU-R BS.1770) and loudness range (EBU Tech 3342)::

    loudness:
      integrated: {target_lufs: -23.0, tolerance_lu: 0.5}   # or {min_lufs: .., max_lufs: ..}
      range: {max_lu: 20.0, severity: warn}
      max_momentary: {max_lufs: -10.0}
      max_short_term: {max_lufs: -18.0}
"""

from __future__ import annotations

from pydantic import Field

from masterqc.contract import Check
from masterqc.spec.types import SpecModel, bounds, ceiling, target

_SILENT = "the programme has no gated loudness (digital silence or below the -70 LUFS gate)"

#: the numeric checks of this section (judged by masterqc.judge.core.judge_checks)
CHECKS = (
    Check("integrated", "loudness.integrated", "integrated_lufs", "lufs", "integrated loudness", _SILENT,
          below_gate_after_s=0.4),
    Check("range", "loudness.range", "loudness_range_lu", "lu", "loudness range",
          "too little gated short-term loudness to compute a range (programme shorter than 3 s or silent)"),
    Check("max_momentary", "loudness.max_momentary", "max_momentary_lufs", "lufs", "maximum momentary loudness",
          "the programme is shorter than one 400 ms block or silent", below_gate_after_s=0.4),
    Check("max_short_term", "loudness.max_short_term", "max_short_term_lufs", "lufs",
          "maximum short-term loudness", "the programme is shorter than one 3 s window or silent",
          below_gate_after_s=3.0),
)


class Section(SpecModel):
    """Loudness requirements (``integrated_lufs``, ``loudness_range_lu``, ``max_*_lufs``)."""

    integrated: target("lufs") | None = Field(
        None, description="integrated (programme) loudness: target_lufs with tolerance_lu, or min_lufs/max_lufs")
    range: bounds("lu") | None = Field(None, description="loudness range, LU: min_lu and/or max_lu")
    max_momentary: ceiling("lufs") | None = Field(None, description="highest momentary (400 ms) loudness, LUFS")
    max_short_term: ceiling("lufs") | None = Field(None, description="highest short-term (3 s) loudness, LUFS")
