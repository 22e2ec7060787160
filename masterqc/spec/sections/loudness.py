"""``loudness:`` -- programme loudness (ITU-R BS.1770) and loudness range (EBU Tech 3342)::

    loudness:
      integrated: {target_lufs: -23.0, tolerance_lu: 0.5}   # or {min_lufs: .., max_lufs: ..}
      range: {max_lu: 20.0, severity: warn}
      max_momentary: {max_lufs: -10.0}
      max_short_term: {max_lufs: -18.0}
"""

from __future__ import annotations

from pydantic import Field

from masterqc.spec.types import SpecModel, bounds, ceiling, target


class Section(SpecModel):
    """Loudness requirements (``integrated_lufs``, ``loudness_range_lu``, ``max_*_lufs``)."""

    integrated: target("lufs") | None = Field(
        None, description="integrated (programme) loudness: target_lufs with tolerance_lu, or min_lufs/max_lufs")
    range: bounds("lu") | None = Field(None, description="loudness range, LU: min_lu and/or max_lu")
    max_momentary: ceiling("lufs") | None = Field(None, description="highest momentary (400 ms) loudness, LUFS")
    max_short_term: ceiling("lufs") | None = Field(None, description="highest short-term (3 s) loudness, LUFS")
