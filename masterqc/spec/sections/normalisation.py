"""``normalisation:`` -- what a player or playout turning the master to a target would do.

Always present: the headroom figures (gain to the target, true peak after that
gain, limiting needed to stay under the ceiling) are computed for every
checked file whenever a target is known.  Keys (all optional)::

    normalisation:
      target_lufs: -14.0     # default: loudness.integrated target (or middle of its min/max)
      ceiling_dbtp: -1.0     # default: peaks.true_peak.max_dbtp
      limiting: {max_db: 1.0, severity: warn}   # requirement on the limiting needed
"""

from __future__ import annotations

from pydantic import Field, PrivateAttr

from masterqc.contract import Check
from masterqc.spec.types import SpecModel, ceiling

ALWAYS = True

#: the section's check, judged by masterqc.judge.normalisation (its message adds the gain and peaks)
CHECKS = (
    Check("limiting", "normalisation.limiting", "normalisation.limiting_needed_db", "db",
          "limiting needed to reach the target",
          "no loudness target, no true-peak ceiling, or no integrated loudness or true peak for this file "
          "(normalisation.note says which)", kind="section"),
)

#: keys that set what the figures are computed against, not requirements
SETTINGS = ("target_lufs", "ceiling_dbtp")


class Section(SpecModel):
    """Normalisation target and the optional limiting requirement."""

    target_lufs: float | None = Field(
        None, description="loudness a player normalises to, LUFS (default: the loudness.integrated target)")
    ceiling_dbtp: float | None = Field(
        None, description="true-peak ceiling after normalisation, dBTP (default: peaks.true_peak.max_dbtp)")
    limiting: ceiling("db") | None = Field(
        None, description="most peak limiting, dB, that reaching the target may need")
    # where target and ceiling came from (set by resolve, never written in a spec)
    _target_source: str | None = PrivateAttr(None)
    _ceiling_source: str | None = PrivateAttr(None)

    @property
    def target_source(self) -> str | None:
        """Spec key the target came from, or None when no target is known."""
        return self._target_source

    @property
    def ceiling_source(self) -> str | None:
        """Spec key the ceiling came from, or None when no ceiling is known."""
        return self._ceiling_source


def resolve(section: Section, spec) -> Section:
    """Fill target and ceiling from the loudness and peaks sections when not given."""
    upd, src = {}, {"target": None, "ceiling": None}
    if section.target_lufs is not None:
        src["target"] = "normalisation.target_lufs"
    else:
        loud = getattr(spec, "loudness", None)
        integ = loud.integrated if loud is not None else None
        if integ is not None and integ.target_value is not None:
            upd["target_lufs"] = integ.target_value
            src["target"] = "loudness.integrated"
    if section.ceiling_dbtp is not None:
        src["ceiling"] = "normalisation.ceiling_dbtp"
    else:
        peaks = getattr(spec, "peaks", None)
        tp = peaks.true_peak if peaks is not None else None
        if tp is not None:
            upd["ceiling_dbtp"] = tp.max_dbtp
            src["ceiling"] = "peaks.true_peak"
    out = section.model_copy(update=upd)
    out._target_source = src["target"]
    out._ceiling_source = src["ceiling"]
    return out
