"""``metadata:`` -- container structure, BWF bext, ISRC and timecode requirements::

    metadata:
      timecode_fps: "25"                 # 23.976, 24, 25, 29.97df, 29.97ndf, 30
      chunk_problems: {severity: fail}   # malformed chunks, each a finding with its byte offset
      bext:
        required: true
        fields_required: [originator, origination_date, origination_time]
      bext_loudness:                     # EBU Tech 3285 v2 fields against what the file measures
        tolerance_lu: 0.5
        true_peak_tolerance_db: 0.3
        required: true
      isrc: {required: true}             # ISO 3901 syntax is always checked; codes must agree
      time_reference:
        required: true
        start_timecode: "10:00:00:00"

The section always exists: a spec that leaves it out still reports malformed
chunks as warnings (``chunk_problems`` defaults to ``{severity: warn}``; set it
to null to silence them) and shows located findings at 25 fps.
"""

from __future__ import annotations

from typing import Any, Literal

from pydantic import Field, field_validator, model_validator

from masterqc import timecode as _tc
from masterqc.contract import NO_UNIT, Check
from masterqc.spec.types import Severity, SpecModel

ALWAYS = True

_BEXT_LOUDNESS_NULL = "no bext chunk, a bext version below 2, or the field not filled in (0x7FFF)"

#: the section's checks, judged by masterqc.judge.metadata (each needs more than one field);
#: ``check`` ending in ``*`` covers a family of findings
CHECKS = (
    Check("chunk_problems", "metadata.chunk_problems", "metadata.problems", NO_UNIT,
          "malformed chunks (one finding per problem, at its byte offset)",
          "never null: an empty list means no malformed chunk", kind="section"),
    Check("bext", "metadata.bext", "metadata.bext", NO_UNIT, "bext chunk and its fields",
          "the file has no bext chunk", kind="section"),
    Check("bext_loudness", "metadata.bext_loudness.loudness_value", "integrated_lufs", "lufs",
          "bext LoudnessValue against the measured integrated loudness", _BEXT_LOUDNESS_NULL, kind="section"),
    Check("bext_loudness", "metadata.bext_loudness.loudness_range", "loudness_range_lu", "lu",
          "bext LoudnessRange against the measured loudness range", _BEXT_LOUDNESS_NULL, kind="section"),
    Check("bext_loudness", "metadata.bext_loudness.max_true_peak_level", "true_peak_dbtp", "dbtp",
          "bext MaxTruePeakLevel against the measured true peak", _BEXT_LOUDNESS_NULL, kind="section"),
    Check("bext_loudness", "metadata.bext_loudness.max_momentary_loudness", "max_momentary_lufs", "lufs",
          "bext MaxMomentaryLoudness against the measured max momentary loudness", _BEXT_LOUDNESS_NULL,
          kind="section"),
    Check("bext_loudness", "metadata.bext_loudness.max_short_term_loudness", "max_short_term_lufs", "lufs",
          "bext MaxShortTermLoudness against the measured max short-term loudness", _BEXT_LOUDNESS_NULL,
          kind="section"),
    Check("isrc", "metadata.isrc", "metadata.isrc", NO_UNIT, "ISRC presence, ISO 3901 syntax and agreement",
          "an empty list: no ISRC in any place that can carry one", kind="section"),
    Check("time_reference", "metadata.time_reference", "metadata.time_reference_samples", "samples",
          "start time (samples since midnight, shown as timecode)",
          "the file declares no time reference (no bext TimeReference, no iXML timestamp)", kind="section"),
    Check("timecode_fps_matches_file", "metadata.timecode_fps", "metadata.declared_timecode_fps", NO_UNIT,
          "timecode rate the file declares", "the file declares none (no iXML TIMECODE_RATE)", kind="section"),
)

#: keys that set how findings are shown, not requirements
SETTINGS = ("timecode_fps",)

FrameRateName = Literal["23.976", "24", "25", "29.97df", "29.97ndf", "30"]
BextField = Literal["description", "originator", "originator_reference", "origination_date",
                    "origination_time", "time_reference_samples", "umid", "coding_history"]


class ChunkProblems(SpecModel):
    """How malformed chunks are judged: one finding per problem, with its byte offset."""

    severity: Severity = Field("fail", description="'fail' (default) or 'warn' for each malformed chunk")


class BextRule(SpecModel):
    """Presence of the BWF bext chunk (EBU Tech 3285) and of chosen fields in it."""

    required: bool = Field(True, description="the file must carry a bext chunk")
    fields_required: list[BextField] = Field(
        default_factory=list, description="bext fields that must be non-empty, e.g. [originator, origination_date]")
    min_version: Literal[0, 1, 2] | None = Field(None, description="lowest acceptable bext version")
    severity: Severity = Field("fail", description="'fail' (default) or 'warn'")


class BextLoudnessRule(SpecModel):
    """bext version 2 loudness fields compared with the measured values."""

    tolerance_lu: float = Field(
        0.5, ge=0.0, description="largest allowed difference, LU, for loudness value, range, "
                                 "max momentary and max short-term")
    true_peak_tolerance_db: float = Field(
        0.3, ge=0.0, description="largest allowed difference, dB, for the max true-peak level")
    required: bool = Field(
        False, description="the five loudness fields must be filled in (version 2, not 0x7FFF); "
                           "when false a missing field is skipped")
    severity: Severity = Field("fail", description="'fail' (default) or 'warn'")


class IsrcRule(SpecModel):
    """ISRC (ISO 3901) presence, syntax and agreement between the places that carry it."""

    required: bool = Field(True, description="an ISRC must be present in bext text, LIST/INFO, id3, "
                                             "Vorbis comments, the FLAC cue sheet or iXML")
    consistent: bool = Field(True, description="every ISRC found in the file must be the same code")
    severity: Severity = Field("fail", description="'fail' (default) or 'warn'")


class TimeReferenceRule(SpecModel):
    """The start time (bext TimeReference, else the iXML timestamp)."""

    required: bool = Field(True, description="the file must declare a time reference")
    start_timecode: str | None = Field(
        None, description="the timecode the first sample must carry at timecode_fps, e.g. '10:00:00:00'")
    severity: Severity = Field("fail", description="'fail' (default) or 'warn'")

    @field_validator("start_timecode")
    @classmethod
    def _tc_shape(cls, v):
        if v is not None:
            _tc.timecode_to_frames(v, "30")  # shape check only; the rate is checked by the section
        return v


class Section(SpecModel):
    """Container and metadata requirements (compared with ``result["metadata"]``)."""

    timecode_fps: FrameRateName | None = Field(
        None, description="timecode rate for the start timecode and located findings "
                          "(23.976, 24, 25, 29.97df, 29.97ndf, 30; default 25)")
    chunk_problems: ChunkProblems | None = Field(
        default_factory=lambda: ChunkProblems(severity="warn"),
        description="judge malformed chunks (default: each one a warning); null: do not report them")
    bext: BextRule | None = Field(None, description="bext chunk presence and fields")
    bext_loudness: BextLoudnessRule | None = Field(
        None, description="bext v2 loudness fields against the measured loudness and true peak")
    isrc: IsrcRule | None = Field(None, description="ISRC presence, ISO 3901 syntax and agreement")
    time_reference: TimeReferenceRule | None = Field(None, description="declared start time")
    timecode_fps_matches_file: bool = Field(
        False, description="warn when the file's iXML declares a timecode rate other than timecode_fps")

    @field_validator("timecode_fps", mode="before")
    @classmethod
    def _rate_from_number(cls, v: Any):
        # YAML reads 25 and 23.976 as numbers; take them as the rate names they spell
        if isinstance(v, bool):
            return v
        if isinstance(v, (int, float)):
            if abs(float(v) - 29.97) < 1e-9:
                raise ValueError("29.97 is ambiguous: write \"29.97df\" (drop frame) or \"29.97ndf\"")
            text = f"{v:g}"
            if text in _tc.FRAME_RATES:
                return text
        return v

    @model_validator(mode="after")
    def _start_tc_fits_rate(self):
        tr = self.time_reference
        if tr is not None and tr.start_timecode is not None:
            try:
                _tc.timecode_to_frames(tr.start_timecode, self.timecode_fps or _tc.DEFAULT_FPS)
            except ValueError as exc:
                raise ValueError(f"time_reference.start_timecode: {exc}") from None
        return self


def measure_options(section: Section) -> dict:
    """The timecode rate, when the spec names one."""
    if section.timecode_fps is not None:
        return {"timecode_fps": section.timecode_fps}
    return {}
