"""``peaks:`` -- true-peak (ITU-R BS.1770 Annex 2) and sample-peak ceilings::

    peaks:
      true_peak: {max_dbtp: -1.0, warn_margin_db: 0.3}
      sample_peak: {max_dbfs: -0.1}
      true_peak_oversampling: 4

The true-peak ceiling also sets the level above which the times of overs are
reported (``MeasureOptions.true_peak_ceiling_dbtp``).
"""

from __future__ import annotations

from typing import Literal

from pydantic import Field

from masterqc.contract import Check
from masterqc.spec.types import SpecModel, ceiling

_SILENT = "the file is digital silence (no peak level exists)"

#: the numeric checks of this section (judged by masterqc.judge.core.judge_checks)
CHECKS = (
    Check("true_peak", "peaks.true_peak", "true_peak_dbtp", "dbtp", "true peak", _SILENT,
          where="true_peak_over_ranges_s"),
    Check("sample_peak", "peaks.sample_peak", "sample_peak_dbfs", "dbfs", "sample peak", _SILENT),
)

#: keys that set how a measurement is made, not requirements
SETTINGS = ("true_peak_oversampling",)


class Section(SpecModel):
    """Peak requirements (``true_peak_dbtp``, ``sample_peak_dbfs``)."""

    true_peak: ceiling("dbtp") | None = Field(None, description="true-peak ceiling, dBTP")
    sample_peak: ceiling("dbfs") | None = Field(None, description="sample-peak ceiling, dBFS")
    true_peak_oversampling: Literal[4, 8, 16] | None = Field(
        None, description="true-peak oversampling factor (4 is the least BS.1770 Annex 2 allows at 48 kHz)")


def measure_options(section: Section) -> dict:
    """The ceiling for over times and the oversampling factor, when given."""
    out = {}
    if section.true_peak is not None:
        out["true_peak_ceiling_dbtp"] = section.true_peak.max_dbtp
    if section.true_peak_oversampling is not None:
        out["true_peak_oversampling"] = section.true_peak_oversampling
    return out
