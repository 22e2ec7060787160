"""``duration:`` -- length of the programme::

    duration:
      total: {min_s: 29.5, max_s: 30.5}
"""

from __future__ import annotations

from pydantic import Field

from masterqc.contract import Check
from masterqc.spec.types import SpecModel, bounds

#: the numeric checks of this section (judged by masterqc.judge.core.judge_checks)
CHECKS = (
    Check("total", "duration.total", "format.duration_s", "s", "duration",
          "the measurement does not exist for this file"),
)


class Section(SpecModel):
    """Duration requirements (``format.duration_s``)."""

    total: bounds("s") | None = Field(None, description="file duration, s: min_s and/or max_s")
