"""``duration:`` -- length of the programme::

    duration:
      total: {min_s: 29.5, max_s: 30.5}
"""

from __future__ import annotations

from pydantic import Field

from masterqc.spec.types import SpecModel, bounds


class Section(SpecModel):
    """Duration requirements (``format.duration_s``)."""

    total: bounds("s") | None = Field(None, description="file duration, s: min_s and/or max_s")
